"""Worksheet and table XML for one result sheet, and the XML text helpers the writer shares.

Text is written as inline strings, so ``xl/sharedStrings.xml`` stays byte-identical and text
that looks like a formula (``=SUM(A1)``) can only ever be text. Looks come from a built-in table style (banded rows,
header row with filter buttons), column widths sized to the content and a frozen header row. Numbers keep full
precision and carry a number format per column kind (cell formats the writer appends to ``styles.xml``, existing
entries untouched); the sheet prints one page wide with its header row on every page.
"""

from __future__ import annotations

import html
import itertools
import math
import numbers
import posixpath
import re
from collections.abc import Iterator

from lanesolve.write.tables import ResultSheet, _plain

#: Built-in table style of the result tables (a style every spreadsheet program that reads tables knows by name).
TABLE_STYLE = "TableStyleMedium2"

MAX_CELL_TEXT = 32767  # the spreadsheet programs' limit on the characters in one cell

# Namespaces (transitional and strict OOXML).
REL_NS = ("http://schemas.openxmlformats.org/officeDocument/2006/relationships",
          "http://purl.oclc.org/ooxml/officeDocument/relationships")
MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"


# Characters XML 1.0 does not allow, even escaped: C0 controls other than tab/LF/CR, lone surrogates, U+FFFE/F.
_FORBIDDEN_CHARS = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
_ATTR = re.compile(r"""([\w:.-]+)\s*=\s*(?:"([^"]*)"|'([^']*)')""")
# A start or empty tag whose attribute values may contain '>' (a sheet name may).
_ATTRS = r"""(?:\s+[\w:.-]+\s*=\s*(?:"[^"]*"|'[^']*'))*\s*"""


def clean_text(text: str) -> str:
    """Text without the characters XML 1.0 forbids, cut to the spreadsheet cell limit."""
    text = _FORBIDDEN_CHARS.sub("", text)
    return text[:MAX_CELL_TEXT]


def escape(text: str) -> str:
    """Escape text for element content or a double-quoted attribute."""
    return (text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;"))


def _attributes(tag: str) -> dict[str, str]:
    """Attributes of one start tag, values unescaped."""
    return {m.group(1): html.unescape(m.group(2) if m.group(2) is not None else m.group(3))
            for m in _ATTR.finditer(tag)}


def _tags(text: str, local_name: str) -> list[re.Match]:
    """Every start/empty tag ``<[prefix:]local_name ...>`` in text (not the end tags)."""
    return list(re.finditer(r"<(?:[\w.-]+:)?" + local_name + r"\b" + _ATTRS + r"/?>", text))


def _ns_prefix(text: str, namespaces: tuple[str, ...] | str) -> str | None:
    """The prefix bound to one of the namespaces in text ('' for the default namespace), or None."""
    if isinstance(namespaces, str):
        namespaces = (namespaces,)
    for namespace in namespaces:
        m = re.search(r"""xmlns(?::([\w.-]+))?\s*=\s*["']""" + re.escape(namespace) + r"""["']""", text)
        if m:
            return m.group(1) or ""
    return None


def _resolve(base_dir: str, target: str) -> str:
    """A relationship target as a zip member name."""
    if target.startswith("/"):
        return target.lstrip("/")
    return posixpath.normpath(posixpath.join(base_dir, target))


def _rels_path(part: str) -> str:
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


def _column_letter(index: int) -> str:
    """Spreadsheet column letters for a 0-based column index (0 -> A, 26 -> AA)."""
    letters = ""
    index += 1
    while index:
        index, rest = divmod(index - 1, 26)
        letters = chr(65 + rest) + letters
    return letters


# ---------------------------------------------------------------------------------------------------------------
# The new parts
# ---------------------------------------------------------------------------------------------------------------

def _number_text(value: float) -> str:
    """A finite float as the text of a ``<v>`` element, full precision (the cell's number format rounds)."""
    text = repr(value + 0.0)  # + 0.0 turns -0.0 into 0.0: no "-0" on screen
    return text[:-2] if text.endswith(".0") else text


def _shown_length(value: float, kind: str) -> int:
    """About how many characters the number shows with its column's format (for the column width)."""
    if kind == "percent":
        return len(f"{value * 100:.1f} %")
    if kind in ("count",):
        return len(f"{value:,.0f}")
    if kind in ("text", "number"):
        return len(_number_text(value))
    return len(f"{value:,.2f}") + (2 if kind == "rate" else 0)


def _number_texts(values: list[float]) -> list[str]:
    """:func:`_number_text` of many finite floats."""
    texts = list(map(repr, map(float.__add__, values, itertools.repeat(0.0))))  # + 0.0: -0.0 shows as 0
    return [text[:-2] if text.endswith(".0") else text for text in texts]


def _widest(values, kind: str) -> int:
    """The largest :func:`_shown_length` of some finite floats, a column kind's format applied to them all at once."""
    if kind == "percent":
        shown = [f"{value * 100:.1f} %" for value in values]
    elif kind == "count":
        shown = [f"{value:,.0f}" for value in values]
    elif kind in ("text", "number"):
        shown = _number_texts(list(values))
    else:
        shown = [f"{value:,.2f}" for value in values]
    return max(map(len, shown), default=0) + (2 if kind == "rate" and shown else 0)


def _cell_text(value, kind: str) -> tuple[str, str | None, int]:
    """(cell body, cell type attribute, display length) for one value; body '' means blank.

    NaN and infinities are blank: a capacity without limit is a blank cell under a header that says so, never the
    text "no limit" in a number column (which would break sums, filters and charts).
    """
    value = _plain(value)
    if value is None:
        return "", None, 0
    if isinstance(value, bool):
        return f"<v>{int(value)}</v>", "b", 5
    if isinstance(value, numbers.Integral):
        text = str(int(value))
        return f"<v>{text}</v>", None, _shown_length(float(value), kind)
    if isinstance(value, numbers.Real):
        value = float(value)
        if not math.isfinite(value):
            return "", None, 0
        return f"<v>{_number_text(value)}</v>", None, _shown_length(value, kind)
    body, length = _text_cell(str(value))
    return body, ("inlineStr" if body else None), length


def _text_cell(text: str) -> tuple[str, int]:
    """(cell body, display length) of a text cell; body '' means blank."""
    if not text.isprintable():  # printable text holds none of the forbidden characters; skip the regex
        text = clean_text(text)
    elif len(text) > MAX_CELL_TEXT:
        text = text[:MAX_CELL_TEXT]
    if not text:
        return "", 0
    return f'<is><t xml:space="preserve">{escape(text)}</t></is>', len(text)


def _header_names(columns: list) -> list[str]:
    """Header cells as unique, non-blank table column names (case-insensitively unique, as tables require)."""
    names: list[str] = []
    seen: set[str] = set()
    for i, col in enumerate(columns):
        name = clean_text(str(col if col is not None else "")).strip() or f"column {i + 1}"
        # Line breaks would need the _xHHHH_ escapes in table column names; a header has no use for them.
        name = " ".join(name.split())
        base, n = name, 2
        while name.lower() in seen:
            name, n = f"{base} {n}", n + 1
        seen.add(name.lower())
        names.append(name)
    return names


#: A sheet with more columns than this prints landscape; narrower ones print portrait.
LANDSCAPE_FROM_COLUMNS = 6


def print_setup_xml(n_cols: int) -> tuple[str, str]:
    """(``sheetPr`` element, ``pageSetup`` element) for printing a result sheet: fit to one page wide, as many
    pages tall as needed, landscape when the sheet is wide (ECMA-376 Part 1, 18.3.1.63 and 18.3.1.82). The header
    row is repeated on every page by the ``_xlnm.Print_Titles`` defined name the writer adds."""
    orientation = "landscape" if n_cols > LANDSCAPE_FROM_COLUMNS else "portrait"
    return ('<sheetPr><pageSetUpPr fitToPage="1"/></sheetPr>',
            f'<pageSetup orientation="{orientation}" fitToWidth="1" fitToHeight="0"/>')


def sheet_xml(sheet: ResultSheet, table_rel_id: str, styles: dict[str, int] | None = None) -> tuple[str, str]:
    """The worksheet XML of one result sheet and its data range (``A1:J42``).

    Parameters
    ----------
    sheet : ResultSheet
    table_rel_id : str
        Relationship id of the sheet's table part.
    styles : dict, optional
        Column kind -> index of the cell format (``cellXfs`` entry) that carries its number format; see
        :func:`lanesolve.write.zipindex.add_number_formats`. Without it numbers are written unformatted.

    Returns
    -------
    (str, str)
        The worksheet part text and the table range: the pieces of :func:`sheet_pieces` joined.
    """
    ref, pieces = sheet_pieces(sheet, table_rel_id, styles)
    return "".join(pieces), ref


#: Rows rendered into one piece of a sheet's XML (:func:`sheet_pieces`): a few hundred kilobytes of text, so the
#: writer compresses one piece while the next is made and holds a slice of a large sheet at a time, not all of it.
ROWS_PER_PIECE = 4096

#: Cell values whose columns are rendered from their distinct values (a float, a str and None never compare equal,
#: so one dictionary holds them apart); a column holding anything else (an int, a bool, a NumPy scalar: 1, 1.0 and
#: True are one key) is rendered a cell at a time.
_DISTINCT_TYPES = frozenset({float, str, type(None)})


class _Texts:
    """The text cells of one sheet, each distinct text rendered once: what follows ``<c r="A2"`` (None for a
    blank cell) and the length it shows, kept only where that is not the text's own length (text with characters
    XML forbids, or past the cell limit), so the cache holds no object per text but its rendering."""

    def __init__(self) -> None:
        self.rest: dict[str, str | None] = {}
        self.shown: dict[str, int] = {}

    def one(self, text: str) -> tuple[str | None, int]:
        """(rest, shown length) of one non-empty text."""
        if text not in self.rest:
            self.add([text])
        return self.rest[text], self.shown.get(text, len(text))

    def add(self, texts: list[str]) -> None:
        """Render many distinct non-empty texts not yet seen.

        Printable text within the cell limit -- nearly all -- is escaped in one pass over the texts joined by a
        NUL, which printable text never holds, and split again; the rest goes one by one through
        :func:`_text_cell`.
        """
        plain = [t for t in texts if len(t) <= MAX_CELL_TEXT and t.isprintable()]
        if plain:
            self.rest.update(zip(plain, [f' t="inlineStr"><is><t xml:space="preserve">{e}</t></is></c>'
                                         for e in escape("\0".join(plain)).split("\0")]))
        if len(plain) < len(texts):
            for text in texts:
                if text not in self.rest:
                    body, length = _text_cell(text)
                    self.rest[text] = f' t="inlineStr">{body}</c>' if body else None
                    self.shown[text] = length

    def widest(self, texts: list[str]) -> int:
        """The largest shown length of some rendered texts that are not blank."""
        if not self.shown:
            return max(map(len, texts), default=0)
        return max([self.shown.get(t, len(t)) for t in texts if self.rest[t] is not None], default=0)


def _cell_rest(value, kind: str, style: str, texts: _Texts) -> tuple[str | None, int]:
    """What follows ``<c r="A2"`` for one cell (its style, type, value and end tag) and its shown length; None for
    a blank cell (None, NaN, infinities, empty text)."""
    value_type = type(value)
    if value is None:
        return None, 0
    if value_type is float:
        if not (-math.inf < value < math.inf):  # NaN and infinities are blank cells (as _cell_text would say)
            return None, 0
        return f"{style}><v>{_number_text(value)}</v></c>", _shown_length(value, kind)
    if value_type is str and value:
        return texts.one(value)
    body, cell_type, length = _cell_text(value, kind)
    if not body:
        return None, 0
    type_attr = f' t="{cell_type}"' if cell_type else ""
    number_style = style if cell_type is None else ""
    return f"{number_style}{type_attr}>{body}</c>", length


def _column_cells(values, kind: str, style: str, own_kinds: dict[int, str] | None, styles: dict[str, int],
                  texts: _Texts) -> tuple[list, int]:
    """One column's cells: what follows each cell's reference (None for a blank cell) and the widest shown length.

    Text cells repeat (ids, modes, statuses) and so do numbers within a column (rates, capacities, zero charges):
    a column of floats, text and blanks is rendered once per distinct value and looked up for every cell. A cell
    with a kind of its own (:attr:`ResultSheet.cell_kinds`) and a column holding other types go a cell at a time.
    """
    if own_kinds is None and set(map(type, values)) <= _DISTINCT_TYPES:
        # Each distinct value, then what follows its cell reference: None, NaN, infinities and empty text stay
        # None, blank cells.
        rest_of = dict.fromkeys(values)
        strings = [v for v in rest_of if type(v) is str and v]
        texts.add([t for t in strings if t not in texts.rest])
        rest_of.update(zip(strings, map(texts.rest.__getitem__, strings)))
        width = texts.widest(strings)
        finite = [v for v in rest_of if type(v) is float and -math.inf < v < math.inf]
        if finite:
            rest_of.update(zip(finite, [f"{style}><v>{text}</v></c>" for text in _number_texts(finite)]))
            width = max(width, _widest(finite, kind))
            if 0.0 in rest_of:  # 0.0 and -0.0 are one key (and one set member), but "-0.00" is wider than "0.00"
                signs = {math.copysign(1.0, v) for v in values if v == 0 and type(v) is float}
                width = max(width, _widest([math.copysign(0.0, sign) for sign in signs], kind))
        return list(map(rest_of.__getitem__, values)), width
    rests: list = []
    width = 0
    for r, value in enumerate(values):
        own = own_kinds.get(r) if own_kinds else None
        if own is None:
            rest, length = _cell_rest(value, kind, style, texts)
        else:
            rest, length = _cell_rest(value, own, f' s="{styles[own]}"' if own in styles else "", texts)
        rests.append(rest)
        if rest is not None and length > width:
            width = length
    return rests, width


def sheet_pieces(sheet: ResultSheet, table_rel_id: str,
                 styles: dict[str, int] | None = None) -> tuple[str, Iterator[str]]:
    """The data range of one result sheet and its worksheet XML as an iterator of text pieces, in order.

    The cells are rendered here, a column at a time (the column widths in the part's head need every cell); the
    pieces -- the head, :data:`ROWS_PER_PIECE` rows at a time, the tail -- are made as they are taken, so a writer
    can compress one while the next is made. Parameters as :func:`sheet_xml`.
    """
    styles = styles or {}
    headers = _header_names(sheet.columns)
    n_cols = max(len(headers), 1)
    letters = [_column_letter(i) for i in range(n_cols)]
    kinds = [sheet.kinds.get(c, "number") for c in sheet.columns] + ["number"] * (n_cols - len(sheet.columns))
    # Widths start from the header (plus room for the filter button).
    widths = [len(h) + 3 for h in headers]
    style_attr = [f' s="{styles[k]}"' if k in styles else "" for k in kinds]
    own_kinds: list[dict[int, str] | None] = [None] * n_cols
    for (r, j), own in (sheet.cell_kinds or {}).items():
        if 0 <= j < n_cols:
            if own_kinds[j] is None:
                own_kinds[j] = {}
            own_kinds[j][r] = own

    rows = sheet.rows
    n_rows = len(rows)
    # A row shorter than the header has blank cells at its end; cells beyond the header are not written.
    columns = list(itertools.zip_longest(*rows))[:n_cols] if n_rows else []
    columns += [(None,) * n_rows] * (n_cols - len(columns))
    texts = _Texts()
    cells: list[list] = []
    for j, values in enumerate(columns):
        rests, width = _column_cells(values, kinds[j], style_attr[j], own_kinds[j], styles, texts)
        cells.append(rests)
        if j < len(widths) and width > widths[j]:
            widths[j] = width
    del columns, texts

    header_cells = "".join(f'<c r="{letters[j]}1" t="inlineStr"><is><t xml:space="preserve">{escape(name)}</t>'
                           f'</is></c>' for j, name in enumerate(headers))
    # A table needs at least one data row; an empty result keeps one blank row inside the table.
    last_row = max(n_rows + 1, 2)
    ref = f"A1:{letters[-1]}{last_row}"
    # Width in characters, capped so a long message does not push the other columns off screen.
    cols = "".join(f'<col min="{j + 1}" max="{j + 1}" width="{min(w + 1, 80):.1f}" customWidth="1"/>'
                   for j, w in enumerate(widths))
    sheet_pr, page_setup = print_setup_xml(n_cols)
    head = "".join([
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n',
        f'<worksheet xmlns="{MAIN_NS}" xmlns:r="{REL_NS[0]}">',
        sheet_pr,
        f'<dimension ref="{ref}"/>',
        '<sheetViews><sheetView workbookViewId="0"><pane ySplit="1" topLeftCell="A2" activePane="bottomLeft" '
        'state="frozen"/><selection pane="bottomLeft" activeCell="A2" sqref="A2"/></sheetView></sheetViews>',
        '<sheetFormatPr defaultRowHeight="15"/>',
        f"<cols>{cols}</cols>",
        "<sheetData>", '<row r="1">', header_cells, "</row>",
    ])
    tail = "".join([
        "</sheetData>",
        '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>',
        page_setup,
        f'<tableParts count="1"><tablePart r:id="{table_rel_id}"/></tableParts>',
        "</worksheet>",
    ])

    def pieces() -> Iterator[str]:
        yield head
        for start in range(0, n_rows, ROWS_PER_PIECE):
            stop = min(start + ROWS_PER_PIECE, n_rows)
            numbers = list(map(str, range(start + 2, stop + 2)))
            row_cells = [[f'<c r="{letter}{i}"{rest}' if rest is not None else "" for i, rest in
                          zip(numbers, rests[start:stop])] for letter, rests in zip(letters, cells)]
            yield "".join(itertools.chain.from_iterable(
                zip([f'<row r="{i}">' for i in numbers], *row_cells, itertools.repeat("</row>"))))
        yield tail

    return ref, pieces()


def table_xml(table_id: int, name: str, headers: list[str], ref: str) -> str:
    """The table part of one result sheet: built-in style, header row with filter buttons, banded rows."""
    columns = "".join(f'<tableColumn id="{i + 1}" name="{escape(h)}"/>' for i, h in enumerate(headers))
    return (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<table xmlns="{MAIN_NS}" id="{table_id}" name="{name}" displayName="{name}" ref="{ref}" '
        f'totalsRowShown="0"><autoFilter ref="{ref}"/><tableColumns count="{len(headers)}">{columns}'
        f'</tableColumns><tableStyleInfo name="{TABLE_STYLE}" showFirstColumn="0" showLastColumn="0" '
        'showRowStripes="1" showColumnStripes="0"/></table>'
    )


def _table_name(sheet_name: str, taken: set[str]) -> str:
    """A workbook-unique table name from a sheet name (``LS Lane flows`` -> ``LS_Lane_flows``)."""
    base = re.sub(r"[^0-9A-Za-z_.]", "_", sheet_name).strip("_") or "LS_results"
    if not (base[0].isalpha() or base[0] == "_"):
        base = "_" + base
    # Letters followed by digits ("LS1") or R1C1-like names would read as cell references.
    if re.fullmatch(r"[A-Za-z]{1,3}\d+|[RrCc]\d*|[Rr]\d*[Cc]\d*", base):
        base = "_" + base
    name, n = base, 2
    while name.lower() in taken:
        name, n = f"{base}_{n}", n + 1
    taken.add(name.lower())
    return name
