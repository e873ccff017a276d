"""What the depots and hubs use of their limits, for the summary: the rows the utilisation chart draws and the rows
the depot and hub tables list.

The tables
----------
A table of at most :data:`NODE_TABLE_WHOLE` nodes lists every one, in the order of the result sheet *LS Nodes*
(the workbook's order), as it always has. A longer one -- a network with thousands of hubs -- would bury the few
rows a planner acts on in a page nobody reads to the end, so it lists:

1. every node at its limit (the plan would use more of it if it could: :data:`FULL_AT` of its supply or capacity,
   or a limit of zero);
2. every node that is closed (given ``closed`` in the workbook, or closed by the plan's design decisions);
3. every node the utilisation chart above the tables draws, so the chart never shows a node its table leaves out;
4. then the busiest of the rest (most units used: net units shipped by a depot, units through a hub; ties in sheet
   order) until the table has :data:`NODE_TABLE_ROWS` rows.

Rows 1-3 are never dropped, however many there are: the cap limits only how many of the busiest are added. The
rows are then ordered: those at their limit first, then by units used (largest first), closed ones last, ties in
sheet order. A line under the table says how many nodes it leaves out and that *LS Nodes* lists every one.

Everything here works a column at a time; a row is made only for a node that is shown.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from lanesolve.model.network import Network
    from lanesolve.model.result import Result

#: A lane or node at or above this utilisation is "at its limit" (solver round-off tolerated).
FULL_AT = 0.999
#: Rows the utilisation chart draws before it says "and N more".
MAX_UTILISATION_ROWS = 30
#: A depot or hub table of at most this many nodes lists every one (cutting a few rows saves no reader anything).
NODE_TABLE_WHOLE = 100
#: A longer table lists the nodes at their limit, closed or drawn in the chart, then the busiest up to this many rows.
NODE_TABLE_ROWS = 50


def finite_column(frame: pd.DataFrame, name: str) -> np.ndarray:
    """A column as floats, NaN where a value is missing, not a number or not finite (where ``_finite`` says None)."""
    numbers = pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return np.where(np.isfinite(numbers), numbers, np.nan)


def _or_zero(frame: pd.DataFrame, name: str) -> np.ndarray:
    """``_finite(value) or 0.0`` a column at a time: missing is 0, and -0.0 is 0.0."""
    return np.nan_to_num(finite_column(frame, name), nan=0.0) + 0.0


def _used(frame: pd.DataFrame, is_depot: np.ndarray) -> np.ndarray:
    """Units used: a depot's net outflow (shipped minus received, what its supply bounds), a hub's throughput."""
    return np.where(is_depot, _or_zero(frame, "shipped") - _or_zero(frame, "received"), _or_zero(frame, "throughput"))


# --------------------------------------------------------------------------------------------- the chart's rows


def utilisation_rows(result: Result, top: int | None = None) -> list[dict]:
    """Depots and hubs with what they use of their limit, fullest first (ties by name); the first ``top`` of them
    when given.

    A depot's limit is its supply and its use the net outflow; a hub's limit is its capacity and its use the
    throughput (as in :data:`lanesolve.model.result.NODE_COLUMNS`). Nodes without a limit have ``share`` None.
    """
    return utilisation_top(result, top)[0]


def utilisation_top(result: Result, top: int | None) -> tuple[list[dict], int, bool]:
    """:func:`utilisation_rows` (the first ``top``), how many depots and hubs there are, and whether the summary's
    tables are cut (a kind with more than :data:`NODE_TABLE_WHOLE` nodes).

    Computed a column at a time with the figures and the order a row-by-row pass gives: used and share as Python
    floats of the same arithmetic, sorted by (-share, or 1 without a share; name). Only the nodes that can be among
    the first ``top`` are sorted by name, and only the rows returned are made.
    """
    nodes = result.nodes
    if nodes.empty:
        return [], 0, False
    frame = nodes[nodes["kind"].isin(["depot", "hub"]).to_numpy()]
    count = len(frame)
    if not count:
        return [], 0, False
    kinds = frame["kind"].astype(str).to_numpy(dtype=object)
    is_depot = kinds == "depot"
    cut = max(int(is_depot.sum()), count - int(is_depot.sum())) > NODE_TABLE_WHOLE
    used = _used(frame, is_depot)
    limit = np.where(is_depot, finite_column(frame, "supply"), finite_column(frame, "capacity"))
    share = finite_column(frame, "utilisation")
    with np.errstate(divide="ignore", invalid="ignore"):
        derived = np.where(np.isfinite(limit) & (limit != 0), used / limit, np.nan)
    share = np.where(np.isfinite(share), share, derived)  # no share given: used over a limit that is not 0
    first = np.where(np.isnan(share), 1.0, -share)  # the sort key's first part: fullest first, no limit last
    candidates = np.arange(count)
    if top is not None and top < count:
        if top <= 0:
            return [], count, cut
        kth = np.partition(first, top - 1)[top - 1]
        candidates = np.flatnonzero(first <= kth)  # every node that can be among the first ``top``
    names = frame["node"].to_numpy(dtype=object)
    first_values, used_values, limit_values, share_values = (
        array[candidates].tolist() for array in (first, used, limit, share))
    # The position among the candidates breaks ties as a stable sort of the rows would.
    keyed = sorted(zip(first_values, (str(names[i]) for i in candidates), range(len(candidates))))
    if top is not None:
        keyed = keyed[:top]
    rows = []
    for _, name, j in keyed:
        limit_value, share_value = limit_values[j], share_values[j]
        rows.append({"node": name, "kind": str(kinds[candidates[j]]), "used": used_values[j],
                     "limit": None if limit_value != limit_value else limit_value,
                     "share": None if share_value != share_value else share_value})
    return rows, count, cut


# --------------------------------------------------------------------------------------------- the tables' rows


@dataclass
class NodeTable:
    """The rows of one kind's table: ``frame`` (rows of :attr:`Result.nodes`, in the order shown) and ``more``, how
    many nodes of the kind it leaves out (0: the whole table, in sheet order)."""

    frame: pd.DataFrame
    more: int


def closed_nodes(network: Network, result: Result) -> set[str]:
    """Ids of the depots and hubs that carry nothing by decision: given ``closed``, or closed by the plan."""
    closed = set()
    for frame in (network.depots, network.hubs):
        if len(frame):
            status = frame["status"].astype(str).str.strip().str.lower()
            closed.update(frame.loc[(status == "closed").to_numpy(), "id"].astype(str))
    decisions = result.open_nodes
    if len(decisions):
        is_open = decisions["open"].astype(bool).to_numpy()
        closed.update(decisions.loc[~is_open, "node"].astype(str))
    return closed


def node_table(network: Network, result: Result, kind: str, charted: set[str] | None = None) -> NodeTable:
    """The rows the summary lists for ``kind`` (``depot`` or ``hub``); see the module's docstring.

    Parameters
    ----------
    network : Network
        Read for the status given to each depot and hub.
    result : Result
        :attr:`Result.nodes` (the figures) and :attr:`Result.open_nodes` (design decisions).
    kind : {"depot", "hub"}
    charted : set of str, optional
        Ids the utilisation chart draws; by default the first :data:`MAX_UTILISATION_ROWS` of
        :func:`utilisation_rows`, as :func:`lanesolve.report.charts.utilisation_chart` draws them.

    Returns
    -------
    NodeTable
    """
    nodes = result.nodes
    frame = nodes[(nodes["kind"] == kind).to_numpy()] if len(nodes) else nodes
    if len(frame) <= NODE_TABLE_WHOLE:
        return NodeTable(frame, 0)
    ids = frame["node"].astype(str).to_numpy(dtype=object)
    used = _used(frame, np.full(len(frame), kind == "depot"))
    limit = finite_column(frame, "supply" if kind == "depot" else "capacity")
    share = finite_column(frame, "utilisation")
    with np.errstate(invalid="ignore"):  # NaN compares false: no share, or no limit, is not "at the limit"
        at_limit = (share >= FULL_AT) | (limit <= 0)
    closed = np.isin(ids, list(closed_nodes(network, result)))
    if charted is None:
        charted = {row["node"] for row in utilisation_rows(result, top=MAX_UTILISATION_ROWS)}
    kept = at_limit | closed | np.isin(ids, list(charted))
    room = NODE_TABLE_ROWS - int(kept.sum())
    if room > 0:
        rest = np.flatnonzero(~kept)
        kept[rest[np.argsort(-used[rest], kind="stable")[:room]]] = True  # the busiest, ties in sheet order
    shown = int(kept.sum())
    if shown == len(frame):
        return NodeTable(frame, 0)
    positions = np.flatnonzero(kept)
    # At the limit first, then by units used (largest first), closed last: lexsort sorts by its last key first and
    # is stable, so ties keep sheet order.
    order = np.lexsort((-used[positions], closed[positions] & ~at_limit[positions], ~at_limit[positions]))
    return NodeTable(frame.iloc[positions[order]], len(frame) - shown)
