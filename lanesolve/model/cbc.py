"""Solve a :class:`~lanesolve.model.arrays.SparseModel` with the CBC program that ships inside PuLP's wheel.

One MPS writer serves LPs and MIPs alike (integer columns between ``MARKER INTORG`` / ``INTEND`` lines, each with
its bounds written out). CBC runs with the options PuLP's ``PULP_CBC_CMD`` would pass (:func:`cbc_command`), and its
solution file is read back in one vectorised pass, the status line by PuLP's own reader.

Status
------
CBC's solution file says ``Optimal``, ``Infeasible``, ``Unbounded`` or ``Stopped on ...``; PuLP's
``COIN_CMD.get_status`` turns that into a status and a solution status, mapped by :func:`status_from_codes`:

==============================  ==========================================
PuLP                            :class:`~lanesolve.model.result.SolveStatus`
==============================  ==========================================
``LpSolutionOptimal``           ``optimal`` (within ``mip_gap`` for a MIP)
``LpSolutionIntegerFeasible``   ``feasible`` (stopped on a limit; a plan with its gap) -- for an LP: ``not_solved``
``LpStatusInfeasible``          ``infeasible``
``LpStatusUnbounded``           ``unbounded``
anything else                   ``not_solved``
==============================  ==========================================

The best bound of a MIP is the ``Lower bound:`` line of CBC's log; a completed search prints none and proves the
plan optimal, so the bound is then the objective in the solution file; failing both, the last ``best possible`` of
its progress lines (a valid, possibly stale bound).
"""

from __future__ import annotations

import io
import re
import signal
import subprocess
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pulp

from lanesolve.errors import SolverError
from lanesolve.model.arrays import Answer, SparseModel
from lanesolve.model.result import SolveStatus

_BOUND = re.compile(r"^Lower bound:\s*(\S+)", re.MULTILINE)
_BEST_POSSIBLE = re.compile(r"best possible\s+(\S+?)\)", re.MULTILINE)
_PROVEN = re.compile(r"^Result - Optimal solution found\s*$", re.MULTILINE)
_VERSION = re.compile(r"^Version:\s*(\S+)", re.MULTILINE)
_OBJECTIVE = re.compile(r"objective value\s+(\S+)")
_GAP = re.compile(r"^Gap:\s*(\S+)", re.MULTILINE)


def cbc_backend(is_mip: bool, time_limit: float | None, gap: float | None) -> pulp.LpSolver:
    """PuLP's handle on its bundled CBC program (path, options, status reader), or :class:`SolverError`."""
    with warnings.catch_warnings():
        # PuLP 3 flags PULP_CBC_CMD for removal in 4.0, yet it is the class that knows the CBC in PuLP's wheel;
        # the warning would only alarm planners.
        warnings.simplefilter("ignore", DeprecationWarning)
        backend = pulp.PULP_CBC_CMD(mip=is_mip, msg=False, timeLimit=time_limit, gapRel=gap if is_mip else None)
    if not backend.available():
        raise SolverError(f"the CBC program bundled with PuLP was not found or cannot run at {backend.path} "
                          "(reinstall PuLP: pip install --force-reinstall pulp)")
    return backend


def status_from_codes(status: int, sol_status: int, is_mip: bool) -> SolveStatus:
    """Map PuLP's status and solution status codes to :class:`SolveStatus` (table in the module docstring)."""
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


def _number_text(values: np.ndarray) -> list[str]:
    """Shortest round-trip text of each float (``repr``): exact, and short for the many 1.0 and -1.0 of a network."""
    return list(map(repr, values.tolist()))


def write_mps(model: SparseModel, path: str | Path) -> None:
    """Write ``model`` as a fixed-sense MPS file: rows ``R<i>``, columns ``X<j>`` (the model's order).

    Written with a few list operations over the nonzeros rather than an object per term. Integer columns stand
    between ``MARKER INTORG`` and ``INTEND`` lines and always get an explicit upper bound (``PL`` when they have
    none), because some MPS readers take an unbounded integer column to be binary.
    """
    n_rows, n_columns = model.n_rows, model.n_columns
    row_name = np.array([f"R{i}" for i in range(n_rows)] + ["OBJ"], dtype=object)
    column_name = np.array([f"X{j}" for j in range(n_columns)], dtype=object)
    sense = np.where(model.row_lower == model.row_upper, "E", np.where(np.isinf(model.row_lower), "L", "G"))
    rhs = np.where(sense == "G", model.row_lower, model.row_upper)
    if np.isinf(rhs).any():
        raise SolverError("the model has a row without a finite bound (a lanesolve bug: please report it)")

    matrix = model.matrix.tocsc()
    cost = model.cost
    # Objective entries go after each column's rows (row key n_rows sorts last); an empty column gets a 0 objective
    # entry so that the column exists for its bounds.
    with_objective = np.flatnonzero((cost != 0) | (np.diff(matrix.indptr) == 0))
    rows = np.r_[matrix.indices, np.full(len(with_objective), n_rows)]
    columns = np.r_[np.repeat(np.arange(n_columns), np.diff(matrix.indptr)), with_objective]
    values = np.r_[matrix.data, cost[with_objective]]
    order = np.lexsort((rows, columns))
    columns = columns[order]
    entries = list(map("    {} {} {}\n".format, column_name[columns], row_name[rows[order]],
                       _number_text(values[order])))
    # MARKER lines around each run of integer columns, inserted from the back so positions stay valid.
    flags = np.r_[False, model.integer, False].astype(np.int8)
    starts, stops = np.flatnonzero(np.diff(flags) == 1), np.flatnonzero(np.diff(flags) == -1)
    for run, (first, last) in reversed(list(enumerate(zip(starts.tolist(), stops.tolist())))):
        at_first, at_stop = np.searchsorted(columns, [first, last])
        entries.insert(int(at_stop), f"    MARKER{run}  'MARKER'  'INTEND'\n")
        entries.insert(int(at_first), f"    MARKER{run}  'MARKER'  'INTORG'\n")

    lower, upper = model.lower, model.upper
    bound_lines = []
    for kind, chosen, numbers in (("LO", np.isfinite(lower) & (lower != 0), lower),
                                  ("MI", np.isneginf(lower), None),
                                  ("UP", np.isfinite(upper), upper),
                                  ("PL", model.integer & np.isinf(upper), None)):
        at = np.flatnonzero(chosen)
        texts = _number_text(numbers[at]) if numbers is not None else [""] * len(at)
        bound_lines += map(f" {kind} BND {{}} {{}}\n".format, column_name[at], texts)
    with open(path, "w", encoding="ascii") as fh:
        fh.write("NAME          lanesolve\nROWS\n N  OBJ\n")
        fh.writelines(map(" {}  {}\n".format, sense.tolist(), row_name[:n_rows]))
        fh.write("COLUMNS\n")
        fh.writelines(entries)
        fh.write("RHS\n")
        fh.writelines(map("    RHS {} {}\n".format, row_name[:n_rows], _number_text(rhs)))
        fh.write("BOUNDS\n")
        fh.writelines(bound_lines)
        fh.write("ENDATA\n")


def read_cbc_solution(path: str | Path, backend: pulp.LpSolver, n_rows: int, n_columns: int,
                      is_mip: bool = False) -> tuple[Answer, float | None]:
    """Read a CBC solution file written for :func:`write_mps` names, in one pass with pandas' C parser.

    Returns the answer (values, row duals, reduced costs; duals only for an LP) and the objective CBC states on
    its first line (None when it states none). Lines are ``index name value dual-or-reduced-cost``, with ``**`` in
    front of a row or column that violates its bounds (infeasible plans).
    """
    status, sol_status = backend.get_status(str(path))
    answer = Answer(status_from_codes(status, sol_status, is_mip), np.zeros(n_columns), np.zeros(n_rows),
                    np.zeros(n_columns))
    with open(path) as fh:
        first = fh.readline()
        body = fh.read().replace("**", "  ")
    stated = _OBJECTIVE.search(first)
    objective = float(stated.group(1)) if stated else None
    if not body.strip():
        return answer, objective
    table = pd.read_csv(io.StringIO(body), sep=r"\s+", header=None, names=["i", "name", "value", "dual"],
                        usecols=["name", "value", "dual"], dtype={"name": str, "value": float, "dual": float})
    names = table["name"].str
    kind = names[0].to_numpy()
    number = names[1:].astype(np.int64).to_numpy()
    values, duals = table["value"].to_numpy(), table["dual"].to_numpy()
    is_row, is_column = kind == "R", kind == "X"
    answer.value[number[is_column]] = values[is_column]
    if not is_mip:  # after branch and bound the file's duals belong to the last LP solved, not to the model
        answer.row_dual[number[is_row]] = duals[is_row]
        answer.reduced_cost[number[is_column]] = duals[is_column]
    return answer, objective


def cbc_command(backend: pulp.LpSolver, mps_path: str | Path, solution_path: str | Path) -> list[str]:
    """The CBC command line PuLP's ``PULP_CBC_CMD.solve_CBC`` builds for a model read from an MPS file: the same
    program (``backend.path``) and the same options in the same order (time limit, ``timeMode``, ``ratio`` for a
    MIP gap, ``-solve`` for a MIP or ``-initialSolve`` for an LP, ``-printingOptions all``, ``-solution``)."""
    command = [backend.path, str(mps_path)]
    if backend.timeLimit is not None:
        command += ["-sec", str(backend.timeLimit)]
    for option in list(backend.options) + backend.getOptions():
        command += ("-" + option).split()
    command += ["-solve" if backend.mip else "-initialSolve", "-printingOptions", "all", "-solution",
                str(solution_path)]
    return command


def best_bound(log_text: str, objective: float | None) -> float | None:
    """CBC's best lower bound on the objective when it stopped (see the module docstring), or None."""
    found = _BOUND.findall(log_text)
    if found:
        return float(found[-1])
    if _PROVEN.search(log_text) and objective is not None:
        return objective
    found = _BEST_POSSIBLE.findall(log_text)
    return float(found[-1]) if found else None


#: Most seconds CBC gets after SIGINT to end its search and write its plan before it is terminated (our choice:
#: the stop itself is immediate in the branch and bound; the rest is writing the solution file).
INTERRUPT_GRACE = 3.0


def interrupt_grace(time_limit: float | None) -> float:
    """Seconds CBC gets after SIGINT: 5 % of the limit, at least 1 and at most :data:`INTERRUPT_GRACE` (a short
    limit cannot afford a long wait; a first LP that ignores the interrupt would waste all of it)."""
    if time_limit is None:
        return INTERRUPT_GRACE
    return min(INTERRUPT_GRACE, max(1.0, 0.05 * time_limit))


def _interrupt(process: subprocess.Popen) -> None:
    """SIGINT where there is one (POSIX); elsewhere terminate at once."""
    try:
        process.send_signal(signal.SIGINT)
    except (ValueError, AttributeError):
        process.terminate()


def run_watched(command: list[str], log, deadline: float | None, grace: float = INTERRUPT_GRACE
                ) -> tuple[int | None, bool]:
    """Run CBC, stopping it at ``deadline`` (a :func:`time.monotonic` time) if it is still running.

    CBC checks its own ``-sec`` limit only between steps; in a long first LP it does not look at the clock at
    all. So at the deadline it gets SIGINT, its own "ctrl-c" stop: in the branch and bound it then ends the search
    and writes its best plan to the solution file like a time limit would ("Stopped on ..."). If it has not ended
    after ``grace`` seconds (:func:`interrupt_grace`) it gets SIGTERM, then SIGKILL; a program killed that way leaves no
    solution file, and the caller builds a plan itself.

    Returns
    -------
    (int or None, bool)
        CBC's exit code (None when it had to be terminated or killed: its solution file, if any, may be
        incomplete) and whether it had to be stopped.
    """
    process = subprocess.Popen(command, stdout=log, stderr=log, stdin=subprocess.DEVNULL)
    try:
        if deadline is None:
            return process.wait(), False
        try:
            return process.wait(timeout=max(deadline - time.monotonic(), 0.0)), False
        except subprocess.TimeoutExpired:
            pass
        _interrupt(process)
        try:
            return process.wait(timeout=grace), True
        except subprocess.TimeoutExpired:
            pass
        for stop in (subprocess.Popen.terminate, subprocess.Popen.kill):
            stop(process)
            try:
                process.wait(timeout=1.0)
                break
            except subprocess.TimeoutExpired:
                pass
        # Killed, perhaps while writing: a solution file it left may be cut short, and is never read.
        return None, True
    finally:
        if process.poll() is None:  # an exception on the way (KeyboardInterrupt): never leave CBC running
            process.kill()
            process.wait()


def solve_with_cbc(model: SparseModel, time_limit: float | None = None, gap: float | None = None,
                   deadline: float | None = None) -> Answer:
    """Solve ``model`` with the bundled CBC program through an MPS file and a solution file in a temporary folder.

    Parameters
    ----------
    model : SparseModel
    time_limit : float, optional
        Seconds CBC may run (``-sec``, elapsed time).
    gap : float, optional
        Relative MIP gap at which CBC stops (``-ratio``); ignored for an LP.
    deadline : float, optional
        A :func:`time.monotonic` time at which CBC is stopped if it still runs (:func:`run_watched`); its plan so
        far is kept when it writes one (status ``feasible``), else the status is ``not_solved``.

    Returns
    -------
    Answer
        With the log, the solver name and version, and for a MIP the best bound.

    Raises
    ------
    SolverError
        CBC is missing, could not be started, failed, or its answer could not be read.
    """
    backend = cbc_backend(model.is_mip, time_limit, gap)
    with tempfile.TemporaryDirectory(prefix="lanesolve-") as folder:
        mps_path, solution_path, log_path = (Path(folder) / name for name in ("model.mps", "model.sol", "cbc.log"))
        write_mps(model, mps_path)
        command = cbc_command(backend, mps_path, solution_path)
        tick = time.perf_counter()
        try:
            with open(log_path, "w") as log:
                code, stopped = run_watched(command, log, deadline, min(INTERRUPT_GRACE, interrupt_grace(time_limit)))
        except OSError as exc:
            raise SolverError(f"the CBC program could not be started ({exc}); reinstall PuLP: "
                              "pip install --force-reinstall pulp") from exc
        seconds = time.perf_counter() - tick
        log_text = log_path.read_text(errors="replace") if log_path.exists() else ""
        if stopped and (code is None or not solution_path.exists()):
            # Stopped before it wrote an answer (still in its first LP, where it does not look at the clock).
            answer = Answer(SolveStatus.NOT_SOLVED, np.zeros(model.n_columns), np.zeros(model.n_rows),
                            np.zeros(model.n_columns))
            objective = None
        elif code != 0 or not solution_path.exists():
            raise SolverError(f"the CBC solver failed (exit code {code}) (rerun with the solver log shown to see "
                              "why; a damaged PuLP install is fixed by: pip install --force-reinstall pulp)")
        else:
            try:
                answer, objective = read_cbc_solution(solution_path, backend, model.n_rows, model.n_columns,
                                                      model.is_mip)
            except (OSError, ValueError, IndexError) as exc:
                raise SolverError(f"the CBC solver's answer could not be read: {exc}") from exc
            if stopped and answer.status is SolveStatus.OPTIMAL:
                # Interrupted, CBC may word its stop as a finish; a plan it was not let finish is not proven.
                answer.status = SolveStatus.FEASIBLE if model.is_mip else SolveStatus.NOT_SOLVED
    version = _VERSION.search(log_text)
    answer.solver = f"CBC {version.group(1) if version else '(version unknown)'} (PuLP {pulp.__version__})"
    answer.seconds, answer.log = seconds, log_text
    answer.bound = best_bound(log_text, objective) if model.is_mip else objective
    gap_line = _GAP.findall(log_text) if model.is_mip else []
    answer.gap = float(gap_line[-1]) if gap_line else None
    return answer
