"""The console command leaves quickly (lanesolve.cli.run) but as the interpreter's own exit would: the same exit
codes, everything printed reaches its reader, exit handlers run and working threads finish first.

Reference: what CPython's shutdown does before unloading modules -- join non-daemon threads, run ``atexit``
handlers, flush standard streams; ``sys.exit`` with a non-integer prints it and exits 1 (Python documentation,
``sys.exit`` and ``atexit``; recalled from memory, and checked below against a plain interpreter exit)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

EXAMPLE = Path(__file__).resolve().parents[1] / "example_workbooks" / "orvale_larder_supply.xlsx"


def _command(*args: str, code: str = "") -> subprocess.CompletedProcess:
    probe = f"import sys\n{code}\nsys.argv = ['lanesolve', *{list(args)!r}]\nfrom lanesolve.cli import run\nrun()"
    return subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True)


def _plain(*args: str, code: str = "") -> subprocess.CompletedProcess:
    """The same command exiting the ordinary way (click's main, then the interpreter's own shutdown)."""
    probe = f"import sys\n{code}\nsys.argv = ['lanesolve', *{list(args)!r}]\nfrom lanesolve.cli import main\nmain()"
    return subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True)


@pytest.mark.parametrize("args", [("--version",), ("check", str(EXAMPLE)), ("no-such-command",),
                                  ("check", "missing.xlsx")])
def test_exit_code_and_output_are_those_of_the_ordinary_exit(args):
    quick, plain = _command(*args), _plain(*args)
    assert (quick.returncode, quick.stdout, quick.stderr) == (plain.returncode, plain.stdout, plain.stderr)


def test_a_solve_prints_its_whole_json_document_and_exits_0(tmp_path):
    book = tmp_path / "book.xlsx"
    book.write_bytes(EXAMPLE.read_bytes())
    done = _command("solve", str(book), "--json")
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["status"] == "optimal"


def test_exit_handlers_and_working_threads_finish_before_the_process_leaves(tmp_path):
    handler, worker = tmp_path / "handler", tmp_path / "worker"
    code = (f"import atexit, pathlib, threading, time\n"
            f"atexit.register(pathlib.Path({str(handler)!r}).write_text, 'ran')\n"
            f"def late():\n    time.sleep(0.3)\n    pathlib.Path({str(worker)!r}).write_text('done')\n"
            f"threading.Thread(target=late).start()")
    assert _command("--version", code=code).returncode == 0
    assert handler.read_text() == "ran" and worker.read_text() == "done"


def test_a_text_exit_is_printed_and_exits_1():
    code = "import lanesolve.cli as cli\ndef stop(*a, **k):\n    raise SystemExit('stopped here')\ncli.main = stop"
    done = _command("--version", code=code)
    assert done.returncode == 1 and done.stderr.strip() == "stopped here"
