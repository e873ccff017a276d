"""Pre-solve checks on carrier commitments (lanesolve/model/carrier_checks.py): each fires on a network that has no
plan -- confirmed by solving it -- and stays silent on one that has. Invented network; the arithmetic is beside each
case."""

from __future__ import annotations

import pytest

from lanesolve.model.carrier_checks import presolve_checks
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve
from lanesolve.pipeline import _solve_one
from lanesolve.progress import no_progress

DEPOTS = [{"id": "Kelby Yard", "supply": 200}]
CUSTOMERS = [{"id": "Tarn Foods", "demand": 60}, {"id": "Wexo Mart", "demand": 30}]


def lanes(**capacity):
    return [{"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "road", "cost_per_unit": 5,
             "carrier": "Alpha", "capacity": capacity.get("road", float("inf"))},
            {"origin": "Kelby Yard", "destination": "Tarn Foods", "mode": "rail", "cost_per_unit": 6,
             "carrier": "Brava"},
            {"origin": "Kelby Yard", "destination": "Wexo Mart", "mode": "road", "cost_per_unit": 4,
             "carrier": "Brava"}]


def check(carriers, **capacity):
    net = make_network(DEPOTS, CUSTOMERS, lanes(**capacity), carriers=carriers)
    return net, presolve_checks(net)


def test_a_carrier_whose_lanes_cannot_carry_its_minimum():
    # Alpha's one lane holds 25, its minimum is 40.
    net, reasons = check([{"id": "Alpha", "min_volume": 40}], road=25)
    assert len(reasons) == 1 and "Carrier Alpha must carry at least 40 units (Carriers row 2)" in reasons[0]
    assert "at most 25 units" in reasons[0]
    assert solve(net).status is SolveStatus.INFEASIBLE  # the check is certain


def test_a_carrier_named_on_no_lane_cannot_meet_a_minimum():
    net, reasons = check([{"id": "Corro", "min_volume": 1}])
    assert "Carrier Corro must carry at least 1 units" in reasons[0] and "at most 0 units" in reasons[0]
    assert solve(net).status is SolveStatus.INFEASIBLE


def test_minimum_volumes_above_the_demand_their_lanes_reach():
    # Alpha reaches only Tarn Foods (60); a minimum of 70 cannot be met. Alpha 50 + Brava 50 = 100 > 90 in all.
    _, reasons = check([{"id": "Alpha", "min_volume": 70}])
    assert any("only reach customers needing 60 units" in r for r in reasons)
    net, reasons = check([{"id": "Alpha", "min_volume": 50}, {"id": "Brava", "min_volume": 50}])
    assert reasons == ["Carriers Alpha, Brava must carry at least 100 units together, but their lanes reach "
                       "customers needing 90 units in all (lower their min_volume)."]
    assert solve(net).status is SolveStatus.INFEASIBLE


def test_largest_shares_summing_under_one():
    # Every lane into a customer is Alpha's or Brava's; 0.4 + 0.5 = 0.9 < 1.
    net, reasons = check([{"id": "Alpha", "max_share": 0.4}, {"id": "Brava", "max_share": 0.5}])
    assert len(reasons) == 1 and "add up to 0.9, under 1" in reasons[0]
    assert solve(net).status is SolveStatus.INFEASIBLE


def test_commitments_that_can_be_met_raise_nothing():
    net, reasons = check([{"id": "Alpha", "min_volume": 50, "max_share": 0.7}, {"id": "Brava", "max_share": 0.5}])
    assert reasons == []
    assert solve(net).status is SolveStatus.OPTIMAL


def test_the_pipeline_reports_the_reason_before_solving():
    net, _ = check([{"id": "Alpha", "max_share": 0.4}, {"id": "Brava", "max_share": 0.5}])
    result = _solve_one(net, None, False, no_progress, "solving")
    assert result.status is SolveStatus.INFEASIBLE
    assert any("under 1" in message for message in result.messages)
