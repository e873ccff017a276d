"""The Carriers and Rate breaks sheets and the Lanes columns ``carrier`` / ``minimum_charge``: checks across rows.

:func:`lanesolve.read.sheets.read_table` has already parsed each cell (numbers, ranges, required cells); what is
checked here needs several rows or sheets at once, and every problem names its sheet, row and column with a hint:

- Carriers: a carrier listed twice; ``min_volume`` above ``max_volume``; a carrier no active lane names (a warning:
  its commitments then bind nothing, or -- with a minimum -- cannot be met, which the pre-solve checks report).
- Rate breaks: a row whose origin, destination and mode name no lane; ``from_volume`` of 0 (the lane's own
  ``cost_per_unit`` applies from 0 to its first break); a lane's breaks listed out of order or one
  ``from_volume`` repeated; two kinds on one lane; a blank kind.

``max_share`` outside 0-1 and negative volumes are reported by the cell parser (the contract gives their range).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.model.network import RATE_BREAK_COLUMNS, carrier_frame, empty_rate_breaks
from lanesolve.read.findings import Findings, show
from lanesolve.read.sheets import Table


def _column(table: Table, name: str, default) -> pd.Series:
    values = table.values.get(name)
    return values.reset_index(drop=True) if values is not None else pd.Series([default] * len(table), dtype=object)


def _ok(table: Table, name: str) -> np.ndarray:
    invalid = table.invalid.get(name)
    return np.ones(len(table), dtype=bool) if invalid is None else ~invalid


def check_carriers(carriers: Table, lanes: Table, found: Findings) -> pd.DataFrame:
    """Check the Carriers sheet against itself and the lanes; the :attr:`Network.carriers` frame.

    Parameters
    ----------
    carriers, lanes : Table
        The parsed Carriers and Lanes tables (the Lanes table with any lanes file rows).
    found : Findings
        Problems are added here.

    Returns
    -------
    DataFrame
        :data:`~lanesolve.model.network.CARRIER_COLUMNS`; empty without a Carriers sheet.
    """
    if carriers.sheet_name is None or len(carriers) == 0:
        return carrier_frame(None)
    ids = _column(carriers, "carrier", "")
    low = _column(carriers, "min_volume", np.nan).astype(float).to_numpy()
    high = _column(carriers, "max_volume", np.nan).astype(float).to_numpy()
    share = _column(carriers, "max_share", np.nan).astype(float).to_numpy()
    ok_id = _ok(carriers, "carrier")

    seen: dict[str, int] = {}
    for pos in np.flatnonzero(ok_id):
        name = ids.iloc[pos]
        if name in seen:
            found.add(*carriers.where(pos, "carrier"), name,
                      f"carrier '{name}' is already listed in row {seen[name]}",
                      "keep one row per carrier: merge the two rows")
        else:
            seen[name] = int(carriers.rows[pos])
    both = _ok(carriers, "min_volume") & _ok(carriers, "max_volume") & (low > high)
    for pos in np.flatnonzero(both):
        found.add(*carriers.where(pos, "min_volume"), float(low[pos]),
                  f"min_volume {show(float(low[pos]))} is more than max_volume {show(float(high[pos]))}, so no "
                  f"plan could meet both", "lower min_volume or raise max_volume")

    lane_carrier = _column(lanes, "carrier", "").fillna("").astype(str)
    active = _column(lanes, "active", True).fillna(True).astype(bool).to_numpy()
    named = set(lane_carrier[active & (lane_carrier != "").to_numpy()])
    for pos in np.flatnonzero(ok_id):
        name = ids.iloc[pos]
        if name not in named and seen.get(name) == int(carriers.rows[pos]):
            found.add(*carriers.where(pos, "carrier"), name,
                      f"no active lane names carrier '{name}' in its column carrier, so its commitments bind "
                      f"no lane", "write the carrier's id in the Lanes column carrier of its lanes, or delete the row",
                      severity="warning")
    return carrier_frame(pd.DataFrame({"id": ids, "min_volume": low, "max_volume": high, "max_share": share,
                                       "row": carriers.rows})[ok_id].drop_duplicates("id"))


def check_rate_breaks(breaks: Table, lanes: Table, found: Findings) -> pd.DataFrame:
    """Check the Rate breaks sheet and tie each row to its lane; the :attr:`Network.rate_breaks` frame.

    Parameters
    ----------
    breaks, lanes : Table
        The parsed Rate breaks and Lanes tables.
    found : Findings
        Problems are added here.

    Returns
    -------
    DataFrame
        :data:`~lanesolve.model.network.RATE_BREAK_COLUMNS` with ``lane`` the lane's position in the Lanes table
        (= its index in ``network.lanes``), sorted by lane and ``from_volume``; rows with a problem left out.
    """
    if breaks.sheet_name is None or len(breaks) == 0:
        return empty_rate_breaks()
    keys = {key: pos for pos, key in enumerate(zip(_column(lanes, "origin", ""), _column(lanes, "destination", ""),
                                                   _column(lanes, "mode", "").fillna("")))}
    by_pair: dict[tuple[str, str], list[str]] = {}
    for origin, destination, mode in keys:
        by_pair.setdefault((origin, destination), []).append(mode)
    origin, destination = _column(breaks, "origin", ""), _column(breaks, "destination", "")
    mode = _column(breaks, "mode", "").fillna("")
    start = _column(breaks, "from_volume", np.nan).astype(float).to_numpy()
    rate = _column(breaks, "cost_per_unit", np.nan).astype(float).to_numpy()
    kind = _column(breaks, "kind", "").fillna("")
    usable = _ok(breaks, "origin") & _ok(breaks, "destination") & _ok(breaks, "from_volume") & \
        _ok(breaks, "cost_per_unit") & _ok(breaks, "kind") & ~np.isnan(start) & ~np.isnan(rate)

    lane = np.full(len(breaks), -1)
    for pos in np.flatnonzero(_ok(breaks, "origin") & _ok(breaks, "destination")):
        key = (origin.iloc[pos], destination.iloc[pos], mode.iloc[pos])
        if key in keys:
            lane[pos] = keys[key]
            continue
        modes = by_pair.get(key[:2])
        shown = f"{key[0]} -> {key[1]}" + (f" with mode '{key[2]}'" if key[2] else " with no mode")
        hint = (("its modes on Lanes are " + ", ".join(f"'{m}'" if m else "blank" for m in modes) +
                 ": write one of them in mode") if modes else
                "add the lane to the Lanes sheet, or correct origin, destination or mode")
        found.add(*breaks.where(pos, "origin"), f"{key[0]} -> {key[1]}", f"no lane {shown} is on the Lanes sheet",
                  hint)
    usable &= lane >= 0
    for pos in np.flatnonzero(_ok(breaks, "from_volume") & (start == 0)):
        found.add(*breaks.where(pos, "from_volume"), 0.0,
                  "from_volume is 0; a break starts above 0 (the lane's own cost_per_unit applies from 0 to its "
                  "first break)", "change the lane's cost_per_unit on Lanes instead, or enter a volume above 0")
    usable &= start > 0
    for pos in np.flatnonzero(_ok(breaks, "kind") & (kind == "").to_numpy()):
        found.add(*breaks.where(pos, "kind"), None, "kind is blank",
                  f"write one of {', '.join(contract.BREAK_KINDS)}")
    usable &= (kind != "").to_numpy()

    frame = pd.DataFrame({"lane": lane, "from_volume": start, "cost_per_unit": rate, "kind": kind.to_numpy(),
                          "row": breaks.rows, "pos": np.arange(len(breaks))})[usable]
    bad_lanes: set[int] = set()
    for lane_pos, rows in frame.groupby("lane", sort=False):
        label = f"{origin.iloc[rows['pos'].iloc[0]]} -> {destination.iloc[rows['pos'].iloc[0]]}"
        kinds = list(dict.fromkeys(rows["kind"]))
        if len(kinds) > 1:
            first = rows[rows["kind"] == kinds[0]].iloc[0]
            for record in rows[rows["kind"] != kinds[0]].itertuples(index=False):
                found.add(*breaks.where(record.pos, "kind"), record.kind,
                          f"lane {label} has breaks of kind '{kinds[0]}' (row {first['row']}) and '{record.kind}'; "
                          f"all rows of one lane share one kind", f"write '{kinds[0]}' or '{record.kind}' in every "
                          f"row of this lane")
            bad_lanes.add(lane_pos)
        previous = None
        for record in rows.itertuples(index=False):
            if previous is not None and record.from_volume == previous.from_volume:
                found.add(*breaks.where(record.pos, "from_volume"), record.from_volume,
                          f"lane {label} already has a break at {show(record.from_volume)} (row {previous.row})",
                          "keep one row per break: delete or change one of them")
                bad_lanes.add(lane_pos)
            elif previous is not None and record.from_volume < previous.from_volume:
                found.add(*breaks.where(record.pos, "from_volume"), record.from_volume,
                          f"lane {label}'s breaks are out of order: {show(record.from_volume)} comes after "
                          f"{show(previous.from_volume)} (row {previous.row})",
                          "list a lane's breaks from the smallest from_volume up")
                bad_lanes.add(lane_pos)
            previous = record
    frame = frame[~frame["lane"].isin(bad_lanes)]
    if frame.empty:
        return empty_rate_breaks()
    frame = frame.astype({"lane": int, "row": int})
    return frame[RATE_BREAK_COLUMNS].sort_values(["lane", "from_volume"], kind="stable").reset_index(drop=True)
