"""Small workbooks end to end: the fixed cost of a run (process start, imports, read, validate, solve, write, HTML).

Two workbooks, each solved ``--repeat`` times as a fresh ``python -m lanesolve solve --json`` process:

- the bundled example (example_workbooks/orvale_larder_supply.xlsx: fixed charges, so a MIP, with its scenarios);
- an invented 1,000-lane pure flow written here (10 depots, 100 customers, every depot-customer lane, costs with
  two decimals), seeded.

Printed: median wall and CPU seconds (user + system of the child process), the engine named, and the median of
each stage's timing from the JSON; and the same for a process that only imports ``lanesolve.pipeline`` (the
modules every solve loads before it reads the workbook).

Bytecode: an installed lanesolve has its modules compiled (pip writes the ``.pyc`` files), but a source checkout run
where ``PYTHONDONTWRITEBYTECODE`` is set (as on the shared build machine) compiles its ~70 modules from source in
every process, about 0.2 CPU-s. By default the child processes get a bytecode cache of their own
(``PYTHONPYCACHEPREFIX`` in a temporary folder, ``PYTHONDONTWRITEBYTECODE`` unset) and one uncounted warm-up run per
workbook fills it, so the figures are those of an installed lanesolve; ``--no-bytecode-cache`` runs the processes
in the environment as it is. The compiled HTML template is kept the same way: with the bytecode cache, each source
gets a template cache of its own in the temporary folder (``LANESOLVE_TEMPLATE_CACHE``), filled by the warm-up run
as the first run on a planner's machine fills Jinja2's; without it, the environment's (by default Jinja2's folder
under the temporary folder) is used as it is.

Before and after: ``--sources A,B`` runs the lanesolve of each source folder (a checkout or a ``git archive`` of a
commit, put first on the processes' ``PYTHONPATH``) in turn, one run of each per round, so that a change of load on
the machine falls on both alike; it prints a row per workbook and source and the ratio of each source's median CPU
to the first's.

Usage::

    python benchmarks/small_runs.py [--repeat 5] [--solver auto] [--no-bytecode-cache] [--sources A,B]
"""

from __future__ import annotations

import argparse
import json
import os
import random
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import openpyxl

ROOT = Path(__file__).resolve().parent.parent


def thousand_lane_workbook(path: Path, seed: int = 11) -> Path:
    """An invented pure flow: 10 depots (D01 ...), 100 customers (K001 ...), all 1,000 lanes between them."""
    rng = random.Random(seed)
    book = openpyxl.Workbook()
    depots = book.active
    depots.title = "Depots"
    depots.append(["depot", "supply"])
    demand = [rng.randint(5, 60) for _ in range(100)]
    for d in range(10):
        depots.append([f"D{d + 1:02d}", round(sum(demand) * rng.uniform(0.12, 0.2))])
    customers = book.create_sheet("Customers")
    customers.append(["customer", "demand"])
    for k, q in enumerate(demand):
        customers.append([f"K{k + 1:03d}", q])
    lanes = book.create_sheet("Lanes")
    lanes.append(["origin", "destination", "cost_per_unit"])
    for d in range(10):
        for k in range(100):
            lanes.append([f"D{d + 1:02d}", f"K{k + 1:03d}", round(rng.uniform(2, 40), 2)])
    book.save(path)
    return path


def timed_run(book: Path | None, output: Path, solver: str, env: dict | None = None) -> tuple[float, float, dict]:
    """One fresh ``lanesolve solve --json`` process: wall and CPU seconds and its JSON. Without a ``book``, a
    process that only imports what a solve imports first (``lanesolve.pipeline``), with empty timings."""
    command = [sys.executable, "-m", "lanesolve", "solve", str(book), "--output", str(output), "--force", "--json",
               "--solver", solver] if book is not None else \
        [sys.executable, "-c", "import json, lanesolve.pipeline; print(json.dumps({'timings': {}, 'solver': '-'}))"]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    tick = time.perf_counter()
    # In a folder of its own: ``python -m`` and ``-c`` put the working folder first on sys.path, and from a
    # checkout that would import the checkout's lanesolve whatever PYTHONPATH says.
    done = subprocess.run(command, capture_output=True, text=True, env=env, cwd=output.parent)
    wall = time.perf_counter() - tick
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, json.loads(done.stdout)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--solver", default="auto")
    parser.add_argument("--no-bytecode-cache", action="store_true",
                        help="run the processes in the environment as it is (module docstring)")
    parser.add_argument("--sources", default="", help="source folders to compare, comma separated (module docstring)")
    args = parser.parse_args(argv)
    sources = [s for s in args.sources.split(",") if s] or [None]
    print("| workbook | lanesolve from | wall s (median) | CPU s (median) | CPU / first | engine | stages, median s |")
    print("|---|---|---|---|---|---|---|")
    with tempfile.TemporaryDirectory() as folder:
        books = {"example (orvale_larder_supply)": ROOT / "example_workbooks" / "orvale_larder_supply.xlsx",
                 "1,000-lane pure flow": thousand_lane_workbook(Path(folder) / "thousand.xlsx"),
                 "imports only (`import lanesolve.pipeline`)": None}
        base = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE" or args.no_bytecode_cache}
        envs = []
        for number, source in enumerate(sources):
            env = dict(base)
            if source is not None:
                env["PYTHONPATH"] = os.pathsep.join(filter(None, [source, env.get("PYTHONPATH")]))
            if not args.no_bytecode_cache:  # one cache per source: the same module paths would mix otherwise
                env["PYTHONPYCACHEPREFIX"] = str(Path(folder) / f"bytecode-{number}")
                env["LANESOLVE_TEMPLATE_CACHE"] = str(Path(folder) / f"templates-{number}")
                Path(env["LANESOLVE_TEMPLATE_CACHE"]).mkdir()
            envs.append(env)
        for name, book in books.items():
            if not args.no_bytecode_cache:
                for env in envs:
                    timed_run(book, Path(folder) / "solved.xlsx", args.solver, env)  # warm-up: fills the cache
            runs: list[list] = [[] for _ in envs]
            for _ in range(args.repeat):
                for number, env in enumerate(envs):
                    runs[number].append(timed_run(book, Path(folder) / "solved.xlsx", args.solver, env))
            first = statistics.median(c for _, c, _ in runs[0])
            for source, done in zip(sources, runs):
                stages = {key: statistics.median(doc["timings"][key] for _, _, doc in done)
                          for key in done[0][2]["timings"]}
                cpu = statistics.median(c for _, c, _ in done)
                print(f"| {name} | {source or 'installed'} | {statistics.median(w for w, _, _ in done):.2f} | "
                      f"{cpu:.2f} | {cpu / first:.2f} | {done[-1][2]['solver']} | "
                      + ", ".join(f"{k} {v:.3f}" for k, v in stages.items()) + " |")
    return 0

if __name__ == "__main__":
    sys.exit(main())
