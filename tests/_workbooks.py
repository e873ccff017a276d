"""Builders of rich test workbooks: styled input sheets, a chart, an image, defined names, a table, macros.

openpyxl writes the base workbook; the parts it cannot make without extra packages (an image without Pillow, a
macro part, the markup-compatibility attributes a spreadsheet program writes into ``xl/workbook.xml``, sheet
titles in ``docProps/app.xml``) are then added at the zip level, as text. The scenario (depots, customers, lanes)
is invented.
"""

from __future__ import annotations

import re
import struct
import zipfile
import zlib
from pathlib import Path

import openpyxl
from openpyxl.chart import BarChart, Reference
from openpyxl.styles import Font, PatternFill
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.table import Table, TableStyleInfo

MC_NS = "http://schemas.openxmlformats.org/markup-compatibility/2006"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
#: Parts write_results is allowed to edit; every other original member must keep its bytes.
INDEX_PARTS = {"xl/workbook.xml", "xl/_rels/workbook.xml.rels", "[Content_Types].xml", "docProps/app.xml"}
#: Every part the writer may change: the index parts, and styles.xml, which gains the result sheets' number formats
#: at its end (tests/test_writeback.py proves every existing style entry stays as it was).
EDITED_PARTS = INDEX_PARTS | {"xl/styles.xml"}
#: Stand-in bytes for a macro project: only its survival is tested, never its content.
FAKE_VBA = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"lanesolve test macro part, not a real project" * 4


def tiny_png() -> bytes:
    """A valid 2x2 RGB PNG built by hand (PNG specification: signature, IHDR, IDAT, IEND with CRC-32)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)

    raw = b"".join(b"\x00" + bytes([200, 30, 30, 30, 200, 30]) for _ in range(2))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 2, 2, 8, 2, 0, 0, 0))
            + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))


def rewrite_zip(path: Path, replace: dict[str, bytes] | None = None, add: dict[str, bytes] | None = None) -> None:
    """Rewrite a zip in place with some members replaced and some added (order kept, new ones last)."""
    replace, add = replace or {}, add or {}
    with zipfile.ZipFile(path) as zin:
        members = [(i, zin.read(i.filename)) for i in zin.infolist()]
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for info, data in members:
            zout.writestr(info.filename, replace.get(info.filename, data))
        for name, data in add.items():
            zout.writestr(name, data)


def base_workbook(path: Path, extra_sheets: tuple[str, ...] = (), result_sheet_at: int | None = None) -> None:
    """An openpyxl workbook: styled input sheets, a chart on Depots, a user table, global and local names.

    ``extra_sheets`` adds empty sheets (for names that resemble the result prefix); ``result_sheet_at`` inserts a
    stale ``"LS Old results"`` sheet at that position, with a print area local to it, as an earlier run of a
    different version might have left.
    """
    wb = openpyxl.Workbook()
    header_font, header_fill = Font(bold=True, color="FFFFFF"), PatternFill("solid", fgColor="335577")
    depots = wb.active
    depots.title = "Depots"
    sheets = {
        "Depots": [["depot", "supply", "handling_cost"], ["Northgate Yard", 120, 1.5], ["Riverbend Plant", 80, 0.75],
                   ["=SUM(A1)", 40, 0]],
        "Customers": [["customer", "demand", "unmet_penalty"], ["Alder Foods", 60, None],
                      ["Birch & Co <south>", 90, 25], ["Cedar Market", 50, None]],
        "Lanes": [["origin", "destination", "cost_per_unit", "mode", "capacity", "active"],
                  ["Northgate Yard", "Alder Foods", 4.25, "road", 100, "yes"],
                  ["Riverbend Plant", "Birch & Co <south>", 3.1, "rail", None, "yes"],
                  ["Northgate Yard", "Cedar Market", 5, "road", 60, "no"]],
        "Settings": [["setting", "value"], ["units", "pallets"], ["currency", "EUR"]],
    }
    for name, rows in sheets.items():
        ws = depots if name == "Depots" else wb.create_sheet(name)
        for row in rows:
            ws.append(row)
        for cell in ws[1]:
            cell.font, cell.fill = header_font, header_fill
        ws.column_dimensions["A"].width = 22
        ws.freeze_panes = "A2"
        for cell in ws["A"]:
            if isinstance(cell.value, str) and cell.value.startswith("="):
                cell.data_type = "s"  # a depot named like a formula is text, as a planner typed it
    for row in wb["Lanes"].iter_rows(min_row=2, min_col=3, max_col=3):
        row[0].number_format = "#,##0.00"
    chart = BarChart()
    chart.title = "Supply by depot"
    chart.add_data(Reference(depots, min_col=2, min_row=1, max_row=4), titles_from_data=True)
    chart.set_categories(Reference(depots, min_col=1, min_row=2, max_row=4))
    depots.add_chart(chart, "E2")
    table = Table(displayName="customer_table", ref="A1:C4")
    table.tableStyleInfo = TableStyleInfo(name="TableStyleLight9", showRowStripes=True)
    wb["Customers"].add_table(table)
    wb.defined_names["total_supply"] = DefinedName("total_supply", attr_text="Depots!$B$2:$B$4")
    wb["Lanes"].print_area = "A1:F4"
    for name in extra_sheets:
        wb.create_sheet(name)["A1"] = f"kept: {name}"
    if result_sheet_at is not None:
        old = wb.create_sheet("LS Old results", result_sheet_at)
        old.append(["item", "value"])
        old.append(["status", "stale"])
        old.print_area = "A1:B2"
    wb.save(path)


def add_image(path: Path) -> None:
    """Put a PNG picture into the Depots drawing (beside the chart), as a spreadsheet program would."""
    with zipfile.ZipFile(path) as z:
        drawing = z.read("xl/drawings/drawing1.xml").decode()
        rels = z.read("xl/drawings/_rels/drawing1.xml.rels").decode()
        types = z.read("[Content_Types].xml").decode()
    picture = (
        '<twoCellAnchor editAs="oneCell"><from><col>12</col><colOff>0</colOff><row>1</row><rowOff>0</rowOff></from>'
        '<to><col>13</col><colOff>0</colOff><row>3</row><rowOff>0</rowOff></to><pic><nvPicPr>'
        '<cNvPr id="3" name="Picture 3" descr="depot logo"/><cNvPicPr><a:picLocks noChangeAspect="1"/></cNvPicPr>'
        '</nvPicPr><blipFill><a:blip r:embed="rIdImg1"/><a:stretch><a:fillRect/></a:stretch></blipFill><spPr>'
        '<a:xfrm><a:off x="0" y="0"/><a:ext cx="381000" cy="381000"/></a:xfrm><a:prstGeom prst="rect"><a:avLst/>'
        '</a:prstGeom></spPr></pic><clientData/></twoCellAnchor>'
    )
    drawing = drawing.replace("</wsDr>", picture + "</wsDr>")
    rels = rels.replace("</Relationships>", '<Relationship Id="rIdImg1" Type="' + REL_NS
                        + '/image" Target="../media/image1.png"/></Relationships>')
    types = types.replace('<Default Extension="xml"',
                          '<Default Extension="png" ContentType="image/png"/><Default Extension="xml"')
    rewrite_zip(path, {"xl/drawings/drawing1.xml": drawing.encode(),
                       "xl/drawings/_rels/drawing1.xml.rels": rels.encode(), "[Content_Types].xml": types.encode()},
                {"xl/media/image1.png": tiny_png()})


def spreadsheet_program_style(path: Path, rel_prefix: str = "r") -> None:
    """Give xl/workbook.xml the declaration, markup-compatibility attributes and extra namespaces that
    spreadsheet programs write, optionally binding the relationships namespace to an unusual prefix; and give
    docProps/app.xml sheet titles grouped under headings."""
    with zipfile.ZipFile(path) as z:
        workbook = z.read("xl/workbook.xml").decode()
        sheet_names = re.findall(r'<sheet name="([^"]*)"', workbook)
        defined = re.findall(r'<definedName name="([^"]*)"', workbook)
    root = (f'<workbook xmlns="{MAIN_NS}" xmlns:{rel_prefix}="{REL_NS}" xmlns:mc="{MC_NS}" '
            'mc:Ignorable="x15 xr" xmlns:x15="http://schemas.microsoft.com/office/spreadsheetml/2010/11/main" '
            'xmlns:xr="http://schemas.microsoft.com/office/spreadsheetml/2014/revision">')
    workbook = re.sub(r"<workbook\b[^>]*>", root, workbook, count=1)
    workbook = workbook.replace(" r:id=", f" {rel_prefix}:id=")
    workbook = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n' + workbook
    print_areas = [n for n in defined if n == "_xlnm.Print_Area"]
    titles = sheet_names + ["'Lanes'!Print_Area"] * len(print_areas) + ["total_supply"]
    app = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<Properties xmlns="http://schemas.openxml'
        'formats.org/officeDocument/2006/extended-properties" xmlns:vt="http://schemas.openxmlformats.org/'
        'officeDocument/2006/docPropsVTypes"><Application>Test Sheets</Application><DocSecurity>0</DocSecurity>'
        '<ScaleCrop>false</ScaleCrop><HeadingPairs><vt:vector size="4" baseType="variant"><vt:variant><vt:lpstr>'
        f'Worksheets</vt:lpstr></vt:variant><vt:variant><vt:i4>{len(sheet_names)}</vt:i4></vt:variant><vt:variant>'
        f'<vt:lpstr>Named Ranges</vt:lpstr></vt:variant><vt:variant><vt:i4>{len(titles) - len(sheet_names)}</vt:i4>'
        f'</vt:variant></vt:vector></HeadingPairs><TitlesOfParts><vt:vector size="{len(titles)}" baseType="lpstr">'
        + "".join(f"<vt:lpstr>{t.replace('&', '&amp;')}</vt:lpstr>" for t in titles)
        + "</vt:vector></TitlesOfParts><AppVersion>16.0300</AppVersion></Properties>"
    )
    rewrite_zip(path, {"xl/workbook.xml": workbook.encode(), "docProps/app.xml": app.encode()})


def shared_strings(path: Path) -> None:
    """Move every sheet's text into xl/sharedStrings.xml, as spreadsheet programs store it (this openpyxl writes
    inline strings)."""
    strings: dict[str, int] = {}

    def to_shared(m: re.Match) -> str:
        index = strings.setdefault(m.group(3), len(strings))
        return f'<c r="{m.group(1)}"{m.group(2)} t="s"><v>{index}</v></c>'

    with zipfile.ZipFile(path) as z:
        sheets = {n: z.read(n).decode() for n in z.namelist() if re.fullmatch(r"xl/worksheets/sheet\d+\.xml", n)}
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        types = z.read("[Content_Types].xml").decode()
    pattern = re.compile(r'<c r="([A-Z]+\d+)"((?: s="\d+")?) t="inlineStr"><is><t>([^<]*)</t></is></c>')
    replaced = {n: pattern.sub(to_shared, text).encode() for n, text in sheets.items()}
    total = sum(len(pattern.findall(text)) for text in sheets.values())
    sst = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<sst xmlns="{MAIN_NS}" count="{total}" '
           f'uniqueCount="{len(strings)}">' + "".join(f"<si><t>{t}</t></si>" for t in strings) + "</sst>")
    rels = rels.replace("</Relationships>", f'<Relationship Id="rIdSst" Type="{REL_NS}/sharedStrings" '
                        'Target="sharedStrings.xml"/></Relationships>')
    types = types.replace("</Types>", '<Override PartName="/xl/sharedStrings.xml" ContentType="application/vnd.'
                          'openxmlformats-officedocument.spreadsheetml.sharedStrings+xml"/></Types>')
    replaced.update({"xl/_rels/workbook.xml.rels": rels.encode(), "[Content_Types].xml": types.encode()})
    rewrite_zip(path, replaced, {"xl/sharedStrings.xml": sst.encode()})


def make_macro(path: Path) -> None:
    """Turn a workbook into a macro workbook: a vbaProject.bin part, its relationship and content types."""
    with zipfile.ZipFile(path) as z:
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        types = z.read("[Content_Types].xml").decode()
    rels = rels.replace("</Relationships>", '<Relationship Id="rIdVba" Type="http://schemas.microsoft.com/office/'
                        '2006/relationships/vbaProject" Target="vbaProject.bin"/></Relationships>')
    types = types.replace("spreadsheetml.sheet.main+xml", "PLACEHOLDER")
    types = types.replace("application/vnd.openxmlformats-officedocument.PLACEHOLDER",
                          "application/vnd.ms-excel.sheet.macroEnabled.main+xml")
    types = types.replace('<Default Extension="xml"', '<Default Extension="bin" ContentType="application/'
                          'vnd.ms-office.vbaProject"/><Default Extension="xml"')
    rewrite_zip(path, {"xl/_rels/workbook.xml.rels": rels.encode(), "[Content_Types].xml": types.encode()},
                {"xl/vbaProject.bin": FAKE_VBA})


def rich_workbook(path: Path, macro: bool = False, rel_prefix: str = "r", extra_sheets: tuple[str, ...] = (),
                  result_sheet_at: int | None = None) -> Path:
    """The full test workbook: :func:`base_workbook` + shared strings + image + program-style index parts (+ macros)."""
    base_workbook(path, extra_sheets, result_sheet_at)
    shared_strings(path)
    add_image(path)
    spreadsheet_program_style(path, rel_prefix)
    if macro:
        make_macro(path)
    return path


def members(path: Path) -> dict[str, bytes]:
    """Uncompressed bytes of every zip member."""
    with zipfile.ZipFile(path) as z:
        return {name: z.read(name) for name in z.namelist()}
