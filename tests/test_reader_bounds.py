"""The reader loads only the sheets lanesolve needs and refuses, by name, a needed sheet too large to load.

Sheets with extreme extents are written by hand into the zip (tests/_sheet_parts.py). The bounds are the reader's
stated ones (lanesolve.read.reader.MAX_ROWS, MAX_COLUMNS, MAX_CELLS); the spreadsheet limits they are set against
-- 1,048,576 rows, 16,384 columns (XFD) -- are those of the Office Open XML format (ECMA-376 Part 1, 18.3.1.73 and
18.18.62, recalled from memory). A needed sheet that slipped past the check would make calamine ask for hundreds of
gigabytes and abort the test process, so these tests fail loudly if the check is lost.
"""

from __future__ import annotations

import zipfile

import python_calamine
import pytest

from lanesolve.errors import WorkbookError
from lanesolve.read import reader
from lanesolve.read.reader import read_workbook
from lanesolve.read.validate import validate

from _sheet_parts import write_sheet_xml
from conftest import valid_sheets, write_workbook


@pytest.fixture
def loaded(monkeypatch):
    """The names of the sheets calamine is asked to load, in order."""
    names: list[str] = []
    original = python_calamine.CalamineWorkbook.get_sheet_by_name

    def spy(self, name):
        names.append(name)
        return original(self, name)

    monkeypatch.setattr(python_calamine.CalamineWorkbook, "get_sheet_by_name", spy)
    return names


def book_with(tmp_path, extra: dict[str, list[list]] | None = None):
    return write_workbook(tmp_path / "book.xlsx", {**valid_sheets(), **(extra or {})})


@pytest.mark.parametrize("far", ["XFD1048576", "AAA200000"])
def test_notes_sheet_with_a_far_away_last_cell_is_never_loaded(tmp_path, loaded, far):
    path = book_with(tmp_path, {"Notes": [["note"]]})
    write_sheet_xml(path, "Notes", {"A1": "see the plan", far: 1})
    raw = read_workbook(path)
    assert "Notes" not in loaded and "Notes" not in raw.sheets and "Notes" in raw.names()
    network, _ = validate(raw)
    assert len(network.lanes) == 5


def test_large_notes_sheet_is_never_loaded(tmp_path, loaded):
    path = book_with(tmp_path, {"Notes": [["note"]]})
    write_sheet_xml(path, "Notes", {f"{column}{row}": row for row in range(1, 30_001) for column in "ABCDEFGHIJ"})
    raw = read_workbook(path)
    assert loaded == ["Depots", "Customers", "Hubs", "Lanes", "Settings"]
    assert list(raw.sheets) == loaded


@pytest.mark.parametrize("far, shown", [
    ("XFD1048576", "reaches column XFD (16,384 columns)"),
    ("AAA200000", "reaches column AAA (703 columns)"),
    ("A2000001", "reaches row 2,000,001"),
    ("GZ2000001", "reaches row 2,000,001 and reaches column GZ (208 columns)"),
    ("AC1048576", "spans 1,048,576 rows by 29 columns (30,408,704 cells)"),  # above MAX_CELLS, 30,000,000
])
def test_needed_sheet_reaching_too_far_is_refused_by_name_before_loading(tmp_path, loaded, far, shown):
    path = book_with(tmp_path)
    write_sheet_xml(path, "Lanes", {"A1": "origin", "B1": "destination", "C1": "cost_per_unit", far: 1})
    with pytest.raises(WorkbookError) as caught:
        read_workbook(path)
    (problem,) = caught.value.problems
    assert problem.sheet == "Lanes" and "Lanes" not in loaded
    assert problem.message == (f"the sheet {shown}; lanesolve reads at most 1,048,576 rows, 200 columns "
                               f"and 30,000,000 cells (rows x columns) in a sheet it needs")
    assert "delete them and save" in problem.hint


def test_every_oversized_needed_sheet_is_named_in_one_pass(tmp_path):
    path = book_with(tmp_path)
    write_sheet_xml(path, "Lanes", {"A1": "origin", "XFD1": 1})
    write_sheet_xml(path, "Depots", {"A1": "depot", "A1048576": 1, "GS2": 2})
    with pytest.raises(WorkbookError) as caught:
        read_workbook(path)
    assert [p.sheet for p in caught.value.problems] == ["Depots", "Lanes"]


def test_needed_sheet_at_the_bounds_is_read(tmp_path):
    # 200 columns (GR) is the most accepted; the cell there is a note beside the table.
    path = book_with(tmp_path)
    write_sheet_xml(path, "Hubs", {"A1": "hub", "B1": "capacity", "A2": "Midway", "B2": 90, "GR2": "note"})
    raw = read_workbook(path)
    assert len(raw.sheets["Hubs"].rows[1]) == 200


def test_size_is_checked_after_loading_for_kinds_without_sheet_xml(tmp_path):
    # .xls/.ods sheets cannot be measured before calamine reads them; the check then runs on calamine's extent,
    # before the cells become Python values.
    class Sheet:
        end = (1_999_999, 3)

        def to_python(self, **_):
            raise AssertionError("cells of an oversized sheet must not be converted")

    class Book:
        def get_sheet_by_name(self, name):
            return Sheet()

    rows, problem = reader._load_rows(tmp_path / "x.ods", Book(), "Lanes")
    assert rows is None
    assert problem.sheet == "Lanes" and problem.message.startswith("the sheet reaches row 2,000,000;")


def test_a_panic_inside_calamine_becomes_a_workbook_error_naming_the_sheet(tmp_path, monkeypatch):
    # pyo3 raises pyo3_runtime.PanicException, a BaseException subclass that cannot be imported by name; a class of
    # the same name and base stands in for it (pyo3 user guide, "Panics", recalled from memory).
    class PanicException(BaseException):
        pass

    def panics(self, name):
        raise PanicException("chunk size must be non-zero")

    path = book_with(tmp_path)
    monkeypatch.setattr(python_calamine.CalamineWorkbook, "get_sheet_by_name", panics)
    with pytest.raises(WorkbookError, match=r"sheet 'Depots' could not be read: the workbook reader failed inside "
                                            r"\(chunk size must be non-zero\)"):
        read_workbook(path)


def test_other_base_exceptions_from_calamine_are_not_swallowed(tmp_path, monkeypatch):
    def interrupted(self, name):
        raise KeyboardInterrupt

    path = book_with(tmp_path)
    monkeypatch.setattr(python_calamine.CalamineWorkbook, "get_sheet_by_name", interrupted)
    with pytest.raises(KeyboardInterrupt):
        read_workbook(path)


def _fail_scan_of(sheet_part_marker: bytes, monkeypatch):
    """Make the XML scan for bad cells fail on the sheet part holding ``sheet_part_marker``."""
    from lanesolve.read import sheet_xml

    original = sheet_xml.bad_cells

    def scan(data, where, survey=None):
        if sheet_part_marker in data:
            raise WorkbookError(f"{where}: scan failed")
        return original(data, where, survey)

    monkeypatch.setattr(sheet_xml, "bad_cells", scan)


def _panics_on(sheet: str, monkeypatch):
    class PanicException(BaseException):  # pyo3's panic, as in the test above
        pass

    original = python_calamine.CalamineWorkbook.get_sheet_by_name

    def load(self, name):
        if name == sheet:
            raise PanicException(f"bad {name}")
        return original(self, name)

    monkeypatch.setattr(python_calamine.CalamineWorkbook, "get_sheet_by_name", load)


def test_an_earlier_sheets_load_failure_is_reported_before_a_later_sheets_scan_failure(tmp_path, monkeypatch):
    # Sheets load on a worker thread while later sheets are scanned; the failure reported is still the one reading
    # the sheets one after another meets first (Depots, loaded before the Lanes sheet is scanned).
    path = book_with(tmp_path)
    _panics_on("Depots", monkeypatch)
    _fail_scan_of(b"cost_per_unit", monkeypatch)  # the Lanes sheet's header
    with pytest.raises(WorkbookError, match=r"sheet 'Depots' could not be read: the workbook reader failed inside"):
        read_workbook(path)


def test_a_sheets_scan_failure_is_reported_before_its_own_load_failure(tmp_path, monkeypatch):
    # Reading one after another, a sheet's XML is scanned before calamine loads it: that order of failures stays.
    path = book_with(tmp_path)
    _panics_on("Lanes", monkeypatch)
    _fail_scan_of(b"cost_per_unit", monkeypatch)
    with pytest.raises(WorkbookError, match=r"scan failed"):
        read_workbook(path)


@pytest.mark.parametrize("row, ref, bounded", [
    (2, "Z999999", True), (2, "A1", True), (2, "AA1", False), (2, "A1000000", True), (2, "Z1039999", True),
    (2, "A1040000", False), (2, "A10000000", False), (2, "A0999999", False), (2, "a1", False),
    (1_039_999, "B7", True), (1_040_000, "B7", False), (2_000_000, "B7", False),
])
def test_one_search_clears_only_parts_within_row_1039999_and_column_z(row, ref, bounded):
    # Reference: the exact extent listed by used_extent (checked against Python's XML parser in the test below),
    # compared with the bound the single search promises; the bound itself is within the reader's limits.
    from lanesolve.read.sheet_xml import BOUNDED_EXTENT, Survey, used_extent, within_bounded_extent

    xml = f'<worksheet><sheetData><row r="1"><c r="A1"/></row><row r="{row}"><c r="{ref}"/></row></sheetData>' \
          f'</worksheet>'.encode()
    survey = Survey.of(xml)
    assert survey.regular and within_bounded_extent(xml, survey) is bounded
    rows, columns = used_extent(xml, survey)
    if bounded:
        assert rows <= BOUNDED_EXTENT[0] and columns <= BOUNDED_EXTENT[1]
    elif ref != "a1" and ref != "A0999999":  # those two are within the bound, only not cleared by the one search
        assert rows > BOUNDED_EXTENT[0] or columns > BOUNDED_EXTENT[1]
    assert reader._BOUNDED_IS_SAFE and reader._size_problem("x", *BOUNDED_EXTENT) is None


@pytest.mark.parametrize("space", ["\t", "\n", "\r\n", "  "])
def test_a_cell_tag_with_other_white_space_before_its_reference_is_measured_in_full(space):
    # XML allows any white space between a tag's name and its attributes (XML 1.0, production [40] STag), and
    # calamine reads such a cell; the search that clears a part reads single spaces only, so such a part is not
    # regular and its extent is listed with the patterns that accept any white space.
    from lanesolve.read.sheet_xml import Survey, used_extent, within_bounded_extent

    xml = f'<worksheet><sheetData><row r="1"><c r="A1"/></row><row r="2"><c{space}r="XFD1048576"/></row>' \
          f'</sheetData></worksheet>'.encode()
    survey = Survey.of(xml)
    assert not survey.regular and not within_bounded_extent(xml, survey)
    assert used_extent(xml, survey) == (1_048_576, 16_384)


def test_a_far_cell_after_a_tab_is_refused_before_loading(tmp_path, loaded):
    # The same cell in a workbook: refused by name (it would ask calamine for a grid of 17 billion cells).
    path = book_with(tmp_path)
    write_sheet_xml(path, "Lanes", {"A1": "origin", "B1": "destination", "C1": "cost_per_unit", "XFD1048576": 1})
    with zipfile.ZipFile(path) as archive:
        members = [(info, archive.read(info.filename)) for info in archive.infolist()]
    assert sum(data.count(b'<c r="XFD1048576"') for _, data in members) == 1
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        for info, data in members:
            archive.writestr(info, data.replace(b'<c r="XFD1048576"', b'<c\tr="XFD1048576"'))
    with pytest.raises(WorkbookError) as caught:
        read_workbook(path)
    (problem,) = caught.value.problems
    assert problem.sheet == "Lanes" and "Lanes" not in loaded
    assert problem.message.startswith("the sheet reaches column XFD (16,384 columns);")



def test_a_damaged_part_is_named_not_left_to_zlibs_traceback(tmp_path):
    # Bytes broken inside a member's compressed data make zlib raise its own error type while the part is read.
    from lanesolve.read import sheet_xml

    path = book_with(tmp_path)
    part = reader._xlsx_package(path).sheet_parts["Lanes"]
    with zipfile.ZipFile(path) as archive:
        offset = archive.getinfo(part).header_offset
    raw = bytearray(path.read_bytes())
    raw[offset + 60:offset + 80] = b"\xff" * 20
    path.write_bytes(bytes(raw))
    with zipfile.ZipFile(path) as archive, pytest.raises(WorkbookError, match=f"part {part} cannot be read"):
        sheet_xml.read_part(path, archive, part)

