"""The workbook contract: which sheets and columns lanesolve reads, their types, units and defaults.

This module is the single source for the reader, the validator, the blank template (its guidance sheet and header
comments) and the workbook reference in README.md (a test checks that every column here is documented there).

Header matching ignores case and surrounding spaces and treats a space like an underscore (see :func:`normalize`).
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
import unicodedata
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
    #: Why a scenario may not change this setting (empty: it may). See :mod:`lanesolve.model.scenarios`.
    fixed_for_scenarios: str = ""


#: Node statuses (Depots and Hubs ``status`` column). Blank means ``decide`` when a fixed cost is given, else ``open``.
NODE_STATUSES = ("open", "closed", "decide")


def _node_design(kind: str) -> tuple[Column, ...]:
    """The design columns shared by Depots and Hubs: a fixed charge for using the node and its status."""
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
        Column("emission_per_tonne", NUMBER, default=0.0, minimum=0, unit="kg CO2e per tonne",
               doc="Emissions of handling one tonne at the hub (hub operations count under ISO 14083). Blank "
                   "means 0."),
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
        Column("carrier", TEXT, default="",
               doc="Optional id of the carrier that runs the lane, as on the Carriers sheet. Its commitments count "
                   "the units on all its lanes."),
        Column("minimum_charge", NUMBER, default=0.0, minimum=0, unit="currency",
               doc="If the lane is used, its variable cost is at least this (a tariff's minimum charge per lane). "
                   "Blank means 0."),
        Column("products", TEXT, default="",
               doc="Products the lane may carry: ids from the Products sheet, separated by commas. Blank means "
                   "every product."),
        Column("emission_factor", NUMBER, minimum=0, unit="kg CO2e per tonne-km",
               doc="Well-to-wheel emission intensity of this lane; overrides its mode's factor on the Modes sheet. "
                   "Carrier-specific figures are preferred (ISO 14083)."),
    ),
)

PRODUCTS = Sheet(
    "Products",
    required=False,
    id_column="product",
    doc="Optional. The products that share the network's lanes, hubs and trucks. Without it the network carries "
        "one product.",
    columns=(
        Column("product", ID, required=True, doc="Unique id of the product (text)."),
        Column("weight_per_unit", NUMBER, minimum=0, unit="tonnes per unit",
               doc="Weight of one unit, for emissions. Blank takes the Settings tonnes_per_unit."),
        Column("capacity_use", NUMBER, default=1.0, minimum=0, unit="capacity units per unit",
               doc="Capacity one unit takes on lanes, hubs and trips (a pallet of light goods 1, of bulky goods "
                   "2). Lane and hub capacities, trip capacities, minimum volumes and lane costs count in these "
                   "capacity units. Blank means 1."),
    ),
)

SUPPLY = Sheet(
    "Supply",
    required=False,
    doc="Optional (needs Products). What each depot can ship of each product. With it, Depots supply is an overall "
        "cap across products (blank: no overall cap), and a depot ships only the products listed here for it.",
    columns=(
        Column("depot", ID, required=True, doc="Id of a depot on the Depots sheet."),
        Column("product", ID, required=True, doc="Id of a product on the Products sheet."),
        Column("supply", NUMBER, required=True, minimum=0, unit="units",
               doc="Most units of the product the depot can ship in the period (net of what it receives)."),
    ),
)

DEMAND = Sheet(
    "Demand",
    required=False,
    doc="Optional (needs Products). What each customer needs of each product. With it, Customers demand must be "
        "blank.",
    columns=(
        Column("customer", ID, required=True, doc="Id of a customer on the Customers sheet."),
        Column("product", ID, required=True, doc="Id of a product on the Products sheet."),
        Column("demand", NUMBER, required=True, minimum=0, unit="units",
               doc="Units of the product to deliver in the period."),
        Column("unmet_penalty", NUMBER, minimum=0, unit="currency per unit",
               doc="Cost per unit of this product not delivered. Blank takes the customer's unmet_penalty, then "
                   "the Settings one; with none the demand is a hard requirement."),
    ),
)

MODES = Sheet(
    "Modes",
    required=False,
    id_column="mode",
    doc="Optional. Emission factors per transport mode (the Lanes mode label). Defaults are averages: ISO 14083 "
        "prefers carrier-specific data, so replace them where you have it.",
    columns=(
        Column("mode", ID, required=True, doc="A mode label as written in the Lanes mode column (case ignored)."),
        Column("emission_factor", NUMBER, minimum=0, unit="kg CO2e per tonne-km",
               doc="Well-to-wheel emission intensity of the mode. Blank: lanes of this mode emit 'unknown' unless "
                   "they have their own factor."),
        Column("source", TEXT, default="",
               doc="Where the factor comes from: publication, table and version. Required when a factor is given."),
    ),
)

#: Rate-break kinds (Rate breaks ``kind``): the new rate applies to the units above the break, or to every unit.
BREAK_KINDS = ("incremental", "all_units")

CARRIERS = Sheet(
    "Carriers",
    required=False,
    id_column="carrier",
    doc="Optional. Commitments of an award: per carrier the least and most units across all its lanes, and the "
        "largest share of all units delivered.",
    columns=(
        Column("carrier", ID, required=True, doc="Id of the carrier, as written in the Lanes column carrier."),
        Column("min_volume", NUMBER, minimum=0, unit="units",
               doc="Least units the carrier's lanes carry together in the period. Blank means no minimum."),
        Column("max_volume", NUMBER, minimum=0, unit="units",
               doc="Most units the carrier's lanes carry together in the period. Blank means no maximum."),
        Column("max_share", NUMBER, minimum=0, maximum=1, unit="fraction",
               doc="Largest fraction (0 to 1) of all units delivered to customers that the carrier's lanes may "
                   "carry. Blank means no limit."),
    ),
)

RATE_BREAKS = Sheet(
    "Rate breaks",
    required=False,
    doc="Optional. Volume tariffs: from a volume on, a lane costs a different rate per unit.",
    columns=(
        Column("origin", ID, required=True, doc="Origin of the lane, as on the Lanes sheet."),
        Column("destination", ID, required=True, doc="Destination of the lane, as on the Lanes sheet."),
        Column("mode", TEXT, default="", doc="Mode of the lane, as on the Lanes sheet (blank for a lane with none)."),
        Column("from_volume", NUMBER, required=True, minimum=0, unit="units",
               doc="Volume (more than 0) from which cost_per_unit applies. The lane's own cost_per_unit applies "
                   "from 0 to its first break."),
        Column("cost_per_unit", NUMBER, required=True, minimum=0, unit="currency per unit",
               doc="The rate from from_volume on."),
        Column("kind", CHOICE, required=True, choices=BREAK_KINDS,
               doc="incremental: the rate applies to the units above from_volume; all_units: it applies to every "
                   "unit once the lane carries at least from_volume. All rows of one lane share one kind."),
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

#: Why a scenario cannot change the settings that turn distances into lane costs.
_COSTS_READ_ONCE = ("lane costs from distance are worked out once, when the workbook is read; change the Lanes "
                    "column cost_per_unit instead (match * to scale every lane)")

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
                "one inbound lane.",
            fixed_for_scenarios="each customer whose single_source is blank takes this setting when the workbook is "
                                "read; change the Customers column single_source instead"),
    Setting("solver", CHOICE, "auto", choices=("auto", "cbc", "highs"),
            doc="auto (default: the engine that fits the model, named on LS Summary), cbc (bundled with PuLP) or "
                "highs (HiGHS through highspy). The command line option --solver overrides it."),
    Setting("rate_per_distance", NUMBER, None, minimum=0, unit="currency per unit per distance unit",
            doc="Transport rate used for lanes whose cost_per_unit is blank: cost = rate x distance. Blank means "
                "every lane needs its cost_per_unit.",
            fixed_for_scenarios=_COSTS_READ_ONCE),
    Setting("distance_unit", CHOICE, "km", choices=("km", "mi"),
            doc="km (default) or mi (international mile, 1.609344 km): the unit of the Lanes distance column and "
                "of rate_per_distance.",
            fixed_for_scenarios=_COSTS_READ_ONCE),
    Setting("circuity_factor", NUMBER, 1.2, minimum=1, unit="ratio",
            doc="Road distance over great-circle distance, applied only to distances computed from coordinates, "
                "never to a distance typed in. Default 1.2: around 1.2 is common practice (a value recalled from "
                "memory); measure it on your own lanes when you can.",
            fixed_for_scenarios=_COSTS_READ_ONCE),
    Setting("lanes_file", TEXT, None,
            doc="A CSV (.csv) or Parquet (.parquet) file with the Lanes columns, read in addition to the Lanes "
                "sheet (which may then be empty or absent). The path is relative to the workbook's folder. "
                "Parquet needs pyarrow: pip install \"lanesolve[parquet]\".",
            fixed_for_scenarios="the lanes are read once, with the workbook; change rows of Lanes instead"),
    Setting("tonnes_per_unit", NUMBER, None, minimum=0, unit="tonnes per unit",
            doc="Weight of one unit, for emissions: of every unit without a Products sheet, else of products whose "
                "weight_per_unit is blank.",
            fixed_for_scenarios="weights are read once, with the workbook"),
    Setting("carbon_price", NUMBER, None, minimum=0, unit="currency per tonne CO2e",
            doc="Price put on each tonne CO2e the plan emits; added to the total cost as the component carbon. "
                "Blank means no price."),
    Setting("emissions_cap", NUMBER, None, minimum=0, unit="tonnes CO2e",
            doc="Most the whole plan may emit (lanes and hubs). Blank means no cap."),
    Setting("units", TEXT, "units", doc="Label for quantities in the results (pallets, tonnes, cases).",
            fixed_for_scenarios="every scenario is compared in the workbook's own units"),
    Setting("currency", TEXT, "", doc="Label for money in the results (EUR, USD).",
            fixed_for_scenarios="every scenario is compared in the workbook's own currency"),
)

INPUT_SHEETS = (DEPOTS, CUSTOMERS, HUBS, LANES, CARRIERS, RATE_BREAKS, SETTINGS, PRODUCTS, SUPPLY, DEMAND, MODES)
#: The sheets of several products and of emissions (read by :mod:`lanesolve.read.product_sheets`).
GOODS_SHEETS = (PRODUCTS, SUPPLY, DEMAND, MODES)
NODE_SHEETS = (DEPOTS, CUSTOMERS, HUBS)
#: The optional what-if sheet (its columns are read by :mod:`lanesolve.model.scenarios`).
SCENARIOS_SHEET = "Scenarios"

#: Result sheets written back start with this prefix; a rerun replaces every sheet that carries it.
RESULT_PREFIX = "LS "

YES = frozenset({"yes", "y", "true", "1", "x", "on"})
NO = frozenset({"no", "n", "false", "0", "off"})


#: Other names planners give a column, as :func:`header_key` writes them. A header that reads as one of them is not
#: taken as the column: it is reported (see :func:`resemblance`), so the planner confirms the meaning by renaming it.
SYNONYMS: dict[str, tuple[str, ...]] = {
    "depot": ("depot_id", "depot_name", "warehouse", "plant"),
    "customer": ("customer_id", "customer_name", "client", "delivery_zone"),
    "hub": ("hub_id", "hub_name", "cross_dock", "crossdock"),
    "supply": ("available", "availability", "max_supply", "stock", "supply_qty"),
    "demand": ("quantity", "qty", "demand_qty", "required", "requirement", "need", "order_qty"),
    "handling_cost": ("handling", "handling_rate", "handling_cost_per_unit"),
    "unmet_penalty": ("penalty", "shortage_penalty", "shortfall_penalty", "unmet_cost", "penalty_per_unit"),
    "single_source": ("sole_source", "single_sourcing", "one_source"),
    "origin": ("from", "source", "orig", "from_id", "origin_id", "ship_from"),
    "destination": ("to", "dest", "destination_id", "to_id", "ship_to"),
    "cost_per_unit": ("unit_cost", "cost_unit", "rate", "unit_rate", "rate_per_unit", "cost", "price", "unit_price",
                      "price_per_unit", "freight_rate",
                      "cost_each", "cost_per_pallet", "cost_per_tonne", "cost_per_ton", "cost_per_case",
                      "transport_cost", "lane_cost"),
    "mode": ("transport_mode", "mode_of_transport"),
    "capacity": ("cap", "max", "max_volume", "max_capacity", "limit", "capacity_limit", "max_qty"),
    "fixed_cost": ("fixed_charge", "fixed", "fixed_fee", "fixed_costs"),
    "min_volume": ("minimum_volume", "min_qty", "minimum", "min", "min_vol"),
    "trip_capacity": ("truck_capacity", "truckload", "vehicle_capacity", "load_capacity", "trip_cap",
                      "capacity_per_trip", "units_per_trip"),
    "cost_per_trip": ("trip_cost", "cost_trip", "truck_cost", "cost_per_truck", "cost_per_load"),
    "distance": ("dist", "km", "miles", "length", "road_distance"),
    "active": ("enabled", "in_use", "use", "used", "is_active"),
    "status": ("state", "open_close", "open"),
    "latitude": ("lat",),
    "longitude": ("lon", "lng", "long"),
    "setting": ("name", "parameter", "key"),
    "value": ("setting_value",),
}
#: How alike (difflib ratio of the two names with separators removed) a header and a column name must be for the
#: header to count as a misspelling of the column. "capcity" and "capacity" score 0.93, "distance_km" and
#: "distance" 0.89, "notes" and "mode" 0.44.
RESEMBLANCE_CUTOFF = 0.8
_BRACKETED = re.compile(r"\([^)]*\)|\[[^\]]*\]|\{[^}]*\}")
_NOT_WORD = re.compile(r"[^0-9a-z]+")


def header_key(header: object) -> str:
    """A header reduced to its words, for telling what it probably means (never for reading it).

    Looser than :func:`normalize`: Unicode compatibility forms folded (NFKC), text in brackets dropped (units such as
    ``(pallets)`` or ``[EUR]``), every run of punctuation -- ``?``, ``/``, ``.``, ``#`` -- made one underscore.

    >>> header_key("Capacity (pallets)"), header_key("Active?"), header_key("Cost/unit")
    ('capacity', 'active', 'cost_unit')
    """
    text = unicodedata.normalize("NFKC", "" if header is None else str(header)).casefold()
    return _NOT_WORD.sub("_", _BRACKETED.sub(" ", text)).strip("_")


def resemblance(header: object, name: str) -> float:
    """How strongly a header that is not ``name`` looks like the column (or sheet) ``name``: 0 (not at all) to 1.

    1 when the header's words are the name's or one of its :data:`SYNONYMS`, separators aside; otherwise the
    difflib ratio of the two with separators removed when it reaches :data:`RESEMBLANCE_CUTOFF`, else 0.

    >>> resemblance("Unit cost", "cost_per_unit"), resemblance("capcity", "capacity") > 0.9
    (1.0, True)
    >>> resemblance("notes", "mode")
    0.0
    """
    words = header_key(header).replace("_", "")
    if not words:
        return 0.0
    if any(words == candidate.replace("_", "") for candidate in (name, *SYNONYMS.get(name, ()))):
        return 1.0
    ratio = difflib.SequenceMatcher(None, words, name.replace("_", "")).ratio()
    return ratio if ratio >= RESEMBLANCE_CUTOFF else 0.0


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


def is_read_sheet(name: str) -> bool:
    """Whether the reader loads the sheet of this name: an input sheet or Scenarios, by :func:`normalize`.

    >>> is_read_sheet(" lanes"), is_read_sheet("Notes")
    (True, False)
    """
    key = normalize(name)
    return key == normalize(SCENARIOS_SHEET) or any(key == normalize(sheet.name) for sheet in INPUT_SHEETS)


# ----------------------------------------------------------------------------------------------------------------
# numbers typed as text, and the magnitudes the solver can work with

#: Largest magnitude of a number lanesolve accepts (costs, quantities, capacities, penalties, settings). CBC and
#: HiGHS work in double precision with feasibility tolerances around 1e-7 to 1e-9 of the numbers in a row, so
#: beyond 1e12 a unit of flow or money is no longer told apart reliably (common practice: keep LP coefficients
#: within about twelve orders of magnitude; the bound is stated, not derived).
MAX_MAGNITUDE = 1e12
#: Smallest non-zero magnitude accepted: below it a value is indistinguishable from the solvers' zero tolerance.
MIN_MAGNITUDE = 1e-9
#: Longest text a spreadsheet cell can hold (32,767 characters); a longer id did not come from a cell.
MAX_ID_LENGTH = 32_767

#: Text in which a point may separate thousands (1.200 is 1200 in many locales) as well as decimals (1.2).
AMBIGUOUS_POINT = re.compile(r"[+-]?[1-9][0-9]{0,2}\.[0-9]{3}")
#: Number-like text with a comma, which may be a decimal comma (1,5) or a thousands comma (1,200).
NUMBER_WITH_COMMA = re.compile(r"[+-]?[0-9.,]*[0-9],[0-9][0-9.,]*")
#: Number-like text with several points (1.200.000): thousands points, never a decimal.
NUMBER_WITH_POINTS = re.compile(r"[+-]?[0-9]+(\.[0-9]+){2,}")
PLAIN_NUMBER_HINT = "type a plain number: a point for decimals and no thousands separators (1200, 1.2)"


def ambiguous_number_text(text: str) -> str | None:
    """Why number-like text cannot be read without guessing the separators, or None when it can.

    >>> ambiguous_number_text("1.200")
    "'1.200' is ambiguous: 1.2 with a decimal point, or 1200 with a thousands point"
    >>> ambiguous_number_text("1,5")
    "'1,5' is ambiguous: 1.5 with a decimal comma, or 15 with a thousands comma"
    >>> ambiguous_number_text("12.5") is None, ambiguous_number_text("0.500") is None
    (True, True)
    """
    text = text.strip()
    if AMBIGUOUS_POINT.fullmatch(text):
        return (f"'{text}' is ambiguous: {_plain(float(text))} with a decimal point, or "
                f"{_plain(float(text.replace('.', '')))} with a thousands point")
    if NUMBER_WITH_COMMA.fullmatch(text):
        if text.count(",") == 1 and "." not in text:
            return (f"'{text}' is ambiguous: {_plain(float(text.replace(',', '.')))} with a decimal comma, or "
                    f"{_plain(float(text.replace(',', '')))} with a thousands comma")
        return f"'{text}' is ambiguous: its commas and points may separate decimals or thousands"
    if NUMBER_WITH_POINTS.fullmatch(text):
        return f"'{text}' has thousands points; lanesolve does not guess separators"
    return None


def _plain(number: float) -> str:
    return str(int(number)) if number.is_integer() else repr(number)


def number_from_text(text: str) -> float:
    """A number typed as text, as Python reads it; ValueError (saying why) for text that is not one or is ambiguous.

    >>> number_from_text(" 12.5 ")
    12.5
    >>> number_from_text("1,200")
    Traceback (most recent call last):
    ...
    ValueError: '1,200' is ambiguous: 1.2 with a decimal comma, or 1200 with a thousands comma
    """
    why = ambiguous_number_text(text)
    if why is not None:
        raise ValueError(why)
    return float(text.strip())


def magnitude_problem(number: float) -> str | None:
    """Why a number is outside what lanesolve accepts (not finite, beyond :data:`MAX_MAGNITUDE`, or not zero but
    nearer zero than :data:`MIN_MAGNITUDE`), or None.

    >>> magnitude_problem(2e12), magnitude_problem(0.0), magnitude_problem(-3.5)
    ('its size is beyond 1e+12, the most lanesolve accepts', None, None)
    """
    size = abs(number)
    if not math.isfinite(size):
        return "it is not a finite number"
    if size > MAX_MAGNITUDE:
        return f"its size is beyond {MAX_MAGNITUDE:.0e}, the most lanesolve accepts"
    if 0 < size < MIN_MAGNITUDE:
        return f"it is nearer zero than {MIN_MAGNITUDE:.0e}, the least non-zero size lanesolve accepts"
    return None


# ----------------------------------------------------------------------------------------------------------------
# setting values (the Settings sheet and Scenarios rows on Settings share these rules)


def show_cell(value) -> str:
    """A cell value as a planner would recognise it in a message.

    >>> show_cell(3.0), show_cell("3"), show_cell(True), show_cell(float("nan"))
    ('3', "'3'", 'TRUE', 'NaN')
    """
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        return str(int(value))
    if isinstance(value, float) and math.isnan(value):
        return "NaN"
    if isinstance(value, str):
        return f"'{value}'"
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, _dt.datetime):
        return value.isoformat(sep=" ")
    if isinstance(value, _dt.date):
        return value.isoformat()
    return str(value)


def blank_cell(cell) -> bool:
    """An empty cell: None or only spaces (a NaN is a value, not a blank)."""
    return cell is None or (isinstance(cell, str) and not cell.strip())


def setting_value(setting: Setting, cell) -> tuple[object, tuple[str, str] | None]:
    """The value a cell gives a setting, or the problem with it as ``(message, hint)``.

    A blank cell gives the setting's default. Number settings take numbers or number text (not ambiguous text,
    see :func:`ambiguous_number_text`), finite, at least the setting's minimum and within the magnitudes of
    :func:`magnitude_problem`; yes/no and choice settings take their words in any case.

    >>> setting_value(setting_by_name("solver"), "HiGHS")
    ('highs', None)
    >>> setting_value(setting_by_name("solver"), "gurobi")[1][0]
    "'gurobi' is not one of auto, cbc, highs for setting 'solver'"
    """
    if blank_cell(cell):
        return setting.default, None
    if setting.kind in (FLAG, CHOICE):
        word = (("yes" if cell else "no") if isinstance(cell, bool) else
                str(int(cell)) if isinstance(cell, float) and cell.is_integer() else str(cell).strip()).lower()
        if setting.kind == FLAG and (word in YES or word in NO):
            return word in YES, None
        if setting.kind == CHOICE and word in setting.choices:
            return word, None
        allowed = "yes or no" if setting.kind == FLAG else "one of " + ", ".join(setting.choices)
        return None, (f"{show_cell(cell)} is not {allowed} for setting '{setting.name}'",
                      f"write {allowed}, or leave it blank for the default")
    if setting.kind == TEXT:
        if isinstance(cell, float) and cell.is_integer():
            return str(int(cell)), None
        return (show_cell(cell).strip("'") if not isinstance(cell, str) else cell.strip()), None
    needs = f"setting '{setting.name}' needs a number{' (' + setting.unit + ')' if setting.unit else ''}"
    if isinstance(cell, bool) or isinstance(cell, (_dt.date, _dt.datetime, _dt.time, _dt.timedelta)):
        return None, (f"{show_cell(cell)} is not a number; {needs}", "enter a number in the cell")
    try:
        number = number_from_text(cell) if isinstance(cell, str) else float(cell)
    except (TypeError, ValueError):
        why = ambiguous_number_text(cell) if isinstance(cell, str) else None
        return None, (f"{why}; {needs}" if why else f"{show_cell(cell)} is not a number; {needs}",
                      PLAIN_NUMBER_HINT if why else
                      "enter a number with a point for decimals, or leave it blank for the default")
    if not math.isfinite(number):
        return None, (f"{show_cell(cell)} is not a finite number",
                      f"enter an ordinary number for '{setting.name}', or leave it blank for the default")
    if setting.minimum is not None and number < setting.minimum:
        low = "is negative" if number < 0 else "is too small"  # circuity_factor's minimum is 1, not 0
        return None, (f"{show_cell(cell)} {low}; '{setting.name}' must be {show_cell(float(setting.minimum))} or more",
                      "enter 0 or a positive number" if setting.minimum == 0 else
                      f"enter {show_cell(float(setting.minimum))} or more")
    size = magnitude_problem(number)
    if size is not None:
        return None, (f"{show_cell(cell)}: {size}", f"enter '{setting.name}' between {MIN_MAGNITUDE:.0e} and "
                      f"{MAX_MAGNITUDE:.0e} in size, or 0")
    return number, None
