"""Read back the plan an earlier run wrote into the workbook: its lane flows, run time and cost breakdown.

Only sheets lanesolve itself wrote are read -- the ones its mark lists (or, in a workbook solved before results
carried a mark, the fingerprinted ones; :func:`lanesolve.write.writeback.earlier_result_sheets`) -- so a planner's
own sheet named like a result sheet is never taken for a plan. Headers are matched by their leading words, so the
headers of earlier lanesolve versions still read: *Flow (pallets)*, *Flow* and *flow* are all the flow column;
*Transport (EUR)* and *Transport* are the transport cost. Anything unreadable means "no earlier plan", never an
error: the comparison is a courtesy, and the run itself must not fail on an old sheet a planner edited.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pandas as pd

from lanesolve.model.plan_changes import EarlierPlan
from lanesolve.model.result import COST_LABELS
from lanesolve.write.tables import FLOWS_SHEET, SUMMARY_SHEET
from lanesolve.write.writeback import earlier_result_sheets

#: Largest earlier result sheet read back (cells); a bigger one is skipped rather than loaded.
MAX_CELLS = 30_000_000
_BRACKETS = re.compile(r"\s*[\(\[].*$")


def _words(header) -> str:
    """A header without its unit in brackets, lower case, separators as spaces: "Flow (pallets)" -> "flow"."""
    text = "" if header is None else str(header)
    return " ".join(_BRACKETS.sub("", text).replace("_", " ").lower().split())


def _text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value).strip()


def _number(value) -> float:
    if isinstance(value, bool):
        return math.nan
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def _rows(book, name: str) -> list[list] | None:
    sheet = book.get_sheet_by_name(name)
    end = sheet.end
    if end is not None and (end[0] + 1) * (end[1] + 1) > MAX_CELLS:
        return None
    return sheet.to_python(skip_empty_area=False)


def _flows(rows: list[list]) -> pd.DataFrame | None:
    if not rows:
        return None
    header = [_words(h) for h in rows[0]]
    where = {}
    for name in ("origin", "destination", "mode", "flow", "status"):
        where[name] = next((i for i, h in enumerate(header) if h == name or h.startswith(name + " ")), None)
    if where["origin"] is None or where["destination"] is None or where["flow"] is None:
        return None
    records = []
    for row in rows[1:]:
        cell = (lambda i: row[i] if i is not None and i < len(row) else None)
        status = _text(cell(where["status"])).lower()
        flow = _number(cell(where["flow"]))
        if "inactive" in status or not flow > 0:
            continue
        records.append((_text(cell(where["origin"])), _text(cell(where["destination"])),
                        _text(cell(where["mode"])), flow))
    return pd.DataFrame(records, columns=["origin", "destination", "mode", "flow"])


def _summary(rows: list[list]) -> tuple[str, float, dict[str, float]]:
    keys = {label.lower(): key for key, label in COST_LABELS.items()}
    keys.update({key.replace("_", " "): key for key in COST_LABELS})
    run_at, total, costs = "", math.nan, {}
    for row in rows[1:]:
        if len(row) < 2:
            continue
        item, value = _words(row[0]), row[1]
        if item == "run at":
            run_at = _text(value)
        elif item == "total cost":
            total = _number(value)
        elif item in keys and math.isfinite(_number(value)):
            costs[keys[item]] = _number(value)
    return run_at, total, costs


def read_earlier_plan(path: str | Path) -> EarlierPlan | None:
    """The plan held in the workbook's earlier result sheets, or None when there is none to read.

    Parameters
    ----------
    path : path-like
        The input workbook (.xlsx or .xlsm; other kinds never hold lanesolve's results).

    Returns
    -------
    EarlierPlan or None
        None when the workbook has no lanesolve *LS Lane flows* sheet, or it cannot be read.
    """
    names = earlier_result_sheets(path)
    if FLOWS_SHEET not in names:
        return None
    try:
        import python_calamine  # the reader's own library; loaded only when there is something to read

        book = python_calamine.CalamineWorkbook.from_path(str(path))
        flow_rows = _rows(book, FLOWS_SHEET)
        summary_rows = _rows(book, SUMMARY_SHEET) if SUMMARY_SHEET in names else []
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException:  # noqa: BLE001 -- calamine panics derive from BaseException; an unreadable old sheet
        return None        # means "nothing to compare with", never a failed run
    flows = _flows(flow_rows) if flow_rows is not None else None
    if flows is None:
        return None
    run_at, total, costs = _summary(summary_rows or [])
    return EarlierPlan(run_at or "an earlier run", total, costs, flows)
