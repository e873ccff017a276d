"""A solved plan's per-product figures and emissions, from the model's column values into the plain
:class:`~lanesolve.model.result.Result` (frames :data:`PRODUCT_FLOW_COLUMNS`, :data:`PRODUCT_NODE_COLUMNS`,
:data:`LANE_EMISSION_COLUMNS` and the ``emissions`` summary)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from lanesolve.model.arrays import SparseModel
from lanesolve.model.emissions import lane_intensity
from lanesolve.model.network import Network
from lanesolve.model.product_model import demand_penalties, pair_table
from lanesolve.model.result import SENSITIVITY_COLUMNS, UNMET_COLUMNS, Result, empty_frame

#: Columns of :attr:`Result.product_flows`: units of each product on each lane (flow > 0 only) and the lane
#: capacity they take (units x capacity_use).
PRODUCT_FLOW_COLUMNS = ["origin", "destination", "mode", "product", "flow", "capacity_used"]
#: Columns of :attr:`Result.product_nodes`: every node and product it touches, in units of the product.
PRODUCT_NODE_COLUMNS = ["node", "kind", "product", "supply", "demand", "shipped", "received", "unmet"]
#: Columns of :attr:`Result.lane_emissions`: every lane that carries flow.
LANE_EMISSION_COLUMNS = ["origin", "destination", "mode", "distance_km", "tonnes", "emission_factor",
                         "factor_source", "emissions_t"]
#: Label of the mode of lanes without one, in ``by_mode``.
NO_MODE = "(no mode)"
#: Below this a value is solver noise (as :data:`lanesolve.model.solve.NOISE`).
NOISE = 1e-9


def finish_plan(network: Network, model: SparseModel, values: np.ndarray, result: Result, node_balance) -> None:
    """Add the per-product figures and the emissions of a plan to ``result`` (nothing for a network without them).

    ``node_balance`` is :func:`lanesolve.model.solve.node_balance`, passed in so this module need not import the
    module that calls it.
    """
    if model.product_columns is not None:
        fill_products(network, model, values, result, node_balance)
    if model.emission is not None:
        fill_emissions(network, model, values, result)


def _tonnes_per_column(network: Network, model: SparseModel, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per active lane: tonnes carried; per column: the values with noise removed."""
    lanes = network.active_lanes
    tonnes = np.zeros(len(lanes))
    pairs = model.product_columns
    if pairs is None:
        weight = network.emissions.tonnes_per_unit
        flow = np.asarray(values[model.columns("flow_")], dtype=float)
        tonnes = flow * (weight if np.isfinite(weight) else math.nan)
    else:
        units = np.asarray(values[model.columns("product_flow_")], dtype=float)
        np.add.at(tonnes, pairs.lane_position, units * network.products.weight[pairs.product])
    return tonnes, values


def fill_products(network: Network, model: SparseModel, values: np.ndarray, result: Result, node_balance) -> None:
    """Product flows, per-product node balance, units short per customer and the node frame in units."""
    data = network.products
    pairs = model.product_columns
    units = np.asarray(values[model.columns("product_flow_")], dtype=float).copy()
    units[np.abs(units) < NOISE] = 0.0
    lanes = network.lanes.loc[pairs.lane_index]
    ids = np.asarray(data.ids, dtype=object)
    used = units > 0
    result.product_flows = pd.DataFrame({
        "origin": lanes["origin"].to_numpy(dtype=object)[used], "destination": lanes["destination"].to_numpy(
            dtype=object)[used], "mode": lanes["mode"].to_numpy(dtype=object)[used],
        "product": ids[pairs.product[used]], "flow": units[used],
        "capacity_used": units[used] * data.capacity_use[pairs.product[used]]})[PRODUCT_FLOW_COLUMNS]

    out = pd.DataFrame({"node": lanes["origin"].to_numpy(dtype=object), "product": pairs.product, "flow": units})
    into = pd.DataFrame({"node": lanes["destination"].to_numpy(dtype=object), "product": pairs.product,
                         "flow": units})
    shipped = out.groupby(["node", "product"])["flow"].sum()
    received = into.groupby(["node", "product"])["flow"].sum()
    short = np.zeros((len(network.customers), len(ids)))
    unmet_ids = model.ids("unmet_product_")
    if len(unmet_ids):
        pos = [tuple(int(part) for part in str(i).split("_")) for i in unmet_ids.tolist()]
        node_pos = network.customers.index.get_indexer([p[0] for p in pos])
        short[node_pos, [p[1] for p in pos]] = np.clip(values[model.columns("unmet_product_")], 0.0, None)
    short[short < NOISE] = 0.0
    demand = pair_table(network, data.demand, "customer", "demand", network.customers)
    supply = (pair_table(network, data.supply, "depot", "supply", network.depots) if data.supply is not None
              else None)
    rows = []
    for kind, frame in (("depot", network.depots), ("customer", network.customers), ("hub", network.hubs)):
        for n, node in enumerate(frame["id"].tolist()):
            for k, product in enumerate(ids.tolist()):
                s = shipped.get((node, k), 0.0)
                r = received.get((node, k), 0.0)
                q = demand[n, k] if kind == "customer" else math.nan
                if s == 0 and r == 0 and not (q > 0) and not (kind == "depot" and supply is not None
                                                               and supply[n, k] > 0):
                    continue
                rows.append((node, kind, product,
                             (supply[n, k] if supply is not None else math.nan) if kind == "depot" else math.nan,
                             q, s, r, short[n, k] if kind == "customer" else math.nan))
    result.product_nodes = pd.DataFrame(rows, columns=PRODUCT_NODE_COLUMNS) if rows else empty_frame(
        PRODUCT_NODE_COLUMNS)

    penalty = np.nan_to_num(demand_penalties(network), nan=0.0)
    unmet_rows = [(node, float(short[n].sum()), float(short[n] @ penalty[n]))
                  for n, node in enumerate(network.customers["id"].tolist()) if short[n].sum() > 0]
    result.unmet = pd.DataFrame(unmet_rows, columns=UNMET_COLUMNS) if unmet_rows else empty_frame(UNMET_COLUMNS)
    # LS Nodes in units (the lane frame's flow is capacity used): re-done from the product flows.
    outflow = out.groupby("node")["flow"].sum().to_dict()
    inflow = into.groupby("node")["flow"].sum().to_dict()
    result.nodes = node_balance(network, outflow, inflow, dict(zip(network.customers["id"], short.sum(axis=1))))


def fill_emissions(network: Network, model: SparseModel, values: np.ndarray, result: Result) -> None:
    """Emissions per lane and per mode, hub handling, the total and the count of lanes of unknown factor."""
    lanes = network.active_lanes
    data = network.emissions
    tonnes, _ = _tonnes_per_column(network, model, values)
    tonnes = np.where(np.abs(tonnes) < NOISE, 0.0, tonnes)
    km = data.lane_km.reindex(lanes.index).to_numpy(dtype=float)
    factor = data.lane_factor.reindex(lanes.index).to_numpy(dtype=float)
    _, known = lane_intensity(network)
    lane_t = np.where(known, tonnes * np.nan_to_num(km) * np.nan_to_num(factor) / 1000.0, math.nan)
    used = tonnes > 0
    mode = lanes["mode"].astype(str).replace("", NO_MODE).to_numpy(dtype=object)
    result.lane_emissions = pd.DataFrame({
        "origin": lanes["origin"].to_numpy(dtype=object)[used],
        "destination": lanes["destination"].to_numpy(dtype=object)[used],
        "mode": lanes["mode"].to_numpy(dtype=object)[used], "distance_km": km[used], "tonnes": tonnes[used],
        "emission_factor": factor[used],
        "factor_source": data.lane_factor_source.reindex(lanes.index).to_numpy(dtype=object)[used],
        "emissions_t": lane_t[used]})[LANE_EMISSION_COLUMNS]
    hub_rate = dict(zip(network.hubs["id"], np.asarray(data.hub_per_tonne, dtype=float) / 1000.0))
    hub_t = float(np.sum(tonnes * lanes["destination"].map(hub_rate).fillna(0.0).to_numpy(dtype=float)))
    by_mode = pd.Series(np.nan_to_num(lane_t[used]), index=mode[used]).groupby(level=0).sum()
    unknown = int((used & ~known).sum())
    total = float(model.emission @ values)
    result.emissions = {
        "total_t": total if abs(total) >= NOISE else 0.0,
        "lanes_t": float(np.nansum(lane_t[used])),
        "hubs_t": hub_t,
        "by_mode": {str(k): float(v) for k, v in by_mode.items()},
        "unknown_lanes": unknown,
        "cap_t": network.settings.emissions_cap,
        "carbon_price": network.settings.carbon_price,
    }
    if unknown:
        result.messages.append(
            f"{unknown} lane(s) carrying flow have no emission factor (neither their own nor their mode's): their "
            "emissions are unknown and not in the total, which is therefore a lower bound. Give those lanes or "
            "modes a factor.")


def figures_left_out(network: Network) -> str:
    """Why the sensitivity figures are not computed for ``network`` ("" when they are): they are figures of the
    single-product flow network without a carbon price or emissions cap."""
    if network.products is not None:
        return ("Sensitivity figures are not computed for several products (they are figures of the one-product "
                "flow network).")
    if network.emissions is not None and (network.settings.carbon_price or network.settings.emissions_cap is not None):
        return ("Sensitivity figures are not computed with a carbon price or an emissions cap (they leave the "
                "carbon cost out); the cap's own value is on LS Emissions.")
    return ""


def no_figures(reason: str) -> pd.DataFrame:
    """A sensitivity frame of one row (figure ``none``) saying ``reason``."""
    row = {column: None for column in SENSITIVITY_COLUMNS}
    row.update(figure="none", basis="", text=reason, unique=False)
    return pd.DataFrame([row], columns=SENSITIVITY_COLUMNS)
