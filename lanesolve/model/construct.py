"""A quick plan for a model with yes/no decisions, built when the solver stopped on its time limit without one.

The construction is LP rounding (the classic first heuristic for facility location, e.g. Cornuéjols, Nemhauser &
Wolsey, "The uncapacitated facility location problem", 1990, section on LP-based heuristics):

1. **Relax.** Solve the model's linear relaxation with HiGHS (every whole-number column continuous). Its optimum is
   a lower bound on every plan's cost, so the plan's gap is known.
2. **Round up.** Open every depot or hub the relaxation opens by any fraction, pay the fixed charge of every lane it
   uses by any fraction, and fix those yes/no columns (the others at 0). Rounding up keeps the relaxation's flows
   feasible: every linking row ``x <= M y`` only loosens. Where ``max_open_depots`` / ``max_open_hubs`` allow fewer,
   the nodes with the largest fractions stay open. Single-sourcing choices (a lane's yes/no in a ``single_source_``
   row) are not rounded: the customer gets its lane in step 3.
3. **Solve the rest.** With the node and fixed-charge decisions fixed, what is left is an LP (no single sourcing) or
   a much smaller MIP (single-source choices only, solved by HiGHS in the time left). Trip counts are relaxed: the
   plan's trips are then ``ceil(flow / trip_capacity)``, which :func:`lanesolve.model.solve.plan_values` applies.
   When the fixed problem has no plan (a minimum volume that rounding made binding), the construction tries again
   with the lane decisions left to HiGHS and only the nodes fixed.
4. **Improve.** The time left goes to HiGHS on the whole model restricted to the promising nodes (those some
   rounding used), starting from the plan; the cheaper plan is kept. With no plan yet, the unrestricted model gets
   the time left.

Step 1 is in fact a sequence of relaxations, *dynamic slope scaling* (:func:`slope_scaling`), on the relaxation
without the per-lane linking rows (:func:`weak_relaxation`), because rounding the plain relaxation opens every
node it uses a little (on the 100 x 1000 published sets, 79 of 100 depots: benchmarks/README.md).

The result is a plan, never claimed optimal: its status is ``feasible`` and its gap is measured against the best
bound known (the relaxation's, or the stopped solver's when that is higher).
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np

from lanesolve.model.arrays import Answer, SparseModel
from lanesolve.model.result import SolveStatus

#: A relaxed yes/no value above this counts as used (values below are solver noise).
USED = 1e-6


def _relaxed(model: SparseModel, lower: np.ndarray, upper: np.ndarray, integer: np.ndarray) -> SparseModel:
    return dataclasses.replace(model, lower=lower, upper=upper, integer=integer)


def _rows_of(model: SparseModel, prefix: str) -> slice:
    block = model.row_blocks.get(prefix)
    return slice(0, 0) if block is None else slice(block.start, block.stop)


def single_source_columns(model: SparseModel) -> np.ndarray:
    """Positions of the yes/no columns that appear in a ``single_source_`` row (a customer's choice of lane)."""
    rows = _rows_of(model, "single_source_")
    if rows.stop == rows.start:
        return np.zeros(0, dtype=np.int64)
    return np.unique(model.matrix[rows].tocoo().col)


def round_decisions(model: SparseModel, relaxed_value: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds with the node and fixed-charge lane decisions fixed (step 2 of the module docstring).

    With no relaxed values (the relaxation did not finish) every decision is taken open, the limits on open nodes
    permitting in the model's order.
    """
    lower, upper = model.lower.copy(), model.upper.copy()
    choice = np.zeros(model.n_columns, dtype=bool)
    choice[single_source_columns(model)] = True
    for prefix in ("open_depot_", "open_hub_", "use_"):
        columns = np.arange(model.n_columns)[model.columns(prefix)]
        columns = columns[~choice[columns]]
        if not len(columns):
            continue
        value = np.ones(len(columns)) if relaxed_value is None else relaxed_value[columns]
        keep = value > USED
        kind = prefix[len("open_"):-1] if prefix.startswith("open_") else None
        limit_rows = _rows_of(model, f"max_open_{kind}s") if kind else slice(0, 0)
        if limit_rows.stop > limit_rows.start:
            most = int(np.floor(model.row_upper[limit_rows.start] + 1e-9))
            if keep.sum() > most:
                order = np.argsort(-value, kind="stable")  # the largest fractions stay open
                keep = np.zeros(len(columns), dtype=bool)
                keep[order[:max(most, 0)]] = True
        lower[columns] = np.where(keep, 1.0, 0.0)
        upper[columns] = lower[columns]
    return lower, upper


def weak_relaxation(model: SparseModel) -> SparseModel:
    """The linear relaxation without the per-lane linking rows (``open_link_``): a relaxation of the relaxation,
    so its optimum is still a lower bound, but it solves like a transportation problem (the strong rows make the
    LP of a 100 x 1000 facility network take minutes: benchmarks/README.md, *Time limits*)."""
    keep = np.ones(model.n_rows, dtype=bool)
    for prefix in model.row_blocks:
        if prefix.startswith("open_link_"):
            keep[_rows_of(model, prefix)] = False
    return dataclasses.replace(model, matrix=model.matrix[keep], row_lower=model.row_lower[keep],
                               row_upper=model.row_upper[keep], integer=np.zeros(model.n_columns, dtype=bool))


def candidate_lanes(model: SparseModel, promising: np.ndarray) -> np.ndarray:
    """Flow columns kept in the restricted MIP: every lane except those at a depot or hub to decide that no round
    of :func:`slope_scaling` opened (found through the ``open_link_`` rows, which join a lane to its node)."""
    n_lanes = len(model.lane_index)
    keep = np.ones(n_lanes, dtype=bool)
    for prefix in model.row_blocks:
        if not prefix.startswith("open_link_"):
            continue
        links = model.matrix[_rows_of(model, prefix)].tocoo()
        lanes, nodes = links.col < n_lanes, links.col >= n_lanes
        lane_of_row = np.full(links.shape[0], -1)
        node_of_row = np.full(links.shape[0], -1)
        lane_of_row[links.row[lanes]] = links.col[lanes]
        node_of_row[links.row[nodes]] = links.col[nodes]
        closed = (lane_of_row >= 0) & (node_of_row >= 0)
        closed[closed] = ~promising[node_of_row[closed]]
        keep[lane_of_row[closed]] = False
    return keep


def decision_columns(model: SparseModel) -> np.ndarray:
    """Positions of the node and fixed-charge lane yes/no columns (single-source choices excluded)."""
    columns = np.concatenate([np.arange(model.n_columns)[model.columns(p)]
                              for p in ("open_depot_", "open_hub_", "use_")])
    return np.setdiff1d(columns, single_source_columns(model))


def slope_scaling(model: SparseModel, end: float) -> tuple[np.ndarray | None, float | None, np.ndarray]:
    """Relaxed values whose rounding makes a cheap plan, by dynamic slope scaling (Kim & Pardalos, "A solution
    approach to the fixed charge network flow problem using a dynamic slope scaling procedure", Operations
    Research Letters 24, 1999), on :func:`weak_relaxation`.

    Each round solves the relaxation with every yes/no column's charge divided by its value in the previous round,
    so that a node or lane used by a fraction is charged in full for what it carries; a decision that fell to 0
    keeps its last charge. The rounding of each round (every decision used by any fraction taken as open) is a
    plan's decisions; the one whose relaxed cost with full charges is lowest is kept. Stops when a round repeats
    the previous one's decisions or at ``end``.

    Returns
    -------
    (numpy.ndarray or None, float or None, numpy.ndarray of bool)
        The kept round's relaxed values, and the first round's optimum (a lower bound on every plan's cost); None
        when the first round did not finish (or has no plan). Then, per column, whether it is a decision that some
        round after the first used (the promising nodes and lanes).
    """
    from lanesolve.model.highs import solve_with_highs

    weak = weak_relaxation(model)
    decisions = decision_columns(model)
    charge = model.cost[decisions]
    cost = model.cost.copy()
    best, best_cost, bound, previous = None, np.inf, None, None
    tried = np.zeros(len(decisions), dtype=bool)
    while time.monotonic() < end:
        answer = solve_with_highs(dataclasses.replace(weak, costs={"objective": cost}, constant={}),
                                  time_limit=max(end - time.monotonic(), 0.1))
        if answer.status is not SolveStatus.OPTIMAL:
            break
        if bound is None:
            bound = answer.bound
        value = answer.value
        used = value[decisions] > USED
        rounded = value.copy()
        rounded[decisions] = used
        full = float(model.cost @ rounded)
        if full < best_cost:
            best, best_cost = value, full
        if previous is not None:
            tried |= used  # the first round opens nearly everything a little: it says nothing
            if np.array_equal(used, previous):
                break
        previous = used
        cost[decisions] = np.where(used, charge / np.maximum(value[decisions], USED), cost[decisions])
    if previous is not None and not tried.any():
        tried = previous
    promising = np.zeros(model.n_columns, dtype=bool)
    promising[decisions[tried]] = True
    return best, bound, promising


def _plan(answer: Answer, model: SparseModel, bound: float | None) -> Answer:
    answer.status = SolveStatus.FEASIBLE
    answer.bound = bound
    answer.gap = None
    answer.row_dual = np.zeros(model.n_rows)
    answer.reduced_cost = np.zeros(model.n_columns)
    answer.column_basis = answer.row_basis = None
    return answer


def construct(model: SparseModel, seconds: float, bound: float | None = None, improve: bool = True) -> Answer | None:
    """A plan for ``model`` within about ``seconds`` by LP rounding (module docstring), or None.

    Parameters
    ----------
    model : SparseModel
        A model with whole-number columns (a MIP).
    seconds : float
        Time to spend.
    bound : float, optional
        A lower bound already known (the stopped solver's), kept when it beats the relaxation's.
    improve : bool
        Give the time left after rounding to HiGHS on the model restricted to :func:`candidate_lanes` (the
        rounded plan as its start), and keep the cheaper plan.

    Returns
    -------
    Answer or None
        Status ``feasible``, the plan's column values, the best bound known, ``solver`` naming HiGHS; None when
        no plan was found in the time (the relaxation or the fixed problem has none, or ran out of time).
    """
    from lanesolve.model.highs import solve_with_highs  # highspy is loaded only when a plan must be built

    end = time.monotonic() + max(seconds, 0.5)
    relaxed_value, relaxed_bound, promising = slope_scaling(model, time.monotonic() + (end - time.monotonic()) / 2)
    if relaxed_bound is not None:
        bound = relaxed_bound if bound is None else max(bound, relaxed_bound)

    lower, upper = round_decisions(model, relaxed_value)
    # Every whole-number column the rounding did not fix stays whole (single-source choices, and any other family
    # such as a carrier's rate-break choices), except trips, which are relaxed and rounded up afterwards.
    integer = model.integer.copy()
    integer[decision_columns(model)] = False
    integer[model.columns("trips_")] = False
    use = np.arange(model.n_columns)[model.columns("use_")]
    # Fallback: nodes fixed as rounded, every lane decision left to HiGHS.
    lower_nodes, upper_nodes = lower.copy(), upper.copy()
    lower_nodes[use], upper_nodes[use] = model.lower[use], model.upper[use]
    whole_lanes = integer.copy()
    whole_lanes[use] = True
    best = None
    for low, up, whole in ((lower, upper, integer), (lower_nodes, upper_nodes, whole_lanes)):
        left = end - time.monotonic()
        if left <= 0:
            break
        answer = solve_with_highs(_relaxed(model, low, up, whole), time_limit=left, gap=1e-4)
        if answer.status.has_plan:
            best = answer
            break
    if improve and promising.any() and end - time.monotonic() > 0.5:
        # Improve: the whole model, every decision free, on the promising nodes only, from the plan.
        keep = candidate_lanes(model, promising)
        up = model.upper.copy()
        up[:len(model.lane_index)][~keep] = 0.0
        restricted = solve_with_highs(_relaxed(model, model.lower, up, model.integer),
                                      time_limit=end - time.monotonic(), gap=1e-4,
                                      start=None if best is None else best.value)
        if restricted.status.has_plan and (best is None or restricted.value @ model.cost < best.value @ model.cost):
            best = restricted
    if best is None and end - time.monotonic() > 0.5:
        # Last resort: the whole model to HiGHS for the time left (the rounding and the promising nodes failed,
        # say a limit on open nodes that kept a node which cannot reach every customer).
        whole = solve_with_highs(model, time_limit=end - time.monotonic(), gap=1e-4)
        if whole.status.has_plan:
            best = whole
    return None if best is None else _plan(best, model, bound)
