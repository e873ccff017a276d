"""The "What to do next" sentences: the few facts of a plan a planner can act on, in plain words.

Built only from figures the result already holds, quoted exactly (formatted as everywhere else):

- the binding capacities worth most -- depot supply, hub, lane and trip capacity whose next unit saves the most
  (the shadow prices of :mod:`lanesolve.model.sensitivity`);
- the customers short and why: the plan pays their unmet penalty because delivering more would cost at least as
  much (their marginal cost equals the penalty);
- the unused lanes nearest to paying (the smallest reduced costs);
- with scenarios, which one is cheapest, against the baseline.

The sensitivity frame is read by its columns ``figure``, ``item``, ``value`` and ``unique``; where it also has
``value_up`` (what one more unit is worth, when that differs from one unit less), that figure is the one quoted,
since every sentence here is about adding a unit. Either column may be missing; a figure that is not unique and has
no one-sided value is left out rather than guessed.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from lanesolve.model.result import Result, singular

if TYPE_CHECKING:
    from lanesolve.model.network import Network

#: How many capacities and near-miss lanes the section names; the sensitivity sheet lists every figure.
TOP = 3
#: Figures below this (in money per unit) are round-off, not advice.
MONEY_EPSILON = 0.005

_CAPACITY_FIGURES = {
    "supply_value": "the supply of depot {item}",
    "hub_capacity_value": "the capacity of hub {item}",
    "lane_capacity_value": "the capacity of lane {lane}",
    "trip_capacity_value": "the room in the planned trips on lane {lane}",
}


def _finite(value) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _money(value: float, currency: str) -> str:
    text = f"{value + 0.0:,.2f}"
    return f"{'0.00' if text == '-0.00' else text} {currency}".strip()


def _quantity(value: float, units: str) -> str:
    text = f"{round(value):,d}" if abs(value - round(value)) < 1e-6 else f"{value:,.2f}"
    return f"{text} {units}".strip()


def _lane(item: str) -> str:
    """A lane label "A -> B (mode)" as "A→B (mode)"."""
    return item.replace(" -> ", "→", 1) if item.count(" -> ") == 1 else item


def _figure_values(rows: pd.DataFrame) -> np.ndarray:
    """What one more unit is worth, per row: ``value_up`` where finite, else ``value`` where the figure is unique
    and finite, else NaN (a frame without ``value_up`` counts as one-sided: ``value`` where unique)."""
    def column(name: str) -> np.ndarray:
        return pd.to_numeric(rows[name], errors="coerce").to_numpy(dtype=float) if name in rows \
            else np.full(len(rows), np.nan)
    up, value = column("value_up"), column("value")
    unique = rows["unique"].to_numpy(dtype=bool) if "unique" in rows else np.ones(len(rows), dtype=bool)
    return np.where(np.isfinite(up), up, np.where(unique & np.isfinite(value), value, np.nan))


def _figures(result: Result, figures, smallest: int | None = None) -> list[tuple[str, str, float]]:
    """(figure, item, what one more unit is worth) of the rows of ``figures`` that have such a value; with
    ``smallest``, only the rows whose value is among the ``smallest`` values above :data:`MONEY_EPSILON` (a 100k-lane
    plan has about 100k unused lanes, and the summary names a few)."""
    frame = result.sensitivity
    if frame is None or frame.empty or "figure" not in frame:
        return []
    return _figure_rows(frame[frame["figure"].isin(list(figures))], smallest)


def _figure_rows(rows: pd.DataFrame, smallest: int | None = None) -> list[tuple[str, str, float]]:
    """:func:`_figures` of the rows given."""
    values = _figure_values(rows)
    keep = np.isfinite(values)
    if smallest is not None:
        keep &= values > MONEY_EPSILON
        if keep.sum() > smallest:  # every row tied with the smallest-th value stays, so ties sort by name after
            keep &= values <= np.partition(values[keep], smallest - 1)[smallest - 1]
    chosen = np.flatnonzero(keep)
    return list(zip(rows["figure"].iloc[chosen].astype(str).tolist(), rows["item"].iloc[chosen].astype(str).tolist(),
                    values[chosen].tolist()))


def _capacities(result: Result, units: str, currency: str) -> list[str]:
    one = singular(units or "units")
    worth = [f for f in _figures(result, _CAPACITY_FIGURES) if f[2] > MONEY_EPSILON]
    worth.sort(key=lambda f: (-f[2], f[1]))  # ties by name, so the same plan gives the same sentences
    sentences = []
    for figure, item, value in worth[:TOP]:
        what = _CAPACITY_FIGURES[figure].format(item=item, lane=_lane(item))
        sentences.append(f"Raise {what}: it is used to its limit, and each extra {one} would save "
                         f"{_money(value, currency)}.")
    return sentences


def _penalties(network: Network) -> dict[str, float]:
    default = _finite(network.settings.unmet_penalty)
    penalties = {}
    for row in network.customers.itertuples(index=False):
        own = _finite(row.unmet_penalty)
        if own is not None or default is not None:
            penalties[str(row.id)] = own if own is not None else default
    return penalties


def _short(network: Network, result: Result, units: str, currency: str) -> list[str]:
    if result.unmet.empty:
        return []
    one = singular(units or "units")
    demand = {str(r.id): float(r.demand) for r in network.customers.itertuples(index=False)}
    penalty = _penalties(network)
    marginal = {item: value for figure, item, value in _figures(result, ("marginal_cost",))}
    sentences = []
    unmet = result.unmet.sort_values(["quantity", "customer"], ascending=[False, True], kind="stable")
    for row in unmet.itertuples(index=False):
        name, quantity = str(row.customer), _finite(row.quantity) or 0.0
        head = f"{name} is {_quantity(quantity, units)} short"
        if name in demand:
            head += f" of its demand of {_quantity(demand[name], units)}"
        rate = penalty.get(name)
        if rate is None:
            sentences.append(head + ".")
            continue
        cost = marginal.get(name)
        # The marginal cost of a customer left short equals its penalty; quote it only where it says more.
        worth = (f" ({_money(cost, currency)} at this plan)"
                 if cost is not None and abs(cost - rate) >= MONEY_EPSILON else "")
        sentences.append(f"{head}: one more {one} there would cost at least its unmet penalty of "
                         f"{_money(rate, currency)} per {one}{worth} — the cost of the route plus what it would "
                         "take from capacities used to their limit — so the plan pays the penalty. To serve it, "
                         "raise a full capacity on the way, make a route to it cheaper, or raise its penalty.")
    return sentences


def _near_misses(result: Result, units: str, currency: str) -> list[str]:
    one = singular(units or "units")
    lanes = [f for f in _figures(result, ("reduced_cost",), smallest=TOP) if f[2] > MONEY_EPSILON]
    more = result.figures_beyond()
    if more is not None and not _beyond_cannot_enter(result, lanes):
        # Unused lanes without a row yet: those that could be among the nearest above round-off.
        lanes += [f for f in _figure_rows(more.nearest_above(MONEY_EPSILON, TOP), smallest=TOP) if f[2] > MONEY_EPSILON]
    lanes.sort(key=lambda f: (f[2], f[1]))
    return [f"Nearest to paying: lane {_lane(item)} would be used if it cost {_money(value, currency)} per {one} "
            "less." for _figure, item, value in lanes[:TOP]]


def _beyond_cannot_enter(result: Result, lanes: list[tuple[str, str, float]]) -> bool:
    """True when no unused lane beyond the rows can be among the nearest few: the rows are the lanes nearest to
    paying, so every lane beyond them is at least the last row's figure; when the few found lie strictly below it,
    none beyond can be smaller or tied (asking the lanes beyond could mean searches on a meshed network)."""
    if len(lanes) < TOP:
        return False
    frame = result.sensitivity
    shown = _figure_values(frame[frame["figure"] == "reduced_cost"])
    shown = shown[np.isfinite(shown)]
    return bool(len(shown)) and sorted(f[2] for f in lanes)[TOP - 1] < float(shown.max())


def _scenarios(comparison: pd.DataFrame | None, currency: str) -> list[str]:
    if comparison is None or len(comparison) < 2:
        return []
    rows = [r for r in comparison.itertuples(index=False) if _finite(r.total_cost) is not None]
    if not rows:
        return ["No scenario has a plan, so none can be called cheapest."]
    best = min(rows, key=lambda r: (float(r.total_cost), str(r.scenario)))
    without = [str(r.scenario) for r in comparison.itertuples(index=False) if _finite(r.total_cost) is None]
    tail = f" ({', '.join(without)}: no plan)" if without else ""
    base = comparison.iloc[0]
    if best is not None and str(best.scenario) == str(base["scenario"]):
        others = [r for r in rows if r is not best]
        if not others:
            return [f"The baseline is the only one with a plan{tail}."]
        runner = min(others, key=lambda r: (float(r.total_cost), str(r.scenario)))
        return [f"Of the baseline and {_scenario_count(comparison)}, the baseline is cheapest at "
                f"{_money(float(best.total_cost), currency)}; the next, {runner.scenario}, costs "
                f"{_money(float(runner.total_cost) - float(best.total_cost), currency)} more{tail}."]
    delta = _finite(best.delta_cost)
    pct = _finite(best.delta_pct)
    change = (f", {_money(-delta, currency)} less than the baseline" if delta is not None else "") + (
        f" ({pct:+.1f} %)" if pct is not None else "")
    return [f"Of the baseline and {_scenario_count(comparison)}, {best.scenario} is cheapest at "
            f"{_money(float(best.total_cost), currency)}{change}{tail}."]


def _scenario_count(comparison: pd.DataFrame) -> str:
    count = len(comparison) - 1
    return f"{count} scenario{'' if count == 1 else 's'}"


def next_steps(network: Network, result: Result, comparison: pd.DataFrame | None = None) -> list[str]:
    """The "What to do next" sentences of a plan, most useful first.

    Parameters
    ----------
    network : Network
        The validated network (labels, demands and penalties).
    result : Result
        The plan; without a plan there are no sentences (the "Why no plan" section speaks instead).
    comparison : DataFrame, optional
        :func:`lanesolve.model.comparison.compare` of the baseline and its scenarios.

    Returns
    -------
    list of str
        The binding capacities worth most, the customers short and why, the unused lanes nearest to paying and,
        with scenarios, the cheapest one; one sentence saying nothing stands out when none applies.

    Examples
    --------
    >>> from lanesolve.model.network import Settings, make_network
    >>> from lanesolve.model.result import SolveStatus
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}],
    ...                    settings=Settings(units="pallets", currency="EUR"))
    >>> sens = pd.DataFrame({"figure": ["supply_value"], "item": ["D"], "value": [1.5], "unique": [True]})
    >>> next_steps(net, Result(SolveStatus.OPTIMAL, total_cost=10.0, sensitivity=sens))
    ['Raise the supply of depot D: it is used to its limit, and each extra pallet would save 1.50 EUR.']
    """
    if not result.status.has_plan:
        return []
    units, currency = network.settings.units or "units", network.settings.currency or ""
    sentences = (_capacities(result, units, currency) + _short(network, result, units, currency)
                 + _near_misses(result, units, currency) + _scenarios(comparison, currency))
    if sentences:
        return sentences
    if result.sensitivity is None or result.sensitivity.empty:
        return ["Every customer is served in full; the plan is not proven optimal, so no capacity or lane is "
                "named as worth changing."]
    return ["No capacity limits the plan, every customer is served in full and no unused lane is close to paying: "
            "nothing stands out to change."]
