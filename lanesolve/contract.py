"""The workbook contract: which sheets and columns lanesolve reads, their types, units and defaults.

This module is the single source for the reader, the validator, the blank template (its guidance sheet and header
comments) and the workbook reference in README.md (a test checks that every column here is documented there).

Header matching ignores case and surrounding spaces and treats a space like an underscore (see :func:`normalize`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

CONTRACT_VERSION = 2

#: Kinds of column value.
ID, NUMBER, FLAG, TEXT, CHOICE = "id", "number", "flag", "text", "choice"


@dataclass(frozen=True)
class Column:
    """One column of an input sheet."""

    name: str
    kind: str
    required: bool = False
    default: object = None
    minimum: float | None = None
    unit: str = ""
    doc: str = ""
    choices: tuple[str, ...] = ()
    maximum: float | None = None


@dataclass(frozen=True)
class Sheet:
    """One input sheet: its name, whether it must exist, and its columns (the id column first, if any)."""

    name: str
    required: bool
    columns: tuple[Column, ...]
    doc: str = ""
    id_column: str | None = None

    def column(self, name: str) -> Column:
        for col in self.columns:
            if col.name == name:
                return col
        raise KeyError(name)


@dataclass(frozen=True)
class Setting:
    """One row of the Settings sheet."""

    name: str
    kind: str
    default: object
    minimum: float | None = None
    unit: str = ""
    doc: str = ""
    choices: tuple[str, ...] = field(default_factory=tuple)


#: Node statuses (Depots and Hubs ``status`` column). Blank means ``decide`` when a fixed cost is given, else ``open``.
NODE_STATUSES = ("open", "closed", "decide")


def _node_design(kind: str) -> tuple[Column, ...]:
    """The v2 design columns shared by Depots and Hubs: a fixed charge for using the node and its status."""
    return (
        Column("fixed_cost", NUMBER, default=0.0, minimum=0, unit="currency",
               doc=f"Charged once if the {kind} carries any flow in the period (rent, staff). With status decide, "
                   f"lanesolve weighs it against the savings of using the {kind}. Blank means 0."),
        Column("status", CHOICE, choices=NODE_STATUSES,
               doc=f"open (may be used), closed (carries no flow) or decide (lanesolve chooses whether to use the "
                   f"{kind}). Blank means decide when a fixed cost is given, else open."),
    )


_COORDS = (
    Column("latitude", NUMBER, minimum=-90, maximum=90, unit="degrees", doc="Decimal degrees north (negative for south). Used for the map."),
    Column("longitude", NUMBER, minimum=-180, maximum=180, unit="degrees", doc="Decimal degrees east (negative for west). Used for the map."),
)

DEPOTS = Sheet(
    "Depots",
    required=True,
    id_column="depot",
    doc="Places that ship goods out: plants, warehouses, ports. One row per depot.",
    columns=(
        Column("depot", ID, required=True, doc="Unique id of the depot (text). Lanes refer to it by this id."),
        Column("supply", NUMBER, required=True, minimum=0, unit="units",
               doc="Most the depot can ship in the period. Net outflow (shipped minus received) is at most this."),
        Column("handling_cost", NUMBER, default=0.0, minimum=0, unit="currency per unit",
               doc="Cost per unit shipped out of the depot (picking, loading). Blank means 0."),
        *_node_design("depot"),
        *_COORDS,
    ),
)

CUSTOMERS = Sheet(
    "Customers",
    required=True,
    id_column="customer",
    doc="Places that receive goods. One row per customer (or delivery zone).",
    columns=(
        Column("customer", ID, required=True, doc="Unique id of the customer (text)."),
        Column("demand", NUMBER, required=True, minimum=0, unit="units",
               doc="Units to deliver in the period. Delivered exactly unless a penalty allows a shortfall."),
        Column("unmet_penalty", NUMBER, minimum=0, unit="currency per unit",
               doc="Cost per unit not delivered. Blank takes the Settings default; with no penalty anywhere the "
                   "demand is a hard requirement."),
        Column("single_source", FLAG,
               doc="yes: the customer is served by exactly one inbound lane; no: any mix. Blank takes the Settings "
                   "single_source (default no)."),
        *_COORDS,
    ),
)

HUBS = Sheet(
    "Hubs",
    required=False,
    id_column="hub",
    doc="Optional. Cross-docks and transfer points: everything that comes in goes out again.",
    columns=(
        Column("hub", ID, required=True, doc="Unique id of the hub (text)."),
        Column("capacity", NUMBER, minimum=0, unit="units",
               doc="Most units that can pass through the hub in the period. Blank means no limit."),
        Column("handling_cost", NUMBER, default=0.0, minimum=0, unit="currency per unit",
               doc="Cost per unit passing through the hub. Blank means 0."),
        *_node_design("hub"),
        *_COORDS,
    ),
)

LANES = Sheet(
    "Lanes",
    required=True,
    doc="Carrier lanes: one row per origin, destination and mode that goods may move on.",
    columns=(
        Column("origin", ID, required=True, doc="Id of the node the lane starts at (a depot, hub or customer)."),
        Column("destination", ID, required=True, doc="Id of the node the lane ends at (a depot, hub or customer)."),
        Column("cost_per_unit", NUMBER, minimum=0, unit="currency per unit",
               doc="Transport cost per unit moved on the lane. Required unless the Settings give rate_per_distance: "
                   "then a blank cost is rate_per_distance times the lane's distance (see distance)."),
        Column("mode", TEXT, default="", doc="Optional label (road, rail, carrier name). Origin, destination and "
                                              "mode together must be unique."),
        Column("capacity", NUMBER, minimum=0, unit="units",
               doc="Most units the lane can carry in the period. Blank means no limit."),
        Column("fixed_cost", NUMBER, default=0.0, minimum=0, unit="currency",
               doc="Charged once if the lane carries any flow; makes using the lane a yes/no decision."),
        Column("min_volume", NUMBER, default=0.0, minimum=0, unit="units",
               doc="If the lane is used, it carries at least this much (a carrier's minimum). Blank means 0."),
        Column("trip_capacity", NUMBER, minimum=0, unit="units per trip",
               doc="Units one truck (trip) carries. With it the lane runs in whole trips: flow at most trip_capacity "
                   "times trips. Blank means the lane is not counted in trips."),
        Column("cost_per_trip", NUMBER, default=0.0, minimum=0, unit="currency per trip",
               doc="Cost of each whole trip, on top of cost_per_unit (which may be 0). Needs trip_capacity. Blank "
                   "means 0."),
        Column("distance", NUMBER, minimum=0, unit="distance unit (Settings distance_unit)",
               doc="Road distance of the lane, used only when cost_per_unit is blank. Blank: the great-circle "
                   "distance between the two ends' latitude/longitude times the Settings circuity_factor."),
        Column("active", FLAG, default=True,
               doc="yes or no (blank means yes). Lanes marked no are left out of the plan but still reported."),
    ),
)

SETTINGS = Sheet(
    "Settings",
    required=False,
    doc="Optional. One setting per row: its name in column 'setting', its value in column 'value'.",
    columns=(
        Column("setting", TEXT, required=True, doc="Name of the setting (see the list below)."),
        Column("value", TEXT, required=True, doc="Its value."),
    ),
)

SETTINGS_ROWS = (
    Setting("unmet_penalty", NUMBER, None, minimum=0, unit="currency per unit",
            doc="Default cost per unit of demand not delivered, for customers whose own penalty is blank. Blank "
                "means demand is a hard requirement."),
    Setting("time_limit_s", NUMBER, 60.0, minimum=0, unit="seconds",
            doc="Longest the solver may run; the command line option --time-limit overrides it."),
    Setting("mip_gap", NUMBER, 1e-4, minimum=0, unit="fraction",
            doc="Relative optimality gap at which a plan with yes/no decisions is accepted (0.0001 = 0.01 %)."),
    Setting("max_open_depots", NUMBER, None, minimum=0, unit="depots",
            doc="Most depots the plan may use (status open or decide). Blank means no limit."),
    Setting("max_open_hubs", NUMBER, None, minimum=0, unit="hubs",
            doc="Most hubs the plan may use (status open or decide). Blank means no limit."),
    Setting("single_source", FLAG, False,
            doc="yes or no (default no): whether customers whose own single_source is blank are served by exactly "
                "one inbound lane."),
    Setting("solver", CHOICE, "auto", choices=("auto", "cbc", "highs"),
            doc="auto (default: the engine that fits the model, named on LS Summary), cbc (bundled with PuLP) or "
                "highs (HiGHS through highspy). The command line option --solver overrides it."),
    Setting("rate_per_distance", NUMBER, None, minimum=0, unit="currency per unit per distance unit",
            doc="Transport rate used for lanes whose cost_per_unit is blank: cost = rate x distance. Blank means "
                "every lane needs its cost_per_unit."),
    Setting("distance_unit", CHOICE, "km", choices=("km", "mi"),
            doc="km (default) or mi (international mile, 1.609344 km): the unit of the Lanes distance column and "
                "of rate_per_distance."),
    Setting("circuity_factor", NUMBER, 1.2, minimum=1, unit="ratio",
            doc="Road distance over great-circle distance, applied only to distances computed from coordinates, "
                "never to a distance typed in. Default 1.2: around 1.2 is common practice (a value recalled from "
                "memory); measure it on your own lanes when you can."),
    Setting("lanes_file", TEXT, None,
            doc="A CSV (.csv) or Parquet (.parquet) file with the Lanes columns, read in addition to the Lanes "
                "sheet (which may then be empty or absent). The path is relative to the workbook's folder. "
                "Parquet needs pyarrow: pip install \"lanesolve[parquet]\"."),
    Setting("units", TEXT, "units", doc="Label for quantities in the results (pallets, tonnes, cases)."),
    Setting("currency", TEXT, "", doc="Label for money in the results (EUR, USD)."),
)

INPUT_SHEETS = (DEPOTS, CUSTOMERS, HUBS, LANES, SETTINGS)
NODE_SHEETS = (DEPOTS, CUSTOMERS, HUBS)

#: Result sheets written back start with this prefix; a rerun replaces every sheet that carries it.
RESULT_PREFIX = "LS "

YES = frozenset({"yes", "y", "true", "1", "x", "on"})
NO = frozenset({"no", "n", "false", "0", "off"})


def normalize(header: object) -> str:
    """Normalise a header or setting name: trim, lower-case, and treat spaces (and hyphens) like underscores.

    >>> normalize("  Cost per Unit ")
    'cost_per_unit'
    """
    text = "" if header is None else str(header)
    return "_".join(text.strip().lower().replace("-", " ").replace("_", " ").split())


def sheet_by_name(name: str) -> Sheet:
    """The contract sheet whose normalised name equals ``normalize(name)``."""
    for sheet in INPUT_SHEETS:
        if normalize(sheet.name) == normalize(name):
            return sheet
    raise KeyError(name)


def setting_by_name(name: str) -> Setting:
    for setting in SETTINGS_ROWS:
        if setting.name == normalize(name):
            return setting
    raise KeyError(name)
