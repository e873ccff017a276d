"""The Carriers and Rate breaks sheets and the Lanes columns carrier / minimum_charge (lanesolve/read/carrier_sheets.py).

One test per bad-input cause, each checking the sheet, row and column named and the hint; all problems of a
workbook come back in one pass. The network (Kelby Yard, Tarn Foods, Wexo Mart; carriers Alpha and Brava) is
invented.
"""

from __future__ import annotations

import math

import pytest

from lanesolve.errors import Problem, WorkbookError
from lanesolve.read.reader import read_workbook
from lanesolve.read.validate import validate

from conftest import write_workbook

LANES = [["origin", "destination", "mode", "cost_per_unit", "carrier", "minimum_charge"],
         ["Kelby Yard", "Tarn Foods", "road", 5, "Alpha", None],
         ["Kelby Yard", "Tarn Foods", "rail", 6, "Brava", 80],
         ["Kelby Yard", "Wexo Mart", "road", 4, "Alpha", None]]


def sheets(carriers=None, breaks=None, lanes=None):
    book = {"Depots": [["depot", "supply"], ["Kelby Yard", 100]],
            "Customers": [["customer", "demand"], ["Tarn Foods", 60], ["Wexo Mart", 30]],
            "Lanes": [list(r) for r in (lanes or LANES)]}
    if carriers is not None:
        book["Carriers"] = [["carrier", "min_volume", "max_volume", "max_share"], *carriers]
    if breaks is not None:
        book["Rate breaks"] = [["origin", "destination", "mode", "from_volume", "cost_per_unit", "kind"], *breaks]
    return book


def load(tmp_path, book):
    return validate(read_workbook(write_workbook(tmp_path / "book.xlsx", book)))


def problems(tmp_path, book) -> list[Problem]:
    with pytest.raises(WorkbookError) as caught:
        load(tmp_path, book)
    return caught.value.problems


def only(found: list[Problem], **where) -> Problem:
    chosen = [p for p in found if all(getattr(p, k) == v for k, v in where.items())]
    assert len(chosen) == 1, f"expected one problem with {where}, got {[str(p) for p in found]}"
    return chosen[0]


def test_valid_sheets_give_carriers_breaks_and_lane_columns(tmp_path):
    network, warnings = load(tmp_path, sheets(
        carriers=[["Alpha", 10, 80, None], ["Brava", None, None, 0.4]],
        breaks=[["Kelby Yard", "Tarn Foods", "road", 20, 4.5, "all_units"],
                ["Kelby Yard", "Tarn Foods", "road", 50, 4, "all_units"]]))
    assert warnings == []
    assert network.lanes["carrier"].tolist() == ["Alpha", "Brava", "Alpha"]
    assert network.lanes["minimum_charge"].tolist() == [0.0, 80.0, 0.0]
    carriers = network.carriers.set_index("id")
    assert carriers.loc["Alpha", "max_volume"] == 80 and math.isnan(carriers.loc["Alpha", "max_share"])
    assert carriers.loc["Brava", "max_share"] == pytest.approx(0.4)
    breaks = network.rate_breaks
    assert breaks[["lane", "from_volume", "cost_per_unit", "kind", "row"]].values.tolist() == [
        [0, 20.0, 4.5, "all_units", 2], [0, 50.0, 4.0, "all_units", 3]]


def test_a_rate_break_for_an_unknown_lane_names_the_lane_and_its_modes(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "air", 50, 4, "incremental"]]))
    problem = only(found, sheet="Rate breaks", row=2, column="origin")
    assert "no lane Kelby Yard -> Tarn Foods with mode 'air'" in problem.message
    assert "'road'" in problem.hint and "'rail'" in problem.hint


def test_rate_breaks_out_of_order_are_an_error(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "road", 50, 4, "incremental"],
                                              ["Kelby Yard", "Tarn Foods", "road", 20, 4.5, "incremental"]]))
    problem = only(found, sheet="Rate breaks", row=3, column="from_volume")
    assert "out of order" in problem.message and "row 2" in problem.message
    assert "smallest" in problem.hint


def test_a_repeated_break_volume_is_an_error(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "road", 50, 4, "incremental"],
                                              ["Kelby Yard", "Tarn Foods", "road", 50, 3, "incremental"]]))
    problem = only(found, sheet="Rate breaks", row=3, column="from_volume")
    assert "already has a break at 50 (row 2)" in problem.message


def test_mixed_kinds_on_one_lane_are_an_error(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "road", 20, 4, "incremental"],
                                              ["Kelby Yard", "Tarn Foods", "road", 50, 3, "all_units"]]))
    problem = only(found, sheet="Rate breaks", row=3, column="kind")
    assert "'incremental' (row 2) and 'all_units'" in problem.message and "share one kind" in problem.message


def test_a_break_at_zero_volume_is_an_error(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "road", 0, 4, "incremental"]]))
    problem = only(found, sheet="Rate breaks", row=2, column="from_volume")
    assert "from_volume is 0" in problem.message and "cost_per_unit on Lanes" in problem.hint


def test_an_unknown_kind_is_an_error_with_a_suggestion(tmp_path):
    found = problems(tmp_path, sheets(breaks=[["Kelby Yard", "Tarn Foods", "road", 10, 4, "all units"]]))
    problem = only(found, sheet="Rate breaks", row=2, column="kind")
    assert "all_units" in problem.hint


def test_minimum_above_maximum_is_an_error(tmp_path):
    found = problems(tmp_path, sheets(carriers=[["Alpha", 90, 40, None]]))
    problem = only(found, sheet="Carriers", row=2, column="min_volume")
    assert "min_volume 90 is more than max_volume 40" in problem.message


@pytest.mark.parametrize("share", [1.5, -0.2])
def test_a_share_outside_zero_to_one_is_an_error(tmp_path, share):
    found = problems(tmp_path, sheets(carriers=[["Alpha", None, None, share]]))
    problem = only(found, sheet="Carriers", row=2, column="max_share")
    assert "1" in problem.message or "negative" in problem.message


def test_a_carrier_listed_twice_is_an_error(tmp_path):
    found = problems(tmp_path, sheets(carriers=[["Alpha", 10, None, None], ["Alpha", None, 50, None]]))
    problem = only(found, sheet="Carriers", row=3, column="carrier")
    assert "already listed in row 2" in problem.message


def test_a_carrier_no_lane_names_is_a_warning(tmp_path):
    network, warnings = load(tmp_path, sheets(carriers=[["Corro", None, 50, None]]))
    warning = only(warnings, sheet="Carriers", row=2, column="carrier")
    assert warning.severity == "warning" and "no active lane names carrier 'Corro'" in warning.message
    assert network.carriers["id"].tolist() == ["Corro"]


def test_every_problem_is_reported_in_one_pass(tmp_path):
    found = problems(tmp_path, sheets(
        carriers=[["Alpha", 90, 40, None], ["Brava", None, None, 2]],
        breaks=[["Kelby Yard", "Nowhere", "road", 50, 4, "incremental"],
                ["Kelby Yard", "Tarn Foods", "road", 0, 4, "incremental"]],
        lanes=[*LANES, ["Kelby Yard", "Wexo Mart", "rail", 4, "Brava", -5]]))
    where = {(p.sheet, p.row, p.column) for p in found}
    assert {("Carriers", 2, "min_volume"), ("Carriers", 3, "max_share"), ("Rate breaks", 2, "origin"),
            ("Rate breaks", 3, "from_volume"), ("Lanes", 5, "minimum_charge")} <= where
