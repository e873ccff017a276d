"""The CBC engine (:mod:`lanesolve.model.cbc`): its MPS file as PuLP's own reader sees it, CBC's solution-file status
words mapped honestly, the same command line PuLP builds, and every failure of the program typed."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pulp
import pytest

from lanesolve.errors import SolverError
from lanesolve.model import cbc as cbc_module
from lanesolve.model.arrays import Answer
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve
from tests.test_sparse_model import design_network, random_network


def cbc_backend(mip: bool = False, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        return pulp.PULP_CBC_CMD(mip=mip, msg=False, **options)


def test_mps_file_read_by_pulp_has_the_model_bounds_integers_and_rows(tmp_path):
    # Reference: PuLP's own MPS reader (pulp.LpProblem.fromMPS) on the file lanesolve writes for CBC.
    model = build_sparse_model(design_network(1))
    path = tmp_path / "model.mps"
    cbc_module.write_mps(model, path)
    _, problem = pulp.LpProblem.fromMPS(str(path))
    variables = {var.name: var for var in problem.variables()}
    assert len(variables) == model.n_columns
    for j in range(model.n_columns):
        var = variables[f"X{j}"]
        assert (var.cat == pulp.LpInteger) == bool(model.integer[j])
        assert (var.lowBound or 0.0) == model.lower[j]
        assert (math_inf if var.upBound is None else var.upBound) == model.upper[j]
    constraints = problem.constraints()
    assert len(constraints) == model.n_rows
    dense = model.matrix.toarray()
    for constraint in constraints:
        i = int(constraint.name[1:])
        row = {var.name: coefficient for var, coefficient in constraint.items()}
        assert row == {f"X{j}": dense[i, j] for j in np.flatnonzero(dense[i])}
    objective = {var.name: coefficient for var, coefficient in problem.objective.items() if coefficient}
    assert objective == {f"X{j}": c for j, c in enumerate(model.cost.tolist()) if c}


math_inf = float("inf")


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
    answer, objective = cbc_module.read_cbc_solution(path, cbc_backend(is_mip), n_rows=2, n_columns=1,
                                                     is_mip=is_mip)
    assert isinstance(answer, Answer) and answer.status is expected
    assert objective == float(first_line.rsplit(" ", 1)[1])
    assert answer.value.tolist() == [4.0]
    # Duals are the LP's; after branch and bound they belong to no model, so a MIP reports none.
    assert answer.row_dual.tolist() == ([0.0, 0.0] if is_mip else [0.0, -1.0])
    assert answer.reduced_cost.tolist() == ([0.0] if is_mip else [3.5])


def test_the_same_cbc_options_as_pulp():
    # Reference: the command line PuLP 3.3 logs for PULP_CBC_CMD(mip=False, timeLimit=5) on an MPS file
    # (pulp/apis/coin_api.py solve_CBC): "<mps> -sec 5 -timeMode elapsed -initialSolve -printingOptions all
    # -solution <sol>", measured while writing this test; for a MIP with gapRel it adds "-ratio <gap>" and
    # "-solve" in place of "-initialSolve" (same file, getOptions).
    backend = cbc_backend(timeLimit=5)
    command = cbc_module.cbc_command(backend, "a.mps", "a.sol")
    assert command[0] == backend.path
    assert command[1:] == ["a.mps", "-sec", "5", "-timeMode", "elapsed", "-initialSolve", "-printingOptions", "all",
                           "-solution", "a.sol"]
    mip = cbc_module.cbc_command(cbc_backend(True, gapRel=0.0001), "a.mps", "a.sol")
    assert mip[1:] == ["a.mps", "-ratio", "0.0001", "-timeMode", "elapsed", "-solve", "-printingOptions", "all",
                       "-solution", "a.sol"]


@pytest.mark.parametrize("log, objective, expected", [
    # Lines as the bundled CBC 2.10.3 prints them (copied from its logs while writing this test).
    ("Result - Stopped on time limit\nObjective value:                24108.00000000\nLower bound:"
     "                    20850.919\n", 24108.0, 20850.919),
    ("Result - Optimal solution found\n\nObjective value:                20.00000000\n", 20.0, 20.0),
    ("Cbc0005I Partial search - best objective 24108 (best possible 20850.919), took 1809 iterations and 0 nodes "
     "(2.28 seconds)\n", 24108.0, 20850.919),
    ("", 12.0, None),
])
def test_best_bound_from_the_log(log, objective, expected):
    assert cbc_module.best_bound(log, objective) == expected


def fake_cbc(returncode: int, effect=None):
    """A stand-in for ``subprocess.Popen`` of the CBC program: it ends at once with ``returncode`` after
    ``effect(command)`` (which may write a solution file)."""
    class Ended:
        def __init__(self, command, **kwargs):
            if effect is not None:
                effect(command)
            self.returncode = returncode

        def wait(self, timeout=None):
            return returncode

        def poll(self):
            return returncode

    return Ended


def test_cbc_failure_is_a_solver_error(monkeypatch):
    monkeypatch.setattr(cbc_module.subprocess, "Popen", fake_cbc(1))
    with pytest.raises(SolverError, match="CBC solver failed"):
        solve(random_network(0), solver="cbc")


def test_unreadable_solution_is_a_solver_error(monkeypatch):
    def truncated(command):
        Path(command[command.index("-solution") + 1]).write_text("Optimal - objective value 1\n   0 R0 x\n")

    monkeypatch.setattr(cbc_module.subprocess, "Popen", fake_cbc(0, truncated))
    with pytest.raises(SolverError, match="answer could not be read"):
        solve(random_network(0), solver="cbc")


def test_missing_cbc_program_is_a_solver_error(monkeypatch):
    def missing(command):
        raise FileNotFoundError(2, "No such file or directory")

    monkeypatch.setattr(cbc_module.subprocess, "Popen", fake_cbc(0, missing))
    with pytest.raises(SolverError, match="could not be started"):
        solve(random_network(0), solver="cbc")


def test_an_integer_column_without_an_upper_bound_is_not_read_as_binary(tmp_path):
    # A whole-trip count with no bound from the model must stay free above 1 in the file: 25 units on a lane with
    # trip capacity 10 need 3 trips at 7 each (arithmetic: 25 * 1 + 3 * 7 = 46).
    net = make_network([{"id": "D", "supply": 30}], [{"id": "C", "demand": 25}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 1, "trip_capacity": 10,
                         "cost_per_trip": 7}])
    model = build_sparse_model(net)
    trips = model.columns("trips_")
    model.upper[trips] = np.inf  # as if no bound were known
    answer = cbc_module.solve_with_cbc(model)
    assert answer.status is SolveStatus.OPTIMAL
    assert answer.value[trips].tolist() == [3.0]
    assert float(model.cost @ answer.value) == pytest.approx(46.0)
