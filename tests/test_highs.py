"""HiGHS (in memory, through highspy) and CBC agree: on every example workbook and on design instances; a time-limited
HiGHS run is honest about its gap (all skipped cleanly when the
optional highspy package is not installed)."""

import pathlib

import pytest

from lanesolve.pipeline import load
from lanesolve.model.solve import solve

pytest.importorskip("highspy")

from tests.test_design import random_design  # noqa: E402
from lanesolve.model.network import make_network  # noqa: E402
from lanesolve.model.result import SolveStatus  # noqa: E402

EXAMPLES = sorted((pathlib.Path(__file__).resolve().parent.parent / "example_workbooks").glob("*.xlsx"))
TOL = 1e-5


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_highs_and_cbc_agree_on_every_example_workbook(path):
    network, _ = load(path)
    if network.depots.empty:  # the blank template has nothing to solve
        pytest.skip("blank template")
    cbc, highs = solve(network, solver="cbc"), solve(network, solver="highs")
    # Source: two independent solvers; optima may have alternative flows, so compare status and cost only.
    assert cbc.status == highs.status
    assert cbc.total_cost == pytest.approx(highs.total_cost, rel=1e-6, abs=TOL)
    assert highs.solver.startswith("HiGHS")


@pytest.mark.parametrize("seed", range(3))
def test_highs_and_cbc_agree_on_design_instances(seed):
    net = make_network(*random_design(seed)[:3], hubs=random_design(seed)[3])
    cbc, highs = solve(net, solver="cbc"), solve(net, solver="highs")
    assert cbc.status == highs.status
    assert cbc.total_cost == pytest.approx(highs.total_cost, rel=1e-6, abs=TOL)


def test_solver_setting_picks_highs():
    net = make_network(*random_design(0)[:3], hubs=random_design(0)[3])
    net.settings.solver = "highs"
    assert solve(net).solver.startswith("HiGHS")


def test_time_limited_highs_mip_is_feasible_with_its_gap_never_optimal():
    from tests.test_solve_status import hard_fixed_charge_transportation, root_lp_bound

    net = hard_fixed_charge_transportation()
    result = solve(net, time_limit=1, solver="highs")
    assert result.status is SolveStatus.FEASIBLE
    # SciPy linprog's LP relaxation <= the bound HiGHS proved (read from its API, mip_dual_bound) < the plan's cost.
    assert root_lp_bound(net) - 1e-6 <= result.best_bound < result.total_cost
    assert result.mip_gap == pytest.approx((result.total_cost - result.best_bound) / result.total_cost, rel=1e-9)
    assert any("time limit" in m for m in result.messages)


def test_highs_reads_the_model_in_memory_without_files(monkeypatch, tmp_path):
    # The in-memory path writes nothing: with the temporary folder pointed at an empty directory it stays empty.
    import tempfile

    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    result = solve(make_network(*random_design(1)[:3], hubs=random_design(1)[3]), solver="highs")
    assert result.status is SolveStatus.OPTIMAL
    assert list(tmp_path.iterdir()) == []


def test_infeasible_network_is_infeasible_with_highs():
    # 10 units of supply, 16 of hard demand (arithmetic); HiGHS may say "infeasible" or "unbounded or infeasible".
    net = make_network([{"id": "D", "supply": 10}], [{"id": "A", "demand": 8}, {"id": "B", "demand": 8}],
                       [{"origin": "D", "destination": "A", "cost_per_unit": 1},
                        {"origin": "D", "destination": "B", "cost_per_unit": 2}])
    assert solve(net, solver="highs").status is SolveStatus.INFEASIBLE


def _reference_cases():
    """Every test of the reference modules that solves (calls ``solve(``) and takes no argument or only ``seed``,
    with its seeds."""
    import importlib
    import inspect

    for module_name in REFERENCE_MODULES:
        module = importlib.import_module(f"tests.{module_name}")
        for name, function in inspect.getmembers(module, inspect.isfunction):
            if (not name.startswith("test_") or function.__module__ != module.__name__
                    or "solve(" not in inspect.getsource(function)):
                continue
            parameters = list(inspect.signature(function).parameters)
            if parameters == []:
                yield pytest.param(module_name, name, None, id=f"{module_name}.{name}")
            elif parameters == ["seed"]:
                marks = [m for m in getattr(function, "pytestmark", []) if m.name == "parametrize"]
                for seed in marks[0].args[1]:
                    yield pytest.param(module_name, name, seed, id=f"{module_name}.{name}[{seed}]")


#: Modules whose checks against published optima, networkx and SciPy must hold with HiGHS as well as with CBC.
REFERENCE_MODULES = ("test_reference_optima", "test_random_vs_networkx", "test_fixed_charge_vs_scipy", "test_design")


@pytest.mark.parametrize("module_name, name, seed", list(_reference_cases()))
def test_reference_checks_hold_with_highs(monkeypatch, module_name, name, seed):
    # The same assertions as the reference modules (each names its source), with every solve() there run by HiGHS.
    import functools
    import importlib

    module = importlib.import_module(f"tests.{module_name}")
    monkeypatch.setattr(module, "solve", functools.partial(solve, solver="highs"))
    function = getattr(module, name)
    function() if seed is None else function(seed)


def test_highs_basis_is_a_basis_of_the_lp():
    from lanesolve.model.formulation import build_sparse_model
    from lanesolve.model.highs import solve_with_highs
    from tests.test_solve_status import beer_network

    model = build_sparse_model(beer_network())
    answer = solve_with_highs(model)
    assert answer.status is SolveStatus.OPTIMAL
    basic_columns, basic_rows = answer.column_basis == 1, answer.row_basis == 1
    # A simplex basis has one basic variable per row (Dantzig's textbook definition), and a basic column has a
    # zero reduced cost.
    assert basic_columns.sum() + basic_rows.sum() == model.n_rows
    assert abs(answer.reduced_cost[basic_columns]).max() == pytest.approx(0.0, abs=1e-9)
