"""Scenarios rows are read as strictly as the input sheets (lanesolve.model.scenarios.parse_scenarios with the
reader's percent cells; lanesolve.pipeline.load end to end).

A cell shown as "10%" stores 0.1 (ECMA-376 Part 1, 18.8.30: built-in number formats 9 "0%" and 10 "0.00%"); as a
scale, 0.1 cuts a value to a tenth, while a planner typing 10% may have meant "10 % more". lanesolve refuses it.
"""

from __future__ import annotations

import openpyxl
import pytest

from lanesolve import pipeline
from lanesolve.errors import WorkbookError
from lanesolve.model.scenarios import parse_scenarios
from lanesolve.read.reader import read_workbook

from conftest import valid_sheets, write_workbook

HEADER = ["scenario", "sheet", "match", "column", "change", "value"]


def with_scenarios(tmp_path, rows, percent_rows=(), number_format="0%"):
    """The valid test network plus a Scenarios sheet; value cells of ``percent_rows`` get ``number_format``."""
    path = write_workbook(tmp_path / "book.xlsx", {**valid_sheets(), "Scenarios": [HEADER, *rows]})
    book = openpyxl.load_workbook(path)
    for row in percent_rows:
        book["Scenarios"].cell(row=row, column=6).number_format = number_format
    book.save(path)
    return path


def load_problems(path):
    with pytest.raises(WorkbookError) as caught:
        pipeline.load(path)
    return caught.value.problems


def test_reader_lists_percent_formatted_cells_of_the_scenarios_sheet(tmp_path):
    path = with_scenarios(tmp_path, [["a", "Lanes", "*", "cost_per_unit", "scale", 0.1],
                                     ["b", "Lanes", "*", "cost_per_unit", "scale", 0.2],
                                     ["c", "Lanes", "*", "cost_per_unit", "scale", 0.3]], percent_rows=(2,))
    book = openpyxl.load_workbook(path)
    book["Scenarios"]["F3"].number_format = '0.0" pct%"'  # a quoted % is literal text, not a percent format
    book["Scenarios"]["F4"].number_format = "0.00%"
    book.save(path)
    assert read_workbook(path).sheets["Scenarios"].percent_cells == {(2, 6), (4, 6)}


@pytest.mark.parametrize("number_format", ["0%", "0.0%"])
def test_percent_formatted_scale_is_refused_naming_the_row(tmp_path, number_format):
    path = with_scenarios(tmp_path, [["cheaper", "Lanes", "*", "cost_per_unit", "scale", 0.1]], percent_rows=(2,),
                          number_format=number_format)
    (problem,) = load_problems(path)
    assert (problem.sheet, problem.row, problem.column) == ("Scenarios", 2, "value")
    assert problem.message == ("the value 10% is in a percent-formatted cell, so it is stored as 0.1; for scale "
                               "that is ambiguous: times 0.1, or 10 % more?")
    assert "type a plain factor in a cell formatted as a number: 1.1 for 10 % more, 0.9 for 10 % less" \
        in problem.hint


def test_percent_formatted_add_is_refused(tmp_path):
    path = with_scenarios(tmp_path, [["more", "Customers", "*", "demand", "add", 0.05]], percent_rows=(2,))
    (problem,) = load_problems(path)
    assert problem.row == 2 and "for add that is ambiguous: 0.05 more, or 5 % more?" in problem.message


def test_plain_scale_factor_in_a_number_cell_is_applied(tmp_path):
    path = with_scenarios(tmp_path, [["dearer", "Lanes", "*", "cost_per_unit", "scale", 1.1]])
    raw = read_workbook(path)
    scenarios, problems = parse_scenarios(raw.sheets["Scenarios"].rows, raw.sheets["Scenarios"].percent_cells)
    assert problems == [] and scenarios[0].changes[0].value == pytest.approx(1.1, abs=1e-12)


def test_scenario_setting_an_unknown_solver_fails_check_naming_the_row(tmp_path):
    path = with_scenarios(tmp_path, [["fast", "Settings", "solver", "value", "set", "gurobi"]])
    (problem,) = load_problems(path)
    assert (problem.sheet, problem.row, problem.column) == ("Scenarios", 2, "value")
    assert problem.message == "'gurobi' is not one of auto, cbc, highs for setting 'solver'"


def test_scenario_setting_a_known_solver_in_any_case_is_read(tmp_path):
    scenarios, problems = parse_scenarios([HEADER, ["fast", "Settings", "solver", None, "set", " HiGHS "]])
    assert problems == [] and scenarios[0].changes[0].value == "highs"


@pytest.mark.parametrize("setting, value", [("lanes_file", "more.csv"), ("units", "tonnes"), ("currency", "USD"),
                                            ("rate_per_distance", 0.2), ("circuity_factor", 1.3),
                                            ("distance_unit", "mi"), ("single_source", "yes")])
def test_settings_a_scenario_cannot_change_are_refused_by_row(setting, value):
    _, problems = parse_scenarios([HEADER, ["x", "Settings", setting, "value", "set", value]])
    (problem,) = problems
    assert (problem.row, problem.column) == (2, "match")
    assert problem.message.startswith(f"a scenario cannot change setting '{setting}': ")


def test_scenario_setting_value_is_checked_like_the_settings_sheet():
    _, problems = parse_scenarios([HEADER, ["x", "Settings", "mip_gap", "value", "set", -1],
                                   ["y", "Settings", "time_limit_s", "value", "set", "1.200"]])
    assert [(p.row, p.message) for p in problems] == [
        (2, "-1 is negative; 'mip_gap' must be 0 or more"),
        (3, "'1.200' is ambiguous: 1.2 with a decimal point, or 1200 with a thousands point")]


@pytest.mark.parametrize("value, message", [
    ("1,5", "'1,5' is ambiguous: 1.5 with a decimal comma, or 15 with a thousands comma"),
    (float("nan"), "NaN: it is not a finite number"),
    (3e12, "3000000000000: its size is beyond 1e+12, the most lanesolve accepts"),
])
def test_scenario_values_lanesolve_would_misread_are_refused(value, message):
    _, problems = parse_scenarios([HEADER, ["x", "Lanes", "*", "capacity", "set", value]])
    (problem,) = problems
    assert (problem.row, problem.column, problem.message) == (2, "value", message)


def test_scale_that_makes_a_value_beyond_1e12_is_refused():
    from lanesolve.model.network import make_network
    from lanesolve.model.scenarios import Change, Scenario, apply_scenario

    base = make_network([{"id": "D", "supply": 9e11}], [{"id": "C", "demand": 8}],
                        [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    _, problems = apply_scenario(base, Scenario("x", [Change("Depots", "*", "supply", "scale", 10.0, 2)]))
    (problem,) = problems
    assert problem.row == 2 and "makes Depots row" in problem.message and "not allowed" in problem.message


def test_scenario_match_with_a_decomposed_accent_finds_the_composed_id():
    scenarios, problems = parse_scenarios([HEADER, ["x", "Customers", "Cafe\u0301 Nord", "demand", "add", 5]])
    assert problems == [] and scenarios[0].changes[0].match == "Caf\u00e9 Nord"  # NFC (Unicode Standard Annex #15)


def test_scenarios_problems_are_reported_with_the_input_sheets_in_one_pass(tmp_path):
    sheets = {**valid_sheets(), "Scenarios": [HEADER, ["fast", "Settings", "solver", "value", "set", "gurobi"]]}
    sheets["Depots"][1][1] = "lots"  # an input-sheet error as well
    with pytest.raises(WorkbookError) as caught:
        pipeline.load(write_workbook(tmp_path / "both.xlsx", sheets))
    assert [(p.sheet, p.row) for p in caught.value.problems] == [("Depots", 2), ("Scenarios", 2)]
