"""Stage "read": turn a workbook file into plain cell values, sheet by sheet.

Values come from python-calamine, which is fast (a 100k-row sheet in well under a second) and reads .xlsx, .xlsm,
.xls and .ods. Calamine shows a cell holding a spreadsheet error value (``#N/A``, ``#DIV/0!``...) and a formula whose
result was never saved as an empty string, which would make such cells look blank. For .xlsx/.xlsm files the sheet
XML of the input sheets is therefore scanned for those cells, and they are listed in :attr:`RawSheet.bad_cells` so
the validator can name them instead of reading them as blanks. The scan only runs on a sheet part whose bytes contain
an error cell (``t="e"``) or a formula (``<f``), so a plain values-only workbook pays nothing for it.

Nothing here judges the values; that is :mod:`lanesolve.read.validate`'s job.
"""

from __future__ import annotations

import io
import posixpath
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from xml.etree import ElementTree

import defusedxml
import defusedxml.ElementTree as SafeElementTree
import python_calamine

from lanesolve import contract
from lanesolve.read import guard
from lanesolve.read import source
from lanesolve.errors import WorkbookError

_ZIP_MAGIC = b"PK\x03\x04"
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
# An encrypted (password-protected) .xlsx is an OLE compound file holding a stream of this name (MS-OFFCRYPTO 2.3.4.4);
# directory entry names are stored in UTF-16LE.
_ENCRYPTED_STREAM = "EncryptedPackage".encode("utf-16-le")

_REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG_REL_NS = "http://schemas.openxmlformats.org/package/2006/relationships"
_CELL_REF = re.compile(r"([A-Za-z]+)(\d+)")

_OPEN_AND_SAVE_HINT = "open the file in a spreadsheet program and save it, then try again"


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
    """

    name: str
    rows: list[list]
    bad_cells: dict[tuple[int, int], str] = field(default_factory=dict)
    hidden: bool = False


@dataclass
class RawWorkbook:
    """Every sheet of a workbook except result sheets, keyed by the sheet's real name (in workbook order)."""

    path: str
    sheets: dict[str, RawSheet]


def read_workbook(path: str | Path) -> RawWorkbook:
    """Read every sheet's cell values, and find error cells and formulas without saved results.

    Parameters
    ----------
    path : path-like
        A workbook: .xlsx, .xlsm (error and formula cells are detected), or .xls, .ods (values only).

    Returns
    -------
    RawWorkbook
        Sheets whose name starts with :data:`lanesolve.contract.RESULT_PREFIX` (results of an earlier run) are left
        out.

    Raises
    ------
    WorkbookError
        The file does not exist, or is not a workbook: a text or CSV file renamed, a damaged or truncated file, a zip
        archive without a workbook inside, or a password-protected file.
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

    part_of_sheet: dict[str, str] = {}
    if head.startswith(_ZIP_MAGIC):
        guard.check_archive(path)  # before any part is parsed: zip bombs, entity declarations
        part_of_sheet = _xlsx_sheet_parts(path)
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

    input_names = {contract.normalize(sheet.name) for sheet in contract.INPUT_SHEETS}
    sheets: dict[str, RawSheet] = {}
    with _maybe_zip(path, part_of_sheet) as archive:
        for meta in metadata:
            name = meta.name
            if name.startswith(contract.RESULT_PREFIX):
                continue
            if meta.typ != python_calamine.SheetTypeEnum.WorkSheet:
                continue  # chart sheets and dialog sheets hold no cells
            try:
                rows = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
            except (python_calamine.CalamineError, ValueError) as exc:
                raise WorkbookError(f"{path}: sheet '{name}' could not be read ({exc}); "
                                    f"{_OPEN_AND_SAVE_HINT}") from exc
            bad: dict[tuple[int, int], str] = {}
            if archive is not None and contract.normalize(name) in input_names and name in part_of_sheet:
                bad = _scan_bad_cells(path, archive, part_of_sheet[name])
            hidden = meta.visible != python_calamine.SheetVisibleEnum.Visible
            sheets[name] = RawSheet(name=name, rows=rows, bad_cells=bad, hidden=hidden)
    return RawWorkbook(path=str(path), sheets=sheets)


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


def _xlsx_sheet_parts(path: Path) -> dict[str, str]:
    """Map sheet name -> zip member of its XML, from the package relationships (ECMA-376 Part 1, 12.3.23).

    An OpenDocument file and an .xlsb file (also zips) give an empty map: calamine reads them, but their cells are not
    scanned.
    """
    try:
        with zipfile.ZipFile(path) as archive:
            names = set(archive.namelist())
            if "mimetype" in names and "content.xml" in names:
                return {}  # OpenDocument spreadsheet
            workbook_part = _office_document_part(archive, names)
            if workbook_part is None:
                raise WorkbookError(f"{path} is a zip archive but holds no workbook; open it in a spreadsheet "
                                    f"program and save it as .xlsx")
            if not workbook_part.lower().endswith(".xml"):
                return {}  # .xlsb: a binary workbook part; calamine reads it, its cells are not scanned
            rels_part = posixpath.join(posixpath.dirname(workbook_part), "_rels",
                                       posixpath.basename(workbook_part) + ".rels")
            targets: dict[str, str] = {}
            if rels_part in names:
                rels = SafeElementTree.fromstring(archive.read(rels_part))
                for rel in rels.iter(f"{{{_PKG_REL_NS}}}Relationship"):
                    targets[rel.get("Id")] = _resolve(workbook_part, rel.get("Target", ""))
            parts: dict[str, str] = {}
            for sheet in SafeElementTree.fromstring(archive.read(workbook_part)).iter():
                if sheet.tag.endswith("}sheet") or sheet.tag == "sheet":
                    rid = sheet.get(f"{{{_REL_NS}}}id")
                    if sheet.get("name") is not None and targets.get(rid) in names:
                        parts[sheet.get("name")] = targets[rid]
            return parts
    except (zipfile.BadZipFile, EOFError, zipfile.LargeZipFile) as exc:
        raise WorkbookError(f"{path} is damaged or incomplete (perhaps cut short while copying or downloading): "
                            f"{exc}; copy the file again or {_OPEN_AND_SAVE_HINT}") from exc
    except defusedxml.DefusedXmlException as exc:
        raise WorkbookError(f"{path}: its workbook description declares XML entities, which workbooks never need "
                            f"({exc}); lanesolve refuses it for safety: {_OPEN_AND_SAVE_HINT} as a new .xlsx") from exc
    except ElementTree.ParseError as exc:
        raise WorkbookError(f"{path} is damaged: its workbook description cannot be read ({exc}); "
                            f"{_OPEN_AND_SAVE_HINT}") from exc


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


def _column_number(letters: str) -> int:
    number = 0
    for ch in letters.upper():
        number = number * 26 + (ord(ch) - 64)
    return number


def _scan_bad_cells(path: Path, archive: zipfile.ZipFile, part: str) -> dict[tuple[int, int], str]:
    """Find error cells and formulas without a saved value in one worksheet part (streaming).

    A cell is ``<c r="B3" t="..."><f>formula</f><v>value</v></c>`` (ECMA-376 Part 1, 18.3.1.4). ``t="e"`` marks an
    error value. A formula with no ``<v>``, or an empty ``<v/>`` when the result is not text, was never calculated
    and saved -- openpyxl and other generators write formulas that way.
    """
    try:
        data = archive.read(part)
    except (zipfile.BadZipFile, EOFError, KeyError, OSError) as exc:
        raise WorkbookError(f"{path} is damaged: part {part} cannot be read ({exc}); {_OPEN_AND_SAVE_HINT}") from exc
    if b't="e"' not in data and b"<f" not in data and b":f" not in data:
        return {}
    quick = _scan_bad_cells_quick(data)
    if quick is not None:
        return quick

    bad: dict[tuple[int, int], str] = {}
    shared_text: dict[str, str] = {}
    row_number, col_number = 0, 0
    try:
        for event, elem in SafeElementTree.iterparse(io.BytesIO(data), events=("start", "end")):
            tag = elem.tag.rsplit("}", 1)[-1]
            if event == "start":
                if tag == "row":
                    row_number = int(elem.get("r", row_number + 1))
                    col_number = 0
                continue
            if tag == "c":
                ref = elem.get("r")
                match = _CELL_REF.fullmatch(ref) if ref else None
                if match:
                    col_number, row_number = _column_number(match.group(1)), int(match.group(2))
                else:
                    col_number += 1
                kind = elem.get("t", "n")
                formula = value = None
                for child in elem:
                    child_tag = child.tag.rsplit("}", 1)[-1]
                    if child_tag == "f":
                        formula = child
                    elif child_tag == "v":
                        value = child
                formula_text = None
                if formula is not None:
                    formula_text = formula.text
                    if formula.get("t") == "shared" and formula.get("si") is not None:
                        if formula_text:
                            shared_text[formula.get("si")] = formula_text
                        else:
                            formula_text = shared_text.get(formula.get("si"))
                if kind == "e":
                    text = (value.text or "").strip() if value is not None else ""
                    shown = text or "an error value"
                    if formula_text:
                        shown += f" (from formula ={formula_text})"
                    bad[(row_number, col_number)] = shown
                elif formula is not None:
                    no_value = value is None or (not value.text and kind not in ("str", "inlineStr"))
                    if no_value:
                        written = f"formula ={formula_text}" if formula_text else "a formula"
                        bad[(row_number, col_number)] = f"{written} has no saved value"
                elem.clear()
            elif tag == "row":
                elem.clear()
    except defusedxml.DefusedXmlException as exc:
        raise WorkbookError(f"{path}: sheet part {part} declares XML entities, which workbooks never need ({exc}); "
                            f"lanesolve refuses it for safety: {_OPEN_AND_SAVE_HINT} as a new .xlsx") from exc
    except ElementTree.ParseError as exc:
        raise WorkbookError(f"{path} is damaged: sheet part {part} is not well-formed ({exc}); "
                            f"{_OPEN_AND_SAVE_HINT}") from exc
    return bad



_CELL_START = re.compile(rb"<c[\s>]")
_FORMULA_START = re.compile(rb"<f[\s>/]")
_TAG_REF = re.compile(rb'\sr="([A-Z]+)([0-9]+)"')
_TAG_TYPE = re.compile(rb'\st="([A-Za-z]+)"')
_FORMULA = re.compile(rb"<f((?:\s[^>]*?)?)(?:/>|>(.*?)</f>)", re.S)
_VALUE = re.compile(rb"<v\s*/>|<v>(.*?)</v>", re.S)
_SHARED_INDEX = re.compile(rb'\ssi="([0-9]+)"')


def _scan_bad_cells_quick(data: bytes) -> dict[tuple[int, int], str] | None:
    """The same scan as the streaming one, visiting only cells that hold a formula or an error.

    Works on the unprefixed markup common writers produce, with ``r`` first in every cell tag; returns None (use
    the streaming parser) otherwise, e.g. when elements carry a namespace prefix or a cell lacks its reference.
    Only literal byte searches run over the whole part, so it costs little beyond the cells it reports.
    """
    cells = data.count(b"<c ") + data.count(b"<c>") + data.count(b"<c/>")
    if b"<sheetData" not in data or cells != data.count(b'<c r="'):
        return None
    starts = sorted({m.start() for m in _FORMULA_START.finditer(data)} | set(_find_all(data, b' t="e"')))
    bad: dict[tuple[int, int], str] = {}
    shared_text: dict[bytes, str] = {}
    last_start = -1
    for marker in starts:
        start = data.rfind(b"<c", 0, marker + 1)
        while start >= 0 and not _CELL_START.match(data, start):
            start = data.rfind(b"<c", 0, start)
        if start < 0 or start == last_start:
            continue
        last_start = start
        tag_end = data.find(b">", start)
        tag = data[start:tag_end + 1]
        end = len(data) if tag.endswith(b"/>") else data.find(b"</c>", tag_end)
        if end < 0:
            return None
        cell = data[tag_end + 1:end]
        ref = _TAG_REF.search(tag)
        if ref is None:
            return None
        kind_match = _TAG_TYPE.search(tag)
        kind = kind_match.group(1).decode() if kind_match else "n"
        formula = _FORMULA.search(cell)
        value = _VALUE.search(cell)
        formula_text = None
        if formula is not None:
            attrs = formula.group(1) or b""
            text = formula.group(2)
            formula_text = _unescape(text.decode("utf-8")) if text else None
            shared = _SHARED_INDEX.search(attrs) if b'shared' in attrs else None
            if shared is not None:
                if formula_text:
                    shared_text[shared.group(1)] = formula_text
                else:
                    formula_text = shared_text.get(shared.group(1))
        position = (int(ref.group(2)), _column_number(ref.group(1).decode()))
        if kind == "e":
            shown = (_unescape(value.group(1).decode("utf-8")).strip() if value is not None and value.group(1)
                     else "") or "an error value"
            if formula_text:
                shown += f" (from formula ={formula_text})"
            bad[position] = shown
        elif formula is not None:
            if value is None or (not value.group(1) and kind not in ("str", "inlineStr")):
                written = f"formula ={formula_text}" if formula_text else "a formula"
                bad[position] = f"{written} has no saved value"
    return bad


def _find_all(data: bytes, needle: bytes):
    at = data.find(needle)
    while at >= 0:
        yield at
        at = data.find(needle, at + 1)


def _unescape(text: str) -> str:
    # The five predefined XML entities plus numeric character references (XML 1.0, 4.6 and 4.1).
    if "&" not in text:
        return text
    return SafeElementTree.fromstring(f"<x>{text}</x>").text or ""
