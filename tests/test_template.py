"""The blank template workbook, read back with openpyxl and python-calamine (readers outside lanesolve).

Expectations come from lanesolve.contract (the single source of sheets, columns and settings) and from the README's
requirements for the template: headers in row 1 in contract order, header comments, number formats, frozen header
rows, a drop-down on every choice column, Settings prefilled, a guidance sheet first that names every column, and a
Scenarios sheet with example rows.
"""

from __future__ import annotations

import os

import openpyxl
import pytest
import python_calamine

from lanesolve import contract
from lanesolve.errors import WriteError
from lanesolve.write.template import GUIDE_SHEET, write_template


@pytest.fixture(scope="module")
def template_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("template") / "blank.xlsx"
    write_template(path)
    return path


@pytest.fixture(scope="module")
def book(template_path):
    return openpyxl.load_workbook(template_path)


def test_sheets_are_guide_then_contract_order_then_scenarios(book):
    assert book.sheetnames == [GUIDE_SHEET] + [s.name for s in contract.INPUT_SHEETS] + ["Scenarios"]


def test_every_column_in_contract_order_in_row_one(book):
    for sheet in contract.INPUT_SHEETS:
        ws = book[sheet.name]
        headers = [c.value for c in ws[1]]
        assert headers == [c.name for c in sheet.columns], sheet.name


def test_headers_read_by_calamine(template_path):
    # A second, independent reader (the one lanesolve's reader builds on) sees the same headers.
    workbook = python_calamine.CalamineWorkbook.from_path(str(template_path))
    for sheet in contract.INPUT_SHEETS:
        rows = workbook.get_sheet_by_name(sheet.name).to_python()
        assert rows[0] == [c.name for c in sheet.columns], sheet.name


def test_header_comments_hold_doc_unit_and_default(book):
    for sheet in contract.INPUT_SHEETS:
        ws = book[sheet.name]
        for index, column in enumerate(sheet.columns, start=1):
            comment = ws.cell(row=1, column=index).comment
            assert comment is not None, (sheet.name, column.name)
            assert column.doc in comment.text
            assert ("Required." if column.required else "Optional.") in comment.text
            if column.unit:
                assert f"Unit: {column.unit}." in comment.text
            if not column.required:
                assert "Default:" in comment.text


def test_default_shown_in_comment_for_known_defaults(book):
    lanes = book[contract.LANES.name]
    names = [c.name for c in contract.LANES.columns]
    active = lanes.cell(row=1, column=names.index("active") + 1).comment.text
    assert "Default: yes." in active  # contract: active defaults to True, i.e. "yes"
    fixed = lanes.cell(row=1, column=names.index("fixed_cost") + 1).comment.text
    assert "Default: 0." in fixed


def test_numeric_columns_carry_number_formats(book):
    for sheet in contract.INPUT_SHEETS:
        ws = book[sheet.name]
        for index, column in enumerate(sheet.columns, start=1):
            fmt = ws.column_dimensions[openpyxl.utils.get_column_letter(index)].number_format
            if column.kind == contract.NUMBER:
                assert fmt != "General", (sheet.name, column.name)
                if "currency" in column.unit:
                    assert "0.00" in fmt  # money shows two decimals


def test_header_rows_frozen(book):
    for sheet in contract.INPUT_SHEETS:
        assert book[sheet.name].freeze_panes == "A2", sheet.name


def test_flag_columns_have_yes_no_dropdown(book):
    for sheet in contract.INPUT_SHEETS:
        ws = book[sheet.name]
        for index, column in enumerate(sheet.columns, start=1):
            if column.kind != contract.FLAG:
                continue
            letter = openpyxl.utils.get_column_letter(index)
            matches = [dv for dv in ws.data_validations.dataValidation if f"{letter}2" in str(dv.sqref)]
            assert matches, (sheet.name, column.name)
            assert matches[0].type == "list" and matches[0].formula1 == '"yes,no"'
            # Every yes/no word offered is one lanesolve accepts.
            assert {"yes", "no"} <= contract.YES | contract.NO


def test_settings_prefilled_with_every_setting_and_default(book):
    rows = list(book[contract.SETTINGS.name].iter_rows(values_only=True))
    assert list(rows[0]) == [c.name for c in contract.SETTINGS.columns]
    assert [r[0] for r in rows[1:]] == [s.name for s in contract.SETTINGS_ROWS]
    for (name, value), setting in zip(rows[1:], contract.SETTINGS_ROWS):
        if setting.default in (None, ""):
            assert value is None, name
        elif isinstance(setting.default, float):
            assert value == pytest.approx(setting.default, rel=1e-12), name
        else:
            assert value == setting.default, name


def test_guide_mentions_every_sheet_column_and_setting(book):
    ws = book[GUIDE_SHEET]
    cells = [str(v) for row in ws.iter_rows(values_only=True) for v in row if v is not None]
    text = "\n".join(cells)
    for sheet in contract.INPUT_SHEETS:
        assert f"Sheet {sheet.name}" in text
        assert sheet.doc in text
        for column in sheet.columns:
            assert column.name in cells, (sheet.name, column.name)
            assert column.doc in cells
    for setting in contract.SETTINGS_ROWS:
        assert setting.name in cells
        assert setting.doc in cells
    assert "lanesolve solve" in text and "lanesolve check" in text
    assert "licensed professionals take precedence" in text


def test_guide_rows_say_required_unit_and_default(book):
    rows = [r for r in book[GUIDE_SHEET].iter_rows(values_only=True)]
    by_doc = {r[5]: r for r in rows if len(r) > 5 and r[5]}
    supply = by_doc[contract.DEPOTS.column("supply").doc]
    assert supply[:4] == ("supply", "required", "number", "units")
    capacity = by_doc[contract.LANES.column("capacity").doc]
    assert capacity[1] == "optional" and capacity[4] == "none"


def test_template_has_no_data_rows(template_path):
    workbook = python_calamine.CalamineWorkbook.from_path(str(template_path))
    for sheet in contract.INPUT_SHEETS:
        if sheet in (contract.SETTINGS, contract.MODES):  # Modes ships default factors (tests/test_default_factors.py)
            continue
        rows = workbook.get_sheet_by_name(sheet.name).to_python()
        assert all(all(v in ("", None) for v in row) for row in rows[1:]), sheet.name


def test_template_passes_the_reader_and_has_only_the_expected_gap(template_path):
    # The template has every sheet and column, so the validator's only complaints may be about missing rows.
    reader = pytest.importorskip("lanesolve.read.reader")
    validate = pytest.importorskip("lanesolve.read.validate")
    from lanesolve.errors import WorkbookError

    raw = reader.read_workbook(template_path)
    try:
        validate.validate(raw)
    except WorkbookError as exc:
        for problem in exc.problems:
            assert problem.row is None or problem.row <= 1, str(problem)
            text = str(problem).lower()
            assert "missing" not in text or "column" not in text, str(problem)
            assert "unknown" not in text, str(problem)


def test_write_is_atomic_and_replaces(tmp_path):
    target = tmp_path / "blank.xlsx"
    target.write_bytes(b"not a workbook yet")
    write_template(target, force=True)  # replacing an existing file needs --force
    assert openpyxl.load_workbook(target).sheetnames[0] == GUIDE_SHEET
    assert os.listdir(tmp_path) == ["blank.xlsx"]


def test_write_into_missing_folder_raises_write_error(tmp_path):
    with pytest.raises(WriteError, match="no-such-folder"):
        write_template(tmp_path / "no-such-folder" / "blank.xlsx")


def test_write_needs_xlsx_name(tmp_path):
    with pytest.raises(WriteError, match=r"\.xlsx"):
        write_template(tmp_path / "blank.xls")
    assert os.listdir(tmp_path) == []


def _dropdown_at(ws, cell: str):
    found = [dv for dv in ws.data_validations.dataValidation if cell in dv.sqref]
    assert found, f"{ws.title}!{cell} has no drop-down"
    assert found[0].type == "list" and found[0].showErrorMessage
    return found[0].formula1.strip('"').split(",")


def test_every_choice_column_has_a_dropdown(book):
    # input sheets: status (a choice) and every yes/no flag; the words offered are the contract's
    for sheet in contract.INPUT_SHEETS:
        for index, column in enumerate(sheet.columns, start=1):
            if column.kind in (contract.CHOICE, contract.FLAG):
                cell = f"{openpyxl.utils.get_column_letter(index)}2"
                expected = list(column.choices) if column.kind == contract.CHOICE else ["yes", "no"]
                assert _dropdown_at(book[sheet.name], cell) == expected, (sheet.name, column.name)
    # Settings: the value cell of each choice or yes/no setting
    settings = book[contract.SETTINGS.name]
    rows = {settings.cell(row=r, column=1).value: r for r in range(2, settings.max_row + 1)}
    assert _dropdown_at(settings, f"B{rows['solver']}") == ["auto", "cbc", "highs"]
    assert _dropdown_at(settings, f"B{rows['distance_unit']}") == ["km", "mi"]
    assert _dropdown_at(settings, f"B{rows['single_source']}") == ["yes", "no"]
    # Scenarios: sheet, column and change
    scen = book["Scenarios"]
    assert _dropdown_at(scen, "B2") == ["Depots", "Customers", "Hubs", "Lanes", "Settings"]
    assert _dropdown_at(scen, "E2") == ["set", "scale", "add"]
    columns = _dropdown_at(scen, "D2")
    assert {"demand", "supply", "capacity", "cost_per_unit", "active", "value"} <= set(columns)
    assert len('"' + ",".join(columns) + '"') <= 257  # spreadsheet programs cap an inline list at 255 characters


def test_scenarios_sheet_has_example_rows_and_the_guide_explains_it(book):
    rows = list(book["Scenarios"].iter_rows(values_only=True))
    assert rows[0] == ("scenario", "sheet", "match", "column", "change", "value")
    assert rows[1] == ("peak season", "Customers", "*", "demand", "scale", 1.2)
    assert rows[2] == ("diesel up 8 %", "Lanes", "*", "cost_per_unit", "scale", 1.08)
    guide = " ".join(str(c) for r in book[GUIDE_SHEET].iter_rows(values_only=True) for c in r if c)
    assert "Sheet Scenarios (optional sheet)" in guide and "LS Scenarios" in guide and "baseline" in guide


def test_example_scenarios_run_on_a_filled_in_template(template_path, tmp_path):
    from conftest import VALID_SHEETS
    from lanesolve import pipeline

    book = openpyxl.load_workbook(template_path)
    for name in ("Depots", "Customers", "Hubs", "Lanes"):
        ws = book[name]
        headers = [c.value for c in ws[1]]
        given = VALID_SHEETS[name]
        for row in given[1:]:
            record = dict(zip(given[0], row))
            ws.append([record.get(h) for h in headers])
    path = tmp_path / "filled.xlsx"
    book.save(path)
    outcome = pipeline.run(path, write=False)
    assert set(outcome.scenario_results) == {"peak season", "diesel up 8 %"}
    base, diesel = outcome.result, outcome.scenario_results["diesel up 8 %"]
    # diesel up 8 %: whatever plan the scenario picks, its transport cost is its flows at the workbook's rates x 1.08
    rates = {(r.origin, r.destination, r.mode): r.cost_per_unit for r in outcome.network.lanes.itertuples()}
    at_given_rates = sum(f.flow * rates[(f.origin, f.destination, f.mode)] for f in diesel.flows.itertuples())
    assert diesel.cost_breakdown["transport"] == pytest.approx(1.08 * at_given_rates, rel=1e-9)
    # peak season: every customer's demand x 1.2 (conftest.VALID_SHEETS: 60 + 70 = 130 pallets -> 156)
    peak = outcome.scenario_results["peak season"]
    customers = peak.nodes[peak.nodes["kind"] == "customer"]
    assert customers["demand"].sum() == pytest.approx(1.2 * 130, abs=1e-9)
    assert base.nodes[base.nodes["kind"] == "customer"]["demand"].sum() == pytest.approx(130, abs=1e-9)
