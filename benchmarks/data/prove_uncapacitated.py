"""Prove the optimum of an uncapacitated OR-Library instance (capa:u, capb:u, capc:u; a script, not a test).

Every warehouse gets the total demand as its capacity, so no capacity binds and the problem is the uncapacitated
facility location problem: each customer is served whole from its cheapest open warehouse. Three steps, each of
them a textbook method, none of them lanesolve's code:

1. **A plan** by local search from "none open" and from "all open": open, close or swap one warehouse while that
   lowers the cost (cost of an open set = its fixed costs + each customer's cheapest open cost).
2. **A lower bound** by Lagrangian relaxation of "each customer served once" with multipliers ``v_j``
   (subgradient steps): ``L(v) = Σ_j v_j + Σ_i min(0, f_i + Σ_j min(0, c_ij − v_j))``. Every ``v`` gives a valid
   bound; its best equals the LP bound of the strong formulation. Where bound = plan, the plan is optimal.
3. **Otherwise**, reduced-cost fixing (warehouse i closed if ``L + rc_i`` exceeds the plan's cost, open if
   ``L − rc_i`` does), then HiGHS on the strong formulation (``x_ij ≤ y_i``) of the warehouses left, to a zero gap.

Prints per instance: the plan's cost, the bound, how many warehouses were fixed, HiGHS's status, objective and
dual bound, the open set, and the published value from ``cap_optima.json`` with the relative difference.

Usage::

    ORLIB_DATA_DIR=/work/orlib-data python benchmarks/data/prove_uncapacitated.py capa capb capc
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import highspy
import numpy as np
from scipy.sparse import coo_matrix, vstack

sys.path.insert(0, str(Path(__file__).resolve().parent))
import orlib_cap  # noqa: E402


def local_search(cost: np.ndarray, fixed: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, float]:
    """Best-improvement open / close / swap from ``start`` (a boolean open mask) until no move lowers the cost."""
    n, m = cost.shape
    is_open = start.copy()
    while True:
        where = np.flatnonzero(is_open)
        sub = cost[:, where]
        order = np.argsort(sub, axis=1)
        best = sub[np.arange(n), order[:, 0]]
        second = sub[np.arange(n), order[:, 1]] if len(where) > 1 else np.full(n, np.inf)
        owner = where[order[:, 0]]
        current = best.sum() + fixed[where].sum()
        gain_open = np.maximum(0, best[:, None] - cost).sum(axis=0) - fixed
        gain_open[is_open] = -np.inf
        gain_close = np.full(m, -np.inf)
        for i in where:
            gain_close[i] = fixed[i] - (second[owner == i] - best[owner == i]).sum()
        swap = (0.0, -1, -1)
        for a in np.flatnonzero(~is_open):
            for b in where:
                after = np.minimum(np.where(owner == b, second, best), cost[:, a]).sum() + fixed[where].sum() \
                    - fixed[b] + fixed[a]
                if current - after > swap[0] + 1e-9:
                    swap = (current - after, a, b)
        gain = max(gain_open.max(), gain_close.max(), swap[0])
        if gain <= 1e-9:
            return is_open, float(current)
        if gain == gain_open.max():
            is_open[np.argmax(gain_open)] = True
        elif gain == gain_close.max():
            is_open[np.argmax(gain_close)] = False
        else:
            is_open[swap[1]], is_open[swap[2]] = True, False


def lagrangian_bound(cost: np.ndarray, fixed: np.ndarray, upper: float) -> tuple[float, np.ndarray]:
    """Best ``L(v)`` found by subgradient steps (Polyak step towards ``upper``, halved after 30 steps without
    progress) and the reduced fixed cost ``rc_i`` of each warehouse at that ``v``."""
    v = np.sort(cost, axis=1)[:, 1].copy()
    best, best_v, step, stall = -np.inf, v.copy(), 2.0, 0
    for _ in range(5000):
        rc = fixed + np.minimum(0, cost - v[:, None]).sum(axis=0)
        value = v.sum() + np.minimum(rc, 0).sum()
        if value > best + 1e-9:
            best, best_v, stall = value, v.copy(), 0
        else:
            stall += 1
            if stall >= 30:
                step, stall = step / 2, 0
        if step < 1e-10:
            break
        served = ((cost < v[:, None]) & (rc < 0)[None, :]).sum(axis=1)
        direction = 1 - served
        norm = float(direction @ direction)
        if norm == 0:
            break
        v = v + step * (upper - value) / norm * direction
    rc = fixed + np.minimum(0, cost - best_v[:, None]).sum(axis=0)
    return float(best_v.sum() + np.minimum(rc, 0).sum()), rc


def highs_exact(cost: np.ndarray, fixed: np.ndarray, forced_open: np.ndarray, time_limit: float) -> tuple:
    """Strong formulation on the given warehouses (Σ_i x_ij = 1, x_ij ≤ y_i), HiGHS at mip_rel_gap 0."""
    n, m = cost.shape
    nx = n * m
    jj, ii = np.divmod(np.arange(nx), m)
    assign = coo_matrix((np.ones(nx), (jj, np.arange(nx))), shape=(n, nx + m))
    link = coo_matrix((np.concatenate([np.ones(nx), -np.ones(nx)]),
                       (np.concatenate([np.arange(nx), np.arange(nx)]), np.concatenate([np.arange(nx), nx + ii]))),
                      shape=(nx, nx + m))
    a = vstack([assign, link]).tocsr()
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = nx + m, a.shape[0]
    lp.col_cost_ = np.concatenate([cost.ravel(), fixed])
    lp.col_lower_ = np.concatenate([np.zeros(nx), forced_open.astype(float)])
    lp.col_upper_ = np.ones(nx + m)
    lp.row_lower_ = np.concatenate([np.ones(n), np.full(nx, -highspy.kHighsInf)])
    lp.row_upper_ = np.concatenate([np.ones(n), np.zeros(nx)])
    lp.a_matrix_.format_ = highspy.MatrixFormat.kRowwise
    lp.a_matrix_.start_, lp.a_matrix_.index_, lp.a_matrix_.value_ = a.indptr, a.indices, a.data
    lp.integrality_ = [highspy.HighsVarType.kContinuous] * nx + [highspy.HighsVarType.kInteger] * m
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("time_limit", time_limit)
    h.setOptionValue("mip_rel_gap", 0.0)
    h.passModel(lp)
    h.run()
    info = h.getInfo()
    status = h.modelStatusToString(h.getModelStatus())
    y = np.asarray(h.getSolution().col_value)[nx:] > 0.5 if status == "Optimal" else None
    return status, info.objective_function_value, info.mip_dual_bound, y


def prove(name: str, time_limit: float = 1800.0) -> None:
    start = time.perf_counter()
    instance = orlib_cap.read_cap(orlib_cap.instance_path(name), "u")
    cost = np.asarray(instance["cost"], dtype=float)  # n × m
    fixed = np.asarray(instance["fixed_cost"], dtype=float)
    m = len(fixed)
    plans = [local_search(cost, fixed, np.zeros(m, bool) | (np.arange(m) == np.argmin(fixed + cost.sum(0)))),
             local_search(cost, fixed, np.ones(m, bool))]
    is_open, upper = min(plans, key=lambda p: p[1])
    lower, rc = lagrangian_bound(cost, fixed, upper)
    closed = (rc >= 0) & (lower + rc > upper + 1e-6)
    forced = (rc < 0) & (lower - rc > upper + 1e-6)
    print(f"{instance['name']}: plan {upper:,.5f} ({is_open.sum()} open), Lagrangian bound {lower:,.5f} "
          f"(gap {100 * (upper - lower) / upper:.5f} %); fixed closed {closed.sum()}, open {forced.sum()}")
    optimum, bound, proof = upper, lower, "bound = plan"
    if upper - lower > 1e-6 * abs(upper):
        keep = np.flatnonzero(~closed)
        status, optimum, bound, y = highs_exact(cost[:, keep], fixed[keep], forced[keep], time_limit)
        proof = f"HiGHS on {len(keep)} warehouses: {status}, dual bound {bound:,.5f}"
        if y is not None:
            is_open = np.zeros(m, bool)
            is_open[keep[y]] = True
            optimum = float(cost[:, is_open].min(axis=1).sum() + fixed[is_open].sum())  # recomputed from the set
    published = orlib_cap.load_optima()["cap"].get(instance["name"])
    rel = "-" if published is None else f"{abs(optimum - published) / published:.1e}"
    print(f"  optimum {optimum:,.5f} ({proof}); open {(np.flatnonzero(is_open) + 1).tolist()}; "
          f"published {published}; relative difference {rel}; {time.perf_counter() - start:.1f} s")


if __name__ == "__main__":
    for spec in sys.argv[1:] or ["capa", "capb", "capc"]:
        prove(spec.split(":")[0])
