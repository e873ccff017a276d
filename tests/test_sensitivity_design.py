"""Figures of plans with yes/no and trip decisions describe the plan written, with its decisions fixed.

On 36 random invented design networks (fixed lane charges, depots to open or close, minimum volumes, whole trips,
single sourcing) every figure names only an item that is binding or unused in the written plan, and equals the ±1
re-solve of the LP with the written plan's decisions fixed (SciPy ``linprog`` with HiGHS, tests/test_sensitivity_exact
.py's reference LP with the lane bounds those decisions leave).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from test_sensitivity_exact import ReferenceLp

from lanesolve.model.analyse import solve_and_analyse
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.sensitivity import FIXED_BASIS

TOL = 1e-7


def design_network(seed: int):
    """Small invented design networks, whole-unit data."""
    rng = np.random.default_rng(500 + seed)
    depots = [{"id": f"D{k}", "supply": float(rng.integers(10, 40)),
               "fixed_cost": float(rng.choice([0, 15, 40])), "status": str(rng.choice(["", "decide", "open"]))}
              for k in range(rng.integers(2, 4))]
    customers = [{"id": f"C{k}", "demand": float(rng.integers(1, 12)), "single_source": bool(rng.random() < 0.25),
                  "unmet_penalty": 30.0 if rng.random() < 0.3 else math.nan} for k in range(rng.integers(2, 5))]
    lanes = []
    for d in depots:
        for c in customers:
            if rng.random() < 0.8:
                lane = {"origin": d["id"], "destination": c["id"], "cost_per_unit": float(rng.integers(1, 6)),
                        "capacity": float(rng.integers(4, 15)) if rng.random() < 0.3 else math.inf}
                roll = rng.random()
                if roll < 0.25:
                    lane["fixed_cost"] = float(rng.integers(5, 30))
                elif roll < 0.4:
                    lane["trip_capacity"], lane["cost_per_trip"] = float(rng.integers(3, 8)), float(rng.integers(2, 9))
                elif roll < 0.5:
                    lane["min_volume"], lane["fixed_cost"] = float(rng.integers(1, 4)), 1.0
                lanes.append(lane)
    limit = float(len(depots) - 1) if seed % 4 == 0 else None
    return make_network(depots, customers, lanes, settings=Settings(max_open_depots=limit))


def fixed_bounds(net, result):
    """Per active lane, the (low, high) bounds the written plan's decisions leave (the model's docstring)."""
    lanes = net.active_lanes
    flows = {(o, d, m): x for o, d, m, x in zip(result.flows["origin"], result.flows["destination"],
                                                result.flows["mode"], result.flows["flow"])}
    closed = set(net.depots.loc[net.depots["status"] == "closed", "id"])
    closed |= set(result.open_nodes.loc[~result.open_nodes["open"].astype(bool), "node"])
    single = set(net.customers.loc[net.customers["single_source"], "id"])
    bounds = []
    for lane in lanes.itertuples():
        x = flows.get((lane.origin, lane.destination, lane.mode), 0.0)
        low, high = 0.0, float(lane.capacity)
        yes_no = lane.fixed_cost > 0 or lane.min_volume > 0 or lane.destination in single
        trips = math.isfinite(lane.trip_capacity) and lane.cost_per_trip > 0
        if lane.origin in closed or lane.destination in closed or (yes_no and x == 0) or (trips and x == 0):
            high = 0.0
        if yes_no and x > 0:
            low = float(lane.min_volume)
        if trips and x > 0:
            high = min(high, math.ceil(x / lane.trip_capacity - 1e-9) * lane.trip_capacity)
        bounds.append((low, high))
    return bounds


def test_design_figures_name_only_binding_or_unused_items_and_equal_the_fixed_lp_resolves():
    checked = 0
    for seed in range(44):
        net = design_network(seed)
        result = solve_and_analyse(net)
        if result.status is not SolveStatus.OPTIMAL:
            continue
        checked += 1
        frame = result.sensitivity
        assert (frame["basis"] == FIXED_BASIS).all()
        bounds = fixed_bounds(net, result)
        reference = ReferenceLp(net, bounds)
        base = reference.cost()
        assert base == pytest.approx(result.total_cost - sum(
            v for k, v in result.cost_breakdown.items() if k in ("fixed_lane", "fixed_node", "trips")), abs=1e-6)
        lanes = net.active_lanes
        label = {f"{o} -> {d}": k for k, (o, d) in enumerate(zip(lanes["origin"], lanes["destination"]))}
        flow = {f"{o} -> {d}": x for o, d, x in zip(result.flows["origin"], result.flows["destination"],
                                                    result.flows["flow"])}
        net_out = dict(zip(result.nodes["node"], result.nodes["shipped"] - result.nodes["received"]))
        supply = dict(zip(net.depots["id"], net.depots["supply"]))
        trips = {f"{o} -> {d}": (t, r) for o, d, t, r in zip(result.trips["origin"], result.trips["destination"],
                                                              result.trips["trips"], result.trips["trip_capacity"])}

        def same(figure, expected):
            assert (math.isinf(figure) and math.isinf(expected)) or figure == pytest.approx(expected, abs=TOL)

        for r in frame.itertuples(index=False):
            if r.figure == "marginal_cost":
                q = float(net.customers.set_index("id").at[r.item, "demand"])
                same(r.value_up, reference.cost(demand={r.item: q + 1}) - base)
                same(r.value_down, base - reference.cost(demand={r.item: q - 1}))
            elif r.figure == "supply_value":
                assert net_out[r.item] == pytest.approx(supply[r.item])  # binding in the written plan
                same(r.value_up, base - reference.cost(capacity={r.item: supply[r.item] + 1}))
                same(r.value_down, reference.cost(capacity={r.item: supply[r.item] - 1}) - base)
            elif r.figure in ("lane_capacity_value", "trip_capacity_value"):
                k = label[r.item]
                high = bounds[k][1]
                assert flow[r.item] == pytest.approx(high)  # at its limit in the written plan
                if r.figure == "trip_capacity_value":
                    assert trips[r.item][0] * trips[r.item][1] == pytest.approx(flow[r.item])  # the trips are full
                same(r.value_up, base - reference.cost(lane_cap=(k, high + 1)))
                same(r.value_down, reference.cost(lane_cap=(k, high - 1)) - base)
            elif r.figure == "reduced_cost":
                assert flow.get(r.item, 0.0) == 0.0 and bounds[label[r.item]][1] > 0  # unused, and may be used
                same(r.value_up, reference.cost(force_lane=label[r.item]) - base)
            else:
                raise AssertionError(r.figure)
    assert checked >= 30
