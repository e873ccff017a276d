"""Where the command line writes: every output planned before solving, no file replaced that should not be.

Each test builds its files in ``tmp_path`` and runs the command as a planner would. "Unchanged" is checked on the
file's bytes; "refused before solving" by a solver that fails the test if it runs. Sheet names are read back with
openpyxl (an independent reader of the workbook).
"""

from __future__ import annotations

import json
import os

import openpyxl
import pytest
from click.testing import CliRunner

from conftest import valid_sheets, write_workbook
from lanesolve.cli import main
from lanesolve.write import paths


@pytest.fixture
def book(tmp_path):
    return write_workbook(tmp_path / "book.xlsx", valid_sheets())


@pytest.fixture
def no_solver(monkeypatch):
    def refuse(*_args, **_kwargs):
        raise AssertionError("the solver ran although the files to write were refused")

    from lanesolve.model import analyse

    # analyse.solve_and_analyse is what the pipeline calls to solve (looked up on the module at each call).
    monkeypatch.setattr(analyse, "solve_and_analyse", refuse)


def _solve(*args):
    return CliRunner().invoke(main, ["solve", *map(str, args)])


def _refused(result, *words):
    assert result.exit_code == 1, result.output
    assert "Traceback" not in result.output
    for word in words:
        assert word in result.output, result.output


def _filled_workbook(path):
    """A planner's own workbook: input sheets and a Scenarios sheet, never solved by lanesolve."""
    sheets = valid_sheets()
    sheets["Scenarios"] = [["scenario", "sheet", "match", "column", "change", "value"],
                           ["more demand", "Customers", "*", "demand", "scale", 1.1]]
    return write_workbook(path, sheets)


# ----------------------------------------------------------------------------------------------------------------
# template


def test_template_refuses_to_replace_an_existing_workbook(book):
    before = book.read_bytes()
    result = CliRunner().invoke(main, ["template", str(book)])
    _refused(result, "already exists", "--force")
    assert book.read_bytes() == before


def test_template_force_replaces_an_existing_workbook(book):
    result = CliRunner().invoke(main, ["template", str(book), "--force"])
    assert result.exit_code == 0, result.output
    assert "Guide" in openpyxl.load_workbook(book).sheetnames


# ----------------------------------------------------------------------------------------------------------------
# --output


def test_output_onto_another_planners_workbook_is_refused(book, tmp_path, no_solver):
    other = _filled_workbook(tmp_path / "other.xlsx")
    before = other.read_bytes()
    _refused(_solve(book, "--output", other), "other.xlsx already exists and lanesolve did not write it")
    assert other.read_bytes() == before
    assert "Scenarios" in openpyxl.load_workbook(other).sheetnames
    assert not (tmp_path / "other-summary.html").exists()


def test_output_force_replaces_another_workbook(book, tmp_path):
    other = _filled_workbook(tmp_path / "other.xlsx")
    assert _solve(book, "--output", other, "--force").exit_code == 0
    assert "LS Summary" in openpyxl.load_workbook(other).sheetnames


def test_solving_again_into_its_own_earlier_output_needs_no_force(book, tmp_path):
    out = tmp_path / "solved.xlsx"
    first = _solve(book, "--output", out)
    assert first.exit_code == 0, first.output
    second = _solve(book, "--output", out)
    assert second.exit_code == 0, second.output
    assert "LS Summary" in openpyxl.load_workbook(out).sheetnames


def test_output_that_is_the_input_is_refused(book, no_solver):
    before = book.read_bytes()
    _refused(_solve(book, "--output", book), "the input workbook", "the same file")
    assert book.read_bytes() == before


def test_output_that_is_a_hard_link_to_the_input_is_refused(book, tmp_path, no_solver):
    link = tmp_path / "same.xlsx"
    os.link(book, link)
    before = book.read_bytes()
    _refused(_solve(book, "--output", link, "--force"), "the same file")
    assert book.read_bytes() == before


# ----------------------------------------------------------------------------------------------------------------
# --email


@pytest.mark.parametrize("with_output", [False, True])
def test_email_onto_the_workbook_is_refused(book, tmp_path, no_solver, with_output):
    before = book.read_bytes()
    extra = ["--output", tmp_path / "solved.xlsx"] if with_output else []
    _refused(_solve(book, "--email", book, *extra), "the same file")
    assert book.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["book.xlsx"]


def test_email_onto_the_solved_output_is_refused(book, tmp_path, no_solver):
    out = tmp_path / "out.xlsx"
    _refused(_solve(book, "--output", out, "--email", out, "--attach-workbook"), "the same file")
    assert not out.exists()


def test_email_onto_the_summary_is_refused(book, tmp_path, no_solver):
    _refused(_solve(book, "--email", tmp_path / "book-summary.html"), "the same file")
    assert not (tmp_path / "book-summary.html").exists()


def test_email_into_a_missing_folder_is_refused_before_anything_is_written(book, tmp_path, no_solver):
    before = book.read_bytes()
    _refused(_solve(book, "--email", tmp_path / "nodir" / "m.eml"), "nodir does not exist")
    assert book.read_bytes() == before
    assert not (tmp_path / "book-summary.html").exists()


def test_a_failing_mail_says_the_workbook_was_written(book, tmp_path, monkeypatch):
    import lanesolve.report.mail as mail
    from lanesolve.errors import WriteError

    def fail(*_args, **_kwargs):
        raise WriteError("disk full")

    monkeypatch.setattr(mail, "write_email", fail)
    result = _solve(book, "--email", tmp_path / "m.eml")
    _refused(result, "the results were written to", "but the mail", "was not")


def test_email_and_summary_written_by_lanesolve_are_replaced_on_a_rerun(book, tmp_path):
    mail = tmp_path / "plan.eml"
    assert _solve(book, "--email", mail).exit_code == 0
    assert paths.made_by_lanesolve(mail, "mail") and paths.made_by_lanesolve(tmp_path / "book-summary.html",
                                                                              "summary")
    rerun = _solve(book, "--email", mail)
    assert rerun.exit_code == 0, rerun.output


def test_existing_mail_lanesolve_did_not_write_is_refused(book, tmp_path, no_solver):
    mail = tmp_path / "note.eml"
    mail.write_bytes(b"Subject: lunch\r\n\r\nSee you at noon.\r\n")
    _refused(_solve(book, "--email", mail), "note.eml already exists and lanesolve did not write it")
    assert mail.read_bytes() == b"Subject: lunch\r\n\r\nSee you at noon.\r\n"


def test_existing_summary_lanesolve_did_not_write_is_refused(book, tmp_path, no_solver):
    page = tmp_path / "book-summary.html"
    page.write_text("<html><body>my own notes</body></html>")
    _refused(_solve(book), "book-summary.html already exists and lanesolve did not write it")
    assert page.read_text() == "<html><body>my own notes</body></html>"


# ----------------------------------------------------------------------------------------------------------------
# symbolic links, read-only files, things that are not files


def test_symlinked_workbook_is_written_through_to_its_target(book, tmp_path):
    link = tmp_path / "link.xlsx"
    link.symlink_to(book)
    result = _solve(link)
    assert result.exit_code == 0, result.output
    assert link.is_symlink() and os.readlink(link) == str(book)
    assert "LS Summary" in openpyxl.load_workbook(book).sheetnames


def test_symlinked_output_is_written_through_to_its_target(book, tmp_path):
    real = tmp_path / "real" / "solved.xlsx"
    real.parent.mkdir()
    assert _solve(book, "--output", real).exit_code == 0  # lanesolve's own output, so no --force needed below
    link = tmp_path / "solved.xlsx"
    link.symlink_to(real)
    result = _solve(book, "--output", link)
    assert result.exit_code == 0, result.output
    assert link.is_symlink()
    assert "LS Summary" in openpyxl.load_workbook(real).sheetnames


def test_read_only_workbook_is_refused(book, no_solver):
    book.chmod(0o444)
    before = book.read_bytes()
    _refused(_solve(book), "is read-only")
    assert book.read_bytes() == before and (book.stat().st_mode & 0o777) == 0o444


def test_read_only_output_is_refused_even_with_force(book, tmp_path, no_solver):
    out = tmp_path / "solved.xlsx"
    out.write_bytes(b"keep me")
    out.chmod(0o444)
    _refused(_solve(book, "--output", out, "--force"), "is read-only")
    assert out.read_bytes() == b"keep me"


def test_fifo_as_output_is_refused(book, tmp_path, no_solver):
    fifo = tmp_path / "pipe.xlsx"
    os.mkfifo(fifo)
    _refused(_solve(book, "--output", fifo, "--force"), "named pipe")


def test_every_problem_is_listed_in_one_message(book, tmp_path, no_solver):
    (tmp_path / "book-summary.html").write_text("mine")
    mail = tmp_path / "note.eml"
    mail.write_text("mine")
    result = _solve(book, "--email", mail)
    _refused(result, "2 problems", "book-summary.html already exists", "note.eml already exists")


# ----------------------------------------------------------------------------------------------------------------
# options


@pytest.mark.parametrize("value", ["nan", "inf", "-1", "-inf"])
def test_time_limit_must_be_a_finite_number_of_seconds(book, value):
    result = _solve(book, "--time-limit", value)
    assert result.exit_code == 2, result.output
    assert "not a number of seconds" in result.output


def test_json_status_of_a_refused_output_is_write_error(book, tmp_path, no_solver):
    result = _solve(book, "--output", book, "--json")
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    assert doc["status"] == "write_error" and "same file" in doc["error"]


# ----------------------------------------------------------------------------------------------------------------
# batch


def test_batch_refuses_a_summary_csv_it_did_not_write_unless_force(book, tmp_path):
    summary = tmp_path / "table.csv"
    summary.write_text("region,budget\nnorth,100\n", encoding="utf-8")
    refused = CliRunner().invoke(main, ["batch", str(book), "--summary", str(summary)])
    _refused(refused, "table.csv already exists and lanesolve did not write it")
    assert summary.read_text(encoding="utf-8") == "region,budget\nnorth,100\n"
    assert "LS Summary" not in openpyxl.load_workbook(book).sheetnames  # refused before solving
    forced = CliRunner().invoke(main, ["batch", str(book), "--summary", str(summary), "--force"])
    assert forced.exit_code == 0, forced.output
    assert summary.read_text(encoding="utf-8").startswith(paths.BATCH_CSV_HEADER)


def test_batch_calls_a_fifo_workbook_an_input_error(book, tmp_path):
    fifo = tmp_path / "pipe.xlsx"
    os.mkfifo(fifo)
    result = CliRunner().invoke(main, ["batch", str(book), str(fifo), "--summary", str(tmp_path / "b.csv"),
                                       "--json"])
    assert result.exit_code == 1
    status = {os.path.basename(run["path"]): run["status"] for run in json.loads(result.stdout)["runs"]}
    assert status == {"book.xlsx": "optimal", "pipe.xlsx": "input_error"}
