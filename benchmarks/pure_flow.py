"""A large pure min-cost flow end to end through lanesolve, beside OR-Tools' min-cost flow alone on the same network.

The network is benchmarks/generate.py's invented three-tier transshipment network (depots, hubs, customers; lane and
hub capacities; costs with two decimals) at the size asked for, 131,072 lanes by default -- the size of the NETGEN
case in the findings that led to the ``auto`` engine (not a NETGEN instance: generate.py's own networks).

Printed, from one run, each as a fresh process:

- **lanesolve**: ``python -m lanesolve solve WORKBOOK --json --solver S`` wall and CPU time (process start, imports,
  reading, validation, model, solve, figures, write-back, HTML summary), the engine the result names, and its stage
  timings;
- **OR-Tools alone**: a process that unpickles the same network (generate.py's cache) and runs lanesolve's
  network-flow mapping (:func:`lanesolve.model.network_flow.solve_flow`); its wall time from start to the answer,
  and inside it the seconds of ``SimpleMinCostFlow`` itself (adding the arcs and solving);
- the ratio lanesolve / OR-Tools-alone process, and whether both found the same cost.

Bytecode, as in small_runs.py: an installed lanesolve has its modules compiled (pip writes the ``.pyc`` files at
install), but a checkout run where ``PYTHONDONTWRITEBYTECODE`` is set (as on the shared build machine) compiles its
modules from source in every process (about 0.15 CPU-s for a solve). By default both processes get a bytecode cache of
their own (``PYTHONPYCACHEPREFIX`` in a temporary folder, ``PYTHONDONTWRITEBYTECODE`` unset) and the HTML template a
cache folder of its own (``LANESOLVE_TEMPLATE_CACHE``), and one uncounted warm-up run of each fills them, so the
figures are those of an installed lanesolve; ``--no-bytecode-cache`` runs both in the environment as it is.

Usage::

    python benchmarks/pure_flow.py                         # 131k lanes, solver auto
    python benchmarks/pure_flow.py --lanes 1m --solvers auto,cbc
    python benchmarks/pure_flow.py --netgen 16384 --solvers auto,cbc  # a NETGEN network of 131,072 arcs (netgen.py)
    python benchmarks/pure_flow.py --netgen 16384 --repeat 5          # alternating runs, medians and their ratio
"""

from __future__ import annotations

import argparse
import json
import os
import pickle
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import generate  # noqa: E402


def ortools_alone(network_pickle: str) -> dict:
    """Run inside a fresh process: unpickle, map to OR-Tools, solve; time SimpleMinCostFlow's own calls."""
    from ortools.graph.python import min_cost_flow

    from lanesolve.model import network_flow

    with open(network_pickle, "rb") as fh:
        network = pickle.load(fh)
    spent = {"seconds": 0.0}
    real = min_cost_flow.SimpleMinCostFlow

    class Timed:
        """SimpleMinCostFlow with its arc loading and solve timed (every other call passed through)."""

        def __init__(self):
            self._inner = real()

        def __getattr__(self, name):
            attribute = getattr(self._inner, name)
            if name not in ("add_arcs_with_capacity_and_unit_cost", "set_nodes_supplies", "solve"):
                return attribute

            def timed(*args):
                tick = time.perf_counter()
                try:
                    return attribute(*args)
                finally:
                    spent["seconds"] += time.perf_counter() - tick
            return timed

    min_cost_flow.SimpleMinCostFlow = Timed
    answer = network_flow.solve_flow(network)
    return {"cost": None if answer is None else answer.objective, "ortools_seconds": spent["seconds"]}


def run_process(command: list[str], env: dict | None = None) -> tuple[float, float, subprocess.CompletedProcess]:
    """Wall and CPU seconds (children's user + system) of one command."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    tick = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, env=env)
    wall = time.perf_counter() - tick
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), done


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--lanes", default="131072", help="lane count (131072, 1m, ...)")
    parser.add_argument("--solvers", default="auto", help="lanesolve solvers, comma separated (default auto)")
    parser.add_argument("--time-limit", type=float, default=600.0)
    parser.add_argument("--netgen", type=int, metavar="NODES",
                        help="use a NETGEN network of this many nodes and 8 arcs per node (netgen.py) instead of "
                             "generate.py's network; 16384 gives 131,072 arcs")
    parser.add_argument("--repeat", type=int, default=1, metavar="N",
                        help="run OR-Tools alone and lanesolve N times, alternating, and print the medians and the "
                             "ratio of the medians after the runs (a busy machine moves single runs by a third)")
    parser.add_argument("--no-bytecode-cache", action="store_true",
                        help="run the processes in the environment as it is (module docstring)")
    parser.add_argument("--alone", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.alone:
        print(json.dumps(ortools_alone(args.alone)))
        return 0
    if args.netgen:
        import netgen

        book, pickled, arcs = netgen.ensure_instance(args.netgen)
        described = f"NETGEN, {args.netgen:,} nodes, {arcs:,} arcs (netgen.py)"
    else:
        book, pickled = generate.ensure_instance(generate.parse_size(args.lanes))
        described = f"{generate.parse_size(args.lanes):,} lanes"
    print(f"network: {book.name} ({described}); load average at the start {os.getloadavg()[0]:.2f}")
    print("| run | wall s | CPU s | engine | cost | stages (s) |")
    print("|---|---|---|---|---|---|")
    solvers = [s for s in args.solvers.split(",") if s]
    walls: dict[str, list[float]] = {"alone": [], **{solver: [] for solver in solvers}}
    cpus: dict[str, list[float]] = {key: [] for key in walls}
    with tempfile.TemporaryDirectory() as folder:
        env = None
        if not args.no_bytecode_cache:
            env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
            env["PYTHONPYCACHEPREFIX"] = str(Path(folder) / "bytecode")
            env["LANESOLVE_TEMPLATE_CACHE"] = str(Path(folder) / "templates")
            Path(env["LANESOLVE_TEMPLATE_CACHE"]).mkdir()
            warm = Path(folder) / "warm-up.xlsx"
            run_process([sys.executable, __file__, "--alone", str(pickled)], env)
            for solver in solvers:  # uncounted: fills the caches, as an install and a first run would
                run_process([sys.executable, "-m", "lanesolve", "solve", str(book), "--output", str(warm), "--json",
                             "--force", "--solver", solver, "--time-limit", str(args.time_limit)], env)
        for repeat in range(1, args.repeat + 1):
            mark = f" #{repeat}" if args.repeat > 1 else ""
            wall, cpu, done = run_process([sys.executable, __file__, "--alone", str(pickled)], env)
            alone = json.loads(done.stdout.strip().splitlines()[-1])
            walls["alone"].append(wall)
            cpus["alone"].append(cpu)
            print(f"| OR-Tools alone (process){mark} | {wall:.2f} | {cpu:.2f} | SimpleMinCostFlow: "
                  f"{alone['ortools_seconds']:.2f} s | {alone['cost']:,.2f} | |")
            for solver in solvers:
                output = Path(folder) / "solved.xlsx"
                output.unlink(missing_ok=True)
                s_wall, s_cpu, run = run_process([sys.executable, "-m", "lanesolve", "solve", str(book), "--output",
                                                  str(output), "--json", "--solver", solver, "--time-limit",
                                                  str(args.time_limit)], env)
                try:
                    doc = json.loads(run.stdout)
                except json.JSONDecodeError:
                    print(f"| lanesolve {solver}{mark} | {s_wall:.2f} | {s_cpu:.2f} | failed: "
                          f"{run.stderr.strip()[-200:]} | | |")
                    continue
                walls[solver].append(s_wall)
                cpus[solver].append(s_cpu)
                stages = ", ".join(f"{k} {v:.2f}" for k, v in doc.get("timings", {}).items())
                same = "" if alone["cost"] is None else (
                    " (same)" if abs(doc["total_cost"] - alone["cost"]) <= 1e-6 * max(1.0, abs(alone["cost"])) else
                    " (DIFFERENT)")
                print(f"| lanesolve {solver}{mark} (ratio {s_wall / wall:.2f}) | {s_wall:.2f} | {s_cpu:.2f} | "
                      f"{doc['solver']} | {doc['total_cost']:,.2f}{same} | {stages} |")
    if args.repeat > 1:
        print()
        print("| run | median wall s | median CPU s | ratio of medians, wall (CPU) | ratio per pair, wall: min / median / "
              "max |")
        print("|---|---|---|---|---|")
        base_wall, base_cpu = statistics.median(walls["alone"]), statistics.median(cpus["alone"])
        print(f"| OR-Tools alone (process) | {base_wall:.2f} | {base_cpu:.2f} | | |")
        for solver in solvers:
            if len(walls[solver]) != len(walls["alone"]):
                print(f"| lanesolve {solver} | some runs failed | | | |")
                continue
            pairs = sorted(a / b for a, b in zip(walls[solver], walls["alone"]))
            print(f"| lanesolve {solver} | {statistics.median(walls[solver]):.2f} | "
                  f"{statistics.median(cpus[solver]):.2f} | {statistics.median(walls[solver]) / base_wall:.2f} "
                  f"({statistics.median(cpus[solver]) / base_cpu:.2f}) | {pairs[0]:.2f} / "
                  f"{statistics.median(pairs):.2f} / {pairs[-1]:.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
