"""Several products and emissions through the command line: ``lanesolve solve --json --tradeoff N`` on an invented
workbook, the result sheets written back, and ``--tradeoff`` refused without emission factors."""

import json

import openpyxl
import pytest
from click.testing import CliRunner

from lanesolve.cli import main
from test_product_sheets import base, workbook


def solved(tmp_path, *options, **changes):
    path = workbook(tmp_path / "book.xlsx", base(**changes))
    result = CliRunner().invoke(main, ["solve", str(path), "--output", str(tmp_path / "out.xlsx"), "--json",
                                       *options])
    return result


def test_json_carries_products_emissions_carbon_and_tradeoff(tmp_path):
    result = solved(tmp_path, "--tradeoff", "3",
                    Settings=[("setting", "value"), ("carbon_price", 100), ("emissions_cap", 1.0)])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert {flow["product"] for flow in doc["flows"]} == {"ale", "bran"}
    # By hand (tests/test_product_sheets.py's workbook): ale to Cobham 5 x 0.5 t x 100 km x 0.1 = 25 kg; bran from
    # Brill 4 x 0.2 t x 80 km x 0.03 = 1.92 kg; ale to Dunmore via Exley 6 x 0.5 t x (30 + 20) km x 0.1 = 15 kg, and
    # 3 t through the hub at 3 kg/t = 9 kg: 50.92 kg in all.
    assert doc["emissions"]["total_t"] == pytest.approx(0.05092, abs=1e-9)
    assert doc["emissions"]["by_mode"] == pytest.approx({"road": 0.04, "rail": 0.00192})
    assert doc["emissions"]["unknown_lanes"] == 0
    assert doc["emissions"]["cap_t"] == 1.0 and doc["emissions"]["cap_value_per_t"] == pytest.approx(0.0, abs=1e-4)
    assert doc["cost_breakdown"]["carbon"] == pytest.approx(100 * 0.05092)
    assert len(doc["tradeoff"]) == 3
    assert sum(flow["cost"] for flow in doc["flows"]) == pytest.approx(doc["cost_breakdown"]["transport"])
    sheets = openpyxl.load_workbook(tmp_path / "out.xlsx").sheetnames
    assert {"LS Product flows", "LS Product nodes", "LS Emissions", "LS Lane emissions", "LS Trade-off"} <= set(sheets)


def test_tradeoff_without_emissions_is_an_input_error(tmp_path):
    result = solved(tmp_path, "--tradeoff", "3", Modes=None, Hubs=[("hub",), ("Exley",)])
    assert result.exit_code == 1
    assert "--tradeoff needs emissions" in result.output


def test_a_cap_no_plan_can_meet_is_infeasible(tmp_path):
    result = solved(tmp_path, Settings=[("setting", "value"), ("emissions_cap", 0.001)])
    assert result.exit_code == 3
    assert json.loads(result.stdout)["status"] == "infeasible"


def test_summary_and_mail_show_emissions_and_the_tradeoff_chart(tmp_path):
    path = workbook(tmp_path / "book.xlsx", base())
    mail = tmp_path / "plan.eml"
    result = CliRunner().invoke(main, ["solve", str(path), "--output", str(tmp_path / "out.xlsx"), "--tradeoff", "3",
                                       "--email", str(mail)])
    assert result.exit_code == 0, result.output
    html = (tmp_path / "out-summary.html").read_text(encoding="utf-8")
    assert 'id="emissions-table"' in html and "Cost and emissions trade-off" in html
    assert "0.05 t CO2e" in html  # 50.92 kg, by hand in the test above
    text = mail.read_text(encoding="utf-8", errors="replace")
    assert "tradeoff.png" in text and "Emissions, total: 0.05 t CO2e" in text
