"""The network map of a big network draws the largest flows only and leaves unused lanes out, and says so.

Checked on the hand-built network and plan of tests/test_charts.py with the limits lowered, the SVG read back by
:mod:`xml.etree.ElementTree` (outside lanesolve)."""

from __future__ import annotations

import pytest

from lanesolve.report import charts
from test_charts import lines, network, result, svg_root  # noqa: F401  (fixtures)


def test_small_map_draws_every_lane(network, result):
    root = svg_root(charts.map_chart(network, result))
    # 3 lanes with flow (one at capacity), 1 unused lane in 1 dashed line or more (hand count of the fixture).
    assert len(lines(root, charts.FLOW)) + len(lines(root, charts.FULL)) == 3
    assert len(lines(root, charts.UNUSED)) >= 1
    assert "not drawn" not in charts.map_chart(network, result).to_svg()


def test_big_map_draws_the_largest_flows_and_no_unused_lanes(network, result, monkeypatch):
    monkeypatch.setattr(charts, "MAX_FLOW_LANES", 2)
    monkeypatch.setattr(charts, "MAX_UNUSED_LANES", 0)
    drawing = charts.map_chart(network, result)
    root = svg_root(drawing)
    drawn = lines(root, charts.FLOW) + lines(root, charts.FULL)
    # The two 60-unit lanes are drawn, the 20-unit one is not: at 60 the width is MAX_LINE (the widest flow).
    assert len(drawn) == 2
    assert all(float(e.get("stroke-width")) == pytest.approx(charts.MAX_LINE) for e in drawn)
    assert lines(root, charts.UNUSED) == []
    svg = drawing.to_svg()
    # 120 of 140 units drawn = 86 % (hand arithmetic); 1 unused lane left out.
    assert "only the 2 largest of 3 lanes with flow drawn (86% of the flow)" in svg
    assert "1 unused lanes not drawn" in svg
    assert "1 smaller lanes with flow not drawn" in drawing.alt
    small = charts.map_chart(network, result)
    monkeypatch.undo()
    assert small.height == pytest.approx(charts.map_chart(network, result).height + 18)
