"""The model for several products sharing one network: a multi-commodity min-cost flow on the same lanes, hubs,
trips and fixed charges.

It extends the formulation of :mod:`lanesolve.model.formulation` (read that docstring first); only what changes is
stated here. :func:`build_product_model` builds it once as a :class:`~lanesolve.model.arrays.SparseModel`, read by
every solver like the single-product one.

Sets and parameters, added
--------------------------
- :math:`K`: products; :math:`a_k` capacity units one unit of :math:`k` takes (``capacity_use``);
- :math:`L_k \\subseteq L`: active lanes allowed to carry :math:`k` (the Lanes ``products`` column);
- :math:`s_{dk}` supply of :math:`k` at depot :math:`d` (Supply sheet; 0 for a pair it does not list; without a
  Supply sheet no such row), :math:`s_d` the overall cap on Depots (may be :math:`\\infty`);
- :math:`q_{ck}` demand and :math:`p_{ck}` penalty per unit short (Demand sheet).

Variables
---------
- :math:`x_{lk} \\ge 0` units of :math:`k` on lane :math:`l \\in L_k` (``product_flow_<l>_<k>``, :math:`k` the
  product's position on the Products sheet);
- :math:`x_l` (``flow_<l>``) is now the capacity the lane uses, :math:`x_l = \\sum_k a_k x_{lk}`
  (``lane_total_<l>``), so lane capacity (its bound), hub capacity, trips, fixed charges, minimum volumes and
  node decisions are the single-product families applied to :math:`x_l`, unchanged. The lane's ``cost_per_unit``
  and the handling costs are charged per capacity unit;
- :math:`z_{ck} \\in [0, q_{ck}]` units of :math:`k` short at :math:`c` (``unmet_product_<c>_<k>``), when a
  penalty applies.

Constraints, replacing ``supply_``, ``balance_`` and ``hub_flow_`` of the single-product model
------------------------------------------------------------------------------------------------
- ``supply_product_<d>_<k>``: :math:`\\sum_{\\delta^+(d)} x_{lk} - \\sum_{\\delta^-(d)} x_{lk} \\le s_{dk}`;
- ``supply_<d>``: :math:`\\sum_k (\\sum_{\\delta^+(d)} x_{lk} - \\sum_{\\delta^-(d)} x_{lk}) \\le s_d` (units, not
  capacity units; only when :math:`s_d` is finite);
- ``balance_product_<c>_<k>``: :math:`\\sum_{\\delta^-(c)} x_{lk} - \\sum_{\\delta^+(c)} x_{lk} + z_{ck} = q_{ck}`
  for every customer and product;
- ``hub_flow_product_<h>_<k>``: inflow of :math:`k` equals outflow of :math:`k`;
- ``hub_cap_<h>``: :math:`\\sum_{\\delta^-(h)} x_l \\le k_h` (capacity units);
- carrier commitments, minimum charges and rate breaks (:mod:`lanesolve.model.tariffs`) apply to :math:`x_l`, in
  capacity units; a carrier's share counts the units short of every product;
- single sourcing per customer and product: ``source_product_<l>_<k>`` yes/no columns for the lanes into a
  single-sourced customer, ``source_link_<l>_<k>``: :math:`x_{lk} \\le (M_l / a_k)\\, y_{lk}` and
  ``single_source_product_<c>_<k>``: :math:`\\sum_{l \\in \\delta^-(c)} y_{lk} \\le 1`.

Big-M: the bounds (a)-(d) of the single-product docstring hold for :math:`x_l` when every supply and demand is
counted in capacity units: :math:`\\hat s_d = \\min(s_d \\max_k a_k, \\sum_k a_k s_{dk})` and
:math:`\\hat q_c = \\sum_k a_k q_{ck}` (the canonical-plan argument runs product by product: each unit of
:math:`k` on a lane travels on a path from a depot to a customer needing :math:`k`). :func:`capacity_network` is
that view of the network; :math:`M_l / a_k` bounds :math:`x_{lk}` because :math:`a_k x_{lk} \\le x_l \\le M_l`.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> from lanesolve.model.product_data import make_products
>>> net = make_network([{"id": "D", "supply": 9}], [{"id": "C", "demand": 0}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
>>> net.products = make_products([{"id": "A"}, {"id": "B", "capacity_use": 2}],
...     [{"customer": "C", "product": "A", "demand": 1}, {"customer": "C", "product": "B", "demand": 3}], n_lanes=1)
>>> model = build_product_model(net)
>>> model.row_names
['lane_total_0', 'supply_0', 'balance_product_0_0', 'balance_product_0_1']
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from lanesolve.model.arrays import Assembly, SparseModel
from lanesolve.model.formulation import (_Ends, _row_table, add_fixed_charge_links, add_max_open, add_min_volume,
                                         add_node_decisions, add_open_links, add_trips, effective_capacity,
                                         fixed_charges_of_open_nodes, lane_bounds, needs_use)
from lanesolve.model.network import Network
from lanesolve.model.result import COST_COMPONENTS, DESIGN_COST_COMPONENTS
from lanesolve.model.tariffs import add_carrier_terms


@dataclasses.dataclass
class ProductColumns:
    """Which product each ``product_flow_`` column carries: per column, the lane's position among the active
    lanes, the lane index in ``network.lanes`` and the product's position on the Products sheet."""

    lane_position: np.ndarray
    lane_index: np.ndarray
    product: np.ndarray


def product_columns(network: Network) -> ProductColumns:
    """The (active lane, product) pairs that get a column: every product a lane allows (blank = all)."""
    data = network.products
    lanes = network.active_lanes
    position = {pid: k for k, pid in enumerate(data.ids)}
    allowed = data.lane_products.reindex(lanes.index).to_numpy(dtype=object)
    # A (lane, product) table: every product on a lane whose cell is blank; only the listed lanes are visited.
    table = np.ones((len(lanes), len(position)), dtype=bool)
    for row in np.flatnonzero(pd.notna(allowed) & (allowed != None)).tolist():  # noqa: E711 (element-wise)
        table[row] = False
        table[row, [position[e] for e in allowed[row] if e in position]] = True
    lane_pos, product = np.nonzero(table)  # row-major: lane by lane, products in sheet order
    lane_pos, product = lane_pos.astype(np.int64), product.astype(np.int64)
    return ProductColumns(lane_pos, lanes.index.to_numpy()[lane_pos], product)


def pair_table(network: Network, frame: pd.DataFrame, node_column: str, value_column: str,
               nodes: pd.DataFrame) -> np.ndarray:
    """A (node row, product) matrix of ``value_column`` from a Supply or Demand frame (0 where not listed)."""
    table = np.zeros((len(nodes), len(network.products.ids)))
    if frame is None or not len(frame):
        return table
    node_pos = pd.Index(nodes["id"]).get_indexer(frame[node_column])
    prod_pos = pd.Index(network.products.ids).get_indexer(frame["product"])
    keep = (node_pos >= 0) & (prod_pos >= 0)
    np.add.at(table, (node_pos[keep], prod_pos[keep]), frame[value_column].to_numpy(dtype=float)[keep])
    return table


def demand_penalties(network: Network) -> np.ndarray:
    """A (customer row, product) matrix of the per-unit penalty (NaN: hard demand, or no demand)."""
    data = network.products
    customers = network.customers
    table = np.full((len(customers), len(data.ids)), np.nan)
    node_pos = pd.Index(customers["id"]).get_indexer(data.demand["customer"])
    prod_pos = pd.Index(data.ids).get_indexer(data.demand["product"])
    keep = (node_pos >= 0) & (prod_pos >= 0)
    table[node_pos[keep], prod_pos[keep]] = data.demand["unmet_penalty"].to_numpy(dtype=float)[keep]
    return table


def capacity_network(network: Network) -> Network:
    """The network with supplies and demands in capacity units (:math:`\\hat s_d`, :math:`\\hat q_c` of the module
    docstring) and no single sourcing at lane level, for the big-M bounds and the single-product families."""
    data = network.products
    use = data.capacity_use
    demand = pair_table(network, data.demand, "customer", "demand", network.customers) @ use
    overall = network.depots["supply"].to_numpy(dtype=float) * float(use.max(initial=1.0))
    if data.supply is None:
        supply = overall
    else:
        supply = np.minimum(overall, pair_table(network, data.supply, "depot", "supply", network.depots) @ use)
    return dataclasses.replace(network, depots=network.depots.assign(supply=supply),
                               customers=network.customers.assign(demand=demand, single_source=False),
                               products=None)


def _node_rows(model: Assembly, prefix: str, nodes: pd.DataFrame, n_products: int, chosen: np.ndarray,
               lower, upper) -> np.ndarray:
    """Rows for the (node, product) pairs where ``chosen``; returns a (node, product) table of row positions."""
    node, product = np.nonzero(chosen)
    ids = [f"{n}_{k}" for n, k in zip(nodes.index.to_numpy()[node].tolist(), product.tolist())]
    rows = model.add_rows(prefix, ids, np.asarray(lower, dtype=float)[chosen] if np.ndim(lower) else lower,
                          np.asarray(upper, dtype=float)[chosen] if np.ndim(upper) else upper)
    table = np.full((len(nodes), n_products), -1, dtype=np.int64)
    table[node, product] = rows
    return table


def _product_incidence(model: Assembly, ends: _Ends, kind: str, table: np.ndarray, pairs: ProductColumns,
                       columns: np.ndarray, out_sign: float, in_sign: float) -> None:
    """Entries of the (node, product) rows ``table`` for the product columns leaving / entering nodes of ``kind``."""
    for position, sign in ((ends.origin[kind], out_sign), (ends.destination[kind], in_sign)):
        if sign == 0 or not table.size:
            continue
        node = position[pairs.lane_position]
        at = node >= 0
        rows = table[node[at], pairs.product[at]]
        keep = rows >= 0
        model.add_entries(rows[keep], columns[at][keep], sign)


def add_lane_totals(model: Assembly, network: Network, ends: _Ends, pairs: ProductColumns,
                    columns: np.ndarray) -> None:
    """``lane_total_<l>``: the capacity a lane uses is the sum over products of units times capacity use."""
    rows = model.add_rows("lane_total_", network.active_lanes.index.to_numpy(), 0.0, 0.0)
    model.add_entries(rows, ends.flow, 1.0)
    model.add_entries(rows[pairs.lane_position], columns, -network.products.capacity_use[pairs.product])


def add_product_supply(model: Assembly, network: Network, ends: _Ends, pairs: ProductColumns,
                       columns: np.ndarray) -> None:
    """``supply_product_<d>_<k>`` (with a Supply sheet) and the overall cap ``supply_<d>`` where finite."""
    depots = network.depots
    n_products = len(network.products.ids)
    touches = np.zeros(len(depots), dtype=bool)
    for position in (ends.origin["depot"], ends.destination["depot"]):
        touches[position[position >= 0]] = True
    if network.products.supply is not None:
        supply = pair_table(network, network.products.supply, "depot", "supply", depots)
        chosen = np.repeat(touches[:, None], n_products, axis=1)
        table = _node_rows(model, "supply_product_", depots, n_products, chosen, -np.inf, supply)
        _product_incidence(model, ends, "depot", table, pairs, columns, 1.0, -1.0)
    overall = depots["supply"].to_numpy(dtype=float)
    capped = touches & np.isfinite(overall)
    rows = model.add_rows("supply_", depots.index[capped], -np.inf, overall[capped])
    table = np.repeat(_row_table(len(depots), capped, rows)[:, None], n_products, axis=1)
    _product_incidence(model, ends, "depot", table, pairs, columns, 1.0, -1.0)


def add_product_balance(model: Assembly, network: Network, ends: _Ends, pairs: ProductColumns, columns: np.ndarray,
                        penalty: np.ndarray) -> np.ndarray:
    """``unmet_product_<c>_<k>`` columns and ``balance_product_<c>_<k>`` rows for every customer and product.

    Rows are added even with no terms: a hard demand no lane can reach then makes the model infeasible, as it is.
    Returns the (customer, product) table of unmet columns (-1 where the demand is hard or zero).
    """
    customers = network.customers
    n_products = len(network.products.ids)
    demand = pair_table(network, network.products.demand, "customer", "demand", customers)
    table = _node_rows(model, "balance_product_", customers, n_products, np.ones_like(demand, dtype=bool), demand,
                       demand)
    _product_incidence(model, ends, "customer", table, pairs, columns, -1.0, 1.0)
    soft = ~np.isnan(penalty) & (demand > 0)
    node, product = np.nonzero(soft)
    ids = [f"{n}_{k}" for n, k in zip(customers.index.to_numpy()[node].tolist(), product.tolist())]
    unmet = model.add_columns("unmet_product_", ids, 0.0, demand[soft], costs={"unmet_penalty": penalty[soft]})
    model.add_entries(table[node, product], unmet, 1.0)
    unmet_table = np.full(demand.shape, -1, dtype=np.int64)
    unmet_table[node, product] = unmet
    return unmet_table


def add_product_hubs(model: Assembly, network: Network, ends: _Ends, pairs: ProductColumns,
                     columns: np.ndarray) -> None:
    """``hub_flow_product_<h>_<k>``: inflow = outflow per product; ``hub_cap_<h>``: capacity units in at most the
    hub's capacity, when finite."""
    hubs = network.hubs
    n_products = len(network.products.ids)
    carries = np.zeros((len(hubs), n_products), dtype=bool)
    for position in (ends.origin["hub"], ends.destination["hub"]):
        node = position[pairs.lane_position]
        carries[node[node >= 0], pairs.product[node >= 0]] = True
    table = _node_rows(model, "hub_flow_product_", hubs, n_products, carries, 0.0, 0.0)
    _product_incidence(model, ends, "hub", table, pairs, columns, -1.0, 1.0)
    capacity = hubs["capacity"].to_numpy(dtype=float)
    into = np.zeros(len(hubs), dtype=bool)
    into[ends.destination["hub"][ends.destination["hub"] >= 0]] = True
    limited = into & np.isfinite(capacity)
    rows = _row_table(len(hubs), limited, model.add_rows("hub_cap_", hubs.index[limited], -np.inf,
                                                         capacity[limited]))
    at = ends.destination["hub"] >= 0
    lane_rows = rows[ends.destination["hub"][at]]
    keep = lane_rows >= 0
    model.add_entries(lane_rows[keep], ends.flow[at][keep], 1.0)


def add_product_single_source(model: Assembly, network: Network, ends: _Ends, pairs: ProductColumns,
                              columns: np.ndarray, bounds: np.ndarray) -> None:
    """``source_product_<l>_<k>``, ``source_link_<l>_<k>`` and ``single_source_product_<c>_<k>``: a single-sourced
    customer gets each product over at most one inbound lane (module docstring)."""
    customers = network.customers
    single = customers["single_source"].to_numpy(dtype=bool)
    customer = ends.destination["customer"][pairs.lane_position]
    chosen = (customer >= 0)
    chosen[chosen] = single[customer[chosen]]
    if not chosen.any():
        return
    use_of = network.products.capacity_use
    ids = [f"{lane}_{k}" for lane, k in zip(pairs.lane_index[chosen].tolist(), pairs.product[chosen].tolist())]
    use = model.add_columns("source_product_", ids, 0.0, 1.0, integer=True)
    rows = model.add_rows("source_link_", ids, -np.inf, 0.0)
    model.add_entries(rows, columns[chosen], 1.0)
    model.add_entries(rows, use, -bounds[pairs.lane_position[chosen]] / use_of[pairs.product[chosen]])
    n_products = len(network.products.ids)
    pair_rows = np.zeros((len(customers), n_products), dtype=bool)
    pair_rows[customer[chosen], pairs.product[chosen]] = True
    table = _node_rows(model, "single_source_product_", customers, n_products, pair_rows, -np.inf, 1.0)
    model.add_entries(table[customer[chosen], pairs.product[chosen]], use, 1.0)


def build_product_model(network: Network, linking: bool = True) -> SparseModel:
    """Build the multi-product model of the module docstring for ``network`` (which has ``products``), once.

    Parameters
    ----------
    network : Network
        A validated network with :attr:`~lanesolve.model.network.Network.products`.
    linking : bool
        As for :func:`lanesolve.model.formulation.build_sparse_model`.

    Returns
    -------
    SparseModel
        ``flow_`` columns first (capacity used per active lane), then ``product_flow_``, ``unmet_product_`` and
        the integer families. :attr:`SparseModel.product_columns` says which lane and product each
        ``product_flow_`` column carries; there is no ``unmet_`` column (shortfalls are per product).
    """
    design = network.has_design
    flat = capacity_network(network)
    lanes = network.active_lanes
    model = Assembly(COST_COMPONENTS + (DESIGN_COST_COMPONENTS if design else ()))
    capacity = effective_capacity(flat) if design else lanes["capacity"].to_numpy(dtype=float)
    depot_handling = dict(zip(network.depots["id"], network.depots["handling_cost"].astype(float)))
    hub_handling = dict(zip(network.hubs["id"], network.hubs["handling_cost"].astype(float)))
    handling = (lanes["origin"].map(depot_handling).fillna(0.0).to_numpy(dtype=float)
                + lanes["destination"].map(hub_handling).fillna(0.0).to_numpy(dtype=float))
    flow = model.add_columns("flow_", lanes.index.to_numpy(), 0.0, capacity, costs={
        "transport": lanes["cost_per_unit"].to_numpy(dtype=float), "handling": handling})
    ends = _Ends.of(network, flow)
    pairs = product_columns(network)
    columns = model.add_columns("product_flow_", [f"{lane}_{k}" for lane, k in zip(pairs.lane_index.tolist(),
                                                                                     pairs.product.tolist())],
                                0.0, np.inf)
    add_lane_totals(model, network, ends, pairs, columns)
    add_product_supply(model, network, ends, pairs, columns)
    penalty = demand_penalties(network)
    unmet_of_pair = add_product_balance(model, network, ends, pairs, columns, penalty)
    add_product_hubs(model, network, ends, pairs, columns)

    need = needs_use(flat)
    single = network.has_design and network.customers["single_source"].any()
    bounds = (lane_bounds(flat) if (need.any() or design or single or network.has_carrier_terms)
              else np.zeros(len(lanes)))
    use = add_fixed_charge_links(model, flat, ends, need, bounds)
    constant = {}
    if design:
        add_min_volume(model, flat, ends, use)
        add_product_single_source(model, network, ends, pairs, columns, bounds)
        add_trips(model, flat, ends, bounds)
        for kind in ("depot", "hub"):
            open_of_node = add_node_decisions(model, flat, ends, kind)
            if linking:
                add_open_links(model, flat, ends, kind, open_of_node, bounds)
            add_max_open(model, flat, kind, open_of_node)
        constant["fixed_node"] = fixed_charges_of_open_nodes(network)
    # Carrier terms count capacity units on the lanes (flow_), as lane capacities do; a carrier's share counts the
    # units short of every product.
    unmet = unmet_of_pair[unmet_of_pair >= 0]
    lane_cost_terms = add_carrier_terms(model, flat, flow, unmet, np.ones(len(unmet), dtype=bool), bounds, capacity)
    return model.finish(lane_cost_terms=lane_cost_terms, constant=constant, lane_index=lanes.index.to_numpy(), unmet_index=np.zeros(0, dtype=np.int64),
                        big_m=dict(zip(lanes.index[need].tolist(), bounds[need].tolist())),
                        penalty=np.full(len(network.customers), np.nan), design=design, product_columns=pairs)
