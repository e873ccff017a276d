"""Infeasibility explained: customers short and the saturated capacity on hand-built cases (the least shortfall
confirmed by networkx maximum flow), structural causes found without calling the solver."""

import networkx as nx
import pytest

import lanesolve.model.solve as solve_module
from lanesolve.model.checks import no_plan_result, presolve_checks
from lanesolve.model.diagnose import dominating_penalty, structural_causes
from lanesolve.model.network import Settings, make_network
from lanesolve.model.analyse import solve_and_analyse

TOL = 1e-6


def bottleneck_case():
    # D (supply 20) reaches C (demand 12) through hub H (capacity 6) and a direct lane capped at 2; K (demand 1)
    # has its own lane. At most 8 units reach C, so C is 4 short and the cut is {D -> C, hub H}.
    return make_network([{"id": "D", "supply": 20}], [{"id": "C", "demand": 12}, {"id": "K", "demand": 1}],
                        [{"origin": "D", "destination": "H", "cost_per_unit": 1},
                         {"origin": "H", "destination": "C", "cost_per_unit": 1},
                         {"origin": "D", "destination": "C", "cost_per_unit": 5, "capacity": 2},
                         {"origin": "D", "destination": "K", "cost_per_unit": 1}],
                        hubs=[{"id": "H", "capacity": 6}])


def test_diagnosis_names_short_customer_and_saturated_capacity():
    net = bottleneck_case()
    assert presolve_checks(net) == []  # nothing structural: only the solver can tell
    result = solve_and_analyse(net)
    assert result.status.value == "infeasible"
    # Independent check (source: networkx maximum_flow): the most that reaches the customers is 9 of 13.
    g = nx.DiGraph()
    g.add_edge("S", "D", capacity=20)
    g.add_edge("D", "H_in", capacity=1e9)
    g.add_edge("H_in", "H", capacity=6)
    g.add_edge("H", "C", capacity=1e9)
    g.add_edge("D", "C", capacity=2)
    g.add_edge("D", "K", capacity=1e9)
    g.add_edge("C", "T", capacity=12)
    g.add_edge("K", "T", capacity=1)
    most = nx.maximum_flow_value(g, "S", "T")
    short = result.diagnosis.short
    assert short["short"].sum() == pytest.approx(13 - most, abs=TOL)
    assert list(short["customer"]) == ["C"]
    cut = result.diagnosis.saturated[result.diagnosis.saturated["bottleneck"]]
    assert set(zip(cut["kind"], cut["item"])) == {("lane", "D -> C"), ("hub", "H")}
    assert any("C would be 4 units short" in m for m in result.messages)
    assert result.to_json()["diagnosis"]["short"] == [{"customer": "C", "demand": 12.0, "short": 4.0}]


def test_diagnosis_names_saturated_depot_supply():
    # Two customers need 8 + 8 from one depot of supply 10 (total check passes through a second, unreachable,
    # depot): 6 units short in all, the depot supply is the cut (hand computation).
    net = make_network([{"id": "D", "supply": 10}, {"id": "Far", "supply": 50}],
                       [{"id": "A", "demand": 8}, {"id": "B", "demand": 8}],
                       [{"origin": "D", "destination": "A", "cost_per_unit": 1},
                        {"origin": "D", "destination": "B", "cost_per_unit": 2}])
    result = solve_and_analyse(net)
    assert result.status.value == "infeasible"
    assert result.diagnosis.short["short"].sum() == pytest.approx(6.0, abs=TOL)
    cut = result.diagnosis.saturated[result.diagnosis.saturated["bottleneck"]]
    assert list(zip(cut["kind"], cut["item"])) == [("depot", "D")]


def test_structural_causes_are_reported_without_the_solver(monkeypatch):
    def forbidden(*args, **kwargs):
        raise AssertionError("the solver must not run for a structural cause")

    monkeypatch.setattr(solve_module, "build_sparse_model", forbidden)
    net = make_network([{"id": "Shut", "supply": 20, "status": "closed"}, {"id": "Open", "supply": 20}],
                       [{"id": "C", "demand": 5}],
                       [{"origin": "Shut", "destination": "C", "cost_per_unit": 1},
                        {"origin": "Open", "destination": "X", "cost_per_unit": 1}],
                       hubs=[{"id": "X"}])
    reasons = presolve_checks(net)
    assert any("every active lane into it starts at a closed node (Shut)" in r for r in reasons)
    causes, notes = structural_causes(net)
    assert any("hub 'X' has lanes in but no active lane out" in n for n in notes)
    result = no_plan_result(net, reasons)
    assert result.diagnosis.structural == reasons


def test_too_many_open_nodes_for_the_limit_is_structural():
    net = make_network([{"id": "A", "supply": 5, "status": "open"}, {"id": "B", "supply": 5, "status": "open"}],
                       [{"id": "C", "demand": 1}], [{"origin": "A", "destination": "C", "cost_per_unit": 1}],
                       settings=Settings(max_open_depots=1))
    assert any("2 depots are marked open but max_open_depots is 1" in r for r in presolve_checks(net))


def test_dominating_penalty_exceeds_every_path_cost():
    net = bottleneck_case()
    # Landed cost per unit into each node: H 1, C max(1, 5) = 5, K 1 -> any simple path costs at most 7.
    assert dominating_penalty(net, with_decisions=False) == pytest.approx(1 + 7, abs=TOL)
