"""The HTML summary: escaping, self-containment, the caution line, KPIs, the no-plan page, atomic writing.

The page is parsed with the standard library's :class:`html.parser.HTMLParser` (a parser outside lanesolve), so the
checks look at what a browser would see -- tags and text -- rather than at substrings of our own template.
"""

from __future__ import annotations

import math
import os
from html.parser import HTMLParser
from types import SimpleNamespace

import pandas as pd
import pytest

from lanesolve.report import summary as report
from lanesolve.errors import WriteError
from lanesolve.model.network import Settings, make_network
from lanesolve.model.result import FLOW_COLUMNS, NODE_COLUMNS, UNMET_COLUMNS, Result, SolveStatus

EVIL = "<script>alert(1)</script>"
FORMULA = "=SUM(A1)"


def make_info(input_path="plans/north-week.xlsx"):
    """RunInfo when the pipeline module can be imported; otherwise a stand-in with the same fields.

    lanesolve.pipeline imports every stage module, some of which are written in parallel with this one; the report
    reads only these attributes, so the stand-in exercises the same code.
    """
    fields = dict(input_path=input_path, output_path=input_path, summary_path="plans/north-week-summary.html",
                  checksum="ab" * 32)
    try:
        from lanesolve.pipeline import RunInfo
    except ImportError:
        return SimpleNamespace(version="0.0.0", started="2024-03-04T05:06:07+00:00", **fields)
    return RunInfo(**fields, started="2024-03-04T05:06:07+00:00")


class PageText(HTMLParser):
    """Collects the tags and the visible text of a page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str | None]] = []
        self.chunks: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.extend(attrs)

    def handle_data(self, data):
        self.chunks.append(data)

    @property
    def text(self) -> str:
        return " ".join(" ".join(self.chunks).split())


def parse(page: str) -> PageText:
    parser = PageText()
    parser.feed(page)
    parser.close()
    return parser


@pytest.fixture
def network():
    # Two depots, a hub and three customers, one of them named like an attack and one like a formula.
    return make_network(
        depots=[{"id": "North", "supply": 100}, {"id": "South", "supply": 80}],
        customers=[{"id": EVIL, "demand": 40}, {"id": FORMULA, "demand": 50, "unmet_penalty": 9.5},
                   {"id": "Plain", "demand": 60}],
        hubs=[{"id": "Cross", "capacity": 70}],
        lanes=[{"origin": "North", "destination": EVIL, "cost_per_unit": 3},
               {"origin": "North", "destination": "Cross", "cost_per_unit": 1},
               {"origin": "Cross", "destination": "Plain", "cost_per_unit": 2, "capacity": 60},
               {"origin": "South", "destination": FORMULA, "cost_per_unit": 12.25, "fixed_cost": 100}],
        settings=Settings(units="pallets", currency="EUR"),
    )


@pytest.fixture
def result():
    # A hand-built plan for the network above; the figures are chosen, not solved, and add up by construction:
    # transport 40*3 + 60*1 + 60*2 + 30*12.25 = 667.5, fixed 100, penalty 20 * 9.5 = 190.
    flows = pd.DataFrame([
        ["North", EVIL, "", 40.0, 3.0, 120.0, 0.0, math.inf, math.nan],
        ["North", "Cross", "", 60.0, 1.0, 60.0, 0.0, math.inf, math.nan],
        ["Cross", "Plain", "", 60.0, 2.0, 120.0, 0.0, 60.0, 1.0],
        ["South", FORMULA, "", 30.0, 12.25, 367.5, 100.0, math.inf, math.nan],
    ], columns=FLOW_COLUMNS)
    nodes = pd.DataFrame([
        ["North", "depot", 100.0, math.nan, 100.0, 0.0, math.nan, math.nan, math.nan, 1.0],
        ["South", "depot", 80.0, math.nan, 30.0, 0.0, math.nan, math.nan, math.nan, 0.375],
        [EVIL, "customer", math.nan, 40.0, 0.0, 40.0, 0.0, math.nan, math.nan, math.nan],
        [FORMULA, "customer", math.nan, 50.0, 0.0, 30.0, 20.0, math.nan, math.nan, math.nan],
        ["Plain", "customer", math.nan, 60.0, 0.0, 60.0, 0.0, math.nan, math.nan, math.nan],
        ["Cross", "hub", math.nan, math.nan, 60.0, 60.0, math.nan, 70.0, 60.0, 60 / 70],
    ], columns=NODE_COLUMNS)
    unmet = pd.DataFrame([[FORMULA, 20.0, 190.0]], columns=UNMET_COLUMNS)
    breakdown = {"transport": 667.5, "handling": 0.0, "fixed_lane": 100.0, "unmet_penalty": 190.0}
    return Result(SolveStatus.OPTIMAL, total_cost=sum(breakdown.values()), cost_breakdown=breakdown, flows=flows,
                  nodes=nodes, unmet=unmet, mip_gap=0.0, best_bound=957.5, solver="CBC (hand-built)",
                  solve_seconds=0.42, messages=["a note for the planner"])


def test_names_from_the_workbook_are_escaped(network, result):
    page = report.render_html(network, result, make_info(), [])
    parsed = parse(page)
    assert "script" not in parsed.tags
    assert "<script" not in page.lower()
    # The names reach the reader as text, unchanged.
    assert EVIL in parsed.text
    assert FORMULA in parsed.text


def test_page_is_self_contained(network, result):
    import base64
    import xml.etree.ElementTree as ET

    page = report.render_html(network, result, make_info(), ["Lanes row 3, column capacity: number stored as text"])
    parsed = parse(page)
    assert "http" not in page.lower()
    assert "@import" not in page and "url(" not in page
    for tag in ("script", "link", "iframe", "object", "embed", "svg"):
        assert tag not in parsed.tags, tag
    # No link anywhere, and every image is a data: URI, so nothing is fetched when the page or mail is opened.
    assert not [name for name, _ in parsed.attrs if name == "href"]
    sources = [value for name, value in parsed.attrs if name == "src"]
    assert len(sources) == parsed.tags.count("img") == 2  # cost breakdown and utilisation; no coordinates, no map
    prefix = "data:image/svg+xml;base64,"
    for src in sources:
        assert src.startswith(prefix)
        # Each chart is well-formed SVG (parsed by the standard library) with no script and no reference out.
        root = ET.fromstring(base64.b64decode(src[len(prefix):]))
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
        for element in root.iter():
            assert not element.tag.endswith(("script", "image", "foreignObject", "use", "a")), element.tag
            assert not [k for k in element.attrib if k.endswith("href")]


def test_caution_line_present(network, result):
    text = parse(report.render_html(network, result, make_info(), [])).text
    # The sentence the summary promises, word for word.
    assert ("Check every plan against vehicle weight limits, driver working-time rules, hazardous-goods rules and "
            "carrier contracts; local regulations and licensed professionals take precedence.") in text


def test_kpis_match_the_result(network, result):
    text = parse(report.render_html(network, result, make_info(), [])).text
    assert "Total cost 957.50 EUR" in text  # 667.5 + 100 + 190 from the hand-built result
    assert "Units delivered 130 pallets" in text  # demand 150 minus 20 unmet
    assert "Unmet demand 20 pallets" in text
    assert "Lanes used 4" in text
    assert "Solve time 0.42 s" in text
    assert "Optimality gap 0 %" in text
    assert "Status Optimal plan" in text
    assert "north-week.xlsx" in text and "2024-03-04T05:06:07+00:00" in text


def test_cost_breakdown_and_tables(network, result):
    text = parse(report.render_html(network, result, make_info(), [])).text
    assert "Transport 667.50 EUR 69.7 %" in text  # 667.5 / 957.5
    assert "Fixed lane charges 100.00 EUR 10.4 %" in text
    assert "Penalties for unmet demand 190.00 EUR 19.8 %" in text
    # Customers short: demand, quantity, share, per-unit penalty, penalty cost.
    assert f"{FORMULA} 50 pallets 20 pallets 40.0 % 9.50 EUR 190.00 EUR" in text
    # Hub use 60 of 70, depot North at its full supply.
    assert "Cross 70 pallets 60 pallets 85.7 %" in text
    assert "North 100 pallets 100 pallets 100 pallets 0 pallets 100.0 %" in text
    assert "a note for the planner" in text


def test_lanes_sorted_by_cost_and_truncated():
    # 30 parallel lanes with distinct costs: the page shows the 25 dearest, dearest first, and says "5 more".
    lanes = [{"origin": "D", "destination": "C", "mode": f"m{i:02d}", "cost_per_unit": float(i)} for i in range(30)]
    net = make_network([{"id": "D", "supply": 30}], [{"id": "C", "demand": 30}], lanes)
    flows = pd.DataFrame([["D", "C", f"m{i:02d}", 1.0, float(i), float(i), 0.0, math.inf, math.nan]
                          for i in range(30)], columns=FLOW_COLUMNS)
    res = Result(SolveStatus.OPTIMAL, total_cost=435.0, flows=flows,
                 cost_breakdown={"transport": 435.0, "handling": 0.0, "fixed_lane": 0.0, "unmet_penalty": 0.0})
    text = parse(report.render_html(net, res, make_info(), [])).text
    shown = [f"m{i:02d}" for i in range(30) if f" m{i:02d} " in text]
    assert shown == [f"m{i:02d}" for i in range(5, 30)]
    assert text.index(" m29 ") < text.index(" m28 ") < text.index(" m05 ")
    assert "and 5 more lanes" in text


def test_no_plan_result_renders_its_reasons(network):
    reasons = ["total supply 180 is short of hard demand 250 by 70",
               f"customer {EVIL} has hard demand and no active inbound lane"]
    res = Result(SolveStatus.INFEASIBLE, messages=reasons)
    page = report.render_html(network, res, make_info(), [])
    text = parse(page).text
    assert "No plan was made" in text and "infeasible" in text
    for reason in reasons:
        assert reason in text
    assert "<script" not in page.lower()
    assert "Lanes used" not in text and "Cost breakdown" not in text
    assert "licensed professionals take precedence" in text


def test_not_solved_result_says_so(network):
    res = Result(SolveStatus.NOT_SOLVED, messages=["the time limit of 1 s ran out before any plan was found"])
    text = parse(report.render_html(network, res, make_info(), [])).text
    assert "No plan was made" in text and "not_solved" in text
    assert "the time limit of 1 s ran out before any plan was found" in text


def test_feasible_result_is_flagged_as_not_proven(network, result):
    result.status = SolveStatus.FEASIBLE
    result.mip_gap = 0.0123
    text = parse(report.render_html(network, result, make_info(), [])).text
    assert "not proven optimal" in text
    assert "Optimality gap 1.23 %" in text


def test_no_fixed_width_wider_than_a_phone(network, result):
    import re

    page = report.render_html(network, result, make_info(), [])
    # Common practice for mail-friendly pages: no fixed widths above ~360 px so a phone need not scroll sideways.
    for value in re.findall(r"(?<!max-)width:\s*([0-9.]+)px", page):
        assert float(value) <= 360


def test_write_html_is_atomic_and_leaves_no_temp_file(tmp_path, network, result):
    target = tmp_path / "north-week-summary.html"
    target.write_text("old summary", encoding="utf-8")
    report.write_html(target, network, result, make_info(), [])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["north-week-summary.html"]
    assert target.read_text(encoding="utf-8") == report.render_html(network, result, make_info(), [])


def test_write_html_into_missing_folder_raises_write_error(tmp_path, network, result):
    target = tmp_path / "no-such-folder" / "x-summary.html"
    with pytest.raises(WriteError, match="no-such-folder"):
        report.write_html(target, network, result, make_info(), [])
    assert not target.parent.exists()


def test_failed_replace_keeps_old_summary_and_cleans_up(tmp_path, network, result, monkeypatch):
    target = tmp_path / "s-summary.html"
    target.write_text("old summary", encoding="utf-8")

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(WriteError, match="Permission denied"):
        report.write_html(target, network, result, make_info(), [])
    assert target.read_text(encoding="utf-8") == "old summary"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s-summary.html"]


def test_source_checkout_finds_the_templates_beside_the_package(monkeypatch):
    # Running from a source checkout (as CI does after a non-editable install, with the checkout first on sys.path)
    # there is no lanesolve.templates package: the repository's templates/ folder must be found instead.
    from lanesolve.report import summary as summary_module

    def no_package(name):
        raise ModuleNotFoundError(name)

    monkeypatch.setattr(summary_module.resources, "files", no_package)
    assert (summary_module.template_folder() / summary_module.TEMPLATE_NAME).is_file()


def test_two_renders_reuse_one_compiled_template(network, result, monkeypatch):
    # The environment and the compiled template are built once per process: a batch renders a summary (and a mail)
    # per workbook, and rebuilding the environment and recompiling the template each time was a third of the
    # render. Record which template object each render uses.
    import jinja2

    used = []
    render = jinja2.Template.render

    def recording_render(self, *args, **kwargs):
        used.append(self)
        return render(self, *args, **kwargs)

    monkeypatch.setattr(jinja2.Template, "render", recording_render)
    first = report.render_html(network, result, make_info("plans/first-week.xlsx"), [])
    second = report.render_html(network, result, make_info("plans/second-week.xlsx"), [])
    assert len(used) == 2
    assert used[0] is used[1]
    assert report._environment() is report._environment()
    # The reused template still renders each run's own facts, not the first run's.
    assert "first-week.xlsx" in first and "second-week.xlsx" not in first
    assert "second-week.xlsx" in second and "first-week.xlsx" not in second


@pytest.fixture
def fresh_environment(monkeypatch):
    """A new Jinja2 environment for the test (the process keeps one), the suite's own again afterwards."""
    report._environment.cache_clear()
    yield lambda: report._environment.cache_clear()
    monkeypatch.undo()
    report._environment.cache_clear()


def _compiles(monkeypatch) -> list:
    import jinja2

    calls = []
    compile_ = jinja2.Environment.compile

    def counting(self, *args, **kwargs):
        calls.append(args[1] if len(args) > 1 else kwargs.get("name"))
        return compile_(self, *args, **kwargs)

    monkeypatch.setattr(jinja2.Environment, "compile", counting)
    return calls


def test_a_later_process_reuses_the_compiled_template(tmp_path, network, result, monkeypatch, fresh_environment):
    # Jinja2's documentation (API, "Bytecode Cache"): with a bytecode cache a template's compiled code is loaded
    # from the cache instead of being compiled again. A later process is a new environment on the same folder.
    info = make_info()
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", "off")
    plain = report.render_html(network, result, info, [])  # reference: Jinja2 compiling the template itself
    fresh_environment()
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", str(tmp_path))
    calls = _compiles(monkeypatch)
    first = report.render_html(network, result, info, [])
    assert calls == [report.TEMPLATE_NAME] and len(list(tmp_path.iterdir())) == 1
    fresh_environment()
    second = report.render_html(network, result, info, [])
    assert calls == [report.TEMPLATE_NAME]  # no second compile: the code came from the cache
    assert first == plain and second == plain


def test_a_cache_that_cannot_be_written_or_read_is_passed_over(tmp_path, network, result, monkeypatch,
                                                               fresh_environment):
    info = make_info()
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", "off")
    plain = report.render_html(network, result, info, [])  # reference: Jinja2 compiling the template itself
    blocked = tmp_path / "not-a-folder"
    blocked.write_text("a file where the cache folder would be")
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", str(blocked))
    fresh_environment()
    assert report.render_html(network, result, info, []) == plain
    # A damaged entry (here: every entry in the folder overwritten) is compiled afresh, not trusted.
    folder = tmp_path / "cache"
    folder.mkdir()
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", str(folder))
    fresh_environment()
    report.render_html(network, result, info, [])
    for entry in folder.iterdir():
        entry.write_bytes(b"j2\x00damaged")
    fresh_environment()
    calls = _compiles(monkeypatch)
    assert report.render_html(network, result, info, []) == plain
    assert calls == [report.TEMPLATE_NAME]


@pytest.mark.skipif(not hasattr(os, "getuid"), reason="folder owners and modes are POSIX")
def test_a_cache_folder_others_may_write_in_is_never_used(tmp_path, network, result, monkeypatch, fresh_environment):
    # The cache holds compiled code that runs: a folder another user could write in (mode 0o777 here) could hold
    # code planted by them, so it is neither read nor written, and the template is compiled as without a cache.
    info = make_info()
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", "off")
    plain = report.render_html(network, result, info, [])  # reference: Jinja2 compiling the template itself
    shared = tmp_path / "shared"
    shared.mkdir()
    shared.chmod(0o777)
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", str(shared))
    fresh_environment()
    calls = _compiles(monkeypatch)
    assert report.render_html(network, result, info, []) == plain
    assert calls == [report.TEMPLATE_NAME] and not list(shared.iterdir())
    # A folder lanesolve makes itself is the user's alone.
    made = tmp_path / "made" / "cache"
    monkeypatch.setenv("LANESOLVE_TEMPLATE_CACHE", str(made))
    fresh_environment()
    report.render_html(network, result, info, [])
    assert made.stat().st_mode & 0o077 == 0 and len(list(made.iterdir())) == 1
