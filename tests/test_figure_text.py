"""Figures made into rows only when read: the rows made later are the rows a full build makes, in its order, and
every output shows the same; amounts and sentences written a column at a time are the words written one by one."""

import math

import numpy as np
import pandas as pd

from lanesolve.model import figure_text
from lanesolve.model.analyse import solve_and_analyse
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import JSON_UNUSED_LANES, Result, SolveStatus
from lanesolve.model.sensitivity import analyse_plan
from lanesolve.report import advice
from lanesolve.report import summary as report
from lanesolve.write import writeback


def test_amount_words_are_money_words_for_every_kind_of_value():
    rng = np.random.default_rng(3)
    values = np.concatenate([rng.random(20000) * 20, rng.random(20000) * 5000, np.round(rng.random(5000) * 100, 4),
                             10.0 ** rng.uniform(-7, 8, 20000), [0.0, -0.0, math.inf, -math.inf, math.nan, 1e16]])
    values = np.concatenate([values, -values])
    for currency in ("", "EUR"):
        # money_words, one value at a time, is the reference the column-wise words must equal.
        expected = [figure_text.money_words(v, currency) for v in values.tolist()]
        assert figure_text.amount_words(values, currency).tolist() == expected


def test_joined_texts_are_the_f_strings_whatever_the_values():
    items = np.array(["Ashby", "Brill", 42, "Cæsar"], dtype=object)  # 42: not text, written as str() would
    joined = figure_text._joined("at ", items, " costs ", np.array(["1.00", "2.50", "3.00", "4.00"], dtype=object))
    assert joined.tolist() == [f"at {i} costs {a}" for i, a in zip(items, ["1.00", "2.50", "3.00", "4.00"])]


def test_unused_lanes_shown_then_the_rest_follow_the_stable_order():
    rng = np.random.default_rng(5)
    values = np.concatenate([np.round(rng.random(3000) * 5, 1), [math.inf] * 40, [0.0] * 700])
    rng.shuffle(values)
    ends = tuple(pd.Series([f"{k}{i}" for i in range(len(values))], dtype=object) for k in "ODM")
    for count in (0, 1, 500, 2999, len(values)):
        lanes = figure_text.UnusedLanes(values, np.arange(len(values)), ends, "LP", "pallets", "EUR", False)
        shown = figure_text.figure_frame([lanes.show(count)])
        # numpy's stable argsort is the reference order: nearest first, lane order among equal figures.
        expected = [f"O{i} -> D{i} (M{i})" for i in np.argsort(values, kind="stable")]
        assert shown["item"].tolist() + lanes.rows()["item"].tolist() == expected
        assert len(lanes) == len(values) - min(count, len(values))


def _parallel_lanes() -> object:
    # One depot, one customer and 600 lanes between them by different modes: 520 at 1.00 per pallet (one used,
    # 519 equally cheap, figure 0) and 80 dearer by 0.01 each (figures 0.01 ... 0.80): the reduced cost of lane k is
    # c_k - (pi_C - pi_D) = c_k - 1.00 (Ahuja, Magnanti & Orlin, Network Flows, 1993, section 9.4).
    lanes = [{"origin": "D", "destination": "C", "mode": f"m{k:03d}",
              "cost_per_unit": 1.0 if k < 520 else round(1.0 + 0.01 * (k - 519), 2)} for k in range(600)]
    return make_network([{"id": "D", "supply": 20}], [{"id": "C", "demand": 10}], lanes,
                        settings=Settings(units="pallets", currency="EUR"))


def test_a_large_plan_shows_what_the_full_figures_show():
    net = _parallel_lanes()
    result = solve_and_analyse(net)
    full = Result(SolveStatus.OPTIMAL, total_cost=result.total_cost, sensitivity=analyse_plan(net, result),
                  flows=result.flows, unmet=result.unmet)
    assert result.figures_beyond() is not None and len(result.figures_beyond()) == 599 - JSON_UNUSED_LANES
    pd.testing.assert_frame_equal(result.all_figures(), full.sensitivity)
    assert writeback.sensitivity_sheet(result).rows == writeback.sensitivity_sheet(full).rows
    for all_figures in (False, True):
        assert result.to_json(all_figures)["sensitivity"] == full.to_json(all_figures)["sensitivity"]
        assert result.to_json(all_figures)["sensitivity_omitted"] == full.to_json(all_figures)["sensitivity_omitted"]
    assert report._sensitivity_context(result, "pallets", "EUR") == report._sensitivity_context(full, "pallets", "EUR")
    # The 500 rows made are all figure 0; the lanes nearest to paying above round-off lie beyond them.
    steps = advice.next_steps(net, result)
    assert steps == advice.next_steps(net, full)
    assert steps == [f"Nearest to paying: lane D→C (m{k}) would be used if it cost {(k - 519) / 100:.2f} EUR per "
                     "pallet less." for k in (520, 521, 522)]


def test_a_frame_set_later_stands_alone():
    net = _parallel_lanes()
    result = solve_and_analyse(net)
    result.sensitivity = result.sensitivity.head(3)
    assert result.figures_beyond() is None
    assert result.to_json()["sensitivity_omitted"] == 0 and len(result.all_figures()) == 3


def _bounded_lanes(seed: int, with_upper: bool):
    """Unused lanes whose figures are known only as bounds until a hand-made resolver finds them: invented integer
    figures, a lower bound up to 30 below each (never below 0) and an upper bound up to 30 above, a tenth known
    exactly from the start; or (``with_upper`` false) no upper bound and none known. The resolver records the caps
    it was asked for."""
    rng = np.random.default_rng(seed)
    figures = rng.integers(0, 400, 2000).astype(float)
    exact = (rng.random(len(figures)) < 0.1) & with_upper
    lower = np.where(exact, figures, np.maximum(0.0, figures - rng.integers(0, 30, len(figures))))
    upper = figures + rng.integers(0, 30, len(figures)) if with_upper else None
    caps = []

    def resolve(positions, cap):
        caps.append(cap)
        known = np.ones(len(positions), dtype=bool) if cap is None else figures[positions] <= cap
        return np.where(known, figures[positions], math.nan), known

    ends = tuple(pd.Series([f"{k}{i}" for i in range(len(figures))], dtype=object) for k in "ODM")
    lanes = figure_text.UnusedLanes(lower, np.arange(len(figures)), ends, "LP", "pallets", "EUR", False,
                                    exact=exact, resolve=resolve, upper=upper)
    return figures, np.where(exact, figures, upper if with_upper else math.inf), lanes, caps


def test_nearest_lanes_are_settled_in_one_round_capped_at_the_count_th_upper_bound():
    # At least count figures lie at or below the count-th smallest upper bound, so one round of searches capped
    # there must settle the nearest lanes; numpy's stable argsort of the true figures is the reference order.
    for seed in range(5):
        figures, upper, lanes, caps = _bounded_lanes(seed, with_upper=True)
        shown = figure_text.figure_frame([lanes.show(50)])
        assert shown["item"].tolist() == [f"O{i} -> D{i} (M{i})" for i in np.argsort(figures, kind="stable")[:50]]
        assert len(caps) == 1, f"one round was enough, {len(caps)} were made"
        assert np.sort(figures)[49] <= caps[0] <= np.sort(upper)[49] * (1 + 1e-6)
        # The few above a threshold (the near-miss advice) and every lane beyond follow as the reference says.
        rest = np.argsort(figures, kind="stable")[50:]
        threshold = float(figures[rest[0]])
        above = rest[figures[rest] > threshold]
        cut = np.sort(figures[above])[2]
        few = lanes.nearest_above(threshold, 3)
        assert sorted(few["item"]) == sorted(f"O{i} -> D{i} (M{i})" for i in above[figures[above] <= cut])
        assert lanes.rows()["item"].tolist() == [f"O{i} -> D{i} (M{i})" for i in rest]


def test_nearest_lanes_without_upper_bounds_grow_the_radius_round_by_round():
    # No upper bound known: the radius starts small and grows fourfold; the rows must still be the reference's.
    for seed in range(3):
        figures, _, lanes, caps = _bounded_lanes(seed, with_upper=False)
        shown = figure_text.figure_frame([lanes.show(50)])
        assert shown["item"].tolist() == [f"O{i} -> D{i} (M{i})" for i in np.argsort(figures, kind="stable")[:50]]
        assert len(caps) >= 2 and all(b >= 4 * a * (1 - 1e-12) for a, b in zip(caps, caps[1:]))
