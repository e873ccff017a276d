"""The command line: exit codes, --json, write-back through the CLI, and no tracebacks on bad input."""

import json
import pathlib

import openpyxl
import pytest
from click.testing import CliRunner
from conftest import write_workbook

from lanesolve.cli import main


def _workbook(path, depots, customers, lanes, settings=None):
    sheets = {"Depots": [["depot", "supply"], *depots], "Customers": [["customer", "demand", "unmet_penalty"],
              *customers], "Lanes": [["origin", "destination", "cost_per_unit", "capacity"], *lanes]}
    if settings:
        sheets["Settings"] = [["setting", "value"], *settings]
    return write_workbook(path, sheets)


@pytest.fixture
def small(tmp_path):
    # Two depots, two customers; optimum by hand: C1 from D1 (1*10) and C2 from D2 (2*5) = 20.
    return _workbook(tmp_path / "small.xlsx", [["D1", 10], ["D2", 10]], [["C1", 10, None], ["C2", 5, None]],
                     [["D1", "C1", 1, None], ["D2", "C1", 3, None], ["D1", "C2", 4, None], ["D2", "C2", 2, None]],
                     settings=[["units", "pallets"], ["currency", "EUR"]])


def test_solve_json_has_the_documented_fields(small):
    result = CliRunner().invoke(main, ["solve", str(small), "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    for key in ("status", "total_cost", "cost_breakdown", "flows", "unmet", "mip_gap", "solver", "solve_seconds"):
        assert key in doc
    assert doc["status"] == "optimal"
    assert doc["total_cost"] == pytest.approx(20.0, rel=1e-9)  # worked by hand in the fixture comment
    assert {(f["origin"], f["destination"]) for f in doc["flows"]} == {("D1", "C1"), ("D2", "C2")}
    for flow in doc["flows"]:
        assert set(flow) >= {"origin", "destination", "mode", "flow", "cost"}
    assert doc["unmet"] == []


def test_solve_writes_result_sheets_and_summary(small):
    result = CliRunner().invoke(main, ["solve", str(small)])
    assert result.exit_code == 0, result.output
    names = openpyxl.load_workbook(small).sheetnames
    assert names[:3] == ["Depots", "Customers", "Lanes"]
    assert any(n.startswith("LS ") for n in names)
    assert (small.parent / "small-summary.html").exists()


def test_output_option_leaves_the_input_untouched(small, tmp_path):
    before = small.read_bytes()
    out = tmp_path / "solved.xlsx"
    result = CliRunner().invoke(main, ["solve", str(small), "--output", str(out)])
    assert result.exit_code == 0, result.output
    assert small.read_bytes() == before
    assert out.exists() and (tmp_path / "solved-summary.html").exists()


def test_input_errors_exit_1_and_leave_the_file_untouched(tmp_path):
    path = _workbook(tmp_path / "bad.xlsx", [["D1", -5]], [["C1", 5, None]], [["D1", "C9", 1, None]])
    before = path.read_bytes()
    result = CliRunner().invoke(main, ["solve", str(path)])
    assert result.exit_code == 1
    assert "Traceback" not in result.output
    assert "Depots" in result.output and "supply" in result.output
    assert "C9" in result.output
    assert path.read_bytes() == before
    assert not (tmp_path / "bad-summary.html").exists()


def test_check_lists_problems_and_exits_1(tmp_path):
    path = _workbook(tmp_path / "bad.xlsx", [["D1", "lots"]], [["C1", 5, None]], [["D1", "C1", 1, None]])
    result = CliRunner().invoke(main, ["check", str(path)])
    assert result.exit_code == 1
    assert "lots" in result.output


def test_check_passes_a_good_workbook(small):
    result = CliRunner().invoke(main, ["check", str(small)])
    assert result.exit_code == 0, result.output
    assert "no input errors" in result.output


def test_no_feasible_plan_exits_3(tmp_path):
    # Hard demand 15 against supply 10: infeasible by counting.
    path = _workbook(tmp_path / "short.xlsx", [["D1", 10]], [["C1", 15, None]], [["D1", "C1", 1, None]])
    result = CliRunner().invoke(main, ["solve", str(path)])
    assert result.exit_code == 3
    assert "5" in result.output  # the shortfall is named


def test_no_feasible_plan_json(tmp_path):
    path = _workbook(tmp_path / "short.xlsx", [["D1", 10]], [["C1", 15, None]], [["D1", "C1", 1, None]])
    result = CliRunner().invoke(main, ["solve", str(path), "--json"])
    assert result.exit_code == 3
    assert json.loads(result.stdout)["status"] == "infeasible"


def test_not_a_workbook_exits_1_without_traceback(tmp_path):
    path = tmp_path / "notes.xlsx"
    path.write_text("this is not a spreadsheet")
    result = CliRunner().invoke(main, ["solve", str(path)])
    assert result.exit_code == 1
    assert "Traceback" not in result.output
    assert "notes.xlsx" in result.output


def test_usage_error_exits_2(small):
    result = CliRunner().invoke(main, ["solve", str(small), "--time-limit", "soon"])
    assert result.exit_code == 2


def test_template_command_writes_a_workbook(tmp_path):
    path = tmp_path / "blank.xlsx"
    result = CliRunner().invoke(main, ["template", str(path)])
    assert result.exit_code == 0, result.output
    names = openpyxl.load_workbook(path).sheetnames
    for sheet in ("Depots", "Customers", "Hubs", "Lanes", "Settings"):
        assert sheet in names


def test_batch_solves_every_workbook_and_reports_the_broken_one(small, tmp_path):
    good2 = _workbook(tmp_path / "second.xlsx", [["D1", 10]], [["C1", 4, None]], [["D1", "C1", 2.5, None]])
    broken = _workbook(tmp_path / "broken.xlsx", [["D1", "many"]], [["C1", 4, None]], [["D1", "C1", 1, None]])
    summary = tmp_path / "batch.csv"
    result = CliRunner().invoke(main, ["batch", str(small), str(good2), str(broken), "--summary", str(summary),
                                       "--json"])
    assert result.exit_code == 1  # the broken workbook's input error sets the batch's exit code
    doc = json.loads(result.stdout)
    status = {pathlib.Path(r["path"]).name: r["status"] for r in doc["runs"]}
    assert status == {"small.xlsx": "optimal", "second.xlsx": "optimal", "broken.xlsx": "input_error"}
    costs = {pathlib.Path(r["path"]).name: r["total_cost"] for r in doc["runs"]}
    assert costs["second.xlsx"] == pytest.approx(10.0, rel=1e-9)  # 4 units at 2.5, by hand
    assert summary.exists() and summary.with_suffix(".json").exists()
    assert any(n.startswith("LS ") for n in openpyxl.load_workbook(good2).sheetnames)


def test_solve_one_named_scenario(tmp_path):
    path = _workbook(tmp_path / "whatif.xlsx", [["D1", 20]], [["C1", 10, None]], [["D1", "C1", 1, None]])
    book = openpyxl.load_workbook(path)
    sheet = book.create_sheet("Scenarios")
    for row in (["scenario", "sheet", "match", "column", "change", "value"],
                ["double", "Customers", "C1", "demand", "scale", 2],
                ["dearer", "Lanes", "D1>C1", "cost_per_unit", "add", 1]):
        sheet.append(row)
    book.save(path)
    result = CliRunner().invoke(main, ["solve", str(path), "--json", "--scenario", "dearer"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert [s["scenario"] for s in doc["scenarios"]] == ["dearer"]
    assert doc["scenarios"][0]["total_cost"] == pytest.approx(20.0, rel=1e-9)  # 10 units at 1 + 1, by hand


def test_ods_workbook_is_refused_before_solving_with_a_clear_message(tmp_path, monkeypatch):
    import lanesolve.model.solve

    def no_solver(*args, **kwargs):
        raise AssertionError("the solver must not run before the write target is checked")

    monkeypatch.setattr(lanesolve.model.solve, "solve", no_solver)
    path = tmp_path / "plan.ods"
    path.write_bytes(b"PK\x03\x04 not really opendocument")
    result = CliRunner().invoke(main, ["solve", str(path)])
    assert result.exit_code == 1
    assert "save it as .xlsx" in result.output


def test_batch_passes_the_solver_choice_to_every_run(small, monkeypatch):
    import lanesolve.pipeline

    seen = []
    real = lanesolve.pipeline.run

    def spy(*args, **kwargs):
        seen.append(kwargs.get("solver"))
        return real(*args, **kwargs)

    monkeypatch.setattr(lanesolve.pipeline, "run", spy)
    result = CliRunner().invoke(main, ["batch", str(small), "--solver", "cbc", "--summary",
                                       str(small.parent / "b.csv")])
    assert result.exit_code == 0, result.output
    assert seen == ["cbc"]


def test_check_reports_scenario_problems_too(tmp_path):
    path = _workbook(tmp_path / "whatif.xlsx", [["D1", 20]], [["C1", 10, None]], [["D1", "C1", 1, None]])
    book = openpyxl.load_workbook(path)
    sheet = book.create_sheet("Scenarios")
    for row in (["scenario", "sheet", "match", "column", "change", "value"],
                ["typo", "Customers", "C9", "demand", "scale", 2]):
        sheet.append(row)
    book.save(path)
    result = CliRunner().invoke(main, ["check", str(path)])
    assert result.exit_code == 1
    assert "Scenarios row 2" in result.output and "C9" in result.output


def test_json_names_a_write_failure_as_such(small, tmp_path):
    (tmp_path / "~$small.xlsx").write_bytes(b"owner")  # as if a spreadsheet program had the workbook open
    result = CliRunner().invoke(main, ["solve", str(small), "--json"])
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    assert doc["status"] == "write_error" and "open in a spreadsheet program" in doc["error"]
