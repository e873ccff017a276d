"""Tests of lanesolve.model.scenarios: reading the Scenarios sheet, applying each change type, comparing results.

References: a scenario must equal the same edit made by hand, so the applied networks are compared with
networks built from hand-edited records by :func:`lanesolve.model.network.make_network`; solved costs are also checked
against networkx's network simplex (``networkx.min_cost_flow_cost``), an independent min-cost flow solver.
"""

import math

import pandas as pd
import pytest
from pandas.testing import assert_frame_equal

from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import Result, SolveStatus
from lanesolve.model.comparison import compare, volume_shifts
from lanesolve.model.scenarios import Change, Scenario, apply_scenario, parse_scenarios

HEADER = ["scenario", "sheet", "match", "column", "change", "value"]

# Invented scenario: two depots, one hub, two customers.
DEPOTS = [{"id": "Kestrel Mill", "supply": 100.0}, {"id": "Lark Quay", "supply": 60.0}]
CUSTOMERS = [{"id": "Otter Foods", "demand": 50.0, "unmet_penalty": 40.0}, {"id": "Pike Stores", "demand": 70.0}]
HUBS = [{"id": "Wren Cross", "capacity": 80.0, "handling_cost": 0.5}]
LANES = [
    {"origin": "Kestrel Mill", "destination": "Wren Cross", "cost_per_unit": 2.0, "mode": "road"},
    {"origin": "Kestrel Mill", "destination": "Wren Cross", "cost_per_unit": 1.5, "mode": "rail", "capacity": 30.0},
    {"origin": "Wren Cross", "destination": "Otter Foods", "cost_per_unit": 1.0},
    {"origin": "Wren Cross", "destination": "Pike Stores", "cost_per_unit": 1.0},
    {"origin": "Lark Quay", "destination": "Pike Stores", "cost_per_unit": 4.0, "capacity": 50.0},
]


def base_network(settings=None):
    return make_network(DEPOTS, CUSTOMERS, LANES, hubs=HUBS, settings=settings)


def one(sheet, match, column, change, value, row=2):
    return Scenario("s", [Change(sheet, match, column, change, value, row)])


def parse(*rows):
    return parse_scenarios([HEADER, *rows])


# ---------------------------------------------------------------------------------------------- parse_scenarios


def test_parse_groups_rows_by_scenario_in_order_with_loose_headers_and_blank_rows():
    scenarios, problems = parse_scenarios([
        [" Scenario ", "SHEET", "match", "Column", "change", "Value", "notes"],
        ["peak", "customers", "*", "Demand", "Scale", 1.2, "busy season"],
        [None, None, "", None, None, None, None],
        ["hub shut", "Hubs", "Wren Cross", "capacity", "set", 0],
        ["peak", "Lanes", "Kestrel Mill>Wren Cross>rail", "capacity", "add", "10"],
    ])
    assert problems == []
    assert [s.name for s in scenarios] == ["peak", "hub shut"]
    peak = scenarios[0].changes
    assert [(c.sheet, c.column, c.change, c.value, c.row) for c in peak] == [
        ("Customers", "demand", "scale", 1.2, 2), ("Lanes", "capacity", "add", 10.0, 5)]


def test_missing_columns_are_named():
    _, problems = parse_scenarios([["scenario", "sheet", "match", "column"]])
    assert {(p.sheet, p.row, p.column) for p in problems} == {("Scenarios", 1, "change"), ("Scenarios", 1, "value")}


def test_unknown_sheet_suggests_the_nearest():
    _, problems = parse(["s", "Depot", "*", "supply", "scale", 2])
    assert (problems[0].row, problems[0].column) == (2, "sheet")
    assert "unknown sheet 'Depot'" in problems[0].message and "did you mean 'Depots'?" in problems[0].hint


def test_unknown_column_suggests_the_nearest():
    _, problems = parse(["s", "Depots", "*", "suply", "scale", 2])
    assert (problems[0].row, problems[0].column) == (2, "column")
    assert "no column 'suply'" in problems[0].message and "'supply'" in problems[0].hint


@pytest.mark.parametrize("sheet, column", [("Depots", "depot"), ("Lanes", "origin"), ("Lanes", "mode")])
def test_id_and_label_columns_cannot_be_changed(sheet, column):
    _, problems = parse(["s", sheet, "*", column, "set", 1])
    assert len(problems) == 1 and problems[0].column == "column" and "cannot be changed" in problems[0].message


def test_unknown_change_is_a_problem():
    _, problems = parse(["s", "Depots", "*", "supply", "multiply", 2])
    assert problems[0].column == "change" and "unknown change 'multiply'" in problems[0].message


@pytest.mark.parametrize("change", ["scale", "add"])
def test_scale_and_add_need_a_number(change):
    _, problems = parse(["s", "Depots", "*", "supply", change, "lots"])
    assert problems[0].column == "value" and f"'{change}' needs a number" in problems[0].message


def test_scale_on_a_yes_no_column_is_a_problem():
    _, problems = parse(["s", "Lanes", "*", "active", "scale", 2])
    assert problems[0].column == "change" and "yes/no" in problems[0].message


def test_blank_scenario_name_is_a_problem():
    scenarios, problems = parse([None, "Depots", "*", "supply", "scale", 2])
    assert scenarios == [] and problems[0].column == "scenario" and "blank" in problems[0].message


def test_baseline_is_reserved():
    _, problems = parse([" Baseline ", "Depots", "*", "supply", "scale", 2])
    assert problems[0].column == "scenario" and "reserved" in problems[0].message


def test_settings_rows_name_a_known_setting():
    scenarios, problems = parse(["long", "Settings", "Time Limit S", None, "scale", 2],
                                ["s", "Settings", "time_limt_s", "value", "set", 5],
                                ["s", "Settings", "units", "value", "add", 1])
    assert scenarios[0].changes[0].match == "time_limit_s" and scenarios[0].changes[0].column == "value"
    assert [(p.row, p.column) for p in problems] == [(3, "match"), (4, "match")]
    assert "a scenario cannot change setting 'units'" in problems[1].message
    assert "did you mean 'time_limit_s'?" in problems[0].hint


def test_every_problem_of_a_row_is_reported_and_the_row_left_out():
    scenarios, problems = parse(["", "Depots", "*", "supply", "multiply", 2], ["ok", "Depots", "*", "supply", "add", 1])
    assert {p.column for p in problems} == {"scenario", "change"}
    assert [s.name for s in scenarios] == ["ok"]


# ---------------------------------------------------------------------------------------------- apply_scenario


def test_set_replaces_values_and_leaves_the_baseline_alone():
    base = base_network()
    before = base.depots.copy(deep=True)
    changed, problems = apply_scenario(base, one("Depots", "Lark Quay", "supply", "set", 20))
    assert problems == []
    assert changed.depots["supply"].tolist() == pytest.approx([100.0, 20.0])
    assert_frame_equal(base.depots, before)
    assert changed.depots is not base.depots


def test_scale_multiplies_every_matched_row():
    changed, problems = apply_scenario(base_network(), one("Customers", "*", "demand", "scale", 1.2))
    assert problems == [] and changed.customers["demand"].tolist() == pytest.approx([60.0, 84.0])


def test_add_adds_to_a_comma_list_of_ids():
    changed, problems = apply_scenario(base_network(), one("Depots", "Kestrel Mill, Lark Quay", "supply", "add", -10))
    assert problems == [] and changed.depots["supply"].tolist() == pytest.approx([90.0, 50.0])


def test_lane_match_without_mode_takes_every_mode():
    changed, problems = apply_scenario(base_network(), one("Lanes", "Kestrel Mill>Wren Cross", "cost_per_unit",
                                                           "scale", 1.08))
    assert problems == []
    assert changed.lanes["cost_per_unit"].tolist() == pytest.approx([2.16, 1.62, 1.0, 1.0, 4.0])


def test_lane_match_with_mode_takes_that_mode_only():
    changed, problems = apply_scenario(base_network(), one("Lanes", "Kestrel Mill > Wren Cross > RAIL", "active",
                                                           "set", "no"))
    assert problems == [] and changed.lanes["active"].tolist() == [True, False, True, True, True]


def test_changes_apply_in_row_order():
    scenario = Scenario("s", [Change("Depots", "Lark Quay", "supply", "set", 10, 2),
                              Change("Depots", "Lark Quay", "supply", "scale", 3, 3),
                              Change("Depots", "Lark Quay", "supply", "add", 1, 4)])
    changed, problems = apply_scenario(base_network(), scenario)
    assert problems == [] and changed.depots.loc[1, "supply"] == pytest.approx(31.0)


def test_unknown_id_names_the_scenarios_row():
    _, problems = apply_scenario(base_network(), one("Depots", "Kestrel Mil", "supply", "set", 1, row=7))
    assert (problems[0].sheet, problems[0].row, problems[0].column) == ("Scenarios", 7, "match")
    assert "no depot 'Kestrel Mil'" in problems[0].message and "did you mean 'Kestrel Mill'?" in problems[0].hint


def test_id_of_another_sheet_says_which():
    _, problems = apply_scenario(base_network(), one("Depots", "Wren Cross", "supply", "set", 1))
    assert "is a hub; use sheet Hubs" in problems[0].hint


def test_unknown_lane_names_the_scenarios_row():
    _, problems = apply_scenario(base_network(), one("Lanes", "Lark Quay>Otter Foods", "capacity", "set", 5, row=4))
    assert problems[0].row == 4 and "no lane Lark Quay>Otter Foods" in problems[0].message


def test_bad_lane_reference_is_a_problem():
    _, problems = apply_scenario(base_network(), one("Lanes", "Lark Quay", "capacity", "set", 5))
    assert "not a lane reference" in problems[0].message


def test_change_below_the_minimum_is_refused_and_not_applied():
    changed, problems = apply_scenario(base_network(), one("Depots", "*", "supply", "add", -80, row=3))
    assert (problems[0].row, problems[0].column) == (3, "value")
    assert "Lark Quay" in problems[0].message and "supply must be >= 0" in problems[0].hint
    assert changed.depots["supply"].tolist() == pytest.approx([100.0, 60.0])


def test_flag_set_to_something_else_than_yes_no_is_refused():
    _, problems = apply_scenario(base_network(), one("Lanes", "*", "active", "set", "maybe"))
    assert "not yes or no" in problems[0].message


def test_scale_on_a_flag_built_in_python_is_refused():
    _, problems = apply_scenario(base_network(), one("Lanes", "*", "active", "scale", 2))
    assert "can only be set" in problems[0].message


def test_set_blank_on_a_required_number_is_refused():
    _, problems = apply_scenario(base_network(), one("Depots", "*", "supply", "set", None))
    assert "cannot be blank" in problems[0].message


def test_set_nan_is_refused():
    _, problems = apply_scenario(base_network(), one("Depots", "*", "supply", "set", "NaN"))
    assert "not allowed" in problems[0].message


@pytest.mark.parametrize("change, value", [("scale", 0.5), ("scale", 0.0), ("add", 25)])
def test_scale_and_add_keep_an_unlimited_capacity_unlimited(change, value):
    changed, problems = apply_scenario(base_network(), one("Lanes", "*", "capacity", change, value))
    assert problems == []
    capacity = changed.lanes["capacity"]
    assert math.isinf(capacity[0]) and capacity[1] == pytest.approx(30.0 * value if change == "scale" else 55.0)


def test_set_replaces_an_unlimited_capacity_and_blank_set_makes_it_unlimited():
    changed, _ = apply_scenario(base_network(), one("Lanes", "Kestrel Mill>Wren Cross>road", "capacity", "set", 40))
    assert changed.lanes.loc[0, "capacity"] == pytest.approx(40.0)
    changed, _ = apply_scenario(base_network(), one("Hubs", "Wren Cross", "capacity", "set", None))
    assert math.isinf(changed.hubs.loc[0, "capacity"])


def test_scale_keeps_a_hard_demand_hard_and_set_gives_it_a_penalty():
    changed, problems = apply_scenario(base_network(), one("Customers", "*", "unmet_penalty", "scale", 2))
    assert problems == []
    assert changed.customers.loc[0, "unmet_penalty"] == pytest.approx(80.0)
    assert math.isnan(changed.customers.loc[1, "unmet_penalty"])
    changed, _ = apply_scenario(base_network(), one("Customers", "Pike Stores", "unmet_penalty", "set", 30))
    assert changed.customers.loc[1, "unmet_penalty"] == pytest.approx(30.0)


def test_setting_changes_apply_to_a_copy_of_the_settings():
    base = base_network(Settings(time_limit_s=60.0))
    changed, problems = apply_scenario(base, one("Settings", "time_limit_s", "value", "scale", 0.5))
    assert problems == [] and changed.settings.time_limit_s == pytest.approx(30.0)
    assert base.settings.time_limit_s == pytest.approx(60.0)


def test_changing_the_default_penalty_moves_customers_that_carried_it():
    base = make_network(DEPOTS, [{"id": "Otter Foods", "demand": 50.0, "unmet_penalty": 25.0},
                                 {"id": "Pike Stores", "demand": 70.0, "unmet_penalty": 40.0}], LANES, HUBS,
                        Settings(unmet_penalty=25.0))
    changed, problems = apply_scenario(base, one("Settings", "unmet_penalty", "value", "set", 35))
    assert problems == [] and changed.settings.unmet_penalty == pytest.approx(35.0)
    assert changed.customers["unmet_penalty"].tolist() == pytest.approx([35.0, 40.0])


def test_setting_below_its_minimum_is_refused():
    _, problems = apply_scenario(base_network(), one("Settings", "mip_gap", "value", "add", -1))
    assert "mip_gap" in problems[0].message and ">= 0" in problems[0].hint


# --------------------------------------------------------------------------- equal to an edit made by hand


def hand_edited():
    """The records of DEPOTS...LANES edited by hand the way SCENARIO_ROWS says."""
    depots = [dict(d) for d in DEPOTS]
    customers = [dict(c) for c in CUSTOMERS]
    hubs = [dict(h) for h in HUBS]
    lanes = [dict(x) for x in LANES]
    for customer in customers:
        customer["demand"] *= 1.2
    hubs[0]["capacity"] = 120.0
    lanes[0]["cost_per_unit"] += 0.5
    lanes[1]["active"] = False
    depots[1]["supply"] = 90.0
    return make_network(depots, customers, lanes, hubs)


SCENARIO_ROWS = [
    ["peak", "Customers", "*", "demand", "scale", 1.2],
    ["peak", "Hubs", "Wren Cross", "capacity", "set", 120],
    ["peak", "Lanes", "Kestrel Mill>Wren Cross>road", "cost_per_unit", "add", 0.5],
    ["peak", "Lanes", "Kestrel Mill>Wren Cross>rail", "active", "set", "no"],
    ["peak", "Depots", "Lark Quay", "supply", "set", 90],
]


def test_scenario_network_equals_the_hand_edited_network():
    scenarios, problems = parse(*SCENARIO_ROWS)
    assert problems == []
    changed, problems = apply_scenario(base_network(), scenarios[0])
    assert problems == []
    expected = hand_edited()
    for name in ("depots", "customers", "hubs", "lanes"):
        assert_frame_equal(getattr(changed, name), getattr(expected, name), check_exact=False, rtol=1e-12)


def networkx_cost(network):
    """Min cost of a network with hard demands by networkx's network simplex (integer data only)."""
    nx = pytest.importorskip("networkx")
    graph = nx.MultiDiGraph()
    graph.add_node("super source", demand=-int(network.customers["demand"].sum()))
    for d in network.depots.itertuples():
        graph.add_edge("super source", d.id, capacity=int(d.supply), weight=0)
    for c in network.customers.itertuples():
        graph.add_node(c.id, demand=int(c.demand))
    for h in network.hubs.itertuples():
        # Hub capacity and handling cost on an in/out split of the hub node.
        graph.add_edge(h.id + " in", h.id, capacity=int(h.capacity), weight=h.handling_cost)
    for lane in network.active_lanes.itertuples():
        head = lane.destination + " in" if lane.destination in set(network.hubs["id"]) else lane.destination
        attrs = {"weight": lane.cost_per_unit}
        if math.isfinite(lane.capacity):
            attrs["capacity"] = int(lane.capacity)
        graph.add_edge(lane.origin, head, **attrs)
    # Network simplex wants integer weights: costs here are multiples of 0.5, so scale by 2.
    for *_, data in graph.edges(data=True):
        data["weight"] = int(round(data["weight"] * 2))
    return nx.min_cost_flow_cost(graph) / 2


def test_scenario_solves_to_the_same_cost_as_the_hand_edited_network():
    solve = pytest.importorskip("lanesolve.model.solve")
    scenarios, _ = parse(*SCENARIO_ROWS)
    changed, _ = apply_scenario(base_network(), scenarios[0])
    expected = hand_edited()
    # Hard demands throughout so networkx (no shortfall variables) solves the same problem.
    for net in (changed, expected):
        net.customers["unmet_penalty"] = math.nan
    by_scenario, by_hand = solve.solve(changed), solve.solve(expected)
    assert by_scenario.status is SolveStatus.OPTIMAL and by_hand.status is SolveStatus.OPTIMAL
    assert by_scenario.total_cost == pytest.approx(by_hand.total_cost, rel=1e-9, abs=1e-6)
    assert by_scenario.total_cost == pytest.approx(networkx_cost(expected), rel=1e-9, abs=1e-6)


def test_scenario_from_a_workbook_equals_a_workbook_edited_by_hand(make_workbook):
    """Through the reader and validator: Scenarios sheet applied vs. the sheets edited by hand."""
    pytest.importorskip("lanesolve.read.validate")
    solve = pytest.importorskip("lanesolve.model.solve")
    from lanesolve import pipeline

    sheets = {
        "Depots": [["depot", "supply"], ["Kestrel Mill", 100], ["Lark Quay", 60]],
        "Customers": [["customer", "demand"], ["Otter Foods", 50], ["Pike Stores", 70]],
        "Hubs": [["hub", "capacity", "handling_cost"], ["Wren Cross", 80, 0.5]],
        "Lanes": [["origin", "destination", "cost_per_unit", "mode", "capacity", "active"],
                  ["Kestrel Mill", "Wren Cross", 2.0, "road", None, None],
                  ["Kestrel Mill", "Wren Cross", 1.5, "rail", 30, None],
                  ["Wren Cross", "Otter Foods", 1.0, None, None, None],
                  ["Wren Cross", "Pike Stores", 1.0, None, None, None],
                  ["Lark Quay", "Pike Stores", 4.0, None, 50, None]],
        "Scenarios": [HEADER, *SCENARIO_ROWS],
    }
    edited = {**sheets, "Scenarios": [HEADER]}
    edited["Depots"] = [["depot", "supply"], ["Kestrel Mill", 100], ["Lark Quay", 90]]
    edited["Customers"] = [["customer", "demand"], ["Otter Foods", 60], ["Pike Stores", 84]]
    edited["Hubs"] = [["hub", "capacity", "handling_cost"], ["Wren Cross", 120, 0.5]]
    edited["Lanes"] = [sheets["Lanes"][0], ["Kestrel Mill", "Wren Cross", 2.5, "road", None, None],
                       ["Kestrel Mill", "Wren Cross", 1.5, "rail", 30, "no"], *sheets["Lanes"][3:]]
    base, _ = pipeline.load(make_workbook(sheets, "scenario.xlsx"))
    by_hand, _ = pipeline.load(make_workbook(edited, "by_hand.xlsx"))
    from lanesolve.read.reader import read_workbook

    raw = read_workbook(make_workbook(sheets, "scenario.xlsx"))
    scenarios, problems = parse_scenarios(raw.sheets["Scenarios"].rows)
    assert problems == []
    changed, problems = apply_scenario(base, scenarios[0])
    assert problems == []
    for name in ("depots", "customers", "hubs", "lanes"):
        assert_frame_equal(getattr(changed, name), getattr(by_hand, name), check_exact=False, rtol=1e-12)
    cost = solve.solve(changed).total_cost
    assert cost == pytest.approx(solve.solve(by_hand).total_cost, rel=1e-9, abs=1e-6)
    assert cost == pytest.approx(networkx_cost(by_hand), rel=1e-9, abs=1e-6)


# ---------------------------------------------------------------------------------------------- compare


def result(cost, breakdown, flows, unmet=(), nodes=()):
    """A hand-built optimal Result: flows are (origin, destination, mode, flow) tuples."""
    frame = pd.DataFrame(flows, columns=["origin", "destination", "mode", "flow"])
    return Result(SolveStatus.OPTIMAL, total_cost=cost,
                  cost_breakdown=dict(zip(("transport", "handling", "fixed_lane", "unmet_penalty"), breakdown)),
                  flows=frame, unmet=pd.DataFrame(list(unmet), columns=["customer", "quantity", "penalty"]),
                  nodes=pd.DataFrame(list(nodes), columns=["node", "kind", "shipped", "throughput"]))


BASE = result(300.0, (250.0, 50.0, 0.0, 0.0),
              [("A", "H", "road", 60.0), ("H", "C", "", 60.0), ("B", "C", "", 40.0)],
              nodes=[("A", "depot", 60.0, math.nan), ("B", "depot", 40.0, math.nan), ("H", "hub", 0.0, 60.0)])
SHIFTED = result(345.0, (240.0, 45.0, 20.0, 40.0),
                 [("A", "H", "road", 20.0), ("A", "H", "rail", 30.0), ("H", "C", "", 50.0), ("B", "C", "", 49.0)],
                 unmet=[("C", 1.0, 40.0)],
                 nodes=[("A", "depot", 50.0, math.nan), ("B", "depot", 49.0, math.nan), ("H", "hub", 0.0, 50.0)])
CLOSED = result(400.0, (400.0, 0.0, 0.0, 0.0), [("B", "C", "", 100.0)],
                nodes=[("A", "depot", 0.0, math.nan), ("B", "depot", 100.0, math.nan), ("H", "hub", 0.0, 0.0)])


def test_compare_lists_baseline_first_with_cost_breakdown_and_delta():
    table = compare(BASE, {"diesel up": SHIFTED, "hub shut": CLOSED})
    assert table["scenario"].tolist() == ["baseline", "diesel up", "hub shut"]
    assert table["total_cost"].tolist() == pytest.approx([300.0, 345.0, 400.0])
    assert table["fixed_lane"].tolist() == pytest.approx([0.0, 20.0, 0.0])
    assert table["delta_cost"].tolist() == pytest.approx([0.0, 45.0, 100.0])
    assert table["delta_pct"].tolist() == pytest.approx([0.0, 15.0, 100.0 / 3])
    assert table["unmet_units"].tolist() == pytest.approx([0.0, 1.0, 0.0])


def test_compare_names_lanes_and_nodes_opened_and_closed():
    table = compare(BASE, {"diesel up": SHIFTED, "hub shut": CLOSED}).set_index("scenario")
    assert table.loc["diesel up", "lanes_opened"] == "A>H>rail" and table.loc["diesel up", "lanes_closed"] == ""
    assert table.loc["hub shut", "lanes_closed"] == "A>H>road, H>C"
    assert table.loc["hub shut", "nodes_closed"] == "A, H" and table.loc["hub shut", "nodes_opened"] == ""
    assert table.loc["baseline", "lanes_used"] == 3 and table.loc["hub shut", "lanes_used"] == 1


def test_compare_lists_the_largest_volume_shifts():
    table = compare(BASE, {"diesel up": SHIFTED}, top_shifts=2).set_index("scenario")
    assert table.loc["diesel up", "largest_shifts"] == "A>H>road -40; A>H>rail +30"


def test_volume_shifts_covers_every_changed_lane_largest_first():
    shifts = volume_shifts(BASE, SHIFTED)
    assert shifts["lane"].tolist() == ["A>H>road", "A>H>rail", "H>C", "B>C"]
    assert shifts["change"].tolist() == pytest.approx([-40.0, 30.0, -10.0, 9.0])


def test_compare_a_scenario_without_plan():
    table = compare(BASE, {"broken": Result(SolveStatus.INFEASIBLE)}).set_index("scenario")
    row = table.loc["broken"]
    assert row["status"] == "infeasible"
    assert math.isnan(row["total_cost"]) and math.isnan(row["delta_cost"]) and math.isnan(row["unmet_units"])
    assert row["lanes_closed"] == "" and row["largest_shifts"] == ""


def test_a_scenario_cost_change_is_credited_to_the_scenario():
    from lanesolve.model.network import make_network

    base = make_network([{"id": "D", "supply": 10}], [{"id": "C", "demand": 8}],
                        [{"origin": "D", "destination": "C", "cost_per_unit": 2},
                         {"origin": "D", "destination": "C", "mode": "rail", "cost_per_unit": 3}])
    dearer = Scenario("dearer", [Change("Lanes", "D>C>rail", "cost_per_unit", "scale", 1.5, 2)])
    changed, problems = apply_scenario(base, dearer)
    assert problems == []
    sources = changed.cost_sources()["cost_source"].tolist()
    assert sources == ["given", "scenario dearer: scale 1.5"]
    assert base.cost_sources()["cost_source"].tolist() == ["given", "given"]  # the baseline is untouched
