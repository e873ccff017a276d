"""Limits that keep a hostile or broken workbook from exhausting memory, disk or time before it is even read.

A workbook (.xlsx, .xlsm, .ods) is a zip archive of XML parts. Two kinds of file are refused here, from the zip's
central directory and the first bytes of each XML part, before any part is parsed:

- **zip bombs and oversized parts**: the sum of the declared uncompressed sizes exceeds :data:`MAX_TOTAL_BYTES`
  (1 GiB), or one part is larger than :data:`RATIO_MIN_BYTES` (50 MB) *and* compressed more than
  :data:`MAX_RATIO` (200:1), or the archive holds more than :data:`MAX_MEMBERS` members. Real workbooks stay far
  below: a 1,000,000-row lane sheet is a few hundred MB uncompressed, and spreadsheet XML compresses about 10:1 to
  30:1 (common practice; a part of one repeated byte is what reaches 1000:1). Reading is bounded in time by the
  size bound, since every reader's work grows with the bytes it parses.
- **XML entity declarations** (``<!DOCTYPE`` / ``<!ENTITY``) in any XML part: workbook XML never needs them and
  they are the vehicle of "billion laughs" entity expansion and of external entity reads (the Open Packaging
  Conventions, ECMA-376 Part 2, forbid DTD declarations in package parts -- recalled from memory).
  The reader additionally parses with :mod:`defusedxml`, which refuses them too.

The sizes a zip declares could lie; zipfile then stops with an error when a member inflates past its declared size
(it checks size and CRC), so a lying archive is reported as damaged rather than read without limit.
"""

from __future__ import annotations

import codecs
import re
import zipfile
from pathlib import Path

from lanesolve.errors import WorkbookError

#: Refuse a workbook whose parts add up to more than this many bytes uncompressed (1 GiB).
MAX_TOTAL_BYTES = 1 << 30
#: Refuse a part compressed more than this many times ...
MAX_RATIO = 200
#: ... when it is also larger than this many bytes uncompressed (50 MB); small parts of repeated markup may
#: legitimately compress very well.
RATIO_MIN_BYTES = 50 * 1000 * 1000
#: Refuse an archive with more members than this (a workbook has a few per sheet).
MAX_MEMBERS = 100_000
#: How many leading bytes of each XML part are searched for a document type or entity declaration.
PROLOG_BYTES = 64 * 1024

_XML_SUFFIXES = (".xml", ".rels", ".vml")
_DECLARATION = re.compile(rb"<!\s*(DOCTYPE|ENTITY)", re.IGNORECASE)
_DECLARATION_TEXT = re.compile(r"<!\s*(DOCTYPE|ENTITY)", re.IGNORECASE)
_HINT = "lanesolve refuses it for safety; open it in a spreadsheet program and save it as a new .xlsx"


def _mb(n: int) -> str:
    return f"{n / 1e6:,.0f} MB"


def check_archive(path: str | Path, archive: zipfile.ZipFile | None = None) -> None:
    """Refuse a zip-based workbook that is a zip bomb, has an oversized part or declares XML entities.

    Parameters
    ----------
    path : path-like
        The workbook (used in messages; opened when ``archive`` is not given).
    archive : zipfile.ZipFile, optional
        The workbook already open.

    Raises
    ------
    WorkbookError
        Too many members, too many bytes uncompressed, a part compressed absurdly well, or a ``<!DOCTYPE`` or
        ``<!ENTITY`` declaration in an XML part. Damaged zips are left for the reader to report.
    """
    path = Path(path)
    if archive is None:
        try:
            with zipfile.ZipFile(path) as opened:
                check_archive(path, opened)
        except (zipfile.BadZipFile, EOFError, OSError):
            return  # not a readable zip: the reader says so in its own words
        return
    infos = archive.infolist()
    if len(infos) > MAX_MEMBERS:
        raise WorkbookError(f"{path} holds {len(infos):,} parts, more than the {MAX_MEMBERS:,} lanesolve accepts; "
                            f"{_HINT}")
    total = 0
    for info in infos:
        total += info.file_size
        if info.file_size > RATIO_MIN_BYTES and info.file_size > MAX_RATIO * max(info.compress_size, 1):
            ratio = info.file_size / max(info.compress_size, 1)
            raise WorkbookError(f"{path}: part {info.filename} unpacks from {_mb(info.compress_size)} to "
                                f"{_mb(info.file_size)} ({ratio:,.0f} times), which no real workbook does "
                                f"(a zip bomb?); {_HINT}")
    if total > MAX_TOTAL_BYTES:
        raise WorkbookError(f"{path} unpacks to {_mb(total)}, more than the {_mb(MAX_TOTAL_BYTES)} lanesolve "
                            f"accepts; split the workbook or remove sheets lanesolve does not need")
    for info in infos:
        if info.is_dir() or not info.filename.lower().endswith(_XML_SUFFIXES):
            continue
        if _declares_entities(archive, info):
            raise WorkbookError(f"{path}: part {info.filename} declares a document type or XML entities "
                                f"(<!DOCTYPE or <!ENTITY), which workbooks never need and which can make a "
                                f"reader expand text without limit; {_HINT}")


def _declares_entities(archive: zipfile.ZipFile, info: zipfile.ZipInfo) -> bool:
    """True when the first :data:`PROLOG_BYTES` of the part hold a DOCTYPE or ENTITY declaration.

    A document type declaration can only come before the root element (XML 1.0 section 2.8), which in a workbook
    part is within the first few hundred bytes, so the head of the part is enough. UTF-16 parts are decoded first.
    """
    try:
        with archive.open(info) as part:
            head = part.read(PROLOG_BYTES)
    except (zipfile.BadZipFile, EOFError, OSError, NotImplementedError, RuntimeError, ValueError):
        return False  # unreadable: the reader reports the damage
    if head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        return bool(_DECLARATION_TEXT.search(head.decode("utf-16", "replace")))
    return bool(_DECLARATION.search(head))


#: Workbook kinds lanesolve can write result sheets into (the zip-level writer edits SpreadsheetML parts).
WRITABLE_SUFFIXES = (".xlsx", ".xlsm")


def check_write_target(source: str | Path, target: str | Path) -> None:
    """Refuse, before any solving, a write-back the zip-level writer cannot do.

    The reader takes .xls, .xlsb and .ods workbooks (python-calamine reads their values), but results can only be
    written into SpreadsheetML packages (.xlsx, .xlsm): the writer adds sheets to the package, keeping every other
    part byte for byte, and has no way to extend a binary or OpenDocument file.

    Parameters
    ----------
    source : path-like
        The workbook read.
    target : path-like
        Where the results would be written (``source`` itself, or ``--output``).

    Raises
    ------
    WriteError
        The source is not an .xlsx/.xlsm package, or the target's name does not end in .xlsx or .xlsm.

    Examples
    --------
    >>> check_write_target("plan.ods", "plan.ods")
    Traceback (most recent call last):
    ...
    lanesolve.errors.WriteError: plan.ods is an OpenDocument (.ods) workbook: lanesolve reads it, but writes \
result sheets only into .xlsx or .xlsm workbooks, so nothing was written; save it as .xlsx in a spreadsheet \
program and run on that copy ('lanesolve check' validates it without writing)
    """
    from lanesolve.errors import WriteError

    source, target = Path(source), Path(target)
    kind = _KIND_NAMES.get(source.suffix.lower())
    if kind is None and source.suffix.lower() not in WRITABLE_SUFFIXES:
        kind = f"{source.suffix or 'unnamed'} file"
    if kind is None and source.is_file() and not zipfile.is_zipfile(source):
        kind = "binary (not a zip-based .xlsx)"
    if kind is not None:
        raise WriteError(f"{source.name} is {_article(kind)} {kind} workbook: lanesolve reads it, but writes result "
                         f"sheets only into .xlsx or .xlsm workbooks, so nothing was written; save it as .xlsx in a "
                         f"spreadsheet program and run on that copy ('lanesolve check' validates it without "
                         f"writing)")
    if target.suffix.lower() not in WRITABLE_SUFFIXES:
        raise WriteError(f"cannot write results to {target.name}: the output must be an .xlsx or .xlsm file "
                         f"(nothing was written); choose a name ending in {source.suffix.lower() or '.xlsx'}")


_KIND_NAMES = {".xls": "Excel 97-2003 (.xls)", ".xlsb": "Excel binary (.xlsb)", ".ods": "OpenDocument (.ods)",
               ".xla": "Excel add-in (.xla)", ".xlam": "Excel add-in (.xlam)"}


def _article(kind: str) -> str:
    return "an" if kind[:1].lower() in "aeiou" or kind.startswith(("Excel", "OpenDocument", ".x")) else "a"
