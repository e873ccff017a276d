"""Result sheets are recognised by the mark lanesolve writes, never by their name alone.

A planner's own sheet named like a result sheet ("LS Summary") is kept and the run stops, before any solving, with a
message naming the sheet and saying to rename it; a planner's "LS Notes" is simply kept. A workbook solved before
results carried a mark is rerun only when its LS Summary holds lanesolve's own "lanesolve version" row.
"""

from __future__ import annotations

import re

import openpyxl
import pytest

import _workbooks as wbk
from conftest import valid_sheets, write_workbook
from lanesolve import pipeline
from lanesolve.errors import WriteError
from lanesolve.model import analyse
from lanesolve.write import writeback


def _workbook_text(path) -> str:
    return wbk.members(path)["xl/workbook.xml"].decode()


def test_mark_lists_exactly_the_result_sheets_written(tmp_path):
    path = write_workbook(tmp_path / "plan.xlsx", valid_sheets())
    pipeline.run(path)
    mark = re.search(r'<definedName name="_lanesolve_result_sheets" hidden="1">([^<]*)</definedName>',
                     _workbook_text(path))
    assert mark is not None
    listed = mark.group(1).replace("&quot;", "").split(";")
    written = [n for n in openpyxl.load_workbook(path).sheetnames if n.startswith("LS ")]
    assert listed == written and "LS Summary" in listed
    pipeline.run(path)  # a rerun replaces the mark rather than adding a second one
    assert _workbook_text(path).count('name="_lanesolve_result_sheets"') == 1


def test_user_sheet_named_ls_notes_is_kept_across_reruns(tmp_path):
    sheets = valid_sheets()
    sheets["LS Notes"] = [["my notes"], ["call the carrier on Monday"]]
    path = write_workbook(tmp_path / "plan.xlsx", sheets)
    pipeline.run(path)
    pipeline.run(path)
    book = openpyxl.load_workbook(path)
    assert book["LS Notes"]["A2"].value == "call the carrier on Monday"
    assert book.sheetnames.count("LS Notes") == 1 and "LS Summary" in book.sheetnames


def test_user_sheet_named_like_a_result_sheet_stops_the_run_before_solving(tmp_path, monkeypatch):
    sheets = valid_sheets()
    sheets["LS Summary"] = [["my own summary"], ["budget", 1000]]
    path = write_workbook(tmp_path / "plan.xlsx", sheets)
    before = path.read_bytes()

    def must_not_solve(*args, **kwargs):
        raise AssertionError("the solver ran although the result sheets could not be written")

    monkeypatch.setattr(analyse, "solve_and_analyse", must_not_solve)
    with pytest.raises(WriteError) as caught:
        pipeline.run(path)
    message = str(caught.value)
    assert "'LS Summary'" in message and "did not write" in message
    assert "Rename that sheet (for example to 'My Summary') and run again" in message
    assert path.read_bytes() == before


def test_every_clashing_sheet_is_named_in_one_message(tmp_path):
    sheets = valid_sheets()
    sheets["LS Summary"] = [["mine"]]
    sheets["ls trips"] = [["mine too"]]
    path = write_workbook(tmp_path / "plan.xlsx", sheets)
    with pytest.raises(WriteError, match=r"sheets named 'LS Summary', 'ls trips'.*Rename those sheets"):
        writeback.check_result_sheets(path)


def _solved_by_an_earlier_version(path, fingerprint: bool):
    """A workbook as an earlier lanesolve left it: result sheets, no mark; openpyxl stores their text as shared
    strings, as a spreadsheet program does when it saves the file."""
    sheets = valid_sheets()
    summary = [["item", "value"], ["status", "optimal"], ["total cost", 123.0]]
    if fingerprint:
        summary.append(["lanesolve version", "0.1.0"])
    sheets["LS Summary"] = summary
    sheets["LS Nodes"] = [["node", "kind"], ["North Yard", "depot"]]
    return write_workbook(path, sheets)


def test_unmarked_result_sheets_with_the_fingerprint_are_replaced(tmp_path):
    path = _solved_by_an_earlier_version(tmp_path / "old.xlsx", fingerprint=True)
    pipeline.run(path)
    book = openpyxl.load_workbook(path)
    assert book.sheetnames.count("LS Summary") == 1 and book.sheetnames.count("LS Nodes") == 1
    assert book["LS Summary"]["A1"].value == "Item"  # now lanesolve's current summary
    assert book["LS Nodes"]["A1"].value == "Node"


def test_unmarked_ls_summary_without_the_fingerprint_is_the_planners(tmp_path):
    path = _solved_by_an_earlier_version(tmp_path / "old.xlsx", fingerprint=False)
    before = path.read_bytes()
    with pytest.raises(WriteError, match=r"'LS Summary', 'LS Nodes'.*Rename those sheets"):
        pipeline.run(path)
    assert path.read_bytes() == before


def test_unmarked_sheets_written_inline_by_an_earlier_run_are_replaced(tmp_path):
    # An earlier lanesolve wrote its sheets with inline strings and no mark: strip the mark from a solved workbook.
    path = write_workbook(tmp_path / "plan.xlsx", valid_sheets())
    pipeline.run(path)
    text = re.sub(r'<definedName name="_lanesolve_result_sheets"[^>]*>[^<]*</definedName>', "",
                  _workbook_text(path))
    wbk.rewrite_zip(path, {"xl/workbook.xml": text.encode()})
    assert "_lanesolve_result_sheets" not in _workbook_text(path)
    pipeline.run(path)
    names = openpyxl.load_workbook(path).sheetnames
    assert names.count("LS Summary") == 1 and names.count("LS Lane flows") == 1
    assert _workbook_text(path).count('name="_lanesolve_result_sheets"') == 1  # marked again
