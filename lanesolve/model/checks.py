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

    inbound_capacity = lanes.groupby("destination")["capacity"].sum().to_dict()
    reachable = _reachable_from_supply(network)
    for node, demand, row in zip(customers.loc[hard, "id"], customers.loc[hard, "demand"],
                                 customers.loc[hard, "row"]):
        where = f"Customers row {row}: customer '{node}'"
        if node not in inbound_capacity:
            reasons.append(f"{where} needs {plain_number(demand)} {units} but no active lane ends there (add a lane with "
                           f"destination '{node}', set active to yes on one, or give it an unmet_penalty).")
            continue  # nothing else can be said of a customer no lane reaches
        if inbound_capacity[node] < demand:
            reasons.append(f"{where} needs {plain_number(demand)} {units} but its active inbound lanes can carry only "
                           f"{plain_number(inbound_capacity[node])} {units} in total (raise their capacity, add a lane, or "
                           "give it an unmet_penalty).")
        if node not in reachable:
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
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import breadth_first_order

    closed = closed_nodes(network)
    blocked = set(network.hubs.loc[network.hubs["capacity"] <= 0, "id"]) | closed
    start = [d for d in network.depots.loc[network.depots["supply"] > 0, "id"].tolist() if d not in closed]
    if not start:
        return set()
    lanes = network.active_lanes
    # A blocked node is reached but passes nothing on: its outgoing lanes are left out of the search.
    lanes = lanes[(lanes["capacity"] > 0).to_numpy() & ~lanes["origin"].isin(blocked).to_numpy()]
    origin, destination = lanes["origin"].to_numpy(dtype=object), lanes["destination"].to_numpy(dtype=object)
    codes, ids = pd.factorize(np.concatenate([np.array(start, dtype=object), origin, destination]))
    n, m, k = len(ids), len(origin), len(start)
    # Node n is a virtual source joined to every depot with supply; the search runs in C (scipy.sparse.csgraph).
    tails = np.concatenate([np.full(k, n), codes[k:k + m]])
    heads = np.concatenate([codes[:k], codes[k + m:]])
    graph = csr_matrix((np.ones(len(tails)), (tails, heads)), shape=(n + 1, n + 1))
    reached = breadth_first_order(graph, n, directed=True, return_predecessors=False)
    return set(ids[reached[reached < n]].tolist())


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
