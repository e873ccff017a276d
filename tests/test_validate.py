"""Tests of lanesolve.read.validate: one test per bad-input cause, plus the reading rules of the workbook contract,
checked on small invented workbooks.

Expected values are derived by hand from the workbook each test writes; did-you-mean hints are checked against
what Python's difflib (the reference the validator relies on) considers the closest match.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math

import pandas as pd
import pytest

from lanesolve import contract
from lanesolve.errors import Problem, WorkbookError
from lanesolve.model.network import CUSTOMER_COLUMNS, DEPOT_COLUMNS, HUB_COLUMNS, LANE_COLUMNS
from lanesolve.read.reader import RawSheet, RawWorkbook, read_workbook
from lanesolve.read.validate import validate

from conftest import valid_sheets, write_workbook


def load(tmp_path, sheets, name="book.xlsx", **kwargs):
    return validate(read_workbook(write_workbook(tmp_path / name, sheets, **kwargs)))


def errors_of(tmp_path, sheets) -> list[Problem]:
    with pytest.raises(WorkbookError) as caught:
        load(tmp_path, sheets)
    return caught.value.problems


def only(problems: list[Problem], **where) -> Problem:
    chosen = [p for p in problems if all(getattr(p, k) == v for k, v in where.items())]
    assert len(chosen) == 1, f"expected one problem with {where}, got {[str(p) for p in problems]}"
    return chosen[0]


def set_cell(sheets, sheet, row, column, value):
    """Set the cell at spreadsheet ``row`` under header ``column`` (row 2 is the first record)."""
    header = sheets[sheet][0]
    sheets[sheet][row - 1][header.index(column)] = value


# ---------------------------------------------------------------------------------------------------- valid input


def test_valid_workbook_gives_expected_network(tmp_path):
    network, warnings = load(tmp_path, valid_sheets())
    assert warnings == []
    assert list(network.depots.columns) == DEPOT_COLUMNS
    assert list(network.customers.columns) == CUSTOMER_COLUMNS
    assert list(network.hubs.columns) == HUB_COLUMNS
    assert list(network.lanes.columns) == LANE_COLUMNS
    nan, inf = math.nan, math.inf
    # Expected frames written out by hand from conftest.VALID_SHEETS (blank handling_cost -> 0, blank capacity ->
    # inf, blank unmet_penalty -> NaN with no Settings default, blank active -> yes, "y" -> yes, "no" -> no).
    pd.testing.assert_frame_equal(network.depots, pd.DataFrame({
        "id": ["North Yard", "South Yard"], "supply": [100.0, 80.0], "handling_cost": [1.5, 0.0],
        # design columns absent from a sheet that has none: no fixed cost, so the status resolves to open
        "fixed_cost": [0.0, 0.0], "status": ["open", "open"],
        "latitude": [52.1, nan], "longitude": [4.3, nan], "row": [2, 3]}), check_dtype=False, atol=1e-12)
    pd.testing.assert_frame_equal(network.customers, pd.DataFrame({
        "id": ["Alder Foods", "Birch Market"], "demand": [60.0, 70.0], "unmet_penalty": [50.0, nan],
        "single_source": [False, False], "latitude": [nan, nan], "longitude": [nan, nan], "row": [2, 3]}), check_dtype=False, atol=1e-12)
    pd.testing.assert_frame_equal(network.hubs, pd.DataFrame({
        "id": ["Midway"], "capacity": [90.0], "handling_cost": [0.5], "fixed_cost": [0.0], "status": ["open"],
        "latitude": [nan], "longitude": [nan], "row": [2]}), check_dtype=False, atol=1e-12)
    pd.testing.assert_frame_equal(network.lanes, pd.DataFrame({
        "origin": ["North Yard", "South Yard", "Midway", "Midway", "South Yard"],
        "destination": ["Midway", "Midway", "Alder Foods", "Birch Market", "Birch Market"],
        "mode": ["road", "", "road", "rail", "road"],
        "cost_per_unit": [2.0, 2.5, 1.0, 1.2, 3.0], "capacity": [90.0, inf, inf, 50.0, inf],
        "fixed_cost": [0.0, 100.0, 0.0, 0.0, 0.0],
        # design lane columns absent: no minimum, no whole trips
        "min_volume": [0.0] * 5, "trip_capacity": [nan] * 5, "cost_per_trip": [0.0] * 5,
        "active": [True, True, True, False, True],
        # carrier columns absent: no carrier, no minimum charge
        "carrier": [""] * 5, "minimum_charge": [0.0] * 5, "row": [2, 3, 4, 5, 6]}), check_dtype=False, atol=1e-12)
    assert network.lanes["active"].dtype == bool
    assert network.settings.units == "pallets"
    assert network.settings.time_limit_s == pytest.approx(30.0, abs=1e-12)
    assert network.settings.mip_gap == pytest.approx(1e-4, abs=1e-15)  # contract default
    assert network.settings.unmet_penalty is None
    assert network.source.endswith("book.xlsx")


def test_header_variants_match(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes"][0] = ["Origin", " DESTINATION", "Cost Per Unit", "mode ", "Capacity", "fixed-cost", "Active"]
    sheets["Depots"][0] = ["Depot", "Supply", " handling_cost ", "Latitude", "LONGITUDE"]
    network, _ = load(tmp_path, sheets)
    assert network.lanes["cost_per_unit"].tolist() == pytest.approx([2.0, 2.5, 1.0, 1.2, 3.0], abs=1e-12)
    assert network.lanes["fixed_cost"].tolist() == pytest.approx([0, 100, 0, 0, 0], abs=1e-12)
    assert network.depots["handling_cost"].tolist() == pytest.approx([1.5, 0.0], abs=1e-12)


def test_sheet_names_match_case_insensitively(tmp_path):
    sheets = {name.upper() if name != "Lanes" else " lanes": rows for name, rows in valid_sheets().items()}
    network, _ = load(tmp_path, sheets)
    assert len(network.lanes) == 5 and len(network.hubs) == 1


def test_extra_columns_are_kept_out(tmp_path):
    sheets = valid_sheets()
    for rows in sheets.values():
        rows[0].append("notes")
        for row in rows[1:]:
            row.append("checked by planner")
    network, _ = load(tmp_path, sheets)
    assert "notes" not in network.lanes.columns and list(network.lanes.columns) == LANE_COLUMNS


def test_blank_rows_are_skipped(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes"].insert(2, [None] * 7)
    sheets["Lanes"].insert(4, ["   ", None, None, None, None, None, None])
    network, _ = load(tmp_path, sheets)
    assert len(network.lanes) == 5
    # Rows keep their spreadsheet numbers: the blank rows 3 and 5 are skipped, not renumbered away.
    assert network.lanes["row"].tolist() == [2, 4, 6, 7, 8]


def test_numeric_ids_become_text(tmp_path):
    sheets = valid_sheets()
    sheets["Customers"][1][0] = 101
    sheets["Lanes"][3][1] = 101
    sheets["Customers"][2][0] = 7.5
    sheets["Lanes"][4][1] = "7.5"
    sheets["Lanes"][5][1] = 7.5
    network, _ = load(tmp_path, sheets)
    assert network.customers["id"].tolist() == ["101", "7.5"]
    assert network.lanes["destination"].tolist()[2:] == ["101", "7.5", "7.5"]


def test_ids_are_trimmed(tmp_path):
    sheets = valid_sheets()
    sheets["Depots"][1][0] = "  North Yard "
    network, _ = load(tmp_path, sheets)
    assert network.depots["id"].tolist()[0] == "North Yard"


def test_defaults_filled_when_optional_columns_and_sheets_absent(tmp_path):
    sheets = {
        "Depots": [["depot", "supply"], ["D1", 10]],
        "Customers": [["customer", "demand"], ["C1", 4]],
        "Lanes": [["origin", "destination", "cost_per_unit"], ["D1", "C1", 2]],
    }
    network, warnings = load(tmp_path, sheets)
    assert warnings == []
    lane = network.lanes.iloc[0]
    assert lane["mode"] == "" and math.isinf(lane["capacity"]) and lane["fixed_cost"] == pytest.approx(0.0)
    assert bool(lane["active"]) is True
    assert network.depots["handling_cost"].iloc[0] == pytest.approx(0.0, abs=1e-12)
    assert math.isnan(network.customers["unmet_penalty"].iloc[0])  # hard demand
    assert list(network.hubs.columns) == HUB_COLUMNS and len(network.hubs) == 0
    assert network.settings.time_limit_s == pytest.approx(60.0) and network.settings.unmet_penalty is None


def test_settings_unmet_penalty_fills_blank_customer_penalty(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["Unmet Penalty", 25])
    network, _ = load(tmp_path, sheets)
    # Alder Foods keeps its own 50; Birch Market's blank takes the Settings default.
    assert network.customers["unmet_penalty"].tolist() == pytest.approx([50.0, 25.0], abs=1e-12)
    assert network.settings.unmet_penalty == pytest.approx(25.0, abs=1e-12)


def test_blank_setting_value_keeps_default(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["unmet_penalty", None])
    sheets["Settings"].append(["currency", "EUR"])
    network, _ = load(tmp_path, sheets)
    assert network.settings.unmet_penalty is None and network.settings.currency == "EUR"


def test_active_yes_no_words(tmp_path):
    sheets = valid_sheets()
    for row, word in zip(range(2, 7), ["Yes", "N", True, "off", 1]):
        set_cell(sheets, "Lanes", row, "active", word)
    network, _ = load(tmp_path, sheets)
    assert network.lanes["active"].tolist() == [True, False, True, False, True]


# ---------------------------------------------------------------------------------------------------- warnings


def test_number_stored_as_text_is_accepted_with_warning(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", " 120.5 ")
    network, warnings = load(tmp_path, sheets)
    assert network.depots["supply"].iloc[0] == pytest.approx(120.5, abs=1e-12)
    warning = only(warnings, sheet="Depots", row=2, column="supply")
    assert warning.severity == "warning" and warning.value == " 120.5 " and "stored as text" in warning.message


@pytest.mark.parametrize("text, readings", [
    ("1.200", "1.2 with a decimal point, or 1200 with a thousands point"),
    ("1,200", "1.2 with a decimal comma, or 1200 with a thousands comma"),
    ("1,5", "1.5 with a decimal comma, or 15 with a thousands comma"),
])
def test_number_text_with_ambiguous_separators_is_an_error(tmp_path, text, readings):
    # "1.200" means 1200 in German, Danish or Brazilian use and 1.2 in English (CLDR number symbols, recalled
    # from memory): the reading cannot be decided from the cell, so the planner is asked for a plain number.
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", text)
    problem = only(errors_of(tmp_path, sheets), sheet="Depots", row=2, column="supply")
    assert problem.value == text and f"'{text}' is ambiguous: {readings}" == problem.message
    assert "plain number" in problem.hint


@pytest.mark.parametrize("text, number", [("12.5", 12.5), ("1200", 1200.0), ("0.500", 0.5), ("1200.000", 1200.0)])
def test_unambiguous_number_text_is_read_with_a_warning(tmp_path, text, number):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", text)
    network, warnings = load(tmp_path, sheets)
    assert network.depots["supply"].iloc[0] == pytest.approx(number, abs=1e-12)
    assert "stored as text" in only(warnings, sheet="Depots", row=2, column="supply").message


def test_misspelt_setting_is_an_error_naming_the_setting(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["Unmet penalty (EUR)", 40])
    problem = only(errors_of(tmp_path, sheets), sheet="Settings", row=4)
    assert problem.value == "Unmet penalty (EUR)" and "looks like 'unmet_penalty'" in problem.message
    assert "rename it to 'unmet_penalty'" in problem.hint


def test_unknown_setting_unlike_any_warns_and_is_ignored(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["planner", "Ada"])
    network, warnings = load(tmp_path, sheets)
    warning = only(warnings, sheet="Settings", row=4)
    assert warning.value == "planner" and "is ignored" in warning.message
    assert network.settings.time_limit_s == pytest.approx(30.0, abs=1e-12)


def test_misspelt_optional_header_is_an_error_naming_the_column(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes"][0][5] = "fixed_cots"
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", column="fixed_cots")
    assert problem.row == 1 and "cell F1" in problem.message and "looks like 'fixed_cost'" in problem.message
    assert "rename the header to 'fixed_cost'" in problem.hint


def test_hidden_input_sheet_warns(tmp_path):
    _, warnings = load(tmp_path, valid_sheets(), hidden=("Hubs",))
    assert "hidden" in only(warnings, sheet="Hubs").message


# ---------------------------------------------------------------------------------------------------- one test per bad-input cause


def test_missing_sheet_with_did_you_mean(tmp_path):
    sheets = valid_sheets()
    sheets["Lane"] = sheets.pop("Lanes")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes")
    assert "no sheet named 'Lanes'" in problem.message and "did you mean sheet 'Lane'" in problem.hint


def test_missing_sheet_without_near_miss(tmp_path):
    sheets = valid_sheets()
    del sheets["Customers"]
    problem = only(errors_of(tmp_path, sheets), sheet="Customers")
    assert "add a sheet named 'Customers'" in problem.hint


def test_two_sheets_for_one_contract_sheet(tmp_path):
    sheets = valid_sheets()
    sheets["LANES "] = [row[:] for row in sheets["Lanes"]]
    problem = only(errors_of(tmp_path, sheets), sheet="LANES ")
    assert "both count as the Lanes sheet" in problem.message


def test_misspelt_required_header_is_one_error_at_its_cell(tmp_path):
    sheets = valid_sheets()
    sheets["Depots"][0][1] = "suply"
    problems = errors_of(tmp_path, sheets)
    problem = only(problems, sheet="Depots", row=1)
    assert problem.column == "suply" and "cell B1" in problem.message
    assert "looks like 'supply' (a required column), which this sheet lacks" in problem.message
    # difflib agrees that the written header is close to the contract name (ratio 10/11, above the 0.8 cutoff).
    assert difflib.SequenceMatcher(None, "suply", "supply").ratio() == pytest.approx(10 / 11, abs=1e-12)


def test_missing_required_column_without_look_alike(tmp_path):
    sheets = valid_sheets()
    sheets["Depots"][0][1] = "notes"
    problem = only(errors_of(tmp_path, sheets), sheet="Depots", row=1)
    assert problem.column == "supply" and "required column 'supply' is missing" in problem.message


def test_missing_id_column_does_not_flood_lanes_with_unknown_ids(tmp_path):
    sheets = valid_sheets()
    sheets["Depots"][0][0] = "name"
    problems = errors_of(tmp_path, sheets)
    assert only(problems, sheet="Depots", column="depot").row == 1
    assert not [p for p in problems if p.sheet == "Lanes"]


def test_duplicate_header(tmp_path):
    sheets = valid_sheets()
    sheets["Depots"][0].append("Supply")
    for row in sheets["Depots"][1:]:
        row.append(5)
    problem = only(errors_of(tmp_path, sheets), sheet="Depots", row=1)
    assert problem.column == "Supply" and "more than once" in problem.message and "B, F" in problem.message


def test_blank_id(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 3, "depot", "  ")
    problem = only(errors_of(tmp_path, sheets), sheet="Depots", row=3, column="depot")
    assert "blank" in problem.message


def test_duplicate_id(tmp_path):
    sheets = valid_sheets()
    sheets["Customers"].append(["Alder Foods", 5, None])
    problem = only(errors_of(tmp_path, sheets), sheet="Customers", row=4, column="customer")
    assert problem.value == "Alder Foods" and "already used in row 2" in problem.message


def test_id_on_two_node_sheets(tmp_path):
    sheets = valid_sheets()
    sheets["Hubs"].append(["South Yard", None, None])
    problem = only(errors_of(tmp_path, sheets), sheet="Hubs", row=3, column="hub")
    assert problem.value == "South Yard" and "also a depot (Depots row 3)" in problem.message


def test_unknown_lane_origin_with_did_you_mean(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 6, "origin", "South Yrd")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=6, column="origin")
    assert problem.value == "South Yrd" and "not a depot, hub or customer" in problem.message
    assert "did you mean 'South Yard'" in problem.hint


def test_unknown_lane_destination_case_only(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 4, "destination", "alder foods")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=4, column="destination")
    assert "did you mean 'Alder Foods'" in problem.hint


def test_unknown_lane_id_without_near_miss(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 4, "destination", "QQQ-999")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=4, column="destination")
    assert "add it to Depots, Customers or Hubs" in problem.hint


def test_origin_equals_destination(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 3, "destination", "South Yard")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=3)
    assert problem.column == "origin" and problem.value == "South Yard" and "both 'South Yard'" in problem.message


def test_duplicate_lane(tmp_path):
    sheets = valid_sheets()
    sheets["Lanes"].append(["Midway", "Alder Foods", 9.0, " road ", None, None, None])
    sheets["Lanes"].append(["Midway", "Alder Foods", 9.0, "rail", None, None, None])  # other mode: allowed
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=7)
    assert problem.value == "Midway -> Alder Foods" and "already appears in row 4" in problem.message
    assert "mode 'road'" in problem.message


def test_non_numeric_value(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 2, "cost_per_unit", "2 EUR")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=2, column="cost_per_unit")
    assert problem.value == "2 EUR" and "not a number" in problem.message


def test_decimal_comma_is_an_error(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 2, "cost_per_unit", "2,5")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=2, column="cost_per_unit")
    assert "2.5 with a decimal comma" in problem.message and "a point for decimals" in problem.hint


def test_negative_value(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Customers", 3, "demand", -70)
    problem = only(errors_of(tmp_path, sheets), sheet="Customers", row=3, column="demand")
    assert problem.value == pytest.approx(-70.0, abs=1e-12) and "negative" in problem.message


def test_negative_value_stored_as_text(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 2, "capacity", "-5")
    with pytest.raises(WorkbookError) as caught:
        load(tmp_path, sheets)
    problem = only(caught.value.problems, sheet="Lanes", row=2, column="capacity")
    assert "negative" in problem.message
    assert only(caught.value.warnings, sheet="Lanes", row=2, column="capacity").severity == "warning"


@pytest.mark.parametrize("text", ["nan", "inf", "-Infinity"])
def test_nan_or_inf(tmp_path, text):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 2, "capacity", text)
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=2, column="capacity")
    assert problem.value == text and "not a finite number" in problem.message


def test_boolean_in_number_column(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", True)
    problem = only(errors_of(tmp_path, sheets), sheet="Depots", row=2, column="supply")
    assert problem.value is True and "yes/no value, not a number" in problem.message


def test_date_in_number_column(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 3, "cost_per_unit", dt.date(2024, 3, 1))
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=3, column="cost_per_unit")
    assert "2024-03-01" in problem.message and "date" in problem.message


def test_blank_required_number(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Customers", 2, "demand", None)
    problem = only(errors_of(tmp_path, sheets), sheet="Customers", row=2, column="demand")
    assert "blank" in problem.message


def test_latitude_out_of_range(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "latitude", 152.1)  # degrees north lie in -90..90 (contract Column.maximum)
    set_cell(sheets, "Depots", 3, "longitude", -200)
    problems = errors_of(tmp_path, sheets)
    lat = only(problems, sheet="Depots", row=2, column="latitude")
    assert lat.value == pytest.approx(152.1, abs=1e-12) and "-90 to 90" in lat.message
    assert "-180 to 180" in only(problems, sheet="Depots", row=3, column="longitude").message


def test_error_value_cell(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 4, "cost_per_unit", "#N/A")  # openpyxl stores this as an error cell (t="e")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=4, column="cost_per_unit")
    assert problem.value == "#N/A" and "error value #N/A" in problem.message and "fix the cell" in problem.hint


def test_formula_without_cached_value(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 3, "supply", "=B2*0.8")  # openpyxl saves the formula with no result
    problems = errors_of(tmp_path, sheets)
    problem = only(problems, sheet="Depots", row=3, column="supply")
    assert "formula =B2*0.8 has no saved value" in problem.message
    assert "open the file in a spreadsheet program and save it" in problem.hint
    assert not [p for p in problems if "blank" in p.message]  # the unsaved formula is not mistaken for a blank


def test_active_not_yes_no(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 2, "active", "maybe")
    problem = only(errors_of(tmp_path, sheets), sheet="Lanes", row=2, column="active")
    assert problem.value == "maybe" and "not yes or no" in problem.message


def test_bad_setting_value(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["mip_gap", "tight"])
    sheets["Settings"].append(["unmet_penalty", -4])
    problems = errors_of(tmp_path, sheets)
    assert "not a number" in only(problems, sheet="Settings", row=4, column="value").message
    assert "negative" in only(problems, sheet="Settings", row=5, column="value").message


def test_duplicate_setting(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"].append(["Units", "cases"])
    problem = only(errors_of(tmp_path, sheets), sheet="Settings", row=4, column="setting")
    assert "already given in row 2" in problem.message


def test_settings_sheet_missing_value_column(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"][0] = ["setting", "amount"]
    problem = only(errors_of(tmp_path, sheets), sheet="Settings", column="value")
    assert problem.row == 1 and "missing" in problem.message


def test_all_problems_reported_in_one_pass(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Depots", 2, "supply", "lots")
    set_cell(sheets, "Customers", 3, "demand", -1)
    set_cell(sheets, "Hubs", 2, "capacity", "#REF!")
    set_cell(sheets, "Lanes", 5, "destination", "Birch Markt")
    set_cell(sheets, "Lanes", 6, "active", "perhaps")
    sheets["Settings"].append(["mip_gap", "small"])
    problems = errors_of(tmp_path, sheets)
    assert [(p.sheet, p.row, p.column) for p in problems] == [
        ("Depots", 2, "supply"), ("Customers", 3, "demand"), ("Hubs", 2, "capacity"),
        ("Lanes", 5, "destination"), ("Lanes", 6, "active"), ("Settings", 4, "value")]
    assert all(p.severity == "error" and p.hint for p in problems)


def test_many_errors_are_all_returned(tmp_path):
    # 3,000 bad cells: nothing may be capped (the CLI truncates, the validator does not).
    sheets = valid_sheets()
    sheets["Lanes"].extend(["North Yard", "Alder Foods", "x", f"m{i}", None, None, None] for i in range(3000))
    problems = errors_of(tmp_path, sheets)
    assert len([p for p in problems if p.column == "cost_per_unit"]) == 3000


def test_problems_name_sheet_row_column_and_value_in_text(tmp_path):
    sheets = valid_sheets()
    set_cell(sheets, "Lanes", 3, "cost_per_unit", "cheap")
    text = str(only(errors_of(tmp_path, sheets), sheet="Lanes", row=3))
    assert text.startswith("Lanes row 3, column cost_per_unit: 'cheap' is not a number")


def test_validate_accepts_hand_built_raw_workbook():
    # The reader's plain data is enough: a RawWorkbook built in memory validates the same way.
    raw = RawWorkbook("mem.xlsx", {
        "Depots": RawSheet("Depots", [["depot", "supply"], ["D1", 5.0]]),
        "Customers": RawSheet("Customers", [["customer", "demand"], ["C1", ""]], bad_cells={(2, 2): "#VALUE!"}),
        "Lanes": RawSheet("Lanes", [["origin", "destination", "cost_per_unit"], ["D1", "C1", 1.0]]),
    })
    with pytest.raises(WorkbookError) as caught:
        validate(raw)
    assert [str(p) for p in caught.value.problems] == [
        "Customers row 2, column demand: the cell holds the error value #VALUE! (fix the cell or the cells its "
        "formula uses so it shows a proper value, or type the value in)"]


def test_empty_optional_sheet_counts_as_absent(tmp_path):
    sheets = valid_sheets()
    sheets["Settings"] = []
    sheets["Hubs"] = []
    sheets["Lanes"] = [row for row in sheets["Lanes"] if "Midway" not in row[:2]]
    network, warnings = load(tmp_path, sheets)
    assert warnings == [] and len(network.hubs) == 0 and network.settings.units == "units"
