"""Plans for a set of open depots, and a local search over that set, for :mod:`lanesolve.model.lagrangian`.

With the open depots chosen, what is left of a facility-location model is a transportation problem (split
deliveries, depot supplies, lane capacities, unmet penalties): a min-cost flow. :class:`DepotSearch` prices an open
set by solving it with OR-Tools' min-cost flow (the graph of :mod:`lanesolve.model.network_flow`, restricted to the
open depots' lanes), or with HiGHS's LP (through SciPy) when the quantities cannot be scaled to exact integers.
Quantities are scaled exactly (:func:`lanesolve.model.network_flow.decimal_scale`), so every flow it returns is
feasible to the unit; costs are scaled exactly when a power of ten makes them integers and otherwise rounded at the
largest power of ten the integer range allows, so that a flow is then optimal for costs within half a scaled unit of
the real ones (a few millionths of the plan on the 100 x 1,000 published sets). The plan's cost is always
recomputed in floats from its flows.

The local search (:meth:`DepotSearch.improve`) tries, from the best plan, closing one open depot, opening one
closed depot, and swapping one for the other, each priced by a full transportation solve (a few milliseconds at
100 x 1,000), takes the first move that lowers the cost and starts again, until no move does or time runs out: the
classic add/drop/swap neighbourhood of facility location (e.g. Kuehn & Hamburger, "A heuristic program for
locating warehouses", Management Science 9, 1963, for add and drop). Moves are tried in the order of the depots'
Lagrangian values (most promising first). It then starts again from the next cheapest open sets priced so far, a
few times (:data:`STARTS`), since a search can end in a local optimum that another start avoids.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from lanesolve.model.network_flow import INT_LIMIT, decimal_scale

if TYPE_CHECKING:  # the problem's arrays come from lanesolve.model.lagrangian, which imports this module
    from lanesolve.model.lagrangian import FacilityProblem

#: A move counts as better when it lowers the plan's cost by more than this share (float noise otherwise).
BETTER = 1e-9
#: Local searches at most: from the best plan, then from the next cheapest open sets priced (our choice: each
#: costs a second or two at 100 x 1,000, and a search from a second set sometimes ends lower).
STARTS = 10


@dataclass
class Plan:
    """A priced open set: its cost, the depots that ship, flows per lane of the problem and units short per
    customer."""

    cost: float
    opened: np.ndarray
    lane_flow: np.ndarray
    unmet: np.ndarray


class DepotSearch:
    """Prices open sets (cached by set) and keeps the best plan found.

    Parameters
    ----------
    problem : FacilityProblem

    Attributes
    ----------
    best : Plan or None
        The cheapest plan priced so far.
    evaluations : int
        Transportation problems solved (cached sets not counted).
    engine : str
        What solves them: OR-Tools' min-cost flow, or HiGHS's LP.
    """

    def __init__(self, problem: FacilityProblem):
        self.problem = problem
        self.best: Plan | None = None
        self.evaluations = 0
        self._seen: dict[bytes, float] = {}
        p = problem
        self._soft = np.flatnonzero(np.isfinite(p.penalty))
        quantities = np.concatenate([p.supply, p.demand, p.lane_upper])
        self._q_scale = decimal_scale(quantities)
        self._c_scale = None
        if self._q_scale is not None:
            total = float(np.round(p.demand * self._q_scale).sum())
            costs = np.concatenate([p.lane_cost, p.penalty[self._soft]])
            largest = max(float(costs.max()) if len(costs) else 0.0, 1.0)
            arcs = len(p.lane_cost) + p.n_depots + len(p.demand) + len(self._soft)
            room = INT_LIMIT / max(total * largest * arcs, 1.0)  # the overflow rule of network_flow.solve_flow
            exact = decimal_scale(costs)
            if exact is not None and exact <= room:
                self._c_scale = exact
            elif room >= 1:
                self._c_scale = 10 ** int(math.floor(math.log10(room)))
        self.engine = ("OR-Tools min-cost flow" if self._c_scale is not None
                       else "HiGHS LP (quantities not exact in integers)")

    def price(self, opened: np.ndarray) -> float:
        """Cost of the best plan with at most the depots ``opened`` (bool per depot); ``inf`` when they cannot
        serve the hard demand. The best plan is kept."""
        key = np.asarray(opened, dtype=bool).tobytes()
        if key in self._seen:
            return self._seen[key]
        self.evaluations += 1
        solved = self._flow(opened) if self._c_scale is not None else self._lp(opened)
        if solved is None:
            self._seen[key] = math.inf
            return math.inf
        lane_flow, unmet = solved
        p = self.problem
        ships = np.bincount(p.lane_depot, lane_flow, minlength=p.n_depots) > 0
        # Sums of products rather than ``@``: a BLAS dot may wait for its threads on a busy machine (12 ms for
        # 100,000 lanes measured on the shared 2-core machine, against 0.2 ms for the sum).
        cost = float((p.lane_cost * lane_flow).sum() + (p.penalty[self._soft] * unmet[self._soft]).sum()
                     + p.fixed[ships].sum())
        self._seen[key] = cost
        self._seen[ships.tobytes()] = min(cost, self._seen.get(ships.tobytes(), math.inf))
        if self.best is None or cost < self.best.cost:
            self.best = Plan(cost, ships, lane_flow, unmet)
        return cost

    def _flow(self, opened: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
        """Flows of the open set by OR-Tools' min-cost flow; None when the hard demand cannot all be delivered.
        Nodes: 0 source, 1 sink, then depots and customers."""
        from ortools.graph.python import min_cost_flow

        p = self.problem
        q_scale, c_scale = self._q_scale, self._c_scale
        m, n = p.n_depots, len(p.demand)
        lanes = np.flatnonzero(opened[p.lane_depot])
        depots = np.flatnonzero(opened)
        soft = self._soft
        tails = np.concatenate([np.zeros(len(depots)), 2 + p.lane_depot[lanes], 2 + m + np.arange(n),
                                np.zeros(len(soft))]).astype(np.int64)
        heads = np.concatenate([2 + depots, 2 + m + p.lane_customer[lanes], np.ones(n),
                                2 + m + soft]).astype(np.int64)
        capacities = np.round(np.concatenate([p.supply[depots], p.lane_upper[lanes], p.demand, p.demand[soft]])
                              * q_scale).astype(np.int64)
        costs = np.round(np.concatenate([np.zeros(len(depots)), p.lane_cost[lanes], np.zeros(n), p.penalty[soft]])
                         * c_scale).astype(np.int64)
        total = int(np.round(p.demand * q_scale).sum())
        solver = min_cost_flow.SimpleMinCostFlow()
        solver.add_arcs_with_capacity_and_unit_cost(tails, heads, capacities, costs)
        supplies = np.zeros(2 + m + n, dtype=np.int64)
        supplies[0], supplies[1] = total, -total
        solver.set_nodes_supplies(np.arange(len(supplies), dtype=np.int64), supplies)
        if solver.solve() != solver.OPTIMAL:
            return None
        flows = solver.flows(np.arange(len(tails), dtype=np.int64)).astype(float) / q_scale
        lane_flow = np.zeros(len(p.lane_cost))
        lane_flow[lanes] = flows[len(depots):len(depots) + len(lanes)]
        unmet = np.zeros(n)
        unmet[soft] = flows[len(tails) - len(soft):]
        return lane_flow, unmet

    def _lp(self, opened: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
        """The same transportation problem as an LP, by HiGHS through SciPy (quantities with no exact integer
        scale)."""
        from scipy.optimize import linprog
        from scipy.sparse import coo_matrix

        p = self.problem
        m, n = p.n_depots, len(p.demand)
        lanes = np.flatnonzero(opened[p.lane_depot])
        soft = self._soft
        k = len(lanes)
        columns = np.arange(k)
        supply_rows = coo_matrix((np.ones(k), (p.lane_depot[lanes], columns)), shape=(m, k + len(soft)))
        balance = coo_matrix((np.ones(k + len(soft)),
                              (np.concatenate([p.lane_customer[lanes], soft]), np.arange(k + len(soft)))),
                             shape=(n, k + len(soft)))
        solved = linprog(np.concatenate([p.lane_cost[lanes], p.penalty[soft]]), A_ub=supply_rows.tocsr(),
                         b_ub=np.where(opened, p.supply, 0.0), A_eq=balance.tocsr(), b_eq=p.demand,
                         bounds=np.column_stack([np.zeros(k + len(soft)),
                                                 np.concatenate([p.lane_upper[lanes], p.demand[soft]])]),
                         method="highs")
        if solved.status != 0:
            return None
        value = np.where(np.abs(solved.x) < 1e-9, 0.0, solved.x)
        lane_flow = np.zeros(len(p.lane_cost))
        lane_flow[lanes] = value[:k]
        unmet = np.zeros(n)
        unmet[soft] = value[k:]
        return lane_flow, unmet

    def _moves(self, opened: np.ndarray, preference: np.ndarray):
        """Open sets one move from ``opened``: drops (least attractive depot first), adds (most attractive first),
        then swaps, in the order of ``preference`` (a depot's Lagrangian value: lower is more attractive)."""
        decided = self.problem.open_column >= 0
        rank = np.argsort(preference, kind="stable")
        closing = [i for i in rank[::-1].tolist() if opened[i] and decided[i]]
        opening = [i for i in rank.tolist() if not opened[i] and decided[i]]
        for i in closing:
            move = opened.copy()
            move[i] = False
            yield move
        for i in opening:
            move = opened.copy()
            move[i] = True
            yield move
        for i in closing:
            for k in opening:
                move = opened.copy()
                move[i], move[k] = False, True
                yield move

    def _descend(self, opened: np.ndarray, cost: float, preference: np.ndarray, end: float) -> bool:
        """First-improvement descent from ``opened`` (priced at ``cost``) to a set no move improves; False when
        ``end`` came first."""
        while True:
            for move in self._moves(opened, preference):
                if time.monotonic() >= end:
                    return False
                priced = self.price(move)
                if priced < cost - BETTER * abs(cost):
                    opened, cost = move, priced
                    break
            else:
                return True

    def improve(self, preference: np.ndarray, end: float, starts: int = STARTS) -> None:
        """Local search (module docstring) from the best plan, then from the next cheapest open sets priced so far
        (those of the Lagrangian steps, say) that did not start a search yet, up to ``starts`` searches or ``end``
        (a :func:`time.monotonic` time)."""
        started: set[bytes] = set()
        for _ in range(starts):
            waiting = [(cost, key) for key, cost in self._seen.items() if key not in started and math.isfinite(cost)]
            if not waiting or time.monotonic() >= end:
                return
            cost, key = min(waiting)
            started.add(key)
            if not self._descend(np.frombuffer(key, dtype=bool).copy(), cost, preference, end):
                return
