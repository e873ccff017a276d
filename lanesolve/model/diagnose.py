"""Why no plan exists: structural causes found without a solver, and the shortfall re-solve that names the customers
who would go short and the saturated lanes, depots and hubs in the way (the bottleneck).

Structural causes (no solver)
-----------------------------
- a customer with hard demand whose every active inbound lane starts at a closed node;
- more depots (hubs) marked ``open`` than ``max_open_depots`` (``max_open_hubs``) allows;
- a hub (not closed) with inbound lanes but no active outbound lane: whatever reaches it is stranded, so the
  solver sends it nothing (a note, not by itself a reason for no plan).

Shortfall re-solve
------------------
Every hard-demand customer is given an internal penalty :math:`P` per unit short and the model is solved again.
:math:`P` is chosen to *dominate*: the re-solve then short-ships as little as possible in total, and only among
those plans minimises cost.

- LP networks: moving one more unit to a short customer along an augmenting path costs at most the path's cost,
  and a simple path enters each node at most once, so
  :math:`B = \\sum_n \\max_{l \\in \\delta^-(n)} (c_l + h_l)` (largest landed cost per unit over inbound lanes,
  summed over nodes) bounds what any unit of delivery can add. With :math:`P > B`, delivering any extra unit
  lowers the penalised cost, so the penalised optimum has the least total shortfall.
- Networks with yes/no or trip decisions: a fixed charge is not a per-unit cost, so the argument uses the cost of
  a whole plan instead, :math:`C = \\sum_l (c_l + h_l) M_l + \\sum \\text{fixed charges} + \\sum_l e_l
  \\lceil M_l / r_l \\rceil` (every plan costs at most :math:`C`). With integral data the least shortfall changes by
  whole units, so :math:`P > C` dominates: one unit less short saves more than any plan can cost. (With
  fractional data a shortfall differing by less than one unit may be traded against cost; the figures are then
  the least shortfall to within :math:`C / P`.)

:math:`P = 1 + \\max(B + \\bar p, C + \\sum_c p_c q_c)` (C only with decisions), where :math:`\\bar p` is the
largest penalty a customer has in the workbook: shorting a customer with its own penalty to serve a hard one costs
at most :math:`\\bar p + B` per unit, so :math:`P` must exceed that too, or the re-solve would short hard customers
to spare a penalised one. The shortfall can often fall on several customers equally well; when the re-solved plan's
residual network lets one unit move from a served hard customer to a short one, the split is said to be one of
many. The bottleneck is read from the re-solved plan: searching
backwards from the short customers over the residual network (lanes with room forward, lanes with flow
backward; a hub is split into in/out with its capacity between; a super-source feeds each depot up to its
supply), the saturated lanes, hub capacities and depot supplies leading into the searched set form a minimum cut:
the capacity that runs out (Ford & Fulkerson's max-flow min-cut theorem). When decisions are present and the cut
is empty (the yes/no choices bind, not a capacity) every saturated element is listed instead.

What restores a plan (:mod:`lanesolve.model.remedies`): the least raises of every limit that must give, limits in
series included (each named limit raised by its amount gives a plan), and, when no limit needs raising, the design
rule families (single sourcing, max_open_depots / max_open_hubs, min_volume, whole trips) whose lifting gives one.
"""

from __future__ import annotations

import copy
import math
from collections import deque
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model import remedies
from lanesolve.model.formulation import closed_nodes, customer_penalties, effective_capacity, lane_big_m
from lanesolve.model.ids import positions
from lanesolve.model.network import Network
from lanesolve.model.solve import solve

SHORT_COLUMNS = ["customer", "demand", "short"]
SATURATED_COLUMNS = ["kind", "item", "capacity", "used", "bottleneck", "raise_by"]
_TOL = 1e-7


def _num(value: float) -> str:
    return f"{value:,.6g}" if abs(value) >= 1e6 else f"{value:.6g}"


@dataclass
class Diagnosis:
    """Why no plan exists.

    Attributes
    ----------
    structural : list of str
        Causes found without a solver (sentences naming ids and rows, with a hint).
    notes : list of str
        Structural findings that do not by themselves rule a plan out.
    short : DataFrame
        :data:`SHORT_COLUMNS`: customers who would go short in the least-shortfall plan, and by how much.
    saturated : DataFrame
        :data:`SATURATED_COLUMNS`: lanes, depots and hubs used to their limit in that plan or needing a raise;
        ``bottleneck`` marks the minimum cut and every limit that must give, ``raise_by`` how much it must rise
        (together with the others) for a plan (0 where no raise is needed).
    penalty : float or None
        The internal penalty used for the re-solve (None if none was run).
    total_short : float or None
        The least total shortfall of hard demand (None if no re-solve was run).
    split_is_one_of_many : bool
        The same least total could fall on the customers differently.
    rules : list of (str, bool, str)
        Design rule families tried (:func:`lanesolve.model.remedies.rule_relaxations`): name, lifting it gives a
        plan, sentence.
    """

    structural: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    short: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=SHORT_COLUMNS))
    saturated: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=SATURATED_COLUMNS))
    penalty: float | None = None
    total_short: float | None = None
    split_is_one_of_many: bool = False
    rules: list = field(default_factory=list)

    def causes(self, units: str = "units") -> list[str]:
        """The causes, most telling first: the total shortfall, the causes found before solving, the design rules
        in the way, and the limits to raise with their amounts."""
        out = []
        if self.total_short is not None and self.total_short > _TOL:
            count = len(self.short)
            out.append(f"No plan meets every hard demand: at least {_num(self.total_short)} {units} in total would "
                       f"go short, at {count} customer{'s' if count != 1 else ''}"
                       + (" (that split is one of many; the total is the least possible)."
                          if self.split_is_one_of_many else "."))
        out += list(self.structural)
        out += [sentence for _, restores, sentence in self.rules if restores]
        raised = self.saturated[self.saturated["raise_by"] > 0] if len(self.saturated) else self.saturated
        if len(raised):
            parts = [f"{r.kind} {r.item} from {_num(r.capacity)} by {_num(r.raise_by)}"
                     for r in raised.itertuples(index=False)]
            out.append(f"Raising together {', '.join(parts)} {units} gives a plan (the least total raise).")
        return out

    def sentences(self, units: str = "units") -> list[str]:
        """The diagnosis in plain sentences, for the console, the result sheet and the HTML section: the total and
        the causes first, then the customers one by one."""
        out = self.causes(units)
        for r in self.short.itertuples(index=False):
            out.append(f"Customer {r.customer} would be {r.short:.6g} {units} short of its demand of "
                       f"{r.demand:.6g} {units}.")
        cut = self.saturated[self.saturated["bottleneck"]] if len(self.saturated) else self.saturated
        for r in (cut if len(cut) else self.saturated).itertuples(index=False):
            out.append(f"The {r.kind} {r.item} is used to its limit of {r.capacity:.6g} {units} on the way"
                       " (raise it, or add another route around it).")
        out += [sentence for _, restores, sentence in self.rules if not restores]
        return out + list(self.notes)

    def to_json(self) -> dict:
        return {
            "structural": list(self.structural),
            "notes": list(self.notes),
            "total_short": self.total_short,
            "split_is_one_of_many": bool(self.split_is_one_of_many),
            "short": [{"customer": r.customer, "demand": float(r.demand), "short": float(r.short)}
                      for r in self.short.itertuples(index=False)],
            "saturated": [{"kind": r.kind, "item": r.item, "capacity": float(r.capacity), "used": float(r.used),
                           "bottleneck": bool(r.bottleneck), "raise_by": float(r.raise_by)}
                          for r in self.saturated.itertuples(index=False)],
            "rules": [{"rule": name, "restores_a_plan": bool(ok), "text": text} for name, ok, text in self.rules],
            "penalty": self.penalty,
        }


def structural_causes(network: Network) -> tuple[list[str], list[str]]:
    """``(causes, notes)`` found without a solver (see the module docstring); causes are certain."""
    causes, notes = [], []
    units = network.settings.units or "units"
    lanes = network.active_lanes
    closed = closed_nodes(network)
    hard = np.isnan(customer_penalties(network)) & (network.customers["demand"].to_numpy(dtype=float) > 0)
    if closed:
        inbound = lanes.groupby("destination")["origin"].apply(list).to_dict()
        for node, demand, row in zip(network.customers.loc[hard, "id"], network.customers.loc[hard, "demand"],
                                     network.customers.loc[hard, "row"]):
            origins = inbound.get(node, [])
            if origins and all(o in closed for o in origins):
                causes.append(f"Customers row {row}: customer '{node}' needs {demand:.6g} {units} but every active "
                              f"lane into it starts at a closed node ({', '.join(sorted(set(origins)))}) (set one "
                              "of them to open or decide, or add a lane from an open node).")
    for kind, frame, limit in (("depots", network.depots, network.settings.max_open_depots),
                               ("hubs", network.hubs, network.settings.max_open_hubs)):
        forced = int((frame["status"] == "open").sum())
        if limit is not None and forced > limit:
            causes.append(f"{forced} {kind} are marked open but max_open_{kind} is {limit:.6g} (raise the setting "
                          f"or set some {kind} to decide).")
    hubs = network.hubs

    def ends(column: str) -> np.ndarray:  # per hub: is it an end of an active lane (distinct ends looked up once)
        return positions(pd.Series(lanes[column].unique()), hubs["id"]) >= 0

    stuck = (hubs["status"] != "closed").to_numpy() & ends("destination") & ~ends("origin")
    for node, row in zip(hubs["id"].to_numpy(dtype=object)[stuck].tolist(), hubs["row"].to_numpy()[stuck].tolist()):
        notes.append(f"Hubs row {row}: hub '{node}' has lanes in but no active lane out, so nothing can pass "
                     "through it (add a lane leaving it, or set one to active).")
    return causes, notes


def dominating_penalty(network: Network, with_decisions: bool) -> float:
    """The internal penalty :math:`P = 1 + \\max(B + \\bar p, C + \\sum_c p_c q_c)` of the module docstring."""
    lanes = network.active_lanes
    depot_handling = dict(zip(network.depots["id"], network.depots["handling_cost"].astype(float)))
    hub_handling = dict(zip(network.hubs["id"], network.hubs["handling_cost"].astype(float)))
    landed = (lanes["cost_per_unit"].to_numpy(dtype=float)
              + lanes["origin"].map(depot_handling).fillna(0.0).to_numpy(dtype=float)
              + lanes["destination"].map(hub_handling).fillna(0.0).to_numpy(dtype=float))
    path_bound = float(pd.Series(landed, index=lanes["destination"].to_numpy()).groupby(level=0).max().sum()) \
        if len(lanes) else 0.0
    penalty = np.nan_to_num(customer_penalties(network), nan=0.0)
    path_bound += float(penalty.max()) if len(penalty) else 0.0
    plan_bound = 0.0
    if with_decisions:
        bounds = lane_big_m(network, lanes.index.tolist())
        m = np.array([bounds[i] for i in lanes.index.tolist()], dtype=float)
        trip_cap = lanes["trip_capacity"].to_numpy(dtype=float)
        trip_cost = lanes["cost_per_trip"].to_numpy(dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            trips = np.where(np.isfinite(trip_cap) & (trip_cap > 0), np.ceil(m / np.where(trip_cap > 0, trip_cap, 1)),
                             0.0)
        plan_bound = float((landed * m).sum() + lanes["fixed_cost"].sum() + (trip_cost * trips).sum()
                           + network.depots["fixed_cost"].sum() + network.hubs["fixed_cost"].sum()
                           + (penalty * network.customers["demand"].to_numpy(dtype=float)).sum())
    return 1.0 + max(path_bound, plan_bound)


def diagnose(network: Network, solver: str | None = None, time_limit: float | None = None,
             found_before: list[str] | None = None) -> Diagnosis:
    """Explain why ``network`` has no feasible plan (see the module docstring).

    Parameters
    ----------
    network : Network
        A network for which the solver (or the pre-solve checks) found no plan.
    solver : str, optional
        As for :func:`lanesolve.model.solve.solve`.
    time_limit : float, optional
        Seconds for each re-solve.
    found_before : list of str, optional
        What the pre-solve checks found (:func:`lanesolve.model.checks.presolve_checks`); kept as the structural
        causes, in place of :func:`structural_causes`' own.

    Returns
    -------
    Diagnosis
        Every cause found, the least total shortfall and who would bear it, the limits to raise (and by how
        much) and the design rules in the way.
    """
    causes, notes = structural_causes(network)
    diagnosis = Diagnosis(structural=list(found_before) if found_before is not None else causes, notes=notes)
    penalised = copy.deepcopy(network)
    penalty = customer_penalties(network)
    hard = np.isnan(penalty)
    with_decisions = network.has_fixed_charges or network.has_design
    big = dominating_penalty(network, with_decisions)
    penalised.customers["unmet_penalty"] = np.where(hard, big, penalty)
    if penalised.products is not None:  # several products: each hard demand by product gets the penalty too
        big *= max(1.0, float(penalised.products.capacity_use.max(initial=1.0)))
        penalised.products.demand["unmet_penalty"] = penalised.products.demand["unmet_penalty"].fillna(big)
    diagnosis.penalty = big
    result = solve(penalised, time_limit=time_limit, solver=solver, sensitivity=False)
    if not result.status.has_plan:
        diagnosis.notes.append(f"The shortfall re-solve ended {result.status.value}, so no shortfall is named.")
        return diagnosis
    demand = dict(zip(network.customers["id"], network.customers["demand"].astype(float)))
    hard_ids = set(network.customers.loc[hard, "id"])
    short = [(r.customer, demand[r.customer], float(r.quantity)) for r in result.unmet.itertuples(index=False)
             if r.customer in hard_ids and r.quantity > _TOL]
    diagnosis.short = pd.DataFrame(short, columns=SHORT_COLUMNS)
    diagnosis.total_short = float(sum(s[2] for s in short))
    # The least-raise LP is the one-product network without emissions: for several products or a cap it says nothing.
    capped = network.emissions is not None and network.settings.emissions_cap is not None
    raises = remedies.least_raises(network) if network.products is None and not capped else None
    if capped:
        diagnosis.notes.append(f"The emissions cap ({network.settings.emissions_cap:g} t CO2e) holds in the shortfall "
                               "re-solve: the shortfall named is what it takes to stay within it (raise "
                               "emissions_cap to deliver more).")
    diagnosis.saturated, diagnosis.split_is_one_of_many = _saturated(
        network, result, {s[0] for s in short}, with_decisions, raises, hard_ids)
    if raises is not None and raises.empty and network.has_design:
        diagnosis.rules = remedies.rule_relaxations(network, solve, time_limit=time_limit, solver=solver)
    return diagnosis


def _saturated(network: Network, result, short_ids: set[str], with_decisions: bool, raises: pd.DataFrame | None,
               hard_ids: set[str]) -> tuple[pd.DataFrame, bool]:
    """Saturated lanes, hub capacities and depot supplies in the re-solved plan, the minimum cut and every limit to
    raise marked; and whether the shortfall's split over the customers is one of many."""
    lanes = network.active_lanes
    capacity = effective_capacity(network)
    flows = {(r.origin, r.destination, r.mode): float(r.flow) for r in result.flows.itertuples(index=False)}
    hubs = set(network.hubs["id"])
    closed = closed_nodes(network)
    # Arcs of the residual network: (tail, head, capacity, flow, kind, item).
    arcs = []
    for (origin, destination, mode), cap in zip(zip(lanes["origin"], lanes["destination"], lanes["mode"]),
                                                capacity.tolist()):
        x = flows.get((origin, destination, mode), 0.0)
        head = f"{destination}#in" if destination in hubs else destination
        label = f"{origin} -> {destination}" + (f" ({mode})" if mode else "")
        if origin in closed or destination in closed:
            label += " (at a closed node)"
        arcs.append((origin, head, cap, x, "lane", label))
    nodes = result.nodes.set_index("node")
    for node, cap in zip(network.hubs["id"], network.hubs["capacity"].astype(float)):
        cap = 0.0 if node in closed else cap
        arcs.append((f"{node}#in", node, cap, float(nodes.at[node, "received"]), "hub", node))
    for node, supply in zip(network.depots["id"], network.depots["supply"].astype(float)):
        net = float(nodes.at[node, "shipped"] - nodes.at[node, "received"])
        arcs.append(("#source", node, supply, max(net, 0.0), "depot", node))

    def full(cap, x):
        return math.isfinite(cap) and x >= cap - _TOL * max(1.0, cap)

    # Residual adjacency, both ways: forward room tail -> head, backward along flow head -> tail.
    into: dict[str, list[str]] = {}
    out_of: dict[str, list[str]] = {}
    for tail, head, cap, x, _, _ in arcs:
        if not full(cap, x):
            into.setdefault(head, []).append(tail)
            out_of.setdefault(tail, []).append(head)
        if x > _TOL:
            into.setdefault(tail, []).append(head)
            out_of.setdefault(head, []).append(tail)
    reach = _search(into, short_ids)  # R: nodes from which a short customer can still be reached
    raised = {} if raises is None else {(r.kind, r.item): float(r.raise_by) for r in raises.itertuples(index=False)}
    rows = []
    for tail, head, cap, x, kind, item in arcs:
        raise_by = raised.get((kind, item.replace(" (at a closed node)", "")), 0.0)
        if (full(cap, x) and (x > _TOL or cap == 0)) or raise_by > 0:
            cut = head in reach and tail not in reach
            if x > _TOL or cut or raise_by > 0:
                rows.append((kind, item, cap, x, cut or raise_by > 0, raise_by))
    frame = pd.DataFrame(rows, columns=SATURATED_COLUMNS)
    if short_ids and not frame["bottleneck"].any() and not with_decisions:
        frame["bottleneck"] = True
    # The split is one of many when a served hard customer can pass a unit on to a short one in the residual
    # network (its delivery falls by one, the short one's rises by one, the total stays the least).
    customers = dict(zip(network.customers["id"], network.customers["demand"].astype(float)))
    short_of = {c for c in short_ids}
    served = [c for c in hard_ids if c not in short_of and customers[c] > _TOL] + [
        c for c in short_ids if customers[c] - float(result.unmet.set_index("customer").at[c, "quantity"]) > _TOL]
    many = False
    for start in served:
        found = _search(out_of, {start}) - {start}
        if found & (short_of - {start}):
            many = True
            break
    return frame, many


def _search(adjacency: dict[str, list[str]], start: set[str]) -> set[str]:
    """Nodes reached from ``start`` over ``adjacency`` (breadth first)."""
    seen = set(start)
    queue = deque(start)
    while queue:
        node = queue.popleft()
        for nxt in adjacency.get(node, []):
            if nxt not in seen:
                seen.add(nxt)
                queue.append(nxt)
    return seen
