"""Reading an input sheet into columns (lanesolve.read.sheets) and the checks across lane records
(lanesolve.read.sheet_checks): the column-at-a-time reading of rows of one length must give exactly what the pandas
frame gives for the same rows, and rows of different lengths must read as the same rows padded with empty cells.

References: pandas' ``DataFrame(rows, dtype=object)`` (the reading every sheet went through before, and still the one
for rows of different lengths: pandas pads short rows with None and keeps every cell object as it is); a plain-Python
reading of the rules the modules state (a lane's key is origin, destination and mode; its first row is kept).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.errors import WorkbookError
from lanesolve.read.findings import Findings
from lanesolve.read.reader import RawSheet, RawWorkbook
from lanesolve.read.sheets import read_table, record_columns
from lanesolve.read.validate import validate

#: One cell of every kind a sheet or a hand-built RawSheet can hold: text (padded, empty, numeric, ambiguous, NaN
#: spelled out), numbers of Python and NumPy types, NaN, infinity, yes/no of both types, dates and times, blank (None),
#: and an object of no known kind.
_CELLS = ["D1", "  C1 ", "", "   ", "12.5", "1.200", "nan", "yes", "No", "TRUE", 7, 2.5, 10**20, np.float64(3.0),
          np.int64(4), np.float32(0.5), float("nan"), math.inf, -0.0, True, False, np.bool_(True),
          dt.date(2024, 3, 1), dt.datetime(2024, 3, 1, 8), dt.time(8, 30), dt.timedelta(days=1),
          pd.Timestamp("2024-03-01"), None, object()]


def _rows(width: int) -> list[list]:
    """Rows of one length holding every kind of cell in every column (shifted by one per column)."""
    return [[_CELLS[(r + c) % len(_CELLS)] for c in range(width)] for r in range(2 * len(_CELLS))]


def test_columns_of_rows_of_one_length_are_the_frames_columns_cell_for_cell():
    records = _rows(5)
    positions = [3, 0, 4, 9]  # 9 is beyond the rows: absent, as from the frame
    n_rows, columns = record_columns(records, positions)
    # Reference: pandas' DataFrame constructor, the reading every sheet went through before.
    frame = pd.DataFrame(records, dtype=object)
    assert n_rows == len(frame) == len(records)
    assert list(columns) == [3, 0, 4]
    for position, column in columns.items():
        expected = frame[position]
        assert column.dtype == expected.dtype == object
        assert column.name == expected.name == position
        assert column.index.equals(expected.index) and type(column.index) is type(expected.index)
        assert all(got is want for got, want in zip(column.tolist(), expected.tolist())), position


def test_no_records_and_records_without_cells_read_as_the_frame_reads_them():
    for records in ([], [[], [], []]):
        n_rows, columns = record_columns(records, [0, 1])
        assert (n_rows, columns) == (len(pd.DataFrame(records, dtype=object)), {})


def _lanes_sheet(rows: list[list]) -> RawSheet:
    return RawSheet("Lanes", [["origin", "destination", "mode", "cost_per_unit", "capacity", "active", "note"]] + rows)


def _same_tables(first, second) -> None:
    assert first.rows.tolist() == second.rows.tolist()
    assert first.complete == second.complete
    for name in first.values:
        a, b = first.values[name], second.values[name]
        assert (a is None) == (b is None), name
        if a is not None:
            assert a.dtype == b.dtype and a.index.equals(b.index), name
            assert [type(v) for v in a.tolist()] == [type(v) for v in b.tolist()], name
            assert a.equals(b), name
        assert first.invalid[name].tolist() == second.invalid[name].tolist(), name


def test_rows_of_different_lengths_read_as_the_same_rows_padded_with_empty_cells():
    # The sheet's cells, every kind in every lane column; trailing cells cut off at random lengths give the ragged
    # sheet (read through pandas' frame), the same rows padded with None give rows of one length (read column by
    # column). Reference: pandas pads the short rows of a frame with None, a blank cell.
    rectangular = _rows(7)
    rng = np.random.default_rng(20260)
    ragged = []
    for row in rectangular:
        keep = int(rng.integers(0, len(row) + 1))
        ragged.append(row[:keep])
        row[keep:] = [None] * (len(row) - keep)
    assert len(set(map(len, ragged))) > 1 and len(set(map(len, rectangular))) == 1
    found_ragged, found_rectangular = Findings(), Findings()
    ragged_table = read_table(contract.LANES, _lanes_sheet(ragged), found_ragged)
    rectangular_table = read_table(contract.LANES, _lanes_sheet(rectangular), found_rectangular)
    _same_tables(ragged_table, rectangular_table)
    assert list(found_ragged) == list(found_rectangular)
    assert len(found_ragged) > 20  # the cells of the wrong kind were reported, not skipped


def test_rows_of_one_length_read_as_the_lanes_file_frame_path_reads_them():
    # A lanes file is read through read_table's ``data`` frame: the same records given as a frame must read the same.
    rows = _rows(7)
    found_rows, found_frame = Findings(), Findings()
    from_rows = read_table(contract.LANES, _lanes_sheet(rows), found_rows)
    from_frame = read_table(contract.LANES, _lanes_sheet([]), found_frame, data=pd.DataFrame(rows, dtype=object))
    _same_tables(from_rows, from_frame)
    assert list(found_rows) == list(found_frame)


def test_flags_read_cell_by_cell_by_the_yes_and_no_words():
    # Reference: each active cell read on its own by the contract's rule: a yes word (any case, trimmed), a number
    # 1 / 0 written as a word, or a TRUE/FALSE cell; blank is the default (yes); anything else is an error.
    cells = ["yes", " YES ", "y", "True", "1", "x", "On", "no", "N", "false", "0", "OFF", "", "  ", None, 1, 0, 1.0,
             2, True, False, np.bool_(True), np.bool_(False), "maybe", "nah", dt.date(2024, 1, 1), float("nan"),
             "İ", "oN"]
    rows = [["D1", f"C{i}", "", 1.0, None, cell, None] for i, cell in enumerate(cells)]
    found = Findings()
    table = read_table(contract.LANES, _lanes_sheet(rows), found)
    expected, wrong = [], []
    for row, cell in enumerate(cells, start=2):
        if type(cell) in (bool, np.bool_):
            expected.append(bool(cell))
        elif cell is None or (isinstance(cell, str) and not cell.strip()):
            expected.append(True)
        elif type(cell) in (int, float):
            word = str(int(cell)) if math.isfinite(cell) and cell == int(cell) else repr(cell)
            expected.append(True if word in contract.YES else False if word in contract.NO else None)
        elif isinstance(cell, str):
            word = cell.strip().lower()
            expected.append(True if word in contract.YES else False if word in contract.NO else None)
        else:
            expected.append(None)
        if expected[-1] is None:
            expected[-1] = True  # a wrong cell keeps the default and is reported
            wrong.append(row)
    assert table.values["active"].tolist() == expected
    assert [p.row for p in found if p.column == "active"] == wrong
    assert table.invalid["active"].tolist() == [row in wrong for row in range(2, len(cells) + 2)]


def test_duplicate_and_looping_lanes_are_found_as_a_plain_reading_finds_them():
    # Reference: a plain-Python pass over the lanes: a lane whose two ends are one place is a loop; otherwise the
    # first row of each (origin, destination, mode) keeps it and every later row is a duplicate naming that row.
    nodes = ["D1", "D2", "H1", "C1", "C2"]
    rng = np.random.default_rng(7)
    lanes = [[str(rng.choice(nodes)), str(rng.choice(nodes)), str(rng.choice(["", "road", "rail", "Road"])), 1.0]
             for _ in range(120)]
    raw = RawWorkbook("book.xlsx", {
        "Depots": RawSheet("Depots", [["depot", "supply"], ["D1", 10.0], ["D2", 10.0]]),
        "Customers": RawSheet("Customers", [["customer", "demand"], ["C1", 4.0], ["C2", 4.0]]),
        "Hubs": RawSheet("Hubs", [["hub"], ["H1"]]),
        "Lanes": RawSheet("Lanes", [["origin", "destination", "mode", "cost_per_unit"]] + lanes)})
    expected, first = [], {}
    for row, (origin, destination, mode, _) in enumerate(lanes, start=2):
        if origin == destination:
            expected.append((row, f"origin and destination are both '{origin}'"))
            continue
        key = (origin, destination, mode)
        if key in first:
            mode_text = f" with mode '{mode}'" if mode else " with no mode"
            expected.append((row, f"lane {origin} -> {destination}{mode_text} already appears in row {first[key]}"))
        else:
            first[key] = row
    try:
        validate(raw)
    except WorkbookError as exc:
        got = [(p.row, p.message) for p in exc.problems if p.sheet == "Lanes"]
    else:
        got = []
    assert len(expected) > 40
    assert sorted(got) == sorted(expected)
