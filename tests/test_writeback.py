"""Write-back: result sheets added at the zip level, every other part of the workbook kept byte for byte.

The references outside lanesolve are the readers that must accept the file: openpyxl, pandas with the calamine
engine, Python's XML parser (well-formedness), zipfile (member bytes) and, when installed, LibreOffice (a real
spreadsheet program converting a result sheet to CSV). Hand-made Network/Result objects: no solver involved.
"""

from __future__ import annotations

import io
import math
import os
import random
import re
import shutil
import stat
import subprocess
import sys
import threading
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import openpyxl
import pandas as pd
import pytest

sys.path.insert(0, str(Path(__file__).parent))
import _workbooks as wbk  # noqa: E402

from lanesolve.write import atomic
from lanesolve.write import sheetxml  # noqa: E402
from lanesolve.write import writeback  # noqa: E402
from lanesolve.write import zipcopy  # noqa: E402
from lanesolve.contract import RESULT_PREFIX  # noqa: E402
from lanesolve.errors import LanesolveError, WriteError  # noqa: E402
from lanesolve.model.network import Settings, make_network  # noqa: E402
from lanesolve.model.result import COST_COMPONENTS, FLOW_COLUMNS, NODE_COLUMNS, Result, SolveStatus  # noqa: E402
from lanesolve.write.writeback import CAUTION, ResultSheet, result_sheets, write_results  # noqa: E402

try:  # the run facts; pipeline imports every stage, so fall back to the same fields while a stage is missing
    from lanesolve.pipeline import RunInfo
except ImportError:  # pragma: no cover - depends on the state of the other stages
    def RunInfo(input_path, output_path, summary_path, checksum, version="0.1.0", started="2024-05-01T10:00:00+02:00"):
        return SimpleNamespace(input_path=input_path, output_path=output_path, summary_path=summary_path,
                               checksum=checksum, version=version, started=started)

FORMULA_NAME = "=SUM(A1)"
# A plan without design decisions: the three basic sheets plus the sensitivity sheet; design, trips and why-no-plan sheets
# appear only when they apply (tests/test_insight_output.py).
NEW_NAMES = ["LS Summary", "LS Lane flows", "LS Nodes", "LS Sensitivity"]


EDITED_PARTS = wbk.EDITED_PARTS
#: The defined names the writer adds to workbook.xml: the mark and each result sheet's print titles.
OUR_NAMES = (r'<definedName name="(_lanesolve_result_sheets|_xlnm.Print_Titles)"[^>]*>[^<]*</definedName>|'
             r'<definedNames>(<definedName name="(_lanesolve_result_sheets|_xlnm.Print_Titles)"[^>]*>[^<]*'
             r'</definedName>)*</definedNames>')


def mark_as_results(path: Path, names: list[str]) -> None:
    """Give a workbook the mark an earlier run would have left, listing ``names`` as its result sheets."""
    text = wbk.members(path)["xl/workbook.xml"].decode()
    mark = f'<definedName name="_lanesolve_result_sheets" hidden="1">&quot;{";".join(names)}&quot;</definedName>'
    text = text.replace("</definedNames>", mark + "</definedNames>") if "</definedNames>" in text else \
        text.replace("</sheets>", f"</sheets><definedNames>{mark}</definedNames>")
    wbk.rewrite_zip(path, {"xl/workbook.xml": text.encode()})


# ------------------------------------------------------------------------------------------------ fixtures

def small_plan():
    """An invented two-depot network and a plan for it (numbers chosen by hand so every column has a value)."""
    network = make_network(
        depots=[{"id": "Northgate Yard", "supply": 120}, {"id": FORMULA_NAME, "supply": 40}],
        customers=[{"id": "Alder Foods", "demand": 60}, {"id": "Birch & Co <south>", "demand": 90,
                                                          "unmet_penalty": 25}],
        lanes=[
            {"origin": "Northgate Yard", "destination": "Alder Foods", "cost_per_unit": 4.25, "mode": "road",
             "capacity": 100},
            {"origin": FORMULA_NAME, "destination": "Birch & Co <south>", "cost_per_unit": 3.1, "fixed_cost": 50},
            {"origin": "Northgate Yard", "destination": "Birch & Co <south>", "cost_per_unit": 5.0},
            {"origin": "Northgate Yard", "destination": "Alder Foods", "cost_per_unit": 1.0, "mode": "rail",
             "active": False},
        ],
        settings=Settings(units="pallets", currency="EUR"),
    )
    flows = pd.DataFrame(
        [["Northgate Yard", "Alder Foods", "road", 60.0, 4.25, 255.0, 0.0, 100.0, 0.6],
         [FORMULA_NAME, "Birch & Co <south>", "", 40.0, 3.1, 124.0, 50.0, math.inf, math.nan],
         ["Northgate Yard", "Birch & Co <south>", "", 40.123456789, 5.0, 200.61728394, 0.0, math.inf, math.nan]],
        columns=FLOW_COLUMNS)
    nodes = pd.DataFrame(
        [["Northgate Yard", "depot", 120.0, math.nan, 100.123456789, 0.0, math.nan, 120.0, 100.123456789,
          0.834362],
         [FORMULA_NAME, "depot", 40.0, math.nan, 40.0, 0.0, math.nan, 40.0, 40.0, 1.0],
         ["Alder Foods", "customer", math.nan, 60.0, 0.0, 60.0, 0.0, math.nan, math.nan, math.nan],
         ["Birch & Co <south>", "customer", math.nan, 90.0, 0.0, 80.123456789, 9.876543211, math.nan, math.nan,
          math.nan]],
        columns=NODE_COLUMNS)
    unmet = pd.DataFrame([["Birch & Co <south>", 9.876543211, 246.91358]], columns=["customer", "quantity", "penalty"])
    breakdown = {"transport": 579.61728394, "handling": 0.0, "fixed_lane": 50.0, "unmet_penalty": 246.91358}
    result = Result(SolveStatus.OPTIMAL, total_cost=sum(breakdown.values()), cost_breakdown=breakdown, flows=flows,
                    nodes=nodes, unmet=unmet, mip_gap=0.0, best_bound=876.53086394, solver="CBC (test double)",
                    solve_seconds=0.0123456, messages=["Birch & Co <south> is 9.9 pallets short"])
    info = RunInfo("/data/network.xlsx", "/data/network.xlsx", "/data/network-summary.html", "ab" * 32)
    return network, result, info


@pytest.fixture
def plan_sheets():
    return result_sheets(*small_plan())


@pytest.fixture
def rich(tmp_path):
    return wbk.rich_workbook(tmp_path / "network.xlsx", extra_sheets=("LS-notes", "ls notes", "LSD stock",
                                                                      "Notes LS "))


def input_values(path: Path, names=("Depots", "Customers", "Lanes", "Settings")) -> dict:
    wb = openpyxl.load_workbook(path)
    return {name: [list(r) for r in wb[name].iter_rows(values_only=True)] for name in names}


def sheet_part(path: Path, sheet_name: str) -> str:
    """The worksheet XML of a sheet, found through workbook.xml and its relationships."""
    with zipfile.ZipFile(path) as z:
        workbook = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
    # Python's XML parser as an independent reader of the index parts.
    sheet = next(e for e in ET.fromstring(workbook).iter(f"{{{wbk.MAIN_NS}}}sheet") if e.get("name") == sheet_name)
    rel_id = next(v for k, v in sheet.attrib.items() if k.endswith("}id"))
    target = next(e.get("Target") for e in ET.fromstring(rels) if e.get("Id") == rel_id)
    with zipfile.ZipFile(path) as z:
        return z.read("xl/" + target if not target.startswith("/") else target[1:]).decode()


# ------------------------------------------------------------------------------------------------ the sheets

def test_result_sheets_have_prefixed_short_names(plan_sheets):
    assert [s.name for s in plan_sheets] == NEW_NAMES
    for sheet in plan_sheets:
        assert sheet.name.startswith(RESULT_PREFIX) and len(sheet.name) <= 31
        assert len(set(sheet.columns)) == len(sheet.columns)
        assert set(sheet.kinds) <= set(sheet.columns)


def test_summary_lists_run_facts_costs_messages_and_caution(plan_sheets):
    network, result, info = small_plan()
    items = {row[0]: row[1] for row in plan_sheets[0].rows}
    assert items["Status"] == "optimal"
    assert items["Total cost (EUR)"] == pytest.approx(876.53086394, abs=1e-9)  # full precision; the format rounds
    # one row per cost component, in words with the currency, adding up to the total (result.py: they add up)
    words = [f"{writeback.COST_WORDS[k]} (EUR)" for k in COST_COMPONENTS]
    assert sum(items[w] for w in words) == pytest.approx(items["Total cost (EUR)"], abs=1e-9)
    assert items["Units"] == "pallets" and items["Currency"] == "EUR"
    assert items["Input SHA-256"] == "ab" * 32 and items["Input file"] == info.input_path
    assert items["Lanes used"] == 3 and items["Inactive lanes left out"] == 1 and items["Customers short"] == 1
    assert items["Message"] == "Birch & Co <south> is 9.9 pallets short"
    assert items["Caution"] == CAUTION
    assert {"Solver", "Optimality gap", "Best bound (EUR)", "Solve time (s)", "lanesolve version",
            "Run at"} <= set(items)


def test_every_result_sheet_header_is_plain_words_with_units(plan_sheets):
    for sheet in plan_sheets[:3]:
        for header in sheet.columns:
            assert "_" not in header and header[0].isupper(), header  # no snake_case, one naming style
    flows = plan_sheets[1].columns
    assert {"Flow (pallets)", "Rate (EUR per pallet)", "Variable cost (EUR)", "Fixed charge (EUR)",
            "Capacity (pallets; blank = no limit)", "Utilisation"} <= set(flows)


def test_pure_lp_summary_says_gap_not_applicable():
    network, result, info = small_plan()
    result.mip_gap = result.best_bound = None
    items = {row[0]: row[1] for row in result_sheets(network, result, info)[0].rows}
    assert items["Optimality gap"].startswith("not applicable")


def test_lane_flows_hold_used_then_inactive_lanes_only(plan_sheets):
    flows = plan_sheets[1]
    status = flows.columns.index("Status")
    assert [r[status] for r in flows.rows] == ["used"] * 3 + ["inactive, left out"]
    util = flows.columns.index("Utilisation")
    assert flows.rows[0][util] == pytest.approx(0.6)  # 60 of 100: the fraction, shown as 60.0 % by its format
    assert flows.kinds["Utilisation"] == "percent"
    inactive = flows.rows[-1]
    assert inactive[:3] == ["Northgate Yard", "Alder Foods", "rail"]


def test_nodes_sheet_has_every_node(plan_sheets):
    nodes = plan_sheets[2]
    assert [r[0] for r in nodes.rows] == ["Northgate Yard", FORMULA_NAME, "Alder Foods", "Birch & Co <south>"]
    assert nodes.columns == ["Node", "Kind", "Supply (pallets)", "Demand (pallets)", "Shipped (pallets)",
                             "Received (pallets)", "Unmet (pallets)", "Capacity (pallets; blank = no limit)",
                             "Throughput (pallets)", "Utilisation"]


def test_no_plan_gives_a_summary_and_empty_tables(tmp_path, rich):
    network, _result, info = small_plan()
    result = Result(SolveStatus.INFEASIBLE, messages=["total supply 160 is 10 short of hard demand 170"])
    sheets = result_sheets(network, result, info)
    items = {row[0]: row[1] for row in sheets[0].rows}
    assert items["Status"] == "infeasible" and items["Total cost (EUR)"] is None
    write_results(rich, rich, sheets)
    back = pd.read_excel(rich, sheet_name="LS Nodes", engine="calamine")
    assert len(back) == 0 and list(back.columns) == sheets[2].columns
    # a table needs a data row (ECMA-376 Part 1, 18.5.1.2: ref spans header and data); the empty one keeps one
    wb = openpyxl.load_workbook(rich)
    assert wb["LS Nodes"].tables["LS_Nodes"].ref == "A1:J2"


# ------------------------------------------------------------------------------------------------ lossless

def test_every_original_member_is_byte_identical_except_index_parts(tmp_path, rich, plan_sheets):
    before = wbk.members(rich)
    out = tmp_path / "solved.xlsx"
    write_results(rich, out, plan_sheets)
    after = wbk.members(out)
    for name, data in before.items():
        assert name in after, f"{name} was dropped"
        if name not in EDITED_PARTS:
            assert after[name] == data, f"{name} changed"
    # the chart, the picture and the styles are among the kept parts
    assert {"xl/charts/chart1.xml", "xl/media/image1.png", "xl/drawings/drawing1.xml", "xl/styles.xml",
            "xl/sharedStrings.xml", "xl/tables/table1.xml"} <= set(before)
    added = set(after) - set(before)
    assert len(added) == 3 * len(NEW_NAMES)  # per sheet: worksheet, its rels, its table
    for name in added:
        ET.fromstring(after[name])  # well-formed XML (Python's parser as the reference)


def stored(path: Path) -> dict[str, bytes]:
    """Each member as stored: its local header, compressed data and data descriptor, read from the offsets Python's
    zipfile finds in the central directory (APPNOTE 4.3.7-4.3.9)."""
    out = {}
    with zipfile.ZipFile(path) as z, open(path, "rb") as raw:
        infos = sorted(z.infolist(), key=lambda i: i.header_offset)
        ends = [i.header_offset for i in infos[1:]] + [z.start_dir]
        for info, end in zip(infos, ends):
            raw.seek(info.header_offset)
            out[info.filename] = raw.read(end - info.header_offset)
    return out


def test_unchanged_members_keep_their_compressed_bytes(tmp_path, rich, plan_sheets):
    # Not only the content: every unchanged member is copied as stored (header, compressed data, descriptor),
    # never decompressed and compressed again. The workbook is compressed at level 1 here, as a program favouring
    # speed might save it, so compressing again at another level could not give the same bytes by chance.
    content = wbk.members(rich)
    with zipfile.ZipFile(rich, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as z:
        for name, data in content.items():
            z.writestr(name, data)
    before = stored(rich)
    out = tmp_path / "solved.xlsx"
    write_results(rich, out, plan_sheets)
    after = stored(out)
    unchanged = [name for name in before if name not in EDITED_PARTS]
    assert "xl/worksheets/sheet1.xml" in unchanged and "xl/media/image1.png" in unchanged
    for name in unchanged:
        assert after[name] == before[name], f"{name}: stored bytes changed"
    with zipfile.ZipFile(out) as z:
        assert z.testzip() is None  # zipfile checks every member's CRC


def _rezip_streamed(source: Path, target: Path, zip64: set[str], stored_names: set[str]) -> None:
    """Rewrite a workbook as a zip written to a stream that cannot seek, as some tools do: every member then has a
    data descriptor after its data (APPNOTE 4.3.9), 8-byte sizes in it for the members in ``zip64`` (which get a
    ZIP64 extra field in their local header); members in ``stored_names`` are stored without compression."""

    class Unseekable:
        def __init__(self, fh):
            self.fh = fh

        def write(self, data):
            return self.fh.write(data)

        def flush(self):
            self.fh.flush()

    with zipfile.ZipFile(source) as zin, open(target, "wb") as fh:
        with zipfile.ZipFile(Unseekable(fh), "w") as zout:
            for info in zin.infolist():
                copy = zipfile.ZipInfo(info.filename, date_time=info.date_time)
                copy.compress_type = zipfile.ZIP_STORED if info.filename in stored_names else zipfile.ZIP_DEFLATED
                with zout.open(copy, "w", force_zip64=info.filename in zip64) as dst:
                    dst.write(zin.read(info))


def test_members_with_data_descriptors_and_zip64_fields_are_copied_as_stored(tmp_path, rich, plan_sheets):
    streamed = tmp_path / "streamed.xlsx"
    _rezip_streamed(rich, streamed, zip64={"xl/worksheets/sheet1.xml", "xl/media/image1.png"},
                    stored_names={"xl/media/image1.png"})
    with zipfile.ZipFile(streamed) as z:
        assert all(i.flag_bits & 0x08 for i in z.infolist())  # the fixture really has descriptors
    before, content = stored(streamed), wbk.members(streamed)
    out = tmp_path / "solved.xlsx"
    write_results(streamed, out, plan_sheets)
    after = stored(out)
    for name in before:
        if name not in EDITED_PARTS:
            assert after[name] == before[name], f"{name}: stored bytes changed"
    with zipfile.ZipFile(out) as z:
        assert z.testzip() is None
        assert {n: z.read(n) for n in content if n not in EDITED_PARTS} == \
            {n: d for n, d in content.items() if n not in EDITED_PARTS}
    assert input_values(out) == input_values(rich)  # openpyxl reads the copied sheets as before


def test_central_directory_uses_zip64_where_offsets_or_the_count_need_it(tmp_path, rich, plan_sheets, monkeypatch):
    # Offsets past 2 GiB and more than 65,534 members cannot be made in a test quickly, so the limits are lowered:
    # every offset past the first kilobyte and the member count then go through the ZIP64 records (APPNOTE 4.3.14,
    # 4.3.15, 4.5.3), and Python's zipfile, an independent reader, must find every member through them.
    monkeypatch.setattr(zipcopy, "ZIP64_LIMIT", 1024)
    monkeypatch.setattr(zipcopy, "COUNT_LIMIT", 3)
    out = tmp_path / "solved.xlsx"
    write_results(rich, out, plan_sheets)
    data = out.read_bytes()
    assert b"PK\x06\x06" in data and b"PK\x06\x07" in data  # the ZIP64 end record and its locator
    end = data[data.rindex(b"PK\x05\x06"):]
    assert end[8:10] == b"\xff\xff"  # the 16-bit member count holds the ZIP64 marker
    before = wbk.members(rich)
    with zipfile.ZipFile(out) as z:
        assert z.testzip() is None
        assert all(i.header_offset < 1024 or len(i.extra) >= 12 for i in z.infolist())  # ZIP64 extra present
        for name, content in before.items():
            if name not in EDITED_PARTS:
                assert z.read(name) == content
    assert [s for s in openpyxl.load_workbook(out).sheetnames if s.startswith("LS ")] == NEW_NAMES


def test_index_parts_only_gain_entries_and_keep_markup_compatibility(tmp_path, rich, plan_sheets):
    before = wbk.members(rich)
    out = tmp_path / "solved.xlsx"
    write_results(rich, out, plan_sheets)
    after = wbk.members(out)
    # Removing what we added gives back the original text: the edits are insertions, nothing else moved.
    workbook = after["xl/workbook.xml"].decode()
    ours = r'<sheet name="LS (Summary|Lane flows|Nodes|Sensitivity)"[^>]*/>|' + OUR_NAMES
    assert re.sub(ours, "", workbook) == before["xl/workbook.xml"].decode()
    assert 'mc:Ignorable="x15 xr"' in workbook and workbook.startswith("<?xml")
    rels = after["xl/_rels/workbook.xml.rels"].decode()
    assert re.sub(r'<Relationship Id="[^"]+" Type="[^"]+/worksheet" Target="worksheets/sheet\d+\.xml"/>', "",
                  rels) == before["xl/_rels/workbook.xml.rels"].decode()
    types = after["[Content_Types].xml"].decode()
    assert re.sub(r'<Override PartName="/xl/(worksheets/sheet|tables/table)\d+\.xml" ContentType="[^"]+"/>', "",
                  types) == before["[Content_Types].xml"].decode()
    for name in wbk.INDEX_PARTS:
        ET.fromstring(after[name])


def test_app_titles_and_counts_follow_the_sheets(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    write_results(rich, rich, plan_sheets)  # the rerun replaces the titles too
    app = wbk.members(rich)["docProps/app.xml"].decode()
    wb = openpyxl.load_workbook(rich)
    titles = re.findall(r"<vt:lpstr>(.*?)</vt:lpstr>", re.search(r"<TitlesOfParts>(.*)</TitlesOfParts>",
                                                                   app).group(1))
    counts = [int(c) for c in re.findall(r"<vt:i4>(\d+)</vt:i4>", app)]
    assert titles[:counts[0]] == wb.sheetnames  # the worksheet group lists every sheet, in tab order
    assert len(titles) == sum(counts) == int(re.search(r'size="(\d+)" baseType="lpstr"', app).group(1))


def test_input_sheet_values_are_identical(tmp_path, rich, plan_sheets):
    before = input_values(rich)
    write_results(rich, rich, plan_sheets)
    assert input_values(rich) == before


def test_result_sheets_read_back_in_openpyxl(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    wb = openpyxl.load_workbook(rich)
    assert wb.sheetnames[-len(NEW_NAMES):] == NEW_NAMES
    for sheet in plan_sheets:
        ws = wb[sheet.name]
        rows = list(ws.iter_rows(values_only=True))
        assert list(rows[0]) == sheet.columns
        assert len(rows) == len(sheet.rows) + 1
        assert ws.freeze_panes == "A2"
        (table,) = ws.tables.values()
        # table column names equal the header cells (ECMA-376 Part 1, 18.5.1.3: they must match)
        assert [c.name for c in table.tableColumns] == sheet.columns
        assert table.tableStyleInfo.name == writeback.TABLE_STYLE and table.autoFilter.ref == table.ref
    flows = wb["LS Lane flows"]
    assert flows["D2"].value == pytest.approx(60.0, abs=1e-9)
    assert flows["H3"].value is None  # no limit: blank, and the header says so
    assert flows["I3"].value is None  # no utilisation without a limit: blank
    # number formats by kind (codes from tables.NUMBER_FORMATS; ECMA-376 Part 1, 18.8.31 for their syntax)
    assert flows["D2"].number_format == "#,##0.0#" and flows["E2"].number_format == "#,##0.00##"
    assert flows["F2"].number_format == "#,##0.00" and flows["I2"].number_format == "0.0%"


def test_result_sheets_read_back_in_pandas_calamine(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    frames = pd.read_excel(rich, sheet_name=None, engine="calamine")
    for sheet in plan_sheets:
        frame = frames[sheet.name]
        assert list(frame.columns) == sheet.columns and len(frame) == len(sheet.rows)
    flows = frames["LS Lane flows"]
    # cells keep full precision (the number format rounds for display only)
    assert flows["Flow (pallets)"].sum() == pytest.approx(60 + 40 + 40.123456789, abs=1e-9)
    assert flows["Variable cost (EUR)"].tolist()[:3] == pytest.approx([255.0, 124.0, 200.61728394], abs=1e-9)
    summary = dict(zip(frames["LS Summary"]["Item"], frames["LS Summary"]["Value"]))
    assert float(summary["Total cost (EUR)"]) == pytest.approx(876.53086394, abs=1e-9)


def test_rerun_replaces_result_sheets(tmp_path, rich, plan_sheets):
    original = wbk.members(rich)
    write_results(rich, rich, plan_sheets)
    first = wbk.members(rich)
    network, result, info = small_plan()
    result.messages = []  # the second run's summary is one row shorter
    write_results(rich, rich, result_sheets(network, result, info))
    second = wbk.members(rich)
    wb = openpyxl.load_workbook(rich)
    assert wb.sheetnames.count("LS Summary") == 1
    assert [n for n in wb.sheetnames if n.startswith(RESULT_PREFIX)] == NEW_NAMES
    assert len(second) == len(first)
    assert "Message" not in [r[0] for r in wb["LS Summary"].iter_rows(values_only=True)]
    assert second["xl/styles.xml"] == first["xl/styles.xml"]  # the rerun reuses the formats it appended
    for name, data in original.items():
        if name not in EDITED_PARTS:
            assert second[name] == data
    tables = [n for n in second if n.startswith("xl/tables/")]
    assert len(tables) == 1 + len(NEW_NAMES)  # the user's table + ours


def test_sheets_that_merely_resemble_the_prefix_are_kept(tmp_path, rich, plan_sheets):
    lookalikes = ["LS-notes", "ls notes", "LSD stock", "Notes LS "]
    before = {n: sheet_part(rich, n) for n in lookalikes}
    write_results(rich, rich, plan_sheets)
    write_results(rich, rich, plan_sheets)
    wb = openpyxl.load_workbook(rich)
    for name in lookalikes:
        assert wb[name]["A1"].value == f"kept: {name}"
        assert sheet_part(rich, name) == before[name]


def test_stale_result_sheet_in_the_middle_is_dropped_and_local_names_renumbered(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "old.xlsx", result_sheet_at=2)
    mark_as_results(path, ["LS Old results"])
    old_members = set(wbk.members(path))
    write_results(path, path, plan_sheets)
    wb = openpyxl.load_workbook(path)
    assert "LS Old results" not in wb.sheetnames
    assert wb.sheetnames[:4] == ["Depots", "Customers", "Lanes", "Settings"]
    # the Lanes print area was local to position 3; Lanes is now at position 2 and keeps it
    assert wb["Lanes"].print_area == "'Lanes'!$A$1:$F$4"
    workbook = wbk.members(path)["xl/workbook.xml"].decode()
    assert "LS Old results" not in workbook
    assert workbook.count("_xlnm.Print_Area") == 1 and 'localSheetId="2"' in workbook
    app = wbk.members(path)["docProps/app.xml"].decode()
    assert "LS Old results" not in app and all(f"<vt:lpstr>{n}</vt:lpstr>" in app for n in wb.sheetnames)
    # its worksheet part went with it: our sheets added (3 members each), one dropped (a sheet without rels)
    assert len(wbk.members(path)) == len(old_members) + 3 * len(NEW_NAMES) - 1


def set_active_tab(path: Path, index: int) -> None:
    text = wbk.members(path)["xl/workbook.xml"].decode()
    wbk.rewrite_zip(path, {"xl/workbook.xml": re.sub(r'activeTab="\d+"', f'activeTab="{index}"', text).encode()})


def test_active_tab_on_an_old_result_sheet_moves_to_the_new_summary(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    set_active_tab(rich, openpyxl.load_workbook(rich).sheetnames.index("LS Lane flows"))
    write_results(rich, rich, plan_sheets)
    assert openpyxl.load_workbook(rich).active.title == "LS Summary"


def test_active_tab_after_a_dropped_sheet_follows_its_sheet(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "old.xlsx", result_sheet_at=1)
    mark_as_results(path, ["LS Old results"])
    set_active_tab(path, openpyxl.load_workbook(path).sheetnames.index("Lanes"))
    write_results(path, path, plan_sheets)
    assert openpyxl.load_workbook(path).active.title == "Lanes"


def test_case_clash_with_a_user_sheet_is_refused(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "clash.xlsx", extra_sheets=("ls summary",))
    before = path.read_bytes()
    with pytest.raises(WriteError, match="'ls summary'.*did not write.*Rename that sheet"):
        write_results(path, path, plan_sheets)
    assert path.read_bytes() == before


def test_user_table_name_is_not_reused(tmp_path, plan_sheets):
    path = tmp_path / "names.xlsx"
    wbk.base_workbook(path)
    wb = openpyxl.load_workbook(path)
    from openpyxl.worksheet.table import Table

    wb["Settings"].add_table(Table(displayName="LS_Summary", ref="A1:B3"))
    wb.save(path)
    write_results(path, path, plan_sheets)
    wb = openpyxl.load_workbook(path)
    names = [t for ws in wb.worksheets for t in ws.tables]
    assert len(names) == len({n.lower() for n in names}) == 2 + len(NEW_NAMES)  # customer table, user's, ours
    ids = [ws.tables[t].id for ws in wb.worksheets for t in ws.tables]
    assert len(set(ids)) == len(ids)


def test_unusual_relationship_prefix_is_used_for_new_sheets(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "prefix.xlsx", rel_prefix="rel")
    write_results(path, path, plan_sheets)
    workbook = wbk.members(path)["xl/workbook.xml"].decode()
    assert '<sheet name="LS Summary" sheetId="' in workbook and ' r:id=' not in workbook
    assert openpyxl.load_workbook(path).sheetnames[-len(NEW_NAMES):] == NEW_NAMES


def test_xlsm_keeps_its_macro_part(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "macros.xlsm", macro=True)
    before = wbk.members(path)
    write_results(path, path, plan_sheets)
    after = wbk.members(path)
    assert after["xl/vbaProject.bin"] == wbk.FAKE_VBA
    assert "application/vnd.ms-excel.sheet.macroEnabled.main+xml" in after["[Content_Types].xml"].decode()
    assert "vbaProject" in after["xl/_rels/workbook.xml.rels"].decode()
    assert all(after[n] == d for n, d in before.items() if n not in EDITED_PARTS)
    wb = openpyxl.load_workbook(path, keep_vba=True)
    assert wb.sheetnames[-len(NEW_NAMES):] == NEW_NAMES


def test_macro_workbook_to_xlsx_name_is_refused(tmp_path, plan_sheets):
    path = wbk.rich_workbook(tmp_path / "macros.xlsm", macro=True)
    with pytest.raises(WriteError, match=r"must end in \.xlsm"):
        write_results(path, tmp_path / "copy.xlsx", plan_sheets)
    assert not (tmp_path / "copy.xlsx").exists()


def test_formula_looking_name_is_written_as_text(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    xml = sheet_part(rich, "LS Lane flows")
    assert "<f>" not in xml and "<f " not in xml
    assert '<c r="A3" t="inlineStr"><is><t xml:space="preserve">=SUM(A1)</t></is></c>' in xml
    cell = openpyxl.load_workbook(rich)["LS Lane flows"]["A3"]
    assert cell.value == FORMULA_NAME and cell.data_type == "s"


def test_text_is_escaped_and_forbidden_characters_stripped(tmp_path, rich):
    sheet = ResultSheet("LS Odd text", ["name", "n"], [["a\x00b\x1fc & <d> \"e\" 'f'", 1], ["  spaced  ", 2]],
                        {"name": "text"})
    write_results(rich, rich, [sheet])
    ET.fromstring(sheet_part(rich, "LS Odd text"))
    ws = openpyxl.load_workbook(rich)["LS Odd text"]
    assert ws["A2"].value == "abc & <d> \"e\" 'f'"
    assert ws["A3"].value == "  spaced  "  # xml:space="preserve" keeps the spaces


def test_cells_keep_full_precision_and_special_values_are_blank(tmp_path, rich):
    sheet = ResultSheet("LS Rounding", ["money", "quantity", "percent", "number", "text"],
                        [[1234.5678, 1.23456789, 0.834362, 0.000123456789, None],
                         [math.nan, math.inf, -0.0, 7, True]],
                        {"money": "money", "quantity": "quantity", "percent": "percent", "number": "number",
                         "text": "text"})
    write_results(rich, rich, [sheet])
    ws = openpyxl.load_workbook(rich)["LS Rounding"]
    assert ws["A2"].value == pytest.approx(1234.5678, abs=1e-12) and ws["A2"].number_format == "#,##0.00"
    assert ws["B2"].value == pytest.approx(1.23456789, abs=1e-12) and ws["B2"].number_format == "#,##0.0#"
    assert ws["C2"].value == pytest.approx(0.834362, abs=1e-12) and ws["C2"].number_format == "0.0%"
    assert ws["D2"].value == pytest.approx(0.000123456789, rel=1e-12) and ws["D2"].number_format == "General"
    assert ws["E2"].value is None and ws["A3"].value is None  # None and NaN: blank
    assert ws["B3"].value is None  # infinity (no limit): blank, never text in a number column
    assert ws["E3"].value is True
    assert 'r="C3"' in sheet_part(rich, "LS Rounding") and "-0" not in sheet_part(rich, "LS Rounding")


def _expected_cell(value):
    """What a spreadsheet reader should find in a cell written from ``value``, by the rules of
    :class:`ResultSheet`: None, NaN, infinities and empty text are blank; text loses the characters XML 1.0 forbids
    (W3C XML 1.0, section 2.2, Char); numbers keep their value (-0.0 reads as 0)."""
    value = value.item() if isinstance(value, np.generic) else value
    if value is None or isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, str):
        return re.sub("[\x00-\x08\x0b\x0c\x0e-\x1f]", "", value) or None
    return value


def test_a_sheet_of_many_pieces_reads_back_cell_for_cell(tmp_path, rich, monkeypatch):
    # More rows than one piece of sheet XML holds (pieces made small here), so the sheet is made, compressed and
    # written in several pieces; each column mixes what result sheets hold: repeated and distinct numbers and ids,
    # blanks of every kind, -0.0 beside 0.0, NumPy scalars, integers and booleans, forbidden characters, short and
    # long rows.
    monkeypatch.setattr(sheetxml, "ROWS_PER_PIECE", 64)
    monkeypatch.setattr(writeback, "BACKGROUND_FROM_ROWS", 0)  # compressed in the zip writer's thread
    monkeypatch.setattr(zipcopy, "MAX_QUEUED_BYTES", 1000)  # the caller waits for the writer's thread, often
    n = 3 * 64 + 7
    rng = random.Random(7)
    specials = [None, math.nan, math.inf, -math.inf, -0.0, 0.0, "", np.float64(2.5), np.int64(3), 4, True, False,
                "a\x01b & <c>", "C17"]
    rows = []
    for i in range(n):
        row = [f"C{i % 97}", rng.choice([1.5, 2.25, 0.1 + 0.2, float(i)]), rng.random() * 1000,
               rng.choice(specials), rng.choice(specials), f"sentence {i} about <lane> & 'depot'"]
        rows.append(row[:rng.choice([4, 6, 6, 6])] + (["beyond the header"] if i % 11 == 0 else []))
    columns = ["id", "rate", "amount", "mixed money", "mixed percent", "words"]
    kinds = {"id": "text", "rate": "rate", "amount": "money", "mixed money": "money", "mixed percent": "percent",
             "words": "text"}
    write_results(rich, rich, [ResultSheet("LS Many rows", columns, rows, kinds)])
    ET.fromstring(sheet_part(rich, "LS Many rows"))  # Python's XML parser: well formed
    ws = openpyxl.load_workbook(rich)["LS Many rows"]  # openpyxl as the independent reader
    found = list(ws.iter_rows(values_only=True))
    assert len(found) == n + 1 and list(found[0]) == columns
    for i, row in enumerate(rows):
        wanted = [_expected_cell(v) for v in row[:len(columns)]] + [None] * (len(columns) - len(row))
        assert list(found[i + 1]) == wanted, f"row {i + 2}"


def test_negative_zero_widens_its_column_whichever_zero_comes_first(tmp_path, rich):
    # The width rule of the sheets: the longest value as its column's number format shows it, plus one. Python's
    # format gives "-0.0 %" for -0.0 in a percent column, a character wider than "0.0 %"; the two zeros are one
    # value to a dictionary, so the writer must still see both.
    sheets = [ResultSheet(f"LS Zeros {n}", ["p"], [[a], [b]], {"p": "percent"})
              for n, (a, b) in enumerate([(0.0, -0.0), (-0.0, 0.0), (0.0, 0.0)])]
    write_results(rich, rich, sheets)
    wb = openpyxl.load_workbook(rich)
    assert [wb[s.name].column_dimensions["A"].width for s in sheets] == [7.0, 7.0, 6.0]


def test_columns_rendered_from_distinct_values_match_cell_by_cell(tmp_path):
    # The writer renders a column of floats, text and blanks once per distinct value; a column with other values,
    # or with cells of a kind of their own, goes a cell at a time (an empty dict of own kinds forces that path).
    rng = random.Random(11)
    pool = [None, math.nan, math.inf, -0.0, 0.0, 1.0, 0.1 + 0.2, 1e-7, 123456.789, -5.5, "", "id 1", "a & b",
            "x\x02y", "\x03", "é" * 3, "long " * 7000]
    for kind in writeback.KINDS:
        for _ in range(20):
            values = tuple(rng.choice(pool) for _ in range(rng.randint(0, 40)))
            by_value = sheetxml._column_cells(values, kind, ' s="9"', None, {}, sheetxml._Texts())
            by_cell = sheetxml._column_cells(values, kind, ' s="9"', {}, {}, sheetxml._Texts())
            assert by_value == by_cell, (kind, values)


def test_rate_times_flow_equals_the_cost_in_the_cells(tmp_path, rich):
    # The planners' finding: a rate shown as 1.19 beside 140 units and a cost of 166.64. The cells hold the full
    # rate and the format shows 4 decimals, so rate x flow = cost holds on what the sheet holds (140 x 1.190285714).
    network, result, info = small_plan()
    result.flows.loc[0, ["flow", "cost_per_unit", "variable_cost"]] = [140.0, 166.64 / 140, 166.64]
    write_results(rich, rich, result_sheets(network, result, info))
    ws = openpyxl.load_workbook(rich)["LS Lane flows"]
    assert ws["D2"].value * ws["E2"].value == pytest.approx(ws["F2"].value, abs=1e-9)
    assert ws["E2"].number_format == "#,##0.00##"  # 1.1903 on screen: 140 x 1.1903 = 166.64


def test_styles_part_only_gains_formats_at_the_end(tmp_path, rich, plan_sheets):
    before_members = wbk.members(rich)
    before = before_members["xl/styles.xml"].decode()
    write_results(rich, rich, plan_sheets)
    after = wbk.members(rich)["xl/styles.xml"].decode()
    ns = {"m": wbk.MAIN_NS}
    old, new = ET.fromstring(before), ET.fromstring(after)  # Python's parser as an independent reader

    def xfs(root):
        return [ET.tostring(x) for x in root.find("m:cellXfs", ns)]

    # every existing cell format keeps its index and its content; ours come after them
    assert xfs(new)[:len(xfs(old))] == xfs(old) and len(xfs(new)) > len(xfs(old))
    assert int(new.find("m:cellXfs", ns).get("count")) == len(xfs(new))
    old_fmts = [ET.tostring(x) for x in (old.find("m:numFmts", ns) or [])]
    new_fmts = [ET.tostring(x) for x in new.find("m:numFmts", ns)]
    assert new_fmts[:len(old_fmts)] == old_fmts
    codes = {x.get("formatCode") for x in new.find("m:numFmts", ns)}
    assert set(writeback.NUMBER_FORMATS.values()) <= codes
    # the input sheets refer to style indices that still mean what they meant: their parts are byte-identical
    sheets_before = {n: d for n, d in before_members.items() if n.startswith("xl/worksheets/")}
    assert sheets_before and all(wbk.members(rich)[n] == d for n, d in sheets_before.items())


def test_print_setup_fits_width_and_repeats_the_header_row(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    wb = openpyxl.load_workbook(rich)
    flows, summary = wb["LS Lane flows"], wb["LS Summary"]
    assert flows.print_title_rows == "$1:$1" and summary.print_title_rows == "$1:$1"
    assert flows.page_setup.orientation == "landscape" and summary.page_setup.orientation == "portrait"
    assert flows.page_setup.fitToWidth == 1 and flows.page_setup.fitToHeight == 0
    assert flows.sheet_properties.pageSetUpPr.fitToPage


def test_column_widths_follow_content(tmp_path, rich, plan_sheets):
    write_results(rich, rich, plan_sheets)
    ws = openpyxl.load_workbook(rich)["LS Summary"]
    # the caution sentence is the longest value: its column is wider than the item column, up to the cap
    assert ws.column_dimensions["B"].width > ws.column_dimensions["A"].width >= len("inactive lanes left out")
    assert ws.column_dimensions["B"].width <= 80


# ------------------------------------------------------------------------------------------------ atomicity

def leftovers(folder: Path) -> list[str]:
    return [p.name for p in folder.iterdir() if p.name.endswith(".tmp")]


def test_failure_mid_write_leaves_the_original_and_no_temp_file(tmp_path, rich, plan_sheets, monkeypatch):
    before = rich.read_bytes()
    real = zipcopy.ZipSplicer.add
    calls = []

    def failing_add(self, name, *args, **kwargs):
        calls.append(name)
        if sum(n not in EDITED_PARTS for n in calls) == 2:  # after the index parts and a first new sheet part
            raise OSError(28, "No space left on device")
        return real(self, name, *args, **kwargs)

    monkeypatch.setattr(zipcopy.ZipSplicer, "add", failing_add)
    with pytest.raises(WriteError, match="No space left on device.*left as it was"):
        write_results(rich, rich, plan_sheets)
    assert {"xl/workbook.xml", "[Content_Types].xml"} <= set(calls)  # the failure came mid-write
    assert rich.read_bytes() == before
    assert leftovers(tmp_path) == []


def _spliced(background: bool) -> bytes:
    """A zip of text, bytes and pieced members written by the splicer, in the foreground or in its thread."""
    out = io.BytesIO()
    pieces = (f"<row r='{i}'>" + "é" * (i % 5) + "</row>" for i in range(3000))
    with zipcopy.ZipSplicer(out, background=background) as zout:
        zout.add("a.xml", "<a>" * 5000, (2024, 5, 1, 10, 0, 0))
        zout.add("b.bin", bytes(range(256)) * 40, (2024, 5, 1, 10, 0, 0))
        zout.add("c.xml", pieces, (2024, 5, 1, 10, 0, 0))
        zout.add("d.xml", "", (2024, 5, 1, 10, 0, 0))
        zout.close()
    return out.getvalue()


def test_the_writers_thread_writes_the_same_zip(monkeypatch):
    # Small slices and a small queue: many compression steps, the caller often waiting for the thread.
    monkeypatch.setattr(zipcopy, "_SLICE", 1000)
    monkeypatch.setattr(zipcopy, "MAX_QUEUED_BYTES", 3000)
    data = _spliced(background=True)
    assert data == _spliced(background=False)
    with zipfile.ZipFile(io.BytesIO(data)) as z:  # Python's zipfile as the independent reader (CRC checked)
        assert z.testzip() is None and z.namelist() == ["a.xml", "b.bin", "c.xml", "d.xml"]
        assert z.read("c.xml").decode() == "".join(f"<row r='{i}'>" + "é" * (i % 5) + "</row>"
                                                   for i in range(3000))
        assert z.read("b.bin") == bytes(range(256)) * 40 and z.read("d.xml") == b""


class _FailingFile(io.BytesIO):
    """A file that takes ``room`` bytes, then fails every write as a full disk does, and records writes after."""

    def __init__(self, room: int):
        super().__init__()
        self.room, self.failed = room, False

    def write(self, data):
        if self.failed or len(data) > self.room:
            self.failed = True
            raise OSError(28, "No space left on device")
        self.room -= len(data)
        return super().write(data)


def test_a_failure_in_the_writers_thread_is_raised_and_stops_it(monkeypatch):
    monkeypatch.setattr(zipcopy, "_SLICE", 1000)
    out = _FailingFile(room=50)
    with pytest.raises(OSError, match="No space left"):
        with zipcopy.ZipSplicer(out, background=True) as zout:
            for n in range(50):
                zout.add(f"m{n}.xml", "<x/>" * 2000, (2024, 5, 1, 10, 0, 0))
            zout.close()
    written = out.getvalue()
    assert not [t for t in threading.enumerate() if t.name.startswith("lanesolve-zip")]
    assert out.getvalue() == written and out.tell() == len(written) <= 50  # nothing written after the failure


def test_a_failure_making_content_stops_the_writers_thread(monkeypatch):
    monkeypatch.setattr(zipcopy, "_SLICE", 1000)
    out = io.BytesIO()

    def pieces():
        yield "<a>" * 3000
        raise RuntimeError("injected failure while making a sheet")

    with pytest.raises(RuntimeError, match="injected"):
        with zipcopy.ZipSplicer(out, background=True) as zout:
            zout.add("first.xml", "<b/>" * 3000, (2024, 5, 1, 10, 0, 0))
            zout.add("second.xml", pieces(), (2024, 5, 1, 10, 0, 0))
    # The block's end waited for the thread: none is left to write into the file after it.
    assert not [t for t in threading.enumerate() if t.name.startswith("lanesolve-zip")]


def test_unexpected_error_becomes_write_error(tmp_path, rich, plan_sheets, monkeypatch):
    before = rich.read_bytes()

    def broken(*args, **kwargs):
        raise ValueError("simulated bug in the sheet builder")

    monkeypatch.setattr(writeback, "table_xml", broken)
    with pytest.raises(WriteError) as caught:
        write_results(rich, tmp_path / "out.xlsx", plan_sheets)
    assert isinstance(caught.value, LanesolveError) and isinstance(caught.value.__cause__, ValueError)
    assert rich.read_bytes() == before and not (tmp_path / "out.xlsx").exists() and leftovers(tmp_path) == []


def test_locked_target_says_close_the_workbook(tmp_path, rich, plan_sheets, monkeypatch):
    before = rich.read_bytes()

    def locked(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(atomic.os, "replace", locked)
    with pytest.raises(WriteError, match="close the workbook"):
        write_results(rich, rich, plan_sheets)
    assert rich.read_bytes() == before and leftovers(tmp_path) == []


def test_output_to_another_path_leaves_the_source_identical(tmp_path, rich, plan_sheets):
    before = rich.read_bytes()
    out = tmp_path / "sub" / "solved.xlsx"
    out.parent.mkdir()
    write_results(rich, out, plan_sheets)
    assert rich.read_bytes() == before
    assert openpyxl.load_workbook(out).sheetnames[-len(NEW_NAMES):] == NEW_NAMES
    assert leftovers(out.parent) == []


def test_source_equal_to_target_works_and_keeps_permissions(tmp_path, rich, plan_sheets):
    os.chmod(rich, 0o640)
    write_results(rich, rich, plan_sheets)
    assert stat.S_IMODE(os.stat(rich).st_mode) == 0o640  # not the temporary file's private 0600
    assert openpyxl.load_workbook(rich).sheetnames[-len(NEW_NAMES):] == NEW_NAMES
    assert leftovers(tmp_path) == []


def test_not_a_workbook_is_a_write_error(tmp_path, plan_sheets):
    path = tmp_path / "notes.xlsx"
    path.write_text("just text")
    with pytest.raises(WriteError, match="not a workbook"):
        write_results(path, path, plan_sheets)
    assert path.read_text() == "just text" and leftovers(tmp_path) == []


def test_missing_source_is_a_write_error(tmp_path, plan_sheets):
    with pytest.raises(WriteError, match="does not exist"):
        write_results(tmp_path / "gone.xlsx", tmp_path / "gone.xlsx", plan_sheets)


@pytest.mark.parametrize("name", ["Summary", "LS " + "x" * 29, "LS a/b", "LS [1]"])
def test_invalid_result_sheet_name_is_refused(tmp_path, rich, name):
    with pytest.raises(WriteError, match="cannot write a result sheet named"):
        write_results(rich, rich, [ResultSheet(name, ["a"], [[1]], {})])


# ------------------------------------------------------------------------------------------------ a real program

def _libreoffice_csv(soffice: str, book: Path, out: Path, profile: Path, as_shown: bool) -> list[Path]:
    """Every sheet of ``book`` as a CSV file written by LibreOffice; ``as_shown`` writes each cell as its number
    format shows it instead of its value."""
    # Filter options: field separator 44 (,), text delimiter 34 ("), UTF-8 (76), start row 1, cell formats, language,
    # quoted as text, detect special numbers, save cell contents as shown, export formulas, remove spaces, sheet -1 =
    # every sheet to its own file (LibreOffice 7.2+ CSV filter options, documented in its help "CSV Filter Options").
    options = f"44,34,76,1,,0,false,true,{'true' if as_shown else 'false'},false,false,-1"
    command = [soffice, f"-env:UserInstallation=file://{profile}", "--headless", "--convert-to",
               f"csv:Text - txt - csv (StarCalc):{options}", "--outdir", str(out), str(book)]
    done = subprocess.run(command, capture_output=True, text=True, timeout=240)
    produced = sorted(out.glob("*.csv")) if out.exists() else []
    assert produced, f"LibreOffice wrote nothing: {done.stdout} {done.stderr}"
    return produced


@pytest.mark.slow  # starts LibreOffice; CI runs it
def test_libreoffice_opens_the_result_sheet(tmp_path, rich, plan_sheets):
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None:
        pytest.skip("LibreOffice (soffice) is not installed")
    write_results(rich, rich, plan_sheets)
    profile = tmp_path / "lo-profile"
    produced = _libreoffice_csv(soffice, rich, tmp_path / "values", profile, as_shown=False)
    flows_csv = next(p for p in produced if "Lane flows" in p.name)
    frame = pd.read_csv(flows_csv, keep_default_na=False)
    assert list(frame.columns) == plan_sheets[1].columns
    assert frame["Origin"].tolist()[1] == FORMULA_NAME  # text, not evaluated
    # the cells hold full precision
    assert [float(x) for x in frame["Flow (pallets)"]] == pytest.approx([60, 40, 40.123456789, 0], abs=1e-9)
    assert frame["Capacity (pallets; blank = no limit)"].tolist()[1] == ""
    depots_csv = next(p for p in produced if p.name.endswith("-Depots.csv"))
    assert pd.read_csv(depots_csv)["depot"].tolist() == ["Northgate Yard", "Riverbend Plant", FORMULA_NAME]
    # ... and LibreOffice applies the number formats appended to styles.xml (the program, not lanesolve, formats)
    shown = _libreoffice_csv(soffice, rich, tmp_path / "shown", profile, as_shown=True)
    flows = pd.read_csv(next(p for p in shown if "Lane flows" in p.name), keep_default_na=False, dtype=str)
    assert flows["Flow (pallets)"].tolist() == ["60.0", "40.0", "40.12", "0.0"]
    assert flows["Rate (EUR per pallet)"].tolist()[:3] == ["4.25", "3.10", "5.00"]
    assert flows["Variable cost (EUR)"].tolist()[:3] == ["255.00", "124.00", "200.62"]
    assert flows["Utilisation"].tolist()[0] == "60.0%"
    # the input sheets show exactly what they showed before: their style indices kept their meaning
    original = tmp_path / "original" / rich.name
    original.parent.mkdir()
    wbk.rich_workbook(original)
    before = {p.name: p.read_text(encoding="utf-8")
              for p in _libreoffice_csv(soffice, original, tmp_path / "before", profile, as_shown=True)}
    after = {p.name: p.read_text(encoding="utf-8") for p in shown}
    inputs = [name for name in before if not name.split("-", 1)[1].startswith("LS ")]
    assert inputs and all(after[name] == before[name] for name in inputs)
