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
from typing import TYPE_CHECKING

import numpy as np

from lanesolve.model.network import Network

if TYPE_CHECKING:
    from lanesolve.model.formulation import LaneEnds

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


@dataclass
class FlowGraph:
    """The graph of the module docstring as integer arrays, built once so that it can be solved many times with other
    lane costs or capacities (:mod:`lanesolve.model.lane_search`).

    Attributes
    ----------
    tails, heads, capacities, unit_costs : numpy.ndarray of int64
        One entry per arc, in the order of the module docstring's table.
    supplies : numpy.ndarray of int64
        Per node: the total demand at the source, its negative at the sink.
    lane_index : numpy.ndarray
        Index in ``network.lanes`` of the lane of each lane arc (the active lanes, in order).
    lane_arcs : slice
        Positions of the lane arcs.
    n_lanes, n_customers : int
        Rows of ``network.lanes`` and ``network.customers``.
    soft : numpy.ndarray of bool
        Per customer: it has an unmet penalty (an arc from the source).
    quantity_scale, cost_scale : int
        The powers of ten applied to quantities and to costs.
    """

    tails: np.ndarray
    heads: np.ndarray
    capacities: np.ndarray
    unit_costs: np.ndarray
    supplies: np.ndarray
    lane_index: np.ndarray
    lane_arcs: slice
    n_lanes: int
    n_customers: int
    soft: np.ndarray
    quantity_scale: int
    cost_scale: int

    def lane_ends(self) -> LaneEnds:
        """Where each lane arc starts and where it ends, as positions in the depot, customer and hub frames (-1
        where the end is of another kind), read back from the node numbers of the module docstring, so that the
        model built after a network solve need not look every lane end up again.

        Returns
        -------
        LaneEnds
            ``(origin, destination)``, each ``{"depot": ..., "customer": ..., "hub": ...}`` with one entry per lane
            arc: the ``lane_ends`` that :func:`lanesolve.model.formulation.build_sparse_model` takes.
        """
        n_d, n_c = self.lane_arcs.start, self.n_customers
        n_h = (len(self.supplies) - 2 - n_d - n_c) // 2
        hub_in = 2 + n_d + n_c
        ranges = {"origin": {"depot": 2, "customer": 2 + n_d, "hub": hub_in + n_h},
                  "destination": {"depot": 2, "customer": 2 + n_d, "hub": hub_in}}
        counts = {"depot": n_d, "customer": n_c, "hub": n_h}
        ends = []
        for side, nodes in (("origin", self.tails[self.lane_arcs]), ("destination", self.heads[self.lane_arcs])):
            ends.append({kind: np.where((nodes >= first) & (nodes < first + counts[kind]), nodes - first, -1)
                         for kind, first in ranges[side].items()})
        return ends[0], ends[1]


def solve_flow(network: Network) -> FlowAnswer | None:
    """Solve the pure min-cost flow of ``network`` with OR-Tools; ``None`` when it cannot be done exactly.

    ``None`` means: OR-Tools is not installed, the data cannot be scaled to exact integers, or the scaled totals
    could overflow. The caller then solves the same network with the LP engine.
    """
    graph = flow_graph(network)
    return None if graph is None else run_graph(graph)


def flow_graph(network: Network) -> FlowGraph | None:
    """The integer graph of ``network`` (fixed charges and design decisions ignored); ``None`` when OR-Tools is
    missing, the data cannot be scaled to exact integers, or the scaled totals could overflow."""
    try:
        from ortools.graph.python import min_cost_flow  # noqa: F401  (only to know it is there)
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

    supplies = np.zeros(2 + n_d + n_c + 2 * n_h, dtype=np.int64)
    supplies[0], supplies[1] = int(total), -int(total)
    return FlowGraph(tails, heads, capacities, unit_costs, supplies, lane_index,
                     slice(n_d, n_d + len(lane_index)), len(lanes), n_c, soft, q_scale, c_scale)


def run_graph(graph: FlowGraph, unit_costs: np.ndarray | None = None,
              capacities: np.ndarray | None = None) -> FlowAnswer:
    """Solve ``graph`` with OR-Tools, optionally with other arc ``unit_costs`` or ``capacities`` (scaled integers,
    one per arc); the objective is then in those costs."""
    from ortools.graph.python import min_cost_flow

    capacities = graph.capacities if capacities is None else capacities
    unit_costs = graph.unit_costs if unit_costs is None else unit_costs
    # Arcs that can carry nothing are left out: a search that closes most lanes solves a much smaller graph.
    keep = np.flatnonzero(capacities > 0)
    solver = min_cost_flow.SimpleMinCostFlow()
    solver.add_arcs_with_capacity_and_unit_cost(graph.tails[keep], graph.heads[keep], capacities[keep],
                                                unit_costs[keep])
    solver.set_nodes_supplies(np.arange(len(graph.supplies), dtype=np.int64), graph.supplies)
    status = solver.solve()
    lane_flow = np.zeros(graph.n_lanes)
    unmet = np.zeros(graph.n_customers)
    q_scale, c_scale = graph.quantity_scale, graph.cost_scale
    if status != solver.OPTIMAL:
        return FlowAnswer(False, lane_flow, unmet, math.nan, q_scale, c_scale,
                          infeasible=status == solver.INFEASIBLE)
    flows = np.zeros(len(capacities))
    flows[keep] = solver.flows(np.arange(len(keep), dtype=np.int64)).astype(float) / q_scale
    n_soft = int(graph.soft.sum())
    lane_flow[graph.lane_index] = flows[graph.lane_arcs]
    unmet[graph.soft] = flows[len(capacities) - n_soft:]
    objective = solver.optimal_cost() / (q_scale * c_scale)
    return FlowAnswer(True, lane_flow, unmet, objective, q_scale, c_scale)
