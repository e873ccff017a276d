"""Loading one large sheet in pieces, one per core, for the reader.

Calamine parses a sheet on one thread, and for a large Lanes sheet that parse is most of the run's reading (about
5.7 of 7 s at a million lanes). Its parse holds no interpreter lock, so a machine with a second core can parse a
second part of the sheet at the same time. Calamine reads whole workbooks only, so each piece becomes a workbook of
its own: the package's parts except its worksheets, stored uncompressed in a temporary file, with the sheet's part
cut to the rows of that piece. Calamine reads every piece as it reads the sheet (the same shared strings, styles and
date system), and the pieces' rows are put back together in order.

Only a part that :attr:`lanesolve.read.sheet_xml.Survey.bounded` has cleared is cut: in that markup every row tag is
``<row r="...`` and no cell reaches past :data:`lanesolve.read.sheet_xml.BOUNDED_EXTENT`, so a cut made just before
a row tag leaves whole rows on each side. When the pieces do not fit together exactly as one sheet -- a piece that
fails to load, rows of a later piece above those of an earlier one, a grid of unexpected shape -- :func:`load`
returns None and the reader loads the sheet whole, which gives the same cells or the error a planner should see.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import zipfile
import zlib
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import python_calamine

#: A sheet part of this many bytes of XML or more is loaded in pieces (a million-lane Lanes sheet is about 300 MB,
#: NETGEN's 131,072 lanes 40 MB; below a few megabytes the pieces' own costs outweigh the gain).
PIECES_FROM_BYTES = 8_000_000
#: Most pieces of one sheet, whatever the core count (each holds a share of the sheet's cells until they are joined).
MAX_PIECES = 4

_OPEN, _CLOSE, _ROW = b"<sheetData>", b"</sheetData>", b'<row r="'


def cores() -> int:
    """The cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        return os.cpu_count() or 1


def count_for(size: int, available: int | None = None) -> int:
    """How many pieces to load a sheet part of ``size`` bytes in: 1 (whole) below :data:`PIECES_FROM_BYTES` or on
    one core, else one per core up to :data:`MAX_PIECES` and one per :data:`PIECES_FROM_BYTES` of XML.

    Examples
    --------
    >>> count_for(300_000_000, 2), count_for(300_000_000, 16), count_for(12_000_000, 8), count_for(1_000_000, 8)
    (2, 4, 1, 1)
    """
    available = cores() if available is None else available
    return max(1, min(available, MAX_PIECES, size // PIECES_FROM_BYTES))


def cuts(data: bytes, count: int) -> list[int] | None:
    """Where to cut a worksheet part's rows into ``count`` pieces: the start of ``<sheetData>``'s content, the start of
    a row tag near each even share of it, and the end of its content; None when the part has no such content or
    too few rows to cut.

    Examples
    --------
    >>> part = b'<worksheet><sheetData><row r="1"><c r="A1"/></row><row r="2"><c r="A2"/></row></sheetData></worksheet>'
    >>> cuts(part, 2)
    [22, 50, 78]
    >>> part[50:78]
    b'<row r="2"><c r="A2"/></row>'
    """
    start = data.find(_OPEN)
    end = data.rfind(_CLOSE)
    if start < 0 or end < start:
        return None
    start += len(_OPEN)
    found = [start]
    for share in range(1, count):
        at = data.find(_ROW, max(found[-1] + 1, start + (end - start) * share // count), end)
        if at < 0:
            break
        found.append(at)
    return found + [end] if len(found) > 1 else None


def load(path: Path, part: str, data: bytes, sheet_name: str, count: int,
         worksheet_parts: set[str] = frozenset()) -> list[list] | None:
    """The sheet's rows as :meth:`python_calamine.CalamineSheet.to_python` gives them for the whole sheet
    (``skip_empty_area=False``: from A1, blank cells ``""``), loaded in ``count`` pieces on as many threads; or
    None when the pieces cannot stand for the whole sheet (see the module notes).

    Parameters
    ----------
    path : Path
        The workbook (an .xlsx/.xlsm zip package).
    part : str
        The zip member of the sheet's XML.
    data : bytes
        That member's bytes, cleared by :attr:`lanesolve.read.sheet_xml.Survey.bounded`.
    sheet_name : str
    count : int
        Pieces to cut (see :func:`count_for`).
    worksheet_parts : set of str
        The package's worksheet members, left out of the pieces' workbooks (calamine opens a sheet's part only when
        that sheet is loaded).
    """
    at = cuts(data, count)
    if at is None:
        return None
    try:
        folder = Path(tempfile.mkdtemp(prefix="lanesolve-pieces-"))
    except OSError:
        return None
    try:
        with ThreadPoolExecutor(len(at) - 1, "lanesolve-piece") as pool:
            loads = []
            for book in _piece_books(path, part, data, at, folder, set(worksheet_parts) | {part}):
                if book is None:
                    return None
                loads.append(pool.submit(_load_piece, book, sheet_name))  # parsing while the next piece is written
            return _joined([future.result() for future in loads])
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _piece_books(path: Path, part: str, data: bytes, at: list[int], folder: Path, left_out: set[str]):
    """Write one stored (uncompressed) workbook per piece and yield its path as soon as it is written: every member
    of the package but ``left_out``, and the sheet's part with ``data``'s rows from ``at[k]`` to ``at[k + 1]``.
    Yields None (and stops) when the package or a piece cannot be copied -- a damaged package, a full disk: the
    whole load then reports what it meets in its own words."""
    view = memoryview(data)
    head, tail = view[:at[0]], view[at[-1]:]
    try:
        with zipfile.ZipFile(path) as archive:
            others = [(info.filename, archive.read(info)) for info in archive.infolist()
                      if info.filename not in left_out and not info.is_dir()]
        for k in range(len(at) - 1):
            book = folder / f"piece-{k}.xlsx"
            with zipfile.ZipFile(book, "w", zipfile.ZIP_STORED) as piece:
                for name, content in others:
                    piece.writestr(name, content)
                with piece.open(part, "w", force_zip64=len(data) >= 2**31 - 1) as member:
                    member.write(head)
                    member.write(view[at[k]:at[k + 1]])
                    member.write(tail)
            yield book
    except (zipfile.BadZipFile, zipfile.LargeZipFile, EOFError, OSError, KeyError, zlib.error):
        yield None


def _load_piece(book: Path, sheet_name: str):
    """``(start, end, rows)`` of the sheet in one piece's workbook (rows from its first used cell), ``None`` when the
    piece holds no cell, or the exception calamine raised (the sheet is then loaded whole)."""
    try:
        sheet = python_calamine.CalamineWorkbook.from_path(str(book)).get_sheet_by_name(sheet_name)
        if sheet.end is None:
            return None
        return sheet.start, sheet.end, sheet.to_python(skip_empty_area=True)
    except BaseException as exc:  # noqa: BLE001 -- calamine's errors and panics alike: the whole load decides
        if not isinstance(exc, Exception) and type(exc).__name__ != "PanicException":
            raise
        return exc


def _joined(pieces: list) -> list[list] | None:
    """The rows of the whole sheet from A1, from the pieces in order; None when they do not fit together."""
    if any(isinstance(piece, BaseException) for piece in pieces):
        return None
    pieces = [piece for piece in pieces if piece is not None]
    if not pieces:
        return []
    width = max(end[1] for _, end, _ in pieces) + 1
    rows: list[list] = []
    for (top, left), (bottom, right), grid in pieces:
        if top < len(rows) or len(grid) != bottom - top + 1 or any(len(row) != right - left + 1 for row in grid):
            return None  # overlapping rows or a grid not of the shape calamine named
        rows.extend([""] * width for _ in range(top - len(rows)))  # blank rows between two pieces' cells
        if left == 0 and right == width - 1:
            rows.extend(grid)
        else:
            before, after = [""] * left, [""] * (width - 1 - right)
            rows.extend(before + row + after for row in grid)
    return rows
