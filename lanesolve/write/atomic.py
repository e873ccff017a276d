"""Write a file whole or not at all: a temporary file beside the target, flushed to disk, then renamed over it.

Every file lanesolve writes (the solved workbook, the HTML summary, the mail, the blank template) goes through
:func:`replacing`, so a failure at any point -- an exception, a full disk, a killed process -- leaves the previous
file as it was. A killed process may leave its temporary file (``.<name>.<random>.tmp``) behind; it never replaced
anything, and :func:`remove_stale_temporaries` clears such leftovers on a later run.
"""

from __future__ import annotations

import contextlib
import glob
import os
import stat
import tempfile
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import BinaryIO

from lanesolve.errors import LanesolveError, WriteError

#: A leftover temporary file older than this is a dead run's, not a running one's (runs hold the workbook lock
#: while writing, and writing takes seconds).
STALE_AFTER_S = 3600.0


def _prefix(path: Path) -> str:
    return f".{path.name}."


@contextlib.contextmanager
def replacing(path: str | os.PathLike, what: str, hint: str = "", mode_from: str | os.PathLike | None = None,
              before_replace: Callable[[], None] | None = None) -> Iterator[BinaryIO]:
    """Yield a binary file to write; when the block ends cleanly, it replaces ``path`` atomically.

    Parameters
    ----------
    path : path-like
        The file to replace (or create).
    what : str
        What the file is, for messages ("the HTML summary").
    hint : str
        What the user can do when writing fails; a default about the folder is used when empty.
    mode_from : path-like, optional
        Give the new file this file's permission bits (temporary files are created private); by default the
        permissions of ``path`` when it exists, else the process default.
    before_replace : callable, optional
        Called with no arguments once the new file is complete and on disk, just before it replaces ``path``; it
        may raise (a :class:`~lanesolve.errors.WriteError`) to leave ``path`` as it is. The pipeline checks here,
        as late as it can, that the workbook was not saved by someone else while it was solved.

    Raises
    ------
    WriteError
        The file could not be written or replaced; ``path`` is unchanged and the temporary file is removed.
        A :class:`~lanesolve.errors.LanesolveError` raised inside the block passes through unchanged.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    hint = hint or "check that the folder exists and that you may write there"
    try:
        handle = tempfile.NamedTemporaryFile(dir=folder, prefix=_prefix(path), suffix=".tmp", delete=False)
    except OSError as exc:
        raise WriteError(f"cannot write into the folder {folder}: {exc.strerror or exc} ({hint}; "
                         f"{what} {path.name} was not written)") from exc
    temp = Path(handle.name)
    try:
        with handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        source = Path(mode_from) if mode_from is not None else (path if path.exists() else None)
        if source is not None:
            os.chmod(temp, stat.S_IMODE(os.stat(source).st_mode))
        else:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(temp, 0o666 & ~umask)
        if before_replace is not None:
            before_replace()
        try:
            os.replace(temp, path)
        except OSError as exc:
            raise WriteError(f"cannot replace {path}: {exc.strerror or exc} ({hint}; the previous file was left "
                             "as it was)") from exc
        _fsync_folder(folder)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            temp.unlink()
        if isinstance(exc, LanesolveError) or not isinstance(exc, Exception):
            raise
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else exc
        raise WriteError(f"could not write {what} {path}: {reason} ({hint}; the previous file was left as it was)") \
            from exc


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable where the platform can sync a directory (POSIX)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    with contextlib.suppress(OSError):
        os.fsync(fd)
    os.close(fd)


def remove_stale_temporaries(path: str | os.PathLike, older_than_s: float = STALE_AFTER_S) -> list[Path]:
    """Delete temporary files a killed run left beside ``path``; return what was removed.

    Only files named like this module's temporaries for ``path`` and older than ``older_than_s`` are touched.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    removed = []
    cutoff = time.time() - older_than_s
    with contextlib.suppress(OSError):
        for candidate in folder.glob(glob.escape(_prefix(path)) + "*.tmp"):
            with contextlib.suppress(OSError):
                if candidate.stat().st_mtime < cutoff:
                    candidate.unlink()
                    removed.append(candidate)
    return removed
