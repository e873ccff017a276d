"""The plan's emissions (lanesolve/model/emissions.py, product_plan.py) and what cutting them costs
(lanesolve/model/tradeoff.py): hand-worked figures, the cap's value against the LP dual from HiGHS, the carbon
price that makes the capped plan optimal, and the shape of the trade-off curve. Networks and factors are invented
(the factors are test numbers, not published ones)."""

import dataclasses
import math

import numpy as np
import pytest

from lanesolve.model.build import build_model
from lanesolve.model.emissions import lane_emission_data
from lanesolve.model.network import Settings, make_network
from lanesolve.model.product_data import make_products
from lanesolve.model.solve import solve, solve_model
from lanesolve.model.tradeoff import cap_value, tradeoff_curve


def two_mode_network(**settings):
    """Invented: 10 units from Ashby to Cobham by road (cost 1, 100 km, 0.1 kg/tkm) or rail (cost 3, 100 km,
    0.02 kg/tkm), 1 tonne per unit."""
    net = make_network([{"id": "Ashby", "supply": 10}], [{"id": "Cobham", "demand": 10}],
                       [{"origin": "Ashby", "destination": "Cobham", "mode": "road", "cost_per_unit": 1},
                        {"origin": "Ashby", "destination": "Cobham", "mode": "rail", "cost_per_unit": 3}],
                       settings=Settings(tonnes_per_unit=1.0, **settings))
    net.emissions = lane_emission_data(net, km=[100, 100], factor=[0.1, 0.02])
    return net


def test_single_product_emissions_by_hand():
    # By hand: 10 units x 1 t x 100 km x 0.1 kg/tkm = 100 kg = 0.1 t, all by road (the cheaper lane).
    result = solve(two_mode_network())
    assert result.emissions["total_t"] == pytest.approx(0.1)
    assert result.emissions["by_mode"] == pytest.approx({"road": 0.1})
    assert result.emissions["unknown_lanes"] == 0
    lane = result.lane_emissions.iloc[0]
    assert (lane["tonnes"], lane["distance_km"], lane["emissions_t"]) == pytest.approx((10.0, 100.0, 0.1))


def test_hub_handling_counts_per_tonne():
    # By hand: 4 units x 0.5 t = 2 t; lanes 2 t x (50 km x 0.1 + 30 km x 0.1) kg = 16 kg; hub 2 t x 3 kg = 6 kg.
    net = make_network([{"id": "Ashby", "supply": 4}], [{"id": "Cobham", "demand": 4}],
                       [{"origin": "Ashby", "destination": "Exley", "cost_per_unit": 1},
                        {"origin": "Exley", "destination": "Cobham", "cost_per_unit": 1}],
                       hubs=[{"id": "Exley"}], settings=Settings(tonnes_per_unit=0.5))
    net.emissions = lane_emission_data(net, km=[50, 30], factor=[0.1, 0.1], hub_per_tonne=[3.0])
    result = solve(net)
    assert result.emissions["total_t"] == pytest.approx(0.022)
    assert result.emissions["hubs_t"] == pytest.approx(0.006)
    assert result.emissions["lanes_t"] == pytest.approx(0.016)


def test_multi_product_emissions_by_hand():
    # By hand: ale 5 units x 0.5 t and bran 4 units x 0.2 t on one 200 km lane at 0.05 kg/tkm:
    # (2.5 + 0.8) t x 200 km x 0.05 = 33 kg.
    net = make_network([{"id": "Ashby", "supply": 100}], [{"id": "Cobham", "demand": 0}],
                       [{"origin": "Ashby", "destination": "Cobham", "cost_per_unit": 1, "mode": "road"}])
    net.products = make_products([{"id": "ale", "weight_per_unit": 0.5}, {"id": "bran", "weight_per_unit": 0.2,
                                                                        "capacity_use": 2}],
                                 [{"customer": "Cobham", "product": "ale", "demand": 5},
                                  {"customer": "Cobham", "product": "bran", "demand": 4}], n_lanes=1)
    net.emissions = lane_emission_data(net, km=[200], factor=[0.05])
    result = solve(net)
    assert result.emissions["total_t"] == pytest.approx(0.033)
    assert result.lane_emissions["tonnes"].tolist() == pytest.approx([3.3])


def test_lane_without_factor_is_unknown_not_zero():
    net = two_mode_network()
    net.emissions = lane_emission_data(net, km=[100, 100], factor=[math.nan, 0.02])
    result = solve(net)
    assert result.emissions["unknown_lanes"] == 1
    assert any("no emission factor" in message for message in result.messages)
    assert math.isnan(result.lane_emissions["emissions_t"].iloc[0])


def test_carbon_price_is_its_own_cost_component():
    # By hand: 0.1 t at 50 per tonne = 5 on top of transport 10 (the price is too low to move anything to rail:
    # rail saves 8 kg per unit at 2 more, i.e. it pays from 250 per tonne).
    result = solve(two_mode_network(carbon_price=50.0))
    assert result.cost_breakdown["carbon"] == pytest.approx(5.0)
    assert result.total_cost == pytest.approx(15.0)
    assert result.to_json()["cost_breakdown"]["carbon"] == pytest.approx(5.0)


@pytest.mark.parametrize("seed", range(20))
def test_cap_value_agrees_with_the_lp_dual(seed):
    # Reference: the shadow price of the emissions_cap row from HiGHS (an LP dual; sign: change of cost per tonne
    # more). Where the cap sits on a breakpoint the two one-sided re-solve values bracket the dual.
    net = random_emission_network(seed)
    free = solve(net)
    if not free.status.has_plan:
        pytest.skip("invented network without a plan")
    net.settings.emissions_cap = free.emissions["total_t"] * 0.8
    result = solve(net)
    if not result.status.has_plan:
        return
    less, more = cap_value(net, result)
    model = build_model(net)
    answer = solve_model(model, "highs")
    dual = -answer.row_dual[model.row_blocks["emissions_cap"].start]
    # Each re-solve's cost is good to about 1e-7 of the cost (CBC's printed precision), divided by the 0.01 t step.
    tolerance = 1e-7 * max(1.0, abs(result.total_cost)) / 0.01 + 1e-6
    assert more - tolerance <= dual <= less + tolerance


def test_cap_value_by_hand():
    # Arithmetic: at a cap of 0.05 t, moving one unit road -> rail cuts 8 kg and costs 2, i.e. 250 per tonne.
    net = two_mode_network(emissions_cap=0.05)
    result = solve(net)
    assert cap_value(net, result) == pytest.approx((250.0, 250.0))


@pytest.mark.parametrize("seed", range(10))
def test_carbon_price_at_the_caps_value_makes_the_capped_plan_optimal(seed):
    # LP duality (e.g. Bertsimas & Tsitsiklis, Introduction to Linear Optimization, 1997, section 4.3): with the
    # cap's shadow price pi (HiGHS's dual of the emissions_cap row) as a carbon price and no cap, the least cost + pi x emissions equals that of the capped
    # plan, cost + pi x cap.
    net = random_emission_network(seed)
    free = solve(net)
    if not free.status.has_plan:
        pytest.skip("invented network without a plan")
    net.settings.emissions_cap = free.emissions["total_t"] * 0.7
    capped = solve(net)
    if not capped.status.has_plan:
        return
    model = build_model(net)
    price = -solve_model(model, "highs").row_dual[model.row_blocks["emissions_cap"].start]
    less, more = cap_value(net, capped)
    tolerance = 1e-7 * max(1.0, abs(capped.total_cost)) / 0.01 + 1e-6
    assert more - tolerance <= price <= less + tolerance  # the cap's value brackets that price
    priced = dataclasses.replace(net, settings=dataclasses.replace(net.settings, emissions_cap=None,
                                                                    carbon_price=price))
    result = solve(priced)
    assert result.total_cost == pytest.approx(capped.total_cost + price * capped.emissions["total_t"], rel=1e-6,
                                              abs=1e-6)


@pytest.mark.parametrize("seed", range(10))
def test_tradeoff_curve_is_monotone_and_convex_for_an_lp(seed):
    # Reference: the optimal value of an LP is convex and non-increasing in the right-hand side of a <= row
    # (Bertsimas & Tsitsiklis 1997, theorem 5.1), so cost over emissions must be so too.
    net = random_emission_network(seed)
    curve = tradeoff_curve(net, 6)
    if not curve:
        pytest.skip("invented network without a plan")
    emissions = np.array([p["emissions_t"] for p in curve])
    cost = np.array([p["total_cost"] for p in curve])
    assert len(curve) == 6
    assert np.all(np.diff(emissions) >= -1e-7)
    assert np.all(np.diff(cost) <= 1e-6)
    span = np.diff(emissions)
    wide = span > 1e-6
    slopes = np.diff(cost)[wide] / span[wide]
    assert np.all(np.diff(slopes) >= -1e-4 * max(1.0, np.abs(slopes).max(initial=0)))


def test_tradeoff_ends_are_the_least_emissions_and_least_cost_plans():
    # By hand: all rail emits 10 x 2 kg = 0.02 t at cost 30; all road 0.1 t at cost 10.
    curve = tradeoff_curve(two_mode_network(), 3)
    assert curve[0] == pytest.approx({"emissions_t": 0.02, "total_cost": 30.0})
    assert curve[-1] == pytest.approx({"emissions_t": 0.1, "total_cost": 10.0})
    assert curve[1] == pytest.approx({"emissions_t": 0.06, "total_cost": 20.0})


def random_emission_network(seed):
    """An invented LP network: 2 depots, 3 customers, 2 modes on every depot-customer pair, random costs,
    distances and factors, and two products."""
    rng = np.random.default_rng(1000 + seed)
    depots = [{"id": f"D{i}", "supply": float(rng.integers(20, 50))} for i in range(2)]
    customers = [{"id": f"C{i}", "demand": 0.0} for i in range(3)]
    lanes, km, factor = [], [], []
    for d in depots:
        for c in customers:
            for mode, f in (("road", 0.1), ("rail", 0.03)):
                lanes.append({"origin": d["id"], "destination": c["id"], "mode": mode,
                              "cost_per_unit": float(rng.integers(1, 5)) * (2 if mode == "rail" else 1),
                              "capacity": float(rng.integers(5, 20))})
                km.append(float(rng.integers(50, 300)))
                factor.append(f * float(rng.uniform(0.8, 1.2)))
    net = make_network(depots, customers, lanes, settings=Settings(tonnes_per_unit=1.0))
    net.products = make_products([{"id": "ale", "weight_per_unit": 0.5}, {"id": "bran", "weight_per_unit": 0.8}],
                                 [{"customer": c["id"], "product": p, "demand": float(rng.integers(1, 8))}
                                  for c in customers for p in ("ale", "bran")], n_lanes=len(lanes))
    net.emissions = lane_emission_data(net, km=km, factor=factor)
    return net
