"""Cheap pre-solve checks: reasons no plan can exist, found before any model is built.

Every check here is *certain*: when it fires, the model is infeasible (it never guesses). Only hard demand counts
(customers without an unmet penalty, their own or the Settings default), since a penalty lets a customer go short.

1. Total supply short of total hard demand. Summing every node's balance row, what all customers keep
   (inflow - outflow) equals the depots' net outflow, at most the total supply; customers that must be served
   keep their full demand.
2. A customer with hard demand and no active inbound lane.
3. A customer whose hard demand exceeds the total capacity of its active inbound lanes (it keeps at most what
   comes in).
4. A customer with hard demand that no depot with supply can reach along active lanes of non-zero capacity (and
   through no hub of zero capacity, and no closed depot or hub).
5. Design structure (:func:`lanesolve.model.diagnose.structural_causes`): a customer with hard demand whose every
   active inbound lane starts at a closed node; more nodes marked open than max_open_depots / max_open_hubs.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 8}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 1}])
>>> presolve_checks(net)  # doctest: +NORMALIZE_WHITESPACE
['Total depot supply is 5 units but customers without an unmet penalty need 8 units: 3 units short (raise
  supply on the Depots sheet, or give customers an unmet_penalty to allow a shortfall).']
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from lanesolve.model.formulation import closed_nodes, customer_penalties
from lanesolve.model.ids import positions
from lanesolve.model.network import Network
from lanesolve.model.result import COST_COMPONENTS, Result, SolveStatus
from lanesolve.model.solve import node_balance


def plain_number(value: float) -> str:
    """A quantity as a planner writes it: 1200, 12.5 (no trailing zeros)."""
    return f"{value:,.6g}" if abs(value) >= 1e6 else f"{value:.6g}"


def presolve_checks(network: Network) -> list[str]:
    """Reasons, in plain sentences, why no plan can exist; empty when none is found.

    Parameters
    ----------
    network : Network
        A validated network.

    Returns
    -------
    list of str
        One sentence per finding, naming the ids, sheet rows and numbers, with a hint. An empty list does not
        prove a plan exists (the solver decides that); a non-empty one proves none does.
    """
    units = network.settings.units or "units"
    reasons: list[str] = []
    customers = network.customers
    lanes = network.active_lanes
    hard = np.isnan(customer_penalties(network)) & (customers["demand"].to_numpy(dtype=float) > 0)

    total_supply = float(network.depots["supply"].sum())
    hard_demand = float(customers.loc[hard, "demand"].sum())
    if total_supply < hard_demand:
        reasons.append(
            f"Total depot supply is {plain_number(total_supply)} {units} but customers without an unmet penalty need "
            f"{plain_number(hard_demand)} {units}: {plain_number(hard_demand - total_supply)} {units} short (raise supply on the "
            "Depots sheet, or give customers an unmet_penalty to allow a shortfall).")

    # Lane ends as positions among the node ids, once for both checks below (text compared once, in Arrow).
    ids, at_origin, at_destination = _lane_ends(network, lanes)
    capacity = lanes["capacity"].to_numpy(dtype=float)
    # pandas' grouped sum over integer keys: the same additions in the same order as over the ids themselves.
    summed = pd.Series(capacity).groupby(at_destination).sum()
    inbound = np.full(len(ids), math.nan)
    inbound[summed.index.to_numpy(dtype=np.int64)] = summed.to_numpy(dtype=float)
    reached = _reached(network, ids, lanes, at_origin, at_destination)
    at_customer = _positions(ids, customers["id"])
    node_ids = customers["id"].to_numpy(dtype=object)
    demands, rows = customers["demand"].to_numpy(dtype=float), customers["row"].to_numpy()
    no_lane = np.isnan(inbound[at_customer])
    with np.errstate(invalid="ignore"):
        short = inbound[at_customer] < demands
    named = np.flatnonzero(hard & (no_lane | short | ~reached[at_customer]))  # the few customers with a reason
    for k, node, demand, row, total in zip(named.tolist(), node_ids[named].tolist(), demands[named].tolist(),
                                           rows[named].tolist(), inbound[at_customer[named]].tolist()):
        where = f"Customers row {row}: customer '{node}'"
        if no_lane[k]:
            reasons.append(f"{where} needs {plain_number(demand)} {units} but no active lane ends there (add a lane with "
                           f"destination '{node}', set active to yes on one, or give it an unmet_penalty).")
            continue  # nothing else can be said of a customer no lane reaches
        if short[k]:
            reasons.append(f"{where} needs {plain_number(demand)} {units} but its active inbound lanes can carry only "
                           f"{plain_number(total)} {units} in total (raise their capacity, add a lane, or "
                           "give it an unmet_penalty).")
        if not reached[at_customer[k]]:
            reasons.append(f"{where} needs {plain_number(demand)} {units} but no depot with supply can reach it along "
                           "active lanes with capacity (check the lanes leading to it and the hubs on the way).")
    from lanesolve.model.diagnose import structural_causes  # late import: diagnose builds on the solver

    for cause in structural_causes(network)[0]:
        if cause not in reasons:
            reasons.append(cause)
    return reasons


def _reachable_from_supply(network: Network) -> set[str]:
    """Node ids reachable from a depot with supply > 0 along active lanes of non-zero capacity.

    A hub of zero capacity passes nothing on, so the search does not continue through it.
    """
    lanes = network.active_lanes
    ids, at_origin, at_destination = _lane_ends(network, lanes)
    return set(ids.to_numpy(dtype=object)[_reached(network, ids, lanes, at_origin, at_destination)].tolist())


def _lane_ends(network: Network, lanes: pd.DataFrame) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """(every node id once, each lane's origin and destination as positions among them): the depots', customers'
    and hubs' ids, then any id a lane names that none of them has."""
    ids = pd.concat([network.depots["id"], network.customers["id"], network.hubs["id"]], ignore_index=True)
    ids = pd.Series(ids.unique())
    at_origin, at_destination = _positions(ids, lanes["origin"]), _positions(ids, lanes["destination"])
    if (at_origin < 0).any() or (at_destination < 0).any():
        extra = pd.unique(np.concatenate([lanes["origin"].to_numpy(dtype=object)[at_origin < 0],
                                          lanes["destination"].to_numpy(dtype=object)[at_destination < 0]]))
        ids = pd.concat([ids.astype(object), pd.Series(extra, dtype=object)], ignore_index=True)
        at_origin, at_destination = _positions(ids, lanes["origin"]), _positions(ids, lanes["destination"])
    return ids, at_origin, at_destination


def _positions(ids: pd.Series, wanted) -> np.ndarray:
    """Position of each of ``wanted`` (a Series or a collection of ids) among ``ids`` (distinct; -1 where absent)."""
    return positions(ids, wanted if isinstance(wanted, pd.Series) else pd.Series(list(wanted), dtype=object))


#: Levels of the search done a level at a time in NumPy before the rest is handed to SciPy's breadth-first order
#: (a long chain of lanes would otherwise cost one pass over the lanes per lane).
LEVELS = 64


def _reached(network: Network, ids: pd.Series, lanes: pd.DataFrame, at_origin: np.ndarray,
             at_destination: np.ndarray) -> np.ndarray:
    """Per node of ``ids``, whether a depot with supply > 0 reaches it along active lanes of non-zero capacity (the
    depot itself included); a closed node or a hub of zero capacity is reached but passes nothing on.

    The search goes a level at a time: each pass takes the lanes out of the nodes reached in the pass before (a
    tiered network is done in a few passes, a meshed one in a few dozen); after :data:`LEVELS` passes what is left
    goes to ``scipy.sparse.csgraph.breadth_first_order`` from the nodes reached so far."""
    depots, hubs = network.depots, network.hubs

    def marked(wanted) -> np.ndarray:
        at = _positions(ids, wanted)
        mask = np.zeros(len(ids), dtype=bool)
        mask[at[at >= 0]] = True
        return mask

    closed = marked(closed_nodes(network))
    blocked = closed | marked(hubs.loc[(hubs["capacity"] <= 0).to_numpy(), "id"])
    start = np.flatnonzero(marked(depots.loc[(depots["supply"] > 0).to_numpy(), "id"]) & ~closed)
    reached = np.zeros(len(ids), dtype=bool)
    reached[start] = True
    # A blocked node is reached but passes nothing on: its outgoing lanes are left out of the search.
    keep = (lanes["capacity"].to_numpy(dtype=float) > 0) & ~blocked[at_origin]
    tail, head = at_origin[keep], at_destination[keep]
    fresh = reached.copy()
    for _ in range(LEVELS):
        nxt = head[fresh[tail]]
        nxt = nxt[~reached[nxt]]
        if not len(nxt):
            return reached
        fresh = np.zeros(len(ids), dtype=bool)
        fresh[nxt] = True
        reached |= fresh
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import breadth_first_order

    # Node n is a virtual source joined to every node reached so far; the rest of the search runs in C.
    n = len(ids)
    so_far = np.flatnonzero(reached)
    tails = np.concatenate([np.full(len(so_far), n), tail])
    heads = np.concatenate([so_far, head])
    graph = csr_matrix((np.ones(len(tails)), (tails, heads)), shape=(n + 1, n + 1))
    order = breadth_first_order(graph, n, directed=True, return_predecessors=False)
    reached[order[order < n]] = True
    return reached


def no_plan_result(network: Network, reasons: list[str]) -> Result:
    """The :class:`~lanesolve.model.result.Result` for a network the pre-solve checks rule out.

    Parameters
    ----------
    network : Network
    reasons : list of str
        What :func:`presolve_checks` found.

    Returns
    -------
    Result
        Status ``infeasible``, ``messages`` = ``reasons``, total and breakdown NaN (there is no plan), no flows, and
        the node frame with every node at zero flow (unmet NaN, as no plan says what would go short).
    """
    from lanesolve.model.diagnose import Diagnosis, structural_causes

    return Result(
        diagnosis=Diagnosis(structural=list(reasons), notes=structural_causes(network)[1]),
        status=SolveStatus.INFEASIBLE,
        total_cost=math.nan,
        cost_breakdown=dict.fromkeys(COST_COMPONENTS, math.nan),
        nodes=node_balance(network, {}, {}, None),
        solver="none (pre-solve checks)",
        messages=list(reasons),
    )
