"""What the depots and hubs use of their limits, for the summary: the rows the utilisation chart draws.

Everything here works a column at a time; a row is made only for a node that is shown.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from lanesolve.model.result import Result

#: A lane or node at or above this utilisation is "at its limit" (solver round-off tolerated).
FULL_AT = 0.999
#: Rows the utilisation chart draws before it says "and N more".
MAX_UTILISATION_ROWS = 30


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


def utilisation_top(result: Result, top: int | None) -> tuple[list[dict], int]:
    """:func:`utilisation_rows` (the first ``top``) and how many depots and hubs there are.

    Computed a column at a time with the figures and the order a row-by-row pass gives: used and share as Python
    floats of the same arithmetic, sorted by (-share, or 1 without a share; name). Only the nodes that can be among
    the first ``top`` are sorted by name, and only the rows returned are made.
    """
    nodes = result.nodes
    if nodes.empty:
        return [], 0
    frame = nodes[nodes["kind"].isin(["depot", "hub"]).to_numpy()]
    count = len(frame)
    if not count:
        return [], 0
    kinds = frame["kind"].astype(str).to_numpy(dtype=object)
    is_depot = kinds == "depot"
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
            return [], count
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
    return rows, count
