"""Carrier commitments, minimum charges and rate breaks in the model (lanesolve/model/tariffs.py).

Hand-computed cases first (the arithmetic is in the comments beside each expected value), then 60 random small
networks against a reference model written here for SciPy's ``milp`` (HiGHS), independently of lanesolve's
formulation: it charges each lane through a cost variable bounded below per tariff bracket (all units), by the
convex-combination ("lambda") model over the tariff's breakpoints (incremental rates, Croxton, Gendron & Magnanti
2003, Management Science 49(9), model CCM), and by ``cost >= minimum_charge * used``. Every plan lanesolve returns is
also re-priced here from its flows alone, by evaluating each lane's tariff as the Rate breaks sheet defines it.
"""

from __future__ import annotations

import math
import random

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve

TOL = 1e-6


def two_lanes(cost_a, cost_b, demand, **extra):
    """One depot, one customer, lane ``a`` and lane ``b`` between them (the invented Kelby Yard -> Tarn Foods)."""
    lanes = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "cost_per_unit": cost_a,
              "carrier": "Alpha", **extra.pop("a", {})},
             {"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "b", "cost_per_unit": cost_b,
              "carrier": "Brava", **extra.pop("b", {})}]
    return make_network([{"id": "Kelby Yard", "supply": 1000}], [{"id": "Tarn Foods", "demand": demand}], lanes,
                        **extra)


def flow_of(result, mode):
    rows = result.flows[result.flows["mode"] == mode]
    return float(rows["flow"].sum())


def test_a_minimum_commitment_forces_volume_onto_the_dearer_carrier():
    # Brava must carry 30 of the 100 units although it costs 7 against Alpha's 5: 70 x 5 + 30 x 7 = 560.
    net = two_lanes(5, 7, 100, carriers=[{"id": "Brava", "min_volume": 30}])
    result = solve(net)
    assert result.total_cost == pytest.approx(560.0, abs=TOL)
    assert flow_of(result, "b") == pytest.approx(30.0, abs=TOL)
    row = result.carriers.set_index("carrier").loc["Brava"]
    assert row["state"] == "binding (minimum)"
    # One unit less of the minimum moves a unit from 7 to 5 (saves 2); one more costs 2 (hand arithmetic).
    assert row["cost_one_less"] == pytest.approx(-2.0, abs=TOL)
    assert row["cost_one_more"] == pytest.approx(2.0, abs=TOL)


def test_a_largest_share_caps_the_cheaper_carrier():
    # Alpha may carry at most 40 % of the 100 units delivered: 40 x 5 + 60 x 7 = 620.
    net = two_lanes(5, 7, 100, carriers=[{"id": "Alpha", "max_share": 0.4}])
    result = solve(net)
    assert result.total_cost == pytest.approx(620.0, abs=TOL)
    assert flow_of(result, "a") == pytest.approx(40.0, abs=TOL)
    assert result.carriers.set_index("carrier").loc["Alpha", "share"] == pytest.approx(0.4, abs=TOL)


def test_a_maximum_volume_caps_the_carrier():
    # Alpha at most 25 units: 25 x 5 + 75 x 7 = 650; one more unit of Alpha's maximum saves 2.
    result = solve(two_lanes(5, 7, 100, carriers=[{"id": "Alpha", "max_volume": 25}]))
    assert result.total_cost == pytest.approx(650.0, abs=TOL)
    row = result.carriers.set_index("carrier").loc["Alpha"]
    assert row["cost_one_more"] == pytest.approx(-2.0, abs=TOL) and row["cost_one_less"] == pytest.approx(2.0, abs=TOL)


def test_an_incremental_break_makes_the_lane_cheaper_only_above_it():
    # Lane a: 10 per unit, 6 per unit above 50 (incremental). Lane b: 8.5 flat. For 120 units, all on a costs
    # 50 x 10 + 70 x 6 = 920 against 1,020 on b; any split costs more than a alone (a's marginal rate above 50 is 6).
    breaks = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "from_volume": 50,
               "cost_per_unit": 6, "kind": "incremental"}]
    result = solve(two_lanes(10, 8.5, 120, rate_breaks=breaks))
    assert result.total_cost == pytest.approx(920.0, abs=TOL)
    assert flow_of(result, "a") == pytest.approx(120.0, abs=TOL)
    # For 60 units: a alone 560, b alone 510, a split costs at least 50 x 8.5 + ... -> b alone is best (510).
    result = solve(two_lanes(10, 8.5, 60, rate_breaks=breaks))
    assert result.total_cost == pytest.approx(510.0, abs=TOL)
    assert flow_of(result, "b") == pytest.approx(60.0, abs=TOL)


def test_an_all_units_break_reprices_every_unit():
    # Lane a: 10 per unit, 7 for every unit once it carries 50 (all units). Lane b: 8.5 flat. 60 units: a alone is
    # 60 x 7 = 420 (b alone 510). 40 units: a would be 400, b 340 -> b. The flows sheet shows a's rate as 7.
    breaks = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "from_volume": 50,
               "cost_per_unit": 7, "kind": "all_units"}]
    result = solve(two_lanes(10, 8.5, 60, rate_breaks=breaks))
    assert result.total_cost == pytest.approx(420.0, abs=TOL)
    lane = result.flows[result.flows["mode"] == "a"].iloc[0]
    assert lane["cost_per_unit"] == pytest.approx(7.0, abs=TOL) and lane["variable_cost"] == pytest.approx(420.0)
    result = solve(two_lanes(10, 8.5, 40, rate_breaks=breaks))
    assert result.total_cost == pytest.approx(340.0, abs=TOL)


def test_a_minimum_charge_makes_a_cheap_lane_dear_at_low_volume():
    # Lane a: 2 per unit but at least 100 per use; lane b: 8 per unit. 5 units: a costs max(100, 10) = 100, b 40.
    # 80 units: a costs 160, b 640 -> a.
    result = solve(two_lanes(2, 8, 5, a={"minimum_charge": 100}))
    assert result.total_cost == pytest.approx(40.0, abs=TOL) and flow_of(result, "b") == pytest.approx(5.0)
    result = solve(two_lanes(2, 8, 80, a={"minimum_charge": 100}))
    assert result.total_cost == pytest.approx(160.0, abs=TOL) and flow_of(result, "a") == pytest.approx(80.0)
    # 20 units forced on a by a commitment: the lane is charged its minimum, 100, shown as rate 5 (100 / 20).
    result = solve(two_lanes(2, 8, 20, a={"minimum_charge": 100}, carriers=[{"id": "Alpha", "min_volume": 20}]))
    lane = result.flows[result.flows["mode"] == "a"].iloc[0]
    assert lane["variable_cost"] == pytest.approx(100.0) and lane["cost_per_unit"] == pytest.approx(5.0)


def test_rising_incremental_rates_stay_a_linear_program_and_falling_ones_do_not():
    rising = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "from_volume": 10,
               "cost_per_unit": 12, "kind": "incremental"}]
    assert not build_sparse_model(two_lanes(10, 11, 30, rate_breaks=rising)).is_mip
    # Rising rates, LP: 10 units at 10 on a, then b at 11 is cheaper than a's 12: 100 + 20 x 11 = 320.
    assert solve(two_lanes(10, 11, 30, rate_breaks=rising)).total_cost == pytest.approx(320.0, abs=TOL)
    falling = [dict(rising[0], cost_per_unit=8)]
    assert build_sparse_model(two_lanes(10, 11, 30, rate_breaks=falling)).is_mip


def test_a_rising_all_units_rate_applies_from_the_break_volume_itself():
    # Lane a: 5 per unit, 9 for every unit from 20 on (all units); b: 8.5. 20 units all on a would be 20 x 9 = 180
    # (the rate applies once the lane carries at least 20), so the plan keeps a just under 20 units at 5 and puts
    # the sliver on b: 100 within the relative step of 1e-6 (hand arithmetic). 19 units all on a: 95.
    breaks = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "from_volume": 20,
               "cost_per_unit": 9, "kind": "all_units"}]
    result = solve(two_lanes(5, 8.5, 20, rate_breaks=breaks))
    assert result.total_cost == pytest.approx(100.0, rel=1e-5)
    assert flow_of(result, "a") < 20.0
    assert solve(two_lanes(5, 8.5, 19, rate_breaks=breaks)).total_cost == pytest.approx(95.0, abs=TOL)


def test_breaks_beyond_what_a_lane_can_carry_are_left_out():
    # Capacity 40: a break at 50 can never apply, so no tariff column is built for it.
    breaks = [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "a", "from_volume": 50,
               "cost_per_unit": 1, "kind": "all_units"}]
    model = build_sparse_model(two_lanes(10, 11, 30, a={"capacity": 40}, rate_breaks=breaks))
    assert not any(name.endswith("_0_1") for name in model.column_names)


# ------------------------------------------------------------------------------------------------ random vs SciPy


def lane_tariff(rate: float, breaks: list[tuple[float, float]], kind: str, x: float) -> float:
    """A lane's cost for ``x`` units, straight from the Rate breaks sheet's definition."""
    if x <= 0:
        return 0.0
    points = [(0.0, rate), *breaks]
    if kind == "all_units":
        return x * [r for start, r in points if x >= start - 1e-9][-1]
    cost = 0.0
    for j, (start, r) in enumerate(points):
        end = points[j + 1][0] if j + 1 < len(points) else math.inf
        cost += r * max(0.0, min(x, end) - start)
    return cost


def random_network(seed: int):
    rng = random.Random(7000 + seed)
    depots = [{"id": f"D{i}", "supply": rng.randint(20, 90)} for i in range(rng.randint(1, 3))]
    customers = [{"id": f"C{i}", "demand": rng.randint(5, 40)} for i in range(rng.randint(2, 3))]
    carriers = ["Alpha", "Brava", "Corro"]
    lanes, breaks = [], []
    for d in depots:
        for c in customers:
            for mode in ("road", "rail"):
                if rng.random() < 0.7:
                    lane = {"origin": d["id"], "destination": c["id"], "mode": mode,
                            "cost_per_unit": rng.randint(2, 12), "carrier": rng.choice(carriers + [""]),
                            "capacity": rng.choice([math.inf, rng.randint(10, 60)]),
                            "minimum_charge": rng.choice([0, 0, rng.randint(20, 150)])}
                    lanes.append(lane)
                    if rng.random() < 0.5:
                        kind = rng.choice(["incremental", "all_units"])
                        start, rate = 0, lane["cost_per_unit"]
                        for _ in range(rng.randint(1, 2)):
                            start += rng.randint(5, 25)
                            # Incremental rates go either way; all-units rates fall with volume, as tariffs do
                            # (a rising all-units step is checked by hand below).
                            rate = rng.randint(1, 13) if kind == "incremental" else max(0, rate - rng.randint(1, 4))
                            breaks.append({"origin": d["id"], "destination": c["id"], "mode": mode,
                                           "from_volume": start, "cost_per_unit": rate, "kind": kind})
    commitments = []
    for name in carriers:
        if rng.random() < 0.5:
            entry = {"id": name}
            pick = rng.random()
            if pick < 0.4:
                entry["min_volume"] = rng.randint(5, 40)
            elif pick < 0.7:
                entry["max_volume"] = rng.randint(10, 60)
            else:
                entry["max_share"] = rng.choice([0.3, 0.5, 0.7])
            commitments.append(entry)
    return make_network(depots, customers, lanes, carriers=commitments, rate_breaks=breaks)


def scipy_reference(net) -> float | None:
    """The optimum from scipy.optimize.milp on the reference model of the module docstring (None: infeasible)."""
    lanes = net.active_lanes.reset_index(drop=True)
    total_demand = float(net.customers["demand"].sum())
    big = total_demand + 1.0  # a direct depot -> customer lane never carries more than the total demand
    names: list[str] = []
    lower, upper, integer, cost = [], [], [], []

    def column(name, lo, up, whole=False, c=0.0):
        names.append(name)
        lower.append(lo), upper.append(up), integer.append(1 if whole else 0), cost.append(c)
        return len(names) - 1

    rows = []  # (dict column -> coefficient, lo, up)
    breaks = net.rate_breaks
    flow = [column(f"x{l}", 0.0, min(float(lanes.at[l, "capacity"]), big)) for l in range(len(lanes))]
    for l in range(len(lanes)):
        rate = float(lanes.at[l, "cost_per_unit"])
        mine = breaks[breaks["lane"] == l]
        points = list(zip(mine["from_volume"].astype(float), mine["cost_per_unit"].astype(float)))
        kind = mine["kind"].iloc[0] if len(mine) else "incremental"
        charge = column(f"k{l}", 0.0, np.inf, c=1.0)  # the lane's whole variable cost
        if kind == "all_units" and points:
            starts = [0.0] + [p for p, _ in points]
            rates = [rate] + [r for _, r in points]
            pick = [column(f"v{l}_{j}", 0, 1, True) for j in range(len(starts))]
            rows.append(({p: 1.0 for p in pick}, 1.0, 1.0))
            rows.append(({flow[l]: 1.0, **{p: -s for p, s in zip(pick, starts)}}, 0.0, np.inf))
            for j, p in enumerate(pick):
                # k >= rate_j * x - M (1 - v_j), M = top rate x big.
                m = max(rates) * big
                rows.append(({charge: 1.0, flow[l]: -rates[j], p: -m}, -m, np.inf))
                if j + 1 < len(starts):  # x below the next break unless a later bracket is picked
                    rows.append(({flow[l]: 1.0, p: big - starts[j + 1]}, -np.inf, big))
        else:
            starts = [0.0] + [p for p, _ in points] + [big]
            starts = sorted(set(min(s, big) for s in starts))
            values = [lane_tariff(rate, points, "incremental", s) for s in starts]
            lam = [column(f"w{l}_{i}", 0.0, 1.0) for i in range(len(starts))]
            seg = [column(f"z{l}_{i}", 0, 1, True) for i in range(len(starts) - 1)]
            rows.append(({a: 1.0 for a in lam}, 1.0, 1.0))
            rows.append(({s: 1.0 for s in seg}, 1.0, 1.0))
            rows.append(({flow[l]: 1.0, **{a: -s for a, s in zip(lam, starts)}}, 0.0, 0.0))
            rows.append(({charge: 1.0, **{a: -v for a, v in zip(lam, values)}}, 0.0, np.inf))
            for i, a in enumerate(lam):  # SOS2 by binaries: weight only on the two ends of the chosen segment
                near = {s: -1.0 for k, s in enumerate(seg) if k in (i - 1, i)}
                rows.append(({a: 1.0, **near}, -np.inf, 0.0))
        minimum = float(lanes.at[l, "minimum_charge"])
        if minimum > 0:
            used = column(f"y{l}", 0, 1, True)
            rows.append(({flow[l]: 1.0, used: -big}, -np.inf, 0.0))
            rows.append(({charge: 1.0, used: -minimum}, 0.0, np.inf))
    for d, supply in zip(net.depots["id"], net.depots["supply"]):
        rows.append(({flow[l]: 1.0 for l in range(len(lanes)) if lanes.at[l, "origin"] == d}, -np.inf, supply))
    for c, demand in zip(net.customers["id"], net.customers["demand"]):
        rows.append(({flow[l]: 1.0 for l in range(len(lanes)) if lanes.at[l, "destination"] == c}, demand, demand))
    for k in net.carriers.itertuples(index=False):
        mine = {flow[l]: 1.0 for l in range(len(lanes)) if lanes.at[l, "carrier"] == k.id}
        if not math.isnan(k.min_volume):
            rows.append((mine, k.min_volume, np.inf))
        if not math.isnan(k.max_volume):
            rows.append((mine, -np.inf, k.max_volume))
        if not math.isnan(k.max_share):
            rows.append((mine, -np.inf, k.max_share * total_demand))
    matrix = np.zeros((len(rows), len(names)))
    for i, (coefficients, _, _) in enumerate(rows):
        for j, value in coefficients.items():
            matrix[i, j] += value
    outcome = milp(np.array(cost), integrality=np.array(integer), bounds=Bounds(lower, upper),
                   constraints=LinearConstraint(matrix, [r[1] for r in rows], [r[2] for r in rows]),
                   options={"mip_rel_gap": 1e-9})
    return float(outcome.fun) if outcome.status == 0 else None


def reprice(net, result) -> float:
    """The plan's cost from its flows alone: each lane's tariff, at least its minimum charge when used."""
    lanes = net.lanes
    total = 0.0
    for row in result.flows.itertuples(index=False):
        l = lanes.index[(lanes["origin"] == row.origin) & (lanes["destination"] == row.destination)
                        & (lanes["mode"] == row.mode)][0]
        mine = net.rate_breaks[net.rate_breaks["lane"] == l]
        kind = mine["kind"].iloc[0] if len(mine) else "incremental"
        tariff = lane_tariff(float(lanes.at[l, "cost_per_unit"]),
                             list(zip(mine["from_volume"].astype(float), mine["cost_per_unit"].astype(float))),
                             kind, row.flow)
        total += max(tariff, float(lanes.at[l, "minimum_charge"]))
    return total


@pytest.mark.parametrize("seed", range(60))
def test_random_networks_match_the_scipy_reference(seed):
    net = random_network(seed)
    expected = scipy_reference(net)  # SciPy milp (HiGHS) on the model written above
    result = solve(net)
    if expected is None:
        assert result.status is SolveStatus.INFEASIBLE
        return
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(expected, rel=1e-6, abs=1e-5)
    # The plan itself: re-priced from its flows by the sheet's definitions, and every commitment met.
    assert reprice(net, result) == pytest.approx(result.total_cost, rel=1e-6, abs=1e-5)
    assert result.flows["variable_cost"].sum() == pytest.approx(result.total_cost, rel=1e-6, abs=1e-5)
    volume = result.flows.assign(carrier=[
        net.lanes.set_index(["origin", "destination", "mode"]).loc[(o, d, m), "carrier"]
        for o, d, m in zip(result.flows["origin"], result.flows["destination"], result.flows["mode"])
    ]).groupby("carrier")["flow"].sum() if len(result.flows) else {}
    delivered = float(net.customers["demand"].sum())
    for k in net.carriers.itertuples(index=False):
        carried = float(volume.get(k.id, 0.0))
        assert math.isnan(k.min_volume) or carried >= k.min_volume - 1e-6
        assert math.isnan(k.max_volume) or carried <= k.max_volume + 1e-6
        assert math.isnan(k.max_share) or carried <= k.max_share * delivered + 1e-6


def test_the_random_instances_exercise_every_term():
    # Guard against a generator that drifts into trivial instances: across the 60 seeds every kind of term occurs,
    # and both feasible and infeasible instances are compared.
    nets = [random_network(seed) for seed in range(60)]
    kinds = set().union(*(set(n.rate_breaks["kind"]) for n in nets))
    assert kinds == {"incremental", "all_units"}
    assert sum(bool((n.lanes["minimum_charge"] > 0).any()) for n in nets) > 20
    assert sum(bool(len(n.carriers)) for n in nets) > 30
    outcomes = [scipy_reference(n) is None for n in nets[:30]]
    assert any(outcomes) and not all(outcomes)
