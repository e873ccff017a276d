"""Stage "read": turn a workbook file into plain cell values, sheet by sheet.

Values come from python-calamine, which is fast (a 100k-row sheet in well under a second) and reads .xlsx, .xlsm,
.xls, .xlsb and .ods. Only the sheets lanesolve needs are loaded -- the contract's input sheets and Scenarios, found
by name (see :func:`lanesolve.contract.is_read_sheet`); every other sheet is listed by name only, so a notes sheet
of any size or shape costs nothing (in an .xlsx/.xlsm/.xlsb file; calamine reads every sheet of an .xls or .ods
file when it opens it).

Calamine builds a dense grid from A1 to a sheet's last used cell, so one stray cell at XFD1048576 would ask for
hundreds of gigabytes and abort the process. For .xlsx/.xlsm files the extent of every sheet to load is therefore
measured in its XML first (:func:`lanesolve.read.sheet_xml.used_extent`) and a sheet beyond :data:`MAX_ROWS`,
:data:`MAX_COLUMNS` or :data:`MAX_CELLS` is refused by name before calamine sees it; for the other kinds the same
bounds are checked once calamine has read the sheet, before its cells become Python values. A panic inside
calamine (pyo3's ``PanicException``, a ``BaseException``) becomes a :class:`~lanesolve.errors.WorkbookError` naming
the sheet.

Calamine shows a cell holding a spreadsheet error value (``#N/A``, ``#DIV/0!``...) and a formula whose result was
never saved as an empty string, which would make such cells look blank; the same XML scan lists them in
:attr:`RawSheet.bad_cells`, and lists the percent-formatted cells of the Scenarios sheet in
:attr:`RawSheet.percent_cells` (a ``10%`` cell stores 0.1, and a scale of 0.1 is rarely what a planner meant).

Order of work: calamine parses a sheet without holding Python's interpreter lock, so a worker thread loads each
sheet as soon as its reach is known to be safe -- for the usual markup, one search showing that no reference goes
past row 1,039,999 or column Z (:func:`lanesolve.read.sheet_xml.within_bounded_extent`) -- while the calling thread
scans that sheet's XML for bad cells and goes on to the next sheet. The sheets' results are taken in workbook order,
so the failure reported first is the one reading them one after another would have met first.

Nothing here judges the values; that is :mod:`lanesolve.read.validate`'s job.
"""

from __future__ import annotations

import posixpath
import zipfile
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from xml.etree import ElementTree

import defusedxml
import defusedxml.ElementTree as SafeElementTree
import python_calamine

from lanesolve import contract
from lanesolve.read import guard
from lanesolve.read import pieces
from lanesolve.read import sheet_xml
from lanesolve.read import source
from lanesolve.errors import Problem, WorkbookError

_ZIP_MAGIC = b"PK\x03\x04"
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
# An encrypted (password-protected) .xlsx is an OLE compound file holding a stream of this name (MS-OFFCRYPTO 2.3.4.4);
# directory entry names are stored in UTF-16LE.
_ENCRYPTED_STREAM = "EncryptedPackage".encode("utf-16-le")

_REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG_REL_NS = "http://schemas.openxmlformats.org/package/2006/relationships"

_OPEN_AND_SAVE_HINT = "open the file in a spreadsheet program and save it, then try again"

#: Most rows of a sheet lanesolve reads: the most any spreadsheet program holds (1,048,576).
MAX_ROWS = 1_048_576
#: Most columns of a sheet lanesolve reads; the widest input sheet has a dozen contract columns, so 200 leaves
#: ample room for notes.
MAX_COLUMNS = 200
#: Most cells (rows x columns from A1 to the last used cell) of one sheet lanesolve reads: calamine holds each in
#: about 32 bytes before Python sees it, so 30 million cells is about 1 GB at most.
MAX_CELLS = 30_000_000


@dataclass
class RawSheet:
    """The cell values of one sheet, as stored.

    Attributes
    ----------
    name : str
        The sheet's name as written in the workbook.
    rows : list of list
        ``rows[0]`` is spreadsheet row 1 and ``rows[i][0]`` column A, including leading blank rows and columns, so
        ``rows[r - 1][c - 1]`` is the cell at row ``r``, column ``c``. Empty cells are ``""``; numbers are float
        (or int), yes/no cells bool, dates ``datetime.date``/``datetime.datetime``.
    bad_cells : dict
        ``(row, column)`` (both 1-based) -> text to show, for cells holding an error value (``"#N/A"``) or a formula
        with no saved result (``"formula =SUM(B2:B4) has no saved value"``). Their entry in ``rows`` is ``""``.
    hidden : bool
        True when the sheet is hidden in the workbook.
    percent_cells : set
        ``(row, column)`` (both 1-based) of cells shown with a percent number format; filled for the Scenarios sheet
        of an .xlsx/.xlsm workbook only (other file kinds do not say).
    """

    name: str
    rows: list[list]
    bad_cells: dict[tuple[int, int], str] = field(default_factory=dict)
    hidden: bool = False
    percent_cells: set[tuple[int, int]] = field(default_factory=set)


@dataclass
class RawWorkbook:
    """The sheets lanesolve reads, keyed by the sheet's real name (in workbook order), and every sheet's name.

    Attributes
    ----------
    path : str
    sheets : dict
        Sheet name -> :class:`RawSheet`, for the sheets whose name is a contract sheet's or Scenarios.
    sheet_names : list of str
        Every worksheet's name in workbook order, loaded or not (result sheets left out), for messages such as
        "did you mean sheet 'Lane'?". Empty means: the names of ``sheets``.
    """

    path: str
    sheets: dict[str, RawSheet]
    sheet_names: list[str] = field(default_factory=list)

    def names(self) -> list[str]:
        """Every sheet name in workbook order (see ``sheet_names``)."""
        return list(self.sheet_names) or list(self.sheets)


def read_workbook(path: str | Path) -> RawWorkbook:
    """Read the cell values of the sheets lanesolve needs, and find error cells and formulas without saved results.

    Parameters
    ----------
    path : path-like
        A workbook: .xlsx, .xlsm (error, formula and percent cells are detected, sizes checked before loading), or
        .xls, .xlsb, .ods (values only, sizes checked after calamine has read the sheet).

    Returns
    -------
    RawWorkbook
        Only sheets for which :func:`lanesolve.contract.is_read_sheet` holds are loaded; sheets whose name starts
        with :data:`lanesolve.contract.RESULT_PREFIX` (results of an earlier run) are not even listed.

    Raises
    ------
    WorkbookError
        The file does not exist, or is not a workbook: a text or CSV file renamed, a damaged or truncated file, a zip
        archive without a workbook inside, or a password-protected file. A sheet to load reaches beyond
        :data:`MAX_ROWS`, :data:`MAX_COLUMNS` or :data:`MAX_CELLS` (every such sheet is named), or calamine fails
        or panics while reading a sheet.
    """
    path = Path(path)
    if not path.exists():
        raise WorkbookError(f"{path}: no such file (check the name and folder)")
    if path.is_dir():
        raise WorkbookError(f"{path} is a folder, not a workbook file")
    if (reason := source.require_regular_file(path)) is not None:  # a FIFO or device would block or never end
        raise WorkbookError(f"{reason} (name the workbook file itself)")
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except OSError as exc:
        raise WorkbookError(f"{path} cannot be opened: {exc.strerror or exc} (check that you may read it)") from exc

    package = _Package({}, None)
    if head.startswith(_ZIP_MAGIC):
        guard.check_archive(path)  # before any part is parsed: zip bombs, entity declarations
        package = _xlsx_package(path)
    elif head.startswith(_OLE_MAGIC):
        if _ENCRYPTED_STREAM in path.read_bytes():
            raise WorkbookError(f"{path} is protected with a password; lanesolve cannot read it "
                                f"(open it, remove the password under the file's protection settings, and save)")
    else:
        raise WorkbookError(_not_a_workbook(path, head))

    try:
        book = python_calamine.CalamineWorkbook.from_path(str(path))
        metadata = list(book.sheets_metadata)
    except python_calamine.PasswordError as exc:
        raise WorkbookError(f"{path} is protected with a password; lanesolve cannot read it "
                            f"(remove the password and save the file)") from exc
    except (python_calamine.CalamineError, ValueError, OSError) as exc:
        raise WorkbookError(f"{path} could not be read as a workbook ({exc}); {_OPEN_AND_SAVE_HINT} "
                            f"as .xlsx") from exc
    except BaseException as exc:
        _raise_if_panic(exc, f"{path} could not be read: the workbook reader failed inside ({exc})")
        raise

    names = [meta.name for meta in metadata if not meta.name.startswith(contract.RESULT_PREFIX)
             and meta.typ == python_calamine.SheetTypeEnum.WorkSheet]  # chart and dialog sheets hold no cells
    wanted = [meta for meta in metadata if meta.name in names and contract.is_read_sheet(meta.name)]
    sheets: dict[str, RawSheet] = {}
    loading: list[tuple[object, dict, set, Future]] = []
    with _maybe_zip(path, package.sheet_parts) as archive, ThreadPoolExecutor(1, "lanesolve-read") as loader:
        earlier = 0  # the sheets before the one being scanned
        try:
            for meta in wanted:
                earlier, name = len(loading), meta.name
                bad: dict[tuple[int, int], str] = {}
                percent: set[tuple[int, int]] = set()
                if archive is None or name not in package.sheet_parts:
                    loading.append((meta, bad, percent, loader.submit(_load_rows, path, book, name)))
                    continue
                part = package.sheet_parts[name]
                data = sheet_xml.read_part(path, archive, part)
                survey = sheet_xml.Survey.of(data)
                if not (_BOUNDED_IS_SAFE and sheet_xml.within_bounded_extent(data, survey)):
                    problem = _size_problem(name, *sheet_xml.used_extent(data, survey))
                    if problem is not None:
                        loading.append((meta, bad, percent, _refused(problem)))
                        continue
                count = pieces.count_for(len(data)) if survey.bounded else 1
                loading.append((meta, bad, percent, loader.submit(_load_rows, path, book, name) if count == 1 else
                                loader.submit(_load_rows_in_pieces, path, book, name, part, data, count,
                                              set(package.sheet_parts.values()))))
                bad.update(sheet_xml.bad_cells(data, f"{path}: sheet part {part}", survey))
                if contract.normalize(name) == contract.normalize(contract.SCENARIOS_SHEET) and \
                        package.styles_part in package.names:
                    styles = sheet_xml.read_part(path, archive, package.styles_part)
                    percent.update(sheet_xml.styled_cells(data, sheet_xml.percent_style_ids(styles)))
                del data
        except BaseException:
            for *_, future in loading[:earlier]:  # an earlier sheet's failure comes first, as in reading order
                future.result()
            raise
        too_big: list[Problem] = []
        for meta, bad, percent, future in loading:
            rows, problem = future.result()
            if problem is not None:
                too_big.append(problem)
            if rows is None:
                continue
            hidden = meta.visible != python_calamine.SheetVisibleEnum.Visible
            sheets[meta.name] = RawSheet(name=meta.name, rows=rows, bad_cells=bad, hidden=hidden,
                                         percent_cells=percent)
    if too_big:
        raise WorkbookError(too_big)
    return RawWorkbook(path=str(path), sheets=sheets, sheet_names=names)


def _refused(problem: Problem) -> Future:
    """The finished load of a sheet refused for its size before calamine saw it."""
    future: Future = Future()
    future.set_result((None, problem))
    return future


def _load_rows(path: Path, book, name: str) -> tuple[list[list] | None, Problem | None]:
    """The sheet's cells as Python values and None; or None and the problem when the sheet is too large."""
    try:
        sheet = book.get_sheet_by_name(name)
        end = sheet.end  # (last row, last column), 0-based, or None for an empty sheet
        if end is not None:
            problem = _size_problem(name, end[0] + 1, end[1] + 1)
            if problem is not None:
                return None, problem
        return sheet.to_python(skip_empty_area=False), None
    except (python_calamine.CalamineError, ValueError) as exc:
        raise WorkbookError(f"{path}: sheet '{name}' could not be read ({exc}); {_OPEN_AND_SAVE_HINT}") from exc
    except BaseException as exc:
        _raise_if_panic(exc, f"{path}: sheet '{name}' could not be read: the workbook reader failed inside "
                             f"({exc}); {_OPEN_AND_SAVE_HINT}")
        raise


def _load_rows_in_pieces(path: Path, book, name: str, part: str, data: bytes, count: int,
                         worksheet_parts: set[str]) -> tuple[list[list] | None, Problem | None]:
    """:func:`_load_rows` for a large sheet cleared by the bounded search: in ``count`` pieces on as many threads
    (:mod:`lanesolve.read.pieces`), or whole when the pieces do not stand for the sheet."""
    rows = pieces.load(path, part, data, name, count, worksheet_parts)
    return (rows, None) if rows is not None else _load_rows(path, book, name)


def _size_problem(name: str, rows: int, columns: int) -> Problem | None:
    """A problem naming the sheet when it reaches beyond the bounds, else None."""
    if rows <= MAX_ROWS and columns <= MAX_COLUMNS and rows * columns <= MAX_CELLS:
        return None
    reach = [f"reaches row {rows:,}"] if rows > MAX_ROWS else []
    if columns > MAX_COLUMNS:
        reach.append(f"reaches column {sheet_xml.column_letters(columns)} ({columns:,} columns)")
    if not reach:
        reach.append(f"spans {rows:,} rows by {columns} columns ({rows * columns:,} cells)")
    return Problem(name, None, None, None,
                   f"the sheet {' and '.join(reach)}; lanesolve reads at most {MAX_ROWS:,} rows, {MAX_COLUMNS} "
                   f"columns and {MAX_CELLS:,} cells (rows x columns) in a sheet it needs",
                   "a cell far below or to the right of the table holds something (often only formatting): select "
                   "the empty rows and columns after the data, delete them and save; or move notes to another sheet")


#: A part within :data:`lanesolve.read.sheet_xml.BOUNDED_EXTENT` is within every bound above, so one search can clear
#: it for loading (kept as a check, so lowering a bound below that extent cannot let such a part through unmeasured).
_BOUNDED_IS_SAFE = _size_problem("", *sheet_xml.BOUNDED_EXTENT) is None


def _raise_if_panic(exc: BaseException, message: str) -> None:
    """Turn a panic inside calamine into a WorkbookError; leave every other exception alone.

    pyo3 raises ``pyo3_runtime.PanicException``, which derives from BaseException and cannot be imported by name,
    so it is recognised by its class name.
    """
    if type(exc).__name__ == "PanicException":
        raise WorkbookError(message) from exc


def _not_a_workbook(path: Path, head: bytes) -> str:
    looks_like_text = bool(head) and all(b in b"\t\r\n" or 32 <= b < 127 or b >= 128 for b in head)
    what = "a text file (perhaps CSV)" if looks_like_text else ("empty" if not head else "not a workbook")
    return (f"{path} is {what}, not an Excel or OpenDocument workbook; open it in a spreadsheet program and "
            f"save it as .xlsx")


class _maybe_zip:
    """Context manager yielding an open ZipFile when sheet parts are known (xlsx/xlsm), else None."""

    def __init__(self, path: Path, part_of_sheet: dict[str, str]):
        self.path, self.wanted, self.archive = path, bool(part_of_sheet), None

    def __enter__(self):
        if self.wanted:
            self.archive = zipfile.ZipFile(self.path)
        return self.archive

    def __exit__(self, *exc):
        if self.archive is not None:
            self.archive.close()
        return False


@dataclass
class _Package:
    """What the reader needs from an .xlsx/.xlsm package: each sheet's XML part and the styles part."""

    sheet_parts: dict[str, str]
    styles_part: str | None
    names: set[str] = field(default_factory=set)


def _xlsx_package(path: Path) -> _Package:
    """Map sheet name -> zip member of its XML, from the package relationships (ECMA-376 Part 1, 12.3.23), and
    find the styles part.

    An OpenDocument file and an .xlsb file (also zips) give an empty map: calamine reads them, but their cells are not
    scanned.
    """
    try:
        with zipfile.ZipFile(path) as archive:
            names = set(archive.namelist())
            if "mimetype" in names and "content.xml" in names:
                return _Package({}, None)  # OpenDocument spreadsheet
            workbook_part = _office_document_part(archive, names)
            if workbook_part is None:
                raise WorkbookError(f"{path} is a zip archive but holds no workbook; open it in a spreadsheet "
                                    f"program and save it as .xlsx")
            if not workbook_part.lower().endswith(".xml"):
                return _Package({}, None)  # .xlsb: a binary workbook part; calamine reads it, cells not scanned
            rels_part = posixpath.join(posixpath.dirname(workbook_part), "_rels",
                                       posixpath.basename(workbook_part) + ".rels")
            targets: dict[str, str] = {}
            styles_part = None
            if rels_part in names:
                rels = SafeElementTree.fromstring(archive.read(rels_part))
                for rel in rels.iter(f"{{{_PKG_REL_NS}}}Relationship"):
                    targets[rel.get("Id")] = _resolve(workbook_part, rel.get("Target", ""))
                    if rel.get("Type", "").endswith("/styles"):
                        styles_part = targets[rel.get("Id")]
            parts: dict[str, str] = {}
            for sheet in SafeElementTree.fromstring(archive.read(workbook_part)).iter():
                if sheet.tag.endswith("}sheet") or sheet.tag == "sheet":
                    rid = sheet.get(f"{{{_REL_NS}}}id")
                    if sheet.get("name") is not None and targets.get(rid) in names:
                        parts[sheet.get("name")] = targets[rid]
            return _Package(parts, styles_part, names)
    except (zipfile.BadZipFile, EOFError, zipfile.LargeZipFile) as exc:
        raise WorkbookError(f"{path} is damaged or incomplete (perhaps cut short while copying or downloading): "
                            f"{exc}; copy the file again or {_OPEN_AND_SAVE_HINT}") from exc
    except defusedxml.DefusedXmlException as exc:
        raise WorkbookError(f"{path}: its workbook description declares XML entities, which workbooks never need "
                            f"({exc}); lanesolve refuses it for safety: {_OPEN_AND_SAVE_HINT} as a new .xlsx") from exc
    except ElementTree.ParseError as exc:
        raise WorkbookError(f"{path} is damaged: its workbook description cannot be read ({exc}); "
                            f"{_OPEN_AND_SAVE_HINT}") from exc


def _xlsx_sheet_parts(path: Path) -> dict[str, str]:
    """Sheet name -> zip member of its XML (see :func:`_xlsx_package`)."""
    return _xlsx_package(path).sheet_parts


def _office_document_part(archive: zipfile.ZipFile, names: set[str]) -> str | None:
    """The workbook part named by the package's root relationships, or the usual ``xl/workbook.xml``."""
    if "_rels/.rels" in names:
        for rel in SafeElementTree.fromstring(archive.read("_rels/.rels")).iter(f"{{{_PKG_REL_NS}}}Relationship"):
            if rel.get("Type", "").endswith("/officeDocument"):
                part = rel.get("Target", "").lstrip("/")
                if part in names:
                    return part
    return "xl/workbook.xml" if "xl/workbook.xml" in names else None


def _resolve(source_part: str, target: str) -> str:
    # Targets are relative to the source part's folder, or absolute from the package root when they start with "/".
    if target.startswith("/"):
        return target.lstrip("/")
    return posixpath.normpath(posixpath.join(posixpath.dirname(source_part), target))


