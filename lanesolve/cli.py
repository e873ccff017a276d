"""Command line interface: a thin shell over :mod:`lanesolve.pipeline`.

Exit codes: 0 a plan was found (or the check passed); 1 the workbook has input errors or could not be written;
2 usage error (click); 3 no feasible plan; 4 the solver failed.
"""

from __future__ import annotations

import json
import math
import os
import sys

import click

from lanesolve import __version__
from lanesolve.errors import LanesolveError, NoPlanError, Problem, SolverError, WorkbookError, WriteError

#: At most this many problems are printed; the rest are counted.
MAX_PRINTED_PROBLEMS = 50


class Seconds(click.ParamType):
    """A number of seconds: finite and not negative (``nan``, ``inf`` and ``-1`` are usage errors)."""

    name = "seconds"

    def convert(self, value, param, ctx):
        try:
            seconds = float(value)
        except (TypeError, ValueError):
            self.fail(f"{value!r} is not a number of seconds", param, ctx)
        if not math.isfinite(seconds) or seconds < 0:
            self.fail(f"{value!r} is not a number of seconds (give a finite number, 0 or more)", param, ctx)
        return seconds


FORCE_HELP = "Replace existing files lanesolve did not write (it never replaces a read-only file or the input)."


def _say(text: str = "", err: bool = True) -> None:
    click.echo(text, err=err)


def _print_problems(problems: list[Problem], label: str) -> None:
    for problem in problems[:MAX_PRINTED_PROBLEMS]:
        _say(f"  {label}: {problem}")
    if len(problems) > MAX_PRINTED_PROBLEMS:
        _say(f"  ... and {len(problems) - MAX_PRINTED_PROBLEMS} more {label}s")


def _fail(error: LanesolveError, as_json: bool) -> None:
    """Report a library error plainly (never a traceback) and exit with its code."""
    if isinstance(error, WorkbookError):
        _say(f"Error: the workbook has {len(error.problems)} problem(s); nothing was written.")
        _print_problems(error.problems, "error")
        _print_problems(error.warnings, "warning")
    elif isinstance(error, NoPlanError):
        _say("No feasible plan:")
        for reason in error.reasons:
            _say(f"  - {reason}")
    else:
        _say(f"Error: {error}")
    if as_json:
        kinds = ((WorkbookError, "input_error"), (WriteError, "write_error"), (NoPlanError, "infeasible"),
                 (SolverError, "solver_error"))
        doc = {"status": next((word for kind, word in kinds if isinstance(error, kind)), "error"),
               "error": str(error)}
        if isinstance(error, WorkbookError):
            doc["problems"] = [str(p) for p in error.problems]
        if isinstance(error, NoPlanError) and error.result is not None:
            doc = {**error.result.to_json(), "reasons": error.reasons}
        click.echo(json.dumps(doc, indent=2))
    sys.exit(error.exit_code)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="lanesolve")
def main() -> None:
    """Plan freight lane volumes from a workbook at least total cost."""
    # One BLAS thread unless the user chose otherwise. No command multiplies dense matrices of any size, and
    # OpenBLAS's extra threads spin after each small product (the solve's dot products): about a quarter of a
    # small run's CPU (benchmarks/README.md, *Small runs*). Read when NumPy loads, which no command has done yet.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


@main.command()
@click.argument("path", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="Replace PATH if it exists (it may be a filled workbook).")
def template(path: str, force: bool) -> None:
    """Write a blank workbook to PATH, with every sheet, column and a guide."""
    from lanesolve.write.template import write_template

    try:
        write_template(path, force=force)
    except LanesolveError as error:
        _fail(error, False)
    _say(f"Wrote the blank template {path}", err=False)


@main.command()
@click.argument("workbook", type=click.Path(exists=True, dir_okay=False))
def check(workbook: str) -> None:
    """Validate WORKBOOK and list every problem found; solve nothing, write nothing."""
    from lanesolve.model.checks import presolve_checks
    from lanesolve.pipeline import load

    try:
        network, warnings = load(workbook)
    except LanesolveError as error:
        _fail(error, False)
    _print_problems(warnings, "warning")
    reasons = presolve_checks(network)
    for reason in reasons:
        _say(f"  no plan possible: {reason}")
    _say(f"{workbook}: {len(network.depots)} depots, {len(network.hubs)} hubs, {len(network.customers)} customers, "
         f"{len(network.lanes)} lanes; no input errors"
         + (f", {len(warnings)} warning(s)" if warnings else "") + ".", err=False)
    if reasons:
        sys.exit(NoPlanError.exit_code)


@main.command()
@click.argument("workbook", type=click.Path(exists=True, dir_okay=False))
@click.option("-o", "--output", type=click.Path(dir_okay=False),
              help="Write the solved workbook here instead of back into WORKBOOK.")
@click.option("--time-limit", type=Seconds(), metavar="S",
              help="Seconds the solver may run (overrides the time_limit_s setting).")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON document on stdout; messages go to stderr.")
@click.option("--all-figures", is_flag=True,
              help="With --json: list every unused lane's figure, not only the 500 nearest to paying.")
@click.option("--email", "email_path", type=click.Path(dir_okay=False), metavar="PATH",
              help="Also write the summary as a mail (.eml) to PATH: open it in a mail program, add recipients, send.")
@click.option("--attach-workbook", is_flag=True, help="Attach the solved workbook to the --email mail.")
@click.option("-q", "--quiet", is_flag=True, help="Print only errors; the exit code tells the outcome.")
@click.option("-v", "--verbose", is_flag=True, help="Show the solver's log on stderr.")
@click.option("--scenario", "scenario_names", multiple=True, metavar="NAME",
              help="Solve only this scenario of the Scenarios sheet beside the baseline (repeatable; default: all).")
@click.option("--solver", type=click.Choice(["auto", "cbc", "highs"], case_sensitive=False), default=None,
              help="Solver to use (overrides the solver setting): auto (the engine that fits the model), cbc or "
                   "highs.")
@click.option("--force", is_flag=True, help=FORCE_HELP)
@click.option("--tradeoff", "tradeoff_points", type=click.IntRange(min=2), default=None, metavar="N",
              help="Also plan N points from the least-emissions to the least-cost plan (needs emission factors).")
def solve(workbook: str, output: str | None, time_limit: float | None, as_json: bool, all_figures: bool,
          email_path: str | None,
          attach_workbook: bool, quiet: bool, verbose: bool, scenario_names: tuple[str, ...],
          solver: str | None, force: bool, tradeoff_points: int | None) -> None:
    """Solve WORKBOOK, write the result sheets back into it and an HTML summary beside it."""
    from lanesolve.json_text import dumps_indented
    from lanesolve.pipeline import run
    from lanesolve.progress import TerminalProgress, no_progress
    from lanesolve.report.carrier_report import change_lines
    from lanesolve.report.text import terminal_lines

    if attach_workbook and not email_path:
        raise click.UsageError("--attach-workbook needs --email PATH (the mail to attach the workbook to)")
    if quiet and verbose:
        raise click.UsageError("--quiet and --verbose cannot be used together")
    if all_figures and not as_json:
        raise click.UsageError("--all-figures needs --json (the figures it adds are in the JSON document)")
    progress = no_progress if quiet or as_json else TerminalProgress()
    try:
        try:
            outcome = run(workbook, output=output, time_limit=time_limit, verbose=verbose, progress=progress,
                          scenario_names=list(scenario_names) or None,
                          solver=solver.lower() if solver else None, email=email_path, force=force,
                          tradeoff=tradeoff_points or 0)
        except NoPlanError as error:
            # The summary explains why there is no plan; the mail carries the same page.
            if email_path and error.result is not None:
                _write_email(email_path, error.result, attach_workbook)
            raise
        if email_path:
            _write_email(email_path, outcome, attach_workbook)
    except LanesolveError as error:
        _fail(error, as_json)
    if not quiet:
        _print_problems(outcome.warnings, "warning")
    if as_json:
        click.echo(dumps_indented(outcome.to_json(all_figures=all_figures)))  # json.dumps(..., indent=2), faster
    if not quiet:
        for line in terminal_lines(outcome.network, outcome.result, outcome.info, outcome.comparison):
            _say(line, err=as_json)
        for line in change_lines(outcome.changes, outcome.network.settings):
            _say(line, err=as_json)
        if email_path:
            _say(f"Mail written to {email_path}" + (" (solved workbook attached)" if attach_workbook else ""),
                 err=as_json)


def _write_email(path: str, outcome, attach_workbook: bool) -> None:
    from lanesolve.report.carrier_report import summary_extra
    from lanesolve.report.mail import write_email

    try:
        write_email(outcome.plan.mail.real, outcome.network, outcome.result, outcome.info, outcome.warnings,
                    attach=outcome.info.output_path if attach_workbook else None,
                    comparison=getattr(outcome, "comparison", None),
                    extra=summary_extra(outcome.result, getattr(outcome, "changes", None), outcome.network.settings))
    except WriteError as error:
        # The workbook and summary are written by now; say so rather than let "not written" cover them too.
        raise WriteError(f"the results were written to {outcome.info.output_path} and "
                         f"{outcome.info.summary_path}, but the mail {path} was not: {error}") from error


@main.command()
@click.argument("paths", nargs=-1, required=True, type=click.Path(exists=True, dir_okay=False))
@click.option("-w", "--workers", type=click.IntRange(min=1), default=1, show_default=True,
              help="Workbooks solved at once, each in its own process.")
@click.option("--dask", "dask_address", metavar="ADDRESS",
              help="Run on this Dask scheduler (tcp://host:8786) instead of local processes.")
@click.option("--time-limit", type=Seconds(), metavar="S",
              help="Seconds the solver may run on each workbook (overrides their time_limit_s settings).")
@click.option("--solver", type=click.Choice(["auto", "cbc", "highs"]),
              help="Solver for every workbook (overrides their solver settings): auto, cbc or highs.")
@click.option("--summary", "summary_csv", type=click.Path(dir_okay=False), default="batch-summary.csv",
              show_default=True, help="Write the batch summary as CSV here (a .json beside it holds the same).")
@click.option("--json", "as_json", is_flag=True, help="Print the batch summary as JSON on stdout.")
@click.option("--force", is_flag=True, help=FORCE_HELP)
def batch(paths: tuple[str, ...], workers: int, dask_address: str | None, time_limit: float | None,
          solver: str | None, summary_csv: str, as_json: bool, force: bool) -> None:
    """Solve many workbooks (each with its scenarios), writing each one's results as solve does."""
    from lanesolve.batch import run_batch

    try:
        report = run_batch(paths, workers=workers, dask_address=dask_address, progress=not as_json,
                           time_limit=time_limit, solver=solver, summary_csv=summary_csv, force=force)
    except LanesolveError as error:
        _fail(error, as_json)
    _say(report.table(), err=as_json)
    _say(f"Batch summary written to {summary_csv}", err=as_json)
    if as_json:
        click.echo(json.dumps(report.to_json(), indent=2))
    sys.exit(report.exit_code)


def run() -> None:
    """The ``lanesolve`` command (and ``python -m lanesolve``): :func:`main`, then a quick exit.

    Python's own exit unloads every module one by one; once pandas, SciPy and the engines are loaded that takes
    about a quarter of a second, a fifth of a small run, and does nothing a planner needs: every file lanesolve
    writes is closed before its command returns. So, after the command, this does what the interpreter's exit does
    for the outside world -- waits for any thread still working, runs the exit handlers (``atexit``: log handlers,
    process pools, leftover temporary folders), flushes standard output and error -- and then leaves with the
    command's exit code without the unloading. Tests and callers use :func:`main`, which exits normally.
    """
    try:
        main()
        code = 0
    except SystemExit as leaving:
        code = leaving.code
    if code is None:
        code = 0
    elif not isinstance(code, int):  # as sys.exit does with any other object: print it, exit code 1
        print(code, file=sys.stderr)
        code = 1
    os._exit(_finish_like_the_interpreter(code))


def _finish_like_the_interpreter(code: int) -> int:
    """What interpreter shutdown does before it unloads modules; the exit code to leave with (120 when standard
    output could not be flushed, as Python does)."""
    import atexit
    import threading

    for thread in threading.enumerate():
        if thread is not threading.current_thread() and not thread.daemon:
            thread.join()
    atexit._run_exitfuncs()  # the exit handlers, in the order interpreter shutdown runs them
    for stream in (sys.stdout, sys.stderr):
        try:
            if stream is not None:
                stream.flush()
        except (OSError, ValueError):  # a closed pipe (`lanesolve ... | head`) or a closed stream
            code = code or 120
    return code
