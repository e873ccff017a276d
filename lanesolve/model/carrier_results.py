"""What a plan means for carriers and tariffs: lane costs as charged, per-carrier figures and what a binding
commitment is worth.

- :func:`tidy_values` makes the minimum-charge columns follow the plan's flows (a lane is charged exactly when it
  carries flow; its top-up is what lifts its cost to the minimum), as :func:`lanesolve.model.solve.plan_values`
  does for the other yes/no columns.
- :func:`apply_lane_costs` puts each lane's cost as charged -- rate breaks and minimum charge included -- in
  ``Result.flows`` (``variable_cost``; ``cost_per_unit`` becomes the average rate, so rate x flow = cost).
- :func:`carrier_figures` fills ``Result.carriers``: per carrier its volume, share of units delivered, cost, and
  for each commitment whether it is met with room or binding. A binding commitment gets two figures, by re-solve:
  the change in total cost when its bound moves one unit down and one unit up, with every yes/no decision of the
  plan (lanes used, nodes opened, tariff brackets, trips) kept as it is -- the linear program that is left. For a
  plan that is a pure LP this is the LP itself, so the figures are exact one-unit differences, valid on both sides
  even where the dual jumps (they are not the one-sided duals). A move the fixed decisions cannot follow (say one
  more unit on a carrier whose lanes are all full) is reported as not possible.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd

from lanesolve.model.arrays import SparseModel
from lanesolve.model.network import Network
from lanesolve.model.result import CARRIER_RESULT_COLUMNS, Result, empty_frame, singular

#: A commitment counts as binding when the plan is within this of its bound (relative to max(1, |bound|)).
BINDING = 1e-6

#: Commitment columns of the Carriers sheet, their row family and the word for a binding one.
_COMMITMENTS = (("min_volume", "carrier_min_", "minimum"), ("max_volume", "carrier_max_", "maximum"),
                ("max_share", "carrier_share_", "share"))


def tidy_values(network: Network, model: SparseModel, values: np.ndarray) -> np.ndarray:
    """``values`` with every ``charged_`` column 1 exactly when its lane carries flow and every top-up just what
    lifts the lane's tariff cost to its minimum charge (0 for an unused lane)."""
    lanes = model.ids("charged_")
    if not len(lanes):
        return values
    values = values.copy()
    flow = pd.Series(values[:len(model.lane_index)], index=model.lane_index).reindex(lanes).to_numpy()
    used = flow > 0
    values[model.columns("charged_")] = used.astype(float)
    tariff = _tariff_cost(network, model, values).reindex(lanes).to_numpy()
    minimum = network.lanes.loc[lanes, "minimum_charge"].to_numpy(dtype=float)
    values[model.columns("min_charge_top_")] = np.where(used, np.maximum(0.0, minimum - tariff), 0.0)
    return values


def _tariff_cost(network: Network, model: SparseModel, values: np.ndarray) -> pd.Series:
    """Per active lane index: flow x own rate plus its rate-break segments (without the minimum-charge top-up)."""
    lane_index = model.lane_index
    cost = pd.Series(values[:len(lane_index)] * network.lanes.loc[lane_index, "cost_per_unit"].to_numpy(dtype=float),
                     index=lane_index)
    segments = model.columns("tariff_seg_")
    if segments.stop > segments.start:
        lanes = model.lane_cost_terms.lanes[:segments.stop - segments.start]
        extra = model.costs["transport"][segments] * values[segments]
        cost = cost.add(pd.Series(extra).groupby(lanes).sum(), fill_value=0.0)
    return cost


def lane_cost(network: Network, model: SparseModel, values: np.ndarray) -> pd.Series:
    """Per active lane index: its transport cost as charged (rate breaks and minimum-charge top-up included)."""
    cost = _tariff_cost(network, model, values)
    tops = model.columns("min_charge_top_")
    if tops.stop > tops.start:
        cost = cost.add(pd.Series(values[tops], index=model.ids("min_charge_top_")), fill_value=0.0)
    return cost


def apply_lane_costs(result: Result, network: Network, model: SparseModel, values: np.ndarray) -> None:
    """Replace ``variable_cost`` and ``cost_per_unit`` in ``result.flows`` by the cost as charged, for lanes with
    rate breaks or a minimum charge (the others are already right)."""
    terms = model.lane_cost_terms
    if terms is None or not len(terms.lanes) or result.flows.empty:
        return
    charged = lane_cost(network, model, values)
    lanes = network.lanes
    key = ["origin", "destination", "mode"]
    flows = result.flows
    # Flow rows are the used active lanes in lane order; find each row's lane by its (unique) key.
    lane_of_row = flows[key].merge(lanes[key].reset_index(), on=key, how="left")["index"].to_numpy()
    touched = np.isin(lane_of_row, terms.lanes)
    if touched.any():
        cost = charged.reindex(lane_of_row[touched]).to_numpy(dtype=float)
        flows.loc[touched, "variable_cost"] = cost
        flows.loc[touched, "cost_per_unit"] = cost / flows.loc[touched, "flow"].to_numpy(dtype=float)


def fixed_lp(model: SparseModel, values: np.ndarray) -> SparseModel:
    """``model`` with every integer column fixed at its (rounded) plan value and made continuous."""
    if not model.is_mip:
        return model
    lower, upper = model.lower.copy(), model.upper.copy()
    whole = model.integer
    lower[whole] = upper[whole] = np.round(values[whole])
    return dataclasses.replace(model, lower=lower, upper=upper, integer=np.zeros(len(whole), dtype=bool))


def _row(model: SparseModel, prefix: str, k: int) -> int | None:
    block = model.row_blocks.get(prefix)
    if block is None:
        return None
    where = np.flatnonzero(block.ids == k)
    return int(block.start + where[0]) if len(where) else None


def _cost_at(lp: SparseModel, row: int, shift: float, solve_lp) -> float | None:
    """Objective of ``lp`` with row ``row``'s finite bound moved by ``shift``; None when no plan then exists."""
    lower, upper = lp.row_lower.copy(), lp.row_upper.copy()
    if np.isfinite(lower[row]):
        lower[row] += shift
    if np.isfinite(upper[row]):
        upper[row] += shift
    answer = solve_lp(dataclasses.replace(lp, row_lower=lower, row_upper=upper))
    if not answer.status.has_plan:
        return None
    return float(lp.cost @ answer.value) + lp.objective_constant


def carrier_figures(network: Network, model: SparseModel, values: np.ndarray, result: Result,
                    solve_lp) -> pd.DataFrame:
    """The :data:`~lanesolve.model.result.CARRIER_RESULT_COLUMNS` frame: one row per carrier and commitment.

    Parameters
    ----------
    network : Network
    model : SparseModel
        The model the plan solves.
    values : numpy.ndarray
        The plan's column values (tidied).
    result : Result
        The plan (its flows already carry lane costs as charged).
    solve_lp : callable
        ``solve_lp(model) -> Answer``: runs the solver on a pure LP (the re-solves of binding commitments).

    Returns
    -------
    DataFrame
        A carrier with no commitment gets one row (``commitment`` blank); one with several gets a row for each.
        Carriers come in the order of the Carriers sheet, then those only named on Lanes. Empty when no lane
        names a carrier and there is no Carriers sheet.
    """
    lanes = network.active_lanes
    named = [c for c in lanes["carrier"].unique().tolist() if c]  # in order of first appearance
    listed = network.carriers["id"].tolist()
    order = listed + [c for c in named if c not in listed]
    if not order:
        return empty_frame(CARRIER_RESULT_COLUMNS)
    flow = pd.Series(values[:len(model.lane_index)], index=model.lane_index)
    charged = lane_cost(network, model, values)
    fixed = pd.Series(0.0, index=model.lane_index)
    used = flow > 0
    fixed[used] = network.lanes.loc[flow.index[used], "fixed_cost"].to_numpy(dtype=float)
    delivered = float(network.customers["demand"].sum()) - float(result.unmet["quantity"].sum()
                                                                    if len(result.unmet) else 0.0)
    lp = None
    base = None
    rows = []
    for name in order:
        lane_ids = lanes.index[(lanes["carrier"] == name).to_numpy()]
        volume = float(flow.reindex(lane_ids).sum())
        cost = float(charged.reindex(lane_ids).fillna(0.0).sum() + fixed.reindex(lane_ids).sum())
        share = volume / delivered if delivered > 0 else math.nan
        common = {"carrier": name, "lanes": int(len(lane_ids)), "volume": volume, "share": share, "cost": cost}
        k = listed.index(name) if name in listed else None
        commitments = []
        if k is not None:
            for column, prefix, word in _COMMITMENTS:
                bound = float(network.carriers[column].iloc[k])
                if not math.isnan(bound):
                    commitments.append((column, prefix, word, bound))
        if not commitments:
            rows.append({**common, "commitment": "", "bound": math.nan, "state": "no commitment",
                         "cost_one_less": math.nan, "cost_one_more": math.nan})
            continue
        for column, prefix, word, bound in commitments:
            limit = bound * delivered if column == "max_share" else bound
            near = abs(volume - limit) <= BINDING * max(1.0, abs(limit))
            state = f"binding ({word})" if near else "met"
            less = more = math.nan
            row = _row(model, prefix, k)
            if near and row is not None:
                if lp is None:
                    lp = fixed_lp(model, values)
                    base = _cost_at(lp, row, 0.0, solve_lp)
                if base is not None:
                    # The bound in the row's own units: for a share, one unit of the volume the carrier may carry.
                    down, up = _cost_at(lp, row, -1.0, solve_lp), _cost_at(lp, row, 1.0, solve_lp)
                    less = math.inf if down is None else down - base
                    more = math.inf if up is None else up - base
            rows.append({**common, "commitment": column, "bound": bound, "state": state, "cost_one_less": less,
                         "cost_one_more": more})
    frame = pd.DataFrame(rows)
    frame["text"] = [commitment_text(r, network.settings) for r in frame.itertuples(index=False)]
    return frame[CARRIER_RESULT_COLUMNS]


def _money(amount: float, currency: str) -> str:
    return f"{amount:,.2f}" + (f" {currency}" if currency else "")


def commitment_text(row, settings) -> str:
    """One sentence for a carrier's commitment: met with room, or what moving a binding bound by one unit does."""
    units = settings.units or "units"
    currency = settings.currency or ""
    unit = singular(units)
    if not row.commitment:
        return f"{row.carrier} carries {row.volume:,.6g} {units}; it has no commitment."
    what = {"min_volume": "minimum", "max_volume": "maximum", "max_share": "largest share"}[row.commitment]
    if not row.state.startswith("binding"):
        return f"{row.carrier}'s {what} is met with room to spare."
    if math.isnan(row.cost_one_less):
        return f"{row.carrier}'s {what} binds the plan."

    def effect(change: float, move: str) -> str:
        if math.isinf(change):
            return f"{move} is not possible with the plan's other decisions as they are"
        if abs(change) < 1e-9:
            return f"{move} would change nothing"
        verb = "saves" if change < 0 else "costs"
        return f"{move} {verb} {_money(abs(change), currency)}"

    subject = f"{row.carrier}'s {what}" if row.commitment != "max_share" else \
        f"the volume {row.carrier}'s largest share allows"
    return (f"{subject} binds: " + effect(row.cost_one_less, f"lowering it by one {unit}") + "; "
            + effect(row.cost_one_more, f"raising it by one {unit}") + ".")
