"""Design decisions (open/close nodes, whole trips, minimum volumes, single sourcing) against brute-force
enumeration of the yes/no decisions and against SciPy ``milp`` on the same data, plus honest status and the design
columns read from a workbook."""

import itertools
import math
import random

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from lanesolve.model.network import Settings, make_network
from lanesolve.model.solve import solve

TOL = 1e-6


def random_design(seed: int):
    """A small network: 3 depots with fixed costs (decide), 1 hub (decide), 4 customers, trips on some lanes."""
    rng = random.Random(seed)
    depots = [{"id": f"D{i}", "supply": rng.randint(30, 70), "fixed_cost": rng.randint(20, 120)} for i in range(3)]
    hubs = [{"id": "H", "capacity": rng.randint(40, 90), "fixed_cost": rng.randint(10, 60)}]
    customers = [{"id": f"C{j}", "demand": rng.randint(5, 25)} for j in range(4)]
    lanes = []
    for d in depots:
        lanes.append({"origin": d["id"], "destination": "H", "cost_per_unit": rng.randint(1, 3)})
        for c in customers:
            if rng.random() < 0.7:
                lane = {"origin": d["id"], "destination": c["id"], "cost_per_unit": rng.randint(2, 9)}
                if rng.random() < 0.4:
                    lane.update(trip_capacity=rng.randint(6, 12), cost_per_trip=rng.randint(5, 20))
                lanes.append(lane)
    for c in customers:
        lanes.append({"origin": "H", "destination": c["id"], "cost_per_unit": rng.randint(1, 3)})
    return depots, customers, lanes, hubs


def flow_cost_with_open(depots, customers, lanes, hubs, open_set, trips_fixed):
    """Brute force inner problem: min-cost flow (networkx network_simplex) with the nodes in ``open_set`` open and
    every trip lane's capacity = trip_capacity * trips; returns the total cost or inf. Integer data, as networkx
    requires."""
    g = nx.DiGraph()
    total = sum(c["demand"] for c in customers)
    g.add_node("S", demand=-total)
    for d in depots:
        if d["id"] in open_set:
            g.add_edge("S", d["id"], capacity=d["supply"], weight=0)
    for c in customers:
        g.add_node(c["id"], demand=c["demand"])
    for h in hubs:
        if h["id"] in open_set:
            g.add_edge(h["id"] + "#in", h["id"], capacity=h["capacity"], weight=0)
    cost = sum(n["fixed_cost"] for n in depots + hubs if n["id"] in open_set)
    for k, lane in enumerate(lanes):
        o, t = lane["origin"], lane["destination"]
        if o not in open_set and o.startswith(("D", "H")) or t == "H" and "H" not in open_set:
            continue
        head = t + "#in" if t == "H" else t
        cap = lane["trip_capacity"] * trips_fixed[k] if k in trips_fixed else None
        if cap == 0:
            continue
        mid = f"L{k}"  # a middle node per lane keeps parallel lanes apart in a DiGraph
        g.add_edge(o, mid, weight=lane["cost_per_unit"], **({"capacity": cap} if cap is not None else {}))
        g.add_edge(mid, head, weight=0)
        cost += lane.get("cost_per_trip", 0) * trips_fixed.get(k, 0)
    try:
        return cost + nx.network_simplex(g)[0]
    except nx.NetworkXUnfeasible:
        return math.inf


def brute_force(depots, customers, lanes, hubs):
    """Enumerate every open/closed choice of the 4 nodes and every trip count on trip lanes (trips up to what the
    customer's demand needs), solving the flow exactly for each: the optimum by exhaustion."""
    nodes = [n["id"] for n in depots + hubs]
    trip_lanes = [k for k, lane in enumerate(lanes) if "trip_capacity" in lane]
    demand = {c["id"]: c["demand"] for c in customers}
    ranges = [range(0, math.ceil(demand[lanes[k]["destination"]] / lanes[k]["trip_capacity"]) + 1)
              for k in trip_lanes]
    best = math.inf
    for mask in itertools.product([0, 1], repeat=len(nodes)):
        open_set = {n for n, m in zip(nodes, mask) if m}
        for trips in itertools.product(*ranges):
            best = min(best, flow_cost_with_open(depots, customers, lanes, hubs, open_set, dict(zip(trip_lanes,
                                                                                                   trips))))
    return best


@pytest.mark.parametrize("seed", range(4))
def test_open_close_and_trips_agree_with_brute_force_enumeration(seed):
    depots, customers, lanes, hubs = random_design(seed)
    trip_lanes = [lane for lane in lanes if "trip_capacity" in lane]
    if sum(1 for _ in trip_lanes) > 4:  # keep the enumeration small
        for lane in trip_lanes[4:]:
            del lane["trip_capacity"], lane["cost_per_trip"]
    expected = brute_force(depots, customers, lanes, hubs)  # source: exhaustive enumeration + networkx
    result = solve(make_network(depots, customers, lanes, hubs), sensitivity=False)
    assert result.status.value == "optimal"
    assert result.total_cost == pytest.approx(expected, abs=1e-5)
    # The breakdown adds up and the open nodes carry the flow.
    assert sum(result.cost_breakdown.values()) == pytest.approx(result.total_cost, abs=1e-6)
    opened = set(result.open_nodes.loc[result.open_nodes["open"], "node"])
    assert set(result.flows["origin"]) - {c["id"] for c in customers} <= opened
    for row in result.trips.itertuples(index=False):
        assert row.flow <= row.trip_capacity * row.trips + TOL


def scipy_design_milp(net):
    """An independent formulation for SciPy milp (HiGHS): flows, node-open binaries with a loose safe big-M
    (total demand), trips integers, lane-use binaries for min volume / single source."""
    lanes = net.lanes
    nl = len(lanes)
    depots, hubs, customers = net.depots, net.hubs, net.customers
    big = float(customers["demand"].sum())
    nodes = list(depots["id"]) + list(hubs["id"])
    nn = len(nodes)
    trip = [i for i in range(nl) if math.isfinite(lanes.at[i, "trip_capacity"])]
    use = [i for i in range(nl) if lanes.at[i, "min_volume"] > 0
           or lanes.at[i, "destination"] in set(customers.loc[customers["single_source"], "id"])]
    n = nl + nn + len(trip) + len(use)
    c = np.zeros(n)
    c[:nl] = lanes["cost_per_unit"]
    fixed = list(depots["fixed_cost"]) + list(hubs["fixed_cost"])
    c[nl:nl + nn] = fixed
    for k, i in enumerate(trip):
        c[nl + nn + k] = lanes.at[i, "cost_per_trip"]
    rows, lo, hi = [], [], []

    def row(coeffs, low, high):
        r = np.zeros(n)
        for j, v in coeffs:
            r[j] += v
        rows.append(r), lo.append(low), hi.append(high)

    for d, s in zip(depots["id"], depots["supply"]):
        row([(i, 1) for i in range(nl) if lanes.at[i, "origin"] == d], -np.inf, s)
    for cu, q in zip(customers["id"], customers["demand"]):
        row([(i, 1) for i in range(nl) if lanes.at[i, "destination"] == cu], q, q)
    for h, k in zip(hubs["id"], hubs["capacity"]):
        row([(i, 1) for i in range(nl) if lanes.at[i, "destination"] == h]
            + [(i, -1) for i in range(nl) if lanes.at[i, "origin"] == h], 0, 0)
        row([(i, 1) for i in range(nl) if lanes.at[i, "destination"] == h], -np.inf, k)
    for j, node in enumerate(nodes):
        for i in range(nl):
            if node in (lanes.at[i, "origin"], lanes.at[i, "destination"]):
                row([(i, 1), (nl + j, -big)], -np.inf, 0)
    for k, i in enumerate(trip):
        row([(i, 1), (nl + nn + k, -lanes.at[i, "trip_capacity"])], -np.inf, 0)
    for k, i in enumerate(use):
        var = nl + nn + len(trip) + k
        row([(i, 1), (var, -big)], -np.inf, 0)
        row([(i, 1), (var, -lanes.at[i, "min_volume"])], 0, np.inf)
    for cu in customers.loc[customers["single_source"], "id"]:
        row([(nl + nn + len(trip) + k, 1) for k, i in enumerate(use) if lanes.at[i, "destination"] == cu], -np.inf, 1)
    upper = np.full(n, np.inf)
    upper[:nl] = lanes["capacity"]
    upper[nl:nl + nn] = 1
    upper[nl + nn + len(trip):] = 1
    integrality = np.r_[np.zeros(nl), np.ones(n - nl)]
    res = milp(c, constraints=LinearConstraint(np.array(rows), lo, hi), integrality=integrality,
               bounds=Bounds(np.zeros(n), upper))
    return res


def design_with_minimum_volumes(seed: int):
    """:func:`random_design` with a minimum volume on about a fifth of the lanes, drawn from the same seed."""
    rng = random.Random(seed)
    depots, customers, lanes, hubs = random_design(seed)
    for lane in lanes:
        if rng.random() < 0.2:
            lane["min_volume"] = rng.randint(3, 8)
    return depots, customers, lanes, hubs


@pytest.mark.parametrize("seed", range(6))
def test_design_agrees_with_scipy_milp(seed):
    depots, customers, lanes, hubs = design_with_minimum_volumes(100 + seed)
    customers[0]["single_source"] = True
    net = make_network(depots, customers, lanes, hubs, settings=Settings(max_open_depots=2))
    reference = scipy_design_milp(make_network(depots, customers, lanes, hubs))  # source: SciPy milp (HiGHS)
    # The reference has no max_open row: compare the unlimited model with it, then check the limited plan keeps
    # the limit, single sourcing, and costs no less.
    free = solve(make_network(depots, customers, lanes, hubs), sensitivity=False)
    if reference.status == 0:
        assert free.status.value == "optimal"
        assert free.total_cost == pytest.approx(reference.fun, abs=1e-5)
    else:
        assert free.status.value == "infeasible"
    limited = solve(net, sensitivity=False)
    if limited.status.has_plan:
        assert int(limited.open_nodes.query("kind == 'depot'")["open"].sum()) <= 2
        assert limited.total_cost >= free.total_cost - 1e-6
        single = customers[0]["id"]
        assert (limited.flows["destination"] == single).sum() <= 1


def test_closed_node_carries_no_flow_and_open_node_pays_its_charge():
    net = make_network([{"id": "Cheap", "supply": 50, "status": "closed"},
                        {"id": "Dear", "supply": 50, "fixed_cost": 7, "status": "open"}],
                       [{"id": "C", "demand": 10}],
                       [{"origin": "Cheap", "destination": "C", "cost_per_unit": 1},
                        {"origin": "Dear", "destination": "C", "cost_per_unit": 3}])
    result = solve(net)
    # Hand computation: only Dear may ship, 10 x 3 + its fixed cost 7 = 37.
    assert result.total_cost == pytest.approx(37.0, abs=TOL)
    assert result.cost_breakdown["fixed_node"] == pytest.approx(7.0, abs=TOL)
    assert set(result.flows["origin"]) == {"Dear"}


def test_network_without_design_builds_no_design_rows_and_keeps_the_plain_breakdown():
    net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 2.5}])
    assert not net.has_design
    result = solve(net)
    assert set(result.cost_breakdown) == {"transport", "handling", "fixed_lane", "unmet_penalty"}
    assert result.to_json()["open_nodes"] == [] and result.to_json()["trips"] == []


@pytest.mark.parametrize("seed", range(6))
def test_every_customer_single_sourced_agrees_with_scipy_milp(seed):
    # Every customer single-sourced: the lanes into them carry nothing or the whole demand, so their link rows are
    # equalities (formulation docstring, single_source_); the optimum must not move.
    depots, customers, lanes, hubs = design_with_minimum_volumes(500 + seed)
    for customer in customers:
        customer["single_source"] = True
    net = make_network(depots, customers, lanes, hubs)
    reference = scipy_design_milp(net)  # source: SciPy milp (HiGHS) on the independent formulation above
    result = solve(net, solver="highs")
    if reference.status != 0:
        assert result.status.value == "infeasible"
        return
    assert result.status.value == "optimal"
    assert result.total_cost == pytest.approx(reference.fun, abs=1e-5)
    assert (result.flows.groupby("destination").size().reindex([c["id"] for c in customers]).fillna(0) <= 1).all()


def test_only_whole_delivery_lanes_get_equality_links():
    # C1 is single-sourced with hard demand: its lanes carry 0 or all 6 units. C2 may go short (a penalty), C3
    # forwards goods to C4, and the lane D2 -> C1 can carry only 4 of C1's 6: those keep x <= M y.
    from lanesolve.model.formulation import build_sparse_model

    net = make_network([{"id": "D1", "supply": 30, "fixed_cost": 5}, {"id": "D2", "supply": 30}],
                       [{"id": "C1", "demand": 6, "single_source": True},
                        {"id": "C2", "demand": 5, "single_source": True, "unmet_penalty": 100},
                        {"id": "C3", "demand": 4, "single_source": True}, {"id": "C4", "demand": 3}],
                       [{"origin": "D1", "destination": "C1", "cost_per_unit": 1},
                        {"origin": "D2", "destination": "C1", "cost_per_unit": 1, "capacity": 4},
                        {"origin": "D1", "destination": "C2", "cost_per_unit": 1},
                        {"origin": "D2", "destination": "C3", "cost_per_unit": 1},
                        {"origin": "C3", "destination": "C4", "cost_per_unit": 1}])
    model = build_sparse_model(net)
    block = model.row_blocks["link_"]
    equal = dict(zip(block.ids.tolist(), (model.row_lower[block.start:block.stop] == 0).tolist()))
    assert equal == {0: True, 1: False, 2: False, 3: False}
    # Hand computation: C1 from D1 (6 + fixed 5), C2 from D1 (5), C3 and C4 through C3 from D2 (7 + 3) = 26.
    result = solve(net, solver="highs")
    assert result.status.value == "optimal" and result.total_cost == pytest.approx(26.0, abs=TOL)
