"""The summary's "What changed since the run of ..." section and its "Carriers" table, formatted as text for the
template: :func:`summary_extra` is what the pipeline hands :func:`lanesolve.report.summary.write_html` as
``extra`` (this module reads the summary's formatters, so the summary does not import it)."""

from __future__ import annotations

import math

from lanesolve.model.plan_changes import TOP_SHIFTS, PlanChanges
from lanesolve.report.formats import format_money, format_quantity, format_share


def _signed_money(value: float, currency: str) -> str:
    if not math.isfinite(value):
        return "–"
    return ("+" if value > 0 else "") + format_money(value, currency)


def _signed_quantity(value: float, units: str) -> str:
    return ("+" if value > 0 else "") + format_quantity(value, units)


def changes_context(changes: PlanChanges | None, units: str, currency: str) -> dict | None:
    """The section's title, lines and tables; None when the run did not compare plans (``write=False`` runs)."""
    if changes is None:
        return None
    if changes.earlier is None:
        return {"title": changes.headline, "earlier": False, "lines": [], "costs": [], "lanes": [], "more": 0}
    lines = []
    if math.isfinite(changes.cost_change):
        lines.append(f"Total cost {_signed_money(changes.cost_change, currency)} "
                     f"(from {format_money(changes.earlier.total_cost, currency)} to "
                     f"{format_money(changes.total_cost, currency)}).")
    moved = len(changes.lanes)
    lines.append(f"{moved:,d} lane{'s' if moved != 1 else ''} changed flow: {changes.count('newly used'):,d} newly "
                 f"used, {changes.count('no longer used'):,d} no longer used." if moved else
                 "No lane changed flow.")
    if changes.nodes_opened:
        lines.append("Depots and hubs now used: " + ", ".join(changes.nodes_opened) + ".")
    if changes.nodes_closed:
        lines.append("Depots and hubs no longer used: " + ", ".join(changes.nodes_closed) + ".")
    costs = [{"label": label, "earlier": format_money(was, currency), "now": format_money(now, currency),
              "change": _signed_money(change, currency)}
             for _, label, was, now, change in changes.costs if math.isfinite(change) and abs(change) > 0]
    words = {"newly used": "newly used", "no longer used": "no longer used", "more": "more", "less": "less"}
    lanes = [{"lane": f"{r.origin} → {r.destination}" + (f" ({r.mode})" if r.mode else ""),
              "what": words[r.what], "earlier": format_quantity(r.previous_flow, units),
              "now": format_quantity(r.flow, units), "change": _signed_quantity(r.change, units)}
             for r in changes.lanes.head(TOP_SHIFTS).itertuples(index=False)]
    return {"title": changes.headline, "earlier": True, "lines": lines, "costs": costs, "lanes": lanes,
            "more": max(0, moved - TOP_SHIFTS)}


def carriers_context(result, units: str, currency: str) -> list[dict]:
    """One row per carrier and commitment for the "Carriers" table (empty without carriers)."""
    frame = result.carriers
    if not result.status.has_plan or frame is None or not len(frame):
        return []
    words = {"min_volume": "minimum", "max_volume": "maximum", "max_share": "largest share", "": "–"}
    rows = []
    for r in frame.itertuples(index=False):
        bound = ("–" if not math.isfinite(r.bound) else format_share(r.bound) if r.commitment == "max_share"
                 else format_quantity(r.bound, units))
        rows.append({"carrier": r.carrier, "volume": format_quantity(r.volume, units),
                     "share": format_share(r.share) if math.isfinite(r.share) else "–",
                     "cost": format_money(r.cost, currency), "commitment": words.get(r.commitment, r.commitment),
                     "bound": bound, "state": r.state, "text": r.text})
    return rows


def summary_extra(result, changes: PlanChanges | None, settings) -> dict:
    """The context entries ``changes`` and ``carriers`` of the HTML summary."""
    units, currency = settings.units or "", settings.currency or ""
    return {"changes": changes_context(changes, units, currency), "carriers": carriers_context(result, units,
                                                                                                currency)}


def change_lines(changes: PlanChanges | None, settings) -> list[str]:
    """The terminal's lines on what changed: the headline (one line when there is no earlier run) and the summary
    sentences of the HTML section."""
    context = changes_context(changes, settings.units or "", settings.currency or "")
    if context is None:
        return []
    return [context["title"] + (":" if context["lines"] else "")] + [f"  {line}" for line in context["lines"]]
