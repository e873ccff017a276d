"""Write a worksheet's XML by hand into a workbook openpyxl made: for sheets with extreme extents (a cell at
XFD1048576) that no spreadsheet library would write cell by cell. The markup follows ECMA-376 Part 1, 18.3.1.99
``worksheet`` / 18.3.1.80 ``sheetData`` / 18.3.1.73 ``row`` / 18.3.1.4 ``c``.
"""

from __future__ import annotations

import posixpath
import re
import zipfile
from pathlib import Path

from _workbooks import rewrite_zip

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"


def sheet_part(path: Path, sheet_name: str) -> str:
    """The zip member holding ``sheet_name``'s XML, from xl/workbook.xml and its relationships."""
    with zipfile.ZipFile(path) as z:
        workbook = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
    rid = re.search(r'<sheet [^>]*name="%s"[^>]*r:id="([^"]+)"' % re.escape(sheet_name), workbook).group(1)
    target = re.search(r'<Relationship [^>]*Id="%s"[^>]*Target="([^"]+)"' % rid, rels)
    if target is None:
        target = re.search(r'<Relationship [^>]*Target="([^"]+)"[^>]*Id="%s"' % rid, rels)
    written = target.group(1)
    # Targets are relative to xl/, or absolute from the package root when they start with "/" (ECMA-376 Part 2).
    return written.lstrip("/") if written.startswith("/") else posixpath.normpath(posixpath.join("xl", written))


def cell(ref: str, value) -> str:
    """One cell: a number, or inline text."""
    if isinstance(value, str):
        return f'<c r="{ref}" t="inlineStr"><is><t>{value}</t></is></c>'
    return f'<c r="{ref}"><v>{value}</v></c>'


def write_sheet_xml(path: Path, sheet_name: str, cells: dict[str, object]) -> None:
    """Replace the sheet's cells by ``cells`` (reference -> value), rows in ascending order as the schema asks."""
    by_row: dict[int, list[tuple[str, object]]] = {}
    for ref, value in cells.items():
        by_row.setdefault(int(re.search(r"\d+", ref).group()), []).append((ref, value))
    rows = "".join(f'<row r="{r}">' + "".join(cell(ref, v) for ref, v in by_row[r]) + "</row>"
                   for r in sorted(by_row))
    xml = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?><worksheet xmlns="{MAIN_NS}">'
           f"<sheetData>{rows}</sheetData></worksheet>")
    rewrite_zip(path, {sheet_part(path, sheet_name): xml.encode()})
