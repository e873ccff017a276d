"""The summary's depot and hub tables at scale (lanesolve.report.utilisation): a long table is cut to the nodes at
their limit, closed or in the chart, then the busiest; a short one is listed whole, as before.

The large network is solved through the pipeline and every figure the page shows is checked against the result
sheet *LS Nodes* of the written workbook, read back with openpyxl (a reader outside lanesolve), and the page is
parsed with the standard library's :class:`html.parser.HTMLParser`. Which hubs bind is also known by construction
(stated beside the network), so the sheet itself is checked first.
"""

from __future__ import annotations

import base64
import math
import random
import re
from html.parser import HTMLParser

import openpyxl
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lanesolve import pipeline
from lanesolve.model.network import make_network
from lanesolve.model.result import FLOW_COLUMNS, NODE_COLUMNS, Result, SolveStatus
from lanesolve.report import charts, summary, text, utilisation
from tests.test_report import make_info

# ------------------------------------------------------------------------------------------------ page reading


class Tables(HTMLParser):
    """The page's tables under their headings (``h2``/``h3`` text), the text of each ``<p id=...>`` and the images'
    ``alt`` and ``src``."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.heading, self.in_heading = "", False
        self.tables: dict[str, list[list[str]]] = {}
        self.rows: list[list[str]] | None = None
        self.cell: list[str] | None = None
        self.paragraph: str | None = None
        self.paragraphs: dict[str, str] = {}
        self.images: list[dict] = []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("h2", "h3"):
            self.heading, self.in_heading = "", True
        elif tag == "table":
            self.rows = self.tables.setdefault(self.heading, [])
        elif tag == "tr" and self.rows is not None:
            self.rows.append([])
        elif tag in ("td", "th") and self.rows is not None:
            self.cell = []
        elif tag == "p" and "id" in attrs:
            self.paragraph = attrs["id"]
            self.paragraphs[self.paragraph] = ""
        elif tag == "img":
            self.images.append(attrs)

    def handle_endtag(self, tag):
        if tag in ("h2", "h3"):
            self.in_heading = False
        elif tag == "table":
            self.rows = None
        elif tag in ("td", "th") and self.cell is not None:
            self.rows[-1].append(" ".join("".join(self.cell).split()))
            self.cell = None
        elif tag == "p":
            self.paragraph = None

    def handle_data(self, data):
        if self.in_heading:
            self.heading += data.strip()
        if self.cell is not None:
            self.cell.append(data)
        if self.paragraph is not None:
            self.paragraphs[self.paragraph] += data


def read_page(page: str) -> Tables:
    parser = Tables()
    parser.feed(page)
    parser.close()
    return parser


def number(cell: str) -> float:
    """A figure as the page shows it ("1,234.50 pallets", "87.5 %") as a float."""
    return float(cell.split()[0].replace(",", ""))


def chart_entries(page: Tables) -> dict[str, str]:
    """The utilisation chart's nodes and what it says of each ("100 %", "no limit"), from its alt text."""
    alt = next(image["alt"] for image in page.images if image["alt"].startswith("Utilisation: "))
    entries = alt[len("Utilisation: "):].rstrip(".").split("; ")
    found = {}
    for entry in entries:  # "<node> no limit" or "<node> <percent> %", then "and N more"
        if re.fullmatch(r"and [\d,]+ more", entry):
            continue
        if entry.endswith(" no limit"):
            found[entry[:-len(" no limit")]] = "no limit"
        else:
            name, percent, _ = entry.rsplit(" ", 2)
            found[name] = f"{percent} %"
    return found


def sheet_nodes(path) -> pd.DataFrame:
    """The result sheet LS Nodes of a written workbook, columns named by the start of their headers."""
    book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    rows = list(book["LS Nodes"].iter_rows(values_only=True))
    book.close()
    names = [str(h).split(" (")[0].lower() for h in rows[0]]
    return pd.DataFrame(rows[1:], columns=names)


# ------------------------------------------------------------------------------------------------ the large network


def large_sheets() -> dict[str, list[list]]:
    """120 depots, 300 hubs, 40 customers and 600 lanes, invented; what binds is known by construction.

    Hub i (H001 = 0) takes goods from depot i mod 120 and delivers to customer i mod 40, so customer c can be served
    from depots c, c + 40 and c + 80 only (60 units of supply for a demand of 45: at least two of them ship most of
    their supply). H001-H030 have room for 4 units on a route costing 2 per unit, against 6 or more through any open
    hub without a limit: every one of them is full in any cheapest plan. H031-H040 are the cheapest routes of all
    but given ``closed``: they carry nothing.
    """
    depots = [["depot", "supply"]] + [[f"D{d + 1:03d}", 20] for d in range(120)]
    customers = [["customer", "demand"]] + [[f"C{c + 1:02d}", 45] for c in range(40)]
    hubs = [["hub", "capacity", "status"]]
    lanes = [["origin", "destination", "cost_per_unit"]]
    for i in range(300):
        hub = f"H{i + 1:03d}"
        if i < 30:
            hubs.append([hub, 4, "open"])
            inbound, outbound = 1.0, 1.0
        elif i < 40:
            hubs.append([hub, None, "closed"])
            inbound, outbound = 0.5, 0.5
        else:
            hubs.append([hub, None, "open"])
            inbound, outbound = 5.0 + i % 7, 1.0 + (i % 11) / 10
        lanes.append([f"D{i % 120 + 1:03d}", hub, inbound])
        lanes.append([hub, f"C{i % 40 + 1:02d}", outbound])
    return {"Depots": depots, "Customers": customers, "Hubs": hubs, "Lanes": lanes}


@pytest.fixture(scope="module")
def large_run(tmp_path_factory):
    from conftest import write_workbook

    folder = tmp_path_factory.mktemp("long-tables")
    book = write_workbook(folder / "long.xlsx", large_sheets())
    outcome = pipeline.run(book, output=folder / "solved.xlsx")
    page = (folder / "solved-summary.html").read_text(encoding="utf-8")
    return outcome, read_page(page), sheet_nodes(folder / "solved.xlsx")


def test_the_sheet_has_the_network_the_construction_promises(large_run):
    # By construction (large_sheets): H001-H030 full at 4 units, H031-H040 closed and empty.
    _, _, sheet = large_run
    hubs = sheet[sheet["kind"] == "hub"].set_index("node")
    assert len(hubs) == 300 and len(sheet[sheet["kind"] == "depot"]) == 120
    assert all(hubs.loc[f"H{i:03d}", "throughput"] == pytest.approx(4.0) for i in range(1, 31))
    assert all(hubs.loc[f"H{i:03d}", "throughput"] == pytest.approx(0.0) for i in range(31, 41))


def _shown(page: Tables, heading: str) -> list[list[str]]:
    rows = page.tables[heading]
    return rows[1:]  # the header row first


def test_a_long_hub_table_lists_every_full_and_closed_hub_then_the_busiest(large_run):
    outcome, page, sheet = large_run
    hubs = sheet[sheet["kind"] == "hub"].set_index("node")
    rows = _shown(page, "Hubs")
    shown = [row[0] for row in rows]
    full = set(hubs.index[hubs["utilisation"] >= 0.999])  # a blank (no limit) is never full
    closed = {f"H{i:03d}" for i in range(31, 41)}  # given closed in the workbook
    assert full == {f"H{i:03d}" for i in range(1, 31)}  # the sheet agrees with the construction
    assert full <= set(shown) and closed <= set(shown)
    # 30 full + 10 closed leave room for 10 of the busiest: the cap of 50 rows the README documents.
    assert len(shown) == utilisation.NODE_TABLE_ROWS == 50
    fillers = [n for n in shown if n not in full | closed]
    hidden = set(hubs.index) - set(shown)
    assert max(hubs.loc[list(hidden), "throughput"]) <= min(hubs.loc[fillers, "throughput"]) + 1e-9
    # The order: at the limit first, closed last, the busiest between them by throughput.
    assert set(shown[:30]) == full and set(shown[-10:]) == closed
    assert [hubs.loc[n, "throughput"] for n in fillers] == sorted(hubs.loc[fillers, "throughput"], reverse=True)
    # The count line: 300 hubs in LS Nodes, 50 listed.
    assert re.search(r"… and ([\d,]+) more hubs", page.paragraphs["more-hubs"]).group(1) == "250"
    assert "LS Nodes" in page.paragraphs["more-hubs"]


def test_a_long_depot_table_keeps_every_depot_at_its_limit_past_the_cap(large_run):
    _, page, sheet = large_run
    depots = sheet[sheet["kind"] == "depot"].set_index("node")
    shown = [row[0] for row in _shown(page, "Depots")]
    full = set(depots.index[depots["utilisation"] >= 0.999])
    # Each customer's 45 units come from three depots of 20 (large_sheets): at least 40 depots are full.
    assert len(full) >= 40
    assert full <= set(shown)
    assert len(shown) >= max(len(full), utilisation.NODE_TABLE_ROWS)
    more = int(re.search(r"… and ([\d,]+) more depots?", page.paragraphs["more-depots"]).group(1))
    assert more == 120 - len(shown) > 0


def test_the_rows_shown_agree_with_the_result_sheet(large_run):
    # Every figure of every row listed, against LS Nodes (to the page's 2 decimals and 0.1 % shares).
    _, page, sheet = large_run
    figures = sheet.set_index("node")
    for row in _shown(page, "Hubs"):
        name, capacity, throughput, use = row
        node = figures.loc[name]
        if pd.isna(node["capacity"]):  # the sheet's blank: no limit
            assert capacity == "no limit" and use == "no limit"
        else:
            assert number(capacity) == pytest.approx(node["capacity"], abs=0.005)
            assert number(use) == pytest.approx(100 * node["utilisation"], abs=0.05)
        assert number(throughput) == pytest.approx(node["throughput"], abs=0.005)
    for row in _shown(page, "Depots"):
        name, supply, net, shipped, received, use = row
        node = figures.loc[name]
        assert number(supply) == pytest.approx(node["supply"], abs=0.005)
        assert number(net) == pytest.approx(node["shipped"] - node["received"], abs=0.005)
        assert number(shipped) == pytest.approx(node["shipped"], abs=0.005)
        assert number(received) == pytest.approx(node["received"], abs=0.005)
        assert number(use) == pytest.approx(100 * node["utilisation"], abs=0.05)


def test_the_utilisation_chart_draws_only_nodes_its_tables_list_with_the_same_share(large_run):
    _, page, sheet = large_run
    listed = {row[0]: row for heading in ("Depots", "Hubs") for row in _shown(page, heading)}
    figures = sheet.set_index("node")
    drawn = chart_entries(page)
    assert len(drawn) == charts.MAX_UTILISATION_ROWS
    for name, said in drawn.items():
        assert name in listed
        share = figures.loc[name, "utilisation"]
        # The chart rounds to whole percent, the table to one decimal: both from the sheet's share.
        assert said == f"{share * 100:.0f} %"
        assert number(listed[name][-1]) == pytest.approx(100 * share, abs=0.05)
    svg = base64.b64decode(next(i["src"] for i in page.images if i["alt"].startswith("Utilisation: "))
                           .split(",", 1)[1]).decode()
    assert f"and {420 - 30:,d} more (the result sheet LS Nodes lists every one)" in svg


def test_the_mail_text_part_counts_the_nodes_left_out(large_run):
    outcome, page, _ = large_run
    plain = text.render_text(outcome.network, outcome.result, outcome.info, outcome.warnings)
    depots_more = re.search(r"… and ([\d,]+) more depot", page.paragraphs["more-depots"]).group(1)
    assert f"... and {depots_more} more depots: the result sheet LS Nodes lists every depot and hub" in plain
    assert "... and 250 more hubs: the result sheet LS Nodes lists every depot and hub" in plain
    assert plain.count(" (hub): ") == 50


# ------------------------------------------------------------------------------------------------ hand-built plans


def hub_plan(count: int, throughput=lambda i: float(i % 7)) -> tuple:
    """One depot and ``count`` hubs without limits, the plan's figures chosen (not solved)."""
    hubs = [{"id": f"H{i:04d}"} for i in range(count)]
    lanes = [{"origin": "D", "destination": h["id"], "cost_per_unit": 1.0} for h in hubs]
    lanes += [{"origin": h["id"], "destination": "C", "cost_per_unit": 1.0} for h in hubs]
    total = sum(throughput(i) for i in range(count))
    net = make_network([{"id": "D", "supply": total}], [{"id": "C", "demand": total}], lanes, hubs=hubs)
    nodes = [["D", "depot", total, math.nan, total, 0.0, math.nan, math.nan, math.nan, 1.0],
             ["C", "customer", math.nan, total, 0.0, total, 0.0, math.nan, math.nan, math.nan]]
    nodes += [[f"H{i:04d}", "hub", math.nan, math.nan, throughput(i), throughput(i), math.nan, math.inf,
               throughput(i), math.nan] for i in range(count)]
    flows = pd.DataFrame([["D", "C", "", total, 2.0, 2 * total, 0.0, math.inf, math.nan]], columns=FLOW_COLUMNS)
    result = Result(SolveStatus.OPTIMAL, total_cost=2 * total, flows=flows,
                    nodes=pd.DataFrame(nodes, columns=NODE_COLUMNS),
                    cost_breakdown={"transport": 2 * total, "handling": 0.0, "fixed_lane": 0.0, "unmet_penalty": 0.0})
    return net, result


def test_a_table_of_100_hubs_is_listed_whole_in_sheet_order():
    # The README: up to 100 of a kind, every one in the workbook's order and no count line.
    net, result = hub_plan(100)
    page = read_page(summary.render_html(net, result, make_info(), []))
    assert [row[0] for row in _shown(page, "Hubs")] == [f"H{i:04d}" for i in range(100)]
    assert "more-hubs" not in page.paragraphs


def test_a_table_of_101_hubs_is_cut_to_the_busiest():
    # One hub more than the README's 100: 50 rows, the busiest first; the 101 rows before the cut.
    net, result = hub_plan(101)
    page = read_page(summary.render_html(net, result, make_info(), []))
    shown = [row[0] for row in _shown(page, "Hubs")]
    assert len(shown) == 50
    used = {f"H{i:04d}": float(i % 7) for i in range(101)}
    assert [used[n] for n in shown] == sorted((used[n] for n in shown), reverse=True)
    # Besides the 29 hubs the chart draws (by name: no hub has a limit), the busiest.
    charted = {f"H{i:04d}" for i in range(29)}
    assert charted <= set(shown)
    assert min(used[n] for n in set(shown) - charted) >= max(used[n] for n in set(used) - set(shown))
    assert page.paragraphs["more-hubs"].split(";")[0] == "… and 51 more hubs"


def test_hubs_the_chart_draws_are_listed_even_when_idle():
    # Without limits, the chart draws hubs by name (H0000 first), however little they carry: the table must list
    # them although busier hubs are left out.
    net, result = hub_plan(150, throughput=lambda i: 0.0 if i < 40 else float(i))
    page = read_page(summary.render_html(net, result, make_info(), []))
    shown = [row[0] for row in _shown(page, "Hubs")]
    drawn = [name for name in chart_entries(page) if name.startswith("H")]
    assert drawn == [f"H{i:04d}" for i in range(29)]  # the depot first, then 29 hubs by name
    assert set(drawn) <= set(shown)
    assert len(shown) == 50 and shown[:21] == [f"H{i:04d}" for i in range(149, 128, -1)]


# ------------------------------------------------------------------------------------------------ same rows, faster


def rows_one_by_one(result: Result) -> list[dict]:
    """The row-by-row pass :func:`lanesolve.report.utilisation.utilisation_rows` replaced, kept as its reference:
    the column-at-a-time code must give the very same rows in the very same order."""
    nodes = result.nodes
    rows = []
    for node in nodes[nodes["kind"].isin(["depot", "hub"])].itertuples(index=False):
        if node.kind == "depot":
            limit = charts._finite(node.supply)
            used = (charts._finite(node.shipped) or 0.0) - (charts._finite(node.received) or 0.0)
        else:
            limit = charts._finite(node.capacity)
            used = charts._finite(node.throughput) or 0.0
        share = charts._finite(node.utilisation)
        if share is None and limit:
            share = used / limit
        rows.append({"node": str(node.node), "kind": str(node.kind), "used": used, "limit": limit, "share": share})
    rows.sort(key=lambda r: (-(r["share"] if r["share"] is not None else -1.0), r["node"]))
    return rows


FIGURES = st.sampled_from([0.0, -0.0, 1.0, 2.5, 10.0, 40.0, math.nan, math.inf])


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["depot", "hub", "customer"]), st.sampled_from("ABCDE"),
                          FIGURES, FIGURES, FIGURES, FIGURES, st.sampled_from([0.0, 0.5, 1.0, math.nan])),
                max_size=60),
       st.one_of(st.none(), st.integers(0, 35)))
def test_utilisation_rows_are_those_of_the_row_by_row_pass(nodes, top):
    # Few names and few values, so ties in share and name are common; NaN, inf and -0.0 where a figure can be.
    frame = pd.DataFrame([[f"{name}{kind[0]}", kind, supply, math.nan, shipped, received, math.nan, capacity,
                           shipped if kind == "hub" else math.nan, share]
                          for kind, name, supply, shipped, received, capacity, share in nodes], columns=NODE_COLUMNS)
    result = Result(SolveStatus.OPTIMAL, nodes=frame)
    expected = rows_one_by_one(result)
    got = utilisation.utilisation_rows(result, top)
    want = expected if top is None else expected[:top]
    assert repr(got) == repr(want)  # repr: -0.0 and 0.0, None and NaN told apart


def test_the_lanes_table_is_that_of_a_sort_of_every_lane():
    # The lanes table sorts only the lanes that can be among its first 25; with many ties in cost, the rows must be
    # those of the full stable sort (costs drawn from few values, names in shuffled order).
    rng = random.Random(7)
    records = [[f"O{rng.randrange(5)}", f"T{rng.randrange(5)}", f"m{i}", 1.0, 1.0,
                float(rng.choice([1, 2, 3, 5, 8])), float(rng.choice([0, 0, 10])), math.inf, math.nan]
               for i in range(400)]
    flows = pd.DataFrame(records, columns=FLOW_COLUMNS)
    everything = flows.assign(total_cost=flows["variable_cost"] + flows["fixed_charge"]).sort_values(
        ["total_cost", "origin", "destination", "mode"], ascending=[False, True, True, True], kind="stable")
    rows, more = summary._lane_rows(Result(SolveStatus.OPTIMAL, flows=flows), "", "")
    assert [(r["origin"], r["destination"], r["mode"]) for r in rows] == \
        list(everything[["origin", "destination", "mode"]].head(summary.TOP_LANES).itertuples(index=False, name=None))
    assert more == 400 - summary.TOP_LANES
