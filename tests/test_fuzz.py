"""Property-based tests: generated workbooks, valid and broken in the ways people and programs break them.

Every generated workbook must end in one of three ways, and nothing else (any other exception fails the test):

- a plan, which an independent feasibility check written here accepts: flows non-negative and within lane
  capacity, only active lanes used, depot net outflow within supply, flow balance at hubs and customers, hub
  throughput within capacity, unmet demand only where a penalty allows it, and the reported total cost equal to the
  cost recomputed from the flows (cost definitions from the workbook contract in lanesolve/contract.py);
- :class:`~lanesolve.errors.NoPlanError`, confirmed by a networkx maximum flow that cannot carry all hard demand
  (the max-flow feasibility test for transshipment networks, Ahuja, Magnanti & Orlin, *Network Flows*, 1993,
  section 6.2 -- recalled from memory);
- :class:`~lanesolve.errors.WorkbookError` whose problems each name a sheet, and a row and column whenever they are
  about a cell value.

For workbooks generated without any breakage the check runs against the generator's own numbers, not against what
lanesolve read, and such a workbook must never be refused.

The CI profile runs a seeded 1,050 cases in about two to three minutes on two cores. ``LANESOLVE_FUZZ=long``
selects the pre-release profile (see docs/FUZZING.md).
"""

from __future__ import annotations

import datetime as dt
import math
import os
import tempfile
from pathlib import Path

import networkx as nx
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lanesolve import pipeline
from lanesolve.read import reader
from lanesolve.write import writeback
from lanesolve.errors import NoPlanError, WorkbookError

# Over a minute of generated workbooks: CI runs it (pytest -m slow), the quick start does not.
pytestmark = pytest.mark.slow

LONG = os.environ.get("LANESOLVE_FUZZ", "") == "long"
FUZZ_SETTINGS = dict(
    deadline=None,
    derandomize=not LONG,  # CI: the same cases every run; long runs explore new ones
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much],
    database=None,
)
VALID_EXAMPLES = 3000 if LONG else 250
BROKEN_EXAMPLES = 20000 if LONG else 800
if os.environ.get("LANESOLVE_FUZZ_EXAMPLES"):  # a quick look while developing: this many cases per property
    VALID_EXAMPLES = BROKEN_EXAMPLES = int(os.environ["LANESOLVE_FUZZ_EXAMPLES"])
TIME_LIMIT = 10.0  # seconds per solve; tiny networks need milliseconds

TOL = 1e-5


def _tol(*magnitudes: float) -> float:
    # Absolute tolerance growing with the numbers involved: CBC works to about 1e-7 relative (common practice).
    return TOL + 1e-7 * max([1.0] + [abs(m) for m in magnitudes if math.isfinite(m)])


# ----------------------------------------------------------------------------------------------------------------
# generating a valid network


ID_STYLES = st.sampled_from(["plain", "number", "unicode", "spaced"])
MONEY = st.one_of(st.integers(0, 50), st.floats(0, 50, allow_nan=False).map(lambda x: round(x, 2)))


def _ids(prefix: str, count: int, style: str, start: int) -> list:
    if style == "number":
        return [start + i for i in range(count)]  # numeric ids, read as text without ".0"
    if style == "unicode":
        return [f"{prefix} Łódź-Ørsted №{i} 🚚" for i in range(count)]
    if style == "spaced":
        return [f"{prefix} yard {i}" for i in range(count)]
    return [f"{prefix}{i}" for i in range(count)]


@st.composite
def networks(draw):
    """A small invented network as sheet rows plus the model the rows mean (the generator's own numbers)."""
    style = draw(ID_STYLES)
    n_dep, n_cus, n_hub = draw(st.integers(1, 3)), draw(st.integers(1, 4)), draw(st.integers(0, 2))
    depots = {d: float(draw(st.integers(0, 150))) for d in _ids("D", n_dep, style, 100)}
    depot_handling = {d: float(draw(st.sampled_from([0, 0, 0.5, 2]))) for d in depots}
    penalty_default = draw(st.one_of(st.none(), st.just(None), st.sampled_from([40.0, 500.0])))
    customers = {}
    for c in _ids("C", n_cus, style, 200):
        own = draw(st.one_of(st.none(), st.none(), st.sampled_from([30.0, 1000.0])))
        customers[c] = (float(draw(st.integers(0, 80))), own)
    hubs = {h: (draw(st.one_of(st.none(), st.integers(0, 150).map(float))), float(draw(st.sampled_from([0, 1]))))
            for h in _ids("H", n_hub, style, 300)}

    nodes_out = list(depots) + list(hubs)
    lanes: dict[tuple, tuple] = {}

    def add_lane(origin, destination):
        mode = draw(st.sampled_from(["", "road", "rail"]))
        if origin == destination or (origin, destination, mode) in lanes:
            return
        capacity = draw(st.one_of(st.none(), st.integers(0, 120).map(float)))
        fixed = float(draw(st.sampled_from([0, 0, 0, 25, 80])))
        active = draw(st.sampled_from([True, True, True, False]))
        lanes[(origin, destination, mode)] = (float(draw(MONEY)), capacity, fixed, active)

    for customer in customers:
        add_lane(draw(st.sampled_from(nodes_out)), customer)
    for hub in hubs:
        add_lane(draw(st.sampled_from(list(depots))), hub)
    every = list(depots) + list(hubs) + list(customers)
    for _ in range(draw(st.integers(0, 4))):
        add_lane(draw(st.sampled_from(every)), draw(st.sampled_from(every)))

    sheets = {
        "Depots": [["depot", "supply", "handling_cost"]] + [[d, s, depot_handling[d]] for d, s in depots.items()],
        "Customers": [["customer", "demand", "unmet_penalty"]] + [[c, q, p] for c, (q, p) in customers.items()],
        "Lanes": [["origin", "destination", "cost_per_unit", "mode", "capacity", "fixed_cost", "active"]]
        + [[o, d, cost, mode or None, cap, fixed or None,
            draw(st.sampled_from(["yes", "y", None, "TRUE", True] if act else ["no", "n", "FALSE", False]))]
           for (o, d, mode), (cost, cap, fixed, act) in lanes.items()],
    }
    if hubs:
        sheets["Hubs"] = [["hub", "capacity", "handling_cost"]] + [[h, c, g] for h, (c, g) in hubs.items()]
    if penalty_default is not None or draw(st.booleans()):
        sheets["Settings"] = [["setting", "value"], ["units", "pallets"], ["unmet_penalty", penalty_default]]

    def key(x):
        return str(x)

    model = {
        "depots": {key(d): (s, depot_handling[d]) for d, s in depots.items()},
        "customers": {key(c): (q, p if p is not None else penalty_default) for c, (q, p) in customers.items()},
        "hubs": {key(h): (math.inf if c is None else c, g) for h, (c, g) in hubs.items()},
        "lanes": {(key(o), key(d), m): (cost, math.inf if cap is None else cap, fixed, act)
                  for (o, d, m), (cost, cap, fixed, act) in lanes.items()},
    }
    return sheets, model


# ----------------------------------------------------------------------------------------------------------------
# breaking it


LONG_TEXT = "lane " * 2000  # 10,000 characters
NASTY = st.one_of(
    st.sampled_from([
        None, "", "   ", True, False, "yes", "TRUE", 0, -1, -0.0, 1e308, -1e308, 1e-308, 5e-324, 10**30, -(10**30),
        math.nan, math.inf, -math.inf, "nan", "NaN", "inf", "-Infinity", "1,200", "12,345.5", "1,5", "12,34",
        "1.200,50", "€12", "$1,200.50", "12 kg", "£ 3", " 42 ", "1e3", "0x1A", "½", "٣", "１２", "=1+1", "=A1",
        "#N/A", LONG_TEXT, "Dépôt ☃ 🚚", "\u200bD0", "D0 ", " d0", "d0", "D\u00a00", "Nowhere",
        dt.date(2024, 3, 1), dt.datetime(2024, 3, 1, 8, 30), dt.time(12, 0), dt.timedelta(days=2),
    ]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(-(10**20), 10**20),
    st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=12),
    st.dates(min_value=dt.date(1900, 3, 1), max_value=dt.date(2200, 1, 1)),
)


@st.composite
def broken_workbooks(draw):
    """A generated network with one to four breakages applied; returns sheets and the file-level options."""
    sheets, _model = draw(networks())
    hidden, merges, order = [], [], list(sheets)
    for _ in range(draw(st.integers(1, 4))):
        name = draw(st.sampled_from(sorted(sheets)))
        rows = sheets[name]
        kind = draw(st.sampled_from([
            "cell", "cell", "cell", "cell", "header", "duplicate_row", "delete_row", "id_variant", "unknown_id",
            "drop_column", "duplicate_header", "rows_down", "rename_sheet", "delete_sheet", "hide", "merge",
            "long_text", "junk_column", "ragged",
        ]))
        width = max(1, max(len(r) for r in rows))
        if kind == "cell":
            r = draw(st.integers(1, max(1, len(rows) - 1))) if len(rows) > 1 else 0
            c = draw(st.integers(0, width))
            row = rows[r] if r < len(rows) else rows[-1]
            while len(row) <= c:
                row.append(None)
            row[c] = draw(NASTY)
        elif kind == "header" and rows[0]:
            c = draw(st.integers(0, len(rows[0]) - 1))
            header = str(rows[0][c] or "")
            rows[0][c] = draw(st.sampled_from([header.upper(), f"  {header.replace('_', ' ').title()} ",
                                               header.replace("_", "-"), header[:-1], draw(NASTY)]))
        elif kind == "duplicate_row" and len(rows) > 1:
            rows.insert(draw(st.integers(1, len(rows))), list(rows[draw(st.integers(1, len(rows) - 1))]))
        elif kind == "delete_row" and len(rows) > 1:
            del rows[draw(st.integers(1, len(rows) - 1))]
        elif kind in ("id_variant", "unknown_id", "long_text") and len(rows) > 1:
            r = draw(st.integers(1, len(rows) - 1))
            c = draw(st.integers(0, max(0, min(1, len(rows[r]) - 1))))
            while len(rows[r]) <= c:
                rows[r].append(None)
            value = str(rows[r][c])
            rows[r][c] = {"id_variant": draw(st.sampled_from([value.upper(), value.lower(), f" {value}  ",
                                                              value.replace(" ", "  "), f"\t{value}"])),
                          "unknown_id": "Nowhere Junction",
                          "long_text": value + LONG_TEXT}[kind]
        elif kind == "drop_column" and rows[0]:
            rows[0][draw(st.integers(0, len(rows[0]) - 1))] = None
        elif kind == "duplicate_header" and rows[0]:
            rows[0].append(rows[0][draw(st.integers(0, len(rows[0]) - 1))])
        elif kind == "rows_down":
            for _ in range(draw(st.integers(1, 3))):
                rows.insert(0, list(draw(st.sampled_from([[], ["Freight plan, week 12 (invented)"],
                                                          [None, None]]))))
        elif kind == "rename_sheet":
            new = draw(st.sampled_from([name.upper(), f" {name.lower()} ", name[:-1], name + " (2)"]))
            if new.strip() and new not in sheets and len(new) <= 31:
                sheets[new] = sheets.pop(name)
                order[order.index(name)] = new
        elif kind == "delete_sheet" and len(sheets) > 1:
            del sheets[name]
            order.remove(name)
        elif kind == "hide":
            hidden.append(name)
        elif kind == "merge" and len(rows) > 2:
            r = draw(st.integers(2, len(rows) - 1))
            c = draw(st.integers(1, width))
            merges.append((name, f"{openpyxl.utils.get_column_letter(c)}{r}:"
                                 f"{openpyxl.utils.get_column_letter(c + draw(st.integers(0, 1)))}"
                                 f"{r + draw(st.integers(0, 1))}"))
        elif kind == "junk_column":
            rows[0].append(draw(st.sampled_from(["notes ✎", "Kommentar", None, "cost per unit (old)"])))
            for row in rows[1:]:
                row.append(draw(NASTY))
        elif kind == "ragged" and len(rows) > 1:
            rows[draw(st.integers(1, len(rows) - 1))] = rows[-1][:1]
    order = [n for n in order if n in sheets]
    hidden = [n for n in hidden if n in sheets]
    merges = [(n, ref) for n, ref in merges if n in sheets]
    return {n: sheets[n] for n in order}, hidden, merges


# ----------------------------------------------------------------------------------------------------------------
# writing, running and checking


def _write(path: Path, sheets, hidden=(), merges=()) -> None:
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append([_cell_value(v) for v in row])
        if name in hidden:
            sheet.sheet_state = "hidden"
    if hidden and len(hidden) == len(sheets):
        book[next(iter(sheets))].sheet_state = "visible"  # a workbook needs one visible sheet
    for name, ref in merges:
        book[name].merge_cells(ref)
    book.save(path)


def _cell_value(value):
    # openpyxl writes Python ints beyond 64 bits as text of digits into a number cell; keep them, that is the point.
    return value


def _run(path: Path, write: bool):
    """pipeline.run, returning ("plan", outcome), ("no_plan", error) or ("refused", error).

    With ``write``, the result sheets of a plan are also written back into the workbook (the HTML summary is left
    to the report's own tests), and the workbook must then read back with the same input sheets.
    """
    try:
        outcome = pipeline.run(path, write=False, time_limit=TIME_LIMIT)
    except NoPlanError as error:
        return "no_plan", error
    except WorkbookError as error:
        return "refused", error
    if write:
        before = reader.read_workbook(path)
        writeback.write_results(path, path, writeback.result_sheets(outcome.network, outcome.result, outcome.info))
        after = reader.read_workbook(path)
        assert [s.rows for s in after.sheets.values()] == [s.rows for s in before.sheets.values()] \
            or _same_with_nan(after, before)
    return "plan", outcome


def _same_with_nan(after, before) -> bool:
    # NaN != NaN, so compare cell by cell treating two NaN cells as equal.
    def same(a, b):
        return a == b or (isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b))
    return all(len(x) == len(y) and all(same(a, b) for a, b in zip(x, y))
               for sa, sb in zip(after.sheets.values(), before.sheets.values()) for x, y in zip(sa.rows, sb.rows))


def _model_of(network) -> dict:
    """The model dict of a network lanesolve read (for broken workbooks, whose meaning is what lanesolve read)."""
    s = network.settings
    return {
        "depots": {r.id: (r.supply, r.handling_cost) for r in network.depots.itertuples()},
        "customers": {r.id: (r.demand, None if math.isnan(r.unmet_penalty) else r.unmet_penalty)
                      for r in network.customers.itertuples()},
        "hubs": {r.id: (r.capacity, r.handling_cost) for r in network.hubs.itertuples()},
        "lanes": {(r.origin, r.destination, r.mode): (r.cost_per_unit, r.capacity, r.fixed_cost, bool(r.active))
                  for r in network.lanes.itertuples()},
        "_settings": s,
    }


def check_plan(model: dict, result) -> None:
    """Independent feasibility and cost check of a plan against the model's numbers."""
    lanes, depots, customers, hubs = model["lanes"], model["depots"], model["customers"], model["hubs"]
    inflow: dict[str, float] = {}
    outflow: dict[str, float] = {}
    cost = 0.0
    for r in result.flows.itertuples(index=False):
        key = (r.origin, r.destination, r.mode if isinstance(r.mode, str) else "")
        assert key in lanes, f"flow on a lane that does not exist: {key}"
        unit, capacity, fixed, active = lanes[key]
        assert active, f"flow on an inactive lane {key}"
        assert r.flow >= -_tol(r.flow), key
        assert r.flow <= capacity + _tol(capacity), (key, r.flow, capacity)
        outflow[r.origin] = outflow.get(r.origin, 0.0) + r.flow
        inflow[r.destination] = inflow.get(r.destination, 0.0) + r.flow
        handling = (depots[r.origin][1] if r.origin in depots else 0.0) + \
                   (hubs[r.destination][1] if r.destination in hubs else 0.0)
        cost += r.flow * (unit + handling) + (fixed if r.flow > TOL else 0.0)
    unmet = {r.customer: r.quantity for r in result.unmet.itertuples(index=False)}
    for depot, (supply, _h) in depots.items():
        net = outflow.get(depot, 0.0) - inflow.get(depot, 0.0)
        assert net <= supply + _tol(supply), (depot, net, supply)
    for hub, (capacity, _g) in hubs.items():
        through = inflow.get(hub, 0.0)
        assert abs(through - outflow.get(hub, 0.0)) <= _tol(through), hub
        assert through <= capacity + _tol(capacity), (hub, through, capacity)
    for customer, (demand, penalty) in customers.items():
        short = unmet.get(customer, 0.0)
        assert short >= -_tol(short)
        if penalty is None:
            assert short <= _tol(demand), f"hard demand of {customer} left unmet"
        else:
            cost += short * penalty
        delivered = inflow.get(customer, 0.0) - outflow.get(customer, 0.0)
        assert abs(delivered + short - demand) <= _tol(demand, delivered), (customer, delivered, short, demand)
    assert set(unmet) <= set(customers)
    assert result.total_cost == pytest.approx(cost, rel=1e-6, abs=_tol(cost))


def max_flow_shortfall(model: dict) -> float:
    """Hard demand minus the most flow networkx can route to it; > 0 proves that no plan exists.

    Depots get their supply from a super source, hubs are split in two with their capacity between the halves, and
    every customer whose demand is hard sends its demand to a super sink. Customers with a penalty have no sink arc:
    their demand may go unmet, and flow through them is only transshipment.
    """
    graph = nx.DiGraph()

    def tail(node):
        return ("hub_out", node) if node in model["hubs"] else node

    def head(node):
        return ("hub_in", node) if node in model["hubs"] else node

    def add(u, v, capacity):
        if graph.has_edge(u, v):
            graph[u][v]["capacity"] = graph[u][v]["capacity"] + capacity
        else:
            graph.add_edge(u, v, capacity=capacity)

    big = 1.0 + sum(s for s, _h in model["depots"].values())  # no flow exceeds total supply
    for depot, (supply, _h) in model["depots"].items():
        add("source", depot, supply)
    for hub, (capacity, _g) in model["hubs"].items():
        add(("hub_in", hub), ("hub_out", hub), min(capacity, big))
    hard = 0.0
    for customer, (demand, penalty) in model["customers"].items():
        if penalty is None:
            add(customer, "sink", demand)
            hard += demand
    for (origin, destination, _mode), (_c, capacity, _f, active) in model["lanes"].items():
        if active:
            add(tail(origin), head(destination), min(capacity, big))
    if hard == 0:
        return 0.0
    graph.add_node("source")
    graph.add_node("sink")
    value, _ = nx.maximum_flow(graph, "source", "sink")
    return hard - value


def check_refusal(error: WorkbookError, sheet_names) -> None:
    assert error.problems, "a WorkbookError must list its problems"
    for problem in error.problems:
        assert problem.message
        assert problem.sheet is not None, f"problem names no sheet: {problem}"
        assert problem.sheet.strip() in {n.strip() for n in sheet_names} or problem.row is None, problem
        if problem.value is not None and problem.row is not None:
            assert problem.column, f"problem about a cell names no column: {problem}"
        assert problem.sheet in str(problem)


# ----------------------------------------------------------------------------------------------------------------
# the properties


@settings(max_examples=VALID_EXAMPLES, **FUZZ_SETTINGS)
@given(networks(), st.integers(0, 4))
def test_valid_workbooks_give_a_checked_plan_or_a_proven_no_plan(generated, write_choice):
    sheets, model = generated
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "plan.xlsx"
        _write(path, sheets)
        outcome_kind, value = _run(path, write=write_choice == 0)
    assert outcome_kind != "refused", f"a valid workbook was refused: {value}"
    shortfall = max_flow_shortfall(model)
    if outcome_kind == "plan":
        assert shortfall <= _tol(shortfall)
        check_plan(model, value.result)
    else:
        assert shortfall > TOL, f"no plan reported, but networkx routes all hard demand: {value}"


@settings(max_examples=BROKEN_EXAMPLES, **FUZZ_SETTINGS)
@given(broken_workbooks(), st.integers(0, 6))
def test_broken_workbooks_give_a_checked_plan_or_a_clear_message(generated, write_choice):
    sheets, hidden, merges = generated
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "broken.xlsx"
        _write(path, sheets, hidden, merges)
        outcome_kind, value = _run(path, write=write_choice == 0)
        if outcome_kind == "refused":
            check_refusal(value, sheets)
            return
        network = value.network if outcome_kind == "plan" else pipeline.load(path)[0]
    model = _model_of(network)
    shortfall = max_flow_shortfall(model)
    if outcome_kind == "plan":
        check_plan(model, value.result)
    else:
        assert shortfall > TOL, f"no plan reported, but networkx routes all hard demand: {value}"


def test_the_checks_catch_a_wrong_plan():
    # The feasibility check must be able to fail: a hand-made plan that overships a depot is rejected.
    import pandas as pd

    from lanesolve.model.result import Result, SolveStatus

    model = {"depots": {"D": (10.0, 0.0)}, "customers": {"C": (15.0, None)}, "hubs": {},
             "lanes": {("D", "C", ""): (1.0, math.inf, 0.0, True)}}
    flows = pd.DataFrame({"origin": ["D"], "destination": ["C"], "mode": [""], "flow": [15.0]})
    with pytest.raises(AssertionError):
        check_plan(model, Result(SolveStatus.OPTIMAL, total_cost=15.0, flows=flows))
    assert max_flow_shortfall(model) == pytest.approx(5.0)  # 15 demanded, 10 can arrive (hand computed)
