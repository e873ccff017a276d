"""Capacitated facility location by Lagrangian relaxation (lanesolve.model.lagrangian and depot_search): which models
it takes, its covering knapsack, and its plans and bounds against the proven optimum.

References: SciPy's ``milp`` (HiGHS) on the textbook formulation of capacitated facility location written below from
the instance's own arrays (not from lanesolve's model); enumeration of every subset for the knapsack.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from lanesolve.model import lagrangian
from lanesolve.model import solve as solve_module
from lanesolve.model.depot_search import DepotSearch
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve
from tests.test_engines import assert_design_plan_keeps_the_contract

TOL = 1e-6


def random_cflp(seed: int, depots: int = 8, customers: int = 20, *, penalty: float | None = None,
                lane_capacity: bool = False, forced_open: int = 0, demand_step: float = 1.0) -> dict:
    """A seeded invented instance: depots and customers in a 100 x 100 square, cost per unit the distance (two
    decimals), fixed charges of the order of what a depot saves, total supply about twice the demand."""
    rng = np.random.default_rng(seed)
    depot_at, customer_at = rng.uniform(0, 100, (depots, 2)), rng.uniform(0, 100, (customers, 2))
    cost = np.round(np.linalg.norm(depot_at[:, None] - customer_at[None], axis=2) + 1.0, 2)
    demand = rng.integers(5, 60, customers) * demand_step
    supply = np.round(rng.uniform(0.6, 1.4, depots) * 2.0 * demand.sum() / depots)
    fixed = np.round(rng.uniform(0.5, 1.5, depots) * 20.0 * demand.sum() / depots)
    capacity = np.where(rng.random((depots, customers)) < 0.3, np.round(demand * 0.6), np.inf) if lane_capacity \
        else np.full((depots, customers), np.inf)
    status = ["open" if i < forced_open else "decide" for i in range(depots)]
    return {"supply": supply, "fixed": fixed, "demand": demand, "cost": cost, "capacity": capacity,
            "penalty": penalty, "status": status}


def records(inst: dict) -> tuple[list, list, list]:
    """Depot, customer and lane records of ``inst`` for ``make_network``."""
    depots = [{"id": f"D{i}", "supply": float(s), "fixed_cost": float(f), "status": st}
              for i, (s, f, st) in enumerate(zip(inst["supply"], inst["fixed"], inst["status"]))]
    customers = [{"id": f"C{j}", "demand": float(q)} for j, q in enumerate(inst["demand"])]
    if inst["penalty"] is not None:
        for customer in customers:
            customer["unmet_penalty"] = inst["penalty"]
    lanes = []
    for i, j in itertools.product(range(len(depots)), range(len(customers))):
        lane = {"origin": f"D{i}", "destination": f"C{j}", "cost_per_unit": float(inst["cost"][i, j])}
        if math.isfinite(inst["capacity"][i, j]):
            lane["capacity"] = float(inst["capacity"][i, j])
        lanes.append(lane)
    return depots, customers, lanes


def to_network(inst: dict, settings: Settings | None = None):
    return make_network(*records(inst), settings=settings)


def milp_optimum(inst: dict) -> float | None:
    """The proven optimum by SciPy milp on the textbook formulation: x_ij units from i to j, z_j units short,
    y_i depot open; sum_i x_ij + z_j = q_j, sum_j x_ij <= s_i y_i, x_ij <= min(u_ij, q_j) y_i. None: infeasible."""
    cost, demand, supply = inst["cost"], inst["demand"], inst["supply"]
    m, n = cost.shape
    soft = inst["penalty"] is not None
    nx = m * n
    nz = n if soft else 0
    ii, jj = np.divmod(np.arange(nx), n)
    y = nx + nz + np.arange(m)
    forced = np.array([s == "open" for s in inst["status"]])
    upper_x = np.minimum(inst["capacity"].ravel(), demand[jj])
    rows, cols, vals, lo, hi = [], [], [], [], []

    def add(row_ids, col_ids, values):
        rows.append(np.asarray(row_ids)), cols.append(np.asarray(col_ids)), vals.append(np.asarray(values, float))

    add(jj, np.arange(nx), np.ones(nx))  # balance rows 0..n-1
    if soft:
        add(np.arange(n), nx + np.arange(n), np.ones(n))
    lo += list(demand)
    hi += list(demand)
    add(n + ii, np.arange(nx), np.ones(nx))  # supply rows n..n+m-1
    add(n + np.arange(m), y, -supply)
    lo += [-np.inf] * m
    hi += [0.0] * m
    add(n + m + np.arange(nx), np.arange(nx), np.ones(nx))  # linking rows
    add(n + m + np.arange(nx), y[ii], -upper_x)
    lo += [-np.inf] * nx
    hi += [0.0] * nx
    size = nx + nz + m
    matrix = coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                        shape=(n + m + nx, size)).tocsr()
    objective = np.concatenate([cost.ravel(), np.full(nz, inst["penalty"] or 0.0),
                                np.where(forced, 0.0, inst["fixed"])])
    lower = np.zeros(size)
    lower[y[forced]] = 1.0
    upper = np.concatenate([upper_x, demand if soft else [], np.ones(m)])
    res = milp(objective, constraints=LinearConstraint(matrix, lo, hi),
               integrality=np.r_[np.zeros(nx + nz), np.ones(m)], bounds=Bounds(lower, upper),
               options={"mip_rel_gap": 0.0})
    if res.status != 0:
        return None
    return float(res.fun + inst["fixed"][forced].sum())


def lagrangian_solve(monkeypatch, net, time_limit: float = 60.0):
    """``solve`` under ``auto`` with the size threshold lowered, so that a small model takes the Lagrangian path."""
    monkeypatch.setattr(solve_module, "LARGE_MIP", 0)
    return solve(net, time_limit=time_limit)


# --- the covering knapsack --------------------------------------------------------------------------------------

@pytest.mark.parametrize("seed", range(40))
def test_cover_knapsack_matches_enumeration_of_every_subset(seed):
    rng = np.random.default_rng(seed)
    count = int(rng.integers(1, 11))
    value = rng.uniform(0, 100, count)
    weight = rng.integers(1, 6, count) * rng.choice([1.0, 2.5])  # repeated sizes exercise the grouped stages
    need = float(rng.uniform(-5, 1.1 * weight.sum()))
    best = min((value[list(s)].sum() for r in range(count + 1) for s in itertools.combinations(range(count), r)
                if weight[list(s)].sum() >= need), default=math.inf)  # source: enumeration of every subset
    cost, chosen, exact = lagrangian.cover_knapsack(value, weight, need)
    assert exact
    if math.isinf(best):
        assert math.isinf(cost)
        return
    assert cost == pytest.approx(best, abs=1e-9)
    assert value[chosen].sum() == pytest.approx(best, abs=1e-9) and weight[chosen].sum() >= need
    bound, cover, exact = lagrangian.cover_knapsack(value, weight, need, max_states=0)  # the LP fallback
    if need > 0:
        assert not exact and bound <= best + 1e-9 and weight[cover].sum() >= need


# --- which models ------------------------------------------------------------------------------------------------

def test_recognise_takes_facility_location_with_split_deliveries():
    inst = random_cflp(1, penalty=500.0, lane_capacity=True, forced_open=2)
    problem = lagrangian.recognise(build_sparse_model(to_network(inst)))
    assert problem is not None
    assert problem.n_depots == 8 and len(problem.demand) == 20
    assert (problem.open_column[:2] == -1).all() and (problem.open_column[2:] >= 0).all()
    assert np.isfinite(problem.penalty).all()
    # The supplies and fixed charges are the instance's own (its arrays, not lanesolve's model), though a depot to
    # decide states its supply only in its open_out_depot_ row.
    assert problem.supply == pytest.approx(inst["supply"]) and problem.fixed[2:] == pytest.approx(inst["fixed"][2:])


@pytest.mark.parametrize("change", ["single_source", "hub", "lane_fixed_cost", "max_open", "min_volume",
                                    "customer_to_customer", "nothing_to_decide"])
def test_recognise_declines_models_with_other_decisions_or_paths(change):
    depots, customers, lanes = records(random_cflp(2, depots=3, customers=4))
    hubs, settings = [], Settings()
    if change == "single_source":
        customers[0]["single_source"] = True
    elif change == "hub":
        hubs = [{"id": "H", "capacity": 100.0}]
        lanes += [{"origin": "D0", "destination": "H", "cost_per_unit": 1.0},
                  {"origin": "H", "destination": "C0", "cost_per_unit": 1.0}]
    elif change == "lane_fixed_cost":
        lanes[0]["fixed_cost"] = 10.0
    elif change == "max_open":
        settings = Settings(max_open_depots=2)
    elif change == "min_volume":
        lanes[0]["min_volume"] = 3.0
    elif change == "customer_to_customer":
        lanes.append({"origin": "C0", "destination": "C1", "cost_per_unit": 1.0})
    elif change == "nothing_to_decide":
        for depot in depots:
            depot["status"] = "open"
    changed = make_network(depots, customers, lanes, hubs, settings=settings)
    assert lagrangian.recognise(build_sparse_model(changed)) is None


# --- plans and bounds against the optimum -------------------------------------------------------------------------

@pytest.mark.parametrize("variant", ["plain", "penalty", "lane_capacity", "forced_open"])
@pytest.mark.parametrize("seed", range(3))
def test_plan_is_valid_and_brackets_the_milp_optimum(monkeypatch, variant, seed):
    inst = random_cflp(10 + seed, penalty=40.0 if variant == "penalty" else None,
                       lane_capacity=variant == "lane_capacity", forced_open=2 if variant == "forced_open" else 0)
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS), proven optimum of the textbook formulation
    assert optimum is not None
    net = to_network(inst)
    result = lagrangian_solve(monkeypatch, net)
    assert result.solver.startswith("Lagrangian relaxation")
    assert_design_plan_keeps_the_contract(net, result)
    assert result.total_cost >= optimum - TOL  # a plan never beats the proven optimum
    assert result.best_bound is not None and result.best_bound <= optimum + TOL  # nor does a bound pass it
    assert result.mip_gap == pytest.approx((result.total_cost - result.best_bound) / result.total_cost, abs=1e-12)
    if result.status is SolveStatus.OPTIMAL:
        assert result.mip_gap <= net.settings.mip_gap + 1e-12
    else:
        assert result.status is SolveStatus.FEASIBLE


@pytest.mark.parametrize("seed", range(3))
def test_cap41_sized_instances_end_within_one_percent_of_the_optimum(monkeypatch, seed):
    # 16 depots x 50 customers, the size of OR-Library's cap41 ... cap74 (whose files are not in the repository).
    inst = random_cflp(40 + seed, depots=16, customers=50)
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS), proven optimum
    result = lagrangian_solve(monkeypatch, to_network(inst))
    assert optimum - TOL <= result.total_cost <= optimum * 1.01
    assert result.best_bound <= optimum + TOL
    assert result.best_bound >= optimum * 0.95  # the bound is close on these (our trials, seeds 40-51: within 1.1 %)


def test_a_plan_not_proven_is_feasible_with_its_gap_and_says_where_it_comes_from(monkeypatch):
    inst = random_cflp(40, depots=16, customers=50)
    net = to_network(inst, Settings(mip_gap=0.0))
    result = lagrangian_solve(monkeypatch, net)
    assert result.status is SolveStatus.FEASIBLE  # this seed's bound stays below the optimum (see the optimum check)
    assert result.best_bound < milp_optimum(inst) - TOL  # source: SciPy milp; the gap is real, not rounding
    assert result.mip_gap > 0
    message = " ".join(result.messages)
    assert "Lagrangian relaxation" in message and f"{result.mip_gap:.2%}" in message
    assert "time limit" not in message  # it stopped because its search ended, not on the limit


def test_a_plan_that_meets_its_bound_is_optimal(monkeypatch):
    # One depot must open (either can serve all), so the relaxation's bound is the optimum: the cheaper depot's
    # fixed charge plus its lanes, 100 + 2 * 10 = 120 (worked by hand).
    net = make_network([{"id": "A", "supply": 10, "fixed_cost": 100, "status": "decide"},
                        {"id": "B", "supply": 10, "fixed_cost": 150, "status": "decide"}],
                       [{"id": "C", "demand": 10}],
                       [{"origin": "A", "destination": "C", "cost_per_unit": 2},
                        {"origin": "B", "destination": "C", "cost_per_unit": 1}])
    result = lagrangian_solve(monkeypatch, net)
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(120.0)
    assert result.best_bound == pytest.approx(120.0, abs=1e-6)


def test_quantities_without_an_exact_integer_scale_are_priced_by_the_lp(monkeypatch):
    inst = random_cflp(12, demand_step=1 / 3)  # thirds: no power of ten makes them integers
    net = to_network(inst)
    problem = lagrangian.recognise(build_sparse_model(net))
    assert DepotSearch(problem).engine.startswith("HiGHS LP")
    optimum = milp_optimum(inst)  # source: SciPy milp (HiGHS)
    result = lagrangian_solve(monkeypatch, net)
    assert "HiGHS LP" in result.solver
    assert_design_plan_keeps_the_contract(net, result)
    assert optimum - TOL <= result.total_cost and result.best_bound <= optimum + TOL


def test_no_plan_from_the_relaxation_leaves_the_model_to_the_engine(monkeypatch):
    inst = random_cflp(13, depots=3, customers=5)
    inst["supply"] = inst["supply"] * 0.0 + 1.0  # far less than the demand: no plan exists
    result = lagrangian_solve(monkeypatch, to_network(inst))
    assert result.status is SolveStatus.INFEASIBLE
    assert not result.solver.startswith("Lagrangian")


def test_a_model_without_a_plan_the_checks_before_solving_miss_goes_to_the_engine(monkeypatch):
    # C0 and C1 are reachable only from D0, whose supply covers one of them: no plan, though every customer has a
    # lane and the total supply is ample (worked by hand).
    net = make_network([{"id": "D0", "supply": 10, "fixed_cost": 5, "status": "decide"},
                        {"id": "D1", "supply": 100, "fixed_cost": 5, "status": "decide"}],
                       [{"id": "C0", "demand": 8}, {"id": "C1", "demand": 8}, {"id": "C2", "demand": 8}],
                       [{"origin": "D0", "destination": "C0", "cost_per_unit": 1},
                        {"origin": "D0", "destination": "C1", "cost_per_unit": 1},
                        {"origin": "D1", "destination": "C2", "cost_per_unit": 1}])
    assert lagrangian.recognise(build_sparse_model(net)) is not None
    result = lagrangian_solve(monkeypatch, net)
    assert result.status is SolveStatus.INFEASIBLE
    assert not result.solver.startswith("Lagrangian")


def test_auto_keeps_highs_for_small_models_and_an_explicit_engine_is_obeyed(monkeypatch):
    net = to_network(random_cflp(14))
    assert solve(net, time_limit=60).solver.startswith("HiGHS")  # below LARGE_MIP columns
    monkeypatch.setattr(solve_module, "LARGE_MIP", 0)
    assert solve(net, time_limit=60, solver="highs").solver.startswith("HiGHS")
    assert solve(net, time_limit=0).solver.startswith("HiGHS")  # no limit: the engine that can prove the optimum
