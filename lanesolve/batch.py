"""Batch runs: solve many workbooks in parallel processes, or on a Dask cluster, and summarise every run.

Each workbook is solved exactly as ``lanesolve solve`` would (:func:`lanesolve.pipeline.run`): its result sheets
are written back into it and its HTML summary beside it. One workbook failing never stops the others; its error
is recorded in the :class:`BatchReport`.

Running on a Dask cluster
-------------------------
With ``dask_address`` (``"tcp://scheduler-host:8786"``) the workbooks go to an existing ``dask.distributed``
cluster. A task carries the workbook's bytes and returns the solved workbook's bytes, its HTML summary and the JSON
document, so the workers need no shared disk; this process writes the results beside the inputs. The workers need
lanesolve installed (same version) and nothing else: start a scheduler with ``dask scheduler`` and workers with
``dask worker tcp://scheduler-host:8786 --nthreads 1`` (one thread per worker process: each solve runs a CBC process
of its own). Dask sends pickled data between the client and the workers, so use it only on a network you trust.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
import sys
import tempfile
import time
from collections.abc import Callable, Iterable
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import asdict, dataclass, field
from pathlib import Path

from lanesolve.errors import LanesolveError, NoPlanError, SolverError, WorkbookError, WriteError
from lanesolve.write import atomic
from lanesolve.write import paths as write_paths

#: Status of a run that failed in an unexpected way (a bug in lanesolve; the error names the exception type).
INTERNAL_ERROR = "internal_error"
#: Columns of :meth:`BatchReport.to_csv` and :meth:`BatchReport.table`.
SUMMARY_COLUMNS = ["path", "status", "total_cost", "seconds", "error"]


@dataclass
class BatchRun:
    """One workbook's run.

    Attributes
    ----------
    path : str
        The input workbook.
    status : str
        The solve status when a plan was found (``"optimal"``, ``"feasible"``), else ``"input_error"``,
        ``"write_error"``, ``"infeasible"`` (or another no-plan status), ``"solver_error"``, ``"error"`` or
        :data:`INTERNAL_ERROR`.
    total_cost : float
        Cost of the plan; NaN without one.
    seconds : float
        Wall time of the run (on the worker, for Dask).
    error : str
        What went wrong, empty when a plan was found.
    exit_code : int
        What ``lanesolve solve`` would have exited with for this workbook (0 with a plan).
    document : dict or None
        The ``--json`` document of the run when it produced one (not part of the CSV or the table).
    """

    path: str
    status: str
    total_cost: float = math.nan
    seconds: float = 0.0
    error: str = ""
    exit_code: int = 0
    document: dict | None = field(default=None, repr=False, compare=False)

    @property
    def has_plan(self) -> bool:
        return self.exit_code == 0


@dataclass
class BatchReport:
    """Every run of a batch, in the order the paths were given, and how the batch ran."""

    runs: list[BatchRun]
    seconds: float = 0.0
    workers: int = 1
    backend: str = "local"

    @property
    def failed(self) -> list[BatchRun]:
        return [run for run in self.runs if not run.has_plan]

    @property
    def exit_code(self) -> int:
        """0 when every workbook got a plan, else the highest exit code among the runs."""
        return max((run.exit_code for run in self.runs), default=0)

    def rows(self) -> list[dict]:
        return [{k: getattr(run, k) for k in SUMMARY_COLUMNS} for run in self.runs]

    def to_csv(self, path: str | os.PathLike) -> None:
        """Write the summary (one row per workbook, :data:`SUMMARY_COLUMNS`) as CSV, UTF-8, atomically.

        Text cells a spreadsheet program would run as a formula are neutralised (:func:`csv_safe`); the JSON
        summary keeps the raw values.
        """
        text = io.StringIO(newline="")
        writer = csv.DictWriter(text, fieldnames=SUMMARY_COLUMNS)
        writer.writeheader()
        for row in self.rows():
            row["total_cost"] = "" if math.isnan(row["total_cost"]) else repr(row["total_cost"])
            row["seconds"] = f"{row['seconds']:.3f}"
            writer.writerow({k: csv_safe(v) if k in ("path", "status", "error") else v for k, v in row.items()})
        with atomic.replacing(path, "the batch summary") as handle:
            handle.write(text.getvalue().encode("utf-8"))

    def write(self, csv_path: str | os.PathLike, json_path: str | os.PathLike) -> None:
        """Write the summary as CSV to ``csv_path`` and as JSON (raw values) to ``json_path``, each atomically."""
        self.to_csv(csv_path)
        with atomic.replacing(json_path, "the batch summary JSON") as handle:
            handle.write(json.dumps(self.to_json(), indent=2).encode("utf-8"))

    def to_json(self, documents: bool = False) -> dict:
        """The summary as a JSON-ready dict; with ``documents`` each run also carries its ``--json`` document."""
        runs = []
        for run in self.runs:
            item = {k: v for k, v in asdict(run).items() if k != "document"}
            item["total_cost"] = None if math.isnan(run.total_cost) else run.total_cost
            item["seconds"] = round(run.seconds, 4)
            if documents:
                item["result"] = run.document
            runs.append(item)
        return {"workbooks": len(self.runs), "with_plan": len(self.runs) - len(self.failed),
                "failed": len(self.failed), "seconds": round(self.seconds, 4), "workers": self.workers,
                "backend": self.backend, "runs": runs}

    def table(self) -> str:
        """A plain-text table for the terminal, with a closing line of totals."""
        body = [[run.path, run.status, "" if math.isnan(run.total_cost) else f"{run.total_cost:,.2f}",
                 f"{run.seconds:.2f}", _first_line(run.error)] for run in self.runs]
        header = ["workbook", "status", "total cost", "seconds", "error"]
        widths = [max(len(r[i]) for r in [header, *body]) for i in range(len(header) - 1)]
        lines = []
        for cells in [header, ["-" * w for w in widths] + ["-----"], *body]:
            lines.append("  ".join(c.rjust(w) if i in (2, 3) else c.ljust(w)
                                   for i, (c, w) in enumerate(zip(cells, widths)))
                         + "  " + cells[-1])
        lines.append(f"{len(self.runs) - len(self.failed)} of {len(self.runs)} workbook(s) solved with a plan in "
                     f"{self.seconds:.2f} s ({self.backend}, {self.workers} worker(s))")
        return "\n".join(line.rstrip() for line in lines)


#: First characters that make a spreadsheet program read a CSV cell as a formula (or, tab and CR, that some
#: programs strip before looking): the cell-injection list of the OWASP "CSV Injection" page (recalled from memory).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def csv_safe(text: str) -> str:
    """``text`` with a single quote in front when a spreadsheet program would run it as a formula.

    >>> csv_safe("=1+2"), csv_safe("north.xlsx")
    ("'=1+2", 'north.xlsx')
    """
    return "'" + text if isinstance(text, str) and text.startswith(FORMULA_STARTS) else text


def _first_line(text: str) -> str:
    lines = text.splitlines()
    if len(lines) > 1:
        return f"{lines[0]} (+{len(lines) - 1} more)"
    return lines[0] if lines else ""


# ----------------------------------------------------------------------------------------------------------------
# One workbook (runs in a worker process; top-level so it can be pickled)


def _failure(path: str, error: BaseException, seconds: float) -> BatchRun:
    """The BatchRun of a run that raised ``error``."""
    if isinstance(error, LanesolveError):
        if isinstance(error, WorkbookError):
            status = "input_error"
        elif isinstance(error, WriteError):
            status = "write_error"
        elif isinstance(error, NoPlanError):
            outcome = error.result
            result = getattr(outcome, "result", outcome)
            status = getattr(getattr(result, "status", None), "value", "infeasible")
        elif isinstance(error, SolverError):
            status = "solver_error"
        else:
            status = "error"
        document = None
        if isinstance(error, NoPlanError) and hasattr(error.result, "to_json"):
            document = {**error.result.to_json(), "reasons": error.reasons}
        return BatchRun(path, status, math.nan, seconds, str(error), error.exit_code, document)
    # Anything else is a bug; record its type so it can be reported, and keep going with the other workbooks.
    return BatchRun(path, INTERNAL_ERROR, math.nan, seconds, f"{type(error).__name__}: {error}",
                    LanesolveError.exit_code)


def solve_one(path: str, time_limit: float | None = None, solver: str | None = None,
              force: bool = False) -> BatchRun:
    """Solve one workbook as ``lanesolve solve`` would and return its :class:`BatchRun`; never raises."""
    tick = time.perf_counter()
    try:
        if not Path(path).exists():
            raise WorkbookError(f"{path}: no such file (check the name and folder)")
        from lanesolve import pipeline  # imported here so a batch can start before the solver stack is loaded

        outcome = pipeline.run(path, time_limit=time_limit, solver=solver, force=force)
    except Exception as error:  # noqa: BLE001 -- one workbook must never stop the batch
        return _failure(str(path), error, time.perf_counter() - tick)
    return BatchRun(str(path), outcome.result.status.value, float(outcome.result.total_cost),
                    time.perf_counter() - tick, "", 0, outcome.to_json())


def solve_bytes(name: str, data: bytes, time_limit: float | None = None, solver: str | None = None) -> dict:
    """Dask task: solve a workbook given as bytes; return the run and the written files as bytes.

    Parameters
    ----------
    name : str
        The workbook's file name (its suffix picks the format; it names the files in the results).
    data : bytes
        The workbook's contents.
    time_limit : float, optional
        Seconds the solver may run.
    solver : {"cbc", "highs"}, optional
        Overrides the workbook's ``solver`` setting.

    Returns
    -------
    dict
        ``run``: the :class:`BatchRun` fields (``path`` is ``name``); ``workbook``: the solved workbook's bytes, or
        None when nothing was written; ``summary``: the HTML summary's bytes, or None.
    """
    from lanesolve.pipeline import summary_path_for

    with tempfile.TemporaryDirectory(prefix="lanesolve-") as folder:
        path = Path(folder) / Path(name).name
        path.write_bytes(data)
        run = solve_one(str(path), time_limit, solver)
        summary = summary_path_for(path)
        written = summary.exists()  # the summary is written last, after the workbook
        return {"run": asdict(run), "workbook": path.read_bytes() if written else None,
                "summary": summary.read_bytes() if written else None}


# ----------------------------------------------------------------------------------------------------------------
# The batch


class _Progress:
    """A one-line ``\\r`` counter on stderr, shown only when stderr is a terminal."""

    def __init__(self, total: int, enabled: bool):
        self.total, self.done = total, 0
        self.enabled = enabled and total > 0 and sys.stderr.isatty()

    def step(self, run: BatchRun) -> None:
        self.done += 1
        if self.enabled:
            mark = "ok" if run.has_plan else run.status
            sys.stderr.write(f"\r[{self.done}/{self.total}] {Path(run.path).name}: {mark}\x1b[K")
            sys.stderr.flush()

    def close(self) -> None:
        if self.enabled:
            sys.stderr.write("\n")
            sys.stderr.flush()


def run_batch(
    paths: Iterable[str | os.PathLike],
    workers: int = 1,
    dask_address: str | None = None,
    progress: bool = True,
    time_limit: float | None = None,
    solver: str | None = None,
    summary_csv: str | os.PathLike | None = None,
    force: bool = False,
) -> BatchReport:
    """Solve many workbooks; one failure never stops the rest.

    Parameters
    ----------
    paths : iterable of path-like
        The workbooks. Each is solved as ``lanesolve solve`` would: results written back into it, a summary beside.
    workers : int
        Parallel processes on this machine; 1 runs in this process. Ignored with ``dask_address``.
    dask_address : str, optional
        Address of a Dask scheduler (``"tcp://host:8786"``): run on that cluster instead (see the module docstring).
    progress : bool
        Show a one-line progress counter on stderr when it is a terminal.
    time_limit : float, optional
        Seconds the solver may run on each workbook (overrides their ``time_limit_s`` setting).
    solver : {"cbc", "highs"}, optional
        Overrides each workbook's ``solver`` setting.
    summary_csv : path-like, optional
        Write the batch summary here as CSV, and as JSON beside it (same name, ``.json``), when the batch ends.
        Both are checked with every workbook's files before anything is solved (:func:`lanesolve.write.paths.plan_batch`).
    force : bool
        Replace existing files lanesolve did not write (the summaries, and each workbook's HTML summary).

    Returns
    -------
    BatchReport
        One :class:`BatchRun` per path, in the order given.

    Raises
    ------
    LanesolveError
        ``workers`` is below 1, Dask is not installed, or its scheduler cannot be reached.
    WriteError
        The batch summary files clash with each other or with a workbook or its summary, or two workbooks' summaries
        are one file, or a summary file exists that lanesolve did not write (without ``force``); nothing is solved.
        Failures of single workbooks are never raised; they are recorded in the report.
    """
    paths = [str(p) for p in paths]
    if workers < 1:
        raise LanesolveError(f"workers must be at least 1, not {workers}")
    summaries = None
    if summary_csv is not None:
        summaries = write_paths.plan_batch(paths, summary_csv, force)
    tick = time.perf_counter()
    runs: dict[int, BatchRun] = {}
    # The same workbook twice would have two processes writing into one file; run it once.
    seen: dict[str, int] = {}
    todo: list[int] = []
    for index, path in enumerate(paths):
        key = os.path.realpath(path)
        if key in seen:
            runs[index] = BatchRun(path, "input_error", math.nan, 0.0,
                                   f"{path} is listed twice in the batch (it is solved once, as item {seen[key] + 1})",
                                   WorkbookError.exit_code)
        else:
            seen[key] = index
            todo.append(index)
    bar = _Progress(len(paths), progress)
    for index in runs:
        bar.step(runs[index])
    try:
        if dask_address is not None:
            workers = _run_dask(paths, todo, dask_address, time_limit, solver, runs, bar.step, force)
            backend = "dask"
        elif workers == 1 or len(todo) <= 1:
            for index in todo:
                runs[index] = solve_one(paths[index], time_limit, solver, force)
                bar.step(runs[index])
            backend = "local"
        else:
            with ProcessPoolExecutor(max_workers=min(workers, len(todo))) as pool:
                futures = {pool.submit(solve_one, paths[index], time_limit, solver, force): index for index in todo}
                for future in as_completed(futures):
                    index = futures[future]
                    try:
                        runs[index] = future.result()
                    except Exception as error:  # noqa: BLE001 -- a worker process died (killed, out of memory)
                        runs[index] = _failure(paths[index], error, 0.0)
                    bar.step(runs[index])
            backend = "processes"
    finally:
        bar.close()
    report = BatchReport([runs[i] for i in range(len(paths))], time.perf_counter() - tick, workers, backend)
    if summaries is not None:
        report.write(summaries[0].real, summaries[1].real)
    return report


def _dask_client(address: str):
    try:
        from dask.distributed import Client
    except ImportError as error:
        raise LanesolveError("running on a Dask cluster needs dask.distributed, which is not installed "
                             "(install lanesolve[dask], or pip install \"dask[distributed]\")") from error
    try:
        return Client(address, timeout=30)
    except (OSError, TimeoutError) as error:
        raise LanesolveError(f"cannot reach the Dask scheduler at {address}: {error} "
                             "(check the address and that the scheduler is running)") from error


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _collect(path: str, sent_checksum: str, answer: dict, plan: write_paths.WritePlan) -> BatchRun:
    """Turn a Dask task's answer into a BatchRun, writing the solved workbook and summary where ``plan`` says
    (beside the input; symbolic links written through to their targets)."""
    run = BatchRun(**{**answer["run"], "path": path})
    if answer["workbook"] is None:
        return run

    def unchanged() -> None:
        # Someone may have saved the workbook while it was solved remotely; never overwrite that.
        try:
            same = _sha256(Path(path).read_bytes()) == sent_checksum
        except OSError:
            same = False
        if not same:
            raise WriteError(f"{path}: the workbook changed while solving; run again (its results were not written)")

    try:
        unchanged()
        with atomic.replacing(plan.workbook.real, "the results to", before_replace=unchanged) as handle:
            handle.write(answer["workbook"])
        with atomic.replacing(plan.summary.real, "the HTML summary") as handle:
            handle.write(answer["summary"])
    except WriteError as error:
        return BatchRun(path, "write_error", math.nan, run.seconds, str(error), error.exit_code)
    if run.document is not None:
        # The worker solved a temporary copy; show the paths the planner knows.
        run.document.update(input=path, output=path, summary=str(plan.summary.given))
    return run


def _run_dask(paths: list[str], todo: list[int], address: str, time_limit: float | None, solver: str | None,
              runs: dict[int, BatchRun], step: Callable[[BatchRun], None], force: bool = False) -> int:
    """Run the batch on the cluster at ``address``, filling ``runs``; return how many workers it had."""
    client = _dask_client(address)  # first: it turns a missing dask into a clear LanesolveError
    from dask.distributed import as_completed as dask_completed

    try:
        worker_count = len(client.scheduler_info().get("workers", {}))
        futures = {}
        checksums = {}
        plans = {}
        for index in todo:
            try:
                plans[index] = write_paths.plan_solve(paths[index], force=force)
            except LanesolveError as error:
                runs[index] = _failure(paths[index], error, 0.0)
                step(runs[index])
                continue
            try:
                data = Path(paths[index]).read_bytes()
            except OSError as error:
                runs[index] = _failure(paths[index], WorkbookError(
                    f"{paths[index]} cannot be read: {error.strerror or error} (check the name and folder)"), 0.0)
                step(runs[index])
                continue
            checksums[index] = _sha256(data)
            future = client.submit(solve_bytes, Path(paths[index]).name, data, time_limit, solver, pure=False)
            futures[future] = index
        for future in dask_completed(list(futures)):
            index = futures[future]
            try:
                runs[index] = _collect(paths[index], checksums[index], future.result(), plans[index])
            except Exception as error:  # noqa: BLE001 -- a worker died or lacks lanesolve; keep the others
                runs[index] = _failure(paths[index], error, 0.0)
            step(runs[index])
    finally:
        client.close()
    return worker_count
