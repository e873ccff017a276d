"""What `lanesolve solve` prints: the compact default, --quiet (errors only) and --verbose (the solver's log)."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from lanesolve.cli import main

EXAMPLE = Path(__file__).resolve().parent.parent / "example_workbooks" / "orvale_larder_supply.xlsx"


def invoke(*args):
    return CliRunner().invoke(main, ["solve", *map(str, args)])


def test_default_summary_is_compact(tmp_path):
    run = invoke(EXAMPLE, "--output", tmp_path / "s.xlsx")
    assert run.exit_code == 0, run.output
    lines = run.output.strip().splitlines()
    # four lines of figures, then one line per scenario (the example has five, plus the baseline) and per
    # "What to do next" sentence, each under its heading, where the files went, and one line saying there is no
    # earlier run to compare with (the example holds no results); nothing else
    steps = lines.index("What to do next:")
    scenarios = lines.index("Scenarios (total cost, change against the baseline, not delivered):")
    written = next(i for i, line in enumerate(lines) if line.startswith("Results written to "))
    assert scenarios < steps and steps - scenarios == 1 + 6
    assert all(line.startswith("  - ") for line in lines[steps + 1:written])
    assert lines[written + 1:] == ["No earlier run: the workbook holds no results of an earlier lanesolve run to "
                                   "compare with."]
    assert len(lines) <= 4 + 7 + 1 + 10 + 1
    assert lines[0].startswith("Status: Optimal plan (optimal)")
    assert any(line.startswith("Total cost: ") and line.endswith(" EUR") for line in lines)
    assert any("s-summary.html" in line for line in lines)


def test_quiet_prints_nothing_on_success(tmp_path):
    run = invoke(EXAMPLE, "--output", tmp_path / "s.xlsx", "--quiet")
    assert run.exit_code == 0
    assert run.output == ""
    assert (tmp_path / "s-summary.html").exists()  # quiet, but the work was done


def test_quiet_still_reports_errors(tmp_path):
    path = tmp_path / "notes.xlsx"
    path.write_text("this is not a spreadsheet")
    run = invoke(path, "--quiet")
    assert run.exit_code == 1
    assert "notes.xlsx" in run.output and "Traceback" not in run.output


def test_verbose_shows_the_solver_log(tmp_path):
    quiet = invoke(EXAMPLE, "--output", tmp_path / "a.xlsx", "--solver", "cbc")
    loud = invoke(EXAMPLE, "--output", tmp_path / "b.xlsx", "--verbose", "--solver", "cbc")
    assert loud.exit_code == 0, loud.output
    # CBC's log names the program (text from CBC itself, not from lanesolve); the default run prints none of it.
    # CBC is named because HiGHS, the example's engine under auto, writes its log from native code straight to
    # file descriptor 2, which the test runner does not capture.
    assert "Cbc" in loud.stderr or "CBC" in loud.stderr
    assert len(loud.output) > len(quiet.output) + 200
    assert "Cbc" not in quiet.output


def test_quiet_and_verbose_conflict(tmp_path):
    run = invoke(EXAMPLE, "--output", tmp_path / "s.xlsx", "--quiet", "--verbose")
    assert run.exit_code == 2
