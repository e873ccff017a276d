"""The one model (:class:`lanesolve.model.arrays.SparseModel`) against outside references: its LP solved by SciPy
from the arrays matches networkx's min-cost flow; its PuLP export solved by PuLP gives lanesolve's optimum, LP and
MIP; HiGHS in memory, the CBC program and SciPy give the same duals on LPs whose duals are unique."""

from __future__ import annotations

import math
import random
import warnings

import networkx as nx
import numpy as np
import pulp
import pytest
from scipy.optimize import linprog

from lanesolve.model.arrays import to_pulp
from lanesolve.model.analyse import solve_and_analyse
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve, solve_model

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


def design_network(seed: int):
    """An invented network with every design decision: depots to decide (one marked open with a fixed cost, paid
    whatever the plan), a hub to decide and one closed, fixed lane charges, minimum volumes, whole trips, a
    single-sourced customer, a depot-to-depot transfer, a limit on open depots and a customer with an unmet penalty."""
    rng = random.Random(500 + seed)
    depots = [{"id": f"D{i}", "supply": rng.randint(30, 70), "fixed_cost": rng.randint(20, 120)} for i in range(3)]
    depots[0]["status"] = "open"
    hubs = [{"id": "H", "capacity": rng.randint(30, 80), "fixed_cost": rng.randint(10, 60)},
            {"id": "Shut", "status": "closed"}]
    customers = [{"id": f"C{j}", "demand": rng.randint(5, 25)} for j in range(4)]
    customers[0]["single_source"] = True
    customers[1]["unmet_penalty"] = 40
    lanes = []
    for d in depots:
        lanes.append({"origin": d["id"], "destination": "H", "cost_per_unit": rng.randint(1, 3)})
        lanes.append({"origin": d["id"], "destination": "Shut", "cost_per_unit": 1})
        for c in customers:
            lane = {"origin": d["id"], "destination": c["id"], "cost_per_unit": rng.randint(2, 9)}
            if rng.random() < 0.4:
                lane.update(trip_capacity=rng.randint(6, 12), cost_per_trip=rng.randint(5, 20))
            if rng.random() < 0.3:
                lane.update(fixed_cost=rng.randint(5, 40), min_volume=rng.randint(1, 5))
            lanes.append(lane)
    lanes.append({"origin": "D1", "destination": "D2", "cost_per_unit": 1})  # a transfer into a decided depot
    for c in customers:
        lanes.append({"origin": "H", "destination": c["id"], "cost_per_unit": rng.randint(1, 3)})
        lanes.append({"origin": "Shut", "destination": c["id"], "cost_per_unit": 0})
    net = make_network(depots, customers, lanes, hubs=hubs)
    net.settings.max_open_depots = 2
    net.settings.mip_gap = 0.0  # compare proven optima
    return net


def scipy_lp(model):
    """``scipy.optimize.linprog`` (HiGHS) on the model's own arrays: (result, row duals in model row order)."""
    equal = model.row_lower == model.row_upper
    at_most = np.isinf(model.row_lower)
    assert (equal | at_most).all(), "a pure LP here has only equations and at-most rows"
    res = linprog(model.cost, A_ub=model.matrix[at_most] if at_most.any() else None,
                  b_ub=model.row_upper[at_most] if at_most.any() else None,
                  A_eq=model.matrix[equal] if equal.any() else None,
                  b_eq=model.row_lower[equal] if equal.any() else None,
                  bounds=np.column_stack([model.lower, model.upper]), method="highs")
    duals = np.zeros(model.n_rows)
    if res.status == 0:
        if equal.any():
            duals[equal] = res.eqlin.marginals
        if at_most.any():
            duals[at_most] = res.ineqlin.marginals
    return res, duals


@pytest.mark.parametrize("seed", range(25))
def test_model_arrays_solved_by_scipy_give_the_networkx_min_cost(seed):
    # Reference: networkx.min_cost_flow_cost (network simplex) on the same network (networkx_cost). The arrays are
    # handed to SciPy's linprog as they are, so this checks the model itself, not lanesolve's solver glue.
    net = random_network(seed)
    model = build_sparse_model(net)
    assert not model.is_mip
    expected = networkx_cost(net)
    res, _ = scipy_lp(model)
    if expected is None:
        assert res.status == 2  # linprog: infeasible
        return
    assert res.status == 0
    assert res.fun == pytest.approx(expected, abs=TOL)


@pytest.mark.parametrize("solver", ["cbc", "highs"])
@pytest.mark.parametrize("seed", range(25))
def test_solve_gives_the_networkx_min_cost_and_a_feasible_plan(seed, solver):
    if solver == "highs":
        pytest.importorskip("highspy")
    # Reference: networkx.min_cost_flow_cost (network simplex) on the same network, see networkx_cost.
    net = random_network(seed)
    expected = networkx_cost(net)
    result = solve(net, solver=solver)
    if expected is None:
        assert result.status is SolveStatus.INFEASIBLE
        return
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(expected, abs=TOL)
    assert sum(result.cost_breakdown.values()) == pytest.approx(result.total_cost, abs=TOL)
    # The plan itself is feasible: every customer gets its demand less what is short, no lane above capacity.
    received = result.flows.groupby("destination")["flow"].sum()
    sent = result.flows.groupby("origin")["flow"].sum()
    short = dict(zip(result.unmet["customer"], result.unmet["quantity"]))
    for c in net.customers.itertuples():
        net_in = received.get(c.id, 0.0) - sent.get(c.id, 0.0) + short.get(c.id, 0.0)
        assert net_in == pytest.approx(c.demand, abs=TOL)
    assert (result.flows["flow"] <= result.flows["capacity"] + TOL).all()


def pulp_optimum(model) -> tuple[int, float]:
    """PuLP's own route on the exported problem: its LP writer, its CBC call and its reader (status, objective)."""
    problem = to_pulp(model)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        problem.solve(pulp.PULP_CBC_CMD(msg=False, gapRel=0.0))
    return problem.status, pulp.value(problem.objective)


@pytest.mark.parametrize("kind, seed", [("lp", s) for s in range(6)] + [("design", s) for s in range(6)])
def test_pulp_export_gives_the_same_optimum_as_the_direct_path(kind, seed):
    # Reference: PuLP's own model writer and solution reader on the exported problem (pulp_optimum), against
    # lanesolve's MPS writer (CBC) and its in-memory HiGHS path on the same SparseModel.
    net = random_network(seed, real_costs=True) if kind == "lp" else design_network(seed)
    model = build_sparse_model(net)
    assert model.is_mip == (kind == "design")
    status, objective = pulp_optimum(model)
    result = solve(net)
    if status != pulp.LpStatusOptimal:
        assert status == pulp.LpStatusInfeasible and result.status is SolveStatus.INFEASIBLE
        return
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(objective, rel=1e-9, abs=TOL)
    if kind == "design":
        assert result.open_nodes.set_index("node").loc["D0", "open"]  # marked open: open, charge paid
        assert not result.open_nodes.set_index("node").loc["Shut", "open"]
        assert result.cost_breakdown["fixed_node"] >= net.depots.at[0, "fixed_cost"]
    highs = pytest.importorskip("highspy") and solve(net, solver="highs")
    assert highs.total_cost == pytest.approx(objective, rel=1e-9, abs=TOL)


def test_exported_names_carry_the_family_prefixes():
    models = [build_sparse_model(design_network(seed)) for seed in range(6)]
    names = set()
    for model in models:
        problem = to_pulp(model)
        exported = [constraint.name for constraint in problem.constraints()]
        assert exported == model.row_names  # one row, one constraint, same name, same order
        names.update(exported)
    for prefix in ("supply_", "balance_", "hub_flow_", "hub_cap_", "link_", "min_volume_", "single_source_",
                   "trip_", "open_out_depot_", "open_in_depot_", "open_out_hub_", "open_link_depot_",
                   "open_link_hub_", "max_open_depots"):
        assert any(name.startswith(prefix) for name in names), prefix
    problem = to_pulp(models[0])
    kinds = {var.name.rsplit("_", 1)[0]: var.cat for var in problem.variables()}
    assert kinds["flow"] == pulp.LpContinuous and kinds["use"] == pulp.LpInteger
    assert kinds["open_depot"] == pulp.LpInteger and kinds["trips"] == pulp.LpInteger
    # The fixed charge of the depot marked open is the objective's constant.
    assert problem.objective.constant == pytest.approx(design_network(0).depots.at[0, "fixed_cost"])


def primal_nondegenerate(model, values) -> bool:
    """True when the basic solution ``values`` has as many columns strictly inside their bounds plus rows strictly
    inside theirs as the model has rows: then the optimal duals are unique (primal nondegeneracy; Bertsimas &
    Tsitsiklis, Introduction to Linear Optimization, 1997, section 4.4, recalled from memory)."""
    inside = (values > model.lower + 1e-7) & (values < model.upper - 1e-7)
    activity = model.matrix @ values
    slack = (activity > model.row_lower + 1e-7) & (activity < model.row_upper - 1e-7)
    return int(inside.sum() + slack.sum()) == model.n_rows


@pytest.mark.parametrize("solver", ["cbc", "highs"])
def test_duals_and_reduced_costs_equal_scipy_where_unique(solver):
    if solver == "highs":
        pytest.importorskip("highspy")
    # Reference: scipy.optimize.linprog's marginals (d objective / d right-hand side, HiGHS inside SciPy) on the
    # same arrays, and the other solver of lanesolve. Compared only where the duals are unique (nondegenerate plan).
    other = "highs" if solver == "cbc" else "cbc"
    compared = 0
    for seed in range(40):
        net = random_network(seed, real_costs=True)
        model = build_sparse_model(net)
        answer = solve_model(model, solver)
        if answer.status is not SolveStatus.OPTIMAL or not primal_nondegenerate(model, answer.value):
            continue
        res, duals = scipy_lp(model)
        np.testing.assert_allclose(answer.row_dual, duals, atol=1e-7)
        np.testing.assert_allclose(answer.reduced_cost, res.lower.marginals + res.upper.marginals, atol=1e-7)
        second = solve_model(model, other)
        np.testing.assert_allclose(answer.row_dual, second.row_dual, atol=1e-7)
        np.testing.assert_allclose(answer.reduced_cost, second.reduced_cost, atol=1e-7)
        compared += 1
    assert compared >= 5  # measured while writing this test: 12 of the 40 seeds are nondegenerate


@pytest.mark.parametrize("solver", ["cbc", "highs"])
def test_hard_infeasible_network_is_infeasible_with_a_diagnosis(solver):
    if solver == "highs":
        pytest.importorskip("highspy")
    # 10 units of supply, 16 of hard demand: no plan, 6 short (arithmetic).
    net = make_network([{"id": "D", "supply": 10}], [{"id": "A", "demand": 8}, {"id": "B", "demand": 8}],
                       [{"origin": "D", "destination": "A", "cost_per_unit": 1},
                        {"origin": "D", "destination": "B", "cost_per_unit": 2}])
    net.settings.solver = solver
    result = solve_and_analyse(net)
    assert result.status is SolveStatus.INFEASIBLE
    assert result.diagnosis.short["short"].sum() == pytest.approx(6.0, abs=TOL)
    assert all(math.isnan(v) for v in result.cost_breakdown.values())


def test_big_m_follows_the_documented_bounds():
    # Hand derivation (module docstring of lanesolve.model.formulation): D (supply 8) -> H (capacity 6) -> C
    # (demand 5); lane D->H: min(fallback min(8, 5) = 5, capacity inf, D can send 8, H can absorb min(6, out 7)) = 5;
    # lane H->C (capacity 7): min(5, 7, H can send min(6, in inf) -> 5, C absorbs 5) = 5; lane D->C capacity 3: 3.
    net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
                       [{"origin": "D", "destination": "H", "cost_per_unit": 1, "fixed_cost": 4},
                        {"origin": "H", "destination": "C", "cost_per_unit": 1, "capacity": 7, "fixed_cost": 4},
                        {"origin": "D", "destination": "C", "cost_per_unit": 3, "capacity": 3, "fixed_cost": 4}],
                       hubs=[{"id": "H", "capacity": 6}])
    assert build_sparse_model(net).big_m == {0: 5.0, 1: 5.0, 2: 3.0}


def test_readme_export_example_runs(tmp_path, monkeypatch):
    # The README's "Python" example that exports the model through PuLP, run on the bundled example workbook.
    import pathlib
    import re

    root = pathlib.Path(__file__).resolve().parent.parent
    blocks = re.findall(r"```python\n(.*?)```", (root / "README.md").read_text(encoding="utf-8"), re.S)
    example = next(block for block in blocks if "to_pulp" in block)
    workbook = root / "example_workbooks" / "orvale_larder_supply.xlsx"
    monkeypatch.chdir(tmp_path)
    exec(example.replace('"network.xlsx"', repr(str(workbook))), {})
    text = (tmp_path / "network.lp").read_text()
    assert "balance_0" in text and "flow_0" in text


def test_settings_units_and_currency_reach_the_array_path_sentences():
    net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 2.5, "mode": "rail"}],
                       settings=Settings(units="pallets", currency="EUR"))
    texts = solve_and_analyse(net).sensitivity["text"].tolist()
    # One customer served by one lane: one more or one less unit changes the cost by the lane's 2.5 (arithmetic).
    assert "One more or one less unit (pallets) of demand at customer C changes the cost by 2.50 EUR." in texts


@pytest.mark.parametrize("solver", ["cbc", "highs"])
@pytest.mark.parametrize("demand, penalty, status, cost", [
    (0, None, SolveStatus.OPTIMAL, 0.0),      # nothing to deliver, nothing to decide
    (3, None, SolveStatus.INFEASIBLE, None),  # hard demand and no lane: 0 delivered != 3
    (3, 4, SolveStatus.OPTIMAL, 12.0),        # 3 short at 4 each (arithmetic)
])
def test_network_without_active_lanes(solver, demand, penalty, status, cost):
    if solver == "highs":
        pytest.importorskip("highspy")
    customer = {"id": "C", "demand": demand} | ({"unmet_penalty": penalty} if penalty else {})
    net = make_network([{"id": "D", "supply": 5}], [customer],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 1, "active": False}])
    result = solve(net, solver=solver)
    assert result.status is status
    if cost is not None:
        assert result.total_cost == pytest.approx(cost, abs=TOL)
