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

:math:`P = 1 + \\max(B, C)` (C only with decisions). The bottleneck is read from the re-solved plan: searching
backwards from the short customers over the residual network (lanes with room forward, lanes with flow
backward; a hub is split into in/out with its capacity between; a super-source feeds each depot up to its
supply), the saturated lanes, hub capacities and depot supplies leading into the searched set form a minimum cut:
the capacity that runs out (Ford & Fulkerson's max-flow min-cut theorem). When decisions are present and the cut
is empty (the yes/no choices bind, not a capacity) every saturated element is listed instead.
"""

from __future__ import annotations

import copy
import math
from collections import deque
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model.formulation import closed_nodes, customer_penalties, effective_capacity, lane_big_m
from lanesolve.model.network import Network
from lanesolve.model.result import Result, SolveStatus
from lanesolve.model.solve import solve

SHORT_COLUMNS = ["customer", "demand", "short"]
SATURATED_COLUMNS = ["kind", "item", "capacity", "used", "bottleneck"]
_TOL = 1e-7


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
        :data:`SATURATED_COLUMNS`: lanes, depots and hubs used to their limit in that plan; ``bottleneck`` marks
        the minimum cut (see the module docstring).
    penalty : float or None
        The internal penalty used for the re-solve (None if none was run).
    """

    structural: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    short: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=SHORT_COLUMNS))
    saturated: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=SATURATED_COLUMNS))
    penalty: float | None = None

    def sentences(self, units: str = "units") -> list[str]:
        """The diagnosis in plain sentences, for the console, the result sheet and the HTML section."""
        out = list(self.structural)
        for r in self.short.itertuples(index=False):
            out.append(f"Customer {r.customer} would be {r.short:.6g} {units} short of its demand of "
                       f"{r.demand:.6g} {units}.")
        cut = self.saturated[self.saturated["bottleneck"]] if len(self.saturated) else self.saturated
        for r in (cut if len(cut) else self.saturated).itertuples(index=False):
            out.append(f"The {r.kind} {r.item} is used to its limit of {r.capacity:.6g} {units} on the way"
                       " (raise it, or add another route around it).")
        return out + list(self.notes)

    def to_json(self) -> dict:
        return {
            "structural": list(self.structural),
            "notes": list(self.notes),
            "short": [{"customer": r.customer, "demand": float(r.demand), "short": float(r.short)}
                      for r in self.short.itertuples(index=False)],
            "saturated": [{"kind": r.kind, "item": r.item, "capacity": float(r.capacity), "used": float(r.used),
                           "bottleneck": bool(r.bottleneck)} for r in self.saturated.itertuples(index=False)],
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
    outbound = set(lanes["origin"])
    into = set(lanes["destination"])
    for node, row, status in zip(network.hubs["id"], network.hubs["row"], network.hubs["status"]):
        if status != "closed" and node in into and node not in outbound:
            notes.append(f"Hubs row {row}: hub '{node}' has lanes in but no active lane out, so nothing can pass "
                         "through it (add a lane leaving it, or set one to active).")
    return causes, notes


def dominating_penalty(network: Network, with_decisions: bool) -> float:
    """The internal penalty :math:`P = 1 + \\max(B, C)` of the module docstring."""
    lanes = network.active_lanes
    depot_handling = dict(zip(network.depots["id"], network.depots["handling_cost"].astype(float)))
    hub_handling = dict(zip(network.hubs["id"], network.hubs["handling_cost"].astype(float)))
    landed = (lanes["cost_per_unit"].to_numpy(dtype=float)
              + lanes["origin"].map(depot_handling).fillna(0.0).to_numpy(dtype=float)
              + lanes["destination"].map(hub_handling).fillna(0.0).to_numpy(dtype=float))
    path_bound = float(pd.Series(landed, index=lanes["destination"].to_numpy()).groupby(level=0).max().sum()) \
        if len(lanes) else 0.0
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
                           + network.depots["fixed_cost"].sum() + network.hubs["fixed_cost"].sum())
    return 1.0 + max(path_bound, plan_bound)


def diagnose(network: Network, solver: str | None = None, time_limit: float | None = None) -> Diagnosis:
    """Explain why ``network`` has no feasible plan (see the module docstring).

    Parameters
    ----------
    network : Network
        A network for which the solver (or the pre-solve checks) found no plan.
    solver : str, optional
        As for :func:`lanesolve.model.solve.solve`.
    time_limit : float, optional
        Seconds for the re-solve.

    Returns
    -------
    Diagnosis
        Structural causes are returned without solving when any is found.
    """

    causes, notes = structural_causes(network)
    diagnosis = Diagnosis(structural=causes, notes=notes)
    if causes:
        return diagnosis
    penalised = copy.deepcopy(network)
    penalty = customer_penalties(network)
    hard = np.isnan(penalty)
    with_decisions = network.has_fixed_charges or network.has_design
    big = dominating_penalty(network, with_decisions)
    penalised.customers["unmet_penalty"] = np.where(hard, big, penalty)
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
    diagnosis.saturated = _saturated(network, result, {s[0] for s in short}, with_decisions)
    return diagnosis


def _saturated(network: Network, result, short_ids: set[str], with_decisions: bool) -> pd.DataFrame:
    """Saturated lanes, hub capacities and depot supplies in the re-solved plan, the minimum cut marked."""
    lanes = network.active_lanes
    capacity = effective_capacity(network)
    flows = {(r.origin, r.destination, r.mode): float(r.flow) for r in result.flows.itertuples(index=False)}
    hubs = set(network.hubs["id"])
    # Arcs of the residual network: (tail, head, capacity, flow, kind, item).
    arcs = []
    for (origin, destination, mode), cap in zip(zip(lanes["origin"], lanes["destination"], lanes["mode"]),
                                                capacity.tolist()):
        x = flows.get((origin, destination, mode), 0.0)
        head = f"{destination}#in" if destination in hubs else destination
        label = f"{origin} -> {destination}" + (f" ({mode})" if mode else "")
        if origin in closed_nodes(network) or destination in closed_nodes(network):
            label += " (at a closed node)"
        arcs.append((origin, head, cap, x, "lane", label))
    nodes = result.nodes.set_index("node")
    for node, cap in zip(network.hubs["id"], network.hubs["capacity"].astype(float)):
        cap = 0.0 if node in closed_nodes(network) else cap
        arcs.append((f"{node}#in", node, cap, float(nodes.at[node, "received"]), "hub", node))
    for node, supply in zip(network.depots["id"], network.depots["supply"].astype(float)):
        net = float(nodes.at[node, "shipped"] - nodes.at[node, "received"])
        arcs.append(("#source", node, supply, max(net, 0.0), "depot", node))

    def full(cap, x):
        return math.isfinite(cap) and x >= cap - _TOL * max(1.0, cap)

    # R: nodes from which a short customer can still be reached in the residual network.
    into: dict[str, list[str]] = {}
    for tail, head, cap, x, _, _ in arcs:
        if not full(cap, x):
            into.setdefault(head, []).append(tail)  # forward room: tail -> head
        if x > _TOL:
            into.setdefault(tail, []).append(head)  # backward along flow: head -> tail
    reach = set(short_ids)
    queue = deque(short_ids)
    while queue:
        node = queue.popleft()
        for prev in into.get(node, []):
            if prev not in reach:
                reach.add(prev)
                queue.append(prev)
    rows = []
    for tail, head, cap, x, kind, item in arcs:
        if full(cap, x) and (x > _TOL or cap == 0):
            cut = head in reach and tail not in reach
            if x > _TOL or cut:
                rows.append((kind, item, cap, x, cut))
    frame = pd.DataFrame(rows, columns=SATURATED_COLUMNS)
    if short_ids and not frame["bottleneck"].any() and not with_decisions:
        frame["bottleneck"] = True
    return frame
