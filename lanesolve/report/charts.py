"""Charts for the summary: cost breakdown, depot and hub utilisation, and a network map.

Each chart is built once as a :class:`Drawing` -- a short list of shapes (rectangles, lines, circles, polygons,
text) on a pixel canvas -- and written out two ways from that one list:

- :meth:`Drawing.to_svg`, hand-written SVG for the HTML file (a few milliseconds, crisp in print and at any
  zoom; embedded as a ``data:`` URI so the page stays one self-contained file);
- :meth:`Drawing.to_png`, a PNG drawn with Pillow for the ``.eml`` (mail programs do not show SVG reliably --
  common practice, recalled from memory). Pillow is imported only when a PNG is asked for, so writing the HTML
  summary costs nothing extra at start-up.

The module reads only the plain :class:`~lanesolve.model.network.Network` and :class:`~lanesolve.model.result.Result`.

Map projection
--------------
The map uses an equirectangular projection scaled by the cosine of the mean latitude of the nodes drawn::

    x = (longitude - min longitude) * cos(mean latitude),    y = max latitude - latitude

so distances are close to true east-west and north-south near the middle of a regional network. It ignores the
curvature of the earth and does not handle a network that straddles the 180th meridian (it would be drawn the wrong
way round); both are fine for a planner's overview and are documented here rather than hidden.
"""

from __future__ import annotations

import base64
import html
import io
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model.network import Network
from lanesolve.model.result import Result
from lanesolve.report.utilisation import (  # noqa: F401  (utilisation_rows stays importable from here)
    FULL_AT, MAX_UTILISATION_ROWS, finite_column, utilisation_rows, utilisation_top)


def _text(value: str) -> str:
    """``&``, ``<`` and ``>`` escaped for SVG element content (``html.escape`` without quotes: what
    ``xml.sax.saxutils.escape`` does, without the 25 ms that importing it takes through ``urllib.request``)."""
    return html.escape(value, quote=False)


# Palette of our own: muted greens and blues on white, one warm colour for "at its limit", red only for shortfall.
INK = "#23303a"
MUTED = "#5d6a72"
TRACK = "#ebe7dc"
GRID = "#d9d4c7"
FULL = "#b86b2b"
SHORT = "#a3322a"
DEPOT = "#2f5d50"
HUB = "#6a5a9c"
CUSTOMER = "#3d7ea6"
FLOW = "#4f8a76"
BAND = "#cadcd3"
UNUSED = "#c4bfb3"
COST_COLOURS = {"transport": "#3d7ea6", "handling": "#5b8c7b", "fixed_lane": "#c9a227", "unmet_penalty": SHORT,
                "fixed_node": "#7d6b91", "trips": "#8a9a5b"}
#: Colour of a cost component this module has no colour for.
OTHER_COST = "#9a948a"

#: Chart width in CSS pixels; the page scales it down to the screen (a phone shows it at ~350 px).
WIDTH = 480
#: Widest flow line on the map, in pixels; every other lane is drawn in proportion to its flow.
MAX_LINE = 10.0
#: Narrowest line drawn, so a lane with a tiny flow is still visible (its width is then no longer proportional).
MIN_LINE = 1.0
#: Big networks: at most this many lanes with flow are drawn (the largest flows), and unused lanes only when there
#: are at most this many of them. Past that a map shows lines no reader can tell apart, and each line costs time and
#: bytes in the page (100k lanes: 94k dashed unused lanes made a 14 MB SVG); the legend says what was left out.
MAX_FLOW_LANES = 3000
MAX_UNUSED_LANES = 400
#: Capacity bands use the flow lines' scale but are capped at this width, so one huge capacity cannot cover the map.
MAX_BAND = 18.0
#: Customers are labelled on the map only up to this many; beyond that the names would cover each other.
MAX_CUSTOMER_LABELS = 20


# --------------------------------------------------------------------------------------------- drawing


@dataclass
class Drawing:
    """A chart as a list of shapes on a ``width`` x ``height`` pixel canvas (origin top left, y down).

    Parameters
    ----------
    width, height : float
        Canvas size in CSS pixels.
    key : str
        Short name, used in file names and mail content ids (``cost``, ``utilisation``, ``map``).
    title : str
        Heading shown above the chart.
    alt : str
        Text alternative: what the chart says, for screen readers and mail programs that block images.
    """

    width: float
    height: float
    key: str = "chart"
    title: str = ""
    alt: str = ""
    shapes: list[tuple] = field(default_factory=list)

    def rect(self, x: float, y: float, w: float, h: float, fill: str) -> None:
        self.shapes.append(("rect", x, y, max(w, 0.0), max(h, 0.0), fill))

    def line(self, x1: float, y1: float, x2: float, y2: float, width: float, colour: str,
             dashed: bool = False) -> None:
        self.shapes.append(("line", x1, y1, x2, y2, width, colour, dashed))

    def circle(self, cx: float, cy: float, r: float, fill: str | None, stroke: str | None = None,
               stroke_width: float = 0.0) -> None:
        self.shapes.append(("circle", cx, cy, r, fill, stroke, stroke_width))

    def polygon(self, points: list[tuple[float, float]], fill: str, stroke: str | None = None) -> None:
        self.shapes.append(("polygon", list(points), fill, stroke))

    def text(self, x: float, y: float, text: str, size: float = 12, colour: str = INK, anchor: str = "start",
             bold: bool = False) -> None:
        """Text with its baseline at ``y``; ``anchor`` is ``start``, ``middle`` or ``end`` (as in SVG)."""
        self.shapes.append(("text", x, y, str(text), size, colour, anchor, bold))

    # ----------------------------------------------------------------------------------------- SVG

    def to_svg(self) -> str:
        """The drawing as a standalone SVG document (no scripts, no external references)."""
        out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{_n(self.width)}" height="{_n(self.height)}" '
               f'viewBox="0 0 {_n(self.width)} {_n(self.height)}" role="img" '
               f'font-family="system-ui, -apple-system, Segoe UI, Roboto, Helvetica, Arial, sans-serif">',
               f"<title>{_text(self.alt or self.title)}</title>",
               f'<rect width="{_n(self.width)}" height="{_n(self.height)}" fill="#ffffff"/>']
        circle_tails: dict[tuple, str] = {}  # a map's customers share one radius and paint: each written once
        for shape in self.shapes:
            kind = shape[0]
            if kind == "rect":
                _, x, y, w, h, fill = shape
                out.append(f'<rect x="{_n(x)}" y="{_n(y)}" width="{_n(w)}" height="{_n(h)}" fill="{fill}"/>')
            elif kind == "line":
                _, x1, y1, x2, y2, width, colour, dashed = shape
                dash = ' stroke-dasharray="4 3"' if dashed else ""
                out.append(f'<line x1="{_n(x1)}" y1="{_n(y1)}" x2="{_n(x2)}" y2="{_n(y2)}" stroke="{colour}" '
                           f'stroke-width="{_n(width)}" stroke-linecap="round"{dash}/>')
            elif kind == "circle":
                _, cx, cy, r, fill, stroke, stroke_width = shape
                tail = circle_tails.get(shape[3:])
                if tail is None:
                    paint = f'fill="{fill or "none"}"'
                    if stroke:
                        paint += f' stroke="{stroke}" stroke-width="{_n(stroke_width)}"'
                    tail = circle_tails[shape[3:]] = f'" r="{_n(r)}" {paint}/>'
                out.append(f'<circle cx="{_n(cx)}" cy="{_n(cy)}{tail}')
            elif kind == "polygon":
                _, points, fill, stroke = shape
                pts = " ".join(f"{_n(px)},{_n(py)}" for px, py in points)
                edge = f' stroke="{stroke}" stroke-width="1"' if stroke else ""
                out.append(f'<polygon points="{pts}" fill="{fill}"{edge}/>')
            elif kind == "text":
                _, x, y, text, size, colour, anchor, bold = shape
                weight = ' font-weight="600"' if bold else ""
                out.append(f'<text x="{_n(x)}" y="{_n(y)}" font-size="{_n(size)}" fill="{colour}" '
                           f'text-anchor="{anchor}"{weight}>{_text(text)}</text>')
        out.append("</svg>")
        return "\n".join(out)

    def to_data_uri(self) -> str:
        """The SVG as a ``data:`` URI for an ``<img src>`` (base64, so no character of a name can break out)."""
        return "data:image/svg+xml;base64," + base64.b64encode(self.to_svg().encode("utf-8")).decode("ascii")

    # ----------------------------------------------------------------------------------------- PNG

    def to_png(self, scale: float = 2.0) -> bytes:
        """The drawing as PNG bytes, ``scale`` device pixels per CSS pixel (2 looks sharp on phones).

        Pillow's built-in font is used (no font files needed); it lacks some scripts, whose letters then show as
        boxes -- the HTML file, drawn by the browser, shows every name.
        """
        from PIL import Image, ImageDraw, ImageFont

        image = Image.new("RGB", (max(1, round(self.width * scale)), max(1, round(self.height * scale))), "#ffffff")
        draw = ImageDraw.Draw(image)
        fonts: dict[int, object] = {}

        def font(size: float):
            pixels = max(6, round(size * scale))
            if pixels not in fonts:
                fonts[pixels] = ImageFont.load_default(size=pixels)
            return fonts[pixels]

        def s(v: float) -> float:
            return v * scale

        for shape in self.shapes:
            kind = shape[0]
            if kind == "rect":
                _, x, y, w, h, fill = shape
                if w > 0 and h > 0:
                    draw.rectangle([s(x), s(y), s(x + w) - 1, s(y + h) - 1], fill=fill)
            elif kind == "line":
                _, x1, y1, x2, y2, width, colour, dashed = shape
                pieces = _dashes(x1, y1, x2, y2, 4.0, 3.0) if dashed else [(x1, y1, x2, y2)]
                w = max(1, round(s(width)))
                for a, b, c, d in pieces:
                    draw.line([s(a), s(b), s(c), s(d)], fill=colour, width=w)
                    if w > 2:  # round caps, as in the SVG
                        for px, py in ((a, b), (c, d)):
                            draw.ellipse([s(px) - w / 2, s(py) - w / 2, s(px) + w / 2, s(py) + w / 2], fill=colour)
            elif kind == "circle":
                _, cx, cy, r, fill, stroke, stroke_width = shape
                box = [s(cx - r), s(cy - r), s(cx + r), s(cy + r)]
                draw.ellipse(box, fill=fill, outline=stroke, width=max(1, round(s(stroke_width))) if stroke else 0)
            elif kind == "polygon":
                _, points, fill, stroke = shape
                draw.polygon([(s(px), s(py)) for px, py in points], fill=fill, outline=stroke)
            elif kind == "text":
                _, x, y, text, size, colour, anchor, _bold = shape
                draw.text((s(x), s(y)), text, fill=colour, font=font(size),
                          anchor={"start": "ls", "middle": "ms", "end": "rs"}[anchor])
        buffer = io.BytesIO()
        image.save(buffer, format="PNG", optimize=True)
        return buffer.getvalue()


def _n(value: float) -> str:
    """A coordinate for SVG: at most two decimals, no trailing zeros."""
    text = f"{value:.2f}"
    if text[-1] != "0":  # most coordinates: nothing to strip (a map of 50,000 customers formats 150,000 of them)
        return text
    text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _dashes(x1, y1, x2, y2, on: float, off: float) -> list[tuple[float, float, float, float]]:
    length = math.hypot(x2 - x1, y2 - y1)
    if length == 0:
        return [(x1, y1, x2, y2)]
    dx, dy = (x2 - x1) / length, (y2 - y1) / length
    pieces, t = [], 0.0
    while t < length:
        end = min(t + on, length)
        pieces.append((x1 + dx * t, y1 + dy * t, x1 + dx * end, y1 + dy * end))
        t = end + off
    return pieces


def _finite(value: object) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _clip(text: str, chars: int) -> str:
    """Shorten a name to ``chars`` characters with an ellipsis; the tables beside the chart show it whole."""
    text = " ".join(str(text).split())
    # Three full stops rather than the ellipsis character: Pillow's built-in font has no glyph for it.
    return text if len(text) <= chars else text[: max(chars - 3, 1)] + "..."


def _fmt(value: float) -> str:
    if abs(value - round(value)) < 1e-6:
        return f"{round(value):,d}"
    return f"{value:,.2f}"


# --------------------------------------------------------------------------------------------- cost breakdown


def cost_chart(result: Result, currency: str = "") -> Drawing | None:
    """One stacked bar of the total cost split into its components, with a legend row per component.

    The components, amounts and shares are :meth:`Result.cost_lines` -- the same figures as the cost table, the
    summary sheet and the mail -- so the chart can never leave a component out. Each legend row reads
    ``label``, ``amount`` (2 decimals) and ``share`` (1 decimal, ``%``), which a test reads back from the SVG.

    Returns None when there is nothing to draw (no plan, or a total of zero).
    """
    lines = result.cost_lines()
    total = sum(max(line.amount, 0.0) for line in lines)
    if total <= 0:
        return None
    money = f" {currency}" if currency else ""
    left, right, bar_top, bar_h = 12.0, WIDTH - 12.0, 14.0, 30.0
    row_h = 24.0
    drawing = Drawing(WIDTH, bar_top + bar_h + 16 + row_h * len(lines), key="cost", title="Cost breakdown")
    x = left
    for line in lines:
        width = (right - left) * max(line.amount, 0.0) / total
        drawing.rect(x, bar_top, width, bar_h, COST_COLOURS.get(line.key, OTHER_COST))
        x += width
    parts = []
    for i, line in enumerate(lines):
        y = bar_top + bar_h + 16 + row_h * i + 12
        drawing.rect(left, y - 11, 14, 14, COST_COLOURS.get(line.key, OTHER_COST))
        drawing.text(left + 22, y, line.label, 13)
        drawing.text(right - 62, y, f"{line.amount:,.2f}{money}", 13, anchor="end")
        drawing.text(right, y, f"{line.share * 100:.1f} %", 13, MUTED, anchor="end")
        parts.append(f"{line.label.lower()} {line.share * 100:.1f} %")
    drawing.alt = f"Cost breakdown of the total {total:,.2f}{money}: " + ", ".join(parts) + "."
    return drawing


# --------------------------------------------------------------------------------------------- utilisation


def utilisation_chart(result: Result, units: str = "") -> Drawing | None:
    """Horizontal bars: share of supply used at each depot and of capacity at each hub, with a 100 % line."""
    shown, count, cut = utilisation_top(result, MAX_UTILISATION_ROWS)
    if not shown:
        return None
    hidden = count - MAX_UTILISATION_ROWS
    label_w, left, right = 150.0, 12.0, WIDTH - 62.0
    track_left = left + label_w
    row_h, top = 26.0, 22.0
    height = top + row_h * len(shown) + (22 if hidden > 0 else 0) + 30
    drawing = Drawing(WIDTH, height, key="utilisation", title="Depot and hub utilisation")
    # The bar track stands for 0-100 %; over-full values (not possible in a feasible plan) are drawn to the end.
    full_x = right
    drawing.text(track_left, top - 8, "0 %", 11, MUTED)
    drawing.text(full_x, top - 8, "100 %", 11, MUTED, anchor="end")
    parts = []
    for i, row in enumerate(shown):
        y = top + row_h * i
        colour = DEPOT if row["kind"] == "depot" else HUB
        _marker(drawing, row["kind"], left + 5, y + 11, 5)
        drawing.text(left + 15, y + 15, _clip(row["node"], 19), 12)
        if row["share"] is None:
            drawing.rect(track_left, y + 5, right - track_left, 12, TRACK)
            drawing.text(track_left + 6, y + 15, f"no limit · {_fmt(row['used'])} {units}".rstrip(), 11, MUTED)
            parts.append(f"{row['node']} no limit")
            continue
        share = row["share"]
        drawing.rect(track_left, y + 5, right - track_left, 12, TRACK)
        drawing.rect(track_left, y + 5, (right - track_left) * max(0.0, min(share, 1.0)), 12,
                     FULL if share >= FULL_AT else colour)
        drawing.text(WIDTH - 10, y + 15, f"{share * 100:.0f} %", 12, anchor="end", bold=share >= FULL_AT)
        parts.append(f"{row['node']} {share * 100:.0f} %")
    drawing.line(full_x, top - 4, full_x, top + row_h * len(shown), 1.2, MUTED)
    y = top + row_h * len(shown)
    if hidden > 0:
        drawing.text(left, y + 16, f"... and {hidden:,d} more (the result sheet LS Nodes lists every one)" if cut
                     else f"... and {hidden} more (see the tables below)", 11, MUTED)
        y += 22
    # Legend: which bars are depots, which hubs, which are at their limit.
    lx = left
    for label, kind, colour in (("depot: share of supply", "depot", DEPOT), ("hub: share of capacity", "hub", HUB)):
        _marker(drawing, kind, lx + 5, y + 16, 5)
        drawing.text(lx + 14, y + 20, label, 11, MUTED)
        lx += 150
    drawing.rect(lx, y + 11, 14, 10, FULL)
    drawing.text(lx + 19, y + 20, "at its limit", 11, MUTED)
    drawing.alt = "Utilisation: " + "; ".join(parts) + (f"; and {hidden} more" if hidden > 0 else "") + "."
    return drawing


def _marker(drawing: Drawing, kind: str, x: float, y: float, r: float, short: bool = False) -> None:
    """The node symbol used on the map and in legends: square depot, diamond hub, round customer."""
    if kind == "depot":
        drawing.rect(x - r, y - r, 2 * r, 2 * r, DEPOT)
    elif kind == "hub":
        drawing.polygon([(x, y - r * 1.3), (x + r * 1.3, y), (x, y + r * 1.3), (x - r * 1.3, y)], HUB)
    elif short:
        drawing.circle(x, y, r, "#ffffff", SHORT, 2.2)
    else:
        drawing.circle(x, y, r * 0.85, CUSTOMER, "#ffffff", 1.0)


# --------------------------------------------------------------------------------------------- network map


def project(latitudes: list[float], longitudes: list[float]) -> tuple[list[float], list[float]]:
    """Equirectangular projection scaled by cos(mean latitude): (x east, y south) in degree-like units.

    >>> xs, ys = project([0.0, 60.0], [0.0, 10.0])
    >>> round(xs[1], 3), ys  # cos(30 degrees) = 0.866; y grows southwards, from the northernmost node
    (8.66, [60.0, 0.0])
    """
    mean_lat = sum(latitudes) / len(latitudes)
    factor = math.cos(math.radians(mean_lat))
    lon0, lat0 = min(longitudes), max(latitudes)
    return [(lon - lon0) * factor for lon in longitudes], [lat0 - lat for lat in latitudes]


def _coordinates(network: Network) -> dict[str, tuple[str, float, float]]:
    """Node id -> (kind, latitude, longitude) for every node with both coordinates finite and in range."""
    placed = {}
    for kind, frame in (("depot", network.depots), ("hub", network.hubs), ("customer", network.customers)):
        if not len(frame):
            continue
        lat, lon = finite_column(frame, "latitude"), finite_column(frame, "longitude")
        with np.errstate(invalid="ignore"):  # NaN compares false: a node without both is left out
            where = (lat >= -90) & (lat <= 90) & (lon >= -180) & (lon <= 180)
        if where.any():  # a row at a time only for the nodes placed (none in a network without coordinates)
            for node, north, east in zip(frame["id"].to_numpy(dtype=object)[where], lat[where].tolist(),
                                         lon[where].tolist()):
                placed[str(node)] = (kind, north, east)
    return placed


def _texts(column: pd.Series) -> list[str]:
    """``str(value)`` of every value of a column (read as plain objects: fast for Arrow-backed text too)."""
    return [str(value) for value in column.to_numpy(dtype=object)]


def _active_lane_count(network: Network) -> int:
    """``len(network.active_lanes)`` without filtering the lanes frame (a tenth of a second at a million lanes)."""
    active = network.lanes["active"]
    if active.dtype == bool:
        return int(np.count_nonzero(active.to_numpy()))
    return len(network.active_lanes)


def map_chart(network: Network, result: Result, units: str = "") -> Drawing | None:
    """The network on a map: nodes by kind, lanes with flow as lines as wide as their flow, capacity beneath.

    - a lane with flow is a line whose width is proportional to its flow (the widest is :data:`MAX_LINE` px);
      a lane at its capacity is drawn in the "at its limit" colour;
    - under it, a light band on the same scale shows the lane's capacity (capped at :data:`MAX_BAND` px), so
      the light margin either side is the unused capacity;
    - active lanes without flow are thin dashed lines; customers short of demand are hollow red rings.

    Thinning for big networks (what a planner reads is kept: every node, the lanes that carry the plan): only the
    :data:`MAX_FLOW_LANES` lanes with the largest flows are drawn, and unused lanes only when there are at most
    :data:`MAX_UNUSED_LANES` of them; the legend and the alt text say how many lanes were left out and, for lanes
    with flow, what share of the total flow the drawn ones carry.

    Returns None when fewer than two nodes have coordinates (the page then says the map needs them).
    """
    placed = _coordinates(network)
    if len(placed) < 2:
        return None
    ids = list(placed)
    xs, ys = project([placed[i][1] for i in ids], [placed[i][2] for i in ids])
    span_x, span_y = max(xs) or 0.0, max(ys) or 0.0
    margin, legend_h = 28.0, 96.0
    inner_w, max_inner_h = WIDTH - 2 * margin, 440.0
    if span_x <= 0 and span_y <= 0:
        scale = 1.0
    else:
        scale = min(inner_w / span_x if span_x > 0 else math.inf, max_inner_h / span_y if span_y > 0 else math.inf)
    map_h = max(span_y * scale, 120.0) + 2 * margin
    off_x = margin + (inner_w - span_x * scale) / 2
    off_y = margin + (map_h - 2 * margin - span_y * scale) / 2
    where = {i: (off_x + x * scale, off_y + y * scale) for i, x, y in zip(ids, xs, ys)}

    drawing = Drawing(WIDTH, map_h + legend_h, key="map", title="Network map")
    drawing.rect(0, 0, WIDTH, map_h, "#f7f6f1")

    flows = result.flows
    used_keys = set()
    max_flow = float(flows["flow"].max()) if not flows.empty else 0.0
    per_px = MAX_LINE / max_flow if max_flow > 0 else 0.0
    skipped = 0
    if len(flows):
        used_keys = set(zip(_texts(flows["origin"]), _texts(flows["destination"]),
                            [str(mode or "") for mode in flows["mode"].to_numpy(dtype=object)]))
    unused_count = _active_lane_count(network) - len(used_keys)
    unused_left_out = unused_count if unused_count > MAX_UNUSED_LANES else 0
    for lane in network.active_lanes.itertuples(index=False) if not unused_left_out else ():
        key = (str(lane.origin), str(lane.destination), str(lane.mode or ""))
        if key in used_keys:
            continue
        a, b = where.get(key[0]), where.get(key[1])
        if a and b:
            drawing.line(*a, *b, 1.0, UNUSED, dashed=True)

    total_flow = float(flows["flow"].sum()) if not flows.empty else 0.0
    flow_left_out = max(len(flows) - MAX_FLOW_LANES, 0)
    if flow_left_out:
        flows = flows.nlargest(MAX_FLOW_LANES, "flow")
    drawn_share = float(flows["flow"].sum()) / total_flow if total_flow > 0 else 1.0
    drawn = []
    for lane in flows.itertuples(index=False):
        a, b = where.get(str(lane.origin)), where.get(str(lane.destination))
        if not (a and b):
            skipped += 1
            continue
        flow = _finite(lane.flow) or 0.0
        capacity = _finite(lane.capacity)
        share = _finite(lane.utilisation)
        drawn.append((flow, a, b, capacity, share))
    for flow, a, b, capacity, _share in drawn:
        if capacity is not None:
            drawing.line(*a, *b, min(max(capacity * per_px, MIN_LINE), MAX_BAND), BAND)
    for flow, a, b, _capacity, share in sorted(drawn, key=lambda d: -d[0]):  # thin lines end up on top
        colour = FULL if share is not None and share >= FULL_AT else FLOW
        drawing.line(*a, *b, max(flow * per_px, MIN_LINE), colour)

    short = set(result.unmet["customer"].astype(str)) if not result.unmet.empty else set()
    by_kind: dict[str, list[str]] = {"customer": [], "hub": [], "depot": []}
    for node in ids:
        by_kind[placed[node][0]].append(node)
    label_customers = len(by_kind["customer"]) <= MAX_CUSTOMER_LABELS
    # Customers first, depots and hubs on top: they are fewer and matter more for reading the plan.
    for kind in ("customer", "hub", "depot"):
        for node in by_kind[kind]:
            x, y = where[node]
            _marker(drawing, kind, x, y, 6 if kind != "customer" else 5, short=node in short)
            if kind != "customer" or label_customers:
                anchor = "end" if x > WIDTH * 0.7 else "start"
                dx = -9 if anchor == "end" else 9
                drawing.text(x + dx, y - 6, _clip(node, 18), 11 if kind != "customer" else 10,
                             INK if kind != "customer" else MUTED, anchor=anchor, bold=kind != "customer")

    # Legend below the map.
    y0 = map_h + 18
    col = [12.0, 170.0, 330.0]
    _marker(drawing, "depot", col[0] + 6, y0 - 4, 5)
    drawing.text(col[0] + 16, y0, "depot", 11, MUTED)
    _marker(drawing, "hub", col[0] + 66, y0 - 4, 5)
    drawing.text(col[0] + 76, y0, "hub", 11, MUTED)
    _marker(drawing, "customer", col[1] + 6, y0 - 4, 5)
    drawing.text(col[1] + 16, y0, "customer", 11, MUTED)
    _marker(drawing, "customer", col[2] + 6, y0 - 4, 5, short=True)
    drawing.text(col[2] + 16, y0, "customer short", 11, MUTED)
    y1 = y0 + 22
    drawing.line(col[0], y1 - 4, col[0] + 26, y1 - 4, 4, FLOW)
    drawing.text(col[0] + 32, y1, "lane with flow", 11, MUTED)
    drawing.line(col[1], y1 - 4, col[1] + 26, y1 - 4, 4, FULL)
    drawing.text(col[1] + 32, y1, "lane at capacity", 11, MUTED)
    drawing.line(col[2], y1 - 4, col[2] + 26, y1 - 4, 1, UNUSED, dashed=True)
    drawing.text(col[2] + 32, y1, "lane unused", 11, MUTED)
    y2 = y1 + 22
    drawing.line(col[0], y2 - 4, col[0] + 26, y2 - 4, 12, BAND)
    drawing.line(col[0], y2 - 4, col[0] + 26, y2 - 4, 4, FLOW)
    drawing.text(col[0] + 32, y2, "light band: lane capacity, on the same scale as flow", 11, MUTED)
    y3 = y2 + 20
    scale_text = (f"widest line = {_fmt(max_flow)} {units}".rstrip() + "; widths in proportion to flow"
                  if max_flow > 0 else "no lane carries flow")
    drawing.text(col[0], y3, scale_text, 11, MUTED)
    if skipped:
        drawing.text(WIDTH - 12, y3, f"{skipped} lane(s) not drawn: no coordinates", 11, SHORT, anchor="end")
    left_out = []
    if flow_left_out:
        left_out.append(f"only the {MAX_FLOW_LANES:,d} largest of {MAX_FLOW_LANES + flow_left_out:,d} lanes with "
                        f"flow drawn ({drawn_share:.0%} of the flow)")
    if unused_left_out:
        left_out.append(f"{unused_left_out:,d} unused lanes not drawn")
    if left_out:
        drawing.height += 18  # one more legend line
        drawing.text(col[0], y3 + 18, "; ".join(left_out) + "; the result sheets list every lane with flow", 11,
                     MUTED)
    missing = len(network.depots) + len(network.hubs) + len(network.customers) - len(placed)
    drawing.alt = (f"Network map of {len(placed)} nodes and {len(drawn)} lanes with flow"
                   + (f" ({missing} nodes without coordinates not shown)" if missing else "")
                   + f"; the widest line carries {_fmt(max_flow)} {units}".rstrip()
                   + (f"; {flow_left_out:,d} smaller lanes with flow not drawn" if flow_left_out else "")
                   + (f"; {unused_left_out:,d} unused lanes not drawn" if unused_left_out else "") + ".")
    return drawing


# --------------------------------------------------------------------------------------------- all charts


def summary_charts(network: Network, result: Result) -> list[Drawing]:
    """The charts of the summary, in page order: cost breakdown, network map (when coordinates allow),
    utilisation. Empty without a plan.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> from lanesolve.model.result import Result, SolveStatus
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> summary_charts(net, Result(SolveStatus.INFEASIBLE))
    []
    """
    if not result.status.has_plan:
        return []
    units = network.settings.units or ""
    charts = [cost_chart(result, network.settings.currency or ""), map_chart(network, result, units),
              utilisation_chart(result, units)]
    return [chart for chart in charts if chart is not None]


__all__ = ["Drawing", "cost_chart", "utilisation_chart", "utilisation_rows", "map_chart", "project",
           "summary_charts"]
