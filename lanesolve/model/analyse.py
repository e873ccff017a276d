"""Solve, then explain: the figures of an optimal plan, or why no plan exists. What the pipeline calls.

:func:`lanesolve.model.solve.solve` only solves. :func:`solve_and_analyse` adds, for a plan proven optimal, the exact
two-sided sensitivity figures of the written plan (:func:`lanesolve.model.sensitivity.plan_figures`, no solver duals)
and, for an infeasible network, the diagnosis (:func:`lanesolve.model.diagnose.diagnose`).
"""

from __future__ import annotations

import time

from lanesolve.model.checks import no_plan_result
from lanesolve.model.diagnose import diagnose
from lanesolve.model.network import Network
from lanesolve.model.product_plan import figures_left_out, no_figures
from lanesolve.model.result import JSON_UNUSED_LANES, Result, SolveStatus
from lanesolve.model.sensitivity import plan_figures
from lanesolve.model.solve import solve


def solve_and_analyse(network: Network, time_limit: float | None = None, solver: str | None = None,
                      msg: bool = False, **options) -> Result:
    """Solve ``network``; fill ``Result.sensitivity`` for an optimal plan and ``Result.diagnosis`` for no plan.

    Parameters
    ----------
    network : Network
        A validated network.
    time_limit, solver, msg
        As for :func:`lanesolve.model.solve.solve`.
    **options
        Passed to :func:`~lanesolve.model.solve.solve` unchanged.

    Returns
    -------
    Result
        With an optimal plan, ``sensitivity`` holds the figures of :mod:`lanesolve.model.sensitivity`, with rows
        for the 500 unused lanes nearest to paying and the others in ``more_figures``. A plan not
        proven optimal keeps an empty frame (the sheet then says why there are no figures). An infeasible result
        carries the :class:`~lanesolve.model.diagnose.Diagnosis` and its sentences in ``messages``.

    Raises
    ------
    SolverError
        As :func:`~lanesolve.model.solve.solve`.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2.5}])
    >>> solve_and_analyse(net).sensitivity[["figure", "item", "value"]].values.tolist()
    [['marginal_cost', 'C', 2.5]]
    """
    result = solve(network, time_limit=time_limit, solver=solver, msg=msg, **options)
    if result.status is SolveStatus.OPTIMAL and figures_left_out(network):
        result.sensitivity = no_figures(figures_left_out(network))
    elif result.status is SolveStatus.OPTIMAL:
        tick = time.perf_counter()
        # Rows for the unused lanes the sheet, --json and the summary show; the rest stay numbers until asked for.
        result.sensitivity, result.more_figures = plan_figures(network, result, unused_rows=JSON_UNUSED_LANES)
        result.timings["sensitivity"] = time.perf_counter() - tick
    elif result.status is SolveStatus.INFEASIBLE:
        tick = time.perf_counter()
        result.diagnosis = diagnose(network, solver=solver, time_limit=time_limit)
        result.messages.extend(result.diagnosis.sentences(network.settings.units or "units"))
        result.timings["diagnose"] = time.perf_counter() - tick
    return result


def explain_no_plan(network: Network, reasons: list[str], time_limit: float | None = None,
                    solver: str | None = None) -> Result:
    """The result for a network the pre-solve checks rule out, with every cause they found *and* the least total
    shortfall, who would bear it and what restores a plan (:func:`lanesolve.model.diagnose.diagnose`).

    Parameters
    ----------
    network : Network
    reasons : list of str
        What :func:`lanesolve.model.checks.presolve_checks` found (non-empty).
    time_limit, solver
        For the shortfall re-solve.

    Returns
    -------
    Result
        Status ``infeasible``; ``messages`` hold the diagnosis: the total shortfall and the causes first, then the
        customers one by one.
    """
    result = no_plan_result(network, reasons)
    tick = time.perf_counter()
    result.diagnosis = diagnose(network, solver=solver, time_limit=time_limit, found_before=reasons)
    result.messages = result.diagnosis.sentences(network.settings.units or "units")
    result.timings["diagnose"] = time.perf_counter() - tick
    return result
