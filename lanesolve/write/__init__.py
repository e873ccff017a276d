"""Writing: result sheets spliced into the workbook, the blank template, atomic replacement and locks."""
