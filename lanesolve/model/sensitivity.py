"""Sensitivity of an optimal plan, in plain words: what one more unit of demand costs, what one more unit of a
binding capacity is worth, and how much cheaper an unused lane must be before the plan would use it.

Figures (column ``figure`` of :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`)
-----------------------------------------------------------------------------
``marginal_cost``     per customer: the dual of its ``balance_<n>`` row, the cost of delivering one more unit;
``supply_value``      per depot whose supply binds: minus the dual of ``supply_<n>``, the saving from one more unit;
``hub_capacity_value``  per hub whose capacity binds: minus the dual of ``hub_cap_<n>``;
``lane_capacity_value`` per lane at its capacity: minus its reduced cost (the capacity is a bound, not a row);
``trip_capacity_value`` per lane whose whole trips are full (MIP plans): minus the dual of ``trip_<n>``;
``reduced_cost``      per unused lane: its reduced cost, how much its cost per unit must fall before using it pays.

The duals are the solver's (PuLP's ``constraint.pi`` and ``variable.dj``, read from CBC's solution). For a plan with
yes/no or trip decisions they come from the LP with those decisions fixed at the plan (column ``basis`` says
``"LP with the plan's yes/no and trip decisions fixed"``): valid for small changes that keep the decisions, and
silent on whether a decision would flip. An unused lane that is shut by a yes/no decision gets no reduced cost.

Degenerate plans
----------------
Duals are unique when the optimal plan is primal non-degenerate; at a degenerate plan (a basic flow sitting at a
bound, e.g. a lane with flow exactly 0 or at capacity that the basis needs) the solver's duals are one choice among
many and printing one would mislead. So each dual is checked: it counts as unique only if every optimal dual
solution must share it. Complementary slackness gives the test: a variable strictly inside its bounds has reduced
cost 0 in every optimal dual, and a row with slack has dual 0 in every optimal dual; those equations are solved by
propagation (an equation with one unknown dual fixes it). A dual fixed that way is unique; any other is reported as
``unique = False`` with the text "not unique" and no figure. The test is sufficient, not necessary: a dual it cannot
fix may still be unique, so "not unique" means "not determined by this plan" (said so in the text).

Speed
-----
Everything is computed on arrays of the solved LP (:class:`SolvedLp`): row activities by one weighted count over
the nonzeros, bound and slack tests elementwise, the sentences by column-wise string concatenation. The
propagation runs in Python but only over columns strictly inside their bounds, which in a basic solution are basic:
at most one per row. A pure LP solved by CBC on the array path (:func:`lanesolve.model.solve.solve`) hands its arrays and
CBC's duals over directly (:func:`analyse_arrays`); a PuLP problem is turned into the same arrays first.
"""

from __future__ import annotations

import math
import warnings
from collections import deque
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import pulp

if TYPE_CHECKING:  # the PuLP model builder is gone (solve() builds one sparse model); names kept for annotations
    from lanesolve.model.formulation import LaneArrays, LaneModel, build_model
from lanesolve.model.network import Network
from lanesolve.model.result import SENSITIVITY_COLUMNS, empty_frame

#: Primal values within this of a bound count as at the bound (relative to max(1, |bound|)).
TOLERANCE = 1e-7
#: How many rows of each figure the HTML summary should show (the sheet and JSON carry all).
TOP_FEW = 5
#: Values smaller than this in magnitude are reported as 0 (solver noise).
NOISE = 1e-9

LP_BASIS = "LP"
FIXED_BASIS = "LP with the plan's yes/no and trip decisions fixed"

_NOT_UNIQUE = "an amount that is not unique"
_DEGENERATE = " (the plan is degenerate here: more than one figure fits it, so none is shown)."


@dataclass
class SolvedLp:
    """A solved LP as arrays: what the figures and the uniqueness test read.

    Attributes
    ----------
    row_names : list of str
    sense : numpy.ndarray
        ``"L"``, ``"G"`` or ``"E"`` per row.
    rhs, dual : numpy.ndarray
        Per row; ``dual`` is NaN where the solver gave none.
    lower, upper, value, reduced_cost : numpy.ndarray
        Per column; infinite bounds for none, ``reduced_cost`` NaN where the solver gave none.
    start, row_of, coefficient : numpy.ndarray
        The matrix column-wise, as in :class:`lanesolve.model.formulation.LaneArrays`.
    """

    row_names: list[str]
    sense: np.ndarray
    rhs: np.ndarray
    dual: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    value: np.ndarray
    reduced_cost: np.ndarray
    start: np.ndarray
    row_of: np.ndarray
    coefficient: np.ndarray

    @property
    def column_of(self) -> np.ndarray:
        return np.repeat(np.arange(len(self.value)), np.diff(self.start))

    def activity(self) -> np.ndarray:
        """Left-hand side of every row at the plan."""
        return np.bincount(self.row_of, weights=self.coefficient * self.value[self.column_of],
                           minlength=len(self.rhs))


def _close(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Elementwise: ``a`` within :data:`TOLERANCE` of a finite ``b`` (relative to max(1, |b|))."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.isfinite(b) & (np.abs(a - b) <= TOLERANCE * np.maximum(1.0, np.abs(b)))


def _rows(problem: pulp.LpProblem) -> dict[str, pulp.LpConstraint]:
    """Row name -> constraint, without PuLP 3's deprecated dict view (``constraints()`` is a list from PuLP 3.3)."""
    rows = problem.constraints
    listed = rows() if callable(rows) else list(rows.values())
    return {row.name: row for row in listed}


def solved_from_problem(problem: pulp.LpProblem) -> tuple[SolvedLp, list[str]]:
    """The :class:`SolvedLp` of a solved PuLP problem, and its column (variable) names."""
    variables = problem.variables()
    position = {var.name: j for j, var in enumerate(variables)}
    rows = _rows(problem)
    entries = [(position[var.name], i, coef) for i, row in enumerate(rows.values()) for var, coef in row.items()]
    entries.sort()
    columns = np.array([e[0] for e in entries], dtype=np.int64)
    sense_code = {pulp.LpConstraintLE: "L", pulp.LpConstraintGE: "G", pulp.LpConstraintEQ: "E"}

    def number(x, default):
        return default if x is None else float(x)

    solved = SolvedLp(
        row_names=list(rows),
        sense=np.array([sense_code[row.sense] for row in rows.values()], dtype="<U1"),
        rhs=np.array([-row.constant for row in rows.values()], dtype=float),
        dual=np.array([number(row.pi, math.nan) for row in rows.values()], dtype=float),
        lower=np.array([number(var.lowBound, -math.inf) for var in variables], dtype=float),
        upper=np.array([number(var.upBound, math.inf) for var in variables], dtype=float),
        value=np.array([number(var.varValue, 0.0) for var in variables], dtype=float),
        reduced_cost=np.array([number(var.dj, math.nan) for var in variables], dtype=float),
        start=np.searchsorted(columns, np.arange(len(variables) + 1)).astype(np.int64),
        row_of=np.array([e[1] for e in entries], dtype=np.int64),
        coefficient=np.array([e[2] for e in entries], dtype=float),
    )
    return solved, [var.name for var in variables]


def solved_from_arrays(arrays: LaneArrays, answer) -> SolvedLp:
    """The :class:`SolvedLp` of ``arrays`` with CBC's answer (a :class:`lanesolve.model.solve.LpAnswer`), values
    noise-cleaned as the plan reports them."""
    value = answer.value.copy()
    value[np.abs(value) < NOISE] = 0.0
    return SolvedLp(arrays.row_names, arrays.sense, arrays.rhs, answer.dual, np.zeros(arrays.n_columns),
                    arrays.upper, value, answer.reduced_cost, arrays.start, arrays.row_of, arrays.coefficient)


def _fixed_lp(network: Network, model: LaneModel) -> LaneModel:
    """The model rebuilt with every integer variable fixed at its plan value and made continuous."""
    lp = build_model(network)
    plan = {var.name: var.varValue for var in model.problem.variables() if var.cat != pulp.LpContinuous}
    for var in lp.problem.variables():
        if var.name in plan:
            value = float(round(plan[var.name] or 0.0))
            var.lowBound = var.upBound = value
            var.cat = pulp.LpContinuous
    return lp


def _solve_lp(problem: pulp.LpProblem) -> bool:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # see solve._make_solver
        problem.solve(pulp.PULP_CBC_CMD(mip=False, msg=False))
    return problem.sol_status == pulp.LpSolutionOptimal


def determined(solved: SolvedLp) -> np.ndarray:
    """Per row: is its dual the same in every optimal dual solution? (the test of the module docstring)"""
    n_rows = len(solved.rhs)
    activity = solved.activity()
    known = (solved.sense != "E") & ~_close(activity, solved.rhs)
    value = solved.value
    interior = ((solved.lower < solved.upper) & ~_close(value, solved.lower) & ~_close(value, solved.upper)
                & (np.diff(solved.start) > 0))
    equations = np.flatnonzero(interior)
    if len(equations) == 0:
        return known
    # The rows of each interior column, and for each row the interior columns (equations) it appears in.
    rows_of = [solved.row_of[solved.start[j]:solved.start[j + 1]].tolist() for j in equations.tolist()]
    known_list = known.tolist()
    unknown_count = [sum(not known_list[r] for r in rows) for rows in rows_of]
    by_row: dict[int, list[int]] = {}
    for position, rows in enumerate(rows_of):
        for r in rows:
            by_row.setdefault(r, []).append(position)
    queue = deque(i for i, n in enumerate(unknown_count) if n == 1)
    while queue:
        position = queue.popleft()
        if unknown_count[position] != 1:
            continue
        row = next(r for r in rows_of[position] if not known_list[r])
        known_list[row] = True
        for other in by_row.get(row, []):
            unknown_count[other] -= 1
            if unknown_count[other] == 1:
                queue.append(other)
    return np.fromiter(known_list, dtype=bool, count=n_rows)


def determined_duals(problem: pulp.LpProblem) -> set[str]:
    """Names of the rows whose dual is the same in every optimal dual solution (see the module docstring).

    Parameters
    ----------
    problem : pulp.LpProblem
        Solved to optimality (variable values set).

    Returns
    -------
    set of str
        Row names whose dual is fixed by complementary slackness with the plan.
    """
    solved, _ = solved_from_problem(problem)
    return {name for name, sure in zip(solved.row_names, determined(solved).tolist()) if sure}


def _value_text(values: np.ndarray, money: str) -> list[str]:
    return [f"{v:,.4g}{money}" for v in values.tolist()]


def _figure_frame(figure: str, items, values, unique, basis: str, prefix, suffix, money: str) -> pd.DataFrame:
    """Rows of one figure: ``prefix + amount + suffix`` per item, the amount hidden where not unique."""
    values = np.asarray(values, dtype=float)
    unique = np.asarray(unique, dtype=bool)
    with np.errstate(invalid="ignore"):
        shown = np.where(unique, np.where(np.abs(values) < NOISE, 0.0, values), math.nan)
    prefix, suffix = (pd.Series([part] * len(values), dtype=object) if isinstance(part, str)
                      else pd.Series(part, dtype=object).reset_index(drop=True) for part in (prefix, suffix))
    amount = pd.Series(_value_text(shown, money), dtype=object)
    text = (prefix + amount + suffix).where(unique, prefix + _NOT_UNIQUE + suffix.str[:-1] + _DEGENERATE)
    return pd.DataFrame({"figure": figure, "item": pd.Series(items, dtype=object).reset_index(drop=True),
                         "value": shown, "unique": unique, "basis": basis, "text": text.to_numpy()},
                        columns=SENSITIVITY_COLUMNS)


def _lane_labels(lanes: pd.DataFrame) -> pd.Series:
    mode = lanes["mode"].astype(str)
    return (lanes["origin"].astype(str) + " -> " + lanes["destination"].astype(str)
            + (" (" + mode + ")").where(mode != "", "")).reset_index(drop=True)


def figures(network: Network, solved: SolvedLp, flow_column: np.ndarray, shut: np.ndarray, basis: str,
            trip_index: list[int] = ()) -> pd.DataFrame:
    """The sensitivity figures of the module docstring from a solved LP.

    Parameters
    ----------
    network : Network
    solved : SolvedLp
        The LP at its optimum; its rows are named as in :mod:`lanesolve.model.formulation`.
    flow_column : numpy.ndarray
        Column of each active lane's flow, in ``network.active_lanes`` order.
    shut : numpy.ndarray
        Per active lane: shut by a fixed yes/no or zero-trip decision (no reduced cost is reported then).
    basis : str
        Text of column ``basis``.
    trip_index : list of int
        Lane indices with a trip variable (``trip_<n>`` rows), in report order.
    """
    units = network.settings.units or "units"
    money = f" {network.settings.currency}" if network.settings.currency else ""
    sure = determined(solved)
    row = {name: i for i, name in enumerate(solved.row_names)}
    binding = (solved.sense != "E") & _close(solved.activity(), solved.rhs)
    dual = solved.dual
    or_zero_dual = np.nan_to_num(dual, nan=0.0)
    frames = []

    def rows_named(frame: pd.DataFrame, prefix: str) -> tuple[np.ndarray, np.ndarray]:
        position = np.array([row.get(f"{prefix}{i}", -1) for i in frame.index.tolist()], dtype=np.int64)
        return position >= 0, position

    customers = network.customers
    has, position = rows_named(customers, "balance_")
    ids = customers["id"].astype(str).to_numpy()[has]
    frames.append(_figure_frame("marginal_cost", ids, dual[position[has]], sure[position[has]], basis,
                                "One more unit of demand (" + units + ") at customer " + pd.Series(ids, dtype=object)
                                + " costs ", ".", money))
    for figure, frame, prefix, what in (("supply_value", network.depots, "supply_", "of supply at depot"),
                                        ("hub_capacity_value", network.hubs, "hub_cap_", "of capacity at hub")):
        has, position = rows_named(frame, prefix)
        has[has] = binding[position[has]]
        ids = frame["id"].astype(str).to_numpy()[has]
        frames.append(_figure_frame(figure, ids, -or_zero_dual[position[has]], sure[position[has]], basis,
                                    f"One more unit ({units}) {what} " + pd.Series(ids, dtype=object) + " saves ",
                                    ".", money))

    lanes = network.active_lanes
    if len(lanes):
        column_unknown = np.bincount(solved.column_of[~sure[solved.row_of]], minlength=len(solved.value))
        unique = column_unknown[flow_column] == 0
        value, high = solved.value[flow_column], solved.upper[flow_column]
        reduced = solved.reduced_cost[flow_column]
        at_capacity = np.isfinite(high) & (high > 0) & _close(value, high)
        unused = ~at_capacity & (value <= TOLERANCE) & ~shut & (high > 0)
        chosen = at_capacity | unused
        labels = _lane_labels(lanes)[chosen].to_numpy()
        amount = np.where(at_capacity, -np.nan_to_num(reduced, nan=0.0), reduced)[chosen]
        capacity_row = at_capacity[chosen]
        label = pd.Series(labels, dtype=object)
        prefix = ("One more unit (" + units + ") of capacity on lane " + label + " saves ").where(
            capacity_row, "Lane " + label + " is unused; its cost per unit would have to fall by ")
        suffix = pd.Series(np.where(capacity_row, ".", " before the plan used it."), dtype=object)
        frame = _figure_frame("reduced_cost", labels, amount, unique[chosen], basis, prefix, suffix, money)
        frame["figure"] = np.where(capacity_row, "lane_capacity_value", "reduced_cost")
        frames.append(frame)

    trip_rows = []
    for index in trip_index:
        name = f"trip_{index}"
        if name in row and binding[row[name]]:
            lane = lanes.loc[index]
            label = f"{lane['origin']} -> {lane['destination']}" + (f" ({lane['mode']})" if lane["mode"] else "")
            trip_rows.append((label, -or_zero_dual[row[name]], bool(sure[row[name]])))
    if trip_rows:
        labels = [r[0] for r in trip_rows]
        frames.append(_figure_frame("trip_capacity_value", labels, [r[1] for r in trip_rows],
                                    [r[2] for r in trip_rows], basis,
                                    f"One more unit ({units}) of room in the planned trips on lane "
                                    + pd.Series(labels, dtype=object) + " saves ", ".", money))
    frames = [f for f in frames if len(f)]
    if not frames:
        return empty_frame(SENSITIVITY_COLUMNS)
    out = pd.concat(frames, ignore_index=True)
    out["unique"] = out["unique"].astype(bool)
    out["value"] = out["value"].astype(float)
    return out


def analyse_arrays(network: Network, arrays: LaneArrays, answer) -> pd.DataFrame:
    """Sensitivity figures of a pure LP solved on the array path (:func:`lanesolve.model.solve.solve`), from CBC's own
    duals and reduced costs of that solve: no second solve, no PuLP objects.

    Parameters
    ----------
    network : Network
    arrays : LaneArrays
        The LP as built by :func:`lanesolve.model.formulation.build_lp_arrays`.
    answer : lanesolve.model.solve.LpAnswer
        CBC's optimal answer for ``arrays``.

    Returns
    -------
    DataFrame
        As :func:`analyse`.
    """
    solved = solved_from_arrays(arrays, answer)
    n_lanes = len(arrays.lane_index)
    return figures(network, solved, np.arange(n_lanes), np.zeros(n_lanes, dtype=bool), LP_BASIS)


def analyse(network: Network, model: LaneModel, solver: str = "cbc") -> pd.DataFrame:
    """Sensitivity figures of a solved, optimal ``model`` (see the module docstring).

    Parameters
    ----------
    network : Network
    model : LaneModel
        Solved to optimality, plan values in place (as :func:`lanesolve.model.solve.solve` leaves it).
    solver : str
        The solver that solved ``model``; duals are read from CBC, so a HiGHS or MIP plan is re-solved as an LP.

    Returns
    -------
    DataFrame
        :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`, one row per figure; ``value`` NaN where ``unique`` is
        False. Empty when the LP could not be re-solved.
    """
    basis = FIXED_BASIS if model.is_mip else LP_BASIS
    lp = _fixed_lp(network, model) if model.is_mip or solver != "cbc" else model
    if lp is not model and not _solve_lp(lp.problem):
        return empty_frame(SENSITIVITY_COLUMNS)
    solved, names = solved_from_problem(lp.problem)
    position = {name: j for j, name in enumerate(names)}
    lanes = network.active_lanes
    flow_column = np.array([position[lp.flow[i].name] for i in lanes.index.tolist()], dtype=np.int64)
    # Lanes shut by a fixed yes/no or zero-trip decision: their LP reduced cost says nothing about the decision.
    shut_set = {index for index, var in list(lp.use.items()) + list(lp.trips.items())
                if var.upBound is not None and var.upBound < 0.5}
    shut = np.array([i in shut_set for i in lanes.index.tolist()], dtype=bool)
    trip_index = [i for i in lp.trips if i not in shut_set]
    return figures(network, solved, flow_column, shut, basis, trip_index)


def top_few(sensitivity: pd.DataFrame, figure: str, count: int = TOP_FEW) -> pd.DataFrame:
    """The ``count`` rows of one figure with the largest unique values (then the not-unique ones), for summaries."""
    rows = sensitivity[sensitivity["figure"] == figure]
    return pd.concat([rows[rows["unique"]].sort_values("value", ascending=False), rows[~rows["unique"]]]).head(count)
