"""Fuzz of header spellings: no contract column is ever dropped silently.

For every column of Depots, Customers, Hubs and Lanes, hypothesis writes the header the ways planners do -- any
case per word, words joined by spaces, underscores, hyphens, points, slashes or nothing, a trailing "?" or ":",
units in brackets, surrounding spaces -- or replaces it by a synonym planners use. Whatever it writes, lanesolve
must either read the column (the typed value arrives in the network) or refuse the workbook with an error at that
header's cell naming the column. Ignoring the header, so that the column's default silently takes the typed
values' place, fails the test.

The synonym list is this test's own, written from how planners label columns (common practice, from memory), not
copied from lanesolve.contract.SYNONYMS, so a synonym the contract lacks shows up as a failure here.

The quick run checks a seeded 100 spellings; the slow run (``-m slow``) 3,000. Sheets are built in memory as a
:class:`~lanesolve.read.reader.RawWorkbook`: header matching happens in the validator, so no file is needed.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lanesolve import contract
from lanesolve.errors import WorkbookError
from lanesolve.read.reader import RawSheet, RawWorkbook
from lanesolve.read.validate import validate

#: One record per sheet with a distinctive, valid value in every contract column (invented places).
RECORDS = {
    "Depots": {"depot": "Harwick Depot", "supply": 100.0, "handling_cost": 1.5, "fixed_cost": 10.0,
               "status": "open", "latitude": 50.5, "longitude": 4.25},
    "Customers": {"customer": "Mossfield Grocers", "demand": 40.0, "unmet_penalty": 9.0, "single_source": "yes",
                  "latitude": 51.0, "longitude": 5.0},
    "Hubs": {"hub": "Tollbridge Cross", "capacity": 300.0, "handling_cost": 0.5, "fixed_cost": 20.0,
             "status": "open", "latitude": 50.75, "longitude": 4.5},
    "Lanes": {"origin": "Harwick Depot", "destination": "Mossfield Grocers", "cost_per_unit": 2.5, "mode": "road",
              "capacity": 90.0, "fixed_cost": 5.0, "min_volume": 1.0, "trip_capacity": 30.0, "cost_per_trip": 7.0,
              "distance": 100.0, "active": "no"},
}
#: What each typed value becomes in the network frame (id columns are called "id" there).
READ_AS = {"single_source": True, "active": False}

#: Planners' other names for columns (this test's own list; see the module docstring).
PLANNER_SYNONYMS = {
    "cost_per_unit": ["unit cost", "Cost/unit", "rate", "Unit rate", "Cost", "Price per unit", "Cost per pallet"],
    "capacity": ["Max capacity", "Cap", "Max"],
    "active": ["Enabled", "In use", "Used"],
    "fixed_cost": ["Fixed charge", "Fixed"],
    "min_volume": ["Minimum volume", "Min qty"],
    "trip_capacity": ["Truck capacity", "Truckload", "Capacity per trip"],
    "cost_per_trip": ["Trip cost", "Cost per truck"],
    "distance": ["Dist", "km", "Distance (km)", "Road distance"],
    "origin": ["From", "Ship from"],
    "destination": ["To", "Dest", "Ship to"],
    "demand": ["Quantity", "Qty"],
    "supply": ["Available", "Stock"],
    "unmet_penalty": ["Penalty", "Shortage penalty"],
    "latitude": ["Lat"],
    "longitude": ["Lon", "Lng", "Long"],
}

CASES = [(sheet, column) for sheet, record in RECORDS.items() for column in record]


@st.composite
def spelling(draw, name: str) -> str:
    """A way a planner might write the header ``name``."""
    if name in PLANNER_SYNONYMS and draw(st.booleans()):
        words = draw(st.sampled_from(PLANNER_SYNONYMS[name])).split(" ")
    else:
        words = name.split("_")
    cased = [draw(st.sampled_from([str.lower, str.upper, str.title, str.capitalize]))(word) for word in words]
    text = draw(st.sampled_from([" ", "_", "-", "", ".", "/", "  "])).join(cased)
    text += draw(st.sampled_from(["", "?", ":", ".", "*", " #", "!"]))
    text += draw(st.sampled_from(["", " (pallets)", " (EUR)", "(km)", " [t]", " (per unit)", " (yes/no)"]))
    return draw(st.sampled_from(["", " "])) + text + draw(st.sampled_from(["", "  "]))


def workbook(sheet: str, column: str, header: str) -> RawWorkbook:
    sheets = {}
    for name, record in RECORDS.items():
        headers = [header if (name, key) == (sheet, column) else key for key in record]
        sheets[name] = RawSheet(name, [headers, list(record.values())])
    return RawWorkbook("fuzz.xlsx", sheets)


def check(sheet: str, column: str, header: str) -> None:
    try:
        network, _ = validate(workbook(sheet, column, header))
    except WorkbookError as error:
        at_header = [p for p in error.problems if p.sheet == sheet and p.row == 1 and p.column == header.strip()]
        assert at_header, f"{header!r} for {sheet}.{column}: refused, but not at its cell: {error.problems}"
        assert any(f"'{column}'" in p.message for p in at_header), \
            f"{header!r} for {sheet}.{column}: the error does not name the column: {at_header}"
        return
    frame = {"Depots": network.depots, "Customers": network.customers, "Hubs": network.hubs,
             "Lanes": network.lane_sources if column == "distance" else network.lanes}[sheet]
    spec = contract.sheet_by_name(sheet)
    target = "id" if column == spec.id_column else column
    typed = READ_AS.get(column, RECORDS[sheet][column])
    got = frame[target].iloc[0]
    same = got == typed or (isinstance(typed, float) and math.isclose(got, typed, rel_tol=1e-12))
    assert same, f"{header!r} for {sheet}.{column} was accepted but read as {got!r}, not the typed {typed!r}"


def test_the_fixed_records_are_valid_as_written():
    # Guards the fuzz against passing for the wrong reason: with exact headers every value is read as typed.
    for sheet, column in CASES:
        check(sheet, column, column)


@pytest.mark.parametrize("header, column", [("Capacity (pallets)", "capacity"), ("Active?", "active"),
                                            ("Cost/unit", "cost_per_unit"), ("Unit cost", "cost_per_unit")])
def test_the_reported_spellings_are_refused_at_their_cell(header, column):
    with pytest.raises(WorkbookError) as caught:
        validate(workbook("Lanes", column, header))
    assert [p.column for p in caught.value.problems] == [header]


def _property(data):
    sheet, column = data.draw(st.sampled_from(CASES))
    check(sheet, column, data.draw(spelling(column)))


@settings(max_examples=100, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_no_header_spelling_drops_a_column_silently(data):
    _property(data)


@pytest.mark.slow
@settings(max_examples=3000, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_no_header_spelling_drops_a_column_silently_long(data):
    _property(data)
