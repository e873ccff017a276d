"""The bundled example workbooks solve, and agree with an independent SciPy ``milp`` model of the same data.

The reference model here is written from the README's "What the numbers mean" text, reading the workbook with
openpyxl only (no lanesolve code), and solved with :func:`scipy.optimize.milp` (HiGHS), a solver lanesolve does not use:

    minimise   sum_lanes c_l x_l + sum_depots h_d * (flow out of d) + sum_hubs h_h * (flow into h)
               + sum_lanes f_l y_l + sum_customers p_k u_k
    subject to depot      out - in <= supply
               customer   in - out + u = demand        (u only for customers with a penalty, else u = 0)
               hub        in = out, in <= capacity
               lane       0 <= x <= capacity,  x <= M y  with y binary when f > 0 (M = capacity, or total supply)
"""

from __future__ import annotations

import math
import runpy
import shutil
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

EXAMPLES = Path(__file__).resolve().parent.parent / "example_workbooks"
EXAMPLE = EXAMPLES / "orvale_larder_supply.xlsx"
TEMPLATE = EXAMPLES / "blank_template.xlsx"


def _records(book, name: str) -> list[dict]:
    if name not in book.sheetnames:
        return []
    rows = list(book[name].iter_rows(values_only=True))
    headers = ["_".join(str(h or "").strip().lower().split()) for h in rows[0]]
    out = []
    for row in rows[1:]:
        if all(v is None or str(v).strip() == "" for v in row):
            continue
        out.append(dict(zip(headers, row)))
    return out


def _num(value, default=None):
    return default if value is None or str(value).strip() == "" else float(value)


def reference_model(path: Path) -> dict:
    """Solve the workbook at ``path`` independently; return cost, flows by lane key, unmet by customer."""
    book = openpyxl.load_workbook(path, data_only=True)
    settings = {r["setting"]: r["value"] for r in _records(book, "Settings")}
    default_penalty = _num(settings.get("unmet_penalty"))
    depots = {str(r["depot"]).strip(): r for r in _records(book, "Depots")}
    hubs = {str(r["hub"]).strip(): r for r in _records(book, "Hubs")}
    customers = {str(r["customer"]).strip(): r for r in _records(book, "Customers")}
    lanes = [r for r in _records(book, "Lanes")
             if str(r.get("active") or "yes").strip().lower() not in ("no", "n", "false", "0", "off")]
    total_supply = sum(_num(d["supply"]) for d in depots.values())

    # Variables: x per lane, then y per fixed-charge lane, then u per penalised customer.
    n_lanes = len(lanes)
    fixed = [i for i, lane in enumerate(lanes) if _num(lane.get("fixed_cost"), 0.0) > 0]
    penalised = [k for k, c in customers.items() if _num(c.get("unmet_penalty"), default_penalty) is not None]
    n = n_lanes + len(fixed) + len(penalised)
    cost = np.zeros(n)
    upper = np.full(n, np.inf)
    integrality = np.zeros(n)
    for i, lane in enumerate(lanes):
        origin, destination = str(lane["origin"]).strip(), str(lane["destination"]).strip()
        cost[i] = _num(lane["cost_per_unit"])
        if origin in depots:
            cost[i] += _num(depots[origin].get("handling_cost"), 0.0)
        if destination in hubs:
            cost[i] += _num(hubs[destination].get("handling_cost"), 0.0)
        upper[i] = _num(lane.get("capacity"), math.inf)
    for j, i in enumerate(fixed):
        cost[n_lanes + j] = _num(lanes[i]["fixed_cost"])
        upper[n_lanes + j] = 1
        integrality[n_lanes + j] = 1
    for j, k in enumerate(penalised):
        cost[n_lanes + len(fixed) + j] = _num(customers[k].get("unmet_penalty"), default_penalty)
        upper[n_lanes + len(fixed) + j] = _num(customers[k]["demand"])

    rows, low, high = [], [], []

    def add(coefs: dict[int, float], lo: float, hi: float) -> None:
        row = np.zeros(n)
        for index, value in coefs.items():
            row[index] += value
        rows.append(row)
        low.append(lo)
        high.append(hi)

    def balance(node: str) -> dict[int, float]:
        coefs: dict[int, float] = {}
        for i, lane in enumerate(lanes):
            if str(lane["origin"]).strip() == node:
                coefs[i] = coefs.get(i, 0.0) + 1.0
            if str(lane["destination"]).strip() == node:
                coefs[i] = coefs.get(i, 0.0) - 1.0
        return coefs  # out - in

    for name, depot in depots.items():
        add(balance(name), -np.inf, _num(depot["supply"]))
    for name, customer in customers.items():
        coefs = {i: -v for i, v in balance(name).items()}  # in - out
        if name in penalised:
            coefs[n_lanes + len(fixed) + penalised.index(name)] = 1.0
        demand = _num(customer["demand"])
        add(coefs, demand, demand)
    for name, hub in hubs.items():
        add(balance(name), 0.0, 0.0)
        inflow = {i: 1.0 for i, lane in enumerate(lanes) if str(lane["destination"]).strip() == name}
        add(inflow, -np.inf, _num(hub.get("capacity"), np.inf))
    for j, i in enumerate(fixed):
        big_m = upper[i] if math.isfinite(upper[i]) else total_supply
        add({i: 1.0, n_lanes + j: -big_m}, -np.inf, 0.0)

    solution = milp(cost, constraints=LinearConstraint(np.array(rows), low, high), integrality=integrality,
                    bounds=Bounds(np.zeros(n), upper), options={"mip_rel_gap": 1e-9})
    assert solution.success, solution.message
    flows = {(str(l["origin"]).strip(), str(l["destination"]).strip(), str(l.get("mode") or "").strip()):
             solution.x[i] for i, l in enumerate(lanes)}
    unmet = {k: solution.x[n_lanes + len(fixed) + j] for j, k in enumerate(penalised)}
    return {"cost": solution.fun, "flows": flows, "unmet": unmet, "lanes": lanes, "depots": depots, "hubs": hubs,
            "customers": customers}


def test_build_script_is_deterministic(tmp_path):
    # Running the builder again writes the same data as the committed example (same seed, same cells).
    runpy.run_path(str(EXAMPLES / "build_examples.py"), run_name="not_main")["main"](["--out", str(tmp_path)])
    for name in (EXAMPLE.name, TEMPLATE.name):
        fresh = openpyxl.load_workbook(tmp_path / name)
        committed = openpyxl.load_workbook(EXAMPLES / name)
        assert fresh.sheetnames == committed.sheetnames
        for sheet in fresh.sheetnames:
            assert list(fresh[sheet].values) == list(committed[sheet].values), (name, sheet)


def test_example_has_the_promised_shape():
    ref = reference_model(EXAMPLE)
    book = openpyxl.load_workbook(EXAMPLE)
    all_lanes = _records(book, "Lanes")
    # The example is meant to be a real network: at least 3 depots, 2 hubs, 15 customers and 50 lanes.
    assert len(ref["depots"]) >= 3 and len(ref["hubs"]) >= 2 and len(ref["customers"]) >= 15
    assert len(all_lanes) >= 50
    assert any(str(l.get("active")).lower() == "no" for l in all_lanes)
    assert any(l.get("notes") for l in all_lanes)
    kinds = {**dict.fromkeys(ref["depots"], "depot"), **dict.fromkeys(ref["hubs"], "hub"),
             **dict.fromkeys(ref["customers"], "customer")}
    shapes = {(kinds[l["origin"]], kinds[l["destination"]]) for l in all_lanes}
    assert {("depot", "customer"), ("depot", "hub"), ("hub", "customer"), ("depot", "depot")} <= shapes
    pairs = [(l["origin"], l["destination"]) for l in all_lanes]
    assert any(pairs.count(p) > 1 for p in pairs)  # two modes on one pair
    settings = {r["setting"]: r["value"] for r in _records(book, "Settings")}
    assert settings["units"] == "pallets" and settings["currency"] == "EUR"
    supply = sum(float(d["supply"]) for d in ref["depots"].values())
    demand = sum(float(c["demand"]) for c in ref["customers"].values())
    assert supply > 1.1 * demand


def test_example_optimum_is_interesting():
    """The independent optimum shows every feature the builder promises (see its module docstring)."""
    ref = reference_model(EXAMPLE)
    flows, tol = ref["flows"], 1e-6
    # Quistmoor's supply binds: net outflow equals supply.
    net = sum(v for k, v in flows.items() if k[0] == "Quistmoor depot") - sum(
        v for k, v in flows.items() if k[1] == "Quistmoor depot")
    assert net == pytest.approx(450, abs=tol)
    # Other depots have spare supply (supply is comfortably above demand overall).
    for depot in ("Orlenby depot", "Tarrowick depot"):
        out = sum(v for k, v in flows.items() if k[0] == depot) - sum(v for k, v in flows.items() if k[1] == depot)
        assert out < float(ref["depots"][depot]["supply"]) - 1
    # The capped direct lane to Harrowquay runs full.
    assert flows[("Quistmoor depot", "Harrowquay", "road")] == pytest.approx(100, abs=tol)
    # One fixed-charge shuttle is opened, the other stays shut.
    assert flows[("Orlenby depot", "Vantry hub", "rail")] > 1
    assert flows[("Tarrowick depot", "Mellisford hub", "rail")] == pytest.approx(0, abs=tol)
    # Runnelby is short by part of its demand: its capped run is used in full, the rest is not worth the trip.
    assert flows[("Vantry hub", "Runnelby", "road")] == pytest.approx(35, abs=tol)
    assert ref["unmet"]["Runnelby"] == pytest.approx(25, abs=tol)


def test_example_solves_like_the_reference(tmp_path):
    pytest.importorskip("lanesolve.model.solve")
    pytest.importorskip("lanesolve.write.writeback")
    pytest.importorskip("lanesolve.read.validate")
    pytest.importorskip("lanesolve.model.checks")
    from lanesolve.pipeline import run
    from lanesolve.model.result import SolveStatus

    work = tmp_path / EXAMPLE.name
    shutil.copy(EXAMPLE, work)
    output = tmp_path / "solved.xlsx"
    outcome = run(work, output=output)
    result = outcome.result
    ref = reference_model(EXAMPLE)

    assert result.status is SolveStatus.OPTIMAL
    # Same optimum as SciPy milp (HiGHS) on the same data, within 1e-6 relative.
    assert result.total_cost == pytest.approx(ref["cost"], rel=1e-6)
    assert sum(result.cost_breakdown.values()) == pytest.approx(result.total_cost, rel=1e-9)
    # All demand met except what the penalty customer rationally drops (as the reference model finds it).
    unmet = {r.customer: r.quantity for r in result.unmet.itertuples(index=False) if r.quantity > 1e-6}
    expected = {k: v for k, v in ref["unmet"].items() if v > 1e-6}
    assert unmet.keys() == expected.keys()
    for name, quantity in expected.items():
        assert unmet[name] == pytest.approx(quantity, abs=1e-6)
    # The plan is feasible on the workbook's own data (alternative optima may route differently).
    lane_caps = {(str(l["origin"]), str(l["destination"]), str(l.get("mode") or "")): _num(l.get("capacity"), math.inf)
                 for l in ref["lanes"]}
    for flow in result.flows.itertuples(index=False):
        key = (flow.origin, flow.destination, flow.mode)
        assert key in lane_caps, key  # only active lanes carry flow
        assert -1e-6 <= flow.flow <= lane_caps[key] + 1e-6
    # Result sheets were written beside the untouched input, with the summary page.
    book = openpyxl.load_workbook(output, read_only=True)
    from lanesolve.contract import RESULT_PREFIX

    assert [s for s in book.sheetnames if s.startswith(RESULT_PREFIX)]
    assert Path(outcome.info.summary_path).exists()


def test_blank_template_is_the_template():
    from lanesolve.write.template import build_template

    committed = openpyxl.load_workbook(TEMPLATE)
    fresh = build_template()
    assert committed.sheetnames == fresh.sheetnames
    for sheet in fresh.sheetnames:
        assert list(committed[sheet].values) == list(fresh[sheet].values), sheet


def _edited_copy(tmp_path: Path, name: str, edit) -> Path:
    """The example edited by hand with openpyxl (its Scenarios sheet removed), as a planner would for a what-if."""
    book = openpyxl.load_workbook(EXAMPLE)
    del book["Scenarios"]
    edit(book)
    path = tmp_path / f"{name}.xlsx"
    book.save(path)
    return path


def _scale_column(book, sheet: str, column: str, factor: float, only=None) -> None:
    ws = book[sheet]
    headers = [c.value for c in ws[1]]
    col = headers.index(column) + 1
    for row in range(2, ws.max_row + 1):
        cell = ws.cell(row=row, column=col)
        if cell.value is not None and (only is None or only(ws, row)):
            cell.value = float(cell.value) * factor


HAND_EDITS = {
    # Each what-if on the example's Scenarios sheet, done by hand the same way (a scenario's result equals
    # solving a workbook edited by hand); the edited copy is solved by the SciPy milp reference above.
    "peak season": lambda book: _scale_column(book, "Customers", "demand", 1.2),
    "diesel up 8 %": lambda book: _scale_column(book, "Lanes", "cost_per_unit", 1.08),
    "Mellisford hub closed": lambda book: _scale_column(
        book, "Hubs", "capacity", 0.0, only=lambda ws, row: ws.cell(row=row, column=1).value == "Mellisford hub"),
}


@pytest.mark.parametrize("scenario", sorted(HAND_EDITS))
def test_example_scenarios_equal_the_workbook_edited_by_hand(tmp_path, scenario):
    pipeline = pytest.importorskip("lanesolve.pipeline")
    outcome = pipeline.run(EXAMPLE, write=False)
    assert scenario in outcome.scenario_results
    result = outcome.scenario_results[scenario]
    reference = reference_model(_edited_copy(tmp_path, "edited", HAND_EDITS[scenario]))
    assert result.status.value == "optimal"
    assert result.total_cost == pytest.approx(reference["cost"], rel=1e-6)
    assert result.total_cost > outcome.result.total_cost  # each what-if costs more than the baseline
