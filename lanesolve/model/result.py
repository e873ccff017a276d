"""The plain result of a solve: what the sheet writer, the HTML report and ``--json`` read.

Nothing here refers to the solver; a :class:`Result` can be built by hand in a test.
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

#: The caution every plan carries: on the summary sheet, in the HTML summary and (in other words) in README.md.
CAUTION = ("Check every plan against vehicle weight limits, driver working-time rules, hazardous-goods rules and "
           "carrier contracts; local regulations and licensed professionals take precedence. Emissions figures are "
           "estimates from the factors in the workbook (defaults are averages): check them before reporting them.")

#: Columns of :attr:`Result.flows` (one row per active lane with flow > 0).
FLOW_COLUMNS = ["origin", "destination", "mode", "flow", "cost_per_unit", "variable_cost", "fixed_charge",
                "capacity", "utilisation"]
#: Columns of :attr:`Result.nodes` (one row per node).
NODE_COLUMNS = ["node", "kind", "supply", "demand", "shipped", "received", "unmet", "capacity", "throughput",
                "utilisation"]
#: Columns of :attr:`Result.unmet` (one row per customer short); ``penalty`` is the total penalty cost
#: (quantity times the customer's per-unit rate).
UNMET_COLUMNS = ["customer", "quantity", "penalty"]
#: Keys of :attr:`Result.cost_breakdown`, in report order.
COST_COMPONENTS = ("transport", "handling", "fixed_lane", "unmet_penalty")
#: Extra keys of :attr:`Result.cost_breakdown` for a network with design decisions (node charges, whole trips);
#: present only then, so a plain flow network's result keeps exactly :data:`COST_COMPONENTS`.
DESIGN_COST_COMPONENTS = ("fixed_node", "trips")
#: Plain words for every cost component: the one set of labels the sheets, the charts, the HTML, the mail and the
#: terminal show (``--json`` keeps the keys).
COST_LABELS = {
    "transport": "Transport",
    "handling": "Handling at depots and hubs",
    "fixed_lane": "Fixed lane charges",
    "unmet_penalty": "Penalties for unmet demand",
    "fixed_node": "Fixed depot and hub charges",
    "trips": "Trip costs",
    "carbon": "Carbon price on emissions",
}


@dataclass(frozen=True)
class CostLine:
    """One component of the total cost, as every report shows it (see :meth:`Result.cost_lines`).

    Attributes
    ----------
    key : str
        The key of :attr:`Result.cost_breakdown` (``transport``, ``handling``, ...); stable, used by ``--json``.
    label : str
        Plain words for it (:data:`COST_LABELS`).
    amount : float
        The amount at full precision (0.0 for a missing or NaN component).
    share : float
        ``amount`` over the sum of every component's amount (0.0 when that sum is 0); the shares add up to 1.
    """

    key: str
    label: str
    amount: float
    share: float


def cost_order(keys) -> list[str]:
    """Cost keys in report order: :data:`COST_COMPONENTS`, then :data:`DESIGN_COST_COMPONENTS`, then any others.

    >>> cost_order(["trips", "unmet_penalty", "transport", "other"])
    ['transport', 'unmet_penalty', 'trips', 'other']
    """
    order = [*COST_COMPONENTS, *DESIGN_COST_COMPONENTS]
    keys = list(dict.fromkeys(keys))
    return [k for k in order if k in keys] + [k for k in keys if k not in order]


#: Columns of :attr:`Result.open_nodes` (one row per depot and hub): ``open`` is whether the plan uses / keeps it,
#: ``fixed_charge`` what it pays for that.
OPEN_NODE_COLUMNS = ["node", "kind", "status", "open", "fixed_charge"]
#: Columns of :attr:`Result.trips` (one row per lane with a trip capacity and flow > 0).
TRIP_COLUMNS = ["origin", "destination", "mode", "flow", "trip_capacity", "trips", "cost_per_trip", "trip_cost"]
#: Columns of :attr:`Result.carriers` (see :mod:`lanesolve.model.carrier_results`): per carrier and commitment its
#: lanes, volume, share of units delivered, cost, the commitment (``min_volume``, ``max_volume``, ``max_share`` or
#: blank) and its bound, ``state`` (``met``, ``binding (minimum)``, ...), the change in total cost when the bound
#: moves one unit down / up (inf: not possible with the plan's other decisions; NaN: not binding) and a sentence.
CARRIER_RESULT_COLUMNS = ["carrier", "lanes", "volume", "share", "cost", "commitment", "bound", "state",
                          "cost_one_less", "cost_one_more", "text"]
#: Columns of :attr:`Result.sensitivity` (see :mod:`lanesolve.model.sensitivity`): ``value_up`` is what one more unit
#: costs (demand) or saves (a capacity), ``value_down`` what one unit less saves or costs; ``value`` is the figure when
#: both sides agree (``unique``), NaN when they differ; ``inf`` marks a side with no plan.
SENSITIVITY_COLUMNS = ["figure", "item", "value", "value_up", "value_down", "unique", "basis", "text"]


def singular(units: str) -> str:
    """The label of one unit: "pallets" -> "pallet", "boxes" -> "box", "tonnes" -> "tonne" (plain English rules).

    >>> [singular(u) for u in ("pallets", "boxes", "lorries", "kg", "units")]
    ['pallet', 'box', 'lorry', 'kg', 'unit']
    """
    word = units.strip() or "units"
    lower = word.lower()
    if lower.endswith("ies") and len(word) > 3:
        return word[:-3] + "y"
    if lower.endswith(("sses", "xes", "ches", "shes", "zes")):
        return word[:-2]
    if lower.endswith("s") and not lower.endswith("ss") and len(word) > 1:
        return word[:-1]
    return word


def node_decisions(result: "Result") -> pd.DataFrame:
    """Every depot and hub with its decision and how much of it the plan uses, for the sheet and the report.

    Columns: those of :data:`OPEN_NODE_COLUMNS`, then ``used`` (net units shipped by a depot, units through a hub),
    ``limit`` (a depot's supply, a hub's capacity; inf for no limit) and ``utilisation`` (their ratio, NaN without
    a limit). Nodes missing from ``result.nodes`` have NaN figures.
    """
    decisions = result.open_nodes.reset_index(drop=True)
    if decisions.empty:
        return decisions.assign(used=pd.Series(dtype=float), limit=pd.Series(dtype=float),
                                utilisation=pd.Series(dtype=float))
    nodes = result.nodes.drop_duplicates("node").set_index("node")
    facts = nodes.reindex(decisions["node"]).reset_index(drop=True)
    is_depot = (decisions["kind"] == "depot").to_numpy()
    used = (facts["shipped"] - facts["received"]).where(is_depot, facts["throughput"])
    limit = facts["supply"].where(is_depot, facts["capacity"])
    return decisions.assign(used=used.to_numpy(), limit=limit.to_numpy(), utilisation=facts["utilisation"].to_numpy())


class SolveStatus(str, enum.Enum):
    """Outcome of a solve.

    optimal      a plan proven optimal (within ``mip_gap`` for plans with yes/no decisions)
    feasible     the solver stopped on a limit with a plan in hand; ``mip_gap`` says how far from proven
    infeasible   no plan satisfies every constraint
    unbounded    the cost can fall without limit (cannot happen with non-negative costs; reported if it does)
    not_solved   the solver stopped before it found any plan (time limit, or a failure)
    """

    OPTIMAL = "optimal"
    FEASIBLE = "feasible"
    INFEASIBLE = "infeasible"
    UNBOUNDED = "unbounded"
    NOT_SOLVED = "not_solved"

    @property
    def has_plan(self) -> bool:
        return self in (SolveStatus.OPTIMAL, SolveStatus.FEASIBLE)


_EMPTY: dict[tuple, pd.DataFrame] = {}


def empty_frame(columns: list[str]) -> pd.DataFrame:
    """A frame with no rows and these columns (text columns object, ``open``/``unique`` bool, the rest float): a
    copy of one built once per column list, as building it column by column costs about 40 times the copy and a
    run asks for several dozen (every Result starts with eight)."""
    key = tuple(columns)
    if key not in _EMPTY:
        text = ("origin", "destination", "mode", "node", "kind", "customer", "status", "figure", "item", "basis",
                "text", "carrier", "commitment", "state")
        _EMPTY[key] = pd.DataFrame({c: pd.Series(dtype=object if c in text else bool if c in ("open", "unique")
                                                 else float) for c in columns})
    return _EMPTY[key].copy()


@dataclass
class Result:
    """Outcome of solving one network.

    Attributes
    ----------
    status : SolveStatus
    total_cost : float
        Objective value of the plan (NaN without a plan).
    cost_breakdown : dict
        ``transport``, ``handling``, ``fixed_lane``, ``unmet_penalty`` (and ``fixed_node``, ``trips`` for a network
        with design decisions); they add up to ``total_cost``. Reports read it through :meth:`cost_lines`.
    flows : DataFrame
        :data:`FLOW_COLUMNS`; lanes with flow > 0. ``utilisation`` is flow / capacity (NaN without a limit).
    nodes : DataFrame
        :data:`NODE_COLUMNS`; every node.
    unmet : DataFrame
        :data:`UNMET_COLUMNS`; customers short of demand.
    mip_gap : float or None
        Relative gap between the plan and the best bound (0 for a proven optimum, None for pure LPs).
    best_bound : float or None
        Best lower bound on the cost known when the solver stopped.
    solver : str
        Solver name and version, e.g. ``"CBC 2.10.3 (PuLP 3.3.2)"``.
    solve_seconds : float
        Wall time spent in the solver.
    messages : list of str
        Plain-language notes for the planner (pre-solve findings, limits hit).
    open_nodes : DataFrame
        :data:`OPEN_NODE_COLUMNS`; every depot and hub with its status and whether the plan opens it.
    trips : DataFrame
        :data:`TRIP_COLUMNS`; lanes run in whole trips.
    sensitivity : DataFrame
        :data:`SENSITIVITY_COLUMNS` (see :mod:`lanesolve.model.sensitivity`); empty when not computed. Of a large
        plan's unused lanes only the nearest to paying have a row here; :attr:`more_figures` holds the rest.
    more_figures : UnusedLanes or None
        The unused lanes' figures that follow those in ``sensitivity`` (nearest to paying first), kept as numbers
        and made into rows only when asked (:meth:`all_figures`, :meth:`figure_count`); see
        :class:`lanesolve.model.figure_text.UnusedLanes`. They belong to the frame they were made with: a
        ``sensitivity`` frame set later stands alone. None when ``sensitivity`` holds every figure.
    lane_flow : numpy.ndarray or None
        The plan's flow on every lane of ``network.lanes``, in lane order (0 where unused or inactive): the same
        plan as ``flows``, as the figures read it. None in a result not made by a solve.
    diagnosis : Diagnosis or None
        Why no plan exists, when that was analysed (see :mod:`lanesolve.model.diagnose`).
    carriers : DataFrame
        :data:`CARRIER_RESULT_COLUMNS`; empty when no lane names a carrier.
    """

    status: SolveStatus
    total_cost: float = math.nan
    cost_breakdown: dict[str, float] = field(default_factory=lambda: dict.fromkeys(COST_COMPONENTS, 0.0))
    flows: pd.DataFrame = field(default_factory=lambda: empty_frame(FLOW_COLUMNS))
    nodes: pd.DataFrame = field(default_factory=lambda: empty_frame(NODE_COLUMNS))
    unmet: pd.DataFrame = field(default_factory=lambda: empty_frame(UNMET_COLUMNS))
    mip_gap: float | None = None
    best_bound: float | None = None
    solver: str = ""
    solve_seconds: float = 0.0
    messages: list[str] = field(default_factory=list)
    timings: dict[str, float] = field(default_factory=dict)
    open_nodes: pd.DataFrame = field(default_factory=lambda: empty_frame(OPEN_NODE_COLUMNS))
    trips: pd.DataFrame = field(default_factory=lambda: empty_frame(TRIP_COLUMNS))
    sensitivity: pd.DataFrame = field(default_factory=lambda: empty_frame(SENSITIVITY_COLUMNS))
    more_figures: object = None
    lane_flow: np.ndarray | None = field(default=None, repr=False)
    diagnosis: object = None
    carriers: pd.DataFrame = field(default_factory=lambda: empty_frame(CARRIER_RESULT_COLUMNS))
    #: Several products (:mod:`lanesolve.model.product_plan`): units per lane and product, per node and product.
    product_flows: pd.DataFrame | None = None
    product_nodes: pd.DataFrame | None = None
    #: Emissions (:mod:`lanesolve.model.product_plan`): per lane, and the summary ``--json`` shows.
    lane_emissions: pd.DataFrame | None = None
    emissions: dict | None = None
    #: The cost and emissions trade-off (:mod:`lanesolve.model.tradeoff`): ``{emissions_t, total_cost}`` per plan.
    tradeoff: list | None = None

    def cost_lines(self) -> list[CostLine]:
        """The cost breakdown every report shows: the one source of the chart, the tables, the sheets and the mail.

        Every component the result has is listed (a design network's fixed node charges and trip costs too), in
        :func:`cost_order`, so the lines always add up to :attr:`total_cost` (within solver round-off). Amounts keep
        full precision; each output rounds only for display.

        Returns
        -------
        list of CostLine
            Empty when there is no plan.

        Examples
        --------
        >>> r = Result(SolveStatus.OPTIMAL, total_cost=100.0, cost_breakdown={
        ...     "transport": 81.3, "handling": 8.0, "fixed_lane": 0.0, "unmet_penalty": 0.0, "fixed_node": 10.7,
        ...     "trips": 0.0})
        >>> [(line.key, round(line.share * 100, 1)) for line in r.cost_lines()][:3]
        [('transport', 81.3), ('handling', 8.0), ('fixed_lane', 0.0)]
        >>> round(sum(line.amount for line in r.cost_lines()), 6)
        100.0
        """
        if not self.status.has_plan:
            return []
        amounts = {}
        for key in cost_order(self.cost_breakdown):
            value = self.cost_breakdown.get(key)
            value = float(value) if value is not None else 0.0
            amounts[key] = value if math.isfinite(value) else 0.0
        total = sum(amounts.values())
        return [CostLine(key, COST_LABELS.get(key, key.replace("_", " ").capitalize()), amount,
                         amount / total if total > 0 else 0.0) for key, amount in amounts.items()]

    def figures_beyond(self):
        """:attr:`more_figures` when it continues :attr:`sensitivity` (else None): the unused lanes beyond its rows."""
        more = self.more_figures
        return more if more is not None and more.continues(self.sensitivity) else None

    def all_figures(self) -> pd.DataFrame:
        """Every sensitivity figure: :attr:`sensitivity` and, after it, the rows of :attr:`more_figures`."""
        more = self.figures_beyond()
        if more is None:
            return self.sensitivity
        return pd.concat([self.sensitivity, more.rows()], ignore_index=True)

    def figure_count(self, figure: str) -> int:
        """How many figures of kind ``figure`` the plan has, those without a row yet included."""
        frame = self.sensitivity
        count = int((frame["figure"] == figure).sum()) if len(frame) else 0
        more = self.figures_beyond()
        return count + (len(more) if more is not None and figure == "reduced_cost" else 0)

    def to_json(self, all_figures: bool = False) -> dict:
        """The ``--json`` document (without run metadata, which the pipeline adds).

        Parameters
        ----------
        all_figures : bool, default False
            List every sensitivity figure (:meth:`all_figures`). By default the unused lanes' figures
            (``reduced_cost``) are capped as *LS Sensitivity* caps them (:func:`capped_figures`);
            ``sensitivity_omitted`` counts those left out.
        """
        if all_figures:
            return {**self._json_document(self.all_figures()), "sensitivity_omitted": 0}
        figures, omitted = capped_figures(self.sensitivity)
        more = self.figures_beyond()
        return {**self._json_document(figures), "sensitivity_omitted": omitted + (0 if more is None else len(more))}

    def _json_document(self, figures: pd.DataFrame) -> dict:

        def num(x):
            if x is None:
                return None
            x = float(x)
            return None if math.isnan(x) else (None if math.isinf(x) else x)

        return {
            "status": self.status.value,
            "total_cost": num(self.total_cost),
            # From cost_lines() with a plan, so --json carries the very figures the reports show.
            "cost_breakdown": ({line.key: line.amount for line in self.cost_lines()} if self.status.has_plan
                               else {k: num(v) for k, v in self.cost_breakdown.items()}),
            "flows": [
                {"origin": origin, "destination": destination, "mode": mode, "flow": flow, "cost": cost}
                for origin, destination, mode, flow, cost in zip(
                    *(self.flows[c].tolist() for c in ("origin", "destination", "mode")),
                    _numbers(self.flows["flow"], num),
                    _numbers(self.flows["variable_cost"] + self.flows["fixed_charge"], num))
            ],
            "unmet": [{"customer": r.customer, "quantity": num(r.quantity)}
                      for r in self.unmet.itertuples(index=False)],
            "mip_gap": num(self.mip_gap),
            "best_bound": num(self.best_bound),
            "solver": self.solver,
            "solve_seconds": round(self.solve_seconds, 4),
            "messages": list(self.messages),
            "open_nodes": [r.node for r in self.open_nodes.itertuples(index=False) if r.open],
            "trips": [{"origin": r.origin, "destination": r.destination, "mode": r.mode, "trips": int(r.trips)}
                      for r in self.trips.itertuples(index=False)],
            "sensitivity": [{"figure": figure, "item": item, "value": value if unique else None, "value_up": up,
                             "value_down": down, "unique": unique, "basis": basis, "text": text}
                            for figure, item, value, up, down, unique, basis, text in zip(
                                figures["figure"].tolist(), figures["item"].tolist(),
                                _numbers(figures["value"], num),
                                _numbers(figures["value_up" if "value_up" in figures else "value"], num),
                                _numbers(figures["value_down" if "value_down" in figures else "value"], num),
                                [bool(unique) for unique in figures["unique"].tolist()],
                                figures["basis"].tolist(), figures["text"].tolist())],
            "diagnosis": self.diagnosis.to_json() if self.diagnosis is not None else None,
            "carriers": [{"carrier": r.carrier, "lanes": int(r.lanes), "volume": num(r.volume), "share": num(r.share),
                          "cost": num(r.cost), "commitment": r.commitment or None, "bound": num(r.bound),
                          "state": r.state, "cost_one_less": num(r.cost_one_less),
                          "cost_one_more": num(r.cost_one_more),
                          "possible_one_less": not math.isinf(r.cost_one_less),
                          "possible_one_more": not math.isinf(r.cost_one_more), "text": r.text}
                         for r in self.carriers.itertuples(index=False)],
            **self._goods_json(num),
        }

    def _goods_json(self, num) -> dict:
        """``flows`` per lane and product (with Products), ``emissions`` and ``tradeoff``, when the plan has them.

        A lane's cost (variable and fixed) is shared among its products in proportion to the capacity each uses,
        so the entries still add up to the lanes' cost.
        """
        extra: dict = {}
        if self.product_flows is not None and self.status.has_plan:
            lanes = {(r.origin, r.destination, r.mode): (r.flow, r.variable_cost + r.fixed_charge)
                     for r in self.flows.itertuples(index=False)}
            share = self.product_flows.get("capacity_used", self.product_flows["flow"])
            extra["flows"] = [
                {"origin": r.origin, "destination": r.destination, "mode": r.mode, "product": r.product,
                 "flow": num(r.flow),
                 "cost": num(lanes.get((r.origin, r.destination, r.mode), (1.0, 0.0))[1] * used
                             / max(lanes.get((r.origin, r.destination, r.mode), (1.0, 0.0))[0], 1e-300))}
                for r, used in zip(self.product_flows.itertuples(index=False), share.tolist())]
        if self.emissions is not None:
            extra["emissions"] = {key: (value if isinstance(value, (dict, int, str)) or value is None else num(value))
                                  for key, value in self.emissions.items()}
        if self.tradeoff is not None:
            extra["tradeoff"] = [{"emissions_t": num(p["emissions_t"]), "total_cost": num(p["total_cost"])}
                                 for p in self.tradeoff]
        return extra


#: Most unused lanes whose figure (``reduced_cost``) ``--json`` lists: the same lanes, nearest to paying first, as
#: *LS Sensitivity* (``lanesolve.write.tables.MAX_REDUCED_COST_ROWS``); ``--all-figures`` lists every one. On a
#: large network nearly every lane is unused, and a figure for each made the document hundreds of megabytes.
JSON_UNUSED_LANES = 500


def _numbers(column: pd.Series, num) -> list:
    """``num`` of every value of a column (None for NaN and infinities), at C speed for a float column."""
    if column.dtype == np.float64:
        values = column.to_numpy()
        return np.where(np.isfinite(values), values, None).tolist()
    return [num(value) for value in column.tolist()]


def capped_figures(sensitivity: pd.DataFrame, limit: int = JSON_UNUSED_LANES) -> tuple[pd.DataFrame, int]:
    """The sensitivity figures with at most ``limit`` unused lanes, and how many unused lanes were left out.

    Every figure of another kind is kept, in its order; then the unused lanes nearest to paying, as *LS
    Sensitivity* chooses them: the smallest ``value_up`` (``value`` in a frame without it) first, a lane no plan
    can use (``inf``) after every finite one, a lane without a figure (NaN) last, the model's order among equals.

    Examples
    --------
    >>> frame = pd.DataFrame({"figure": ["marginal_cost", "reduced_cost", "reduced_cost", "reduced_cost"],
    ...                       "item": ["C1", "a", "b", "c"], "value": [4.0, 3.0, float("nan"), 1.0]})
    >>> kept, omitted = capped_figures(frame, limit=1)
    >>> kept["item"].tolist(), omitted
    (['C1', 'c'], 2)
    """
    if not len(sensitivity):
        return sensitivity, 0
    unused = sensitivity["figure"].to_numpy() == "reduced_cost"
    count = int(unused.sum())
    if count <= limit:
        return sensitivity, 0
    lanes = sensitivity[unused]
    key = lanes["value_up"] if "value_up" in lanes.columns else lanes["value"]
    # argsort puts NaN last; "stable" keeps the model's order among equal figures.
    nearest = np.argsort(key.to_numpy(dtype=float), kind="stable")[:limit]
    return pd.concat([sensitivity[~unused], lanes.iloc[nearest]]), count - limit

