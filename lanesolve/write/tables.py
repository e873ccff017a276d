"""The result sheets as plain tables: which sheets a run writes, their columns, rows and column kinds.

Every function here reads only the :class:`~lanesolve.model.network.Network`, the
:class:`~lanesolve.model.result.Result` and the run facts and returns :class:`ResultSheet` objects; turning them
into worksheet XML is :mod:`lanesolve.write.sheetxml`'s job and splicing them into the workbook zip is
:mod:`lanesolve.write.writeback`'s.

Values: ``None`` and NaN are blank cells; ``+inf`` (a capacity without limit) is the text ``"no limit"``, everywhere.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field

import pandas as pd

from lanesolve.contract import RESULT_PREFIX
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

    Every marginal cost and capacity value is listed; of the unused lanes' reduced costs, the
    :data:`MAX_REDUCED_COST_ROWS` smallest (the lanes closest to being worth using), then one row counting the rest.
    A figure that is not unique (a degenerate plan) has a blank value and ``unique`` "no"; its sentence says why.
    With no figures (a plan not proven optimal, or the LP re-solve failed) the sheet holds one row saying so.
    """
    columns = ["figure", "item", "value", "unique", "basis", "in plain words"]
    kinds = {"figure": "text", "item": "text", "value": "money", "unique": "text", "basis": "text",
             "in plain words": "text"}
    frame = result.sensitivity
    reduced = frame["figure"] == "reduced_cost" if len(frame) else None
    left_out = 0
    if reduced is not None and int(reduced.sum()) > MAX_REDUCED_COST_ROWS:
        lanes = frame[reduced]
        # Unique figures first, smallest first; a stable sort keeps the model's order among equals.
        order = lanes.assign(_unsure=~lanes["unique"].astype(bool)).sort_values(["_unsure", "value"], kind="stable")
        left_out = len(lanes) - MAX_REDUCED_COST_ROWS
        frame = pd.concat([frame[~reduced], order.iloc[:MAX_REDUCED_COST_ROWS].drop(columns="_unsure")])
    rows = []
    for row in frame.itertuples(index=False):
        rows.append([FIGURE_WORDS.get(row.figure, str(row.figure).replace("_", " ")), _plain(row.item),
                     _plain(row.value) if bool(row.unique) else None, "yes" if bool(row.unique) else "no",
                     _plain(row.basis), _plain(row.text)])
    if left_out:
        rows.append([FIGURE_WORDS.get("reduced_cost", "reduced cost"), None, None, None, None,
                     f"... and {left_out:,} more unused lanes, each further from being worth using than those above "
                     "(lanesolve solve --json lists every figure)."])
    if not rows:
        why = ("the plan is not proven optimal, so its marginal costs could mislead"
               if result.status.value != "optimal" else "the figures could not be computed for this plan")
        rows.append(["none", None, None, None, None, f"No sensitivity figures: {why}."])
    return ResultSheet(SENSITIVITY_SHEET, columns, rows, kinds)


def why_no_plan_sheet(network, result) -> ResultSheet:
    """``"LS Why no plan"``: the diagnosis of an infeasible result (:class:`lanesolve.model.diagnose.Diagnosis`).

    One row per finding: causes found before solving, customers who would go short (and by how much), lanes,
    depots and hubs used to their limit with the bottleneck (the minimum cut) marked, notes, and the internal
    penalty per unit short the re-solve used. Without a diagnosis the result's messages are listed as reasons.
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
    rows += [["cause found before solving", *blank, str(c)] for c in diagnosis.structural]
    for r in diagnosis.short.itertuples(index=False):
        rows.append(["customer short", _plain(r.customer), _plain(r.demand), _plain(r.short), None, None, None, None,
                     f"would be {float(r.short):.6g} {units} short of its demand of {float(r.demand):.6g} {units}"])
    for r in diagnosis.saturated.itertuples(index=False):
        cut = bool(r.bottleneck)
        rows.append([f"{r.kind} at its limit", _plain(r.item), None, None, _plain(r.capacity), _plain(r.used),
                     "yes" if cut else "no", None,
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
