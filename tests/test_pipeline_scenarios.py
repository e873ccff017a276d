"""Scenarios through the whole pipeline: every scenario solved, compared with the baseline, written back."""

import networkx as nx
import openpyxl
import pytest
from conftest import write_workbook

from lanesolve.errors import WorkbookError
from lanesolve.pipeline import run

BASE = {
    "Depots": [["depot", "supply"], ["D1", 30], ["D2", 30]],
    "Customers": [["customer", "demand"], ["C1", 10], ["C2", 20]],
    "Lanes": [["origin", "destination", "cost_per_unit", "capacity"],
              ["D1", "C1", 1, None], ["D1", "C2", 3, None], ["D2", "C1", 4, None], ["D2", "C2", 2, 15]],
}
SCENARIOS = [["scenario", "sheet", "match", "column", "change", "value"],
             ["peak", "Customers", "*", "demand", "scale", 1.2],
             ["cut", "Lanes", "D2>C2", "capacity", "set", 5]]


def _networkx_cost(demand, capacity_d2_c2):
    """Reference optimum from networkx min_cost_flow on the same data (supply <= via a dummy sink)."""
    g = nx.DiGraph()
    total = sum(demand.values())
    for depot in ("D1", "D2"):
        g.add_node(depot, demand=-30)
        g.add_edge(depot, "spare", weight=0)
    g.add_node("spare", demand=60 - total)
    for customer, q in demand.items():
        g.add_node(customer, demand=q)
    g.add_edge("D1", "C1", weight=1)
    g.add_edge("D1", "C2", weight=3)
    g.add_edge("D2", "C1", weight=4)
    g.add_edge("D2", "C2", weight=2, capacity=capacity_d2_c2)
    return nx.min_cost_flow_cost(g)


@pytest.fixture
def book(tmp_path):
    return write_workbook(tmp_path / "what-if.xlsx", {**BASE, "Scenarios": SCENARIOS})


def test_every_scenario_is_solved_and_compared(book):
    outcome = run(book, write=False)
    assert list(outcome.scenario_results) == ["peak", "cut"]
    # networkx min_cost_flow is the outside reference for each variant.
    assert outcome.result.total_cost == pytest.approx(_networkx_cost({"C1": 10, "C2": 20}, 15), rel=1e-9)
    assert outcome.scenario_results["peak"].total_cost == pytest.approx(
        _networkx_cost({"C1": 12, "C2": 24}, 15), rel=1e-9)
    assert outcome.scenario_results["cut"].total_cost == pytest.approx(_networkx_cost({"C1": 10, "C2": 20}, 5),
                                                                       rel=1e-9)
    table = outcome.comparison.set_index("scenario")
    assert list(table.index) == ["baseline", "peak", "cut"]
    assert table.loc["cut", "delta_cost"] == pytest.approx(
        outcome.scenario_results["cut"].total_cost - outcome.result.total_cost, rel=1e-9)
    doc = outcome.to_json()
    assert [s["scenario"] for s in doc["scenarios"]] == ["peak", "cut"]


def test_one_scenario_by_name(book):
    outcome = run(book, write=False, scenario_names=["cut"])
    assert list(outcome.scenario_results) == ["cut"]


def test_unknown_scenario_name_is_an_input_error(book):
    with pytest.raises(WorkbookError, match="did you mean 'peak'"):
        run(book, write=False, scenario_names=["peek"])


def test_bad_scenario_row_is_an_input_error_and_nothing_is_written(tmp_path):
    bad = SCENARIOS + [["typo", "Lanes", "D9>C1", "capacity", "set", 5]]
    path = write_workbook(tmp_path / "bad.xlsx", {**BASE, "Scenarios": bad})
    before = path.read_bytes()
    with pytest.raises(WorkbookError) as caught:
        run(path)
    assert any(p.sheet == "Scenarios" and p.row == 4 for p in caught.value.problems)
    assert path.read_bytes() == before


def test_comparison_sheet_is_written_back(book):
    pytest.importorskip("lanesolve.report.summary")
    run(book)
    sheet = openpyxl.load_workbook(book)["LS Scenarios"]
    names = [row[0] for row in sheet.iter_rows(min_row=2, values_only=True)]
    assert names == ["baseline", "peak", "cut"]


def test_summary_page_has_the_scenario_table(book):
    run(book)
    page = (book.parent / "what-if-summary.html").read_text(encoding="utf-8")
    section = page.split('id="scenarios"', 1)[1].split("</table>", 1)[0]
    for name in ("baseline", "peak", "cut"):
        assert f"<td>{name}</td>" in section
    # The 'cut' scenario moves 10 units off D2>C2 onto D1>C2 (cost 3 instead of 2): +10.00, by hand from BASE.
    assert "+10.00" in section


def test_scenario_names_are_escaped_in_the_page(tmp_path):
    hostile = [SCENARIOS[0], ["<b>x</b>", "Customers", "*", "demand", "scale", 1.1]]
    path = write_workbook(tmp_path / "hostile.xlsx", {**BASE, "Scenarios": hostile})
    run(path)
    page = (tmp_path / "hostile-summary.html").read_text(encoding="utf-8")
    assert "<b>x</b>" not in page and "&lt;b&gt;x&lt;/b&gt;" in page
