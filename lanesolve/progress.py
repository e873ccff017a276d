"""Progress on a terminal: which stage runs and for how long, on one rewritten stderr line.

The pipeline calls ``progress(stage)`` as each stage starts (``None`` when the run ends). :class:`TerminalProgress`
shows that stage with a seconds counter that ticks in a background thread, and for the solve the time limit it runs
against, so a planner watching a long solve sees it is alive. It writes nothing unless the stream is a terminal, so
logs, pipes and ``--json`` output stay clean.
"""

from __future__ import annotations

import sys
import threading
import time
from collections.abc import Callable
from typing import TextIO

#: What the pipeline calls: ``progress("solving", 60.0)`` (stage and, for the solve, its time limit in seconds).
ProgressCallback = Callable[[str | None, float | None], None]


def no_progress(stage: str | None, limit: float | None = None) -> None:
    """The silent default."""


class TerminalProgress:
    """Show the running stage and its elapsed seconds on ``stream`` (stderr), only when it is a terminal.

    Parameters
    ----------
    stream : text stream, optional
        Where to write; defaults to ``sys.stderr``.
    interval : float
        Seconds between refreshes of the counter.
    force : bool
        Write even when the stream is not a terminal (for tests).
    """

    def __init__(self, stream: TextIO | None = None, interval: float = 0.5, force: bool = False):
        self.stream = stream or sys.stderr
        self.enabled = force or bool(getattr(self.stream, "isatty", lambda: False)())
        self.interval = interval
        self._stage: str | None = None
        self._limit: float | None = None
        self._started = 0.0
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._width = 0

    def __call__(self, stage: str | None, limit: float | None = None) -> None:
        if not self.enabled:
            return
        with self._lock:
            self._stage, self._limit, self._started = stage, limit, time.monotonic()
        if stage is None:
            self.close()
            return
        self._draw()
        if self._thread is None:
            self._thread = threading.Thread(target=self._tick, name="lanesolve-progress", daemon=True)
            self._thread.start()

    def line(self) -> str:
        """The text shown for the current stage, e.g. ``solving... 12 s of 60 s``."""
        with self._lock:
            stage, limit, started = self._stage, self._limit, self._started
        if stage is None:
            return ""
        elapsed = time.monotonic() - started
        text = f"{stage}... {elapsed:.0f} s"
        if limit:
            text += f" of {limit:.0f} s"
        return text

    def _draw(self) -> None:
        text = self.line()
        pad = max(self._width - len(text), 0)
        self._width = len(text)
        self.stream.write("\r" + text + " " * pad)
        self.stream.flush()

    def _tick(self) -> None:
        while not self._stop.wait(self.interval):
            if self._stage is not None:
                self._draw()

    def close(self) -> None:
        """Stop the counter and clear the line."""
        self._stop.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(timeout=2)
        if self._width:
            self.stream.write("\r" + " " * self._width + "\r")
            self.stream.flush()
            self._width = 0
