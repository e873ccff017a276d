"""Safe writes under faults: permission denied, disk full, an exception mid-write, SIGKILL, open workbooks, two runs.

What "safe" means here (the atomic-replace pattern: write a temporary file in the same folder, fsync, then
``os.replace``, which POSIX rename(2) makes atomic): after any failure the workbook is byte-identical to what it was,
or -- only when the failure came after the replace -- the complete new workbook. A temporary file
``.<name>.*.tmp`` may be left behind by SIGKILL (no code runs to delete it), but it never takes the workbook's name.
The test runs as root, so permissions are denied by monkeypatching, not by chmod (root ignores file modes).
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import threading
import time
import zipfile
from pathlib import Path

import openpyxl
import pytest
from click.testing import CliRunner

from conftest import valid_sheets, write_workbook
from lanesolve.write import atomic
from lanesolve import pipeline
from lanesolve.read import reader
from lanesolve.write import writeback
from lanesolve.cli import main
from lanesolve.errors import WriteError

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture
def book(tmp_path):
    return write_workbook(tmp_path / "plan.xlsx", valid_sheets())


def _folder_has_only(folder: Path, *names: str) -> None:
    assert sorted(p.name for p in folder.iterdir()) == sorted(names)


def _input_cells(path: Path) -> dict:
    return {name: sheet.rows for name, sheet in reader.read_workbook(path).sheets.items()}


def test_permission_denied_on_replace(book, monkeypatch):
    before = book.read_bytes()

    def denied(*_args, **_kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(os, "replace", denied)
    with pytest.raises(WriteError, match=r"cannot replace .*Permission denied"):
        pipeline.run(book)
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name)


def test_permission_denied_on_the_folder(book, monkeypatch):
    # What a read-only folder does to a non-root user: the temporary file cannot be created.
    before = book.read_bytes()

    def denied(*_args, **_kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(atomic.tempfile, "NamedTemporaryFile", denied)
    with pytest.raises(WriteError, match=r"cannot write into the folder .*Permission denied"):
        pipeline.run(book)
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name)


class _FullDisk:
    """A temporary file that accepts ``room`` bytes, then fails every write with ENOSPC, as a full disk does."""

    def __init__(self, handle, room: int):
        self._handle, self._room = handle, room

    def write(self, data):
        if len(data) > self._room:
            raise OSError(errno.ENOSPC, "No space left on device")
        self._room -= len(data)
        return self._handle.write(data)

    def __getattr__(self, name):
        return getattr(self._handle, name)

    def __enter__(self):
        self._handle.__enter__()
        return self

    def __exit__(self, *exc):
        return self._handle.__exit__(*exc)


# Sheets this small are compressed in the foreground; from_rows 0 puts them in the zip writer's thread.
@pytest.mark.parametrize("from_rows", [0, writeback.BACKGROUND_FROM_ROWS])
@pytest.mark.parametrize("room", [0, 3000])
def test_disk_full_mid_write(book, monkeypatch, room, from_rows):
    monkeypatch.setattr(writeback, "BACKGROUND_FROM_ROWS", from_rows)
    before = book.read_bytes()
    real = atomic.tempfile.NamedTemporaryFile
    monkeypatch.setattr(atomic.tempfile, "NamedTemporaryFile", lambda *a, **k: _FullDisk(real(*a, **k), room))
    with pytest.raises(WriteError, match=r"No space left on device"):
        pipeline.run(book)
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name)


@pytest.mark.parametrize("from_rows", [0, writeback.BACKGROUND_FROM_ROWS])
def test_exception_mid_write(book, monkeypatch, from_rows):
    monkeypatch.setattr(writeback, "BACKGROUND_FROM_ROWS", from_rows)
    before = book.read_bytes()
    real = writeback.sheet_pieces
    calls = []

    def second_sheet_fails(sheet, rel_id, *styles):
        calls.append(sheet.name)
        ref, pieces = real(sheet, rel_id, *styles)
        if len(calls) < 2:
            return ref, pieces

        def failing():
            yield next(pieces)  # the sheet's head goes to the writer's thread, then making its rows fails
            raise RuntimeError("injected failure while building the second result sheet")

        return ref, failing()

    monkeypatch.setattr(writeback, "sheet_pieces", second_sheet_fails)
    with pytest.raises(WriteError, match=r"injected failure.*left as it was"):
        pipeline.run(book)
    assert len(calls) == 2  # the failure really came mid-write, after a sheet was built
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name)
    # The writer's compressing thread was stopped before the temporary file was removed.
    assert not [t for t in threading.enumerate() if t.name.startswith("lanesolve-zip")]


def test_fsync_failure(book, monkeypatch):
    before = book.read_bytes()

    def failing(_fd):
        raise OSError(errno.EIO, "Input/output error")

    monkeypatch.setattr(os, "fsync", failing)
    with pytest.raises(WriteError, match=r"Input/output error"):
        pipeline.run(book)
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name)


# ----------------------------------------------------------------------------------------------------------------
# a workbook open in a spreadsheet program


@pytest.mark.parametrize("owner", ["~$plan.xlsx", ".~lock.plan.xlsx#"])
def test_open_workbook_is_refused_through_run_and_cli(book, owner):
    before = book.read_bytes()
    (book.parent / owner).write_bytes(b"someone\x00")
    with pytest.raises(WriteError, match=r"open in a spreadsheet program.*nothing was written"):
        pipeline.run(book)
    result = CliRunner().invoke(main, ["solve", str(book)])
    assert result.exit_code == 1
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert "open in a spreadsheet program" in result.output and "Traceback" not in result.output
    assert book.read_bytes() == before
    _folder_has_only(book.parent, book.name, owner)


def test_open_output_is_refused_and_the_source_untouched(book, tmp_path):
    before = book.read_bytes()
    (tmp_path / "~$solved.xlsx").write_bytes(b"x")
    with pytest.raises(WriteError, match=r"solved\.xlsx is open in a spreadsheet program"):
        pipeline.run(book, output=tmp_path / "solved.xlsx")
    assert book.read_bytes() == before
    assert not (tmp_path / "solved.xlsx").exists()


# ----------------------------------------------------------------------------------------------------------------
# processes: SIGKILL during write-back, and two runs at once


def _large_workbook(path: Path, rows: int = 60_000) -> Path:
    """The valid network plus a large notes sheet, so that write-back takes long enough to be interrupted."""
    write_workbook(path, valid_sheets())
    book = openpyxl.load_workbook(path)
    notes = book.create_sheet("Notes")
    rng = random.Random(8)
    for i in range(rows):
        notes.append([f"note {i}", rng.random(), rng.randint(0, 10**6), "invented remark " * 3])
    book.save(path)
    return path


RUNNER = textwrap.dedent("""
    import sys, time
    from lanesolve import pipeline
    from lanesolve.write import writeback
    real = writeback.write_results
    writeback.BACKGROUND_FROM_ROWS = 0  # the zip writer's own thread at work while the kills land

    def announced(*args, **kwargs):
        print("writing", flush=True)
        start = time.perf_counter()
        real(*args, **kwargs)
        print(f"written {time.perf_counter() - start:.4f}", flush=True)

    writeback.write_results = announced
    pipeline.run(sys.argv[1])
    print("done", flush=True)
""")


def _start(path: Path) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.Popen([sys.executable, "-c", RUNNER, str(path)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env)


@pytest.fixture(scope="module")
def large(tmp_path_factory):
    return _large_workbook(tmp_path_factory.mktemp("large") / "plan.xlsx")


@pytest.mark.slow  # kills many child processes mid-write; CI runs it
def test_sigkill_during_write_back_leaves_the_old_or_the_complete_new_workbook(large, tmp_path):
    original = large.read_bytes()
    original_cells = _input_cells(large)
    # One full run measures how long write-back takes, so the kills can be spread over it (not a timed assertion:
    # the duration only chooses kill moments).
    probe = tmp_path / "probe" / "plan.xlsx"
    probe.parent.mkdir()
    probe.write_bytes(original)
    proc = _start(probe)
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    duration = float(next(line.split()[1] for line in out.splitlines() if line.startswith("written")))

    rng = random.Random(20240501)
    outcomes = []
    for attempt in range(6):
        folder = tmp_path / f"try{attempt}"
        folder.mkdir()
        path = folder / "plan.xlsx"
        path.write_bytes(original)
        proc = _start(path)
        assert proc.stdout.readline().strip() == "writing"
        time.sleep(rng.uniform(0.0, duration * 1.1))
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=60)
        data = path.read_bytes()
        if data == original:
            outcomes.append("old")
        else:
            # Replaced: it must be the complete new workbook, its input sheets intact and the results added.
            with zipfile.ZipFile(path) as z:
                assert z.testzip() is None
            assert _input_cells(path) == original_cells
            assert "LS Summary" in openpyxl.load_workbook(path, read_only=True).sheetnames
            outcomes.append("new")
        for leftover in folder.iterdir():
            # Allowed leftovers: the temporary file SIGKILL left behind, and the lanesolve lock file. Once the new
            # workbook is in place the run goes on to the HTML summary (a kill late in the window, now that
            # write-back is quicker, lands there): its page, written atomically, and its temporary file may be left
            # then -- never beside the old workbook, and the page only whole.
            if outcomes[-1] == "new" and leftover.name == "plan-summary.html":
                assert leftover.read_text(encoding="utf-8").rstrip().endswith("</html>")
                continue
            if outcomes[-1] == "new" and leftover.name.startswith(".plan-summary.html."):
                continue
            assert leftover.name == "plan.xlsx" or leftover.name.startswith(".plan.xlsx."), leftover.name
        # A later run still succeeds on the workbook left behind.
        again = _start(path)
        _out, err = again.communicate(timeout=300)
        assert again.returncode == 0, err
    assert "old" in outcomes  # at least one kill landed before the replace, so the test exercised that case


def test_two_runs_at_once_take_turns_and_leave_one_valid_workbook(large, tmp_path):
    path = tmp_path / "plan.xlsx"
    path.write_bytes(large.read_bytes())
    original_cells = _input_cells(path)
    first, second = _start(path), _start(path)
    results = [p.communicate(timeout=300) + (p.returncode,) for p in (first, second)]
    for out, err, code in results:
        # Each run either finished, or refused clearly because the other held the lock too long.
        # (The runner calls pipeline.run without the CLI, so a refusal shows as an uncaught WriteError.)
        assert code == 0 or ("WriteError" in err and "another lanesolve run is writing" in err), err
    assert any(code == 0 for *_, code in results)
    with zipfile.ZipFile(path) as z:
        assert z.testzip() is None
    names = openpyxl.load_workbook(path, read_only=True).sheetnames
    assert names.count("LS Summary") == 1 and names.count("LS Lane flows") == 1
    assert _input_cells(path) == original_cells
    assert not [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


# ----------------------------------------------------------------------------------------------------------------
# the planner saves the workbook while it is being solved


def _save_as_a_spreadsheet_program_does(path: Path, demand: int) -> bytes:
    """Save ``path`` with a new first demand the way spreadsheet programs save: a temporary file, then a rename."""
    sheets = valid_sheets()
    sheets["Customers"][1][1] = demand
    temporary = path.with_name("saving.tmp.xlsx")
    write_workbook(temporary, sheets)
    os.replace(temporary, path)
    return path.read_bytes()


def test_a_save_between_solve_and_write_survives_and_no_results_are_written(book, monkeypatch):
    saved = {}

    def planner_saves(_outcome):
        saved["bytes"] = _save_as_a_spreadsheet_program_does(book, 61)

    monkeypatch.setattr(pipeline, "before_write", planner_saves)
    with pytest.raises(WriteError, match=r"the workbook changed while solving; run again"):
        pipeline.run(book)
    assert book.read_bytes() == saved["bytes"]
    assert not any(name.startswith("LS ") for name in openpyxl.load_workbook(book).sheetnames)
    _folder_has_only(book.parent, book.name)  # no summary either


def test_a_save_during_the_write_survives(book, monkeypatch):
    # The save lands while the new workbook is being built, after the check made before writing started.
    real = writeback._build_zip
    saved = {}

    def build_then_planner_saves(*args, **kwargs):
        real(*args, **kwargs)
        saved["bytes"] = _save_as_a_spreadsheet_program_does(book, 62)

    monkeypatch.setattr(writeback, "_build_zip", build_then_planner_saves)
    with pytest.raises(WriteError, match=r"the workbook changed while solving"):
        pipeline.run(book)
    assert book.read_bytes() == saved["bytes"]
    _folder_has_only(book.parent, book.name)


def test_a_save_while_solving_into_an_output_copy_writes_no_mixed_copy(book, tmp_path, monkeypatch):
    # With --output the input is not replaced, but the copy would carry the new inputs beside the old results.
    monkeypatch.setattr(pipeline, "before_write", lambda _outcome: _save_as_a_spreadsheet_program_does(book, 63))
    with pytest.raises(WriteError, match=r"changed while solving"):
        pipeline.run(book, output=tmp_path / "solved.xlsx")
    assert not (tmp_path / "solved.xlsx").exists()


def test_a_save_while_solving_is_a_write_error_in_json(book, monkeypatch):
    monkeypatch.setattr(pipeline, "before_write", lambda _outcome: _save_as_a_spreadsheet_program_does(book, 64))
    result = CliRunner().invoke(main, ["solve", str(book), "--json"])
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    assert doc["status"] == "write_error" and "changed while solving" in doc["error"]


def test_recorded_checksum_is_that_of_the_bytes_read(book):
    # Reference: hashlib's SHA-256 of the file as it was before the run (FIPS 180-4).
    want = hashlib.sha256(book.read_bytes()).hexdigest()
    outcome = pipeline.run(book)
    assert outcome.info.checksum == want
    assert hashlib.sha256(book.read_bytes()).hexdigest() != want  # rewritten; the checksum stays the input's
