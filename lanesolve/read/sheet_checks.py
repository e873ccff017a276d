"""Checks across records: node ids within and across sheets, lane ends, duplicate lanes, the lane design
columns, lane costs (given, or from distance) and the extra lanes of a lanes file."""

from __future__ import annotations

import difflib
import math

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.read import geo
from lanesolve.read import lanes_file
from lanesolve.errors import WorkbookError
from lanesolve.model.network import LANE_SOURCE_COLUMNS, Settings
from lanesolve.read.findings import Findings, did_you_mean, header_text, show
from lanesolve.read.reader import RawSheet
from lanesolve.read.sheets import Table, concat_tables, read_table

_NODE_KIND = {contract.DEPOTS.name: "depot", contract.CUSTOMERS.name: "customer", contract.HUBS.name: "hub"}
#: How many candidate comparisons did-you-mean for ids may spend in one validation; beyond it only exact
#: case-insensitive matches are suggested, so a workbook with thousands of unknown ids still validates quickly.
_SUGGEST_BUDGET = 2_000_000


def check_node_ids(tables: dict[str, Table], found: Findings) -> set[str] | None:
    """Report duplicate ids within and across node sheets; return every node id, or None if a sheet is unreadable."""
    seen_frames = []
    for spec in contract.NODE_SHEETS:
        table = tables[spec.name]
        if table.values.get(spec.id_column) is None:
            continue
        ids = table.values[spec.id_column]
        usable = ~table.invalid[spec.id_column]
        frame = pd.DataFrame({"id": ids[usable].to_numpy(), "row": table.rows[usable], "pos": np.flatnonzero(usable)})
        dup = frame["id"].duplicated(keep="first").to_numpy()
        if dup.any():
            first_row = frame.drop_duplicates("id").set_index("id")["row"]
            label = table.column_label(spec.id_column)
            for record in frame[dup].itertuples(index=False):
                found.add(table.sheet_name, record.row, label, record.id,
                          f"{spec.id_column} '{record.id}' is already used in row {first_row[record.id]}",
                          f"give each {spec.id_column} its own id, or delete the repeated row")
                table.invalid[spec.id_column][record.pos] = True
        frame = frame[~dup].assign(sheet=spec.name)
        seen_frames.append(frame)

    if seen_frames:
        everything = pd.concat(seen_frames, ignore_index=True)
        twice = everything["id"].duplicated(keep="first").to_numpy()
        if twice.any():
            first = everything.drop_duplicates("id").set_index("id")
            for record in everything[twice].itertuples(index=False):
                other_sheet = tables[first.loc[record.id, "sheet"]]
                spec = tables[record.sheet].spec
                table = tables[record.sheet]
                found.add(table.sheet_name, record.row, table.column_label(spec.id_column), record.id,
                          f"id '{record.id}' is also a {_NODE_KIND[other_sheet.spec.name]} "
                          f"({other_sheet.sheet_name} row {first.loc[record.id, 'row']}); ids must be unique "
                          f"across Depots, Customers and Hubs",
                          "rename one of them: lanes name places by id")
                table.invalid[spec.id_column][record.pos] = True
        node_ids = set(everything["id"].tolist())
    else:
        node_ids = set()
    if not all(tables[spec.name].complete for spec in contract.NODE_SHEETS):
        return None  # some ids could not be read: unknown-id errors on lanes would be noise
    return node_ids


def check_lanes(lanes: Table, node_ids: set[str] | None, found: Findings) -> None:
    if lanes.sheet_name is None or len(lanes) == 0:
        return
    origin, destination = lanes.values.get("origin"), lanes.values.get("destination")
    if origin is None or destination is None:
        return
    ok_origin, ok_destination = ~lanes.invalid["origin"], ~lanes.invalid["destination"]
    # Lane ends and modes are text (the parsers write "" for a blank cell). Both ends are factorized together once:
    # the node-id, loop and duplicate checks then look each distinct id up once and compare integer codes, instead
    # of hashing and comparing the strings column by column (about 0.5 s at a million lanes).
    codes, distinct = pd.factorize(np.concatenate([origin.to_numpy(dtype=object), destination.to_numpy(dtype=object)]),
                                   use_na_sentinel=False)
    origin_code, destination_code = codes[:len(lanes)], codes[len(lanes):]
    if node_ids is not None:
        is_node = pd.Series(distinct, dtype=object).isin(node_ids).to_numpy()
        suggest = None
        for name, values, code, ok in (("origin", origin, origin_code, ok_origin),
                                       ("destination", destination, destination_code, ok_destination)):
            unknown = ok & ~is_node[code]
            for pos in np.flatnonzero(unknown):
                value = values.iloc[pos]
                if suggest is None:  # built only when an id is unknown: it sorts every node id
                    suggest = IdSuggester(node_ids)
                near = suggest(value)
                found.add(*lanes.where(pos, name), value,
                          f"'{value}' is not a depot, hub or customer",
                          f"did you mean '{near}'?" if near else
                          "add it to Depots, Customers or Hubs, or correct the id")
            lanes.invalid[name] |= unknown
            ok &= ~unknown
    both = ok_origin & ok_destination
    loop = both & (origin_code == destination_code)
    for pos in np.flatnonzero(loop):
        found.add(*lanes.where(pos, "origin"), origin.iloc[pos],
                  f"origin and destination are both '{origin.iloc[pos]}'",
                  "a lane joins two different places: correct one end or delete the row")
    mode = lanes.values.get("mode")
    mode = mode if mode is not None else pd.Series("", index=origin.index, dtype=object)
    checked = both & ~loop
    keys = pd.DataFrame({"origin": origin_code[checked], "destination": destination_code[checked],
                         "mode": pd.factorize(mode.to_numpy(dtype=object))[0][checked]})
    dup = keys.duplicated(keep="first").to_numpy()
    if dup.any():
        keyed = pd.DataFrame({"origin": origin, "destination": destination, "mode": mode, "row": lanes.rows,
                              "pos": np.arange(len(lanes)), "sheet": lanes.sheet_names()})[checked]
        first = keyed.drop_duplicates(["origin", "destination", "mode"]).set_index(["origin", "destination", "mode"])
        for record in keyed[dup].itertuples(index=False):
            mode_text = f" with mode '{record.mode}'" if record.mode else " with no mode"
            earlier = first.loc[(record.origin, record.destination, record.mode)]
            # Across the Lanes sheet and the lanes file, name both places; within one, the row is enough.
            place = f"row {earlier['row']}" if earlier["sheet"] == record.sheet else \
                f"{earlier['sheet']} row {earlier['row']}"
            found.add(*lanes.where(record.pos, "origin"),
                      f"{record.origin} -> {record.destination}",
                      f"lane {record.origin} -> {record.destination}{mode_text} already appears in {place}",
                      "merge the two rows, or give them different modes")


def check_lane_design(lanes: Table, found: Findings) -> None:
    """Lane columns that only make sense together: min_volume within capacity, whole trips of a
    positive size, and a cost per trip only with a trip capacity."""
    if lanes.sheet_name is None or len(lanes) == 0:
        return
    values, invalid = lanes.values, lanes.invalid

    def usable(name):
        series = values.get(name)
        if series is None:
            return None, np.zeros(len(lanes), dtype=bool)
        return series.to_numpy(dtype=float), ~invalid[name]

    minimum, ok_min = usable("min_volume")
    capacity, ok_cap = usable("capacity")
    trip_cap, ok_trip = usable("trip_capacity")
    trip_cost, ok_cost = usable("cost_per_trip")
    if minimum is not None and capacity is not None:
        for pos in np.flatnonzero(ok_min & ok_cap & (minimum > capacity)):
            found.add(*lanes.where(pos, "min_volume"), float(minimum[pos]),
                      f"min_volume {show(float(minimum[pos]))} is more than the lane's capacity "
                      f"{show(float(capacity[pos]))}, so the lane could never be used",
                      "lower min_volume or raise capacity")
    if trip_cap is not None:
        for pos in np.flatnonzero(ok_trip & (trip_cap <= 0)):
            found.add(*lanes.where(pos, "trip_capacity"), float(trip_cap[pos]),
                      "trip_capacity is 0, so no trip could carry anything",
                      "enter the units one trip carries, or leave it blank if the lane is not run in trips")
    if trip_cost is not None:
        no_trips = ~np.isfinite(trip_cap) if trip_cap is not None else np.ones(len(lanes), dtype=bool)
        for pos in np.flatnonzero(ok_cost & (trip_cost > 0) & no_trips & (ok_trip if trip_cap is not None else True)):
            found.add(*lanes.where(pos, "cost_per_trip"), float(trip_cost[pos]),
                      "cost_per_trip is given but trip_capacity is blank",
                      "enter trip_capacity (units per trip), or clear cost_per_trip")


def check_lane_costs(lanes: Table, settings: Settings, found: Findings) -> None:
    """Without Settings rate_per_distance every lane needs its cost_per_unit: name each blank one (the column
    itself missing is reported by :func:`require_cost_column`)."""
    cost = lanes.values.get("cost_per_unit")
    if settings.rate_per_distance is not None or cost is None or len(lanes) == 0:
        return
    blank = np.isnan(cost.to_numpy(dtype=float)) & ~lanes.invalid["cost_per_unit"]
    for pos in np.flatnonzero(blank):
        found.add(*lanes.where(pos, "cost_per_unit"), None, "cost_per_unit is blank",
                  "fill in cost_per_unit (currency per unit), or add a Settings row rate_per_distance so blank "
                  "costs are computed from distance")


def require_cost_column(table: Table, settings: Settings, found: Findings) -> None:
    """cost_per_unit is optional in the contract only because a rate can stand in for it: without
    rate_per_distance a lanes sheet or file lacking the column is an error, as for any required column."""
    if table.sheet_name is None or table.values.get("cost_per_unit") is not None or \
            settings.rate_per_distance is not None:
        return
    if "cost_per_unit" in table.resembled:  # a look-alike header is already reported at its cell
        table.complete = False
        return
    unmatched = {contract.normalize(h): header_text(h) for h in table.raw_header
                 if contract.normalize(h) and contract.normalize(h) not in {c.name for c in table.spec.columns}}
    near = did_you_mean("cost_per_unit", unmatched, cutoff=0.75)
    found.add(table.sheet_name, 1, "cost_per_unit", None, "required column 'cost_per_unit' is missing",
              f"did you mean '{near}'? Rename that header to 'cost_per_unit'" if near else
              "add a column headed 'cost_per_unit' in row 1, or add a Settings row rate_per_distance so costs are "
              "computed from distance")
    table.complete = False


def costs_from_distance(frames: dict[str, pd.DataFrame], table: Table, settings: Settings,
                         found: Findings) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Fill blank lane costs from distance (:func:`lanesolve.read.geo.lane_costs_from_distance`, vectorised) for the
    lanes whose cells are otherwise usable; problems (a node without coordinates) join ``found``.

    Returns the lanes frame and its :attr:`~lanesolve.model.network.Network.lane_sources`."""
    lanes = frames[contract.LANES.name]
    distance = table.values.get("distance")
    # (With no lanes, the sheet names stay an empty object column, which pandas does not retype as text.)
    sheets = table.sheet_names() if table.sources is not None or len(lanes) == 0 else \
        _repeated(table.sheet_name or table.spec.name, lanes.index)
    sources = pd.DataFrame({
        "distance": (distance.to_numpy(dtype=float) if distance is not None else np.full(len(lanes), math.nan)),
        "cost_source": _repeated(geo.COST_GIVEN, lanes.index), "sheet": sheets}, index=lanes.index)[LANE_SOURCE_COLUMNS]
    if settings.rate_per_distance is None or len(lanes) == 0:
        return lanes, sources
    usable = lanes["cost_per_unit"].isna().to_numpy().copy()
    for name in ("cost_per_unit", "origin", "destination", "distance"):
        if table.values.get(name) is not None:
            usable &= ~table.invalid[name]  # already reported: computing a cost from it would only add noise
    if not usable.any():
        return lanes, sources
    nodes = pd.concat([frames[name][["id", "latitude", "longitude"]]
                       for name in (contract.DEPOTS.name, contract.CUSTOMERS.name, contract.HUBS.name)],
                      ignore_index=True).drop_duplicates("id")
    subset = pd.concat([lanes[["origin", "destination", "cost_per_unit", "row"]], sources[["distance", "sheet"]]],
                       axis=1)[usable]
    filled, problems = geo.lane_costs_from_distance(subset, nodes, float(settings.rate_per_distance),
                                                    settings.distance_unit, float(settings.circuity_factor))
    for problem in problems:
        found.add(problem.sheet, problem.row, problem.column, problem.value, problem.message, problem.hint,
                  problem.severity)
    lanes = lanes.copy()
    lanes.loc[usable, "cost_per_unit"] = filled["cost_per_unit"].to_numpy()
    sources.loc[usable, "distance"] = filled["distance"].to_numpy()
    sources.loc[usable, "cost_source"] = filled["cost_source"].to_numpy()
    return lanes, sources


def _repeated(text: str, index: pd.Index) -> pd.Series:
    """``text`` in every row, with the type pandas gives a column of text (Arrow text in pandas 3): one value taken
    ``len(index)`` times instead of as many Python strings converted one by one (0.1 s and 70 MB at a million
    lanes)."""
    return pd.Series(pd.Series([text]).array.take(np.zeros(len(index), dtype=np.intp)), index=index)


def with_lanes_file(sheet_table: Table, workbook_path: str, settings: Settings, found: Findings) -> Table:
    """The Lanes sheet's records followed by the lanes file's, checked by the same column parsers."""
    try:
        cells = lanes_file.read_lanes_file(workbook_path, settings.lanes_file)
    except WorkbookError as exc:
        found.extend(exc.problems)
        return sheet_table
    raw = RawSheet(cells.label, [cells.header])
    file_table = read_table(contract.LANES, raw, found, data=cells.data)
    require_cost_column(file_table, settings, found)
    if sheet_table.sheet_name is None:
        return file_table
    return concat_tables(sheet_table, file_table)


class IdSuggester:
    """Did-you-mean over node ids: an exact case-insensitive match first, then difflib within a budget."""

    def __init__(self, ids: set[str]):
        self.ids = sorted(ids)
        self.folded = {i.casefold(): i for i in self.ids}
        self.cache: dict[str, str | None] = {}
        self.spent = 0

    def __call__(self, value: str) -> str | None:
        if value in self.cache:
            return self.cache[value]
        near = self.folded.get(" ".join(value.split()).casefold())
        if near is None and self.spent + len(self.ids) <= _SUGGEST_BUDGET:
            self.spent += len(self.ids)
            close = difflib.get_close_matches(value, self.ids, n=1, cutoff=0.6)
            near = close[0] if close else None
        self.cache[value] = near
        return near

