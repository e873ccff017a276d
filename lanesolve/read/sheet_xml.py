"""Scans of worksheet XML (.xlsx/.xlsm) that calamine's cell values cannot answer.

- :func:`bad_cells`: cells holding an error value or a formula whose result was never saved (calamine shows both as
  empty strings, which would make them look blank).
- :func:`used_extent`: how far a sheet reaches, found before calamine builds its dense grid of cells, so a stray
  cell at XFD1048576 is refused with a message instead of exhausting memory.
- :func:`percent_style_ids` and :func:`styled_cells`: which cells carry a percent number format (the cell's
  style index ``s`` -> ``cellXfs`` in styles.xml -> its ``numFmtId``; ECMA-376 Part 1, 18.8.10 and 18.8.30).

Only literal byte searches and regular expressions run over a whole part; the streaming XML parser is the fallback
for unusual markup.
"""

from __future__ import annotations

import io
import re
import zipfile
import zlib
from dataclasses import dataclass
from xml.etree import ElementTree

import defusedxml
import defusedxml.ElementTree as SafeElementTree

from lanesolve.errors import WorkbookError

_CELL_REF = re.compile(r"([A-Za-z]+)(\d+)")
_OPEN_AND_SAVE_HINT = "open the file in a spreadsheet program and save it, then try again"


def column_letters(number: int) -> str:
    """Spreadsheet column letters of a 1-based column number (28 -> ``AB``)."""
    letters = ""
    while number > 0:
        number, rest = divmod(number - 1, 26)
        letters = chr(65 + rest) + letters
    return letters


def read_part(path, archive: zipfile.ZipFile, part: str) -> bytes:
    """The bytes of one zip member, or a WorkbookError naming it."""
    try:
        return archive.read(part)
    except (zipfile.BadZipFile, EOFError, KeyError, OSError, zlib.error) as exc:
        raise WorkbookError(f"{path} is damaged: part {part} cannot be read ({exc}); {_OPEN_AND_SAVE_HINT}") from exc


def column_number(letters: str) -> int:
    number = 0
    for ch in letters.upper():
        number = number * 26 + (ord(ch) - 64)
    return number


# A cell or row tag whose reference is missing or not its first attribute (``<c>``, ``<c/>``, ``<c s="1" r=..``,
# ``<row>``, a tab or newline after the tag name), or a tag starting <f (a formula, or any other element whose name
# starts with f, as the literal search b"<f" in data would find).
_IRREGULAR_OR_F = re.compile(rb'<(?:c(?=[\s/>])(?! r=")|row(?=[\s/>])(?! r="[0-9]+")|f)')
# The same, and also a cell or row tag whose reference reaches past row 1,039,999 or column Z (one letter, up to six
# digits or 1000000-1039999): the tags that stop one pass from clearing a part as within BOUNDED_EXTENT.
_IRREGULAR_FAR_OR_F = re.compile(rb'<(?:c(?=[\s/>])(?! r="[A-Z](?:[0-9]{1,6}|10[0-3][0-9]{4})")'
                                 rb'|row(?=[\s/>])(?! r="(?:[0-9]{1,6}|10[0-3][0-9]{4})")|f)')

#: The farthest a part can reach when :attr:`Survey.bounded` holds: row 1,039,999 and column Z.
BOUNDED_EXTENT = (1_039_999, 26)


@dataclass(frozen=True)
class Survey:
    """What one pass over a worksheet part finds about its markup, shared by :func:`used_extent`,
    :func:`within_bounded_extent` and :func:`bad_cells`.

    Attributes
    ----------
    regular : bool
        The part has ``<sheetData``, every cell tag starts ``<c r="`` (no ``<c>``, ``<c/>``, other attribute or
        other white space first) and every row tag starts ``<row r="`` followed by digits: the markup openpyxl,
        Excel and LibreOffice write, on which literal searches count rows and cells exactly.
    formula_tag : bool
        ``b"<f" in data``.
    bounded : bool
        The part is regular and every cell reference is one letter and a row up to :data:`BOUNDED_EXTENT`'s, and
        every row tag's number is within it too: the part reaches no farther than :data:`BOUNDED_EXTENT`.
    """

    regular: bool
    formula_tag: bool
    bounded: bool = False

    @classmethod
    def of(cls, data: bytes) -> Survey:
        """Survey ``data`` in one regular-expression pass (stopping at the first irregular tag).

        The pass looks for irregular and far tags at once; after the first far one it goes on looking for irregular
        tags only.
        """
        if b"<sheetData" not in data:
            return cls(False, b"<f" in data)
        formula, bounded, pattern, at = False, True, _IRREGULAR_FAR_OR_F, 0
        while (match := pattern.search(data, at)) is not None:
            at = match.start() + 1
            if data[at] == ord("f"):
                formula = True
            elif pattern is _IRREGULAR_FAR_OR_F and _IRREGULAR_OR_F.match(data, at - 1) is None:
                bounded, pattern = False, _IRREGULAR_OR_F  # a regular tag reaching far
            else:
                return cls(False, formula or data.find(b"<f", at) >= 0)
        return cls(True, formula, bounded)


def bad_cells(data: bytes, where: str, survey: Survey | None = None) -> dict[tuple[int, int], str]:
    """Find error cells and formulas without a saved value in one worksheet part.

    A cell is ``<c r="B3" t="..."><f>formula</f><v>value</v></c>`` (ECMA-376 Part 1, 18.3.1.4). ``t="e"`` marks an
    error value. A formula with no ``<v>``, or an empty ``<v/>`` when the result is not text, was never calculated
    and saved -- openpyxl and other generators write formulas that way.

    Parameters
    ----------
    data : bytes
        The part's XML.
    where : str
        The file and part, for messages.
    survey : Survey, optional
        What :meth:`Survey.of` found in ``data``, when the caller has it (saves passes over the part).

    Returns
    -------
    dict
        ``(row, column)`` (1-based) -> the text to show for the cell.

    Raises
    ------
    WorkbookError
        The part declares XML entities or is not well-formed.
    """
    survey = survey or Survey.of(data)
    if b't="e"' not in data and not survey.formula_tag and b":f" not in data:
        return {}
    quick = _scan_bad_cells_quick(data, survey.regular)
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
                    col_number, row_number = column_number(match.group(1)), int(match.group(2))
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
        raise WorkbookError(f"{where} declares XML entities, which workbooks never need ({exc}); "
                            f"lanesolve refuses it for safety: {_OPEN_AND_SAVE_HINT} as a new .xlsx") from exc
    except ElementTree.ParseError as exc:
        raise WorkbookError(f"{where} is damaged: it is not well-formed XML ({exc}); "
                            f"{_OPEN_AND_SAVE_HINT}") from exc
    return bad


_CELL_START = re.compile(rb"<c[\s>]")
_FORMULA_START = re.compile(rb"<f[\s>/]")
_TAG_REF = re.compile(rb'\sr="([A-Z]+)([0-9]+)"')
_TAG_TYPE = re.compile(rb'\st="([A-Za-z]+)"')
_FORMULA = re.compile(rb"<f((?:\s[^>]*?)?)(?:/>|>(.*?)</f>)", re.S)
_VALUE = re.compile(rb"<v\s*/>|<v>(.*?)</v>", re.S)
_SHARED_INDEX = re.compile(rb'\ssi="([0-9]+)"')


def _scan_bad_cells_quick(data: bytes, regular: bool = False) -> dict[tuple[int, int], str] | None:
    """The same scan as the streaming one, visiting only cells that hold a formula or an error.

    Works on the unprefixed markup common writers produce, with ``r`` first in every cell tag; returns None (use
    the streaming parser) otherwise, e.g. when elements carry a namespace prefix or a cell lacks its reference.
    Only literal byte searches run over the whole part, so it costs little beyond the cells it reports.
    ``regular`` (:attr:`Survey.regular`) says the cell tags are already known to be of that form.
    """
    if not regular:
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
        position = (int(ref.group(2)), column_number(ref.group(1).decode()))
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


# ----------------------------------------------------------------------------------------------------------------
# how far a sheet reaches

_ROW_NUMBER = re.compile(rb'<row r="([0-9]+)"')
_ROW_NUMBER_ANY = re.compile(rb'<(?:\w+:)?row\b[^>]*?\sr="([0-9]+)"')
_ROW_TAG_ANY = re.compile(rb"<(?:\w+:)?row[\s>/]")
# A cell reference with two or more column letters or a row of seven or more digits: the only ones that can pass the
# reader's bounds. One pass with a literal prefix finds whether any exists; only then are they all listed.
_FAR_REF = re.compile(rb' r="(?:[A-Z]{2}|[A-Z]*[0-9]{7})')
_FAR_REF_ANY = re.compile(rb'\sr="(?:[A-Z]{2}|[A-Z]*[0-9]{7})')
_REF = re.compile(rb'\sr="([A-Z]+)([0-9]+)"')
# A reference with two or more column letters; without one, only rows of seven or more digits can be far, and the
# largest row is among those (any row of seven digits is larger than every row of six), so only they are listed.
_WIDE_REF = re.compile(rb' r="[A-Z]{2}')
_WIDE_REF_ANY = re.compile(rb'\sr="[A-Z]{2}')
_LONG_ROW = re.compile(rb' r="[A-Z]+([0-9]{7,})"')  # a literal prefix makes the scan several times faster
_LONG_ROW_ANY = re.compile(rb'\sr="[A-Z]+([0-9]{7,})"')


def used_extent(data: bytes, survey: Survey | None = None) -> tuple[int, int]:
    """Rows and columns a worksheet part reaches from A1, as an upper bound, without parsing it.

    Calamine builds a dense grid up to the last used cell; its memory is rows x columns cells whatever the sheet
    holds, so the extent must be known before calamine loads the sheet. The ``<dimension>`` element is not used:
    it is optional, and calamine itself ignores it, so a wrong one neither costs memory nor proves anything.

    Parameters
    ----------
    data : bytes
        The part's XML.
    survey : Survey, optional
        What :meth:`Survey.of` found in ``data``, when the caller has it.

    Returns
    -------
    rows, columns : int
        ``rows`` is the largest of: the row number on any ``<row>``, the count of ``<row>`` elements, and the row
        of any cell reference. ``columns`` is the largest column of any cell reference when some have two or more
        letters, else 26 (column Z) -- an upper bound, which is all a size check needs.

    Notes
    -----
    A typical sheet costs a few passes over the part: the survey, a count of its row tags, a search for references
    past column Z or row 999,999, and a listing of row numbers -- left out when some reference reaches row
    1,000,000 or beyond, since any row of seven digits is larger than every row of six. Cell references are listed
    one by one only when some reach past column Z.

    Examples
    --------
    >>> used_extent(b'<worksheet><sheetData><row r="1"><c r="A1"/></row><row r="9"><c r="AB9"/></row>'
    ...             b'</sheetData></worksheet>')
    (9, 28)
    """
    plain = (survey or Survey.of(data)).regular
    if plain:
        extent = _regular_extent(data)
        if extent is not None:
            return extent
    if plain:
        tags = data.count(b"<row ") + data.count(b"<row>")
        numbers = _ROW_NUMBER.findall(data)
    else:  # a namespace prefix, or attributes in another order: the slower patterns
        tags, numbers = len(_ROW_TAG_ANY.findall(data)), []
    if len(numbers) < tags:
        numbers = _ROW_NUMBER_ANY.findall(data)
    rows = max(tags, max(map(int, numbers), default=0))
    columns = 26 if tags else 0
    if (_FAR_REF if plain else _FAR_REF_ANY).search(data):
        if (_WIDE_REF if plain else _WIDE_REF_ANY).search(data) is None:
            # Columns A-Z only (26 is already the bound): a sheet near the row limit lists its last rows' cells,
            # not every cell (listing 7 million references took seconds and most of a gigabyte at 1M lanes).
            rows = max(rows, max(map(int, (_LONG_ROW if plain else _LONG_ROW_ANY).findall(data)), default=0))
        else:
            for letters, digits in _REF.findall(data):
                rows, columns = max(rows, int(digits)), max(columns, column_number(letters.decode()))
    return rows, columns


def within_bounded_extent(data: bytes, survey: Survey) -> bool:
    """True when the part reaches no farther than :data:`BOUNDED_EXTENT`, as ``survey`` (of ``data``) found.

    In regular markup (:attr:`Survey.regular`) every row and cell tag carries its reference, so a part whose every
    reference is one letter and a row up to 1,039,999 ends there -- whatever the exact extent, which
    :func:`used_extent` lists at several times the cost.

    Examples
    --------
    >>> part = b'<worksheet><sheetData><row r="12"><c r="B12"/></row></sheetData></worksheet>'
    >>> within_bounded_extent(part, Survey.of(part))
    True
    >>> far = part.replace(b'B12"', b'AB12"')
    >>> within_bounded_extent(far, Survey.of(far))
    False
    """
    return survey.regular and survey.bounded


_FAR_OR_WIDE = re.compile(rb' r="(?:([A-Z]{2})|[A-Z]*[0-9]{7})')


def _regular_extent(data: bytes) -> tuple[int, int] | None:
    """:func:`used_extent` of a part whose :attr:`Survey.regular` holds, or None when a reference reaches past
    column Z (the general scan lists every reference then).

    In regular markup every ``<row `` tag carries its number, so the count of ``<row r="`` is the count of row
    tags, and the far references (:data:`_FAR_REF`'s) are the row tags and cell references of seven or more digits.
    """
    tags = data.count(b'<row r="')
    far: list[int] = []
    for match in _FAR_OR_WIDE.finditer(data):
        if match.group(1) is not None:
            return None
        at = match.start()
        number = _ROW_NUMBER.match(data, at - 4) if data[at - 4:at] == b"<row" else _LONG_ROW.match(data, at)
        if number is not None:
            far.append(int(number.group(1)))
    rows = max(tags, max(far, default=0))
    if rows < 1_000_000:  # no row of seven digits without leading zeros: the six-digit row numbers decide
        rows = max(rows, max(map(int, _ROW_NUMBER.findall(data)), default=0))
    return rows, 26 if tags else 0


# ----------------------------------------------------------------------------------------------------------------
# percent-formatted cells

#: Built-in number formats that show a percent: 9 is ``0%``, 10 is ``0.00%`` (ECMA-376 Part 1, 18.8.30).
_BUILTIN_PERCENT = frozenset({9, 10})
_QUOTED_OR_ESCAPED = re.compile(r'"[^"]*"|\\.|\[[^\]]*\]')


def percent_style_ids(styles: bytes) -> frozenset[int]:
    """Indexes into ``cellXfs`` (a cell's ``s`` attribute) whose number format shows a percent.

    Parameters
    ----------
    styles : bytes
        The XML of the workbook's styles part.

    Examples
    --------
    >>> percent_style_ids(b'<styleSheet><numFmts><numFmt numFmtId="164" formatCode="0.0&quot;%&quot;"/>'
    ...     b'<numFmt numFmtId="165" formatCode="0.0%"/></numFmts><cellXfs><xf numFmtId="0"/><xf numFmtId="9"/>'
    ...     b'<xf numFmtId="164"/><xf numFmtId="165"/></cellXfs></styleSheet>')
    frozenset({1, 3})
    """
    try:
        root = SafeElementTree.fromstring(styles)
    except (defusedxml.DefusedXmlException, ElementTree.ParseError):
        return frozenset()  # styles only sharpen messages; a damaged styles part is calamine's to report
    percent = set(_BUILTIN_PERCENT)
    for element in root.iter():
        if _local(element.tag) == "numFmt":
            code = _QUOTED_OR_ESCAPED.sub("", element.get("formatCode", ""))  # a quoted "%" is literal text
            if "%" in code and (element.get("numFmtId") or "").isdigit():
                percent.add(int(element.get("numFmtId")))
    ids = set()
    for element in root.iter():
        if _local(element.tag) == "cellXfs":
            for index, xf in enumerate(child for child in element if _local(child.tag) == "xf"):
                if (xf.get("numFmtId") or "0").isdigit() and int(xf.get("numFmtId") or 0) in percent:
                    ids.add(index)
            break
    return frozenset(ids)


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def styled_cells(data: bytes, style_ids: frozenset[int]) -> set[tuple[int, int]]:
    """``(row, column)`` (1-based) of every cell in a worksheet part whose style index is in ``style_ids``.

    Examples
    --------
    >>> sorted(styled_cells(b'<sheetData><row r="2"><c r="A2" s="1"><v>1</v></c><c r="F2" s="4"><v>0.1</v></c>'
    ...                     b'</row></sheetData>', frozenset({4})))
    [(2, 6)]
    """
    if not style_ids:
        return set()
    tag = re.compile(rb'<c\b[^>]*?\ss="(?:' + b"|".join(str(i).encode() for i in sorted(style_ids)) + rb')"[^>]*>')
    found: set[tuple[int, int]] = set()
    for match in tag.finditer(data):
        ref = _TAG_REF.search(match.group(0))
        if ref is None:
            return _styled_cells_streaming(data, style_ids)
        found.add((int(ref.group(2)), column_number(ref.group(1).decode())))
    return found


def _styled_cells_streaming(data: bytes, style_ids: frozenset[int]) -> set[tuple[int, int]]:
    """:func:`styled_cells` for markup with cells lacking their reference (positions counted as calamine does)."""
    found: set[tuple[int, int]] = set()
    row_number = col_number = 0
    try:
        for event, elem in SafeElementTree.iterparse(io.BytesIO(data), events=("start", "end")):
            tag = _local(elem.tag)
            if event == "start":
                if tag == "row":
                    row_number, col_number = int(elem.get("r", row_number + 1)), 0
                continue
            if tag == "c":
                match = _CELL_REF.fullmatch(elem.get("r") or "")
                if match:
                    col_number, row_number = column_number(match.group(1)), int(match.group(2))
                else:
                    col_number += 1
                if (elem.get("s") or "").isdigit() and int(elem.get("s")) in style_ids:
                    found.add((row_number, col_number))
                elem.clear()
    except (defusedxml.DefusedXmlException, ElementTree.ParseError):
        return found  # bad_cells has already reported a part that does not parse
    return found
