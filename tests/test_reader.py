"""Tests of lanesolve.read.reader: values aligned to spreadsheet rows, error and unsaved-formula cells, non-workbooks.

The cell markup the reader looks for is defined in ECMA-376 Part 1 (Office Open XML), 18.3.1.4 ``c`` (Cell):
``t="e"`` is the error cell type (ST_CellType, 18.18.11), ``<f>`` holds a formula and ``<v>`` its saved value.
"""

from __future__ import annotations

import datetime as dt
import zipfile

import openpyxl
import pytest

from lanesolve import contract
from lanesolve.errors import WorkbookError
from lanesolve.read.reader import read_workbook

from conftest import valid_sheets, write_workbook


def test_rows_are_aligned_to_spreadsheet_rows_and_columns(tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Depots"
    sheet["B3"] = "depot"  # leading blank rows and column A must be kept so row numbers match the spreadsheet
    sheet["C5"] = 7
    book.save(tmp_path / "a.xlsx")
    raw = read_workbook(tmp_path / "a.xlsx").sheets["Depots"]
    assert raw.rows[2][1] == "depot"
    assert raw.rows[4][2] == pytest.approx(7.0, abs=1e-12)
    assert raw.rows[0][0] == ""


def test_values_keep_their_kinds(tmp_path):
    path = write_workbook(tmp_path / "k.xlsx", {"Lanes": [["a", "b", "c", "d"], [1.5, "x", True, dt.date(2024, 3, 1)]]})
    row = read_workbook(path).sheets["Lanes"].rows[1]
    assert row[0] == pytest.approx(1.5, abs=1e-12)
    assert row[1] == "x"
    assert row[2] is True
    assert row[3] == dt.date(2024, 3, 1) or row[3] == dt.datetime(2024, 3, 1)


def test_result_sheets_are_skipped(tmp_path):
    sheets = valid_sheets()
    sheets[contract.RESULT_PREFIX + "Flows"] = [["origin", "flow"], ["North Yard", 3]]
    raw = read_workbook(write_workbook(tmp_path / "r.xlsx", sheets))
    assert set(raw.sheets) == set(valid_sheets())


def test_hidden_sheet_is_marked(tmp_path):
    raw = read_workbook(write_workbook(tmp_path / "h.xlsx", valid_sheets(), hidden=("Hubs",)))
    assert raw.sheets["Hubs"].hidden
    assert not raw.sheets["Depots"].hidden


def test_error_value_cell_is_listed(tmp_path):
    # openpyxl stores the string "#N/A" as an error cell (t="e"), as a spreadsheet program does.
    path = write_workbook(tmp_path / "e.xlsx", {"Depots": [["depot", "supply"], ["D1", "#N/A"], ["D2", "#DIV/0!"]]})
    with zipfile.ZipFile(path) as archive:
        assert b't="e"' in archive.read("xl/worksheets/sheet1.xml")
    raw = read_workbook(path).sheets["Depots"]
    assert raw.bad_cells == {(2, 2): "#N/A", (3, 2): "#DIV/0!"}
    assert raw.rows[1][1] == ""  # calamine shows the error cell as empty; bad_cells is what tells it apart


def test_formula_without_cached_value_is_listed(tmp_path):
    path = write_workbook(tmp_path / "f.xlsx", {"Depots": [["depot", "supply"], ["D1", "=SUM(B3:B4)"], ["D2", 5]]})
    with zipfile.ZipFile(path) as archive:
        xml = archive.read("xl/worksheets/sheet1.xml")
    # What openpyxl writes for an assigned formula (checked here, not assumed): <f> and an empty <v/>.
    assert b"<f>SUM(B3:B4)</f><v />" in xml or b"<f>SUM(B3:B4)</f><v/>" in xml
    raw = read_workbook(path).sheets["Depots"]
    assert raw.bad_cells == {(2, 2): "formula =SUM(B3:B4) has no saved value"}


def _rewrite_sheet_xml(path, cells_xml: str, sheet_part="xl/worksheets/sheet1.xml"):
    """Replace the sheetData of one part with hand-written XML (what a spreadsheet program would save)."""
    with zipfile.ZipFile(path) as archive:
        members = {name: archive.read(name) for name in archive.namelist()}
    xml = members[sheet_part].decode()
    start, end = xml.index("<sheetData"), xml.index("</sheetData>") + len("</sheetData>")
    members[sheet_part] = (xml[:start] + f"<sheetData>{cells_xml}</sheetData>" + xml[end:]).encode()
    with zipfile.ZipFile(path, "w") as archive:
        for name, data in members.items():
            archive.writestr(name, data)


def test_formula_with_cached_value_and_error_result(tmp_path):
    path = write_workbook(tmp_path / "c.xlsx", {"Depots": [["depot", "supply"], ["D1", 1]]})
    # Row 2: formula with a saved number (fine). Row 3: formula whose saved result is an error. Row 4: a formula
    # returning text with an empty saved string (fine, ECMA-376 18.18.11 t="str"). Row 5: a shared formula
    # (18.3.1.40 f, t="shared") whose dependent cell has no saved value.
    _rewrite_sheet_xml(path, (
        '<row r="1"><c r="A1" t="inlineStr"><is><t>depot</t></is></c>'
        '<c r="B1" t="inlineStr"><is><t>supply</t></is></c></row>'
        '<row r="2"><c r="A2" t="inlineStr"><is><t>D1</t></is></c><c r="B2"><f>2+3</f><v>5</v></c></row>'
        '<row r="3"><c r="A3" t="inlineStr"><is><t>D2</t></is></c><c r="B3" t="e"><f>1/0</f><v>#DIV/0!</v></c></row>'
        '<row r="4"><c r="A4" t="str"><f>""</f><v></v></c><c r="B4"><f t="shared" ref="B4:B5" si="0">B2*2</f>'
        '<v>10</v></c></row>'
        '<row r="5"><c r="B5"><f t="shared" si="0"/></c></row>'
    ))
    raw = read_workbook(path).sheets["Depots"]
    assert raw.bad_cells == {
        (3, 2): "#DIV/0! (from formula =1/0)",
        (5, 2): "formula =B2*2 has no saved value",
    }
    assert raw.rows[1][1] == pytest.approx(5.0, abs=1e-12)


def test_only_contract_sheets_are_loaded_and_other_sheets_only_named(tmp_path):
    path = write_workbook(tmp_path / "n.xlsx", {"Depots": [["depot"], ["D1"]], "Notes": [["=1+1"]],
                                                "scenarios": [["scenario"]]})
    raw = read_workbook(path)
    assert list(raw.sheets) == ["Depots", "scenarios"]
    assert raw.names() == ["Depots", "Notes", "scenarios"]


def test_text_file_renamed_xlsx(tmp_path):
    path = tmp_path / "lanes.xlsx"
    path.write_text("origin,destination,cost_per_unit\nA,B,3\n")
    with pytest.raises(WorkbookError) as caught:
        read_workbook(path)
    message = str(caught.value)
    assert "lanes.xlsx" in message and "text file" in message and "save it as .xlsx" in message


def test_empty_file(tmp_path):
    path = tmp_path / "empty.xlsx"
    path.write_bytes(b"")
    with pytest.raises(WorkbookError, match="empty"):
        read_workbook(path)


def test_truncated_zip(tmp_path):
    good = write_workbook(tmp_path / "good.xlsx", valid_sheets())
    cut = tmp_path / "cut.xlsx"
    cut.write_bytes(good.read_bytes()[: len(good.read_bytes()) // 2])
    with pytest.raises(WorkbookError) as caught:
        read_workbook(cut)
    assert "cut.xlsx" in str(caught.value) and "damaged or incomplete" in str(caught.value)


def test_zip_without_workbook(tmp_path):
    path = tmp_path / "archive.xlsx"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("readme.txt", "not a workbook")
    with pytest.raises(WorkbookError, match="holds no workbook"):
        read_workbook(path)


def test_encrypted_ole_file(tmp_path):
    # A password-protected .xlsx is an OLE compound file (magic D0 CF 11 E0 A1 B1 1A E1, MS-CFB 2.2) holding an
    # "EncryptedPackage" stream (MS-OFFCRYPTO 2.3.4.4). This is a hand-made stand-in with those two markers, not a
    # file encrypted by a spreadsheet program.
    path = tmp_path / "locked.xlsx"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 504 + "EncryptedPackage".encode("utf-16-le"))
    with pytest.raises(WorkbookError, match="password"):
        read_workbook(path)


def test_damaged_ole_file(tmp_path):
    path = tmp_path / "old.xls"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 600)
    with pytest.raises(WorkbookError, match="old.xls"):
        read_workbook(path)


def test_missing_file(tmp_path):
    with pytest.raises(WorkbookError, match="no such file"):
        read_workbook(tmp_path / "nothere.xlsx")


_MIXED_CELLS = (
    '<row r="1"><c r="A1" t="inlineStr"><is><t>depot</t></is></c>'
    '<c r="B1" t="inlineStr"><is><t>supply</t></is></c></row>'
    '<row r="2"><c r="A2" t="inlineStr"><is><t>D1</t></is></c><c r="B2"><f>2+3</f><v>5</v></c></row>'
    '<row r="3"><c r="A3" t="inlineStr"><is><t>D2</t></is></c><c r="B3" t="e"><v>#N/A</v></c>'
    '<c r="C3"><f>IF(A3&lt;&gt;"",1,0)</f></c></row>'
)


def test_prefixed_markup_takes_streaming_scan_with_same_result(tmp_path):
    # ECMA-376 allows any namespace prefix; some writers emit <x:c>. The byte-level quick scan declines such parts
    # and the streaming parser must find the same cells.
    plain = write_workbook(tmp_path / "plain.xlsx", {"Depots": [["depot", "supply"], ["D1", 1]]})
    _rewrite_sheet_xml(plain, _MIXED_CELLS)
    prefixed = write_workbook(tmp_path / "prefixed.xlsx", {"Depots": [["depot", "supply"], ["D1", 1]]})
    main_ns = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    cells = _MIXED_CELLS.replace("<", "<x:").replace("<x:/", "</x:")
    with zipfile.ZipFile(prefixed) as archive:
        members = {name: archive.read(name) for name in archive.namelist()}
    members["xl/worksheets/sheet1.xml"] = (
        f'<x:worksheet xmlns:x="{main_ns}"><x:sheetData>{cells}</x:sheetData></x:worksheet>').encode()
    with zipfile.ZipFile(prefixed, "w") as archive:
        for name, data in members.items():
            archive.writestr(name, data)
    expected = {(3, 2): "#N/A", (3, 3): 'formula =IF(A3<>"",1,0) has no saved value'}
    assert read_workbook(plain).sheets["Depots"].bad_cells == expected
    assert read_workbook(prefixed).sheets["Depots"].bad_cells == expected


def test_cells_without_reference_are_counted(tmp_path):
    # The r attribute of <c> and <row> is optional (ECMA-376 18.3.1.4, 18.3.1.73); positions then follow order.
    path = write_workbook(tmp_path / "noref.xlsx", {"Depots": [["depot", "supply"], ["D1", 1]]})
    _rewrite_sheet_xml(path, (
        '<row><c t="inlineStr"><is><t>depot</t></is></c><c t="inlineStr"><is><t>supply</t></is></c></row>'
        '<row><c t="inlineStr"><is><t>D1</t></is></c><c><f>1+1</f></c></row>'
    ))
    assert read_workbook(path).sheets["Depots"].bad_cells == {(2, 2): "formula =1+1 has no saved value"}


def test_formula_before_a_cell_without_reference_is_found(tmp_path):
    # The one survey pass over the part meets the formula first and the reference-less cell (ECMA-376 18.3.1.4:
    # r is optional) after it; the formula without <v> must still be reported at its place (row 2, column B).
    path = write_workbook(tmp_path / "mixed.xlsx", {"Depots": [["depot", "supply"], ["D1", 1]]})
    _rewrite_sheet_xml(path, (
        '<row r="1"><c r="A1" t="inlineStr"><is><t>depot</t></is></c><c r="B1" t="inlineStr"><is><t>supply</t>'
        '</is></c></row><row r="2"><c r="A2" t="inlineStr"><is><t>D1</t></is></c><c r="B2"><f>1+1</f></c></row>'
        '<row r="3"><c t="inlineStr"><is><t>D2</t></is></c></row>'
    ))
    assert read_workbook(path).sheets["Depots"].bad_cells == {(2, 2): "formula =1+1 has no saved value"}
