"""MIP family: random fixed-charge transportation instances, CBC and HiGHS at a time limit, against a best known value.

The fixed-charge transportation problem (FCTP): ``m`` depots with supply, ``n`` customers with demand, a lane from
every depot to every customer with a cost per unit and a fixed charge paid if the lane is used. Instances are
balanced (total supply = total demand) with integer data drawn uniformly: demand 10-50, cost per unit 3-8, fixed
charge 50-200. Those ranges follow the style of the random FCTP test sets in the literature (e.g. the ones used by
Roberti, Bartolini & Mingozzi, Management Science 61(6), 2015), recalled from memory rather than copied; the exact
instances here are our own, drawn from the seed.

Each instance is solved through ``lanesolve.model.solve.solve`` (the product's own model and solver wrapper) with
``auto`` (what a planner gets by default: HiGHS, then the lane search of ``lanesolve.model.lane_search``), CBC and
HiGHS at the same limit, and the table shows objective, best bound, gap and the gap to the best known value in
``best_known.json`` (recorded by ``--record``: a long run, see the JSON for solver and seconds).

Usage::

    python benchmarks/mip_family.py [--time-limit 60]                 # the table
    python benchmarks/mip_family.py --record --time-limit 900 --solvers highs   # refresh best_known.json
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import platform
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
BEST_KNOWN = HERE / "best_known.json"
#: (depots, customers, seed) of each instance in the family.
FAMILY = {"fctp-15x50": (15, 50, 1501), "fctp-25x100": (25, 100, 2501)}


def fctp_network(depots: int, customers: int, seed: int):
    """A balanced random fixed-charge transportation instance as a :class:`lanesolve.model.network.Network`."""
    from lanesolve.model.network import Settings, make_network

    rng = np.random.default_rng(seed)
    demand = rng.integers(10, 51, size=customers)
    total = int(demand.sum())
    # Split the total supply into ``depots`` positive integer parts (balanced instance).
    cuts = np.sort(rng.choice(np.arange(1, total), size=depots - 1, replace=False))
    supply = np.diff(np.concatenate([[0], cuts, [total]]))
    lanes = [
        {"origin": f"D{i + 1:02d}", "destination": f"C{j + 1:03d}",
         "cost_per_unit": float(rng.integers(3, 9)), "fixed_cost": float(rng.integers(50, 201))}
        for i in range(depots) for j in range(customers)
    ]
    return make_network(
        [{"id": f"D{i + 1:02d}", "supply": float(s)} for i, s in enumerate(supply)],
        [{"id": f"C{j + 1:03d}", "demand": float(d)} for j, d in enumerate(demand)],
        lanes,
        # A tiny relative gap so that neither solver stops early on the default 1e-4 tolerance.
        settings=Settings(mip_gap=1e-9),
    )


def solve_one(name: str, solver: str, time_limit: float) -> dict:
    """Solve one instance with one solver; return objective, bound, gap, status and wall seconds."""
    from lanesolve.model import solve

    depots, customers, seed = FAMILY[name]
    network = fctp_network(depots, customers, seed)
    tick = time.perf_counter()
    result = solve.solve(network, time_limit=time_limit, solver=solver)
    wall = time.perf_counter() - tick
    return {
        "instance": name, "solver": result.solver, "status": result.status.value,
        "objective": float(result.total_cost), "bound": result.best_bound, "gap": result.mip_gap,
        "seconds": wall, "time_limit": time_limit,
    }


def load_best_known() -> dict:
    return json.loads(BEST_KNOWN.read_text()) if BEST_KNOWN.exists() else {}


def record(rows: list[dict]) -> None:
    """Keep, per instance, the best objective seen and the strongest bound, with how they were obtained."""
    best = load_best_known()
    for row in rows:
        if not math.isfinite(row["objective"]):
            continue
        entry = best.get(row["instance"])
        run = {"solver": row["solver"], "time_limit_s": row["time_limit"], "seconds": round(row["seconds"], 1),
               "status": row["status"], "objective": row["objective"], "bound": row["bound"],
               "date": dt.date.today().isoformat(), "machine": f"{platform.machine()}, 2 cores shared"}
        if entry is None or row["objective"] < entry["objective"] - 1e-9:
            entry = {"objective": row["objective"], "bound": row["bound"], "proven_optimal": row["status"] == "optimal",
                     "runs": (entry or {}).get("runs", [])}
        elif row["bound"] is not None and (entry.get("bound") is None or row["bound"] > entry["bound"]):
            entry["bound"] = row["bound"]
        entry["proven_optimal"] = entry["proven_optimal"] or (row["status"] == "optimal"
                                                               and abs(row["objective"] - entry["objective"]) < 1e-6)
        entry["runs"].append(run)
        best[row["instance"]] = entry
    BEST_KNOWN.write_text(json.dumps(best, indent=2) + "\n")


def fmt(value, spec: str) -> str:
    """Format a number, or a dash of the same width when there is none."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return format("—", ">" + spec.split(".")[0])
    return format(value, spec)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--time-limit", type=float, default=60.0)
    parser.add_argument("--solvers", default="auto,cbc,highs")
    parser.add_argument("--instances", default=",".join(FAMILY))
    parser.add_argument("--record", action="store_true", help="update best_known.json with these runs")
    args = parser.parse_args(argv)

    rows = []
    for name in args.instances.split(","):
        for solver in args.solvers.split(","):
            rows.append(solve_one(name, solver, args.time_limit))
            print(f"  done {name} {solver}: {rows[-1]['status']} {rows[-1]['objective']:.1f}", file=sys.stderr)
    if args.record:
        record(rows)
    best = load_best_known()
    print(f"MIP family, time limit {args.time_limit:g} s (command: python benchmarks/mip_family.py "
          f"{' '.join(argv if argv is not None else sys.argv[1:])})")
    print(f"{'instance':<13} {'solver':<28} {'status':<9} {'objective':>10} {'bound':>10} {'gap':>8} "
          f"{'seconds':>8} {'best known':>10} {'vs best':>8}")
    for row in rows:
        known = best.get(row["instance"], {}).get("objective")
        versus = (row["objective"] - known) / known if known and math.isfinite(row["objective"]) else None
        print(f"{row['instance']:<13} {row['solver'][:28]:<28} {row['status']:<9} {fmt(row['objective'], '10.1f')} "
              f"{fmt(row['bound'], '10.1f')} {fmt(row['gap'], '8.2%')} {row['seconds']:8.1f} "
              f"{fmt(known, '10.1f')} {fmt(versus, '8.2%')}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
