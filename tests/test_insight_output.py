"""Presenting design plans: the design, trips, sensitivity and why-no-plan sheets, their HTML sections, the mail's text
part and the CLI on a no-plan workbook.

Every scenario here is invented (place names of our own). Expected figures are worked out by hand in the comments;
the no-plan case is also checked against networkx's maximum flow (an implementation outside lanesolve).
"""

from __future__ import annotations

import json
import math

import networkx as nx
import openpyxl
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import write_workbook

from lanesolve.report import summary as report
from lanesolve.report import text as report_text
from lanesolve.write import writeback
from lanesolve.cli import main
from lanesolve.model.network import Settings, make_network
from lanesolve.pipeline import RunInfo
from lanesolve.model.sensitivity import FIXED_BASIS
from lanesolve.model.analyse import solve_and_analyse as solve

INFO = RunInfo("/plans/week-07.xlsx", "/plans/week-07.xlsx", "/plans/week-07-summary.html", "cd" * 32)


def design_network(depot: str = "Quistmoor", customer: str = "Runnelby") -> object:
    """A network with design decisions whose optimum is found by hand.

    Depot ``depot`` (status decide, fixed 10, supply 40) serves customer ``customer`` (demand 30) on a lane run in
    trips of 20 at 35 per trip plus 1 per unit, and Harrowquay (demand 5) in trips of 10 at 5 per trip plus 1 per
    unit; depot Tarrowick (open, supply 100) serves ``customer`` at 4 per unit; depot Mellisford (decide, fixed 400)
    at 0 per unit.

    By hand: Harrowquay is reachable only from ``depot``, so it opens (10). For ``customer``: one trip of 20 from
    ``depot`` (20 + 35) and 10 from Tarrowick (40) costs 95; a second trip instead (30 + 70 = 100) costs more, and
    Mellisford (400 fixed) saves at most 4 * 30 = 120 - 0 over Tarrowick, less than its charge. Total: fixed 10 +
    transport 20 + 40 + 5 = 65 + trips 35 + 5 = 40 -> 115. The trips: 1 full truck (20 of 20) and 1 truck with 5 of 10
    (50 %). With the decisions fixed, one more unit at ``customer`` comes from Tarrowick: 4; one more unit of room in
    the planned trip saves 4 - 1 = 3.
    """
    return make_network(
        depots=[{"id": depot, "supply": 40, "fixed_cost": 10, "status": "decide"},
                {"id": "Tarrowick", "supply": 100, "status": "open"},
                {"id": "Mellisford", "supply": 100, "fixed_cost": 400}],
        customers=[{"id": customer, "demand": 30}, {"id": "Harrowquay", "demand": 5}],
        lanes=[{"origin": depot, "destination": customer, "cost_per_unit": 1, "trip_capacity": 20,
                "cost_per_trip": 35, "mode": "road"},
               {"origin": depot, "destination": "Harrowquay", "cost_per_unit": 1, "trip_capacity": 10,
                "cost_per_trip": 5},
               {"origin": "Tarrowick", "destination": customer, "cost_per_unit": 4},
               {"origin": "Mellisford", "destination": customer, "cost_per_unit": 0, "mode": "rail"}],
        settings=Settings(units="pallets", currency="EUR"),
    )


@pytest.fixture(scope="module")
def solved():
    network = design_network()
    return network, solve(network)


def sheet(sheets, name):
    return next(s for s in sheets if s.name == name)


def records(result_sheet) -> list[dict]:
    return [dict(zip(result_sheet.columns, row)) for row in result_sheet.rows]


# ------------------------------------------------------------------------------------------------ sheets


def test_design_plan_writes_design_trips_and_sensitivity_sheets_in_order(solved):
    network, result = solved
    names = [s.name for s in writeback.result_sheets(network, result, INFO)]
    assert names == ["LS Summary", "LS Lane flows", "LS Nodes", "LS Depots and hubs", "LS Trips", "LS Sensitivity"]


def test_design_sheet_matches_the_hand_worked_decisions(solved):
    network, result = solved
    rows = {r["Depot or hub"]: r for r in records(sheet(writeback.result_sheets(network, result, INFO),
                                                        "LS Depots and hubs"))}
    # By hand (design_network): Quistmoor opens and pays 10, Tarrowick was given open, Mellisford stays closed.
    assert (rows["Quistmoor"]["Status given"], rows["Quistmoor"]["Decision"]) == ("decide", "open")
    assert rows["Quistmoor"]["Fixed charge paid (EUR)"] == pytest.approx(10.0, abs=1e-6)
    assert (rows["Tarrowick"]["Status given"], rows["Tarrowick"]["Decision"]) == ("open", "open")
    assert (rows["Mellisford"]["Decision"], rows["Mellisford"]["Fixed charge paid (EUR)"]) == ("closed", 0.0)
    # Quistmoor ships 20 + 5 = 25 of its supply of 40: 62.5 %; Tarrowick 10 of 100.
    assert rows["Quistmoor"]["Throughput (pallets)"] == pytest.approx(25.0, abs=1e-6)
    assert rows["Quistmoor"]["Capacity (pallets; blank = no limit)"] == pytest.approx(40.0)
    assert rows["Quistmoor"]["Utilisation"] == pytest.approx(0.625, abs=1e-6)  # shown as 62.5 %
    assert rows["Tarrowick"]["Throughput (pallets)"] == pytest.approx(10.0, abs=1e-6)
    # and the sheet says the same as the Result it was built from
    for node in result.open_nodes.itertuples(index=False):
        assert (rows[node.node]["Decision"] == "open") == bool(node.open)
        assert rows[node.node]["Fixed charge paid (EUR)"] == pytest.approx(node.fixed_charge, abs=1e-9)


def test_trips_sheet_matches_the_result_and_the_fill_by_hand(solved):
    network, result = solved
    rows = {(r["Origin"], r["Destination"]): r
            for r in records(sheet(writeback.result_sheets(network, result, INFO), "LS Trips"))}
    assert len(rows) == len(result.trips) == 2
    for lane in result.trips.itertuples(index=False):
        row = rows[(lane.origin, lane.destination)]
        assert row["Trips"] == lane.trips and row["Flow (pallets)"] == pytest.approx(lane.flow, abs=1e-9)
        assert row["Trip cost (EUR)"] == pytest.approx(lane.trip_cost, abs=1e-9)
    # By hand: 20 on trucks of 20 -> 1 trip, full; 5 on trucks of 10 -> 1 trip, half full.
    full = rows[("Quistmoor", "Runnelby")]
    assert (full["Trips"], full["Cost per trip (EUR)"], full["Trip cost (EUR)"]) == (1, 35.0, pytest.approx(35.0, abs=1e-6))
    assert full["Last truck fill"] == pytest.approx(1.0, abs=1e-6) and full["Average fill"] == pytest.approx(1.0)
    half = rows[("Quistmoor", "Harrowquay")]
    assert half["Trips"] == 1 and half["Last truck fill"] == pytest.approx(0.5, abs=1e-6)


def test_summary_breakdown_loops_over_every_cost_key_in_words(solved):
    network, result = solved
    items = {r[0]: r[1] for r in writeback.result_sheets(network, result, INFO)[0].rows}
    # By hand: 65 transport + 10 fixed node + 40 trips = 115 (design_network's docstring).
    assert items["Total cost (EUR)"] == pytest.approx(115.0, abs=0.01)
    assert items["Fixed depot and hub charges (EUR)"] == pytest.approx(10.0, abs=0.01)
    assert items["Trip costs (EUR)"] == pytest.approx(40.0, abs=0.01)
    words = [f"{writeback.COST_WORDS[k]} (EUR)" for k in result.cost_breakdown]
    assert sum(items[w] for w in words) == pytest.approx(items["Total cost (EUR)"], abs=1e-9)


def test_sensitivity_sheet_figures_equal_the_result(solved):
    network, result = solved
    rows = records(sheet(writeback.result_sheets(network, result, INFO), "LS Sensitivity"))
    assert len(rows) == len(result.sensitivity) > 0
    for row, fig in zip(rows, result.sensitivity.itertuples(index=False)):
        assert row["item"] == fig.item and row["basis"] == fig.basis == FIXED_BASIS
        assert row["in plain words"] == fig.text and row["figure"] == writeback.FIGURE_WORDS[fig.figure]
        if fig.unique:
            assert row["unique"] == "yes" and row["value"] == pytest.approx(fig.value, abs=1e-9)
        else:
            assert row["unique"] == "no" and row["value"] is None  # no misleading figure
    by_item = {(r["figure"], r["item"]): r for r in rows}
    # By hand (design_network): one more pallet at Runnelby comes from Tarrowick at 4; room in the trip saves 3.
    assert by_item[(writeback.FIGURE_WORDS["marginal_cost"], "Runnelby")]["value"] == pytest.approx(4.0, abs=1e-6)
    room = by_item[(writeback.FIGURE_WORDS["trip_capacity_value"], "Quistmoor -> Runnelby (road)")]
    assert room["value"] == pytest.approx(3.0, abs=1e-6)


def test_plan_without_design_gains_only_the_sensitivity_sheet():
    # Two depots, one customer, plain lanes: by hand the cheaper lane (2 per unit) carries all 5 -> 10.
    network = make_network([{"id": "Oxbarrow", "supply": 9}, {"id": "Pellwick", "supply": 9}],
                           [{"id": "Sorrel Quay", "demand": 5}],
                           [{"origin": "Oxbarrow", "destination": "Sorrel Quay", "cost_per_unit": 2},
                            {"origin": "Pellwick", "destination": "Sorrel Quay", "cost_per_unit": 3}])
    result = solve(network)
    assert result.total_cost == pytest.approx(10.0, abs=1e-6)
    sheets = writeback.result_sheets(network, result, INFO)
    assert [s.name for s in sheets] == ["LS Summary", "LS Lane flows", "LS Nodes", "LS Sensitivity"]
    items = {r[0] for r in sheets[0].rows}
    assert "trip costs" not in items and "fixed depot and hub charges" not in items  # only the components of a plan without design decisions
    rows = records(sheets[-1])
    assert {r["basis"] for r in rows} == {"LP"}
    # By hand: one more unit at Sorrel Quay also comes from Oxbarrow at 2; Pellwick's lane must fall by 3 - 2 = 1.
    values = {(r["figure"], r["item"]): r["value"] for r in rows}
    assert values[(writeback.FIGURE_WORDS["marginal_cost"], "Sorrel Quay")] == pytest.approx(2.0, abs=1e-6)
    assert values[(writeback.FIGURE_WORDS["reduced_cost"], "Pellwick -> Sorrel Quay")] == pytest.approx(1.0, abs=1e-6)


# ------------------------------------------------------------------------------------------------ HTML and mail


def test_html_shows_open_closed_trips_and_sensitivity_in_plain_words(solved):
    network, result = solved
    page = report.render_html(network, result, INFO, [])
    for heading in ("Open and closed", "Trips", "What the plan is sensitive to"):
        assert f">{heading}</h2>" in page
    assert "Mellisford</td><td>depot</td><td>decide</td><td><strong>closed" in page
    # the hand-worked figures, in the brief's wording
    assert "One more pallet at Runnelby would cost 4.00 EUR." in page
    assert "One more pallet of room in the planned trips on Quistmoor→Runnelby road would save 3.00 EUR." in page
    # Harrowquay's figure (degenerate in the LP's duals) is exact from the plan: its trip has room, 1 per unit.
    assert "One more pallet at Harrowquay would cost 1.00 EUR." in page
    assert "yes/no and trip decisions fixed" in page
    # the breakdown loops over the keys: the design components appear with their labels
    assert report.COST_LABELS["fixed_node"] in page and report.COST_LABELS["trips"] in page


def test_html_escapes_names_in_the_new_sections():
    network = design_network(depot="Quist<script>moor", customer="Runnel & <b>by</b>")
    result = solve(network)
    page = report.render_html(network, result, INFO, [])
    assert "<script" not in page and "<b>" not in page
    assert "Quist&lt;script&gt;moor" in page and "Runnel &amp; &lt;b&gt;by&lt;/b&gt;" in page
    # the escaped names sit in the new tables and sentences
    assert "One more pallet at Runnel &amp; &lt;b&gt;by&lt;/b&gt; would cost" in page


def test_mail_text_part_carries_the_same_key_sentences(solved):
    network, result = solved
    text = report_text.render_text(network, result, INFO, [])
    assert "Open and closed" in text and "  Mellisford (depot, given decide): closed" in text
    assert "Trips" in text and "1 trips of 20 pallets for 20 pallets" in text
    assert "One more pallet at Runnelby would cost 4.00 EUR." in text


def test_sentences_for_the_briefs_examples():
    # The wording the summary promises, reproduced from the figures.
    say = report.sensitivity_sentence
    assert say("marginal_cost", "Runnelby", 43.34, True, "pallets", "EUR") == \
        "One more pallet at Runnelby would cost 43.34 EUR."
    assert say("lane_capacity_value", "Quistmoor -> Harrowquay", 12.1, True, "pallets", "EUR") == \
        "One more pallet of capacity on Quistmoor→Harrowquay would save 12.10 EUR."
    assert say("reduced_cost", "Tarrowick -> Mellisford (rail)", 3.2, True, "pallets", "EUR") == \
        "Tarrowick→Mellisford rail would need to be 3.20 EUR per pallet cheaper before the plan used it."
    assert "not unique" in say("supply_value", "Tarrowick", math.nan, False, "pallets", "EUR")


# ------------------------------------------------------------------------------------------------ no plan, CLI


def no_plan_workbook(path, hub_capacity=50):
    """Two depots feed customer Runnelby only through hub Quistmoor; Harrowquay is served directly.

    By hand: Runnelby needs 80 but everything for it passes the hub, capacity 50, so it would be 80 - 50 = 30 short;
    Harrowquay's 20 come straight from Tarrowick. The pre-solve checks pass (Runnelby's inbound lane has no limit and
    supply 200 covers demand 100), so the solver and the shortfall re-solve decide. The bottleneck is the hub.
    """
    sheets = {
        "Depots": [["depot", "supply"], ["Tarrowick", 100], ["Mellisford", 100]],
        "Customers": [["customer", "demand"], ["Runnelby", 80], ["Harrowquay", 20]],
        "Hubs": [["hub", "capacity"], ["Quistmoor", hub_capacity]],
        "Lanes": [["origin", "destination", "cost_per_unit"], ["Tarrowick", "Quistmoor", 1],
                  ["Mellisford", "Quistmoor", 2], ["Quistmoor", "Runnelby", 1], ["Tarrowick", "Harrowquay", 3]],
        "Settings": [["setting", "value"], ["units", "pallets"], ["currency", "EUR"]],
    }
    return write_workbook(path, sheets)


def networkx_shortfall() -> float:
    """Runnelby's shortfall by networkx maximum flow on the same network (hub split into in/out arcs)."""
    graph = nx.DiGraph()
    graph.add_edge("source", "Tarrowick", capacity=100)
    graph.add_edge("source", "Mellisford", capacity=100)
    graph.add_edge("Tarrowick", "Quistmoor in")
    graph.add_edge("Mellisford", "Quistmoor in")
    graph.add_edge("Quistmoor in", "Quistmoor", capacity=50)
    graph.add_edge("Quistmoor", "Runnelby")
    return 80 - nx.maximum_flow_value(graph, "source", "Runnelby")


def test_no_plan_workbook_exits_3_and_explains_the_shortfall_and_bottleneck(tmp_path):
    path = no_plan_workbook(tmp_path / "hub.xlsx")
    run = CliRunner().invoke(main, ["solve", str(path)])
    assert run.exit_code == 3
    assert networkx_shortfall() == pytest.approx(30.0)  # the independent count of the hand-worked 30
    assert "Customer Runnelby would be 30 pallets short of its demand of 80 pallets." in run.output
    assert "The hub Quistmoor is used to its limit of 50 pallets" in run.output
    assert "Traceback" not in run.output

    why = pd.read_excel(path, sheet_name="LS Why no plan", engine="calamine")
    short = why[why["finding"] == "customer short"]
    assert short["item"].tolist() == ["Runnelby"]
    assert short["short"].iloc[0] == pytest.approx(30.0, abs=1e-4)
    hub = why[(why["finding"] == "hub at its limit") & (why["item"] == "Quistmoor")]
    assert hub["bottleneck"].tolist() == ["yes"] and hub["capacity"].iloc[0] == pytest.approx(50.0)
    assert "Harrowquay" not in set(short["item"])
    assert (why["finding"] == "internal penalty").sum() == 1

    page = (tmp_path / "hub-summary.html").read_text(encoding="utf-8")
    section = page[page.index('<h2 id="why-no-plan">'):]
    assert "Runnelby" in section and "30 pallets" in section
    assert "<td>Quistmoor</td><td class=\"num\">50 pallets</td>" in section
    assert "<strong>bottleneck</strong>" in section


def test_no_plan_json_includes_the_diagnosis(tmp_path):
    path = no_plan_workbook(tmp_path / "hub.xlsx")
    run = CliRunner().invoke(main, ["solve", str(path), "--json"])
    assert run.exit_code == 3
    doc = json.loads(run.stdout)
    assert doc["status"] == "infeasible"
    short = doc["diagnosis"]["short"]
    assert [s["customer"] for s in short] == ["Runnelby"] and short[0]["short"] == pytest.approx(30.0, abs=1e-6)
    cut = [s["item"] for s in doc["diagnosis"]["saturated"] if s["bottleneck"]]
    assert cut == ["Quistmoor"]


def test_rerun_after_the_fix_drops_the_stale_why_no_plan_sheet(tmp_path):
    path = no_plan_workbook(tmp_path / "hub.xlsx")
    assert CliRunner().invoke(main, ["solve", str(path)]).exit_code == 3
    assert "LS Why no plan" in openpyxl.load_workbook(path).sheetnames
    wb = openpyxl.load_workbook(path)
    wb["Hubs"]["B2"] = 100  # room for all 80: a plan now exists
    wb.save(path)
    run = CliRunner().invoke(main, ["solve", str(path)])
    assert run.exit_code == 0, run.output
    names = openpyxl.load_workbook(path).sheetnames
    assert "LS Why no plan" not in names and "LS Sensitivity" in names
    # The rerun finds the earlier run's results, so it also lists what changed (LS Changes).
    assert [n for n in names if n.startswith("LS ")] == ["LS Summary", "LS Lane flows", "LS Nodes", "LS Sensitivity",
                                                         "LS Changes"]


def test_solver_option_is_passed_to_the_run(tmp_path, monkeypatch):
    import lanesolve.pipeline as pipeline

    seen = {}
    real = pipeline.run

    def spy(*args, **kwargs):
        seen["solver"] = kwargs.get("solver")
        return real(*args, **kwargs)

    monkeypatch.setattr(pipeline, "run", spy)
    path = no_plan_workbook(tmp_path / "hub.xlsx", hub_capacity=100)
    run = CliRunner().invoke(main, ["solve", str(path), "--solver", "cbc"])
    assert run.exit_code == 0 and seen["solver"] == "cbc"
    bad = CliRunner().invoke(main, ["solve", str(path), "--solver", "simplex"])
    assert bad.exit_code == 2  # click's usage error: not one of cbc, highs
