"""Pure min-cost flows solved by a network-flow algorithm instead of an LP engine.

A network without yes/no or trip decisions (no fixed charges, every depot and hub ``open`` without a fixed cost, no
minimum volumes, whole trips, single sourcing or limits on open nodes) is a min-cost flow problem, and a network
algorithm solves it far faster than a general LP engine: OR-Tools' ``SimpleMinCostFlow`` (cost scaling, Goldberg &
Tarjan; Google OR-Tools, ``ortools.graph.python.min_cost_flow``). It takes integers, so quantities and costs are
scaled by powers of ten; when no power up to 10**6 makes every value an exact integer, or the scaled totals could
overflow 64-bit integers, :func:`solve_flow` answers ``None`` and the LP engine solves the network instead.

The graph (every figure in the workbook's units and currency; a hub is split into an entry and an exit node):

=====================  =======================  ==============================  =====================================
arc                    capacity                 cost per unit                   models
=====================  =======================  ==============================  =====================================
source -> depot d      supply s_d               0                               net outflow of d at most s_d
lane o -> d            lane capacity            rate + handling at o            the lane; a depot's handling is
                                                                                charged on what it ships out, a hub's
                                                                                (below) on what passes through
hub entry -> exit      hub capacity             hub handling                    inflow = outflow <= capacity
customer c -> sink     demand q_c               0                               c keeps exactly q_c ...
source -> customer c   q_c (c with a penalty)   unmet penalty p_c               ... of which up to q_c may be unmet
=====================  =======================  ==============================  =====================================

The source supplies, and the sink takes, the total demand Q. Every arc that says "no limit" gets capacity Q: an
optimal plan without flow round a cycle (one exists, costs being non-negative: see the big-M argument in
:mod:`lanesolve.model.formulation`) never carries more than Q on any arc. The problem is feasible exactly when all of
Q reaches the sink, which is the model's hard-demand condition; its optimum is the model's optimum.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2.5}])
>>> answer = solve_flow(net)
>>> answer.feasible, answer.lane_flow.tolist(), answer.objective
(True, [5.0], 12.5)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lanesolve.model.network import Network

#: Largest power of ten tried when scaling quantities or costs to integers.
MAX_DECIMALS = 6
#: Scaled totals must stay below this (OR-Tools counts costs in signed 64-bit integers; a margin of 2 bits).
INT_LIMIT = 2 ** 61


@dataclass
class FlowAnswer:
    """What the network algorithm found.

    Attributes
    ----------
    feasible : bool
        All demand that must be delivered reaches its customers.
    lane_flow : numpy.ndarray
        Flow on every lane of ``network.lanes`` (0 on inactive lanes), in the workbook's units.
    unmet : numpy.ndarray
        Units short at every customer of ``network.customers``.
    objective : float
        The plan's cost (transport + handling + unmet penalties), from the integer optimum.
    quantity_scale, cost_scale : int
        The powers of ten applied to quantities and to costs.
    infeasible : bool
        The algorithm proved that the demand that must be delivered cannot all reach its customers (False when
        it stopped for any other reason, such as a cost range it cannot handle: then neither answer is known).
    """

    feasible: bool
    lane_flow: np.ndarray
    unmet: np.ndarray
    objective: float
    quantity_scale: int
    cost_scale: int
    infeasible: bool = False


def applies(network: Network) -> bool:
    """True when ``network`` is a pure min-cost flow (no yes/no or trip decisions, no carrier terms):
    :func:`solve_flow` may take it."""
    # Carrier terms (commitments, minimum charges, rate breaks) add rows or columns a network algorithm cannot take.
    return (not network.has_fixed_charges and not network.has_design
            and not getattr(network, "has_carrier_terms", False))


def decimal_scale(values: np.ndarray) -> int | None:
    """Smallest power of ten (up to 10**MAX_DECIMALS) that turns every finite value into an exact integer.

    Exact means the scaled value rounds to an integer that, divided back, gives the same float, so ``0.1`` scales by
    10 but a cost of ``1/3`` does not scale at all (``None``).

    >>> decimal_scale(np.array([2.0, 0.25, 7.5])), decimal_scale(np.array([1 / 3]))
    (100, None)
    """
    values = values[np.isfinite(values)]
    for decimals in range(MAX_DECIMALS + 1):
        factor = 10 ** decimals
        scaled = np.round(values * factor)
        if np.array_equal(scaled / factor, values) and (np.abs(scaled) < INT_LIMIT).all():
            return factor
    return None


def solve_flow(network: Network) -> FlowAnswer | None:
    """Solve the pure min-cost flow of ``network`` with OR-Tools; ``None`` when it cannot be done exactly.

    ``None`` means: OR-Tools is not installed, the data cannot be scaled to exact integers, or the scaled totals
    could overflow. The caller then solves the same network with the LP engine.
    """
    try:
        from ortools.graph.python import min_cost_flow
    except ImportError:  # optional at run time: the LP engines solve the same model
        return None
    depots, customers, hubs = network.depots, network.customers, network.hubs
    lanes = network.lanes
    active = lanes["active"].to_numpy(dtype=bool)
    lane_index = np.flatnonzero(active)

    supply = depots["supply"].to_numpy(dtype=float)
    demand = customers["demand"].to_numpy(dtype=float)
    penalty = customers["unmet_penalty"].to_numpy(dtype=float)
    if network.settings.unmet_penalty is not None:
        penalty = np.where(np.isnan(penalty), network.settings.unmet_penalty, penalty)
    soft = ~np.isnan(penalty)
    hub_capacity = hubs["capacity"].to_numpy(dtype=float)
    lane_capacity = lanes["capacity"].to_numpy(dtype=float)[lane_index]
    rate = lanes["cost_per_unit"].to_numpy(dtype=float)[lane_index]
    depot_handling = depots["handling_cost"].to_numpy(dtype=float)
    hub_handling = hubs["handling_cost"].to_numpy(dtype=float)

    q_scale = decimal_scale(np.concatenate([supply, demand, hub_capacity, lane_capacity]))
    c_scale = decimal_scale(np.concatenate([rate, depot_handling, hub_handling, penalty[soft]]))
    if q_scale is None or c_scale is None:
        return None
    total = float(np.round(demand * q_scale).sum())

    # Node numbers: 0 source, 1 sink, then depots, customers, hub entries, hub exits.
    n_d, n_c, n_h = len(depots), len(customers), len(hubs)
    depot_node = 2 + np.arange(n_d)
    customer_node = 2 + n_d + np.arange(n_c)
    hub_in = 2 + n_d + n_c + np.arange(n_h)
    hub_out = hub_in + n_h
    ids = {}
    for nodes, frame in ((depot_node, depots), (customer_node, customers)):
        ids.update(zip(frame["id"].tolist(), nodes.tolist()))
    entry = dict(zip(hubs["id"].tolist(), hub_in.tolist()))
    exit_ = dict(zip(hubs["id"].tolist(), hub_out.tolist()))
    origins = lanes["origin"].to_numpy()[lane_index]
    destinations = lanes["destination"].to_numpy()[lane_index]
    tail = np.array([exit_.get(o, ids.get(o, -1)) for o in origins], dtype=np.int64)
    head = np.array([entry.get(d, ids.get(d, -1)) for d in destinations], dtype=np.int64)
    if (tail < 0).any() or (head < 0).any():
        return None  # a lane at an unknown node: the validator reports it; never guess here
    origin_handling = np.zeros(len(lane_index))
    depot_cost = dict(zip(depots["id"].tolist(), depot_handling.tolist()))
    origin_handling[:] = [depot_cost.get(o, 0.0) for o in origins]

    def quantity(values: np.ndarray) -> np.ndarray:
        return np.where(np.isfinite(values), np.minimum(np.round(values * q_scale), total), total).astype(np.int64)

    def cost(values: np.ndarray) -> np.ndarray:
        return np.round(values * c_scale).astype(np.int64)

    tails = np.concatenate([np.zeros(n_d), tail, hub_in, customer_node, np.zeros(int(soft.sum()))]).astype(np.int64)
    heads = np.concatenate([depot_node, head, hub_out, np.ones(n_c), customer_node[soft]]).astype(np.int64)
    capacities = np.concatenate([quantity(supply), quantity(lane_capacity), quantity(hub_capacity),
                                 quantity(demand), quantity(demand[soft])])
    unit_costs = np.concatenate([np.zeros(n_d, dtype=np.int64), cost(rate) + cost(origin_handling),
                                 cost(hub_handling), np.zeros(n_c, dtype=np.int64), cost(penalty[soft])])
    largest = float(unit_costs.max()) if len(unit_costs) else 0.0
    if total * largest * max(len(capacities), 1) >= INT_LIMIT:
        return None

    solver = min_cost_flow.SimpleMinCostFlow()
    solver.add_arcs_with_capacity_and_unit_cost(tails, heads, capacities, unit_costs)
    supplies = np.zeros(2 + n_d + n_c + 2 * n_h, dtype=np.int64)
    supplies[0], supplies[1] = int(total), -int(total)
    solver.set_nodes_supplies(np.arange(len(supplies), dtype=np.int64), supplies)
    status = solver.solve()
    lane_flow = np.zeros(len(lanes))
    unmet = np.zeros(n_c)
    if status != solver.OPTIMAL:
        return FlowAnswer(False, lane_flow, unmet, math.nan, q_scale, c_scale,
                          infeasible=status == solver.INFEASIBLE)
    flows = solver.flows(np.arange(len(capacities), dtype=np.int64)).astype(float) / q_scale
    n_lanes = len(lane_index)
    lane_flow[lane_index] = flows[n_d:n_d + n_lanes]
    unmet[soft] = flows[len(capacities) - int(soft.sum()):]
    objective = solver.optimal_cost() / (q_scale * c_scale)
    return FlowAnswer(True, lane_flow, unmet, objective, q_scale, c_scale)
