"""Published optima: the solver must reproduce textbook and library-documentation examples.

Each instance is built with :func:`lanesolve.model.network.make_network` (no workbook) and its source is named beside it.
"""

from __future__ import annotations

import math
import random

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from lanesolve.model.network import make_network
from lanesolve.model.result import COST_COMPONENTS, SolveStatus
from lanesolve.model.solve import solve

TOL = 1e-6


def flows_by_pair(result) -> dict[tuple[str, str], float]:
    return {(r.origin, r.destination): r.flow for r in result.flows.itertuples(index=False)}


def test_beer_distribution_optimum_and_unique_plan():
    # Source: PuLP examples/BeerDistributionProblem.py (supplies A 1000, B 4000; demands 1..5 = 500, 900, 1800,
    # 200, 700; costs A: 2 4 5 2 1, B: 3 1 3 2 3). The example states demand as ">="; here demand is delivered
    # exactly and supply is "<=" -- the same optimum 8600 with the same (unique) plan.
    costs = {"A": [2, 4, 5, 2, 1], "B": [3, 1, 3, 2, 3]}
    demand = [500, 900, 1800, 200, 700]
    net = make_network(
        [{"id": "A", "supply": 1000}, {"id": "B", "supply": 4000}],
        [{"id": str(j + 1), "demand": d} for j, d in enumerate(demand)],
        [{"origin": o, "destination": str(j + 1), "cost_per_unit": c} for o, row in costs.items()
         for j, c in enumerate(row)],
    )
    result = solve(net)
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(8600, abs=TOL)
    expected = {("A", "1"): 300, ("A", "5"): 700, ("B", "1"): 200, ("B", "2"): 900, ("B", "3"): 1800,
                ("B", "4"): 200}
    got = flows_by_pair(result)
    assert set(got) == set(expected)
    for pair, flow in expected.items():
        assert got[pair] == pytest.approx(flow, abs=TOL)
    assert result.mip_gap is None
    assert result.cost_breakdown["transport"] == pytest.approx(8600, abs=TOL)
    assert sum(result.cost_breakdown[k] for k in COST_COMPONENTS) == pytest.approx(result.total_cost, abs=TOL)


def test_networkx_min_cost_flow_docstring_example():
    # Source: networkx/algorithms/flow/mincost.py, min_cost_flow docstring: node a demand -5, d demand 5; edges
    # a-b weight 3 capacity 4, a-c 6/10, b-d 1/9, c-d 2/5; flow {a: {b: 4, c: 1}, b: {d: 4}, c: {d: 1}}, cost 24.
    # Here a is a depot with supply 5, d a customer with demand 5, b and c hubs.
    net = make_network(
        [{"id": "a", "supply": 5}],
        [{"id": "d", "demand": 5}],
        [{"origin": "a", "destination": "b", "cost_per_unit": 3, "capacity": 4},
         {"origin": "a", "destination": "c", "cost_per_unit": 6, "capacity": 10},
         {"origin": "b", "destination": "d", "cost_per_unit": 1, "capacity": 9},
         {"origin": "c", "destination": "d", "cost_per_unit": 2, "capacity": 5}],
        hubs=[{"id": "b"}, {"id": "c"}],
    )
    result = solve(net)
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(24, abs=TOL)
    got = flows_by_pair(result)
    for pair, flow in {("a", "b"): 4, ("a", "c"): 1, ("b", "d"): 4, ("c", "d"): 1}.items():
        assert got[pair] == pytest.approx(flow, abs=TOL)
    # Lane a-b runs full: utilisation 4 / 4 (capacity from the docstring example above).
    row = result.flows[(result.flows["origin"] == "a") & (result.flows["destination"] == "b")].iloc[0]
    assert row["utilisation"] == pytest.approx(1.0, abs=TOL)
    hubs = result.nodes.set_index("node")
    assert hubs.loc["b", "throughput"] == pytest.approx(4, abs=TOL)


def test_scipy_linear_sum_assignment_docstring_example():
    # Source: scipy.optimize.linear_sum_assignment docstring: cost [[4, 1, 3], [2, 0, 5], [3, 2, 2]], optimal
    # assignment cost 5. As a transportation problem: three depots of supply 1, three customers of demand 1
    # (the assignment polytope is integral, so the LP optimum is the assignment optimum).
    cost = np.array([[4, 1, 3], [2, 0, 5], [3, 2, 2]])
    rows, cols = linear_sum_assignment(cost)
    assert cost[rows, cols].sum() == 5  # the docstring's value, recomputed by SciPy itself
    net = make_network(
        [{"id": f"w{i}", "supply": 1} for i in range(3)],
        [{"id": f"j{j}", "demand": 1} for j in range(3)],
        [{"origin": f"w{i}", "destination": f"j{j}", "cost_per_unit": int(cost[i, j])} for i in range(3)
         for j in range(3)],
    )
    result = solve(net)
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(5, abs=TOL)


@pytest.mark.parametrize("seed", range(10))
def test_shortest_path_matches_networkx_dijkstra(seed):
    # Reference: networkx.shortest_path_length(weight=...) (Dijkstra). One unit from a depot to a customer through
    # uncapacitated hubs is a shortest-path problem; its min cost equals the weighted path length.
    rng = random.Random(seed)
    hubs = [f"h{i}" for i in range(8)]
    nodes = ["src"] + hubs + ["dst"]
    graph = nx.DiGraph()
    graph.add_nodes_from(nodes)
    lanes = []
    for origin in nodes[:-1]:
        for destination in nodes[1:]:
            if origin != destination and rng.random() < 0.35:
                weight = rng.randint(1, 20)
                graph.add_edge(origin, destination, weight=weight)
                lanes.append({"origin": origin, "destination": destination, "cost_per_unit": weight})
    net = make_network([{"id": "src", "supply": 1}], [{"id": "dst", "demand": 1}], lanes,
                       hubs=[{"id": h} for h in hubs])
    result = solve(net)
    if nx.has_path(graph, "src", "dst"):
        assert result.status is SolveStatus.OPTIMAL
        expected = nx.shortest_path_length(graph, "src", "dst", weight="weight")
        assert result.total_cost == pytest.approx(expected, abs=TOL)
    else:
        assert result.status is SolveStatus.INFEASIBLE
        assert math.isnan(result.total_cost)
