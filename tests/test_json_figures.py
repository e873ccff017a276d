"""``--json`` carries the unused lanes' figures capped as LS Sensitivity caps them, counts the rest in
``sensitivity_omitted``, and lists every one with ``--all-figures``."""

import json
import math

import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import write_workbook

from lanesolve.cli import main
from lanesolve.model.result import JSON_UNUSED_LANES, Result, SolveStatus, capped_figures
from lanesolve.write import writeback

PARALLEL = 600  # lanes between one depot and one customer: one used, 599 unused, more than the cap


def _figures(n_lanes: int) -> Result:
    rows = [{"figure": "marginal_cost", "item": "C1", "value": 12.5, "unique": True, "basis": "LP", "text": "c1"},
            {"figure": "supply_value", "item": "D1", "value": 3.0, "unique": True, "basis": "LP", "text": "d1"}]
    # Figures n, n-1, ..., 1 so the smallest come last; one lane has no figure (NaN), so it must sort last.
    for k in range(n_lanes):
        rows.append({"figure": "reduced_cost", "item": f"L{k}", "value": float(n_lanes - k) if k else math.nan,
                     "unique": bool(k), "basis": "LP", "text": f"lane {k}"})
    return Result(SolveStatus.OPTIMAL, total_cost=1.0, sensitivity=pd.DataFrame(rows))


def test_json_cap_is_the_sheets_cap():
    assert JSON_UNUSED_LANES == writeback.MAX_REDUCED_COST_ROWS


def test_json_lists_the_same_unused_lanes_as_the_sheet_and_counts_the_rest():
    result = _figures(JSON_UNUSED_LANES + 250)
    doc = result.to_json()
    sheet = writeback.sensitivity_sheet(result)
    sheet_lanes = [r[1] for r in sheet.rows if r[1] is not None and str(r[1]).startswith("L")]
    json_lanes = [f["item"] for f in doc["sensitivity"] if f["figure"] == "reduced_cost"]
    assert json_lanes == sheet_lanes
    assert len(json_lanes) == JSON_UNUSED_LANES
    assert doc["sensitivity_omitted"] == 250
    # Every figure of another kind is kept.
    assert [f["item"] for f in doc["sensitivity"][:2]] == ["C1", "D1"]


def test_all_figures_lists_every_unused_lane():
    result = _figures(JSON_UNUSED_LANES + 250)
    doc = result.to_json(all_figures=True)
    assert len(doc["sensitivity"]) == 2 + JSON_UNUSED_LANES + 250
    assert doc["sensitivity_omitted"] == 0
    assert [f["item"] for f in doc["sensitivity"]] == result.sensitivity["item"].tolist()


def test_small_plans_omit_nothing():
    result = _figures(5)
    assert result.to_json()["sensitivity_omitted"] == 0
    assert len(result.to_json()["sensitivity"]) == 7
    kept, omitted = capped_figures(result.sensitivity)
    assert kept is result.sensitivity and omitted == 0


def test_two_sided_figures_are_capped_by_the_one_more_unit_side():
    # A frame with both sides (value_up, value_down): the nearest to paying is the smallest value_up, a lane no plan
    # can use (inf) after every finite one, a lane without a figure (NaN) last.
    frame = pd.DataFrame({"figure": ["reduced_cost"] * 5, "item": list("abcde"),
                          "value": [float("nan")] * 5, "value_up": [3.0, float("inf"), 1.0, float("nan"), 2.0],
                          "value_down": [float("nan")] * 5, "unique": [True] * 5})
    kept, omitted = capped_figures(frame, limit=4)
    assert kept["item"].tolist() == ["c", "e", "a", "b"] and omitted == 1


@pytest.fixture
def parallel_lanes(tmp_path):
    # One depot with spare supply, one customer, 600 lanes between them by different modes (costs 1.00, 1.01, ...,
    # 6.99) and a scenario, so the run has a baseline and a scenario result to carry figures.
    lanes = [["D1", "C1", f"m{k:03d}", round(1 + 0.01 * k, 2)] for k in range(PARALLEL)]
    return write_workbook(tmp_path / "parallel.xlsx", {
        "Depots": [["depot", "supply"], ["D1", 20]],
        "Customers": [["customer", "demand"], ["C1", 10]],
        "Lanes": [["origin", "destination", "mode", "cost_per_unit"], *lanes],
        "Scenarios": [["scenario", "sheet", "match", "column", "change", "value"],
                      ["dearer", "Lanes", "*", "cost_per_unit", "add", 1]],
    })


def _lane_figures() -> pd.DataFrame:
    # Figures for the 599 unused lanes of the workbook above, in lane order, lane k's figure 0.01 k (its cost less
    # the used lane's: the reduced cost c_k - (pi_C1 - pi_D1) of min-cost flow duality, Ahuja, Magnanti & Orlin,
    # Network Flows, 1993, section 9.4). Set on the run's results by hand so this test checks what --json does with
    # figures, whichever stage computes them.
    rows = [{"figure": "marginal_cost", "item": "C1", "value": 1.0, "unique": True, "basis": "LP", "text": "c1"}]
    rows += [{"figure": "reduced_cost", "item": f"D1 -> C1 (m{k:03d})", "value": round(0.01 * k, 2),
              "unique": True, "basis": "LP", "text": f"lane {k}"} for k in range(PARALLEL - 1, 0, -1)]
    return pd.DataFrame(rows)


@pytest.fixture
def outcome_with_figures(parallel_lanes, tmp_path, monkeypatch):
    from lanesolve import pipeline

    outcome = pipeline.run(parallel_lanes, output=tmp_path / "out.xlsx")
    for result in (outcome.result, *outcome.scenario_results.values()):
        result.sensitivity = _lane_figures()
    # The CLI gets this outcome from its run, so the test sees what the CLI prints of it.
    monkeypatch.setattr(pipeline, "run", lambda *args, **kwargs: outcome)
    return outcome


def _unused(doc: dict) -> list[str]:
    return [f["item"] for f in doc["sensitivity"] if f["figure"] == "reduced_cost"]


def test_cli_json_caps_unused_lanes_in_the_baseline_and_every_scenario(parallel_lanes, outcome_with_figures):
    result = CliRunner().invoke(main, ["solve", str(parallel_lanes), "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert [s["scenario"] for s in doc["scenarios"]] == ["dearer"]
    for part in (doc, *doc["scenarios"]):
        # The nearest to paying are lanes 1..500, smallest figure first; the marginal cost is kept.
        assert _unused(part) == [f"D1 -> C1 (m{k:03d})" for k in range(1, JSON_UNUSED_LANES + 1)]
        assert part["sensitivity_omitted"] == PARALLEL - 1 - JSON_UNUSED_LANES
        assert part["sensitivity"][0]["figure"] == "marginal_cost"


def test_cli_all_figures_lists_every_unused_lane(parallel_lanes, outcome_with_figures):
    result = CliRunner().invoke(main, ["solve", str(parallel_lanes), "--json", "--all-figures"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    for part in (doc, *doc["scenarios"]):
        assert len(_unused(part)) == PARALLEL - 1
        assert part["sensitivity_omitted"] == 0


def test_all_figures_without_json_is_a_usage_error(parallel_lanes):
    result = CliRunner().invoke(main, ["solve", str(parallel_lanes), "--all-figures"])
    assert result.exit_code == 2
    assert "--all-figures needs --json" in result.output
