"""What changed since the last run (lanesolve/model/plan_changes.py, lanesolve/write/earlier_plan.py): solve a
workbook, change a demand, solve again, and the moved lanes and amounts are listed exactly.

The invented network: depot Kelby Yard (supply 50) and depot Oram Quay (supply 100) serve Tarn Foods and Wexo Mart.
Rates: Kelby -> Tarn 1, Kelby -> Wexo 2, Oram -> Tarn 4, Oram -> Wexo 3. Hand arithmetic:

- Tarn 30, Wexo 20: Kelby's 50 covers both (30 x 1 + 20 x 2 = 70); Kelby is full and each unit of it saves 3 at
  Tarn but only 1 at Wexo, so that plan is the unique optimum.
- Tarn 40, Wexo 20: Kelby sends 40 to Tarn and 10 to Wexo, Oram the other 10 to Wexo: 40 + 20 + 30 = 90 (moving a
  Kelby unit from Tarn to Wexo costs 3 - 1 = 2 more), so the lanes move by exactly +10, -10 and +10 (new).
"""

from __future__ import annotations

import json

import openpyxl
import pytest
from click.testing import CliRunner

from lanesolve.cli import main
from lanesolve.model.plan_changes import compare_plans
from lanesolve.pipeline import run
from lanesolve.write.earlier_plan import _flows, _summary, read_earlier_plan

from conftest import write_workbook


def book(tmp_path, tarn=30):
    return write_workbook(tmp_path / "plan.xlsx", {
        "Depots": [["depot", "supply"], ["Kelby Yard", 50], ["Oram Quay", 100]],
        "Customers": [["customer", "demand"], ["Tarn Foods", tarn], ["Wexo Mart", 20]],
        "Lanes": [["origin", "destination", "cost_per_unit"], ["Kelby Yard", "Tarn Foods", 1],
                  ["Kelby Yard", "Wexo Mart", 2], ["Oram Quay", "Tarn Foods", 4], ["Oram Quay", "Wexo Mart", 3]],
        "Settings": [["setting", "value"], ["units", "pallets"], ["currency", "EUR"]]})


def set_demand(path, value):
    workbook = openpyxl.load_workbook(path)
    workbook["Customers"]["B2"] = value
    workbook.save(path)


def test_a_first_run_says_there_is_no_earlier_run(tmp_path):
    path = book(tmp_path)
    outcome = run(path)
    doc = outcome.to_json()
    assert doc["changes"] == [] and doc["changes_summary"] is None
    assert "LS Changes" not in openpyxl.load_workbook(path).sheetnames  # nothing to list: one line elsewhere
    page = (tmp_path / "plan-summary.html").read_text(encoding="utf-8")
    assert "No earlier run: the workbook holds no results of an earlier lanesolve run" in page


def test_solve_change_a_demand_solve_again_lists_the_moved_lanes_exactly(tmp_path):
    path = book(tmp_path)
    first = run(path)
    assert first.result.total_cost == pytest.approx(70.0, abs=1e-6)
    set_demand(path, 40)
    second = run(path)
    doc = second.to_json()
    moved = {(c["origin"], c["destination"]): (c["previous_flow"], c["flow"]) for c in doc["changes"]}
    assert moved == {("Kelby Yard", "Tarn Foods"): (30.0, 40.0), ("Kelby Yard", "Wexo Mart"): (20.0, 10.0),
                     ("Oram Quay", "Wexo Mart"): (0.0, 10.0)}
    summary = doc["changes_summary"]
    assert summary["previous_run_at"] == first.info.started
    assert summary["previous_total_cost"] == pytest.approx(70.0) and summary["total_cost"] == pytest.approx(90.0)
    assert summary["cost_change"] == pytest.approx(20.0)
    assert summary["cost_change_by_component"]["transport"] == pytest.approx(20.0)
    assert summary["lanes_newly_used"] == 1 and summary["lanes_no_longer_used"] == 0
    assert summary["nodes_opened"] == ["Oram Quay"] and summary["nodes_closed"] == []

    sheet = [[c.value for c in r] for r in openpyxl.load_workbook(path)["LS Changes"].iter_rows()]
    lanes = {(r[2], r[3]): (r[0], r[5], r[6], r[7]) for r in sheet[1:] if r[2]}
    assert lanes[("Oram Quay", "Wexo Mart")] == ("Lane newly used", 0, 10, 10)
    assert lanes[("Kelby Yard", "Wexo Mart")] == ("Lane carries less", 20, 10, -10)
    assert ["Depot or hub now used", "Oram Quay"] == sheet[[r[0] for r in sheet].index("Depot or hub now used")][:2]
    page = (tmp_path / "plan-summary.html").read_text(encoding="utf-8")
    assert f"What changed since the run of {first.info.started}" in page
    assert page.index('id="changes"') < page.index("Key figures")  # at the top


def test_an_unchanged_plan_lists_no_lane(tmp_path):
    path = book(tmp_path)
    run(path)
    doc = run(path).to_json()
    assert doc["changes"] == [] and doc["changes_summary"]["cost_change"] == pytest.approx(0.0, abs=1e-9)


def test_the_json_of_the_command_line_carries_the_changes(tmp_path):
    path = book(tmp_path)
    run(path)
    set_demand(path, 40)
    result = CliRunner().invoke(main, ["solve", str(path), "--json", "--quiet"])
    doc = json.loads(result.stdout)
    assert len(doc["changes"]) == 3 and doc["changes_summary"]["lanes_moved"] == 3


def test_headers_of_earlier_versions_still_read():
    # Plain headers without units, as an earlier lanesolve wrote them, and an inactive lane row that is skipped.
    flows = _flows([["origin", "destination", "mode", "flow", "rate", "status"],
                    ["Kelby Yard", "Tarn Foods", None, 30.0, 1.0, "used"],
                    ["Kelby Yard", "Wexo Mart", "", 0.0, 2.0, "inactive, left out"]])
    assert flows.values.tolist() == [["Kelby Yard", "Tarn Foods", "", 30.0]]
    run_at, total, costs = _summary([["Item", "Value"], ["Run at", "2026-01-05T08:00:00+00:00"],
                                     ["Total cost", 70.0], ["Transport", 70.0], ["Handling (EUR)", 0.0],
                                     ["Message", "anything"]])
    assert (run_at, total, costs) == ("2026-01-05T08:00:00+00:00", 70.0, {"transport": 70.0, "handling": 0.0})


def test_a_workbook_without_results_has_no_earlier_plan(tmp_path):
    assert read_earlier_plan(book(tmp_path)) is None


def test_compare_without_an_earlier_plan_says_so():
    changes = compare_plans(None, None, None)
    assert changes.headline.startswith("No earlier run") and changes.to_json() == ([], None)
