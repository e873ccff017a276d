"""What restores a plan for an infeasible network: the limits to raise (and by how much), and the design rules that
stand in the way.

Limits to raise
---------------
:func:`least_raises` solves one linear programme: the network as an LP (yes/no and trip decisions left out; closed
depots and hubs stay closed) where every finite limit -- a depot's supply, a hub's capacity, a lane's capacity --
may be exceeded by a *raise* :math:`e \\ge 0`, hard demand must be met in full and customers with a penalty may go
short at no cost; it minimises the total raise :math:`\\sum e`. Its answer names every limit that must give,
including limits in series (a depot, the lane after it and the hub after that all at 10 when 20 are needed: each
must rise by 10, not only the one nearest the customer), and raising each named limit by its amount gives a plan by
construction (the LP's flow is one). With whole-unit data the amounts are whole units (a network LP has integral
vertices). Solved with SciPy's HiGHS (``scipy.optimize.linprog``).

Design rules
------------
:func:`rule_relaxations` tries, on copies of the network, the network with each design rule family lifted in turn:
single sourcing cleared, the ``max_open_depots`` / ``max_open_hubs`` limits lifted, minimum volumes set to 0, whole
trips dropped. Each copy is solved with the yes/no decisions that remain; a copy with a plan shows the rule family
that stands in the way, named with the customers, lanes or counts the relaxed plan needs. Only run when no limit
needs raising: if the network's LP (which ignores every rule) has no plan, lifting a rule cannot give one.
"""

from __future__ import annotations

import copy
import math

import numpy as np
import pandas as pd

from lanesolve.model.formulation import closed_nodes, customer_penalties
from lanesolve.model.network import Network

#: Columns of the frame :func:`least_raises` returns.
RAISE_COLUMNS = ["kind", "item", "capacity", "raise_by"]
_TOL = 1e-7


def _lane_label(origin: str, destination: str, mode: str) -> str:
    return f"{origin} -> {destination}" + (f" ({mode})" if mode else "")


def least_raises(network: Network) -> pd.DataFrame | None:
    """The least total raise of depot supplies, hub capacities and lane capacities that gives the network's LP a
    plan (see the module docstring).

    Parameters
    ----------
    network : Network

    Returns
    -------
    DataFrame or None
        :data:`RAISE_COLUMNS`, one row per limit to raise (``raise_by`` > 0), in depot, hub, lane order; empty when
        the LP has a plan as it is; None when no raise helps (a customer no open route reaches).

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 10}], [{"id": "C", "demand": 20}],
    ...                    [{"origin": "D", "destination": "H", "cost_per_unit": 1, "capacity": 10},
    ...                     {"origin": "H", "destination": "C", "cost_per_unit": 1}], hubs=[{"id": "H", "capacity": 10}])
    >>> least_raises(net)[["kind", "item", "raise_by"]].values.tolist()
    [['depot', 'D', 10.0], ['hub', 'H', 10.0], ['lane', 'D -> H', 10.0]]
    """
    depots, customers, hubs, lanes = network.depots, network.customers, network.hubs, network.active_lanes
    closed = closed_nodes(network)
    n_lanes = len(lanes)
    shut = (lanes["origin"].isin(closed) | lanes["destination"].isin(closed)).to_numpy()
    capacity = lanes["capacity"].to_numpy(dtype=float)
    rows, cols, vals, b_ub, b_eq = [], [], [], [], []
    eq_rows, eq_cols, eq_vals = [], [], []
    n_cols = n_lanes
    raises: list[tuple[str, str, float, int]] = []  # (kind, item, limit, column)
    origin, destination = lanes["origin"].to_numpy(dtype=object), lanes["destination"].to_numpy(dtype=object)
    lane_pos = np.arange(n_lanes)

    def add_le(columns, coefficients, bound):
        r = len(b_ub)
        rows.extend([r] * len(columns))
        cols.extend(columns)
        vals.extend(coefficients)
        b_ub.append(bound)

    def add_eq(columns, coefficients, bound):
        r = len(b_eq)
        eq_rows.extend([r] * len(columns))
        eq_cols.extend(columns)
        eq_vals.extend(coefficients)
        b_eq.append(bound)

    for node, supply in zip(depots["id"], depots["supply"].astype(float)):
        out, into = lane_pos[origin == node].tolist(), lane_pos[destination == node].tolist()
        if node in closed or not out:
            continue
        raises.append(("depot", node, supply, n_cols))
        add_le(out + into + [n_cols], [1.0] * len(out) + [-1.0] * len(into) + [-1.0], supply)
        n_cols += 1
    penalty = customer_penalties(network)
    for node, demand, soft in zip(customers["id"], customers["demand"].astype(float), ~np.isnan(penalty)):
        out, into = lane_pos[origin == node].tolist(), lane_pos[destination == node].tolist()
        columns, coefficients = into + out, [1.0] * len(into) + [-1.0] * len(out)
        if soft:  # a customer with a penalty may go short: it needs no raise
            columns, coefficients = columns + [n_cols], coefficients + [1.0]
            raises.append(("short", node, demand, n_cols))
            n_cols += 1
        add_eq(columns, coefficients, demand)
    for node, cap in zip(hubs["id"], hubs["capacity"].astype(float)):
        out, into = lane_pos[origin == node].tolist(), lane_pos[destination == node].tolist()
        if not out and not into:
            continue
        add_eq(into + out, [1.0] * len(into) + [-1.0] * len(out), 0.0)
        if math.isfinite(cap) and into and node not in closed:
            raises.append(("hub", node, cap, n_cols))
            add_le(into + [n_cols], [1.0] * len(into) + [-1.0], cap)
            n_cols += 1
    bounds = [(0.0, 0.0 if s else None) for s in shut]
    for k in np.flatnonzero(~shut & np.isfinite(capacity)).tolist():
        lane = lanes.iloc[k]
        raises.append(("lane", _lane_label(lane["origin"], lane["destination"], lane["mode"]), capacity[k], n_cols))
        add_le([k, n_cols], [1.0, -1.0], capacity[k])
        n_cols += 1
    bounds += [(0.0, None)] * (n_cols - n_lanes)
    for kind, node, demand, column in raises:
        if kind == "short":
            bounds[column] = (0.0, demand)
    if n_cols == 0:  # no active lane and no limit at all: nothing to raise, and no LP to solve
        return None
    objective = np.zeros(n_cols)
    for kind, _, _, column in raises:
        if kind != "short":
            objective[column] = 1.0
    from scipy.sparse import coo_matrix  # late import, as linprog's below

    a_ub = coo_matrix((vals, (rows, cols)), shape=(len(b_ub), n_cols)).tocsr() if b_ub else None
    a_eq = coo_matrix((eq_vals, (eq_rows, eq_cols)), shape=(len(b_eq), n_cols)).tocsr() if b_eq else None
    from scipy.optimize import linprog  # late import: scipy.optimize (a tenth of a second) only when no plan exists

    answer = linprog(objective, A_ub=a_ub, b_ub=b_ub or None, A_eq=a_eq, b_eq=b_eq or None, bounds=bounds,
                     method="highs")
    if answer.status != 0:
        return None
    found = [(kind, item, limit, float(answer.x[column])) for kind, item, limit, column in raises
             if kind != "short" and answer.x[column] > _TOL * max(1.0, limit)]
    frame = pd.DataFrame(found, columns=RAISE_COLUMNS)
    frame["raise_by"] = frame["raise_by"].astype(float)
    return frame


def _relaxed(network: Network, family: str) -> Network:
    """A copy of ``network`` with one design rule family lifted."""
    relaxed = copy.deepcopy(network)
    if family == "single sourcing":
        relaxed.customers["single_source"] = False
        relaxed.settings.single_source = False
    elif family == "max_open_depots":
        relaxed.settings.max_open_depots = None
    elif family == "max_open_hubs":
        relaxed.settings.max_open_hubs = None
    elif family == "min_volume":
        relaxed.lanes["min_volume"] = 0.0
    elif family == "whole trips":
        relaxed.lanes["trip_capacity"] = math.nan
        relaxed.lanes["cost_per_trip"] = 0.0
    return relaxed


def rule_families(network: Network) -> list[str]:
    """The design rule families the network uses, in the order they are tried."""
    lanes = network.active_lanes
    found = []
    if network.customers["single_source"].any():
        found.append("single sourcing")
    if network.settings.max_open_depots is not None:
        found.append("max_open_depots")
    if network.settings.max_open_hubs is not None:
        found.append("max_open_hubs")
    if (lanes["min_volume"] > 0).any():
        found.append("min_volume")
    if lanes["trip_capacity"].notna().any():
        found.append("whole trips")
    return found


def rule_relaxations(network: Network, solve, time_limit: float | None = None,
                     solver: str | None = None) -> list[tuple[str, bool, str]]:
    """Which design rule families, each lifted alone, give a plan (see the module docstring).

    Parameters
    ----------
    network : Network
    solve : callable
        :func:`lanesolve.model.solve.solve` (passed in, so this module needs no solver of its own).
    time_limit, solver
        For each re-solve.

    Returns
    -------
    list of (str, bool, str)
        Per family: its name, whether lifting it gives a plan, and a sentence naming what the plan then needs.
    """
    units = network.settings.units or "units"
    out = []
    for family in rule_families(network):
        relaxed = _relaxed(network, family)
        result = solve(relaxed, time_limit=time_limit, solver=solver, sensitivity=False)
        if not result.status.has_plan:
            out.append((family, False, f"Lifting {family} alone does not give a plan."))
            continue
        out.append((family, True, _what_it_needs(network, family, result, units)))
    return out


def _what_it_needs(network: Network, family: str, result, units: str) -> str:
    """The sentence for a rule family whose lifting gives a plan, naming the customers, lanes or count."""
    flows = result.flows
    if family == "single sourcing":
        single = set(network.customers.loc[network.customers["single_source"], "id"])
        inbound = flows[flows["destination"].isin(single)].groupby("destination").size()
        names = sorted(inbound[inbound > 1].index.astype(str))
        return (f"Single sourcing stands in the way: {', '.join(names) or 'a single-sourced customer'} must be served "
                "over more than one inbound lane (set single_source to no for "
                f"{'them' if len(names) > 1 else 'it'}).")
    if family in ("max_open_depots", "max_open_hubs"):
        kind = "depot" if family == "max_open_depots" else "hub"
        used = int(result.open_nodes.loc[(result.open_nodes["kind"] == kind), "open"].astype(bool).sum()) \
            if len(result.open_nodes) else 0
        limit = getattr(network.settings, family)
        return (f"{family} stands in the way: a plan needs {used} {kind}s open but {family} is {limit:.6g} (raise "
                f"it to {used}).")
    lanes = network.active_lanes
    carried = dict(zip(zip(flows["origin"], flows["destination"], flows["mode"]), flows["flow"]))
    if family == "min_volume":
        names = [_lane_label(o, d, m) for o, d, m, v in zip(lanes["origin"], lanes["destination"], lanes["mode"],
                                                           lanes["min_volume"])
                 if 0 < carried.get((o, d, m), 0.0) < v - _TOL]
        return (f"Minimum volumes stand in the way: a plan needs {', '.join(names) or 'a lane'} to carry less than "
                f"its min_volume (lower it, or set it to 0).")
    names = [_lane_label(o, d, m) for o, d, m, r in zip(lanes["origin"], lanes["destination"], lanes["mode"],
                                                       lanes["trip_capacity"])
             if math.isfinite(r) and carried.get((o, d, m), 0.0) > 0]
    return (f"Whole trips stand in the way: a plan needs {', '.join(names) or 'a lane'} to run without whole trips "
            "(clear trip_capacity there).")
