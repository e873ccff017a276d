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
:math:`\\varphi_b - \\varphi_a`); the remaining pairs get one Dijkstra per distinct end, from whichever end has fewer
distinct nodes.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra

from lanesolve.model.formulation import closed_nodes, customer_penalties
from lanesolve.model.network import Network
from lanesolve.model.result import SENSITIVITY_COLUMNS, empty_frame

#: Flows within this of a bound count as at the bound (relative to max(1, |bound|)).
TOLERANCE = 1e-7
#: How many rows of each figure the HTML summary should show (the sheet and JSON carry all).
TOP_FEW = 5
#: Two sides closer than this (relative to max(1, |value|)) are one figure.
SAME = 1e-9

LP_BASIS = "LP"
FIXED_BASIS = "LP with the plan's yes/no and trip decisions fixed"


class PlanNotOptimal(Exception):
    """The plan's residual network has a negative cycle: a cheaper plan exists, so no figure would be honest.

    Internal: :func:`analyse_plan` turns it into the one row saying why there are no figures.
    """


def money_words(value: float, currency: str = "") -> str:
    """Money for a sentence: four significant digits, at least two decimals, thousands separators.

    >>> money_words(2.0571), money_words(0.153), money_words(43.339, "EUR"), money_words(5), money_words(0.009)
    ('2.057', '0.153', '43.34 EUR', '5.00', '0.009')
    >>> money_words(123456.789)
    '123,456.79'
    """
    return str(_amounts(np.array([value], dtype=float), currency)[0])


def _amounts(values: np.ndarray, currency: str = "") -> np.ndarray:
    """:func:`money_words` for an array, as an object array; values are formatted in groups of equal decimals
    (a 100k-lane plan formats about 100k of them, so each step is one cheap call per value)."""
    values = np.asarray(values, dtype=float) + 0.0
    size = np.abs(values)
    with np.errstate(divide="ignore", invalid="ignore"):
        magnitude = np.floor(np.log10(size))
    decimals = np.where(np.isfinite(magnitude), np.clip(3 - magnitude, 2, 15), 2).astype(int)
    # Rounded once here, so the text shows the same digits whichever way it is formatted (ties go to even).
    with np.errstate(invalid="ignore", over="ignore"):
        size = np.where(np.isfinite(size) & (size < 1e15), np.round(size * 10.0 ** decimals) / 10.0 ** decimals, size)
    out = np.empty(len(values), dtype=object)
    for d in np.unique(decimals).tolist():
        chosen = np.flatnonzero(decimals == d)
        if d == 2:
            out[chosen] = list(map("{:,.2f}".format, size[chosen].tolist()))
            continue
        # Below 10: drop trailing zeros, keep two decimals ("5.000" -> "5.00", "0.1530" -> "0.153").
        trimmed = [t.rstrip("0") for t in map(f"%.{d}f".__mod__, size[chosen].tolist())]
        out[chosen] = [(t + "00")[:max(len(t), t.index(".") + 3)] for t in trimmed]
    out = np.where(values < 0, "-" + out, out)
    return out + f" {currency}" if currency else out


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
        self.potentials = _bellman_ford(self.n_nodes, self.r_tail, self.r_head, self.r_cost)
        reduced = self.r_cost + self.potentials[self.r_tail] - self.potentials[self.r_head]
        self.forward = _csr(self.n_nodes, self.r_tail, self.r_head, np.maximum(reduced, 0.0))
        self.backward = _csr(self.n_nodes, self.r_head, self.r_tail, np.maximum(reduced, 0.0))
        phi, root = self.potentials, self.root
        self.from_root = dijkstra(self.forward, indices=root) - phi[root] + phi
        self.to_root = dijkstra(self.backward, indices=root) - phi + phi[root]

    def distance(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Exact residual distances d(a[k], b[k]) (inf where b cannot be reached from a); see the module docstring."""
        a, b = np.asarray(a, dtype=np.int64), np.asarray(b, dtype=np.int64)
        phi, up_r, down_r = self.potentials, self.from_root, self.to_root
        with np.errstate(invalid="ignore"):
            upper = down_r[a] + up_r[b]
            lower = phi[b] - phi[a]
            for low in (up_r[b] - up_r[a], down_r[a] - down_r[b]):
                lower = np.where(np.isfinite(low) & (low > lower), low, lower)
            exact = np.isfinite(upper) & (upper - lower <= SAME * np.maximum(1.0, np.abs(upper)))
        out = np.where(exact, upper, np.nan)
        todo = np.flatnonzero(~exact)
        if len(todo):
            sources, targets, graph = a[todo], b[todo], self.forward
            if len(np.unique(targets)) < len(np.unique(sources)):  # search from the fewer distinct ends
                sources, targets, graph = targets, sources, self.backward
            unique, which = np.unique(sources, return_inverse=True)
            for chunk in range(0, len(unique), 64):  # bounded memory: 64 rows of n_nodes at a time
                rows = dijkstra(graph, indices=unique[chunk:chunk + 64])
                pick = (which >= chunk) & (which < chunk + 64)
                reduced = rows[which[pick] - chunk, targets[pick]]
                out[todo[pick]] = reduced
            out[todo] = out[todo] - phi[a[todo]] + phi[b[todo]]
        return out


def _csr(n: int, tail: np.ndarray, head: np.ndarray, weight: np.ndarray) -> csr_matrix:
    """A CSR graph keeping explicit zero weights (csgraph treats them as arcs) and parallel arcs (csgraph's
    shortest-path routines take the cheapest of repeated entries, as its documentation says)."""
    order = np.argsort(tail, kind="stable")
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(tail, minlength=n), out=indptr[1:])
    return csr_matrix((weight[order], head[order], indptr), shape=(n, n))


def _bellman_ford(n: int, tail: np.ndarray, head: np.ndarray, cost: np.ndarray) -> np.ndarray:
    """Potentials with ``cost + phi[tail] - phi[head] >= -tolerance`` on every arc, from a virtual source joined to
    every node at cost 0: all arcs are relaxed at once per iteration until nothing changes.

    Raises
    ------
    PlanNotOptimal
        Still changing after ``n + 1`` iterations: a negative cycle.
    """
    phi = np.zeros(n)
    if not len(tail):
        return phi
    tolerance = SAME * max(1.0, float(np.abs(cost).max()))
    order = np.argsort(head, kind="stable")
    tail, cost = tail[order], cost[order]
    counts = np.bincount(head, minlength=n)  # arcs per head, in head order: the groups reduceat needs
    heads = np.flatnonzero(counts)
    starts = np.concatenate([[0], np.cumsum(counts[heads])[:-1]])
    for _ in range(n + 1):
        best = np.minimum.reduceat(phi[tail] + cost, starts)
        better = best < phi[heads] - tolerance
        if not better.any():
            return phi
        phi[heads[better]] = best[better]
    raise PlanNotOptimal("the plan's residual network has a negative cycle")


# ---------------------------------------------------------------------------------------------------- the figures
def _needs_use(network: Network, lanes: pd.DataFrame, design: bool) -> np.ndarray:
    """Per active lane: does the model give it a yes/no "used" decision? (as in the model's docstring)"""
    need = lanes["fixed_cost"].to_numpy(dtype=float) > 0
    if design:
        single = set(network.customers.loc[network.customers["single_source"], "id"])
        need = need | (lanes["min_volume"].to_numpy(dtype=float) > 0) | lanes["destination"].isin(single).to_numpy()
    return need


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
        A plan proven optimal: ``flows``, ``open_nodes`` and ``trips`` as :func:`lanesolve.model.solve.solve` fills
        them. Nothing of the solver is read.

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
    round-off and count as 0.

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
    units = network.settings.units or "units"
    currency = network.settings.currency or ""
    depots, customers, hubs, lanes = network.depots, network.customers, network.hubs, network.active_lanes
    design = network.has_design
    basis = FIXED_BASIS if (design or bool((lanes["fixed_cost"] > 0).any())) else LP_BASIS
    n_d, n_c, n_h = len(depots), len(customers), len(hubs)
    root = n_d + n_c + 2 * n_h
    # Every node id at one position (depots, customers, hubs), and the lane ends as positions.
    node_ids = pd.concat([depots["id"], customers["id"], hubs["id"]], ignore_index=True).astype(str)
    at_origin, at_destination = _positions(node_ids, lanes["origin"]), _positions(node_ids, lanes["destination"])
    first_hub = n_d + n_c
    # Hubs are split: lanes leave from the "out" node (shifted by n_h), arrive at the "in" node.
    tail = np.where(at_origin >= first_hub, at_origin + n_h, at_origin)
    head = at_destination

    # The plan's flows per active lane, matched on (origin, destination, mode) as integer keys.
    flows = result.flows
    modes_seen = pd.Series(pd.unique(pd.concat([lanes["mode"], flows["mode"]], ignore_index=True).astype(str)))
    width = len(node_ids) + 1

    def key(at_o, at_d, mode):
        return (at_o.astype(np.int64) * width + at_d) * max(1, len(modes_seen)) + _positions(modes_seen, mode)

    planned = pd.Index(key(_positions(node_ids, flows["origin"]), _positions(node_ids, flows["destination"]),
                           flows["mode"]))
    where = (planned.get_indexer(key(at_origin, at_destination, lanes["mode"])) if len(planned)
             else np.full(len(lanes), -1))
    flow = np.where(where >= 0, flows["flow"].to_numpy(dtype=float)[np.maximum(where, 0)] if len(flows) else 0.0,
                    0.0)
    closed = closed_nodes(network)
    if len(result.open_nodes):
        closed |= set(result.open_nodes.loc[~result.open_nodes["open"].astype(bool), "node"])
    is_closed = node_ids.isin(list(closed)).to_numpy()
    high = lanes["capacity"].to_numpy(dtype=float).copy()
    low = np.zeros(len(lanes))
    shut = is_closed[at_origin] | is_closed[at_destination] if len(lanes) else np.zeros(0, dtype=bool)
    used = flow > 0
    need_use = _needs_use(network, lanes, design)
    shut = shut | (need_use & ~used)
    minimum = lanes["min_volume"].to_numpy(dtype=float)
    low = np.where(need_use & used & design, minimum, low)
    size = lanes["trip_capacity"].to_numpy(dtype=float)
    per_trip = lanes["cost_per_trip"].to_numpy(dtype=float)
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
    cost = lanes["cost_per_unit"].to_numpy(dtype=float) + handling[at_origin]
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
                                "its figures could mislead")

    frames = []
    # Customers: one more unit costs min(p, d(R, c)); one less saves p when short, else -d(c, R).
    node = n_d + np.arange(n_c)
    up = np.where(hard, graph.from_root[node], np.fmin(np.nan_to_num(penalty, nan=math.inf), graph.from_root[node]))
    short = kept < demand - TOLERANCE * np.maximum(1.0, demand)
    down = np.where(~hard & short, np.nan_to_num(penalty), -graph.to_root[node])
    down = np.where(demand <= 0, math.nan, down)  # demand cannot fall below 0
    frames.append(_frame("marginal_cost", customer_ids, up, down, basis,
                         "of demand at customer", units, currency))

    # Depots at their supply: one more saves -d(d, R); one less costs d(R, d).
    binding = ~depots["id"].isin(closed).to_numpy() & _at_bound(net, supply)
    node = np.arange(n_d)[binding]
    frames.append(_frame("supply_value", depot_ids[binding],
                         np.maximum(0.0, -graph.to_root[node]), graph.from_root[node], basis, "of supply at depot",
                         units, currency))

    # Hubs at capacity and lanes at capacity (or full trips): an arc a = (i, j) at its upper bound.
    binding = (hub_cap > 0) & _at_bound(through, hub_cap)
    i, j = (first_hub + np.arange(n_h))[binding], (first_hub + n_h + np.arange(n_h))[binding]
    g = hubs["handling_cost"].to_numpy(float)[binding]
    frames.append(_frame("hub_capacity_value", hub_ids[binding],
                         np.maximum(0.0, -(g + graph.distance(j, i))), graph.distance(i, j) - g, basis,
                         "of capacity at hub", units, currency))

    def labels(chosen: np.ndarray) -> np.ndarray:
        return np.array([f"{o} -> {d} ({m})" if m else f"{o} -> {d}" for o, d, m in
                         zip(*(lanes[column].iloc[chosen].astype(str).tolist()
                               for column in ("origin", "destination", "mode")))],
                        dtype=object)
    at_cap = ~shut & (high > 0) & _at_bound(flow, high)
    arc = lane_arc[at_cap]
    saving = np.maximum(0.0, -(graph.cost[arc] + graph.distance(graph.head[arc], graph.tail[arc])))
    loss = graph.distance(graph.tail[arc], graph.head[arc]) - graph.cost[arc]
    for figure, which, what in (("lane_capacity_value", ~trip_binds[at_cap], "of capacity on lane"),
                                ("trip_capacity_value", trip_binds[at_cap], "of room in the planned trips on lane")):
        frames.append(_frame(figure, labels(at_cap)[which], saving[which], loss[which], basis, what, units,
                             currency))

    # Unused lanes: their cost must fall by c + d(j, i) before a plan as cheap uses them.
    unused = ~shut & (high > 0) & (flow <= TOLERANCE)
    arc = lane_arc[unused]
    reduced = np.maximum(0.0, graph.cost[arc] + graph.distance(graph.head[arc], graph.tail[arc]))
    order = np.argsort(reduced, kind="stable")  # nearest to paying first
    chosen = np.flatnonzero(unused)[order]
    frames.append(_reduced_frame((lanes["origin"], lanes["destination"], lanes["mode"]), chosen, reduced[order],
                                 basis, units, currency,
                                 bool(closed) or basis == FIXED_BASIS))
    frames = [f for f in frames if len(f)]
    if not frames:
        return empty_frame(SENSITIVITY_COLUMNS)
    out = pd.concat(frames, ignore_index=True)
    out["unique"] = out["unique"].astype(bool)
    for column in ("value", "value_up", "value_down"):
        out[column] = out[column].astype(float)
    return out


def _none_row(basis: str, why: str) -> pd.DataFrame:
    return pd.DataFrame([{"figure": "none", "item": "", "value": math.nan, "value_up": math.nan,
                          "value_down": math.nan, "unique": False, "basis": basis,
                          "text": f"No sensitivity figures: {why}."}], columns=SENSITIVITY_COLUMNS)


def _frame(figure: str, items: np.ndarray, up: np.ndarray, down: np.ndarray, basis: str, what: str, units: str,
           currency: str) -> pd.DataFrame:
    """Rows of a two-sided figure, with the sentence: one number when both sides agree, else both."""
    up, down = np.asarray(up, dtype=float) + 0.0, np.asarray(down, dtype=float) + 0.0
    up = np.where(np.abs(up) < SAME, 0.0, up)
    down = np.where(np.abs(down) < SAME, 0.0, down)
    with np.errstate(invalid="ignore"):
        same = np.isfinite(up) & np.isfinite(down) & (np.abs(up - down) <= SAME * np.maximum(1.0, np.abs(up)))
    demand = figure == "marginal_cost"
    more, less = ("costs", "saves") if demand else ("saves", "costs")
    texts = []
    up_words, down_words = _amounts(up, currency).tolist(), _amounts(down, currency).tolist()
    for item, u, d, s, u_text, d_text in zip(items.tolist(), up.tolist(), down.tolist(), same.tolist(), up_words,
                                             down_words):
        subject = f"unit ({units}) {what} {item}"
        if s:
            texts.append(f"One more or one less {subject} changes the cost by {u_text}.")
            continue
        if math.isinf(u):
            first = (f"One more {subject} cannot be met: no plan delivers it" if demand
                     else f"One more {subject} saves nothing")
        else:
            first = f"One more {subject} {more} {u_text}"
        if math.isnan(d):
            second = "it cannot fall below 0"
        elif math.isinf(d):
            second = "with one less there is no plan (the hard demand needs it)"
        else:
            second = f"one less {less} {d_text}"
        texts.append(f"{first}; {second}.")
    n = len(items)
    return pd.DataFrame({"figure": pd.Series([figure] * n, dtype=object), "item": pd.Series(items, dtype=object),
                         "value": np.where(same, up, math.nan), "value_up": up, "value_down": down, "unique": same,
                         "basis": pd.Series([basis] * n, dtype=object), "text": pd.Series(texts, dtype=object)},
                        columns=SENSITIVITY_COLUMNS)


def _reduced_frame(ends: tuple, chosen: np.ndarray, reduced: np.ndarray, basis: str, units: str, currency: str,
                   decisions: bool) -> pd.DataFrame:
    """Rows of the unused lanes (a 100k-lane plan has about 100k of them, so their labels and sentences are most of
    the figures' time): built column-wise by Arrow's string kernels where pyarrow is installed (pandas uses it for
    its text columns), else row by row; both give the same text. Text columns are plain object arrays, as
    :func:`~lanesolve.model.result.empty_frame` makes them."""
    reduced = np.where(np.abs(reduced) < SAME, 0.0, reduced) + 0.0
    finite = np.isfinite(reduced)
    never = (" is unused and no plan can use it while the plan's yes/no and trip decisions stand." if decisions
             else " is unused and no plan can use it (nothing can flow over it to where it is needed).")
    middle = f" is unused; its cost per unit ({units}) would have to fall by "
    end = f" {currency} before a plan as cheap used it." if currency else " before a plan as cheap used it."
    free = " is unused, but a plan using it would cost no more (an equally cheap alternative)."
    # ends: the lanes' origin, destination and mode columns; chosen: the unused lanes' positions, nearest first.
    try:
        import pyarrow as pa

        columns = [_arrow_column(pa, column).take(pa.array(chosen)) for column in ends]
        items, texts = _reduced_words_arrow(*columns, reduced, middle, end, free, never)
    except ImportError:
        columns = [column.to_numpy(dtype=object)[chosen] for column in ends]
        items, texts = _reduced_words_rows(*columns, reduced, middle, end, free, never)
    n = len(items)
    return pd.DataFrame({"figure": pd.Series(["reduced_cost"] * n, dtype=object),
                         "item": pd.Series(items, dtype=object), "value": np.where(finite, reduced, math.nan),
                         "value_up": reduced, "value_down": np.full(n, math.nan), "unique": finite,
                         "basis": pd.Series([basis] * n, dtype=object), "text": pd.Series(texts, dtype=object)},
                        columns=SENSITIVITY_COLUMNS)


def _positions(values: pd.Series, wanted: pd.Series) -> np.ndarray:
    """Position of each of ``wanted`` in ``values`` (unique), -1 where absent: Arrow's ``index_in`` when pyarrow is
    installed (a hash join over the text buffers, about 20 times faster here), else pandas' ``get_indexer``."""
    if len(wanted) == 0:
        return np.zeros(0, dtype=np.int64)
    try:
        import pyarrow as pa
        import pyarrow.compute as pc
    except ImportError:
        return pd.Index(values.to_numpy(dtype=object)).get_indexer(wanted.to_numpy(dtype=object)).astype(np.int64)
    found = pc.index_in(_arrow_column(pa, wanted), value_set=_arrow_column(pa, values))
    return pc.fill_null(found, -1).to_numpy(zero_copy_only=False).astype(np.int64)


def _arrow_column(pa, column: pd.Series):
    """A text column as an Arrow array: zero-copy when pandas already keeps it in Arrow, else converted."""
    try:
        return pa.array(column.array, type=pa.string())
    except (TypeError, ValueError, pa.ArrowException):
        return pa.array(column.to_numpy(dtype=object), type=pa.string())


def _reduced_words_rows(origins, destinations, modes, reduced, middle, end, free, never):
    """Labels and sentences of unused lanes, row by row (no pyarrow)."""
    amounts = _amounts(reduced).tolist()
    items, texts = [], []
    for o, d, m, value, amount in zip(origins.tolist(), destinations.tolist(), modes.tolist(), reduced.tolist(),
                                      amounts):
        item = f"{o} -> {d} ({m})" if m else f"{o} -> {d}"
        items.append(item)
        texts.append(f"Lane {item}{free}" if value == 0 else f"Lane {item}{never}" if value == math.inf
                     else f"Lane {item}{middle}{amount}{end}")
    return np.array(items, dtype=object), np.array(texts, dtype=object)


def _reduced_words_arrow(origins, destinations, modes, reduced, middle, end, free, never):
    """Labels and sentences of unused lanes with Arrow's string kernels; amounts as :func:`money_words` writes them
    (four significant digits, at least two decimals). Raises ImportError without pyarrow."""
    import pyarrow as pa
    import pyarrow.compute as pc

    join = pc.binary_join_element_wise
    origin, destination, mode = (pa.array(a, type=pa.string()) if not isinstance(a, (pa.Array, pa.ChunkedArray))
                                 else a.cast(pa.string()) for a in (origins, destinations, modes))
    item = join(origin, destination, " -> ")
    item = pc.if_else(pc.equal(mode, ""), item, join(item, " (", mode, ")", ""))
    size = np.where(np.isfinite(reduced), reduced, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        magnitude = np.floor(np.log10(size))
    decimals = np.where(np.isfinite(magnitude), np.clip(3 - magnitude, 2, 15), 2)
    rounded = np.round(size * 10.0 ** decimals) / 10.0 ** decimals
    amount = pc.cast(pa.array(rounded), pa.string())  # shortest text of the rounded value
    amount = pc.replace_substring_regex(amount, r"^(\d+)$", r"\1.00")
    amount = pc.replace_substring_regex(amount, r"^(\d+\.\d)$", r"\1" + "0")
    odd = np.flatnonzero((size >= 1000) | ((size > 0) & (size < 1e-4)))  # thousands separators, tiny values
    if len(odd):
        fixed = amount.to_numpy(zero_copy_only=False).astype(object)
        fixed[odd] = _amounts(size[odd])
        amount = pa.array(fixed, type=pa.string())
    text = join("Lane ", item, middle, amount, end, "")
    text = pc.if_else(pa.array(reduced == 0), join("Lane ", item, free, ""), text)
    text = pc.if_else(pa.array(np.isinf(reduced)), join("Lane ", item, never, ""), text)
    return item.to_numpy(zero_copy_only=False), text.to_numpy(zero_copy_only=False)


def top_few(sensitivity: pd.DataFrame, figure: str, count: int = TOP_FEW) -> pd.DataFrame:
    """The ``count`` rows of one figure that matter most, for summaries: for unused lanes the *nearest* to paying
    (smallest cut first), for every other figure the largest one-more-unit values first."""
    rows = sensitivity[sensitivity["figure"] == figure]
    column = "value_up" if "value_up" in rows else "value"
    ascending = figure == "reduced_cost"
    return rows.sort_values(column, ascending=ascending, kind="stable", na_position="last").head(count)
