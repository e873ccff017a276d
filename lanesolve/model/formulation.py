"""The optimisation model ("Model v1" of issue 2): a min-cost network flow with optional fixed-charge lanes.

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

- ``supply_<n>``: :math:`\\sum_{\\delta^+(d)} x - \\sum_{\\delta^-(d)} x \\le s_d` for every depot;
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

Design decisions (contract v2; only built when :attr:`~lanesolve.model.network.Network.has_design`)
------------------------------------------------------------------------------------------
Extra sets and variables: :math:`O` the depots and hubs with status ``decide``, :math:`w_n \\in \\{0, 1\\}` node
:math:`n` open (``open_depot_<n>`` / ``open_hub_<n>``); :math:`T` the lanes with a trip capacity :math:`r_l` and a
cost per trip :math:`e_l > 0`, :math:`t_l \\in \\mathbb{Z}_{\\ge 0}` trips (``trips_<n>``). A lane gets a yes/no
:math:`y_l` also when it has a minimum volume :math:`m_l > 0` or ends at a single-sourced customer.

Objective, added: :math:`\\sum_{n \\in O} F_n w_n + \\sum_{n\\ \\text{open}} F_n` (``fixed_node``; a node marked
``open`` pays its fixed cost) :math:`+ \\sum_{l \\in T} e_l t_l` (``trips``).

- closed node: every lane at it gets capacity 0 (and counts 0 in every bound below);
- ``min_volume_<n>``: :math:`x_l \\ge m_l y_l`;
- ``single_source_<n>``: :math:`\\sum_{l \\in \\delta^-(c)} y_l \\le 1` (with hard demand the balance row makes it 1);
- ``trip_<n>``: :math:`x_l \\le r_l t_l`, :math:`t_l \\le \\lceil M_l / r_l \\rceil`. A lane with a trip capacity
  but no cost per trip needs no variable: its trips are reported as :math:`\\lceil x_l / r_l \\rceil`;
- ``open_out_depot_<n>``: :math:`\\sum_{\\delta^+(d)} x - \\sum_{\\delta^-(d)} x \\le s_d w_d`, and
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

Examples
--------
>>> from lanesolve.model.network import make_network
>>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2, "fixed_cost": 10}])
>>> model = build_model(net)
>>> model.is_mip, model.big_m
(True, {0: 5.0})
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pulp

from lanesolve.model.network import Network

#: Name of the pulp problem (shows in exported LP/MPS files).
PROBLEM_NAME = "lanesolve"


@dataclass
class LaneModel:
    """The built model and the handles needed to read a solution back.

    Attributes
    ----------
    problem : pulp.LpProblem
        The problem, objective and constraints included.
    flow : dict of int to pulp.LpVariable
        Flow variable per active lane, keyed by the lane's index in ``network.lanes``.
    unmet : dict of int to pulp.LpVariable
        Units short per customer with a penalty, keyed by the customer's index in ``network.customers``.
    use : dict of int to pulp.LpVariable
        Binary "lane used" per fixed-charge lane, keyed by lane index (empty for a pure LP).
    big_m : dict of int to float
        The :math:`M_l` used in ``link_<n>`` per fixed-charge lane (see the module docstring).
    costs : dict of str to pulp.LpAffineExpression
        One affine expression per :data:`lanesolve.model.result.COST_COMPONENTS`; their sum is the objective.
    penalty : numpy.ndarray
        Per-unit penalty per customer row (NaN for a hard demand).
    """

    problem: pulp.LpProblem
    flow: dict[int, pulp.LpVariable]
    unmet: dict[int, pulp.LpVariable]
    use: dict[int, pulp.LpVariable]
    big_m: dict[int, float]
    costs: dict[str, pulp.LpAffineExpression]
    penalty: np.ndarray = field(default_factory=lambda: np.zeros(0))
    #: Contract v2: binary "node open" per depot / hub with status decide, keyed ("depot" | "hub", row index).
    open: dict[tuple[str, int], pulp.LpVariable] = field(default_factory=dict)
    #: Contract v2: integer trips per lane with a trip capacity and a cost per trip, keyed by lane index.
    trips: dict[int, pulp.LpVariable] = field(default_factory=dict)

    @property
    def is_mip(self) -> bool:
        """True when the model has yes/no or whole-trip variables (a pure LP otherwise)."""
        return bool(self.use) or bool(self.open) or bool(self.trips)


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


def _variable_maker(problem: pulp.LpProblem):
    """``problem.add_variable`` where PuLP has it (3.x; direct ``LpVariable`` is deprecated there), else the class."""
    return getattr(problem, "add_variable", pulp.LpVariable)


def _group(keys: np.ndarray, values: list) -> dict:
    """Group ``values`` by ``keys`` into lists, in one pass (used to collect each node's lanes)."""
    groups: dict = {}
    for key, value in zip(keys.tolist(), values):
        groups.setdefault(key, []).append(value)
    return groups


def _sum_by(keys: pd.Series, values: np.ndarray) -> dict:
    """Sum ``values`` per key; an infinite capacity makes the sum infinite, as it should."""
    if len(keys) == 0:
        return {}
    return pd.Series(values, index=keys.to_numpy()).groupby(level=0).sum().to_dict()


def closed_nodes(network: Network) -> set[str]:
    """Ids of depots and hubs with status ``closed`` (contract v2): they carry no flow."""
    return set(network.depots.loc[network.depots["status"] == "closed", "id"]) | set(
        network.hubs.loc[network.hubs["status"] == "closed", "id"])


def effective_capacity(network: Network) -> np.ndarray:
    """Capacity per active lane with every lane touching a closed node set to 0 (v1 networks: the capacities)."""
    lanes = network.active_lanes
    capacity = lanes["capacity"].to_numpy(dtype=float)
    closed = closed_nodes(network)
    if closed:
        touches = lanes["origin"].isin(closed).to_numpy() | lanes["destination"].isin(closed).to_numpy()
        capacity = np.where(touches, 0.0, capacity)
    return capacity


def _bounds(network: Network):
    """(fallback, capacity per lane index, can_send(node), can_absorb(node)): bounds (a), (b), (c), (d) of the module
    docstring. Lanes touching a closed node count with capacity 0, a closed node with supply or capacity 0."""
    lanes = network.active_lanes
    capacity = effective_capacity(network)
    inbound_cap = _sum_by(lanes["destination"], capacity)
    outbound_cap = _sum_by(lanes["origin"], capacity)
    closed = closed_nodes(network)
    supply = dict(zip(network.depots["id"], network.depots["supply"].astype(float)))
    demand = dict(zip(network.customers["id"], network.customers["demand"].astype(float)))
    hub_cap = dict(zip(network.hubs["id"], network.hubs["capacity"].astype(float)))
    for node in closed:
        if node in supply:
            supply[node] = 0.0
        if node in hub_cap:
            hub_cap[node] = 0.0
    # (a): always finite, so every M below is finite too.
    fallback = min(float(network.depots["supply"].sum()), float(network.customers["demand"].sum()))

    def can_send(node: str) -> float:
        into = inbound_cap.get(node, 0.0)
        if node in supply:
            return min(fallback, supply[node] + into)
        if node in hub_cap:
            return min(fallback, hub_cap[node], into)
        return min(fallback, into)

    def can_absorb(node: str) -> float:
        out = outbound_cap.get(node, 0.0)
        if node in demand:
            return min(fallback, demand[node] + out)
        if node in hub_cap:
            return min(fallback, hub_cap[node], out)
        return min(fallback, out)  # a depot, canonical plan (†)

    return fallback, dict(zip(lanes.index.tolist(), capacity.tolist())), can_send, can_absorb


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
        Finite, non-negative bound per lane. Lanes touching a closed node count with capacity 0, and a closed
        node with supply or capacity 0, so every bound stays valid for the v2 model.
    """
    lanes = network.active_lanes
    chosen = lanes[lanes["fixed_cost"] > 0] if indices is None else lanes.loc[list(indices)]
    if chosen.empty:
        return {}
    fallback, capacity, can_send, can_absorb = _bounds(network)
    return {index: float(max(0.0, min(fallback, capacity[index], can_send(origin), can_absorb(destination))))
            for index, origin, destination in zip(chosen.index.tolist(), chosen["origin"], chosen["destination"])}


def add_depot_supply(problem: pulp.LpProblem, network: Network, out_terms: dict, in_terms: dict) -> None:
    """``supply_<n>``: net outflow of each depot at most its supply (depots with no lane need no row)."""
    for index, node, supply in zip(network.depots.index.tolist(), network.depots["id"], network.depots["supply"]):
        terms = out_terms.get(node, []) + [(var, -1.0) for var, _ in in_terms.get(node, [])]
        if terms:
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintLE,
                                                    f"supply_{index}", float(supply)))


def add_customer_balance(problem: pulp.LpProblem, network: Network, out_terms: dict, in_terms: dict,
                         unmet: dict[int, pulp.LpVariable]) -> None:
    """``balance_<n>``: inflow - outflow + unmet = demand for every customer.

    The row is added even when it has no terms: a hard demand with no lane then makes the model infeasible, as it
    is (the pre-solve checks normally catch that first).
    """
    for index, node, demand in zip(network.customers.index.tolist(), network.customers["id"],
                                   network.customers["demand"]):
        terms = in_terms.get(node, []) + [(var, -1.0) for var, _ in out_terms.get(node, [])]
        if index in unmet:
            terms.append((unmet[index], 1.0))
        problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintEQ,
                                                f"balance_{index}", float(demand)))


def add_hub_flow(problem: pulp.LpProblem, network: Network, out_terms: dict, in_terms: dict) -> None:
    """``hub_flow_<n>``: inflow = outflow; ``hub_cap_<n>``: inflow at most the hub's capacity, when finite."""
    for index, node, capacity in zip(network.hubs.index.tolist(), network.hubs["id"], network.hubs["capacity"]):
        inflow = in_terms.get(node, [])
        terms = inflow + [(var, -1.0) for var, _ in out_terms.get(node, [])]
        if terms:
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintEQ,
                                                    f"hub_flow_{index}", 0.0))
        if inflow and math.isfinite(capacity):
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(inflow), pulp.LpConstraintLE,
                                                    f"hub_cap_{index}", float(capacity)))


def add_fixed_charge_links(problem: pulp.LpProblem, flow: dict, use: dict, big_m: dict[int, float]) -> None:
    """``link_<n>``: flow on a fixed-charge lane only when the lane is used, ``x_l <= M_l * y_l``."""
    for index, use_var in use.items():
        problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression([(flow[index], 1.0),
                                                                          (use_var, -big_m[index])]),
                                                pulp.LpConstraintLE, f"link_{index}", 0.0))


def _needs_use(network: Network, design: bool) -> np.ndarray:
    """Per active lane: does it need a yes/no "used" variable? A fixed charge, and in v2 a minimum volume or a
    single-sourced destination."""
    lanes = network.active_lanes
    need = lanes["fixed_cost"].to_numpy(dtype=float) > 0
    if design:
        single = set(network.customers.loc[network.customers["single_source"], "id"])
        need = need | (lanes["min_volume"].to_numpy(dtype=float) > 0) | lanes["destination"].isin(single).to_numpy()
    return need


def add_design(problem: pulp.LpProblem, network: Network, flow: dict, use: dict, big_m: dict[int, float],
               out_terms: dict, in_terms: dict, linking: bool = True):
    """Contract v2 decisions (see "Design decisions" in the module docstring).

    Returns ``(open, trips, fixed_node, trip_cost)``: the node-open binaries, the trip integers, and the affine
    expressions of the fixed node charges and the trip costs.
    """
    new_variable = _variable_maker(problem)
    lanes = network.active_lanes
    fallback, capacity, can_send, can_absorb = _bounds(network)

    # min_volume_<n>: a used lane carries at least its minimum.
    minimum = lanes["min_volume"]
    for index in minimum.index[minimum.to_numpy(dtype=float) > 0].tolist():
        if index in use:
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(
                [(flow[index], 1.0), (use[index], -float(minimum[index]))]), pulp.LpConstraintGE,
                f"min_volume_{index}", 0.0))

    # single_source_<n>: at most one inbound lane used (exactly one once any demand is delivered).
    customers = network.customers
    for index, node in zip(customers.index[customers["single_source"]].tolist(),
                           customers.loc[customers["single_source"], "id"]):
        inbound = [use[i] for i in lanes.index[lanes["destination"] == node].tolist() if i in use]
        if inbound:
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression([(v, 1.0) for v in inbound]),
                                                    pulp.LpConstraintLE, f"single_source_{index}", 1.0))

    # trip_<n>: flow <= trip_capacity * trips, trips integer in [0, ceil(M_l / trip_capacity)].
    trips: dict[int, pulp.LpVariable] = {}
    trip_cap = lanes["trip_capacity"].to_numpy(dtype=float)
    trip_cost = lanes["cost_per_trip"].to_numpy(dtype=float)
    costed = np.isfinite(trip_cap) & (trip_cap > 0) & (trip_cost > 0)
    if costed.any():
        chosen = lanes.index[costed].tolist()
        bound = lane_big_m(network, chosen)
        for index, size in zip(chosen, trip_cap[costed].tolist()):
            most = math.ceil(bound[index] / size - 1e-9)
            trips[index] = new_variable(f"trips_{index}", lowBound=0, upBound=most, cat=pulp.LpInteger)
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(
                [(flow[index], 1.0), (trips[index], -size)]), pulp.LpConstraintLE, f"trip_{index}", 0.0))
    trip_expr = pulp.LpAffineExpression([(trips[i], c) for i, c in zip(lanes.index[costed].tolist(),
                                                                        trip_cost[costed].tolist())])

    # Nodes: decide -> binary; open -> its fixed cost is paid; closed -> its lanes already have capacity 0.
    open_vars: dict[tuple[str, int], pulp.LpVariable] = {}
    fixed_terms, fixed_constant = [], 0.0
    decide = set(network.depots.loc[network.depots["status"] == "decide", "id"]) | set(
        network.hubs.loc[network.hubs["status"] == "decide", "id"])
    ends = lanes["origin"].isin(decide) | lanes["destination"].isin(decide)
    lane_bounds = lane_big_m(network, lanes.index[ends].tolist()) if linking else {}
    positions = lanes.index.to_numpy()[ends.to_numpy()]
    touching = _group(lanes["origin"].to_numpy()[ends.to_numpy()], positions.tolist())
    for node, more in _group(lanes["destination"].to_numpy()[ends.to_numpy()], positions.tolist()).items():
        touching.setdefault(node, []).extend(more)
    settings = network.settings
    for kind, frame, limit in (("depot", network.depots, settings.max_open_depots),
                               ("hub", network.hubs, settings.max_open_hubs)):
        count_terms, forced_open = [], 0
        for index, node, status, fixed in zip(frame.index.tolist(), frame["id"], frame["status"],
                                              frame["fixed_cost"].astype(float)):
            if status == "open":
                forced_open += 1
                fixed_constant += fixed
                continue
            if status != "decide":
                continue
            var = new_variable(f"open_{kind}_{index}", cat=pulp.LpBinary)
            open_vars[(kind, index)] = var
            count_terms.append((var, 1.0))
            if fixed:
                fixed_terms.append((var, fixed))
            _link_node(problem, kind, index, node, var, network, out_terms, in_terms, can_send, can_absorb)
            for lane in touching.get(node, []) if linking else ():
                # open_link_<kind>_<n>_<l>: each lane at the node carries at most its own bound times the decision.
                # Implied by the aggregate rows for integer decisions, but much tighter in the LP relaxation
                # (benchmarks/bench_linking.py measures it).
                problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(
                    [(flow[lane], 1.0), (var, -lane_bounds[lane])]), pulp.LpConstraintLE,
                    f"open_link_{kind}_{index}_{lane}", 0.0))
        if limit is not None:
            problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(count_terms), pulp.LpConstraintLE,
                                                    f"max_open_{kind}s", float(limit) - forced_open))
    fixed_expr = pulp.LpAffineExpression(fixed_terms, constant=fixed_constant)
    return open_vars, trips, fixed_expr, trip_expr


def _link_node(problem, kind, index, node, var, network, out_terms, in_terms, can_send, can_absorb):
    """Aggregate rows tying a node's flow to its open decision ``var`` ("Design decisions", module docstring)."""
    out_list, in_list = out_terms.get(node, []), in_terms.get(node, [])
    if kind == "depot":
        supply = float(network.depots.at[index, "supply"])
        # open_out_<n>: net outflow <= supply * open (the supply row with the decision in it).
        terms = out_list + [(v, -1.0) for v, _ in in_list] + [(var, -supply)]
        problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintLE,
                                                f"open_out_depot_{index}", 0.0))
        send = can_send(node)
    else:
        cap = float(network.hubs.at[index, "capacity"])
        send = can_send(node)
        bound = min(cap, send) if math.isfinite(cap) else send
        # open_out_<n>: throughput <= min(capacity, what can come in) * open.
        problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(in_list + [(var, -bound)]),
                                                pulp.LpConstraintLE, f"open_out_hub_{index}", 0.0))
    if kind == "depot" and in_list:
        # open_in_depot_<n>: transfers in <= what the depot can pass on (bound (d), canonical plan) * open.
        problem.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(in_list + [(var, -can_absorb(node))]),
                                                pulp.LpConstraintLE, f"open_in_depot_{index}", 0.0))


def build_model(network: Network, linking: bool = True) -> LaneModel:
    """Build the model of the module docstring for ``network``.

    Parameters
    ----------
    network : Network
        A validated network (see :mod:`lanesolve.model.network`).

    Returns
    -------
    LaneModel
        The problem and its variable handles. A network without fixed charges on active lanes yields no binary
        variables, so it is solved as a pure LP.

    Notes
    -----
    Built for size: lanes are grouped per node in one pass and every row's expression is made in one step from a
    list of ``(variable, coefficient)`` pairs, never by ``+=`` in a loop, which would be quadratic in pulp.
    A v1 network (no contract v2 decision, :attr:`Network.has_design` false) builds exactly the v1 model.

    ``linking`` (v2 only) adds the per-lane linking rows of "Design decisions"; switch it off only to measure what
    they are worth (benchmarks/bench_linking.py).
    """
    problem = pulp.LpProblem(PROBLEM_NAME, pulp.LpMinimize)
    new_variable = _variable_maker(problem)
    lanes = network.active_lanes
    design = network.has_design
    lane_index = lanes.index.to_numpy()
    capacity = effective_capacity(network) if design else lanes["capacity"].to_numpy(dtype=float)
    flow_vars = [new_variable(f"flow_{i}", lowBound=0, upBound=None if math.isinf(u) else float(u))
                 for i, u in zip(lane_index.tolist(), capacity.tolist())]
    flow = dict(zip(lane_index.tolist(), flow_vars))

    origins = lanes["origin"].to_numpy()
    destinations = lanes["destination"].to_numpy()
    ones = [(var, 1.0) for var in flow_vars]
    out_terms = _group(origins, ones)
    in_terms = _group(destinations, ones)

    penalty = customer_penalties(network)
    demand = network.customers["demand"].to_numpy(dtype=float)
    unmet = {index: new_variable(f"unmet_{index}", lowBound=0, upBound=float(demand[pos]))
             for pos, index in enumerate(network.customers.index.tolist()) if not np.isnan(penalty[pos])}

    big_m = lane_big_m(network, lane_index[_needs_use(network, design)].tolist()) if design else lane_big_m(network)
    use = {index: new_variable(f"use_{index}", cat=pulp.LpBinary) for index in big_m}

    # Handling cost per lane: the origin depot's per-unit-out cost plus the destination hub's per-unit-through cost.
    depot_handling = dict(zip(network.depots["id"], network.depots["handling_cost"].astype(float)))
    hub_handling = dict(zip(network.hubs["id"], network.hubs["handling_cost"].astype(float)))
    handling = (pd.Series(origins, dtype=object).map(depot_handling).fillna(0.0).to_numpy(dtype=float)
                + pd.Series(destinations, dtype=object).map(hub_handling).fillna(0.0).to_numpy(dtype=float))
    unit_cost = lanes["cost_per_unit"].to_numpy(dtype=float)
    fixed_cost = dict(zip(lane_index.tolist(), lanes["fixed_cost"].astype(float)))
    penalty_by_index = dict(zip(network.customers.index.tolist(), penalty.tolist()))

    costs = {
        "transport": pulp.LpAffineExpression(list(zip(flow_vars, unit_cost.tolist()))),
        "handling": pulp.LpAffineExpression([(v, h) for v, h in zip(flow_vars, handling.tolist()) if h != 0.0]),
        "fixed_lane": pulp.LpAffineExpression([(var, fixed_cost[i]) for i, var in use.items()]),
        "unmet_penalty": pulp.LpAffineExpression([(var, penalty_by_index[i]) for i, var in unmet.items()]),
    }
    # The objective is built from combined coefficients in one step rather than by adding the four pieces.
    objective_terms = list(zip(flow_vars, (unit_cost + handling).tolist()))
    objective_terms += [(var, fixed_cost[i]) for i, var in use.items()]
    objective_terms += [(var, penalty_by_index[i]) for i, var in unmet.items()]
    open_vars, trips = {}, {}
    if design:
        open_vars, trips, costs["fixed_node"], costs["trips"] = add_design(
            problem, network, flow, use, big_m, out_terms, in_terms, linking)
        objective_terms += list(costs["fixed_node"].items()) + list(costs["trips"].items())
    problem.setObjective(pulp.LpAffineExpression(objective_terms,
                                                 constant=costs["fixed_node"].constant if design else 0.0))

    add_depot_supply(problem, network, out_terms, in_terms)
    add_customer_balance(problem, network, out_terms, in_terms, unmet)
    add_hub_flow(problem, network, out_terms, in_terms)
    add_fixed_charge_links(problem, flow, use, big_m)
    return LaneModel(problem, flow, unmet, use, big_m, costs, penalty, open_vars, trips)


# ------------------------------------------------------------------------------------------------ the array path
@dataclass
class LaneArrays:
    """The pure LP of the module docstring as arrays: the same rows and columns, in the same order, as
    :func:`build_model` gives PuLP, without one Python object per lane.

    Columns are the flow of every active lane (in lane order) and then the units short of every customer with a
    penalty; rows are ``supply_<n>``, ``balance_<n>`` and, per hub, ``hub_flow_<n>`` then ``hub_cap_<n>``. The
    matrix is held column-wise (compressed sparse column): the nonzeros of column ``j`` are
    ``coefficient[start[j]:start[j + 1]]`` in rows ``row_of[start[j]:start[j + 1]]``, rows ascending.

    Attributes
    ----------
    lane_index : numpy.ndarray
        Lane index (in ``network.lanes``) of each flow column.
    unmet_index : numpy.ndarray
        Customer index (in ``network.customers``) of each unmet column.
    column_names, row_names : list of str
        The names :func:`build_model` gives the same columns and rows (``flow_<n>``, ``balance_<n>``, ...).
    upper : numpy.ndarray
        Upper bound per column (``inf`` for none); every lower bound is 0.
    objective : numpy.ndarray
        Cost per unit per column.
    sense : numpy.ndarray
        ``"L"`` (at most) or ``"E"`` (equal) per row.
    rhs : numpy.ndarray
        Right-hand side per row.
    start, row_of, coefficient : numpy.ndarray
        The matrix, column-wise (see above).
    costs : dict of str to numpy.ndarray
        Cost per unit per column of each of :data:`lanesolve.model.result.COST_COMPONENTS`; they add up to ``objective``.
    penalty : numpy.ndarray
        Per-unit penalty per customer row (NaN for a hard demand), as :attr:`LaneModel.penalty`.
    """

    lane_index: np.ndarray
    unmet_index: np.ndarray
    column_names: list[str]
    row_names: list[str]
    upper: np.ndarray
    objective: np.ndarray
    sense: np.ndarray
    rhs: np.ndarray
    start: np.ndarray
    row_of: np.ndarray
    coefficient: np.ndarray
    costs: dict[str, np.ndarray]
    penalty: np.ndarray

    @property
    def n_columns(self) -> int:
        return len(self.upper)

    @property
    def n_rows(self) -> int:
        return len(self.rhs)

    @property
    def column_of(self) -> np.ndarray:
        """Column of each nonzero (the expanded form of ``start``)."""
        return np.repeat(np.arange(self.n_columns), np.diff(self.start))


def array_path_applies(network: Network) -> bool:
    """True when :func:`build_lp_arrays` can describe the model: a pure LP (no fixed charge on an active lane and no
    contract v2 decision). Models with yes/no or trip decisions are built by :func:`build_model` only."""
    return not network.has_design and not network.has_fixed_charges


def _handling(network: Network, origins: np.ndarray, destinations: np.ndarray) -> np.ndarray:
    """Handling cost per unit per lane: the origin depot's per-unit-out cost plus the destination hub's."""
    depot_handling = dict(zip(network.depots["id"], network.depots["handling_cost"].astype(float)))
    hub_handling = dict(zip(network.hubs["id"], network.hubs["handling_cost"].astype(float)))
    return (pd.Series(origins, dtype=object).map(depot_handling).fillna(0.0).to_numpy(dtype=float)
            + pd.Series(destinations, dtype=object).map(hub_handling).fillna(0.0).to_numpy(dtype=float))


def build_lp_arrays(network: Network) -> LaneArrays:
    """The pure LP of ``network`` as :class:`LaneArrays`, built with numpy in a few passes over the lanes.

    Parameters
    ----------
    network : Network
        A validated network for which :func:`array_path_applies` is true.

    Returns
    -------
    LaneArrays
        Row for row and column for column the problem :func:`build_model` builds (same names, same order, same
        coefficients), so the solver sees the same LP either way.

    Raises
    ------
    SolverError
        The network has yes/no or trip decisions (use :func:`build_model`).

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> arrays = build_lp_arrays(net)
    >>> arrays.row_names, arrays.column_names, arrays.objective.tolist()
    (['supply_0', 'balance_0'], ['flow_0'], [2.0])
    """
    if not array_path_applies(network):
        from lanesolve.errors import SolverError  # late import keeps the model module free of the error module otherwise
        raise SolverError("the array model covers pure LPs only; this network has yes/no or trip decisions "
                          "(build it with lanesolve.model.formulation.build_model)")
    lanes = network.active_lanes
    lane_index = lanes.index.to_numpy()
    origins = lanes["origin"].to_numpy(dtype=object)
    destinations = lanes["destination"].to_numpy(dtype=object)
    n_lanes = len(lane_index)
    depots, customers, hubs = network.depots, network.customers, network.hubs

    # Node position per lane end, -1 where the end is not of that kind.
    depot_ids = pd.Index(depots["id"])
    customer_ids = pd.Index(customers["id"])
    hub_ids = pd.Index(hubs["id"])
    o_depot, d_depot = depot_ids.get_indexer(origins), depot_ids.get_indexer(destinations)
    o_customer, d_customer = customer_ids.get_indexer(origins), customer_ids.get_indexer(destinations)
    o_hub, d_hub = hub_ids.get_indexer(origins), hub_ids.get_indexer(destinations)

    # Rows in build_model's order: supply (depots with a lane), balance (every customer), then per hub its flow row
    # (hubs with a lane) followed by its capacity row (finite capacity and a lane in).
    depot_has_lane = (np.bincount(o_depot[o_depot >= 0], minlength=len(depots))
                      + np.bincount(d_depot[d_depot >= 0], minlength=len(depots))) > 0
    hub_in = np.bincount(d_hub[d_hub >= 0], minlength=len(hubs)) > 0
    hub_has_lane = hub_in | (np.bincount(o_hub[o_hub >= 0], minlength=len(hubs)) > 0)
    hub_capacity = hubs["capacity"].to_numpy(dtype=float)
    hub_has_cap = hub_in & np.isfinite(hub_capacity)

    supply_row = np.full(len(depots), -1)
    supply_row[depot_has_lane] = np.arange(int(depot_has_lane.sum()))
    first_balance = int(depot_has_lane.sum())
    balance_row = first_balance + np.arange(len(customers))
    hub_rows_each = hub_has_lane.astype(int) + hub_has_cap.astype(int)
    hub_first = first_balance + len(customers) + np.concatenate([[0], np.cumsum(hub_rows_each)[:-1]]).astype(int)
    hub_flow_row = np.where(hub_has_lane, hub_first, -1)
    hub_cap_row = np.where(hub_has_cap, hub_first + hub_has_lane.astype(int), -1)
    n_rows = first_balance + len(customers) + int(hub_rows_each.sum())

    row_names = [""] * n_rows
    sense = np.empty(n_rows, dtype="<U1")
    rhs = np.zeros(n_rows)
    depot_index = depots.index.to_numpy()
    for position in np.flatnonzero(depot_has_lane).tolist():
        row_names[supply_row[position]] = f"supply_{depot_index[position]}"
    sense[supply_row[depot_has_lane]] = "L"
    rhs[supply_row[depot_has_lane]] = depots["supply"].to_numpy(dtype=float)[depot_has_lane]
    for position, index in enumerate(customers.index.tolist()):
        row_names[balance_row[position]] = f"balance_{index}"
    sense[balance_row] = "E"
    rhs[balance_row] = customers["demand"].to_numpy(dtype=float)
    hub_index = hubs.index.to_numpy()
    for position in range(len(hubs)):
        if hub_has_lane[position]:
            row_names[hub_flow_row[position]] = f"hub_flow_{hub_index[position]}"
        if hub_has_cap[position]:
            row_names[hub_cap_row[position]] = f"hub_cap_{hub_index[position]}"
    sense[hub_flow_row[hub_has_lane]] = "E"
    sense[hub_cap_row[hub_has_cap]] = "L"
    rhs[hub_cap_row[hub_has_cap]] = hub_capacity[hub_has_cap]

    # Nonzeros: out of an origin -1 in its balance / hub flow row, +1 in a depot's supply row (net outflow); into a
    # destination the opposite, plus +1 in the hub's capacity row.
    lane_column = np.arange(n_lanes)
    pieces = []
    for position, row_table, sign in ((o_depot, supply_row, 1.0), (o_customer, balance_row, -1.0),
                                      (o_hub, hub_flow_row, -1.0), (d_depot, supply_row, -1.0),
                                      (d_customer, balance_row, 1.0), (d_hub, hub_flow_row, 1.0),
                                      (d_hub, hub_cap_row, 1.0)):
        chosen = position >= 0
        rows = row_table[position[chosen]]
        keep = rows >= 0
        pieces.append((rows[keep], lane_column[chosen][keep], np.full(int(keep.sum()), sign)))

    penalty = customer_penalties(network)
    soft = ~np.isnan(penalty)
    unmet_index = customers.index.to_numpy()[soft]
    unmet_column = n_lanes + np.arange(int(soft.sum()))
    pieces.append((balance_row[soft], unmet_column, np.ones(int(soft.sum()))))

    rows = np.concatenate([p[0] for p in pieces]).astype(np.int64)
    columns = np.concatenate([p[1] for p in pieces]).astype(np.int64)
    values = np.concatenate([p[2] for p in pieces])
    # Column-major, rows ascending; a lane from a node to itself adds +1 and -1 to one row, summed as PuLP does.
    order = np.lexsort((rows, columns))
    rows, columns, values = rows[order], columns[order], values[order]
    if len(rows):
        new = np.r_[True, (rows[1:] != rows[:-1]) | (columns[1:] != columns[:-1])]
        values = np.add.reduceat(values, np.flatnonzero(new))
        rows, columns = rows[new], columns[new]
    n_columns = n_lanes + len(unmet_index)
    start = np.searchsorted(columns, np.arange(n_columns + 1)).astype(np.int64)

    unit_cost = lanes["cost_per_unit"].to_numpy(dtype=float)
    handling = _handling(network, origins, destinations)
    zeros_unmet = np.zeros(len(unmet_index))
    costs = {
        "transport": np.r_[unit_cost, zeros_unmet],
        "handling": np.r_[handling, zeros_unmet],
        "fixed_lane": np.zeros(n_columns),
        "unmet_penalty": np.r_[np.zeros(n_lanes), penalty[soft]],
    }
    upper = np.r_[lanes["capacity"].to_numpy(dtype=float), customers["demand"].to_numpy(dtype=float)[soft]]
    column_names = [f"flow_{i}" for i in lane_index.tolist()] + [f"unmet_{i}" for i in unmet_index.tolist()]
    objective = np.r_[unit_cost + handling, penalty[soft]]
    return LaneArrays(lane_index, unmet_index, column_names, row_names, upper, objective, sense, rhs, start, rows,
                      values, costs, penalty)
