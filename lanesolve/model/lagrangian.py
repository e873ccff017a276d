"""Capacitated facility location by Lagrangian relaxation: a lower bound and plans for depots to open or close.

Which models
------------
:func:`recognise` accepts a model whose only whole-number decisions are depots to open or close, every lane running
from a depot straight to a customer, deliveries split freely (no single sourcing, minimum volumes, trips, fixed lane
charges, hubs, carrier terms, products or limits on open depots). That is the *capacitated facility location
problem* with split deliveries (OR-Library's cap and capa/capb/capc sets are of this kind). In the model's words:

.. math::

    \\min \\sum_l c_l x_l + \\sum_{i \\in O} f_i w_i + \\sum_{j \\in P} p_j z_j
    \\quad\\text{s.t.}\\quad \\sum_{l \\in \\delta^-(j)} x_l + z_j = q_j \\;(j \\in C), \\quad
    \\sum_{l \\in \\delta^+(i)} x_l \\le s_i w_i \\;(i \\in D), \\quad 0 \\le x_l \\le u_l, \\; w \\in \\{0, 1\\}

with :math:`w_i = 1` fixed for a depot marked ``open`` (its fixed charge is the model's constant), :math:`z_j` only
for customers with an unmet penalty, :math:`c_l` the lane's cost per unit with the origin's handling.

Method
------
Lagrangian relaxation of the customer rows with subgradient optimisation, as for this problem in Beasley,
"Lagrangean heuristics for location problems", European Journal of Operational Research 65 (1993) 383-399
(citation recalled from memory). With a multiplier :math:`\\lambda_j` per unit delivered to customer :math:`j` the
relaxation falls apart by depot, once two valid rows are added to it: :math:`x_l \\le \\min(u_l, q_j)` (no lane
delivers more than its customer takes) and the aggregate capacity row
:math:`\\sum_i \\bar s_i w_i \\ge \\sum_{j \\notin P} q_j` (open depots can ship every hard demand;
:math:`\\bar s_i = \\min(s_i, \\sum_{l \\in \\delta^+(i)} \\min(u_l, q_j))`, what depot :math:`i` can ship at all):

1. per depot, a continuous knapsack: fill the capacity :math:`s_i` with the lanes of negative reduced cost
   :math:`c_l - \\lambda_j`, most negative first; :math:`v_i` = the depot's fixed charge plus that (negative) sum;
2. per customer with a penalty, short by all of :math:`q_j` when :math:`p_j < \\lambda_j`;
3. which depots open: every depot with :math:`v_i < 0` (and every depot marked open), then the cheapest set of the
   others that completes the aggregate capacity, a 0-1 covering knapsack solved exactly (:func:`cover_knapsack`).

Its optimum :math:`L(\\lambda) = \\sum_j \\lambda_j q_j + \\dots` is a lower bound on every plan's cost (for any
:math:`\\lambda`); the subgradient step (Held, Wolfe & Crowder 1974; the step rule of Beasley's papers)
:math:`\\lambda \\leftarrow \\max(0, \\lambda + \\pi (U - L) g / \\lVert g \\rVert^2)`, with :math:`g_j` the units
customer :math:`j` is under-served in the relaxed solution, :math:`U` the best plan's cost and :math:`\\pi` halved
after :data:`PATIENCE` steps without the bound rising by :data:`PROGRESS`, raises it. Each step's set of open
depots is a candidate plan: its flows are a transportation problem, solved exactly as a min-cost flow
(:mod:`lanesolve.model.depot_search`), which also runs the local search on the open set afterwards.

The result is ``feasible`` with its gap against the best Lagrangian bound, ``optimal`` only when the plan's cost
meets the bound within the gap asked for.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from lanesolve.model.arrays import Answer, SparseModel
from lanesolve.model.depot_search import DepotSearch
from lanesolve.model.result import SolveStatus

#: Column and row families a facility-location model may have (prefixes of :mod:`lanesolve.model.formulation`).
COLUMN_FAMILIES = frozenset({"flow_", "unmet_", "open_depot_"})
ROW_FAMILIES = frozenset({"supply_", "balance_", "open_out_depot_", "open_link_depot_"})
#: What single sourcing adds: a yes/no per lane (``use_``), its ``link_`` row and the customer's ``single_source_`` row.
SINGLE_SOURCE_COLUMNS, SINGLE_SOURCE_ROWS = frozenset({"use_"}), frozenset({"link_", "single_source_"})
#: Subgradient steps without progress (:data:`PROGRESS`) before the step factor is halved, the factor it starts at
#: and the factor below which the bound is taken as converged (common practice for this method, values our choice
#: after trials on capa/capb/capc: the bound then settles in 650-1,000 steps).
PATIENCE, FIRST_FACTOR, LAST_FACTOR = 30, 2.0, 1e-5
#: A step counts as progress when it raises the best bound by more than this share of it (common practice: a
#: bound creeping up by float-sized amounts would otherwise keep the step factor from ever falling).
PROGRESS = 1e-6
#: Most states the covering knapsack's dominance table may hold before its LP bound is used instead.
MAX_STATES = 200_000


@dataclass
class FacilityProblem:
    """A facility-location model as plain arrays (depots ``0..m-1``, customers ``0..n-1``).

    Attributes
    ----------
    lane_column, lane_depot, lane_customer : numpy.ndarray of int
        Per lane that can carry flow: its column in the model, its depot and its customer.
    lane_cost, lane_upper : numpy.ndarray
        Cost per unit (rate and handling) and most units, ``min(capacity, demand)``.
    supply, reach, fixed : numpy.ndarray
        Per depot: supply :math:`s_i`, what it can ship at all :math:`\\bar s_i`, fixed charge (0 for a depot
        marked open: the model's constant carries it).
    open_column : numpy.ndarray of int
        Per depot: its open/close column, -1 for a depot marked open.
    demand, penalty : numpy.ndarray
        Per customer: demand, and unmet penalty per unit (``inf`` for a hard demand).
    unmet_column : numpy.ndarray of int
        Per customer: its units-short column, -1 for a hard demand.
    n_columns : int
        Columns of the model.
    use_column : numpy.ndarray of int or None
        Per lane, its yes/no column in a single-source model (``recognise(model, single_source=True)``), else None.
    """

    lane_column: np.ndarray
    lane_depot: np.ndarray
    lane_customer: np.ndarray
    lane_cost: np.ndarray
    lane_upper: np.ndarray
    supply: np.ndarray
    reach: np.ndarray
    fixed: np.ndarray
    open_column: np.ndarray
    demand: np.ndarray
    penalty: np.ndarray
    unmet_column: np.ndarray
    n_columns: int
    use_column: np.ndarray | None = None

    @property
    def n_depots(self) -> int:
        return len(self.supply)

    @property
    def hard_demand(self) -> float:
        return float(self.demand[np.isinf(self.penalty)].sum())

    def column_values(self, lane_flow: np.ndarray, unmet: np.ndarray) -> np.ndarray:
        """The model's column values of a plan: flows per lane, units short per customer, a decided depot open
        exactly when it ships."""
        value = np.zeros(self.n_columns)
        value[self.lane_column] = lane_flow
        soft = self.unmet_column >= 0
        value[self.unmet_column[soft]] = unmet[soft]
        ships = np.bincount(self.lane_depot, lane_flow, minlength=self.n_depots) > 0
        decided = self.open_column >= 0
        value[self.open_column[decided]] = ships[decided].astype(float)
        if self.use_column is not None:
            value[self.use_column] = (lane_flow > 0).astype(float)
        return value


def _one_entry_per_column(model: SparseModel, prefixes: tuple[str, ...], n_flow: int) -> tuple[np.ndarray, list]:
    """Row number (within the rows of families ``prefixes``, taken in that order) of each flow column's single +1
    entry there, and the rows' (prefix, position) pairs; None for the first when any flow column has another
    pattern (a lane leaving a customer, say)."""
    rows = [(prefix, position) for prefix in prefixes if prefix in model.row_blocks
            for position in range(model.row_blocks[prefix].start, model.row_blocks[prefix].stop)]
    if not rows:
        return None, rows
    part = model.matrix[[position for _, position in rows], :n_flow].tocoo()
    if len(part.col) != n_flow or not np.array_equal(np.sort(part.col), np.arange(n_flow)) \
            or not np.all(part.data == 1.0):
        return None, rows
    row = np.empty(n_flow, dtype=np.int64)
    row[part.col] = part.row
    return row, rows


def _depots(model: SparseModel, n_flow: int):
    """Each flow column's depot, and per depot its supply and open/close column (-1 for a depot marked open), or
    None when the lanes do not each leave one depot.

    A depot marked open has a ``supply_`` row (net outflow <= supply); a depot to decide has none, its
    ``open_out_depot_`` row (net outflow <= supply * open) states both, and its supply is minus its open column's
    coefficient there. A depot to decide with no lane stays closed: it is left out.
    """
    lane_row, rows = _one_entry_per_column(model, ("supply_", "open_out_depot_"), n_flow)
    if lane_row is None:
        return None
    opened = model.columns("open_depot_")
    column_of = dict(zip(model.ids("open_depot_").tolist(), range(opened.start, opened.stop)))
    links = model.matrix[[position for _, position in rows], opened.start:opened.stop].tocoo()
    link_value = np.zeros(len(rows))
    link_column = np.full(len(rows), -1, dtype=np.int64)
    link_value[links.row] = -links.data
    link_column[links.row] = links.col + opened.start
    supply = np.empty(len(rows))
    open_column = np.full(len(rows), -1, dtype=np.int64)
    for k, (prefix, position) in enumerate(rows):
        if prefix == "supply_":
            supply[k] = model.row_upper[position]
        else:
            column = column_of.get(int(model.row_blocks[prefix].ids[position - model.row_blocks[prefix].start]), -2)
            if column < 0 or model.row_upper[position] != 0 or link_column[k] not in (column, -1):
                return None  # not the row the formulation writes: leave the model to the engines
            supply[k], open_column[k] = link_value[k], column  # no entry: a supply of 0 (zeros are not stored)
    kept = np.bincount(lane_row, minlength=len(rows)) > 0
    kept |= open_column < 0  # a depot marked open keeps its (lane-less) row as it did
    renumber = np.cumsum(kept) - 1
    return renumber[lane_row], supply[kept].astype(float), open_column[kept]


def _whole_deliveries(model: SparseModel, n_flow: int, lane_demand: np.ndarray) -> np.ndarray | None:
    """Per flow column its ``use_`` column, -1 where its ``link_`` row is not ``x = q y`` with ``q`` the customer's
    demand (the lane then never serves the customer alone); None when a flow column has no ``use_`` column."""
    block = model.row_blocks.get("link_")
    if block is None or block.stop - block.start != n_flow:
        return None
    part = model.matrix[block.start:block.stop].tocoo()
    flow, used = part.col < n_flow, model.columns("use_")
    lane = np.full(n_flow, -1, dtype=np.int64)
    lane[part.row[flow]] = part.col[flow]
    if (lane < 0).any() or len(np.unique(lane)) != n_flow:
        return None
    column = np.full(n_flow, -1, dtype=np.int64)
    coefficient = np.zeros(n_flow)
    of_use = (part.col >= used.start) & (part.col < used.stop)
    column[lane[part.row[of_use]]] = part.col[of_use]
    coefficient[lane[part.row[of_use]]] = -part.data[of_use]
    if (column < 0).any():
        return None
    equal = (model.row_lower[block.start:block.stop] == 0) & (model.row_upper[block.start:block.stop] == 0)
    whole = np.zeros(n_flow, dtype=bool)
    whole[lane] = equal
    return np.where(whole & (coefficient == lane_demand), column, -1)


def recognise(model: SparseModel, single_source: bool = False) -> FacilityProblem | None:
    """The model as a :class:`FacilityProblem`, or None when it is not one (module docstring, *Which models*).

    With ``single_source`` it recognises instead the single-source model: every lane has a yes/no (``use_``) and
    every customer a hard demand served whole by one lane (a lane whose ``link_`` row cannot deliver the whole
    demand is left out of the problem), no unmet penalty; the problem's ``use_column`` holds the yes/no columns.
    This is the local search's model (:mod:`lanesolve.model.assign_search`), not the Lagrangian method's.

    Judged from the model alone: its column and row families, the whole-number columns (the open/close columns and
    nothing else), and each lane's entries (one +1 in a depot's ``supply_`` or ``open_out_depot_`` row, one +1 in a
    customer's balance row).
    """
    if model.product_columns is not None or len(getattr(model.lane_cost_terms, "columns", ())):
        return None
    columns = COLUMN_FAMILIES | SINGLE_SOURCE_COLUMNS if single_source else COLUMN_FAMILIES
    if not set(model.column_blocks) <= columns or "open_depot_" not in model.column_blocks:
        return None
    if not set(model.row_blocks) <= (ROW_FAMILIES | SINGLE_SOURCE_ROWS if single_source else ROW_FAMILIES):
        return None
    if single_source and (model.columns("unmet_").stop > model.columns("unmet_").start or "use_" not in
                          model.column_blocks):
        return None
    opened = model.columns("open_depot_")
    integer = np.zeros(model.n_columns, dtype=bool)
    integer[opened] = True
    integer[model.columns("use_")] = True
    if not np.array_equal(model.integer, integer):
        return None
    flows = model.columns("flow_")
    n_flow = flows.stop
    if flows.start != 0 or n_flow == 0:
        return None
    depots = _depots(model, n_flow)
    customer_row, _ = _one_entry_per_column(model, ("balance_",), n_flow)
    if depots is None or customer_row is None:
        return None
    depot_row, supply, open_column = depots
    balance_rows = model.row_blocks["balance_"]
    demand = model.row_upper[balance_rows.start:balance_rows.stop]
    if not np.array_equal(model.row_lower[balance_rows.start:balance_rows.stop], demand):
        return None
    cost = model.cost
    n_customers = len(demand)

    penalty = np.full(n_customers, math.inf)
    unmet_column = np.full(n_customers, -1, dtype=np.int64)
    short = model.columns("unmet_")
    if short.stop > short.start:
        customer_of = {int(c): k for k, c in enumerate(balance_rows.ids.tolist())}
        at = np.array([customer_of[int(c)] for c in model.ids("unmet_").tolist()], dtype=np.int64)
        unmet_column[at] = np.arange(short.start, short.stop)
        penalty[at] = cost[short]
    fixed = np.where(open_column >= 0, cost[np.maximum(open_column, 0)], 0.0)

    upper = np.minimum(model.upper[:n_flow], demand[customer_row])
    use_column = None
    if single_source:
        use_column = _whole_deliveries(model, n_flow, demand[customer_row])
        if use_column is None:
            return None
        upper = np.where(use_column >= 0, upper, 0.0)
    usable = upper > 0
    lane_depot = depot_row[usable]
    reach = np.minimum(supply, np.bincount(lane_depot, upper[usable], minlength=len(supply)))
    return FacilityProblem(lane_column=np.flatnonzero(usable), lane_depot=lane_depot,
                           lane_customer=customer_row[usable], lane_cost=cost[:n_flow][usable],
                           lane_upper=upper[usable], supply=supply, reach=reach, fixed=fixed, open_column=open_column,
                           demand=demand.astype(float), penalty=penalty, unmet_column=unmet_column,
                           n_columns=model.n_columns, use_column=None if use_column is None else use_column[usable])


def cover_knapsack(value: np.ndarray, weight: np.ndarray, need: float,
                   max_states: int = MAX_STATES) -> tuple[float, np.ndarray, bool]:
    """The cheapest items whose weights reach ``need``: minimise ``value @ y`` subject to ``weight @ y >= need``,
    ``y`` in {0, 1}.

    Solved exactly by dynamic programming over non-dominated (weight, value) states (the dominance rule of
    Nemhauser & Ullmann, "Discrete dynamic programming and capital allocation", Management Science 15, 1969),
    weights above ``need`` counted as ``need``. Items of equal weight are taken as one stage (of those, only the
    cheapest few are ever worth taking), so depots of one size cost a single stage. Should the table outgrow
    ``max_states``, the LP relaxation (items by value per weight, the last one fractional) gives the value instead,
    a valid lower bound, with the greedy cover as ``y``.

    Parameters
    ----------
    value, weight : numpy.ndarray
        Per item; values non-negative, weights positive.
    need : float
        Weight to reach (0 or less: nothing is needed).

    Returns
    -------
    (float, numpy.ndarray of bool, bool)
        The optimum (``inf`` when all items together fall short), the chosen items, and whether the optimum is
        exact (False: the LP bound).

    Examples
    --------
    >>> cost, chosen, exact = cover_knapsack(np.array([5.0, 4.0, 3.0]), np.array([4.0, 3.0, 2.0]), 5.0)
    >>> cost, chosen.tolist(), exact
    (7.0, [False, True, True], True)
    """
    count = len(value)
    chosen = np.zeros(count, dtype=bool)
    if need <= 0:
        return 0.0, chosen, True
    if weight.sum() < need:
        return math.inf, chosen, True
    reached, paid = np.zeros(1), np.zeros(1)
    stages = []
    for size in np.unique(weight).tolist():
        items = np.flatnonzero(weight == size)
        items = items[np.argsort(value[items], kind="stable")]
        items = items[:int(math.ceil(need / size))]  # more than this many of one size never helps
        prefix = np.concatenate([[0.0], np.cumsum(value[items])])
        taken = np.arange(len(prefix))
        weights = np.minimum(reached[:, None] + size * taken[None, :], need).ravel()
        values = (paid[:, None] + prefix[None, :]).ravel()
        parent = np.repeat(np.arange(len(reached)), len(prefix))
        took = np.tile(taken, len(reached))
        rank = np.lexsort((values, -weights))  # heaviest first, then cheapest
        weights, values, parent, took = weights[rank], values[rank], parent[rank], took[rank]
        keep = np.ones(len(values), dtype=bool)
        keep[1:] = values[1:] < np.minimum.accumulate(values)[:-1]  # cheaper than every heavier state
        reached, paid = weights[keep], values[keep]
        stages.append((items, parent[keep], took[keep]))
        if len(reached) > max_states:
            return _lp_cover(value, weight, need)
    state = 0  # the heaviest state reaches `need` (all items together do), and it is the cheapest that does
    best = float(paid[state])
    for items, parent, took in reversed(stages):
        chosen[items[:took[state]]] = True
        state = parent[state]
    return best, chosen, True


def _lp_cover(value: np.ndarray, weight: np.ndarray, need: float) -> tuple[float, np.ndarray, bool]:
    """LP relaxation of :func:`cover_knapsack` (its bound) with the greedy cover as the choice."""
    order = np.argsort(value / weight, kind="stable")
    chosen = np.zeros(len(value), dtype=bool)
    reached = np.concatenate([[0.0], np.cumsum(weight[order])])
    last = int(np.searchsorted(reached, need, side="left"))  # items order[:last] reach need
    chosen[order[:last]] = True
    fraction = (need - reached[last - 1]) / weight[order[last - 1]]
    bound = float(value[order[:last - 1]].sum() + fraction * value[order[last - 1]])
    return bound, chosen, False


@dataclass
class Relaxed:
    """One solution of the Lagrangian relaxation: its bound, the depots it opens, and the subgradient."""

    bound: float
    opened: np.ndarray
    depot_value: np.ndarray
    shortfall: np.ndarray
    exact: bool


def relax(problem: FacilityProblem, multiplier: np.ndarray) -> Relaxed | None:
    """Solve the Lagrangian relaxation at ``multiplier`` (module docstring, steps 1-3); None when the depots
    together cannot ship the hard demand."""
    p = problem
    m = p.n_depots
    reduced = p.lane_cost - multiplier[p.lane_customer]
    attractive = np.flatnonzero(reduced < 0)
    order = attractive[np.lexsort((reduced[attractive], p.lane_depot[attractive]))]
    depot, upper = p.lane_depot[order], p.lane_upper[order]
    filled = np.cumsum(upper)
    first = np.ones(len(order), dtype=bool)
    first[1:] = depot[1:] != depot[:-1]
    before_group = np.maximum.accumulate(np.where(first, filled - upper, 0.0)) if len(order) else filled
    take = np.clip(p.supply[depot] - (filled - upper - before_group), 0.0, upper)
    value = p.fixed + np.bincount(depot, reduced[order] * take, minlength=m)

    forced = p.open_column < 0
    opened = forced | (value < 0)
    decided = np.flatnonzero(~opened)
    need = p.hard_demand - float(p.reach[opened].sum())
    cover, chosen, exact = cover_knapsack(value[decided], np.maximum(p.reach[decided], 1e-12), need)
    if math.isinf(cover):
        return None
    opened[decided[chosen]] = True

    soft_short = multiplier > p.penalty  # short by all of q_j when the penalty is cheaper than the multiplier
    bound = (float((multiplier * p.demand).sum()) + float(((p.penalty - multiplier) * p.demand)[soft_short].sum())
             + float(value[forced | (value < 0)].sum()) + cover)
    served = np.bincount(p.lane_customer[order], np.where(opened[depot], take, 0.0), minlength=len(p.demand))
    shortfall = p.demand - served - np.where(soft_short, p.demand, 0.0)
    return Relaxed(bound, opened, value, shortfall, exact)


def first_multipliers(problem: FacilityProblem) -> np.ndarray:
    """Starting multipliers: per customer the cheapest cost of a unit by any lane with its depot's fixed charge
    spread over its supply (the weak relaxation's price of a unit), capped by the unmet penalty."""
    p = problem
    share = p.lane_cost + p.fixed[p.lane_depot] / np.maximum(p.supply[p.lane_depot], 1e-12)
    price = np.full(len(p.demand), np.inf)
    np.minimum.at(price, p.lane_customer, share)
    price = np.minimum(price, p.penalty)
    return np.where(np.isfinite(price), price, 0.0)


def subgradient(problem: FacilityProblem, end: float, plan_cost, tolerance: float = 0.0):
    """Raise the Lagrangian bound by subgradient steps until :data:`LAST_FACTOR`, the plan meets the bound within
    ``tolerance`` (relative), or ``end`` (a :func:`time.monotonic` time).

    ``plan_cost(opened)`` prices each step's open set as a plan (``inf`` when it has none); the cheapest so far is
    the :math:`U` of the step rule.

    Returns
    -------
    (float, numpy.ndarray, numpy.ndarray, bool, int)
        The best bound (``-inf`` when no step finished), its multipliers, its depot values :math:`v_i` (the
        local search's order of preference), whether every knapsack on the way was exact, and the steps taken.
        A bound from an inexact knapsack is still valid (the LP bound).
    """
    multiplier = first_multipliers(problem)
    best, best_multiplier, best_value = -math.inf, multiplier, problem.fixed.copy()
    factor, stale, steps, exact, upper = FIRST_FACTOR, 0, 0, True, math.inf
    while factor >= LAST_FACTOR and (steps == 0 or time.monotonic() < end):  # one step at least
        relaxed = relax(problem, multiplier)
        if relaxed is None:
            break
        steps += 1
        exact &= relaxed.exact
        upper = min(upper, plan_cost(relaxed.opened))
        if relaxed.bound > best + PROGRESS * abs(relaxed.bound):
            stale = 0
        else:
            stale += 1
            if stale >= PATIENCE:
                factor, stale = factor / 2, 0
        if relaxed.bound > best:
            best, best_multiplier, best_value = relaxed.bound, multiplier, relaxed.depot_value
        if math.isfinite(upper) and upper - best <= tolerance * abs(upper):
            break
        norm = float((relaxed.shortfall ** 2).sum())
        if norm <= 0:  # the relaxed solution serves every customer exactly: the bound is the optimum of a plan
            break
        target = upper if math.isfinite(upper) else relaxed.bound + 0.05 * abs(relaxed.bound) + 1.0
        multiplier = np.maximum(0.0, multiplier + factor * (target - relaxed.bound) / norm * relaxed.shortfall)
    return best, best_multiplier, best_value, exact, steps


def solve_facility(model: SparseModel, problem: FacilityProblem, seconds: float,
                   gap: float | None = None) -> Answer | None:
    """A plan for a facility-location model in about ``seconds``: the Lagrangian bound and heuristic, then a local
    search on the open depots (module docstring). None when no plan was found.

    Parameters
    ----------
    model : SparseModel
        The model :func:`recognise` accepted.
    problem : FacilityProblem
        What :func:`recognise` made of it.
    seconds : float
        Time to spend at most; the search stops earlier when no move improves the plan.
    gap : float, optional
        Relative gap at which the plan counts as proven (default 1e-4, HiGHS's default ``mip_rel_gap``); 0 asks for
        the plan to meet the bound within float noise.

    Returns
    -------
    Answer or None
        Status ``optimal`` when the plan's cost is within ``gap`` of the bound, else ``feasible``; ``bound`` the
        best Lagrangian bound (without the model's constant); ``solver`` naming the method and its figures.
    """
    start = time.monotonic()
    end = start + max(seconds, 0.0)
    tolerance = 1e-4 if gap is None else max(gap, 1e-9)
    search = DepotSearch(problem)
    # Every depot open is the most any plan can use: without a plan then, no open set has one, and the engines get
    # the time (a relaxation of a model without a plan would raise its bound without end).
    if math.isinf(search.price(problem.reach > 0)):
        return None
    # Half the time at most for the bound (it settles in seconds on 100 x 1,000 sets), the rest for the search.
    bound, _, depot_value, exact, steps = subgradient(problem, start + (end - start) / 2, search.price, tolerance)
    if search.best is None:
        return None
    if not (math.isfinite(bound) and search.best.cost - bound <= tolerance * abs(search.best.cost)):
        search.improve(depot_value, end)
    plan = search.best
    value = problem.column_values(plan.lane_flow, plan.unmet)
    cost = float((model.cost * value).sum())
    bound = min(bound, cost) if math.isfinite(bound) else None
    proven = bound is not None and cost - bound <= tolerance * max(abs(cost), 1e-9)
    answer = Answer(SolveStatus.OPTIMAL if proven else SolveStatus.FEASIBLE, value, np.zeros(model.n_rows),
                    np.zeros(model.n_columns), bound=bound,
                    gap=None if bound is None else (cost - bound) / max(abs(cost), 1e-9),
                    solver=(f"Lagrangian relaxation ({steps} subgradient steps"
                            f"{'' if exact else ', some knapsack bounds by LP'}) and local search over the open "
                            f"depots ({search.evaluations} open sets priced by {search.engine})"),
                    seconds=time.monotonic() - start)
    return answer
