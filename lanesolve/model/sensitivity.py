"""Sensitivity of a written plan, two-sided and exact: what one more unit costs or saves, what one unit less saves or
costs, and how much cheaper an unused lane must be before some plan as cheap uses it.

Everything is computed from the plan as written (``Result.flows``, the open/closed decisions in
``Result.open_nodes``, the trips in ``Result.trips``) on the network with the plan's yes/no and trip decisions fixed.
No solver duals are read, so the figures describe *this* plan, never another equally cheap one a re-solve might
return.

Figures (column ``figure`` of :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`)
-----------------------------------------------------------------------------
``marginal_cost``        per customer: one more unit of demand costs ``value_up``; one less saves ``value_down``;
``supply_value``         per depot whose supply binds: one more unit saves ``value_up``; one less costs ``value_down``;
``hub_capacity_value``   per hub whose capacity binds, the same;
``lane_capacity_value``  per lane at its capacity, the same;
``trip_capacity_value``  per lane whose whole trips are full (and below its capacity), the same for room in the trips;
``reduced_cost``         per unused lane: how much its cost per unit must fall before some plan as cheap uses it
                         (``value_up``; ``value_down`` is NaN).

``value`` is the figure when both sides are equal (``unique`` true), NaN when they differ; a side with no plan (one
more unit of hard demand that no route can bring, one unit less supply the hard demand needs) is ``inf`` and the
text says so.

Method
------
The plan is a flow on a graph with one root node :math:`R`: an arc :math:`R \\to d` per depot (flow = net outflow,
bounds :math:`(-\\infty, s_d]`, cost 0), an arc per lane (bounds ``[min_volume if used, capacity]``, cost per unit
plus the origin depot's handling), each hub split into ``in -> out`` (bounds ``[0, capacity]``, cost its handling)
and an arc :math:`c \\to R` per customer carrying what it keeps, :math:`w_c = q_c - z_c`: bounds :math:`[0, q_c]` and
cost :math:`-p_c` with a penalty :math:`p_c` (the penalty :math:`p_c q_c` is a constant), :math:`[q_c, q_c]` for hard
demand. Lanes shut by the plan's decisions (a closed node, an unused fixed-charge lane, zero trips) get capacity 0.

The optimal cost as a function of any one bound is convex and piecewise linear, and its one-sided derivatives are
shortest-path distances :math:`d(a, b)` in the plan's *residual network* (forward arcs with room, backward arcs with
flow above the lower bound): raising the upper bound of arc :math:`a = (i, j)` (cost :math:`c_a`) saves
:math:`\\max(0, -(c_a + d(j, i)))`, lowering it costs :math:`d(i, j) - c_a` (Ahuja, Magnanti & Orlin, *Network
Flows*, 1993, sections 9.3-9.4: a flow is optimal iff its residual network has no negative cycle, and a change is
priced by the cheapest cycle through it). For a customer, one more unit costs :math:`\\min(p_c, d(R, c))` and one
less saves :math:`p_c` when it is short, else :math:`-d(c, R)`. With integral supplies, demands and capacities the
residual capacities are whole units, so each derivative holds for a whole unit: it equals the ±1 re-solve.

Distances: potentials :math:`\\varphi` from a vectorised Bellman-Ford (every residual arc relaxed per iteration,
stopping when nothing changes: the iterations follow the path depth) make every reduced cost
:math:`c_a + \\varphi_i - \\varphi_j` non-negative (the plan is optimal, so there is no negative cycle; tiny negatives
within a tolerance are solver round-off), then Dijkstra (``scipy.sparse.csgraph``) gives the two trees
:math:`d(R, \\cdot)` and :math:`d(\\cdot, R)`. A pair distance :math:`d(a, b)` is exact from the trees when its upper
bound :math:`d(a, R) + d(R, b)` meets a lower bound (:math:`d(R, b) - d(R, a)`, :math:`d(a, R) - d(b, R)`,
:math:`\\varphi_b - \\varphi_a`). Where the root's trees leave many pairs open (a meshed network whose depots all send
their whole supply: no path leaves the root), the trees of a few landmarks in the mesh bound them the same way
(Goldberg & Harrelson, SODA 2005). The remaining pairs get one Dijkstra per distinct end, each stopped at its pair's
upper bound or cap, from whichever end has fewer distinct classes unless the trees show the search from that end would
pass the root or a landmark with budget left to visit more classes than the search from the other end must: the
searches run on a graph with one node per class of nodes joined both ways by zero reduced cost (the nodes the plan's
flow joins), where every reduced distance is the distance between the classes. The unused lanes nearest to paying
are searched once, capped at the count-th smallest upper bound of their figures (at least that many figures lie at
or below it).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from lanesolve.model.figure_text import (SAME, UnusedLanes, _reduced_words_arrow, _reduced_words_rows,  # noqa: F401
                                         arrow_column, figure_frame, money_words, two_sided_rows)
from lanesolve.model.formulation import closed_nodes, customer_penalties
from lanesolve.model.ids import positions
from lanesolve.model.network import Network
from lanesolve.model.result import SENSITIVITY_COLUMNS

if TYPE_CHECKING:  # SciPy is imported where the searches run (csgraph loads scipy.linalg): only plans need it
    from scipy.sparse import csr_matrix

#: Flows within this of a bound count as at the bound (relative to max(1, |bound|)).
TOLERANCE = 1e-7
#: How many rows of each figure the HTML summary should show (the sheet and JSON carry all).
TOP_FEW = 5

#: Landmarks beside the root whose trees bound the distances on a meshed network, and how many pairs the root's
#: trees must leave open before they are made (two searches each: worth it only where many searches would follow).
LANDMARKS = 4
LANDMARKS_AFTER = 64

LP_BASIS = "LP"
FIXED_BASIS = "LP with the plan's yes/no and trip decisions fixed"


class PlanNotOptimal(Exception):
    """The plan's residual network has a negative cycle: a cheaper plan exists, so no figure would be honest.

    Internal: :func:`analyse_plan` turns it into the one row saying why there are no figures.
    """


# ------------------------------------------------------------------------------------------------ the plan's graph
class _Graph:
    """The plan as arcs (module docstring): ``tail``, ``head``, ``cost``, ``low``, ``high``, ``flow`` per arc."""

    def __init__(self, n_nodes: int, root: int):
        self.n_nodes, self.root = n_nodes, root
        self.parts: list[tuple] = []

    def add(self, tail, head, cost, low, high, flow) -> np.ndarray:
        """Append arcs; returns their positions."""
        start = sum(len(p[0]) for p in self.parts)
        arrays = tuple(np.asarray(a, dtype=float if k >= 2 else np.int64) for k, a in
                       enumerate(np.broadcast_arrays(tail, head, cost, low, high, flow)))
        self.parts.append(arrays)
        return start + np.arange(len(arrays[0]))

    def finish(self) -> None:
        tail, head, cost, low, high, flow = (np.concatenate([p[k] for p in self.parts]) for k in range(6))
        self.tail, self.head, self.cost = tail, head, cost
        with np.errstate(invalid="ignore"):
            room = np.where(np.isfinite(high), flow < high - TOLERANCE * np.maximum(1.0, np.abs(high)), True)
            above = np.where(np.isfinite(low), flow > low + TOLERANCE * np.maximum(1.0, np.abs(low)), True)
        # Residual arcs: forward where there is room, backward (reversed, negated cost) where flow is above the low.
        self.r_tail = np.concatenate([tail[room], head[above]])
        self.r_head = np.concatenate([head[room], tail[above]])
        self.r_cost = np.concatenate([cost[room], -cost[above]])
        # One stable order of the residual arcs by head serves Bellman-Ford and the backward graph.
        by_head = _grouped(self.r_head, self.n_nodes)
        self.potentials = _bellman_ford(self.n_nodes, self.r_tail, self.r_head, self.r_cost, by_head)
        weight = np.maximum(self.r_cost + self.potentials[self.r_tail] - self.potentials[self.r_head], 0.0)
        # Searches run on the classes of nodes joined both ways at zero reduced cost, one graph node per class.
        label, n_classes = _zero_classes(self.n_nodes, self.r_tail, self.r_head, weight)
        between = label[self.r_tail] != label[self.r_head]
        tail_c, head_c, weight = label[self.r_tail][between], label[self.r_head][between], weight[between]
        self.forward = _csr(n_classes, tail_c, head_c, weight, _grouped(tail_c, n_classes))
        self.backward = _csr(n_classes, head_c, tail_c, weight, _grouped(head_c, n_classes))
        self.label = label
        phi, root = self.potentials, self.root
        from scipy.sparse.csgraph import dijkstra
        away, back = dijkstra(self.forward, indices=label[root]), dijkstra(self.backward, indices=label[root])
        self.from_root = away[label] - phi[root] + phi
        self.to_root = back[label] - phi + phi[root]
        # (d(L, .), d(., L)) of each landmark L, the root first; more when the root's leave many pairs open.
        self.trees = [(self.from_root, self.to_root)]
        # The same trees between classes in reduced costs, with their class: they tell a search's direction.
        self.centres = [(label[root], away, back)]
        self._balls: list | None = None
        self.landmarked = False

    def _add_landmarks(self) -> None:
        """The two trees of a node in each of the :data:`LANDMARKS` largest classes (beside the root's): the classes
        the plan's flow joins, in the middle of the mesh, from and to which many paths run (the landmark bounds of
        A. V. Goldberg and C. Harrelson, "Computing the shortest path: A* search meets graph theory", SODA 2005)."""
        self.landmarked = True
        label, phi = self.label, self.potentials
        size = np.bincount(label)
        size[label[self.root]] = 0
        chosen = np.argsort(-size, kind="stable")[:LANDMARKS]
        chosen = chosen[size[chosen] > 0]
        if not len(chosen):
            return
        node = np.unique(label, return_index=True)[1][chosen]  # the first node of each chosen class
        from scipy.sparse.csgraph import dijkstra
        away, back = dijkstra(self.forward, indices=chosen), dijkstra(self.backward, indices=chosen)
        for k, at in enumerate(node):
            self.trees.append((away[k][label] - phi[at] + phi, back[k][label] - phi + phi[at]))
            self.centres.append((chosen[k], away[k], back[k]))
        self._balls = None

    def distance(self, a: np.ndarray, b: np.ndarray, cap: np.ndarray | None = None) -> np.ndarray:
        """Exact residual distances d(a[k], b[k]) (inf where b cannot be reached from a); see the module docstring.

        With ``cap``, a distance above ``cap[k]`` may come back as inf instead: enough where only distances up to
        a cap matter (one more unit of a capacity saves only while the way round costs less than the lane)."""
        lower, upper, exact = self.bounds(a, b)
        out = np.where(exact, upper, np.nan)
        todo = np.flatnonzero(~exact)
        if len(todo):
            out[todo] = self.searched(np.asarray(a)[todo], np.asarray(b)[todo], upper[todo],
                                      None if cap is None else np.asarray(cap, dtype=float)[todo])
        return out

    def bounds(self, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(lower bound, upper bound, exact) of d(a, b) from the potentials and the trees of the root, then of the
        landmarks for the pairs the root's leave open (the landmarks are made once the root's trees leave more than
        :data:`LANDMARKS_AFTER` pairs open): for each tree's node L the upper bound d(a, L) + d(L, b) is a path
        through L; the lower bounds are phi_b - phi_a, d(L, b) - d(L, a) and d(a, L) - d(b, L) (triangle
        inequalities); where they meet, the distance is exact."""
        a, b = np.asarray(a, dtype=np.int64), np.asarray(b, dtype=np.int64)
        lower, upper = _tightened(self.trees[:1], a, b, self.potentials[b] - self.potentials[a],
                                  np.full(len(a), math.inf))
        exact = _met(lower, upper)
        todo = np.flatnonzero(~exact)
        if not self.landmarked and len(todo) > LANDMARKS_AFTER:
            self._add_landmarks()
        if len(todo) and len(self.trees) > 1:
            lower[todo], upper[todo] = _tightened(self.trees[1:], a[todo], b[todo], lower[todo], upper[todo])
            exact[todo] = _met(lower[todo], upper[todo])
        return lower, upper, exact

    def searched(self, a: np.ndarray, b: np.ndarray, upper: np.ndarray, cap: np.ndarray | None = None) -> np.ndarray:
        """d(a[k], b[k]) by Dijkstra, one search per distinct end, each stopped at the largest bound of its pairs
        (``upper``, and ``cap`` where given; in reduced costs): a pair within its bound is still settled exactly, and
        far fewer nodes are visited. Pairs beyond their cap come back inf.

        A pair is searched from the end with fewer distinct classes among the pairs, unless the trees show that the
        search from that end would pass a tree's node (the root, a landmark) with budget left to fan out over more
        classes than the search from the other end must (:meth:`_fan_out`): on a meshed network a few searches
        that reach the root early would otherwise visit most of the graph.

        The searches run between classes of nodes joined both ways by paths of zero reduced cost
        (:func:`_zero_classes`): ends in one class share one search, and a class is reached as one node."""
        a, b = np.asarray(a, dtype=np.int64), np.asarray(b, dtype=np.int64)
        phi = self.potentials
        out = np.full(len(a), np.inf)
        bound = np.asarray(upper, dtype=float) if cap is None else np.fmin(upper, cap)
        with np.errstate(invalid="ignore"):
            reach = bound + phi[a] - phi[b]  # the bound in reduced costs (inf stays inf)
        wanted = ~(reach < 0)  # a negative reduced bound: the pair is beyond its cap (reduced distances are >= 0)
        a_, b_, reach = a[wanted], b[wanted], reach[wanted]
        start, end = self.label[a_], self.label[b_]
        backward = len(np.unique(end)) < len(np.unique(start))  # from the fewer distinct classes
        ahead, behind = self._fan_out(start, end, reach)
        back = (behind < ahead) if not backward else ~(ahead < behind)
        found = np.empty(len(a_))
        found[~back] = _searched_from(self.forward, start[~back], end[~back], reach[~back])
        found[back] = _searched_from(self.backward, end[back], start[back], reach[back])
        out[wanted] = found - phi[a_] + phi[b_]
        if cap is not None:
            out = np.where(out <= cap, out, np.inf)
        return out

    def _fan_out(self, start: np.ndarray, end: np.ndarray, reach: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per pair of classes, how many classes a search from ``start`` (ahead) and one from ``end`` on the
        backward graph (behind) surely visit within the reduced bound ``reach``: a search that reaches a tree's
        node L with budget r left visits every class within r of L, which L's tree counts (the largest count over
        the trees; 0 where no tree's node lies within the bound)."""
        if self._balls is None:  # each tree's reduced distances from and to its node, sorted, finite
            self._balls = [(np.sort(away[np.isfinite(away)]), np.sort(back[np.isfinite(back)]))
                           for _, away, back in self.centres]
        ahead, behind = np.zeros(len(start), dtype=np.int64), np.zeros(len(start), dtype=np.int64)
        slack = SAME * np.maximum(1.0, np.abs(reach))
        with np.errstate(invalid="ignore"):
            for (_, away, back), (away_sorted, back_sorted) in zip(self.centres, self._balls):
                left = reach - back[start] + slack  # budget left where the search from start reaches L
                ahead = np.maximum(ahead, np.where(left >= 0, np.searchsorted(away_sorted, left, side="right"), 0))
                left = reach - away[end] + slack  # budget left where the search back from end reaches L
                behind = np.maximum(behind, np.where(left >= 0, np.searchsorted(back_sorted, left, side="right"), 0))
        return ahead, behind


def _searched_from(graph: csr_matrix, sources: np.ndarray, targets: np.ndarray, reach: np.ndarray) -> np.ndarray:
    """Reduced distances from class ``sources[k]`` to class ``targets[k]`` on ``graph``, one Dijkstra per distinct
    source stopped at the largest ``reach`` of its pairs (beyond it: inf or a distance above the reach)."""
    unique, which = np.unique(sources, return_inverse=True)
    limit = np.full(len(unique), -np.inf)
    np.maximum.at(limit, which, reach)
    by_limit = np.argsort(limit, kind="stable")  # sources of similar reach searched together
    rank = np.empty(len(unique), dtype=np.int64)
    rank[by_limit] = np.arange(len(unique))
    found = np.empty(len(sources))
    for chunk in range(0, len(unique), 64):  # bounded memory: 64 rows of n_nodes at a time
        group = by_limit[chunk:chunk + 64]
        stop = float(limit[group].max())
        stop = np.inf if not np.isfinite(stop) else stop + SAME * max(1.0, abs(stop)) + 1e-9
        from scipy.sparse.csgraph import dijkstra
        rows = dijkstra(graph, indices=unique[group], limit=stop)
        pick = (rank[which] >= chunk) & (rank[which] < chunk + 64)
        found[pick] = rows[rank[which[pick]] - chunk, targets[pick]]
        del rows  # the next chunk's rows are allocated while these would still be held
    return found


class _LaneFigures:
    """The figures c + d(j, i) of unused lanes i -> j on the plan's graph: what the trees settle at once, the rest
    by search on demand (:class:`~lanesolve.model.figure_text.UnusedLanes` calls it)."""

    def __init__(self, graph: _Graph, heads: np.ndarray, tails: np.ndarray, cost: np.ndarray):
        self.graph, self.heads, self.tails, self.cost = graph, heads, tails, cost

    def known(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(figure where the trees settle it, else a lower bound; settled; an upper bound of the figure, inf where
        no tree joins the lane's ends)."""
        lower, upper, exact = self.graph.bounds(self.heads, self.tails)
        return np.maximum(0.0, self.cost + np.where(exact, upper, lower)), exact, np.maximum(0.0, self.cost + upper)

    def __call__(self, positions: np.ndarray, cap: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """(figures of the lanes at ``positions``, found): with ``cap``, a figure above it is not found."""
        a, b, cost = self.heads[positions], self.tails[positions], self.cost[positions]
        _, upper, _ = self.graph.bounds(a, b)
        distance = self.graph.searched(a, b, upper, None if cap is None else cap - cost)
        figures = np.maximum(0.0, cost + distance)
        found = np.isfinite(figures) if cap is not None else np.ones(len(positions), dtype=bool)
        return figures, found


def _grouped(nodes: np.ndarray, n: int) -> np.ndarray:
    """The stable order that groups arcs by node (``np.argsort(nodes, kind="stable")``), as one or two radix sorts
    of 16-bit digits: numpy sorts integers of 16 bits or fewer by radix sort, several times faster than the merge
    sort it uses for wider integers on the ~200k residual arcs of a 100k-lane plan."""
    if n <= 1 << 16:
        return np.argsort(nodes.astype(np.uint16), kind="stable")
    if n > 1 << 32:
        return np.argsort(nodes, kind="stable")
    low = np.argsort((nodes & 0xFFFF).astype(np.uint16), kind="stable")
    return low[np.argsort((nodes[low] >> 16).astype(np.uint16), kind="stable")]


def _csr(n: int, tail: np.ndarray, head: np.ndarray, weight: np.ndarray, order: np.ndarray) -> csr_matrix:
    """A CSR graph keeping explicit zero weights (csgraph treats them as arcs) and parallel arcs (csgraph's
    shortest-path routines take the cheapest of repeated entries, as its documentation says); ``order`` is
    :func:`_grouped` of ``tail``."""
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(tail, minlength=n), out=indptr[1:])
    from scipy.sparse import csr_matrix
    return csr_matrix((weight[order], head[order], indptr), shape=(n, n))


def _tightened(trees: list, a: np.ndarray, b: np.ndarray, lower: np.ndarray,
               upper: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``lower`` and ``upper`` bounds of d(a, b) tightened by the ``trees`` (d(L, .), d(., L)) of nodes L."""
    with np.errstate(invalid="ignore"):
        for away, back in trees:
            upper = np.fmin(upper, back[a] + away[b])
            for low in (away[b] - away[a], back[a] - back[b]):
                lower = np.where(np.isfinite(low) & (low > lower), low, lower)
    return lower, upper


def _met(lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Where a finite upper bound meets the lower bound (within :data:`SAME`): the distance is exact."""
    with np.errstate(invalid="ignore"):
        return np.isfinite(upper) & (upper - lower <= SAME * np.maximum(1.0, np.abs(upper)))


def _zero_classes(n: int, tail: np.ndarray, head: np.ndarray, weight: np.ndarray) -> tuple[np.ndarray, int]:
    """(class of each node, number of classes): nodes joined both ways by paths of residual arcs of zero reduced
    cost share a class (the strongly connected components of those arcs).

    Within a class every reduced distance is 0 both ways, so the reduced distance d'(u, v) depends only on the
    classes of u and v, and equals the distance between the classes in the graph with one node per class and the
    arcs between classes (reduced costs are non-negative: entering a class at one node and leaving at another costs
    nothing more, and arcs inside a class never shorten a path). Between optimal potentials every arc with flow
    strictly between its bounds has zero reduced cost both ways, so the classes gather the nodes the plan's flow
    joins: on a meshed network the lanes at capacity end in a few dozen classes instead of hundreds of nodes, and a
    search reaches a class of thousands of nodes as one node."""
    zero = weight == 0.0
    # bool entries: repeated arcs add up to True (small integers could wrap to an explicit 0)
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components
    graph = csr_matrix((np.ones(int(zero.sum()), dtype=bool), (tail[zero], head[zero])), shape=(n, n))
    count, label = connected_components(graph, directed=True, connection="strong")
    return label.astype(np.int64), int(count)


def _bellman_ford(n: int, tail: np.ndarray, head: np.ndarray, cost: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Potentials with ``cost + phi[tail] - phi[head] >= -tolerance`` on every arc, from a virtual source joined to
    every node at cost 0: all arcs are relaxed at once per iteration until nothing changes. ``order`` is
    :func:`_grouped` of ``head``.

    After the first iteration only the arcs whose tail moved in the one before are relaxed: the others cannot move
    their head (potentials only fall; such an arc was within the tolerance of its head when last relaxed), so each
    iteration moves the same heads to the same values as relaxing every arc would, and most iterations of a deep
    network touch a few arcs instead of all.

    Raises
    ------
    PlanNotOptimal
        Still changing after ``n + 1`` iterations: a negative cycle.
    """
    phi = np.zeros(n)
    if not len(tail):
        return phi
    tolerance = SAME * max(1.0, float(np.abs(cost).max()))
    tail, cost, head = tail[order], cost[order], head[order]
    counts = np.bincount(head, minlength=n)  # arcs per head, in head order: the groups reduceat needs
    every_head = np.flatnonzero(counts)
    every_start = np.concatenate([[0], np.cumsum(counts[every_head])[:-1]])
    live = None  # every arc
    for _ in range(n + 1):
        if live is None:
            heads, best = every_head, np.minimum.reduceat(phi[tail] + cost, every_start)
        else:
            to = head[live]  # grouped by head, as live keeps the order of the arcs
            starts = np.flatnonzero(np.concatenate([[True], to[1:] != to[:-1]]))
            heads, best = to[starts], np.minimum.reduceat(phi[tail[live]] + cost[live], starts)
        better = best < phi[heads] - tolerance
        if not better.any():
            return phi
        moved = heads[better]
        phi[moved] = best[better]
        changed = np.zeros(n, dtype=bool)
        changed[moved] = True
        live = np.flatnonzero(changed[tail])
        if not len(live):
            return phi
        if 2 * len(live) > len(tail):  # relaxing every arc again is as right, and cheaper than picking most
            live = None
    raise PlanNotOptimal("the plan's residual network has a negative cycle")


# ---------------------------------------------------------------------------------------------------- the figures
def _at_bound(value: np.ndarray, bound: np.ndarray) -> np.ndarray:
    """Elementwise: ``value`` at or above a finite ``bound`` (within :data:`TOLERANCE`, relative)."""
    bound = np.asarray(bound, dtype=float)
    finite = np.isfinite(bound)
    safe = np.where(finite, bound, 0.0)
    return finite & (value >= safe - TOLERANCE * np.maximum(1.0, np.abs(safe)))


def analyse_plan(network: Network, result) -> pd.DataFrame:
    """Exact two-sided sensitivity figures of the written plan (see the module docstring).

    Parameters
    ----------
    network : Network
        The network the plan was made for.
    result : Result
        A plan proven optimal: ``flows`` (or ``lane_flow``, the same plan per lane), ``open_nodes`` and ``trips``
        as :func:`lanesolve.model.solve.solve` fills them. Nothing of the solver is read.

    Returns
    -------
    DataFrame
        :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`, one row per figure. Customers first, then depots, hubs,
        lanes at capacity, full trips and unused lanes (nearest to paying first). One row with figure ``none`` when
        the plan's residual network shows a cheaper plan (it is then not optimal and no figure is honest).

    Notes
    -----
    Values are exact one-sided derivatives of the optimal cost; with whole-unit supplies, demands and capacities
    they equal the cost change of a re-solve with the bound moved by one unit (tests/test_sensitivity_exact.py checks
    that against SciPy's ``linprog``). Tiny negative reduced costs (|x| below 1e-9 of the largest cost) are solver
    round-off and count as 0. :func:`plan_figures` gives the same figures with rows for only the unused lanes
    someone reads.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> from lanesolve.model.solve import solve
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4, "unmet_penalty": 3}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> frame = analyse_plan(net, solve(net))
    >>> frame[["figure", "item", "value_up", "value_down"]].values.tolist()
    [['marginal_cost', 'C', 2.0, 2.0]]
    """
    return plan_figures(network, result)[0]


def plan_figures(network: Network, result, unused_rows: int | None = None) -> tuple[pd.DataFrame, UnusedLanes | None]:
    """The figures of :func:`analyse_plan`, with rows for only the ``unused_rows`` unused lanes nearest to paying.

    Parameters
    ----------
    network, result
        As for :func:`analyse_plan`.
    unused_rows : int, optional
        How many unused lanes get their row (label and sentence) now; None: every one.

    Returns
    -------
    frame : DataFrame
        :func:`analyse_plan`'s frame up to and including the ``unused_rows`` unused lanes nearest to paying.
    more : UnusedLanes or None
        The unused lanes beyond them (:class:`~lanesolve.model.figure_text.UnusedLanes`, continuing ``frame``):
        their figures as numbers, their rows made by ``more.rows()`` on demand. None when ``frame`` holds every
        figure. ``pd.concat([frame, more.rows()])`` is :func:`analyse_plan`'s frame.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> from lanesolve.model.solve import solve
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2, "mode": m} for m in "abc"])
    >>> frame, more = plan_figures(net, solve(net), unused_rows=1)
    >>> frame["item"].tolist(), len(more), more.rows()["item"].tolist()
    (['C', 'D -> C (b)'], 1, ['D -> C (c)'])
    """
    units = network.settings.units or "units"
    currency = network.settings.currency or ""
    depots, customers, hubs, lanes = network.depots, network.customers, network.hubs, network.lanes
    # The active lanes as arrays of the lanes frame (no filtered copy of the frame: a 100k-lane frame takes
    # milliseconds to filter, and usually every lane is active).
    active = lanes["active"].to_numpy(dtype=bool)
    where = slice(None) if active.all() else np.flatnonzero(active)
    position = np.arange(len(lanes))[where]

    def column(name: str) -> np.ndarray:
        return lanes[name].to_numpy(dtype=float)[where]

    design = network.has_design
    fixed_cost = column("fixed_cost")
    basis = FIXED_BASIS if (design or bool((fixed_cost > 0).any())) else LP_BASIS
    n_d, n_c, n_h = len(depots), len(customers), len(hubs)
    root = n_d + n_c + 2 * n_h
    # Every node id at one position (depots, customers, hubs), and the lane ends as positions.
    node_ids = pd.concat([depots["id"], customers["id"], hubs["id"]], ignore_index=True).astype(str)
    at_origin = positions(node_ids, lanes["origin"])[where]
    at_destination = positions(node_ids, lanes["destination"])[where]
    first_hub = n_d + n_c
    # Hubs are split: lanes leave from the "out" node (shifted by n_h), arrive at the "in" node.
    tail = np.where(at_origin >= first_hub, at_origin + n_h, at_origin)
    head = at_destination

    flow = _lane_flows(network, result, where, node_ids, at_origin, at_destination)
    closed = closed_nodes(network)
    if len(result.open_nodes):
        closed |= set(result.open_nodes.loc[~result.open_nodes["open"].astype(bool), "node"])
    is_closed = node_ids.isin(list(closed)).to_numpy()
    high = column("capacity").copy()
    low = np.zeros(len(high))
    shut = is_closed[at_origin] | is_closed[at_destination] if len(high) else np.zeros(0, dtype=bool)
    used = flow > 0
    need_use = fixed_cost > 0  # does the model give the lane a yes/no "used" decision? (as in its docstring)
    if design:
        single = set(customers.loc[customers["single_source"], "id"])
        need_use = need_use | (column("min_volume") > 0) | lanes["destination"].isin(single).to_numpy()[where]
    shut = shut | (need_use & ~used)
    minimum = column("min_volume")
    low = np.where(need_use & used & design, minimum, low)
    size = column("trip_capacity")
    per_trip = column("cost_per_trip")
    with np.errstate(invalid="ignore", divide="ignore"):
        tripped = design & np.isfinite(size) & (size > 0) & (per_trip > 0)
        trips = np.where(tripped & used, np.ceil(flow / np.where(size > 0, size, 1.0) - 1e-9), 0.0)
        room = np.where(tripped, trips * size, math.inf)
    shut |= tripped & (trips == 0)
    trip_binds = tripped & (room < high)
    high = np.where(shut, 0.0, np.minimum(high, room))

    graph = _Graph(root + 1, root)
    handling = np.zeros(len(node_ids))
    handling[:n_d] = depots["handling_cost"].to_numpy(dtype=float)
    cost = column("cost_per_unit") + handling[at_origin]
    lane_arc = graph.add(tail, head, cost, low, high, flow)
    outflow = np.bincount(at_origin, weights=flow, minlength=len(node_ids))
    inflow = np.bincount(at_destination, weights=flow, minlength=len(node_ids))
    depot_ids = depots["id"].to_numpy(dtype=object)
    supply = np.where(is_closed[:n_d], 0.0, depots["supply"].to_numpy(dtype=float))
    net = outflow[:n_d] - inflow[:n_d]
    graph.add(root, np.arange(n_d), 0.0, -math.inf, supply, net)
    hub_ids = hubs["id"].to_numpy(dtype=object)
    hub_cap = np.where(is_closed[first_hub:], 0.0, hubs["capacity"].to_numpy(dtype=float))
    through = inflow[first_hub:]
    graph.add(first_hub + np.arange(n_h), first_hub + n_h + np.arange(n_h), hubs["handling_cost"].to_numpy(float),
              0.0, hub_cap, through)
    penalty = customer_penalties(network)
    hard = np.isnan(penalty)
    demand = customers["demand"].to_numpy(dtype=float)
    customer_ids = customers["id"].to_numpy(dtype=object)
    kept = inflow[n_d:first_hub] - outflow[n_d:first_hub]
    graph.add(n_d + np.arange(n_c), root, np.where(hard, 0.0, -np.nan_to_num(penalty)), np.where(hard, demand, 0.0),
              demand, kept)
    try:
        graph.finish()
    except PlanNotOptimal:
        return _none_row(basis, "the plan's own residual network shows a cheaper plan, so it is not optimal and "
                                "its figures could mislead"), None

    frames = []
    # Customers: one more unit costs min(p, d(R, c)); one less saves p when short, else -d(c, R).
    node = n_d + np.arange(n_c)
    up = np.where(hard, graph.from_root[node], np.fmin(np.nan_to_num(penalty, nan=math.inf), graph.from_root[node]))
    short = kept < demand - TOLERANCE * np.maximum(1.0, demand)
    down = np.where(~hard & short, np.nan_to_num(penalty), -graph.to_root[node])
    down = np.where(demand <= 0, math.nan, down)  # demand cannot fall below 0
    frames.append(two_sided_rows("marginal_cost", customer_ids, up, down, basis,
                                 "of demand at customer", units, currency))

    # Depots at their supply: one more saves -d(d, R); one less costs d(R, d).
    binding = ~depots["id"].isin(closed).to_numpy() & _at_bound(net, supply)
    node = np.arange(n_d)[binding]
    frames.append(two_sided_rows("supply_value", depot_ids[binding],
                                 np.maximum(0.0, -graph.to_root[node]), graph.from_root[node], basis,
                                 "of supply at depot", units, currency))

    # Hubs at capacity and lanes at capacity (or full trips): an arc a = (i, j) at its upper bound.
    binding = (hub_cap > 0) & _at_bound(through, hub_cap)
    i, j = (first_hub + np.arange(n_h))[binding], (first_hub + n_h + np.arange(n_h))[binding]
    g = hubs["handling_cost"].to_numpy(float)[binding]
    frames.append(two_sided_rows("hub_capacity_value", hub_ids[binding],
                                 np.maximum(0.0, -(g + graph.distance(j, i, -g))), graph.distance(i, j) - g, basis,
                                 "of capacity at hub", units, currency))

    at_cap = ~shut & (high > 0) & _at_bound(flow, high)
    labels = np.array([f"{o} -> {d} ({m})" if m else f"{o} -> {d}" for o, d, m in
                       zip(*(lanes[name].iloc[position[at_cap]].astype(str).tolist()
                             for name in ("origin", "destination", "mode")))], dtype=object)
    arc = lane_arc[at_cap]
    # One more unit saves only while the way back costs less than -c: distances above that need not be found.
    saving = np.maximum(0.0, -(graph.cost[arc] + graph.distance(graph.head[arc], graph.tail[arc], -graph.cost[arc])))
    loss = graph.distance(graph.tail[arc], graph.head[arc]) - graph.cost[arc]
    for figure, which, what in (("lane_capacity_value", ~trip_binds[at_cap], "of capacity on lane"),
                                ("trip_capacity_value", trip_binds[at_cap], "of room in the planned trips on lane")):
        frames.append(two_sided_rows(figure, labels[which], saving[which], loss[which], basis, what, units,
                                     currency))

    # Unused lanes: their cost must fall by c + d(j, i) before a plan as cheap uses them.
    unused = ~shut & (high > 0) & (flow <= TOLERANCE)
    # Only the figures of the lanes shown are searched for now where the trees leave them open (the others keep a
    # lower bound until someone asks: on a meshed network each needs a search of its own).
    arc = lane_arc[unused]
    distances = _LaneFigures(graph, graph.head[arc], graph.tail[arc], graph.cost[arc])
    lower, exact, upper = distances.known()
    more = UnusedLanes(lower, position[unused], (lanes["origin"], lanes["destination"], lanes["mode"]), basis,
                       units, currency, bool(closed) or basis == FIXED_BASIS, exact=exact, resolve=distances,
                       upper=upper)
    frames.append(more.show(unused_rows))
    out = figure_frame(frames)
    if not len(more):
        return out, None
    more.frame = out
    return out, more


def _lane_flows(network: Network, result, where, node_ids: pd.Series, at_origin: np.ndarray,
                at_destination: np.ndarray) -> np.ndarray:
    """The plan's flow per active lane: ``result.lane_flow`` when the solve left it, else ``result.flows``
    matched to the lanes on (origin, destination, mode) as integer keys."""
    lanes, flows = network.lanes, result.flows
    given = getattr(result, "lane_flow", None)
    if given is not None and len(given) == len(lanes):
        return np.asarray(given, dtype=float)[where]
    modes_seen = pd.Series(pd.unique(pd.concat([lanes["mode"], flows["mode"]], ignore_index=True).astype(str)))
    width = len(node_ids) + 1

    def key(at_o, at_d, mode):
        return (at_o.astype(np.int64) * width + at_d) * max(1, len(modes_seen)) + mode

    planned = pd.Index(key(positions(node_ids, flows["origin"]), positions(node_ids, flows["destination"]),
                           positions(modes_seen, flows["mode"])))
    where_planned = (planned.get_indexer(key(at_origin, at_destination, positions(modes_seen, lanes["mode"])[where]))
                     if len(planned) else np.full(len(at_origin), -1))
    if not len(flows):
        return np.zeros(len(at_origin))
    return np.where(where_planned >= 0, flows["flow"].to_numpy(dtype=float)[np.maximum(where_planned, 0)], 0.0)


def _none_row(basis: str, why: str) -> pd.DataFrame:
    return pd.DataFrame([{"figure": "none", "item": "", "value": math.nan, "value_up": math.nan,
                          "value_down": math.nan, "unique": False, "basis": basis,
                          "text": f"No sensitivity figures: {why}."}], columns=SENSITIVITY_COLUMNS)


def top_few(sensitivity: pd.DataFrame, figure: str, count: int = TOP_FEW) -> pd.DataFrame:
    """The ``count`` rows of one figure that matter most, for summaries: for unused lanes the *nearest* to paying
    (smallest cut first), for every other figure the largest one-more-unit values first."""
    rows = sensitivity[sensitivity["figure"] == figure]
    column = "value_up" if "value_up" in rows else "value"
    ascending = figure == "reduced_cost"
    return rows.sort_values(column, ascending=ascending, kind="stable", na_position="last").head(count)
