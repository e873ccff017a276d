"""Tests of lanesolve.read.geo: great-circle distance against a geodesic reference, and lane costs from distance.

Reference: geographiclib (C. F. F. Karney, "Algorithms for geodesics", Journal of Geodesy 87 (2013) 43-55), whose
``Geodesic.WGS84.Inverse`` gives the geodesic on the WGS84 ellipsoid to nanometre accuracy. A sphere cannot follow
the ellipsoid's flattening, so the check is the stated bound: within 0.5 %.
"""

import math

import numpy as np
import pandas as pd
import pytest

from lanesolve.read import geo

geodesic = pytest.importorskip("geographiclib.geodesic")

# City coordinates (decimal degrees, city centres as commonly listed; recalled from memory, which is fine here because
# the check compares two distance formulas on the same points, not against the cities' true positions).
CITY_PAIRS = [
    ("London", 51.5074, -0.1278, "Paris", 48.8566, 2.3522),
    ("New York", 40.7128, -74.0060, "Los Angeles", 34.0522, -118.2437),
    ("Sydney", -33.8688, 151.2093, "Melbourne", -37.8136, 144.9631),
    ("Tokyo", 35.6762, 139.6503, "Osaka", 34.6937, 135.5023),
    ("Quito", -0.1807, -78.4678, "Singapore", 1.3521, 103.8198),
    ("Oslo", 59.9139, 10.7522, "Rome", 41.9028, 12.4964),
    ("Cape Town", -33.9249, 18.4241, "Nairobi", -1.2921, 36.8219),
    ("Anchorage", 61.2181, -149.9003, "Reykjavik", 64.1466, -21.9426),
]


@pytest.mark.parametrize("pair", CITY_PAIRS, ids=lambda p: f"{p[0]}-{p[3]}")
def test_great_circle_within_half_percent_of_wgs84_geodesic(pair):
    _, lat1, lon1, _, lat2, lon2 = pair
    reference_km = geodesic.Geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0
    assert geo.great_circle_km(lat1, lon1, lat2, lon2) == pytest.approx(reference_km, rel=0.005)


def test_great_circle_is_vectorised_and_matches_scalar_calls():
    lat1, lon1, lat2, lon2 = (np.array([p[i] for p in CITY_PAIRS]) for i in (1, 2, 4, 5))
    vector = geo.great_circle_km(lat1, lon1, lat2, lon2)
    assert vector.shape == (len(CITY_PAIRS),)
    for i, pair in enumerate(CITY_PAIRS):
        assert vector[i] == pytest.approx(geo.great_circle_km(pair[1], pair[2], pair[4], pair[5]), rel=1e-12)


def test_quarter_meridian_on_the_sphere():
    # Pole to equator is a quarter of the circumference, pi * R / 2, by definition of the sphere.
    assert geo.great_circle_km(0.0, 0.0, 90.0, 0.0) == pytest.approx(math.pi * geo.EARTH_RADIUS_KM / 2, rel=1e-12)


def test_antipodes_do_not_give_nan():
    # Rounding can push the haversine term a hair above 1; half the circumference is expected. Near the antipode the
    # haversine form is known to lose about half its digits (1 - h is tiny), so 1e-7 relative (2 m) is the fair bound.
    distance = geo.great_circle_km(10.0, 20.0, -10.0, -160.0)
    assert not math.isnan(distance)
    assert distance == pytest.approx(math.pi * geo.EARTH_RADIUS_KM, rel=1e-7)


def test_km_per_mile_is_the_international_mile():
    # 1 mile = 1760 yd and 1 yd = 0.9144 m exactly (international yard and pound agreement, 1959).
    assert geo.KM_PER_MILE == pytest.approx(1760 * 0.9144 / 1000, rel=1e-15)


NODES = {"Ashford Depot": (51.5074, -0.1278), "Brellin Store": (48.8566, 2.3522), "Nowhere Hub": (math.nan, math.nan)}


def lanes(*records):
    frame = pd.DataFrame(records, columns=["origin", "destination", "cost_per_unit", "distance"])
    frame["row"] = range(2, len(frame) + 2)
    return frame


def reference_km(a, b):
    return geodesic.Geodesic.WGS84.Inverse(*NODES[a], *NODES[b])["s12"] / 1000.0


def test_blank_cost_uses_great_circle_times_circuity_times_rate():
    frame = lanes(["Ashford Depot", "Brellin Store", math.nan, math.nan])
    filled, problems = geo.lane_costs_from_distance(frame, NODES, 0.8, "km", 1.2)
    assert problems == []
    expected_km = reference_km("Ashford Depot", "Brellin Store") * 1.2
    assert filled.loc[0, "distance"] == pytest.approx(expected_km, rel=0.005)
    assert filled.loc[0, "cost_per_unit"] == pytest.approx(0.8 * expected_km, rel=0.005)
    assert filled.loc[0, "cost_source"] == geo.COST_FROM_GREAT_CIRCLE


def test_distance_unit_miles_divides_by_km_per_mile():
    frame = lanes(["Ashford Depot", "Brellin Store", math.nan, math.nan])
    filled_km, _ = geo.lane_costs_from_distance(frame, NODES, 1.0, "km", 1.0)
    filled_mi, problems = geo.lane_costs_from_distance(frame, NODES, 1.0, "mi", 1.0)
    assert problems == []
    assert filled_mi.loc[0, "distance"] == pytest.approx(filled_km.loc[0, "distance"] / 1.609344, rel=1e-12)


def test_given_distance_wins_over_coordinates_and_given_cost_is_kept():
    frame = lanes(["Ashford Depot", "Brellin Store", math.nan, 500.0],
                  ["Ashford Depot", "Brellin Store", 7.5, math.nan],
                  ["Nowhere Hub", "Brellin Store", math.nan, 40.0])
    filled, problems = geo.lane_costs_from_distance(frame, NODES, 0.5, "mi", 1.3)
    assert problems == []
    # rate x given distance: 0.5 x 500 and 0.5 x 40; no circuity on a distance the planner gave.
    assert filled["cost_per_unit"].tolist() == pytest.approx([250.0, 7.5, 20.0])
    assert filled["cost_source"].tolist() == [geo.COST_FROM_DISTANCE, geo.COST_GIVEN, geo.COST_FROM_DISTANCE]
    assert math.isnan(filled.loc[1, "distance"])


def test_missing_coordinates_name_the_lanes_row_and_the_node():
    frame = lanes(["Ashford Depot", "Brellin Store", 3.0, math.nan],
                  ["Nowhere Hub", "Brellin Store", math.nan, math.nan])
    filled, problems = geo.lane_costs_from_distance(frame, NODES, 0.5, "km", 1.2)
    assert len(problems) == 1
    problem = problems[0]
    assert (problem.sheet, problem.row, problem.column) == ("Lanes", 3, "cost_per_unit")
    assert "origin 'Nowhere Hub'" in problem.message and "latitude" in problem.message
    assert math.isnan(filled.loc[1, "cost_per_unit"])


def test_unknown_node_counts_as_missing_coordinates():
    frame = lanes(["Ashford Depot", "Zed Yard", math.nan, math.nan])
    _, problems = geo.lane_costs_from_distance(frame, NODES, 0.5, "km", 1.2)
    assert [p.row for p in problems] == [2] and "destination 'Zed Yard'" in problems[0].message


def test_blank_cost_without_rate_is_a_settings_problem():
    frame = lanes(["Ashford Depot", "Brellin Store", math.nan, math.nan])
    filled, problems = geo.lane_costs_from_distance(frame, NODES, None, "km", 1.2)
    assert [p.sheet for p in problems] == ["Settings"] and "rate_per_distance" in problems[0].message
    assert math.isnan(filled.loc[0, "cost_per_unit"])


def test_bad_unit_and_circuity_below_one_are_settings_problems():
    frame = lanes(["Ashford Depot", "Brellin Store", math.nan, math.nan])
    _, problems = geo.lane_costs_from_distance(frame, NODES, 1.0, "leagues", 0.9)
    messages = " ".join(p.message for p in problems)
    assert "distance_unit" in messages and "circuity_factor" in messages


def test_no_blank_cost_needs_no_rate_and_no_coordinates():
    frame = lanes(["Nowhere Hub", "Zed Yard", 4.0, math.nan])
    filled, problems = geo.lane_costs_from_distance(frame, NODES, None, "furlongs", 0.0)
    assert problems == [] and filled.loc[0, "cost_per_unit"] == pytest.approx(4.0)


def test_node_coordinates_accepts_a_network():
    from lanesolve.model.network import make_network

    net = make_network([{"id": "D", "supply": 1, "latitude": 1.0, "longitude": 2.0}],
                       [{"id": "C", "demand": 1, "latitude": 3.0, "longitude": 4.0}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": math.nan}])
    filled, problems = geo.lane_costs_from_distance(net.lanes, geo.node_coordinates(net), 1.0, "km", 1.0)
    assert problems == []
    assert filled.loc[0, "distance"] == pytest.approx(geo.great_circle_km(1.0, 2.0, 3.0, 4.0), rel=1e-12)
