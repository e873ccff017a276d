"""Stage "report": the HTML summary a planner can read in a browser or a mail program and forward as is.

The page is one self-contained file: CSS inline in the head, charts as ``data:`` URIs of SVG drawn by
:mod:`lanesolve.report.charts`, no scripts, no remote resources, so it survives being attached to a mail and opened offline.
:mod:`lanesolve.report.mail` renders the same template with ``cid:`` references to PNG parts instead. It is rendered from ``templates/summary.html.j2`` (installed
as the package :mod:`lanesolve.templates`) with autoescaping on, so names from the workbook -- a customer called
``<script>`` or ``=SUM(A1)`` -- appear as plain text.

This module reads only the plain data handed to it (:class:`~lanesolve.model.network.Network`,
:class:`~lanesolve.model.result.Result`, the run facts and the warnings); it never talks to the solver.
"""

from __future__ import annotations

import functools
import math
import os
import stat
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Callable

import numpy as np
import pandas as pd

from lanesolve.write import atomic
from lanesolve.report import advice
from lanesolve.report.formats import (  # noqa: F401  (the formats stay importable from here)
    _finite, format_money, format_quantity, format_rate, format_share)
from lanesolve.report import charts as _charts
from lanesolve.report import emission_report
from lanesolve.report.utilisation import NODE_TABLE_ROWS, node_table
from lanesolve.model.result import (  # noqa: F401  (COST_LABELS kept importable from here)
    CAUTION, COST_LABELS, Result, SolveStatus, cost_order, node_decisions, singular)
from lanesolve.model.sensitivity import FIXED_BASIS, TOP_FEW, money_words, top_few

if TYPE_CHECKING:  # imported for type hints only: pipeline imports this module
    import jinja2
    from lanesolve.model.network import Network
    from lanesolve.runinfo import RunInfo

TEMPLATE_NAME = "summary.html.j2"


#: How many lanes the "lanes used" table lists before it says "and N more"; the result sheets hold them all.
TOP_LANES = 25


STATUS_TEXT = {
    SolveStatus.OPTIMAL: "Optimal plan",
    SolveStatus.FEASIBLE: "Plan found, not proven optimal",
    SolveStatus.INFEASIBLE: "No feasible plan",
    SolveStatus.UNBOUNDED: "Unbounded (no finite cheapest plan)",
    SolveStatus.NOT_SOLVED: "Not solved",
}


def _bar(value: object) -> float:
    """Width in percent (0-100) of a CSS bar for a fraction; over-full values are drawn full."""
    number = _finite(value)
    if number is None:
        return 0.0
    return round(max(0.0, min(number, 1.0)) * 100, 1)


# --------------------------------------------------------------------------------------------- view model


def cost_keys(result: Result) -> list[str]:
    """The keys of ``result.cost_breakdown`` in report order (:func:`lanesolve.model.result.cost_order`)."""
    return cost_order(result.cost_breakdown)


def _cost_rows(result: Result, currency: str) -> list[dict]:
    """The cost table: :meth:`Result.cost_lines`, formatted (the chart beside it draws the same lines)."""
    return [{"key": line.key, "label": line.label, "amount": format_money(line.amount, currency),
             "share": format_share(line.share), "bar": _bar(line.share)} for line in result.cost_lines()]


def _lane_rows(result: Result, units: str, currency: str) -> tuple[list[dict], int]:
    flows = result.flows
    if flows.empty:
        return [], 0
    total_cost = flows["variable_cost"].astype(float).to_numpy() + flows["fixed_charge"].astype(float).to_numpy()
    count = len(flows)
    if count > TOP_LANES and not np.isnan(total_cost).any():
        # Only the lanes that can be among the first TOP_LANES are sorted: every lane costing at least the
        # TOP_LANES-th largest cost, in their order, so the stable sort below puts the same lanes first.
        kth = np.partition(total_cost, count - TOP_LANES)[count - TOP_LANES]
        among = total_cost >= kth
        flows, total_cost = flows[among], total_cost[among]
    flows = flows.assign(total_cost=total_cost)
    # Ties broken by names so the page is the same for the same plan.
    flows = flows.sort_values(["total_cost", "origin", "destination", "mode"],
                              ascending=[False, True, True, True], kind="stable")
    rows = []
    for lane in flows.head(TOP_LANES).itertuples(index=False):
        rows.append({
            "origin": str(lane.origin), "destination": str(lane.destination), "mode": str(lane.mode or ""),
            "flow": format_quantity(lane.flow, units),
            "cost_per_unit": format_rate(lane.cost_per_unit),
            "variable_cost": format_money(lane.variable_cost),
            "fixed_charge": format_money(lane.fixed_charge) if (_finite(lane.fixed_charge) or 0) > 0 else "–",
            "total_cost": format_money(lane.total_cost, currency),
            "capacity": format_quantity(lane.capacity) if _finite(lane.capacity) is not None else "no limit",
            "utilisation": format_share(lane.utilisation), "bar": _bar(lane.utilisation),
            "has_limit": _finite(lane.utilisation) is not None,
        })
    return rows, max(count - TOP_LANES, 0)


def _per_unit_penalties(network: Network, only: set[str] | None = None) -> dict[str, float]:
    """Per-unit penalty of every customer (of those in ``only`` when given), the Settings default filled in where
    the customer's own is blank."""
    default = _finite(network.settings.unmet_penalty)
    penalties = {}
    customers = network.customers
    if only is not None:
        customers = customers[customers["id"].astype(str).isin(only).to_numpy()]
    for row in customers.itertuples(index=False):
        own = _finite(row.unmet_penalty)
        value = own if own is not None else default
        if value is not None:
            penalties[str(row.id)] = value
    return penalties


def _short_rows(network: Network, result: Result, units: str, currency: str) -> list[dict]:
    if result.unmet.empty:
        return []
    # Demand and penalty read only for the customers short (at a million lanes, 50,000 customers and most of
    # them served in full).
    names = set(result.unmet["customer"].astype(str))
    customers = network.customers[network.customers["id"].astype(str).isin(names).to_numpy()]
    demand = {str(r.id): float(r.demand) for r in customers.itertuples(index=False)}
    per_unit = _per_unit_penalties(network, names)
    rows = []
    unmet = result.unmet.sort_values(["quantity", "customer"], ascending=[False, True], kind="stable")
    for short in unmet.itertuples(index=False):
        name = str(short.customer)
        quantity = _finite(short.quantity) or 0.0
        rate = per_unit.get(name)
        rows.append({
            "customer": name,
            "demand": format_quantity(demand.get(name), units),
            "quantity": format_quantity(quantity, units),
            "share": format_share(quantity / demand[name]) if demand.get(name) else "–",
            "rate": format_money(rate, currency) if rate is not None else "–",
            "penalty": format_money(quantity * rate, currency) if rate is not None else format_money(
                short.penalty, currency),
        })
    return rows


def _node_rows(network: Network, result: Result, kind: str, units: str) -> tuple[list[dict], int]:
    """The depot or hub table: the rows :func:`lanesolve.report.utilisation.node_table` lists (every node of a
    network of up to :data:`~lanesolve.report.utilisation.NODE_TABLE_WHOLE` of them), and how many it leaves out."""
    if result.nodes.empty:
        return [], 0
    table = node_table(network, result, kind)
    rows = []
    for node in table.frame.itertuples(index=False):
        shipped = _finite(node.shipped) or 0.0
        received = _finite(node.received) or 0.0
        if kind == "depot":
            limit, used = node.supply, shipped - received  # supply bounds the net outflow (contract)
        else:
            limit, used = node.capacity, node.throughput
        rows.append({
            "node": str(node.node),
            "limit": format_quantity(limit, units) if _finite(limit) is not None else "no limit",
            "used": format_quantity(used, units),
            "shipped": format_quantity(shipped, units),
            "received": format_quantity(received, units),
            "utilisation": format_share(node.utilisation), "bar": _bar(node.utilisation),
            "has_limit": _finite(node.utilisation) is not None,
        })
    return rows, table.more


def _design_rows(network: Network, result: Result, units: str, currency: str) -> list[dict]:
    """The "Open and closed" table: every depot and hub, the status given, the decision and what it paid."""
    if not network.has_design or result.open_nodes.empty:
        return []
    rows = []
    for node in node_decisions(result).itertuples(index=False):
        used, limit, share = node.used, node.limit, node.utilisation
        rows.append({
            "node": str(node.node), "kind": str(node.kind), "status": str(node.status),
            "decision": "open" if node.open else "closed",
            "fixed_charge": format_money(node.fixed_charge, currency) if node.open else "–",
            "used": format_quantity(used, units),
            "limit": format_quantity(limit, units) if _finite(limit) is not None else "no limit",
            "utilisation": format_share(share) if _finite(share) is not None else "–",
        })
    return rows


def _trip_rows(result: Result, units: str, currency: str) -> list[dict]:
    """The "Trips" table: lanes run in whole trips, their cost and how full the last and the average truck are."""
    rows = []
    for lane in result.trips.itertuples(index=False):
        flow, size, trips = float(lane.flow), float(lane.trip_capacity), int(lane.trips)
        full = trips > 0 and size > 0
        rows.append({
            "origin": str(lane.origin), "destination": str(lane.destination), "mode": str(lane.mode or ""),
            "flow": format_quantity(flow, units), "trip_capacity": format_quantity(size, units),
            "trips": f"{trips:,d}", "cost_per_trip": format_money(lane.cost_per_trip, currency),
            "trip_cost": format_money(lane.trip_cost, currency),
            # the last truck carries what the full ones leave; the average is flow over the room of every trip
            "last_fill": format_share((flow - (trips - 1) * size) / size) if full else "–",
            "average_fill": format_share(flow / (trips * size)) if full else "–",
        })
    return rows


def _lane_words(label: str) -> str:
    """A lane label "A -> B (mode)" as "A→B mode", the way a planner says it."""
    if label.count(" -> ") == 1:
        label = label.replace(" -> ", "→")
        if label.endswith(")") and " (" in label:
            head, _, mode = label.rpartition(" (")
            label = f"{head} {mode[:-1]}"
    return label


def sensitivity_sentence(figure: str, item: str, value: float, unique: bool, units: str, currency: str,
                         value_up: float | None = None, value_down: float | None = None) -> str:
    """One sensitivity figure in plain words, for the summary page and the mail.

    Parameters
    ----------
    figure : str
        The ``figure`` column of :attr:`Result.sensitivity` (see :mod:`lanesolve.model.sensitivity`).
    item : str
        The customer, depot, hub or lane label.
    value : float
        The figure (ignored when ``unique`` is false).
    unique : bool
        Whether the figure is the same in every optimal dual; when not, the sentence says so and shows no number.
    units, currency : str
        The workbook's labels.
    value_up, value_down : float, optional
        The two sides when they differ (what one more unit and one unit less cost or save; inf: no plan). Given,
        the sentence states both.

    Returns
    -------
    str

    Examples
    --------
    >>> sensitivity_sentence("marginal_cost", "Runnelby", 43.339, True, "pallets", "EUR")
    'One more pallet at Runnelby would cost 43.34 EUR.'
    >>> sensitivity_sentence("reduced_cost", "Tarrowick -> Mellisford (rail)", 3.2, True, "pallets", "EUR")
    'Tarrowick→Mellisford rail would need to be 3.20 EUR per pallet cheaper before the plan used it.'
    >>> sensitivity_sentence("marginal_cost", "Runnelby", math.nan, False, "pallets", "", 0.26, 0.18)
    'One more pallet at Runnelby would cost 0.26; one less would save 0.18.'
    """
    one = singular(units or "units")
    lane = _lane_words(item)
    subject = {
        "marginal_cost": f"one more {one} at {item}",
        "supply_value": f"one more {one} of supply at depot {item}",
        "hub_capacity_value": f"one more {one} of capacity at hub {item}",
        "lane_capacity_value": f"one more {one} of capacity on {lane}",
        "trip_capacity_value": f"one more {one} of room in the planned trips on {lane}",
    }
    if not unique and value_up is not None and value_down is not None and figure != "reduced_cost":
        return _two_sided(figure, subject.get(figure, f"{figure.replace('_', ' ')} of {item}"), value_up,
                          value_down, currency)
    if not unique and figure == "reduced_cost" and value_up is not None and math.isinf(value_up):
        return f"{lane} is unused and no plan can use it as the plan's decisions stand."
    if not unique:
        if figure == "reduced_cost":
            return (f"{lane} is unused; how much cheaper it would need to be is not unique at this plan (the plan "
                    "is degenerate: more than one figure fits it), so none is shown.")
        what = subject.get(figure, f"{figure.replace('_', ' ')} of {item}")
        return (f"What {what} is worth is not unique at this plan (the plan is degenerate: more than one figure "
                "fits it), so none is shown.")
    amount = money_words(abs(value), currency)
    if figure == "reduced_cost":
        if abs(value) < 1e-9:
            return f"{lane} is unused, but a plan using it would cost no more (an equally cheap alternative)."
        return f"{lane} would need to be {amount} per {one} cheaper before the plan used it."
    what = subject.get(figure, f"{figure.replace('_', ' ')} of {item}")
    if figure == "marginal_cost":
        verb = "would cost" if value >= 0 else "would save"
    else:
        verb = "would save" if value >= 0 else "would cost"
    return f"{what[0].upper()}{what[1:]} {verb} {amount}."


def _two_sided(figure: str, what: str, up: float, down: float, currency: str) -> str:
    """Both sides of a figure whose one-more and one-less values differ; a side without a plan is said so."""
    more, less = ("cost", "save") if figure == "marginal_cost" else ("save", "cost")
    first = (f"{what[0].upper()}{what[1:]} could not be met by any plan" if math.isinf(up)
             else f"{what[0].upper()}{what[1:]} would {more} {money_words(up, currency)}")
    if math.isnan(down):
        return f"{first}."
    second = ("one less would leave no plan" if math.isinf(down)
              else f"one less would {less} {money_words(down, currency)}")
    return f"{first}; {second}."


#: Figures of the "What the plan is sensitive to" section, in order, each with its heading.
SENSITIVITY_GROUPS = (
    ("marginal_cost", "Cost of one more unit of demand"),
    ("supply_value", "Value of more depot supply"),
    ("hub_capacity_value", "Value of more hub capacity"),
    ("lane_capacity_value", "Value of more lane capacity"),
    ("trip_capacity_value", "Value of more room in the planned trips"),
    ("reduced_cost", "Unused lanes: how much cheaper before they pay"),
)


def _sensitivity_context(result: Result, units: str, currency: str) -> dict:
    """The top few figures of each kind in plain words, the basis they rest on and how many there are in all."""
    frame = result.sensitivity
    groups = []
    if not frame.empty:
        for figure, heading in SENSITIVITY_GROUPS:
            rows = top_few(frame, figure, TOP_FEW)
            if rows.empty:
                continue
            total = result.figure_count(figure)
            groups.append({"heading": heading, "more": max(total - len(rows), 0), "sentences": [
                sensitivity_sentence(figure, str(r.item), float(r.value), bool(r.unique), units, currency,
                                     float(getattr(r, "value_up", r.value)), float(getattr(r, "value_down", r.value)))
                for r in rows.itertuples(index=False)]})
    bases = sorted({str(b) for b in frame["basis"]}) if not frame.empty else []
    fixed = FIXED_BASIS in bases
    basis = ("From the linear programme with the plan's yes/no and trip decisions fixed at the plan: valid for "
             "small changes that keep those decisions, silent on whether a decision would flip." if fixed else
             "From the linear programme of the plan: valid for small changes that keep the same lanes in use.")
    return {"groups": groups, "basis": basis if groups else "",
            "not_computed": result.status is SolveStatus.FEASIBLE and frame.empty}


def _why_context(network: Network, result: Result, units: str) -> dict | None:
    """The "Why no plan" section of an infeasible result: the diagnosis in sentences and its figures."""
    diagnosis = result.diagnosis
    if result.status is not SolveStatus.INFEASIBLE or diagnosis is None:
        return None
    short = [{"customer": str(r.customer), "demand": format_quantity(r.demand, units),
              "short": format_quantity(r.short, units)} for r in diagnosis.short.itertuples(index=False)]
    saturated = diagnosis.saturated
    bottleneck = [{"kind": str(r.kind), "item": str(r.item), "capacity": format_quantity(r.capacity, units),
                   "used": format_quantity(r.used, units), "cut": bool(r.bottleneck)}
                  for r in saturated.itertuples(index=False)]
    return {
        "sentences": [str(s) for s in diagnosis.sentences(units or "units")],
        "short": short,
        "saturated": bottleneck,
        "has_cut": any(row["cut"] for row in bottleneck),
        "penalty": format_money(diagnosis.penalty) if diagnosis.penalty is not None else "",
    }


def _gap_text(result: Result) -> str:
    gap = _finite(result.mip_gap)
    if gap is None:
        return "not applicable (no yes/no decisions)" if result.status.has_plan else "–"
    return f"{gap * 100:.4g} %"


def build_context(network: Network, result: Result, info: RunInfo, warnings: list,
                  charts: list[_charts.Drawing] | None = None,
                  image_src: Callable[[_charts.Drawing], str] | None = None,
                  comparison: pd.DataFrame | None = None, extra: dict | None = None) -> dict:
    """Everything the template shows, already formatted as text (the template only lays it out).

    Parameters
    ----------
    network : Network
        The validated network the plan was made for.
    result : Result
        The outcome of the solve (or of the pre-solve checks).
    info : RunInfo
        Run facts; ``input_path``, ``started``, ``version`` and ``checksum`` are read.
    warnings : list
        :class:`~lanesolve.errors.Problem` objects (or strings) found while reading the workbook.
    charts : list of Drawing, optional
        The charts to show; by default :func:`lanesolve.report.charts.summary_charts`.
    image_src : callable, optional
        Maps a chart to its ``<img src>``; by default an SVG ``data:`` URI (the mail passes ``cid:`` references).
    comparison : DataFrame, optional
        The baseline and every scenario side by side (:func:`lanesolve.model.comparison.compare`); shown when given.
    extra : dict, optional
        ``changes`` and ``carriers`` (:func:`lanesolve.report.carrier_report.summary_extra`); none shown without.

    Returns
    -------
    dict
        The template context.
    """
    if charts is None:
        charts = _charts.summary_charts(network, result) + emission_report.emission_charts(
            result, network.settings.currency or "")
    image_src = image_src or _charts.Drawing.to_data_uri
    figures = {chart.key: {"title": chart.title, "alt": chart.alt, "src": image_src(chart),
                           "width": round(chart.width)} for chart in charts}
    units = network.settings.units or ""
    currency = network.settings.currency or ""
    total_demand = float(network.customers["demand"].sum()) if not network.customers.empty else 0.0
    unmet_total = float(result.unmet["quantity"].sum()) if not result.unmet.empty else 0.0
    has_plan = result.status.has_plan
    # Each KPI carries a stable id (kpi-<name>) so a browser test can read the figure back from the DOM.
    kpis = [("Status", STATUS_TEXT.get(result.status, result.status.value), "status")]
    if has_plan:
        kpis += [
            ("Total cost", format_money(result.total_cost, currency), "total-cost"),
            ("Units delivered", format_quantity(total_demand - unmet_total, units), "delivered"),
            ("Unmet demand", format_quantity(unmet_total, units), "unmet"),
            ("Lanes used", f"{len(result.flows):,d}", "lanes-used"),
        ]
    elif getattr(result.diagnosis, "total_short", None) is not None:  # no plan: the least shortfall, first
        kpis.append(("Least total shortfall", format_quantity(result.diagnosis.total_short, units), "shortfall"))
    kpis += [("Solve time", f"{result.solve_seconds:,.2f} s", "solve-time"),
             ("Optimality gap", _gap_text(result), "gap")]
    lanes, more_lanes = _lane_rows(result, units, currency) if has_plan else ([], 0)
    depots, more_depots = _node_rows(network, result, "depot", units) if has_plan else ([], 0)
    hubs, more_hubs = _node_rows(network, result, "hub", units) if has_plan else ([], 0)
    messages = [str(m) for m in result.messages]
    why = _why_context(network, result, units)
    return {
        "file_name": Path(info.input_path).name,
        "run_at": info.started,
        "version": info.version,
        "checksum": info.checksum,
        "solver": result.solver,
        "status": result.status.value,
        "status_text": STATUS_TEXT.get(result.status, result.status.value),
        "has_plan": has_plan,
        "stopped_early": result.status is SolveStatus.FEASIBLE,
        "units": units,
        "currency": currency,
        "kpis": kpis,
        "figures": figures,
        "has_coordinates": "map" in figures,
        "costs": _cost_rows(result, currency) if has_plan else [],
        "total_cost": format_money(result.total_cost, currency),
        "lanes": lanes,
        "more_lanes": more_lanes,
        "short": _short_rows(network, result, units, currency) if has_plan else [],
        "depots": depots,
        "more_depots": more_depots,
        "hubs": hubs,
        "more_hubs": more_hubs,
        "node_table_rows": NODE_TABLE_ROWS,
        "design": _design_rows(network, result, units, currency) if has_plan else [],
        "trips": _trip_rows(result, units, currency) if has_plan else [],
        "sensitivity": _sensitivity_context(result, units, currency) if has_plan else {
            "groups": [], "basis": "", "not_computed": False},
        "scenarios": _scenario_rows(comparison, units, currency),
        "next_steps": advice.next_steps(network, result, comparison),
        "why": why,
        # With a diagnosis the reasons it gives are shown in its own section, not twice in the box above it.
        "reasons": [m for m in messages if m not in set(why["sentences"])] if why else messages,
        "messages": messages,
        "warnings": [str(w) for w in warnings],
        "caution": CAUTION,
        "emissions": emission_report.emission_rows(result, currency),
        "changes": None,
        "carriers": [],
        **(extra or {}),
    }


def _scenario_rows(comparison: pd.DataFrame | None, units: str, currency: str) -> list[dict]:
    """The what-if comparison, formatted: one row per scenario, the baseline first."""
    if comparison is None or not len(comparison):
        return []
    rows = []
    for row in comparison.itertuples(index=False):
        delta = row.delta_cost
        known = isinstance(delta, (int, float)) and math.isfinite(delta)
        rows.append({
            "scenario": row.scenario,
            "status": row.status,
            "total_cost": format_money(row.total_cost, currency) if math.isfinite(row.total_cost) else "no plan",
            "delta": ("+" if known and delta > 0 else "") + format_money(delta, currency) if known else "–",
            "delta_pct": f"{row.delta_pct:+.1f} %" if math.isfinite(row.delta_pct) else "–",
            "unmet": format_quantity(row.unmet_units, units) if math.isfinite(row.unmet_units) else "–",
            "opened": row.lanes_opened or "–",
            "closed": row.lanes_closed or "–",
            "nodes": "; ".join(part for part in (
                f"now used: {row.nodes_opened}" if row.nodes_opened else "",
                f"no longer used: {row.nodes_closed}" if row.nodes_closed else "") if part) or "–",
            "shifts": row.largest_shifts or "–",
        })
    return rows


# --------------------------------------------------------------------------------------------- render and write


def template_folder() -> Path:
    """The folder holding the Jinja2 templates.

    An installed lanesolve has them as the package :mod:`lanesolve.templates` (the repository's top-level
    ``templates/``, mapped in pyproject.toml). Running from a source checkout, ``import lanesolve`` finds the
    ``lanesolve/`` folder itself, which has no such subpackage: then the ``templates/`` folder beside it is used.
    """
    try:
        return Path(str(resources.files("lanesolve.templates")))
    except ModuleNotFoundError:
        return Path(__file__).resolve().parents[2] / "templates"  # lanesolve/report/ -> repository root


def _bytecode_cache() -> "jinja2.BytecodeCache | None":
    """Where compiled templates are kept between processes, or None.

    Compiling the summary template costs about a tenth of a second of CPU, as much as a small run's solve; Jinja2's
    file-system bytecode cache keeps the compiled code keyed by template name and source checksum (an edited
    template is compiled afresh), by default in a folder of the user's own under the temporary folder that Jinja2
    creates with owner-only access. ``LANESOLVE_TEMPLATE_CACHE`` names another folder, used only when it is the
    user's own and no one else may write in it (it holds code that runs), or ``off`` for none. A cache that cannot be read or written is passed over: the
    template is then compiled as before."""
    import jinja2

    class QuietCache(jinja2.FileSystemBytecodeCache):
        def load_bytecode(self, bucket) -> None:
            try:
                super().load_bytecode(bucket)
            except Exception:  # unreadable or damaged entry: compile afresh
                bucket.reset()

        def dump_bytecode(self, bucket) -> None:
            try:
                super().dump_bytecode(bucket)
            except OSError:
                pass

    folder = os.environ.get("LANESOLVE_TEMPLATE_CACHE", "").strip()
    if folder.lower() in ("off", "no", "0"):
        return None
    try:
        if folder:
            os.makedirs(folder, mode=0o700, exist_ok=True)
            if not _own_folder(folder):  # code another user could plant there is never loaded
                return None
        return QuietCache(folder or None)
    except (OSError, RuntimeError):  # no folder to be made there, or Jinja2 found no safe folder of the user's own
        return None


def _own_folder(folder: str) -> bool:
    """Whether ``folder`` is a folder of the user's own that no one else may write in (on systems without owners
    and modes, whether it is a folder)."""
    info = os.stat(folder)
    if not stat.S_ISDIR(info.st_mode):
        return False
    if not hasattr(os, "getuid"):
        return True
    return info.st_uid == os.getuid() and not info.st_mode & (stat.S_IWGRP | stat.S_IWOTH)


@functools.lru_cache(maxsize=None)
def _environment() -> "jinja2.Environment":
    """The one Jinja2 environment of this process: it keeps each template it compiles, so later renders reuse it
    (``auto_reload`` off: the installed templates do not change while lanesolve runs), and later processes reuse the
    compiled code through :func:`_bytecode_cache`. Jinja2 is imported here, so a run that writes no HTML
    (``lanesolve check``, the library without a summary) does not load it."""
    import jinja2

    return jinja2.Environment(
        bytecode_cache=_bytecode_cache(),
        loader=jinja2.FileSystemLoader(str(template_folder())),
        autoescape=True,  # on for every template, whatever its extension: workbook names are untrusted text
        undefined=jinja2.StrictUndefined,  # a misspelt field fails loudly in tests instead of printing nothing
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        auto_reload=False,
    )


def render_html(network: Network, result: Result, info: RunInfo, warnings: list,
                charts: list[_charts.Drawing] | None = None,
                image_src: Callable[[_charts.Drawing], str] | None = None,
                comparison: pd.DataFrame | None = None, extra: dict | None = None) -> str:
    """Render the HTML summary of one run.

    Parameters
    ----------
    network : Network
        The validated network.
    result : Result
        The plan, or a no-plan result whose ``messages`` give the reasons.
    info : RunInfo
        Run facts (input file, run time stamp, version, checksum).
    warnings : list of Problem or str
        Warnings found while reading the workbook; listed in the page.
    charts, image_src, comparison, extra : optional
        As for :func:`build_context`: which charts, how the page refers to each (``data:`` URI by default), the
        what-if comparison, and the plan-changes and carrier sections.

    Returns
    -------
    str
        A complete, self-contained HTML document (inline CSS, charts as ``data:`` URIs, no scripts, no remote
        resources).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> info = SimpleNamespace(input_path="plan.xlsx", started="2024-01-01T08:00:00+00:00", version="0",
    ...                        checksum="0" * 64)
    >>> page = render_html(net, Result(SolveStatus.INFEASIBLE, messages=["supply short by 5"]), info, [])
    >>> "supply short by 5" in page and "<script" not in page
    True
    """
    template = _environment().get_template(TEMPLATE_NAME)
    return template.render(**build_context(network, result, info, warnings, charts, image_src, comparison, extra))


def write_html(path: str | os.PathLike, network: Network, result: Result, info: RunInfo, warnings: list,
               comparison: pd.DataFrame | None = None, extra: dict | None = None) -> None:
    """Write the HTML summary to ``path`` atomically.

    The page is written to a temporary file in the same folder and moved over ``path`` with :func:`os.replace`,
    so a reader never sees half a file and an earlier summary survives a failed write.

    Parameters
    ----------
    path : path-like
        Where the summary goes (by convention ``<stem>-summary.html`` beside the workbook).
    network, result, info, warnings, comparison, extra
        As for :func:`render_html`.

    Raises
    ------
    WriteError
        The folder does not exist or the file cannot be written or replaced.
    """
    path = Path(path)
    page = render_html(network, result, info, warnings, comparison=comparison, extra=extra)
    with atomic.replacing(path, "the HTML summary",
                          hint="check that the folder exists and the file is not open in another program") as handle:
        handle.write(page.encode("utf-8"))
