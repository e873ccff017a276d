"""A large sheet loaded in pieces, one per thread, reads exactly as calamine reads it whole.

Reference for every check: python-calamine's own load of the whole sheet from the same file
(``CalamineSheet.to_python(skip_empty_area=False)``), the values the reader handed on before pieces existed.
Workbooks are written by openpyxl (shared strings, styles, dates) or by hand (tests/_sheet_parts.py, inline text).
"""

from __future__ import annotations

import datetime as dt
import re
import zipfile

import openpyxl
import pytest
import python_calamine
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lanesolve.read import pieces, reader
from lanesolve.read.reader import read_workbook

from _sheet_parts import sheet_part, write_sheet_xml
from conftest import valid_sheets, write_workbook


def whole(path, name: str) -> list[list]:
    return python_calamine.CalamineWorkbook.from_path(str(path)).get_sheet_by_name(name).to_python(
        skip_empty_area=False)


def whole_of(path, part: str, data: bytes) -> list[list]:
    """The Lanes sheet read whole by calamine after its part is replaced by ``data``."""
    from _workbooks import rewrite_zip

    copy = path.with_name("copy.xlsx")
    copy.write_bytes(path.read_bytes())
    rewrite_zip(copy, {part: data})
    return whole(copy, "Lanes")


def in_pieces(path, name: str, count: int) -> list[list] | None:
    part = sheet_part(path, name)
    with zipfile.ZipFile(path) as archive:
        data = archive.read(part)
    return pieces.load(path, part, data, name, count)


CELL = st.one_of(
    st.none(), st.text(alphabet="abcXYZ 01-é<&", min_size=1, max_size=6), st.integers(-10**6, 10**6),
    st.floats(allow_nan=False, allow_infinity=False, width=32), st.booleans(),
    st.dates(min_value=dt.date(1990, 1, 1), max_value=dt.date(2040, 12, 31)),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(grid=st.lists(st.lists(CELL, min_size=1, max_size=5), min_size=1, max_size=30),
       top=st.integers(0, 3), left=st.integers(0, 2), styled=st.booleans(), count=st.integers(2, 4))
def test_pieces_read_as_the_whole_sheet(tmp_path_factory, grid, top, left, styled, count):
    # Leading blank rows and columns, ragged rows, blank rows between filled ones, shared strings, dates and a
    # formatted cell without a value: the pieces, put back together, are the whole sheet's grid.
    path = tmp_path_factory.mktemp("pieces") / "book.xlsx"
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Lanes"
    for r, row in enumerate(grid):
        for c, value in enumerate(row):
            if value is not None:
                sheet.cell(row=top + r + 1, column=left + c + 1, value=value)
    if styled:  # a cell with a format and no value (a planner's coloured empty cell)
        sheet.cell(row=top + len(grid) + 2, column=left + 1).number_format = "0.00"
    book.save(path)
    expected = whole(path, "Lanes")
    got = in_pieces(path, "Lanes", count)
    assert got is None or got == expected  # None: too few rows to cut; the reader then loads the sheet whole
    if sum(1 for row in grid if any(v is not None for v in row)) >= 2 * count:
        assert got == expected


def test_a_piece_that_fails_to_load_leaves_the_sheet_to_the_whole_load(tmp_path, monkeypatch):
    path = write_workbook(tmp_path / "book.xlsx", valid_sheets())
    expected = read_workbook(path)
    monkeypatch.setattr(pieces, "PIECES_FROM_BYTES", 1)
    monkeypatch.setattr(pieces, "cores", lambda: 2)
    original = pieces._load_piece
    failed = []

    def fail_second(book, name):
        if book.name == "piece-1.xlsx":
            failed.append(name)
            return python_calamine.CalamineError("broken piece")
        return original(book, name)

    monkeypatch.setattr(pieces, "_load_piece", fail_second)
    got = read_workbook(path)
    assert failed  # the pieces were tried ...
    assert {n: s.rows for n, s in got.sheets.items()} == {n: s.rows for n, s in expected.sheets.items()}


def test_rows_out_of_order_across_a_cut_are_not_joined(tmp_path):
    # The schema asks rows in ascending order (ECMA-376 Part 1, 18.3.1.73), but calamine places a row where its
    # number says; a later piece whose rows sit above an earlier piece's cannot be appended, so load() declines.
    path = write_workbook(tmp_path / "book.xlsx", valid_sheets())
    write_sheet_xml(path, "Lanes", {"A1": "origin", "A2": "D1", "A3": "D2", "A4": "D3"})
    part = sheet_part(path, "Lanes")
    with zipfile.ZipFile(path) as archive:
        data = archive.read(part)
    rows = re.findall(rb'<row r="[0-9]+">.*?</row>', data)
    assert len(rows) == 4
    swapped = data.replace(b"".join(rows), b"".join([rows[3], *rows[:3]]))  # rows 4, 1, 2, 3
    assert whole_of(path, part, swapped)[3] == ["D3"]  # calamine still puts row 4 last
    assert pieces.load(path, part, swapped, "Lanes", 2) is None


def test_the_reader_loads_a_large_cleared_sheet_in_pieces_and_reads_the_same(tmp_path, monkeypatch):
    path = write_workbook(tmp_path / "book.xlsx", valid_sheets())
    expected = {n: s.rows for n, s in read_workbook(path).sheets.items()}
    monkeypatch.setattr(pieces, "PIECES_FROM_BYTES", 1)
    monkeypatch.setattr(pieces, "cores", lambda: 3)
    used = []
    original = pieces.load

    def spy(*args, **kwargs):
        rows = original(*args, **kwargs)
        used.append((args[3], rows is not None))
        return rows

    monkeypatch.setattr(pieces, "load", spy)
    got = {n: s.rows for n, s in read_workbook(path).sheets.items()}
    assert ("Lanes", True) in used  # guards the comparison: the pieces were loaded and joined
    assert got == expected


def test_pieces_leave_no_temporary_files(tmp_path, monkeypatch):
    monkeypatch.setattr("tempfile.tempdir", str(tmp_path / "temp"))
    (tmp_path / "temp").mkdir()
    path = write_workbook(tmp_path / "book.xlsx", valid_sheets())
    assert in_pieces(path, "Lanes", 2) == whole(path, "Lanes")
    assert list((tmp_path / "temp").iterdir()) == []


@pytest.mark.parametrize("size, available, expected", [
    (300_000_000, 1, 1), (300_000_000, 2, 2), (300_000_000, 64, pieces.MAX_PIECES),
    (pieces.PIECES_FROM_BYTES - 1, 8, 1), (2 * pieces.PIECES_FROM_BYTES, 8, 2),
])
def test_piece_count(size, available, expected):
    assert pieces.count_for(size, available) == expected


def test_a_damaged_part_outside_the_sheet_leaves_the_reading_to_the_whole_load(tmp_path, monkeypatch):
    # The pieces copy the package's other parts; one whose compressed bytes are broken makes zlib raise while it is
    # copied. The whole load then meets the damage itself and reports it (here calamine reads the other part only
    # as far as it needs); the pieces never turn it into a traceback of their own.
    path = write_workbook(tmp_path / "book.xlsx", valid_sheets())
    part = sheet_part(path, "Lanes")
    with zipfile.ZipFile(path) as archive:
        data = archive.read(part)
    monkeypatch.setattr(zipfile.ZipFile, "read", lambda self, name, pwd=None: (_ for _ in ()).throw(
        __import__("zlib").error("Error -3 while decompressing data")))
    assert pieces.load(path, part, data, "Lanes", 2) is None
