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

import time
from dataclasses import dataclass, field
from pathlib import Path

import difflib

import pandas as pd

from lanesolve.write import atomic
from lanesolve.model import checks
from lanesolve import contract
from lanesolve.read import guard
from lanesolve.write import locking
from lanesolve.read import reader
from lanesolve.report import summary
from lanesolve.model import scenarios
from lanesolve.model.analyse import explain_no_plan, solve_and_analyse
from lanesolve.read import validate
from lanesolve.write import writeback
from lanesolve.errors import NoPlanError, Problem, SolverError, WorkbookError
from lanesolve.model.network import Network
from lanesolve.progress import ProgressCallback, no_progress
from lanesolve.model.result import Result, SolveStatus
from lanesolve.runinfo import RunInfo, file_checksum  # noqa: F401 (RunInfo is part of this module's API)


@dataclass
class RunOutcome:
    """What :func:`run` returns: the network, the result, the run facts, and the warnings found on reading."""

    network: Network
    result: Result
    info: RunInfo
    warnings: list[Problem]
    scenario_results: dict[str, Result] = field(default_factory=dict)
    comparison: pd.DataFrame | None = None

    def to_json(self) -> dict:
        doc = self.result.to_json()
        sources = self.network.cost_source_by_lane()
        if sources is not None:
            for flow in doc["flows"]:
                distance, source = sources.get((flow["origin"], flow["destination"], flow["mode"]), (None, None))
                flow["distance"] = distance if distance == distance else None  # NaN -> null
                flow["cost_source"] = source
        if self.scenario_results:
            doc["scenarios"] = [{"scenario": name, **result.to_json()}
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
    sheet = next((s for name, s in raw.sheets.items()
                  if contract.normalize(name) == contract.normalize(scenarios.SHEET)), None)
    if sheet is None:
        if only:
            raise WorkbookError(Problem(scenarios.SHEET, None, None, None, "the workbook has no Scenarios sheet",
                                        "add one, or leave out --scenario"))
        return {}
    parsed, problems = scenarios.parse_scenarios(sheet.rows)
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
               stage: str, solver: str | None = None) -> Result:
    """Run the cheap checks, then the solver when they find nothing."""
    reasons = checks.presolve_checks(network)
    if reasons:
        return explain_no_plan(network, reasons, time_limit=time_limit, solver=solver)
    progress(stage, time_limit if time_limit is not None else network.settings.time_limit_s)
    return solve_and_analyse(network, time_limit=time_limit, solver=solver, msg=verbose)


def summary_path_for(output: str | Path) -> Path:
    output = Path(output)
    return output.with_name(f"{output.stem}-summary.html")


def run(
    path: str | Path,
    output: str | Path | None = None,
    time_limit: float | None = None,
    write: bool = True,
    verbose: bool = False,
    progress: ProgressCallback = no_progress,
    scenario_names: list[str] | None = None,
    solver: str | None = None,
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
    solver : {"cbc", "highs"}, optional
        Overrides the workbook's ``solver`` setting (CBC, bundled, is the default).

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
        The results could not be written, the workbook is open in a spreadsheet program, or another lanesolve
        run is writing it; the original workbook is untouched.
    """
    path = Path(path)
    output = Path(output) if output is not None else path
    try:
        if not write:
            return _run_stages(path, output, time_limit, write, verbose, progress, scenario_names, solver)
        guard.check_write_target(path, output)
        for target in dict.fromkeys([path, output]):
            locking.refuse_if_open(target)
        with locking.workbook_lock(output):
            atomic.remove_stale_temporaries(output)
            return _run_stages(path, output, time_limit, write, verbose, progress, scenario_names, solver)
    finally:
        progress(None, None)


def _run_stages(path: Path, output: Path, time_limit: float | None, write: bool, verbose: bool,
                progress: ProgressCallback, scenario_names: list[str] | None, solver: str | None) -> RunOutcome:
    timings: dict[str, float] = {}
    tick = time.perf_counter()
    progress("reading", None)

    raw = reader.read_workbook(path)
    timings["read"] = time.perf_counter() - tick
    tick = time.perf_counter()
    progress("checking", None)

    network, warnings = validate.validate(raw)
    variants = scenario_networks(raw, network, scenario_names)
    timings["validate"] = time.perf_counter() - tick
    tick = time.perf_counter()

    info = RunInfo(str(path), str(output), str(summary_path_for(output)), file_checksum(path))
    result = _solve_one(network, time_limit, verbose, progress, "solving", solver)
    scenario_results = {name: _solve_one(variant, time_limit, verbose, progress, f"solving scenario {name}", solver)
                        for name, variant in variants.items()}
    timings["solve_total"] = time.perf_counter() - tick
    result.timings.update(timings)
    comparison = scenarios.compare(result, scenario_results) if scenario_results else None
    outcome = RunOutcome(network, result, info, warnings, scenario_results, comparison)

    if write:
        tick = time.perf_counter()
        progress("writing results", None)
        sheets = writeback.result_sheets(network, result, info)
        if comparison is not None:
            sheets.append(writeback.scenario_sheet(comparison))
        writeback.write_results(path, output, sheets)
        result.timings["write"] = time.perf_counter() - tick
        tick = time.perf_counter()
        summary.write_html(summary_path_for(output), network, result, info, warnings, comparison)
        result.timings["report"] = time.perf_counter() - tick

    if result.status is SolveStatus.NOT_SOLVED:
        raise SolverError("the solver stopped before it found any plan"
                          + (f": {'; '.join(result.messages)}" if result.messages else "")
                          + " (allow more time with --time-limit or the time_limit_s setting)")
    if not result.status.has_plan:
        raise NoPlanError(result.messages or [f"the solver reports the problem {result.status.value}"], outcome)
    return outcome
