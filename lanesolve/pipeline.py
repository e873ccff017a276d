"""The whole run in one screen: read -> validate -> check -> model and solve -> write back -> report.

Each stage is a module of its own and hands plain data to the next:

=================  ==========================  ==================================================
stage              module                      hands on
=================  ==========================  ==================================================
read               :mod:`lanesolve.read.reader`     :class:`~lanesolve.read.reader.RawWorkbook` (cell values)
validate           :mod:`lanesolve.read.validate`   :class:`~lanesolve.model.network.Network` + warnings
check              :mod:`lanesolve.model.checks`     reasons a plan cannot exist (before any solving)
model and solve    :mod:`lanesolve.model.analyse`    :class:`~lanesolve.model.result.Result`
write back         :mod:`lanesolve.write.writeback`  result sheets in the workbook (atomic replace)
report             :mod:`lanesolve.report.summary`     ``<stem>-summary.html``
=================  ==========================  ==================================================
"""

from __future__ import annotations

import difflib
import importlib
import os
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from lanesolve import contract
from lanesolve.errors import NoPlanError, Problem, SolverError, WorkbookError, WriteError
from lanesolve.progress import ProgressCallback, no_progress
from lanesolve.read import guard
from lanesolve.read import reader
from lanesolve.read import source
from lanesolve.runinfo import RunInfo
from lanesolve.write import atomic
from lanesolve.write import locking
from lanesolve.write import paths
from lanesolve.write.paths import WritePlan, summary_path_for  # noqa: F401 (part of this module's API)

if TYPE_CHECKING:
    import pandas as pd

    from lanesolve.model import plan_changes
    from lanesolve.model.network import Network
    from lanesolve.model.result import Result

# The stages after reading (validate, model and solve, write back, report) and pandas under them are imported where
# they are first used, after the workbook is read: a large workbook has them imported by a second thread while it
# is read (see AHEAD), and a file that is no workbook is answered without them. They stay names of this module
# for callers who used them from here (``pipeline.Network``...), loaded on first use.
_LAZY = {"Network": "lanesolve.model.network", "Result": "lanesolve.model.result",
         "SolveStatus": "lanesolve.model.result", "analyse": "lanesolve.model.analyse"}


def __getattr__(name: str):
    if name in _LAZY:
        module = importlib.import_module(_LAZY[name])
        return module if module.__name__.endswith("." + name) else getattr(module, name)
    raise AttributeError(f"module 'lanesolve.pipeline' has no attribute {name!r}")


@dataclass
class RunOutcome:
    """What :func:`run` returns: the network, the result, the run facts, and the warnings found on reading."""

    network: Network
    result: Result
    info: RunInfo
    warnings: list[Problem]
    scenario_results: dict[str, Result] = field(default_factory=dict)
    comparison: pd.DataFrame | None = None
    plan: WritePlan | None = None
    changes: plan_changes.PlanChanges | None = None

    def to_json(self, all_figures: bool = False) -> dict:
        """The ``--json`` document; ``all_figures`` lists every sensitivity figure (see
        :meth:`lanesolve.model.result.Result.to_json`), in the baseline and every scenario."""
        doc = self.result.to_json(all_figures=all_figures)
        sources = self.network.cost_source_by_lane()
        if sources is not None:
            for flow in doc["flows"]:
                distance, source = sources.get((flow["origin"], flow["destination"], flow["mode"]), (None, None))
                flow["distance"] = distance if distance == distance else None  # NaN -> null
                flow["cost_source"] = source
        if self.changes is not None:
            doc["changes"], doc["changes_summary"] = self.changes.to_json()
        if self.scenario_results:
            doc["scenarios"] = [{"scenario": name, **result.to_json(all_figures=all_figures)}
                                for name, result in self.scenario_results.items()]
        doc.update(
            input=self.info.input_path,
            output=self.info.output_path,
            summary=self.info.summary_path,
            input_sha256=self.info.checksum,
            lanesolve_version=self.info.version,
            run_at=self.info.started,
            warnings=[str(w) for w in self.warnings],
            timings={k: round(v, 4) for k, v in self.result.timings.items()},
        )
        return doc


def load(path: str | Path) -> tuple[Network, list[Problem]]:
    """Read and validate a workbook, its Scenarios sheet included; raise :class:`~lanesolve.errors.WorkbookError`
    listing every problem."""
    from lanesolve.read import validate

    raw = reader.read_workbook(path)
    network, warnings = validate.validate(raw)
    scenario_networks(raw, network)
    return network, warnings


def scenario_networks(raw: reader.RawWorkbook, network: Network,
                      only: list[str] | None = None) -> dict[str, Network]:
    """The network of every scenario on the workbook's Scenarios sheet (or of the ``only`` ones), by name.

    Raises
    ------
    WorkbookError
        The Scenarios sheet has problems, a scenario makes a value invalid, or ``only`` names an unknown scenario;
        every problem is listed, and nothing has been solved.
    """
    from lanesolve.model import scenarios

    sheet = next((s for name, s in raw.sheets.items()
                  if contract.normalize(name) == contract.normalize(scenarios.SHEET)), None)
    if sheet is None:
        if only:
            raise WorkbookError(Problem(scenarios.SHEET, None, None, None, "the workbook has no Scenarios sheet",
                                        "add one, or leave out --scenario"))
        return {}
    parsed, problems = scenarios.parse_scenarios(sheet.rows, sheet.percent_cells)
    by_name = {s.name: s for s in parsed}
    for name in only or []:
        if name not in by_name:
            close = difflib.get_close_matches(name, list(by_name), n=1)
            problems.append(Problem(scenarios.SHEET, None, "scenario", name, "no scenario has this name",
                                    f"did you mean '{close[0]}'?" if close else
                                    "known: " + ", ".join(by_name) if by_name else ""))
    variants = {}
    for name in (only or list(by_name)):
        if name in by_name:
            variants[name], found = scenarios.apply_scenario(network, by_name[name])
            problems.extend(found)
    if problems:
        raise WorkbookError(problems)
    return variants


def _solve_one(network: Network, time_limit: float | None, verbose: bool, progress: ProgressCallback,
               stage: str, solver: str | None = None, started: float | None = None) -> Result:
    """Run the cheap checks, then the solver when they find nothing.

    ``started`` (a :func:`time.monotonic` time) is when the time limit began to run: the solver gets what is left
    of it (the run's limit covers everything after reading).
    """
    from lanesolve.model import analyse, carrier_checks, checks

    with network.lanes_settled():  # nothing below edits the network: its active lanes are filtered once
        reasons = checks.presolve_checks(network) + carrier_checks.presolve_checks(network)
        if reasons:
            return analyse.explain_no_plan(network, reasons, time_limit=time_limit, solver=solver)
        limit = time_limit if time_limit is not None else network.settings.time_limit_s
        progress(stage, limit)
        deadline = started + limit if started is not None and limit else None
        return analyse.solve_and_analyse(network, time_limit=time_limit, solver=solver, msg=verbose,
                                         deadline=deadline)


def _no_pause(outcome: RunOutcome) -> None:
    """The default :data:`before_write`: nothing."""


#: Called with the :class:`RunOutcome` after solving and before anything is written. Tests set it to act at that
#: moment deterministically (save the workbook as a spreadsheet program would); it may raise to stop the run.
before_write: Callable[[RunOutcome], None] = _no_pause

#: What a run says when the workbook was saved by someone else between reading and writing.
CHANGED_MESSAGE = ("the workbook changed while solving; run again (nothing was written, so the change is kept and "
                   "no results of the old contents sit beside the new)")


def run(
    path: str | Path,
    output: str | Path | None = None,
    time_limit: float | None = None,
    write: bool = True,
    verbose: bool = False,
    progress: ProgressCallback = no_progress,
    scenario_names: list[str] | None = None,
    solver: str | None = None,
    email: str | Path | None = None,
    force: bool = False,
    tradeoff: int = 0,
) -> RunOutcome:
    """Solve a workbook end to end and write the results back.

    Parameters
    ----------
    path : path-like
        The input workbook (.xlsx or .xlsm).
    output : path-like, optional
        Write the solved workbook here instead of back into ``path``; ``path`` is then never modified.
    time_limit : float, optional
        Seconds the solver may run; overrides the ``time_limit_s`` setting.
    write : bool
        When false, nothing is written (the result is only returned).
    verbose : bool
        Show the solver's own log (on stderr).
    progress : callable, optional
        Called as ``progress(stage, limit)`` when each stage starts and ``progress(None, None)`` at the end; see
        :class:`lanesolve.progress.TerminalProgress`.
    scenario_names : list of str, optional
        Solve only these scenarios of the Scenarios sheet (default: every one). The baseline is always solved.
    solver : {"auto", "cbc", "highs"}, optional
        Overrides the workbook's ``solver`` setting (``auto``, the engine that fits the model, is the default).
    email : path-like, optional
        The mail the caller will write (``--email``): planned and checked with the other files before anything is
        read, so a clash or a missing folder stops the run before it writes anything. The path to write it to (a
        symbolic link resolved) is ``outcome.plan.mail.real``.
    force : bool
        Replace existing files lanesolve did not write (``--force``); see :mod:`lanesolve.write.paths`.
    tradeoff : int
        With 2 or more, also trace that many plans from the least-emissions to the least-cost plan
        (``--tradeoff N``; :func:`lanesolve.model.tradeoff.tradeoff_curve`) into ``result.tradeoff``.

    Returns
    -------
    RunOutcome

    Raises
    ------
    WorkbookError
        The workbook has input errors; nothing is written.
    NoPlanError
        No feasible plan exists (the result sheets and summary still say why when ``write`` is true).
    SolverError
        The solver failed.
    WriteError
        A file to write is refused (see :func:`lanesolve.write.paths.plan_solve`: two outputs are one file, an
        output is the input, an existing file lanesolve did not write without ``force``, a read-only file, a
        folder or pipe); the results could not be written; the workbook is open in a spreadsheet program, or
        another lanesolve run is writing it; or the workbook changed while it was solved
        (:data:`CHANGED_MESSAGE`). The original workbook is untouched.
    """
    path = Path(path)
    try:
        if not write:
            return _run_stages(path, None, time_limit, verbose, progress, scenario_names, solver, tradeoff)
        plan = paths.plan_solve(path, output, email, force)
        target = plan.workbook.real
        for name in dict.fromkeys([path, plan.workbook.given, target]):
            locking.refuse_if_open(name)
        with locking.workbook_lock(target):
            atomic.remove_stale_temporaries(target)
            return _run_stages(path, plan, time_limit, verbose, progress, scenario_names, solver, tradeoff)
    finally:
        progress(None, None)


#: Modules every solve of a large workbook goes on to need, in the order it needs them (the stages after reading
#: and pandas under them, the model's matrix, the figures' shortest paths, the network algorithm, the write-back,
#: the summary's templates), imported by :func:`_import_ahead` while the workbook is read.
AHEAD = ("lanesolve.read.validate", "lanesolve.write.earlier_plan", "lanesolve.model.analyse", "scipy.sparse",
         "scipy.sparse.csgraph", "ortools.graph.python.min_cost_flow", "lanesolve.write.writeback",
         "lanesolve.report.summary", "jinja2")
#: Workbooks from this size (bytes on disk) up have their later modules imported while they are read.
AHEAD_FROM_BYTES = 2_000_000


def _import_ahead(path: Path) -> None:
    """Import :data:`AHEAD` in a thread of its own while a large workbook is read.

    Calamine parses a sheet without holding Python's interpreter lock, so on a machine with a second core the
    imports (about 0.6 s, pandas and SciPy most of it) cost no wall time there, where the stages that use them
    would wait for them. A small workbook reads too quickly to hide them, and one with errors is answered without
    SciPy, so it is left alone: its stages import what they use when they start.
    A module that fails to import here fails again, with its own message, where a stage imports it.
    """
    try:
        if os.stat(path).st_size < AHEAD_FROM_BYTES:
            return
    except OSError:
        return  # the reader reports a missing or unreadable file in its own words

    def load() -> None:
        for name in AHEAD:
            try:
                importlib.import_module(name)
            except Exception:  # noqa: BLE001 -- the stage that needs the module reports the failure
                return

    threading.Thread(target=load, name="lanesolve-import-ahead", daemon=True).start()


def _read(path: Path) -> tuple[reader.RawWorkbook, source.Fingerprint]:
    """Read the workbook and fingerprint exactly the bytes the reader parsed (see :mod:`lanesolve.read.source`)."""
    try:
        mark = source.fingerprint(path)
    except (OSError, ValueError):
        mark = None  # missing, unreadable or not a file: the reader says which in its own words
    raw = reader.read_workbook(path)
    try:
        unchanged = mark is not None and mark.same_stat(os.stat(path))
    except OSError:
        unchanged = False
    if not unchanged:
        raise WriteError(f"{path.name}: the workbook changed while it was read; run again (nothing was written)")
    return raw, mark


def _run_stages(path: Path, plan: WritePlan | None, time_limit: float | None, verbose: bool,
                progress: ProgressCallback, scenario_names: list[str] | None, solver: str | None,
                tradeoff_points: int = 0) -> RunOutcome:
    timings: dict[str, float] = {}
    tick = time.perf_counter()
    progress("reading", None)

    if plan is not None and not {path.suffix.lower(), plan.workbook.given.suffix.lower()} <= \
            set(guard.WRITABLE_SUFFIXES):
        guard.check_write_target(path, plan.workbook.given)  # by name alone: an .ods is refused unread
    _import_ahead(path)
    raw, mark = _read(path)
    read_done = time.monotonic()  # the time limit covers everything after reading
    from lanesolve.model import plan_changes, tradeoff
    from lanesolve.model.comparison import compare
    from lanesolve.model.result import SolveStatus
    from lanesolve.read import validate
    from lanesolve.report import carrier_report, summary
    from lanesolve.write import carrier_tables, earlier_plan, goods_tables, writeback

    earlier = earlier_plan.read_earlier_plan(path)  # the plan the workbook's earlier result sheets hold
    if plan is not None:
        # By content after reading, so a file that is no workbook at all is called that (an input error).
        guard.check_write_target(path, plan.workbook.given)
    timings["read"] = time.perf_counter() - tick
    tick = time.perf_counter()
    progress("checking", None)

    network, warnings = validate.validate(raw)
    variants = scenario_networks(raw, network, scenario_names)
    if tradeoff_points:
        tradeoff.require_emissions(network)
    del raw  # the cell values (most of a gigabyte at a million lanes) are not needed once the network is built
    timings["validate"] = time.perf_counter() - tick
    tick = time.perf_counter()

    output = plan.workbook.given if plan is not None else path
    info = RunInfo(str(path), str(output), str(summary_path_for(output)), mark.sha256)
    if plan is not None:  # a planner's sheet named like a result sheet stops the run before any solving
        writeback.check_result_sheets(path)
    result = _solve_one(network, time_limit, verbose, progress, "solving", solver, started=read_done)
    if result.status.has_plan:
        tradeoff.emission_figures(network, result, tradeoff_points, solver, time_limit)
    scenario_results = {name: _solve_one(variant, time_limit, verbose, progress, f"solving scenario {name}", solver)
                        for name, variant in variants.items()}
    timings["solve_total"] = time.perf_counter() - tick
    result.timings.update(timings)
    comparison = compare(result, scenario_results) if scenario_results else None
    outcome = RunOutcome(network, result, info, warnings, scenario_results, comparison, plan,
                         plan_changes.compare_plans(earlier, result, network))

    if plan is not None:
        before_write(outcome)

        def unchanged() -> None:
            if source.changed_since(mark, path):
                raise WriteError(f"{path.name}: {CHANGED_MESSAGE}")

        unchanged()  # before the write starts, and again just before the new workbook replaces anything
        tick = time.perf_counter()
        progress("writing results", None)
        sheets = writeback.result_sheets(network, result, info) + goods_tables.goods_sheets(network, result)
        if comparison is not None:
            sheets.append(writeback.scenario_sheet(comparison, network.settings))
        sheets += [sheet for sheet in (carrier_tables.carriers_sheet(result, network.settings),
                                       carrier_tables.changes_sheet(outcome.changes, network.settings)) if sheet]
        writeback.write_results(path, plan.workbook.real, sheets, before_replace=unchanged)
        result.timings["write"] = time.perf_counter() - tick
        tick = time.perf_counter()
        summary.write_html(plan.summary.real, network, result, info, warnings, comparison,
                           extra=carrier_report.summary_extra(result, outcome.changes, network.settings))
        result.timings["report"] = time.perf_counter() - tick

    if result.status is SolveStatus.NOT_SOLVED:
        raise SolverError("the solver stopped before it found any plan"
                          + (f": {'; '.join(result.messages)}" if result.messages else "")
                          + " (allow more time with --time-limit or the time_limit_s setting)")
    if not result.status.has_plan:
        raise NoPlanError(result.messages or [f"the solver reports the problem {result.status.value}"], outcome)
    return outcome
