"""Headers and sheet names a planner renamed are never silently misread (lanesolve.read.sheets.match_headers,
match_sheets; lanesolve.contract.resemblance).

A header that reads exactly as a contract column (ignoring case, spaces, underscores, hyphens) is the column. One
that only looks like a column the sheet lacks -- units in brackets, "?", "/", a synonym, a misspelling -- is an error
at its cell, naming the column it probably means; read as written it would be ignored and the column's default
would take its place. Extra columns that look like nothing stay allowed and are ignored.

The misreadings tested here are the ones planners reported: a renamed cost header with rate_per_distance set (every
typed rate replaced by rate x distance), "Capacity (pallets)" (every lane capacity dropped), "Active?" (an inactive
lane re-activated), two sheets that both mean Lanes.
"""

from __future__ import annotations

import pytest

from lanesolve.errors import Problem, WorkbookError
from lanesolve.read.reader import read_workbook
from lanesolve.read.validate import validate

from conftest import valid_sheets, write_workbook


def load(tmp_path, sheets):
    return validate(read_workbook(write_workbook(tmp_path / "book.xlsx", sheets)))


def errors_of(tmp_path, sheets) -> list[Problem]:
    with pytest.raises(WorkbookError) as caught:
        load(tmp_path, sheets)
    return caught.value.problems


def rename(sheets, sheet, old, new):
    header = sheets[sheet][0]
    header[header.index(old)] = new
    return sheets


@pytest.mark.parametrize("header", ["Cost/unit", "Unit cost", "rate", "cost per unit (EUR)"])
def test_renamed_cost_header_with_rate_per_distance_is_an_error_not_rate_times_distance(tmp_path, header):
    sheets = rename(valid_sheets(), "Lanes", "cost_per_unit", header)
    sheets["Lanes"][0].append("distance")
    for row in sheets["Lanes"][1:]:
        row.append(100)
    sheets["Settings"].append(["rate_per_distance", 0.05])
    (problem,) = errors_of(tmp_path, sheets)
    assert (problem.sheet, problem.row, problem.column) == ("Lanes", 1, header)
    assert problem.message == (f"header '{header}' in cell C1 is not a column lanesolve reads, but it looks like "
                               f"'cost_per_unit', which this sheet lacks; as written it would be ignored")
    assert problem.hint.startswith("rename the header to 'cost_per_unit'")


def test_capacity_with_units_in_brackets_is_an_error_not_dropped_capacities(tmp_path):
    sheets = rename(valid_sheets(), "Lanes", "capacity", "Capacity (pallets)")
    (problem,) = errors_of(tmp_path, sheets)
    assert problem.column == "Capacity (pallets)" and "cell E1" in problem.message
    assert "looks like 'capacity'" in problem.message
    assert "units belong in the Settings rows units and currency" in problem.hint


def test_active_with_question_mark_is_an_error_not_a_reactivated_lane(tmp_path):
    sheets = rename(valid_sheets(), "Lanes", "active", "Active?")
    (problem,) = errors_of(tmp_path, sheets)
    assert problem.column == "Active?" and "cell G1" in problem.message and "looks like 'active'" in problem.message


def test_look_alike_of_a_required_column_is_one_error_not_two(tmp_path):
    sheets = rename(valid_sheets(), "Customers", "demand", "Demand (pallets)")
    (problem,) = errors_of(tmp_path, sheets)
    assert "looks like 'demand' (a required column)" in problem.message


def test_extra_columns_that_look_like_nothing_stay_allowed(tmp_path):
    sheets = valid_sheets()
    for extra in ("notes", "Owner", "Region (sales)", "checked?"):
        for name, rows in sheets.items():
            rows[0].append(extra)
            for row in rows[1:]:
                row.append("x")
    network, warnings = load(tmp_path, sheets)
    assert len(network.lanes) == 5 and warnings == []


def test_second_copy_of_a_present_column_warns_that_it_is_ignored(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes"][0].append("Capacity (pallets)")
    for row in sheets["Lanes"][1:]:
        row.append(1)
    network, warnings = load(tmp_path, sheets)
    (warning,) = warnings
    assert warning.column == "Capacity (pallets)" and "read from cell E1; this column is ignored" in warning.message
    assert network.lanes["capacity"].iloc[0] == pytest.approx(90.0, abs=1e-12)


def test_look_alike_header_in_a_lanes_file_is_an_error_naming_the_file(tmp_path):
    (tmp_path / "lanes.csv").write_text("origin,destination,Unit cost\nNorth Yard,Midway,2\n", encoding="utf-8")
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", "lanes.csv"])
    problem = [p for p in errors_of(tmp_path, sheets) if p.sheet == "lanes.csv"][0]
    assert problem.column == "Unit cost" and "looks like 'cost_per_unit'" in problem.message


# ---------------------------------------------------------------------------------------------------- sheet names


def test_lanes_and_its_copy_lanes_2_are_an_error_naming_both(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes (2)"] = [row[:] for row in sheets["Lanes"]]
    (problem,) = errors_of(tmp_path, sheets)
    assert problem.sheet == "Lanes (2)"
    assert problem.message == ("sheets 'Lanes' and 'Lanes (2)' both look like the Lanes sheet; lanesolve would "
                               "read 'Lanes' and ignore 'Lanes (2)'")


def test_look_alike_of_an_absent_optional_sheet_is_an_error(tmp_path):
    sheets = valid_sheets()
    sheets["Hub"] = sheets.pop("Hubs")
    problems = errors_of(tmp_path, sheets)
    problem = [p for p in problems if p.sheet == "Hub"][0]
    assert "looks like the Hubs sheet, but lanesolve reads only a sheet named 'Hubs'" in problem.message
    assert "rename it to 'Hubs'" in problem.hint


def test_look_alike_of_the_scenarios_sheet_is_an_error(tmp_path):
    sheets = valid_sheets()
    sheets["Scenario"] = [["scenario", "sheet", "match", "column", "change", "value"]]
    (problem,) = errors_of(tmp_path, sheets)
    assert problem.sheet == "Scenario" and "looks like the Scenarios sheet" in problem.message


def test_two_scenarios_sheets_are_an_error(tmp_path):
    sheets = valid_sheets()
    header = [["scenario", "sheet", "match", "column", "change", "value"]]
    sheets["Scenarios"], sheets["SCENARIOS "] = header, header
    (problem,) = errors_of(tmp_path, sheets)
    assert "both count as the Scenarios sheet" in problem.message
