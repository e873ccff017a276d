"""Sensitivity figures against SciPy's HiGHS marginals on the same LP, against a finite-difference re-solve
(demand + 1), and both sides of a degenerate plan shown (tests/test_sensitivity_exact.py checks every figure
against ±1 re-solves on many random networks)."""

import math
import random

import numpy as np
import pytest
from scipy.optimize import linprog

from lanesolve.model.network import make_network
from lanesolve.model.analyse import solve_and_analyse
from lanesolve.model.solve import solve

TOL = 1e-6


def random_lp(seed: int):
    """A transportation LP with distinct costs (random reals), so the optimum is unique and non-degenerate with
    probability one."""
    rng = random.Random(seed)
    depots = [{"id": f"D{i}", "supply": rng.randint(40, 80)} for i in range(3)]
    customers = [{"id": f"C{j}", "demand": rng.randint(10, 30)} for j in range(4)]
    lanes = [{"origin": d["id"], "destination": c["id"], "cost_per_unit": round(rng.uniform(1, 10), 3)}
             for d in depots for c in customers]
    for lane in rng.sample(lanes, 3):
        lane["capacity"] = rng.randint(3, 9)  # some capacities bind
    return depots, customers, lanes


def scipy_marginals(depots, customers, lanes):
    """The same LP for scipy.optimize.linprog (method "highs"): returns (objective, balance-row marginals, supply-row
    marginals, lane reduced costs at the upper bound). SciPy documents ``eqlin.marginals`` / ``ineqlin.marginals``
    as the sensitivity of the objective to the right-hand side (the duals)."""
    n = len(lanes)
    c = np.array([lane["cost_per_unit"] for lane in lanes])
    a_ub = np.array([[1.0 if lane["origin"] == d["id"] else 0.0 for lane in lanes] for d in depots])
    b_ub = np.array([d["supply"] for d in depots], dtype=float)
    a_eq = np.array([[1.0 if lane["destination"] == cu["id"] else 0.0 for lane in lanes] for cu in customers])
    b_eq = np.array([cu["demand"] for cu in customers], dtype=float)
    bounds = [(0, lane.get("capacity")) for lane in lanes]
    res = linprog(c, A_ub=a_ub, b_ub=b_ub, A_eq=a_eq, b_eq=b_eq, bounds=bounds, method="highs")
    assert res.status == 0
    return res.fun, res.eqlin.marginals, res.ineqlin.marginals, res.upper.marginals, n


def figures(result, figure):
    rows = result.sensitivity[result.sensitivity["figure"] == figure]
    return dict(zip(rows["item"], zip(rows["value"], rows["unique"])))


def sides(result, figure):
    rows = result.sensitivity[result.sensitivity["figure"] == figure]
    return dict(zip(rows["item"], zip(rows["value_up"], rows["value_down"])))


@pytest.mark.parametrize("seed", range(8))
def test_marginal_costs_agree_with_scipy_highs_marginals(seed):
    depots, customers, lanes = random_lp(seed)
    result = solve_and_analyse(make_network(depots, customers, lanes))
    fun, eq, ineq, upper, _ = scipy_marginals(depots, customers, lanes)  # source: SciPy linprog (HiGHS)
    assert result.total_cost == pytest.approx(fun, abs=1e-6)
    marginal = figures(result, "marginal_cost")
    for cu, dual in zip(customers, eq):
        value, unique = marginal[cu["id"]]
        assert unique
        assert value == pytest.approx(dual, abs=1e-6)
    supply = figures(result, "supply_value")
    for d, dual in zip(depots, ineq):
        if d["id"] in supply:  # only binding supplies are listed; their saving is minus the dual
            assert supply[d["id"]][0] == pytest.approx(-dual, abs=1e-6)
        else:
            assert dual == pytest.approx(0.0, abs=1e-9)
    capacity = figures(result, "lane_capacity_value")
    for lane, dual in zip(lanes, upper):
        label = f"{lane['origin']} -> {lane['destination']}"
        if label in capacity:
            assert capacity[label][0] == pytest.approx(-dual, abs=1e-6)


@pytest.mark.parametrize("seed", range(6))
def test_marginal_cost_matches_a_demand_plus_one_re_solve(seed):
    depots, customers, lanes = random_lp(seed)
    base = solve_and_analyse(make_network(depots, customers, lanes))
    marginal = figures(base, "marginal_cost")
    for k, cu in enumerate(customers):
        bumped = [dict(c) for c in customers]
        bumped[k]["demand"] += 1
        again = solve(make_network(depots, bumped, lanes), sensitivity=False)
        if not again.status.has_plan:
            continue
        up, _ = sides(base, "marginal_cost")[cu["id"]]
        # Source: finite difference of the optimal cost; whole-unit data, so the one-sided derivative is exact.
        assert again.total_cost - base.total_cost == pytest.approx(up, abs=1e-6)


def test_finite_difference_equals_marginal_when_basis_holds():
    # Two depots, one customer; A is cheaper (2 per unit) with plenty of supply, so one more unit also comes from
    # A: the re-solve rises by exactly 2 (hand computation; the basis does not change).
    net = lambda q: make_network([{"id": "A", "supply": 100}, {"id": "B", "supply": 100}],  # noqa: E731
                                 [{"id": "C", "demand": q}],
                                 [{"origin": "A", "destination": "C", "cost_per_unit": 2},
                                  {"origin": "B", "destination": "C", "cost_per_unit": 5}])
    base, bumped = solve_and_analyse(net(10)), solve(net(11), sensitivity=False)
    value, unique = figures(base, "marginal_cost")["C"]
    assert unique and value == pytest.approx(bumped.total_cost - base.total_cost, abs=TOL)
    reduced = figures(base, "reduced_cost")["B -> C"]
    assert reduced[1] and reduced[0] == pytest.approx(3.0, abs=TOL)  # 5 - 2: B must be 3 cheaper to be used


def test_degenerate_plan_shows_both_sides():
    # A's supply (10) exactly meets C's demand (10): the supply row binds AND the only lane's flow is pinned, so
    # the primal is degenerate; one more unit at C costs 7 (from B), one less saves 2 (from A). Both are shown.
    net = make_network([{"id": "A", "supply": 10}, {"id": "B", "supply": 10}], [{"id": "C", "demand": 10}],
                       [{"origin": "A", "destination": "C", "cost_per_unit": 2},
                        {"origin": "B", "destination": "C", "cost_per_unit": 7}])
    result = solve_and_analyse(net)
    value, unique = figures(result, "marginal_cost")["C"]
    assert not unique and math.isnan(value)
    assert sides(result, "marginal_cost")["C"] == (pytest.approx(7.0), pytest.approx(2.0))
    text = result.sensitivity.loc[result.sensitivity["item"] == "C", "text"].iloc[0]
    assert "costs 7.00" in text and "one less saves 2.00" in text
    # Source: finite differences with re-solves: demand - 1 saves 2, demand + 1 costs 7.
    down = solve(make_network(net.depots, net.customers.assign(demand=9), net.lanes), sensitivity=False)
    up = solve(make_network(net.depots, net.customers.assign(demand=11), net.lanes), sensitivity=False)
    assert result.total_cost - down.total_cost == pytest.approx(2.0, abs=TOL)
    assert up.total_cost - result.total_cost == pytest.approx(7.0, abs=TOL)
    # A's supply binds: one more unit saves nothing (C already gets all from A), one less costs 5 (7 - 2).
    assert sides(result, "supply_value")["A"] == (pytest.approx(0.0), pytest.approx(5.0))


def test_solve_alone_leaves_the_figures_to_solve_and_analyse():
    net = make_network([{"id": "A", "supply": 10}], [{"id": "C", "demand": 10}],
                       [{"origin": "A", "destination": "C", "cost_per_unit": 2}])
    assert solve(net).sensitivity.empty
    assert not solve_and_analyse(net).sensitivity.empty


def test_mip_figures_come_from_the_fixed_lp_and_say_so():
    net = make_network([{"id": "A", "supply": 100}], [{"id": "C", "demand": 10}, {"id": "E", "demand": 5}],
                       [{"origin": "A", "destination": "C", "cost_per_unit": 2, "fixed_cost": 30},
                        {"origin": "A", "destination": "E", "cost_per_unit": 3}])
    result = solve_and_analyse(net)
    assert (result.sensitivity["basis"] == "LP with the plan's yes/no and trip decisions fixed").all()
    value, unique = figures(result, "marginal_cost")["E"]
    assert unique and value == pytest.approx(3.0, abs=TOL)  # hand computation: the lane's cost per unit
