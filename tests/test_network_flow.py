"""The network-flow path for pure min-cost flows (OR-Tools cost scaling on integers scaled from the workbook's
decimals) against networkx ``network_simplex``, an independent solver, on the random networks of
test_random_vs_networkx, and the cases where scaling cannot be exact."""

from __future__ import annotations

import math

import numpy as np
import pytest

from lanesolve.model.network import make_network
from lanesolve.model.network_flow import applies, decimal_scale, solve_flow
from test_random_vs_networkx import SEEDS, TOL, networkx_cost, random_network

pytest.importorskip("ortools")


def assert_flow_feasible(net, answer) -> float:
    """Every lane, depot, hub and customer row holds; returns the cost recomputed from the flows."""
    lanes = net.lanes
    flow = answer.lane_flow
    assert (flow >= -TOL).all() and (flow <= lanes["capacity"].to_numpy() + TOL).all()
    assert (flow[~lanes["active"].to_numpy()] == 0).all()
    out = {n: 0.0 for n in net.node_kind()}
    into = dict(out)
    for o, d, x in zip(lanes["origin"], lanes["destination"], flow):
        out[o] += x
        into[d] += x
    for d in net.depots.itertuples():
        assert out[d.id] - into[d.id] <= d.supply + TOL
    for h in net.hubs.itertuples():
        assert into[h.id] == pytest.approx(out[h.id], abs=TOL) and into[h.id] <= h.capacity + TOL
    cost = 0.0
    for k, c in enumerate(net.customers.itertuples()):
        short = answer.unmet[k]
        assert (short == 0 if math.isnan(c.unmet_penalty) else -TOL <= short <= c.demand + TOL)
        assert into[c.id] - out[c.id] + short == pytest.approx(c.demand, abs=TOL)
        cost += 0 if math.isnan(c.unmet_penalty) else short * c.unmet_penalty
    handling = dict(zip(net.depots["id"], net.depots["handling_cost"]))
    handling.update(zip(net.hubs["id"], net.hubs["handling_cost"]))
    depot_ids = set(net.depots["id"])
    for o, d, rate, x in zip(lanes["origin"], lanes["destination"], lanes["cost_per_unit"], flow):
        cost += x * (rate + (handling[o] if o in depot_ids else 0) + (handling.get(d, 0) if d not in depot_ids
                                                                         else 0))
    return cost


@pytest.mark.parametrize("seed", SEEDS)
def test_random_network_matches_network_simplex(seed):
    # Reference: networkx.network_simplex on the mapping documented in test_random_vs_networkx.
    net = random_network(seed)
    assert applies(net)
    expected = networkx_cost(net)
    answer = solve_flow(net)
    assert answer is not None  # integer data always scales
    if expected is None:
        assert not answer.feasible
    else:
        assert answer.feasible
        assert answer.objective == pytest.approx(expected, abs=TOL)
        assert assert_flow_feasible(net, answer) == pytest.approx(expected, abs=TOL)


def test_decimal_data_is_scaled_exactly():
    # 2.5 units at 0.35 per unit plus 0.1 handling: 2.5 * 0.45 = 1.125 (hand computed); the cheaper lane is
    # capped at 1.5, the rest goes by the dearer one: 1.5 * 0.45 + 1.0 * (0.6 + 0.1) = 1.375.
    net = make_network([{"id": "D", "supply": 10, "handling_cost": 0.1}], [{"id": "C", "demand": 2.5}],
                       [{"origin": "D", "destination": "C", "mode": "road", "cost_per_unit": 0.35, "capacity": 1.5},
                        {"origin": "D", "destination": "C", "mode": "rail", "cost_per_unit": 0.6}])
    answer = solve_flow(net)
    assert (answer.quantity_scale, answer.cost_scale) == (10, 100)
    assert answer.lane_flow.tolist() == [1.5, 1.0]
    assert answer.objective == pytest.approx(1.375, abs=1e-12)


def test_costs_that_are_not_short_decimals_are_left_to_the_lp_engine():
    net = make_network([{"id": "D", "supply": 3}], [{"id": "C", "demand": 3}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 1 / 3}])
    assert solve_flow(net) is None


def test_decimal_scale_refuses_values_that_overflow():
    assert decimal_scale(np.array([1e19])) is None
    assert decimal_scale(np.array([0.5, math.inf])) == 10


def test_design_networks_do_not_take_the_network_path():
    net = make_network([{"id": "D", "supply": 3, "fixed_cost": 5}], [{"id": "C", "demand": 3}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 1}])
    assert not applies(net)


@pytest.mark.parametrize("seed", SEEDS)
def test_model_from_the_graphs_lane_ends_is_the_model_from_the_node_ids(seed):
    # The lane ends read back from the graph's node numbers must be exactly those found by looking every lane end
    # up among the node ids (the model's own lookup); the two models are compared entry by entry. Reference: the
    # node ids of the network itself, independently of the graph's numbering.
    from lanesolve.model.formulation import build_sparse_model
    from lanesolve.model.network_flow import flow_graph

    net = random_network(seed)
    graph = flow_graph(net)
    origin, destination = graph.lane_ends()
    active = net.lanes[net.lanes["active"]]
    frames = {"depot": net.depots, "customer": net.customers, "hub": net.hubs}
    for ends, column in ((origin, "origin"), (destination, "destination")):
        for kind, frame in frames.items():
            ids = frame["id"].tolist()
            expected = [ids.index(node) if node in ids else -1 for node in active[column]]
            assert ends[kind].tolist() == expected
    looked_up, reused = build_sparse_model(net), build_sparse_model(net, lane_ends=graph.lane_ends())
    assert (looked_up.matrix != reused.matrix).nnz == 0
    for blocks in ("row_blocks", "column_blocks"):
        assert [(b.prefix, b.start, b.ids.tolist()) for b in getattr(looked_up, blocks).values()] == \
            [(b.prefix, b.start, b.ids.tolist()) for b in getattr(reused, blocks).values()]
    for field in ("row_lower", "row_upper", "lower", "upper"):
        np.testing.assert_array_equal(getattr(looked_up, field), getattr(reused, field))
    assert looked_up.costs.keys() == reused.costs.keys()
    for name in looked_up.costs:
        np.testing.assert_array_equal(looked_up.costs[name], reused.costs[name])
