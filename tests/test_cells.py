"""Cell values lanesolve refuses rather than misread (lanesolve.read.cells, lanesolve.contract): numbers beyond
what the solvers represent well, NaN values, ids that look alike but are encoded differently, ids no cell can hold,
ambiguous number text in Settings.

The bounds are lanesolve's stated ones (contract.MAX_MAGNITUDE 1e12, MIN_MAGNITUDE 1e-9, MAX_ID_LENGTH 32,767); the
cell limit of 32,767 characters is the spreadsheet format's (Excel specifications and limits, recalled from memory).
The composed and decomposed forms of "é" (U+00E9, and U+0065 U+0301) are canonically equivalent and have the same
NFC form (Unicode Standard Annex #15, "Unicode Normalization Forms"); Python's unicodedata agrees, checked below.
"""

from __future__ import annotations

import math
import unicodedata

import pytest

from lanesolve.errors import Problem, WorkbookError
from lanesolve.read.reader import RawSheet, RawWorkbook, read_workbook
from lanesolve.read.validate import validate

from conftest import valid_sheets, write_workbook


def load(tmp_path, sheets):
    return validate(read_workbook(write_workbook(tmp_path / "book.xlsx", sheets)))


def errors_of(tmp_path, sheets) -> list[Problem]:
    with pytest.raises(WorkbookError) as caught:
        load(tmp_path, sheets)
    return caught.value.problems


def raw_errors(sheets) -> list[Problem]:
    raw = RawWorkbook("hand.xlsx", {name: RawSheet(name, rows) for name, rows in sheets.items()})
    with pytest.raises(WorkbookError) as caught:
        validate(raw)
    return caught.value.problems


def set_cell(sheets, sheet, row, column, value):
    header = sheets[sheet][0]
    sheets[sheet][row - 1][header.index(column)] = value
    return sheets


@pytest.mark.parametrize("sheet, column, value", [
    ("Lanes", "cost_per_unit", 2e12), ("Depots", "supply", -3e12), ("Customers", "demand", 1.5e13),
    ("Lanes", "capacity", 1e15), ("Customers", "unmet_penalty", 5e12), ("Lanes", "fixed_cost", 1e300),
])
def test_numbers_beyond_1e12_are_errors_naming_the_cell_and_the_bound(tmp_path, sheet, column, value):
    sheets = set_cell(valid_sheets(), sheet, 2, column, value)
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.sheet, problem.row, problem.column) == (sheet, 2, column)
    assert "its size is beyond 1e+12, the most lanesolve accepts" in problem.message


@pytest.mark.parametrize("value", [1e-10, -5e-12, 3e-300])
def test_non_zero_numbers_nearer_zero_than_1e_9_are_errors(tmp_path, value):
    sheets = set_cell(valid_sheets(), "Lanes", 3, "cost_per_unit", value)
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.row, problem.column) == (3, "cost_per_unit")
    assert "nearer zero than 1e-09" in problem.message


def test_numbers_at_the_bounds_and_zero_are_read(tmp_path):
    sheets = set_cell(valid_sheets(), "Lanes", 2, "cost_per_unit", 0)
    set_cell(sheets, "Lanes", 3, "cost_per_unit", 1e-9)
    set_cell(sheets, "Lanes", 2, "capacity", 1e12)
    network, _ = load(tmp_path, sheets)
    assert network.lanes["cost_per_unit"].tolist()[:2] == pytest.approx([0.0, 1e-9], rel=1e-12, abs=0)
    assert network.lanes["capacity"].iloc[0] == pytest.approx(1e12, rel=1e-12)


def test_setting_beyond_1e12_is_an_error(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["unmet_penalty", 4e12])
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.sheet, problem.row) == ("Settings", 4) and "beyond 1e+12" in problem.message


def test_nan_value_is_named_nan_not_blank():
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", math.nan)  # a required number: NaN must not read as "supply is blank"
    set_cell(sheets, "Lanes", 2, "capacity", math.nan)  # blank would mean "no limit"
    problems = raw_errors(sheets)
    assert [(p.sheet, p.row, p.column, p.message) for p in problems] == [
        ("Depots", 2, "supply", "NaN is not a finite number"),
        ("Lanes", 2, "capacity", "NaN is not a finite number")]


def test_ids_differing_only_in_composition_are_one_id_and_a_duplicate(tmp_path):
    composed, decomposed = "Caf\u00e9 Nord", "Cafe\u0301 Nord"
    assert composed != decomposed and unicodedata.normalize("NFC", decomposed) == composed
    sheets = valid_sheets()
    sheets["Customers"] += [[composed, 5, None], [decomposed, 5, None]]
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.sheet, problem.row) == ("Customers", 5)
    assert problem.message == f"customer '{composed}' is already used in row 4"
    assert "did you mean" not in problem.hint


def test_lane_naming_a_decomposed_id_reaches_the_composed_node(tmp_path):
    sheets = valid_sheets()
    sheets["Customers"].append(["Caf\u00e9 Nord", 5, None])
    sheets["Lanes"].append(["North Yard", "Cafe\u0301 Nord", 2.0, "road", None, None, "yes"])
    network, _ = load(tmp_path, sheets)
    assert network.lanes["destination"].iloc[-1] == "Caf\u00e9 Nord"


def test_id_longer_than_a_cell_holds_is_an_error():
    sheets = valid_sheets()
    sheets["Depots"].append(["D" * 32_768, 5, None, None, None])
    (problem,) = raw_errors(sheets)
    assert (problem.sheet, problem.row, problem.column) == ("Depots", 4, "depot")
    assert problem.message == "the id is 32,768 characters long; a spreadsheet cell holds at most 32,767"


@pytest.mark.parametrize("text", ["1.200", "2,5"])
def test_setting_value_with_ambiguous_separators_is_an_error(tmp_path, text):
    sheets = valid_sheets()
    sheets["Settings"].append(["unmet_penalty", text])
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.sheet, problem.row, problem.column) == ("Settings", 4, "value")
    assert problem.message.startswith(f"'{text}' is ambiguous") and "plain number" in problem.hint


def test_type_masks_classify_every_kind_of_cell_as_a_cell_by_cell_reading_does():
    # Independent check: each cell classified on its own, in plain Python, by the rules the module states (exact
    # types: text, number, yes/no, date; None and empty text are blank, a float NaN is a number).
    import datetime as dt

    import numpy as np
    import pandas as pd

    from lanesolve.read.cells import type_masks

    cells = [None, "", "  ", " a ", "x", 1, 1.5, np.float64(2), np.int64(3), np.int32(4), np.float32(1.0), True,
             np.bool_(False), float("nan"), dt.date(2020, 1, 1), dt.datetime(2020, 1, 1), dt.time(1),
             dt.timedelta(1), pd.Timestamp("2020-01-01"), pd.NaT, "nan", object()]
    values = pd.Series(cells, index=range(100, 100 + len(cells)), dtype=object)
    masks = type_masks(values)
    numbers = (float, int, np.float64, np.float32, np.int64, np.int32)
    dates = (dt.date, dt.datetime, dt.time, dt.timedelta, pd.Timestamp)
    for position, cell in enumerate(cells):
        kind = type(cell)
        text = cell.strip() if kind is str else ""
        expected = {"str": kind is str, "number": kind in numbers, "bool": kind in (bool, np.bool_),
                    "date": kind in dates, "blank": cell is None or cell is pd.NaT or (kind is str and text == ""),
                    "stripped": text}
        got = {name: masks[name].iloc[position] for name in expected}
        assert got == expected, (cell, got, expected)
    assert all((masks[name].index == values.index).all() for name in masks)
