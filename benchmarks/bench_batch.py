"""Benchmark: throughput of a batch of small workbooks at 1 and 2 worker processes, and on a Dask LocalCluster.

Builds N small invented workbooks (3 depots, a hub, 8 customers, about 35 lanes, some with a fixed charge so each
solve is a small MIP), solves them with :func:`lanesolve.batch.run_batch` on every backend, each on fresh copies,
and prints a table of wall time, throughput and speed-up against the single-process run measured in the same run,
beside the speed-up a pure-CPU loop gets on this machine at the same moment (on a shared machine, the ceiling).
It also checks that every backend found the same total costs.

Usage::

    python benchmarks/bench_batch.py [--count 200] [--workers 2] [--no-dask]
"""

from __future__ import annotations

import argparse
import math
import os
import random
import shutil
import sys
import tempfile
import time
from pathlib import Path

import openpyxl

from lanesolve.batch import run_batch


def build_workbook(path: Path, seed: int) -> None:
    """One invented region: the network shape is fixed, supplies, demands and costs vary with ``seed``."""
    rng = random.Random(seed)
    depots = [f"Depot {c}" for c in "ABC"]
    customers = [f"Client {i:02d}" for i in range(1, 9)]
    hub = "Cross Dock"
    book = openpyxl.Workbook()
    book.remove(book.active)
    sheet = book.create_sheet("Depots")
    sheet.append(["depot", "supply"])
    for depot in depots:
        sheet.append([depot, rng.randint(150, 250)])
    sheet = book.create_sheet("Customers")
    sheet.append(["customer", "demand"])
    for customer in customers:
        sheet.append([customer, rng.randint(20, 60)])
    sheet = book.create_sheet("Hubs")
    sheet.append(["hub", "capacity", "handling_cost"])
    sheet.append([hub, 200, 0.5])
    sheet = book.create_sheet("Lanes")
    sheet.append(["origin", "destination", "cost_per_unit", "capacity", "fixed_cost"])
    for depot in depots:
        sheet.append([depot, hub, round(rng.uniform(1, 3), 2), None, None])
        for customer in customers:
            fixed = rng.choice([None, None, 40, 80])
            sheet.append([depot, customer, round(rng.uniform(3, 9), 2), rng.choice([None, 60]), fixed])
    for customer in customers:
        sheet.append([hub, customer, round(rng.uniform(1, 3), 2), None, None])
    book.save(path)


def _spin(count: int) -> float:
    """Pure-Python busy loop: CPU work with no I/O, to measure how many cores this machine really gives us."""
    total = 0
    for i in range(count):
        total += i
    return float(total)


def parallel_ceiling(workers: int, count: int = 10_000_000) -> float:
    """Speed-up of ``workers`` processes over one on pure CPU work, measured now (shared machines give less)."""
    from concurrent.futures import ProcessPoolExecutor

    tick = time.perf_counter()
    for _ in range(workers):
        _spin(count)
    serial = time.perf_counter() - tick
    with ProcessPoolExecutor(max_workers=workers) as pool:
        list(pool.map(_spin, [1] * workers))  # start the processes before timing
        tick = time.perf_counter()
        list(pool.map(_spin, [count] * workers))
        parallel = time.perf_counter() - tick
    return serial / parallel


def fresh_copies(sources: list[Path], folder: Path) -> list[str]:
    folder.mkdir()
    return [str(shutil.copy2(src, folder / src.name)) for src in sources]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=200, help="workbooks in the batch (default 200)")
    parser.add_argument("--workers", type=int, default=2, help="processes for the parallel runs (default 2)")
    parser.add_argument("--no-dask", action="store_true", help="skip the Dask LocalCluster run")
    args = parser.parse_args()

    root = Path(tempfile.mkdtemp(prefix="lanesolve-bench-"))
    try:
        sources_dir = root / "sources"
        sources_dir.mkdir()
        sources = []
        for seed in range(args.count):
            path = sources_dir / f"region{seed:04d}.xlsx"
            build_workbook(path, seed)
            sources.append(path)

        reports = []
        reports.append(("processes", 1, run_batch(fresh_copies(sources, root / "w1"), workers=1, progress=False)))
        reports.append(("processes", args.workers,
                        run_batch(fresh_copies(sources, root / f"w{args.workers}"), workers=args.workers,
                                  progress=False)))
        if not args.no_dask:
            try:
                from dask.distributed import LocalCluster
            except ImportError:
                print("dask.distributed is not installed: Dask LocalCluster run skipped", file=sys.stderr)
            else:
                with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
                    report = run_batch(fresh_copies(sources, root / "dask"), dask_address=cluster.scheduler_address,
                                       progress=False)
                reports.append(("dask LocalCluster", args.workers, report))

        ceiling = parallel_ceiling(args.workers)
        base = reports[0][2]
        print(f"{args.count} workbooks; machine has {os.cpu_count()} CPU(s); a pure-CPU loop in {args.workers} "
              f"processes ran {ceiling:.2f}x faster than in one, measured in this run (the ceiling for speed-up)")
        print(f"{'backend':<18} {'workers':>7} {'ok':>5} {'wall s':>8} {'books/s':>8} {'speed-up':>8} "
              f"{'mean solve s':>12} {'same costs':>10}")
        for name, workers, report in reports:
            ok = len(report.runs) - len(report.failed)
            same = all(
                (math.isnan(a.total_cost) and math.isnan(b.total_cost))
                or abs(a.total_cost - b.total_cost) <= 1e-6 * max(1.0, abs(a.total_cost))
                for a, b in zip(base.runs, report.runs))
            mean = sum(r.seconds for r in report.runs) / max(1, len(report.runs))
            print(f"{name:<18} {workers:>7} {ok:>5} {report.seconds:>8.2f} {len(report.runs) / report.seconds:>8.2f} "
                  f"{base.seconds / report.seconds:>8.2f} {mean:>12.3f} {'yes' if same else 'NO':>10}")
        failed = [run for _, _, report in reports for run in report.failed]
        for run in failed[:5]:
            print(f"failed: {run.path}: {run.status}: {run.error}", file=sys.stderr)
        return 1 if failed else 0
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
