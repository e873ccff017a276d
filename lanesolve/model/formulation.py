"""The optimisation model: a min-cost network flow with optional fixed-charge lanes and design decisions.

It is built once, as a :class:`~lanesolve.model.arrays.SparseModel` (columns, rows, one sparse matrix), by one
small vectorised function per constraint family below; every solver reads that one model
(:mod:`lanesolve.model.solve`).

Formulation
-----------
Sets

- :math:`D`, :math:`C`, :math:`H`: depots, customers, hubs; :math:`N = D \\cup C \\cup H` (ids are unique across them).
- :math:`L`: active lanes; lane :math:`l = (i, j)` runs from origin :math:`i` to destination :math:`j` (several
  lanes may join the same pair, one per mode). :math:`\\delta^+(n)` / :math:`\\delta^-(n)` are the lanes leaving /
  entering node :math:`n`.
- :math:`F \\subseteq L`: lanes with a fixed charge :math:`f_l > 0`.
- :math:`P \\subseteq C`: customers with an unmet penalty (their own, else the Settings default).

Parameters

- :math:`s_d` supply and :math:`h_d` handling cost per unit shipped out of depot :math:`d`;
- :math:`q_c` demand and :math:`p_c` penalty per unit short of customer :math:`c`;
- :math:`k_h` capacity (may be :math:`\\infty`) and :math:`g_h` handling cost per unit through hub :math:`h`;
- :math:`c_l` cost per unit, :math:`u_l` capacity (may be :math:`\\infty`), :math:`f_l` fixed charge of lane :math:`l`.

Variables

- :math:`x_l \\ge 0` flow on lane :math:`l` (``flow_<n>``, :math:`n` the lane's index in ``network.lanes``);
- :math:`z_c \\in [0, q_c]` units short at customer :math:`c \\in P` (``unmet_<n>``, :math:`n` the customer's index);
- :math:`y_l \\in \\{0, 1\\}` lane :math:`l \\in F` used (``use_<n>``).

Objective (minimise)

.. math::

    \\underbrace{\\sum_{l} c_l x_l}_{\\text{transport}}
    + \\underbrace{\\sum_{d} h_d \\sum_{l \\in \\delta^+(d)} x_l + \\sum_{h} g_h \\sum_{l \\in \\delta^-(h)} x_l}_{
      \\text{handling}}
    + \\underbrace{\\sum_{l \\in F} f_l y_l}_{\\text{fixed\\_lane}}
    + \\underbrace{\\sum_{c \\in P} p_c z_c}_{\\text{unmet\\_penalty}}

Constraints (name prefixes in brackets; :math:`n` is the row index in the node's or lane's frame)

- ``supply_<n>``: :math:`\\sum_{\\delta^+(d)} x - \\sum_{\\delta^-(d)} x \\le s_d` for every depot with a lane
  (except a depot to decide, whose ``open_out_depot_<n>`` row below states the same with :math:`s_d w_d`);
- ``balance_<n>``: :math:`\\sum_{\\delta^-(c)} x - \\sum_{\\delta^+(c)} x + z_c = q_c` for every customer
  (:math:`z_c` only for :math:`c \\in P`; otherwise the demand is delivered exactly);
- ``hub_flow_<n>``: :math:`\\sum_{\\delta^-(h)} x - \\sum_{\\delta^+(h)} x = 0` for every hub;
- ``hub_cap_<n>``: :math:`\\sum_{\\delta^-(h)} x \\le k_h` for every hub with a finite capacity;
- lane capacity :math:`x_l \\le u_l` is the variable's upper bound (a bound, not a row: cheaper for the solver);
- ``link_<n>``: :math:`x_l \\le M_l y_l` for every :math:`l \\in F`.

Node names never appear in constraint names because ids may hold any character; the index does.

Big-M derivation
----------------
A *canonical* optimal plan exists in which no flow goes round a cycle and no depot ends with a negative net
outflow (absorbs goods): take any optimal plan and decompose its flow into paths and cycles (flow decomposition,
Ahuja, Magnanti & Orlin, *Network Flows*, 1993, section 3.5). Removing a cycle, or a path that ends at a depot, lowers
no bound-respecting quantity below zero, keeps every balance and capacity row satisfied, changes no customer's
delivery, and cannot raise the cost because every cost and fixed charge is non-negative (a lane whose flow falls to
zero may drop its charge). So it suffices that :math:`M_l` holds for the canonical plan. There, every unit on lane
:math:`l` travels on a path from a depot to a customer, hence

(a) :math:`x_l \\le \\min(\\sum_d s_d, \\sum_c q_c)` -- total supply and total demand bound every lane; this is always
    finite and is the fallback.

Further bounds (each holds for every feasible plan unless marked †, which holds for the canonical plan):

(b) lane capacity :math:`u_l`;
(c) what origin :math:`i` can send: depot :math:`s_i + \\sum_{\\delta^-(i)} u` (net outflow at most supply, plus what
    can come in); hub :math:`\\min(k_i, \\sum_{\\delta^-(i)} u)` (outflow = inflow); customer
    :math:`\\sum_{\\delta^-(i)} u` (it can forward at most what it receives);
(d) what destination :math:`j` can absorb: customer :math:`q_j + \\sum_{\\delta^+(j)} u`; hub
    :math:`\\min(k_j, \\sum_{\\delta^+(j)} u)`; depot :math:`\\sum_{\\delta^+(j)} u` † (it does not absorb goods, so it
    sends on at least what it receives).

:math:`M_l` is the minimum of (a)-(d); infinite terms (no limit) drop out.

Design decisions (only built when :attr:`~lanesolve.model.network.Network.has_design`)
-------------------------------------------------------------------------------------
Extra sets and variables: :math:`O` the depots and hubs with status ``decide``, :math:`w_n \\in \\{0, 1\\}` node
:math:`n` open (``open_depot_<n>`` / ``open_hub_<n>``); :math:`T` the lanes with a trip capacity :math:`r_l` and a
cost per trip :math:`e_l > 0`, :math:`t_l \\in \\mathbb{Z}_{\\ge 0}` trips (``trips_<n>``). A lane gets a yes/no
:math:`y_l` also when it has a minimum volume :math:`m_l > 0` or ends at a single-sourced customer.

Objective, added: :math:`\\sum_{n \\in O} F_n w_n + \\sum_{n\\ \\text{open}} F_n` (``fixed_node``; a node marked
``open`` pays its fixed cost) :math:`+ \\sum_{l \\in T} e_l t_l` (``trips``). The charges of nodes marked ``open`` are a
constant (:attr:`SparseModel.constant <lanesolve.model.arrays.SparseModel.constant>`): no column carries them, so
the solvers never see them; they are added to the plan's cost and to the solver's bound.

- closed node: every lane at it gets capacity 0 (and counts 0 in every bound below);
- ``min_volume_<n>``: :math:`x_l \\ge m_l y_l`;
- ``single_source_<n>``: :math:`\\sum_{l \\in \\delta^-(c)} y_l \\le 1` (with hard demand the balance row makes it 1);
  a lane into a single-sourced customer :math:`c` with hard demand and no lane out, whose :math:`M_l = q_c`, has
  ``link_<n>`` as an equality, :math:`x_l = q_c y_l`: every plan satisfies it (the balance row makes the inflow
  :math:`q_c`, and it arrives on the one lane used), and it lets the solver's presolve substitute the flow away, which
  leaves the textbook single-source model, :math:`y` the customer's assignment (e.g. Holmberg, Rönnqvist & Yuan,
  "An exact algorithm for the capacitated facility location problems with single sourcing", European Journal of
  Operational Research 113, 1999, as cited in benchmarks/data/holmberg_optima.json).
  HiGHS proves the published single-source sets much sooner so (benchmarks/README.md, *Engines and time limits*);
- ``trip_<n>``: :math:`x_l \\le r_l t_l`, :math:`t_l \\le \\lceil M_l / r_l \\rceil`. A lane with a trip capacity
  but no cost per trip needs no variable: its trips are reported as :math:`\\lceil x_l / r_l \\rceil`;
- ``open_out_depot_<n>``: :math:`\\sum_{\\delta^+(d)} x - \\sum_{\\delta^-(d)} x \\le s_d w_d` (it implies
  ``supply_<n>``, as :math:`w_d \\le 1`, which is then left out: the copy HiGHS's presolve keeps doubled its simplex
  iterations on p31 of the Holmberg single-source set, 129,116 against 64,125 to the proof), and
  ``open_in_depot_<n>``: :math:`\\sum_{\\delta^-(d)} x \\le M^{in}_d w_d` with :math:`M^{in}_d` bound (d);
- ``open_out_hub_<n>``: :math:`\\sum_{\\delta^-(h)} x \\le \\min(k_h, M^{send}_h) w_h` with :math:`M^{send}_h` bound (c);
- ``open_link_<kind>_<n>_<l>``: :math:`x_l \\le M_l w_n` for every lane :math:`l` at a decided node (the *linking
  inequalities*). The aggregate rows alone are valid, but in the LP relaxation they let a node be opened by a
  fraction equal to its utilisation; the per-lane rows force :math:`w_n \\ge x_l / M_l` lane by lane, the classic
  strong formulation of facility location (the "strong" vs "weak" formulation, e.g. Cornuéjols, Nemhauser & Wolsey,
  "The uncapacitated facility location problem", 1990). benchmarks/bench_linking.py measures the root bound, time
  and nodes with and without them;
- ``max_open_depots`` / ``max_open_hubs``: :math:`\\sum_{n \\in O} w_n \\le` the setting minus the nodes marked
  ``open``.

Every :math:`M_l` is the bound (a)-(d) above computed with closed nodes at capacity 0. The canonical-plan argument
still holds with node decisions, trips and single sourcing (removing a cycle or a path ending at a depot only lowers
flows, and a lane or node whose flow reaches 0 may drop its charge and trips). A minimum volume is the one
exception: cutting a path may leave a lane between 0 and its minimum, so with ``min_volume`` the bounds marked † and
the fallback (a) are proven only for plans that return no goods to a depot -- the plans a planner means.

Carrier terms (only built when :attr:`~lanesolve.model.network.Network.has_carrier_terms`)
----------------------------------------------------------------------------------------
Carrier commitments (``carrier_min_``, ``carrier_max_``, ``carrier_share_``), minimum charges per lane
(``charged_``, ``min_charge_``) and volume rate breaks (``tariff_``: convex incremental rates as an LP, falling
incremental rates by the incremental model, all-units rates by the multiple choice model of Croxton, Gendron &
Magnanti 2003, Management Science 49(9)) are stated, with their sources and big-M bounds :math:`\\min(u_l, M_l)`,
in :mod:`lanesolve.model.tariffs`.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2, "fixed_cost": 10}])
>>> model = build_sparse_model(net)
>>> model.is_mip, model.big_m, model.row_names
(True, {0: 5.0}, ['supply_0', 'balance_0', 'link_0'])
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from lanesolve.model.arrays import Assembly, SparseModel
from lanesolve.model.network import Network
from lanesolve.model.result import COST_COMPONENTS, DESIGN_COST_COMPONENTS
from lanesolve.model.tariffs import add_carrier_terms


def customer_penalties(network: Network) -> np.ndarray:
    """Per-unit unmet penalty per customer row: its own, else the Settings default, else NaN (hard demand).

    Examples
    --------
    >>> from lanesolve.model.network import make_network, Settings
    >>> net = make_network([], [{"id": "A", "demand": 1, "unmet_penalty": 7}, {"id": "B", "demand": 1}], [],
    ...                    settings=Settings(unmet_penalty=3))
    >>> customer_penalties(net).tolist()
    [7.0, 3.0]
    """
    own = network.customers["unmet_penalty"].to_numpy(dtype=float)
    default = network.settings.unmet_penalty
    if default is None or (isinstance(default, float) and math.isnan(default)):
        return own.copy()
    return np.where(np.isnan(own), float(default), own)


def closed_nodes(network: Network) -> set[str]:
    """Ids of depots and hubs with status ``closed``: they carry no flow. (Compared as arrays: a run asks this a
    few dozen times, and a pandas row selection costs more than the comparison on a small network.)"""
    closed: set[str] = set()
    for frame in (network.depots, network.hubs):
        status = frame["status"].to_numpy(dtype=object)
        closed.update(frame["id"].to_numpy(dtype=object)[status == "closed"].tolist())
    return closed


def effective_capacity(network: Network) -> np.ndarray:
    """Capacity per active lane with every lane touching a closed node set to 0."""
    lanes = network.active_lanes
    capacity = lanes["capacity"].to_numpy(dtype=float)
    closed = closed_nodes(network)
    if closed:
        touches = lanes["origin"].isin(closed).to_numpy() | lanes["destination"].isin(closed).to_numpy()
        capacity = np.where(touches, 0.0, capacity)
    return capacity


def node_limits(network: Network) -> tuple[float, pd.Series, pd.Series]:
    """``(fallback, can_send, can_absorb)``: bound (a) and, per node id, bounds (c) and (d) of the module docstring.

    Lanes touching a closed node count with capacity 0, a closed node with supply or capacity 0. A node with no
    lane sends and absorbs nothing.
    """
    lanes = network.active_lanes
    capacity = effective_capacity(network)
    inbound = pd.Series(capacity).groupby(lanes["destination"].to_numpy()).sum()
    outbound = pd.Series(capacity).groupby(lanes["origin"].to_numpy()).sum()
    closed = closed_nodes(network)
    # (a): always finite, so every M below is finite too.
    fallback = min(float(network.depots["supply"].sum()), float(network.customers["demand"].sum()))

    def per_node(frame: pd.DataFrame, column: str | None) -> tuple[pd.Index, np.ndarray, np.ndarray, np.ndarray]:
        ids = pd.Index(frame["id"])
        own = np.zeros(len(ids)) if column is None else frame[column].to_numpy(dtype=float)
        if column in ("supply", "capacity"):
            own = np.where(ids.isin(closed), 0.0, own)
        return ids, own, inbound.reindex(ids).fillna(0.0).to_numpy(), outbound.reindex(ids).fillna(0.0).to_numpy()

    d_ids, supply, d_in, d_out = per_node(network.depots, "supply")
    c_ids, demand, c_in, c_out = per_node(network.customers, "demand")
    h_ids, hub_cap, h_in, h_out = per_node(network.hubs, "capacity")
    send = np.concatenate([supply + d_in, c_in, np.minimum(hub_cap, h_in)])
    absorb = np.concatenate([d_out, demand + c_out, np.minimum(hub_cap, h_out)])  # a depot: canonical plan (†)
    index = d_ids.append(c_ids).append(h_ids)
    return (fallback, pd.Series(np.minimum(fallback, send), index=index),
            pd.Series(np.minimum(fallback, absorb), index=index))


def lane_bounds(network: Network) -> np.ndarray:
    """:math:`M_l` (the minimum of bounds (a)-(d), never negative) per active lane, in active-lane order."""
    lanes = network.active_lanes
    if lanes.empty:
        return np.zeros(0)
    fallback, can_send, can_absorb = node_limits(network)
    send = can_send.reindex(lanes["origin"].to_numpy()).fillna(0.0).to_numpy()
    absorb = can_absorb.reindex(lanes["destination"].to_numpy()).fillna(0.0).to_numpy()
    bound = np.minimum.reduce([np.full(len(lanes), fallback), effective_capacity(network), send, absorb])
    return np.maximum(bound, 0.0)


def lane_big_m(network: Network, indices=None) -> dict[int, float]:
    """The :math:`M_l` of active lanes, keyed by lane index (derivation in the module docstring).

    Parameters
    ----------
    network : Network
    indices : iterable of int, optional
        Lane indices to bound; by default every active lane with ``fixed_cost > 0``.

    Returns
    -------
    dict of int to float
        Finite, non-negative bound per lane.
    """
    lanes = network.active_lanes
    chosen = (lanes["fixed_cost"] > 0).to_numpy() if indices is None else lanes.index.isin(list(indices))
    if not chosen.any():
        return {}
    return dict(zip(lanes.index[chosen].tolist(), lane_bounds(network)[chosen].tolist()))


#: Per lane end (origin, destination): positions in the depot, customer and hub frames, -1 for another kind.
LaneEnds = tuple[dict[str, np.ndarray], dict[str, np.ndarray]]


@dataclass
class _Ends:
    """Where each active lane starts and ends: position in the depot, customer and hub frames (-1 elsewhere)."""

    origin: dict[str, np.ndarray]
    destination: dict[str, np.ndarray]
    flow: np.ndarray  # the flow column of each active lane

    @classmethod
    def of(cls, network: Network, flow: np.ndarray, known: LaneEnds | None = None) -> "_Ends":
        if known is not None:
            return cls(known[0], known[1], flow)
        lanes = network.active_lanes
        frames = {"depot": network.depots, "customer": network.customers, "hub": network.hubs}
        # One lookup per lane end against every node id at once (ids are unique across kinds), then split by kind.
        ids = pd.Index(np.concatenate([frame["id"].to_numpy(dtype=object) for frame in frames.values()]), dtype=object)
        starts = np.cumsum([0] + [len(frame) for frame in frames.values()])
        ends = {}
        for end in ("origin", "destination"):
            code = ids.get_indexer(lanes[end].to_numpy(dtype=object))
            ends[end] = {kind: np.where((code >= lo) & (code < hi), code - lo, -1)
                         for kind, lo, hi in zip(frames, starts[:-1], starts[1:])}
        return cls(ends["origin"], ends["destination"], flow)


def _per_lane(node_values: pd.Series, position: np.ndarray) -> np.ndarray:
    """A node column's value at each lane end (``position`` from :class:`_Ends`, -1 for another kind); 0 where the
    end is not of that kind or the value is missing."""
    values = np.append(node_values.to_numpy(dtype=float), 0.0)[position]  # -1 picks the appended 0
    return np.where(np.isnan(values), 0.0, values)


def _incidence(model: Assembly, ends: _Ends, kind: str, row_of_node: np.ndarray, out_sign: float,
               in_sign: float) -> None:
    """Entries of the node rows ``row_of_node`` (per node of ``kind``, -1 for none): ``out_sign`` for each lane
    leaving the node, ``in_sign`` for each lane entering it (0 leaves that side out)."""
    for position, sign in ((ends.origin[kind], out_sign), (ends.destination[kind], in_sign)):
        if sign == 0 or not len(row_of_node):
            continue
        at = position >= 0
        rows = row_of_node[position[at]]
        keep = rows >= 0
        model.add_entries(rows[keep], ends.flow[at][keep], sign)


def _row_table(size: int, chosen: np.ndarray, rows: np.ndarray) -> np.ndarray:
    table = np.full(size, -1, dtype=np.int64)
    table[chosen] = rows
    return table


def _touches(ends: _Ends, kind: str, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Per node of ``kind``: has a lane out, has a lane in."""
    out = np.bincount(ends.origin[kind][ends.origin[kind] >= 0], minlength=count) > 0
    into = np.bincount(ends.destination[kind][ends.destination[kind] >= 0], minlength=count) > 0
    return out, into


def add_depot_supply(model: Assembly, network: Network, ends: _Ends) -> None:
    """``supply_<n>``: net outflow of each depot at most its supply (depots with no lane need no row, and with
    design decisions a depot to decide has its ``open_out_depot_`` row instead)."""
    depots = network.depots
    out, into = _touches(ends, "depot", len(depots))
    chosen = (out | into) & (depots["status"] != "decide").to_numpy()
    rows = model.add_rows("supply_", depots.index[chosen], -np.inf, depots["supply"].to_numpy(dtype=float)[chosen])
    _incidence(model, ends, "depot", _row_table(len(depots), chosen, rows), 1.0, -1.0)


def add_customer_balance(model: Assembly, network: Network, ends: _Ends, unmet: np.ndarray, soft: np.ndarray) -> None:
    """``balance_<n>``: inflow - outflow + unmet = demand for every customer.

    The row is added even when it has no terms: a hard demand with no lane then makes the model infeasible, as it
    is (the pre-solve checks normally catch that first).
    """
    customers = network.customers
    demand = customers["demand"].to_numpy(dtype=float)
    rows = model.add_rows("balance_", customers.index, demand, demand)
    _incidence(model, ends, "customer", rows, -1.0, 1.0)
    model.add_entries(rows[soft], unmet, 1.0)


def add_hub_flow(model: Assembly, network: Network, ends: _Ends) -> None:
    """``hub_flow_<n>``: inflow = outflow; ``hub_cap_<n>``: inflow at most the hub's capacity, when finite."""
    hubs = network.hubs
    out, into = _touches(ends, "hub", len(hubs))
    chosen = out | into
    rows = model.add_rows("hub_flow_", hubs.index[chosen], 0.0, 0.0)
    _incidence(model, ends, "hub", _row_table(len(hubs), chosen, rows), -1.0, 1.0)
    capacity = hubs["capacity"].to_numpy(dtype=float)
    limited = into & np.isfinite(capacity)
    rows = model.add_rows("hub_cap_", hubs.index[limited], -np.inf, capacity[limited])
    _incidence(model, ends, "hub", _row_table(len(hubs), limited, rows), 0.0, 1.0)


def needs_use(network: Network) -> np.ndarray:
    """Per active lane: does it need a yes/no "used" column? A fixed charge, and with design decisions a minimum
    volume or a single-sourced destination."""
    lanes = network.active_lanes
    need = lanes["fixed_cost"].to_numpy(dtype=float) > 0
    if network.has_design:
        single = set(network.customers.loc[network.customers["single_source"], "id"])
        need = need | (lanes["min_volume"].to_numpy(dtype=float) > 0) | lanes["destination"].isin(single).to_numpy()
    return need


def add_fixed_charge_links(model: Assembly, network: Network, ends: _Ends, need: np.ndarray,
                           bounds: np.ndarray, exact: np.ndarray | None = None) -> np.ndarray:
    """``use_<n>`` columns and ``link_<n>``: flow on a lane only when the lane is used, ``x_l <= M_l * y_l``;
    ``x_l = M_l * y_l`` where ``exact`` (per active lane, :func:`whole_delivery_lanes`) says so.

    Returns the ``use_`` column of each active lane (-1 where it has none).
    """
    lanes = network.active_lanes
    index = lanes.index[need]
    fixed = lanes["fixed_cost"].to_numpy(dtype=float)[need]
    use = model.add_columns("use_", index, 0.0, 1.0, integer=True, costs={"fixed_lane": fixed})
    lower = -np.inf if exact is None else np.where(exact[need], 0.0, -np.inf)
    rows = model.add_rows("link_", index, lower, 0.0)
    model.add_entries(rows, ends.flow[need], 1.0)
    model.add_entries(rows, use, -bounds[need])
    return _row_table(len(lanes), need, use)


def whole_delivery_lanes(network: Network, ends: _Ends, bounds: np.ndarray) -> np.ndarray:
    """Per active lane: does it carry either nothing or its destination's whole demand in every plan? True for
    a lane into a single-sourced customer with hard demand and no active lane out, whose :math:`M_l` is that
    demand (module docstring, ``single_source_``); such a lane's ``link_`` row can be an equality."""
    customers = network.customers
    position = ends.destination["customer"]
    whole = (customers["single_source"].to_numpy(dtype=bool) & np.isnan(customer_penalties(network))
             & ~_touches(ends, "customer", len(customers))[0])
    chosen = position >= 0
    chosen[chosen] = whole[position[chosen]]
    chosen[chosen] = bounds[chosen] == customers["demand"].to_numpy(dtype=float)[position[chosen]]
    return chosen


def add_min_volume(model: Assembly, network: Network, ends: _Ends, use: np.ndarray) -> None:
    """``min_volume_<n>``: a used lane carries at least its minimum, ``x_l >= m_l * y_l``."""
    lanes = network.active_lanes
    minimum = lanes["min_volume"].to_numpy(dtype=float)
    chosen = (minimum > 0) & (use >= 0)
    rows = model.add_rows("min_volume_", lanes.index[chosen], 0.0, np.inf)
    model.add_entries(rows, ends.flow[chosen], 1.0)
    model.add_entries(rows, use[chosen], -minimum[chosen])


def add_single_source(model: Assembly, network: Network, ends: _Ends, use: np.ndarray) -> None:
    """``single_source_<n>``: at most one inbound lane used (exactly one once any demand is delivered)."""
    customers = network.customers
    position = ends.destination["customer"]
    inbound = (position >= 0) & (use >= 0)
    single = customers["single_source"].to_numpy(dtype=bool)
    chosen = single & (np.bincount(position[inbound], minlength=len(customers)) > 0)
    rows = _row_table(len(customers), chosen, model.add_rows("single_source_", customers.index[chosen], -np.inf, 1.0))
    lane_rows = rows[position[inbound]]
    keep = lane_rows >= 0
    model.add_entries(lane_rows[keep], use[inbound][keep], 1.0)


def add_trips(model: Assembly, network: Network, ends: _Ends, bounds: np.ndarray) -> None:
    """``trips_<n>`` integer columns and ``trip_<n>``: flow <= trip_capacity * trips, trips in
    [0, ceil(M_l / trip_capacity)], for lanes with a trip capacity and a cost per trip."""
    lanes = network.active_lanes
    size = lanes["trip_capacity"].to_numpy(dtype=float)
    cost = lanes["cost_per_trip"].to_numpy(dtype=float)
    costed = np.isfinite(size) & (size > 0) & (cost > 0)
    most = np.ceil(bounds[costed] / size[costed] - 1e-9)
    trips = model.add_columns("trips_", lanes.index[costed], 0.0, most, integer=True, costs={"trips": cost[costed]})
    rows = model.add_rows("trip_", lanes.index[costed], -np.inf, 0.0)
    model.add_entries(rows, ends.flow[costed], 1.0)
    model.add_entries(rows, trips, -size[costed])


def add_node_decisions(model: Assembly, network: Network, ends: _Ends, kind: str) -> np.ndarray:
    """``open_<kind>_<n>`` columns for the depots or hubs to decide and their aggregate rows.

    ``open_out_depot_<n>``: net outflow <= supply * open; ``open_in_depot_<n>``: inflow <= bound (d) * open (depots
    with a lane in); ``open_out_hub_<n>``: inflow <= min(capacity, bound (c)) * open. Returns the open column of each
    node of ``kind`` (-1 where its status is not ``decide``).
    """
    frame = network.depots if kind == "depot" else network.hubs
    decide = (frame["status"] == "decide").to_numpy()
    opened = model.add_columns(f"open_{kind}_", frame.index[decide], 0.0, 1.0, integer=True,
                               costs={"fixed_node": frame["fixed_cost"].to_numpy(dtype=float)[decide]})
    node_ids = frame["id"].to_numpy(dtype=object)
    _, can_send, can_absorb = node_limits(network)
    if kind == "depot":
        rows = model.add_rows("open_out_depot_", frame.index[decide], -np.inf, 0.0)
        _incidence(model, ends, kind, _row_table(len(frame), decide, rows), 1.0, -1.0)
        model.add_entries(rows, opened, -frame["supply"].to_numpy(dtype=float)[decide])
        receives = decide & _touches(ends, kind, len(frame))[1]
        rows = model.add_rows("open_in_depot_", frame.index[receives], -np.inf, 0.0)
        _incidence(model, ends, kind, _row_table(len(frame), receives, rows), 0.0, 1.0)
        model.add_entries(rows, _row_table(len(frame), decide, opened)[receives],
                          -can_absorb.reindex(node_ids[receives]).to_numpy())
    else:
        rows = model.add_rows("open_out_hub_", frame.index[decide], -np.inf, 0.0)
        _incidence(model, ends, kind, _row_table(len(frame), decide, rows), 0.0, 1.0)
        model.add_entries(rows, opened, -can_send.reindex(node_ids[decide]).to_numpy())
    return _row_table(len(frame), decide, opened)


def add_open_links(model: Assembly, network: Network, ends: _Ends, kind: str, open_of_node: np.ndarray,
                   bounds: np.ndarray) -> None:
    """``open_link_<kind>_<n>_<l>``: each lane at a decided node carries at most its own bound times the decision.

    Implied by the aggregate rows for integer decisions, but much tighter in the LP relaxation (module docstring;
    benchmarks/bench_linking.py measures it).
    """
    node_index = (network.depots if kind == "depot" else network.hubs).index.to_numpy()
    lane_at = np.concatenate([np.flatnonzero(p >= 0) for p in (ends.origin[kind], ends.destination[kind])])
    node_at = np.concatenate([p[p >= 0] for p in (ends.origin[kind], ends.destination[kind])])
    keep = open_of_node[node_at] >= 0
    lane_at, node_at = lane_at[keep], node_at[keep]
    lane_index = network.active_lanes.index.to_numpy()
    ids = [f"{n}_{lane}" for n, lane in zip(node_index[node_at].tolist(), lane_index[lane_at].tolist())]
    rows = model.add_rows(f"open_link_{kind}_", ids, -np.inf, 0.0)
    model.add_entries(rows, ends.flow[lane_at], 1.0)
    model.add_entries(rows, open_of_node[node_at], -bounds[lane_at])


def add_max_open(model: Assembly, network: Network, kind: str, open_of_node: np.ndarray) -> None:
    """``max_open_depots`` / ``max_open_hubs``: decided nodes opened at most the setting minus those marked open."""
    limit = network.settings.max_open_depots if kind == "depot" else network.settings.max_open_hubs
    if limit is None:
        return
    frame = network.depots if kind == "depot" else network.hubs
    forced = int((frame["status"] == "open").sum())
    rows = model.add_rows(f"max_open_{kind}s", [""], -np.inf, float(limit) - forced)
    opened = open_of_node[open_of_node >= 0]
    model.add_entries(np.repeat(rows, len(opened)), opened, 1.0)


def fixed_charges_of_open_nodes(network: Network) -> float:
    """Fixed charges of the depots and hubs marked ``open``: paid whatever the plan, so no column carries them."""
    return float(sum(frame.loc[frame["status"] == "open", "fixed_cost"].astype(float).sum()
                     for frame in (network.depots, network.hubs)))


def build_sparse_model(network: Network, linking: bool = True, lane_ends: LaneEnds | None = None) -> SparseModel:
    """Build the model of the module docstring for ``network``, once, as arrays.

    Parameters
    ----------
    network : Network
        A validated network (see :mod:`lanesolve.model.network`).
    linking : bool
        Add the per-lane linking rows of "Design decisions"; switch it off only to measure what they are worth
        (benchmarks/bench_linking.py).
    lane_ends : tuple of dict, optional
        Where each active lane starts and ends (:data:`LaneEnds`), when the caller already knows it -- the network
        algorithm's graph does (:meth:`lanesolve.model.network_flow.FlowGraph.lane_ends`); otherwise every lane end
        is looked up among the node ids.

    Returns
    -------
    SparseModel
        Columns ``flow_`` (every active lane, in order), ``unmet_``, then the integer ``use_``, ``trips_``,
        ``open_depot_`` and ``open_hub_``; rows in the order of the families above. A network without fixed
        charges or design decisions has no integer column and is solved as a pure LP.

    Notes
    -----
    Every family is a few numpy operations over all lanes or nodes at once, never a Python object per lane, so
    building stays a small share of a solve (benchmarks/bench_model.py: 0.2-0.35 s at 50k charged lanes).
    """
    design = network.has_design
    lanes = network.active_lanes
    components = COST_COMPONENTS + (DESIGN_COST_COMPONENTS if design else ())
    model = Assembly(components)
    capacity = effective_capacity(network) if design else lanes["capacity"].to_numpy(dtype=float)

    ends = _Ends.of(network, np.empty(0, dtype=np.int64), lane_ends)
    # Handling per lane: the origin depot's per-unit-out cost plus the destination hub's per-unit-through cost.
    handling = (_per_lane(network.depots["handling_cost"], ends.origin["depot"])
                + _per_lane(network.hubs["handling_cost"], ends.destination["hub"]))
    flow = model.add_columns("flow_", lanes.index.to_numpy(), 0.0, capacity, costs={
        "transport": lanes["cost_per_unit"].to_numpy(dtype=float), "handling": handling})
    ends.flow = flow

    penalty = customer_penalties(network)
    soft = ~np.isnan(penalty)
    customers = network.customers
    unmet = model.add_columns("unmet_", customers.index[soft], 0.0, customers["demand"].to_numpy(dtype=float)[soft],
                              costs={"unmet_penalty": penalty[soft]})

    need = needs_use(network)
    bounds = lane_bounds(network) if (need.any() or design or network.has_carrier_terms) else np.zeros(len(lanes))
    add_depot_supply(model, network, ends)
    add_customer_balance(model, network, ends, unmet, soft)
    add_hub_flow(model, network, ends)
    use = add_fixed_charge_links(model, network, ends, need, bounds,
                                 whole_delivery_lanes(network, ends, bounds) if design else None)
    constant = {}
    if design:
        add_min_volume(model, network, ends, use)
        add_single_source(model, network, ends, use)
        add_trips(model, network, ends, bounds)
        for kind in ("depot", "hub"):
            open_of_node = add_node_decisions(model, network, ends, kind)
            if linking:
                add_open_links(model, network, ends, kind, open_of_node, bounds)
            add_max_open(model, network, kind, open_of_node)
        constant["fixed_node"] = fixed_charges_of_open_nodes(network)
    lane_cost_terms = add_carrier_terms(model, network, flow, unmet, soft, bounds, capacity)
    return model.finish(lane_cost_terms=lane_cost_terms, constant=constant, lane_index=lanes.index.to_numpy(),
                        unmet_index=customers.index[soft].to_numpy(),
                        big_m=dict(zip(lanes.index[need].tolist(), bounds[need].tolist())), penalty=penalty,
                        design=design)
