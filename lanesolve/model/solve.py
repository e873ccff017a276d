"""Solve a network: build the model, run the solver, and turn its answer into a plain :class:`~lanesolve.model.result.Result`.

Solvers
-------
``"cbc"`` (default) runs the CBC program bundled in PuLP's wheel (no system install needed). ``"highs"`` runs HiGHS
through PuLP and the ``highspy`` package (``pip install "lanesolve[highs]"``).

Status
------
PuLP's main status says "Optimal" for a CBC run stopped by the time limit with a plan in hand, so the status here
is read from PuLP's *solution* status (``prob.sol_status``):

==============================  ==========================================
PuLP                            :class:`~lanesolve.model.result.SolveStatus`
==============================  ==========================================
``LpSolutionOptimal``           ``optimal`` (within ``mip_gap`` for a MIP)
``LpSolutionIntegerFeasible``   ``feasible`` (stopped on a limit; a plan with its gap) -- for an LP: ``not_solved``
``LpStatusInfeasible``          ``infeasible``
``LpStatusUnbounded``           ``unbounded``
anything else                   ``not_solved``
==============================  ==========================================

The best bound of a MIP comes from the solver itself: for CBC the ``Lower bound:`` line of its log (written to a
temporary file with ``logPath``; a completed search prints none and proves the plan optimal, so the bound is then the
plan's cost), for HiGHS ``Highs.getInfo().mip_dual_bound``. The gap is
``(total_cost - best_bound) / max(|total_cost|, 1e-9)``. A pure LP reports ``mip_gap = None`` and its optimal
objective as the bound.
"""

from __future__ import annotations

import contextlib
import io
import math
import os
import re
import subprocess
import sys
import tempfile
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pulp

from lanesolve.errors import SolverError
from lanesolve.model.formulation import LaneArrays, LaneModel, array_path_applies, build_lp_arrays, build_model
from lanesolve.model.network import Network
from lanesolve.model.result import (FLOW_COLUMNS, NODE_COLUMNS, OPEN_NODE_COLUMNS, TRIP_COLUMNS, UNMET_COLUMNS,
                     Result, SolveStatus, empty_frame)

#: Values smaller than this in magnitude are solver noise and are reported as 0.
NOISE = 1e-9

SOLVERS = ("cbc", "highs")

_CBC_BOUND = re.compile(r"^Lower bound:\s*(\S+)", re.MULTILINE)
_CBC_BEST_POSSIBLE = re.compile(r"best possible\s+(\S+?)\)", re.MULTILINE)
_CBC_PROVEN = re.compile(r"^Result - Optimal solution found\s*$", re.MULTILINE)
_CBC_VERSION = re.compile(r"^Version:\s*(\S+)", re.MULTILINE)


def _clean(values: np.ndarray) -> np.ndarray:
    """Round float noise: |x| < :data:`NOISE` becomes 0 (and None, for an unset variable, becomes 0)."""
    values = np.asarray([0.0 if v is None else v for v in values], dtype=float)
    values[np.abs(values) < NOISE] = 0.0
    return values


def node_balance(network: Network, outflow: dict[str, float], inflow: dict[str, float],
                 unmet: dict[str, float] | None) -> pd.DataFrame:
    """The :data:`~lanesolve.model.result.NODE_COLUMNS` frame: one row per node (depots, customers, hubs in sheet order).

    Parameters
    ----------
    network : Network
    outflow, inflow : dict of str to float
        Units shipped out of / received by each node id (missing ids count 0).
    unmet : dict of str to float or None
        Units short per customer id (missing ids count 0); ``None`` when there is no plan (unmet is then NaN).

    Returns
    -------
    DataFrame
        Depots: supply, shipped, received, utilisation = net outflow / supply. Customers: demand, received, shipped,
        unmet. Hubs: capacity, throughput (= received), utilisation = throughput / capacity. Fields that do not apply
        to a kind, and ratios over a zero or unlimited base, are NaN.
    """
    nan = math.nan
    rows = []
    for node, supply in zip(network.depots["id"], network.depots["supply"]):
        shipped, received = outflow.get(node, 0.0), inflow.get(node, 0.0)
        util = (shipped - received) / supply if supply > 0 else nan
        rows.append((node, "depot", supply, nan, shipped, received, nan, nan, nan, util))
    for node, demand in zip(network.customers["id"], network.customers["demand"]):
        short = nan if unmet is None else unmet.get(node, 0.0)
        rows.append((node, "customer", nan, demand, outflow.get(node, 0.0), inflow.get(node, 0.0), short, nan, nan,
                     nan))
    for node, capacity in zip(network.hubs["id"], network.hubs["capacity"]):
        received = inflow.get(node, 0.0)
        util = received / capacity if 0 < capacity < math.inf else nan
        rows.append((node, "hub", nan, nan, outflow.get(node, 0.0), received, nan, capacity, received, util))
    if not rows:
        return empty_frame(NODE_COLUMNS)
    frame = pd.DataFrame(rows, columns=NODE_COLUMNS)
    for col in NODE_COLUMNS[2:]:
        frame[col] = frame[col].astype(float)
    return frame


def _make_solver(solver: str, is_mip: bool, time_limit: float | None, gap: float | None, msg: bool,
                 log_path: Path):
    """The PuLP solver object for ``solver``, or :class:`SolverError` saying what to install."""
    if solver == "cbc":
        with warnings.catch_warnings():
            # PuLP 3 flags PULP_CBC_CMD for removal in 4.0, yet it is the class that runs the CBC in PuLP's wheel,
            # which issue 2 requires (no system CBC); the warning would only alarm planners.
            warnings.simplefilter("ignore", DeprecationWarning)
            cbc = pulp.PULP_CBC_CMD(mip=is_mip, msg=False, timeLimit=time_limit, gapRel=gap if is_mip else None,
                                    logPath=str(log_path))
        if not cbc.available():
            raise SolverError(f"the CBC program bundled with PuLP was not found or cannot run at {cbc.path} "
                              "(reinstall PuLP: pip install --force-reinstall pulp)")
        return cbc
    if solver == "highs":
        try:
            import highspy  # noqa: F401  (only to learn whether the extra is installed)
        except ImportError as exc:
            raise SolverError('solver "highs" needs the highspy package (install it with: '
                              'pip install "lanesolve[highs]")') from exc
        highs = pulp.HiGHS(mip=is_mip, msg=msg, timeLimit=time_limit, gapRel=gap if is_mip else None)
        if not highs.available():
            raise SolverError('PuLP cannot use HiGHS here although highspy imports (try: pip install -U pulp highspy)')
        return highs
    raise SolverError(f"unknown solver {solver!r} (choose one of: {', '.join(SOLVERS)})")


def _solver_name(solver: str, problem: pulp.LpProblem, log_text: str) -> str:
    if solver == "cbc":
        found = _CBC_VERSION.search(log_text)
        return f"CBC {found.group(1) if found else '(version unknown)'} (PuLP {pulp.__version__})"
    model = getattr(problem, "solverModel", None)
    version = model.version() if model is not None and hasattr(model, "version") else "(version unknown)"
    return f"HiGHS {version} (PuLP {pulp.__version__})"


@contextlib.contextmanager
def _stdout_to_stderr():
    """Send what native code writes to file descriptor 1 to 2 instead while inside the block.

    highspy prints a banner on stdout whenever a solver object is made, even with output off; ``--json`` promises
    stdout holds only the JSON document.
    """
    sys.stdout.flush()
    saved = os.dup(1)
    try:
        os.dup2(2, 1)
        yield
    finally:
        sys.stdout.flush()
        os.dup2(saved, 1)
        os.close(saved)


def _best_bound(solver: str, problem: pulp.LpProblem, log_text: str, total_cost: float) -> float | None:
    """The solver's best lower bound on the cost when it stopped, or None when it does not say.

    CBC prints ``Lower bound:`` when it stops early or on the gap tolerance; when it proves the plan optimal
    (``Result - Optimal solution found`` with nothing after it, also when presolve alone solves the model) it prints
    no bound, and the bound is then the plan's cost. Failing both, the last
    ``best possible`` of its progress lines is a valid (possibly stale) bound.
    """
    if solver == "cbc":
        found = _CBC_BOUND.findall(log_text)
        if found:
            return float(found[-1])
        if _CBC_PROVEN.search(log_text):
            return total_cost
        found = _CBC_BEST_POSSIBLE.findall(log_text)
        return float(found[-1]) if found else None
    bound = problem.solverModel.getInfo().mip_dual_bound
    return float(bound) if math.isfinite(bound) else None


def _status(problem: pulp.LpProblem, is_mip: bool) -> SolveStatus:
    """Map PuLP's (status, solution status) to :class:`SolveStatus`; see the module docstring."""
    return status_from_codes(problem.status, problem.sol_status, is_mip)


def status_from_codes(status: int, sol_status: int, is_mip: bool) -> SolveStatus:
    """Map PuLP's status and solution status codes to :class:`SolveStatus` (table in the module docstring).

    Both solve paths use it: the PuLP path with ``problem.status`` / ``problem.sol_status``, the array path with
    the codes PuLP's own CBC solution-file reader returns for the same file.
    """
    if sol_status == pulp.LpSolutionOptimal:
        return SolveStatus.OPTIMAL
    if sol_status == pulp.LpSolutionIntegerFeasible:
        # A stopped simplex run is not known to hold a feasible point, so an LP is only trusted when optimal.
        return SolveStatus.FEASIBLE if is_mip else SolveStatus.NOT_SOLVED
    if status == pulp.LpStatusInfeasible or sol_status == pulp.LpSolutionInfeasible:
        return SolveStatus.INFEASIBLE
    if status == pulp.LpStatusUnbounded or sol_status == pulp.LpSolutionUnbounded:
        return SolveStatus.UNBOUNDED
    return SolveStatus.NOT_SOLVED


def _plan(network: Network, model: LaneModel, result: Result) -> None:
    """Fill ``result`` with the flows, node balance, unmet demand and cost breakdown of the solved ``model``."""
    flow = _clean([var.varValue for var in model.flow.values()])
    # The charge follows the contract ("charged once if the lane carries any flow"): a solver may leave a use
    # variable at 1 on an empty lane in a stopped run; switching it off keeps the plan feasible and is cheaper.
    carries = dict(zip(model.flow, flow > 0))
    for index, use_var in model.use.items():
        use_var.varValue = 1.0 if carries[index] else 0.0
    for var, value in zip(model.flow.values(), flow):
        var.varValue = float(value)
    _tidy_design(network, model, dict(zip(model.flow, flow)))
    unmet_values = _clean([var.varValue for var in model.unmet.values()])
    for var, value in zip(model.unmet.values(), unmet_values):
        var.varValue = float(value)

    breakdown = {name: float(model.costs[name].value() or 0.0) for name in model.costs}
    _fill_plan(network, np.fromiter(model.flow, dtype=np.int64, count=len(model.flow)), flow,
               np.fromiter(model.unmet, dtype=np.int64, count=len(model.unmet)), unmet_values, model.penalty,
               breakdown, result)
    if network.has_design:
        lanes = network.lanes.loc[list(model.flow)]
        outflow = pd.Series(flow, index=lanes["origin"].to_numpy()).groupby(level=0).sum().to_dict() if len(
            flow) else {}
        inflow = (pd.Series(flow, index=lanes["destination"].to_numpy()).groupby(level=0).sum().to_dict()
                  if len(flow) else {})
        result.open_nodes = open_node_frame(network, model, outflow, inflow)
        result.trips = trip_frame(network, dict(zip(model.flow, flow)))


def _fill_plan(network: Network, lane_index: np.ndarray, flow: np.ndarray, unmet_index: np.ndarray,
               unmet_values: np.ndarray, penalty: np.ndarray, breakdown: dict[str, float], result: Result) -> None:
    """Flows, node balance, unmet demand and cost breakdown from plain arrays (shared by both solve paths).

    ``flow`` is per lane of ``lane_index``, ``unmet_values`` per customer of ``unmet_index`` (both noise-cleaned),
    ``penalty`` per customer row, ``breakdown`` the cost per component before noise rounding.
    """
    lanes = network.lanes.loc[lane_index]
    for name, value in breakdown.items():
        breakdown[name] = 0.0 if abs(value) < NOISE else value
    result.cost_breakdown = breakdown
    result.total_cost = float(sum(breakdown.values()))

    used = flow > 0
    frame = lanes.loc[used, ["origin", "destination", "mode", "cost_per_unit", "capacity", "fixed_cost"]].copy()
    frame["flow"] = flow[used]
    frame["variable_cost"] = frame["flow"] * frame["cost_per_unit"]
    frame["fixed_charge"] = frame["fixed_cost"]
    capacity = frame["capacity"].to_numpy(dtype=float)
    frame["utilisation"] = np.where(np.isfinite(capacity) & (capacity > 0), frame["flow"] / np.where(
        capacity > 0, capacity, 1.0), math.nan)
    result.flows = frame[FLOW_COLUMNS].reset_index(drop=True) if len(frame) else empty_frame(FLOW_COLUMNS)

    outflow = pd.Series(flow, index=lanes["origin"].to_numpy()).groupby(level=0).sum().to_dict() if len(flow) else {}
    inflow = (pd.Series(flow, index=lanes["destination"].to_numpy()).groupby(level=0).sum().to_dict()
              if len(flow) else {})
    customers = network.customers
    short = dict(zip(customers.loc[unmet_index, "id"], unmet_values))
    result.nodes = node_balance(network, outflow, inflow, short)

    rows = [(customers.at[i, "id"], q, q * penalty[customers.index.get_loc(i)])
            for i, q in zip(unmet_index.tolist(), unmet_values.tolist()) if q > 0]
    result.unmet = (pd.DataFrame(rows, columns=UNMET_COLUMNS) if rows else empty_frame(UNMET_COLUMNS))


def _tidy_design(network: Network, model: LaneModel, flow: dict[int, float]) -> None:
    """Make the v2 decisions follow the flows, as the contract charges them: a decided node carrying no flow is
    not opened, and a lane runs ceil(flow / trip_capacity) trips. Both keep the plan feasible and cost no more than
    the solver's values (a stopped run may leave a spare trip or an idle open node)."""
    if not model.open and not model.trips:
        return
    lanes = network.active_lanes
    carries = set()
    for index, value in flow.items():
        if value > 0:
            carries.update((lanes.at[index, "origin"], lanes.at[index, "destination"]))
    for (kind, index), var in model.open.items():
        frame = network.depots if kind == "depot" else network.hubs
        var.varValue = 1.0 if frame.at[index, "id"] in carries else 0.0
    for index, var in model.trips.items():
        var.varValue = float(trips_needed(flow[index], float(lanes.at[index, "trip_capacity"])))


def trips_needed(flow: float, trip_capacity: float) -> int:
    """Whole trips to carry ``flow`` (a relative 1e-9 of solver noise is forgiven: 20.0000000001 / 10 is 2 trips)."""
    if flow <= 0 or not trip_capacity > 0:
        return 0
    return int(math.ceil(flow / trip_capacity - 1e-9))


def open_node_frame(network: Network, model: LaneModel, outflow: dict, inflow: dict) -> pd.DataFrame:
    """:data:`~lanesolve.model.result.OPEN_NODE_COLUMNS` for every depot and hub of a v2 network."""
    rows = []
    for kind, frame in (("depot", network.depots), ("hub", network.hubs)):
        for index, node, status, fixed in zip(frame.index.tolist(), frame["id"], frame["status"],
                                              frame["fixed_cost"].astype(float)):
            if status == "decide":
                is_open = bool(round(model.open[(kind, index)].varValue or 0.0))
            else:
                is_open = status == "open"
            rows.append((node, kind, status, is_open, fixed if is_open else 0.0))
    if not rows:
        return empty_frame(OPEN_NODE_COLUMNS)
    return pd.DataFrame(rows, columns=OPEN_NODE_COLUMNS)


def trip_frame(network: Network, flow: dict[int, float]) -> pd.DataFrame:
    """:data:`~lanesolve.model.result.TRIP_COLUMNS` for lanes with a trip capacity and flow > 0."""
    lanes = network.active_lanes
    rows = []
    for index in lanes.index[lanes["trip_capacity"].notna()].tolist():
        value = flow.get(index, 0.0)
        if value <= 0:
            continue
        lane = lanes.loc[index]
        trips = trips_needed(value, float(lane["trip_capacity"]))
        rows.append((lane["origin"], lane["destination"], lane["mode"], value, float(lane["trip_capacity"]), trips,
                     float(lane["cost_per_trip"]), trips * float(lane["cost_per_trip"])))
    if not rows:
        return empty_frame(TRIP_COLUMNS)
    frame = pd.DataFrame(rows, columns=TRIP_COLUMNS)
    frame["trips"] = frame["trips"].astype(int)
    return frame


def solve(network: Network, time_limit: float | None = None, solver: str | None = None, msg: bool = False,
          sensitivity: bool = True, linking: bool = True, fast: bool = True) -> Result:
    """Build and solve the model of :mod:`lanesolve.model.formulation` for ``network``.

    Parameters
    ----------
    network : Network
        A validated network.
    time_limit : float, optional
        Seconds the solver may run; overrides ``network.settings.time_limit_s``. A value of 0 or less, or None
        with a setting of 0, means no limit.
    solver : {"cbc", "highs"}, optional
        ``"cbc"``: the CBC binary in PuLP's wheel. ``"highs"``: HiGHS through ``highspy`` (optional extra).
        None takes the ``solver`` setting (default ``"cbc"``).
    sensitivity : bool
        With an optimal plan, also fill ``Result.sensitivity`` (:mod:`lanesolve.model.sensitivity`).
    linking : bool
        Build the per-lane linking rows of contract v2 node decisions (off only to measure their worth).
    msg : bool
        Echo the solver's log to stderr.
    fast : bool
        Allow the array path for pure LPs with CBC (see Notes); False always builds the PuLP problem (tests
        compare the two).

    Returns
    -------
    Result
        Status per the module docstring. With a plan: flows (lanes with flow > 1e-9), nodes, unmet, a cost
        breakdown adding up to ``total_cost``, ``mip_gap`` and ``best_bound`` (None for a pure LP's gap). Without
        a plan: the status, a message, and the node frame with zero flows.

    Raises
    ------
    SolverError
        Unknown solver name, solver missing (with how to install it), the solver crashed, or its answer could not
        be read.

    Notes
    -----
    Two paths, one model. A pure LP (no fixed charge, no contract v2 decision) solved with CBC takes the *array
    path*: :func:`lanesolve.model.formulation.build_lp_arrays` builds the rows and columns :func:`~lanesolve.model.formulation.build_model`
    would give PuLP, :func:`write_mps` writes them, the same bundled CBC program runs with the options PuLP would
    pass (:func:`cbc_command`), and :func:`read_cbc_solution` reads values, duals and reduced costs back with
    pandas, the status line through PuLP's own reader. At 100k lanes that saves PuLP's object building, its MPS
    writer and its solution reader, about 3 s of 5 (benchmarks/README.md). Everything else -- MIPs, HiGHS, and
    ``fast=False`` -- goes through a :class:`pulp.LpProblem`, which stays the model for export and for MIP extras
    (:func:`~lanesolve.model.formulation.build_model` builds it for any network). tests/test_model_speedpath.py checks that
    both paths give the same optimum, duals and status.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2.5}])
    >>> result = solve(net)
    >>> result.status.value, round(result.total_cost, 6), result.mip_gap
    ('optimal', 10.0, None)
    """
    settings = network.settings
    solver = (solver or getattr(settings, "solver", None) or "cbc").lower()
    limit = time_limit if time_limit is not None else settings.time_limit_s
    limit = float(limit) if limit is not None and limit > 0 else None
    gap = float(settings.mip_gap) if settings.mip_gap is not None else None
    if fast and solver == "cbc" and array_path_applies(network):
        return _solve_by_arrays(network, limit, msg, sensitivity)

    tick = time.perf_counter()
    model = build_model(network, linking=linking)
    build_seconds = time.perf_counter() - tick

    with tempfile.TemporaryDirectory(prefix="lanesolve-") as tmp:
        log_path = Path(tmp) / "solver.log"
        backend = _make_solver(solver, model.is_mip, limit, gap, msg, log_path)
        tick = time.perf_counter()
        quiet = _stdout_to_stderr() if solver == "highs" else contextlib.nullcontext()
        try:
            with quiet:
                model.problem.solve(backend)
        except pulp.PulpSolverError as exc:
            raise SolverError(f"the {solver.upper()} solver failed: {exc} (rerun with the solver log shown to see "
                              "why; a damaged PuLP install is fixed by: pip install --force-reinstall pulp)") from exc
        except (OSError, ValueError, IndexError) as exc:
            # Raised by PuLP while starting the solver or reading a truncated solution file.
            raise SolverError(f"the {solver.upper()} solver's answer could not be read: {exc}") from exc
        seconds = time.perf_counter() - tick
        log_text = log_path.read_text(errors="replace") if log_path.exists() else ""
    if msg and log_text:
        sys.stderr.write(log_text)

    status = _status(model.problem, model.is_mip)
    result = Result(status=status, solver=_solver_name(solver, model.problem, log_text), solve_seconds=seconds)
    result.timings["build_model"] = build_seconds
    result.timings["solver"] = seconds

    if not status.has_plan:
        result.cost_breakdown = dict.fromkeys(model.costs, math.nan)
        _no_plan(network, result, status, limit, model.is_mip)
        return result

    _plan(network, model, result)
    if model.is_mip:
        bound = _best_bound(solver, model.problem, log_text, result.total_cost)
        if bound is None:
            result.messages.append("The solver did not report a lower bound, so the gap to the optimum is unknown.")
        else:
            bound = min(bound, result.total_cost)  # the bound is printed rounded; it can never exceed the plan
            result.best_bound = bound
            result.mip_gap = max(0.0, (result.total_cost - bound) / max(abs(result.total_cost), 1e-9))
        if status is SolveStatus.FEASIBLE:
            gap_text = "unknown" if result.mip_gap is None else f"{result.mip_gap:.2%}"
            result.messages.append(f"The solver stopped on its time limit ({limit:g} s) before proving the plan "
                                   f"optimal; the best possible plan may cost up to {gap_text} less than this one "
                                   "(raise time_limit_s in Settings or use --time-limit).")
    else:
        result.best_bound = result.total_cost  # an optimal LP's objective is its own bound
    return result


# ------------------------------------------------------------------------------------------------ the array path
@dataclass
class LpAnswer:
    """What CBC's solution file says about an LP given as :class:`~lanesolve.model.formulation.LaneArrays`.

    Attributes
    ----------
    status : SolveStatus
    value, reduced_cost : numpy.ndarray
        Per column (0 where the file is silent, as PuLP does).
    activity, dual : numpy.ndarray
        Per row: the row's left-hand side at the plan and its dual (shadow price).
    """

    status: SolveStatus
    value: np.ndarray
    reduced_cost: np.ndarray
    activity: np.ndarray
    dual: np.ndarray


def _number_text(values: np.ndarray) -> list[str]:
    """Shortest round-trip text of each float (``repr``): exact, and short for the many 1.0 and -1.0 of a network."""
    return list(map(repr, values.tolist()))


def write_mps(arrays: LaneArrays, path: str | Path) -> None:
    """Write ``arrays`` as an MPS file for CBC: rows ``R<i>``, columns ``X<j>`` (the order of ``arrays``).

    Written with a few list operations over the nonzeros rather than an object per term: this replaces PuLP's
    ``writeMPS``, which at 100k lanes took 1.5 s of a 3 s solve stage (benchmarks/README.md). The content is what
    PuLP writes with ``rename=1`` for the problem :func:`lanesolve.model.formulation.build_model` builds, but with numbers in
    full precision (PuLP prints 13 significant digits).
    """
    n_rows, n_columns = arrays.n_rows, arrays.n_columns
    row_name = np.array([f"R{i}" for i in range(n_rows)] + ["OBJ"], dtype=object)
    column_name = np.array([f"X{j}" for j in range(n_columns)], dtype=object)
    # Objective entries go after each column's rows (row key n_rows sorts last), as PuLP writes them; an empty column
    # gets a 0 objective entry so that the column exists for its bound.
    column_count = np.diff(arrays.start)
    with_objective = np.flatnonzero((arrays.objective != 0) | (column_count == 0))
    rows = np.r_[arrays.row_of, np.full(len(with_objective), n_rows)]
    columns = np.r_[arrays.column_of, with_objective]
    values = np.r_[arrays.coefficient, arrays.objective[with_objective]]
    order = np.lexsort((rows, columns))
    entries = map("    {} {} {}\n".format, column_name[columns[order]], row_name[rows[order]],
                  _number_text(values[order]))
    bounded = np.flatnonzero(np.isfinite(arrays.upper))
    with open(path, "w", encoding="ascii") as fh:
        fh.write("NAME          lanesolve\nROWS\n N  OBJ\n")
        fh.writelines(map(" {}  {}\n".format, arrays.sense.tolist(), row_name[:n_rows]))
        fh.write("COLUMNS\n")
        fh.writelines(entries)
        fh.write("RHS\n")
        fh.writelines(map("    RHS {} {}\n".format, row_name[:n_rows], _number_text(arrays.rhs)))
        fh.write("BOUNDS\n")
        fh.writelines(map(" UP BND {} {}\n".format, column_name[bounded], _number_text(arrays.upper[bounded])))
        fh.write("ENDATA\n")


def read_cbc_solution(path: str | Path, backend: pulp.LpSolver, n_rows: int, n_columns: int,
                      is_mip: bool = False) -> LpAnswer:
    """Read a CBC solution file written for :func:`write_mps` names, in one pass with pandas' C parser.

    The status line is read by PuLP's own reader (``get_status`` of ``backend``), so both paths map CBC's words
    to a status in one place. Lines are ``index name value dual-or-reduced-cost``, with a ``**`` in front of a row
    or column that violates its bounds (infeasible plans).
    """
    status, sol_status = backend.get_status(str(path))
    answer = LpAnswer(status_from_codes(status, sol_status, is_mip), np.zeros(n_columns), np.zeros(n_columns),
                      np.zeros(n_rows), np.zeros(n_rows))
    with open(path) as fh:
        fh.readline()
        body = fh.read().replace("**", "  ")
    if not body.strip():
        return answer
    table = pd.read_csv(io.StringIO(body), sep=r"\s+", header=None, names=["i", "name", "value", "dual"],
                        usecols=["name", "value", "dual"], dtype={"name": str, "value": float, "dual": float})
    names = table["name"].str
    kind = names[0].to_numpy()
    number = names[1:].astype(np.int64).to_numpy()
    values, duals = table["value"].to_numpy(), table["dual"].to_numpy()
    is_row = kind == "R"
    is_column = kind == "X"
    answer.activity[number[is_row]] = values[is_row]
    answer.dual[number[is_row]] = duals[is_row]
    answer.value[number[is_column]] = values[is_column]
    answer.reduced_cost[number[is_column]] = duals[is_column]
    return answer


def cbc_command(backend: pulp.LpSolver, mps_path: str | Path, solution_path: str | Path) -> list[str]:
    """The CBC command line PuLP's ``PULP_CBC_CMD.solve_CBC`` builds for an LP read from an MPS file: the same
    program (``backend.path``) and the same options in the same order (time limit, ``timeMode``, ``-initialSolve``,
    ``-printingOptions all``, ``-solution``)."""
    command = [backend.path, str(mps_path)]
    if backend.timeLimit is not None:
        command += ["-sec", str(backend.timeLimit)]
    for option in list(backend.options) + backend.getOptions():
        command += ("-" + option).split()
    command += ["-solve" if backend.mip else "-initialSolve", "-printingOptions", "all", "-solution",
                str(solution_path)]
    return command


def solve_arrays(arrays: LaneArrays, backend: pulp.LpSolver, folder: str | Path, log_path: str | Path) -> LpAnswer:
    """Solve ``arrays`` with the CBC program of ``backend`` through files in ``folder``; the log goes to
    ``log_path``.

    Raises
    ------
    SolverError
        CBC could not be started, failed, or left no solution file.
    """
    folder = Path(folder)
    mps_path, solution_path = folder / "lanesolve.mps", folder / "lanesolve.sol"
    write_mps(arrays, mps_path)
    command = cbc_command(backend, mps_path, solution_path)
    try:
        with open(log_path, "w") as log:
            code = subprocess.run(command, stdout=log, stderr=log, stdin=subprocess.DEVNULL).returncode
    except OSError as exc:
        raise SolverError(f"the CBC program could not be started ({exc}); reinstall PuLP: "
                          "pip install --force-reinstall pulp") from exc
    if code != 0 or not solution_path.exists():
        raise SolverError(f"the CBC solver failed (exit code {code}) (rerun with the solver log shown to see why; a "
                          "damaged PuLP install is fixed by: pip install --force-reinstall pulp)")
    try:
        return read_cbc_solution(solution_path, backend, arrays.n_rows, arrays.n_columns)
    except (OSError, ValueError, IndexError) as exc:
        raise SolverError(f"the CBC solver's answer could not be read: {exc}") from exc


def _solve_by_arrays(network: Network, limit: float | None, msg: bool, sensitivity: bool) -> Result:
    """:func:`solve` for a pure LP with CBC, without PuLP objects (see "Two paths" in :func:`solve`)."""
    tick = time.perf_counter()
    arrays = build_lp_arrays(network)
    build_seconds = time.perf_counter() - tick
    with tempfile.TemporaryDirectory(prefix="lanesolve-") as tmp:
        log_path = Path(tmp) / "solver.log"
        backend = _make_solver("cbc", False, limit, None, msg, log_path)
        tick = time.perf_counter()
        answer = solve_arrays(arrays, backend, tmp, log_path)
        seconds = time.perf_counter() - tick
        log_text = log_path.read_text(errors="replace") if log_path.exists() else ""
    if msg and log_text:
        sys.stderr.write(log_text)
    status = answer.status
    result = Result(status=status, solver=_solver_name("cbc", None, log_text), solve_seconds=seconds)
    result.timings["build_model"] = build_seconds
    result.timings["solver"] = seconds
    if not status.has_plan:
        result.cost_breakdown = dict.fromkeys(arrays.costs, math.nan)
        _no_plan(network, result, status, limit, False)
        return result

    n_lanes = len(arrays.lane_index)
    flow = _clean(answer.value[:n_lanes])
    unmet_values = _clean(answer.value[n_lanes:])
    values = np.r_[flow, unmet_values]
    breakdown = {name: float(coefficients @ values) for name, coefficients in arrays.costs.items()}
    _fill_plan(network, arrays.lane_index, flow, arrays.unmet_index, unmet_values, arrays.penalty, breakdown, result)
    result.best_bound = result.total_cost  # an optimal LP's objective is its own bound
    return result


def _no_plan(network: Network, result: Result, status: SolveStatus, limit: float | None, is_mip: bool) -> None:
    """Fill a no-plan ``result``: zero node balance and the message (the diagnosis is
    :func:`lanesolve.model.diagnose.solve_and_explain`'s)."""
    result.nodes = node_balance(network, {}, {}, None)
    result.messages.append(_no_plan_message(status, limit, is_mip))


def _no_plan_message(status: SolveStatus, limit: float | None, is_mip: bool) -> str:
    if status is SolveStatus.INFEASIBLE:
        return ("No plan meets every demand within the supplies and capacities (raise supply or capacity, add "
                "lanes, or give customers an unmet_penalty to allow a shortfall).")
    if status is SolveStatus.UNBOUNDED:
        return "The solver reports the cost can fall without limit; check the lane costs for negative values."
    if limit is not None:
        return (f"The solver stopped on its time limit ({limit:g} s) before it found any plan "
                "(raise time_limit_s in Settings or use --time-limit).")
    return "The solver stopped without a plan."
