"""What changed since the last run: the new plan against the earlier one held in the workbook's result sheets.

The earlier plan is plain data (:class:`EarlierPlan`), read from the earlier result sheets by
:mod:`lanesolve.write.earlier_plan`; :func:`compare_plans` sets it beside the new :class:`Result` and returns
:class:`PlanChanges`: every lane whose flow moved (newly used, no longer used, more or less), the depots and hubs
newly used or no longer used, and the change in total cost and in each cost component. The sheet, the HTML summary
and ``--json`` all read that one object.

Examples
--------
>>> import pandas as pd
>>> from lanesolve.model.network import make_network
>>> from lanesolve.model.result import Result, SolveStatus
>>> net = make_network([{"id": "D", "supply": 9}], [{"id": "C", "demand": 5}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
>>> earlier = EarlierPlan("2026-01-05 08:00", 8.0, {"transport": 8.0},
...                       pd.DataFrame({"origin": ["D"], "destination": ["C"], "mode": [""], "flow": [4.0]}))
>>> now = Result(SolveStatus.OPTIMAL, total_cost=10.0, cost_breakdown={"transport": 10.0},
...              flows=pd.DataFrame({"origin": ["D"], "destination": ["C"], "mode": [""], "flow": [5.0]}))
>>> changes = compare_plans(earlier, now, net)
>>> changes.lanes[["previous_flow", "flow", "change"]].values.tolist(), changes.cost_change
([[4.0, 5.0, 1.0]], 2.0)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model.network import Network
from lanesolve.model.result import COST_LABELS, Result, cost_order

#: Flows closer than this (relative to max(1, flow)) count as unchanged: the earlier sheet holds full precision,
#: so only solver round-off is forgiven.
SAME = 1e-9
#: Columns of :attr:`PlanChanges.lanes`.
CHANGE_COLUMNS = ["origin", "destination", "mode", "previous_flow", "flow", "change", "what"]
#: How many of the largest shifts the summary and the HTML list (the sheet and ``--json`` carry every lane).
TOP_SHIFTS = 10


@dataclass
class EarlierPlan:
    """The plan of an earlier run, as its result sheets hold it.

    Attributes
    ----------
    run_at : str
        The earlier run's time stamp (its summary's "Run at").
    total_cost : float
        Its total cost (NaN when it had no plan).
    costs : dict of str to float
        Its cost per component, keyed as :attr:`Result.cost_breakdown`.
    flows : DataFrame
        ``origin``, ``destination``, ``mode``, ``flow``: every lane it used.
    """

    run_at: str
    total_cost: float
    costs: dict[str, float]
    flows: pd.DataFrame


@dataclass
class PlanChanges:
    """The new plan against an earlier one (``earlier`` None: the workbook held no earlier results).

    Attributes
    ----------
    earlier : EarlierPlan or None
    lanes : DataFrame
        :data:`CHANGE_COLUMNS`, one row per lane whose flow moved, largest move first; ``what`` is ``newly used``,
        ``no longer used``, ``more`` or ``less``.
    nodes_opened, nodes_closed : list of str
        Depots and hubs used now but not before, and the reverse.
    costs : list of tuple
        ``(key, label, earlier, now, change)`` per cost component either plan has.
    total_cost, cost_change : float
        The new total and its change (NaN when either plan has none).
    """

    earlier: EarlierPlan | None
    lanes: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=CHANGE_COLUMNS))
    nodes_opened: list[str] = field(default_factory=list)
    nodes_closed: list[str] = field(default_factory=list)
    costs: list[tuple[str, str, float, float, float]] = field(default_factory=list)
    total_cost: float = math.nan
    cost_change: float = math.nan

    @property
    def headline(self) -> str:
        """The section title, or the one line saying there is nothing to compare with."""
        if self.earlier is None:
            return "No earlier run: the workbook holds no results of an earlier lanesolve run to compare with."
        return f"What changed since the run of {self.earlier.run_at}"

    def count(self, what: str) -> int:
        return int((self.lanes["what"] == what).sum())

    def to_json(self) -> tuple[list[dict], dict | None]:
        """``(changes, changes_summary)`` for ``--json``: every lane whose flow moved, and the totals."""

        def num(x):
            return None if x is None or not math.isfinite(float(x)) else float(x)

        lanes = [{"origin": r.origin, "destination": r.destination, "mode": r.mode,
                  "previous_flow": float(r.previous_flow), "flow": float(r.flow)}
                 for r in self.lanes.itertuples(index=False)]
        if self.earlier is None:
            return lanes, None
        return lanes, {
            "previous_run_at": self.earlier.run_at,
            "previous_total_cost": num(self.earlier.total_cost),
            "total_cost": num(self.total_cost),
            "cost_change": num(self.cost_change),
            "cost_change_by_component": {key: num(change) for key, _, _, _, change in self.costs},
            "lanes_moved": len(self.lanes),
            "lanes_newly_used": self.count("newly used"),
            "lanes_no_longer_used": self.count("no longer used"),
            "units_moved": float(self.lanes["change"].abs().sum()) if len(self.lanes) else 0.0,
            "nodes_opened": list(self.nodes_opened),
            "nodes_closed": list(self.nodes_closed),
        }


def _used_nodes(flows: pd.DataFrame, network: Network) -> set[str]:
    """Depots and hubs a plan's lanes touch."""
    kinds = network.node_kind()
    touched = set(flows["origin"].tolist()) | set(flows["destination"].tolist()) if len(flows) else set()
    return {n for n in touched if kinds.get(n) in ("depot", "hub")}


def compare_plans(earlier: EarlierPlan | None, result: Result, network: Network) -> PlanChanges:
    """Set the new plan beside the earlier one.

    Parameters
    ----------
    earlier : EarlierPlan or None
        None when the workbook holds no earlier results.
    result : Result
        The new plan (a result without a plan counts as no flow on any lane).
    network : Network
        Tells depots and hubs from customers.

    Returns
    -------
    PlanChanges
    """
    if earlier is None:
        return PlanChanges(None)
    key = ["origin", "destination", "mode"]
    now = result.flows[key + ["flow"]] if result.status.has_plan and len(result.flows) else \
        pd.DataFrame(columns=key + ["flow"])
    before = earlier.flows[key + ["flow"]].groupby(key, as_index=False, sort=False)["flow"].sum()
    merged = before.rename(columns={"flow": "previous_flow"}).merge(now.astype({"mode": object}), on=key,
                                                                     how="outer")
    merged[["previous_flow", "flow"]] = merged[["previous_flow", "flow"]].astype(float).fillna(0.0)
    merged["change"] = merged["flow"] - merged["previous_flow"]
    scale = np.maximum(1.0, np.maximum(merged["flow"].abs(), merged["previous_flow"].abs()))
    moved = merged[(merged["change"].abs() > SAME * scale).to_numpy()].copy()
    moved["what"] = np.select([moved["previous_flow"] <= 0, moved["flow"] <= 0, moved["change"] > 0],
                              ["newly used", "no longer used", "more"], "less")
    order = moved["change"].abs().sort_values(ascending=False, kind="stable").index
    lanes = moved.loc[order, CHANGE_COLUMNS].reset_index(drop=True)

    earlier_nodes = _used_nodes(before[before["flow"] > 0], network)
    nodes_now = _used_nodes(now, network)
    has_plan = result.status.has_plan
    costs = []
    now_costs = {line.key: line.amount for line in result.cost_lines()} if has_plan else {}
    for name in cost_order([*earlier.costs, *now_costs]):
        was, is_ = earlier.costs.get(name, 0.0), now_costs.get(name, math.nan if not has_plan else 0.0)
        costs.append((name, COST_LABELS.get(name, name.replace("_", " ").capitalize()), was, is_, is_ - was))
    total = float(result.total_cost) if has_plan else math.nan
    return PlanChanges(earlier, lanes, sorted(nodes_now - earlier_nodes), sorted(earlier_nodes - nodes_now), costs,
                       total, total - earlier.total_cost)
