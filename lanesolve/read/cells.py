"""Cell parsing, one whole column at a time: ids, numbers, yes/no flags, choices and text."""

from __future__ import annotations

import datetime as _dt
import math
import re
from itertools import repeat
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.contract import CHOICE, FLAG, ID, NUMBER, Column
from lanesolve.read.findings import Findings, as_number, did_you_mean, show

if TYPE_CHECKING:
    from lanesolve.read.sheets import Table

#: Columns where a blank cell means "no limit".
BLANK_MEANS_NO_LIMIT = frozenset({"capacity"})
DATE_TYPES = (_dt.date, _dt.datetime, _dt.time, _dt.timedelta)
_NAN_TEXT = re.compile(r"[+-]?nan", re.IGNORECASE)


#: The kind of a cell by its exact Python type (subclasses are not these kinds): 1 text, 2 number, 3 yes/no, 4 date.
_KIND = {str: 1, float: 2, int: 2, np.float64: 2, np.float32: 2, np.int64: 2, np.int32: 2, bool: 3, np.bool_: 3,
         **{kind: 4 for kind in (*DATE_TYPES, pd.Timestamp, pd.Timedelta)}}


def type_masks(values: pd.Series) -> dict[str, pd.Series]:
    """Boolean masks by cell kind (str, bool, number, date, blank) and the trimmed text of string cells.

    One pass of C-level ``map`` over the cells (a 1M-lane Lanes sheet has millions of them): the type of each cell,
    its kind from :data:`_KIND`, and ``str.strip`` on the text cells only."""
    cells = values.to_numpy(dtype=object)
    kind = np.fromiter(map(_KIND.get, map(type, cells), repeat(0)), dtype=np.int8, count=len(cells))
    is_str = kind == 1
    strings = int(np.count_nonzero(is_str))
    numeric = kind == 2
    # None is an empty cell; a float NaN (from a lanes file, or a hand-built sheet) is a value, named "NaN" in
    # messages, never read as blank.
    empty_text = np.zeros(len(cells), dtype=bool)
    if strings == len(cells):  # a text column (ids, modes, yes/no): no blank cell but empty text
        texts = list(map(str.strip, cells))
        stripped = np.fromiter(texts, dtype=object, count=len(texts))
        if "" in texts:
            empty_text = stripped == ""
        blank = empty_text
    else:
        stripped = np.full(len(cells), "", dtype=object)
        if strings:
            texts = list(map(str.strip, cells[is_str]))
            stripped[is_str] = np.fromiter(texts, dtype=object, count=strings)
            if "" in texts:
                empty_text[is_str] = np.fromiter(map(len, texts), dtype=np.int64, count=strings) == 0
        blank = empty_text
        if not numeric.all():  # only the cells that are not numbers are asked whether they are missing
            blank = blank | (pd.isna(cells) & ~numeric)
    index = values.index

    def series(mask: np.ndarray) -> pd.Series:
        return pd.Series(mask, index=index, dtype=bool)

    return {"str": series(is_str), "bool": series(kind == 3), "number": series(numeric & ~blank),
            "date": series(kind == 4), "blank": series(blank), "stripped": pd.Series(stripped, index=index,
                                                                                     dtype=object)}


def nfc(text: pd.Series) -> pd.Series:
    """Text in Unicode normal form C, so ids that differ only in how an accent is encoded (``"é"`` as one code point
    or as ``"e"`` + combining accent) are the same id, as they look the same in every cell (Unicode Standard Annex
    #15). ASCII text, by far the most common, is left as it is without a per-cell call."""
    if len(text) == 0 or "".join(text.tolist()).isascii():
        return text
    return text.str.normalize("NFC")


def number_text(numbers: pd.Series) -> pd.Series:
    """Numbers as id text: integral values without ``.0`` (101.0 -> '101'), others as Python writes them."""
    as_float = numbers.astype(float)
    integral = np.isfinite(as_float) & (as_float == np.floor(as_float)) & (as_float.abs() < 2**63)
    text = as_float.map(repr)
    text[integral] = as_float[integral].astype("int64").astype(str)
    return text


class ColumnParser:
    """Parse one contract column of one table, reporting bad cells as problems."""

    def __init__(self, table: Table, col: Column, found: Findings):
        self.table, self.col, self.found = table, col, found
        self.label = table.column_label(col.name)

    def report(self, mask, raw: pd.Series, message, hint, severity="error", value=None):
        """Add one problem per True entry of ``mask``; ``message``/``hint``/``value`` may be callables of the cell."""
        positions = np.flatnonzero(np.asarray(mask))
        for pos in positions:
            cell = raw.iloc[pos]
            shown = value(pos) if callable(value) else cell
            self.found.add(self.table.sheet_name, self.table.rows[pos], self.label, shown,
                           message(cell) if callable(message) else message,
                           hint(cell) if callable(hint) else hint, severity)
        return positions

    def parse(self, raw: pd.Series, bad: np.ndarray, masks: dict[str, pd.Series]) -> tuple[pd.Series, np.ndarray]:
        """Parsed values and the mask of cells already reported; ``masks`` are :func:`type_masks` of ``raw``."""
        kind = self.col.kind
        invalid = bad.copy()
        masks = dict(masks)
        if bad.any():
            for key in ("str", "bool", "number", "date", "blank"):
                masks[key] = masks[key] & ~bad
        if kind == ID:
            values = self._id(raw, masks, invalid)
        elif kind == NUMBER:
            values = self._number(raw, masks, invalid)
        elif kind == FLAG:
            values = self._flag(raw, masks, invalid)
        elif kind == CHOICE:
            values = self._choice(raw, masks, invalid)
        else:
            values = self._text(raw, masks)
        return values, invalid

    def _id(self, raw, masks, invalid):
        # Filled by position (each part is taken in row order from its mask), not by pandas' index alignment.
        ids = np.full(len(raw), "", dtype=object)
        is_str, is_number = masks["str"].to_numpy(), masks["number"].to_numpy()
        ids[is_str] = nfc(masks["stripped"][masks["str"]]).to_numpy(dtype=object)
        if is_number.any():
            ids[is_number] = number_text(raw[masks["number"]]).to_numpy(dtype=object)
        values = pd.Series(ids, index=raw.index, dtype=object)
        lengths = np.fromiter(map(len, ids), dtype=np.int64, count=len(ids))
        too_long = is_str & (lengths > contract.MAX_ID_LENGTH)
        self.report(too_long, raw, lambda v: f"the id is {len(v.strip()):,} characters long; a spreadsheet cell "
                    f"holds at most {contract.MAX_ID_LENGTH:,}", "use a short id", value=lambda pos: None)
        invalid |= too_long
        wrong = (masks["bool"] | masks["date"]).to_numpy()
        self.report(wrong, raw, lambda v: f"{show(v)} is a {'yes/no' if isinstance(v, bool) else 'date'} value, "
                    f"not an id", "write the id as text")
        blank = masks["blank"].to_numpy()
        if self.col.required:
            self.report(blank, raw, f"{self.col.name} is blank",
                        f"enter the id of the {self.col.name}, or delete the row")
        invalid |= wrong | blank
        return values

    def _number(self, raw, masks, invalid):
        col = self.col
        unit = f" in {col.unit}" if col.unit else ""
        # Filled by position (each part is taken in row order from its mask), not by pandas' index alignment.
        numbers = np.full(len(raw), np.nan)
        is_number = masks["number"].to_numpy()
        numbers[is_number] = raw.to_numpy(dtype=object)[is_number].astype(float)

        # Text cells: plain numeric text, NaN/inf spelled out, text whose separators are ambiguous, or not a number.
        text_cells = (masks["str"] & ~masks["blank"]).to_numpy()
        plain = np.zeros(len(raw), dtype=bool)
        ambiguous = np.zeros(len(raw), dtype=bool)
        if text_cells.any():
            text = masks["stripped"][text_cells]
            unsure = (text.str.fullmatch(contract.AMBIGUOUS_POINT) | text.str.fullmatch(contract.NUMBER_WITH_COMMA)
                      | text.str.fullmatch(contract.NUMBER_WITH_POINTS)).to_numpy()
            parsed = pd.to_numeric(text, errors="coerce").astype(float)
            parsed[unsure] = np.nan  # "1.200" parses as 1.2, but in many locales it means 1200: never guess
            spelled_nan = text.str.fullmatch(_NAN_TEXT).to_numpy()
            numbers[text_cells] = parsed.to_numpy()
            plain[text_cells] = (parsed.notna().to_numpy() | spelled_nan) & ~unsure
            ambiguous[text_cells] = unsure
        self.report(ambiguous, raw, lambda v: contract.ambiguous_number_text(v), contract.PLAIN_NUMBER_HINT)
        not_number = text_cells & ~plain & ~ambiguous
        comma = np.zeros(len(raw), dtype=bool)
        if not_number.any():  # usually none: only the cells that are not numbers are searched
            comma[not_number] = masks["stripped"][not_number].str.contains(",", regex=False).to_numpy()
        self.report(comma, raw, lambda v: f"{show(v)} is not a number", contract.PLAIN_NUMBER_HINT)
        self.report(not_number & ~comma, raw, lambda v: f"{show(v)} is not a number",
                    f"enter a number{unit}, without units or other text")
        not_number |= ambiguous
        array = numbers
        finite = np.isfinite(array)
        self.report(plain & finite, raw, lambda v: f"{show(v)} is a number stored as text; read as "
                    f"{show(float(v.strip()))}", "format the cell as a number to silence this warning",
                    severity="warning")

        kinds = masks["bool"].to_numpy(), masks["date"].to_numpy()
        self.report(kinds[0], raw, lambda v: f"{show(v)} is a yes/no value, not a number",
                    f"enter a number{unit} in the cell")
        self.report(kinds[1], raw, lambda v: f"{show(v)} is a date or time, not a number",
                    "format the cell as a number; the spreadsheet program may have turned the entry into a date")
        blank = masks["blank"].to_numpy()
        other = ~(masks["number"].to_numpy() | masks["str"].to_numpy() | kinds[0] | kinds[1] | blank | invalid)
        self.report(other, raw, lambda v: f"{show(v)} is not a number", f"enter a number{unit} in the cell")
        invalid |= not_number | kinds[0] | kinds[1] | other

        read = ~invalid & ~blank
        non_finite = read & ~finite
        self.report(non_finite, raw, lambda v: f"{show(v)} is not a finite number",
                    "enter an ordinary number; leave the cell blank where blank means no limit or the default")
        invalid |= non_finite
        read &= ~non_finite
        with np.errstate(invalid="ignore"):
            size = np.abs(array)
            extreme = read & ((size > contract.MAX_MAGNITUDE) | ((size > 0) & (size < contract.MIN_MAGNITUDE)))
        self.report(extreme, raw, lambda v: f"{show(as_number(v))}: {contract.magnitude_problem(as_number(v))}",
                    f"enter {col.name} between {contract.MIN_MAGNITUDE:.0e} and {contract.MAX_MAGNITUDE:.0e} in "
                    f"size, or 0; change the unit (thousands of units, cents to currency) if the numbers need it",
                    value=lambda pos: float(array[pos]))
        invalid |= extreme
        read &= ~extreme
        with np.errstate(invalid="ignore"):
            low = read & (array < col.minimum) if col.minimum is not None else np.zeros(len(raw), dtype=bool)
            high = read & (array > col.maximum) if col.maximum is not None else np.zeros(len(raw), dtype=bool)
        if col.maximum is not None:
            ranged = f"from {show(float(col.minimum))} to {show(float(col.maximum))}"
            hint = (f"{col.name} is in decimal {col.unit}; check that latitude and longitude are not swapped"
                    if col.name in ("latitude", "longitude") else f"enter a value {ranged}")
            self.report(low | high, raw, lambda v: f"{show(as_number(v))} is outside the range {ranged} "
                        f"for {col.name}", hint, value=lambda pos: float(array[pos]))
        elif col.minimum is not None:
            self.report(low, raw, lambda v: f"{show(as_number(v))} is negative; {col.name} must be "
                        f"{show(float(col.minimum))} or more", "enter 0 or a positive number",
                        value=lambda pos: float(array[pos]))
        invalid |= low | high

        if col.required:
            self.report(blank, raw, f"{col.name} is blank", f"enter the {col.name}{unit}")
            invalid |= blank
        else:
            fill = math.inf if col.name in BLANK_MEANS_NO_LIMIT else (
                math.nan if col.default is None else float(col.default))
            array = np.where(blank, fill, array)
        return pd.Series(array, index=raw.index, dtype=float)

    def _flag(self, raw, masks, invalid):
        col = self.col
        yes, no = _yes_no_words(masks["stripped"])
        is_number, is_bool = masks["number"].to_numpy(), masks["bool"].to_numpy()
        if is_number.any():
            numbers_as_words = number_text(raw[masks["number"]])
            yes[is_number], no[is_number] = numbers_as_words.isin(contract.YES), numbers_as_words.isin(contract.NO)
        if is_bool.any():  # TRUE/FALSE cells: only they are compared with True and False
            truth = raw.to_numpy(dtype=object)[is_bool]
            yes[is_bool] |= truth == True  # noqa: E712 (a numpy bool is not the object True)
            no[is_bool] |= truth == False  # noqa: E712
        if col.default is None:
            # Flags whose blank takes a Settings default (single_source): blank stays None here.
            values = pd.Series(None, index=raw.index, dtype=object)
        else:
            values = pd.Series(bool(col.default), index=raw.index, dtype=bool)
        yes, no = pd.Series(yes, index=raw.index), pd.Series(no, index=raw.index)
        values[yes & ~masks["blank"]] = True
        values[no & ~masks["blank"]] = False
        wrong = (~(yes | no | masks["blank"]) & ~pd.Series(invalid, index=raw.index)).to_numpy()
        blank_means = ("the Settings default" if col.default is None else "yes" if col.default else "no")
        self.report(wrong, raw, lambda v: f"{show(v)} is not yes or no",
                    f"write yes or no; blank means {blank_means}")
        invalid |= wrong
        return values

    def _choice(self, raw, masks, invalid):
        """A choice column (``status``): one of ``col.choices``, any case; blank stays ``""``."""
        col = self.col
        words = masks["stripped"].str.lower()
        values = pd.Series("", index=raw.index, dtype=object)
        ok = masks["str"] & words.isin(col.choices)
        values[ok] = words[ok]
        wrong = (~(ok | masks["blank"]) & ~pd.Series(invalid, index=raw.index)).to_numpy()
        choices = {c: c for c in col.choices}

        def hint(v):
            near = did_you_mean(str(v), choices, cutoff=0.5)
            return (f"did you mean '{near}'? " if near else "") + f"write one of {', '.join(col.choices)}, or leave it blank"

        self.report(wrong, raw, lambda v: f"{show(v)} is not one of {', '.join(col.choices)}", hint)
        invalid |= wrong
        return values

    def _text(self, raw, masks):
        # Filled by position, as in _id.
        texts = np.full(len(raw), "" if self.col.default is None else str(self.col.default), dtype=object)
        written = masks["str"] & ~masks["blank"]
        texts[written.to_numpy()] = nfc(masks["stripped"][written]).to_numpy(dtype=object)
        if masks["number"].any():
            texts[masks["number"].to_numpy()] = number_text(raw[masks["number"]]).to_numpy(dtype=object)
        other = masks["bool"] | masks["date"]
        if other.any():
            texts[other.to_numpy()] = raw[other].map(lambda v: show(v).strip("'")).to_numpy(dtype=object)
        return pd.Series(texts, index=raw.index, dtype=object)


def _yes_no_words(stripped: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Which trimmed texts are a yes word and which a no word, in any case. A flag column holds a handful of
    distinct words over many rows, so each distinct text is lowered and looked up once."""
    codes, distinct = pd.factorize(stripped.to_numpy(dtype=object))
    words = pd.Series(distinct, dtype=object).str.lower()
    return words.isin(contract.YES).to_numpy()[codes], words.isin(contract.NO).to_numpy()[codes]


def default_values(col: Column, n: int) -> pd.Series:
    """What a blank cell of ``col`` parses to, for ``n`` records (as :meth:`ColumnParser.parse` fills blanks)."""
    if col.kind == NUMBER:
        fill = math.inf if col.name in BLANK_MEANS_NO_LIMIT else (
            math.nan if col.default is None else float(col.default))
        return pd.Series(np.full(n, fill), dtype=float)
    if col.kind == FLAG:
        return (pd.Series([None] * n, dtype=object) if col.default is None
                else pd.Series(np.full(n, bool(col.default)), dtype=bool))
    return pd.Series([col.default if col.default is not None else ""] * n, dtype=object)

