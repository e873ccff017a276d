"""Stage "validate": check raw cell values against the workbook contract and build the :class:`Network`.

Every problem in the workbook is collected in one pass and reported together (nothing is capped here; the CLI
decides how many to print). Each :class:`~lanesolve.errors.Problem` names the sheet, the spreadsheet row, the column
as written in the workbook, the offending value, and a hint.

Reading rules (see :mod:`lanesolve.contract`):

- Sheet names and headers match ignoring case and surrounding spaces, with a space or hyphen counting as an
  underscore. Headers are in row 1; columns the contract does not know are ignored -- unless they look like a
  contract column the sheet lacks (units in brackets, punctuation, a synonym, a misspelling): such a header is an
  error at its cell, because ignoring it would silently put the column's default in place of what was typed
  (:func:`lanesolve.read.sheets.match_headers`). Two sheets meaning one contract sheet are an error.
- A row is skipped when every contract column in it is blank (whatever notes it carries in other columns).
- Ids are trimmed text in Unicode NFC; a number id is written without a trailing ``.0`` (101 -> ``"101"``).
- A number stored as text that can be read only one way (``" 12.5"``, ``"1e3"``) is accepted with a warning. Text
  whose separators can be read two ways (``"1.200"``, ``"1,5"``, ``"1,200"``) is an error asking for a plain
  number: guessing would silently change the value by a factor of 1000 or so.
- Numbers larger than 1e12 or non-zero and nearer zero than 1e-9 in size are errors; NaN is a value (named NaN),
  not a blank.
- TRUE/FALSE cells and dates in number columns are errors: they are almost always a formatting accident.
- Blank optional cells take the contract default; a blank capacity means no limit (``math.inf``); a blank customer
  ``unmet_penalty`` takes the Settings ``unmet_penalty`` when set, else NaN (demand is a hard requirement).

The checks work on whole columns with pandas; only the rows found wrong are visited one by one to build messages.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.contract import FLAG, NUMBER
from lanesolve.errors import Problem, WorkbookError
from lanesolve.model import scenarios
from lanesolve.model.network import (BOOL_COLUMNS, CUSTOMER_COLUMNS, DEPOT_COLUMNS, HUB_COLUMNS, LANE_COLUMNS,
                                     TEXT_COLUMNS, Network, Settings, resolve_status)
from lanesolve.read.carrier_sheets import check_carriers, check_rate_breaks
from lanesolve.read.cells import BLANK_MEANS_NO_LIMIT
from lanesolve.read import product_sheets
from lanesolve.read.findings import Findings, is_blank
from lanesolve.read.reader import RawWorkbook
from lanesolve.read.settings_sheet import read_settings
from lanesolve.read.sheet_checks import (check_lane_costs, check_lane_design, check_lanes, check_node_ids,
                                         costs_from_distance, require_cost_column, with_lanes_file)
from lanesolve.read.sheets import Table, match_sheets, read_table, report_missing_sheet

_NETWORK_COLUMNS = {
    contract.DEPOTS.name: DEPOT_COLUMNS,
    contract.CUSTOMERS.name: CUSTOMER_COLUMNS,
    contract.HUBS.name: HUB_COLUMNS,
    contract.LANES.name: LANE_COLUMNS,
}


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
        ``active`` not yes/no; duplicate or bad setting value; a header or sheet name that looks like a contract
        one; number text with ambiguous separators; a number beyond the accepted magnitudes; a problem in a row of
        the Scenarios sheet (see :func:`lanesolve.model.scenarios.parse_scenarios`).

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
    found = Findings()
    # Settings first: lanes_file decides whether the Lanes sheet is required.
    matched = match_sheets(raw, found, deferred=(contract.LANES.name,))
    settings = read_settings(matched.get(contract.SETTINGS.name), found)
    if contract.LANES.name not in matched and not settings.lanes_file:
        report_missing_sheet(contract.LANES, raw, found)
    lanes_sheet = matched.get(contract.LANES.name)
    if settings.lanes_file and lanes_sheet is not None and not lanes_sheet.bad_cells and \
            not any(not is_blank(cell) for row in lanes_sheet.rows for cell in row):
        del matched[contract.LANES.name]  # with a lanes file, a Lanes sheet left completely empty counts as absent
    specs = product_sheets.sheet_specs(matched)
    tables = {spec.name: read_table(specs[spec.name], matched.get(spec.name), found)
              for spec in contract.INPUT_SHEETS if spec is not contract.SETTINGS}
    require_cost_column(tables[contract.LANES.name], settings, found)
    if settings.lanes_file:
        tables[contract.LANES.name] = with_lanes_file(tables[contract.LANES.name], raw.path, settings, found)
    _check_scenarios_rows(raw, found)
    node_ids = check_node_ids(tables, found)
    check_lanes(tables[contract.LANES.name], node_ids, found)
    check_lane_design(tables[contract.LANES.name], found)
    check_lane_costs(tables[contract.LANES.name], settings, found)
    carriers = check_carriers(tables.pop(contract.CARRIERS.name), tables[contract.LANES.name], found)
    rate_breaks = check_rate_breaks(tables.pop(contract.RATE_BREAKS.name), tables[contract.LANES.name], found)

    frames = lane_sources = None
    if all(table.complete for table in tables.values()):
        # Frames are built before raising so that lane costs from distance are checked in the same pass.
        frames = {name: _network_frame(table, settings) for name, table in tables.items()
                  if name in _NETWORK_COLUMNS}
        frames[contract.LANES.name], lane_sources = costs_from_distance(frames, tables[contract.LANES.name],
                                                                          settings, found)
    products, emissions = product_sheets.read_goods(tables, frames, lane_sources, settings, found)
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
        products=products,
        emissions=emissions,
        carriers=carriers,
        rate_breaks=rate_breaks,
    )
    return network, warnings


def _check_scenarios_rows(raw: RawWorkbook, found: Findings) -> None:
    """Report the Scenarios sheet's own problems (unknown sheet or column, percent scale, bad setting value...)
    with the input sheets', in one pass. Applying the scenarios -- which needs a valid network -- stays with the
    pipeline (:func:`lanesolve.pipeline.scenario_networks`), which parses the sheet again."""
    sheets = [sheet for name, sheet in raw.sheets.items()
              if contract.normalize(name) == contract.normalize(contract.SCENARIOS_SHEET)]
    if len(sheets) == 1:  # two such sheets are reported by match_sheets
        found.extend(scenarios.parse_scenarios(sheets[0].rows, sheets[0].percent_cells)[1])


# ----------------------------------------------------------------------------------------------------------------
# building the network


def _network_frame(table: Table, settings: Settings) -> pd.DataFrame:
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
                fill = math.inf if col.name in BLANK_MEANS_NO_LIMIT else (
                    math.nan if col.default is None else float(col.default))
                values = pd.Series(np.full(n, fill), dtype=float)
            elif col.kind == FLAG:
                values = (pd.Series([None] * n, dtype=object) if col.default is None
                          else pd.Series(np.full(n, bool(col.default)), dtype=bool))
            else:
                values = pd.Series([col.default if col.default is not None else ""] * n, dtype=object)
        data[target] = values.reset_index(drop=True)
    data["row"] = pd.Series(table.rows, dtype=int)
    if "unmet_penalty" in data and settings.unmet_penalty is not None:
        data["unmet_penalty"] = data["unmet_penalty"].fillna(float(settings.unmet_penalty))
    if "single_source" in data:
        data["single_source"] = data["single_source"].where(data["single_source"].notna(),
                                                            bool(settings.single_source))
    if "status" in data:
        data["status"] = resolve_status(data["status"], data["fixed_cost"])
    for name in columns:
        if name in TEXT_COLUMNS:
            data[name] = data[name].astype(object)
        elif name in BOOL_COLUMNS:
            data[name] = data[name].astype(bool)
        elif name == "row":
            data[name] = data[name].astype(int)
        else:
            data[name] = data[name].astype(float)
    # One frame of the typed columns, each kept as its own block (copy=False): gathering them into 2-D blocks
    # first and then selecting and retyping each column copied a million-lane frame about three times.
    frame = pd.DataFrame({name: data[name] for name in columns}, index=pd.RangeIndex(n), copy=False)
    return frame.reset_index(drop=True)
