"""Figures on a meshed network, where the root's two trees settle few distances and the rest are searched: the
unused lanes nearest to paying are found exactly without searching every lane, and every figure found later (all of
them, or the few above a threshold) equals the full computation, whose figures tests/test_sensitivity_exact.py checks
against ±1 re-solves with SciPy's linprog."""

from __future__ import annotations

import numpy as np
import pytest

from lanesolve.model.network import make_network
from lanesolve.model.sensitivity import analyse_plan, plan_figures
from lanesolve.model.solve import solve


def meshed(seed: int):
    """Depots and customers joined through a mesh of hubs with random lanes between hubs (invented network)."""
    rng = np.random.default_rng(seed)
    hubs = [f"H{i:02d}" for i in range(40)]
    depots = [{"id": f"D{i}", "supply": 60} for i in range(3)]
    customers = [{"id": f"C{i}", "demand": int(rng.integers(5, 25))} for i in range(6)]
    lanes = [{"origin": d["id"], "destination": h, "cost_per_unit": int(rng.integers(1, 30))}
             for d in depots for h in rng.choice(hubs, 4, replace=False)]
    lanes += [{"origin": h, "destination": c["id"], "cost_per_unit": int(rng.integers(1, 30))}
              for c in customers for h in rng.choice(hubs, 4, replace=False)]
    # Cheap direct lanes of small capacity: full in the plan, and one more unit of them saves money.
    lanes += [{"origin": d["id"], "destination": c["id"], "cost_per_unit": int(rng.integers(1, 4)),
               "capacity": int(rng.integers(2, 6))} for d in depots for c in customers if rng.random() < 0.5]
    pairs = {(a, b) for a, b in rng.choice(hubs, (300, 2)) if a != b}
    pairs |= {(b, a) for a, b in pairs}  # both ways: the cheapest way back stays in the mesh, off the root
    lanes += [{"origin": a, "destination": b, "cost_per_unit": int(rng.integers(1, 30)),
               "capacity": int(rng.integers(5, 40))} for a, b in sorted(pairs)]
    return make_network(depots, customers, lanes, hubs=[{"id": h} for h in hubs])


@pytest.mark.parametrize("seed", range(6))
def test_nearest_unused_lanes_and_the_rest_equal_the_full_computation(seed):
    net = meshed(seed)
    result = solve(net)
    full = analyse_plan(net, result)
    unused = full[full["figure"] == "reduced_cost"].reset_index(drop=True)
    shown = 5
    frame, more = plan_figures(net, result, unused_rows=shown)
    assert more is not None and len(more) == len(unused) - shown
    # The trees left figures to search, and the nearest five were found without searching all of them.
    assert not more.exact.all(), "the mesh should leave figures to search; the test would prove nothing"
    near = frame[frame["figure"] == "reduced_cost"].reset_index(drop=True)
    columns = ["item", "value", "value_up", "text"]
    assert near[columns].equals(unused[columns].head(shown))
    # A few above a threshold (the near-miss advice), then every lane (--all-figures): as the full computation.
    threshold = float(unused["value_up"].iloc[shown])
    few = more.nearest_above(threshold, 3)
    expected = unused.iloc[shown:]
    expected = expected[expected["value_up"] > threshold]
    cut = np.sort(expected["value_up"].to_numpy())[:3].max()
    assert sorted(few["item"]) == sorted(expected.loc[expected["value_up"] <= cut, "item"])
    rest = more.rows().reset_index(drop=True)
    assert rest[columns].equals(unused[columns].iloc[shown:].reset_index(drop=True))
    assert more.exact.all()


def test_capacity_figures_on_a_mesh_equal_the_uncapped_search(monkeypatch):
    # The saving of one more unit of a full lane searches only up to the lane's own cost; the figures must equal
    # those of searches without that cap.
    from lanesolve.model import sensitivity

    original = sensitivity._Graph.distance
    compared = 0
    for seed in range(8):
        net = meshed(seed)
        result = solve(net)
        monkeypatch.setattr(sensitivity._Graph, "distance", original)
        capped = analyse_plan(net, result)
        monkeypatch.setattr(sensitivity._Graph, "distance", lambda self, a, b, cap=None: original(self, a, b))
        uncapped = analyse_plan(net, result)
        columns = ["figure", "item", "value", "value_up", "value_down", "text"]
        assert capped[columns].equals(uncapped[columns])
        full = capped["figure"].isin(["lane_capacity_value", "hub_capacity_value"])
        compared += int((full & (capped["value_up"] > 0)).sum())
    assert compared >= 5, "too few full lanes that save money in these meshes: the test would prove little"


def test_near_miss_advice_needs_no_search_beyond_the_rows_when_they_settle_it(monkeypatch):
    # The advice names the three unused lanes nearest to paying; when the rows shown already hold three figures
    # strictly below their last one, no lane beyond can enter, so the lanes beyond are not searched. The advice
    # must still equal the one made from the full computation.
    import dataclasses

    from lanesolve.model.figure_text import UnusedLanes
    from lanesolve.report import advice

    net = meshed(3)
    result = solve(net)
    full = analyse_plan(net, result)
    expected = advice._near_misses(dataclasses.replace(result, sensitivity=full, more_figures=None), "units", "")
    frame, more = plan_figures(net, result, unused_rows=40)
    shown = dataclasses.replace(result, sensitivity=frame, more_figures=more)

    def refuse(self, *args):
        raise AssertionError("searched beyond the rows although they settle the advice")

    monkeypatch.setattr(UnusedLanes, "nearest_above", refuse)
    assert len(expected) == advice.TOP
    assert advice._near_misses(shown, "units", "") == expected
