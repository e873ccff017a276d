"""Pre-solve checks: one hand-built case per reason, none of which may call the solver.

Each infeasible case is also confirmed independently with networkx ``maximum_flow_value``: the most that can reach
the customers (super-source -> depots at their supply, lanes at their capacity, hubs split into in/out at their
capacity, customers -> super-sink at their demand) falls short of the demand.
"""

from __future__ import annotations

import math

import networkx as nx
import pulp
import pytest

from lanesolve.model.checks import no_plan_result, presolve_checks
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import COST_COMPONENTS, NODE_COLUMNS, SolveStatus


@pytest.fixture(autouse=True)
def no_solver(monkeypatch):
    """The checks must be cheap: any attempt to run a solver fails the test."""

    def refuse(*args, **kwargs):
        raise AssertionError("a pre-solve check called the solver")

    monkeypatch.setattr(pulp.LpProblem, "solve", refuse)


def max_deliverable(net) -> float:
    """Most units that can reach the customers, by networkx.maximum_flow_value (reference for infeasibility)."""
    graph = nx.DiGraph()
    hubs = set(net.hubs["id"])
    for d in net.depots.itertuples(index=False):
        graph.add_edge("SOURCE", d.id, capacity=d.supply)
    for c in net.customers.itertuples(index=False):
        graph.add_edge(c.id, "SINK", capacity=c.demand)
    for h in net.hubs.itertuples(index=False):
        attrs = {"capacity": h.capacity} if math.isfinite(h.capacity) else {}
        graph.add_edge(f"{h.id}/in", f"{h.id}/out", **attrs)
    for lane in net.active_lanes.itertuples(index=False):
        tail = f"{lane.origin}/out" if lane.origin in hubs else lane.origin
        head = f"{lane.destination}/in" if lane.destination in hubs else lane.destination
        attrs = {"capacity": lane.capacity} if math.isfinite(lane.capacity) else {}
        graph.add_edge(tail, head, **attrs)
    graph.add_nodes_from(["SOURCE", "SINK"])
    return nx.maximum_flow_value(graph, "SOURCE", "SINK")


def lane(origin, destination, **extra):
    return {"origin": origin, "destination": destination, "cost_per_unit": 1, **extra}


def test_clean_network_has_no_reasons():
    net = make_network([{"id": "D", "supply": 10}], [{"id": "C", "demand": 10}], [lane("D", "C", capacity=10)])
    assert presolve_checks(net) == []


def test_total_supply_short_of_hard_demand_says_by_how_much():
    # Hand calculation: supply 5 + 3 = 8, hard demand 6 + 4 = 10 (C3 has a penalty and does not count): 2 short.
    net = make_network([{"id": "D1", "supply": 5}, {"id": "D2", "supply": 3}],
                       [{"id": "C1", "demand": 6}, {"id": "C2", "demand": 4},
                        {"id": "C3", "demand": 100, "unmet_penalty": 9}],
                       [lane(d, c) for d in ("D1", "D2") for c in ("C1", "C2", "C3")],
                       settings=Settings(units="pallets"))
    assert max_deliverable(net) == pytest.approx(8)  # all 8 can move, still short of the hard 10
    reasons = presolve_checks(net)
    assert len(reasons) == 1
    assert "8 pallets" in reasons[0] and "10 pallets" in reasons[0] and "2 pallets short" in reasons[0]


def test_customer_with_hard_demand_and_no_active_inbound_lane():
    # C2's only lane is inactive (row 3 of Lanes); it needs 4, so nothing can reach it.
    net = make_network([{"id": "D", "supply": 20}], [{"id": "C1", "demand": 5}, {"id": "C2", "demand": 4}],
                       [lane("D", "C1"), lane("D", "C2", active=False)])
    assert max_deliverable(net) < 9
    reasons = presolve_checks(net)
    assert len(reasons) == 1
    assert "Customers row 3" in reasons[0] and "'C2'" in reasons[0] and "needs 4" in reasons[0]
    assert "no active lane ends there" in reasons[0]


def test_penalised_or_zero_demand_customer_without_lanes_is_not_a_reason():
    net = make_network([{"id": "D", "supply": 20}],
                       [{"id": "C1", "demand": 5, "unmet_penalty": 3}, {"id": "C2", "demand": 0}], [])
    assert presolve_checks(net) == []


def test_settings_default_penalty_makes_demand_soft():
    net = make_network([{"id": "D", "supply": 1}], [{"id": "C", "demand": 5}], [],
                       settings=Settings(unmet_penalty=10))
    assert presolve_checks(net) == []


def test_inbound_lane_capacity_short_of_hard_demand():
    # Hand calculation: inbound capacities 3 + 4 = 7 < demand 10.
    net = make_network([{"id": "D1", "supply": 50}, {"id": "D2", "supply": 50}], [{"id": "C", "demand": 10}],
                       [lane("D1", "C", capacity=3), lane("D2", "C", capacity=4)])
    assert max_deliverable(net) == pytest.approx(7)
    reasons = presolve_checks(net)
    assert len(reasons) == 1
    assert "'C'" in reasons[0] and "needs 10" in reasons[0] and "only 7" in reasons[0]


def test_customer_no_depot_with_supply_can_reach():
    # C is served only from hub H, and H only from depot E, which has no supply.
    net = make_network([{"id": "D", "supply": 50}, {"id": "E", "supply": 0}], [{"id": "C", "demand": 10}],
                       [lane("E", "H"), lane("H", "C")], hubs=[{"id": "H"}])
    assert max_deliverable(net) == 0
    reasons = presolve_checks(net)
    assert len(reasons) == 1
    assert "'C'" in reasons[0] and "no depot with supply can reach it" in reasons[0]


def test_zero_capacity_hub_blocks_reachability():
    net = make_network([{"id": "D", "supply": 50}], [{"id": "C", "demand": 10}],
                       [lane("D", "H"), lane("H", "C")], hubs=[{"id": "H", "capacity": 0}])
    assert max_deliverable(net) == 0
    assert any("no depot with supply can reach it" in r for r in presolve_checks(net))


def test_customers_can_forward_to_each_other():
    # C2 is reached only through C1 (customer forwarding is allowed): not a reason.
    net = make_network([{"id": "D", "supply": 50}], [{"id": "C1", "demand": 5}, {"id": "C2", "demand": 5}],
                       [lane("D", "C1"), lane("C1", "C2")])
    assert max_deliverable(net) == pytest.approx(10)
    assert presolve_checks(net) == []


def test_no_plan_result_reports_infeasible_with_reasons_and_zero_flows():
    net = make_network([{"id": "D", "supply": 1}], [{"id": "C", "demand": 5}], [lane("D", "C")],
                       hubs=[{"id": "H", "capacity": 4}])
    reasons = presolve_checks(net)
    result = no_plan_result(net, reasons)
    assert result.status is SolveStatus.INFEASIBLE and not result.status.has_plan
    assert result.messages == reasons and reasons
    assert math.isnan(result.total_cost)
    assert set(result.cost_breakdown) == set(COST_COMPONENTS)
    assert result.flows.empty and result.unmet.empty
    assert list(result.nodes.columns) == NODE_COLUMNS
    nodes = result.nodes.set_index("node")
    assert list(nodes.index) == ["D", "C", "H"]
    assert (nodes[["shipped", "received"]] == 0).all().all()
    assert nodes.loc["C", "demand"] == 5 and nodes.loc["D", "supply"] == 1 and nodes.loc["H", "capacity"] == 4


@pytest.mark.parametrize("levels", [0, 1, 64])
@pytest.mark.parametrize("seed", range(20))
def test_reachable_nodes_match_networkx_descendants(monkeypatch, seed, levels):
    # Independent check: networkx.descendants from a super-source over the same arcs (lanes with capacity above 0,
    # none leaving a hub of zero capacity or a closed node), the rule the check states. ``levels``: the passes
    # made in NumPy before SciPy's breadth-first order takes the rest (0: SciPy alone; 1: both share the search).
    import random

    from lanesolve.model import checks
    from lanesolve.model.checks import _reachable_from_supply

    monkeypatch.setattr(checks, "LEVELS", levels)

    rng = random.Random(seed)
    depots = [{"id": f"D{i}", "supply": rng.choice([0, 10]), "status": rng.choice(["open", "open", "closed"])}
              for i in range(3)]
    hubs = [{"id": f"H{i}", "capacity": rng.choice([0, 5, None])} for i in range(3)]
    customers = [{"id": f"C{i}", "demand": 1} for i in range(5)]
    names = [d["id"] for d in depots] + [h["id"] for h in hubs] + [c["id"] for c in customers]
    lanes = [lane(a, b, capacity=rng.choice([0, 3, None])) for a in names for b in names
             if a != b and not b.startswith("D") and rng.random() < 0.25]
    net = make_network(depots, customers, lanes, hubs=hubs)
    blocked = {h["id"] for h in hubs if h["capacity"] == 0} | {d["id"] for d in depots if d["status"] == "closed"}
    graph = nx.DiGraph()
    graph.add_node("source")
    for d in depots:
        if d["supply"] > 0 and d["status"] != "closed":
            graph.add_edge("source", d["id"])
    for row in net.active_lanes.itertuples():
        if not row.capacity > 0 or row.origin in blocked:
            continue
        graph.add_edge(row.origin, row.destination)
    assert _reachable_from_supply(net) == nx.descendants(graph, "source")


def test_reachable_along_a_chain_longer_than_the_passes_in_numpy():
    # A depot, then 150 hubs in a row, then a customer: 151 lanes deep, beyond the NumPy passes, so SciPy takes the
    # rest of the search from where they stopped. A hub of zero capacity in the middle stops it: networkx's
    # descendants from the depot (without the lanes leaving that hub) is the reference.
    from lanesolve.model import checks
    from lanesolve.model.checks import _reachable_from_supply

    names = [f"H{i:03d}" for i in range(150)]
    chain = ["D"] + names + ["C"]
    for stop in (None, 120):
        hubs = [{"id": h, "capacity": 0 if stop is not None and h == names[stop] else None} for h in names]
        net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
                           [lane(a, b) for a, b in zip(chain, chain[1:])], hubs=hubs)
        graph = nx.DiGraph((a, b) for a, b in zip(chain, chain[1:]) if stop is None or a != names[stop])
        expected = nx.descendants(graph, "D") | {"D"}
        assert len(chain) - 1 > checks.LEVELS
        assert _reachable_from_supply(net) == expected
        reasons = presolve_checks(net)
        assert (stop is not None) == any("no depot with supply can reach it" in r for r in reasons)
