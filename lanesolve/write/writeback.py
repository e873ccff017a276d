"""Write the result sheets back into the workbook, at the zip level, without touching anything else.

A workbook (.xlsx, .xlsm) is a zip of XML parts. Loading it into a spreadsheet library and saving it again rewrites
every part and drops what the library does not model (charts' finer formatting, images, slicers, shapes), and is slow
for large lane sheets. This module instead

1. copies every member of the source zip unchanged (the same uncompressed bytes), except the parts that belong to
   earlier result sheets (sheets whose name starts with :data:`lanesolve.contract.RESULT_PREFIX`): their worksheet
   part, its relationships part and its table parts are dropped;
2. edits the four index parts as text, with targeted edits only -- ``xl/workbook.xml`` (the ``<sheets>`` list,
   ``localSheetId`` of defined names, ``activeTab``/``firstSheet``), ``xl/_rels/workbook.xml.rels``,
   ``[Content_Types].xml`` and ``docProps/app.xml`` (sheet titles and counts, when present and well formed).
   They are never round-tripped through an XML library, which would rename namespace prefixes and break
   ``mc:Ignorable`` (a spreadsheet program then refuses the file);
3. adds one worksheet part and one table part per result sheet. Text is written as inline strings, so
   ``xl/sharedStrings.xml`` and ``xl/styles.xml`` stay byte-identical and text that looks like a formula
   (``=SUM(A1)``) can only ever be text. Looks come from a built-in table style (banded rows, header row with
   filter buttons), column widths sized to the content and a frozen header row; numbers are rounded for reading
   (money 2 decimals, quantities 4, percentages 1) instead of carrying a number format, since a number format
   would need a new entry in ``styles.xml``.

The new zip is written to a temporary file beside the target, flushed and fsync'ed, then moved onto the target
with :func:`os.replace`, so the target is either the old file or the complete new one. The source may be the target.

Values: ``None`` and NaN are blank cells; ``+inf`` (a capacity without limit) is the text ``"no limit"``, everywhere.
"""

from __future__ import annotations

import html
import math
import numbers
import posixpath
import re
import shutil
import time
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from lanesolve.write import atomic
from lanesolve.contract import RESULT_PREFIX
from lanesolve.errors import WriteError
from lanesolve.model.result import CAUTION, COST_COMPONENTS, DESIGN_COST_COMPONENTS, node_decisions

#: Text written for an infinite value (a lane or hub capacity without limit).
NO_LIMIT = "no limit"

SUMMARY_SHEET = RESULT_PREFIX + "Summary"
FLOWS_SHEET = RESULT_PREFIX + "Lane flows"
NODES_SHEET = RESULT_PREFIX + "Nodes"
DESIGN_SHEET = RESULT_PREFIX + "Depots and hubs"
TRIPS_SHEET = RESULT_PREFIX + "Trips"
SENSITIVITY_SHEET = RESULT_PREFIX + "Sensitivity"
WHY_SHEET = RESULT_PREFIX + "Why no plan"

#: Built-in table style of the result tables (a style every spreadsheet program that reads tables knows by name).
TABLE_STYLE = "TableStyleMedium2"

KINDS = ("text", "quantity", "money", "percent", "number")
#: Decimals kept per column kind, for reading; "number" and "text" are written as given.
DECIMALS = {"money": 2, "quantity": 4, "percent": 1}

COST_WORDS = {
    "transport": "transport cost",
    "handling": "handling cost",
    "fixed_lane": "fixed lane charges",
    "unmet_penalty": "unmet demand penalties",
    "fixed_node": "fixed depot and hub charges",
    "trips": "trip costs",
}

#: Plain words for the ``figure`` column of :attr:`lanesolve.model.result.Result.sensitivity`.
FIGURE_WORDS = {
    "marginal_cost": "cost of one more unit of demand",
    "supply_value": "saving from one more unit of depot supply",
    "hub_capacity_value": "saving from one more unit of hub capacity",
    "lane_capacity_value": "saving from one more unit of lane capacity",
    "trip_capacity_value": "saving from one more unit of room in the planned trips",
    "reduced_cost": "cut in cost per unit before an unused lane pays",
}

MAX_SHEET_NAME = 31  # the spreadsheet programs' limit on a sheet name's length
MAX_CELL_TEXT = 32767  # the spreadsheet programs' limit on the characters in one cell
FORBIDDEN_IN_SHEET_NAME = set('[]:*?/\\')

# Namespaces (transitional and strict OOXML).
REL_NS = ("http://schemas.openxmlformats.org/officeDocument/2006/relationships",
          "http://purl.oclc.org/ooxml/officeDocument/relationships")
MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
WORKSHEET_REL = REL_NS[0] + "/worksheet"
TABLE_REL = REL_NS[0] + "/table"
WORKSHEET_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
TABLE_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.table+xml"
MACRO_MAIN_TYPE = "application/vnd.ms-excel.sheet.macroEnabled.main+xml"

WORKBOOK = "xl/workbook.xml"
CONTENT_TYPES = "[Content_Types].xml"
APP = "docProps/app.xml"


@dataclass
class ResultSheet:
    """One result sheet to write: a header row and data rows.

    Attributes
    ----------
    name : str
        Full sheet name; starts with :data:`~lanesolve.contract.RESULT_PREFIX`, at most 31 characters.
    columns : list of str
        Header row; the names must be unique (they become the table's column names).
    rows : list of list
        Cell values: str, int, float, bool or None. NaN and None are blank, ``+inf`` is ``"no limit"``.
    kinds : dict
        Column name -> ``"text"``, ``"quantity"``, ``"money"``, ``"percent"`` or ``"number"``; decides rounding
        (see :data:`DECIMALS`). Columns not listed are ``"number"`` (written as given).
    """

    name: str
    columns: list[str]
    rows: list[list] = field(default_factory=list)
    kinds: dict[str, str] = field(default_factory=dict)


# ---------------------------------------------------------------------------------------------------------------
# Building the sheets from a result
# ---------------------------------------------------------------------------------------------------------------

def _plain(value):
    """A pandas/numpy scalar as a plain Python value (None for missing)."""
    value_type = type(value)
    if value_type is str or value_type is int or value_type is bool:
        return value
    if value_type is float:
        return None if value != value else value
    if value is None:
        return None
    if isinstance(value, bool):
        return value
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        try:
            value = value.item()
        except (ValueError, TypeError):
            pass
    if isinstance(value, float) and math.isnan(value):
        return None
    if value is pd.NA or value is pd.NaT:
        return None
    return value


def _percent(fraction) -> float | None:
    """A utilisation fraction (0.5) as a percentage (50.0); None when there is none (no limit, NaN)."""
    fraction = _plain(fraction)
    if fraction is None or not isinstance(fraction, numbers.Real) or not math.isfinite(fraction):
        return None
    return float(fraction) * 100.0


def cost_keys(result) -> list[str]:
    """The keys of ``result.cost_breakdown`` in report order: the known components first, then any others.

    A v1 result has :data:`~lanesolve.model.result.COST_COMPONENTS`; a v2 one adds ``fixed_node`` and ``trips``. Looping
    over the keys the result has (not a fixed list) keeps every component on the sheet, so they add up to the total.
    """
    order = [*COST_COMPONENTS, *DESIGN_COST_COMPONENTS]
    keys = list(result.cost_breakdown)
    return [k for k in order if k in keys] + [k for k in keys if k not in order]


def _summary_rows(network, result, info) -> list[list]:
    def money(x):
        x = _plain(x)
        return None if x is None else round(float(x), 2)

    def optional(x, digits=None, none_text="not applicable (no yes/no decisions)"):
        x = _plain(x)
        if x is None:
            return none_text
        return round(float(x), digits) if digits is not None else float(x)

    settings = network.settings
    inactive = int((~network.lanes["active"].astype(bool)).sum()) if len(network.lanes) else 0
    rows: list[list] = [
        ["status", result.status.value],
        ["total cost", money(result.total_cost)],
    ]
    for key in cost_keys(result):
        rows.append([COST_WORDS.get(key, key.replace("_", " ")), money(result.cost_breakdown.get(key, 0.0))])
    rows += [
        ["units", settings.units or None],
        ["currency", settings.currency or None],
        ["solver", result.solver or None],
        ["MIP gap", optional(result.mip_gap)],
        ["best bound", optional(result.best_bound, 2)],
        ["solve seconds", round(float(result.solve_seconds), 3)],
        ["input file", info.input_path],
        ["input SHA-256", info.checksum],
        ["lanesolve version", info.version],
        ["run at", info.started],
        ["lanes used", int(len(result.flows))],
        ["inactive lanes left out", inactive],
        ["customers short", int(len(result.unmet))],
    ]
    diagnosis = result.diagnosis
    if diagnosis is not None and getattr(diagnosis, "total_short", None) is not None:
        # Without a plan, the shortfall is the diagnosis's (the least possible), not the empty plan's.
        rows[-1] = ["customers short", int(len(diagnosis.short))]
        rows.append(["total shortfall", float(diagnosis.total_short)])
    rows += [["message", str(message)] for message in result.messages]
    rows.append(["caution", CAUTION])
    return rows


def result_sheets(network, result, info) -> list[ResultSheet]:
    """The result sheets for one run: summary, lane flows and node balance.

    Parameters
    ----------
    network : lanesolve.model.network.Network
        The validated network (for the labels and the inactive lanes).
    result : lanesolve.model.result.Result
        The outcome of the solve (a result without a plan gives a summary that says why and empty flows).
    info : lanesolve.pipeline.RunInfo
        Input path, checksum, version and time stamp of the run (only ``input_path``, ``checksum``, ``version``
        and ``started`` are read).

    Returns
    -------
    list of ResultSheet
        ``"LS Summary"`` (item/value rows), ``"LS Lane flows"`` (lanes with flow, then inactive lanes) and
        ``"LS Nodes"`` (every node of ``result.nodes``), in that order, then the sheets of
        :func:`insight_sheets` that apply (design decisions, trips, sensitivity, why no plan).

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> from lanesolve.model.result import Result, SolveStatus
    >>> from types import SimpleNamespace  # stands in for a pipeline.RunInfo: the same fields
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> info = SimpleNamespace(input_path="in.xlsx", checksum="0" * 64, version="0.1.0",
    ...                        started="2024-01-01T00:00:00+00:00")
    >>> [s.name for s in result_sheets(net, Result(SolveStatus.INFEASIBLE), info)]
    ['LS Summary', 'LS Lane flows', 'LS Nodes', 'LS Why no plan']
    """
    summary = ResultSheet(SUMMARY_SHEET, ["item", "value"], _summary_rows(network, result, info),
                          {"item": "text", "value": "number"})

    flow_columns = ["origin", "destination", "mode", "flow", "cost_per_unit", "variable_cost", "fixed_charge",
                    "capacity", "utilisation %", "status"]
    flow_kinds = {"origin": "text", "destination": "text", "mode": "text", "flow": "quantity",
                  "cost_per_unit": "money", "variable_cost": "money", "fixed_charge": "money",
                  "capacity": "quantity", "utilisation %": "percent", "status": "text"}
    flow_rows: list[list] = []
    flows = result.flows
    if len(flows):
        columns = [flows[c].tolist() for c in ("origin", "destination", "mode", "flow", "cost_per_unit",
                                                "variable_cost", "fixed_charge", "capacity")]
        utilisation = flows["utilisation"].tolist()
        for i in range(len(flows)):
            row = [_plain(col[i]) for col in columns]
            row += [_percent(utilisation[i]), "used"]
            flow_rows.append(row)
    lanes = network.lanes
    if len(lanes):
        inactive = lanes[~lanes["active"].astype(bool)]
        for lane in inactive.itertuples(index=False):
            flow_rows.append([lane.origin, lane.destination, lane.mode, 0.0, _plain(lane.cost_per_unit), 0.0, 0.0,
                              _plain(lane.capacity), None, "inactive, left out"])
    flow_columns, flow_kinds = _with_cost_sources(network, flow_columns, flow_kinds, flow_rows)
    flows_sheet = ResultSheet(FLOWS_SHEET, flow_columns, flow_rows, flow_kinds)

    node_columns = ["node", "kind", "supply", "demand", "shipped", "received", "unmet", "capacity", "throughput",
                    "utilisation %"]
    node_kinds = {c: "quantity" for c in node_columns}
    node_kinds.update({"node": "text", "kind": "text", "utilisation %": "percent"})
    node_rows: list[list] = []
    nodes = result.nodes
    if len(nodes):
        columns = [nodes[c].tolist() for c in ("node", "kind", "supply", "demand", "shipped", "received", "unmet",
                                                "capacity", "throughput")]
        utilisation = nodes["utilisation"].tolist()
        for i in range(len(nodes)):
            node_rows.append([_plain(col[i]) for col in columns] + [_percent(utilisation[i])])
    nodes_sheet = ResultSheet(NODES_SHEET, node_columns, node_rows, node_kinds)
    return [summary, flows_sheet, nodes_sheet, *insight_sheets(network, result)]


def insight_sheets(network, result) -> list[ResultSheet]:
    """The sheets beyond summary, flows and nodes: design decisions, trips, sensitivity and why no plan.

    Parameters
    ----------
    network : lanesolve.model.network.Network
    result : lanesolve.model.result.Result

    Returns
    -------
    list of ResultSheet
        In this order, each only when it applies: ``"LS Depots and hubs"`` (a plan for a network with open/close
        or other v2 decisions, :attr:`Network.has_design`), ``"LS Trips"`` (a plan with lanes run in whole trips),
        ``"LS Sensitivity"`` (every plan; says so when no figures were computed) and ``"LS Why no plan"`` (an
        infeasible result). A v1 plan thus gains only the sensitivity sheet. Sheets a run does not write are still
        dropped from the workbook, as every sheet with the prefix is (see :func:`write_results`).
    """
    sheets = []
    if result.status.has_plan:
        if network.has_design and len(result.open_nodes):
            sheets.append(design_sheet(result))
        if len(result.trips):
            sheets.append(trips_sheet(result))
        sheets.append(sensitivity_sheet(result))
    elif result.status.value == "infeasible":
        sheets.append(why_no_plan_sheet(network, result))
    return sheets


def design_sheet(result) -> ResultSheet:
    """``"LS Depots and hubs"``: every depot and hub with the status given, the plan's decision and its use.

    Throughput is the net quantity shipped for a depot (what its supply bounds) and the quantity passing through
    for a hub; capacity is the depot's supply or the hub's capacity (see :func:`lanesolve.model.solve.node_balance`).
    """
    columns = ["depot or hub", "kind", "status given", "decision", "fixed charge paid", "throughput", "capacity",
               "utilisation %"]
    kinds = {"depot or hub": "text", "kind": "text", "status given": "text", "decision": "text",
             "fixed charge paid": "money", "throughput": "quantity", "capacity": "quantity",
             "utilisation %": "percent"}
    rows = []
    for node in node_decisions(result).itertuples(index=False):
        throughput, capacity, utilisation = node.used, node.limit, _percent(node.utilisation)
        rows.append([_plain(node.node), _plain(node.kind), _plain(node.status), "open" if node.open else "closed",
                     _plain(node.fixed_charge), _plain(throughput), _plain(capacity), utilisation])
    return ResultSheet(DESIGN_SHEET, columns, rows, kinds)


def trips_sheet(result) -> ResultSheet:
    """``"LS Trips"``: lanes run in whole trips, with the trips, their cost and how full the trucks are.

    The last truck carries what is left after the full ones: ``flow - (trips - 1) * trip_capacity``; the average
    fill is ``flow / (trips * trip_capacity)``.
    """
    columns = ["origin", "destination", "mode", "flow", "trip capacity", "trips", "cost per trip", "trip cost",
               "last truck fill %", "average fill %"]
    kinds = {"origin": "text", "destination": "text", "mode": "text", "flow": "quantity",
             "trip capacity": "quantity", "trips": "number", "cost per trip": "money", "trip cost": "money",
             "last truck fill %": "percent", "average fill %": "percent"}
    rows = []
    for lane in result.trips.itertuples(index=False):
        flow, size, trips = float(lane.flow), float(lane.trip_capacity), int(lane.trips)
        last = average = None
        if trips > 0 and size > 0:
            last = _percent((flow - (trips - 1) * size) / size)
            average = _percent(flow / (trips * size))
        rows.append([_plain(lane.origin), _plain(lane.destination), _plain(lane.mode), flow, size, trips,
                     _plain(lane.cost_per_trip), _plain(lane.trip_cost), last, average])
    return ResultSheet(TRIPS_SHEET, columns, rows, kinds)


#: The sensitivity sheet lists at most this many unused lanes' reduced costs, the nearest to being used first: on a
#: large network nearly every lane is unused, and a row for each would echo the input, not inform (``--json`` keeps
#: them all).
MAX_REDUCED_COST_ROWS = 500


def sensitivity_sheet(result) -> ResultSheet:
    """``"LS Sensitivity"``: the figures of ``result.sensitivity``, each in words, with its sentence and basis.

    Every marginal cost and capacity value is listed with both sides (``one more unit``, ``one unit less``) and, when
    they agree, the one ``value`` (``unique`` "yes"); cells keep full precision. Of the unused lanes' reduced costs,
    the :data:`MAX_REDUCED_COST_ROWS` smallest (the lanes nearest to being worth using), then one row counting the
    rest. A side with no plan is blank and its sentence says so. With no figures (a plan not proven optimal) the
    sheet holds one row saying why.
    """
    columns = ["figure", "item", "value", "one more unit", "one unit less", "unique", "basis", "in plain words"]
    kinds = {"figure": "text", "item": "text", "value": "number", "one more unit": "number",
             "one unit less": "number", "unique": "text", "basis": "text", "in plain words": "text"}
    frame = result.sensitivity
    reduced = frame["figure"] == "reduced_cost" if len(frame) else None
    left_out = 0
    if reduced is not None and int(reduced.sum()) > MAX_REDUCED_COST_ROWS:
        lanes = frame[reduced]
        # Nearest to paying first; a lane no plan can use (inf) last; a stable sort keeps the model's order.
        order = lanes.sort_values("value_up" if "value_up" in lanes else "value", kind="stable", na_position="last")
        left_out = len(lanes) - MAX_REDUCED_COST_ROWS
        frame = pd.concat([frame[~reduced], order.iloc[:MAX_REDUCED_COST_ROWS]])

    def finite(value):
        value = _plain(value)
        return value if isinstance(value, (int, float)) and math.isfinite(value) else None

    rows = []
    for row in frame.itertuples(index=False):
        if row.figure == "none":
            rows.append(["none", None, None, None, None, None, _plain(row.basis), _plain(row.text)])
            continue
        up, down = getattr(row, "value_up", row.value), getattr(row, "value_down", row.value)
        rows.append([FIGURE_WORDS.get(row.figure, str(row.figure).replace("_", " ")), _plain(row.item),
                     finite(row.value) if bool(row.unique) else None, finite(up), finite(down),
                     "yes" if bool(row.unique) else "no", _plain(row.basis), _plain(row.text)])
    if left_out:
        rows.append([FIGURE_WORDS.get("reduced_cost", "reduced cost"), None, None, None, None, None, None,
                     f"... and {left_out:,} more unused lanes, each further from being worth using than those above "
                     "(lanesolve solve --json lists every figure)."])
    if not rows:
        why = ("the plan is not proven optimal, so its marginal costs could mislead"
               if result.status.value != "optimal" else "the figures could not be computed for this plan")
        rows.append(["none", None, None, None, None, None, None, f"No sensitivity figures: {why}."])
    return ResultSheet(SENSITIVITY_SHEET, columns, rows, kinds)


def why_no_plan_sheet(network, result) -> ResultSheet:
    """``"LS Why no plan"``: the diagnosis of an infeasible result (:class:`lanesolve.model.diagnose.Diagnosis`).

    One row per finding, the total and the causes first: the least total shortfall, causes found before solving,
    design rules in the way, customers who would go short (and by how much), lanes, depots and hubs used to their
    limit with the bottleneck marked and the raise each needs, notes, and the internal penalty per unit short the
    re-solve used. Without a diagnosis the result's messages are listed as reasons.
    """
    units = network.settings.units or "units"
    columns = ["finding", "item", "demand", "short", "capacity", "used", "bottleneck", "penalty per unit",
               "explanation"]
    kinds = {"finding": "text", "item": "text", "demand": "quantity", "short": "quantity", "capacity": "quantity",
             "used": "quantity", "bottleneck": "text", "penalty per unit": "money", "explanation": "text"}
    blank = [None] * 7
    rows: list[list] = []
    diagnosis = result.diagnosis
    if diagnosis is None:
        rows += [["reason", *blank, str(m)] for m in result.messages]
        return ResultSheet(WHY_SHEET, columns, rows, kinds)
    total = getattr(diagnosis, "total_short", None)
    if total is not None:
        rows.append(["total shortfall", None, None, _plain(total), None, None, None, None,
                     diagnosis.causes(units)[0] if total > 0 else "no hard demand would go short"])
    rows += [["cause found before solving", *blank, str(c)] for c in diagnosis.structural]
    rows += [["design rule in the way" if ok else "design rule tried", _plain(name), *blank[:6], str(text)]
             for name, ok, text in getattr(diagnosis, "rules", [])]
    for r in diagnosis.short.itertuples(index=False):
        rows.append(["customer short", _plain(r.customer), _plain(r.demand), _plain(r.short), None, None, None, None,
                     f"would be {float(r.short):.6g} {units} short of its demand of {float(r.demand):.6g} {units}"])
    for r in diagnosis.saturated.itertuples(index=False):
        cut = bool(r.bottleneck)
        raise_by = float(getattr(r, "raise_by", 0.0) or 0.0)
        rows.append([f"{r.kind} at its limit", _plain(r.item), None, None, _plain(r.capacity), _plain(r.used),
                     "yes" if cut else "no", None,
                     f"part of the bottleneck: raise it by {raise_by:.6g} {units} (with the other limits raised by "
                     "theirs) for a plan" if raise_by > 0 else
                     "part of the bottleneck: the capacity that runs out (raise it, or add a route around it)" if cut
                     else "used to its limit on the way; not part of the bottleneck found"])
    rows += [["note", *blank, str(n)] for n in diagnosis.notes]
    if diagnosis.penalty is not None:
        rows.append(["internal penalty", None, None, None, None, None, None, _plain(diagnosis.penalty),
                     "cost per unit short used only to find the least shortfall; larger than any plan can save, "
                     "so the re-solve ships as much as the network allows"])
    return ResultSheet(WHY_SHEET, columns, rows, kinds)


def _with_cost_sources(network, columns: list[str], kinds: dict[str, str], rows: list[list]):
    """Add ``distance`` and ``cost_source`` to the lane flow rows (in place) when any lane has a distance or a cost
    computed from one, so the planner sees where each cost came from; otherwise the sheet keeps its columns."""
    found = network.cost_source_by_lane()
    if found is None:
        return columns, kinds
    for row in rows:  # origin, destination and mode lead every row and are unique per lane (validated)
        distance, source = found.get((row[0], row[1], row[2]), (None, None))
        row += [_plain(distance) if distance == distance else None, source]
    return columns + ["distance", "cost_source"], {**kinds, "distance": "number", "cost_source": "text"}


SCENARIOS_SHEET = RESULT_PREFIX + "Scenarios"


def frame_sheet(name: str, frame, kinds: dict[str, str]) -> ResultSheet:
    """A result sheet holding a DataFrame as it is: its columns as headers, one row per frame row.

    ``kinds`` gives the kind of each column (see :data:`KINDS`); columns not named are ``"number"`` when numeric,
    else ``"text"``.
    """
    columns = [str(c) for c in frame.columns]
    kinds = {c: kinds.get(c, "number" if frame[c].dtype.kind in "fiu" else "text") for c in columns}
    data = [frame[c].tolist() for c in frame.columns]
    rows = [[_plain(col[i]) for col in data] for i in range(len(frame))]
    return ResultSheet(name, columns, rows, kinds)


def scenario_sheet(comparison) -> ResultSheet:
    """``"LS Scenarios"``: the baseline and every scenario side by side (the frame of
    :func:`lanesolve.model.scenarios.compare`)."""
    money = ("total_cost", "transport", "handling", "fixed_lane", "unmet_penalty", "delta_cost")
    kinds = {**dict.fromkeys(money, "money"), "delta_pct": "percent", "unmet_units": "quantity",
             "lanes_used": "number"}
    return frame_sheet(SCENARIOS_SHEET, comparison, kinds)


# ---------------------------------------------------------------------------------------------------------------
# XML text helpers (targeted edits; no XML library round trip)
# ---------------------------------------------------------------------------------------------------------------

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

def _cell_text(value, kind: str) -> tuple[str, str | None, int]:
    """(cell body, cell type attribute, display length) for one value; body '' means blank."""
    value = _plain(value)
    if value is None:
        return "", None, 0
    if isinstance(value, bool):
        return f"<v>{int(value)}</v>", "b", 5
    if isinstance(value, numbers.Integral):
        text = str(int(value))
        return f"<v>{text}</v>", None, len(text)
    if isinstance(value, numbers.Real):
        value = float(value)
        if math.isnan(value) or value == -math.inf:
            return "", None, 0
        if value == math.inf:
            return f'<is><t>{NO_LIMIT}</t></is>', "inlineStr", len(NO_LIMIT)
        digits = DECIMALS.get(kind)
        if digits is not None:
            value = round(value, digits)
        text = repr(value + 0.0)  # + 0.0 turns -0.0 into 0.0: no "-0" on screen
        if text.endswith(".0"):
            text = text[:-2]
        return f"<v>{text}</v>", None, len(text)
    text = str(value)
    if not text.isprintable():  # printable text holds none of the forbidden characters; skip the regex
        text = clean_text(text)
    elif len(text) > MAX_CELL_TEXT:
        text = text[:MAX_CELL_TEXT]
    if not text:
        return "", None, 0
    return f'<is><t xml:space="preserve">{escape(text)}</t></is>', "inlineStr", len(text)


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


def sheet_xml(sheet: ResultSheet, table_rel_id: str) -> tuple[str, str]:
    """The worksheet XML of one result sheet and its data range (``A1:J42``).

    Returns
    -------
    (str, str)
        The worksheet part text and the table range.
    """
    headers = _header_names(sheet.columns)
    n_cols = max(len(headers), 1)
    letters = [_column_letter(i) for i in range(n_cols)]
    kinds = [sheet.kinds.get(c, "number") for c in sheet.columns] + ["number"] * (n_cols - len(sheet.columns))
    # Widths start from the header (plus room for the filter button).
    widths = [len(h) + 3 for h in headers]

    parts: list[str] = []
    header_cells = []
    for j, name in enumerate(headers):
        header_cells.append(f'<c r="{letters[j]}1" t="inlineStr"><is><t xml:space="preserve">{escape(name)}</t>'
                            f'</is></c>')
    parts.append('<row r="1">' + "".join(header_cells) + "</row>")
    digits = [DECIMALS.get(k) for k in kinds]
    # Text cells repeat (ids, modes, statuses): render each distinct text once.
    text_cache: dict[str, tuple[str, int]] = {}
    inf = math.inf
    for i, row in enumerate(sheet.rows, start=2):
        cells = []
        for j, value in enumerate(row[:n_cols]):
            # Fast paths for the common plain types; everything else goes through _cell_text.
            value_type = type(value)
            if value_type is float and value == value and -inf < value < inf:
                if digits[j] is not None:
                    value = round(value, digits[j])
                text = repr(value + 0.0)  # + 0.0 turns -0.0 into 0.0
                if text.endswith(".0"):
                    text = text[:-2]
                cells.append(f'<c r="{letters[j]}{i}"><v>{text}</v></c>')
                length = len(text)
            elif value_type is str and value:
                cached = text_cache.get(value)
                if cached is None:
                    body, _type, length = _cell_text(value, kinds[j])
                    cached = text_cache[value] = (f' t="inlineStr">{body}</c>' if body else "", length)
                if not cached[0]:
                    continue
                cells.append(f'<c r="{letters[j]}{i}"{cached[0]}')
                length = cached[1]
            else:
                body, cell_type, length = _cell_text(value, kinds[j])
                if not body:
                    continue
                type_attr = f' t="{cell_type}"' if cell_type else ""
                cells.append(f'<c r="{letters[j]}{i}"{type_attr}>{body}</c>')
            if length > widths[j]:
                widths[j] = length
        parts.append(f'<row r="{i}">' + "".join(cells) + "</row>")
    # A table needs at least one data row; an empty result keeps one blank row inside the table.
    last_row = max(len(sheet.rows) + 1, 2)
    ref = f"A1:{letters[-1]}{last_row}"
    # Width in characters, capped so a long message does not push the other columns off screen.
    cols = "".join(f'<col min="{j + 1}" max="{j + 1}" width="{min(w + 1, 80):.1f}" customWidth="1"/>'
                   for j, w in enumerate(widths))
    text = "".join([
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n',
        f'<worksheet xmlns="{MAIN_NS}" xmlns:r="{REL_NS[0]}">',
        f'<dimension ref="{ref}"/>',
        '<sheetViews><sheetView workbookViewId="0"><pane ySplit="1" topLeftCell="A2" activePane="bottomLeft" '
        'state="frozen"/><selection pane="bottomLeft" activeCell="A2" sqref="A2"/></sheetView></sheetViews>',
        '<sheetFormatPr defaultRowHeight="15"/>',
        f"<cols>{cols}</cols>",
        "<sheetData>", "".join(parts), "</sheetData>",
        '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>',
        f'<tableParts count="1"><tablePart r:id="{table_rel_id}"/></tableParts>',
        "</worksheet>",
    ])
    return text, ref


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


# ---------------------------------------------------------------------------------------------------------------
# The index parts
# ---------------------------------------------------------------------------------------------------------------

@dataclass
class _SheetEntry:
    name: str
    sheet_id: int
    rel_id: str
    tag: re.Match
    part: str | None = None
    rel_type: str = ""


def _parse_rels(text: str, base_dir: str) -> dict[str, tuple[str, str, str | None, re.Match]]:
    """Relationships by id: (type, target, resolved member name or None for external, the tag match)."""
    rels = {}
    for m in _tags(text, "Relationship"):
        attrs = _attributes(m.group(0))
        target = attrs.get("Target", "")
        member = None if attrs.get("TargetMode") == "External" else _resolve(base_dir, target)
        rels[attrs.get("Id", "")] = (attrs.get("Type", ""), target, member, m)
    return rels


def _remove_spans(text: str, spans: list[tuple[int, int]]) -> str:
    out, pos = [], 0
    for start, end in sorted(spans):
        out.append(text[pos:start])
        pos = end
    out.append(text[pos:])
    return "".join(out)


def _edit_workbook(text: str, entries: list[_SheetEntry], dropped: list[_SheetEntry],
                   new_sheets: list[tuple[str, int, str]]) -> str:
    """workbook.xml with the dropped sheets removed, the new ones appended and sheet indices renumbered."""
    dropped_positions = [i for i, e in enumerate(entries) if e in dropped]
    kept_count = len(entries) - len(dropped_positions)

    def new_position(old: int) -> int | None:
        if old in dropped_positions:
            return None
        return old - sum(1 for p in dropped_positions if p < old)

    rel_prefix = _ns_prefix(text, REL_NS)
    sheets_close = re.search(r"</((?:[\w.-]+:)?)sheets\s*>", text)
    if sheets_close is None:
        raise WriteError("xl/workbook.xml has no list of sheets; the file is not a workbook this program can "
                         "extend (open and save it in a spreadsheet program, then run again).")
    main_prefix = sheets_close.group(1)
    new_tags = []
    for name, sheet_id, rel_id in new_sheets:
        if rel_prefix:
            rid = f'{rel_prefix}:id="{rel_id}"'
        else:
            rid = f'xmlns:lsr="{REL_NS[0]}" lsr:id="{rel_id}"'
        new_tags.append(f'<{main_prefix}sheet name="{escape(name)}" sheetId="{sheet_id}" {rid}/>')

    # Edits as (start, end, replacement), applied from the end so earlier offsets stay valid.
    edits: list[tuple[int, int, str]] = [(e.tag.start(), e.tag.end(), "") for e in dropped]
    edits.append((sheets_close.start(), sheets_close.start(), "".join(new_tags)))

    if dropped_positions:
        for m in re.finditer(r"<((?:[\w.-]+:)?)definedName\b(" + _ATTRS + r")>(.*?)</\1definedName\s*>", text,
                             re.S):
            local = _attributes(m.group(2)).get("localSheetId")
            if local is None or not local.strip().isdigit():
                continue
            position = new_position(int(local))
            if position is None:
                edits.append((m.start(), m.end(), ""))  # a name local to a removed sheet goes with it
            elif position != int(local):
                attr = re.search(r"""localSheetId\s*=\s*["'][^"']*["']""", m.group(0))
                edits.append((m.start() + attr.start(), m.start() + attr.end(), f'localSheetId="{position}"'))
        for m in _tags(text, "workbookView"):
            for attr_name in ("activeTab", "firstSheet"):
                attr = re.search(attr_name + r"""\s*=\s*["'](\d+)["']""", m.group(0))
                if attr is None:
                    continue
                position = new_position(int(attr.group(1)))
                if position is None:
                    # The tab shown was an earlier result sheet: show its successor, the new summary.
                    position = kept_count if attr_name == "activeTab" and new_sheets else 0
                if position != int(attr.group(1)):
                    edits.append((m.start() + attr.start(), m.start() + attr.end(), f'{attr_name}="{position}"'))

    for start, end, replacement in sorted(edits, key=lambda e: (e[0], e[1]), reverse=True):
        text = text[:start] + replacement + text[end:]
    # An emptied list of defined names goes too (an empty element is schema-valid, but some programs object).
    text = re.sub(r"<((?:[\w.-]+:)?)definedNames\s*>\s*</\1definedNames\s*>|<(?:[\w.-]+:)?definedNames\s*/>", "",
                  text)
    return text


def _edit_rels(text: str, drop_ids: set[str], new_rels: list[tuple[str, str, str]]) -> str:
    """Relationships text without drop_ids and with (id, type, target) appended."""
    rels = _parse_rels(text, "xl")
    spans = [(m.start(), m.end()) for rid, (_t, _g, _m, m) in rels.items() if rid in drop_ids]
    text = _remove_spans(text, spans)
    close = re.search(r"</((?:[\w.-]+:)?)Relationships\s*>", text)
    prefix = close.group(1) if close else ""
    added = "".join(f'<{prefix}Relationship Id="{rid}" Type="{rtype}" Target="{escape(target)}"/>'
                    for rid, rtype, target in new_rels)
    if close is None:  # <Relationships .../> written empty
        empty = re.search(r"<((?:[\w.-]+:)?)Relationships\b(" + _ATTRS + r")/>", text)
        return text[:empty.start()] + f"<{empty.group(1)}Relationships{empty.group(2)}>" + added + \
            f"</{empty.group(1)}Relationships>" + text[empty.end():]
    return text[:close.start()] + added + text[close.start():]


def _edit_content_types(text: str, dropped_parts: set[str], new_parts: list[tuple[str, str]]) -> str:
    spans = []
    for m in _tags(text, "Override"):
        part = _attributes(m.group(0)).get("PartName", "").lstrip("/")
        if part in dropped_parts:
            spans.append((m.start(), m.end()))
    text = _remove_spans(text, spans)
    close = re.search(r"</((?:[\w.-]+:)?)Types\s*>", text)
    if close is None:
        raise WriteError("[Content_Types].xml is not readable; the file is not a workbook this program can extend "
                         "(open and save it in a spreadsheet program, then run again).")
    added = "".join(f'<{close.group(1)}Override PartName="/{part}" ContentType="{ctype}"/>'
                    for part, ctype in new_parts)
    return text[:close.start()] + added + text[close.start():]


def _edit_app(text: str, old_names: list[str], new_names: list[str], kept_names: list[str]) -> str:
    """docProps/app.xml with the sheet titles and the worksheet count updated; unchanged when not understood.

    The titles are grouped under headings (worksheets, named ranges...) whose labels depend on the program's
    language, so the worksheet group is found by content: the group holding the old result sheets, else the one
    holding a kept sheet name.
    """
    heading = re.search(r"<(?:[\w.-]+:)?HeadingPairs\b[^>]*>(.*?)</(?:[\w.-]+:)?HeadingPairs\s*>", text, re.S)
    titles = re.search(r"<(?:[\w.-]+:)?TitlesOfParts\b[^>]*>(.*?)</(?:[\w.-]+:)?TitlesOfParts\s*>", text, re.S)
    if heading is None or titles is None:
        return text
    variants = re.findall(r"<(?:[\w.-]+:)?variant\b[^>]*>(.*?)</(?:[\w.-]+:)?variant\s*>", heading.group(1), re.S)
    if len(variants) % 2:
        return text
    counts = []
    for k in range(1, len(variants), 2):
        m = re.search(r"<((?:[\w.-]+:)?)i4\s*>\s*(\d+)\s*</\1i4\s*>", variants[k])
        if m is None:
            return text
        counts.append(int(m.group(2)))
    title_tags = list(re.finditer(r"<((?:[\w.-]+:)?)lpstr\s*>(.*?)</\1lpstr\s*>|<(?:[\w.-]+:)?lpstr\s*/>",
                                  titles.group(1), re.S))
    if sum(counts) != len(title_tags):
        return text
    values = [html.unescape(t.group(2) or "") for t in title_tags]
    groups, start = [], 0
    for count in counts:
        groups.append((start, start + count))
        start += count
    old_set, kept_set = set(old_names), set(kept_names)
    target = next((g for g, (a, b) in enumerate(groups) if old_set & set(values[a:b])), None)
    if target is None:
        target = next((g for g, (a, b) in enumerate(groups) if kept_set & set(values[a:b])), None)
    if target is None:
        return text
    a, b = groups[target]
    drop = [k for k in range(a, b) if values[k] in old_set]
    new_count = counts[target] - len(drop) + len(new_names)

    # Titles: remove the dropped, add the new after the group's last title.
    inner = titles.group(1)
    base = titles.start(1)
    prefix = title_tags[0].group(1) if title_tags and title_tags[0].group(1) is not None else "vt:"
    insert_at = base + title_tags[b - 1].end()  # the group was found by a title, so it is not empty
    added = "".join(f"<{prefix}lpstr>{escape(n)}</{prefix}lpstr>" for n in new_names)
    edits = [(base + title_tags[k].start(), base + title_tags[k].end(), "") for k in drop]
    edits.append((insert_at, insert_at, added))
    vector = re.search(r"""(<(?:[\w.-]+:)?vector\b[^>]*\bsize\s*=\s*["'])(\d+)(["'])""", inner)
    if vector is None:
        return text
    edits.append((base + vector.start(2), base + vector.end(2), str(len(title_tags) - len(drop) + len(new_names))))

    # The group's count in the heading pairs.
    variant_tags = list(re.finditer(r"<(?:[\w.-]+:)?variant\b[^>]*>(.*?)</(?:[\w.-]+:)?variant\s*>",
                                    heading.group(1), re.S))
    count_variant = variant_tags[2 * target + 1]
    i4 = re.search(r"(<((?:[\w.-]+:)?)i4\s*>\s*)(\d+)(\s*</\2i4\s*>)", count_variant.group(0))
    start_i4 = heading.start(1) + count_variant.start() + i4.start(3)
    edits.append((start_i4, start_i4 + len(i4.group(3)), str(new_count)))
    for start, end, replacement in sorted(edits, key=lambda e: (e[0], e[1]), reverse=True):
        text = text[:start] + replacement + text[end:]
    return text


# ---------------------------------------------------------------------------------------------------------------
# The writer
# ---------------------------------------------------------------------------------------------------------------

def _check_sheets(sheets: list[ResultSheet]) -> None:
    seen: set[str] = set()
    for sheet in sheets:
        name = sheet.name
        hint = "result sheet names start with the prefix, have at most 31 characters and none of [ ] : * ? / \\"
        if (not name.startswith(RESULT_PREFIX) or len(name) > MAX_SHEET_NAME
                or FORBIDDEN_IN_SHEET_NAME & set(name) or name.startswith("'") or name.endswith("'")
                or _FORBIDDEN_CHARS.search(name)):
            raise WriteError(f"cannot write a result sheet named {name!r} ({hint}; prefix {RESULT_PREFIX!r})")
        if name.lower() in seen:
            raise WriteError(f"two result sheets are named {name!r} (sheet names must differ, ignoring case)")
        seen.add(name.lower())
        for kind in sheet.kinds.values():
            if kind not in KINDS:
                raise WriteError(f"result sheet {name!r}: unknown column kind {kind!r} (one of {', '.join(KINDS)})")


def _read_text(zin: zipfile.ZipFile, member: str) -> str | None:
    try:
        data = zin.read(member)
    except KeyError:
        return None
    return data.decode("utf-8-sig") if data[:3] == b"\xef\xbb\xbf" else data.decode("utf-8")


def _fresh_number(taken: set[str], pattern: str) -> int:
    n = 1
    while pattern.format(n) in taken:
        n += 1
    return n


def _build_zip(source: Path, out, sheets: list[ResultSheet], target: Path) -> None:
    """Write the new workbook zip into the open binary file ``out``."""
    try:
        zin = zipfile.ZipFile(source)
    except zipfile.BadZipFile as exc:
        raise WriteError(f"{source} is not a workbook (not a zip file); results were not written") from exc
    with zin:
        infos = [i for i in zin.infolist() if not i.is_dir()]
        members = {i.filename for i in infos}
        workbook = _read_text(zin, WORKBOOK)
        wb_rels_path = _rels_path(WORKBOOK)
        wb_rels = _read_text(zin, wb_rels_path)
        content_types = _read_text(zin, CONTENT_TYPES)
        if workbook is None or wb_rels is None or content_types is None:
            raise WriteError(f"{source} is not an Excel workbook (xl/workbook.xml or its index is missing); results "
                             "were not written (save it as .xlsx in a spreadsheet program)")
        is_macro = MACRO_MAIN_TYPE in content_types
        suffix = target.suffix.lower()
        if is_macro and suffix != ".xlsm" or not is_macro and suffix == ".xlsm":
            want = ".xlsm" if is_macro else ".xlsx"
            raise WriteError(f"cannot write {target.name}: the workbook {'has' if is_macro else 'has no'} macros, so "
                             f"the file name must end in {want} (spreadsheet programs refuse a mismatch)")

        rels = _parse_rels(wb_rels, "xl")
        entries: list[_SheetEntry] = []
        for m in _tags(workbook, "sheet"):
            attrs = _attributes(m.group(0))
            rel_id = next((v for k, v in attrs.items() if k.endswith(":id")), "")
            rel = rels.get(rel_id)
            sheet_id = int(attrs.get("sheetId", "0")) if attrs.get("sheetId", "0").isdigit() else 0
            entries.append(_SheetEntry(attrs.get("name", ""), sheet_id, rel_id, m,
                                       rel[2] if rel else None, rel[0] if rel else ""))
        dropped = [e for e in entries if e.name.startswith(RESULT_PREFIX) and e.rel_type.endswith("/worksheet")]
        kept = [e for e in entries if e not in dropped]
        kept_lower = {e.name.lower(): e.name for e in kept}
        for sheet in sheets:
            if sheet.name.lower() in kept_lower:
                raise WriteError(f"cannot add the result sheet {sheet.name!r}: the workbook already has a sheet "
                                 f"named {kept_lower[sheet.name.lower()]!r} (sheet names ignore case); rename that "
                                 "sheet and run again")

        # Members of the earlier result sheets: worksheet part, its rels, its tables.
        dropped_parts: set[str] = set()
        for entry in dropped:
            if entry.part is None:
                continue
            dropped_parts.add(entry.part)
            sheet_rels_path = _rels_path(entry.part)
            sheet_rels = _read_text(zin, sheet_rels_path)
            if sheet_rels is not None:
                dropped_parts.add(sheet_rels_path)
                for rtype, _target, member, _m in _parse_rels(sheet_rels, posixpath.dirname(entry.part)).values():
                    if member and rtype.endswith("/table"):
                        dropped_parts.add(member)
        remaining = members - dropped_parts

        # Names already used by remaining tables and defined names (table names share the defined-name space).
        taken_names: set[str] = set()
        table_ids: set[int] = set()
        for member in remaining:
            if member.startswith("xl/tables/") and member.endswith(".xml"):
                head = zin.read(member)[:4096].decode("utf-8", "replace")
                table_tag = _tags(head, "table")
                if table_tag:
                    attrs = _attributes(table_tag[0].group(0))
                    taken_names.update(attrs.get(k, "").lower() for k in ("name", "displayName"))
                    if attrs.get("id", "").isdigit():
                        table_ids.add(int(attrs["id"]))
        for m in _tags(workbook, "definedName"):
            taken_names.add(_attributes(m.group(0)).get("name", "").lower())

        used_rel_ids = set(rels)
        next_sheet_id = max([e.sheet_id for e in entries] + [0]) + 1
        next_table_id = max(table_ids | {0}) + 1
        new_members: list[tuple[str, str]] = []
        new_sheet_tags: list[tuple[str, int, str]] = []
        new_rels: list[tuple[str, str, str]] = []
        new_types: list[tuple[str, str]] = []
        taken_members = set(remaining)
        for sheet in sheets:
            n = _fresh_number(taken_members, "xl/worksheets/sheet{}.xml")
            sheet_part = f"xl/worksheets/sheet{n}.xml"
            t = _fresh_number(taken_members, "xl/tables/table{}.xml")
            table_part = f"xl/tables/table{t}.xml"
            taken_members.update((sheet_part, table_part, _rels_path(sheet_part)))
            body, ref = sheet_xml(sheet, "rId1")
            headers = _header_names(sheet.columns)
            table = table_xml(next_table_id, _table_name(sheet.name, taken_names), headers, ref)
            next_table_id += 1
            sheet_rels = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns='
                          '"http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" '
                          f'Type="{TABLE_REL}" Target="../tables/table{t}.xml"/></Relationships>')
            new_members += [(sheet_part, body), (_rels_path(sheet_part), sheet_rels), (table_part, table)]
            rid = _fresh_number(used_rel_ids, "rId{}")
            used_rel_ids.add(f"rId{rid}")
            new_rels.append((f"rId{rid}", WORKSHEET_REL, f"worksheets/sheet{n}.xml"))
            new_sheet_tags.append((sheet.name, next_sheet_id, f"rId{rid}"))
            next_sheet_id += 1
            new_types += [(sheet_part, WORKSHEET_TYPE), (table_part, TABLE_TYPE)]

        edited = {
            WORKBOOK: _edit_workbook(workbook, entries, dropped, new_sheet_tags),
            wb_rels_path: _edit_rels(wb_rels, {e.rel_id for e in dropped}, new_rels),
            CONTENT_TYPES: _edit_content_types(content_types, dropped_parts, new_types),
        }
        app = _read_text(zin, APP)
        if app is not None:
            edited[APP] = _edit_app(app, [e.name for e in dropped], [s.name for s in sheets],
                                    [e.name for e in kept])

        with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as zout:
            for info in infos:
                if info.filename in dropped_parts:
                    continue
                copy = zipfile.ZipInfo(info.filename, date_time=info.date_time)
                copy.compress_type = zipfile.ZIP_DEFLATED
                copy.external_attr = info.external_attr
                if info.filename in edited:
                    zout.writestr(copy, edited[info.filename].encode("utf-8"))
                    continue
                copy.file_size = info.file_size  # lets zipfile choose ZIP64 up front for huge members
                with zin.open(info) as src, zout.open(copy, "w") as dst:
                    shutil.copyfileobj(src, dst, 1 << 20)
            now = time.localtime()[:6]
            for name, text in new_members:
                info = zipfile.ZipInfo(name, date_time=now)
                info.compress_type = zipfile.ZIP_DEFLATED
                info.external_attr = 0o644 << 16  # rw-r--r-- for tools that unpack the zip
                zout.writestr(info, text.encode("utf-8"))


def write_results(source: str | Path, target: str | Path, sheets: list[ResultSheet],
                  before_replace: Callable[[], None] | None = None) -> None:
    """Write result sheets into a copy of the source workbook and move it onto the target atomically.

    Parameters
    ----------
    source : path-like
        The workbook read (.xlsx or .xlsm). Never modified unless it is also the target.
    target : path-like
        Where the workbook with results goes; may equal ``source``. Its suffix must match the source's kind
        (.xlsm for a workbook with macros, .xlsx otherwise).
    sheets : list of ResultSheet
        The sheets to write, in tab order, after the workbook's own sheets. Earlier sheets whose name starts with
        :data:`~lanesolve.contract.RESULT_PREFIX` are replaced; every other sheet and part is kept byte for byte.
    before_replace : callable, optional
        Passed to :func:`lanesolve.write.atomic.replacing`: a last check before the new file replaces the target.

    Raises
    ------
    WriteError
        The source is not a workbook; a result sheet name is invalid or clashes with a sheet of the workbook
        (names ignore case); the target's suffix does not match; the target folder is not writable or the target
        is locked (open in a spreadsheet program); any failure while writing. The target is then unchanged and no
        temporary file is left behind.

    Notes
    -----
    Parts referenced only from an earlier result sheet other than its tables (a drawing someone added to it) stay
    in the file, unreferenced; spreadsheet programs ignore such parts.
    """
    source, target = Path(source), Path(target)
    _check_sheets(sheets)
    if not source.is_file():
        raise WriteError(f"cannot write results: the workbook {source} does not exist any more")
    # The new file keeps the permissions of the file it replaces (or of the source, for a new --output).
    with atomic.replacing(target, "the results to", mode_from=target if target.exists() else source,
                          hint="close the workbook in the spreadsheet program, or choose another --output "
                               "folder, and run again", before_replace=before_replace) as handle:
        _build_zip(source, handle, sheets, target)
