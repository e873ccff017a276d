"""CPU seconds per stage of ``lanesolve solve --json``, for one or more source trees of lanesolve, in one run.

On a shared machine wall time follows the other users' load; the CPU time of each stage moves much less. Each tree
runs in a fresh process, in turn (tree A, tree B, tree A, ...), with the pipeline's stage clock set to the process's
CPU clock (``time.process_time``); the solve's inner figures (``build_model``, ``solver``, ``sensitivity``) keep the
wall clock. Printed: per run, the whole process's CPU (user + system, imports included), its peak RSS, and the
CPU of the stages read, validate, solve (checks, model, solve and figures), write and report.

Usage::

    git -C /work/main archive main | tar -x -C /tmp/before    # a tree of the code before a change
    python benchmarks/stage_cpu.py --lanes 1m --trees /tmp/before,. --repeat 2
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import generate  # noqa: E402

STAGES = ("read", "validate", "solve_total", "write", "report")

_CHILD = r"""
import contextlib, io, json, resource, sys, time
tree, book, output = sys.argv[1:4]
sys.path.insert(0, tree)
import lanesolve.pipeline as pipeline
assert pipeline.__file__.startswith(tree), pipeline.__file__


class CpuClock:
    "The time module with perf_counter read from the process's CPU clock."
    perf_counter = staticmethod(time.process_time)

    def __getattr__(self, name):
        return getattr(time, name)


pipeline.time = CpuClock()
from lanesolve.cli import main

printed = io.StringIO()
with contextlib.redirect_stdout(printed), contextlib.redirect_stderr(io.StringIO()):
    main(["solve", book, "--output", output, "--json", "--force"], standalone_mode=False)
usage = resource.getrusage(resource.RUSAGE_SELF)
print("@@STAGES " + json.dumps({"cpu": usage.ru_utime + usage.ru_stime, "peak_mb": usage.ru_maxrss / 1024,
                                "timings": json.loads(printed.getvalue())["timings"]}))
"""


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--lanes", default="1m", help="lane count of generate.py's network (default 1m)")
    parser.add_argument("--trees", default=".", help="comma-separated folders holding a lanesolve package")
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args(argv)
    book, _ = generate.ensure_instance(generate.parse_size(args.lanes))
    trees = [str(Path(tree).resolve()) for tree in args.trees.split(",") if tree]
    print(f"network: {book.name}; load average at the start {os.getloadavg()[0]:.2f}")
    print("| tree | process CPU s | peak RSS MB | " + " | ".join(f"{stage} CPU s" for stage in STAGES) + " |")
    print("|---|---|---|" + "---|" * len(STAGES))
    with tempfile.TemporaryDirectory() as folder:
        for _ in range(args.repeat):
            for tree in trees:
                output = Path(folder) / "solved.xlsx"
                done = subprocess.run([sys.executable, "-c", _CHILD, tree, str(book), str(output)],
                                      capture_output=True, text=True)
                lines = [line for line in done.stdout.splitlines() if line.startswith("@@STAGES ")]
                if not lines:
                    print(f"| {tree} | failed: {done.stderr.strip()[-200:]} |")
                    continue
                doc = json.loads(lines[-1].split(" ", 1)[1])
                stages = " | ".join(f"{doc['timings'].get(stage, float('nan')):.2f}" for stage in STAGES)
                print(f"| {tree} | {doc['cpu']:.2f} | {doc['peak_mb']:,.0f} | {stages} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
