"""The "What to do next" section (HTML, mail, terminal), the scenario comparison on the terminal and in the mail,
and names with line breaks in every output."""

from __future__ import annotations

import email
import html
import math

import openpyxl
import pandas as pd
import pytest
from click.testing import CliRunner

from conftest import write_workbook
from lanesolve import pipeline
from lanesolve.cli import main
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import Result, SolveStatus
from lanesolve.report import advice
from lanesolve.report import text as text_module
from lanesolve.report.mail import build_email
from test_cost_agreement import EVERY_COST


def tiny_network():
    return make_network([{"id": "Kestrel", "supply": 50}], [{"id": "Brisk", "demand": 40, "unmet_penalty": 6}],
                        [{"origin": "Kestrel", "destination": "Brisk", "cost_per_unit": 3}],
                        settings=Settings(units="pallets", currency="EUR"))


def plan(sensitivity: pd.DataFrame, unmet: pd.DataFrame | None = None) -> Result:
    result = Result(SolveStatus.OPTIMAL, total_cost=1.0, sensitivity=sensitivity)
    if unmet is not None:
        result.unmet = unmet
    return result


def figures(rows: list[tuple], extra: dict | None = None) -> pd.DataFrame:
    frame = pd.DataFrame(rows, columns=["figure", "item", "value", "unique"])
    for name, values in (extra or {}).items():
        frame[name] = values
    return frame


def test_next_steps_name_the_binding_capacities_worth_most_first():
    frame = figures([("lane_capacity_value", "A -> B (road)", 3.0, True), ("supply_value", "Kestrel", 7.5, True),
                     ("hub_capacity_value", "Midway", 0.001, True),  # round-off, not advice
                     ("supply_value", "Orwin", 1.25, True), ("trip_capacity_value", "C -> D", 2.0, True)])
    steps = advice.next_steps(tiny_network(), plan(frame))
    assert steps == [
        "Raise the supply of depot Kestrel: it is used to its limit, and each extra pallet would save 7.50 EUR.",
        "Raise the capacity of lane A→B (road): it is used to its limit, and each extra pallet would save 3.00 EUR.",
        "Raise the room in the planned trips on lane C→D: it is used to its limit, and each extra pallet would "
        "save 2.00 EUR.",
    ]  # the top three by value; Orwin (1.25) is fourth and Midway is below a cent


def test_next_steps_quote_value_up_when_the_frame_has_it_and_skip_unknown_figures():
    frame = figures([("supply_value", "Kestrel", math.nan, False), ("supply_value", "Orwin", math.nan, False)],
                    extra={"value_up": [4.0, math.nan], "value_down": [9.0, math.nan]})
    steps = advice.next_steps(tiny_network(), plan(frame))
    assert steps[0].endswith("each extra pallet would save 4.00 EUR.") and "Orwin" not in " ".join(steps)


def test_next_steps_tolerate_a_frame_with_only_figure_item_value():
    frame = pd.DataFrame({"figure": ["reduced_cost"], "item": ["A -> B"], "value": [0.4]})
    assert advice.next_steps(tiny_network(), plan(frame)) == [
        "Nearest to paying: lane A→B would be used if it cost 0.40 EUR per pallet less."]


def test_short_customer_sentence_gives_the_penalty_and_the_way_out():
    frame = figures([("marginal_cost", "Brisk", 6.0, True)])
    unmet = pd.DataFrame({"customer": ["Brisk"], "quantity": [20.0], "penalty": [120.0]})
    (step,) = advice.next_steps(tiny_network(), plan(frame, unmet))
    assert step.startswith("Brisk is 20 pallets short of its demand of 40 pallets: one more pallet there would cost "
                           "at least its unmet penalty of 6.00 EUR per pallet — the cost of the route plus what it "
                           "would take from capacities used to their limit — so the plan pays the penalty.")
    assert "raise a full capacity on the way, make a route to it cheaper, or raise its penalty" in step


def test_near_miss_lanes_are_the_smallest_reduced_costs():
    frame = figures([("reduced_cost", "A -> B", 5.0, True), ("reduced_cost", "A -> C", 0.5, True),
                     ("reduced_cost", "A -> D", 0.0, True), ("reduced_cost", "A -> E", 2.0, True),
                     ("reduced_cost", "A -> F", 9.0, True), ("reduced_cost", "A -> G", 1.0, False)])
    steps = advice.next_steps(tiny_network(), plan(frame))
    assert [s.split(" would")[0] for s in steps] == ["Nearest to paying: lane A→C", "Nearest to paying: lane A→E",
                                                     "Nearest to paying: lane A→B"]


def test_near_miss_lanes_with_ties_match_a_full_sort_of_every_lane():
    # Independent check: sort every unused lane by (value, name) in plain Python, as a planner would, and take
    # the first three; the summary must name the same three however many lanes tie at the cut.
    import random

    rng = random.Random(11)
    rows = [("reduced_cost", f"L{k:04d} -> C (road)", float(rng.choice([0.0, 0.25, 0.5, 0.5, 0.5, 1.0, 2.0])), True)
            for k in range(400)]
    rng.shuffle(rows)
    steps = advice._near_misses(plan(figures(rows)), "pallets", "EUR")
    expected = sorted((value, item) for _, item, value, _ in rows if value > advice.MONEY_EPSILON)[:advice.TOP]
    assert [s.split("lane ")[1].split(" would")[0] for s in steps] == [advice._lane(i) for _, i in expected]


def test_cheapest_scenario_is_named_with_its_saving():
    comparison = pd.DataFrame({"scenario": ["baseline", "diesel up", "new hub", "closed bridge"],
                               "total_cost": [1000.0, 1100.0, 900.0, math.nan],
                               "delta_cost": [0.0, 100.0, -100.0, math.nan],
                               "delta_pct": [0.0, 10.0, -10.0, math.nan]})
    steps = advice.next_steps(tiny_network(), plan(figures([])), comparison)
    assert steps == ["Of the baseline and 3 scenarios, new hub is cheapest at 900.00 EUR, 100.00 EUR less than the "
                     "baseline (-10.0 %) (closed bridge: no plan)."]


def test_html_mail_and_terminal_carry_the_same_next_steps(tmp_path):
    outcome = pipeline.run(write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST))
    steps = advice.next_steps(outcome.network, outcome.result, outcome.comparison)
    # by hand (test_cost_agreement.EVERY_COST): one more pallet of Kestrel's supply goes to Brisk and saves its
    # penalty of 6 less the 3 + 1 it costs to deliver: 2
    assert steps[0] == ("Raise the supply of depot Kestrel: it is used to its limit, and each extra pallet would "
                        "save 2.00 EUR.")
    assert any(s.startswith("Brisk is 20 pallets short") for s in steps)
    assert steps[-1].startswith("Of the baseline and 1 scenario, more supply is cheapest at 300.00 EUR")
    page = open(outcome.info.summary_path, encoding="utf-8").read()
    assert '<h2 id="next-steps">What to do next</h2>' in page
    assert all(f"<li>{html.escape(s, quote=True)}</li>" in page for s in steps)
    text = text_module.render_text(outcome.network, outcome.result, outcome.info, [], outcome.comparison)
    assert all(f"  - {s}" in text for s in steps)
    lines = text_module.terminal_lines(outcome.network, outcome.result, outcome.info, outcome.comparison)
    assert "What to do next:" in lines and all(f"  - {s}" in lines for s in steps)


def test_terminal_prints_the_scenario_comparison_after_the_baseline(tmp_path):
    path = write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST)
    run = CliRunner().invoke(main, ["solve", str(path)])
    assert run.exit_code == 0, run.output
    out = run.output.splitlines()
    # by hand (test_cost_agreement.EVERY_COST): baseline 340, more supply 300 with nobody short
    assert out.index("Total cost: 340.00 EUR") < out.index(
        "Scenarios (total cost, change against the baseline, not delivered):")
    assert "  baseline: 340.00 EUR, 20 pallets not delivered" in out
    assert "  more supply: 300.00 EUR (-40.00 EUR, -11.8 %), 0 pallets not delivered" in out


def test_mail_carries_the_what_if_scenarios(tmp_path):
    outcome = pipeline.run(write_workbook(tmp_path / "every-cost.xlsx", EVERY_COST))
    message = email.message_from_bytes(build_email(outcome.network, outcome.result, outcome.info, [],
                                                   comparison=outcome.comparison).as_bytes())
    parts = {p.get_content_type(): p.get_payload(decode=True).decode() for p in message.walk()
             if p.get_content_type() in ("text/plain", "text/html")}
    assert '<h2 id="scenarios">What-if scenarios</h2>' in parts["text/html"]
    text = parts["text/plain"].replace("\r\n", "\n")
    assert "What-if scenarios (change against the baseline)" in text
    assert "  more supply (optimal): 300.00 EUR, -40.00 EUR (-11.8 %); not delivered 0 pallets" in text


def test_line_break_in_the_workbook_name_is_safe_in_every_output(tmp_path):
    path = write_workbook(tmp_path / "week\n12.xlsx", EVERY_COST)
    mail = tmp_path / "plan.eml"
    run = CliRunner().invoke(main, ["solve", str(path), "--email", str(mail), "--attach-workbook"])
    assert run.exit_code == 0, run.output  # the planners' finding: a traceback from --email
    message = email.message_from_bytes(mail.read_bytes())
    assert message["Subject"] == "Lane plan week 12.xlsx: Optimal plan, total cost 340.00 EUR"
    attached = next(p for p in message.walk() if (p.get_filename() or "").endswith(".xlsx"))
    assert attached.get_filename() == "week 12.xlsx"
    assert "\n" not in message["Subject"] and "Results written to " in run.output
    page = (tmp_path / "week\n12-summary.html").read_text(encoding="utf-8")
    assert "week\n12.xlsx" in page  # HTML text may hold a line break; the browser shows it as a space
    book = openpyxl.load_workbook(path)  # the sheets keep the name as it is, inside a cell
    items = {r[0]: r[1] for r in book["LS Summary"].iter_rows(min_row=2, values_only=True)}
    assert items["Input file"] == str(path)


@pytest.mark.parametrize("name", ["Brisk\nNorth", "Brisk\r\nNorth"])
def test_line_break_in_an_id_is_safe_in_the_mail_and_the_terminal(tmp_path, name):
    sheets = {k: [list(r) for r in v] for k, v in EVERY_COST.items()}
    sheets["Customers"][2][0] = name
    sheets["Lanes"][2][1] = name
    outcome = pipeline.run(write_workbook(tmp_path / "ids.xlsx", sheets))
    message = build_email(outcome.network, outcome.result, outcome.info, [], comparison=outcome.comparison)
    assert message.as_bytes()  # renders without an error
    lines = text_module.terminal_lines(outcome.network, outcome.result, outcome.info, outcome.comparison)
    assert all("\n" not in line and "\r" not in line for line in lines)
