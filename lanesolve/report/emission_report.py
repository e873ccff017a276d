"""The plan's emissions in the summary and the mail: the figures as formatted lines and the cost-emissions
trade-off curve as a chart (a :class:`~lanesolve.report.charts.Drawing`, SVG on the page, PNG in the mail)."""

from __future__ import annotations

import math

from lanesolve.model.result import Result
from lanesolve.report.charts import GRID, INK, MUTED, WIDTH, Drawing

#: Colour of the trade-off curve and its points.
CURVE = "#3d7ea6"


def emission_rows(result: Result, currency: str = "") -> list[tuple[str, str]]:
    """(label, formatted value) lines of the plan's emissions; empty when the plan has none.

    Examples
    --------
    >>> from lanesolve.model.result import SolveStatus
    >>> r = Result(SolveStatus.OPTIMAL, emissions={"total_t": 12.345, "lanes_t": 12.0, "hubs_t": 0.345,
    ...            "by_mode": {"road": 12.0}, "unknown_lanes": 0, "cap_t": None, "carbon_price": None})
    >>> emission_rows(r)[0]
    ('Emissions, total', '12.35 t CO2e')
    """
    figures = result.emissions
    if not figures or not result.status.has_plan:
        return []
    money = f" {currency}" if currency else ""

    def tonnes(value):
        return "–" if value is None or not math.isfinite(value) else f"{value:,.2f} t CO2e"

    def price(value):
        if value is None:
            return "–"
        return "no plan meets a tighter cap" if math.isinf(value) else f"{value:,.2f}{money} per t CO2e"

    rows = [("Emissions, total", tonnes(figures["total_t"])), ("Lanes", tonnes(figures.get("lanes_t"))),
            ("Hub handling", tonnes(figures.get("hubs_t")))]
    rows += [(f"Mode {mode}", tonnes(value)) for mode, value in figures.get("by_mode", {}).items()]
    if figures.get("unknown_lanes"):
        rows.append(("Lanes used with unknown factor", f"{figures['unknown_lanes']:,d} (not in the total)"))
    if figures.get("cap_t") is not None:
        rows.append(("Emissions cap", tonnes(figures["cap_t"])))
        rows.append(("Cost of one tonne less", price(figures.get("cap_value_per_t"))))
        rows.append(("Saving from one tonne more", price(figures.get("cap_saving_per_t"))))
    if figures.get("carbon_price") is not None:
        rows.append(("Carbon price", price(figures["carbon_price"])))
    return rows


def tradeoff_chart(result: Result, currency: str = "") -> Drawing | None:
    """The trade-off curve: total cost (y) over emissions (x), one point per plan, joined by lines.

    Returns None without a curve of at least two plans.
    """
    points = [(p["emissions_t"], p["total_cost"]) for p in (result.tradeoff or [])
              if p["emissions_t"] is not None and p["total_cost"] is not None]
    if len(points) < 2:
        return None
    left, right, top, bottom = 70.0, WIDTH - 16.0, 16.0, 230.0
    drawing = Drawing(WIDTH, 270.0, key="tradeoff", title="Cost and emissions trade-off")
    xs, ys = [p[0] for p in points], [p[1] for p in points]
    x_lo, x_hi = min(xs), max(xs)
    y_lo, y_hi = min(ys), max(ys)
    x_span, y_span = (x_hi - x_lo) or 1.0, (y_hi - y_lo) or 1.0

    def at(x, y):
        return left + (right - left) * (x - x_lo) / x_span, bottom - (bottom - top) * (y - y_lo) / y_span

    drawing.line(left, bottom, right, bottom, 1.0, GRID)
    drawing.line(left, top, left, bottom, 1.0, GRID)
    for (x1, y1), (x2, y2) in zip(points, points[1:]):
        drawing.line(*at(x1, y1), *at(x2, y2), 2.0, CURVE)
    for x, y in points:
        drawing.circle(*at(x, y), 4.0, CURVE)
    money = f" {currency}" if currency else ""
    drawing.text(left, bottom + 18, f"{x_lo:,.2f} t", 11, MUTED)
    drawing.text(right, bottom + 18, f"{x_hi:,.2f} t", 11, MUTED, anchor="end")
    drawing.text((left + right) / 2, bottom + 34, "Emissions (t CO2e)", 12, INK, anchor="middle")
    drawing.text(left - 6, top + 10, f"{y_hi:,.0f}", 11, MUTED, anchor="end")
    drawing.text(left - 6, bottom, f"{y_lo:,.0f}", 11, MUTED, anchor="end")
    drawing.alt = (f"Trade-off of {len(points)} plans: from {x_lo:,.2f} t CO2e at {ys[xs.index(x_lo)]:,.2f}{money} "
                   f"to {x_hi:,.2f} t CO2e at {ys[xs.index(x_hi)]:,.2f}{money}.")
    return drawing


def emission_charts(result: Result, currency: str = "") -> list[Drawing]:
    """The emission charts of the summary (the trade-off curve, when there is one)."""
    chart = tradeoff_chart(result, currency) if result.status.has_plan else None
    return [chart] if chart is not None else []
