"""The write stage alone (result sheets built and spliced into the workbook), for one or more source trees of
lanesolve, on the same solved plan, and whether every tree writes the same workbook.

Each workbook is solved once (``pipeline.run`` into a temporary copy, by the lanesolve this script imports); the
plan handed to the writer (network, result, run facts, scenario comparison, plan changes) is pickled. Then each tree,
in a fresh process, in turn (tree A, tree B, tree A, ...), builds the result sheets and writes them into a copy of the
workbook exactly as the pipeline's write stage does, and prints its wall and CPU seconds (threads included) and the
process's peak resident memory (the plan loaded, then the stage). Last, the written workbooks are compared with the
first tree's: the zip members' names and order and their uncompressed bytes (the date stamps of the new members
and, with other compression, the compressed bytes may differ), and the file sizes are printed. Nothing here asserts
a time.

Usage::

    git -C /work/main archive main | tar -x -C /tmp/before    # a tree of the code before a change
    python benchmarks/bench_write.py --trees /tmp/before,. --books 1m,netgen,example --repeat 2
    python benchmarks/bench_write.py --trees . --books 1m --profile    # cProfile of the stage, by internal time

``1m`` and ``netgen`` are the cached ``benchmarks/cache/lanes-1m-s7.xlsx`` and ``netgen-16384-s14001.xlsx`` (made
by generate.py and netgen.py); ``example`` is the bundled example workbook; any other name is a workbook path.
"""

from __future__ import annotations

import argparse
import os
import pickle
import shutil
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
BOOKS = {"1m": HERE / "cache" / "lanes-1m-s7.xlsx", "netgen": HERE / "cache" / "netgen-16384-s14001.xlsx",
         "example": ROOT / "example_workbooks" / "orvale_larder_supply.xlsx"}

_CHILD = r"""
import pickle, resource, sys, time
tree, plan, book, output, profile = sys.argv[1:6]
sys.path.insert(0, tree)
import lanesolve
assert lanesolve.__file__.startswith(tree), lanesolve.__file__
from lanesolve.write import carrier_tables, goods_tables, writeback
with open(plan, "rb") as fh:
    network, result, info, comparison, changes = pickle.load(fh)


def stage():
    # The pipeline's write stage (pipeline._run_stages), the planner's checks around it left out.
    sheets = writeback.result_sheets(network, result, info) + goods_tables.goods_sheets(network, result)
    if comparison is not None:
        sheets.append(writeback.scenario_sheet(comparison, network.settings))
    sheets += [sheet for sheet in (carrier_tables.carriers_sheet(result, network.settings),
                                   carrier_tables.changes_sheet(changes, network.settings)) if sheet]
    writeback.write_results(book, output, sheets)


if profile == "yes":
    import cProfile, pstats
    profiler = cProfile.Profile()
    profiler.runcall(stage)
    pstats.Stats(profiler).sort_stats("tottime").print_stats(25)
else:
    cpu, wall = time.process_time(), time.perf_counter()
    stage()
    wall, cpu = time.perf_counter() - wall, time.process_time() - cpu
    # VmHWM: ru_maxrss survives exec on Linux, so a child of the solving parent would report the parent's peak.
    try:
        with open("/proc/self/status") as fh:
            peak = next(int(line.split()[1]) for line in fh if line.startswith("VmHWM:")) / 1024
    except (OSError, StopIteration):
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"@@WRITE {wall:.3f} {cpu:.3f} {peak:.0f}")
"""


def solve_once(book: Path, folder: Path) -> Path:
    """Solve a copy of the workbook; pickle what the write stage reads."""
    sys.path.insert(0, str(ROOT))
    from lanesolve import pipeline

    copy = folder / f"solve-{book.name}"
    shutil.copyfile(book, copy)
    seen = {}
    pipeline.before_write = lambda outcome: seen.setdefault("outcome", outcome)
    pipeline.run(copy, output=folder / f"solved-{book.name}")
    outcome = seen["outcome"]
    plan = folder / f"{book.stem}.plan.pkl"
    with open(plan, "wb") as fh:
        pickle.dump((outcome.network, outcome.result, outcome.info, outcome.comparison, outcome.changes), fh,
                    protocol=pickle.HIGHEST_PROTOCOL)
    return plan


def members(path: Path) -> list[tuple[str, bytes]]:
    with zipfile.ZipFile(path) as z:
        return [(info.filename, z.read(info)) for info in z.infolist()]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--trees", default=".", help="comma-separated folders holding a lanesolve package")
    parser.add_argument("--books", default="1m", help="comma-separated: 1m, netgen, example or workbook paths")
    parser.add_argument("--repeat", type=int, default=1)
    parser.add_argument("--profile", action="store_true", help="print a cProfile of each tree's stage instead")
    args = parser.parse_args(argv)
    trees = [str(Path(tree).resolve()) for tree in args.trees.split(",") if tree]
    print(f"load average at the start {os.getloadavg()[0]:.2f}")
    differ = 0
    with tempfile.TemporaryDirectory(prefix="lanesolve-write-") as name:
        folder = Path(name)
        for key in args.books.split(","):
            book = BOOKS.get(key, Path(key))
            plan = solve_once(book, folder)
            print(f"\n{book.name}\n| tree | write wall s | write CPU s | peak RSS MB | file bytes |")
            print("|---|---|---|---|---|")
            written: dict[str, Path] = {}
            for _ in range(1 if args.profile else args.repeat):
                for number, tree in enumerate(trees):
                    source = folder / f"in-{number}{book.suffix}"
                    shutil.copyfile(book, source)
                    output = folder / f"out-{number}{book.suffix}"
                    done = subprocess.run([sys.executable, "-c", _CHILD, tree, str(plan), str(source), str(output),
                                           "yes" if args.profile else "no"], capture_output=True, text=True)
                    if done.returncode:
                        print(f"| {tree} | failed: {done.stderr.strip()[-300:]} |")
                        continue
                    written[tree] = output
                    if args.profile:
                        print(f"--- {tree}\n{done.stdout}")
                        continue
                    wall, cpu, peak = done.stdout.split("@@WRITE ")[-1].split()
                    print(f"| {tree} | {wall} | {cpu} | {peak} | {output.stat().st_size:,} |")
            first = members(written[trees[0]]) if trees[0] in written else None
            for tree in trees[1:]:
                if first is None or tree not in written:
                    continue
                other = members(written[tree])
                same_order = [n for n, _ in first] == [n for n, _ in other]
                same_bytes = same_order and all(a == b for (_, a), (_, b) in zip(first, other))
                differ += not same_bytes
                print(f"{tree} against {trees[0]}: member order {'same' if same_order else 'DIFFERS'}, "
                      f"uncompressed bytes {'same' if same_bytes else 'DIFFER'} ({len(other)} members)")
    return 1 if differ else 0


if __name__ == "__main__":
    sys.exit(main())
