"""The validated network: plain data handed from the validator to the model, the checks and the writers.

A :class:`Network` holds one pandas DataFrame per node kind and one for lanes, with the columns listed below and
nothing else. Missing optional values are already filled with their defaults; "no limit" is ``math.inf``; a hard
demand has ``unmet_penalty`` NaN. ``row`` is the spreadsheet row the record came from (for messages).

depots     id, supply, handling_cost, fixed_cost, status, latitude, longitude, row
customers  id, demand, unmet_penalty, single_source, latitude, longitude, row
hubs       id, capacity, handling_cost, fixed_cost, status, latitude, longitude, row
lanes      origin, destination, mode, cost_per_unit, capacity, fixed_cost, min_volume, trip_capacity, cost_per_trip,
           active, carrier, minimum_charge, row
carriers   id, min_volume, max_volume, max_share, row (the optional Carriers sheet; empty without it)
rate_breaks  lane, from_volume, cost_per_unit, kind, row (the optional Rate breaks sheet; empty without it)
lane_sources  distance, cost_source, sheet (same index as lanes)

Design columns, resolved: ``status`` is ``"open"``, ``"closed"`` or ``"decide"`` (a blank status is already
``decide`` when the node has a fixed cost, else ``open``); ``single_source`` is a bool (a blank one already takes
the Settings default); ``trip_capacity`` is NaN when the lane is not run in whole trips; ``min_volume`` and
``cost_per_trip`` are 0 when not given; ``carrier`` is ``""`` for a lane with no carrier and ``minimum_charge`` 0
when not given.

Rates from distance: ``cost_per_unit`` is always a number. :attr:`Network.lane_sources` says, per lane, where it
came from: ``cost_source`` (``"given"``, ``"rate x distance"`` or ``"rate x great circle x circuity"``, see
:mod:`lanesolve.read.geo`), ``distance`` (in the Settings ``distance_unit``: given, or computed when the cost was; NaN
otherwise) and ``sheet`` (``"Lanes"`` or the Settings ``lanes_file`` the lane was read from; the lane's ``row`` is
the row there, header = row 1, in a CSV file its line number). It is a frame of its own so the lanes frame keeps
the columns every stage already reads.

Every frame uses a default RangeIndex. Ids are unique across the three node frames.
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from lanesolve.model.product_data import EmissionData, ProductData

DEPOT_COLUMNS = ["id", "supply", "handling_cost", "fixed_cost", "status", "latitude", "longitude", "row"]
CUSTOMER_COLUMNS = ["id", "demand", "unmet_penalty", "single_source", "latitude", "longitude", "row"]
HUB_COLUMNS = ["id", "capacity", "handling_cost", "fixed_cost", "status", "latitude", "longitude", "row"]
LANE_COLUMNS = ["origin", "destination", "mode", "cost_per_unit", "capacity", "fixed_cost", "min_volume",
                "trip_capacity", "cost_per_trip", "active", "carrier", "minimum_charge", "row"]
#: Columns of :attr:`Network.lane_sources`: where each lane and its cost came from.
LANE_SOURCE_COLUMNS = ["distance", "cost_source", "sheet"]
#: Columns holding text (everything else is a number, except the bool ``active`` / ``single_source`` and ``row``).
TEXT_COLUMNS = frozenset({"id", "origin", "destination", "mode", "status", "carrier"})
#: Columns of :attr:`Network.carriers`: one row per carrier of the Carriers sheet; NaN means no such commitment.
CARRIER_COLUMNS = ["id", "min_volume", "max_volume", "max_share", "row"]
#: Columns of :attr:`Network.rate_breaks`: one row per break, ``lane`` the lane's index in ``lanes``, sorted by lane
#: and ``from_volume``; ``kind`` is ``"incremental"`` or ``"all_units"`` (one kind per lane).
RATE_BREAK_COLUMNS = ["lane", "from_volume", "cost_per_unit", "kind", "row"]
BOOL_COLUMNS = frozenset({"active", "single_source"})


def resolve_status(status: pd.Series, fixed_cost: pd.Series) -> pd.Series:
    """Node status with blanks resolved: ``decide`` when the node has a fixed cost, else ``open``."""
    text = status.where(status.notna(), "").astype(str).str.strip().str.lower()
    blank = text.isin(["", "nan", "none"])
    return text.where(~blank, np.where(fixed_cost.to_numpy(dtype=float) > 0, "decide", "open")).astype(object)


@dataclass
class Settings:
    """Values from the Settings sheet, defaults filled in (see :data:`lanesolve.contract.SETTINGS_ROWS`)."""

    unmet_penalty: float | None = None
    time_limit_s: float = 60.0
    mip_gap: float = 1e-4
    units: str = "units"
    currency: str = ""
    max_open_depots: float | None = None
    max_open_hubs: float | None = None
    single_source: bool = False
    solver: str = "auto"
    rate_per_distance: float | None = None
    distance_unit: str = "km"
    circuity_factor: float = 1.2
    lanes_file: str | None = None
    tonnes_per_unit: float | None = None
    carbon_price: float | None = None
    emissions_cap: float | None = None


@dataclass
class Network:
    """A validated lane-planning network. See the module docstring for the columns of each frame."""

    depots: pd.DataFrame
    customers: pd.DataFrame
    hubs: pd.DataFrame
    lanes: pd.DataFrame
    settings: Settings = field(default_factory=Settings)
    source: str = ""
    lane_sources: pd.DataFrame | None = None
    #: Several products (:class:`lanesolve.model.product_data.ProductData`), or None for a single-product network.
    products: ProductData | None = None
    #: Distances and factors for the plan's emissions (:class:`lanesolve.model.product_data.EmissionData`), or
    #: None when the workbook asks for no emissions figures.
    emissions: EmissionData | None = None
    carriers: pd.DataFrame = field(default_factory=lambda: empty_carriers())
    rate_breaks: pd.DataFrame = field(default_factory=lambda: empty_rate_breaks())

    @property
    def has_carrier_terms(self) -> bool:
        """True when the network has carrier commitments, minimum charges or rate breaks."""
        lanes = self.active_lanes
        return bool(len(self.carriers) or len(self.rate_breaks) or (lanes["minimum_charge"] > 0).any())

    def cost_sources(self) -> pd.DataFrame:
        """:attr:`lane_sources` aligned with :attr:`lanes`; lanes built without one count as given on sheet Lanes."""
        sources = self.lane_sources
        if sources is not None and sources.index.equals(self.lanes.index):
            return sources
        return pd.DataFrame({"distance": math.nan, "cost_source": "given", "sheet": "Lanes"},
                            index=self.lanes.index)[LANE_SOURCE_COLUMNS]

    def cost_source_by_lane(self) -> dict[tuple[str, str, str], tuple[float, str]] | None:
        """Where each lane's cost came from, keyed by (origin, destination, mode): (distance, cost source).

        ``None`` when every cost was typed in and no lane has a distance, so results need not show the columns.
        """
        sources = self.cost_sources()
        if not len(sources) or not (sources["distance"].notna().any() or (sources["cost_source"] != "given").any()):
            return None
        lanes = self.lanes
        keys = zip(lanes["origin"].tolist(), lanes["destination"].tolist(), lanes["mode"].tolist())
        return dict(zip(keys, zip(sources["distance"].tolist(), sources["cost_source"].tolist())))

    @property
    def active_lanes(self) -> pd.DataFrame:
        """Lanes that take part in the model (``active`` true).

        Filtered anew on every call, except inside :meth:`lanes_settled`, where the first call's frame is kept and
        handed out (as a shallow copy) while :attr:`lanes` is still the same frame.
        """
        kept = self.__dict__.get("_kept_active")
        if kept is None or kept[0] is not self.lanes:
            return self.lanes[self.lanes["active"]]
        if kept[1] is None:
            kept[1] = self.lanes[self.lanes["active"]]
        return kept[1].copy(deep=False)  # copy-on-write: a caller's edit never reaches the kept frame

    def lanes_at(self, index) -> pd.DataFrame:
        """``lanes.loc[index]``; inside :meth:`lanes_settled`, the kept active lanes when they are exactly those."""
        kept = self.__dict__.get("_kept_active")
        if kept is not None and kept[0] is self.lanes and kept[1] is not None and kept[1].index.equals(pd.Index(index)):
            return kept[1].copy(deep=False)
        return self.lanes.loc[index]

    @contextlib.contextmanager
    def lanes_settled(self) -> Iterator[Network]:
        """A block in which :attr:`active_lanes` filters the lanes once instead of on every call.

        For the stages that read the network without editing it (checks, model, solve, figures): the caller
        promises that nothing inside the block edits :attr:`lanes` in place (assigning a new frame is seen).
        Copies never carry the kept frame (``copy.deepcopy`` and pickling drop it, ``dataclasses.replace`` builds
        a new Network), so a remedy or a diagnosis that edits its own copy of the network sees its edits.
        """
        outermost = "_kept_active" not in self.__dict__
        if outermost:
            self.__dict__["_kept_active"] = [self.lanes, None]
        try:
            yield self
        finally:
            if outermost:
                self.__dict__.pop("_kept_active", None)

    def __getstate__(self) -> dict:
        # Copies and pickles leave out the frame kept by lanes_settled: a copy is edited on its own.
        state = dict(self.__dict__)
        state.pop("_kept_active", None)
        return state

    def node_kind(self) -> dict[str, str]:
        """Map every node id to ``"depot"``, ``"customer"`` or ``"hub"``."""
        kinds: dict[str, str] = {}
        for kind, frame in (("depot", self.depots), ("customer", self.customers), ("hub", self.hubs)):
            kinds.update(dict.fromkeys(frame["id"].tolist(), kind))
        return kinds

    @property
    def has_fixed_charges(self) -> bool:
        """True when any active lane carries a fixed charge (the model then needs yes/no variables)."""
        return bool((self.active_lanes["fixed_cost"] > 0).any())

    @property
    def has_design(self) -> bool:
        """True when any design decision is present: a node to open or close, a fixed node charge, a minimum
        lane volume, whole trips, single sourcing or a limit on open nodes (the model then adds their rows)."""
        # Columns of the active lanes as arrays: filtering a 100k-lane frame would cost more than the test itself.
        lanes, active = self.lanes, self.lanes["active"].to_numpy(dtype=bool)
        nodes = (self.depots, self.hubs)
        return bool(any((frame["status"] != "open").any() or (frame["fixed_cost"] > 0).any() for frame in nodes)
                    or (lanes["min_volume"].to_numpy(dtype=float)[active] > 0).any()
                    or (~np.isnan(lanes["trip_capacity"].to_numpy(dtype=float)[active])).any()
                    or self.customers["single_source"].any()
                    or self.settings.max_open_depots is not None or self.settings.max_open_hubs is not None)


def empty_carriers() -> pd.DataFrame:
    """A :attr:`Network.carriers` frame with no carrier."""
    return pd.DataFrame({"id": pd.Series(dtype=object), "min_volume": pd.Series(dtype=float),
                         "max_volume": pd.Series(dtype=float), "max_share": pd.Series(dtype=float),
                         "row": pd.Series(dtype=int)})


def empty_rate_breaks() -> pd.DataFrame:
    """A :attr:`Network.rate_breaks` frame with no break."""
    return pd.DataFrame({"lane": pd.Series(dtype=int), "from_volume": pd.Series(dtype=float),
                         "cost_per_unit": pd.Series(dtype=float), "kind": pd.Series(dtype=object),
                         "row": pd.Series(dtype=int)})


def carrier_frame(records: list[dict] | pd.DataFrame | None) -> pd.DataFrame:
    """A :attr:`Network.carriers` frame from records with ``id`` and any of the commitments (missing = none).

    >>> carrier_frame([{"id": "K", "min_volume": 5}])[["id", "min_volume", "max_share"]].values.tolist()
    [['K', 5.0, nan]]
    """
    frame = pd.DataFrame(records if records is not None else [])
    if frame.empty:
        return empty_carriers()
    for col in CARRIER_COLUMNS[1:-1]:
        frame[col] = frame[col].astype(float) if col in frame else math.nan
    if "row" not in frame:
        frame["row"] = range(2, len(frame) + 2)
    frame["id"] = frame["id"].astype(str).astype(object)
    return frame[CARRIER_COLUMNS].reset_index(drop=True)


def rate_break_frame(lanes: pd.DataFrame, records: list[dict] | pd.DataFrame | None) -> pd.DataFrame:
    """A :attr:`Network.rate_breaks` frame from records naming the lane by ``origin``, ``destination`` and
    ``mode`` (or by ``lane`` index), sorted by lane and ``from_volume``. No validation (see
    :mod:`lanesolve.read.carrier_sheets` for workbook input)."""
    frame = pd.DataFrame(records if records is not None else [])
    if frame.empty:
        return empty_rate_breaks()
    if "lane" not in frame:
        keys = {key: i for i, key in enumerate(zip(lanes["origin"], lanes["destination"], lanes["mode"]))}
        mode = frame["mode"] if "mode" in frame else pd.Series("", index=frame.index)
        frame["lane"] = [keys[(o, d, m)] for o, d, m in zip(frame["origin"], frame["destination"], mode.fillna(""))]
    if "row" not in frame:
        frame["row"] = range(2, len(frame) + 2)
    frame = frame.astype({"lane": int, "from_volume": float, "cost_per_unit": float, "row": int})
    frame["kind"] = frame["kind"].astype(object)
    return frame[RATE_BREAK_COLUMNS].sort_values(["lane", "from_volume"], kind="stable").reset_index(drop=True)


def make_network(
    depots: list[dict] | pd.DataFrame,
    customers: list[dict] | pd.DataFrame,
    lanes: list[dict] | pd.DataFrame,
    hubs: list[dict] | pd.DataFrame | None = None,
    settings: Settings | None = None,
    carriers: list[dict] | pd.DataFrame | None = None,
    rate_breaks: list[dict] | pd.DataFrame | None = None,
) -> Network:
    """Build a :class:`Network` from plain records, filling defaults; meant for tests and the Python API.

    Records use the column names above; omitted optional fields take their defaults and ``row`` is numbered
    from 2 as in a sheet. No validation beyond that is done: use :func:`lanesolve.read.validate.validate` for
    workbook input.

    Examples
    --------
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> float(net.lanes.loc[0, "capacity"])
    inf
    """
    defaults = {
        "depots": {"handling_cost": 0.0, "fixed_cost": 0.0, "status": "", "latitude": math.nan,
                   "longitude": math.nan},
        "customers": {"unmet_penalty": math.nan, "single_source": None, "latitude": math.nan, "longitude": math.nan},
        "hubs": {"capacity": math.inf, "handling_cost": 0.0, "fixed_cost": 0.0, "status": "", "latitude": math.nan,
                 "longitude": math.nan},
        "lanes": {"mode": "", "capacity": math.inf, "fixed_cost": 0.0, "min_volume": 0.0, "trip_capacity": math.nan,
                  "cost_per_trip": 0.0, "active": True, "carrier": "", "minimum_charge": 0.0},
    }
    settings = settings or Settings()
    columns = {"depots": DEPOT_COLUMNS, "customers": CUSTOMER_COLUMNS, "hubs": HUB_COLUMNS, "lanes": LANE_COLUMNS}

    def frame(name: str, records) -> pd.DataFrame:
        df = pd.DataFrame(records if records is not None else [], columns=None)
        for col in columns[name]:
            if col == "row":
                if col not in df:
                    df[col] = range(2, len(df) + 2)
            elif col not in df:
                df[col] = defaults[name].get(col, math.nan)
            elif col in defaults[name] and defaults[name][col] is not None:
                df[col] = df[col].where(df[col].notna(), defaults[name][col])
        df = df[columns[name]].reset_index(drop=True)
        for col in columns[name]:
            if col == "status":
                df[col] = resolve_status(df[col], df["fixed_cost"].astype(float))
            elif col in TEXT_COLUMNS:
                df[col] = df[col].astype(str)
            elif col == "single_source":
                df[col] = df[col].map(lambda v: bool(settings.single_source) if v is None or v != v
                                      else bool(v)).astype(bool)
            elif col in BOOL_COLUMNS:
                df[col] = df[col].astype(bool)
            elif col == "row":
                df[col] = df[col].astype(int)
            else:
                df[col] = df[col].astype(float)
        return df

    lane_frame = frame("lanes", lanes)
    return Network(
        depots=frame("depots", depots),
        customers=frame("customers", customers),
        hubs=frame("hubs", hubs),
        lanes=lane_frame,
        settings=settings,
        carriers=carrier_frame(carriers),
        rate_breaks=rate_break_frame(lane_frame, rate_breaks),
    )
