"""The summary as plain text: the lines ``lanesolve solve`` prints, and the mail's text part.

Both are built from :func:`lanesolve.report.summary.build_context`, so they show the figures of the HTML page,
formatted by the same code.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import pandas as pd

from lanesolve.model.result import Result, SolveStatus  # noqa: F401  (SolveStatus: the doctests use it)
from lanesolve.report import advice
from lanesolve.report.summary import (
    STATUS_TEXT, _finite, _gap_text, _scenario_rows, build_context, format_money, format_quantity)

if TYPE_CHECKING:
    from lanesolve.model.network import Network
    from lanesolve.runinfo import RunInfo


def terminal_lines(network: Network, result: Result, info: RunInfo,
                   comparison: pd.DataFrame | None = None) -> list[str]:
    """The compact summary ``lanesolve solve`` prints: status and gap, cost, lanes, shortfall, the scenarios
    against the baseline, what to do next, where files went.

    Parameters
    ----------
    network, result, info, comparison
        As for :func:`lanesolve.report.summary.render_html`.

    Returns
    -------
    list of str
        One line each; notes from the solve follow as ``Note: ...`` lines.
    """
    units, currency = network.settings.units or "", network.settings.currency or ""
    gap = f", gap {_gap_text(result)}" if _finite(result.mip_gap) is not None else ""
    lines = [f"Status: {STATUS_TEXT.get(result.status, result.status.value)} ({result.status.value}){gap}"]
    if result.status.has_plan:
        short = float(result.unmet["quantity"].sum()) if len(result.unmet) else 0.0
        lines += [f"Total cost: {format_money(result.total_cost, currency)}",
                  f"Lanes used: {len(result.flows):,d}; customers short: {len(result.unmet):,d}"
                  + (f" ({format_quantity(short, units)})" if len(result.unmet) else "")]
    rows = _scenario_rows(comparison, units, currency)
    if rows:
        lines.append("Scenarios (total cost, change against the baseline, not delivered):")
        lines += [f"  {_one_line(row['scenario'])}: {row['total_cost']}"
                  + ("" if row["scenario"] == "baseline" else f" ({row['delta']}, {row['delta_pct']})")
                  + f", {row['unmet']} not delivered" for row in rows]
    steps = advice.next_steps(network, result, comparison)
    if steps:
        lines.append("What to do next:")
        lines += [f"  - {_one_line(step)}" for step in steps]
    lines.append(f"Results written to {_one_line(info.output_path)}; summary {_one_line(info.summary_path)}")
    lines += [f"Note: {_one_line(message)}" for message in result.messages]
    return lines


def _one_line(text: object) -> str:
    """Text with its line breaks (a name with a newline in it) as spaces, so one terminal line stays one."""
    return " ".join(str(text).split())


#: Lanes listed in the plain-text summary (the mail's text part); the HTML lists :data:`TOP_LANES`.
TEXT_LANES = 10


def render_text(network: Network, result: Result, info: RunInfo, warnings: list,
                comparison: pd.DataFrame | None = None) -> str:
    """The summary as plain text: the mail's text part, for readers that show no HTML.

    It holds the same figures as the page (formatted by the same code): key figures, what to do next, cost
    breakdown, customers short, depot and hub use, the dearest lanes, the what-if scenarios, messages, warnings and
    the caution line.

    Parameters
    ----------
    network, result, info, warnings, comparison
        As for :func:`lanesolve.report.summary.render_html`.

    Returns
    -------
    str

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> info = SimpleNamespace(input_path="plan.xlsx", started="2024-01-01T08:00:00+00:00", version="0",
    ...                        checksum="0" * 64)
    >>> text = render_text(net, Result(SolveStatus.INFEASIBLE, messages=["supply short by 5"]), info, [])
    >>> print("\\n".join(text.splitlines()[:4]))
    Lane plan: plan.xlsx
    Run 2024-01-01T08:00:00+00:00, lanesolve 0
    <BLANKLINE>
    No plan was made: No feasible plan (infeasible).
    """
    c = build_context(network, result, info, warnings, charts=[], comparison=comparison)
    lines = [f"Lane plan: {c['file_name']}", f"Run {c['run_at']}, lanesolve {c['version']}"
             + (f", {c['solver']}" if c["solver"] else ""), ""]
    if not c["has_plan"]:
        lines += [f"No plan was made: {c['status_text']} ({c['status']}).", ""]
    width = max(len(label) for label, _, _ in c["kpis"])
    lines += [f"{label + ':':<{width + 1}} {value}" for label, value, _ in c["kpis"]]
    if c["next_steps"]:
        lines += ["", "What to do next"] + [f"  - {step}" for step in c["next_steps"]]
    if c["has_plan"]:
        lines += ["", "Cost breakdown"]
        lines += [f"  {row['label']:<30} {row['amount']:>20} {row['share']:>8}" for row in c["costs"]]
        lines.append(f"  {'Total':<30} {c['total_cost']:>20}")
        lines += ["", "Customers short" if c["short"] else "Every customer receives its full demand."]
        lines += [f"  {row['customer']}: {row['quantity']} of {row['demand']} not delivered ({row['share']}), "
                  f"penalty {row['penalty']}" for row in c["short"]]
        nodes = [("depot", row) for row in c["depots"]] + [("hub", row) for row in c["hubs"]]
        if nodes:
            lines += ["", "Depot and hub utilisation"]
            lines += [f"  {row['node']} ({kind}): {row['used']} of {row['limit']}"
                      + (f", {row['utilisation']}" if row["has_limit"] else "") for kind, row in nodes]
            lines += [f"  ... and {more:,d} more {kind}{'s' if more != 1 else ''}: the result sheet LS Nodes lists "
                      "every depot and hub" for kind, more in (("depot", c["more_depots"]), ("hub", c["more_hubs"]))
                      if more]
        if c["design"]:
            lines += ["", "Open and closed"]
            lines += [f"  {row['node']} ({row['kind']}, given {row['status']}): {row['decision']}"
                      + (f", fixed charge {row['fixed_charge']}" if row["decision"] == "open" else "")
                      for row in c["design"]]
        if c["trips"]:
            lines += ["", "Trips"]
            lines += [f"  {row['origin']} -> {row['destination']}" + (f" ({row['mode']})" if row["mode"] else "")
                      + f": {row['trips']} trips of {row['trip_capacity']} for {row['flow']}, {row['trip_cost']};"
                      f" last truck {row['last_fill']} full" for row in c["trips"]]
        sensitivity = c["sensitivity"]
        if sensitivity["groups"]:
            lines += ["", "What the plan is sensitive to", f"  {sensitivity['basis']}"]
            for group in sensitivity["groups"]:
                lines += [f"  {group['heading']}"] + [f"    - {sentence}" for sentence in group["sentences"]]
        elif sensitivity["not_computed"]:
            lines += ["", "What the plan is sensitive to: not shown, as the plan is not proven optimal."]
        if c["lanes"]:
            shown = c["lanes"][:TEXT_LANES]
            rest = len(c["lanes"]) - len(shown) + c["more_lanes"]
            lines += ["", f"Dearest lanes ({len(shown)} of {len(shown) + rest})"]
            lines += [f"  {lane['origin']} -> {lane['destination']}" + (f" ({lane['mode']})" if lane["mode"] else "")
                      + f": {lane['flow']}, {lane['total_cost']}" for lane in shown]
    if c["emissions"]:
        lines += ["", "Emissions"] + [f"  {label}: {value}" for label, value in c["emissions"]]
    if c["scenarios"]:
        lines += ["", "What-if scenarios (change against the baseline)"]
        lines += [f"  {row['scenario']} ({row['status']}): {row['total_cost']}"
                  + ("" if row["scenario"] == "baseline" else f", {row['delta']} ({row['delta_pct']})")
                  + f"; not delivered {row['unmet']}; lanes opened {row['opened']}; lanes closed {row['closed']}"
                  f"; depots and hubs {row['nodes']}; largest shifts {row['shifts']}" for row in c["scenarios"]]
    if c["has_plan"] and c["messages"]:
        lines += ["", "Messages"] + [f"  - {m}" for m in c["messages"]]
    elif c["reasons"]:
        lines += ["", "Reasons"] + [f"  - {m}" for m in c["reasons"]]
    if c["why"]:
        lines += ["", "Why no plan"] + [f"  - {sentence}" for sentence in c["why"]["sentences"]]
        if c["why"]["penalty"]:
            lines.append(f"  (found by solving again with shortfall allowed at an internal penalty of "
                         f"{c['why']['penalty']} per unit short)")
    if c["warnings"]:
        lines += ["", "Warnings from reading the workbook"] + [f"  - {w}" for w in c["warnings"]]
    lines += ["", f"Caution. {c['caution']}", ""]
    return "\n".join(lines)
