"""Sheet lookup, header matching and reading one input sheet into a :class:`Table` of parsed columns."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.contract import Sheet
from lanesolve.read.cells import ColumnParser, default_values, type_masks
from lanesolve.read.findings import ERROR_VALUE_HINT, FORMULA_HINT, Findings, did_you_mean, header_text, is_blank
from lanesolve.read.reader import RawSheet, RawWorkbook


def match_sheets(raw: RawWorkbook, found: Findings, deferred: tuple[str, ...] = ()) -> dict[str, RawSheet]:
    """Contract sheet name -> the workbook's sheet of that name (case and spacing ignored).

    A missing required sheet is reported here unless its name is in ``deferred`` (the caller decides later, see
    :func:`report_missing_sheet`).
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
                report_missing_sheet(spec, raw, found)
            continue
        sheet = candidates[0]
        if not spec.required and not any(not is_blank(cell) for row in sheet.rows for cell in row) \
                and not sheet.bad_cells:
            continue  # an optional sheet left completely empty counts as absent
        if sheet.hidden:
            found.add(sheet.name, None, None, None, "this sheet is hidden; it is read all the same",
                      "unhide it to review what lanesolve reads", severity="warning")
        matched[spec.name] = sheet
    return matched


def report_missing_sheet(spec: Sheet, raw: RawWorkbook, found: Findings) -> None:
    contract_norms = {contract.normalize(s.name) for s in contract.INPUT_SHEETS}
    spare = {contract.normalize(s.name): s.name for s in raw.sheets.values()
             if contract.normalize(s.name) not in contract_norms}
    near = did_you_mean(spec.name, spare)
    hint = (f"did you mean sheet '{near}'? Rename it to '{spec.name}'" if near else
            f"add a sheet named '{spec.name}' with its headers in row 1")
    if spec is contract.LANES:
        hint += ", or name a CSV or Parquet file of lanes in the Settings row lanes_file"
    found.add(spec.name, None, None, None, f"the workbook has no sheet named '{spec.name}'", hint)


@dataclass
class Table:
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



def match_headers(spec: Sheet, sheet: RawSheet, found: Findings) -> tuple[dict[str, int], dict[str, str], bool]:
    """Find each contract column's position in row 1; report missing, duplicate and near-miss headers."""
    header_row = sheet.rows[0] if sheet.rows else []
    positions: dict[str, list[int]] = {}
    for index, cell in enumerate(header_row):
        positions.setdefault(contract.normalize(cell), []).append(index)
    known = {col.name for col in spec.columns}
    unmatched = {contract.normalize(h): header_text(h) for h in header_row
                 if contract.normalize(h) and contract.normalize(h) not in known}

    index_of: dict[str, int] = {}
    written: dict[str, str] = {}
    complete = True
    for col in spec.columns:
        where = positions.get(col.name, [])
        if len(where) > 1:
            letters = ", ".join(column_letters(i + 1) for i in where)
            found.add(sheet.name, 1, header_text(header_row[where[1]]), header_text(header_row[where[1]]),
                      f"column '{col.name}' appears more than once (columns {letters})",
                      "keep one column with this header and rename or delete the others")
            complete = complete and not col.required
            continue
        if not where:
            near = did_you_mean(col.name, unmatched, cutoff=0.75)
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
        written[col.name] = header_text(header_row[where[0]])
    return index_of, written, complete


def column_letters(number: int) -> str:
    letters = ""
    while number:
        number, rest = divmod(number - 1, 26)
        letters = chr(65 + rest) + letters
    return letters


def read_table(spec: Sheet, sheet: RawSheet | None, found: Findings, data: pd.DataFrame | None = None) -> Table:
    """Parse a sheet's contract columns; ``data`` (records by column position) replaces ``sheet.rows[1:]`` when
    given, so a lanes file read straight into a frame goes through the same checks as a sheet."""
    table = Table(spec)
    if sheet is None:
        table.complete = not spec.required
        return table
    table.sheet_name = sheet.name
    index_of, table.headers, table.complete = match_headers(spec, sheet, found)
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
        masks_of[name] = type_masks(values)
        filled |= ~masks_of[name]["blank"].to_numpy() | bad_cols[name]
    keep = np.flatnonzero(filled)
    every_row = len(keep) == n_rows
    table.rows = keep + 2

    for row, name, text in sorted(bad_found):
        is_formula = text.endswith("has no saved value")
        found.add(sheet.name, row, table.headers[name], text,
                  f"the cell's {text}" if is_formula else f"the cell holds the error value {text}",
                  FORMULA_HINT if is_formula else ERROR_VALUE_HINT)

    for col in spec.columns:
        if col.name not in raw_cols:
            table.values[col.name] = None
            table.invalid[col.name] = np.ones(len(keep), dtype=bool)
            continue
        raw, bad, masks = raw_cols[col.name], bad_cols[col.name], masks_of[col.name]
        if not every_row:
            raw, bad = raw.iloc[keep].reset_index(drop=True), bad[keep]
            masks = {key: mask.iloc[keep].reset_index(drop=True) for key, mask in masks.items()}
        parser = ColumnParser(table, col, found)
        table.values[col.name], table.invalid[col.name] = parser.parse(raw, bad, masks)
    return table



def concat_tables(first: Table, second: Table) -> Table:
    """One table of both tables' records; a column absent from one of them takes its contract default there."""
    spec = first.spec
    merged = Table(spec, sheet_name=first.sheet_name, headers=dict(first.headers),
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
                part = default_values(col, len(table))
                bad = np.zeros(len(table), dtype=bool)
            else:
                bad = table.invalid[col.name]
            values.append(part.reset_index(drop=True))
            invalid.append(bad)
        merged.values[col.name] = pd.concat(values, ignore_index=True)
        merged.invalid[col.name] = np.concatenate(invalid)
    return merged

