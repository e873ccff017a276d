"""The lane search (lanesolve.model.lane_search) on small fixed-charge networks, checked against SciPy ``milp``.

A plan it returns must meet every row of the model, cost exactly what its values say, cost less than the plan it
started from, and never less than the optimum SciPy ``milp`` (HiGHS) proves on the independent reference model of
tests/test_fixed_charge_vs_scipy.py; solved under ``auto`` with a time limit the run keeps the honest status.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np
import pytest

from lanesolve.model import lane_search
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import plan_values, solve, solve_model
from tests.test_fixed_charge_vs_scipy import random_fixed_charge_network, scipy_optimum

TOL = 1e-6


def transportation_network(depots: int, customers: int, seed: int):
    """A balanced fixed-charge transportation network with random integer data (invented)."""
    rng = np.random.default_rng(seed)
    demand = rng.integers(5, 30, size=customers)
    share = rng.dirichlet(np.ones(depots)) * demand.sum()
    supply = np.floor(share).astype(int)
    supply[0] += int(demand.sum() - supply.sum())
    lanes = [{"origin": f"D{i}", "destination": f"C{j}", "cost_per_unit": int(rng.integers(3, 9)),
              "fixed_cost": int(rng.integers(50, 201))} for i in range(depots) for j in range(customers)]
    return make_network([{"id": f"D{i}", "supply": int(s)} for i, s in enumerate(supply)],
                        [{"id": f"C{j}", "demand": int(d)} for j, d in enumerate(demand)], lanes)


def worst_plan(net, model, engine: str = "highs") -> np.ndarray:
    """A feasible but poor plan from ``engine``: every charged lane paid for (the relaxation with every yes/no fixed
    at 1)."""
    lower = model.lower.copy()
    lower[model.columns("use_")] = 1.0
    fixed = dataclasses.replace(model, lower=lower, integer=np.zeros(model.n_columns, dtype=bool))
    answer = solve_model(fixed, engine)
    assert answer.status is SolveStatus.OPTIMAL
    return answer.value


def assert_meets_rows(model, values) -> None:
    activity = model.matrix @ values
    assert (activity >= model.row_lower - TOL).all() and (activity <= model.row_upper + TOL).all()
    assert (values >= model.lower - TOL).all() and (values <= model.upper + TOL).all()


@pytest.mark.parametrize("seed", range(6))
def test_search_from_a_poor_plan_is_cheaper_feasible_and_never_below_the_scipy_optimum(seed):
    net = transportation_network(3, 6, seed)
    model = build_sparse_model(net)
    start = worst_plan(net, model)
    better = lane_search.improve(net, model, start, time.monotonic() + 1.0)
    assert better is not None  # every lane paid for is never the cheapest plan on these data
    assert_meets_rows(model, better)
    optimum = scipy_optimum(net)  # SciPy milp (HiGHS) on the independent reference model
    assert optimum is not None
    assert optimum - TOL <= float(model.cost @ better) < float(model.cost @ start) - TOL


@pytest.mark.parametrize("seed", range(20))
def test_search_keeps_random_networks_feasible_and_above_the_scipy_optimum(seed):
    # Hubs, capacities, unmet penalties and inactive lanes (tests/test_fixed_charge_vs_scipy.py's generator).
    net = random_fixed_charge_network(seed)
    if not lane_search.applies(net):
        pytest.skip("no fixed charge on an active lane in this draw")
    optimum = scipy_optimum(net)
    if optimum is None:
        pytest.skip("no plan exists for this draw")
    model = build_sparse_model(net)
    start = worst_plan(net, model)
    better = lane_search.improve(net, model, start, time.monotonic() + 0.3)
    plan = start if better is None else plan_values(net, model, better)
    assert_meets_rows(model, plan)
    assert optimum - TOL <= float(model.cost @ plan) <= float(model.cost @ start) + TOL


def test_auto_with_a_time_limit_keeps_an_honest_status_and_bound():
    net = transportation_network(4, 12, 7)
    optimum = scipy_optimum(net)  # SciPy milp (HiGHS) on the independent reference model
    result = solve(net, time_limit=3, solver="auto")
    assert result.status in (SolveStatus.OPTIMAL, SolveStatus.FEASIBLE)
    assert result.total_cost >= optimum - TOL
    assert result.best_bound <= optimum + TOL
    if result.status is SolveStatus.FEASIBLE:
        assert result.mip_gap == pytest.approx((result.total_cost - result.best_bound) / result.total_cost)


def test_search_does_not_apply_with_design_decisions_or_without_charges():
    lanes = [{"origin": "D", "destination": "C", "cost_per_unit": 2, "fixed_cost": 10}]
    charged = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}], lanes)
    assert lane_search.applies(charged)
    plain = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
                         [{**lanes[0], "fixed_cost": 0}])
    assert not lane_search.applies(plain)
    decided = make_network([{"id": "D", "supply": 8, "status": "decide", "fixed_cost": 30}],
                           [{"id": "C", "demand": 5}], lanes)
    assert not lane_search.applies(decided)
