"""How long building the one model takes, and what lanesolve adds around HiGHS, in two tables.

Run::

    python benchmarks/bench_model.py [--build-lanes 50k] [--lp-lanes 100k] [--repeat 3] [--budget 60]

1. **Model build at 50k lanes with fixed charges.** :func:`lanesolve.model.formulation.build_sparse_model` on three
   variants of generate.py's seeded network (built in memory, no workbook): its own ``--fixed-charges`` instance
   (a charge on ~2 % of the lanes), a charge on every lane (a yes/no column and a ``link_`` row per lane), and a charge
   on every lane with every depot and hub to decide (plus the per-lane ``open_link_`` rows). Also timed: writing the
   MPS file CBC reads (:func:`lanesolve.model.cbc.write_mps`) and handing the arrays to HiGHS (``passModel``). The
   build is compared with the solve budget (``--budget``, the default ``time_limit_s`` of 60 s); the target is at most
   10 % of it.
2. **100k-lane LP end to end.** ``lanesolve.model.solve.solve(network, solver="highs")`` (build, HiGHS in memory,
   reading the plan into a Result; HiGHS's time includes passModel) against bare HiGHS on the same arrays
   (``bare_highs.solve_highspy``: passModel and run, nothing else) and against SciPy's ``linprog(method="highs")``
   on them; ``solver="cbc"`` for comparison.

Each measurement runs in a fresh child process (so one does not warm the caches of the next); times are the median
of ``--repeat`` runs inside that process; peak RSS is the child's own (``getrusage``; the CBC program is a separate
process and not counted).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

VARIANTS = {
    "charged-2pct": "generate.py --fixed-charges (~2 % of lanes charged)",
    "charged-all": "a fixed charge on every lane",
    "charged-all-decide": "every lane charged, every depot and hub to decide",
}


def network_for(lanes: int, variant: str):
    """generate.py's seeded network of ``lanes`` lanes, in memory, changed as ``variant`` says."""
    import generate

    tables = generate.generate_network(lanes, fixed_charges=variant != "lp")
    if variant in ("charged-all", "charged-all-decide"):
        rng = np.random.default_rng(11)
        tables["lanes"]["fixed_cost"] = np.round(rng.uniform(50, 400, len(tables["lanes"])))
    if variant == "charged-all-decide":
        for sheet in ("depots", "hubs"):
            tables[sheet]["fixed_cost"] = np.round(rng.uniform(5_000, 20_000, len(tables[sheet])))
            tables[sheet]["status"] = "decide"
    return generate.to_network(tables)


def _median(function, repeat: int) -> tuple[float, object]:
    times, value = [], None
    for _ in range(repeat):
        tick = time.perf_counter()
        value = function()
        times.append(time.perf_counter() - tick)
    return statistics.median(times), value


def child_build(lanes: int, variant: str, repeat: int) -> dict:
    import highspy

    from lanesolve.model.cbc import write_mps
    from lanesolve.model.formulation import build_sparse_model
    from lanesolve.model.highs import stdout_to_stderr

    network = network_for(lanes, variant)
    build_s, model = _median(lambda: build_sparse_model(network), repeat)
    with tempfile.TemporaryDirectory() as folder:
        mps_s, _ = _median(lambda: write_mps(model, Path(folder) / "model.mps"), repeat)

    def pass_to_highs():
        matrix = model.matrix.tocsc()
        with stdout_to_stderr():
            highs = highspy.Highs()
        highs.setOptionValue("output_flag", False)
        highs.passModel(model.n_columns, model.n_rows, int(matrix.nnz), int(highspy.MatrixFormat.kColwise),
                        int(highspy.ObjSense.kMinimize), 0.0, model.cost, model.lower, model.upper,
                        model.row_lower, model.row_upper, matrix.indptr.astype(np.int32),
                        matrix.indices.astype(np.int32), matrix.data, model.integer.astype(np.int32))

    pass_s, _ = _median(pass_to_highs, repeat)
    return {"rows": model.n_rows, "columns": model.n_columns, "integer": int(model.integer.sum()),
            "nonzeros": int(model.matrix.nnz), "build": build_s, "mps": mps_s, "pass": pass_s}


def child_lp(lanes: int, engine: str, repeat: int) -> dict:
    import bare_highs

    from lanesolve.model.formulation import build_sparse_model
    from lanesolve.model.highs import stdout_to_stderr
    from lanesolve.model.solve import solve

    network = network_for(lanes, "lp")
    if engine in ("highs", "cbc"):
        runs = []
        for _ in range(repeat):
            tick = time.perf_counter()
            result = solve(network, solver=engine, time_limit=0)
            total = time.perf_counter() - tick
            runs.append({"total": total, "build": result.timings["build_model"], "solver": result.timings["solver"],
                         "objective": result.total_cost, "status": result.status.value})
        middle = sorted(runs, key=lambda run: run["total"])[len(runs) // 2]
        middle["rest"] = middle["total"] - middle["build"] - middle["solver"]
        return middle
    model = build_sparse_model(network)
    solve_bare = bare_highs.solve_highspy if engine == "bare-highspy" else bare_highs.solve_linprog
    with stdout_to_stderr():
        solve_s, (status, objective, _) = _median(lambda: solve_bare(model), repeat)
    return {"total": solve_s, "solver": solve_s, "objective": objective, "status": "optimal" if status == 0 else "?"}


def child_main(kind: str, args: list[str]) -> None:
    lanes, name, repeat = int(args[0]), args[1], int(args[2])
    doc = child_build(lanes, name, repeat) if kind == "build" else child_lp(lanes, name, repeat)
    doc["rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print("@@RESULT " + json.dumps(doc))


def measure(kind: str, lanes: int, name: str, repeat: int) -> dict:
    """Run one measurement in a child process and return what it printed."""
    done = subprocess.run([sys.executable, __file__, "--child", kind, str(lanes), name, str(repeat)],
                          capture_output=True, text=True, cwd=HERE.parent)
    for line in done.stdout.splitlines():
        if line.startswith("@@RESULT "):
            return json.loads(line[len("@@RESULT "):])
    raise RuntimeError(f"{kind} {name} failed:\n{done.stderr[-2000:]}")


def main(argv=None) -> None:
    import generate

    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--build-lanes", default="50k")
    parser.add_argument("--lp-lanes", default="100k")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--budget", type=float, default=60.0, help="solve budget in seconds (time_limit_s default)")
    args = parser.parse_args(argv)
    build_lanes, lp_lanes = generate.parse_size(args.build_lanes), generate.parse_size(args.lp_lanes)
    load = os.getloadavg()[0]
    print(f"lanesolve model benchmark  {time.strftime('%Y-%m-%d %H:%M')}  {platform.system()} {platform.machine()}, "
          f"{os.cpu_count()} cores, Python {platform.python_version()}, load average {load:.1f} at start")
    print(f"times in seconds, median of {args.repeat}; peak RSS of the measuring process in MB\n")

    print(f"1. model build at {args.build_lanes} lanes (generate.py seed {generate.DEFAULT_SEED}) against a "
          f"{args.budget:g} s solve budget")
    head = (f"{'instance':<22}{'rows':>9}{'columns':>9}{'integer':>9}{'nonzeros':>10}{'build':>8}{'% budget':>9}"
            f"{'MPS':>7}{'passModel':>10}{'RSS':>7}")
    print(head)
    print("-" * len(head))
    for variant in VARIANTS:
        row = measure("build", build_lanes, variant, args.repeat)
        print(f"{variant:<22}{row['rows']:>9,}{row['columns']:>9,}{row['integer']:>9,}{row['nonzeros']:>10,}"
              f"{row['build']:>8.2f}{row['build'] / args.budget:>9.1%}{row['mps']:>7.2f}{row['pass']:>10.2f}"
              f"{row['rss_mb']:>7.0f}")
    for variant, text in VARIANTS.items():
        print(f"  {variant}: {text}")

    print(f"\n2. {args.lp_lanes}-lane LP end to end (generate.py seed {generate.DEFAULT_SEED}, no fixed charges)")
    head = f"{'run':<40}{'build':>7}{'solver':>8}{'other':>8}{'total':>8}{'RSS':>7}{'objective':>14}"
    print(head)
    print("-" * len(head))
    rows = {}
    for engine, label in (("highs", 'lanesolve solve(solver="highs")'),
                          ("bare-highspy", "bare HiGHS (highspy, same arrays)"),
                          ("bare-linprog", "bare HiGHS (SciPy linprog, same arrays)"),
                          ("cbc", 'lanesolve solve(solver="cbc")')):
        row = rows[engine] = measure("lp", lp_lanes, engine, args.repeat)
        cells = [f"{row[key]:>7.2f}" if key in row else f"{'—':>7}" for key in ("build",)]
        cells += [f"{row['solver']:>8.2f}", f"{row['rest']:>8.2f}" if "rest" in row else f"{'—':>8}"]
        print(f"{label:<40}{''.join(cells)}{row['total']:>8.2f}{row['rss_mb']:>7.0f}{row['objective']:>14.2f}")
    ours, bare = rows["highs"], rows["bare-highspy"]
    print("  solver: the whole solver stage (CBC: MPS file, program, solution file; HiGHS: passModel and run); "
          "other: the plan read into a Result")
    print(f"\nlanesolve with HiGHS / bare HiGHS solve: {ours['total'] / bare['total']:.2f}x "
          f"(build {ours['build']:.2f} s, other {ours['rest']:.2f} s)")
    spread = max(r["objective"] for r in rows.values()) - min(r["objective"] for r in rows.values())
    print(f"objectives agree to {spread / max(abs(bare['objective']), 1):.1e} (relative spread)")


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        child_main(sys.argv[2], sys.argv[3:])
    else:
        main()
