"""The bare-solver baseline: lanesolve's LP as one scipy.sparse matrix, solved by HiGHS through ``scipy.optimize.linprog``.

This is the floor the benchmark compares lanesolve against: no workbook, no modelling layer, just the matrix build
(timed separately) and the solve. It follows the formulation in the docstring of ``lanesolve/model.py`` for networks
without fixed charges:

- variables: flow ``x_l`` on each active lane (bounds ``0 <= x_l <= capacity``) and, for customers with an unmet
  penalty, the shortfall ``z_c`` (``0 <= z_c <= demand``);
- cost: ``cost_per_unit`` + the origin depot's ``handling_cost`` (per unit shipped out) + the destination hub's
  ``handling_cost`` (per unit through), and the penalty on ``z_c``;
- rows: depot net outflow <= supply; customer inflow - outflow + z = demand; hub inflow - outflow = 0; hub inflow <=
  capacity where finite.

Usage (on a cached network pickle written by generate.py)::

    python benchmarks/bare_highs.py benchmarks/cache/lanes-100k-s7.network.pkl
"""

from __future__ import annotations

import math
import pickle
import sys
import time
from dataclasses import dataclass

import numpy as np
import scipy
import scipy.sparse as sp
from scipy.optimize import linprog


@dataclass
class LinearProgram:
    """``min c x  s.t.  A_ub x <= b_ub,  A_eq x = b_eq,  lower <= x <= upper`` (SciPy's linprog form)."""

    c: np.ndarray
    a_ub: sp.csr_matrix
    b_ub: np.ndarray
    a_eq: sp.csr_matrix
    b_eq: np.ndarray
    bounds: np.ndarray  # shape (n, 2); np.inf for no upper limit

    @property
    def shape(self) -> tuple[int, int]:
        return self.a_ub.shape[0] + self.a_eq.shape[0], len(self.c)


def build_lp(network) -> LinearProgram:
    """Build the sparse LP of a :class:`lanesolve.model.network.Network` without fixed charges.

    Raises
    ------
    ValueError
        The network has fixed charges (the bare LP baseline is only defined for pure LPs) or a lane names an
        unknown node.
    """
    if network.has_fixed_charges:
        raise ValueError("the bare HiGHS baseline is an LP; this network has fixed charges (generate it without "
                         "--fixed-charges)")
    depots, customers, hubs = network.depots, network.customers, network.hubs
    lanes = network.active_lanes
    n_d, n_c, n_h = len(depots), len(customers), len(hubs)
    node_ids = np.concatenate([depots["id"].to_numpy(), customers["id"].to_numpy(), hubs["id"].to_numpy()])
    index = {node: i for i, node in enumerate(node_ids)}
    origin = lanes["origin"].map(index).to_numpy()
    dest = lanes["destination"].map(index).to_numpy()
    if np.isnan(origin.astype(float)).any() or np.isnan(dest.astype(float)).any():
        raise ValueError("a lane names a node that is not a depot, customer or hub")
    origin, dest = origin.astype(np.int64), dest.astype(np.int64)
    n_nodes, n_lanes = len(node_ids), len(lanes)

    # Node-lane incidence: +1 where the lane leaves the node, -1 where it enters (nodes in the order D, C, H).
    cols = np.arange(n_lanes)
    incidence = sp.csr_matrix(
        (np.concatenate([np.ones(n_lanes), -np.ones(n_lanes)]),
         (np.concatenate([origin, dest]), np.concatenate([cols, cols]))),
        shape=(n_nodes, n_lanes),
    )
    inflow = sp.csr_matrix((np.ones(n_lanes), (dest, cols)), shape=(n_nodes, n_lanes))

    penalty = customers["unmet_penalty"].to_numpy(dtype=float)
    if network.settings.unmet_penalty is not None:
        penalty = np.where(np.isnan(penalty), network.settings.unmet_penalty, penalty)
    soft = np.flatnonzero(~np.isnan(penalty))
    demand = customers["demand"].to_numpy(dtype=float)

    handling = np.zeros(n_nodes)
    handling[:n_d] = depots["handling_cost"].to_numpy(dtype=float)
    handling[n_d + n_c:] = hubs["handling_cost"].to_numpy(dtype=float)
    is_depot = np.zeros(n_nodes, dtype=bool)
    is_depot[:n_d] = True
    is_hub = np.zeros(n_nodes, dtype=bool)
    is_hub[n_d + n_c:] = True
    lane_cost = (lanes["cost_per_unit"].to_numpy(dtype=float)
                 + np.where(is_depot[origin], handling[origin], 0.0)
                 + np.where(is_hub[dest], handling[dest], 0.0))
    c = np.concatenate([lane_cost, penalty[soft]])

    unmet_columns = sp.csr_matrix((np.ones(len(soft)), (soft, np.arange(len(soft)))), shape=(n_c, len(soft)))
    depot_rows = sp.hstack([incidence[:n_d], sp.csr_matrix((n_d, len(soft)))])
    customer_rows = sp.hstack([-incidence[n_d:n_d + n_c], unmet_columns])
    hub_rows = sp.hstack([incidence[n_d + n_c:], sp.csr_matrix((n_h, len(soft)))])
    hub_capacity = hubs["capacity"].to_numpy(dtype=float)
    limited = np.flatnonzero(np.isfinite(hub_capacity))
    hub_cap_rows = sp.hstack([inflow[n_d + n_c + limited], sp.csr_matrix((len(limited), len(soft)))])

    a_ub = sp.vstack([depot_rows, hub_cap_rows]).tocsr()
    b_ub = np.concatenate([depots["supply"].to_numpy(dtype=float), hub_capacity[limited]])
    a_eq = sp.vstack([customer_rows, hub_rows]).tocsr()
    b_eq = np.concatenate([demand, np.zeros(n_h)])
    upper = np.concatenate([lanes["capacity"].to_numpy(dtype=float), demand[soft]])
    bounds = np.column_stack([np.zeros(len(c)), upper])
    return LinearProgram(c, a_ub, b_ub, a_eq, b_eq, bounds)


def solve_lp(lp: LinearProgram):
    """Solve with HiGHS (``linprog(method="highs")``, SciPy's defaults otherwise); return SciPy's result."""
    return linprog(lp.c, A_ub=lp.a_ub, b_ub=lp.b_ub, A_eq=lp.a_eq, b_eq=lp.b_eq, bounds=lp.bounds, method="highs")


def measure(network_pickle: str) -> dict:
    """Load a cached network, build and solve its LP; return timings, objective and status."""
    tick = time.perf_counter()
    with open(network_pickle, "rb") as fh:
        network = pickle.load(fh)
    load_s = time.perf_counter() - tick
    tick = time.perf_counter()
    lp = build_lp(network)
    build_s = time.perf_counter() - tick
    tick = time.perf_counter()
    res = solve_lp(lp)
    solve_s = time.perf_counter() - tick
    return {
        "load": load_s, "build": build_s, "solve": solve_s,
        "objective": float(res.fun) if res.status == 0 else math.nan,
        "status": int(res.status), "message": str(res.message), "rows": lp.shape[0], "columns": lp.shape[1],
        "solver": f"HiGHS via SciPy {scipy.__version__} linprog",
    }


if __name__ == "__main__":
    for path in sys.argv[1:]:
        print(path, measure(path))
