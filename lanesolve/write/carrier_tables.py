"""The result sheets *LS Carriers* (per carrier: volume, share, cost, commitments and their value) and *LS Changes*
(what changed since the earlier run), as plain tables like those of :mod:`lanesolve.write.tables`."""

from __future__ import annotations

import math

from lanesolve.model.plan_changes import PlanChanges
from lanesolve.write.tables import CARRIERS_SHEET, CHANGES_SHEET, Labels, ResultSheet, _plain

_COMMITMENT_WORDS = {"min_volume": "minimum volume", "max_volume": "maximum volume", "max_share": "largest share",
                     "": "none"}


def carriers_sheet(result, settings) -> ResultSheet | None:
    """``"LS Carriers"``: one row per carrier and commitment (None when no lane names a carrier).

    A change the plan's fixed decisions cannot follow is a blank figure with the words "not possible" in the text.
    """
    frame = result.carriers
    if not result.status.has_plan or frame is None or not len(frame):
        return None
    labels = Labels.of(settings)
    spec = [("Carrier", "text"), ("Lanes", "count"), (labels.quantity("Volume"), "quantity"),
            ("Share of units delivered", "percent"), (labels.money("Cost"), "money"), ("Commitment", "text"),
            ("Bound (units, or share)", "number"), ("State", "text"),
            (labels.money("Cost change if the bound is one unit lower"), "money"),
            (labels.money("Cost change if the bound is one unit higher"), "money"), ("In words", "text")]
    rows = []
    for r in frame.itertuples(index=False):
        rows.append([r.carrier, int(r.lanes), _plain(r.volume), _plain(r.share), _plain(r.cost),
                     _COMMITMENT_WORDS.get(r.commitment, r.commitment), _plain(r.bound), r.state,
                     None if math.isinf(r.cost_one_less) else _plain(r.cost_one_less),
                     None if math.isinf(r.cost_one_more) else _plain(r.cost_one_more), r.text])
    return ResultSheet(CARRIERS_SHEET, [c for c, _ in spec], rows, dict(spec))


def changes_sheet(changes: PlanChanges | None, settings) -> ResultSheet | None:
    """``"LS Changes"``: the earlier run's time, the cost change per component, the depots and hubs newly used or
    no longer used, then every lane whose flow moved, largest move first. None without an earlier run (the summary
    and the terminal say so in one line)."""
    labels = Labels.of(settings)
    columns = ["What", "Item", "Origin", "Destination", "Mode", "Earlier", "Now", "Change"]
    if changes is None or changes.earlier is None:
        return None
    rows: list[list] = [["Earlier run", changes.earlier.run_at, None, None, None, None, None, None]]
    kinds: dict[tuple[int, int], str] = {}
    money = labels.money("Total cost")
    for label, was, now, change in [(money, changes.earlier.total_cost, changes.total_cost, changes.cost_change),
                                    *[(labels.money(label), was, now, change)
                                      for _, label, was, now, change in changes.costs]]:
        for column in (5, 6, 7):
            kinds[(len(rows), column)] = "money"
        rows.append(["Cost", label, None, None, None, _plain(was), _plain(now), _plain(change)])
    rows += [["Depot or hub now used", node, None, None, None, None, None, None] for node in changes.nodes_opened]
    rows += [["Depot or hub no longer used", node, None, None, None, None, None, None]
             for node in changes.nodes_closed]
    words = {"newly used": "Lane newly used", "no longer used": "Lane no longer used", "more": "Lane carries more",
             "less": "Lane carries less"}
    for r in changes.lanes.itertuples(index=False):
        for column in (5, 6, 7):
            kinds[(len(rows), column)] = "quantity"
        rows.append([words[r.what], f"{r.origin} -> {r.destination}" + (f" ({r.mode})" if r.mode else ""),
                     r.origin, r.destination, r.mode, float(r.previous_flow), float(r.flow), float(r.change)])
    if not len(changes.lanes):
        rows.append(["No lane moved", "every lane carries what it carried in the earlier run", None, None, None,
                     None, None, None])
    return ResultSheet(CHANGES_SHEET, columns, rows, {c: "text" for c in columns[:5]}, kinds)
