"""The charts: geometry checked against hand computation, SVG parsed by the standard library, PNG decoded by Pillow.

The SVG is read back with :mod:`xml.etree.ElementTree` (a parser outside lanesolve), so the checks look at the
shapes a browser would draw rather than at the drawing's own list.
"""

from __future__ import annotations

import io
import math
import xml.etree.ElementTree as ET

import pandas as pd
import pytest

from lanesolve.report import charts
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import FLOW_COLUMNS, NODE_COLUMNS, UNMET_COLUMNS, Result, SolveStatus

SVG = "{http://www.w3.org/2000/svg}"
EVIL = "<script>alert(1)</script>"


def svg_root(drawing):
    return ET.fromstring(drawing.to_svg())


def lines(root, colour, map_only=True):
    """Lines of a colour; on a map, only those on the map area (the legend below it draws samples)."""
    backgrounds = [float(e.get("height")) for e in root.iter(f"{SVG}rect") if e.get("fill") == "#f7f6f1"]
    bottom = backgrounds[0] if (backgrounds and map_only) else math.inf
    return [e for e in root.iter(f"{SVG}line") if e.get("stroke") == colour and float(e.get("y1")) < bottom]


@pytest.fixture
def network():
    # Depot at 60 N 0 E, hub 60 N 10 E, customer 50 N 10 E: at 60 degrees cos = 1/2 (textbook value), so on a map
    # scaled by cos(mean latitude) the depot-hub leg is short and the hub-customer leg long.
    return make_network(
        depots=[{"id": "Depot A", "supply": 100, "latitude": 60.0, "longitude": 0.0}],
        hubs=[{"id": "Hub B", "capacity": 80, "latitude": 60.0, "longitude": 10.0}],
        customers=[{"id": EVIL, "demand": 60, "latitude": 50.0, "longitude": 10.0},
                   {"id": "Far", "demand": 30, "latitude": 55.0, "longitude": 2.0}],
        lanes=[{"origin": "Depot A", "destination": "Hub B", "cost_per_unit": 1, "capacity": 120},
               {"origin": "Hub B", "destination": EVIL, "cost_per_unit": 1, "capacity": 60},
               {"origin": "Depot A", "destination": "Far", "cost_per_unit": 5},
               {"origin": "Hub B", "destination": "Far", "cost_per_unit": 9}],
        settings=Settings(units="pallets", currency="EUR"),
    )


@pytest.fixture
def result():
    # Hand-built: 60 via the hub to EVIL (its lane at capacity), 20 direct to Far, Far 10 short.
    flows = pd.DataFrame([
        ["Depot A", "Hub B", "", 60.0, 1.0, 60.0, 0.0, 120.0, 0.5],
        ["Hub B", EVIL, "", 60.0, 1.0, 60.0, 0.0, 60.0, 1.0],
        ["Depot A", "Far", "", 20.0, 5.0, 100.0, 0.0, math.inf, math.nan],
    ], columns=FLOW_COLUMNS)
    nodes = pd.DataFrame([
        ["Depot A", "depot", 100.0, math.nan, 80.0, 0.0, math.nan, math.nan, math.nan, 0.8],
        [EVIL, "customer", math.nan, 60.0, 0.0, 60.0, 0.0, math.nan, math.nan, math.nan],
        ["Far", "customer", math.nan, 30.0, 0.0, 20.0, 10.0, math.nan, math.nan, math.nan],
        ["Hub B", "hub", math.nan, math.nan, 60.0, 60.0, math.nan, 80.0, 60.0, 0.75],
    ], columns=NODE_COLUMNS)
    unmet = pd.DataFrame([["Far", 10.0, 100.0]], columns=UNMET_COLUMNS)
    breakdown = {"transport": 220.0, "handling": 0.0, "fixed_lane": 80.0, "unmet_penalty": 100.0}
    return Result(SolveStatus.OPTIMAL, total_cost=400.0, cost_breakdown=breakdown, flows=flows, nodes=nodes,
                  unmet=unmet)


def test_projection_scales_longitude_by_cos_mean_latitude():
    # Equirectangular with cos(mean latitude): mean of 60 and 60 is 60, cos 60 = 0.5, so 10 degrees east is 5.
    xs, ys = charts.project([60.0, 60.0], [0.0, 10.0])
    assert xs == pytest.approx([0.0, 5.0], abs=1e-12)
    assert ys == pytest.approx([0.0, 0.0], abs=1e-12)
    # On the equator the scale is 1; y grows southwards from the northernmost point.
    xs, ys = charts.project([0.0, -10.0], [0.0, 10.0])
    assert xs == pytest.approx([0.0, 10.0 * math.cos(math.radians(-5.0))], abs=1e-12)
    assert ys == pytest.approx([0.0, 10.0], abs=1e-12)


def test_map_places_nodes_by_projection(network, result):
    root = svg_root(charts.map_chart(network, result, "pallets"))
    depot = next(e for e in root.iter(f"{SVG}rect") if e.get("fill") == charts.DEPOT)
    hub = next(e for e in root.iter(f"{SVG}polygon") if e.get("fill") == charts.HUB)
    dx_depot = float(depot.get("x")) + float(depot.get("width")) / 2
    dy_depot = float(depot.get("y")) + float(depot.get("height")) / 2
    hub_pts = [tuple(map(float, p.split(","))) for p in hub.get("points").split()]
    hx, hy = sum(p[0] for p in hub_pts) / 4, sum(p[1] for p in hub_pts) / 4
    evil_lane = next(e for e in lines(root, charts.FULL))  # hub -> EVIL, the lane at its capacity
    cx, cy = float(evil_lane.get("x2")), float(evil_lane.get("y2"))
    # By hand: mean latitude of the four nodes is 56.25; depot->hub is 10 deg east, hub->customer 10 deg south.
    factor = math.cos(math.radians((60 + 60 + 50 + 55) / 4))
    assert hy == pytest.approx(dy_depot, abs=0.02)  # same latitude, same height
    assert cx == pytest.approx(hx, abs=0.02)  # same longitude, straight below
    assert (hx - dx_depot) / (cy - hy) == pytest.approx(10 * factor / 10, rel=1e-3)


def test_map_line_width_in_proportion_to_flow_and_capacity_band(network, result):
    drawing = charts.map_chart(network, result, "pallets")
    root = svg_root(drawing)
    flow_widths = sorted(float(e.get("stroke-width")) for e in lines(root, charts.FLOW) + lines(root, charts.FULL))
    # Flows 20, 60, 60: the widest is MAX_LINE and 20 is a third of it.
    assert flow_widths == pytest.approx([charts.MAX_LINE / 3, charts.MAX_LINE, charts.MAX_LINE], abs=0.01)
    band_widths = sorted(float(e.get("stroke-width")) for e in lines(root, charts.BAND))
    # Bands only on lanes with a capacity (120 and 60; the one without a limit has none), same scale as flow,
    # the 120 one capped at MAX_BAND (120/60 * 10 = 20 > 18).
    per_unit = charts.MAX_LINE / 60
    assert band_widths == pytest.approx([60 * per_unit, min(120 * per_unit, charts.MAX_BAND)], abs=0.01)
    # The active lane without flow (Hub B -> Far) is a dashed line; so is the legend's sample.
    dashed = [e for e in root.iter(f"{SVG}line") if e.get("stroke-dasharray")]
    assert len(dashed) >= 2
    assert "420" not in drawing.alt and "widest line carries 60 pallets" in drawing.alt


def test_map_marks_short_customer_and_escapes_names(network, result):
    svg = charts.map_chart(network, result).to_svg()
    root = ET.fromstring(svg)
    rings = [e for e in root.iter(f"{SVG}circle") if e.get("stroke") == charts.SHORT]
    assert len(rings) == 2  # customer Far, and the legend's sample
    texts = [e.text for e in root.iter(f"{SVG}text")]
    assert any(t and t.startswith("<script>") for t in texts)  # the name, as text (clipped to 18 characters)
    assert "<script>" not in svg and not list(root.iter(f"{SVG}script"))


def test_map_needs_two_placed_nodes(result):
    net = make_network([{"id": "D", "supply": 5, "latitude": 1.0, "longitude": 2.0}], [{"id": "C", "demand": 5}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    assert charts.map_chart(net, result) is None


def test_map_counts_lanes_it_cannot_draw(network, result):
    network.customers.loc[network.customers["id"] == "Far", ["latitude", "longitude"]] = math.nan
    drawing = charts.map_chart(network, result)
    texts = [e.text for e in svg_root(drawing).iter(f"{SVG}text")]
    assert "1 lane(s) not drawn: no coordinates" in texts
    assert "(1 nodes without coordinates not shown)" in drawing.alt


def test_cost_chart_segments_in_proportion(result):
    drawing = charts.cost_chart(result, "EUR")
    root = svg_root(drawing)
    segments = {e.get("fill"): float(e.get("width")) for e in root.iter(f"{SVG}rect")
                if e.get("height") == "30"}
    track = charts.WIDTH - 24
    # 220 / 400, 80 / 400, 100 / 400 of the track; handling is zero.
    assert segments[charts.COST_COLOURS["transport"]] == pytest.approx(track * 0.55, abs=0.01)
    assert segments[charts.COST_COLOURS["fixed_lane"]] == pytest.approx(track * 0.20, abs=0.01)
    assert segments[charts.COST_COLOURS["unmet_penalty"]] == pytest.approx(track * 0.25, abs=0.01)
    assert "400.00 EUR" in drawing.alt and "transport 55.0 %" in drawing.alt


def test_cost_chart_absent_for_zero_cost():
    assert charts.cost_chart(Result(SolveStatus.OPTIMAL, total_cost=0.0)) is None


def test_utilisation_bars_and_order(result):
    rows = charts.utilisation_rows(result)
    # Depot: net outflow 80 of supply 100; hub: throughput 60 of capacity 80. Fullest first.
    assert [(r["node"], r["used"], r["limit"]) for r in rows] == [("Depot A", 80.0, 100.0), ("Hub B", 60.0, 80.0)]
    root = svg_root(charts.utilisation_chart(result, "pallets"))
    track = charts.WIDTH - 62.0 - (12.0 + 150.0)
    bars = {e.get("fill"): float(e.get("width")) for e in root.iter(f"{SVG}rect") if e.get("height") == "12"
            and e.get("fill") in (charts.DEPOT, charts.HUB)}
    assert bars[charts.DEPOT] == pytest.approx(track * 0.8, abs=0.01)
    assert bars[charts.HUB] == pytest.approx(track * 0.75, abs=0.01)


def test_summary_charts_order_and_no_plan(network, result):
    assert [c.key for c in charts.summary_charts(network, result)] == ["cost", "map", "utilisation"]
    assert charts.summary_charts(network, Result(SolveStatus.INFEASIBLE)) == []


def test_png_decodes_at_twice_the_size_with_the_chart_colours(network, result):
    from PIL import Image

    drawing = charts.map_chart(network, result, "pallets")
    image = Image.open(io.BytesIO(drawing.to_png())).convert("RGB")
    assert image.size == (round(drawing.width * 2), round(drawing.height * 2))
    colours = {rgb for _, rgb in image.getcolors(maxcolors=1 << 20)}

    def rgb(hex_colour):
        return tuple(int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))

    for colour in (charts.DEPOT, charts.HUB, charts.FLOW, charts.FULL, charts.BAND):
        assert rgb(colour) in colours, colour
