"""Every cost figure agrees: the chart, the HTML table, LS Summary, LS Scenarios, the mail and ``--json`` show the
one breakdown of :meth:`Result.cost_lines`, with every component, adding up to the total.

The network with every kind of cost is worked by hand (below); the bundled example is checked the same way.
"""

from __future__ import annotations

import base64
import math
import email
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import openpyxl
import pytest

from conftest import write_workbook
from lanesolve import pipeline
from lanesolve.report import charts, summary
from lanesolve.report.mail import build_email

EXAMPLE = Path(__file__).resolve().parent.parent / "example_workbooks" / "orvale_larder_supply.xlsx"
SVG = "{http://www.w3.org/2000/svg}"
TOL = 1e-6

#: One depot, two customers, two lanes, and each kind of cost once. By hand: Kestrel's 50 pallets cannot cover the
#: demand of 70; Aldwin's 30 are hard, so Brisk gets the other 20 (delivering costs 3 + 1 handling = 4 < its penalty
#: of 6) and is 20 short. Transport 30 x 2 + 20 x 3 = 120; handling 50 x 1 = 50; fixed lane 15 (Kestrel->Aldwin);
#: fixed depot charge 20 (status open: always paid); trips: 30 pallets in trucks of 10 = 3 trips x 5 = 15;
#: unmet penalty 20 x 6 = 120. Total 340. The scenario raises the supply to 70: Brisk is served in full, transport
#: 60 + 120 = 180, handling 70, penalty 0, the rest as before: 300.
EVERY_COST = {
    "Depots": [["depot", "supply", "handling_cost", "fixed_cost", "status"], ["Kestrel", 50, 1, 20, "open"]],
    "Customers": [["customer", "demand", "unmet_penalty"], ["Aldwin", 30, None], ["Brisk", 40, 6]],
    "Lanes": [["origin", "destination", "cost_per_unit", "fixed_cost", "trip_capacity", "cost_per_trip"],
              ["Kestrel", "Aldwin", 2, 15, 10, 5], ["Kestrel", "Brisk", 3, None, None, None]],
    "Settings": [["setting", "value"], ["units", "pallets"], ["currency", "EUR"]],
    "Scenarios": [["scenario", "sheet", "match", "column", "change", "value"],
                  ["more supply", "Depots", "Kestrel", "supply", "set", 70]],
}
BY_HAND = {"transport": 120.0, "handling": 50.0, "fixed_lane": 15.0, "unmet_penalty": 120.0, "fixed_node": 20.0,
           "trips": 15.0}


def chart_rows(svg: str) -> list[tuple[str, str, str]]:
    """The cost chart's legend read back from its SVG: (label, amount, share) per component, in drawing order.

    Each legend row is three text elements -- label, amount, share -- so the chart's figures can be checked
    without a browser."""
    texts = [t.text for t in ET.fromstring(svg).iter(f"{SVG}text")]
    return [tuple(texts[i:i + 3]) for i in range(0, len(texts), 3)]


def mail_rows(text: str) -> list[tuple[str, str, str]]:
    """The "Cost breakdown" block of the mail's text part: (label, amount, share) per component."""
    text = text.replace("\r\n", "\n")  # the .eml ends lines in CR LF, as on the wire
    block = text.split("\nCost breakdown\n", 1)[1].split("\n  Total", 1)[0]
    rows = []
    for line in block.splitlines():
        match = re.match(r"\s+(.+?)\s{2,}(\S.*?)\s+(\S+ %)$", line)
        rows.append(match.groups())
    return rows


def assert_every_output_agrees(outcome, comparison_sheet: bool) -> None:
    result, network = outcome.result, outcome.network
    currency = network.settings.currency or ""
    lines = result.cost_lines()
    assert sum(line.amount for line in lines) == pytest.approx(result.total_cost, abs=TOL)
    expected = [(line.label, summary.format_money(line.amount, currency), summary.format_share(line.share).replace(
        "\u00a0", " ")) for line in lines]

    # the HTML table and the chart beside it
    context = summary.build_context(network, result, outcome.info, [], comparison=outcome.comparison)
    assert [(r["label"], r["amount"], r["share"]) for r in context["costs"]] == expected
    chart = charts.cost_chart(result, currency)
    assert chart_rows(chart.to_svg()) == [(label, amount, share) for label, amount, share in expected]
    page = Path(outcome.info.summary_path).read_text(encoding="utf-8")
    uri = re.search(r'<img src="data:image/svg\+xml;base64,([^"]+)" alt="Cost breakdown', page).group(1)
    assert chart_rows(base64.b64decode(uri).decode()) == chart_rows(chart.to_svg())  # the page embeds that chart

    # the mail's text part and its HTML
    message = email.message_from_bytes(build_email(network, result, outcome.info, [],
                                                   comparison=outcome.comparison).as_bytes())
    text = next(p for p in message.walk() if p.get_content_type() == "text/plain").get_payload(decode=True).decode()
    assert mail_rows(text) == expected

    # LS Summary holds the amounts at full precision
    book = openpyxl.load_workbook(outcome.info.output_path)
    items = {row[0]: row[1] for row in book["LS Summary"].iter_rows(min_row=2, values_only=True)}
    suffix = f" ({currency})" if currency else ""
    for line in lines:
        assert items[line.label + suffix] == pytest.approx(line.amount, abs=TOL)
    assert items["Total cost" + suffix] == pytest.approx(result.total_cost, abs=TOL)

    # --json
    assert outcome.to_json()["cost_breakdown"] == pytest.approx({line.key: line.amount for line in lines}, abs=TOL)

    # LS Scenarios: every row's cost columns add up to its total, the baseline's equal the breakdown above
    if comparison_sheet:
        rows = list(book["LS Scenarios"].iter_rows(values_only=True))
        header = list(rows[0])
        cost_columns = [i for i, h in enumerate(header) if h in {f"{line.label}{suffix}" for line in lines}]
        total = header.index("Total cost" + suffix)
        assert len(cost_columns) == len(lines)
        for row in rows[1:]:
            if row[total] is not None:
                assert sum(row[i] for i in cost_columns) == pytest.approx(row[total], abs=TOL)
        baseline = dict(zip(header, rows[1]))
        for line in lines:
            assert baseline[line.label + suffix] == pytest.approx(line.amount, abs=TOL)


def test_network_with_every_kind_of_cost_agrees_everywhere(tmp_path):
    path = write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST)
    outcome = pipeline.run(path)
    assert {line.key: line.amount for line in outcome.result.cost_lines()} == pytest.approx(BY_HAND, abs=TOL)
    assert outcome.result.total_cost == pytest.approx(340.0, abs=TOL)  # by hand, above
    assert outcome.scenario_results["more supply"].total_cost == pytest.approx(300.0, abs=TOL)  # by hand, above
    assert_every_output_agrees(outcome, comparison_sheet=True)


def test_the_chart_leaves_out_no_component(tmp_path):
    # The planners' finding: a chart of transport and handling only (91 % / 9 %) beside a table with fixed charges.
    path = write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST)
    outcome = pipeline.run(path)
    labels = [row[0] for row in chart_rows(charts.cost_chart(outcome.result, "EUR").to_svg())]
    assert labels == ["Transport", "Handling at depots and hubs", "Fixed lane charges", "Penalties for unmet demand",
                      "Fixed depot and hub charges", "Trip costs"]


def test_scenario_comparison_cost_columns_add_up_to_the_total(tmp_path):
    path = write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST)
    comparison = pipeline.run(path).comparison
    for row in comparison.itertuples(index=False):
        parts = row.transport + row.handling + row.fixed_lane + row.unmet_penalty + row.fixed_node + row.trips
        assert parts == pytest.approx(row.total_cost, abs=TOL)
    scenario = comparison.set_index("scenario").loc["more supply"]
    assert (scenario.unmet_penalty, scenario.fixed_node, scenario.trips) == pytest.approx((0.0, 20.0, 15.0))


def test_bundled_example_agrees_everywhere(tmp_path):
    outcome = pipeline.run(EXAMPLE, output=tmp_path / "example-solved.xlsx")
    assert_every_output_agrees(outcome, comparison_sheet=True)


def test_lane_rate_in_the_html_has_the_digits_its_cost_needs():
    # The planners' finding: "1.19" per unit beside 140 units and a cost of 166.64. With 4 decimals the rate shown
    # multiplies out to the cost shown (140 x 1.1903 = 166.64).
    import pandas as pd

    from lanesolve.model.network import Settings, make_network
    from lanesolve.model.result import FLOW_COLUMNS, Result, SolveStatus

    network = make_network([{"id": "D", "supply": 140}], [{"id": "C", "demand": 140}],
                           [{"origin": "D", "destination": "C", "cost_per_unit": 166.64 / 140}],
                           settings=Settings(units="pallets", currency="EUR"))
    flows = pd.DataFrame([["D", "C", "", 140.0, 166.64 / 140, 166.64, 0.0, math.inf, math.nan]], columns=FLOW_COLUMNS)
    result = Result(SolveStatus.OPTIMAL, total_cost=166.64, cost_breakdown={"transport": 166.64}, flows=flows)
    (row,), _more = summary._lane_rows(result, "pallets", "EUR")
    assert row["cost_per_unit"] == "1.1903" and row["variable_cost"] == "166.64"
    assert round(140 * float(row["cost_per_unit"]), 2) == 166.64
