"""Stage "validate": check raw cell values against the workbook contract and build the :class:`Network`.

Every problem in the workbook is collected in one pass and reported together (nothing is capped here; the CLI
decides how many to print). Each :class:`~lanesolve.errors.Problem` names the sheet, the spreadsheet row, the column
as written in the workbook, the offending value, and a hint.

Reading rules (workbook contract v1, see :mod:`lanesolve.contract`):

- Sheet names and headers match ignoring case and surrounding spaces, with a space counting as an underscore.
  Headers are in row 1; columns the contract does not know are ignored.
- A row is skipped when every contract column in it is blank (whatever notes it carries in other columns).
- Ids are trimmed text; a number id is written without a trailing ``.0`` (101 -> ``"101"``).
- A number stored as text that parses cleanly (``" 12.5"``, ``"1e3"``) is accepted with a warning. So is a number
  with comma thousands separators in strict groups of three (``"1,200"``, ``"12,345.5"``): in a workbook that
  uses points for decimals this is unambiguous. Any other comma (``"1,5"``, ``"12,34"``) is an error, because it may
  be a decimal comma and guessing would silently change the value by a factor of 1000.
- TRUE/FALSE cells and dates in number columns are errors: they are almost always a formatting accident.
- Blank optional cells take the contract default; a blank capacity means no limit (``math.inf``); a blank customer
  ``unmet_penalty`` takes the Settings ``unmet_penalty`` when set, else NaN (demand is a hard requirement).

The checks work on whole columns with pandas; only the rows found wrong are visited one by one to build messages.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.read import geo
from lanesolve.read import lanes_file
from lanesolve.contract import CHOICE, FLAG, ID, NUMBER, TEXT, Column, Sheet
from lanesolve.errors import Problem, WorkbookError
from lanesolve.model.network import (BOOL_COLUMNS, CUSTOMER_COLUMNS, DEPOT_COLUMNS, HUB_COLUMNS, LANE_COLUMNS, LANE_SOURCE_COLUMNS,
                      TEXT_COLUMNS, Network, Settings, resolve_status)
from lanesolve.read.reader import RawSheet, RawWorkbook

_NETWORK_COLUMNS = {
    contract.DEPOTS.name: DEPOT_COLUMNS,
    contract.CUSTOMERS.name: CUSTOMER_COLUMNS,
    contract.HUBS.name: HUB_COLUMNS,
    contract.LANES.name: LANE_COLUMNS,
}
_NODE_KIND = {contract.DEPOTS.name: "depot", contract.CUSTOMERS.name: "customer", contract.HUBS.name: "hub"}
#: Columns where a blank cell means "no limit".
_BLANK_MEANS_NO_LIMIT = frozenset({"capacity"})
_DATE_TYPES = (_dt.date, _dt.datetime, _dt.time, _dt.timedelta)
_THOUSANDS = re.compile(r"[+-]?\d{1,3}(,\d{3})+(\.\d*)?")
_NAN_TEXT = re.compile(r"[+-]?nan", re.IGNORECASE)
_FORMULA_HINT = ("open the file in a spreadsheet program and save it, so formula results are stored, "
                 "or type the value in")
_ERROR_VALUE_HINT = "fix the cell or the cells its formula uses so it shows a proper value, or type the value in"
#: How many candidate comparisons did-you-mean for ids may spend in one validation; beyond it only exact
#: case-insensitive matches are suggested, so a workbook with thousands of unknown ids still validates quickly.
_SUGGEST_BUDGET = 2_000_000


def validate(raw: RawWorkbook) -> tuple[Network, list[Problem]]:
    """Check a workbook's values against the contract and build the network.

    Parameters
    ----------
    raw : RawWorkbook
        As returned by :func:`lanesolve.read.reader.read_workbook`.

    Returns
    -------
    network : Network
        Frames with exactly the columns of :mod:`lanesolve.model.network`, defaults filled.
    warnings : list of Problem
        Findings that do not block the solve (numbers stored as text, unknown settings, hidden sheets...).

    Raises
    ------
    WorkbookError
        Any error was found: ``problems`` lists every error, ``warnings`` every warning. Causes: missing sheet or
        required column; duplicate header; blank, duplicate or cross-sheet duplicate id; unknown lane origin or
        destination; origin equal to destination; duplicate lane; non-numeric, negative, out-of-range, NaN or
        infinite number; TRUE/FALSE or date in a number column; error value or unsaved formula in a cell;
        ``active`` not yes/no; duplicate or bad setting value.

    Examples
    --------
    >>> from lanesolve.read.reader import RawSheet, RawWorkbook
    >>> raw = RawWorkbook("demo.xlsx", {
    ...     "Depots": RawSheet("Depots", [["depot", "supply"], ["D1", 10.0]]),
    ...     "Customers": RawSheet("Customers", [["customer", "demand"], [101.0, 4.0]]),
    ...     "Lanes": RawSheet("Lanes", [["origin", "destination", "cost_per_unit"], ["D1", "101", 2.0]])})
    >>> network, warnings = validate(raw)
    >>> network.customers["id"].tolist(), network.lanes["capacity"].tolist(), warnings
    (['101'], [inf], [])
    """
    found = _Findings()
    # Settings first: lanes_file decides whether the Lanes sheet is required.
    matched = _match_sheets(raw, found, deferred=(contract.LANES.name,))
    settings = _read_settings(matched.get(contract.SETTINGS.name), found)
    if contract.LANES.name not in matched and not settings.lanes_file:
        _report_missing_sheet(contract.LANES, raw, found)
    lanes_sheet = matched.get(contract.LANES.name)
    if settings.lanes_file and lanes_sheet is not None and not lanes_sheet.bad_cells and \
            not any(not _is_blank(cell) for row in lanes_sheet.rows for cell in row):
        del matched[contract.LANES.name]  # with a lanes file, a Lanes sheet left completely empty counts as absent
    tables = {spec.name: _read_table(spec, matched.get(spec.name), found)
              for spec in contract.INPUT_SHEETS if spec is not contract.SETTINGS}
    _require_cost_column(tables[contract.LANES.name], settings, found)
    if settings.lanes_file:
        tables[contract.LANES.name] = _with_lanes_file(tables[contract.LANES.name], raw.path, settings, found)
    node_ids = _check_node_ids(tables, found)
    _check_lanes(tables[contract.LANES.name], node_ids, found)
    _check_lane_design(tables[contract.LANES.name], found)
    _check_lane_costs(tables[contract.LANES.name], settings, found)

    frames = None
    if all(table.complete for table in tables.values()):
        # Frames are built before raising so that lane costs from distance are checked in the same pass.
        frames = {name: _network_frame(table, settings) for name, table in tables.items()}
        frames[contract.LANES.name], lane_sources = _costs_from_distance(frames, tables[contract.LANES.name],
                                                                          settings, found)
    errors = found.sorted("error")
    warnings = found.sorted("warning")
    if errors or frames is None:
        raise WorkbookError(errors, warnings)
    network = Network(
        depots=frames[contract.DEPOTS.name],
        customers=frames[contract.CUSTOMERS.name],
        hubs=frames[contract.HUBS.name],
        lanes=frames[contract.LANES.name],
        settings=settings,
        source=raw.path,
        lane_sources=lane_sources,
    )
    return network, warnings


# ----------------------------------------------------------------------------------------------------------------
# collecting problems


class _Findings(list):
    """Problems in the order found; :meth:`sorted` puts them in sheet order, then row order."""

    def add(self, sheet, row, column, value, message, hint="", severity="error"):
        self.append(Problem(sheet, None if row is None else int(row), column, _plain(value), message, hint,
                            severity))

    def sorted(self, severity: str) -> list[Problem]:
        order = {contract.normalize(spec.name): i for i, spec in enumerate(contract.INPUT_SHEETS)}

        def key(p: Problem):
            sheet = -1 if p.sheet is None else order.get(contract.normalize(p.sheet), len(order))
            return sheet, -1 if p.row is None else p.row

        # Stable sort: within a sheet and row, problems keep the order the checks found them.
        return sorted((p for p in self if p.severity == severity), key=key)


def _plain(value):
    """Numpy scalars to Python, so problems print and serialise plainly."""
    if isinstance(value, np.generic):
        return value.item()
    return value


def _show(value) -> str:
    """A cell value as a planner would recognise it in a message."""
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        return str(int(value))
    if isinstance(value, str):
        return f"'{value}'"
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, _dt.datetime):
        return value.isoformat(sep=" ")
    if isinstance(value, _dt.date):
        return value.isoformat()
    return str(value)


def _as_number(value) -> float:
    """A cell already known to parse as a number (a number, or numeric text possibly with thousands commas)."""
    return float(value.strip().replace(",", "")) if isinstance(value, str) else float(value)


def _did_you_mean(word: str, candidates: dict[str, str], cutoff: float = 0.6) -> str | None:
    """The written form of the candidate whose normalised form is closest to ``normalize(word)`` (difflib)."""
    close = difflib.get_close_matches(contract.normalize(word), list(candidates), n=1, cutoff=cutoff)
    return candidates[close[0]] if close else None


# ----------------------------------------------------------------------------------------------------------------
# sheets and headers


def _match_sheets(raw: RawWorkbook, found: _Findings, deferred: tuple[str, ...] = ()) -> dict[str, RawSheet]:
    """Contract sheet name -> the workbook's sheet of that name (case and spacing ignored).

    A missing required sheet is reported here unless its name is in ``deferred`` (the caller decides later, see
    :func:`_report_missing_sheet`).
    """
    by_norm: dict[str, list[RawSheet]] = {}
    for sheet in raw.sheets.values():
        by_norm.setdefault(contract.normalize(sheet.name), []).append(sheet)

    matched: dict[str, RawSheet] = {}
    for spec in contract.INPUT_SHEETS:
        candidates = by_norm.get(contract.normalize(spec.name), [])
        if len(candidates) > 1:
            names = " and ".join(f"'{s.name}'" for s in candidates)
            found.add(candidates[1].name, None, None, candidates[1].name,
                      f"two sheets, {names}, both count as the {spec.name} sheet",
                      "rename or delete one of them")
            continue
        if not candidates:
            if spec.required and spec.name not in deferred:
                _report_missing_sheet(spec, raw, found)
            continue
        sheet = candidates[0]
        if not spec.required and not any(not _is_blank(cell) for row in sheet.rows for cell in row) \
                and not sheet.bad_cells:
            continue  # an optional sheet left completely empty counts as absent
        if sheet.hidden:
            found.add(sheet.name, None, None, None, "this sheet is hidden; it is read all the same",
                      "unhide it to review what lanesolve reads", severity="warning")
        matched[spec.name] = sheet
    return matched


def _report_missing_sheet(spec: Sheet, raw: RawWorkbook, found: _Findings) -> None:
    contract_norms = {contract.normalize(s.name) for s in contract.INPUT_SHEETS}
    spare = {contract.normalize(s.name): s.name for s in raw.sheets.values()
             if contract.normalize(s.name) not in contract_norms}
    near = _did_you_mean(spec.name, spare)
    hint = (f"did you mean sheet '{near}'? Rename it to '{spec.name}'" if near else
            f"add a sheet named '{spec.name}' with its headers in row 1")
    if spec is contract.LANES:
        hint += ", or name a CSV or Parquet file of lanes in the Settings row lanes_file"
    found.add(spec.name, None, None, None, f"the workbook has no sheet named '{spec.name}'", hint)


@dataclass
class _Table:
    """One input sheet parsed column by column (rows that are blank in every contract column removed)."""

    spec: Sheet
    sheet_name: str | None = None
    headers: dict[str, str] = field(default_factory=dict)  # contract column -> header as written
    rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))  # spreadsheet row of each record
    values: dict[str, pd.Series] = field(default_factory=dict)  # contract column -> parsed values
    invalid: dict[str, np.ndarray] = field(default_factory=dict)  # contract column -> cell already reported
    complete: bool = True  # False when a required column or the sheet itself could not be read
    #: When records come from more than one place (the Lanes sheet and the lanes file): the sheet or file of each
    #: record, and each place's headers as written. None for a table read from one sheet.
    sources: np.ndarray | None = None
    source_headers: dict[str, dict[str, str]] = field(default_factory=dict)
    raw_header: list = field(default_factory=list)  # row 1 as written (for did-you-mean on a missing column)

    def __len__(self) -> int:
        return len(self.rows)

    def column_label(self, name: str) -> str:
        return self.headers.get(name, name)

    def sheet_of(self, pos: int) -> str | None:
        """The sheet (or lanes file) record ``pos`` was read from."""
        return self.sheet_name if self.sources is None else self.sources[pos]

    def where(self, pos: int, name: str) -> tuple[str | None, int, str]:
        """Sheet, row and column header as written, for a problem in column ``name`` of record ``pos``."""
        sheet = self.sheet_of(pos)
        headers = self.headers if self.sources is None else self.source_headers.get(sheet, {})
        return sheet, int(self.rows[pos]), headers.get(name, name)

    def sheet_names(self) -> np.ndarray:
        """The sheet (or lanes file) of every record."""
        if self.sources is not None:
            return self.sources
        return np.full(len(self), self.sheet_name or self.spec.name, dtype=object)


def _header_text(cell) -> str:
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    return "" if cell is None else str(cell).strip()


def _match_headers(spec: Sheet, sheet: RawSheet, found: _Findings) -> tuple[dict[str, int], dict[str, str], bool]:
    """Find each contract column's position in row 1; report missing, duplicate and near-miss headers."""
    header_row = sheet.rows[0] if sheet.rows else []
    positions: dict[str, list[int]] = {}
    for index, cell in enumerate(header_row):
        positions.setdefault(contract.normalize(cell), []).append(index)
    known = {col.name for col in spec.columns}
    unmatched = {contract.normalize(h): _header_text(h) for h in header_row
                 if contract.normalize(h) and contract.normalize(h) not in known}

    index_of: dict[str, int] = {}
    written: dict[str, str] = {}
    complete = True
    for col in spec.columns:
        where = positions.get(col.name, [])
        if len(where) > 1:
            letters = ", ".join(_column_letters(i + 1) for i in where)
            found.add(sheet.name, 1, _header_text(header_row[where[1]]), _header_text(header_row[where[1]]),
                      f"column '{col.name}' appears more than once (columns {letters})",
                      "keep one column with this header and rename or delete the others")
            complete = complete and not col.required
            continue
        if not where:
            near = _did_you_mean(col.name, unmatched, cutoff=0.75)
            if col.required:
                hint = (f"did you mean '{near}'? Rename that header to '{col.name}'" if near else
                        f"add a column headed '{col.name}' in row 1")
                found.add(sheet.name, 1, col.name, None, f"required column '{col.name}' is missing", hint)
                complete = False
            elif near is not None:
                found.add(sheet.name, 1, near, near,
                          f"column '{near}' is not a lanesolve column and is ignored",
                          f"did you mean '{col.name}'? Rename the header to use it", severity="warning")
            continue
        index_of[col.name] = where[0]
        written[col.name] = _header_text(header_row[where[0]])
    return index_of, written, complete


def _column_letters(number: int) -> str:
    letters = ""
    while number:
        number, rest = divmod(number - 1, 26)
        letters = chr(65 + rest) + letters
    return letters


# ----------------------------------------------------------------------------------------------------------------
# cell parsing, one whole column at a time


def _type_masks(values: pd.Series) -> dict[str, pd.Series]:
    """Boolean masks by cell kind (str, bool, number, date, blank) and the trimmed text of string cells."""
    types = values.map(type)
    is_str = types == str
    stripped = pd.Series("", index=values.index, dtype=object)
    if is_str.any():
        stripped[is_str] = values[is_str].str.strip()
    blank = values.isna() | (is_str & (stripped == ""))
    is_bool = types.isin([bool, np.bool_])
    is_number = types.isin([float, int, np.float64, np.float32, np.int64, np.int32]) & ~blank
    is_date = types.isin([_dt.date, _dt.datetime, _dt.time, _dt.timedelta, pd.Timestamp, pd.Timedelta])
    return {"str": is_str, "bool": is_bool, "number": is_number, "date": is_date, "blank": blank,
            "stripped": stripped}


def _number_text(numbers: pd.Series) -> pd.Series:
    """Numbers as id text: integral values without ``.0`` (101.0 -> '101'), others as Python writes them."""
    as_float = numbers.astype(float)
    integral = np.isfinite(as_float) & (as_float == np.floor(as_float)) & (as_float.abs() < 2**63)
    text = as_float.map(repr)
    text[integral] = as_float[integral].astype("int64").astype(str)
    return text


class _ColumnParser:
    """Parse one contract column of one table, reporting bad cells as problems."""

    def __init__(self, table: _Table, col: Column, found: _Findings):
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
        """Parsed values and the mask of cells already reported; ``masks`` are :func:`_type_masks` of ``raw``."""
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
        values = pd.Series("", index=raw.index, dtype=object)
        values[masks["str"]] = masks["stripped"][masks["str"]]
        if masks["number"].any():
            values[masks["number"]] = _number_text(raw[masks["number"]])
        wrong = (masks["bool"] | masks["date"]).to_numpy()
        self.report(wrong, raw, lambda v: f"{_show(v)} is a {'yes/no' if isinstance(v, bool) else 'date'} value, "
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
        numbers = pd.Series(np.nan, index=raw.index, dtype=float)
        numbers[masks["number"]] = raw[masks["number"]].astype(float)

        # Text cells: plain numeric text, strict thousands grouping, NaN/inf spelled out, or not a number at all.
        text_cells = (masks["str"] & ~masks["blank"]).to_numpy()
        plain = np.zeros(len(raw), dtype=bool)
        grouped = np.zeros(len(raw), dtype=bool)
        if text_cells.any():
            text = masks["stripped"][text_cells]
            parsed = pd.to_numeric(text, errors="coerce").astype(float)
            spelled_nan = text.str.fullmatch(_NAN_TEXT).to_numpy()
            with_groups = (parsed.isna().to_numpy() & ~spelled_nan & text.str.fullmatch(_THOUSANDS).to_numpy())
            if with_groups.any():
                parsed[with_groups] = pd.to_numeric(text[with_groups].str.replace(",", "", regex=False),
                                                    errors="coerce")
            numbers[text_cells] = parsed.to_numpy()
            plain[text_cells] = (parsed.notna().to_numpy() | spelled_nan) & ~with_groups
            grouped[text_cells] = with_groups
        not_number = text_cells & ~plain & ~grouped
        comma = not_number & masks["stripped"].str.contains(",", regex=False).to_numpy()
        self.report(comma, raw, lambda v: f"{_show(v)} is not a number",
                    "use a point as the decimal separator and no thousands separators (12.5, 1200)")
        self.report(not_number & ~comma, raw, lambda v: f"{_show(v)} is not a number",
                    f"enter a number{unit}, without units or other text")
        array = numbers.to_numpy()
        finite = np.isfinite(array)
        self.report(plain & finite, raw, lambda v: f"{_show(v)} is a number stored as text; read as "
                    f"{_show(float(v.strip()))}", "format the cell as a number to silence this warning",
                    severity="warning")
        self.report(grouped & finite, raw, lambda v: f"{_show(v)} is a number stored as text with thousands "
                    f"separators; read as {_show(float(v.strip().replace(',', '')))}",
                    "type the number without separators, in a cell formatted as a number", severity="warning")

        kinds = masks["bool"].to_numpy(), masks["date"].to_numpy()
        self.report(kinds[0], raw, lambda v: f"{_show(v)} is a yes/no value, not a number",
                    f"enter a number{unit} in the cell")
        self.report(kinds[1], raw, lambda v: f"{_show(v)} is a date or time, not a number",
                    "format the cell as a number; the spreadsheet program may have turned the entry into a date")
        blank = masks["blank"].to_numpy()
        other = ~(masks["number"].to_numpy() | masks["str"].to_numpy() | kinds[0] | kinds[1] | blank | invalid)
        self.report(other, raw, lambda v: f"{_show(v)} is not a number", f"enter a number{unit} in the cell")
        invalid |= not_number | kinds[0] | kinds[1] | other

        read = ~invalid & ~blank
        non_finite = read & ~finite
        self.report(non_finite, raw, lambda v: f"{_show(v)} is not a finite number",
                    "enter an ordinary number; leave the cell blank where blank means no limit or the default")
        invalid |= non_finite
        read &= ~non_finite
        with np.errstate(invalid="ignore"):
            low = read & (array < col.minimum) if col.minimum is not None else np.zeros(len(raw), dtype=bool)
            high = read & (array > col.maximum) if col.maximum is not None else np.zeros(len(raw), dtype=bool)
        if col.maximum is not None:
            ranged = f"from {_show(float(col.minimum))} to {_show(float(col.maximum))}"
            hint = (f"{col.name} is in decimal {col.unit}; check that latitude and longitude are not swapped"
                    if col.name in ("latitude", "longitude") else f"enter a value {ranged}")
            self.report(low | high, raw, lambda v: f"{_show(_as_number(v))} is outside the range {ranged} "
                        f"for {col.name}", hint, value=lambda pos: float(array[pos]))
        elif col.minimum is not None:
            self.report(low, raw, lambda v: f"{_show(_as_number(v))} is negative; {col.name} must be "
                        f"{_show(float(col.minimum))} or more", "enter 0 or a positive number",
                        value=lambda pos: float(array[pos]))
        invalid |= low | high

        if col.required:
            self.report(blank, raw, f"{col.name} is blank", f"enter the {col.name}{unit}")
            invalid |= blank
        else:
            fill = math.inf if col.name in _BLANK_MEANS_NO_LIMIT else (
                math.nan if col.default is None else float(col.default))
            array = np.where(blank, fill, array)
        return pd.Series(array, index=raw.index, dtype=float)

    def _flag(self, raw, masks, invalid):
        col = self.col
        words = masks["stripped"].str.lower()
        numbers_as_words = _number_text(raw[masks["number"]]) if masks["number"].any() else None
        if numbers_as_words is not None:
            words[masks["number"]] = numbers_as_words
        if col.default is None:
            # Contract v2 flags whose blank takes a Settings default (single_source): blank stays None here.
            values = pd.Series(None, index=raw.index, dtype=object)
        else:
            values = pd.Series(bool(col.default), index=raw.index, dtype=bool)
        yes = words.isin(contract.YES) | (masks["bool"] & raw.eq(True))
        no = words.isin(contract.NO) | (masks["bool"] & raw.eq(False))
        values[yes & ~masks["blank"]] = True
        values[no & ~masks["blank"]] = False
        wrong = (~(yes | no | masks["blank"]) & ~pd.Series(invalid, index=raw.index)).to_numpy()
        blank_means = ("the Settings default" if col.default is None else "yes" if col.default else "no")
        self.report(wrong, raw, lambda v: f"{_show(v)} is not yes or no",
                    f"write yes or no; blank means {blank_means}")
        invalid |= wrong
        return values

    def _choice(self, raw, masks, invalid):
        """A contract v2 choice column (``status``): one of ``col.choices``, any case; blank stays ``""``."""
        col = self.col
        words = masks["stripped"].str.lower()
        values = pd.Series("", index=raw.index, dtype=object)
        ok = masks["str"] & words.isin(col.choices)
        values[ok] = words[ok]
        wrong = (~(ok | masks["blank"]) & ~pd.Series(invalid, index=raw.index)).to_numpy()
        choices = {c: c for c in col.choices}

        def hint(v):
            near = _did_you_mean(str(v), choices, cutoff=0.5)
            return (f"did you mean '{near}'? " if near else "") + f"write one of {', '.join(col.choices)}, or leave it blank"

        self.report(wrong, raw, lambda v: f"{_show(v)} is not one of {', '.join(col.choices)}", hint)
        invalid |= wrong
        return values

    def _text(self, raw, masks):
        values = pd.Series("" if self.col.default is None else str(self.col.default), index=raw.index, dtype=object)
        values[masks["str"] & ~masks["blank"]] = masks["stripped"][masks["str"] & ~masks["blank"]]
        if masks["number"].any():
            values[masks["number"]] = _number_text(raw[masks["number"]])
        other = masks["bool"] | masks["date"]
        if other.any():
            values[other] = raw[other].map(lambda v: _show(v).strip("'"))
        return values


def _read_table(spec: Sheet, sheet: RawSheet | None, found: _Findings, data: pd.DataFrame | None = None) -> _Table:
    """Parse a sheet's contract columns; ``data`` (records by column position) replaces ``sheet.rows[1:]`` when
    given, so a lanes file read straight into a frame goes through the same checks as a sheet."""
    table = _Table(spec)
    if sheet is None:
        table.complete = not spec.required
        return table
    table.sheet_name = sheet.name
    index_of, table.headers, table.complete = _match_headers(spec, sheet, found)
    table.raw_header = list(sheet.rows[0]) if sheet.rows else []

    if data is None:
        data = pd.DataFrame(sheet.rows[1:], dtype=object) if len(sheet.rows) > 1 else pd.DataFrame(dtype=object)
    n_rows = len(data)
    raw_cols: dict[str, pd.Series] = {}
    bad_cols: dict[str, np.ndarray] = {}
    for name, index in index_of.items():
        raw_cols[name] = data[index] if index in data.columns else pd.Series([""] * n_rows, dtype=object)
        bad_cols[name] = np.zeros(n_rows, dtype=bool)
    column_of_index = {index: name for name, index in index_of.items()}
    bad_found: list[tuple[int, str, str]] = []
    for (row, col), text in sheet.bad_cells.items():
        name = column_of_index.get(col - 1)
        if name is not None and 2 <= row <= n_rows + 1:
            bad_cols[name][row - 2] = True
            bad_found.append((row, name, text))

    # A row is a record when any contract column in it holds something (a value or a bad cell).
    filled = np.zeros(n_rows, dtype=bool)
    masks_of: dict[str, dict[str, pd.Series]] = {}
    for name, values in raw_cols.items():
        masks_of[name] = _type_masks(values)
        filled |= ~masks_of[name]["blank"].to_numpy() | bad_cols[name]
    keep = np.flatnonzero(filled)
    every_row = len(keep) == n_rows
    table.rows = keep + 2

    for row, name, text in sorted(bad_found):
        is_formula = text.endswith("has no saved value")
        found.add(sheet.name, row, table.headers[name], text,
                  f"the cell's {text}" if is_formula else f"the cell holds the error value {text}",
                  _FORMULA_HINT if is_formula else _ERROR_VALUE_HINT)

    for col in spec.columns:
        if col.name not in raw_cols:
            table.values[col.name] = None
            table.invalid[col.name] = np.ones(len(keep), dtype=bool)
            continue
        raw, bad, masks = raw_cols[col.name], bad_cols[col.name], masks_of[col.name]
        if not every_row:
            raw, bad = raw.iloc[keep].reset_index(drop=True), bad[keep]
            masks = {key: mask.iloc[keep].reset_index(drop=True) for key, mask in masks.items()}
        parser = _ColumnParser(table, col, found)
        table.values[col.name], table.invalid[col.name] = parser.parse(raw, bad, masks)
    return table


# ----------------------------------------------------------------------------------------------------------------
# settings


def _read_settings(sheet: RawSheet | None, found: _Findings) -> Settings:
    settings = Settings()
    if sheet is None:
        return settings
    spec = contract.SETTINGS
    index_of, headers, complete = _match_headers(spec, sheet, found)
    if not complete:
        return settings
    name_at, value_at = index_of["setting"], index_of["value"]
    known = {s.name: s.name for s in contract.SETTINGS_ROWS}
    seen: dict[str, int] = {}
    bad = sheet.bad_cells
    for offset, cells in enumerate(sheet.rows[1:]):
        row = offset + 2
        name_cell = cells[name_at] if name_at < len(cells) else ""
        value_cell = cells[value_at] if value_at < len(cells) else ""
        name_bad, value_bad = bad.get((row, name_at + 1)), bad.get((row, value_at + 1))
        for text, at in ((name_bad, name_at), (value_bad, value_at)):
            if text:
                is_formula = text.endswith("has no saved value")
                found.add(sheet.name, row, headers["setting" if at == name_at else "value"], text,
                          f"the cell's {text}" if is_formula else f"the cell holds the error value {text}",
                          _FORMULA_HINT if is_formula else _ERROR_VALUE_HINT)
        if name_bad:
            continue
        name_blank = _is_blank(name_cell)
        if name_blank:
            if not _is_blank(value_cell):
                found.add(sheet.name, row, headers["setting"], None,
                          f"the value {_show(value_cell)} has no setting name",
                          "write the setting's name in column 'setting', or delete the row")
            continue
        written = _header_text(name_cell)
        try:
            setting = contract.setting_by_name(written)
        except KeyError:
            near = _did_you_mean(written, known)
            found.add(sheet.name, row, headers["setting"], name_cell, f"unknown setting {_show(written)} is ignored",
                      f"did you mean '{near}'?" if near else
                      "known settings: " + ", ".join(s.name for s in contract.SETTINGS_ROWS), severity="warning")
            continue
        if setting.name in seen:
            found.add(sheet.name, row, headers["setting"], name_cell,
                      f"setting '{setting.name}' is already given in row {seen[setting.name]}",
                      "keep one row per setting")
            continue
        seen[setting.name] = row
        if value_bad:
            continue
        value = _setting_value(setting, value_cell, sheet.name, row, headers["value"], found)
        if value is not _INVALID:
            setattr(settings, setting.name, value)
    return settings


_INVALID = object()


def _is_blank(cell) -> bool:
    return cell is None or (isinstance(cell, str) and not cell.strip()) or (
        isinstance(cell, float) and math.isnan(cell))


def _setting_value(setting: contract.Setting, cell, sheet_name, row, column, found: _Findings):
    if _is_blank(cell):
        return setting.default
    if setting.kind in (FLAG, CHOICE):
        word = (_header_text(cell) if not isinstance(cell, bool) else ("yes" if cell else "no")).lower()
        if setting.kind == FLAG and (word in contract.YES or word in contract.NO):
            return word in contract.YES
        if setting.kind == CHOICE and word in setting.choices:
            return word
        allowed = "yes or no" if setting.kind == FLAG else "one of " + ", ".join(setting.choices)
        found.add(sheet_name, row, column, cell, f"{_show(cell)} is not {allowed} for setting '{setting.name}'",
                  f"write {allowed}, or leave it blank for the default")
        return _INVALID
    if setting.kind == TEXT:
        if isinstance(cell, float) and cell.is_integer():
            return str(int(cell))
        return _show(cell).strip("'") if not isinstance(cell, str) else cell.strip()
    # A number setting. The value column holds text and numbers alike, so text that parses is accepted quietly.
    if isinstance(cell, bool) or isinstance(cell, _DATE_TYPES):
        found.add(sheet_name, row, column, cell, f"{_show(cell)} is not a number; setting '{setting.name}' "
                  f"needs a number{' (' + setting.unit + ')' if setting.unit else ''}", "enter a number in the cell")
        return _INVALID
    try:
        number = float(cell.strip() if isinstance(cell, str) else cell)
    except (TypeError, ValueError):
        found.add(sheet_name, row, column, cell, f"{_show(cell)} is not a number; setting '{setting.name}' "
                  f"needs a number{' (' + setting.unit + ')' if setting.unit else ''}",
                  "enter a number with a point for decimals, or leave it blank for the default")
        return _INVALID
    if not math.isfinite(number):
        found.add(sheet_name, row, column, cell, f"{_show(cell)} is not a finite number",
                  f"enter an ordinary number for '{setting.name}', or leave it blank for the default")
        return _INVALID
    if setting.minimum is not None and number < setting.minimum:
        low = "is negative" if number < 0 else "is too small"  # circuity_factor's minimum is 1, not 0
        found.add(sheet_name, row, column, cell, f"{_show(cell)} {low}; '{setting.name}' must be "
                  f"{_show(float(setting.minimum))} or more",
                  "enter 0 or a positive number" if setting.minimum == 0 else
                  f"enter {_show(float(setting.minimum))} or more")
        return _INVALID
    return number


# ----------------------------------------------------------------------------------------------------------------
# ids and lanes


def _check_node_ids(tables: dict[str, _Table], found: _Findings) -> set[str] | None:
    """Report duplicate ids within and across node sheets; return every node id, or None if a sheet is unreadable."""
    seen_frames = []
    for spec in contract.NODE_SHEETS:
        table = tables[spec.name]
        if table.values.get(spec.id_column) is None:
            continue
        ids = table.values[spec.id_column]
        usable = ~table.invalid[spec.id_column]
        frame = pd.DataFrame({"id": ids[usable].to_numpy(), "row": table.rows[usable], "pos": np.flatnonzero(usable)})
        dup = frame["id"].duplicated(keep="first").to_numpy()
        if dup.any():
            first_row = frame.drop_duplicates("id").set_index("id")["row"]
            label = table.column_label(spec.id_column)
            for record in frame[dup].itertuples(index=False):
                found.add(table.sheet_name, record.row, label, record.id,
                          f"{spec.id_column} '{record.id}' is already used in row {first_row[record.id]}",
                          f"give each {spec.id_column} its own id, or delete the repeated row")
                table.invalid[spec.id_column][record.pos] = True
        frame = frame[~dup].assign(sheet=spec.name)
        seen_frames.append(frame)

    if seen_frames:
        everything = pd.concat(seen_frames, ignore_index=True)
        twice = everything["id"].duplicated(keep="first").to_numpy()
        if twice.any():
            first = everything.drop_duplicates("id").set_index("id")
            for record in everything[twice].itertuples(index=False):
                other_sheet = tables[first.loc[record.id, "sheet"]]
                spec = tables[record.sheet].spec
                table = tables[record.sheet]
                found.add(table.sheet_name, record.row, table.column_label(spec.id_column), record.id,
                          f"id '{record.id}' is also a {_NODE_KIND[other_sheet.spec.name]} "
                          f"({other_sheet.sheet_name} row {first.loc[record.id, 'row']}); ids must be unique "
                          f"across Depots, Customers and Hubs",
                          "rename one of them: lanes name places by id")
                table.invalid[spec.id_column][record.pos] = True
        node_ids = set(everything["id"].tolist())
    else:
        node_ids = set()
    if not all(tables[spec.name].complete for spec in contract.NODE_SHEETS):
        return None  # some ids could not be read: unknown-id errors on lanes would be noise
    return node_ids


def _check_lanes(lanes: _Table, node_ids: set[str] | None, found: _Findings) -> None:
    if lanes.sheet_name is None or len(lanes) == 0:
        return
    origin, destination = lanes.values.get("origin"), lanes.values.get("destination")
    if origin is None or destination is None:
        return
    ok_origin, ok_destination = ~lanes.invalid["origin"], ~lanes.invalid["destination"]
    if node_ids is not None:
        suggest = _IdSuggester(node_ids)
        for name, values, ok in (("origin", origin, ok_origin), ("destination", destination, ok_destination)):
            unknown = ok & ~values.isin(node_ids).to_numpy()
            for pos in np.flatnonzero(unknown):
                value = values.iloc[pos]
                near = suggest(value)
                found.add(*lanes.where(pos, name), value,
                          f"'{value}' is not a depot, hub or customer",
                          f"did you mean '{near}'?" if near else
                          "add it to Depots, Customers or Hubs, or correct the id")
            lanes.invalid[name] |= unknown
            ok &= ~unknown
    both = ok_origin & ok_destination
    loop = both & (origin == destination).to_numpy()
    for pos in np.flatnonzero(loop):
        found.add(*lanes.where(pos, "origin"), origin.iloc[pos],
                  f"origin and destination are both '{origin.iloc[pos]}'",
                  "a lane joins two different places: correct one end or delete the row")
    mode = lanes.values.get("mode")
    mode = mode if mode is not None else pd.Series("", index=origin.index, dtype=object)
    keyed = pd.DataFrame({"origin": origin, "destination": destination, "mode": mode, "row": lanes.rows,
                          "pos": np.arange(len(lanes)), "sheet": lanes.sheet_names()})[both & ~loop]
    dup = keyed.duplicated(["origin", "destination", "mode"], keep="first").to_numpy()
    if dup.any():
        first = keyed.drop_duplicates(["origin", "destination", "mode"]).set_index(["origin", "destination", "mode"])
        for record in keyed[dup].itertuples(index=False):
            mode_text = f" with mode '{record.mode}'" if record.mode else " with no mode"
            earlier = first.loc[(record.origin, record.destination, record.mode)]
            # Across the Lanes sheet and the lanes file, name both places; within one, the row is enough.
            place = f"row {earlier['row']}" if earlier["sheet"] == record.sheet else \
                f"{earlier['sheet']} row {earlier['row']}"
            found.add(*lanes.where(record.pos, "origin"),
                      f"{record.origin} -> {record.destination}",
                      f"lane {record.origin} -> {record.destination}{mode_text} already appears in {place}",
                      "merge the two rows, or give them different modes")


def _check_lane_design(lanes: _Table, found: _Findings) -> None:
    """Contract v2 lane columns that only make sense together: min_volume within capacity, whole trips of a
    positive size, and a cost per trip only with a trip capacity."""
    if lanes.sheet_name is None or len(lanes) == 0:
        return
    values, invalid = lanes.values, lanes.invalid

    def usable(name):
        series = values.get(name)
        if series is None:
            return None, np.zeros(len(lanes), dtype=bool)
        return series.to_numpy(dtype=float), ~invalid[name]

    minimum, ok_min = usable("min_volume")
    capacity, ok_cap = usable("capacity")
    trip_cap, ok_trip = usable("trip_capacity")
    trip_cost, ok_cost = usable("cost_per_trip")
    if minimum is not None and capacity is not None:
        for pos in np.flatnonzero(ok_min & ok_cap & (minimum > capacity)):
            found.add(*lanes.where(pos, "min_volume"), float(minimum[pos]),
                      f"min_volume {_show(float(minimum[pos]))} is more than the lane's capacity "
                      f"{_show(float(capacity[pos]))}, so the lane could never be used",
                      "lower min_volume or raise capacity")
    if trip_cap is not None:
        for pos in np.flatnonzero(ok_trip & (trip_cap <= 0)):
            found.add(*lanes.where(pos, "trip_capacity"), float(trip_cap[pos]),
                      "trip_capacity is 0, so no trip could carry anything",
                      "enter the units one trip carries, or leave it blank if the lane is not run in trips")
    if trip_cost is not None:
        no_trips = ~np.isfinite(trip_cap) if trip_cap is not None else np.ones(len(lanes), dtype=bool)
        for pos in np.flatnonzero(ok_cost & (trip_cost > 0) & no_trips & (ok_trip if trip_cap is not None else True)):
            found.add(*lanes.where(pos, "cost_per_trip"), float(trip_cost[pos]),
                      "cost_per_trip is given but trip_capacity is blank",
                      "enter trip_capacity (units per trip), or clear cost_per_trip")


def _check_lane_costs(lanes: _Table, settings: Settings, found: _Findings) -> None:
    """Without Settings rate_per_distance every lane needs its cost_per_unit: name each blank one (the column
    itself missing is reported by :func:`_require_cost_column`)."""
    cost = lanes.values.get("cost_per_unit")
    if settings.rate_per_distance is not None or cost is None or len(lanes) == 0:
        return
    blank = np.isnan(cost.to_numpy(dtype=float)) & ~lanes.invalid["cost_per_unit"]
    for pos in np.flatnonzero(blank):
        found.add(*lanes.where(pos, "cost_per_unit"), None, "cost_per_unit is blank",
                  "fill in cost_per_unit (currency per unit), or add a Settings row rate_per_distance so blank "
                  "costs are computed from distance")


def _require_cost_column(table: _Table, settings: Settings, found: _Findings) -> None:
    """cost_per_unit is optional in the contract only because a rate can stand in for it: without
    rate_per_distance a lanes sheet or file lacking the column is an error, as for any required column."""
    if table.sheet_name is None or table.values.get("cost_per_unit") is not None or \
            settings.rate_per_distance is not None:
        return
    unmatched = {contract.normalize(h): _header_text(h) for h in table.raw_header
                 if contract.normalize(h) and contract.normalize(h) not in {c.name for c in table.spec.columns}}
    near = _did_you_mean("cost_per_unit", unmatched, cutoff=0.75)
    found.add(table.sheet_name, 1, "cost_per_unit", None, "required column 'cost_per_unit' is missing",
              f"did you mean '{near}'? Rename that header to 'cost_per_unit'" if near else
              "add a column headed 'cost_per_unit' in row 1, or add a Settings row rate_per_distance so costs are "
              "computed from distance")
    table.complete = False


def _costs_from_distance(frames: dict[str, pd.DataFrame], table: _Table, settings: Settings,
                         found: _Findings) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Fill blank lane costs from distance (:func:`lanesolve.read.geo.lane_costs_from_distance`, vectorised) for the
    lanes whose cells are otherwise usable; problems (a node without coordinates) join ``found``.

    Returns the lanes frame and its :attr:`~lanesolve.model.network.Network.lane_sources`."""
    lanes = frames[contract.LANES.name]
    distance = table.values.get("distance")
    sources = pd.DataFrame({
        "distance": (distance.to_numpy(dtype=float) if distance is not None else np.full(len(lanes), math.nan)),
        "cost_source": geo.COST_GIVEN, "sheet": table.sheet_names()}, index=lanes.index)[LANE_SOURCE_COLUMNS]
    if settings.rate_per_distance is None or len(lanes) == 0:
        return lanes, sources
    usable = lanes["cost_per_unit"].isna().to_numpy().copy()
    for name in ("cost_per_unit", "origin", "destination", "distance"):
        if table.values.get(name) is not None:
            usable &= ~table.invalid[name]  # already reported: computing a cost from it would only add noise
    if not usable.any():
        return lanes, sources
    nodes = pd.concat([frames[name][["id", "latitude", "longitude"]]
                       for name in (contract.DEPOTS.name, contract.CUSTOMERS.name, contract.HUBS.name)],
                      ignore_index=True).drop_duplicates("id")
    subset = pd.concat([lanes[["origin", "destination", "cost_per_unit", "row"]], sources[["distance", "sheet"]]],
                       axis=1)[usable]
    filled, problems = geo.lane_costs_from_distance(subset, nodes, float(settings.rate_per_distance),
                                                    settings.distance_unit, float(settings.circuity_factor))
    for problem in problems:
        found.add(problem.sheet, problem.row, problem.column, problem.value, problem.message, problem.hint,
                  problem.severity)
    lanes = lanes.copy()
    lanes.loc[usable, "cost_per_unit"] = filled["cost_per_unit"].to_numpy()
    sources.loc[usable, "distance"] = filled["distance"].to_numpy()
    sources.loc[usable, "cost_source"] = filled["cost_source"].to_numpy()
    return lanes, sources


def _with_lanes_file(sheet_table: _Table, workbook_path: str, settings: Settings, found: _Findings) -> _Table:
    """The Lanes sheet's records followed by the lanes file's, checked by the same column parsers."""
    try:
        cells = lanes_file.read_lanes_file(workbook_path, settings.lanes_file)
    except WorkbookError as exc:
        found.extend(exc.problems)
        return sheet_table
    raw = RawSheet(cells.label, [cells.header])
    file_table = _read_table(contract.LANES, raw, found, data=cells.data)
    _require_cost_column(file_table, settings, found)
    if sheet_table.sheet_name is None:
        return file_table
    return _concat_tables(sheet_table, file_table)


def _concat_tables(first: _Table, second: _Table) -> _Table:
    """One table of both tables' records; a column absent from one of them takes its contract default there."""
    spec = first.spec
    merged = _Table(spec, sheet_name=first.sheet_name, headers=dict(first.headers),
                    rows=np.concatenate([first.rows, second.rows]),
                    complete=first.complete and second.complete)
    merged.sources = np.concatenate([np.full(len(first), first.sheet_name, dtype=object),
                                     np.full(len(second), second.sheet_name, dtype=object)])
    merged.source_headers = {first.sheet_name: first.headers, second.sheet_name: second.headers}
    for col in spec.columns:
        parts = [table.values.get(col.name) for table in (first, second)]
        if all(part is None for part in parts):
            merged.values[col.name] = None
            merged.invalid[col.name] = np.ones(len(merged), dtype=bool)
            continue
        values, invalid = [], []
        for table, part in zip((first, second), parts):
            if part is None:
                part = _default_values(col, len(table))
                bad = np.zeros(len(table), dtype=bool)
            else:
                bad = table.invalid[col.name]
            values.append(part.reset_index(drop=True))
            invalid.append(bad)
        merged.values[col.name] = pd.concat(values, ignore_index=True)
        merged.invalid[col.name] = np.concatenate(invalid)
    return merged


def _default_values(col: Column, n: int) -> pd.Series:
    """What a blank cell of ``col`` parses to, for ``n`` records (as :meth:`_ColumnParser.parse` fills blanks)."""
    if col.kind == NUMBER:
        fill = math.inf if col.name in _BLANK_MEANS_NO_LIMIT else (
            math.nan if col.default is None else float(col.default))
        return pd.Series(np.full(n, fill), dtype=float)
    if col.kind == FLAG:
        return (pd.Series([None] * n, dtype=object) if col.default is None
                else pd.Series(np.full(n, bool(col.default)), dtype=bool))
    return pd.Series([col.default if col.default is not None else ""] * n, dtype=object)


class _IdSuggester:
    """Did-you-mean over node ids: an exact case-insensitive match first, then difflib within a budget."""

    def __init__(self, ids: set[str]):
        self.ids = sorted(ids)
        self.folded = {i.casefold(): i for i in self.ids}
        self.cache: dict[str, str | None] = {}
        self.spent = 0

    def __call__(self, value: str) -> str | None:
        if value in self.cache:
            return self.cache[value]
        near = self.folded.get(" ".join(value.split()).casefold())
        if near is None and self.spent + len(self.ids) <= _SUGGEST_BUDGET:
            self.spent += len(self.ids)
            close = difflib.get_close_matches(value, self.ids, n=1, cutoff=0.6)
            near = close[0] if close else None
        self.cache[value] = near
        return near


# ----------------------------------------------------------------------------------------------------------------
# building the network


def _network_frame(table: _Table, settings: Settings) -> pd.DataFrame:
    columns = _NETWORK_COLUMNS[table.spec.name]
    data: dict[str, object] = {}
    n = len(table)
    for col in table.spec.columns:
        target = "id" if col.name == table.spec.id_column else col.name
        if target not in columns:
            continue
        values = table.values.get(col.name)
        if values is None:  # optional column absent from the sheet (or the sheet absent)
            if col.kind == NUMBER:
                fill = math.inf if col.name in _BLANK_MEANS_NO_LIMIT else (
                    math.nan if col.default is None else float(col.default))
                values = pd.Series(np.full(n, fill), dtype=float)
            elif col.kind == FLAG:
                values = (pd.Series([None] * n, dtype=object) if col.default is None
                          else pd.Series(np.full(n, bool(col.default)), dtype=bool))
            else:
                values = pd.Series([col.default if col.default is not None else ""] * n, dtype=object)
        data[target] = values.reset_index(drop=True)
    frame = pd.DataFrame(data, index=pd.RangeIndex(n))
    frame["row"] = pd.Series(table.rows, dtype=int)
    if "unmet_penalty" in frame and settings.unmet_penalty is not None:
        frame["unmet_penalty"] = frame["unmet_penalty"].fillna(float(settings.unmet_penalty))
    if "single_source" in frame:
        frame["single_source"] = frame["single_source"].where(frame["single_source"].notna(),
                                                              bool(settings.single_source))
    if "status" in frame:
        frame["status"] = resolve_status(frame["status"], frame["fixed_cost"])
    frame = frame[columns]
    for name in columns:
        if name in TEXT_COLUMNS:
            frame[name] = frame[name].astype(object)
        elif name in BOOL_COLUMNS:
            frame[name] = frame[name].astype(bool)
        elif name == "row":
            frame[name] = frame[name].astype(int)
        else:
            frame[name] = frame[name].astype(float)
    return frame.reset_index(drop=True)
