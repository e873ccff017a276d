"""The input files as lanesolve reads them: only regular files, read within a stated bound, fingerprinted.

Three guards live here, used by the reader, the lanes-file reader and the pipeline:

- :func:`file_kind` / :func:`require_regular_file` -- a named pipe (FIFO) blocks the first ``open`` until a writer
  appears and a device such as ``/dev/zero`` never ends, so anything that is not a regular file is refused from its
  ``os.stat`` before it is opened (``stat`` follows a symbolic link to what it names).
- :func:`open_bounded` -- opens a regular file without blocking (``O_NONBLOCK``, so a FIFO put in place between the
  ``stat`` and the ``open`` cannot hang the run), checks again on the open descriptor that it is a regular file and
  no larger than the bound, and returns a stream that fails rather than read past the bound (a file that grows while
  it is read).
- :class:`Fingerprint` -- what the workbook was when it was read (device, inode, size, ``mtime_ns``, ``ctime_ns`` and
  the SHA-256 of its bytes). The pipeline takes it just before the reader parses the workbook and checks after the
  parse that the file's ``stat`` is unchanged: any write to the file moves ``mtime_ns``/``ctime_ns`` and a save by
  temporary file and rename (what spreadsheet programs do) changes the inode, so an unchanged ``stat`` means the
  bytes hashed are the bytes parsed. Before the results replace anything, :func:`changed_since` compares the file
  again, ``stat`` and hash, so a save made while solving is never overwritten and old results never land beside
  new inputs.
"""

from __future__ import annotations

import hashlib
import io
import os
import stat
from dataclasses import dataclass
from pathlib import Path

#: Bytes read at a time when hashing (1 MiB).
CHUNK = 1 << 20


def file_kind(path: str | os.PathLike) -> str | None:
    """What ``path`` is when it is not a regular file ("a folder", "a named pipe (FIFO)", ...); None otherwise.

    None also for a path that does not exist (callers say "no such file" in their own words). A symbolic link is
    judged by what it points to; a dangling link counts as missing.

    >>> file_kind("/dev/null")
    'a device'
    >>> file_kind("/nonexistent/plan.xlsx") is None
    True
    """
    try:
        mode = os.stat(path).st_mode
    except (FileNotFoundError, NotADirectoryError):
        return None
    return _kind_of_mode(mode)


def _kind_of_mode(mode: int) -> str | None:
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def require_regular_file(path: str | os.PathLike) -> str | None:
    """The reason ``path`` cannot be read as a file ("... is a named pipe (FIFO), not a file"), or None when it can.

    A missing file gives None: the caller reports it with its own hint.
    """
    kind = file_kind(path)
    return None if kind is None else f"{path} is {kind}, not a file lanesolve can read"


class _BoundedReader(io.RawIOBase):
    """A seekable read-only stream over a file descriptor that raises :class:`OSError` rather than return a byte
    past position ``limit`` (a file that grows while it is read)."""

    def __init__(self, fd: int, limit: int, name: str):
        self._file = os.fdopen(fd, "rb", buffering=0)
        self._limit = limit
        self.name = name

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def seek(self, offset: int, whence: int = io.SEEK_SET) -> int:
        return self._file.seek(offset, whence)

    def tell(self) -> int:
        return self._file.tell()

    def readinto(self, buffer) -> int:
        count = self._file.readinto(buffer)
        if self._file.tell() > self._limit:
            raise OSError(f"the file grew past {self._limit:,} bytes while it was read")
        return count

    def close(self) -> None:
        self._file.close()
        super().close()


def open_bounded(path: str | os.PathLike, limit: int) -> io.BufferedReader:
    """Open a regular file of at most ``limit`` bytes for reading, never blocking and never reading past ``limit``.

    Parameters
    ----------
    path : path-like
        The file.
    limit : int
        Most bytes the file may hold.

    Returns
    -------
    io.BufferedReader
        Raises :class:`OSError` from ``read`` if the file grows past ``limit`` while it is read.

    Raises
    ------
    ValueError
        The file is not a regular file, or is larger than ``limit`` (the message says which).
    OSError
        The file cannot be opened.
    """
    reason = require_regular_file(path)
    if reason is not None:  # judged from stat, before any open
        raise ValueError(reason)
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    try:
        info = os.fstat(fd)  # again on the descriptor: the path may have been swapped since the stat
        kind = _kind_of_mode(info.st_mode)
        if kind is not None:
            raise ValueError(f"{path} is {kind}, not a file lanesolve can read")
        if info.st_size > limit:
            raise ValueError(f"{path} holds {info.st_size:,} bytes, more than the {limit:,} lanesolve reads")
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
    except BaseException:
        os.close(fd)
        raise
    return io.BufferedReader(_BoundedReader(fd, limit, str(path)), buffer_size=CHUNK)


@dataclass(frozen=True)
class Fingerprint:
    """The workbook file as it was read: identity, size, change times and the SHA-256 of its bytes."""

    device: int
    inode: int
    size: int
    mtime_ns: int
    ctime_ns: int
    sha256: str

    def same_stat(self, info: os.stat_result) -> bool:
        """True when ``info`` (an ``os.stat`` of the path) shows the same file, unchanged since this fingerprint."""
        return (info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns, info.st_ctime_ns) == \
            (self.device, self.inode, self.size, self.mtime_ns, self.ctime_ns)


def fingerprint(path: str | os.PathLike) -> Fingerprint:
    """Hash the file's bytes and record its ``stat``, from one open descriptor.

    Raises
    ------
    OSError
        The file cannot be opened or read.
    ValueError
        The file is not a regular file, or it changed while it was hashed.
    """
    reason = require_regular_file(path)
    if reason is not None:  # from stat, before any open
        raise ValueError(reason)
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    with os.fdopen(fd, "rb", buffering=0) as fh:
        before = os.fstat(fd)
        kind = _kind_of_mode(before.st_mode)
        if kind is not None:
            raise ValueError(f"{path} is {kind}, not a file lanesolve can read")
        digest = hashlib.sha256()
        for chunk in iter(lambda: fh.read(CHUNK), b""):
            digest.update(chunk)
        after = os.fstat(fd)
    if (after.st_size, after.st_mtime_ns) != (before.st_size, before.st_mtime_ns):
        raise ValueError(f"{path} changed while it was read")
    return Fingerprint(before.st_dev, before.st_ino, before.st_size, before.st_mtime_ns, before.st_ctime_ns,
                       digest.hexdigest())


def changed_since(mark: Fingerprint, path: str | os.PathLike) -> bool:
    """True when the file at ``path`` is no longer the file ``mark`` recorded (stat or bytes differ, or it is gone).

    The ``stat`` comparison catches every ordinary save; the hash is compared too, so a file put back with the same
    times and size but other bytes is still caught.
    """
    try:
        if not mark.same_stat(os.stat(path)):
            return True
        return fingerprint(path).sha256 != mark.sha256
    except (OSError, ValueError):
        return True
