"""Progress on a terminal: shown only on a terminal, counts seconds, clears its line, and the pipeline drives it."""

import io
import time

from lanesolve.progress import TerminalProgress


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_nothing_is_written_when_the_stream_is_not_a_terminal():
    stream = io.StringIO()
    progress = TerminalProgress(stream)
    progress("solving", 60.0)
    progress(None, None)
    assert stream.getvalue() == ""


def test_solving_shows_elapsed_time_against_the_limit():
    stream = _Tty()
    progress = TerminalProgress(stream, interval=0.05)
    progress("solving", 60.0)
    time.sleep(0.2)
    assert progress.line().startswith("solving... ") and progress.line().endswith(" s of 60 s")
    progress(None, None)
    written = stream.getvalue()
    assert "solving... 0 s of 60 s" in written
    assert written.endswith("\r")  # the line is cleared at the end


def test_pipeline_reports_every_stage_in_order(tmp_path):
    from lanesolve.pipeline import run
    from conftest import write_workbook

    path = tmp_path / "tiny.xlsx"
    write_workbook(path, {"Depots": [["depot", "supply"], ["D", 5]], "Customers": [["customer", "demand"], ["C", 5]],
                          "Lanes": [["origin", "destination", "cost_per_unit"], ["D", "C", 1]]})
    seen = []
    run(path, output=tmp_path / "out.xlsx", progress=lambda stage, limit: seen.append((stage, limit)))
    assert [s for s, _ in seen] == ["reading", "checking", "solving", "writing results", None]
    assert dict(seen)["solving"] == 60.0  # the contract's default time_limit_s
