"""The array path of :func:`lanesolve.model.solve.solve` (pure LP, CBC without PuLP objects) against the PuLP path and
networkx: the same LP row for row, the same optimum, duals, sensitivity figures and status; its failures typed."""

from __future__ import annotations

import math
import random
import warnings
from pathlib import Path

import networkx as nx
import numpy as np
import pulp
import pytest

from lanesolve.model import solve as solve_module
from lanesolve.model.analyse import solve_and_analyse
from lanesolve.errors import SolverError
from lanesolve.model.formulation import array_path_applies, build_lp_arrays, build_model
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import read_cbc_solution, solve

TOL = 1e-6


def random_network(seed: int, real_costs: bool = False):
    """An invented depot -> hub -> customer network with direct lanes, lane and hub capacities, handling costs,
    inactive lanes, customer-to-customer transfers and some customers with an unmet penalty.

    Integer data by default, so networkx's network simplex works on it exactly. ``real_costs`` draws lane costs
    with six decimals instead: then no two plans cost the same (with probability one), so the optimal plan is
    unique and so is every figure the uniqueness test derives from it."""
    rng = random.Random(seed)
    depots = [{"id": f"Depot {i}", "supply": rng.randint(20, 90), "handling_cost": rng.choice([0, 0, 1, 2])}
              for i in range(rng.randint(2, 4))]
    hubs = [{"id": f"Hub {h}", "capacity": rng.choice([math.inf, rng.randint(10, 60)]),
             "handling_cost": rng.choice([0, 1, 3])} for h in range(rng.randint(0, 3))]
    customers = [{"id": f"Cust {j}", "demand": rng.randint(5, 30)} for j in range(rng.randint(3, 8))]
    for customer in rng.sample(customers, rng.randint(0, 2)):
        customer["unmet_penalty"] = rng.randint(20, 80)
    lanes = []

    def lane(origin, destination):
        cost = round(rng.uniform(1, 15), 6) if real_costs else rng.randint(1, 15)
        record = {"origin": origin, "destination": destination, "cost_per_unit": cost}
        if rng.random() < 0.25:
            record["capacity"] = rng.randint(0, 40)
        if rng.random() < 0.05:
            record["active"] = False
        lanes.append(record)

    for d in depots:
        for h in hubs:
            lane(d["id"], h["id"])
        for c in rng.sample(customers, rng.randint(1, len(customers))):
            lane(d["id"], c["id"])
    for h in hubs:
        for c in rng.sample(customers, rng.randint(1, len(customers))):
            lane(h["id"], c["id"])
    for _ in range(rng.randint(0, 2)):
        a, b = rng.sample(customers, 2)
        lane(a["id"], b["id"])
    return make_network(depots, customers, lanes, hubs=hubs)


def networkx_cost(net) -> float | None:
    """Min-cost flow of ``net`` by networkx (network simplex), or None when no flow meets every demand.

    A super source S sends the total demand: S -> depot (capacity supply, weight the depot's handling cost: our
    networks have no lane into a depot, so all its outflow is its own supply), S -> customer for units short
    (weight the penalty); a hub is split into in -> out (capacity, weight its handling cost).
    """
    g = nx.DiGraph()
    total = int(net.customers["demand"].sum())
    g.add_node("S", demand=-total)
    for d in net.depots.itertuples():
        g.add_edge("S", d.id, capacity=int(d.supply), weight=int(d.handling_cost))
    for c in net.customers.itertuples():
        g.add_node(c.id, demand=int(c.demand))
        if not math.isnan(c.unmet_penalty):
            g.add_edge("S", ("short", c.id), capacity=int(c.demand), weight=int(c.unmet_penalty))
            g.add_edge(("short", c.id), c.id, weight=0)
    for h in net.hubs.itertuples():
        attrs = {} if math.isinf(h.capacity) else {"capacity": int(h.capacity)}
        g.add_edge(("in", h.id), h.id, weight=int(h.handling_cost), **attrs)
    hubs = set(net.hubs["id"])
    for i, lane in enumerate(net.active_lanes.itertuples()):
        head = ("in", lane.destination) if lane.destination in hubs else lane.destination
        # One intermediate node per lane keeps parallel lanes apart in a DiGraph.
        attrs = {} if math.isinf(lane.capacity) else {"capacity": int(lane.capacity)}
        g.add_edge(lane.origin, ("lane", i), weight=int(lane.cost_per_unit), **attrs)
        g.add_edge(("lane", i), head, weight=0)
    try:
        return float(nx.min_cost_flow_cost(g))
    except nx.NetworkXUnfeasible:
        return None


def pulp_rows(net):
    """The PuLP problem of build_model as plain tuples: rows (name, sense, rhs, {column: coefficient}), columns
    (name, upper bound, objective)."""
    problem = build_model(net).problem
    sense = {pulp.LpConstraintLE: "L", pulp.LpConstraintGE: "G", pulp.LpConstraintEQ: "E"}
    listed = problem.constraints() if callable(problem.constraints) else list(problem.constraints.values())
    rows = [(row.name, sense[row.sense], -row.constant, {var.name: coef for var, coef in row.items()})
            for row in listed]
    objective = {var.name: coef for var, coef in problem.objective.items()}
    upper = [(var.name, math.inf if var.upBound is None else float(var.upBound)) for var in problem.variables()]
    return rows, [(n, u, objective.get(n, 0.0)) for n, u in upper]


@pytest.mark.parametrize("seed", range(12))
def test_arrays_are_the_pulp_model_row_for_row(seed):
    # Reference: the PuLP problem lanesolve.model.formulation.build_model builds (what PuLP writes to CBC on the PuLP path).
    net = random_network(seed)
    arrays = build_lp_arrays(net)
    rows, columns = pulp_rows(net)
    assert arrays.row_names == [r[0] for r in rows]
    assert arrays.sense.tolist() == [r[1] for r in rows]
    assert np.allclose(arrays.rhs, [r[2] for r in rows], atol=0)
    # PuLP lists its variables sorted by name (flow_10 before flow_2); the arrays keep lane order.
    assert sorted(arrays.column_names) == [c[0] for c in columns]
    bounds = {name: (upper, cost) for name, upper, cost in columns}
    assert {n: (u, c) for n, u, c in zip(arrays.column_names, arrays.upper, arrays.objective)} == bounds
    for i, (_, _, _, entries) in enumerate(rows):
        mine = {arrays.column_names[j]: arrays.coefficient[k] for j in range(arrays.n_columns)
                for k in range(arrays.start[j], arrays.start[j + 1]) if arrays.row_of[k] == i}
        assert mine == entries


@pytest.mark.parametrize("seed", range(25))
def test_array_path_gives_the_pulp_path_optimum(seed):
    # Integer costs: ties between plans are common (even in how the cost splits into transport and handling), so
    # only the status and the cost must agree; the breakdown must add up to the cost.
    net = random_network(seed)
    assert array_path_applies(net)
    fast, slow = solve(net, sensitivity=False), solve(net, fast=False, sensitivity=False)
    assert fast.status is slow.status
    if not fast.status.has_plan:
        return
    assert fast.total_cost == pytest.approx(slow.total_cost, rel=1e-9, abs=TOL)
    assert set(fast.cost_breakdown) == set(slow.cost_breakdown)
    assert sum(fast.cost_breakdown.values()) == pytest.approx(fast.total_cost, abs=TOL)


@pytest.mark.parametrize("seed", range(25))
def test_array_path_gives_the_pulp_path_duals_and_figures(seed):
    # Real costs: the optimal plan is unique (see random_network), so both paths hold the same plan, the
    # uniqueness test marks the same duals, and a dual marked unique is the same in every optimal dual solution.
    net = random_network(seed, real_costs=True)
    fast, slow = solve_and_analyse(net), solve_and_analyse(net, fast=False)
    assert fast.status is slow.status
    if fast.status is not SolveStatus.OPTIMAL:
        return
    assert fast.total_cost == pytest.approx(slow.total_cost, rel=1e-9, abs=TOL)
    for name in slow.cost_breakdown:
        assert fast.cost_breakdown[name] == pytest.approx(slow.cost_breakdown[name], abs=TOL)
    key = ["origin", "destination", "mode"]
    merged = fast.flows.merge(slow.flows, on=key, how="outer", suffixes=("_fast", "_slow")).fillna(0.0)
    assert np.allclose(merged["flow_fast"], merged["flow_slow"], atol=TOL)
    a, b = fast.sensitivity, slow.sensitivity
    assert len(a) > 0
    assert a[["figure", "item", "unique"]].values.tolist() == b[["figure", "item", "unique"]].values.tolist()
    for side in ("value_up", "value_down"):
        assert np.allclose(a[side].to_numpy(), b[side].to_numpy(), atol=TOL, equal_nan=True)
    assert a["text"].tolist() == b["text"].tolist()


@pytest.mark.parametrize("seed", range(25))
def test_array_path_cost_equals_networkx_min_cost_flow(seed):
    # Reference: networkx.min_cost_flow_cost (network simplex) on the same network, see networkx_cost.
    net = random_network(seed)
    expected = networkx_cost(net)
    result = solve(net, sensitivity=False)
    if expected is None:
        assert result.status is SolveStatus.INFEASIBLE
        return
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(expected, abs=TOL)
    # The plan itself is feasible: every customer gets its demand less what is short, no lane above capacity.
    received = result.flows.groupby("destination")["flow"].sum()
    sent = result.flows.groupby("origin")["flow"].sum()
    short = dict(zip(result.unmet["customer"], result.unmet["quantity"]))
    for c in net.customers.itertuples():
        net_in = received.get(c.id, 0.0) - sent.get(c.id, 0.0) + short.get(c.id, 0.0)
        assert net_in == pytest.approx(c.demand, abs=TOL)
    assert (result.flows["flow"] <= result.flows["capacity"] + TOL).all()


def test_hard_infeasible_network_is_infeasible_on_the_array_path_with_a_diagnosis():
    # 10 units of supply, 16 of hard demand: no plan (arithmetic), as on the PuLP path.
    net = make_network([{"id": "D", "supply": 10}], [{"id": "A", "demand": 8}, {"id": "B", "demand": 8}],
                       [{"origin": "D", "destination": "A", "cost_per_unit": 1},
                        {"origin": "D", "destination": "B", "cost_per_unit": 2}])
    fast, slow = solve_and_analyse(net), solve_and_analyse(net, fast=False)
    assert fast.status is SolveStatus.INFEASIBLE and slow.status is SolveStatus.INFEASIBLE
    assert fast.diagnosis.short["short"].sum() == pytest.approx(6.0, abs=TOL)
    assert all(math.isnan(v) for v in fast.cost_breakdown.values())


def test_networks_with_decisions_take_the_pulp_path():
    fixed = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
                         [{"origin": "D", "destination": "C", "cost_per_unit": 2, "fixed_cost": 10}])
    decide = make_network([{"id": "D", "supply": 8, "fixed_cost": 4}], [{"id": "C", "demand": 5}],
                          [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    for net in (fixed, decide):
        assert not array_path_applies(net)
        with pytest.raises(SolverError, match="pure LPs only"):
            build_lp_arrays(net)
    # 5 units at 2 plus the fixed charge 10 (arithmetic).
    assert solve(fixed).total_cost == pytest.approx(20.0, abs=TOL)


def cbc_backend():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        return pulp.PULP_CBC_CMD(mip=False, msg=False)


@pytest.mark.parametrize("first_line, is_mip, expected", [
    # CBC's solution-file status words as PuLP's COIN_CMD.get_status reads them (pulp/apis/coin_api.py).
    ("Optimal - objective value 12.5", False, SolveStatus.OPTIMAL),
    ("Infeasible - objective value 3", False, SolveStatus.INFEASIBLE),
    ("Unbounded - objective value 0", False, SolveStatus.UNBOUNDED),
    ("Stopped on time - objective value 12.5", False, SolveStatus.NOT_SOLVED),  # a stopped LP is not trusted
    ("Stopped on time - objective value 12.5", True, SolveStatus.FEASIBLE),
    ("Stopped on time (no integer solution - continuous used) - objective value 3", True, SolveStatus.NOT_SOLVED),
])
def test_solution_file_status_is_honest(tmp_path, first_line, is_mip, expected):
    path = tmp_path / "x.sol"
    path.write_text(f"{first_line}\n      0 R0               4                       0\n"
                    "**    1 R1               2                      -1\n      0 X0               4        3.5\n")
    answer = read_cbc_solution(path, cbc_backend(), n_rows=2, n_columns=1, is_mip=is_mip)
    assert answer.status is expected
    assert answer.activity.tolist() == [4.0, 2.0] and answer.dual.tolist() == [0.0, -1.0]
    assert answer.value.tolist() == [4.0] and answer.reduced_cost.tolist() == [3.5]


def test_the_same_cbc_options_as_pulp():
    # Reference: the command line PuLP 3.3 logs for PULP_CBC_CMD(mip=False, timeLimit=5) on an MPS file
    # (pulp/apis/coin_api.py solve_CBC): "<mps> -sec 5 -timeMode elapsed -initialSolve -printingOptions all
    # -solution <sol>", measured while writing this test.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        backend = pulp.PULP_CBC_CMD(mip=False, msg=False, timeLimit=5)
    command = solve_module.cbc_command(backend, "a.mps", "a.sol")
    assert command[0] == backend.path
    assert command[1:] == ["a.mps", "-sec", "5", "-timeMode", "elapsed", "-initialSolve", "-printingOptions", "all",
                           "-solution", "a.sol"]


def test_cbc_failure_on_the_array_path_is_a_solver_error(monkeypatch):
    class Failed:
        returncode = 1

    monkeypatch.setattr(solve_module.subprocess, "run", lambda *args, **kwargs: Failed())
    net = random_network(0)
    with pytest.raises(SolverError, match="CBC solver failed"):
        solve(net)


def test_unreadable_solution_on_the_array_path_is_a_solver_error(monkeypatch):
    def truncated(command, **kwargs):
        Path(command[command.index("-solution") + 1]).write_text("Optimal - objective value 1\n   0 R0 x\n")

        class Done:
            returncode = 0
        return Done()

    monkeypatch.setattr(solve_module.subprocess, "run", truncated)
    with pytest.raises(SolverError, match="answer could not be read"):
        solve(random_network(0))


def test_missing_cbc_program_on_the_array_path_is_a_solver_error(monkeypatch):
    def missing(*args, **kwargs):
        raise FileNotFoundError(2, "No such file or directory")

    monkeypatch.setattr(solve_module.subprocess, "run", missing)
    with pytest.raises(SolverError, match="could not be started"):
        solve(random_network(0))


def test_settings_units_and_currency_reach_the_array_path_sentences():
    net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 2.5, "mode": "rail"}],
                       settings=Settings(units="pallets", currency="EUR"))
    texts = solve_and_analyse(net).sensitivity["text"].tolist()
    # One customer served by one lane: one more or one less unit changes the cost by the lane's 2.5 (arithmetic).
    assert "One more or one less unit (pallets) of demand at customer C changes the cost by 2.50 EUR." in texts
