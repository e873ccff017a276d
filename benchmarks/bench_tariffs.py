"""What rate breaks cost in build and solve time: the 100k network flat, and with 5 % of its lanes on a tariff.

Run::

    python benchmarks/bench_tariffs.py [--lanes 100k] [--share 0.05] [--solver highs|cbc] [--time-limit 300]

generate.py's seeded invented network (built in memory, no workbook) is solved four ways, each in a fresh child
process: **flat** (every lane at its own rate: the pure LP), and with ``--share`` of the lanes (seeded choice)
given two breaks -- at half and at one and a half times the median customer demand --

- **incremental, rising** (rates x1.1, x1.25 above the breaks: convex, still an LP, no binaries),
- **incremental, falling** (rates x0.85, x0.7: the incremental model, binaries per segment),
- **all units, falling** (rates x0.85, x0.7 for every unit: the multiple choice model, binaries per bracket).

Printed per variant: model rows x columns, integer columns, build seconds, solver seconds (including handing the
model over and reading the answer), status, gap, objective, and each time over the flat case's. Nothing is
asserted; times on a shared machine move by 10-20 % between runs.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

VARIANTS = {
    "flat": None,
    "incremental-rising": ("incremental", (1.1, 1.25)),
    "incremental-falling": ("incremental", (0.85, 0.7)),
    "all-units-falling": ("all_units", (0.85, 0.7)),
}


def network_for(lanes: int, variant: str, share: float):
    """generate.py's network of ``lanes`` lanes with ``share`` of them on the variant's tariff."""
    import generate
    from lanesolve.model.network import rate_break_frame

    network = generate.to_network(generate.generate_network(lanes))
    tariff = VARIANTS[variant]
    if tariff is None:
        return network
    kind, factors = tariff
    rng = np.random.default_rng(29)
    chosen = rng.choice(len(network.lanes), size=int(round(share * len(network.lanes))), replace=False)
    median = float(network.customers["demand"].median())
    rows = []
    for lane in sorted(chosen.tolist()):
        rate = float(network.lanes.at[lane, "cost_per_unit"])
        for start, factor in zip((0.5 * median, 1.5 * median), factors):
            rows.append({"lane": lane, "from_volume": round(start, 3), "cost_per_unit": round(rate * factor, 4),
                         "kind": kind})
    network.rate_breaks = rate_break_frame(network.lanes, rows)
    return network


def child(lanes: int, variant: str, share: float, solver: str, limit: float) -> dict:
    from lanesolve.model.formulation import build_sparse_model
    from lanesolve.model.solve import solve

    network = network_for(lanes, variant, share)
    model = build_sparse_model(network)
    tick = time.perf_counter()
    result = solve(network, solver=solver, time_limit=limit)
    return {"rows": model.n_rows, "columns": model.n_columns, "integer": int(model.integer.sum()),
            "build": result.timings["build_model"], "solver": result.timings["solver"],
            "total": time.perf_counter() - tick, "status": result.status.value, "gap": result.mip_gap,
            "objective": result.total_cost, "breaks": len(network.rate_breaks),
            "rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}


def size(text: str) -> int:
    text = text.lower()
    return int(float(text[:-1]) * 1_000) if text.endswith("k") else int(text)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lanes", default="100k")
    parser.add_argument("--share", type=float, default=0.05)
    parser.add_argument("--solver", default="highs", choices=("highs", "cbc"))
    parser.add_argument("--time-limit", type=float, default=300.0)
    parser.add_argument("--variants", default=",".join(VARIANTS))
    parser.add_argument("--child", nargs=1)
    args = parser.parse_args()
    lanes = size(args.lanes)
    if args.child:
        print("@@RESULT " + json.dumps(child(lanes, args.child[0], args.share, args.solver, args.time_limit)))
        return
    rows = {}
    for variant in args.variants.split(","):
        done = subprocess.run([sys.executable, __file__, "--child", variant, "--lanes", args.lanes, "--share",
                               str(args.share), "--solver", args.solver, "--time-limit", str(args.time_limit)],
                              capture_output=True, text=True, cwd=HERE.parent)
        found = [line for line in done.stdout.splitlines() if line.startswith("@@RESULT ")]
        if not found:
            print(f"{variant}: failed\n{done.stderr[-2000:]}")
            continue
        rows[variant] = json.loads(found[0][len("@@RESULT "):])
    flat = rows.get("flat")
    print(f"\n{lanes:,} lanes, {args.share:.0%} with two breaks, solver {args.solver}, limit {args.time_limit:g} s\n")
    print("| variant | breaks | rows x columns | integer | build s | solver s | status | gap | objective | "
          "build / flat | solver / flat | peak RSS MB |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    for variant, r in rows.items():
        ratio_build = f"{r['build'] / flat['build']:.2f}" if flat else "-"
        ratio_solve = f"{r['solver'] / flat['solver']:.2f}" if flat else "-"
        gap = "-" if r["gap"] is None else f"{r['gap']:.2e}"
        print(f"| {variant} | {r['breaks']:,} | {r['rows']:,} x {r['columns']:,} | {r['integer']:,} | "
              f"{r['build']:.2f} | {r['solver']:.2f} | {r['status']} | {gap} | {r['objective']:,.2f} | "
              f"{ratio_build} | {ratio_solve} | {r['rss_mb']:.0f} |")


if __name__ == "__main__":
    main()
