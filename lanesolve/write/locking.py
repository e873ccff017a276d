"""Guards around writing a workbook: refuse one that a spreadsheet program has open, and serialise lanesolve runs.

Spreadsheet programs leave a lock file beside a workbook they have open: Excel writes ``~$<name>``, LibreOffice
``.~lock.<name>#``. Writing underneath them would be lost when they save, so lanesolve refuses instead.

Two lanesolve runs on one workbook take turns through an advisory lock on ``.<name>.lanesolve-lock`` beside it
(``fcntl.flock`` on POSIX, ``msvcrt.locking`` on Windows); the second waits up to ``wait_s`` seconds, then refuses.
"""

from __future__ import annotations

import contextlib
import os
import time
from collections.abc import Iterator
from pathlib import Path

from lanesolve.errors import WriteError


def spreadsheet_lock_files(path: str | Path) -> list[Path]:
    """Lock files of spreadsheet programs that have ``path`` open (empty when none).

    ``~$<name>`` and ``.~lock.<name>#`` name their workbook exactly. Excel's shortened form for long names,
    ``~$`` + the name without its first two characters, is ambiguous: ``~$plan.xlsx`` is also the exact lock file of
    a workbook ``plan.xlsx``. It is taken as this workbook's only when no workbook of that shorter name sits in the
    folder, so a stray lock file of another workbook never blocks this one.

    >>> spreadsheet_lock_files("/nonexistent/plan.xlsx")
    []
    """
    path = Path(path)
    candidates = [path.with_name("~$" + path.name), path.with_name(f".~lock.{path.name}#")]
    # Excel shortens long names in its owner file: it keeps the last characters and replaces the first two with ~$.
    if len(path.name) > 2 and not path.with_name(path.name[2:]).exists():
        candidates.append(path.with_name("~$" + path.name[2:]))
    return [c for c in dict.fromkeys(candidates) if c.exists()]


def refuse_if_open(path: str | Path) -> None:
    """Raise :class:`WriteError` when a spreadsheet program has ``path`` open."""
    found = spreadsheet_lock_files(path)
    if found:
        raise WriteError(
            f"{Path(path).name} is open in a spreadsheet program (its lock file {found[0].name} is beside it); "
            "close it there and run again — nothing was written"
        )


def _try_lock(fd: int) -> bool:
    try:
        import fcntl
    except ImportError:  # Windows
        import msvcrt

        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            return True
        except OSError:
            return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except OSError:
        return False


@contextlib.contextmanager
def workbook_lock(path: str | Path, wait_s: float = 10.0) -> Iterator[None]:
    """Hold the lanesolve lock for ``path`` while the block runs.

    Raises
    ------
    WriteError
        Another lanesolve run held the lock for longer than ``wait_s`` seconds, or the folder is not writable.
    """
    path = Path(path)
    lock_path = path.with_name(f".{path.name}.lanesolve-lock")
    deadline = time.monotonic() + wait_s
    while True:
        try:
            fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as error:
            raise WriteError(f"cannot write in the folder of {path.name}: {error.strerror}; nothing was written") \
                from error
        if _try_lock(fd):
            # The previous holder may have removed the file between our open and lock: then we hold a lock on a
            # file nobody else can see, so start again on the current one.
            try:
                same = os.path.samestat(os.fstat(fd), os.stat(lock_path))
            except FileNotFoundError:
                same = False
            if same:
                break
        os.close(fd)
        if time.monotonic() >= deadline:
            raise WriteError(f"another lanesolve run is writing {path.name}; try again when it has finished")
        time.sleep(0.1)
    try:
        yield
    finally:
        with contextlib.suppress(OSError):
            os.unlink(lock_path)
        os.close(fd)
