"""Check the shipped facility-location instances against their published optima (a script, not a test).

For each named instance: parse it with ``orlib_cap``, solve the textbook model directly with
``scipy.optimize.milp`` (HiGHS) and compare with the published optimum in ``cap_optima.json`` /
``holmberg_optima.json``. With ``--lanesolve cbc,highs`` the instance is also written as a workbook and solved by
``python -m lanesolve solve … --json`` with each solver, and its ``total_cost`` compared the same way.

Model (m warehouses i, n customers j, capacity s_i, fixed cost f_i, demand d_j, c_ij = cost of serving all of
j's demand from i; x_ij = share of j's demand served by i, y_i = warehouse i open)::

    min  Σ_i f_i y_i + Σ_ij c_ij x_ij
    s.t. Σ_i x_ij = 1                 for every customer j
         Σ_j d_j x_ij ≤ s_i y_i       for every warehouse i
         x_ij ≤ y_i                   (valid, tightens the LP relaxation)
         0 ≤ x_ij ≤ 1, y_i ∈ {0, 1}   (x_ij ∈ {0, 1} too for the single-source Holmberg instances)

Usage (from the repository root, with the project installed)::

    python benchmarks/data/check_orlib.py cap41 cap71 cap101
    python benchmarks/data/check_orlib.py --all-cap                    # the 37 cap instances, scipy only
    python benchmarks/data/check_orlib.py cap41 --lanesolve cbc,highs
    python benchmarks/data/check_orlib.py capa:8000                    # capa/capb/capc need name:capacity
    python benchmarks/data/check_orlib.py capa:u                       # or :u, every capacity = the total demand
    python benchmarks/data/check_orlib.py p1 p25                       # Holmberg, single source

Exit status 1 if any objective misses its published optimum by a relative 1e-6 or more.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix, vstack

sys.path.insert(0, str(Path(__file__).resolve().parent))
import orlib_cap  # noqa: E402  (the module beside this script)

REL_TOL = 1e-6
CAP_NAMES = [f"cap{g}{k}" for g in (4, 6, 7, 8, 9, 10, 11, 12, 13) for k in (1, 2, 3, 4)]
CAP_NAMES.insert(4, "cap51")


def load(spec: str) -> tuple[dict, float | None, bool]:
    """Instance, published optimum (None if not published) and single-source flag for ``cap41``, ``capa:8000``, ``p1``."""
    optima = orlib_cap.load_optima()
    name, _, capacity = spec.partition(":")
    if name.startswith("cap"):
        capacity = capacity if capacity.lower() == "u" else float(capacity) if capacity else None  # capa:u, capa:8000
        instance = orlib_cap.read_cap(orlib_cap.instance_path(name), capacity)
        return instance, optima["cap"].get(instance["name"]), False
    instance = orlib_cap.read_holmberg(orlib_cap.instance_path(name))
    return instance, optima.get("holmberg", {}).get(name), True


def solve_scipy(instance: dict, single_source: bool, time_limit: float) -> tuple[float | None, float, str]:
    """Objective, seconds and scipy's status message of the model in the module docstring."""
    caps = np.asarray(instance["capacity"], dtype=float)
    fixed = np.asarray(instance["fixed_cost"], dtype=float)
    demand = np.asarray(instance["demand"], dtype=float)
    cost = np.asarray(instance["cost"], dtype=float)          # n × m
    n, m = cost.shape
    # variables: x[j, i] at j*m + i, then y[i] at n*m + i
    nx = n * m
    c = np.concatenate([cost.ravel(), fixed])
    jj, ii = np.divmod(np.arange(nx), m)
    assign = coo_matrix((np.ones(nx), (jj, np.arange(nx))), shape=(n, nx + m))
    capacity = coo_matrix((np.concatenate([demand[jj], -caps]),
                           (np.concatenate([ii, np.arange(m)]), np.concatenate([np.arange(nx), nx + np.arange(m)]))),
                          shape=(m, nx + m))
    link = coo_matrix((np.concatenate([np.ones(nx), -np.ones(nx)]),
                       (np.concatenate([np.arange(nx), np.arange(nx)]), np.concatenate([np.arange(nx), nx + ii]))),
                      shape=(nx, nx + m))
    a = vstack([assign, capacity, link]).tocsr()
    lower = np.concatenate([np.ones(n), np.full(m, -np.inf), np.full(nx, -np.inf)])
    upper = np.concatenate([np.ones(n), np.zeros(m), np.zeros(nx)])
    integrality = np.concatenate([np.full(nx, 1 if single_source else 0), np.ones(m)])
    start = time.perf_counter()
    res = milp(c, constraints=LinearConstraint(a, lower, upper), integrality=integrality, bounds=Bounds(0, 1),
               options={"time_limit": time_limit, "mip_rel_gap": 0})
    seconds = time.perf_counter() - start
    return (float(res.fun) if res.x is not None else None), seconds, res.message


def solve_lanesolve(instance: dict, single_source: bool, solver: str, time_limit: float) -> tuple[float | None, float, str]:
    """total_cost, wall seconds and status of ``python -m lanesolve solve`` on the instance's workbook."""
    with tempfile.TemporaryDirectory() as tmp:
        book = orlib_cap.to_workbook(instance, Path(tmp) / f"{instance['name']}.xlsx", time_limit_s=time_limit,
                                     single_source=single_source)
        start = time.perf_counter()
        run = subprocess.run([sys.executable, "-m", "lanesolve", "solve", str(book), "--output",
                              str(Path(tmp) / "solved.xlsx"), "--json", "--solver", solver],
                             capture_output=True, text=True)
        seconds = time.perf_counter() - start
    try:
        doc = json.loads(run.stdout)
    except json.JSONDecodeError:
        return None, seconds, f"exit {run.returncode}: {run.stderr.strip()[-300:]}"
    total = doc.get("total_cost")
    return (float(total) if total is not None else None), seconds, str(doc.get("status"))


def verdict(value: float | None, published: float | None) -> str:
    if value is None:
        return "NO VALUE"
    if published is None:
        return "no published optimum"
    rel = abs(value - published) / abs(published)
    return f"{'OK' if rel < REL_TOL else 'MISS'} (rel {rel:.1e})"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("instances", nargs="*", help="cap41 … cap134, capa:8000, p1 … p71")
    parser.add_argument("--all-cap", action="store_true", help="all 37 cap instances")
    parser.add_argument("--lanesolve", default="", help="comma list of lanesolve solvers to run too (cbc,highs)")
    parser.add_argument("--time-limit", type=float, default=300.0, help="seconds per solve (default 300)")
    args = parser.parse_args(argv)
    names = (CAP_NAMES if args.all_cap else []) + args.instances
    solvers = [s for s in args.lanesolve.split(",") if s]
    failed = False
    print(f"{'instance':<12}{'m x n':>10}  {'method':<16}{'objective':>18}{'published':>18}{'seconds':>9}  verdict")
    for spec in names:
        start = time.perf_counter()
        instance, published, single = load(spec)
        parse_s = time.perf_counter() - start
        size = f"{len(instance['capacity'])}x{len(instance['demand'])}"
        runs = [("scipy milp", *solve_scipy(instance, single, args.time_limit))]
        runs += [(f"lanesolve {s}", *solve_lanesolve(instance, single, s, args.time_limit)) for s in solvers]
        for method, value, seconds, status in runs:
            text = verdict(value, published)
            failed |= not text.startswith(("OK", "no published"))
            shown = f"{value:,.3f}" if value is not None else "-"
            pub = f"{published:,.3f}" if published is not None else "-"
            print(f"{instance['name']:<12}{size:>10}  {method:<16}{shown:>18}{pub:>18}{seconds:>9.2f}  {text}"
                  + ("" if text.startswith("OK") else f"  [{status}]"))
        print(f"{'':<12}{'':>10}  {'(parse)':<16}{'':>18}{'':>18}{parse_s:>9.2f}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
