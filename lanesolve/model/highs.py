"""Solve a :class:`~lanesolve.model.arrays.SparseModel` with HiGHS in memory, through ``highspy`` (no files).

highspy is installed with lanesolve. The model's arrays go to ``Highs.passModel`` as they are
(column-wise matrix, bounds, costs, integrality); status, values, duals, the MIP gap and the best bound are read from
the API.

Status
------
==========================================================  ==========================================
``HighsModelStatus``                                        :class:`~lanesolve.model.result.SolveStatus`
==========================================================  ==========================================
``kOptimal``                                                ``optimal`` (within ``mip_rel_gap`` for a MIP)
``kModelEmpty`` (no column)                                 ``optimal`` when every row admits 0, else
                                                            ``infeasible``
``kInfeasible``, ``kUnboundedOrInfeasible``                 ``infeasible`` (costs are never negative, so
                                                            the model cannot be unbounded)
``kUnbounded``                                              ``unbounded``
a limit (time, iterations, ...) with a feasible MIP point   ``feasible``
anything else (an LP stopped on a limit included)           ``not_solved``
==========================================================  ==========================================
"""

from __future__ import annotations

import contextlib
import ctypes
import math
import os
import sys
import time

import numpy as np

from lanesolve.errors import SolverError
from lanesolve.model.arrays import Answer, SparseModel
from lanesolve.model.result import SolveStatus


@contextlib.contextmanager
def stdout_to_stderr(silent: bool = False):
    """Send what native code writes to file descriptor 1 to 2 instead (to nowhere when ``silent``) while inside
    the block.

    highspy prints a banner on stdout whenever a solver object is made, even with output off; ``--json`` promises
    stdout holds only the JSON document, and a planner who did not ask for the solver's log need not see it.
    """
    sys.stdout.flush()
    saved = os.dup(1)
    sink = os.open(os.devnull, os.O_WRONLY) if silent else None
    try:
        os.dup2(2 if sink is None else sink, 1)
        yield
    finally:
        sys.stdout.flush()
        # Native code writes through C's buffered stdout: flush it while it still points at stderr, or the banner
        # would reach the real stdout later (when stdout is a pipe, C buffers it until exit).
        _flush_c_stdout()
        os.dup2(saved, 1)
        os.close(saved)
        if sink is not None:
            os.close(sink)


def _flush_c_stdout() -> None:
    try:
        ctypes.CDLL(None).fflush(None)
    except (OSError, AttributeError):  # no C library to ask (not on Linux or macOS): nothing buffered to flush
        pass


def _import_highspy():
    try:
        import highspy
    except ImportError as exc:
        raise SolverError('solver "highs" needs the highspy package, which lanesolve installs; it is missing '
                          '(reinstall it with: pip install highspy)') from exc
    return highspy


def _status(highspy, model_status, has_point: bool, is_mip: bool, empty_rows_hold: bool) -> SolveStatus:
    """HiGHS's model status to :class:`SolveStatus` (table in the module docstring)."""
    known = highspy.HighsModelStatus
    if model_status == known.kOptimal:
        return SolveStatus.OPTIMAL
    if model_status == known.kModelEmpty:
        # No column (no active lane and no shortfall allowed): HiGHS does not judge the rows, so judge them here;
        # with nothing to decide every row's value is 0.
        return SolveStatus.OPTIMAL if empty_rows_hold else SolveStatus.INFEASIBLE
    if model_status in (known.kInfeasible, known.kUnboundedOrInfeasible):
        return SolveStatus.INFEASIBLE
    if model_status == known.kUnbounded:
        return SolveStatus.UNBOUNDED
    if is_mip and has_point and model_status not in (known.kNotset, known.kLoadError, known.kModelError,
                                                     known.kPresolveError, known.kSolveError,
                                                     known.kPostsolveError, known.kModelEmpty, known.kUnknown):
        return SolveStatus.FEASIBLE
    return SolveStatus.NOT_SOLVED


def solve_with_highs(model: SparseModel, time_limit: float | None = None, gap: float | None = None,
                     msg: bool = False, start: np.ndarray | None = None) -> Answer:
    """Solve ``model`` with HiGHS in this process.

    Parameters
    ----------
    model : SparseModel
    time_limit : float, optional
        Seconds HiGHS may run (option ``time_limit``).
    gap : float, optional
        Relative MIP gap at which HiGHS stops (option ``mip_rel_gap``); ignored for an LP.
    msg : bool
        Show HiGHS's log (on stderr).
    start : numpy.ndarray, optional
        Column values of a known plan, given to a MIP search as its first incumbent (``setSolution``).

    Returns
    -------
    Answer
        Values; for an LP the row duals, reduced costs and basis, and its optimal objective as the bound; for a MIP
        the best bound (``mip_dual_bound``) and HiGHS's own gap (``mip_gap``).

    Raises
    ------
    SolverError
        highspy is not installed, or HiGHS refused the model.
    """
    highspy = _import_highspy()
    matrix = model.matrix.tocsc()
    tick = time.perf_counter()
    with stdout_to_stderr(silent=not msg):
        highs = highspy.Highs()
        highs.setOptionValue("output_flag", bool(msg))
        if msg:
            highs.setOptionValue("log_to_console", True)
        if time_limit is not None:
            highs.setOptionValue("time_limit", float(time_limit))
        if gap is not None and model.is_mip:
            highs.setOptionValue("mip_rel_gap", float(gap))
        integrality = np.where(model.integer, int(highspy.HighsVarType.kInteger),
                               int(highspy.HighsVarType.kContinuous)).astype(np.int32)
        loaded = highs.passModel(model.n_columns, model.n_rows, int(matrix.nnz), int(highspy.MatrixFormat.kColwise),
                                 int(highspy.ObjSense.kMinimize), 0.0, model.cost, model.lower, model.upper,
                                 model.row_lower, model.row_upper, matrix.indptr.astype(np.int32),
                                 matrix.indices.astype(np.int32), matrix.data, integrality)
        if loaded == highspy.HighsStatus.kError:
            raise SolverError("HiGHS refused the model (a lanesolve bug: please report it)")
        if start is not None and model.is_mip:
            known = highspy.HighsSolution()
            known.col_value = np.asarray(start, dtype=float)
            known.value_valid = True
            highs.setSolution(known)
        highs.run()
        seconds = time.perf_counter() - tick
    info = highs.getInfo()
    has_point = info.primal_solution_status == 2  # kSolutionStatusFeasible
    empty_rows_hold = bool(((model.row_lower <= 0) & (model.row_upper >= 0)).all())
    status = _status(highspy, highs.getModelStatus(), has_point, model.is_mip, empty_rows_hold)
    answer = Answer(status, np.zeros(model.n_columns), np.zeros(model.n_rows), np.zeros(model.n_columns),
                    solver=f"HiGHS {highs.version()} (highspy)", seconds=seconds)
    if status.has_plan and model.n_columns:
        solution = highs.getSolution()
        answer.value = np.asarray(solution.col_value, dtype=float)
        if not model.is_mip and info.dual_solution_status == 2:
            answer.row_dual = np.asarray(solution.row_dual, dtype=float)
            answer.reduced_cost = np.asarray(solution.col_dual, dtype=float)
            basis = highs.getBasis()
            if basis.valid:
                answer.column_basis = np.array([int(status) for status in basis.col_status], dtype=np.int8)
                answer.row_basis = np.array([int(status) for status in basis.row_status], dtype=np.int8)
        bound = info.mip_dual_bound if model.is_mip else info.objective_function_value
        answer.bound = float(bound) if math.isfinite(bound) else None
        if model.is_mip and math.isfinite(info.mip_gap):
            answer.gap = float(info.mip_gap)
    return answer
