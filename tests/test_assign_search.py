"""The assignment search for single-source facility plans (lanesolve.model.assign_search): which models it takes,
and its plans against the proven optimum.

References: SciPy's ``milp`` (HiGHS) on the textbook single-source formulation written below from the instance's
own arrays (not from lanesolve's model); every plan's cost and loads are recomputed here from those arrays too.
"""

from __future__ import annotations

import itertools
import time

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from lanesolve.model import assign_search, lagrangian
from lanesolve.model import solve as solve_module
from lanesolve.model.arrays import Answer
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from tests.test_engines import assert_design_plan_keeps_the_contract

TOL = 1e-6


def instance(seed: int, depots: int, customers: int, slack: float = 1.5) -> dict:
    """A seeded invented single-source instance: points in a 100 x 100 square, cost per unit the distance (two
    decimals), whole demands, total supply ``slack`` times the demand (tight: single sourcing then binds)."""
    rng = np.random.default_rng(seed)
    depot_at, customer_at = rng.uniform(0, 100, (depots, 2)), rng.uniform(0, 100, (customers, 2))
    rate = np.round(np.linalg.norm(depot_at[:, None] - customer_at[None], axis=2) / 10 + 1.0, 2)
    demand = rng.integers(5, 40, customers).astype(float)
    supply = np.round(rng.uniform(0.7, 1.3, depots) * slack * demand.sum() / depots)
    fixed = np.round(rng.uniform(0.5, 1.5, depots) * 30.0 * demand.sum() / depots)
    return {"rate": rate, "demand": demand, "supply": supply, "fixed": fixed}


def network(inst: dict):
    m, n = inst["rate"].shape
    return make_network(
        [{"id": f"D{i}", "supply": float(inst["supply"][i]), "fixed_cost": float(inst["fixed"][i]),
          "status": "decide"} for i in range(m)],
        [{"id": f"C{j}", "demand": float(inst["demand"][j]), "single_source": True} for j in range(n)],
        [{"origin": f"D{i}", "destination": f"C{j}", "cost_per_unit": float(inst["rate"][i, j])}
         for i, j in itertools.product(range(m), range(n))])


def milp_optimum(inst: dict) -> float:
    """The proven optimum by SciPy milp on the textbook single-source formulation: x_ij = 1 when depot i serves
    customer j, y_i open; sum_i x_ij = 1, sum_j q_j x_ij <= s_i y_i, x_ij <= y_i."""
    rate, q, s, f = inst["rate"], inst["demand"], inst["supply"], inst["fixed"]
    m, n = rate.shape
    nx = m * n
    ii, jj = np.divmod(np.arange(nx), n)
    rows = np.concatenate([jj, n + ii, n + np.arange(m), n + m + np.arange(nx), n + m + np.arange(nx)])
    cols = np.concatenate([np.arange(nx), np.arange(nx), nx + np.arange(m), np.arange(nx), nx + ii])
    vals = np.concatenate([np.ones(nx), q[jj], -s, np.ones(nx), -np.ones(nx)])
    matrix = coo_matrix((vals, (rows, cols)), shape=(n + m + nx, nx + m)).tocsr()
    lower = np.concatenate([np.ones(n), np.full(m + nx, -np.inf)])
    upper = np.concatenate([np.ones(n), np.zeros(m + nx)])
    res = milp(np.concatenate([(rate * q[None, :]).ravel(), f]), constraints=LinearConstraint(matrix, lower, upper),
               integrality=np.ones(nx + m), bounds=Bounds(0, 1), options={"mip_rel_gap": 0.0})
    assert res.status == 0
    return float(res.fun)


def assignment_cost(inst: dict, depot_of: np.ndarray) -> float:
    """Cost of an assignment from the instance's arrays: rate times demand on each customer's lane, plus the fixed
    charge of every depot that serves someone; asserts it respects the supplies."""
    q = inst["demand"]
    load = np.bincount(depot_of, q, minlength=len(inst["supply"]))
    assert (load <= inst["supply"] + TOL).all()
    used = load > 0
    return float((inst["rate"][depot_of, np.arange(len(q))] * q).sum() + inst["fixed"][used].sum())


def greedy_start(inst: dict) -> np.ndarray:
    """A feasible, deliberately poor start: every customer, largest first, to the depot with the most room left."""
    room = inst["supply"].copy()
    depot_of = np.zeros(len(inst["demand"]), dtype=np.int64)
    for j in np.argsort(-inst["demand"], kind="stable"):
        i = int(np.argmax(room))
        assert room[i] >= inst["demand"][j]  # the seeds below leave room
        depot_of[j], room[i] = i, room[i] - inst["demand"][j]
    return depot_of


def model_values(model, inst: dict, depot_of: np.ndarray) -> np.ndarray:
    """The model's column values of an assignment: each customer's demand on its lane, that lane's yes/no, and
    every depot serving someone open (lanes found by their place in the network's lane list)."""
    m, n = inst["rate"].shape
    values = np.zeros(model.n_columns)
    lane = depot_of * n + np.arange(n)  # the lanes were listed depot by depot
    flow_of = dict(zip(model.lane_index.tolist(), range(len(model.lane_index))))
    use_of = dict(zip(model.ids("use_").tolist(), range(model.columns("use_").start, model.columns("use_").stop)))
    for j, index in enumerate(lane.tolist()):
        values[flow_of[index]] = inst["demand"][j]
        values[use_of[index]] = 1.0
    opened = dict(zip(model.ids("open_depot_").tolist(), range(model.columns("open_depot_").start,
                                                              model.columns("open_depot_").stop)))
    for i in np.unique(depot_of).tolist():
        values[opened[i]] = 1.0
    return values


def read_assignment(model, inst: dict, values: np.ndarray) -> np.ndarray:
    """Which depot serves each customer in the model's column values; asserts one whole lane per customer."""
    m, n = inst["rate"].shape
    flows = np.zeros(m * n)
    flows[model.lane_index] = values[:len(model.lane_index)]
    flows = flows.reshape(m, n)
    assert ((flows > TOL).sum(axis=0) == 1).all()
    depot_of = np.argmax(flows, axis=0)
    assert flows[depot_of, np.arange(n)] == pytest.approx(inst["demand"])
    return depot_of


def search_from_greedy(inst: dict, seconds: float):
    """The model of ``inst``, the cost of the greedy start (from the instance's arrays) and what the search makes
    of that start in at most ``seconds``."""
    model = build_sparse_model(network(inst))
    start = greedy_start(inst)
    better = assign_search.improve(model, model_values(model, inst, start), time.monotonic() + seconds)
    return model, assignment_cost(inst, start), better


def test_recognise_takes_the_single_source_model_only_when_asked():
    inst = instance(1, 4, 10)
    model = build_sparse_model(network(inst))
    assert lagrangian.recognise(model) is None  # the Lagrangian method's model has split deliveries
    problem = lagrangian.recognise(model, single_source=True)
    assert problem is not None and problem.use_column is not None
    assert problem.supply == pytest.approx(inst["supply"])  # the instance's own supplies
    assert problem.fixed == pytest.approx(inst["fixed"])


def test_split_deliveries_are_not_searched():
    inst = instance(2, 4, 10)
    net = make_network(
        [{"id": f"D{i}", "supply": float(inst["supply"][i]), "fixed_cost": float(inst["fixed"][i]),
          "status": "decide"} for i in range(4)],
        [{"id": f"C{j}", "demand": float(inst["demand"][j])} for j in range(10)],
        [{"origin": f"D{i}", "destination": f"C{j}", "cost_per_unit": float(inst["rate"][i, j])}
         for i, j in itertools.product(range(4), range(10))])
    model = build_sparse_model(net)
    assert lagrangian.recognise(model, single_source=True) is None
    assert assign_search.improve(model, np.zeros(model.n_columns), time.monotonic() + 5) is None


@pytest.mark.parametrize("seed", range(4))
def test_small_instances_reach_the_milp_optimum_from_a_poor_start(seed):
    # 6 depots: a neighbourhood of 8 depots frees all of them, so the search ends at a proven optimum by itself.
    inst = instance(10 + seed, 6, 18)
    model, start_cost, better = search_from_greedy(inst, 60)
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS), proven optimum of the textbook formulation
    assert optimum < start_cost - TOL  # the start is poor, so the search has something to find
    assert better is not None
    cost = assignment_cost(inst, read_assignment(model, inst, better))  # recomputed from the instance's arrays
    assert cost == pytest.approx(optimum, abs=TOL)
    assert float(model.cost @ better) == pytest.approx(cost, abs=TOL)


@pytest.mark.parametrize("seed", range(3))
def test_local_moves_alone_never_worsen_the_start_nor_pass_the_optimum(monkeypatch, seed):
    # Without the neighbourhood MIPs only the shift, swap, close and open moves run.
    monkeypatch.setattr(assign_search, "_rebuild", lambda *args: False)
    inst = instance(20 + seed, 8, 30)
    model, start_cost, better = search_from_greedy(inst, 30)
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS)
    cost = start_cost if better is None else assignment_cost(inst, read_assignment(model, inst, better))
    assert optimum - TOL <= cost <= start_cost + TOL


@pytest.mark.parametrize("seed", range(2))
def test_larger_instances_end_between_the_optimum_and_the_start(seed):
    # 11 depots: neighbourhoods free 8 of them, so the search is a heuristic here; it stops on its own once every
    # open depot has centred a neighbourhood of every size in vain, or at the deadline (5 s here).
    inst = instance(30 + seed, 11, 30)
    model, start_cost, better = search_from_greedy(inst, 5)
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS)
    assert better is not None
    cost = assignment_cost(inst, read_assignment(model, inst, better))
    assert optimum - TOL <= cost < start_cost - TOL


def test_auto_searches_a_plan_the_engine_left_unproven(monkeypatch):
    # The engine is replaced by one that stops "on its limit" with the poor start as its plan, so the run takes
    # the path of a stopped HiGHS without a timed run.
    inst = instance(12, 6, 18)
    net = network(inst)
    model = build_sparse_model(net)
    start = greedy_start(inst)

    seen = {}

    def stopped(model, solver, time_limit, gap, msg, deadline=None, start=None):
        seen["engine limit"] = time_limit
        return Answer(SolveStatus.FEASIBLE, model_values(model, inst, start_plan), np.zeros(model.n_rows),
                      np.zeros(model.n_columns), bound=0.0, solver="stopped engine")

    real_improve = assign_search.improve

    def improve(model, values, end, *args, **kwargs):
        seen["search end"] = end
        return real_improve(model, values, end, *args, **kwargs)

    start_plan = start
    monkeypatch.setattr(solve_module, "solve_model", stopped)
    monkeypatch.setattr(assign_search, "improve", improve)
    began = time.monotonic()
    result = solve_module.solve(net, time_limit=30)
    # The engine leaves the search its share, and the search ends inside the limit (the promise of the README's
    # *time limit is a promise*), not in the seconds a construction may take past it (3 s here). The limit counts from
    # solve's first lines, microseconds after `began`: half a second covers that and fails the 3 s past it.
    assert seen["engine limit"] <= (1 - solve_module.ASSIGN_SHARE) * 30
    assert seen["search end"] <= began + 30 + 0.5
    assert "assignment search" in result.solver
    assert result.status is SolveStatus.FEASIBLE
    assert_design_plan_keeps_the_contract(net, result)  # recomputes the cost from the network's frames
    assert result.total_cost == pytest.approx(milp_optimum(inst), abs=TOL)  # source: SciPy milp (HiGHS)
    assert result.total_cost < assignment_cost(inst, start) - TOL
