"""Lane rates from distance through the whole pipeline: Settings rate_per_distance, distance_unit, circuity_factor and
the Lanes distance column.

References outside the project:

- geographiclib (C. F. F. Karney, "Algorithms for geodesics", Journal of Geodesy 87 (2013) 43-55):
  ``Geodesic.WGS84.Inverse`` is the WGS84 geodesic; a great circle on a sphere stays within 0.5 % of it (the stated
  bound), so a computed cost must be within 0.5 % of rate x geodesic x circuity.
- 1 international mile = 1.609344 km exactly, by definition (international yard and pound agreement, 1959).
- The equivalence check: a workbook whose blank costs come from distance must solve to the same total cost as the
  same workbook with those costs typed in (the model cannot tell them apart), compared with a tolerance.

Every place and company below is invented; coordinates are arbitrary points in the North Sea region.
"""

from __future__ import annotations

import copy

import openpyxl
import pytest

from lanesolve import pipeline
from lanesolve.read import validate
from lanesolve.write import writeback
from lanesolve.errors import WorkbookError
from lanesolve.read.reader import read_workbook

geodesic = pytest.importorskip("geographiclib.geodesic")

KM_PER_MILE = 1.609344  # exact, by definition (1959 agreement)

NODES = {  # id -> (latitude, longitude); invented places
    "Kelmor Works": (51.0, 0.0),
    "Tarsby Mill": (52.0, 1.0),
    "Ossel Cross": (51.5, 0.5),
    "Wenlow Stores": (50.5, 1.5),
    "Pryde Market": (52.5, -0.5),
}

SHEETS = {
    "Depots": [["depot", "supply", "latitude", "longitude"],
               ["Kelmor Works", 100, *NODES["Kelmor Works"]],
               ["Tarsby Mill", 80, *NODES["Tarsby Mill"]]],
    "Customers": [["customer", "demand", "latitude", "longitude"],
                  ["Wenlow Stores", 60, *NODES["Wenlow Stores"]],
                  ["Pryde Market", 70, *NODES["Pryde Market"]]],
    "Hubs": [["hub", "capacity", "latitude", "longitude"],
             ["Ossel Cross", 90, *NODES["Ossel Cross"]]],
    "Lanes": [["origin", "destination", "cost_per_unit", "distance", "capacity"],
              ["Kelmor Works", "Ossel Cross", None, None, None],    # row 2: great circle x circuity
              ["Tarsby Mill", "Ossel Cross", None, 95.0, None],     # row 3: given distance
              ["Ossel Cross", "Wenlow Stores", 9.0, None, None],    # row 4: given cost
              ["Ossel Cross", "Pryde Market", None, None, None],    # row 5: great circle x circuity
              ["Kelmor Works", "Wenlow Stores", None, None, 40],    # row 6: great circle x circuity
              ["Tarsby Mill", "Pryde Market", None, 70.0, None]],   # row 7: given distance
    "Settings": [["setting", "value"], ["rate_per_distance", 0.08], ["circuity_factor", 1.25]],
}


def sheets(**settings):
    """A copy of SHEETS with the given Settings rows replaced or added."""
    out = copy.deepcopy(SHEETS)
    rows = {row[0]: row for row in out["Settings"][1:]}
    for name, value in settings.items():
        if value is None:
            out["Settings"] = [r for r in out["Settings"] if r[0] != name]
        elif name in rows:
            rows[name][1] = value
        else:
            out["Settings"].append([name, value])
    return out


def load(path):
    return validate.validate(read_workbook(path))[0]


def geodesic_km(origin, destination):
    (lat1, lon1), (lat2, lon2) = NODES[origin], NODES[destination]
    return geodesic.Geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0


def test_blank_costs_solve_like_the_same_costs_typed_in(make_workbook):
    network = load(make_workbook(sheets(), "from_distance.xlsx"))
    lanes, sources = network.lanes, network.cost_sources()
    rate, circuity = 0.08, 1.25
    for i, lane in lanes.iterrows():
        row = int(lane["row"])
        if row == 4:
            assert sources.at[i, "cost_source"] == "given" and lane["cost_per_unit"] == pytest.approx(9.0, abs=1e-12)
        elif row in (3, 7):
            given = {3: 95.0, 7: 70.0}[row]
            assert sources.at[i, "cost_source"] == "rate x distance"
            # Circuity applies only to computed great-circle distances, never to a distance typed in.
            assert sources.at[i, "distance"] == pytest.approx(given, abs=1e-9)
            assert lane["cost_per_unit"] == pytest.approx(rate * given, rel=1e-12)
        else:
            reference = geodesic_km(lane["origin"], lane["destination"]) * circuity
            assert sources.at[i, "cost_source"] == "rate x great circle x circuity"
            assert sources.at[i, "distance"] == pytest.approx(reference, rel=0.005)  # geographiclib, 0.5 % bound
            assert lane["cost_per_unit"] == pytest.approx(rate * reference, rel=0.005)

    typed = sheets(rate_per_distance=None, circuity_factor=None)
    by_row = dict(zip(lanes["row"], lanes["cost_per_unit"]))
    for r, record in enumerate(typed["Lanes"][1:], start=2):
        record[2] = float(by_row[r])
    from_distance = pipeline.run(make_workbook(sheets(), "a.xlsx"), write=False).result
    typed_in = pipeline.run(make_workbook(typed, "b.xlsx"), write=False).result
    assert from_distance.status.value == "optimal" and typed_in.status.value == "optimal"
    assert from_distance.total_cost == pytest.approx(typed_in.total_cost, rel=1e-9)


def test_miles_and_kilometres_give_the_same_cost(make_workbook):
    km = load(make_workbook(sheets(), "km.xlsx"))
    # A rate per mile is the rate per km times 1.609344 (exact); given distances are in the unit too.
    mi_sheets = sheets(rate_per_distance=0.08 * KM_PER_MILE, distance_unit="mi")
    for record in mi_sheets["Lanes"][1:]:
        if record[3] is not None:
            record[3] = record[3] / KM_PER_MILE
    mi = load(make_workbook(mi_sheets, "mi.xlsx"))
    assert mi.lanes["cost_per_unit"].to_numpy() == pytest.approx(km.lanes["cost_per_unit"].to_numpy(), rel=1e-12)
    assert (mi.cost_sources()["distance"] * KM_PER_MILE).to_numpy() == pytest.approx(
        km.cost_sources()["distance"].to_numpy(), rel=1e-12, nan_ok=True)


def test_circuity_scales_only_computed_distances(make_workbook):
    low = load(make_workbook(sheets(circuity_factor=1.0), "low.xlsx"))
    high = load(make_workbook(sheets(circuity_factor=1.5), "high.xlsx"))
    ratio = high.lanes["cost_per_unit"] / low.lanes["cost_per_unit"]
    computed = low.cost_sources()["cost_source"] == "rate x great circle x circuity"
    assert computed.sum() == 3
    assert ratio[computed].to_numpy() == pytest.approx([1.5] * 3, rel=1e-12)
    assert ratio[~computed].to_numpy() == pytest.approx([1.0] * 3, rel=1e-12)


def test_default_circuity_is_one_point_two(make_workbook):
    default = load(make_workbook(sheets(circuity_factor=None), "default.xlsx"))
    assert default.settings.circuity_factor == pytest.approx(1.2, abs=1e-12)  # the contract default


def test_blank_cost_without_rate_names_each_row(make_workbook):
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets(rate_per_distance=None)))
    blank = [p for p in info.value.problems if p.column == "cost_per_unit"]
    assert [(p.sheet, p.row) for p in blank] == [("Lanes", r) for r in (2, 3, 5, 6, 7)]
    assert all("rate_per_distance" in p.hint and "cost_per_unit" in p.hint for p in blank)


def test_missing_cost_column_without_rate_is_a_missing_column(make_workbook):
    book = sheets(rate_per_distance=None)
    book["Lanes"] = [row[:2] + row[3:] for row in book["Lanes"]]
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(book))
    problem = next(p for p in info.value.problems if p.column == "cost_per_unit")
    assert (problem.sheet, problem.row) == ("Lanes", 1) and "missing" in problem.message


def test_missing_cost_column_with_rate_computes_every_cost(make_workbook):
    book = sheets()
    book["Lanes"] = [row[:2] + row[3:] for row in book["Lanes"]]
    network = load(make_workbook(book))
    assert set(network.cost_sources()["cost_source"]) == {"rate x distance", "rate x great circle x circuity"}
    assert network.lanes["cost_per_unit"].notna().all()


def test_missing_coordinates_name_the_row_and_the_node(make_workbook):
    book = sheets()
    book["Hubs"][1][2:] = [None, None]  # Ossel Cross loses its coordinates
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(book))
    problems = [p for p in info.value.problems if p.sheet == "Lanes"]
    # Rows 2 and 5 need Ossel Cross's position; row 3 has a distance, row 4 a cost, row 6 does not touch it.
    assert [p.row for p in problems] == [2, 5]
    assert "destination 'Ossel Cross'" in problems[0].message and "origin 'Ossel Cross'" in problems[1].message
    assert all("latitude" in p.hint for p in problems)


def test_negative_distance_is_an_error(make_workbook):
    book = sheets()
    book["Lanes"][2][3] = -5
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(book))
    problem = next(p for p in info.value.problems if p.column == "distance")
    assert (problem.sheet, problem.row, problem.value) == ("Lanes", 3, -5.0)


@pytest.mark.parametrize("name, value, words", [("circuity_factor", 0.9, "1 or more"),
                                                 ("distance_unit", "leagues", "km, mi"),
                                                 ("rate_per_distance", -1, "0 or more")])
def test_bad_distance_settings_are_errors(make_workbook, name, value, words):
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets(**{name: value})))
    problem = next(p for p in info.value.problems if p.sheet == "Settings")
    assert problem.value == value and words in problem.message + problem.hint


def test_lane_flows_sheet_shows_distance_and_cost_source(make_workbook, tmp_path):
    path = make_workbook(sheets())
    outcome = pipeline.run(path, write=True)
    book = openpyxl.load_workbook(outcome.info.output_path, read_only=True)
    rows = list(book[writeback.FLOWS_SHEET].iter_rows(values_only=True))
    header = list(rows[0])
    assert header[-2:] == ["Distance (km)", "Cost source"]  # plain words, the unit in the header
    lanes = outcome.network.lanes.assign(**outcome.network.cost_sources()[["distance", "cost_source"]])
    by_lane = {(o, d): (dist, src) for o, d, dist, src in
               zip(lanes["origin"], lanes["destination"], lanes["distance"], lanes["cost_source"])}
    assert len(rows) > 1
    for record in rows[1:]:
        distance, source = by_lane[(record[0], record[1])]
        assert record[-1] == source
        if distance == distance:
            assert record[-2] == pytest.approx(distance, rel=1e-6)


def test_json_flows_show_distance_and_cost_source(make_workbook):
    outcome = pipeline.run(make_workbook(sheets()), write=False)
    sources = outcome.network.cost_sources()
    lanes = outcome.network.lanes
    expected = {(o, d, m): (dist, src) for o, d, m, dist, src in
                zip(lanes["origin"], lanes["destination"], lanes["mode"], sources["distance"], sources["cost_source"])}
    flows = outcome.to_json()["flows"]
    assert flows
    for flow in flows:
        distance, source = expected[(flow["origin"], flow["destination"], flow["mode"])]
        assert flow["cost_source"] == source
        if distance == distance:
            assert flow["distance"] == pytest.approx(distance, rel=1e-12)
        else:
            assert flow["distance"] is None


def test_json_flows_without_distances_keep_their_fields(make_workbook):
    typed = sheets(rate_per_distance=None, circuity_factor=None)
    for record in typed["Lanes"][1:]:
        record[2] = 10.0
        if len(record) > 3:
            record[3:] = [None] * (len(record) - 3)
    outcome = pipeline.run(make_workbook(typed, "typed.xlsx"), write=False)
    assert all("distance" not in flow for flow in outcome.to_json()["flows"])
