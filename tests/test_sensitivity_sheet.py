"""The LS Sensitivity sheet informs rather than echoes: every marginal cost and capacity value, the unused lanes
nearest to paying, and a count of the rest."""

import pandas as pd

from lanesolve.write import writeback
from lanesolve.model.result import Result, SolveStatus


def _result(n_lanes: int) -> Result:
    rows = [{"figure": "marginal_cost", "item": "C1", "value": 12.5, "unique": True, "basis": "LP", "text": "c1"},
            {"figure": "supply_value", "item": "D1", "value": 3.0, "unique": True, "basis": "LP", "text": "d1"}]
    # Reduced costs n, n-1, ..., 1 so that the smallest come last in the input; one of them is not unique.
    for k in range(n_lanes):
        rows.append({"figure": "reduced_cost", "item": f"L{k}", "value": float(n_lanes - k),
                     "unique": k != n_lanes - 1, "basis": "LP", "text": f"lane {k}"})
    return Result(SolveStatus.OPTIMAL, total_cost=1.0, sensitivity=pd.DataFrame(rows))


def test_small_plans_list_every_figure():
    sheet = writeback.sensitivity_sheet(_result(5))
    assert len(sheet.rows) == 2 + 5
    assert not any("more unused lanes" in str(r[-1]) for r in sheet.rows)


def test_large_plans_keep_the_lanes_nearest_to_paying_and_count_the_rest():
    cap = writeback.MAX_REDUCED_COST_ROWS
    sheet = writeback.sensitivity_sheet(_result(cap + 250))
    lanes = [r for r in sheet.rows if r[1] is not None and str(r[1]).startswith("L")]
    assert len(lanes) == cap
    values = [r[2] for r in lanes]
    # The not-unique lane (value 1, the smallest) sorts after every unique one; the unique ones ascend from 2.
    assert values == sorted(values) and values[0] == 2.0
    assert sheet.rows[-1][-1].startswith(f"... and {250:,} more unused lanes")
    # Marginal costs and capacity values are all kept.
    assert [r[1] for r in sheet.rows[:2]] == ["C1", "D1"]
