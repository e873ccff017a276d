"""The Products, Supply, Demand and Modes sheets and the new Lanes and Hubs columns: read into the network, and
every bad input reported with its sheet, row and column in one pass. The network (Ashby, Brill, Cobham, Dunmore)
is invented."""

import math

import openpyxl
import pytest

from lanesolve.errors import WorkbookError
from lanesolve.pipeline import load


def workbook(path, sheets):
    """Write ``sheets`` (name -> rows, header first) as an .xlsx workbook and return its path."""
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append(list(row))
    book.save(path)
    return path


def base(**changes):
    """Two depots, two customers, a hub, two products; each sheet may be replaced through ``changes``."""
    sheets = {
        "Depots": [("depot", "supply", "latitude", "longitude"), ("Ashby", 40, 52.0, -1.0),
                   ("Brill", None, 51.8, -1.05)],
        "Customers": [("customer", "demand", "latitude", "longitude"), ("Cobham", None, 51.3, -0.4),
                      ("Dunmore", None, 52.2, -0.9)],
        "Hubs": [("hub", "emission_per_tonne"), ("Exley", 3.0)],
        "Lanes": [("origin", "destination", "cost_per_unit", "mode", "distance", "products"),
                  ("Ashby", "Cobham", 2, "road", 100, None), ("Brill", "Cobham", 3, "rail", 80, "bran"),
                  ("Ashby", "Exley", 1, "road", 30, None), ("Exley", "Dunmore", 1, "road", 20, "ale, bran")],
        "Products": [("product", "weight_per_unit", "capacity_use"), ("ale", 0.5, 1), ("bran", 0.2, 2)],
        "Supply": [("depot", "product", "supply"), ("Ashby", "ale", 30), ("Brill", "bran", 30)],
        "Demand": [("customer", "product", "demand"), ("Cobham", "ale", 5), ("Cobham", "bran", 4),
                   ("Dunmore", "ale", 6)],
        "Modes": [("mode", "emission_factor", "source"), ("road", 0.1, "invented test factor"),
                  ("rail", 0.03, "invented test factor")],
    }
    sheets.update(changes)
    return {name: rows for name, rows in sheets.items() if rows is not None}


def problems(tmp_path, sheets):
    with pytest.raises(WorkbookError) as caught:
        load(workbook(tmp_path / "book.xlsx", sheets))
    return [(p.sheet, p.row, p.column, p.message) for p in caught.value.problems]


def test_products_supply_and_demand_are_read(tmp_path):
    network, _ = load(workbook(tmp_path / "book.xlsx", base()))
    data = network.products
    assert data.ids == ["ale", "bran"]
    assert data.capacity_use.tolist() == [1.0, 2.0]
    assert network.customers["demand"].tolist() == [9.0, 6.0]  # the sum of each customer's Demand rows
    assert math.isinf(network.depots.at[1, "supply"])  # blank overall supply beside a Supply sheet: no cap
    assert data.lane_products.tolist() == [None, ("bran",), None, ("ale", "bran")]
    # Emissions are asked for (mode factors): typed distances, factors by mode, the hub's per tonne.
    assert network.emissions.lane_km.tolist() == [100.0, 80.0, 30.0, 20.0]
    assert network.emissions.lane_factor.tolist() == [0.1, 0.03, 0.1, 0.1]
    assert network.emissions.hub_per_tonne.tolist() == [3.0]


def test_a_workbook_without_the_new_sheets_has_no_products_and_no_emissions(tmp_path):
    sheets = {"Depots": [("depot", "supply"), ("Ashby", 5)], "Customers": [("customer", "demand"), ("Cobham", 5)],
              "Lanes": [("origin", "destination", "cost_per_unit"), ("Ashby", "Cobham", 1)]}
    network, _ = load(workbook(tmp_path / "book.xlsx", sheets))
    assert network.products is None and network.emissions is None


def test_unknown_product_in_supply_demand_and_lanes(tmp_path):
    found = problems(tmp_path, base(
        Supply=[("depot", "product", "supply"), ("Ashby", "ael", 30), ("Brill", "bran", 30)],
        Demand=[("customer", "product", "demand"), ("Cobham", "ale", 5), ("Dunmore", "cider", 6)],
        Lanes=[("origin", "destination", "cost_per_unit", "distance", "products"),
               ("Ashby", "Cobham", 2, 10, "ale, brann"), ("Brill", "Cobham", 3, 10, None)]))
    assert ("Supply", 2, "product", "'ael' is not a product on the Products sheet") in found
    assert ("Demand", 3, "product", "'cider' is not a product on the Products sheet") in found
    assert any(f[:3] == ("Lanes", 2, "products") and "'brann' is not a product" in f[3] for f in found)


def test_unknown_depot_in_supply(tmp_path):
    found = problems(tmp_path, base(Supply=[("depot", "product", "supply"), ("Ashbee", "ale", 30),
                                            ("Brill", "bran", 30)]))
    assert ("Supply", 2, "depot", "'Ashbee' is not a depot on the Depots sheet") in found


def test_product_with_demand_but_no_supply_anywhere(tmp_path):
    found = problems(tmp_path, base(Supply=[("depot", "product", "supply"), ("Ashby", "ale", 30)]))
    assert ("Demand", 3, "product", "customers need product 'bran' but no depot supplies it on the Supply sheet") \
        in found


def test_factor_without_source(tmp_path):
    found = problems(tmp_path, base(Modes=[("mode", "emission_factor", "source"), ("road", 0.1, None)]))
    assert ("Modes", 2, "source", "an emission factor is given without its source") in found


def test_negative_weight_and_factor(tmp_path):
    found = problems(tmp_path, base(
        Products=[("product", "weight_per_unit"), ("ale", -0.5), ("bran", 0.2)],
        Modes=[("mode", "emission_factor", "source"), ("road", -0.1, "x")]))
    assert any(f[:3] == ("Products", 2, "weight_per_unit") and "negative" in f[3] for f in found)
    assert any(f[:3] == ("Modes", 2, "emission_factor") and "negative" in f[3] for f in found)


def test_emissions_asked_but_lane_has_no_distance_and_no_coordinates(tmp_path):
    found = problems(tmp_path, base(
        Customers=[("customer", "demand"), ("Cobham", None), ("Dunmore", None)],
        Lanes=[("origin", "destination", "cost_per_unit", "mode"), ("Ashby", "Cobham", 2, "road"),
               ("Ashby", "Dunmore", 2, "road")]))
    assert [f for f in found if f[0] == "Lanes"] == [
        ("Lanes", 2, "distance", "emissions are asked for, but lane Ashby > Cobham has no distance and its ends "
                                 "lack coordinates"),
        ("Lanes", 3, "distance", "emissions are asked for, but lane Ashby > Dunmore has no distance and its ends "
                                 "lack coordinates")]


def test_demand_on_customers_beside_a_demand_sheet(tmp_path):
    found = problems(tmp_path, base(Customers=[("customer", "demand"), ("Cobham", 9), ("Dunmore", None)]))
    assert ("Customers", 2, "demand", "with a Demand sheet, demand by product lives there; this cell must be "
                                      "blank") in found


def test_supply_sheet_without_products(tmp_path):
    found = problems(tmp_path, base(Products=None, Demand=None, Modes=None,
                                    Customers=[("customer", "demand"), ("Cobham", 3), ("Dunmore", 1)]))
    assert ("Supply", None, None, "the Supply sheet needs a Products sheet listing the products") in found


def test_several_products_need_a_demand_sheet(tmp_path):
    found = problems(tmp_path, base(Demand=None, Customers=[("customer", "demand"), ("Cobham", 3), ("Dunmore", 1)]))
    assert any(f[0] == "Products" and "no Demand sheet" in f[3] for f in found)


def test_every_problem_is_reported_in_one_pass(tmp_path):
    found = problems(tmp_path, base(
        Supply=[("depot", "product", "supply"), ("Ashby", "ael", 30), ("Brill", "bran", 30)],
        Customers=[("customer", "demand", "latitude", "longitude"), ("Cobham", 9, 51.3, -0.4),
                   ("Dunmore", None, 52.2, -0.9)],
        Modes=[("mode", "emission_factor", "source"), ("road", 0.1, None)]))
    assert {f[0] for f in found} >= {"Supply", "Customers", "Modes"}


def test_weight_missing_when_emissions_are_asked_for(tmp_path):
    found = problems(tmp_path, base(Products=[("product", "capacity_use"), ("ale", 1), ("bran", 2)]))
    assert ("Products", 2, "weight_per_unit", "emissions are asked for but this product has no weight_per_unit and "
                                              "the Settings give no tonnes_per_unit") in found
