"""Solve a network: build the one model, run a solver on it, and turn its answer into a plain
:class:`~lanesolve.model.result.Result`.

Engines
-------
``"auto"`` (the default) picks per model: the network-flow algorithm of :mod:`lanesolve.model.network_flow`
(OR-Tools' min-cost flow) for a pure min-cost flow it can take exactly, else :func:`pick_engine`. The LP engines both
read the same :class:`~lanesolve.model.arrays.SparseModel` built by
:func:`lanesolve.model.formulation.build_sparse_model`:

- ``"cbc"``: the CBC program bundled in PuLP's wheel, fed one MPS file and stopped at the deadline if it has not
  stopped itself (:mod:`lanesolve.model.cbc`);
- ``"highs"``: HiGHS in memory through ``highspy`` (:mod:`lanesolve.model.highs`).

A large model of capacitated facility location with split deliveries (depots to open or close and nothing else
to decide, :func:`lanesolve.model.lagrangian.recognise`; at least :data:`LARGE_MIP` columns) with a time limit goes
under ``auto`` to :mod:`lanesolve.model.lagrangian` instead (Lagrangian relaxation, min-cost flows and a local
search over the open depots); when that finds no plan, the engines above take the time left.

Every answer, the network algorithm's too, becomes a Result through the same code (:func:`plan_values`, the cost
breakdown from the model's per-component costs).

Time limit
----------
The engine gets the whole limit (or the time to a ``deadline``; CBC less the seconds it may take to stop,
:func:`engine_deadline`). Only when a MIP engine stops without a plan does :mod:`lanesolve.model.construct` build one,
in at most :func:`construction_seconds` past the limit (status ``feasible``, its gap against the best bound known); a
pure flow an LP engine could not finish goes to the network algorithm. Under ``auto``, a single-source facility
model gives the engine the limit less :data:`ASSIGN_SHARE`, and a plan the engine stopped on without proving it gets
the rest for the search of :mod:`lanesolve.model.assign_search`, which keeps only a cheaper plan: the search stays
inside the limit, as the lane search does.

Each maps its own words to one :class:`~lanesolve.model.result.SolveStatus` (tables in those modules): a MIP stopped
by the time limit with a plan in hand is ``feasible`` with its gap, never ``optimal``; an LP stopped early is
``not_solved``. The gap is ``(total_cost - best_bound) / max(|total_cost|, 1e-9)`` with the solver's best bound (plus
the fixed charges of nodes marked open, which no column carries). A pure LP reports ``mip_gap = None`` and its
optimal objective as the bound.
"""

from __future__ import annotations

import functools
import math
import sys
import time

import numpy as np
import pandas as pd

from lanesolve.errors import SolverError
from lanesolve.model import assign_search, lane_search, network_flow
from lanesolve.model import carrier_results, lagrangian
from lanesolve.model.arrays import Answer, SparseModel
from lanesolve.model.build import build_model
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import Network
from lanesolve.model.product_plan import finish_plan
from lanesolve.model.result import (FLOW_COLUMNS, NODE_COLUMNS, OPEN_NODE_COLUMNS, TRIP_COLUMNS, UNMET_COLUMNS,
                                    Result, SolveStatus, empty_frame)

#: Values smaller than this in magnitude are solver noise and are reported as 0.
NOISE = 1e-9

SOLVERS = ("auto", "cbc", "highs")


def _clean(values: np.ndarray) -> np.ndarray:
    """Round float noise: |x| < :data:`NOISE` becomes 0."""
    values = np.asarray(values, dtype=float).copy()
    values[np.abs(values) < NOISE] = 0.0
    return values


def node_balance(network: Network, outflow: dict[str, float], inflow: dict[str, float],
                 unmet: dict[str, float] | None) -> pd.DataFrame:
    """The :data:`~lanesolve.model.result.NODE_COLUMNS` frame: one row per node (depots, customers, hubs in sheet order).

    Parameters
    ----------
    network : Network
    outflow, inflow : dict of str to float
        Units shipped out of / received by each node id (missing ids count 0).
    unmet : dict of str to float or None
        Units short per customer id (missing ids count 0); ``None`` when there is no plan (unmet is then NaN).

    Returns
    -------
    DataFrame
        Depots: supply, shipped, received, utilisation = net outflow / supply. Customers: demand, received, shipped,
        unmet. Hubs: capacity, throughput (= received), utilisation = throughput / capacity. Fields that do not apply
        to a kind, and ratios over a zero or unlimited base, are NaN.
    """
    nan = math.nan
    rows = []
    for node, supply in zip(network.depots["id"], network.depots["supply"]):
        shipped, received = outflow.get(node, 0.0), inflow.get(node, 0.0)
        util = (shipped - received) / supply if supply > 0 else nan
        rows.append((node, "depot", supply, nan, shipped, received, nan, nan, nan, util))
    for node, demand in zip(network.customers["id"], network.customers["demand"]):
        short = nan if unmet is None else unmet.get(node, 0.0)
        rows.append((node, "customer", nan, demand, outflow.get(node, 0.0), inflow.get(node, 0.0), short, nan, nan,
                     nan))
    for node, capacity in zip(network.hubs["id"], network.hubs["capacity"]):
        received = inflow.get(node, 0.0)
        util = received / capacity if 0 < capacity < math.inf else nan
        rows.append((node, "hub", nan, nan, outflow.get(node, 0.0), received, nan, capacity, received, util))
    if not rows:
        return empty_frame(NODE_COLUMNS)
    frame = pd.DataFrame(rows, columns=NODE_COLUMNS)
    for col in NODE_COLUMNS[2:]:
        frame[col] = frame[col].astype(float)
    return frame


def solve_model(model: SparseModel, solver: str = "cbc", time_limit: float | None = None,
                gap: float | None = None, msg: bool = False, deadline: float | None = None,
                start: np.ndarray | None = None) -> Answer:
    """Run ``solver`` on ``model`` and return its :class:`~lanesolve.model.arrays.Answer` (values, and for an
    optimal LP the row duals and reduced costs, read from the solver).

    ``deadline`` (a :func:`time.monotonic` time) stops CBC if it has not stopped itself on ``time_limit`` by then;
    HiGHS keeps its ``time_limit`` on its own; ``start`` (a known plan's column values) is its first incumbent.

    Raises
    ------
    SolverError
        Unknown solver name, solver missing (with how to install it), the solver failed, or its answer could not
        be read.
    """
    if solver == "cbc":
        from lanesolve.model.cbc import solve_with_cbc  # late import: PuLP is loaded only when CBC runs
        answer = solve_with_cbc(model, time_limit, gap, deadline)
        if msg and answer.log:
            sys.stderr.write(answer.log)
        return answer
    if solver == "highs":
        from lanesolve.model.highs import solve_with_highs
        return solve_with_highs(model, time_limit, gap, msg, start)
    raise SolverError(f"unknown solver {solver!r} (choose one of: {', '.join(SOLVERS)})")


def pick_engine(model: SparseModel) -> str:
    """The engine ``auto`` gives a model the network-flow algorithm could not take.

    HiGHS for a model with whole-number decisions: on the published single-source facility sets it proved cases
    that CBC left open after 60 s, and it keeps its time limit through presolve and the root LP. CBC for a pure LP
    (one whose data the network-flow algorithm cannot scale to exact integers): on a 1M-lane network its LP took
    42 CPU-s against HiGHS's 294 s. Both measured before this choice existed (benchmarks/README.md, *Engines and
    time limits*, says what was rerun since).
    """
    return "highs" if model.is_mip else "cbc"


#: Seconds a construction may take past the limit when the engine stopped without a plan: this share of the limit,
#: at least :data:`CONSTRUCTION_FLOOR` and at most :data:`CONSTRUCTION_CAP` (our choice, inside the limit + 10 % + 5 s
#: of README.md *Engines and time limits*, whose 5 s cover process start, reading and writing).
CONSTRUCTION_SHARE, CONSTRUCTION_CAP = 0.1, 15.0
#: Seconds a construction may always take, even when the engine ran late.
CONSTRUCTION_FLOOR = 2.0


def construction_seconds(limit: float) -> float:
    """Seconds past the limit a construction may use (:data:`CONSTRUCTION_SHARE` of ``limit``, within the floor and
    the cap)."""
    return min(max(CONSTRUCTION_SHARE * limit, CONSTRUCTION_FLOOR), CONSTRUCTION_CAP)


def engine_deadline(end: float, limit: float, engine: str) -> float:
    """When the engine must stop: ``end`` itself (the engine gets the whole limit; a construction, if one is needed,
    runs after it), less for CBC the seconds it may take to stop after its interrupt
    (:func:`lanesolve.model.cbc.interrupt_grace`)."""
    if engine == "cbc":
        from lanesolve.model.cbc import interrupt_grace
        return end - interrupt_grace(limit)
    return end


#: A MIP with at least this many columns gets, under ``auto``, a quick construction first (:data:`FIRST_SHARE` of
#: its time), whose plan HiGHS then starts from: on the 100 x 1000 published facility sets HiGHS's first LP alone
#: outlasts two minutes (benchmarks/README.md, *Time limits*), so without it the run would end on the small
#: construction share. The size is our choice between those (100,000 columns) and the largest sets HiGHS proves in
#: seconds (cap131 … cap134: 2,500 columns).
LARGE_MIP = 20_000
FIRST_SHARE = 0.5

#: Share of the time limit that ``auto`` keeps, on a network whose only decisions are lane charges, for the lane
#: search of :mod:`lanesolve.model.lane_search` after the engine stopped on its limit with a plan (our choice, by
#: benchmarks/mip_family.py: the engine finds few better plans late in its run, the search many; 0.4 kept a
#: cheaper 15 x 50 plan than 0.25 at 60 s). Depots straight to customers keep ``lane_search.BASIS_SHARE``.
SEARCH_SHARE = 0.4

#: Share of the time limit that ``auto`` keeps, on a single-source facility model, for the assignment search of
#: :mod:`lanesolve.model.assign_search` after the engine stopped on its limit with a plan it had not proven (our
#: choice: 6 s at 60 s, the seconds in which that search took the Holmberg set's p57 and p58 to within 0.5 % of
#: their published optima, benchmarks/README.md; a proof HiGHS would find only in the last tenth is given up).
ASSIGN_SHARE = 0.1


def _flow_answer(model: SparseModel, network: Network, flow) -> Answer:
    """The network algorithm's plan as the model's column values, so one code path makes every Result."""
    from ortools import __version__ as ortools_version

    value = np.zeros(model.n_columns)
    value[:len(model.lane_index)] = flow.lane_flow[model.lane_index]
    value[model.columns("unmet_")] = flow.unmet[model.ids("unmet_")]
    status = SolveStatus.OPTIMAL if flow.feasible else SolveStatus.INFEASIBLE
    answer = Answer(status, value, np.zeros(model.n_rows), np.zeros(model.n_columns),
                    solver=f"OR-Tools {ortools_version} min-cost flow (network algorithm)")
    answer.bound = flow.objective if flow.feasible else None
    return answer


def plan_values(network: Network, model: SparseModel, values: np.ndarray) -> np.ndarray:
    """The solver's column values made to follow the flows, as the workbook contract charges them.

    Flows and units short lose their float noise; a lane's yes/no is 1 exactly when it carries flow; a node to
    decide is open exactly when a lane at it carries flow; a lane runs ceil(flow / trip_capacity) trips. Each change
    keeps the plan feasible and costs no more than the solver's values (a run stopped on a limit may leave a charge
    paid on an empty lane, a spare trip or an idle open node).
    """
    values = np.asarray(values, dtype=float).copy()
    n_lanes = len(model.lane_index)
    flow = _clean(values[:n_lanes])
    values[:n_lanes] = flow
    values[model.columns("unmet_")] = _clean(values[model.columns("unmet_")])
    carries = pd.Series(flow > 0, index=model.lane_index)
    values[model.columns("use_")] = carries.reindex(model.ids("use_")).to_numpy(dtype=float)
    if model.design:
        lanes = network.lanes.loc[model.lane_index]
        used = flow > 0
        busy = set(lanes["origin"].to_numpy()[used]) | set(lanes["destination"].to_numpy()[used])
        for kind, frame in (("depot", network.depots), ("hub", network.hubs)):
            ids = frame.loc[model.ids(f"open_{kind}_"), "id"]
            values[model.columns(f"open_{kind}_")] = ids.isin(busy).to_numpy(dtype=float)
        trip_lanes = model.ids("trips_")
        if len(trip_lanes):
            size = network.lanes.loc[trip_lanes, "trip_capacity"].to_numpy(dtype=float)
            carried = pd.Series(flow, index=model.lane_index).reindex(trip_lanes).to_numpy()
            values[model.columns("trips_")] = np.where(carried > 0, np.ceil(carried / size - 1e-9), 0.0)
    return values


def _fill_plan(network: Network, lane_index: np.ndarray, flow: np.ndarray, unmet_index: np.ndarray,
               unmet_values: np.ndarray, penalty: np.ndarray, breakdown: dict[str, float], result: Result) -> None:
    """Flows, node balance, unmet demand and cost breakdown from plain arrays.

    ``flow`` is per lane of ``lane_index``, ``unmet_values`` per customer of ``unmet_index`` (both noise-cleaned),
    ``penalty`` per customer row, ``breakdown`` the cost per component before noise rounding.
    """
    lanes = network.lanes_at(lane_index)
    for name, value in breakdown.items():
        breakdown[name] = 0.0 if abs(value) < NOISE else value
    result.cost_breakdown = breakdown
    result.total_cost = float(sum(breakdown.values()))

    used = flow > 0
    frame = lanes.loc[used, ["origin", "destination", "mode", "cost_per_unit", "capacity", "fixed_cost"]].copy()
    frame["flow"] = flow[used]
    frame["variable_cost"] = frame["flow"] * frame["cost_per_unit"]
    frame["fixed_charge"] = frame["fixed_cost"]
    capacity = frame["capacity"].to_numpy(dtype=float)
    frame["utilisation"] = np.where(np.isfinite(capacity) & (capacity > 0), frame["flow"] / np.where(
        capacity > 0, capacity, 1.0), math.nan)
    result.flows = frame[FLOW_COLUMNS].reset_index(drop=True) if len(frame) else empty_frame(FLOW_COLUMNS)
    if network.lanes.index.is_unique:  # the same flows per lane, for the figures (no matching of lanes by name)
        result.lane_flow = np.zeros(len(network.lanes))
        result.lane_flow[network.lanes.index.get_indexer(lane_index)] = np.where(used, flow, 0.0)

    # Grouped by the id columns themselves: grouping an id index by level looks each id up again (seconds at 1M
    # lanes), and the columns group without turning each id into a Python object first.
    per_lane = pd.Series(flow, index=lanes.index)
    outflow = per_lane.groupby(lanes["origin"]).sum().to_dict() if len(flow) else {}
    inflow = per_lane.groupby(lanes["destination"]).sum().to_dict() if len(flow) else {}
    customers = network.customers
    short = dict(zip(customers.loc[unmet_index, "id"], unmet_values))
    result.nodes = node_balance(network, outflow, inflow, short)

    rows = [(customers.at[i, "id"], q, q * penalty[customers.index.get_loc(i)])
            for i, q in zip(unmet_index.tolist(), unmet_values.tolist()) if q > 0]
    result.unmet = (pd.DataFrame(rows, columns=UNMET_COLUMNS) if rows else empty_frame(UNMET_COLUMNS))


def trips_needed(flow: float, trip_capacity: float) -> int:
    """Whole trips to carry ``flow`` (a relative 1e-9 of solver noise is forgiven: 20.0000000001 / 10 is 2 trips)."""
    if flow <= 0 or not trip_capacity > 0:
        return 0
    return int(math.ceil(flow / trip_capacity - 1e-9))


def open_node_frame(network: Network, model: SparseModel, values: np.ndarray) -> pd.DataFrame:
    """:data:`~lanesolve.model.result.OPEN_NODE_COLUMNS` for every depot and hub of a network with design
    decisions; ``values`` are the plan's column values (:func:`plan_values`)."""
    frames = []
    for kind, frame in (("depot", network.depots), ("hub", network.hubs)):
        status = frame["status"].to_numpy(dtype=object)
        is_open = status == "open"
        decided = pd.Series(np.round(values[model.columns(f"open_{kind}_")]) > 0, index=model.ids(f"open_{kind}_"))
        chosen = status == "decide"
        is_open[chosen] = decided.reindex(frame.index[chosen]).to_numpy(dtype=bool)
        is_open = is_open.astype(bool)
        fixed = frame["fixed_cost"].to_numpy(dtype=float)
        frames.append(pd.DataFrame({"node": frame["id"].to_numpy(dtype=object), "kind": kind, "status": status,
                                    "open": is_open, "fixed_charge": np.where(is_open, fixed, 0.0)}))
    frame = pd.concat(frames, ignore_index=True)
    return frame[OPEN_NODE_COLUMNS] if len(frame) else empty_frame(OPEN_NODE_COLUMNS)


def trip_frame(network: Network, flow: dict[int, float]) -> pd.DataFrame:
    """:data:`~lanesolve.model.result.TRIP_COLUMNS` for lanes with a trip capacity and flow > 0."""
    lanes = network.active_lanes
    rows = []
    for index in lanes.index[lanes["trip_capacity"].notna()].tolist():
        value = flow.get(index, 0.0)
        if value <= 0:
            continue
        lane = lanes.loc[index]
        trips = trips_needed(value, float(lane["trip_capacity"]))
        rows.append((lane["origin"], lane["destination"], lane["mode"], value, float(lane["trip_capacity"]), trips,
                     float(lane["cost_per_trip"]), trips * float(lane["cost_per_trip"])))
    if not rows:
        return empty_frame(TRIP_COLUMNS)
    frame = pd.DataFrame(rows, columns=TRIP_COLUMNS)
    frame["trips"] = frame["trips"].astype(int)
    return frame


def solve(network: Network, time_limit: float | None = None, solver: str | None = None, msg: bool = False,
          sensitivity: bool = False, linking: bool = True, deadline: float | None = None,
          cap: float | None = None) -> Result:
    """Build the model of :mod:`lanesolve.model.formulation` for ``network`` once and solve it.

    Parameters
    ----------
    network : Network
        A validated network.
    time_limit : float, optional
        Seconds the solver may run; overrides ``network.settings.time_limit_s``. A value of 0 or less, or None
        with a setting of 0, means no limit.
    solver : {"auto", "cbc", "highs"}, optional
        ``"auto"``: the engine that fits the model (module docstring). ``"cbc"``: the CBC binary in PuLP's wheel.
        ``"highs"``: HiGHS in memory through ``highspy``. None takes the ``solver`` setting (default ``"auto"``).
    msg : bool
        Echo the solver's log to stderr.
    deadline : float, optional
        A :func:`time.monotonic` time at which the engine must stop (the run's limit counted from the end of
        reading); the earlier of it and ``time_limit`` counts. A construction may run past it (module docstring).
    sensitivity : bool
        Accepted and ignored: sensitivity figures are not part of a solve (:mod:`lanesolve.model.sensitivity`
        computes them from the plan), so ``Result.sensitivity`` stays empty here.
    linking : bool
        Build the per-lane linking rows of node decisions (off only to measure their worth).
    cap : float, optional
        Emissions cap in tonnes CO2e, overriding the ``emissions_cap`` setting (:mod:`lanesolve.model.tradeoff`).

    Returns
    -------
    Result
        Status per the module docstring. With a plan: flows (lanes with flow > 1e-9), nodes, unmet, a cost
        breakdown adding up to ``total_cost``, ``mip_gap`` and ``best_bound`` (None for a pure LP's gap), and for
        a network with design decisions the open nodes and trips. Without a plan: the status, a message, and the
        node frame with zero flows. ``timings`` holds ``build_model`` and ``solver`` seconds (the solver's
        stage includes writing and reading CBC's files, or passing the arrays to HiGHS).

    Raises
    ------
    SolverError
        Unknown solver name, solver missing (with how to install it), the solver crashed, or its answer could not
        be read.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 4}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2.5}])
    >>> result = solve(net)
    >>> result.status.value, round(result.total_cost, 6), result.mip_gap
    ('optimal', 10.0, None)
    """
    settings = network.settings
    solver = (solver or getattr(settings, "solver", None) or "auto").lower()
    if solver not in SOLVERS:
        raise SolverError(f"unknown solver {solver!r} (choose one of: {', '.join(SOLVERS)})")
    limit = time_limit if time_limit is not None else settings.time_limit_s
    limit = float(limit) if limit is not None and limit > 0 else None
    gap = float(settings.mip_gap) if settings.mip_gap is not None else None
    end = time.monotonic() + limit if limit is not None else None
    if deadline is not None:
        end = deadline if end is None else min(end, deadline)

    flow = None
    tick = time.perf_counter()
    # Several products, a carbon price or an emissions cap are beyond the one-commodity flow algorithm.
    goods = network.products is not None or cap is not None or (
        network.emissions is not None and (settings.carbon_price or settings.emissions_cap is not None))
    single_product = build_sparse_model
    if solver == "auto" and not goods and network_flow.applies(network):
        graph = network_flow.flow_graph(network)  # None: not exactly in integers; the LP engine takes it
        flow = None if graph is None else network_flow.run_graph(graph)
        if flow is not None and not (flow.feasible or flow.infeasible):
            flow = None
        if flow is not None:  # the model's lane ends are the graph's: no second lookup of every lane end
            single_product = functools.partial(build_sparse_model, lane_ends=graph.lane_ends())
    flow_seconds = time.perf_counter() - tick
    tick = time.perf_counter()
    model = build_model(network, linking=linking, cap=cap, single_product=single_product)
    build_seconds = time.perf_counter() - tick
    tick = time.perf_counter()
    constructed = False
    facility = None
    if flow is None and solver == "auto" and end is not None and model.n_columns >= LARGE_MIP:
        # Large facility location with split deliveries: the MIP engines do not finish its first LP in minutes
        # (benchmarks/README.md, *Engines and time limits*), the Lagrangian method plans it in seconds. It stops
        # by itself when its search ends, at the latest at the limit (no construction follows it); without a plan
        # the engines below take what time is left.
        facility = lagrangian.recognise(model)
        answer = None if facility is None else lagrangian.solve_facility(model, facility, end - time.monotonic(), gap)
        facility = None if answer is None else facility
    if flow is not None:
        answer = _flow_answer(model, network, flow)
        solver_seconds = flow_seconds
    elif facility is not None:
        solver_seconds = time.perf_counter() - tick
    else:
        engine = pick_engine(model) if solver == "auto" else solver
        allowed = None if end is None else limit_or(limit, end)
        engine_end = None if end is None else engine_deadline(end, allowed, engine)
        # Under auto, a network whose only decisions are lane charges keeps a share of its time for the lane search
        # (below LARGE_MIP, where it was measured; a larger one searches only in what time the engine leaves).
        searching = solver == "auto" and end is not None and model.is_mip and lane_search.applies(network)
        if searching and model.n_columns < LARGE_MIP:
            engine_end = min(engine_end, end - lane_search.share(network, SEARCH_SHARE) * allowed)
        assigning = (solver == "auto" and end is not None and model.is_mip and not searching
                     and assign_search.applies(model))
        if assigning:
            engine_end = min(engine_end, end - ASSIGN_SHARE * allowed)
        first = None
        if solver == "auto" and engine == "highs" and model.n_columns >= LARGE_MIP and end is not None:
            from lanesolve.model.construct import construct
            first = construct(model, FIRST_SHARE * max(end - time.monotonic(), 0.0))
        engine_limit = None if engine_end is None else max(engine_end - time.monotonic(), 1.0)
        answer = solve_model(model, engine, engine_limit, gap, msg,
                             deadline=None if engine_end is None else time.monotonic() + engine_limit,
                             start=None if first is None else plan_values(network, model, first.value))
        if first is not None and not answer.status.has_plan:
            first.solver = f"{answer.solver}, no plan of its own in its limit; plan by quick construction"
            answer, constructed = first, True
        elif first is not None and first.bound is not None:
            answer.bound = first.bound if answer.bound is None else max(answer.bound, first.bound)
        if answer.status is SolveStatus.NOT_SOLVED and end is not None:
            built = _build_plan(network, model, answer, end + construction_seconds(allowed))
            if built is not None:
                answer, constructed = built, True
        if searching and answer.status is SolveStatus.FEASIBLE:
            better = lane_search.improve(network, model, plan_values(network, model, answer.value), end)
            if better is not None:
                answer.value, answer.gap = better, None
                answer.solver = f"{answer.solver}; plan improved by lane search"
        elif assigning and answer.status is SolveStatus.FEASIBLE and not constructed:
            # A single-source facility plan the engine did not prove: the assignment search takes the rest of the
            # limit (module docstring, *Time limit*).
            better = assign_search.improve(model, plan_values(network, model, answer.value), end)
            if better is not None:
                answer.value, answer.gap = better, None
                answer.solver = f"{answer.solver}; plan improved by assignment search"
        # The solver's stage includes handing it the model and reading its answer (CBC: the MPS and solution files).
        solver_seconds = time.perf_counter() - tick

    status = answer.status
    result = Result(status=status, solver=answer.solver, solve_seconds=solver_seconds)
    result.timings["build_model"] = build_seconds
    result.timings["solver"] = solver_seconds
    if not status.has_plan:
        result.cost_breakdown = dict.fromkeys(model.costs, math.nan)
        _no_plan(network, result, status, limit, model.is_mip)
        return result

    values = carrier_results.tidy_values(network, model, plan_values(network, model, answer.value))
    n_lanes = len(model.lane_index)
    _fill_plan(network, model.lane_index, values[:n_lanes], model.unmet_index, values[model.columns("unmet_")],
               model.penalty, model.breakdown(values), result)
    carrier_results.apply_lane_costs(result, network, model, values)
    result.carriers = carrier_results.carrier_figures(network, model, values, result,
                                                      lambda lp: solve_model(lp, lp_engine(solver), limit, gap))
    finish_plan(network, model, values, result, node_balance)
    if model.design:
        result.open_nodes = open_node_frame(network, model, values)
        result.trips = trip_frame(network, dict(zip(model.lane_index.tolist(), values[:n_lanes].tolist())))
    if not model.is_mip:
        result.best_bound = result.total_cost  # an optimal LP's objective is its own bound
        return result
    if answer.bound is None:
        result.messages.append("The solver did not report a lower bound, so the gap to the optimum is unknown.")
    else:
        # The bound is printed rounded, and a tidied plan may cost less than the solver's: never above the plan.
        bound = min(answer.bound + model.objective_constant, result.total_cost)
        result.best_bound = bound
        result.mip_gap = max(0.0, (result.total_cost - bound) / max(abs(result.total_cost), 1e-9))
    if constructed:
        result.messages.append("The solver found no plan in its time limit; this plan was built by a quick "
                               "construction (LP rounding) and is not proven optimal.")
    if status is SolveStatus.FEASIBLE and facility is not None:
        gap_text = "unknown" if result.mip_gap is None else f"{result.mip_gap:.2%}"
        result.messages.append(f"This plan comes from a Lagrangian relaxation and a local search over the depots to "
                               f"open, which do not prove a plan optimal; the best possible plan may cost up to "
                               f"{gap_text} less than this one (the relaxation's lower bound).")
    elif status is SolveStatus.FEASIBLE:
        gap_text = "unknown" if result.mip_gap is None else f"{result.mip_gap:.2%}"
        result.messages.append(f"The solver stopped on its time limit ({limit:g} s) before proving the plan "
                               f"optimal; the best possible plan may cost up to {gap_text} less than this one "
                               "(raise time_limit_s in Settings or use --time-limit).")
    return result


def lp_engine(solver: str) -> str:
    """The LP engine for follow-up solves of a plan (carrier figures): the one chosen, HiGHS under ``auto``."""
    return "highs" if solver == "auto" else solver


def limit_or(limit: float | None, end: float) -> float:
    """The run's limit in seconds, or the time to ``end`` when only a deadline was given."""
    return limit if limit is not None else max(end - time.monotonic(), 0.0)


def _build_plan(network: Network, model: SparseModel, stopped: Answer, end: float) -> Answer | None:
    """A plan after the engine stopped without one: the network algorithm for a pure flow (exact, so optimal),
    else the quick construction of :mod:`lanesolve.model.construct` until ``end`` (the limit plus
    :func:`construction_seconds`; at least :data:`CONSTRUCTION_FLOOR` seconds)."""
    if not model.is_mip:
        flow = network_flow.solve_flow(network) if network_flow.applies(network) else None
        if flow is None or not flow.feasible:
            return None
        answer = _flow_answer(model, network, flow)
        answer.solver = f"{stopped.solver}, stopped on its limit; then {answer.solver}"
        return answer
    from lanesolve.model.construct import construct  # late import: needed only when the engine found nothing

    built = construct(model, max(end - time.monotonic(), CONSTRUCTION_FLOOR), stopped.bound)
    if built is not None:
        built.solver = f"{stopped.solver}, stopped on its limit; plan by quick construction ({built.solver})"
    return built


def _no_plan(network: Network, result: Result, status: SolveStatus, limit: float | None, is_mip: bool) -> None:
    """Fill a no-plan ``result``: zero node balance and the message (the diagnosis is
    :func:`lanesolve.model.diagnose.solve_and_explain`'s)."""
    result.nodes = node_balance(network, {}, {}, None)
    result.messages.append(_no_plan_message(status, limit, is_mip))


def _no_plan_message(status: SolveStatus, limit: float | None, is_mip: bool) -> str:
    if status is SolveStatus.INFEASIBLE:
        return ("No plan meets every demand within the supplies and capacities (raise supply or capacity, add "
                "lanes, or give customers an unmet_penalty to allow a shortfall).")
    if status is SolveStatus.UNBOUNDED:
        return "The solver reports the cost can fall without limit; check the lane costs for negative values."
    if limit is not None:
        return (f"The solver stopped on its time limit ({limit:g} s) before it found any plan "
                "(raise time_limit_s in Settings or use --time-limit).")
    return "The solver stopped without a plan."
