"""Reading: the workbook file and any lanes file -> a validated Network."""
