"""The diagnosis finds the real cause: 40 invented infeasible workbooks, five of each cause, each checked against an
outside reference -- networkx ``maximum_flow_value`` / ``minimum_cut`` for capacity causes, and a least-shortfall
MILP (``scipy.optimize.milp``, written here) for design rules. Checked: the right amount (the least total
shortfall), every binding limit named with amounts that together restore a plan, the rule named.
"""

from __future__ import annotations

import copy
import math

import networkx as nx
import numpy as np
import pytest
from conftest import write_workbook
from scipy.optimize import Bounds, LinearConstraint, milp

from lanesolve.errors import NoPlanError
from lanesolve.model.analyse import explain_no_plan, solve_and_analyse
from lanesolve.model.checks import presolve_checks
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve
from lanesolve.pipeline import run
from lanesolve.report import summary as report
from lanesolve.write import writeback

TOL = 1e-6
VARIANTS = range(5)


def lane(origin, destination, cost=1.0, **extra):
    return {"origin": origin, "destination": destination, "cost_per_unit": cost, **extra}


def hard_max_flow(net) -> tuple[float, float]:
    """(hard demand, most of it that can arrive) by networkx maximum flow; only customers without a penalty are
    sinks, since a penalised customer may go short at will (hubs split into in/out arcs)."""
    graph = nx.DiGraph()
    hubs = set(net.hubs["id"])
    for d in net.depots.itertuples(index=False):
        graph.add_edge("SOURCE", d.id, capacity=float(d.supply))
    hard = 0.0
    for c in net.customers.itertuples(index=False):
        if math.isnan(c.unmet_penalty) and net.settings.unmet_penalty is None:
            graph.add_edge(c.id, "SINK", capacity=float(c.demand))
            hard += float(c.demand)
    for h in net.hubs.itertuples(index=False):
        graph.add_edge(f"{h.id}/in", h.id, **({"capacity": h.capacity} if math.isfinite(h.capacity) else {}))
    for k, lane_ in enumerate(net.active_lanes.itertuples(index=False)):
        head = f"{lane_.destination}/in" if lane_.destination in hubs else lane_.destination
        graph.add_edge(lane_.origin, ("lane", k), **({"capacity": lane_.capacity}
                                                     if math.isfinite(lane_.capacity) else {}))
        graph.add_edge(("lane", k), head)
    graph.add_nodes_from(["SOURCE", "SINK"])
    return hard, nx.maximum_flow_value(graph, "SOURCE", "SINK")


def raised(net, saturated):
    """A copy of ``net`` with every limit the diagnosis names raised by its stated amount."""
    net = copy.deepcopy(net)
    for r in saturated[saturated["raise_by"] > 0].itertuples(index=False):
        if r.kind == "depot":
            net.depots.loc[net.depots["id"] == r.item, "supply"] += r.raise_by
        elif r.kind == "hub":
            net.hubs.loc[net.hubs["id"] == r.item, "capacity"] += r.raise_by
        else:
            labels = net.lanes["origin"] + " -> " + net.lanes["destination"]
            net.lanes.loc[labels == r.item, "capacity"] += r.raise_by
    return net


def least_shortfall_milp(net) -> float:
    """Least total shortfall of hard demand with the design rules, by scipy.optimize.milp: flows x, a yes/no y per
    lane (used), an open w per depot, shortfall z per hard customer; minimise sum z."""
    lanes, depots, customers = net.active_lanes, net.depots, net.customers
    n_l, n_d, n_c = len(lanes), len(depots), len(customers)
    big = float(depots["supply"].sum())
    n = 2 * n_l + n_d + n_c
    x, y, w, z = 0, n_l, 2 * n_l, 2 * n_l + n_d
    rows, lo, hi = [], [], []

    def add(coefficients, low, high):
        r = np.zeros(n)
        for k, v in coefficients:
            r[k] += v
        rows.append(r)
        lo.append(low)
        hi.append(high)

    origins, destinations = list(lanes["origin"]), list(lanes["destination"])
    for j, d in enumerate(depots.itertuples(index=False)):
        add([(x + k, 1.0) for k in range(n_l) if origins[k] == d.id]
            + [(x + k, -1.0) for k in range(n_l) if destinations[k] == d.id] + [(w + j, -float(d.supply))],
            -np.inf, 0.0)
        for k in range(n_l):
            if origins[k] == d.id:
                add([(x + k, 1.0), (w + j, -big)], -np.inf, 0.0)
    for i, c in enumerate(customers.itertuples(index=False)):
        add([(x + k, 1.0) for k in range(n_l) if destinations[k] == c.id]
            + [(x + k, -1.0) for k in range(n_l) if origins[k] == c.id] + [(z + i, 1.0)], c.demand, c.demand)
        if c.single_source:
            add([(y + k, 1.0) for k in range(n_l) if destinations[k] == c.id], -np.inf, 1.0)
    for k, lane_ in enumerate(lanes.itertuples(index=False)):
        cap = lane_.capacity if math.isfinite(lane_.capacity) else big
        add([(x + k, 1.0), (y + k, -cap)], -np.inf, 0.0)
        add([(x + k, 1.0), (y + k, -float(lane_.min_volume))], 0.0, np.inf)
    if net.settings.max_open_depots is not None:
        add([(w + j, 1.0) for j in range(n_d)], -np.inf, float(net.settings.max_open_depots))
    cost = np.zeros(n)
    cost[z:] = 1.0
    upper = np.r_[np.full(n_l, np.inf), np.ones(n_l + n_d), customers["demand"].to_numpy(float)]
    integrality = np.r_[np.zeros(n_l), np.ones(n_l + n_d), np.zeros(n_c)]
    answer = milp(cost, constraints=LinearConstraint(np.array(rows), lo, hi), integrality=integrality,
                  bounds=Bounds(np.zeros(n), upper))
    assert answer.status == 0
    return float(answer.fun)


def diagnosed(net):
    reasons = presolve_checks(net)
    result = explain_no_plan(net, reasons) if reasons else solve_and_analyse(net)
    assert result.status is SolveStatus.INFEASIBLE
    return result, result.diagnosis


# ------------------------------------------------------------------------------------------------ capacity causes
@pytest.mark.parametrize("variant", VARIANTS)
def test_parallel_limits_least_shortfall_equals_networkx_max_flow_and_the_cut_is_named(variant):
    k, direct, need = 6 + variant, 2 + variant % 3, 20 + 2 * variant
    net = make_network([{"id": "D1", "supply": 100}, {"id": "D2", "supply": 100}],
                       [{"id": "C", "demand": need}, {"id": "K", "demand": 1}],
                       [lane("D1", "H"), lane("D2", "H", 2), lane("H", "C"), lane("D1", "C", 5, capacity=direct),
                        lane("D1", "K")], hubs=[{"id": "H", "capacity": k}])
    _, diagnosis = diagnosed(net)
    hard, most = hard_max_flow(net)  # source: networkx maximum_flow_value
    assert diagnosis.total_short == pytest.approx(hard - most, abs=TOL) == pytest.approx(need - k - direct)
    cut = diagnosis.saturated[diagnosis.saturated["bottleneck"]]
    assert {("hub", "H"), ("lane", "D1 -> C")} <= set(zip(cut["kind"], cut["item"]))
    assert solve(raised(net, diagnosis.saturated)).status.has_plan


@pytest.mark.parametrize("variant", VARIANTS)
def test_limits_in_series_are_all_named_and_raising_each_by_its_amount_gives_a_plan(variant):
    limit, need = 10 + variant, 20 + 3 * variant
    net = make_network([{"id": "D", "supply": limit}], [{"id": "C", "demand": need}],
                       [lane("D", "H", capacity=limit), lane("H", "C", capacity=limit + 1)],
                       hubs=[{"id": "H", "capacity": limit}])
    result, diagnosis = diagnosed(net)
    hard, most = hard_max_flow(net)
    assert diagnosis.total_short == pytest.approx(hard - most, abs=TOL)
    amounts = {(r.kind, r.item): r.raise_by for r in diagnosis.saturated.itertuples(index=False) if r.raise_by > 0}
    # Every limit in series must give need - limit (the last lane, limit + 1, by one less).
    assert amounts == {("depot", "D"): need - limit, ("lane", "D -> H"): need - limit, ("hub", "H"): need - limit,
                       ("lane", "H -> C"): need - limit - 1}
    assert solve(raised(net, diagnosis.saturated)).status.has_plan
    # Raising only the limit nearest the customer by its amount is still infeasible (what the fix is for).
    only_last = diagnosis.saturated[diagnosis.saturated["item"] == "H -> C"]
    assert not solve(raised(net, only_last)).status.has_plan
    assert any("Raising together" in m for m in result.messages)


@pytest.mark.parametrize("variant", VARIANTS)
def test_a_penalised_customer_competing_for_the_bottleneck_does_not_push_hard_demand_short(variant):
    # C2 has its own (large) penalty and competes for hub H with hard C1: the least hard shortfall is what the hub
    # cannot carry for C1 alone; C2 must be the one to go short.
    cap, hard_need = 30 + variant, 40
    net = make_network([{"id": "D", "supply": 200}],
                       [{"id": "C1", "demand": hard_need}, {"id": "C2", "demand": 20, "unmet_penalty": 1000 + variant}],
                       [lane("D", "H"), lane("H", "C1", 4), lane("H", "C2")], hubs=[{"id": "H", "capacity": cap}])
    _, diagnosis = diagnosed(net)
    hard, most = hard_max_flow(net)  # source: networkx, penalised customers are not sinks
    assert diagnosis.total_short == pytest.approx(hard - most, abs=TOL) == pytest.approx(hard_need - cap)
    assert diagnosis.short.set_index("customer").at["C1", "short"] == pytest.approx(hard_need - cap)


@pytest.mark.parametrize("variant", VARIANTS)
def test_pre_solve_checks_report_every_cause_and_the_total_shortfall(variant, tmp_path):
    supply = 10 + variant
    path = write_workbook(tmp_path / "short.xlsx", {
        "Depots": [["depot", "supply"], ["Dalby", supply]],
        "Customers": [["customer", "demand"], ["Ashcombe", 12], ["Brinmoor", 8], ["Corrow", 5]],
        "Lanes": [["origin", "destination", "cost_per_unit", "capacity"], ["Dalby", "Ashcombe", 1, 12],
                  ["Dalby", "Brinmoor", 1, 3]],
    })
    with pytest.raises(NoPlanError) as caught:
        run(path, write=False)
    result = caught.value.result.result
    diagnosis = result.diagnosis
    texts = " ".join(diagnosis.structural)
    # All three causes, not only the first: total supply short, Corrow has no lane, Brinmoor's lanes carry 3 of 8.
    assert "Total depot supply" in texts and "'Corrow'" in texts and "'Brinmoor'" in texts
    hard, most = hard_max_flow(make_network([{"id": "Dalby", "supply": supply}],
                                            [{"id": "Ashcombe", "demand": 12}, {"id": "Brinmoor", "demand": 8},
                                             {"id": "Corrow", "demand": 5}],
                                            [lane("Dalby", "Ashcombe", capacity=12),
                                             lane("Dalby", "Brinmoor", capacity=3)]))
    assert diagnosis.total_short == pytest.approx(hard - most, abs=TOL)
    assert result.messages[0].startswith("No plan meets every hard demand: at least")  # the total comes first
    # LS Summary and LS Why no plan state the shortfall first, not "customers short 0".
    outcome = caught.value.result
    sheets = {s.name: s for s in writeback.result_sheets(outcome.network, result, outcome.info)}
    summary_rows = {r[0]: r[1] for r in sheets["LS Summary"].rows}
    assert summary_rows["Customers short"] == len(diagnosis.short) > 0
    assert summary_rows["Total shortfall"] == pytest.approx(hard - most)
    assert sheets["LS Why no plan"].rows[0][0] == "total shortfall"
    page = report.render_html(outcome.network, result, outcome.info, [])
    first_short = f"Customer {diagnosis.short['customer'].iloc[0]} would be"
    # The HTML states the total and the causes before the customers one by one.
    assert "Least total shortfall" in page
    assert page.index("No plan meets every hard demand") < page.index("Total depot supply") < page.index(first_short)


@pytest.mark.parametrize("variant", VARIANTS)
def test_when_the_shortfall_could_fall_on_several_customers_the_split_is_one_of_many(variant):
    net = make_network([{"id": "D", "supply": 10 + variant}], [{"id": "A", "demand": 8}, {"id": "B", "demand": 8}],
                       [lane("D", "A"), lane("D", "B")])
    result, diagnosis = diagnosed(net)
    hard, most = hard_max_flow(net)
    assert diagnosis.total_short == pytest.approx(hard - most, abs=TOL)
    assert diagnosis.split_is_one_of_many and "one of many" in result.messages[0]
    # One customer only: the split is not in question.
    single = make_network([{"id": "D", "supply": 5}], [{"id": "A", "demand": 8}], [lane("D", "A")])
    assert not diagnosed(single)[1].split_is_one_of_many


# ---------------------------------------------------------------------------------------------------- design rules
@pytest.mark.parametrize("variant", VARIANTS)
def test_single_sourcing_is_named_with_the_customer(variant):
    each, need = 6 + variant, 10 + variant
    net = make_network([{"id": "D1", "supply": 50}, {"id": "D2", "supply": 50}],
                       [{"id": "C", "demand": need, "single_source": True}, {"id": "E", "demand": 2}],
                       [lane("D1", "C", capacity=each), lane("D2", "C", capacity=each), lane("D1", "E")])
    _, diagnosis = diagnosed(net)
    assert diagnosis.total_short == pytest.approx(least_shortfall_milp(net), abs=TOL) == pytest.approx(need - each)
    rules = {name: (ok, text) for name, ok, text in diagnosis.rules}
    assert rules["single sourcing"][0] and "C must be served over more than one inbound lane" in rules[
        "single sourcing"][1]


@pytest.mark.parametrize("variant", VARIANTS)
def test_max_open_depots_is_named_with_the_count(variant):
    net = make_network([{"id": f"D{k}", "supply": 10, "status": "decide", "fixed_cost": 5} for k in range(3)],
                       [{"id": "C", "demand": 15 + variant}], [lane(f"D{k}", "C") for k in range(3)],
                       settings=Settings(max_open_depots=1))
    _, diagnosis = diagnosed(net)
    assert diagnosis.total_short == pytest.approx(least_shortfall_milp(net), abs=TOL) == pytest.approx(5 + variant)
    rules = {name: (ok, text) for name, ok, text in diagnosis.rules}
    assert rules["max_open_depots"][0] and "needs 2 depots open but max_open_depots is 1" in rules[
        "max_open_depots"][1]


@pytest.mark.parametrize("variant", VARIANTS)
def test_min_volume_is_named_with_the_lane(variant):
    need = 5 + variant
    net = make_network([{"id": "D", "supply": 100}], [{"id": "C", "demand": need}],
                       [lane("D", "C", min_volume=need + 10, fixed_cost=1)])
    _, diagnosis = diagnosed(net)
    assert diagnosis.total_short == pytest.approx(least_shortfall_milp(net), abs=TOL) == pytest.approx(need)
    rules = {name: (ok, text) for name, ok, text in diagnosis.rules}
    assert rules["min_volume"][0] and "D -> C to carry less than its min_volume" in rules["min_volume"][1]


def test_a_network_whose_only_lane_is_inactive_gets_its_reasons_without_a_limit_to_raise():
    # Found by the workbook fuzz (hypothesis): no active lane, no supply, one unit of hard demand. The pre-solve
    # checks name both causes; the least-raises LP has no column at all and must say nothing rather than fail.
    from lanesolve.model.remedies import least_raises

    net = make_network([{"id": "D0", "supply": 0}], [{"id": "C0", "demand": 1}],
                       [lane("D0", "C0", 0.0, active=False)])
    assert least_raises(net) is None
    reasons = presolve_checks(net)
    assert any("short" in r for r in reasons) and any("no active lane ends there" in r for r in reasons)
    result = explain_no_plan(net, reasons)
    assert result.status is SolveStatus.INFEASIBLE
    assert all(reason in result.messages for reason in reasons)


def test_a_remedy_edits_its_own_copy_while_the_active_lanes_are_settled():
    # Inside lanes_settled the active lanes are filtered once; the min_volume remedy edits a copy of the network,
    # and that copy must see its own edit. Reference: pandas' boolean filter of each network's lanes frame, and the
    # least shortfall by SciPy's milp (as in the min_volume test above).
    from lanesolve.model.remedies import _relaxed

    net = make_network([{"id": "D", "supply": 100}], [{"id": "C", "demand": 6}],
                       [lane("D", "C", min_volume=16, fixed_cost=1), lane("D", "C", 3.0, mode="rail", active=False)])
    with net.lanes_settled():
        before = net.active_lanes["min_volume"].tolist()
        relaxed = _relaxed(net, "min_volume")
        assert relaxed.active_lanes["min_volume"].tolist() == \
            relaxed.lanes[relaxed.lanes["active"]]["min_volume"].tolist() == [0.0]
        assert net.active_lanes["min_volume"].tolist() == before == [16.0]
        _, diagnosis = diagnosed(net)
    assert diagnosis.total_short == pytest.approx(least_shortfall_milp(net), abs=TOL) == pytest.approx(6)
    assert {name: ok for name, ok, _ in diagnosis.rules}["min_volume"]


def test_settled_active_lanes_follow_a_new_lanes_frame_and_never_travel_with_a_copy():
    # Reference: pandas' boolean filter of the lanes frame the network holds at the time of the call.
    net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
                       [lane("D", "C"), lane("D", "C", 2.0, mode="rail", active=False)])
    with net.lanes_settled():
        assert net.active_lanes["mode"].tolist() == net.lanes[net.lanes["active"]]["mode"].tolist() == [""]
        net.lanes = net.lanes.assign(active=True)
        assert net.active_lanes["mode"].tolist() == net.lanes[net.lanes["active"]]["mode"].tolist() == ["", "rail"]
        copied = copy.deepcopy(net)
        assert "_kept_active" not in copied.__dict__
        copied.lanes.loc[1, "active"] = False
        assert copied.active_lanes["mode"].tolist() == [""]
    assert "_kept_active" not in net.__dict__
