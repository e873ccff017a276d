"""What-if scenarios: the optional Scenarios sheet, applying a scenario to a network, comparing the results.

The Scenarios sheet has the columns ``scenario``, ``sheet``, ``match``, ``column``, ``change`` and ``value``. Each
row changes one column of the matching rows of one input sheet; several rows with the same scenario name build one
scenario, applied in row order. The workbook as given is the baseline (the name "baseline" is reserved).

=========  ==========================================================================================================
column     meaning
=========  ==========================================================================================================
scenario   the scenario's name (trimmed text)
sheet      Depots, Customers, Hubs, Lanes or Settings
match      which rows: an id, a comma list of ids, or ``*`` for all; on Lanes ``origin>destination`` (every mode) or
           ``origin>destination>mode``; on Settings the setting's name
column     a number or yes/no column of that sheet (``supply``, ``capacity``, ``active``...); on Settings ``value``
           (or blank)
change     ``set`` to value, ``scale`` by value (multiply), or ``add`` value
value      a number, or yes/no for a yes/no column; a blank ``set`` value means what a blank cell means in that
           column (no limit for a capacity, the default otherwise)
=========  ==========================================================================================================

``scale`` and ``add`` keep a "no limit" capacity unlimited and a hard demand (no unmet penalty) hard; ``set``
replaces either.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import unicodedata
from dataclasses import dataclass, field

import pandas as pd

from lanesolve import contract
from lanesolve.errors import Problem
from lanesolve.model.network import Network

SHEET = contract.SCENARIOS_SHEET
HEADERS = ("scenario", "sheet", "match", "column", "change", "value")
CHANGES = ("set", "scale", "add")
BASELINE = "baseline"

#: Network frame attribute of each contract sheet that a scenario can change.
_FRAME_OF = {"Depots": "depots", "Customers": "customers", "Hubs": "hubs", "Lanes": "lanes"}
_SHEETS = {sheet.name: sheet for sheet in (*contract.NODE_SHEETS, contract.LANES, contract.SETTINGS)}


@dataclass(frozen=True)
class Change:
    """One row of the Scenarios sheet.

    Attributes
    ----------
    sheet : str
        Contract sheet name (``"Depots"``, ``"Customers"``, ``"Hubs"``, ``"Lanes"``, ``"Settings"``).
    match : str
        Which rows it applies to (see the module docstring).
    column : str
        Contract column name (``"value"`` for Settings).
    change : str
        ``"set"``, ``"scale"`` or ``"add"``.
    value : float, bool, str or None
        A float for numbers, the text as written otherwise, None when blank.
    row : int
        Spreadsheet row on the Scenarios sheet (for messages).
    """

    sheet: str
    match: str
    column: str
    change: str
    value: object
    row: int


@dataclass
class Scenario:
    """A named list of changes to the baseline, applied in order."""

    name: str
    changes: list[Change] = field(default_factory=list)


_blank = contract.blank_cell


def _number(value: object) -> float | None:
    """The value as a float, or None when it is not a number (bools are not numbers here, nor text whose
    separators are ambiguous, see :func:`lanesolve.contract.ambiguous_number_text`)."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value)
    if isinstance(value, str):
        try:
            return contract.number_from_text(value)
        except ValueError:
            return None
    return None


def _suggest(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f"did you mean '{close[0]}'?" if close else "use one of " + ", ".join(options)


def _problem(row: int | None, column: str | None, value: object, message: str, hint: str = "") -> Problem:
    return Problem(SHEET, row, column, value, message, hint)


def parse_scenarios(rows: list[list], percent_cells=frozenset()) -> tuple[list[Scenario], list[Problem]]:
    """Read the Scenarios sheet.

    Parameters
    ----------
    rows : list of list
        Cell values of the sheet; ``rows[0]`` is spreadsheet row 1 with the headers.
    percent_cells : set of (row, column)
        1-based positions of cells shown with a percent number format (the reader's
        :attr:`~lanesolve.read.reader.RawSheet.percent_cells`). A ``scale`` or ``add`` value in such a cell is
        refused: ``10%`` is stored as 0.1, and whether the planner meant "times 0.1" or "10 % more" cannot be told.

    Returns
    -------
    scenarios : list of Scenario
        In order of first appearance; only rows without problems are included.
    problems : list of Problem
        Every problem found (sheet "Scenarios", with row and column): missing columns, unknown sheet, column,
        setting or change, a non-numeric value for scale/add, a percent-formatted scale/add value, number text
        with ambiguous separators, a number beyond the magnitudes lanesolve accepts, a blank or reserved scenario
        name; on Settings, a setting a scenario cannot change or a value the Settings sheet would refuse.

    Examples
    --------
    >>> scenarios, problems = parse_scenarios([
    ...     ["Scenario", "Sheet", "Match", "Column", "Change", "Value"],
    ...     ["peak", "Customers", "*", "demand", "scale", 1.2]])
    >>> scenarios[0].name, scenarios[0].changes[0].change, scenarios[0].changes[0].value, problems
    ('peak', 'scale', 1.2, [])
    """
    problems: list[Problem] = []
    if not rows:
        return [], [_problem(1, None, None, "the sheet has no header row",
                             "write the headers " + ", ".join(HEADERS) + " in row 1")]
    position: dict[str, int] = {}
    for index, header in enumerate(rows[0]):
        name = contract.normalize(header)
        if name in HEADERS and name not in position:
            position[name] = index
    missing = [h for h in HEADERS if h not in position]
    if missing:
        for header in missing:
            problems.append(_problem(1, header, None, f"required column '{header}' is missing",
                                     "row 1 must hold the headers " + ", ".join(HEADERS)))
        return [], problems

    scenarios: dict[str, Scenario] = {}
    for index, cells in enumerate(rows[1:], start=2):
        cell = {h: (cells[position[h]] if position[h] < len(cells) else None) for h in HEADERS}
        if all(_blank(v) for v in cell.values()):
            continue
        percent = (index, position["value"] + 1) in percent_cells
        change, row_problems = _parse_row(cell, index, percent)
        problems.extend(row_problems)
        if change is None:
            continue
        name = str(cell["scenario"]).strip()
        scenarios.setdefault(name, Scenario(name)).changes.append(change)
    return list(scenarios.values()), problems


def _parse_row(cell: dict, row: int, percent: bool = False) -> tuple[Change | None, list[Problem]]:
    problems: list[Problem] = []
    name = "" if _blank(cell["scenario"]) else str(cell["scenario"]).strip()
    if not name:
        problems.append(_problem(row, "scenario", None, "the scenario name is blank", "name the scenario"))
    elif contract.normalize(name) == BASELINE:
        problems.append(_problem(row, "scenario", name, "'baseline' is reserved for the workbook as given",
                                 "give the scenario another name"))

    change = contract.normalize(cell["change"])
    if change not in CHANGES:
        problems.append(_problem(row, "change", cell["change"], f"unknown change '{cell['change'] or ''}'",
                                 _suggest(change, CHANGES) + " (set, scale or add)"))

    sheet_text = "" if _blank(cell["sheet"]) else str(cell["sheet"]).strip()
    sheet = next((s for s in _SHEETS.values() if contract.normalize(s.name) == contract.normalize(sheet_text)), None)
    if sheet is None:
        problems.append(_problem(row, "sheet", cell["sheet"], f"unknown sheet '{sheet_text}'",
                                 _suggest(sheet_text, list(_SHEETS))))
        return None, problems

    # Ids are compared in Unicode NFC, as the validator stores them (an accent typed either way is the same id).
    match = "" if _blank(cell["match"]) else unicodedata.normalize("NFC", str(cell["match"]).strip())
    if not match:
        problems.append(_problem(row, "match", None, "match is blank",
                                 "write an id, a comma list of ids, or * for every row"))

    value = cell["value"]
    number = _number(value)
    why = contract.ambiguous_number_text(value) if isinstance(value, str) else None
    if why is not None:
        problems.append(_problem(row, "value", value, why, contract.PLAIN_NUMBER_HINT))
    elif change in ("scale", "add") and (number is None or not math.isfinite(number)):
        problems.append(_problem(row, "value", value, f"'{change}' needs a number, not {contract.show_cell(value)}",
                                 "write a number such as 1.2 (scale) or -50 (add)"))
    elif number is not None and contract.magnitude_problem(number):
        problems.append(_problem(row, "value", value, f"{contract.show_cell(value)}: "
                                 f"{contract.magnitude_problem(number)}", "write an ordinary number, or a blank"))
    elif percent and change in ("scale", "add"):
        meant = f"times {number:g}" if change == "scale" else f"{number:g} more"
        problems.append(_problem(
            row, "value", value, f"the value {number * 100:g}% is in a percent-formatted cell, so it is stored as "
            f"{number:g}; for {change} that is ambiguous: {meant}, or {number * 100:g} % more?",
            f"type a plain factor in a cell formatted as a number: {1 + number:g} for {number * 100:g} % more, "
            f"{1 - number:g} for {number * 100:g} % less, {number:g} to multiply by {number:g}" if change == "scale"
            else "type the amount to add in the column's own unit in a cell formatted as a number; to change by a "
            "percentage use scale with a factor such as 1.1"))

    if sheet is contract.SETTINGS:
        column = "value" if _blank(cell["column"]) else contract.normalize(cell["column"])
        if column != "value":
            problems.append(_problem(row, "column", cell["column"], "on Settings the column must be 'value' or blank",
                                     "write value"))
        if match:
            try:
                setting = contract.setting_by_name(match)
            except KeyError:
                problems.append(_problem(row, "match", match, f"unknown setting '{match}'",
                                         _suggest(contract.normalize(match), [s.name for s in contract.SETTINGS_ROWS])))
            else:
                match = setting.name
                if setting.fixed_for_scenarios:
                    problems.append(_problem(row, "match", cell["match"],
                                             f"a scenario cannot change setting '{setting.name}': "
                                             f"{setting.fixed_for_scenarios}", "delete the row"))
                elif change in ("scale", "add") and setting.kind != contract.NUMBER:
                    problems.append(_problem(row, "change", cell["change"],
                                             f"setting {setting.name} is text; it can only be set",
                                             "use change set"))
                elif change == "set" and why is None:  # the Settings sheet's rules: check finds what solve would
                    value, problem = contract.setting_value(setting, value)
                    number = value if setting.kind == contract.NUMBER else None
                    if problem is not None:
                        problems.append(_problem(row, "value", cell["value"], *problem))
    else:
        column = contract.normalize(cell["column"])
        names = [c.name for c in sheet.columns]
        changeable = [c.name for c in sheet.columns if c.kind in (contract.NUMBER, contract.FLAG)]
        if column not in names:
            problems.append(_problem(row, "column", cell["column"],
                                     f"sheet {sheet.name} has no column '{cell['column'] or ''}'",
                                     _suggest(column, changeable)))
        elif column not in changeable:
            problems.append(_problem(row, "column", cell["column"],
                                     f"{sheet.name} column {column} is an id or label and cannot be changed",
                                     "change a number or yes/no column: " + ", ".join(changeable)))
        elif sheet.column(column).kind == contract.FLAG and change in ("scale", "add"):
            problems.append(_problem(row, "change", cell["change"], f"{column} is a yes/no column; it can only be set",
                                     "use change set with value yes or no"))
    if problems:
        return None, problems
    if number is not None:
        value = number
    elif isinstance(value, str):
        value = value.strip() or None
    return Change(sheet.name, match, column, change, value, row), problems


# ----------------------------------------------------------------------------------------------------------------
# Applying a scenario


def _copy(network: Network) -> Network:
    sources = network.lane_sources.copy(deep=True) if network.lane_sources is not None else None
    return Network(depots=network.depots.copy(deep=True), customers=network.customers.copy(deep=True),
                   hubs=network.hubs.copy(deep=True), lanes=network.lanes.copy(deep=True),
                   settings=dataclasses.replace(network.settings), source=network.source, lane_sources=sources,
                   carriers=network.carriers.copy(deep=True), rate_breaks=network.rate_breaks.copy(deep=True))


def _matched_rows(network: Network, change: Change) -> tuple[pd.Index, list[Problem]]:
    """Index labels of the rows ``change.match`` selects, and a Problem per term that matches nothing."""
    frame = getattr(network, _FRAME_OF[change.sheet])
    if change.match == "*":
        return frame.index, []
    terms = [t.strip() for t in change.match.split(",") if t.strip()]
    selected: list = []
    problems: list[Problem] = []
    if change.sheet == "Lanes":
        for term in terms:
            parts = [p.strip() for p in term.split(">")]
            if len(parts) not in (2, 3):
                problems.append(_problem(change.row, "match", term, f"'{term}' is not a lane reference",
                                         "write origin>destination or origin>destination>mode"))
                continue
            hit = (frame["origin"] == parts[0]) & (frame["destination"] == parts[1])
            if len(parts) == 3:
                hit &= frame["mode"].str.casefold() == parts[2].casefold()
            if not hit.any():
                known = [f"{o}>{d}" for o, d in zip(frame["origin"], frame["destination"])]
                problems.append(_problem(change.row, "match", term, f"no lane {term} on sheet Lanes",
                                         _suggest(f"{parts[0]}>{parts[1]}", known) if known else "the sheet is empty"))
            selected.extend(frame.index[hit])
    else:
        kinds = network.node_kind()
        for term in terms:
            hit = frame["id"] == term
            if not hit.any():
                other = kinds.get(term)
                hint = (f"'{term}' is a {other}; use sheet {other.capitalize()}s" if other
                        else _suggest(term, frame["id"].tolist()) if len(frame) else "the sheet is empty")
                problems.append(_problem(change.row, "match", term, f"no {change.sheet[:-1].lower()} '{term}'",
                                         hint))
            selected.extend(frame.index[hit])
    return pd.Index(list(dict.fromkeys(selected))), problems


def _new_values(old: pd.Series, change: Change, column: contract.Column, network: Network
                ) -> tuple[pd.Series | None, str]:
    """The changed values, or None and the reason the change cannot be made."""
    if column.kind == contract.FLAG:
        if change.change != "set":
            return None, f"{column.name} is a yes/no column; it can only be set"
        if _blank(change.value):
            flag = bool(column.default)
        elif isinstance(change.value, bool):
            flag = change.value
        elif str(change.value).strip().lower() in contract.YES:
            flag = True
        elif str(change.value).strip().lower() in contract.NO:
            flag = False
        else:
            return None, f"'{change.value}' is not yes or no"
        return pd.Series(flag, index=old.index, dtype=bool), ""

    unlimited = column.name == "capacity"  # the only columns where a blank cell means "no limit"
    if change.change == "set":
        if _blank(change.value):
            if unlimited:
                value = math.inf
            elif column.name == "unmet_penalty":
                value = math.nan if network.settings.unmet_penalty is None else network.settings.unmet_penalty
            elif column.default is not None:
                value = float(column.default)
            else:
                return None, f"{column.name} cannot be blank"
        else:
            value = _number(change.value)
            if value is None:
                return None, f"'{change.value}' is not a number"
        new = pd.Series(value, index=old.index, dtype=float)
    elif change.change == "scale":
        # inf * 0 would be NaN: an unlimited capacity stays unlimited; a NaN (hard demand) stays NaN.
        new = old.where(old.isin([math.inf]) | old.isna(), old * float(change.value))
    else:
        new = old + float(change.value)
    return new, ""


def _check_values(new: pd.Series, column: contract.Column) -> pd.Series:
    """True where a new value is not allowed in this column."""
    may_be_nan = column.name in ("unmet_penalty", "latitude", "longitude")
    may_be_inf = column.name == "capacity"
    bad = new.isna() & (not may_be_nan)
    bad |= new.isin([math.inf, -math.inf]) & (not may_be_inf)
    bad |= new == -math.inf
    if column.minimum is not None:
        bad |= new < column.minimum
    if column.maximum is not None:
        bad |= new > column.maximum
    size = new.abs()
    bad |= size.lt(math.inf) & ((size > contract.MAX_MAGNITUDE) | ((size > 0) & (size < contract.MIN_MAGNITUDE)))
    return bad


def apply_scenario(network: Network, scenario: Scenario) -> tuple[Network, list[Problem]]:
    """A new network with the scenario's changes applied in row order; the baseline is not modified.

    Parameters
    ----------
    network : Network
        The baseline.
    scenario : Scenario

    Returns
    -------
    network : Network
        Deep copies of the baseline frames and settings, changed.
    problems : list of Problem
        One per match term that selects nothing and per change that would make a value invalid (below the column's
        minimum, blank where a value is required, a flag that is not yes/no), each naming the Scenarios row. A
        change with a problem is not applied.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> base = make_network([{"id": "D", "supply": 10}], [{"id": "C", "demand": 8}],
    ...                     [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> peak = Scenario("peak", [Change("Customers", "*", "demand", "scale", 1.25, 2)])
    >>> changed, problems = apply_scenario(base, peak)
    >>> float(changed.customers.loc[0, "demand"]), float(base.customers.loc[0, "demand"]), problems
    (10.0, 8.0, [])
    """
    new = _copy(network)
    problems: list[Problem] = []
    for change in scenario.changes:
        if change.sheet == "Settings":
            problems.extend(_apply_setting(new, change))
            continue
        sheet = _SHEETS[change.sheet]
        column = sheet.column(change.column)
        frame = getattr(new, _FRAME_OF[change.sheet])
        rows, missing = _matched_rows(new, change)
        problems.extend(missing)
        if not len(rows):
            continue
        values, reason = _new_values(frame.loc[rows, column.name], change, column, new)
        if values is None:
            problems.append(_problem(change.row, "value", change.value, reason,
                                     "use yes or no" if column.kind == contract.FLAG else "write a number"))
            continue
        if column.kind != contract.FLAG:
            bad = _check_values(values, column)
            if bad.any():
                first = bad[bad].index[0]
                target = _describe(frame, first, change.sheet)
                limit = [f">= {column.minimum:g}"] if column.minimum is not None else []
                limit += [f"<= {column.maximum:g}"] if column.maximum is not None else []
                problems.append(_problem(
                    change.row, "value", change.value,
                    f"{change.change} {change.value} makes {change.sheet} {target} {column.name} "
                    f"{values[first]:g}, which is not allowed"
                    + (f" (and {int(bad.sum()) - 1} more row(s))" if bad.sum() > 1 else ""),
                    f"{column.name} must be " + (" and ".join(limit) if limit else "a number")))
                continue
        frame.loc[rows, column.name] = values
        if change.sheet == "Lanes" and column.name == "cost_per_unit":
            # Say where the changed cost came from, so the results do not credit it to the workbook or a rate.
            sources = new.cost_sources().copy()
            value = f"{change.value:g}" if isinstance(change.value, (int, float)) else str(change.value or "blank")
            sources.loc[rows, "cost_source"] = f"scenario {scenario.name}: {change.change} {value}"
            new.lane_sources = sources
    return new, problems


def _describe(frame: pd.DataFrame, index, sheet: str) -> str:
    if sheet == "Lanes":
        mode = frame.at[index, "mode"]
        return (f"row {frame.at[index, 'row']} ({frame.at[index, 'origin']}>{frame.at[index, 'destination']}"
                + (f">{mode}" if mode else "") + ")")
    return f"row {frame.at[index, 'row']} ({frame.at[index, 'id']})"


def _apply_setting(network: Network, change: Change) -> list[Problem]:
    try:
        setting = contract.setting_by_name(change.match)
    except KeyError:
        return [_problem(change.row, "match", change.match, f"unknown setting '{change.match}'",
                         _suggest(contract.normalize(change.match), [s.name for s in contract.SETTINGS_ROWS]))]
    if not hasattr(network.settings, setting.name):
        return [_problem(change.row, "match", change.match,
                         f"setting {setting.name} is not used by this version's solve", "remove the row")]
    old = getattr(network.settings, setting.name)
    if setting.kind != contract.NUMBER:
        if change.change != "set":
            return [_problem(change.row, "change", change.change, f"setting {setting.name} is text; it can only be set",
                             "use change set")]
        setattr(network.settings, setting.name, "" if change.value is None else str(change.value))
        return []
    if change.change == "set":
        if _blank(change.value):
            new = setting.default
        else:
            new = _number(change.value)
            if new is None:
                return [_problem(change.row, "value", change.value, f"'{change.value}' is not a number",
                                 f"setting {setting.name} takes a number")]
    elif old is None:
        new = None  # a blank default penalty (hard demand) stays blank under scale and add
    else:
        new = old * float(change.value) if change.change == "scale" else old + float(change.value)
    if new is not None and (not math.isfinite(new) or (setting.minimum is not None and new < setting.minimum)
                            or contract.magnitude_problem(new)):
        return [_problem(change.row, "value", change.value,
                         f"{change.change} {change.value} makes setting {setting.name} {new:g}, which is not allowed",
                         f"{setting.name} must be a number" + (f" >= {setting.minimum:g}"
                                                               if setting.minimum is not None else ""))]
    setattr(network.settings, setting.name, new)
    if setting.name == "unmet_penalty":
        # The validator gave every customer with a blank penalty the Settings default; the sheet's blanks are no
        # longer known here, so a changed default applies to customers that carried the old default.
        customers = network.customers
        carried = customers["unmet_penalty"].isna() if old is None else customers["unmet_penalty"] == old
        customers.loc[carried, "unmet_penalty"] = math.nan if new is None else new
    return []
