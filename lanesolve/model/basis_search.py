"""Tabu search over the basic plans of a fixed-charge transportation network (depots straight to customers).

When every lane runs from a depot to a customer, lanes have no binding capacity and every customer's demand must be
met, the network is the fixed-charge transportation problem (FCTP). Its cost is concave in the flows, so some optimal
plan is a *basic* plan of the transportation polytope: its lanes form a spanning tree of depots and customers (some
of them may carry nothing), and two basic plans are neighbours when one pivot of the transportation simplex method
turns one into the other (a lane enters the tree, flow moves round the cycle it closes, a lane of the cycle leaves).
The local searches for the FCTP walk these pivots; this module follows the tabu search of Sun, Aronson, McKeown &
Drinka, "A tabu search heuristic procedure for the fixed charge transportation problem", European Journal of
Operational Research 106 (1998) (cited from memory): every iteration prices *every* pivot, takes the best one that
is not tabu (a lane that left the tree may not enter again for a few iterations unless it makes the best plan yet),
worse or not, and after a run of iterations without a new best plan goes back to the best one and kicks it with a
few random pivots. The paper's details (its tenure rule, its intensification and diversification lists) are
recalled from memory and are not copied: the tenure, the patience and the kick here are our own choices, set on
``benchmarks/mip_family.py``, and so is the diversification: when a walk's kicks stop finding better plans, a new
walk starts from the start plan, kicked, with an empty tabu list (a restart of iterated local search, Lourenço,
Martin & Stützle, "Iterated local search", Handbook of Metaheuristics, 2003), and the best plan of all walks is kept.

Pricing every pivot at once (our own vectorisation, not from the paper): with the tree rooted at depot 0,
``on_path[v, e]`` says that tree lane ``e`` lies on the path from node ``v`` up to the root. The cycle that a lane
``i -> j`` closes runs back from customer ``j`` to depot ``i`` along the tree, and a tree lane on it gains flow when
it is walked from depot to customer and loses flow otherwise, so its sign on the cycle is
``(on_path[j, e] - on_path[i, e]) * s_e`` with ``s_e = -1`` when the lower end of ``e`` (further from the root) is a
customer and ``+1`` when it is a depot. The step ``theta`` is the least flow on a losing lane; the pivot's change of
cost is ``theta`` times the lane's reduced cost (rate less the depot's and the customer's potentials of the tree)
plus the charges of the lanes that start or stop carrying flow. One pass of NumPy over a depots x customers x
tree-lanes array of signs prices all of them.

The flows of a basic plan follow from its tree alone (a lane carries what the subtree below it supplies less what
it takes), so they are recomputed from the supplies and demands after each pivot: exact integers for integer data,
no drift.

Depots with more supply than the customers need ship the rest to a slack customer at no cost and no charge; a pair of
depot and customer without a lane gets a lane in the search only that carries nothing (no pivot may move flow onto
it). Every plan returned is priced by the caller on the model's own costs.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from lanesolve.model.network import Network

#: Largest depots x customers x tree lanes array priced at once; larger networks use the lane search's drop moves
#: (our choice: 4 million cells are 32 MB in the float passes of one pricing and some tens of milliseconds).
MAX_CELLS = 4_000_000
#: Tabu tenure: a lane that left the tree may not enter again for this many iterations, drawn anew at each pivot
#: (our choice; Sun et al. 1998 tie their tenure to the network's size, recalled from memory).
TENURE = (10, 20)
#: Iterations without a new best plan before the search goes back to the best plan and kicks it.
PATIENCE = 60
#: Random pivots in a kick (drawn among the pivots that move flow).
KICK_PIVOTS = (6, 12)
#: Kicks without a new best plan of the walk before a new walk starts from the best plan of all, kicked harder by
#: this many random pivots (our choice: on the 15x50 family instance a walk found its last better plan within
#: about 1,500 pivots and then stayed in its basin).
WALK_KICKS = 25
FRESH_KICK = 30
SEED = 20261202


def applies(network: Network) -> bool:
    """True when ``network`` is a fixed-charge transportation problem that :func:`search` can walk."""
    return _transport(network) is not None


@dataclass
class _Transport:
    """The network as a transportation table; column ``n - 1`` is the slack customer when supply exceeds demand."""

    supply: np.ndarray  # (m,)
    demand: np.ndarray  # (n,)
    rate: np.ndarray  # (m, n) cost per unit, depot handling included
    charge: np.ndarray  # (m, n) fixed charge
    lane: np.ndarray  # (m, n) row in network.lanes, -1 for no lane and for the slack customer
    missing: np.ndarray  # (m, n) no lane between the depot and the customer (never the slack customer)
    tol: float  # flows below this are zero

    @property
    def balance(self) -> np.ndarray:
        """Supply of the depots, then less the demand of the customers (one entry per node of the tree)."""
        return np.concatenate([self.supply, -self.demand])


def _transport(network: Network) -> _Transport | None:
    depots, customers, lanes = network.depots, network.customers, network.lanes
    if (not network.has_fixed_charges or network.has_design or network.has_carrier_terms
            or network.products is not None or network.emissions is not None):
        return None
    if network.settings.unmet_penalty is not None or customers["unmet_penalty"].notna().any():
        return None  # demand that may be left unmet is not a transportation problem
    active = np.flatnonzero(lanes["active"].to_numpy(dtype=bool))
    depot_of = {d: k for k, d in enumerate(depots["id"].tolist())}
    customer_of = {c: k for k, c in enumerate(customers["id"].tolist())}
    rows = [depot_of.get(o, -1) for o in lanes["origin"].to_numpy()[active]]
    cols = [customer_of.get(d, -1) for d in lanes["destination"].to_numpy()[active]]
    rows, cols = np.array(rows, dtype=np.int64), np.array(cols, dtype=np.int64)
    m, n_real = len(depots), len(customers)
    if m == 0 or n_real == 0 or len(active) == 0 or (rows < 0).any() or (cols < 0).any():
        return None  # hubs, or a lane between two depots or two customers
    supply = depots["supply"].to_numpy(dtype=float)
    demand = customers["demand"].to_numpy(dtype=float)
    if not (np.isfinite(supply).all() and np.isfinite(demand).all()) or supply.sum() < demand.sum() - 1e-9:
        return None
    surplus = supply.sum() - demand.sum()
    tol = 1e-9 * max(float(supply.sum()), 1.0)
    slack = surplus > tol
    n = n_real + int(slack)
    if m * n * (m + n) > MAX_CELLS:
        return None
    capacity = lanes["capacity"].to_numpy(dtype=float)[active]
    if (capacity < np.minimum(supply[rows], demand[cols]) - tol).any():
        return None  # a capacity that can bind
    lane = np.full((m, n), -1, dtype=np.int64)
    lane[rows, cols] = active
    if len(np.unique(rows * n + cols)) < len(active):
        return None  # two lanes between the same depot and customer: not one table
    handling = depots["handling_cost"].to_numpy(dtype=float)
    rate_of = lanes["cost_per_unit"].to_numpy(dtype=float)[active] + handling[rows]
    charge_of = lanes["fixed_cost"].to_numpy(dtype=float)[active]
    if not (np.isfinite(rate_of).all() and np.isfinite(charge_of).all()):
        return None
    # A pair without a lane may sit in the tree only carrying nothing (the search never moves flow onto it), so its
    # rate only shifts the potentials: any finite value does, the dearest rate keeps them in the data's range.
    rate = np.full((m, n), float(rate_of.max()))
    charge = np.zeros((m, n))
    rate[rows, cols], charge[rows, cols] = rate_of, charge_of
    missing = lane < 0
    if slack:
        rate[:, -1] = 0.0
        missing[:, -1] = False
        demand = np.append(demand, surplus)
    return _Transport(supply, demand, rate, charge, lane, missing, tol)


def search(network: Network, lane_flow: np.ndarray, end: float, seed: int = SEED) -> np.ndarray | None:
    """The best plan found by the tabu search of the module docstring from the plan ``lane_flow`` (flow per row of
    ``network.lanes``, meeting all demand) before :func:`time.monotonic` reaches ``end``: flow per lane, or None
    when the search does not apply. The plan returned is never dearer than the start (it may be the start made
    basic, which removes flow round cycles and so never costs more)."""
    table = _transport(network)
    if table is None:
        return None
    flow = np.zeros(table.rate.shape)
    has_lane = table.lane >= 0
    flow[has_lane] = lane_flow[table.lane[has_lane]]
    if table.demand.shape[0] > len(network.customers):
        flow[:, -1] = np.maximum(table.supply - flow[:, :-1].sum(axis=1), 0.0)
    tree = _Tree.basic(table, flow)
    best = tree.walk(end, np.random.default_rng(seed))
    answer = np.zeros(len(network.lanes))
    plan = np.zeros(table.rate.shape)
    plan[best[0], best[1]] = best[2]
    answer[table.lane[has_lane]] = plan[has_lane]
    return answer


class _Tree:
    """A basic plan: ``m + n - 1`` tree lanes ``(row, col)`` with their flows, and the arrays that price pivots."""

    def __init__(self, table: _Transport, rows: np.ndarray, cols: np.ndarray):
        self.table, self.rows, self.cols = table, rows, cols
        self.m, self.n = table.rate.shape
        self.in_tree = np.zeros((self.m, self.n), dtype=bool)
        self.in_tree[rows, cols] = True
        self.iterations = 0  # pivots priced by :meth:`walk` (for the benchmark notes)
        self.balance = table.balance
        self._layout()

    # --- building a basic plan -------------------------------------------------------------------------------------

    @classmethod
    def basic(cls, table: _Transport, flow: np.ndarray) -> _Tree:
        """A basic plan no dearer than ``flow``: flow round every cycle of its lanes is pushed the way that costs no
        more until a lane of the cycle is empty, then lanes that carry nothing join the forest into a tree."""
        m, n = flow.shape
        flow = np.where(flow > table.tol, flow, 0.0)
        parent = list(range(m + n))

        def root(v: int) -> int:
            while parent[v] != v:
                parent[v] = parent[parent[v]]
                v = parent[v]
            return v

        forest: dict[tuple[int, int], float] = {}
        for i, j in sorted(zip(*np.nonzero(flow)), key=lambda p: -flow[p]):
            i, j = int(i), int(j)
            forest[(i, j)] = float(flow[i, j])
            a, b = root(i), root(m + j)
            if a != b:
                parent[a] = b
            else:
                cls._cancel(table, forest, i, j)
                parent = cls._components(m, n, forest)  # cancelling may split a component
        pairs = ((i, j) for i in range(m) for j in range(n))
        for i, j in sorted(pairs, key=lambda p: (bool(table.missing[p]), table.rate[p])):
            a, b = root(i), root(m + j)
            if a != b:
                parent[a] = b
                forest[(i, j)] = 0.0
        keys = list(forest)
        rows = np.array([k[0] for k in keys], dtype=np.int64)
        cols = np.array([k[1] for k in keys], dtype=np.int64)
        return cls(table, rows, cols)

    @staticmethod
    def _components(m: int, n: int, forest: dict) -> list[int]:
        parent = list(range(m + n))
        for i, j in forest:
            a, b = i, m + j
            while parent[a] != a:
                a = parent[a]
            while parent[b] != b:
                b = parent[b]
            if a != b:
                parent[a] = b
        return parent

    @staticmethod
    def _cancel(table: _Transport, forest: dict, i: int, j: int) -> None:
        """Lane ``(i, j)`` closed a cycle in ``forest``: push flow round it, the way whose rates cost no more, until
        a lane is empty, and drop the empty lanes (their charges are saved, no lane starts carrying flow)."""
        m = table.rate.shape[0]
        neighbours: dict[int, list[int]] = {}
        for a, b in forest:
            if (a, b) != (i, j):
                neighbours.setdefault(a, []).append(m + b)
                neighbours.setdefault(m + b, []).append(a)
        came = {m + j: -1}
        queue = [m + j]
        while queue and i not in came:
            v = queue.pop(0)
            for w in neighbours.get(v, []):
                if w not in came:
                    came[w] = v
                    queue.append(w)
        path, v = [], i
        while came[v] != -1:
            path.append((v, came[v]))
            v = came[v]
        # Walking the cycle i -> j -> ... -> i, lane (i, j) gains; a tree lane walked customer -> depot loses.
        cycle = [((i, j), 1.0)]
        for v, before in reversed(path):  # from j back to i, one step before -> v at a time
            if before >= m:  # customer -> depot: lane (v, customer) loses
                cycle.append(((v, before - m), -1.0))
            else:  # depot -> customer: lane (depot, v) gains
                cycle.append(((before, v - m), 1.0))
        rates = sum(sign * table.rate[lane] for lane, sign in cycle)
        direction = -1.0 if rates > 0 else 1.0
        step = min(forest[lane] for lane, sign in cycle if sign * direction < 0)
        for lane, sign in cycle:
            forest[lane] += sign * direction * step
        for lane, _ in cycle:
            if forest[lane] <= table.tol:
                del forest[lane]

    # --- the tree's arrays -----------------------------------------------------------------------------------------

    def _layout(self) -> None:
        """Root the tree at depot 0: path matrix ``on_path``, signs ``sign``, and the reduced rates from the
        potentials ``u`` (depots) and ``v`` (customers) with ``u_i + v_j = rate_ij`` on every tree lane.

        A depth-first order puts every subtree in one run of positions, so lane ``e`` lies on the path from ``v`` up
        to the root exactly when ``v``'s position falls in the run of ``e``'s lower end."""
        m, size = self.m, self.m + self.n
        lanes = len(self.rows)
        neighbours: list[list[int]] = [[] for _ in range(size)]
        for i, j in zip(self.rows.tolist(), self.cols.tolist()):
            neighbours[i].append(m + j)
            neighbours[m + j].append(i)
        parent = [-1] * size
        visit, stack = [], [0]
        while stack:  # depth first: each subtree is one run of ``visit``
            v = stack.pop()
            visit.append(v)
            for w in neighbours[v]:
                if w != parent[v]:
                    parent[w] = v
                    stack.append(w)
        order, pred = np.array(visit), np.array(parent)
        lower = order[1:]
        upper = pred[lower]
        depot = np.where(lower < m, lower, upper)
        customer = np.where(lower < m, upper, lower) - m
        slot = np.zeros((m, self.n), dtype=np.int64)
        slot[self.rows, self.cols] = np.arange(lanes)
        edge = slot[depot, customer]  # the tree lane between each node and its parent
        self.sign = np.zeros(lanes, dtype=np.int8)
        self.sign[edge] = np.where(lower >= m, -1, 1)
        rate = self.table.rate[depot, customer].tolist()
        potential = [0.0] * size
        below = [1] * size
        up, low = upper.tolist(), lower.tolist()
        for k, w in enumerate(low):
            potential[w] = rate[k] - potential[up[k]]
        for k in range(len(up) - 1, -1, -1):
            below[up[k]] += below[low[k]]
        position = np.empty(size, dtype=np.int64)
        position[order] = np.arange(size)
        start = np.empty(lanes, dtype=np.int64)
        start[edge] = position[lower]
        stop = start.copy()
        stop[edge] += np.array(below)[lower]
        self.on_path = ((position[:, None] >= start[None, :]) & (position[:, None] < stop[None, :])).astype(np.int8)
        potential = np.array(potential)
        self.reduced = self.table.rate - potential[:m, None] - potential[None, m:]
        # A tree carries one plan: the flow on lane e is what the subtree below it supplies less what it takes
        # (leaf by leaf peeling, as in any textbook's transportation method), exact in integers for integer data.
        flows = self.sign * (self.balance @ self.on_path)
        self.flows = np.where(np.abs(flows) <= self.table.tol, 0.0, flows)

    def cost(self) -> float:
        used = self.flows > self.table.tol
        rows, cols = self.rows[used], self.cols[used]
        return float(self.table.rate[rows, cols] @ self.flows[used] + self.table.charge[rows, cols].sum())

    def price(self):
        """Every pivot's step, change of cost and cycle signs (``m x n x tree lanes``)."""
        m, tol = self.m, self.table.tol
        signs = (self.on_path[None, m:, :] - self.on_path[:m, None, :]) * self.sign
        losing = signs < 0
        step = np.where(losing, self.flows, np.inf).min(axis=2)
        step[self.in_tree] = 0.0
        moving = step > tol
        charge = self.table.charge[self.rows, self.cols]
        empty = self.flows <= tol
        closing = (losing & (self.flows <= step[..., None] + tol) & ~empty) @ charge
        opening = ((signs > 0) & empty) @ charge
        delta = np.where(moving, step * self.reduced + self.table.charge - closing + opening, 0.0)
        blocked = self.table.missing.copy()
        holes = self.table.missing[self.rows, self.cols]
        if holes.any():  # a tree pair without a lane must not gain flow
            blocked |= ((signs > 0) & holes).any(axis=2)
        return step, delta, signs, blocked

    def pivot(self, i: int, j: int, step: float, signs: np.ndarray) -> tuple[int, int]:
        """Lane ``(i, j)`` enters with ``step``; returns the lane that leaves."""
        cycle = signs[i, j]
        flows = self.flows + step * cycle
        candidates = np.flatnonzero((cycle < 0) & (flows <= self.table.tol))
        leave = int(candidates[np.argmax(self.table.charge[self.rows[candidates], self.cols[candidates]])])
        left = (int(self.rows[leave]), int(self.cols[leave]))
        self.in_tree[left] = False
        self.in_tree[i, j] = True
        self.rows[leave], self.cols[leave] = i, j
        self._layout()  # the flows too
        return left

    # --- the search -----------------------------------------------------------------------------------------------

    def snapshot(self):
        return self.rows.copy(), self.cols.copy(), self.flows.copy()

    def walk(self, end: float, rng: np.random.Generator):
        """The tabu search of the module docstring until ``end``; returns the best plan's (rows, cols, flows).

        A walk kicks its own best plan; after :data:`WALK_KICKS` kicks without a new best plan of its own a new walk
        starts from the start plan, kicked by :data:`FRESH_KICK` pivots, with a fresh tabu list."""
        cost = best_cost = self.cost()
        best = local = first = self.snapshot()
        local_cost = cost
        tabu_until = np.zeros((self.m, self.n), dtype=np.int64)
        it = since_best = failed = 0
        while time.monotonic() < end:
            it += 1
            self.iterations = it
            step, delta, signs, blocked = self.price()
            allowed = (step > self.table.tol) & ~self.in_tree & ~blocked
            aspire = cost + delta < local_cost - _noise(local_cost)
            allowed &= (tabu_until <= it) | aspire
            if not allowed.any():
                break
            k = int(np.argmin(np.where(allowed, delta, np.inf)))
            i, j = divmod(k, self.n)
            left = self.pivot(i, j, float(step[i, j]), signs)
            tabu_until[left] = it + int(rng.integers(TENURE[0], TENURE[1] + 1))
            cost += float(delta[i, j])
            if cost < local_cost - _noise(local_cost):
                cost = self.cost()  # exact again (sums of steps drift in floats)
                local, local_cost, since_best, failed = self.snapshot(), cost, 0, 0
                if cost < best_cost - _noise(best_cost):
                    best, best_cost = local, cost
            else:
                since_best += 1
            if since_best < PATIENCE:
                continue
            if failed >= WALK_KICKS:
                self._kick(first, rng, FRESH_KICK)
                tabu_until[:] = 0
                local, local_cost, failed = self.snapshot(), self.cost(), 0
            else:
                self._kick(local, rng, int(rng.integers(KICK_PIVOTS[0], KICK_PIVOTS[1] + 1)))
                failed += 1
            cost, since_best = self.cost(), 0
        return best

    def _kick(self, plan, rng: np.random.Generator, pivots: int) -> None:
        """Back to ``plan`` (rows, cols, flows), then ``pivots`` random pivots that move flow."""
        self.rows, self.cols = plan[0].copy(), plan[1].copy()
        self.in_tree[:] = False
        self.in_tree[self.rows, self.cols] = True
        self._layout()
        for _ in range(pivots):
            step, _, signs, blocked = self.price()
            moving = np.flatnonzero(((step > self.table.tol) & ~self.in_tree & ~blocked).ravel())
            if len(moving) == 0:
                return
            i, j = divmod(int(rng.choice(moving)), self.n)
            self.pivot(i, j, float(step[i, j]), signs)


def _noise(cost: float) -> float:
    """Less than this is no change of cost (float sums)."""
    return 1e-9 * max(abs(cost), 1.0)
