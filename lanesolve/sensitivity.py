"""Sensitivity of an optimal plan, in plain words: what one more unit of demand costs, what one more unit of a
binding capacity is worth, and how much cheaper an unused lane must be before the plan would use it.

Figures (column ``figure`` of :data:`~lanesolve.result.SENSITIVITY_COLUMNS`)
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
"""

from __future__ import annotations

import math
import warnings
from collections import deque

import pandas as pd
import pulp

from .model import LaneModel, build_model
from .network import Network
from .result import SENSITIVITY_COLUMNS, empty_frame

#: Primal values within this of a bound count as at the bound (relative to max(1, |bound|)).
TOLERANCE = 1e-7
#: How many rows of each figure the HTML summary should show (the sheet and JSON carry all).
TOP_FEW = 5

LP_BASIS = "LP"
FIXED_BASIS = "LP with the plan's yes/no and trip decisions fixed"


def _close(a: float, b: float) -> bool:
    if not math.isfinite(b):
        return False
    return abs(a - b) <= TOLERANCE * max(1.0, abs(b))


def _rows(problem: pulp.LpProblem) -> dict[str, pulp.LpConstraint]:
    """Row name -> constraint, without PuLP 3's deprecated dict view (``constraints()`` is a list from PuLP 3.3)."""
    rows = problem.constraints
    listed = rows() if callable(rows) else list(rows.values())
    return {row.name: row for row in listed}


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
    columns: dict[str, list[str]] = {}
    known: set[str] = set()
    for name, row in _rows(problem).items():
        activity = sum(coef * (var.varValue or 0.0) for var, coef in row.items())
        rhs = -row.constant
        if row.sense != pulp.LpConstraintEQ and not _close(activity, rhs):
            known.add(name)
        for var, _ in row.items():
            columns.setdefault(var.name, []).append(name)
    equations: list[list[str]] = []
    for var in problem.variables():
        value = var.varValue or 0.0
        low = -math.inf if var.lowBound is None else var.lowBound
        high = math.inf if var.upBound is None else var.upBound
        if low < high and not _close(value, low) and not _close(value, high):
            rows = columns.get(var.name, [])
            if rows:
                equations.append(rows)
    unknown_count = [sum(r not in known for r in eq) for eq in equations]
    by_row: dict[str, list[int]] = {}
    for position, eq in enumerate(equations):
        for r in eq:
            by_row.setdefault(r, []).append(position)
    queue = deque(i for i, n in enumerate(unknown_count) if n == 1)
    while queue:
        position = queue.popleft()
        if unknown_count[position] != 1:
            continue
        row = next(r for r in equations[position] if r not in known)
        known.add(row)
        for other in by_row.get(row, []):
            unknown_count[other] -= 1
            if unknown_count[other] == 1:
                queue.append(other)
    return known


def analyse(network: Network, model: LaneModel, solver: str = "cbc") -> pd.DataFrame:
    """Sensitivity figures of a solved, optimal ``model`` (see the module docstring).

    Parameters
    ----------
    network : Network
    model : LaneModel
        Solved to optimality, plan values in place (as :func:`lanesolve.solve.solve` leaves it).
    solver : str
        The solver that solved ``model``; duals are read from CBC, so a HiGHS or MIP plan is re-solved as an LP.

    Returns
    -------
    DataFrame
        :data:`~lanesolve.result.SENSITIVITY_COLUMNS`, one row per figure; ``value`` NaN where ``unique`` is
        False. Empty when the LP could not be re-solved.
    """
    basis = FIXED_BASIS if model.is_mip else LP_BASIS
    lp = _fixed_lp(network, model) if model.is_mip or solver != "cbc" else model
    if lp is not model and not _solve_lp(lp.problem):
        return empty_frame(SENSITIVITY_COLUMNS)
    problem = lp.problem
    sure = determined_duals(problem)
    constraints = _rows(problem)
    slack_free = _binding(problem, constraints)
    rows_of: dict[str, list[str]] = {}
    for name, row in constraints.items():
        for var, _ in row.items():
            rows_of.setdefault(var.name, []).append(name)
    units = network.settings.units or "units"
    money = f" {network.settings.currency}" if network.settings.currency else ""
    out: list[tuple] = []

    def add(figure, item, value, unique, sentence):
        value = float(value) if value is not None else math.nan
        if unique:
            value = 0.0 if abs(value) < 1e-9 else value
            out.append((figure, item, value, True, basis, sentence.format(v=f"{value:,.4g}{money}")))
        else:
            out.append((figure, item, math.nan, False, basis,
                        sentence.format(v="an amount that is not unique")[:-1] + " (the plan is degenerate here: "
                        "more than one figure fits it, so none is shown)."))

    for index, node in zip(network.customers.index.tolist(), network.customers["id"]):
        name = f"balance_{index}"
        if name in constraints:
            add("marginal_cost", node, constraints[name].pi, name in sure,
                f"One more unit of demand ({units}) at customer {node} costs {{v}}.")
    for index, node in zip(network.depots.index.tolist(), network.depots["id"]):
        name = f"supply_{index}"
        if name in slack_free:
            add("supply_value", node, -(constraints[name].pi or 0.0), name in sure,
                f"One more unit ({units}) of supply at depot {node} saves {{v}}.")
    for index, node in zip(network.hubs.index.tolist(), network.hubs["id"]):
        name = f"hub_cap_{index}"
        if name in slack_free:
            add("hub_capacity_value", node, -(constraints[name].pi or 0.0), name in sure,
                f"One more unit ({units}) of capacity at hub {node} saves {{v}}.")

    lanes = network.active_lanes
    # Lanes shut by a fixed yes/no or zero-trip decision: their LP reduced cost says nothing about the decision.
    shut = {index for index, var in list(lp.use.items()) + list(lp.trips.items())
            if var.upBound is not None and var.upBound < 0.5}
    for index, origin, destination, mode in zip(lanes.index.tolist(), lanes["origin"], lanes["destination"],
                                                lanes["mode"]):
        var = lp.flow[index]
        label = f"{origin} -> {destination}" + (f" ({mode})" if mode else "")
        unique = all(r in sure for r in rows_of.get(var.name, []))
        value, high = var.varValue or 0.0, var.upBound
        if high is not None and high > 0 and _close(value, high):
            add("lane_capacity_value", label, -(var.dj or 0.0), unique,
                f"One more unit ({units}) of capacity on lane {label} saves {{v}}.")
        elif value <= TOLERANCE and index not in shut and (high is None or high > 0):
            add("reduced_cost", label, var.dj, unique,
                f"Lane {label} is unused; its cost per unit would have to fall by {{v}} before the plan used it.")
    for index in lp.trips:
        name = f"trip_{index}"
        if index in shut:
            continue
        if name in slack_free:
            lane = lanes.loc[index]
            label = f"{lane['origin']} -> {lane['destination']}" + (f" ({lane['mode']})" if lane["mode"] else "")
            add("trip_capacity_value", label, -(constraints[name].pi or 0.0), name in sure,
                f"One more unit ({units}) of room in the planned trips on lane {label} saves {{v}}.")
    if not out:
        return empty_frame(SENSITIVITY_COLUMNS)
    return pd.DataFrame(out, columns=SENSITIVITY_COLUMNS)


def _binding(problem: pulp.LpProblem, constraints: dict) -> set[str]:
    """Names of the inequality rows with no slack at the plan."""
    binding = set()
    for name, row in constraints.items():
        if row.sense == pulp.LpConstraintEQ:
            continue
        activity = sum(coef * (var.varValue or 0.0) for var, coef in row.items())
        if _close(activity, -row.constant):
            binding.add(name)
    return binding


def top_few(sensitivity: pd.DataFrame, figure: str, count: int = TOP_FEW) -> pd.DataFrame:
    """The ``count`` rows of one figure with the largest unique values (then the not-unique ones), for summaries."""
    rows = sensitivity[sensitivity["figure"] == figure]
    return pd.concat([rows[rows["unique"]].sort_values("value", ascending=False), rows[~rows["unique"]]]).head(count)
