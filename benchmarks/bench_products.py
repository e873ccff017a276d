"""Several products end to end: 3 products on the 100k-lane instance, workbook to written results, against bare
HiGHS on the same multi-product LP.

The instance is generate.py's invented network (pure LP) with three invented products added -- capacity uses 1, 1
and 2, weights 0.4, 0.5 and 0.8 t -- a Supply sheet (each depot makes two of the three, up to its overall supply), a
Demand sheet (each customer's demand split 50/30/20), 5 % of the lanes limited to two products, a Modes sheet with
invented road and rail factors, and a carbon price, so the run reads every new sheet, builds the multi-product model
with its carbon component and writes every new result sheet. A penalty on unmet demand keeps every instance
feasible whatever the lane limits.

Each measurement runs in a fresh child process:

- **ours**: ``lanesolve.pipeline.run(workbook, output=<temp copy>, solver="highs")``, stage timings and peak RSS
  (``getrusage``: HiGHS runs in the same process);
- **bare**: the same model arrays (``lanesolve.model.build.build_model`` on the validated network) handed to
  ``highspy`` ``passModel`` + ``run`` with no options; only that solve is timed.

The objectives must agree within 1e-6 relative. Prints one table. Usage::

    python benchmarks/bench_products.py [--size 100k] [--seed 7]
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

import generate  # noqa: E402  (benchmarks/ is a folder of scripts, not a package)

PRODUCTS = [("ambient", 0.4, 1.0, 0.5), ("chilled", 0.5, 1.0, 0.3), ("bulk", 0.8, 2.0, 0.2)]  # id, t, use, share
#: Invented factors for the benchmark only (kg CO2e per tonne-km); not published values.
MODE_FACTORS = [("road", 0.1, "invented benchmark factor"), ("rail", 0.03, "invented benchmark factor")]
TARGET_RSS_MB = 2048.0


def write_products_workbook(lanes: int, seed: int, path: Path) -> None:
    import openpyxl

    tables = generate.generate_network(lanes, seed)
    rng = np.random.default_rng(seed + 1)
    book = openpyxl.Workbook(write_only=True)

    def sheet(name, header, rows):
        ws = book.create_sheet(name)
        ws.append(header)
        for row in rows:
            ws.append([generate._cell(v) for v in row])

    for name, key in (("Depots", "depots"), ("Hubs", "hubs")):
        frame = tables[key]
        sheet(name, list(frame.columns), frame.itertuples(index=False, name=None))
    customers = tables["customers"]
    sheet("Customers", ["customer", "demand", "latitude", "longitude"],
          ((c, None, la, lo) for c, la, lo in zip(customers["customer"], customers["latitude"],
                                                  customers["longitude"])))
    lane_frame = tables["lanes"].copy()
    ids = [p[0] for p in PRODUCTS]
    restricted = rng.random(len(lane_frame)) < 0.05
    lane_frame["products"] = [", ".join(rng.choice(ids, 2, replace=False)) if r else None for r in restricted]
    sheet("Lanes", list(lane_frame.columns), lane_frame.itertuples(index=False, name=None))
    sheet("Products", ["product", "weight_per_unit", "capacity_use"], [(p, w, u) for p, w, u, _ in PRODUCTS])
    depots = tables["depots"]
    supply_rows = []
    for depot, supply in zip(depots["depot"], depots["supply"]):
        for product in rng.choice(ids, 2, replace=False):
            supply_rows.append((depot, product, float(supply)))
    sheet("Supply", ["depot", "product", "supply"], supply_rows)
    sheet("Demand", ["customer", "product", "demand"],
          ((c, p, round(float(q) * share, 3)) for c, q in zip(customers["customer"], customers["demand"])
           for p, _, _, share in PRODUCTS))
    sheet("Modes", ["mode", "emission_factor", "source"], MODE_FACTORS)
    sheet("Settings", ["setting", "value"], [("units", "pallets"), ("currency", "EUR"), ("time_limit_s", 3600),
                                            ("unmet_penalty", 10000), ("carbon_price", 50), ("solver", "highs")])
    tmp = path.with_suffix(".tmp.xlsx")
    book.save(tmp)
    tmp.replace(path)


def child_ours(workbook: str) -> dict:
    from lanesolve.pipeline import run

    folder = Path(tempfile.mkdtemp())
    try:
        tick = time.perf_counter()
        outcome = run(workbook, output=folder / "solved.xlsx", solver="highs")
        seconds = time.perf_counter() - tick
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    result = outcome.result
    return {"seconds": seconds, "objective": result.total_cost, "timings": result.timings,
            "rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
            "columns": None, "status": result.status.value, "emissions_t": result.emissions["total_t"]}


def child_bare(workbook: str) -> dict:
    import highspy

    from lanesolve.model.build import build_model
    from lanesolve.pipeline import load

    network, _ = load(workbook)
    model = build_model(network)
    matrix = model.matrix.tocsc()
    tick = time.perf_counter()
    highs = highspy.Highs()
    highs.setOptionValue("output_flag", False)
    highs.passModel(model.n_columns, model.n_rows, int(matrix.nnz), int(highspy.MatrixFormat.kColwise),
                    int(highspy.ObjSense.kMinimize), model.objective_constant, model.cost, model.lower, model.upper,
                    model.row_lower, model.row_upper, matrix.indptr.astype(np.int32),
                    matrix.indices.astype(np.int32), matrix.data, np.zeros(model.n_columns, dtype=np.int32))
    highs.run()
    seconds = time.perf_counter() - tick
    return {"seconds": seconds, "objective": highs.getInfo().objective_function_value,
            "status": str(highs.getModelStatus()), "rows": model.n_rows, "columns": model.n_columns}


def in_child(kind: str, workbook: Path) -> dict:
    code = (f"import json, sys; sys.path.insert(0, {str(HERE)!r}); import bench_products as b; "
            f"print(json.dumps(b.child_{kind}({str(workbook)!r})))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"the {kind} measurement failed:\n{out.stderr}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", default="100k")
    parser.add_argument("--seed", type=int, default=generate.DEFAULT_SEED)
    args = parser.parse_args(argv)
    lanes = generate.parse_size(args.size)
    generate.CACHE.mkdir(parents=True, exist_ok=True)
    workbook = generate.CACHE / f"products-{generate.size_label(lanes)}-s{args.seed}.xlsx"
    if not workbook.exists():
        tick = time.perf_counter()
        write_products_workbook(lanes, args.seed, workbook)
        print(f"wrote {workbook} in {time.perf_counter() - tick:.1f} s")
    bare = in_child("bare", workbook)
    ours = in_child("ours", workbook)
    agree = abs(ours["objective"] - bare["objective"]) <= 1e-6 * max(1.0, abs(bare["objective"]))
    stages = ours["timings"]
    print(f"\n3 products x {lanes:,} lanes: LP of {bare['rows']:,} rows x {bare['columns']:,} columns "
          f"(seed {args.seed})\n")
    print("| measure | value |\n| --- | --- |")
    for name in ("read", "validate", "build_model", "solver", "solve_total", "write", "report"):
        if name in stages:
            print(f"| stage {name} (s) | {stages[name]:.2f} |")
    print(f"| ours end to end (s) | {ours['seconds']:.2f} |")
    print(f"| bare HiGHS solve of the same LP (s) | {bare['seconds']:.2f} |")
    print(f"| ratio ours / bare HiGHS | {ours['seconds'] / bare['seconds']:.2f} |")
    print(f"| peak RSS ours (MB) | {ours['rss_mb']:,.0f} ({'within' if ours['rss_mb'] <= TARGET_RSS_MB else 'OVER'}"
          f" {TARGET_RSS_MB:,.0f}) |")
    print(f"| objective ours / bare | {ours['objective']:,.4f} / {bare['objective']:,.4f} "
          f"({'agree' if agree else 'DIFFER'} within 1e-6) |")
    print(f"| plan emissions (t CO2e) | {ours['emissions_t']:,.1f} |")
    return 0 if agree and math.isfinite(ours["objective"]) else 1


if __name__ == "__main__":
    sys.exit(main())
