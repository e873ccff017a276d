"""The LS Sensitivity sheet informs rather than echoes: every marginal cost and capacity value with both sides, the
unused lanes nearest to paying, a count of the rest, and cells at full precision."""

import math
import random

import pandas as pd

from lanesolve.model.result import Result, SolveStatus
from lanesolve.report import summary as report
from lanesolve.write import writeback


def _result(n_lanes: int) -> Result:
    rows = [{"figure": "marginal_cost", "item": "C1", "value": 0.153, "value_up": 0.153, "value_down": 0.153,
             "unique": True, "basis": "LP", "text": "c1"},
            {"figure": "supply_value", "item": "D1", "value": math.nan, "value_up": 2.0571, "value_down": 3.0,
             "unique": False, "basis": "LP", "text": "d1"}]
    # Reduced costs in shuffled order; one lane no plan can use (inf).
    values = [float(v) for v in range(1, n_lanes)] + [math.inf]
    random.Random(1).shuffle(values)
    for k, v in enumerate(values):
        rows.append({"figure": "reduced_cost", "item": f"L{k}", "value": v if math.isfinite(v) else math.nan,
                     "value_up": v, "value_down": math.nan, "unique": math.isfinite(v), "basis": "LP",
                     "text": f"lane {k}"})
    return Result(SolveStatus.OPTIMAL, total_cost=1.0, sensitivity=pd.DataFrame(rows))


def test_small_plans_list_every_figure_with_both_sides_at_full_precision():
    sheet = writeback.sensitivity_sheet(_result(5))
    assert len(sheet.rows) == 2 + 5
    assert not any("more unused lanes" in str(r[-1]) for r in sheet.rows)
    assert sheet.rows[0][2:5] == [0.153, 0.153, 0.153]  # not rounded to 0.15
    assert sheet.rows[1][2:6] == [None, 2.0571, 3.0, "no"]  # the sides differ: both, and no single value
    assert sheet.kinds["one more unit"] == "number"  # written as given, not rounded to money's 2 decimals


def test_large_plans_keep_the_lanes_nearest_to_paying_and_count_the_rest():
    cap = writeback.MAX_REDUCED_COST_ROWS
    sheet = writeback.sensitivity_sheet(_result(cap + 250))
    lanes = [r for r in sheet.rows if r[1] is not None and str(r[1]).startswith("L")]
    assert len(lanes) == cap
    # The cap keeps the nearest: exactly the values 1 .. cap, in ascending order (the inf lane is left out).
    assert [r[3] for r in lanes] == [float(v) for v in range(1, cap + 1)]
    assert sheet.rows[-1][-1].startswith(f"... and {250:,} more unused lanes")
    # Marginal costs and capacity values are all kept.
    assert [r[1] for r in sheet.rows[:2]] == ["C1", "D1"]


def test_summary_lists_the_unused_lanes_nearest_to_paying():
    frame = _result(40).sensitivity
    nearest = report.top_few(frame, "reduced_cost", 5)
    assert nearest["value_up"].tolist() == [1.0, 2.0, 3.0, 4.0, 5.0]


def test_unused_lane_sentences_are_the_same_with_and_without_arrow():
    """The column-wise (pyarrow) and row-by-row builders of unused-lane sentences agree on 120,000 amounts of every
    size, ties and whole numbers included, and both write amounts as money_words does."""
    import numpy as np

    from lanesolve.model import sensitivity

    rng = np.random.default_rng(0)
    values = np.concatenate([rng.random(30000) * 20, rng.random(30000) * 2000, np.round(rng.random(20000) * 100, 4),
                             rng.integers(0, 500, 20000) / 8, 10.0 ** rng.uniform(-6, 6, 20000), [0.0, math.inf]])
    n = len(values)
    ends = (np.array(["A"] * n, dtype=object), np.array(["B"] * n, dtype=object),
            np.array(["", "rail"] * (n // 2), dtype=object))
    words = (" mid ", " end.", " free.", " never.")
    arrow = sensitivity._reduced_words_arrow(*ends, values, *words)
    rows = sensitivity._reduced_words_rows(*ends, values, *words)
    assert list(arrow[0]) == list(rows[0]) and list(arrow[1]) == list(rows[1])
    assert rows[1][0] == f"Lane A -> B mid {sensitivity.money_words(values[0])} end."
