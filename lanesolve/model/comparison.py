"""Comparing the baseline's plan with each what-if scenario's: cost and its breakdown, the change, unmet demand,
lanes and nodes opened or closed, and the largest volume shifts (the ``LS Scenarios`` sheet, the HTML table and
``--json``). The scenarios themselves are read and applied by :mod:`lanesolve.model.scenarios`."""

from __future__ import annotations

import math

import pandas as pd

from lanesolve.model.result import COST_COMPONENTS, DESIGN_COST_COMPONENTS, Result
from lanesolve.model.scenarios import BASELINE

#: Flows and volume changes at or below this are float noise, not movement (the same tolerance as the scenarios).
FLOW_TOLERANCE = 1e-6


def _lane_flows(result: Result) -> pd.Series:
    if not result.status.has_plan or result.flows.empty:
        return pd.Series(dtype=float)
    flows = result.flows
    key = flows["origin"].astype(str) + ">" + flows["destination"].astype(str) + flows["mode"].fillna("").map(
        lambda m: f">{m}" if m else "")
    series = pd.Series(flows["flow"].astype(float).to_numpy(), index=key)
    return series.groupby(level=0).sum()[lambda s: s > FLOW_TOLERANCE]


def _used_nodes(result: Result) -> set[str]:
    """Depots that ship and hubs that carry flow: the nodes a plan 'opens'."""
    if not result.status.has_plan or result.nodes.empty:
        return set()
    nodes = result.nodes
    used = ((nodes["kind"] == "depot") & (nodes["shipped"].fillna(0) > FLOW_TOLERANCE)) | (
        (nodes["kind"] == "hub") & (nodes["throughput"].fillna(0) > FLOW_TOLERANCE))
    return set(nodes.loc[used, "node"].astype(str))


def volume_shifts(baseline_result: Result, scenario_result: Result, top: int | None = None) -> pd.DataFrame:
    """Lane volume changes from the baseline to a scenario, largest first.

    Returns
    -------
    DataFrame
        Columns ``lane`` (``origin>destination`` or ``origin>destination>mode``), ``baseline_flow``,
        ``scenario_flow``, ``change``; only lanes whose flow changed by more than :data:`FLOW_TOLERANCE`.
    """
    base, other = _lane_flows(baseline_result), _lane_flows(scenario_result)
    lanes = base.index.union(other.index)
    frame = pd.DataFrame({"lane": lanes, "baseline_flow": base.reindex(lanes, fill_value=0.0).to_numpy(),
                          "scenario_flow": other.reindex(lanes, fill_value=0.0).to_numpy()})
    frame["change"] = frame["scenario_flow"] - frame["baseline_flow"]
    frame = frame[frame["change"].abs() > FLOW_TOLERANCE]
    frame = frame.reindex(frame["change"].abs().sort_values(ascending=False, kind="stable").index)
    frame = frame.reset_index(drop=True)
    return frame if top is None else frame.head(top)


#: The cost columns of :func:`compare`: every component a result can have (zero where a plan has none of it).
COST_KEYS = (*COST_COMPONENTS, *DESIGN_COST_COMPONENTS)

#: Columns of the frame :func:`compare` returns.
COMPARE_COLUMNS = ["scenario", "status", "total_cost", *COST_COMPONENTS, *DESIGN_COST_COMPONENTS,
                   "delta_cost", "delta_pct", "unmet_units", "lanes_used", "lanes_opened", "lanes_closed",
                   "nodes_opened", "nodes_closed", "largest_shifts"]


def compare(baseline_result: Result, scenario_results: dict[str, Result], top_shifts: int = 3) -> pd.DataFrame:
    """Side-by-side comparison of the baseline and each scenario, for the result sheet and the report.

    Parameters
    ----------
    baseline_result : Result
    scenario_results : dict
        Scenario name -> its Result, in the order to show.
    top_shifts : int
        How many of the largest lane volume changes to list in ``largest_shifts``.

    Returns
    -------
    DataFrame
        One row per scenario, the baseline first, columns :data:`COMPARE_COLUMNS`: the status, the total cost and
        its breakdown (every component of :data:`COST_KEYS`, from :meth:`Result.cost_lines`, adding up to the
        total), ``delta_cost`` (scenario minus baseline) and ``delta_pct`` (percent of the baseline cost; NaN
        when that is 0 or either has no plan), ``unmet_units`` (units not delivered), ``lanes_used``,
        ``lanes_opened``/``lanes_closed`` and ``nodes_opened``/``nodes_closed`` (text lists of lanes and of
        shipping depots or used hubs that carry flow in the scenario but not the baseline, or the reverse) and
        ``largest_shifts`` (text, e.g. ``"D1>C2 +40; D2>C2 -40"``).
    """
    base_cost = baseline_result.total_cost if baseline_result.status.has_plan else math.nan
    base_lanes, base_nodes = set(_lane_flows(baseline_result).index), _used_nodes(baseline_result)
    records = []
    for name, result in {BASELINE: baseline_result, **scenario_results}.items():
        has_plan = result.status.has_plan
        cost = result.total_cost if has_plan else math.nan
        lanes, nodes = set(_lane_flows(result).index), _used_nodes(result)
        is_base = result is baseline_result and name == BASELINE
        shifts = volume_shifts(baseline_result, result, top_shifts) if has_plan and not is_base else None
        delta = cost - base_cost
        amounts = {line.key: line.amount for line in result.cost_lines()}
        records.append({
            "scenario": name,
            "status": result.status.value,
            "total_cost": cost,
            # Every component, from the breakdown every report reads, so the columns add up to total_cost.
            **{k: (amounts.get(k, 0.0) if has_plan else math.nan) for k in COST_KEYS},
            "delta_cost": delta,
            "delta_pct": delta / base_cost * 100.0 if base_cost else math.nan,
            "unmet_units": float(result.unmet["quantity"].sum()) if has_plan and len(result.unmet) else
            (0.0 if has_plan else math.nan),
            "lanes_used": len(lanes) if has_plan else 0,
            "lanes_opened": ", ".join(sorted(lanes - base_lanes)) if has_plan and not is_base else "",
            "lanes_closed": ", ".join(sorted(base_lanes - lanes)) if has_plan and not is_base else "",
            "nodes_opened": ", ".join(sorted(nodes - base_nodes)) if has_plan and not is_base else "",
            "nodes_closed": ", ".join(sorted(base_nodes - nodes)) if has_plan and not is_base else "",
            "largest_shifts": "" if shifts is None else "; ".join(
                f"{r.lane} {r.change:+g}" for r in shifts.itertuples(index=False)),
        })
    return pd.DataFrame.from_records(records, columns=COMPARE_COLUMNS)
