"""HiGHS and CBC agree: on every example workbook and on contract v2 design instances (skipped cleanly when the
optional highspy package is not installed)."""

import pathlib

import pytest

from lanesolve.pipeline import load
from lanesolve.model.solve import solve

pytest.importorskip("highspy")

from tests.test_design import random_design  # noqa: E402
from lanesolve.model.network import make_network  # noqa: E402

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
