"""Where a run will write, decided and checked before anything is read or solved.

A run of ``lanesolve solve`` writes up to three files (the workbook or its ``--output`` copy, the HTML summary, the
``--email`` mail) and ``lanesolve batch`` one workbook and summary per input plus the batch summary CSV and JSON.
:func:`plan_solve` and :func:`plan_batch` resolve every one of them and refuse, all problems listed in one message:

- **two outputs that are one file** -- compared by their resolved paths (symbolic links followed) and, where both
  exist, by device and inode (:func:`os.path.samefile`), so a hard link is caught too;
- **an output that is the input** when the input must not change (``--output`` given, the mail, the summary);
- **an existing file lanesolve did not make**, unless ``force``: a workbook is lanesolve's when it carries the
  result sheet ``LS Summary``; an HTML summary when it carries :data:`SUMMARY_MARK` (the ``generator`` meta tag);
  a mail when it carries the header :data:`MAIL_HEADER`; a batch summary when its first line (CSV) or its keys (JSON)
  are the batch summary's own;
- **something that is not a regular file** (a folder, a named pipe, a device), **a read-only file** (no write
  permission bit, or no write access for this user), and **a missing folder**.

Symbolic links are written through: a target that is a link resolves to the file it names, and that file is
replaced atomically (temporary file beside it, then rename), so the link stays and points at the new results.
"""

from __future__ import annotations

import json
import os
import re
import stat
import zipfile
from dataclasses import dataclass
from pathlib import Path

from lanesolve.errors import WorkbookError, WriteError
from lanesolve.read.source import file_kind

#: The marker the HTML summary carries in its ``<head>`` (the template writes it).
SUMMARY_MARK = '<meta name="generator" content="lanesolve">'
#: Summaries written before the marker existed start with this style comment; they count as lanesolve's too.
_OLD_SUMMARY_MARK = "/* lanesolve summary:"
#: The header every mail lanesolve writes carries (the value is lanesolve's version).
MAIL_HEADER = "X-Lanesolve-Summary"
#: The result sheet that marks a workbook lanesolve has solved.
RESULT_MARK_SHEET = "LS Summary"
#: The first line of the batch summary CSV, and the keys of its JSON.
BATCH_CSV_HEADER = "path,status,total_cost,seconds,error"
BATCH_JSON_KEYS = {"workbooks", "with_plan", "failed", "runs"}
#: How much of a file is read to look for a marker (markers sit at the start of what lanesolve writes).
_HEAD_BYTES = 64 * 1024
_SHEET_NAME = re.compile(r'<(?:\w+:)?sheet\b[^>]*?\bname="([^"]*)"')
_FORCE_HINT = "choose another name, move the file away, or add --force to replace it"


@dataclass(frozen=True)
class Target:
    """One file a run writes.

    Attributes
    ----------
    role : str
        What it is, for messages ("the solved workbook", "the HTML summary", ...).
    given : Path
        The path as the user named it (shown in messages and results).
    real : Path
        Where the bytes go: ``given`` with every symbolic link resolved.
    kind : str
        ``"workbook"``, ``"summary"``, ``"mail"``, ``"batch_csv"`` or ``"batch_json"``: which marker proves that
        lanesolve made an existing file.
    """

    role: str
    given: Path
    real: Path
    kind: str


@dataclass(frozen=True)
class WritePlan:
    """Every file one solve writes: the solved workbook, its summary and, with ``--email``, the mail."""

    source: Path
    workbook: Target
    summary: Target
    mail: Target | None = None


def real_path(path: str | os.PathLike) -> Path:
    """``path`` made absolute with every symbolic link resolved (also for a file that does not exist yet)."""
    return Path(os.path.realpath(os.path.abspath(path)))


def summary_path_for(output: str | os.PathLike) -> Path:
    """The HTML summary's path: ``<stem>-summary.html`` beside the workbook."""
    output = Path(output)
    return output.with_name(f"{output.stem}-summary.html")


def _target(role: str, path: str | os.PathLike, kind: str) -> Target:
    return Target(role, Path(path), real_path(path), kind)


def _same_file(a: Path, b: Path) -> bool:
    if real_path(a) == real_path(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False  # one of them does not exist yet, and their resolved paths differ


def _head(path: Path) -> bytes:
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except OSError:
        return b""
    with os.fdopen(fd, "rb", buffering=0) as fh:
        return fh.read(_HEAD_BYTES)


def sheet_names(path: str | os.PathLike) -> list[str]:
    """Names of the sheets of an .xlsx/.xlsm workbook, from its workbook part; empty when it is not one."""
    try:
        with zipfile.ZipFile(path) as archive:
            with archive.open("xl/workbook.xml") as part:
                text = part.read(16 << 20).decode("utf-8", "replace")
    except (OSError, KeyError, zipfile.BadZipFile, EOFError, RuntimeError, ValueError, NotImplementedError):
        return []
    return [name.replace("&amp;", "&").replace("&quot;", '"').replace("&lt;", "<").replace("&gt;", ">")
            .replace("&apos;", "'") for name in _SHEET_NAME.findall(text)]


def made_by_lanesolve(path: str | os.PathLike, kind: str) -> bool:
    """True when the existing file at ``path`` carries the mark of what lanesolve writes as ``kind``.

    >>> made_by_lanesolve("/nonexistent/x-summary.html", "summary")
    False
    """
    path = Path(path)
    if kind == "template":
        return False  # a blank template is soon a filled workbook: never replace one without --force
    if kind == "workbook":
        return RESULT_MARK_SHEET in sheet_names(path)
    head = _head(path)
    if kind == "summary":
        return SUMMARY_MARK.encode() in head or _OLD_SUMMARY_MARK.encode() in head
    if kind == "mail":
        header, _, _ = head.partition(b"\r\n\r\n")
        return re.search(rb"(?im)^" + MAIL_HEADER.encode() + rb":", header) is not None
    if kind == "batch_csv":
        return head.splitlines()[:1] == [BATCH_CSV_HEADER.encode()]
    if kind == "batch_json":
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return False
        return isinstance(doc, dict) and BATCH_JSON_KEYS <= set(doc)
    raise ValueError(f"unknown kind of file {kind!r}")


def read_only(path: str | os.PathLike) -> bool:
    """True when the existing file at ``path`` has no write permission bit, or this user may not write it.

    Both tests, because an administrator account is allowed to write a file whose mode says read-only; the mode
    is what the planner set, so it is honoured.
    """
    try:
        mode = os.stat(path).st_mode
    except OSError:
        return False
    return not (mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH)) or not os.access(path, os.W_OK)


def _check_target(target: Target, force: bool, problems: list[str]) -> None:
    """Append to ``problems`` why ``target`` may not be written (each reason a sentence)."""
    name = target.given
    folder = target.real.parent
    if not folder.is_dir():
        problems.append(f"{target.role} {name}: the folder {target.given.parent or '.'} does not exist "
                        f"(create it, or choose another path)")
        return
    kind = file_kind(target.real)
    if kind is not None:
        problems.append(f"{target.role} {name} is {kind}, not a file lanesolve can replace (choose another path)")
        return
    if not target.real.exists():
        return
    if read_only(target.real):
        problems.append(f"{target.role} {name} is read-only; lanesolve does not write over a read-only file "
                        f"(make it writable if it should change, or choose another path)")
    elif not force and not made_by_lanesolve(target.real, target.kind):
        problems.append(f"{target.role} {name} already exists and lanesolve did not write it; {_FORCE_HINT}")


def _check_distinct(items: list[tuple[str, Path]], problems: list[str]) -> None:
    """Append a problem for every two of ``items`` (description naming the path, path) that are one file.

    Files are keyed by resolved path and, when they exist, by device and inode, so symbolic and hard links to one
    file meet under one key (linear in the number of items, for batches of thousands).
    """
    seen: dict[object, str] = {}
    for label, path in items:
        keys: list[object] = [real_path(path)]
        try:
            info = os.stat(path)
            keys.append((info.st_dev, info.st_ino))
        except OSError:
            pass
        clash = next((seen[key] for key in keys if key in seen), None)
        if clash is not None:
            problems.append(f"{clash} and {label} are the same file; each must be a file of its own "
                            f"(choose another name)")
        for key in keys:
            seen.setdefault(key, label)


def _raise(problems: list[str]) -> None:
    if len(problems) == 1:
        raise WriteError(f"{problems[0]}; nothing was written")
    if problems:
        raise WriteError(f"{len(problems)} problems with the files to write; nothing was written:\n  "
                         + "\n  ".join(problems))


def check_new_file(path: str | os.PathLike, role: str, kind: str, force: bool = False) -> Target:
    """Check one file a command writes on its own (the blank template: ``kind="template"``) as :func:`plan_solve`
    checks each of its files; return where to write it (symbolic links resolved).

    Raises
    ------
    WriteError
        The folder is missing; the path is a folder, pipe or device or read-only; or the file exists, lanesolve
        did not write it (an existing file never counts as lanesolve's for ``kind="template"``) and ``force`` is
        false.
    """
    target = _target(role, path, kind)
    problems: list[str] = []
    _check_target(target, force, problems)
    _raise(problems)
    return target


def plan_solve(path: str | os.PathLike, output: str | os.PathLike | None = None,
               email: str | os.PathLike | None = None, force: bool = False) -> WritePlan:
    """Resolve and check every file one solve writes, before anything is read.

    Parameters
    ----------
    path : path-like
        The input workbook.
    output : path-like, optional
        ``--output``: the copy to write; the input must then not change.
    email : path-like, optional
        ``--email``: the mail to write.
    force : bool
        Replace existing files lanesolve did not write (``--force``).

    Returns
    -------
    WritePlan

    Raises
    ------
    WorkbookError
        The input workbook does not exist, or is a folder, pipe or device.
    WriteError
        Listing every problem: two outputs are one file; an output is the input (with ``--output``, or the summary
        or mail); an output exists, lanesolve did not write it and ``force`` is false; an output is a folder, pipe
        or device, is read-only (the workbook itself too, when results go back into it), or its folder is missing.
    """
    source = Path(path)
    if not os.path.lexists(source):
        # The reader's words, before any complaint about where results would go.
        raise WorkbookError(f"{source}: no such file (check the name and folder)")
    if (kind := file_kind(source)) is not None:
        raise WorkbookError(f"{source} is {kind}, not a workbook file lanesolve can read")
    problems: list[str] = []
    into_source = output is None
    workbook = _target("the workbook" if into_source else "the output workbook",
                       source if into_source else output, "workbook")
    summary = _target("the HTML summary", summary_path_for(workbook.given), "summary")
    mail = _target("the mail", email, "mail") if email is not None else None
    if into_source:
        if read_only(workbook.real):
            problems.append(f"the workbook {source} is read-only, so its results cannot be written into it "
                            f"(make it writable, or write a copy with --output)")
    else:
        _check_target(workbook, force, problems)
    _check_target(summary, force, problems)
    if mail is not None:
        _check_target(mail, force, problems)
    named = [] if into_source else [(f"the input workbook {source}", source)]
    named += [(f"{workbook.role} {workbook.given}", workbook.given), (f"the HTML summary {summary.given}",
                                                                      summary.given)]
    if mail is not None:
        named.append((f"the mail (--email) {mail.given}", mail.given))
    _check_distinct(named, problems)
    _raise(problems)
    return WritePlan(source, workbook, summary, mail)


def plan_batch(paths: list[str], summary_csv: str | os.PathLike, force: bool = False) -> tuple[Target, Target]:
    """Check the batch summary files (CSV and the JSON beside it) against each other and every file the batch
    touches, before any workbook is solved.

    Each workbook's own files are checked by :func:`plan_solve` when its run starts (a problem there fails that
    workbook only); two workbooks whose summaries would be one file (``a.xlsx`` and ``a.xlsm``) are refused here.

    Returns
    -------
    (Target, Target)
        The CSV and the JSON summary.

    Raises
    ------
    WriteError
        Listing every problem found.
    """
    problems: list[str] = []
    csv_target = _target("the batch summary", summary_csv, "batch_csv")
    json_target = _target("the batch summary JSON", Path(summary_csv).with_suffix(".json"), "batch_json")
    if Path(summary_csv).suffix.lower() == ".json":
        problems.append(f"the batch summary {summary_csv} must not end in .json: its JSON twin is written beside it "
                        f"under that name (use a .csv name)")
    _check_target(csv_target, force, problems)
    _check_target(json_target, force, problems)
    named = [(f"the batch summary {csv_target.given}", csv_target.given),
             (f"the batch summary JSON {json_target.given}", json_target.given)]
    # A workbook listed twice is the batch's own business (it is solved once); list each file once here.
    unique: dict[Path, Path] = {}
    for given in paths:
        unique.setdefault(real_path(given), Path(given))
    for given in unique.values():
        named += [(f"the workbook {given}", given),
                  (f"the HTML summary of {given} ({summary_path_for(given)})", summary_path_for(given))]
    _check_distinct(named, problems)
    _raise(problems)
    return csv_target, json_target
