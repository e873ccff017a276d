"""The result sheets of several products, of emissions and of the cost-emissions trade-off, as plain tables
(:class:`~lanesolve.write.tables.ResultSheet`), read only from the :class:`~lanesolve.model.result.Result`.

- *LS Product flows*: units of each product on each lane, and the lane capacity they take;
- *LS Product nodes*: per node and product, supply, demand, shipped, received and unmet;
- *LS Emissions*: the plan's total, lanes, hubs, lanes of unknown factor, cap and its value, carbon price, then
  tonnes CO2e per mode;
- *LS Lane emissions*: per lane carrying flow, distance, tonnes, factor and its source, and tonnes CO2e;
- *LS Trade-off*: each plan of the trade-off curve (emissions and cost).
"""

from __future__ import annotations

import math

import pandas as pd

from lanesolve.write.tables import (EMISSIONS_SHEET, LANE_EMISSIONS_SHEET, PRODUCT_FLOWS_SHEET, PRODUCT_NODES_SHEET,
                                    TRADEOFF_SHEET, Labels, ResultSheet, _plain, frame_sheet)


def goods_sheets(network, result) -> list[ResultSheet]:
    """The sheets of the module docstring that apply to ``result`` (none for a single-product plan without
    emissions, and none without a plan).

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> from lanesolve.model.result import Result, SolveStatus
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}], [])
    >>> goods_sheets(net, Result(SolveStatus.OPTIMAL, tradeoff=[{"emissions_t": 1.0, "total_cost": 9.0}]))[0].rows
    [[1, 1.0, 9.0]]
    """
    if not result.status.has_plan:
        return []
    labels = Labels.of(network.settings)
    sheets = []
    if result.product_flows is not None:
        sheets.append(frame_sheet(PRODUCT_FLOWS_SHEET, result.product_flows, {
            "origin": "text", "destination": "text", "mode": "text", "product": "text", "flow": "quantity",
            "capacity_used": "quantity"}, {
            "origin": "Origin", "destination": "Destination", "mode": "Mode", "product": "Product",
            "flow": labels.quantity("Flow"), "capacity_used": "Capacity used (capacity units)"}))
        sheets.append(frame_sheet(PRODUCT_NODES_SHEET, result.product_nodes, {
            "node": "text", "kind": "text", "product": "text", **dict.fromkeys(
                ["supply", "demand", "shipped", "received", "unmet"], "quantity")}, {
            "node": "Node", "kind": "Kind", "product": "Product", "supply": labels.quantity("Supply"),
            "demand": labels.quantity("Demand"), "shipped": labels.quantity("Shipped"),
            "received": labels.quantity("Received"), "unmet": labels.quantity("Unmet")}))
    if result.emissions is not None:
        sheets.append(emissions_sheet(result, labels))
        sheets.append(frame_sheet(LANE_EMISSIONS_SHEET, result.lane_emissions, {
            "origin": "text", "destination": "text", "mode": "text", "distance_km": "distance", "tonnes": "quantity",
            "emission_factor": "rate", "factor_source": "text", "emissions_t": "quantity"}, {
            "origin": "Origin", "destination": "Destination", "mode": "Mode", "distance_km": "Distance (km)",
            "tonnes": "Goods moved (t)", "emission_factor": "Emission factor (kg CO2e per t-km; blank = unknown)",
            "factor_source": "Factor source", "emissions_t": "Emissions (t CO2e; blank = unknown)"}))
    if result.tradeoff:
        frame = pd.DataFrame(result.tradeoff)[["emissions_t", "total_cost"]]
        frame.insert(0, "plan", range(1, len(frame) + 1))
        sheets.append(frame_sheet(TRADEOFF_SHEET, frame, {"plan": "count", "emissions_t": "quantity",
                                                          "total_cost": "money"},
                                  {"plan": "Plan", "emissions_t": "Emissions (t CO2e)",
                                   "total_cost": labels.money("Total cost without carbon price")}))
    return sheets


def emission_lines(result, labels: Labels = Labels()) -> list[tuple[str, object, str]]:
    """(item, value, kind) lines summing up the plan's emissions, for the sheet and the reports."""
    figures = result.emissions or {}
    lines = [("Emissions, total (t CO2e)", figures.get("total_t"), "quantity"),
             ("Emissions of lanes (t CO2e)", figures.get("lanes_t"), "quantity"),
             ("Emissions of hub handling (t CO2e)", figures.get("hubs_t"), "quantity"),
             ("Lanes used with unknown emission factor", figures.get("unknown_lanes"), "count")]
    if figures.get("cap_t") is not None:
        lines.append(("Emissions cap (t CO2e)", figures["cap_t"], "quantity"))
        lines.append((labels.money("Cost of one tonne CO2e less"), figures.get("cap_value_per_t"), "money"))
        lines.append((labels.money("Saving from one tonne CO2e more"), figures.get("cap_saving_per_t"), "money"))
    if figures.get("carbon_price") is not None:
        lines.append((labels.money("Carbon price per tonne CO2e"), figures["carbon_price"], "money"))
    for mode, tonnes in (figures.get("by_mode") or {}).items():
        lines.append((f"Emissions by mode: {mode} (t CO2e)", tonnes, "quantity"))
    return lines


def emissions_sheet(result, labels: Labels = Labels()) -> ResultSheet:
    """*LS Emissions*: :func:`emission_lines` as item / value rows."""
    lines = emission_lines(result, labels)
    rows = [[item, _value(value)] for item, value, _ in lines]
    kinds = {(i, 1): kind for i, (_, _, kind) in enumerate(lines)}
    return ResultSheet(EMISSIONS_SHEET, ["Item", "Value"], rows, {"Item": "text", "Value": "number"}, kinds)


def _value(value):
    if isinstance(value, float) and math.isinf(value):
        return "no plan meets a tighter cap"
    return _plain(value)
