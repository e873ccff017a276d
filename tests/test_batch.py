"""Tests of lanesolve.batch: many workbooks in one batch, one failing; 1 worker, 2 workers and a Dask LocalCluster.

Reference for the solved costs: networkx's network simplex (``networkx.min_cost_flow_cost``) on the same data.
The batch tests need the whole solve stack, so they skip until lanesolve.model.solve and lanesolve.read.validate exist.
"""

import io
import json
import math
import sys

import openpyxl
import pytest

from lanesolve import batch
from lanesolve.errors import LanesolveError

DEPOT_NAMES = ["Heron Works", "Ibis Yard"]
CUSTOMER_NAMES = ["Jay Grocers", "Kite Pharmacy", "Linnet Hardware"]


def book_data(seed: int) -> dict:
    """A small invented transportation problem whose costs vary with ``seed`` (all integers)."""
    supply = [60 + 5 * (seed % 3), 70]
    demand = [30 + seed % 4, 40, 25 + (seed * 7) % 10]
    lanes = [(d, c, 1 + (3 * i + 5 * j + seed) % 9)
             for i, d in enumerate(DEPOT_NAMES) for j, c in enumerate(CUSTOMER_NAMES)]
    return {"supply": supply, "demand": demand, "lanes": lanes}


def write_book(path, data) -> str:
    book = openpyxl.Workbook()
    book.remove(book.active)
    depots = book.create_sheet("Depots")
    depots.append(["depot", "supply"])
    for name, supply in zip(DEPOT_NAMES, data["supply"]):
        depots.append([name, supply])
    customers = book.create_sheet("Customers")
    customers.append(["customer", "demand"])
    for name, demand in zip(CUSTOMER_NAMES, data["demand"]):
        customers.append([name, demand])
    lanes = book.create_sheet("Lanes")
    lanes.append(["origin", "destination", "cost_per_unit"])
    for lane in data["lanes"]:
        lanes.append(list(lane))
    book.save(path)
    return str(path)


def networkx_cost(data) -> float:
    nx = pytest.importorskip("networkx")
    graph = nx.DiGraph()
    graph.add_node("source", demand=-sum(data["demand"]))
    for name, supply in zip(DEPOT_NAMES, data["supply"]):
        graph.add_edge("source", name, capacity=supply, weight=0)
    for name, demand in zip(CUSTOMER_NAMES, data["demand"]):
        graph.add_node(name, demand=demand)
    for origin, destination, cost in data["lanes"]:
        graph.add_edge(origin, destination, weight=cost)
    return float(nx.min_cost_flow_cost(graph))


@pytest.fixture
def solver_stack():
    pytest.importorskip("lanesolve.read.validate")
    pytest.importorskip("lanesolve.model.solve")


@pytest.fixture
def books(tmp_path, solver_stack):
    """Five valid workbooks and one broken (its Lanes sheet names a depot that does not exist), in a folder."""

    def make(folder_name="run"):
        folder = tmp_path / folder_name
        folder.mkdir()
        paths, datas = [], []
        for seed in range(6):
            data = book_data(seed)
            if seed == 3:
                data = {**data, "lanes": [*data["lanes"], ("Nowhere Depot", "Jay Grocers", 1)]}
            datas.append(data)
            paths.append(write_book(folder / f"region{seed}.xlsx", data))
        return paths, datas

    return make


BROKEN = 3


def flows_of(run):
    return sorted((f["origin"], f["destination"], round(f["flow"], 6)) for f in run.document["flows"])


def check_report(report, paths, datas):
    """N workbooks, one broken: N - 1 plans at the networkx optimum, one clear input error."""
    assert [run.path for run in report.runs] == paths
    for index, (run, data) in enumerate(zip(report.runs, datas)):
        if index == BROKEN:
            assert (run.status, run.exit_code) == ("input_error", 1)
            assert "Nowhere Depot" in run.error and math.isnan(run.total_cost)
        else:
            assert run.status == "optimal" and run.error == "" and run.exit_code == 0
            assert run.total_cost == pytest.approx(networkx_cost(data), rel=1e-9, abs=1e-6)
    assert len(report.failed) == 1 and report.exit_code == 1


def test_one_broken_workbook_never_stops_the_rest(books):
    paths, datas = books()
    report = batch.run_batch(paths, workers=1, progress=False)
    check_report(report, paths, datas)
    # Results are written as solve writes them: result sheets in the workbook, a summary beside it.
    solved = openpyxl.load_workbook(paths[0], read_only=True)
    assert "LS Summary" in solved.sheetnames
    assert "<html" in open(paths[0].replace(".xlsx", "-summary.html"), encoding="utf-8").read().lower()


def test_two_workers_give_the_same_results_as_one(books):
    one_paths, datas = books("one")
    two_paths, _ = books("two")
    one = batch.run_batch(one_paths, workers=1, progress=False)
    two = batch.run_batch(two_paths, workers=2, progress=False)
    check_report(two, two_paths, datas)
    assert two.backend == "processes" and two.workers == 2
    for a, b in zip(one.runs, two.runs):
        assert a.status == b.status and a.exit_code == b.exit_code
        if a.has_plan:
            # Same solver on the same data: the same plan, not just the same cost.
            assert b.total_cost == pytest.approx(a.total_cost, rel=1e-9, abs=1e-6)
            assert flows_of(a) == flows_of(b)


@pytest.mark.slow  # starts a Dask LocalCluster; CI runs it
def test_dask_local_cluster_gives_the_same_results_as_one_worker(books):
    distributed = pytest.importorskip("dask.distributed")
    one_paths, datas = books("one")
    dask_paths, _ = books("dask")
    one = batch.run_batch(one_paths, workers=1, progress=False)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        report = batch.run_batch(dask_paths, dask_address=cluster.scheduler_address, progress=False)
    check_report(report, dask_paths, datas)
    assert report.backend == "dask" and report.workers == 2
    for a, b in zip(one.runs, report.runs):
        assert a.status == b.status
        if a.has_plan:
            assert b.total_cost == pytest.approx(a.total_cost, rel=1e-9, abs=1e-6)
            assert flows_of(a) == flows_of(b)
            # The client wrote the worker's results beside the input, under the planner's paths.
            assert b.document["input"] == b.path
            assert "LS Summary" in openpyxl.load_workbook(b.path, read_only=True).sheetnames
            assert open(b.path.replace(".xlsx", "-summary.html"), encoding="utf-8").read()


def test_dask_missing_is_a_clear_error(monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # makes the import fail as if not installed
    with pytest.raises(LanesolveError, match=r"lanesolve\[dask\]"):
        batch.run_batch(["a.xlsx"], dask_address="tcp://127.0.0.1:1", progress=False)


def test_unexpected_exception_is_recorded_as_internal_error(books, monkeypatch):
    from lanesolve import pipeline

    paths, _ = books()

    def explode(path, **kwargs):
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(pipeline, "run", explode)
    report = batch.run_batch(paths[:2], workers=1, progress=False)
    assert [run.status for run in report.runs] == [batch.INTERNAL_ERROR] * 2
    assert report.runs[0].error == "ZeroDivisionError: division by zero"


def test_a_workbook_listed_twice_is_solved_once(books):
    paths, _ = books()
    report = batch.run_batch([paths[0], paths[0]], workers=2, progress=False)
    assert report.runs[0].status == "optimal"
    assert report.runs[1].status == "input_error" and "listed twice" in report.runs[1].error


def test_missing_file_is_an_input_error(tmp_path):
    report = batch.run_batch([str(tmp_path / "nope.xlsx")], progress=False)
    assert report.runs[0].status == "input_error" and "no such file" in report.runs[0].error


def test_workers_below_one_is_refused():
    with pytest.raises(LanesolveError, match="at least 1"):
        batch.run_batch([], workers=0)


def sample_report():
    return batch.BatchReport([batch.BatchRun("north.xlsx", "optimal", 1234.5, 0.25),
                              batch.BatchRun("south.xlsx", "input_error", math.nan, 0.01,
                                             "Lanes row 4, column origin: 'X' is unknown\nsecond problem", 1)],
                             seconds=0.3, workers=2, backend="processes")


def test_summary_csv_lists_every_run(tmp_path):
    sample_report().to_csv(tmp_path / "batch.csv")
    import csv

    rows = list(csv.DictReader(open(tmp_path / "batch.csv", encoding="utf-8")))
    assert [r["path"] for r in rows] == ["north.xlsx", "south.xlsx"]
    assert float(rows[0]["total_cost"]) == pytest.approx(1234.5) and rows[1]["total_cost"] == ""
    assert rows[1]["status"] == "input_error" and "second problem" in rows[1]["error"]


def test_summary_json_is_valid_json_without_nan():
    doc = json.loads(json.dumps(sample_report().to_json(), allow_nan=False))
    assert (doc["workbooks"], doc["with_plan"], doc["failed"]) == (2, 1, 1)
    assert doc["runs"][1]["total_cost"] is None and doc["runs"][0]["total_cost"] == pytest.approx(1234.5)


def test_summary_table_shows_status_cost_and_first_error_line():
    text = sample_report().table()
    assert "north.xlsx" in text and "1,234.50" in text and "'X' is unknown (+1 more)" in text
    assert "1 of 2 workbook(s) solved with a plan" in text


def test_progress_counter_on_a_terminal(monkeypatch):
    class Terminal(io.StringIO):
        def isatty(self):
            return True

    terminal = Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    bar = batch._Progress(2, enabled=True)
    bar.step(batch.BatchRun("a.xlsx", "optimal"))
    bar.step(batch.BatchRun("b.xlsx", "input_error", exit_code=1))
    bar.close()
    assert "\r[1/2] a.xlsx: ok" in terminal.getvalue() and "\r[2/2] b.xlsx: input_error" in terminal.getvalue()


def test_no_progress_when_not_a_terminal(monkeypatch):
    quiet = io.StringIO()
    monkeypatch.setattr(sys, "stderr", quiet)
    bar = batch._Progress(1, enabled=True)
    bar.step(batch.BatchRun("a.xlsx", "optimal"))
    bar.close()
    assert quiet.getvalue() == ""


# ----------------------------------------------------------------------------------------------------------------
# the batch summary files: formula-safe CSV, and planned before anything is solved

# Cells a spreadsheet program runs as formulas start with = + - @ (or tab / CR, which some strip first): the
# OWASP "CSV Injection" page lists these and the single-quote prefix as the neutralisation (recalled from memory).
FORMULA_NAMES = ["=cmd.xlsx", "+sum.xlsx", "-neg.xlsx", "@at.xlsx"]


def test_workbook_names_that_look_like_formulas_are_neutralised_in_the_csv_only(tmp_path, monkeypatch):
    import csv

    monkeypatch.chdir(tmp_path)
    for name in FORMULA_NAMES:
        write_book(tmp_path / name, book_data(1))
    report = batch.run_batch([f"./{name}" if name.startswith("-") else name for name in FORMULA_NAMES],
                             progress=False, summary_csv="batch-summary.csv")
    assert report.exit_code == 0, [run.error for run in report.runs]
    rows = list(csv.DictReader(open(tmp_path / "batch-summary.csv", encoding="utf-8", newline="")))
    for row in rows:
        assert not row["path"].startswith(batch.FORMULA_STARTS), row["path"]
    assert [row["path"] for row in rows][:2] == ["'=cmd.xlsx", "'+sum.xlsx"]
    raw = json.loads((tmp_path / "batch-summary.json").read_text(encoding="utf-8"))
    assert [run["path"] for run in raw["runs"]][:2] == ["=cmd.xlsx", "+sum.xlsx"]


@pytest.mark.parametrize("text", ["\tcmd", "\rcmd", "-2+3", "@SUM(A1)"])
def test_csv_safe_prefixes_every_formula_start(text):
    assert batch.csv_safe(text) == "'" + text


def test_summary_csv_that_is_one_of_the_workbooks_is_refused_before_solving(books):
    from lanesolve.errors import WriteError

    paths, _ = books()
    before = open(paths[0], "rb").read()
    with pytest.raises(WriteError, match="the same file"):
        batch.run_batch(paths, progress=False, summary_csv=paths[0].replace(".xlsx", ".csv").replace(
            "region0.csv", "region0-summary.html"))
    with pytest.raises(WriteError, match="the same file"):
        batch.run_batch(paths, progress=False, summary_csv=paths[0])
    assert open(paths[0], "rb").read() == before
    assert "LS Summary" not in openpyxl.load_workbook(paths[1], read_only=True).sheetnames  # nothing was solved


def test_existing_csv_lanesolve_did_not_write_is_refused_unless_force(tmp_path):
    from lanesolve.errors import WriteError

    write_book(tmp_path / "north.xlsx", book_data(0))
    summary = tmp_path / "batch-summary.csv"
    summary.write_text("my,own,table\n1,2,3\n", encoding="utf-8")
    with pytest.raises(WriteError, match="batch-summary.csv already exists and lanesolve did not write it"):
        batch.run_batch([str(tmp_path / "north.xlsx")], progress=False, summary_csv=summary)
    assert summary.read_text(encoding="utf-8") == "my,own,table\n1,2,3\n"
    batch.run_batch([str(tmp_path / "north.xlsx")], progress=False, summary_csv=summary, force=True)
    # A summary lanesolve wrote is replaced by the next batch without --force.
    again = batch.run_batch([str(tmp_path / "north.xlsx")], progress=False, summary_csv=summary)
    assert again.exit_code == 0 and summary.read_text(encoding="utf-8").startswith("path,status,")


def test_two_workbooks_whose_summaries_would_be_one_file_are_refused(tmp_path):
    from lanesolve.errors import WriteError

    write_book(tmp_path / "plan.xlsx", book_data(0))
    (tmp_path / "plan.xlsm").write_bytes((tmp_path / "plan.xlsx").read_bytes())
    with pytest.raises(WriteError, match=r"summary of .*plan.xlsx \(.*plan-summary.html\) and .*summary of .*plan.xlsm.*the same file"):
        batch.run_batch([str(tmp_path / "plan.xlsx"), str(tmp_path / "plan.xlsm")], progress=False,
                        summary_csv=tmp_path / "batch.csv")
