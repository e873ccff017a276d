"""The naive pipeline, written honestly: what a capable analyst would write first, without tuning for speed.

1. read: ``pandas.read_excel(engine="openpyxl")`` once per sheet;
2. build: a PuLP model with a dict of ``LpVariable`` per lane, and per node an ``lpSum`` over a list comprehension
   of the lanes leaving / entering it (adjacency lists built in one pass, not a scan of all lanes per node);
3. solve: CBC through ``PULP_CBC_CMD(msg=False)``;
4. write: ``openpyxl.load_workbook`` of the whole input, add the result sheets (lanes with flow, nodes), ``save``.

The model is the one in the docstring of ``lanesolve/model/formulation.py`` (depot handling per unit shipped out, hub handling
per unit in, fixed charges with a big-M of the smaller of lane capacity and total demand), so its objective can be
compared with lanesolve's and with bare HiGHS.

Usage::

    python benchmarks/naive.py benchmarks/cache/lanes-10k-s7.xlsx /tmp/naive-out.xlsx
"""

from __future__ import annotations

import math
import sys
import time

import openpyxl
import pandas as pd
import pulp

YES = {"yes", "y", "true", "1", "x", "on", ""}


def read(path: str) -> dict[str, pd.DataFrame]:
    """Read the five input sheets with pandas + openpyxl; headers normalised to snake case."""
    sheets = {}
    for name in ("Depots", "Customers", "Hubs", "Lanes", "Settings"):
        frame = pd.read_excel(path, sheet_name=name, engine="openpyxl")
        frame.columns = [str(c).strip().lower().replace(" ", "_") for c in frame.columns]
        sheets[name] = frame
    return sheets


def build(sheets: dict[str, pd.DataFrame]) -> tuple[pulp.LpProblem, dict, list]:
    """Build the PuLP model the straightforward way; return (problem, lane variables, lane records)."""
    depots = sheets["Depots"].fillna({"handling_cost": 0.0})
    customers = sheets["Customers"]
    hubs = sheets["Hubs"].fillna({"handling_cost": 0.0})
    lanes = sheets["Lanes"]
    settings = dict(zip(sheets["Settings"]["setting"].astype(str), sheets["Settings"]["value"]))
    default_penalty = settings.get("unmet_penalty")

    active = lanes["active"].fillna("yes").astype(str).str.strip().str.lower().isin(YES)
    records = lanes[active].to_dict("records")
    depot_handling = dict(zip(depots["depot"].astype(str), depots["handling_cost"]))
    hub_handling = dict(zip(hubs["hub"].astype(str), hubs["handling_cost"]))
    total_demand = float(customers["demand"].sum())

    prob = pulp.LpProblem("naive_lane_plan", pulp.LpMinimize)
    flow = {}
    use = {}
    out_lanes: dict[str, list[int]] = {}
    in_lanes: dict[str, list[int]] = {}
    for i, lane in enumerate(records):
        cap = lane.get("capacity")
        cap = None if cap is None or (isinstance(cap, float) and math.isnan(cap)) else float(cap)
        flow[i] = pulp.LpVariable(f"flow_{i}", lowBound=0, upBound=cap)
        fixed = lane.get("fixed_cost")
        if fixed is not None and not math.isnan(fixed) and fixed > 0:
            use[i] = pulp.LpVariable(f"use_{i}", cat="Binary")
            prob += flow[i] <= min(cap if cap is not None else total_demand, total_demand) * use[i], f"link_{i}"
        out_lanes.setdefault(str(lane["origin"]), []).append(i)
        in_lanes.setdefault(str(lane["destination"]), []).append(i)

    unmet = {}
    penalty_terms = []
    for row in customers.itertuples(index=False):
        penalty = getattr(row, "unmet_penalty", math.nan)
        if penalty is None or (isinstance(penalty, float) and math.isnan(penalty)):
            penalty = default_penalty
        if penalty is not None and not (isinstance(penalty, float) and math.isnan(penalty)):
            unmet[row.customer] = pulp.LpVariable(f"unmet_{row.customer}", lowBound=0, upBound=row.demand)
            penalty_terms.append(float(penalty) * unmet[row.customer])

    transport = pulp.lpSum([records[i]["cost_per_unit"] * flow[i] for i in flow])
    handling = pulp.lpSum(
        [depot_handling[d] * flow[i] for d in depot_handling for i in out_lanes.get(d, [])]
        + [hub_handling[h] * flow[i] for h in hub_handling for i in in_lanes.get(h, [])]
    )
    fixed_terms = pulp.lpSum([records[i]["fixed_cost"] * use[i] for i in use])
    prob += transport + handling + fixed_terms + pulp.lpSum(penalty_terms)

    for row in depots.itertuples(index=False):
        d = str(row.depot)
        prob += (pulp.lpSum([flow[i] for i in out_lanes.get(d, [])])
                 - pulp.lpSum([flow[i] for i in in_lanes.get(d, [])]) <= row.supply), f"supply_{d}"
    for row in customers.itertuples(index=False):
        c = str(row.customer)
        lhs = pulp.lpSum([flow[i] for i in in_lanes.get(c, [])]) - pulp.lpSum([flow[i] for i in out_lanes.get(c, [])])
        if c in unmet:
            lhs += unmet[c]
        prob += lhs == row.demand, f"balance_{c}"
    for row in hubs.itertuples(index=False):
        h = str(row.hub)
        inflow = pulp.lpSum([flow[i] for i in in_lanes.get(h, [])])
        prob += inflow - pulp.lpSum([flow[i] for i in out_lanes.get(h, [])]) == 0, f"hub_flow_{h}"
        if not (isinstance(row.capacity, float) and math.isnan(row.capacity)):
            prob += inflow <= row.capacity, f"hub_cap_{h}"
    return prob, flow, records


def solve(prob: pulp.LpProblem, time_limit: float | None = None) -> tuple[str, float]:
    """Solve with the bundled CBC; return (PuLP status text, objective)."""
    prob.solve(pulp.PULP_CBC_CMD(msg=False, timeLimit=time_limit))
    return pulp.LpStatus[prob.status], float(pulp.value(prob.objective))


def write(path: str, output: str, sheets: dict[str, pd.DataFrame], flow: dict, records: list) -> None:
    """Load the whole workbook with openpyxl, add the result sheets, save it as ``output``."""
    book = openpyxl.load_workbook(path)
    for name in ("LS Lane flows", "LS Nodes"):
        if name in book.sheetnames:
            del book[name]
    lanes_sheet = book.create_sheet("LS Lane flows")
    lanes_sheet.append(["origin", "destination", "mode", "flow", "cost_per_unit", "variable_cost"])
    shipped: dict[str, float] = {}
    received: dict[str, float] = {}
    for i, var in flow.items():
        value = var.varValue or 0.0
        if value > 1e-9:
            lane = records[i]
            lanes_sheet.append([lane["origin"], lane["destination"], lane["mode"], value, lane["cost_per_unit"],
                                value * lane["cost_per_unit"]])
            shipped[lane["origin"]] = shipped.get(lane["origin"], 0.0) + value
            received[lane["destination"]] = received.get(lane["destination"], 0.0) + value
    nodes_sheet = book.create_sheet("LS Nodes")
    nodes_sheet.append(["node", "kind", "shipped", "received"])
    for kind, sheet, column in (("depot", "Depots", "depot"), ("hub", "Hubs", "hub"),
                                ("customer", "Customers", "customer")):
        for node in sheets[sheet][column].astype(str):
            nodes_sheet.append([node, kind, shipped.get(node, 0.0), received.get(node, 0.0)])
    book.save(output)


def measure(path: str, output: str, time_limit: float | None = None) -> dict:
    """Run the naive pipeline on ``path`` writing ``output``; return stage seconds, objective and status."""
    timings = {}
    start = tick = time.perf_counter()
    sheets = read(path)
    timings["read"] = time.perf_counter() - tick
    tick = time.perf_counter()
    prob, flow, records = build(sheets)
    timings["build"] = time.perf_counter() - tick
    tick = time.perf_counter()
    status, objective = solve(prob, time_limit)
    timings["solve"] = time.perf_counter() - tick
    tick = time.perf_counter()
    write(path, output, sheets, flow, records)
    timings["write"] = time.perf_counter() - tick
    timings["total"] = time.perf_counter() - start
    return {"timings": timings, "objective": objective if status == "Optimal" else math.nan, "status": status}


if __name__ == "__main__":
    print(measure(sys.argv[1], sys.argv[2]))
