"""What cutting emissions costs: the value of the emissions cap, and the trade-off curve between the least-cost
and the least-emissions plan (epsilon-constraint method: minimise cost subject to emissions at most a cap, for caps
spread between the two ends; Haimes, Lasdon & Wismer, IEEE Trans. Systems, Man and Cybernetics 1 (1971) 296).

Both re-solve the network's one model (:func:`lanesolve.model.build.build_model`) at other caps.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from lanesolve.errors import Problem, WorkbookError
from lanesolve.model.build import build_model
from lanesolve.model.network import Network
from lanesolve.model.result import Result
from lanesolve.model.solve import pick_engine, solve, solve_model

#: Step of the re-solves that price the cap, in tonnes CO2e.
CAP_STEP_T = 0.01


def cap_value(network: Network, result: Result, solver: str | None = None, time_limit: float | None = None,
              step: float = CAP_STEP_T) -> tuple[float | None, float | None]:
    """What one tonne less of the cap would cost, and what one tonne more would save, per tonne CO2e.

    Measured by re-solving at the cap minus and plus ``step`` tonnes (two-sided: at a breakpoint of the cost curve
    the two differ). ``math.inf`` for the first when no plan meets the tighter cap; None when no cap is set or the
    plan has no proven optimum to compare with.

    Examples
    --------
    >>> from lanesolve.model.network import make_network, Settings
    >>> from lanesolve.model.emissions import lane_emission_data
    >>> net = make_network([{"id": "D", "supply": 10}], [{"id": "C", "demand": 10}],
    ...     [{"origin": "D", "destination": "C", "cost_per_unit": 1}, {"origin": "D", "destination": "C",
    ...       "mode": "rail", "cost_per_unit": 3}], settings=Settings(tonnes_per_unit=1.0, emissions_cap=0.05))
    >>> net.emissions = lane_emission_data(net, km=[100, 100], factor=[0.1, 0.02])
    >>> less, more = cap_value(net, solve(net))
    >>> round(less, 6), round(more, 6)  # moving a unit road -> rail saves 8 kg and costs 2: 250 per tonne
    (250.0, 250.0)
    """
    cap = network.settings.emissions_cap
    if cap is None or network.emissions is None or result.status.value != "optimal":
        return None, None
    tighter = solve(network, time_limit=time_limit, solver=solver, cap=cap - step)
    looser = solve(network, time_limit=time_limit, solver=solver, cap=cap + step)
    less = (tighter.total_cost - result.total_cost) / step if tighter.status.has_plan else math.inf
    more = (result.total_cost - looser.total_cost) / step if looser.status.has_plan else None
    return less, more


def add_cap_value(network: Network, result: Result, solver: str | None = None,
                  time_limit: float | None = None) -> None:
    """Put :func:`cap_value` into ``result.emissions`` (``cap_value_per_t`` and ``cap_saving_per_t``)."""
    if result.emissions is None or network.settings.emissions_cap is None:
        return
    less, more = cap_value(network, result, solver, time_limit)
    result.emissions["cap_value_per_t"] = less
    result.emissions["cap_saving_per_t"] = more


def least_emissions(network: Network, keep_unmet: np.ndarray | None = None, solver: str | None = None,
                    time_limit: float | None = None) -> float | None:
    """The least emissions (tonnes CO2e) any plan can have, with units short limited to ``keep_unmet`` per shortfall
    column (the least-cost plan's: otherwise delivering nothing would always emit least). None without a plan."""
    model = build_model(dataclasses.replace(network, settings=dataclasses.replace(
        network.settings, carbon_price=None, emissions_cap=None)))
    model.costs = {"carbon": model.emission}
    if keep_unmet is not None:
        for prefix in ("unmet_", "unmet_product_"):
            span = model.columns(prefix)
            model.upper[span] = np.minimum(model.upper[span], keep_unmet[prefix])
    engine = (solver or network.settings.solver or "auto").lower()
    answer = solve_model(model, pick_engine(model) if engine == "auto" else engine, time_limit,
                         network.settings.mip_gap)
    return float(model.emission @ answer.value) if answer.status.has_plan else None


def tradeoff_curve(network: Network, points: int, solver: str | None = None,
                   time_limit: float | None = None) -> list[dict]:
    """``points`` plans from the least-emissions plan to the least-cost plan: ``{emissions_t, total_cost}`` each.

    Parameters
    ----------
    network : Network
        With emissions (:attr:`~lanesolve.model.network.Network.emissions`).
    points : int
        How many plans (at least 2: the two ends).

    Returns
    -------
    list of dict
        In order of falling emissions and rising cost. ``total_cost`` is the plan's cost without the carbon price
        (the curve is what cutting emissions costs); the cap setting is ignored. Caps are spread evenly between
        the least emissions and the least-cost plan's emissions. Empty when the least-cost plan does not exist.

    Notes
    -----
    For a plan that is a linear program the curve is convex and its cost falls as emissions rise (the optimal value
    of an LP is convex and non-increasing in the right-hand side of a <= row). With yes/no decisions it need not be
    convex.
    """
    free = dataclasses.replace(network, settings=dataclasses.replace(network.settings, carbon_price=None,
                                                                     emissions_cap=None))
    cheapest = solve(free, time_limit=time_limit, solver=solver)
    if not cheapest.status.has_plan or cheapest.emissions is None:
        return []
    model = build_model(free)
    keep = {"unmet_": _shortfall(cheapest, model, network, "unmet_"),
            "unmet_product_": _shortfall(cheapest, model, network, "unmet_product_")}
    lowest = least_emissions(free, keep, solver, time_limit)
    highest = cheapest.emissions["total_t"]
    if lowest is None:
        return []
    caps = np.linspace(lowest, highest, max(int(points), 2))
    curve = []
    for cap in caps.tolist():
        # The least-emissions end: a hair above the minimum, so round-off in the solver's answer cannot cut it off.
        bound = cap if cap > lowest else lowest + max(1e-9, 1e-9 * abs(lowest))
        plan = solve(free, time_limit=time_limit, solver=solver, cap=bound) if cap < highest else cheapest
        if plan.status.has_plan:
            curve.append({"emissions_t": plan.emissions["total_t"], "total_cost": plan.total_cost})
    return curve


def _shortfall(result: Result, model, network: Network, prefix: str) -> np.ndarray:
    """Units short per shortfall column of ``model`` in ``result`` (by customer, or by customer and product)."""
    ids = model.ids(prefix)
    if not len(ids):
        return np.zeros(0)
    if prefix == "unmet_":
        short = dict(zip(result.unmet["customer"], result.unmet["quantity"]))
        names = network.customers.loc[ids, "id"].tolist()
        return np.array([short.get(name, 0.0) for name in names])
    nodes = result.product_nodes.set_index(["node", "product"])["unmet"] if result.product_nodes is not None else {}
    out = []
    for item in ids.tolist():
        customer, product = (int(part) for part in str(item).split("_"))
        key = (network.customers.at[customer, "id"], network.products.ids[product])
        out.append(float(nodes.get(key, 0.0)) if len(nodes) else 0.0)
    return np.array(out)


def require_emissions(network: Network) -> None:
    """Raise :class:`~lanesolve.errors.WorkbookError` when the trade-off is asked for but the workbook gives no
    emissions (no factor, price or cap)."""
    if network.emissions is None:
        raise WorkbookError(Problem("Modes", None, "emission_factor", None,
                                    "--tradeoff needs emissions, but the workbook gives no emission factor",
                                    "give factors on a Modes sheet (the template's defaults, with their sources) or "
                                    "in the Lanes column emission_factor", "error"))


def emission_figures(network: Network, result: Result, points: int = 0, solver: str | None = None,
                     time_limit: float | None = None) -> None:
    """The cap's value (when a cap is set) and, with ``points`` >= 2, the trade-off curve, into ``result``."""
    add_cap_value(network, result, solver, time_limit)
    if points and network.emissions is not None:
        result.tradeoff = tradeoff_curve(network, points, solver, time_limit)
