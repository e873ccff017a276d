"""The result sheets as plain tables: which sheets a run writes, their columns, rows and column kinds.

Every function here reads only the :class:`~lanesolve.model.network.Network`, the
:class:`~lanesolve.model.result.Result` and the run facts and returns :class:`ResultSheet` objects; turning them
into worksheet XML is :mod:`lanesolve.write.sheetxml`'s job and splicing them into the workbook zip is
:mod:`lanesolve.write.writeback`'s.

Headers are plain words with their unit or currency in brackets ("Flow (pallets)", "Variable cost (EUR)"); each
column has a kind (:data:`KINDS`) that picks its number format, so cells keep full precision and the format does
the rounding (rate x flow = cost holds in the cells). Values: ``None``, NaN and infinity are blank cells; a column
where blank means "no limit" says so in its header.
"""

from __future__ import annotations

import itertools
import math
import numbers
from dataclasses import dataclass, field

import pandas as pd

from lanesolve.contract import RESULT_PREFIX
from lanesolve.model.result import CAUTION, COST_LABELS, cost_order, node_decisions, singular

#: The words for a capacity without limit. A result sheet leaves such a cell blank and says in the column's header
#: that blank means this (text in a number column would break sums, filters and charts).
NO_LIMIT = "no limit"

SUMMARY_SHEET = RESULT_PREFIX + "Summary"
FLOWS_SHEET = RESULT_PREFIX + "Lane flows"
NODES_SHEET = RESULT_PREFIX + "Nodes"
DESIGN_SHEET = RESULT_PREFIX + "Depots and hubs"
TRIPS_SHEET = RESULT_PREFIX + "Trips"
SENSITIVITY_SHEET = RESULT_PREFIX + "Sensitivity"
WHY_SHEET = RESULT_PREFIX + "Why no plan"
SCENARIOS_SHEET = RESULT_PREFIX + "Scenarios"
#: The sheets of several products, emissions and the trade-off (built by :mod:`lanesolve.write.goods_tables`).
PRODUCT_FLOWS_SHEET = RESULT_PREFIX + "Product flows"
PRODUCT_NODES_SHEET = RESULT_PREFIX + "Product nodes"
EMISSIONS_SHEET = RESULT_PREFIX + "Emissions"
LANE_EMISSIONS_SHEET = RESULT_PREFIX + "Lane emissions"
TRADEOFF_SHEET = RESULT_PREFIX + "Trade-off"
CARRIERS_SHEET = RESULT_PREFIX + "Carriers"  # built in lanesolve.write.carrier_tables
CHANGES_SHEET = RESULT_PREFIX + "Changes"

#: Every result sheet name lanesolve writes (or wrote in earlier versions); see
#: :func:`lanesolve.write.writeback.result_sheet_clashes`.
KNOWN_SHEETS = (SUMMARY_SHEET, FLOWS_SHEET, NODES_SHEET, DESIGN_SHEET, TRIPS_SHEET, SENSITIVITY_SHEET, WHY_SHEET,
                SCENARIOS_SHEET, CARRIERS_SHEET, CHANGES_SHEET, PRODUCT_FLOWS_SHEET, PRODUCT_NODES_SHEET,
                EMISSIONS_SHEET, LANE_EMISSIONS_SHEET, TRADEOFF_SHEET)

#: The summary row whose label marks an LS Summary sheet as lanesolve's own (the fingerprint that lets a workbook
#: solved before result sheets carried a mark be rerun; see :mod:`lanesolve.write.writeback`).
FINGERPRINT_ITEM = "lanesolve version"

#: Column kinds and the number format each gets (OOXML number format codes, ECMA-376 Part 1, 18.8.31). A
#: ``percent`` cell holds a fraction (0.5) that the format shows as 50.0 %; ``text`` and ``number`` get no format.
NUMBER_FORMATS = {
    "quantity": "#,##0.0#",
    "money": "#,##0.00",
    "rate": "#,##0.00##",  # 2 to 4 decimals: a rounded rate next to its cost still multiplies out
    "percent": "0.0%",
    "distance": "#,##0.0",
    "count": "#,##0",
    "seconds": "0.000",
}
KINDS = ("text", "number", *NUMBER_FORMATS)

#: Labels of the cost components on the sheets (the one set every report uses).
COST_WORDS = COST_LABELS

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
        Cell values: str, int, float, bool or None. NaN, None and infinities are blank.
    kinds : dict
        Column name -> one of :data:`KINDS`; picks the column's number format (:data:`NUMBER_FORMATS`). Columns
        not listed are ``"number"`` (no format).
    cell_kinds : dict
        ``(row index, column index)`` -> kind, for a cell whose kind differs from its column's (the summary's
        value column holds money, counts and text).
    """

    name: str
    columns: list[str]
    rows: list[list] = field(default_factory=list)
    kinds: dict[str, str] = field(default_factory=dict)
    cell_kinds: dict[tuple[int, int], str] = field(default_factory=dict)


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


_PLAIN_TYPES = frozenset({str, int, bool, type(None)})


def _plain_column(values: list) -> list:
    """:func:`_plain` of every value of a column (a list from ``Series.tolist()``), the common types at once."""
    types = set(map(type, values))
    if types <= _PLAIN_TYPES:
        return list(values)
    if types <= _PLAIN_TYPES | {float}:
        return [None if value != value else value for value in values]  # only NaN differs from itself
    return list(map(_plain, values))


def _finite_column(values: list) -> list:
    """Each value of a column as a finite number, or None (NaN, infinities, text, None): :func:`_percent`'s rule,
    the common case of a float column at once."""
    if set(map(type, values)) <= {float}:
        return [value if -math.inf < value < math.inf else None for value in values]
    return list(map(_percent, values))


def _finite_numbers(values: list) -> list:
    """Each value of a column that is a finite int or float, else None (NaN, infinities, text, None)."""
    if set(map(type, values)) <= {float}:
        return [value if -math.inf < value < math.inf else None for value in values]
    return [value if isinstance(value, (int, float)) and math.isfinite(value) else None
            for value in map(_plain, values)]


def _rows(*columns) -> list[list]:
    """Rows of equal-length columns (each a list, or an iterator such as ``itertools.repeat``)."""
    return list(map(list, zip(*columns)))


def _percent(fraction) -> float | None:
    """A utilisation fraction as it goes in a ``percent`` cell (the fraction itself; the format shows 50.0 %);
    None when there is none (no limit, NaN)."""
    fraction = _plain(fraction)
    if fraction is None or not isinstance(fraction, numbers.Real) or not math.isfinite(fraction):
        return None
    return float(fraction)


def cost_keys(result) -> list[str]:
    """The keys of ``result.cost_breakdown`` in report order (:func:`lanesolve.model.result.cost_order`)."""
    return cost_order(result.cost_breakdown)


@dataclass(frozen=True)
class Labels:
    """The unit words of one workbook, for headers: ``Labels("pallets", "EUR")``."""

    units: str = "units"
    currency: str = ""

    @classmethod
    def of(cls, settings) -> "Labels":
        return cls(str(getattr(settings, "units", "") or "units"), str(getattr(settings, "currency", "") or ""))

    def money(self, words: str) -> str:
        """``"Variable cost (EUR)"``; without a currency label just the words."""
        return f"{words} ({self.currency})" if self.currency else words

    def quantity(self, words: str, no_limit: bool = False) -> str:
        """``"Flow (pallets)"``; with ``no_limit`` the header says that a blank cell means no limit."""
        return f"{words} ({self.units}; blank = {NO_LIMIT})" if no_limit else f"{words} ({self.units})"

    def rate(self, words: str) -> str:
        """``"Rate (EUR per pallet)"``."""
        money = f"{self.currency} " if self.currency else ""
        return f"{words} ({money}per {singular(self.units)})"


def _summary_rows(network, result, info, labels: Labels) -> tuple[list[list], dict[tuple[int, int], str]]:
    """The LS Summary rows (item, value) and the kind of each value cell."""
    settings = network.settings
    inactive = int((~network.lanes["active"].astype(bool)).sum()) if len(network.lanes) else 0
    no_decisions = "not applicable (no yes/no decisions)"
    rows: list[tuple[str, object, str]] = [
        ("Status", result.status.value, "text"),
        (labels.money("Total cost"), _plain(result.total_cost), "money"),
    ]
    # The cost lines every report shows: the same components, amounts and order as the chart and the HTML table.
    rows += [(labels.money(line.label), line.amount, "money") for line in result.cost_lines()]
    gap, bound = _plain(result.mip_gap), _plain(result.best_bound)
    rows += [
        ("Units", settings.units or None, "text"),
        ("Currency", settings.currency or None, "text"),
        ("Solver", result.solver or None, "text"),
        ("Optimality gap", no_decisions if gap is None else float(gap), "text" if gap is None else "percent"),
        (labels.money("Best bound"), no_decisions if bound is None else float(bound),
         "text" if bound is None else "money"),
        ("Solve time (s)", float(result.solve_seconds), "seconds"),
        ("Input file", info.input_path, "text"),
        ("Input SHA-256", info.checksum, "text"),
        (FINGERPRINT_ITEM, info.version, "text"),
        ("Run at", info.started, "text"),
        ("Lanes used", int(len(result.flows)), "count"),
        ("Inactive lanes left out", inactive, "count"),
        ("Customers short", int(len(result.unmet)), "count"),
    ]
    diagnosis = result.diagnosis
    if diagnosis is not None and getattr(diagnosis, "total_short", None) is not None:
        # Without a plan, the shortfall is the diagnosis's (the least possible), not the empty plan's.
        rows[-1] = ("Customers short", int(len(diagnosis.short)), "count")
        rows.append(("Total shortfall", float(diagnosis.total_short), "quantity"))
    rows += [("Message", str(message), "text") for message in result.messages]
    rows.append(("Caution", CAUTION, "text"))
    return [[item, value] for item, value, _ in rows], {(i, 1): kind for i, (_, _, kind) in enumerate(rows)}


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
    >>> result_sheets(net, Result(SolveStatus.INFEASIBLE), info)[1].columns[:5]
    ['Origin', 'Destination', 'Mode', 'Flow (units)', 'Rate (per unit)']
    """
    labels = Labels.of(network.settings)
    summary_rows, summary_kinds = _summary_rows(network, result, info, labels)
    summary = ResultSheet(SUMMARY_SHEET, ["Item", "Value"], summary_rows, {"Item": "text", "Value": "number"},
                          summary_kinds)

    spec = [("Origin", "text"), ("Destination", "text"), ("Mode", "text"), (labels.quantity("Flow"), "quantity"),
            (labels.rate("Rate"), "rate"), (labels.money("Variable cost"), "money"),
            (labels.money("Fixed charge"), "money"), (labels.quantity("Capacity", no_limit=True), "quantity"),
            ("Utilisation", "percent"), ("Status", "text")]
    flow_rows: list[list] = []
    flows = result.flows
    if len(flows):
        columns = [_plain_column(flows[c].tolist()) for c in ("origin", "destination", "mode", "flow",
                                                               "cost_per_unit", "variable_cost", "fixed_charge",
                                                               "capacity")]
        flow_rows = _rows(*columns, _finite_column(flows["utilisation"].tolist()), itertools.repeat("used"))
    lanes = network.lanes
    if len(lanes):
        inactive = lanes[~lanes["active"].astype(bool)]
        for lane in inactive.itertuples(index=False):
            flow_rows.append([lane.origin, lane.destination, lane.mode, 0.0, _plain(lane.cost_per_unit), 0.0, 0.0,
                              _plain(lane.capacity), None, "inactive, left out"])
    spec = _with_cost_sources(network, spec, flow_rows)
    flows_sheet = ResultSheet(FLOWS_SHEET, [c for c, _ in spec], flow_rows, dict(spec))

    node_spec = [("Node", "text"), ("Kind", "text"), (labels.quantity("Supply"), "quantity"),
                 (labels.quantity("Demand"), "quantity"), (labels.quantity("Shipped"), "quantity"),
                 (labels.quantity("Received"), "quantity"), (labels.quantity("Unmet"), "quantity"),
                 (labels.quantity("Capacity", no_limit=True), "quantity"), (labels.quantity("Throughput"), "quantity"),
                 ("Utilisation", "percent")]
    node_rows: list[list] = []
    nodes = result.nodes
    if len(nodes):
        columns = [_plain_column(nodes[c].tolist()) for c in ("node", "kind", "supply", "demand", "shipped",
                                                               "received", "unmet", "capacity", "throughput")]
        node_rows = _rows(*columns, _finite_column(nodes["utilisation"].tolist()))
    nodes_sheet = ResultSheet(NODES_SHEET, [c for c, _ in node_spec], node_rows, dict(node_spec))
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
        or other design decisions, :attr:`Network.has_design`), ``"LS Trips"`` (a plan with lanes run in whole
        trips), ``"LS Sensitivity"`` (every plan; says so when no figures were computed) and ``"LS Why no plan"``
        (an infeasible result). Sheets a run does not write are still dropped from the workbook, as every earlier
        result sheet is (see :func:`lanesolve.write.writeback.write_results`).
    """
    labels = Labels.of(network.settings)
    sheets = []
    if result.status.has_plan:
        if network.has_design and len(result.open_nodes):
            sheets.append(design_sheet(result, labels))
        if len(result.trips):
            sheets.append(trips_sheet(result, labels))
        sheets.append(sensitivity_sheet(result))
    elif result.status.value == "infeasible":
        sheets.append(why_no_plan_sheet(network, result))
    return sheets


def design_sheet(result, labels: Labels = Labels()) -> ResultSheet:
    """``"LS Depots and hubs"``: every depot and hub with the status given, the plan's decision and its use.

    Throughput is the net quantity shipped for a depot (what its supply bounds) and the quantity passing through
    for a hub; capacity is the depot's supply or the hub's capacity (see :func:`lanesolve.model.solve.node_balance`).
    """
    spec = [("Depot or hub", "text"), ("Kind", "text"), ("Status given", "text"), ("Decision", "text"),
            (labels.money("Fixed charge paid"), "money"), (labels.quantity("Throughput"), "quantity"),
            (labels.quantity("Capacity", no_limit=True), "quantity"), ("Utilisation", "percent")]
    rows = []
    for node in node_decisions(result).itertuples(index=False):
        throughput, capacity, utilisation = node.used, node.limit, _percent(node.utilisation)
        rows.append([_plain(node.node), _plain(node.kind), _plain(node.status), "open" if node.open else "closed",
                     _plain(node.fixed_charge), _plain(throughput), _plain(capacity), utilisation])
    return ResultSheet(DESIGN_SHEET, [c for c, _ in spec], rows, dict(spec))


def trips_sheet(result, labels: Labels = Labels()) -> ResultSheet:
    """``"LS Trips"``: lanes run in whole trips, with the trips, their cost and how full the trucks are.

    The last truck carries what is left after the full ones: ``flow - (trips - 1) * trip_capacity``; the average
    fill is ``flow / (trips * trip_capacity)``.
    """
    spec = [("Origin", "text"), ("Destination", "text"), ("Mode", "text"), (labels.quantity("Flow"), "quantity"),
            (f"Trip capacity ({labels.units} per trip)", "quantity"), ("Trips", "count"),
            (labels.money("Cost per trip"), "money"), (labels.money("Trip cost"), "money"),
            ("Last truck fill", "percent"), ("Average fill", "percent")]
    rows = []
    for lane in result.trips.itertuples(index=False):
        flow, size, trips = float(lane.flow), float(lane.trip_capacity), int(lane.trips)
        last = average = None
        if trips > 0 and size > 0:
            last = _percent((flow - (trips - 1) * size) / size)
            average = _percent(flow / (trips * size))
        rows.append([_plain(lane.origin), _plain(lane.destination), _plain(lane.mode), flow, size, trips,
                     _plain(lane.cost_per_trip), _plain(lane.trip_cost), last, average])
    return ResultSheet(TRIPS_SHEET, [c for c, _ in spec], rows, dict(spec))


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
    # Unused lanes the figures keep as numbers only (Result.more_figures) follow the rows here: counted, not listed.
    more = result.figures_beyond()
    left_out = 0 if more is None else len(more)
    if reduced is not None and int(reduced.sum()) > MAX_REDUCED_COST_ROWS:
        lanes = frame[reduced]
        # Nearest to paying first; a lane no plan can use (inf) last; a stable sort keeps the model's order.
        order = lanes.sort_values("value_up" if "value_up" in lanes else "value", kind="stable", na_position="last")
        left_out += len(lanes) - MAX_REDUCED_COST_ROWS
        frame = pd.concat([frame[~reduced], order.iloc[:MAX_REDUCED_COST_ROWS]])

    rows = []
    if len(frame):
        # A column at a time; rows whose figure is "none" (no figures, and why) are rewritten after.
        figures = frame["figure"].tolist()
        words = {f: FIGURE_WORDS.get(f, str(f).replace("_", " ")) for f in set(figures)}
        unique = [f != "none" and bool(u) for f, u in zip(figures, frame["unique"].tolist())]
        value = frame["value"].tolist()
        up = frame["value_up"].tolist() if "value_up" in frame else value
        down = frame["value_down"].tolist() if "value_down" in frame else value
        basis, text = _plain_column(frame["basis"].tolist()), _plain_column(frame["text"].tolist())
        rows = _rows(map(words.__getitem__, figures), _plain_column(frame["item"].tolist()),
                     [v if u else None for v, u in zip(_finite_numbers(value), unique)], _finite_numbers(up),
                     _finite_numbers(down), ["yes" if u else "no" for u in unique], basis, text)
        for i, figure in enumerate(figures):
            if figure == "none":
                rows[i] = ["none", None, None, None, None, None, basis[i], text[i]]
    if left_out:
        rows.append([FIGURE_WORDS.get("reduced_cost", "reduced cost"), None, None, None, None, None, None,
                     f"... and {left_out:,} more unused lanes, each further from being worth using than those above "
                     "(lanesolve solve --json --all-figures lists every figure)."])
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


def _with_cost_sources(network, spec: list[tuple[str, str]], rows: list[list]) -> list[tuple[str, str]]:
    """Add the distance and the cost source to the lane flow rows (in place) when any lane has a distance or a cost
    computed from one, so the planner sees where each cost came from; otherwise the sheet keeps its columns."""
    found = network.cost_source_by_lane()
    if found is None:
        return spec
    for row in rows:  # origin, destination and mode lead every row and are unique per lane (validated)
        distance, source = found.get((row[0], row[1], row[2]), (None, None))
        row += [_plain(distance) if distance == distance else None, source]
    unit = getattr(network.settings, "distance_unit", "") or "km"
    return spec + [(f"Distance ({unit})", "distance"), ("Cost source", "text")]


def frame_sheet(name: str, frame, kinds: dict[str, str], headers: dict[str, str] | None = None) -> ResultSheet:
    """A result sheet holding a DataFrame as it is: one row per frame row.

    ``kinds`` gives the kind of each column (see :data:`KINDS`); columns not named are ``"number"`` when numeric,
    else ``"text"``. ``headers`` maps a column to its header text (the column name where not given).
    """
    headers = headers or {}
    names = [str(c) for c in frame.columns]
    columns = [headers.get(c, c) for c in names]
    kinds = {headers.get(c, c): kinds.get(c, "number" if frame[c].dtype.kind in "fiu" else "text") for c in names}
    rows = (_rows(*[_plain_column(frame[c].tolist()) for c in frame.columns]) if len(frame.columns)
            else [[] for _ in range(len(frame))])
    return ResultSheet(name, columns, rows, kinds)


def scenario_sheet(comparison, settings=None) -> ResultSheet:
    """``"LS Scenarios"``: the baseline and every scenario side by side (the frame of
    :func:`lanesolve.model.comparison.compare`), with plain-word headers.

    Every cost component the comparison has is a column, so the cost columns add up to the total cost. The change
    in percent is written as a fraction with a percent format.
    """
    labels = Labels.of(settings)
    frame = comparison.copy()
    if "delta_pct" in frame:
        frame["delta_pct"] = frame["delta_pct"] / 100.0  # the format shows the fraction as a percentage
    cost_columns = [c for c in frame.columns if c in COST_LABELS]
    headers = {"scenario": "Scenario", "status": "Status", "total_cost": labels.money("Total cost"),
               **{c: labels.money(COST_LABELS[c]) for c in cost_columns},
               "delta_cost": labels.money("Change in cost"), "delta_pct": "Change in cost (%)",
               "unmet_units": labels.quantity("Unmet demand"), "lanes_used": "Lanes used",
               "lanes_opened": "Lanes now used", "lanes_closed": "Lanes no longer used",
               "nodes_opened": "Depots and hubs now used", "nodes_closed": "Depots and hubs no longer used",
               "largest_shifts": labels.quantity("Largest volume shifts")}
    kinds = {**dict.fromkeys(["total_cost", *cost_columns, "delta_cost"], "money"), "delta_pct": "percent",
             "unmet_units": "quantity", "lanes_used": "count"}
    return frame_sheet(SCENARIOS_SHEET, frame, kinds, headers)
