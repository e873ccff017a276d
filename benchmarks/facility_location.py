"""Published capacitated facility-location instances through lanesolve, beside HiGHS called directly.

For each instance (OR-Library cap41 … cap134 split-delivery; Holmberg p1 … p71 single-source; capa/capb/capc at a
stated capacity) this prints, in one run:

- **lanesolve**: wall time of ``python -m lanesolve solve WORKBOOK --json --solver S`` as a fresh process (process
  start, imports, reading, validation, model, solve, figures, write-back and the HTML summary included), its status,
  cost against the published optimum, and the gap it reports against its own lower bound;
- **HiGHS direct**: wall time of a fresh process that imports ``highspy``, builds the textbook model of the instance
  (``x_ij`` share of customer j served by i, ``y_i`` open; Σ_i x_ij = 1, Σ_j d_j x_ij ≤ s_i y_i, x_ij ≤ y_i) as
  arrays and solves it with ``mip_rel_gap`` 0: the yardstick, process start included as well;
- the published optimum (``data/cap_optima.json``, ``data/holmberg_optima.json``, sources named there) and the
  ratio lanesolve / HiGHS direct; the median ratio per solver at the end.

Times are wall clock on whatever else the machine is doing; ``--repeat N`` takes the median of N runs of each.
Nothing is downloaded: the instance files are read from ``data/`` or ``$ORLIB_DATA_DIR`` (see ``data/README.md``).

Usage::

    python benchmarks/facility_location.py --set cap                  # cap41 … cap134 with auto
    python benchmarks/facility_location.py --set cap --solvers auto,cbc,highs
    python benchmarks/facility_location.py p1 p25 p28 --solvers highs --time-limit 60
    python benchmarks/facility_location.py capa:8000 --time-limit 120
    python benchmarks/facility_location.py capa:u capb:u capc:u --time-limit 120   # uncapacitated: :u
    python benchmarks/facility_location.py capa:10000 --no-direct                  # lanesolve only

``--no-direct`` leaves out the HiGHS-direct run (its columns show "-"), for instances whose yardstick is already
in ``README.md``: on capa/capb/capc it takes the whole limit per case.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "data"))
import check_orlib  # noqa: E402  (load(), CAP_NAMES: the instance list and the published optima)
import orlib_cap  # noqa: E402

HOLMBERG_NAMES = [f"p{k}" for k in range(1, 72)]


def highs_direct(spec: str, time_limit: float) -> dict:
    """Solve one instance with highspy on the textbook model; run inside a fresh process by :func:`time_direct`."""
    import highspy
    import numpy as np
    from scipy.sparse import coo_matrix, vstack

    instance, _, single_source = check_orlib.load(spec)
    caps = np.asarray(instance["capacity"], dtype=float)
    fixed = np.asarray(instance["fixed_cost"], dtype=float)
    demand = np.asarray(instance["demand"], dtype=float)
    cost = np.asarray(instance["cost"], dtype=float)  # n × m: cost of serving all of j from i
    n, m = cost.shape
    nx = n * m  # x[j, i] at j*m + i, then y[i] at nx + i
    jj, ii = np.divmod(np.arange(nx), m)
    assign = coo_matrix((np.ones(nx), (jj, np.arange(nx))), shape=(n, nx + m))
    capacity = coo_matrix((np.concatenate([demand[jj], -caps]),
                           (np.concatenate([ii, np.arange(m)]), np.concatenate([np.arange(nx), nx + np.arange(m)]))),
                          shape=(m, nx + m))
    link = coo_matrix((np.concatenate([np.ones(nx), -np.ones(nx)]),
                       (np.concatenate([np.arange(nx), np.arange(nx)]), np.concatenate([np.arange(nx), nx + ii]))),
                      shape=(nx, nx + m))
    a = vstack([assign, capacity, link]).tocsr()
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = nx + m, a.shape[0]
    lp.col_cost_ = np.concatenate([cost.ravel(), fixed])
    lp.col_lower_, lp.col_upper_ = np.zeros(nx + m), np.ones(nx + m)
    lp.row_lower_ = np.concatenate([np.ones(n), np.full(m + nx, -highspy.kHighsInf)])
    lp.row_upper_ = np.concatenate([np.ones(n), np.zeros(m + nx)])
    lp.a_matrix_.format_ = highspy.MatrixFormat.kRowwise
    lp.a_matrix_.start_, lp.a_matrix_.index_, lp.a_matrix_.value_ = a.indptr, a.indices, a.data
    lp.integrality_ = [highspy.HighsVarType.kInteger if (k >= nx or single_source) else highspy.HighsVarType.kContinuous
                       for k in range(nx + m)]
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("time_limit", float(time_limit))
    h.setOptionValue("mip_rel_gap", 0.0)
    h.passModel(lp)
    h.run()
    status = h.modelStatusToString(h.getModelStatus())
    info = h.getInfo()
    value = info.objective_function_value if info.primal_solution_status == 2 else None
    return {"status": status, "cost": value}


def time_direct(spec: str, time_limit: float) -> tuple[float, dict]:
    start = time.perf_counter()
    run = subprocess.run([sys.executable, __file__, "--direct", spec, "--time-limit", str(time_limit)],
                         capture_output=True, text=True)
    seconds = time.perf_counter() - start
    try:  # HiGHS prints its banner on stdout before the JSON line
        return seconds, json.loads(run.stdout.strip().splitlines()[-1])
    except (json.JSONDecodeError, IndexError):
        return seconds, {"status": f"exit {run.returncode}: {run.stderr.strip()[-200:]}", "cost": None}


def time_lanesolve(spec: str, solver: str, time_limit: float, folder: Path) -> tuple[float, dict]:
    instance, _, single_source = check_orlib.load(spec)
    book = orlib_cap.to_workbook(instance, folder / f"{spec.replace(':', '_')}.xlsx", time_limit_s=time_limit,
                                 single_source=single_source)
    solved = folder / "solved.xlsx"
    solved.unlink(missing_ok=True)
    start = time.perf_counter()
    run = subprocess.run([sys.executable, "-m", "lanesolve", "solve", str(book), "--output", str(solved), "--json",
                          "--solver", solver], capture_output=True, text=True)
    seconds = time.perf_counter() - start
    try:
        return seconds, json.loads(run.stdout)
    except json.JSONDecodeError:
        return seconds, {"status": f"exit {run.returncode}: {run.stderr.strip()[-200:]}"}


def gap_text(value: float | None, published: float | None) -> str:
    if value is None or published is None:
        return "-"
    return f"{100 * (value - published) / abs(published):+.3f} %"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("instances", nargs="*", help="cap41 … cap134, capa:8000, capa:u, p1 … p71")
    parser.add_argument("--set", choices=["cap", "holmberg"], help="every instance of a set")
    parser.add_argument("--solvers", default="auto", help="lanesolve solvers to run, comma separated: auto, cbc, highs "
                        "(default auto)")
    parser.add_argument("--time-limit", type=float, default=60.0)
    parser.add_argument("--repeat", type=int, default=1, help="runs of each, median taken (default 1)")
    parser.add_argument("--no-direct", action="store_true", help="skip the HiGHS-direct run (columns show -)")
    parser.add_argument("--direct", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.direct:
        print(json.dumps(highs_direct(args.direct, args.time_limit)))
        return 0
    names = list(args.instances)
    if args.set == "cap":
        names += check_orlib.CAP_NAMES
    elif args.set == "holmberg":
        names += HOLMBERG_NAMES
    if not names:
        parser.error("name instances or a --set")
    solvers = [s for s in args.solvers.split(",") if s]
    header = ["instance", "published", "HiGHS direct s", "direct status"]
    for solver in solvers:
        header += [f"{solver} s", f"{solver} status", f"{solver} vs published", f"{solver} gap", f"{solver}/direct",
                   "on time"]
    print("| " + " | ".join(header) + " |")
    print("|" + "---|" * len(header))
    ratios: dict[str, list[float]] = {s: [] for s in solvers}
    proven: dict[str, int] = {s: 0 for s in solvers + ["direct"]}
    late: dict[str, int] = {s: 0 for s in solvers}
    promise = args.time_limit * 1.1 + 5  # README.md, Time limits: the limit + 10 % + 5 s, process start included
    with tempfile.TemporaryDirectory() as tmp:
        for spec in names:
            _, published, _ = check_orlib.load(spec)
            direct_runs = [] if args.no_direct else [time_direct(spec, args.time_limit) for _ in range(args.repeat)]
            direct_s = statistics.median(s for s, _ in direct_runs) if direct_runs else None
            direct = direct_runs[-1][1] if direct_runs else {"status": "-"}
            proven["direct"] += direct["status"] == "Optimal"
            row = [spec, f"{published:,.3f}" if published else "-", "-" if direct_s is None else f"{direct_s:.2f}",
                   direct["status"]]
            for solver in solvers:
                runs = [time_lanesolve(spec, solver, args.time_limit, Path(tmp)) for _ in range(args.repeat)]
                seconds = statistics.median(s for s, _ in runs)
                doc = runs[-1][1]
                proven[solver] += doc.get("status") == "optimal"
                if direct_s is not None:
                    ratios[solver].append(seconds / direct_s)
                late[solver] += seconds > promise
                row += [f"{seconds:.2f}", str(doc.get("status")), gap_text(doc.get("total_cost"), published),
                        "-" if doc.get("mip_gap") is None else f"{100 * doc['mip_gap']:.3f} %",
                        "-" if direct_s is None else f"{seconds / direct_s:.2f}",
                        "yes" if seconds <= promise else "LATE"]
            print("| " + " | ".join(row) + " |", flush=True)
    print()
    print(("proven optimal: HiGHS direct not run; " if args.no_direct else
           f"proven optimal: HiGHS direct {proven['direct']} of {len(names)}; ")
          + "; ".join(f"lanesolve {s} {proven[s]}" for s in solvers))
    for solver in solvers:
        print(f"lanesolve {solver}: {late[solver]} of {len(names)} runs past the limit + 10 % + 5 s ({promise:.1f} s)")
    for solver in solvers:
        if ratios[solver]:
            print(f"median wall ratio lanesolve {solver} / HiGHS direct: {statistics.median(ratios[solver]):.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
