"""Carrier terms in the one model: carrier commitments, minimum charges per lane and volume rate breaks.

:func:`lanesolve.model.formulation.build_sparse_model` calls :func:`add_carrier_terms` once; each family below is
one function, vectorised over its rows where the shape allows it (rate breaks are laid out lane by lane, then added
as one block per family).

Formulation
-----------
Additional sets and parameters: :math:`K` the carriers of the Carriers sheet, :math:`L_k` the active lanes naming
carrier :math:`k`, with least and most volume :math:`a_k`, :math:`b_k` and largest share :math:`\\sigma_k` (each
optional); :math:`m_l` the minimum charge of lane :math:`l`; for a lane with rate breaks the breakpoints
:math:`0 = \\beta_0 < \\beta_1 < \\dots < \\beta_J` (``from_volume``) with rates :math:`r_0 = c_l` (the lane's own
``cost_per_unit``) and :math:`r_1 \\dots r_J`; :math:`U_l = \\min(u_l, M_l)`, :math:`M_l` the bound (a)-(d) of
:mod:`lanesolve.model.formulation`.

Carrier commitments (rows only)

- ``carrier_min_<k>``: :math:`\\sum_{l \\in L_k} x_l \\ge a_k`;
- ``carrier_max_<k>``: :math:`\\sum_{l \\in L_k} x_l \\le b_k`;
- ``carrier_share_<k>``: :math:`\\sum_{l \\in L_k} x_l \\le \\sigma_k (\\sum_c q_c - \\sum_{c \\in P} z_c)`, the
  share of all units delivered to customers (demand minus units short), written
  :math:`\\sum_{L_k} x + \\sigma_k \\sum_P z \\le \\sigma_k \\sum_c q_c`. A carrier whose lanes carry goods over two
  legs (depot to hub, hub to customer) counts both legs, so its share can exceed what it hands to customers.

Rate breaks. Each lane's tariff is a piecewise-linear cost :math:`C_l(x_l)`. The flow column keeps its own rate
:math:`c_l` and new columns :math:`\\delta_{lj}` (``tariff_seg_<l>_<j>``) carry :math:`(r_j - c_l)` per unit, so
:math:`c_l x_l + \\sum_j (r_j - c_l) \\delta_{lj} = \\sum_j r_j \\delta_{lj} = C_l(x_l)` once
``tariff_sum_<l>``: :math:`x_l - \\sum_j \\delta_{lj} = 0` holds. All three models below are those compared by
Croxton, Gendron & Magnanti (2003), "A comparison of mixed-integer programming models for nonconvex piecewise
linear cost minimization problems", Management Science 49(9), 1268-1273, who show their LP relaxations are equally
tight.

- *Incremental, rates not falling* (convex :math:`C_l`): segment :math:`j` covers
  :math:`[\\beta_j, \\beta_{j+1}]`, :math:`0 \\le \\delta_{lj} \\le \\beta_{j+1} - \\beta_j` (the last up to
  :math:`U_l`, which holds for the plans a planner means, see below). No binaries: a minimising LP fills
  the cheaper, earlier segments first, so the LP charges exactly :math:`C_l` (separable convex programming; the
  standard textbook result, e.g. Bazaraa, Sherali & Shetty, *Nonlinear Programming*, ch. 11 -- recalled from
  memory).
- *Incremental, some rate lower than an earlier one* (concave somewhere): the incremental model (Croxton et al.'s
  IM) with binaries :math:`w_{lj}` (``tariff_fill_use_<l>_<j>``, "segment
  :math:`j` is full"), :math:`j < J`: ``tariff_fill_<l>_<j>``: :math:`\\delta_{lj} \\ge (\\beta_{j+1} -
  \\beta_j) w_{lj}` and ``tariff_next_<l>_<j>``: :math:`\\delta_{l,j+1} \\le (\\beta_{j+2} - \\beta_{j+1})
  w_{lj}`, so a segment takes units only once every earlier one is full. The last segment's length is
  :math:`U_l - \\beta_J`: the derived bound, never a constant.
- *All units*: the rate of the highest break reached applies to every unit, :math:`C_l(x) = r_j x` for
  :math:`\\beta_j \\le x < \\beta_{j+1}`. The multiple choice model (Croxton et al.'s MCM):
  bracket binaries :math:`v_{lj}` (``tariff_pick_<l>_<j>``), ``tariff_lo_<l>_<j>``: :math:`\\delta_{lj} \\ge
  \\beta_j v_{lj}`, ``tariff_hi_<l>_<j>``: :math:`\\delta_{lj} \\le \\beta_{j+1} v_{lj}` (the last bracket up to
  :math:`U_l`), ``tariff_one_<l>``: :math:`\\sum_j v_{lj} \\le 1`. At exactly :math:`x = \\beta_{j+1}` both
  brackets fit and the cheaper is charged: the sheet's rule when the rate falls at the break, as tariffs do. Where
  it rises instead, bracket :math:`j` ends a relative :data:`RISING_STEP` (:math:`10^{-6}`) before
  :math:`\\beta_{j+1}`, so the break volume itself pays the higher rate (a cost that jumps up has no minimum at the
  jump; the step stands in for "just below").

Breaks beyond :math:`U_l` (for incremental rates: at or beyond) can never apply and are left out. Minimum charges, with binary :math:`y_l`
(``charged_<l>``) and continuous top-up :math:`t_l \\ge 0` (``min_charge_top_<l>``, in the *transport* cost):

- ``charged_link_<l>``: :math:`x_l \\le U_l y_l`;
- ``min_charge_<l>``: :math:`t_l + C_l(x_l) \\ge m_l y_l` (with :math:`C_l` the expression above), so a used lane
  costs :math:`\\max(m_l, C_l(x_l))` and an unused one nothing.

Big-M validity: :math:`U_l` holds for every plan that sends no goods round a cycle (the canonical plan of
:mod:`lanesolve.model.formulation`). Carrier minimums and all-units tariffs are, with ``min_volume``, the terms
under which lowering flow can raise cost or break a row, so for them :math:`U_l` is proven only for plans that
move no goods in circles -- the plans a planner means.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> from lanesolve.model.formulation import build_sparse_model
>>> net = make_network([{"id": "D", "supply": 9}], [{"id": "C", "demand": 6}],
...     [{"origin": "D", "destination": "C", "cost_per_unit": 5, "carrier": "K", "minimum_charge": 40}],
...     carriers=[{"id": "K", "min_volume": 6}],
...     rate_breaks=[{"origin": "D", "destination": "C", "from_volume": 4, "cost_per_unit": 3, "kind": "all_units"}])
>>> [name for name in build_sparse_model(net).row_names if not name.startswith(("supply", "balance"))]
... # doctest: +NORMALIZE_WHITESPACE
['carrier_min_0', 'tariff_sum_0', 'tariff_lo_0_0', 'tariff_lo_0_1', 'tariff_hi_0_0', 'tariff_hi_0_1',
 'tariff_one_0', 'charged_link_0', 'min_charge_0']
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model.arrays import Assembly
from lanesolve.model.network import Network


#: Where an all-units rate rises at a break, the bracket below ends this much (relative) before it, so a lane
#: carrying exactly the break volume pays the higher rate, as the Rate breaks sheet defines.
RISING_STEP = 1e-6


@dataclass
class LaneCostTerms:
    """Columns besides a lane's flow column that carry part of its transport cost (segments, top-ups).

    Attributes
    ----------
    columns : numpy.ndarray
        Column positions.
    lanes : numpy.ndarray
        Lane index (in ``network.lanes``) of each of those columns.
    """

    columns: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    lanes: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))


def carrier_lane_positions(network: Network) -> dict[int, np.ndarray]:
    """Per carrier row of ``network.carriers``: positions (in active-lane order) of the active lanes naming it."""
    carrier = network.active_lanes["carrier"].to_numpy(dtype=object)
    return {k: np.flatnonzero(carrier == name) for k, name in enumerate(network.carriers["id"].tolist())}


def add_carrier_commitments(model: Assembly, network: Network, flow: np.ndarray, unmet: np.ndarray,
                            soft: np.ndarray) -> None:
    """``carrier_min_<k>``, ``carrier_max_<k>``, ``carrier_share_<k>`` (module docstring)."""
    carriers = network.carriers
    if carriers.empty:
        return
    lanes_of = carrier_lane_positions(network)
    total_demand = float(network.customers["demand"].sum())
    for prefix, column in (("carrier_min_", "min_volume"), ("carrier_max_", "max_volume"),
                           ("carrier_share_", "max_share")):
        value = carriers[column].to_numpy(dtype=float)
        chosen = np.flatnonzero(~np.isnan(value))
        if prefix == "carrier_min_":
            rows = model.add_rows(prefix, chosen, value[chosen], np.inf)
        elif prefix == "carrier_max_":
            rows = model.add_rows(prefix, chosen, -np.inf, value[chosen])
        else:
            rows = model.add_rows(prefix, chosen, -np.inf, value[chosen] * total_demand)
        for row, k in zip(rows.tolist(), chosen.tolist()):
            positions = lanes_of[k]
            model.add_entries(np.full(len(positions), row), flow[positions], 1.0)
            if prefix == "carrier_share_" and len(unmet):
                model.add_entries(np.full(len(unmet), row), unmet, value[k])


def _tariff_segments(network: Network, upper: np.ndarray) -> pd.DataFrame:
    """One row per segment (incremental) or bracket (all units) of every active lane with breaks.

    Columns: ``pos`` (active-lane position), ``lane`` (index), ``j``, ``start``, ``end`` (the segment's volume
    range, the last one up to the lane's ``upper`` bound), ``rate``, ``base`` (the lane's own rate), ``kind``,
    ``convex`` (every rate of the lane at least the one before).
    """
    breaks = network.rate_breaks
    lanes = network.active_lanes
    if breaks.empty or lanes.empty:
        return pd.DataFrame()
    position = pd.Index(lanes.index).get_indexer(breaks["lane"].to_numpy())
    breaks = breaks[position >= 0]
    position = position[position >= 0]
    rates = lanes["cost_per_unit"].to_numpy(dtype=float)
    # Every lane with breaks: its own rate from 0 (j = 0), then one segment per break (j = 1, 2, ...), in order.
    first = np.unique(position)
    kind_of = pd.Series(breaks["kind"].to_numpy(), index=position).groupby(level=0).first()
    frame = pd.concat([
        pd.DataFrame({"pos": first, "j": 0, "start": 0.0, "rate": rates[first]}),
        pd.DataFrame({"pos": position, "j": breaks.groupby(position).cumcount().to_numpy() + 1,
                      "start": breaks["from_volume"].to_numpy(dtype=float),
                      "rate": breaks["cost_per_unit"].to_numpy(dtype=float)}),
    ], ignore_index=True).sort_values(["pos", "j"], kind="stable").reset_index(drop=True)
    pos = frame["pos"].to_numpy()
    frame["kind"] = kind_of.reindex(pos).to_numpy()
    frame["base"] = rates[pos]
    top = upper[pos]
    all_units = (frame["kind"] == "all_units").to_numpy()
    start = frame["start"].to_numpy()
    same_lane = np.r_[pos[1:] == pos[:-1], False]
    next_start = np.where(same_lane, np.r_[start[1:], np.inf], np.inf)
    next_rate = np.where(same_lane, np.r_[frame["rate"].to_numpy()[1:], np.nan], np.nan)
    # An incremental segment starting at the bound is empty; an all-units bracket starting there still applies.
    keep = (top > 0) & ((start < top) | (all_units & (start <= top)))
    end = np.where(next_start <= top, next_start, top)
    rising = all_units & (next_start <= top) & (next_rate > frame["rate"].to_numpy())
    end = np.where(rising, end - RISING_STEP * np.maximum(1.0, end), end)  # the dearer bracket starts at its break
    frame = frame.assign(end=end, lane=lanes.index.to_numpy()[pos])[keep].reset_index(drop=True)
    falls = frame.groupby("pos")["rate"].diff() < 0
    frame["convex"] = ~falls.groupby(frame["pos"]).transform("any").to_numpy()
    return frame[["pos", "lane", "j", "start", "end", "rate", "base", "kind", "convex"]]


def add_rate_breaks(model: Assembly, network: Network, flow: np.ndarray, upper: np.ndarray
                    ) -> tuple[LaneCostTerms, dict[int, list[tuple[int, float]]]]:
    """``tariff_seg_`` columns and the rows of the three piecewise-linear models (module docstring).

    Returns
    -------
    terms : LaneCostTerms
        The segment columns and their lanes.
    cost_terms : dict
        Active-lane position -> ``(column, cost per unit)`` pairs that, with the flow column at the lane's own
        rate, make up the lane's tariff cost (used by the minimum-charge rows).
    """
    segments = _tariff_segments(network, upper)
    if segments.empty:
        return LaneCostTerms(), {}
    ids = (segments["lane"].astype(str) + "_" + segments["j"].astype(str)).to_numpy()
    incremental = (segments["kind"] == "incremental").to_numpy()
    length = (segments["end"] - segments["start"]).to_numpy(dtype=float)
    # Incremental segments run from 0 to their length; an all-units bracket holds the whole flow, up to its end.
    seg_upper = np.where(incremental, length, segments["end"].to_numpy(dtype=float))
    extra = (segments["rate"] - segments["base"]).to_numpy(dtype=float)
    columns = model.add_columns("tariff_seg_", ids, 0.0, seg_upper, costs={"transport": extra})
    segments = segments.assign(column=columns)
    first = segments.drop_duplicates("pos")
    rows = model.add_rows("tariff_sum_", first["lane"].to_numpy(), 0.0, 0.0)
    row_of_pos = dict(zip(first["pos"].tolist(), rows.tolist()))
    model.add_entries(rows, flow[first["pos"].to_numpy()], 1.0)
    model.add_entries(segments["pos"].map(row_of_pos).to_numpy(), columns, -1.0)

    # Incremental with a falling rate somewhere: binaries "segment j is full" for every segment but the last.
    im = segments[incremental & ~segments["convex"].to_numpy()]
    if len(im):
        following = im["pos"].shift(-1).to_numpy() == im["pos"].to_numpy()
        full = im[following]
        after = im.shift(-1)[following]
        w = model.add_columns("tariff_fill_use_", (full["lane"].astype(str) + "_" + full["j"].astype(str)).to_numpy(),
                              0.0, 1.0, integer=True)
        fill_ids = (full["lane"].astype(str) + "_" + full["j"].astype(str)).to_numpy()
        rows = model.add_rows("tariff_fill_", fill_ids, 0.0, np.inf)
        model.add_entries(rows, full["column"].to_numpy(), 1.0)
        model.add_entries(rows, w, -(full["end"] - full["start"]).to_numpy(dtype=float))
        rows = model.add_rows("tariff_next_", fill_ids, -np.inf, 0.0)
        model.add_entries(rows, after["column"].to_numpy(dtype=np.int64), 1.0)
        model.add_entries(rows, w, -(after["end"] - after["start"]).to_numpy(dtype=float))

    # All units: one bracket at most, and the bracket's volume range.
    mcm = segments[~incremental]
    if len(mcm):
        mcm_ids = (mcm["lane"].astype(str) + "_" + mcm["j"].astype(str)).to_numpy()
        pick = model.add_columns("tariff_pick_", mcm_ids, 0.0, 1.0, integer=True)
        rows = model.add_rows("tariff_lo_", mcm_ids, 0.0, np.inf)
        model.add_entries(rows, mcm["column"].to_numpy(), 1.0)
        model.add_entries(rows, pick, -mcm["start"].to_numpy(dtype=float))
        rows = model.add_rows("tariff_hi_", mcm_ids, -np.inf, 0.0)
        model.add_entries(rows, mcm["column"].to_numpy(), 1.0)
        model.add_entries(rows, pick, -mcm["end"].to_numpy(dtype=float))
        lanes_mcm = mcm.drop_duplicates("pos")
        rows = model.add_rows("tariff_one_", lanes_mcm["lane"].to_numpy(), -np.inf, 1.0)
        row_of = dict(zip(lanes_mcm["pos"].tolist(), rows.tolist()))
        model.add_entries(mcm["pos"].map(row_of).to_numpy(), pick, 1.0)

    cost_terms: dict[int, list[tuple[int, float]]] = {}
    for pos, column, cost in zip(segments["pos"].tolist(), columns.tolist(), extra.tolist()):
        cost_terms.setdefault(pos, []).append((column, cost))
    return LaneCostTerms(columns, segments["lane"].to_numpy(dtype=np.int64)), cost_terms


def add_minimum_charges(model: Assembly, network: Network, flow: np.ndarray, upper: np.ndarray,
                        cost_terms: dict[int, list[tuple[int, float]]]) -> LaneCostTerms:
    """``charged_<l>`` / ``min_charge_top_<l>`` columns, ``charged_link_<l>`` and ``min_charge_<l>`` rows."""
    lanes = network.active_lanes
    minimum = lanes["minimum_charge"].to_numpy(dtype=float)
    chosen = np.flatnonzero((minimum > 0) & (upper > 0))
    if not len(chosen):
        return LaneCostTerms()
    index = lanes.index[chosen].to_numpy()
    top = model.add_columns("min_charge_top_", index, 0.0, minimum[chosen], costs={"transport": np.ones(len(chosen))})
    charged = model.add_columns("charged_", index, 0.0, 1.0, integer=True)
    rows = model.add_rows("charged_link_", index, -np.inf, 0.0)
    model.add_entries(rows, flow[chosen], 1.0)
    model.add_entries(rows, charged, -upper[chosen])
    rows = model.add_rows("min_charge_", index, 0.0, np.inf)
    model.add_entries(rows, top, 1.0)
    model.add_entries(rows, flow[chosen], lanes["cost_per_unit"].to_numpy(dtype=float)[chosen])
    model.add_entries(rows, charged, -minimum[chosen])
    for row, pos in zip(rows.tolist(), chosen.tolist()):
        terms = cost_terms.get(pos, [])
        if terms:
            model.add_entries(np.full(len(terms), row), [c for c, _ in terms], [v for _, v in terms])
    return LaneCostTerms(top, index.astype(np.int64))


def add_carrier_terms(model: Assembly, network: Network, flow: np.ndarray, unmet: np.ndarray, soft: np.ndarray,
                      bounds: np.ndarray, capacity: np.ndarray) -> LaneCostTerms:
    """Every family of this module, in the order of the module docstring; the columns carrying lane costs.

    Parameters
    ----------
    model : Assembly
    network : Network
    flow : numpy.ndarray
        The flow column of each active lane.
    unmet, soft : numpy.ndarray
        The ``unmet_`` columns and which customers have one.
    bounds : numpy.ndarray
        :math:`M_l` per active lane (:func:`lanesolve.model.formulation.lane_bounds`).
    capacity : numpy.ndarray
        The flow columns' upper bounds.
    """
    if not network.has_carrier_terms:
        return LaneCostTerms()
    add_carrier_commitments(model, network, flow, unmet, soft)
    upper = np.minimum(capacity, bounds)
    breaks, cost_terms = add_rate_breaks(model, network, flow, upper)
    tops = add_minimum_charges(model, network, flow, upper, cost_terms)
    return LaneCostTerms(np.concatenate([breaks.columns, tops.columns]), np.concatenate([breaks.lanes, tops.lanes]))
