"""Improve a plan of single-source facility location: local search over which depot serves each customer, then a
large neighbourhood search whose neighbourhoods HiGHS solves exactly.

It applies to the model :func:`lanesolve.model.lagrangian.recognise` accepts with ``single_source=True``: depots to
open or close (fixed charges), every customer served whole by one lane from a depot, depot supplies (the Holmberg,
Rönnqvist & Yuan sets are of this kind). A plan is then an *assignment*, a depot per customer, and its cost the
cost of the lanes it uses (rate and handling times the customer's demand, plus a lane's fixed charge) and the fixed
charges of the depots it uses. A depot to decide is open exactly when it serves a customer.

1. **Local search** with the classic single moves of single-source capacitated facility location and the
   generalised assignment problem (e.g. Ahuja, Orlin, Pallottino, Scaparra & Scutellà, "A multi-exchange heuristic
   for the single-source capacitated facility location problem", Management Science 50, 2004, citation recalled
   from memory): *shift* one customer to another depot with room (which may open it, or close the one it leaves);
   *swap* two customers of different depots when both have the room; *close* a depot, its customers going one by
   one, largest demand first, to the cheapest open depot with room; *open* a closed depot, which takes the customers
   it serves more cheaply, largest saving first, while its supply lasts. Shifts and swaps are priced incrementally
   from the depots' loads, all of them at once as arrays (at 30 x 200: 6,000 shifts, 19,900 swaps); the best
   improving one is taken until none is left, then the first close or open move whose plan, after its own
   descent, is cheaper.
2. **Large neighbourhood search** (Shaw, "Using constraint programming and local search methods to solve vehicle
   routing problems", CP 1998, citation recalled from memory), with HiGHS solving each neighbourhood exactly on the
   model itself, every column outside it fixed at the plan's value and the plan as HiGHS's first incumbent. First
   one large neighbourhood, for at most :data:`CANDIDATE_SHARE` of the time: every depot free to open or close,
   every customer limited to its :data:`CANDIDATES` cheapest depots and its own. Then small ones: an open depot,
   the half of :data:`FIRST_SIZE` - 1 depots most alike it (by their costs per unit to the same customers) and the
   rest drawn at random, open or closed, are freed with every customer they serve, and the MIP of which of them
   open and which serves whom is solved. A cheaper plan is taken and the local search runs again; when every open
   depot has centred a neighbourhood in vain, the neighbourhoods grow by :data:`GROWTH` depots, and the search
   ends when they cover every depot (the whole plan is then one neighbourhood) or at its deadline. The local search
   alone stalls on the tight sets (p57: loads at 95 % of the open depots' supply), where a better plan moves many
   customers at once.

Every plan it returns meets every row of the model and costs less than the plan it started from, recomputed from
the model's own costs; it never changes the solver's lower bound. The order in which depots centre neighbourhoods
is drawn with a fixed seed, so a search that runs as long does the same; how far it gets depends on the time and
the machine's load.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np

from lanesolve.model.arrays import SparseModel
from lanesolve.model.lagrangian import FacilityProblem, recognise
from lanesolve.model.lane_search import BETTER, KICK_SEED

#: Most depot-customer pairs the dense cost table may hold, and most customers for the swap table (pairs of
#: customers); beyond them the search does not run, or runs without swaps (our choice: 4 million floats is 32 MB).
MOST_PAIRS, MOST_SWAP_CUSTOMERS = 4_000_000, 2_000
#: Close or open moves descended from per round, the cheapest first (our choice, by trials on p57 of the Holmberg
#: set: each descent costs a few milliseconds at 30 x 200, and moves beyond the first few rarely lead lower).
DEPOT_TRIES = 6
#: Large neighbourhood search: depots freed at first, how many more each time every open depot has centred a
#: neighbourhood in vain, and the most seconds HiGHS may spend on one (our choices, by trials on p57 and p58 of the
#: Holmberg set, 30 x 200: 8 depots free about 60 customers, a MIP HiGHS solves in a fraction of a second).
FIRST_SIZE, GROWTH, SUB_SECONDS = 8, 2, 2.0
#: The first neighbourhood: every customer limited to its this many cheapest depots (and its own), every depot free,
#: with at most this share of the search's time (our choices, by the same trials: on p57 it took the plan from
#: 0.76 % to 0.24 % above the published optimum in 2.5 s; with 5 candidates HiGHS found nothing in 5 s).
CANDIDATES, CANDIDATE_SHARE = 3, 0.4
#: A load within this share of the supply counts as fitting (float noise).
ROOM = 1e-9


class Assignment:
    """A single-source plan and its moves: ``depot[j]`` serves customer ``j`` (-1 for a customer of no demand).

    Parameters
    ----------
    problem : FacilityProblem
        From ``recognise(model, single_source=True)``.
    charge : numpy.ndarray
        Per column of the model its cost (the ``use_`` columns' are the lanes' fixed charges).
    """

    def __init__(self, problem: FacilityProblem, charge: np.ndarray):
        p = self.problem = problem
        m, n = p.n_depots, len(p.demand)
        self.demand, self.supply = p.demand, p.supply
        self.fixed = np.where(p.open_column >= 0, p.fixed, 0.0)
        self.decided = p.open_column >= 0
        self.cost = np.full((m, n), np.inf)  # serving all of j from i by its lane
        self.lane = np.full((m, n), -1, dtype=np.int64)
        whole = p.lane_cost * p.demand[p.lane_customer] + charge[p.use_column]
        cheapest = np.lexsort((-whole, p.lane_customer, p.lane_depot))  # the cheapest of parallel lanes last
        at = p.lane_depot[cheapest], p.lane_customer[cheapest]
        self.cost[at], self.lane[at] = whole[cheapest], cheapest
        self.depot = np.full(n, -1, dtype=np.int64)
        self.load = np.zeros(m)
        self.count = np.zeros(m, dtype=np.int64)
        self.total = 0.0
        self.served = np.flatnonzero(p.demand > 0)

    def start(self, lane_flow: np.ndarray) -> bool:
        """Take the plan whose flow per lane of the problem is ``lane_flow``; False when it is not an assignment
        of this problem (a customer split or unserved)."""
        p = self.problem
        used = np.flatnonzero(lane_flow > 0)
        depot = np.full(len(p.demand), -1, dtype=np.int64)
        depot[p.lane_customer[used]] = p.lane_depot[used]
        if len(np.unique(p.lane_customer[used])) != len(used) or (depot[self.served] < 0).any():
            return False
        if not np.allclose(lane_flow[used], p.demand[p.lane_customer[used]]):
            return False
        self.set(depot)
        return bool((self.load <= self.supply * (1 + ROOM)).all())

    def set(self, depot: np.ndarray) -> None:
        """Take the assignment ``depot`` (per customer) and recompute loads and cost from scratch."""
        s = self.served
        self.depot = depot.copy()
        self.load = np.bincount(depot[s], self.demand[s], minlength=len(self.supply))
        self.count = np.bincount(depot[s], minlength=len(self.supply))
        self.total = float(self.cost[depot[s], s].sum() + self.fixed[self.count > 0].sum())

    def lane_flow(self) -> np.ndarray:
        """Flow per lane of the problem: each served customer's demand on its depot's cheapest lane."""
        flow = np.zeros(len(self.problem.lane_cost))
        s = self.served
        flow[self.lane[self.depot[s], s]] = self.demand[s]
        return flow

    def _fits(self, depot: int, extra: float) -> bool:
        return self.load[depot] + extra <= self.supply[depot] * (1 + ROOM) + ROOM

    def _move(self, customer: int, depot: int) -> None:
        old = self.depot[customer]
        q = self.demand[customer]
        self.total += self.cost[depot, customer] - self.cost[old, customer]
        self.total += self.fixed[depot] * (self.count[depot] == 0) - self.fixed[old] * (self.count[old] == 1)
        self.load[old] -= q
        self.load[depot] += q
        self.count[old] -= 1
        self.count[depot] += 1
        self.depot[customer] = depot

    def best_shift(self) -> tuple[float, int, int]:
        """The cheapest shift (change of cost, customer, new depot) over all customers and depots at once."""
        s, a = self.served, self.depot[self.served]
        delta = self.cost[:, s] - self.cost[a, s]
        delta -= np.where(self.count[a] == 1, self.fixed[a], 0.0)
        delta += np.where(self.count == 0, self.fixed, 0.0)[:, None]
        room = self.supply * (1 + ROOM) + ROOM - self.load
        delta[room[:, None] < self.demand[s][None, :]] = np.inf
        delta[a, np.arange(len(s))] = np.inf
        at = int(np.argmin(delta))
        i, k = divmod(at, len(s))
        return float(delta[i, k]), int(s[k]), i

    def best_swap(self) -> tuple[float, int, int]:
        """The cheapest swap (change of cost, customer, customer) over all pairs at once."""
        s, a = self.served, self.depot[self.served]
        if len(s) > MOST_SWAP_CUSTOMERS or len(s) < 2:
            return np.inf, -1, -1
        q = self.demand[s]
        own = self.cost[a, s]
        there = self.cost[a][:, s]  # there[k, j]: customer j served by customer k's depot
        delta = there + there.T - own[:, None] - own[None, :]
        room = (self.supply * (1 + ROOM) + ROOM - self.load)[a]  # room at customer k's depot
        fits = room[:, None] + q[:, None] - q[None, :] >= 0  # fits[k, j]: j may replace k at k's depot
        delta[~(fits & fits.T) | (a[:, None] == a[None, :])] = np.inf
        at = int(np.argmin(delta))
        k, j = divmod(at, len(s))
        return float(delta[k, j]), int(s[j]), int(s[k])

    def descend(self, end: float) -> None:
        """The best improving shift until none improves, then the best improving swap, and so on until neither
        improves or ``end`` (shifts first: a swap table costs a hundred shift tables' time at 200 customers)."""
        while time.monotonic() < end:
            limit = -BETTER * max(abs(self.total), 1.0)
            gain, customer, depot = self.best_shift()
            if gain < limit:
                self._move(customer, depot)
                continue
            gain, j, k = self.best_swap()
            if gain >= limit:
                return
            a_j, a_k = self.depot[j], self.depot[k]
            self._move(j, a_k)
            self._move(k, a_j)

    def close(self, depot: int) -> bool:
        """Close ``depot``: its customers, largest demand first, to the cheapest open depot with room (module
        docstring); False (and the plan as it was) when one finds none."""
        before = self.depot.copy()
        customers = np.flatnonzero(self.depot == depot)
        for j in customers[np.argsort(-self.demand[customers], kind="stable")].tolist():
            room = self.supply * (1 + ROOM) + ROOM - self.load
            usable = ((self.count > 0) | ~self.decided) & (room >= self.demand[j]) & np.isfinite(self.cost[:, j])
            usable[depot] = False
            if not usable.any():
                self.set(before)
                return False
            self._move(j, int(np.flatnonzero(usable)[np.argmin(self.cost[usable, j])]))
        return True

    def open(self, depot: int) -> None:
        """Open ``depot``: it takes the customers it serves more cheaply, largest saving first, while its supply
        lasts (module docstring)."""
        s = self.served
        saving = self.cost[self.depot[s], s] - self.cost[depot, s]
        for k in np.argsort(-saving, kind="stable").tolist():
            if saving[k] <= 0:
                break
            if self._fits(depot, self.demand[s[k]]):
                self._move(int(s[k]), depot)


def applies(model: SparseModel) -> bool:
    """Whether :func:`improve` searches plans of ``model``: a single-source facility model small enough for its
    tables."""
    problem = recognise(model, single_source=True)
    return problem is not None and problem.n_depots * len(problem.demand) <= MOST_PAIRS


def improve(model: SparseModel, values: np.ndarray, end: float, seed: int = KICK_SEED) -> np.ndarray | None:
    """A cheaper plan than ``values`` (the model's column values of a feasible plan) by the search of the module
    docstring before :func:`time.monotonic` reaches ``end``; None when it found none or does not apply.

    Returns
    -------
    numpy.ndarray or None
        The better plan's column values (flows, yes/no per lane, depots open exactly when they serve), or None.
    """
    if time.monotonic() >= end:
        return None
    problem = recognise(model, single_source=True)
    if problem is None or problem.n_depots * len(problem.demand) > MOST_PAIRS:
        return None
    plan = Assignment(problem, model.cost)
    if not len(plan.served) or not plan.start(values[problem.lane_column]):
        return None
    start_cost = float(model.cost @ values)
    _local_optimum(plan, end)
    if _candidates(model, plan, CANDIDATE_SHARE * (end - time.monotonic())):
        _local_optimum(plan, end)
    neighbours = _neighbours(plan)
    rng = np.random.default_rng(seed)
    size = FIRST_SIZE
    untried = rng.permutation(np.flatnonzero(plan.count > 0)).tolist()
    while time.monotonic() < end and untried:
        centre = untried.pop()
        near = neighbours[centre][:size // 2]
        far = np.setdiff1d(np.arange(problem.n_depots), np.concatenate([[centre], near]))
        drawn = rng.choice(far, min(size - 1 - len(near), len(far)), replace=False)
        free = np.unique(np.concatenate([[centre], near, drawn]))
        if _neighbourhood(model, plan, free, min(SUB_SECONDS, end - time.monotonic())):
            _local_optimum(plan, end)
            untried = rng.permutation(np.flatnonzero(plan.count > 0)).tolist()
        elif not untried and size < problem.n_depots:  # every open depot tried at this size: grow the neighbourhoods
            size += GROWTH
            untried = rng.permutation(np.flatnonzero(plan.count > 0)).tolist()
    value = problem.column_values(plan.lane_flow(), np.zeros(len(problem.demand)))
    cost = float(model.cost @ value)  # recomputed from the model's own costs
    return value if cost < start_cost - BETTER * max(abs(start_cost), 1.0) else None


def _local_optimum(plan: Assignment, end: float) -> None:
    """Shifts and swaps, then close and open moves, until none improves or ``end``."""
    plan.descend(end)
    while time.monotonic() < end and _depot_moves(plan, end):
        pass


def _depot_moves(plan: Assignment, end: float) -> bool:
    """The first close or open move that, after its descent, lowers the plan's cost (True): every depot to decide
    is closed or opened and priced, and the :data:`DEPOT_TRIES` cheapest such plans are descended from, cheapest
    first; False and the plan as it was when none helps or ``end`` came first."""
    before, total = plan.depot.copy(), plan.total
    priced = []
    for depot in np.flatnonzero(plan.decided).tolist():
        if plan.count[depot] > 0 and not plan.close(depot):
            continue
        if plan.count[depot] == 0 and depot not in plan.depot:
            plan.open(depot)
        priced.append((plan.total, depot, plan.depot.copy()))
        plan.set(before)
    priced.sort(key=lambda item: (item[0], item[1]))
    for _, _, depot in priced[:DEPOT_TRIES]:
        if time.monotonic() >= end:
            break
        plan.set(depot)
        plan.descend(end)
        if plan.total < total - BETTER * max(abs(total), 1.0):
            return True
    plan.set(before)
    return False


def _neighbours(plan: Assignment) -> np.ndarray:
    """Per depot, the depots in order of likeness (itself last): the mean over the customers both can serve of the
    difference of their costs per unit (near depots first, when costs grow with distance)."""
    per_unit = plan.cost / np.maximum(plan.demand, 1e-12)[None, :]
    finite = np.isfinite(per_unit)
    m = len(per_unit)
    apart = np.full((m, m), np.inf)
    for i in range(m):
        both = finite & finite[i]
        count = both.sum(axis=1)
        total = np.where(both, np.abs(np.where(both, per_unit, 0.0) - np.where(both, per_unit[i], 0.0)), 0.0).sum(1)
        apart[i] = np.where(count > 0, total / np.maximum(count, 1), np.inf)
        apart[i, i] = np.inf
    return np.argsort(apart, axis=1, kind="stable")


def _neighbourhood(model: SparseModel, plan: Assignment, depots: np.ndarray, seconds: float) -> bool:
    """Solve exactly which of ``depots`` open and which of them serves each of their customers, the rest of the
    plan fixed (:func:`_rebuild`); True when that lowered the plan's cost."""
    p = plan.problem
    freed = np.isin(plan.depot, depots) & (plan.demand > 0)
    return _rebuild(model, plan, np.flatnonzero(freed[p.lane_customer] & np.isin(p.lane_depot, depots)), depots,
                    seconds)


def _candidates(model: SparseModel, plan: Assignment, seconds: float) -> bool:
    """Solve the whole plan with each customer limited to its :data:`CANDIDATES` cheapest depots and its own, every
    depot free to open or close (:func:`_rebuild`); True when that lowered the plan's cost."""
    p = plan.problem
    rank = np.argsort(np.argsort(plan.cost, axis=0, kind="stable"), axis=0, kind="stable")
    lanes = np.flatnonzero((rank[p.lane_depot, p.lane_customer] < CANDIDATES)
                           | (p.lane_depot == plan.depot[p.lane_customer]))
    return _rebuild(model, plan, lanes, np.arange(p.n_depots), seconds)


def _rebuild(model: SparseModel, plan: Assignment, lanes: np.ndarray, depots: np.ndarray, seconds: float) -> bool:
    """The model itself with only ``lanes`` (lanes of the problem) and the open/close decisions of ``depots`` free,
    every other column fixed as the plan has it, solved by HiGHS (at most ``seconds``, the plan as its first
    incumbent). The plan takes HiGHS's when that is cheaper (True)."""
    from lanesolve.model.highs import solve_with_highs

    p = plan.problem
    values = p.column_values(plan.lane_flow(), np.zeros(len(p.demand)))
    lower, upper = values.copy(), values.copy()
    for columns in (p.lane_column[lanes], p.use_column[lanes]):
        lower[columns], upper[columns] = model.lower[columns], model.upper[columns]
    decided = p.open_column[depots]
    decided = decided[decided >= 0]
    lower[decided], upper[decided] = model.lower[decided], model.upper[decided]
    restricted = dataclasses.replace(model, lower=lower, upper=upper)
    answer = solve_with_highs(restricted, max(seconds, 0.05), 0.0, start=values)
    if not answer.status.has_plan:
        return False
    flow = np.where(answer.value[p.lane_column] > 0.5 * p.demand[p.lane_customer], p.demand[p.lane_customer], 0.0)
    before, total = plan.depot.copy(), plan.total
    if plan.start(flow) and plan.total < total - BETTER * max(abs(total), 1.0):
        return True
    plan.set(before)
    return False
