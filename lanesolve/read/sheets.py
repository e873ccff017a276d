"""Sheet lookup, header matching and reading one input sheet into a :class:`Table` of parsed columns."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from operator import itemgetter

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.contract import Sheet
from lanesolve.read.cells import ColumnParser, default_values, type_masks
from lanesolve.read.findings import ERROR_VALUE_HINT, FORMULA_HINT, Findings, did_you_mean, header_text, is_blank, show
from lanesolve.read.reader import RawSheet, RawWorkbook
from lanesolve.read.sheet_xml import column_letters


def match_sheets(raw: RawWorkbook, found: Findings, deferred: tuple[str, ...] = ()) -> dict[str, RawSheet]:
    """Contract sheet name -> the workbook's sheet of that name (case and spacing ignored).

    A missing required sheet is reported here unless its name is in ``deferred`` (the caller decides later, see
    :func:`report_missing_sheet`). Two sheets that both mean one contract sheet (``Lanes`` and ``LANES ``, or
    ``Lanes`` and its copy ``Lanes (2)``) are an error naming both, and so is a sheet that looks like an optional
    contract sheet the workbook lacks (``Hub``): read as named it would be ignored. The Scenarios sheet is checked
    the same way, though it is read later.
    """
    names = raw.names()
    matched: dict[str, RawSheet] = {}
    for spec_name, spec in [(s.name, s) for s in contract.INPUT_SHEETS] + [(contract.SCENARIOS_SHEET, None)]:
        exact = [n for n in names if contract.normalize(n) == contract.normalize(spec_name)]
        alike = [n for n in names if n not in exact and not contract.is_read_sheet(n)
                 and contract.resemblance(n, contract.normalize(spec_name)) > 0]
        if len(exact) > 1:
            listed = " and ".join(f"'{n}'" for n in exact)
            found.add(exact[1], None, None, exact[1], f"two sheets, {listed}, both count as the {spec_name} sheet",
                      "rename or delete one of them")
            continue
        if exact and alike:
            for other in alike:
                found.add(other, None, None, other,
                          f"sheets '{exact[0]}' and '{other}' both look like the {spec_name} sheet; lanesolve would "
                          f"read '{exact[0]}' and ignore '{other}'",
                          "rename or delete the one that should not be read: give it a name unlike any lanesolve "
                          "sheet, such as 'Backup 1'")
        if not exact:
            if spec is not None and spec.required:
                if spec.name not in deferred:
                    report_missing_sheet(spec, raw, found)
            else:
                for other in alike:
                    found.add(other, None, None, other,
                              f"sheet '{other}' looks like the {spec_name} sheet, but lanesolve reads only a sheet "
                              f"named '{spec_name}'; as named it would be ignored",
                              f"rename it to '{spec_name}', or give it a name unlike any lanesolve sheet")
            continue
        if spec is None or exact[0] not in raw.sheets:
            continue
        sheet = raw.sheets[exact[0]]
        if not spec.required and not any(not is_blank(cell) for row in sheet.rows for cell in row) \
                and not sheet.bad_cells:
            continue  # an optional sheet left completely empty counts as absent
        if sheet.hidden:
            found.add(sheet.name, None, None, None, "this sheet is hidden; it is read all the same",
                      "unhide it to review what lanesolve reads", severity="warning")
        matched[spec.name] = sheet
    return matched


def report_missing_sheet(spec: Sheet, raw: RawWorkbook, found: Findings) -> None:
    spare = {contract.normalize(n): n for n in raw.names() if not contract.is_read_sheet(n)}
    alike = [n for n in spare.values() if contract.resemblance(n, contract.normalize(spec.name)) > 0]
    near = alike[0] if alike else did_you_mean(spec.name, spare)
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
    resembled: set[str] = field(default_factory=set)  # lacking columns a look-alike header was reported for

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



def match_headers(spec: Sheet, sheet: RawSheet, found: Findings
                  ) -> tuple[dict[str, int], dict[str, str], bool, set[str]]:
    """Find each contract column's position in row 1; report missing, duplicate and look-alike headers.

    A header that is not a contract column but resembles one the sheet lacks (:func:`lanesolve.contract.resemblance`:
    ``Capacity (pallets)``, ``Active?``, ``Unit cost``, ``capcity``) is an error at its cell: read as written it would
    be ignored and the column's default used in its place, which is exactly the silent misreading to avoid. Headers
    that resemble no lacking column are notes: allowed and ignored.

    Returns
    -------
    index_of : dict
        Contract column -> 0-based position in row 1.
    written : dict
        Contract column -> the header as written.
    complete : bool
        False when a required column is missing (or taken by a look-alike or duplicate header).
    resembled : set of str
        Contract columns the sheet lacks for which a look-alike header was reported.
    """
    header_row = sheet.rows[0] if sheet.rows else []
    positions: dict[str, list[int]] = {}
    for index, cell in enumerate(header_row):
        positions.setdefault(contract.normalize(cell), []).append(index)
    known = {col.name for col in spec.columns}

    index_of: dict[str, int] = {}
    written: dict[str, str] = {}
    complete = True
    lacking = []
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
            lacking.append(col)
            continue
        index_of[col.name] = where[0]
        written[col.name] = header_text(header_row[where[0]])

    resembled: set[str] = set()
    for index, cell in enumerate(header_row):
        if not contract.normalize(cell) or contract.normalize(cell) in known:
            continue
        text, cell_ref = header_text(cell), f"{column_letters(index + 1)}1"
        twin = next((name for name in index_of if contract.header_key(cell) == name), None)
        if twin is not None:  # "Capacity (pallets)" beside "capacity": a second copy, not a lacking column
            found.add(sheet.name, 1, text, text,
                      f"header {show(text)} in cell {cell_ref} looks like '{twin}', which is read from cell "
                      f"{column_letters(index_of[twin] + 1)}1; this column is ignored",
                      "delete one of the two columns, or rename this one to something unlike any lanesolve column",
                      severity="warning")
            continue
        score, col = max(((contract.resemblance(cell, c.name), c) for c in lacking), key=lambda pair: pair[0],
                         default=(0.0, None))
        if col is not None and score > 0:
            resembled.add(col.name)
            units = "; units belong in the Settings rows units and currency, not in headers" \
                if "(" in text or "[" in text else ""
            found.add(sheet.name, 1, text, text,
                      f"header {show(text)} in cell {cell_ref} is not a column lanesolve reads, but it looks like "
                      f"'{col.name}'{' (a required column)' if col.required else ''}, which this sheet lacks; "
                      f"as written it would be ignored",
                      f"rename the header to '{col.name}'{units}; or, if it holds something else, give it a name "
                      f"unlike any lanesolve column")
    for col in lacking:
        if col.name in resembled:
            complete = complete and not col.required
        elif col.required:
            found.add(sheet.name, 1, col.name, None, f"required column '{col.name}' is missing",
                      f"add a column headed '{col.name}' in row 1")
            complete = False
    return index_of, written, complete, resembled


def record_columns(records: list[list], positions: Iterable[int]) -> tuple[int, dict[int, pd.Series]]:
    """The number of records and, for each wanted 0-based column position the records reach, its cells as an object
    Series named by the position (as a column of ``pd.DataFrame(records, dtype=object)``).

    Rows of one length (what calamine gives for a sheet) are read a column at a time straight from the row lists:
    building the whole frame stacks every cell into one 2-D block first, about half a second at a million lanes.
    Rows of different lengths (hand-built sheets) go through the frame, which pads the short ones with None."""
    widths = set(map(len, records))
    if len(widths) > 1:
        data = pd.DataFrame(records, dtype=object)
        return len(data), {index: data[index] for index in positions if index in data.columns}
    width = widths.pop() if widths else 0
    return len(records), {index: pd.Series(np.fromiter(map(itemgetter(index), records), dtype=object,
                                                       count=len(records)), dtype=object, name=index)
                          for index in positions if index < width}


def read_table(spec: Sheet, sheet: RawSheet | None, found: Findings, data: pd.DataFrame | None = None) -> Table:
    """Parse a sheet's contract columns; ``data`` (records by column position) replaces ``sheet.rows[1:]`` when
    given, so a lanes file read straight into a frame goes through the same checks as a sheet."""
    table = Table(spec)
    if sheet is None:
        table.complete = not spec.required
        return table
    table.sheet_name = sheet.name
    index_of, table.headers, table.complete, table.resembled = match_headers(spec, sheet, found)
    table.raw_header = list(sheet.rows[0]) if sheet.rows else []

    if data is None:
        n_rows, by_position = record_columns(sheet.rows[1:], index_of.values())
    else:
        n_rows, by_position = len(data), {index: data[index] for index in index_of.values() if index in data.columns}
    raw_cols: dict[str, pd.Series] = {}
    bad_cols: dict[str, np.ndarray] = {}
    for name, index in index_of.items():
        column = by_position.pop(index, None)  # held only by raw_cols, which lets go of it once it is parsed
        raw_cols[name] = column if column is not None else pd.Series([""] * n_rows, dtype=object)
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
        # Each column's cells and masks are let go once it is parsed: at a million lanes they are tens of MB a
        # column, and fresh memory is slow to come by (the next column reuses theirs).
        raw, bad, masks = raw_cols.pop(col.name), bad_cols[col.name], masks_of.pop(col.name)
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

