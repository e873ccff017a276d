"""Improve a plan of a fixed-charge network by local search: close one charged lane at a time and re-route.

It applies to a network whose only decisions are its lanes' fixed charges (no design decisions, carrier terms,
products or emissions): with the charged lanes chosen, what is left is a min-cost flow, which the network algorithm
of :mod:`lanesolve.model.network_flow` solves in milliseconds, so thousands of neighbouring plans can be tried in the
seconds a MIP engine would spend on a few branch-and-bound nodes.

Neighbourhood (the *drop* move of the local searches for the fixed-charge transportation problem, as in the tabu
search of Sun, Aronson, McKeown & Drinka, "A tabu search heuristic procedure for the fixed charge transportation
problem", European Journal of Operational Research 106, 1998): take a charged lane the plan uses, forbid it, and
solve the min-cost flow in which every lane the plan already pays for costs its rate (its charge is sunk) and every
other charged lane its rate plus its charge spread over the most it could carry, ``f_l / M_l`` with :math:`M_l` of
:mod:`lanesolve.model.formulation` (the linearisation of dynamic slope scaling, Kim & Pardalos 1999). The lanes that
flow then uses are kept and the flow is solved once more on them at their rates alone. The new plan's true cost
(rates, handling, the charge of every lane it uses, unmet penalties) decides: the first cheaper plan is taken and the
search starts again from it; lanes are tried in order of charge per unit carried, the dearest first, until no drop
helps (a local optimum).

Around that descent runs an *iterated local search* (Lourenço, Martin & Stützle, "Iterated local search", Handbook of
Metaheuristics, 2003) until the deadline: a kick forbids two to four used charged lanes drawn at random at once, the
descent starts from the re-routed plan, and the search goes on from the new local optimum when it is at most
:data:`ACCEPT_WORSE` dearer than the one it came from; the cheapest plan seen is kept. The draws are seeded, so a
search that runs as many kicks gives the same plan; how many it runs depends on the time and the machine's load.

On a network that is a fixed-charge transportation problem (depots straight to customers, no binding capacity, all
demand met) the tabu search over basic plans of :mod:`lanesolve.model.basis_search` runs instead: it prices every
pivot of the transportation simplex method at once, far more moves a second than drops re-solved one by one.

Every plan it returns is feasible (the network algorithm's flow meets every row of the model) and costs less than the
plan it started from; it never changes the solver's lower bound.
"""

from __future__ import annotations

import time

import numpy as np

from lanesolve.model import basis_search, network_flow
from lanesolve.model.arrays import SparseModel
from lanesolve.model.network import Network

#: The linearised charges are rounded to integers after scaling costs by this much more than the network's own
#: cost scale (they only steer the search; every plan is priced exactly).
STEER_SCALE = 100
#: A plan must be cheaper by more than this share of its cost to count as better (float noise).
BETTER = 1e-9
#: Iterated local search (Lourenço, Martin & Stützle, "Iterated local search", Handbook of Metaheuristics, 2003):
#: lanes forbidden at once by a kick, the seed of its choices, and how much worse a new local optimum may be and
#: still be searched from (our choices, set by benchmarks/mip_family.py).
KICK_SIZE = (2, 4)
KICK_SEED = 20261202
ACCEPT_WORSE = 0.002
#: Share of the time limit that ``auto`` keeps for the search when the basis search applies (instead of
#: ``solve.SEARCH_SHARE``): it finds better plans faster than the drops, and HiGHS's bound on the family instances
#: barely moves after its first seconds (our choice, by benchmarks/mip_family.py at 60 s).
BASIS_SHARE = 0.6


def applies(network: Network) -> bool:
    """True when the only decisions of ``network`` are fixed charges on lanes (the search's setting)."""
    return (network.has_fixed_charges and not network.has_design and not network.has_carrier_terms
            and network.products is None and network.emissions is None)


def share(network: Network, default: float) -> float:
    """Share of the time limit to keep for :func:`improve` on ``network``: :data:`BASIS_SHARE` when the basis search
    takes it, else ``default``."""
    return BASIS_SHARE if basis_search.applies(network) else default


def plan_cost(model: SparseModel, lane_flow: np.ndarray, unmet: np.ndarray) -> tuple[float, np.ndarray]:
    """The model's column values of a flow (per row of ``network.lanes`` and ``network.customers``) and their cost;
    a charged lane's yes/no is 1 exactly when it carries flow."""
    values = np.zeros(model.n_columns)
    values[:len(model.lane_index)] = lane_flow[model.lane_index]
    values[model.columns("unmet_")] = unmet[model.ids("unmet_")]
    values[model.columns("use_")] = lane_flow[model.ids("use_")] > 0
    return float(model.cost @ values), values


def improve(network: Network, model: SparseModel, values: np.ndarray, end: float) -> np.ndarray | None:
    """A cheaper plan than ``values`` (the model's column values of a feasible plan) by the search of the module
    docstring, before :func:`time.monotonic` reaches ``end``; None when it found none or does not apply.

    Returns
    -------
    numpy.ndarray or None
        The better plan's column values (flows, unmet, yes/no), or None.
    """
    if not applies(network) or time.monotonic() >= end:
        return None
    search = _Search.of(network, model)
    if search is None:
        return None
    lane_flow = np.zeros(search.graph.n_lanes)
    lane_flow[model.lane_index] = values[:len(model.lane_index)]
    unmet = np.zeros(search.graph.n_customers)
    unmet[model.ids("unmet_")] = values[model.columns("unmet_")]
    start_cost, _ = plan_cost(model, lane_flow, unmet)
    if basis_search.applies(network):
        # Depots straight to customers: the tabu search over basic plans (far more moves a second than drops).
        walked = basis_search.search(network, lane_flow, end)
        cost, values = plan_cost(model, walked, unmet)
        return values if _cheaper(cost, start_cost) and _meets_rows(model, values) else None
    current = best = search.descend(lane_flow, unmet, end)
    rng = np.random.default_rng(KICK_SEED)
    while time.monotonic() < end:
        if (current[1][search.charged] > 0).sum() < 2:
            break  # nothing to kick
        kicked = search.kick(current[1], rng)
        if kicked is None:
            continue  # the kick left no plan (it forbade every way to some customer)
        found = search.descend(kicked[1], kicked[2], end)
        if found[0] < current[0] * (1 + ACCEPT_WORSE):
            current = found
        if _cheaper(found[0], best[0]):
            best = found
    return best[3] if _cheaper(best[0], start_cost) else None


def _meets_rows(model: SparseModel, values: np.ndarray) -> bool:
    """The plan meets every row and bound of the model (a guard: the basic plans are feasible by construction)."""
    tol = 1e-6 * max(1.0, float(np.abs(values).max(initial=0.0)))
    activity = model.matrix @ values
    return bool((activity >= model.row_lower - tol).all() and (activity <= model.row_upper + tol).all()
                and (values >= model.lower - tol).all() and (values <= model.upper + tol).all())


def _cheaper(cost: float, than: float) -> bool:
    return cost < than - BETTER * max(abs(than), 1.0)


class _Search:
    """The moves of the module docstring on one network's graph; a plan is (cost, lane flow, unmet, values), flows
    per row of ``network.lanes``."""

    def __init__(self, model: SparseModel, graph: network_flow.FlowGraph, charged: np.ndarray, spread: np.ndarray):
        self.model, self.graph, self.charged, self.spread = model, graph, charged, spread
        self.arc_of = np.full(graph.n_lanes, -1, dtype=np.int64)
        self.arc_of[graph.lane_index] = np.arange(len(graph.capacities))[graph.lane_arcs]
        self.charge = np.zeros(graph.n_lanes)
        self.charge[charged] = model.cost[model.columns("use_")]
        self.base = graph.unit_costs * STEER_SCALE

    @classmethod
    def of(cls, network: Network, model: SparseModel) -> _Search | None:
        """The search on ``network``'s graph, or None when the network algorithm cannot take it exactly or the
        steering costs could overflow its integers."""
        graph = network_flow.flow_graph(network)
        if graph is None:
            return None
        charged = model.ids("use_")
        charge = model.cost[model.columns("use_")]
        big_m = np.array([model.big_m[lane] for lane in charged.tolist()], dtype=float)
        spread = np.zeros(graph.n_lanes, dtype=np.int64)
        spread[charged] = np.round(charge / np.maximum(big_m, 1e-9) * graph.cost_scale * STEER_SCALE)
        search = cls(model, graph, charged, spread)
        dearest = float(max(search.base.max(initial=0), (search.base[search.arc_of[charged]]
                                                          + spread[charged]).max(initial=0)))
        if float(graph.supplies[0]) * dearest * max(len(search.base), 1) >= network_flow.INT_LIMIT:
            return None
        return search

    def reroute(self, lane_flow: np.ndarray, forbidden: np.ndarray):
        """The plan of the steered flow without the ``forbidden`` lanes, re-routed on the lanes it uses at their
        rates alone; None when there is none."""
        graph, arc_of, charged = self.graph, self.arc_of, self.charged
        costs = self.base.copy()
        closed = charged[lane_flow[charged] <= 0]
        costs[arc_of[closed]] += self.spread[closed]
        capacities = graph.capacities.copy()
        capacities[arc_of[forbidden]] = 0
        steered = network_flow.run_graph(graph, costs, capacities)
        if not steered.feasible:
            return None
        capacities[arc_of[charged[steered.lane_flow[charged] <= 0]]] = 0
        answer = network_flow.run_graph(graph, None, capacities)
        if not answer.feasible:
            return None
        cost, values = plan_cost(self.model, answer.lane_flow, answer.unmet)
        return cost, answer.lane_flow, answer.unmet, values

    def descend(self, lane_flow: np.ndarray, unmet: np.ndarray, end: float):
        """Drop moves, first improvement, until none helps or ``end``."""
        cost, values = plan_cost(self.model, lane_flow, unmet)
        plan = (cost, lane_flow, unmet, values)
        charged = self.charged
        while time.monotonic() < end:
            used = charged[plan[1][charged] > 0]
            for lane in used[np.argsort(-self.charge[used] / plan[1][used], kind="stable")].tolist():
                if time.monotonic() >= end:
                    return plan
                moved = self.reroute(plan[1], np.array([lane]))
                if moved is not None and _cheaper(moved[0], plan[0]):
                    plan = moved
                    break
            else:
                return plan  # a whole pass without a cheaper plan: a local optimum
        return plan

    def kick(self, lane_flow: np.ndarray, rng: np.random.Generator):
        """Forbid a few of the used charged lanes, drawn at random, at once (the perturbation of iterated local
        search); None when no plan is left."""
        used = self.charged[lane_flow[self.charged] > 0]
        size = int(rng.integers(KICK_SIZE[0], KICK_SIZE[1] + 1))
        return self.reroute(lane_flow, rng.choice(used, size=min(size, len(used)), replace=False))
