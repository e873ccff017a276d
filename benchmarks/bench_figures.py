"""What the exact sensitivity figures add to the solve stage, on the invented benchmark networks of generate.py.

For each size: the solve stage (:func:`lanesolve.model.solve.solve`: model build plus CBC) timed once, then
:func:`lanesolve.model.sensitivity.analyse_plan` on its plan timed ``--repeat`` times (best kept), its share of the
solve stage, the number of figures and how many pair distances needed a Dijkstra search of their own (the rest came
from the two trees), and the peak memory the figures allocate (tracemalloc, a separate run). The target for 100k
lanes: figures add at most 10 % to the solve stage. A script, not a test: it prints, it asserts nothing.

Usage::

    python benchmarks/bench_figures.py --sizes 10k,100k [--seed 7] [--repeat 3]
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from generate import DEFAULT_SEED, generate_network, parse_size, to_network  # noqa: E402

from lanesolve.model import sensitivity  # noqa: E402
from lanesolve.model.solve import solve  # noqa: E402


def measure(lanes: int, seed: int, repeat: int) -> dict:
    network = to_network(generate_network(lanes, seed))
    tick = time.perf_counter()
    result = solve(network)
    solve_seconds = time.perf_counter() - tick
    searched = []
    original = sensitivity._Graph.distance

    def counting(self, a, b):  # counts the pair distances the trees could not settle (a Dijkstra each end)
        out = original(self, a, b)
        searched.append(len(a))
        return out

    best = float("inf")
    for _ in range(repeat):
        tick = time.perf_counter()
        frame = sensitivity.analyse_plan(network, result)
        best = min(best, time.perf_counter() - tick)
    sensitivity._Graph.distance = counting
    try:
        tracemalloc.start()
        sensitivity.analyse_plan(network, result)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    finally:
        sensitivity._Graph.distance = original
    return {"lanes": lanes, "status": result.status.value, "solve": solve_seconds, "figures": best,
            "ratio": best / solve_seconds, "count": len(frame), "pairs": sum(searched), "peak_mb": peak / 2**20}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="10k,100k")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args(argv)
    rows = [measure(parse_size(size), args.seed, args.repeat) for size in args.sizes.split(",")]
    print(f"{'lanes':>9} {'status':>8} {'solve s':>9} {'figures s':>10} {'figures/solve':>14} {'figures':>9} "
          f"{'pairs':>8} {'peak MB':>8} {'<= 10 %':>8}")
    for r in rows:
        print(f"{r['lanes']:>9,} {r['status']:>8} {r['solve']:>9.2f} {r['figures']:>10.3f} {r['ratio']:>13.1%} "
              f"{r['count']:>9,} {r['pairs']:>8,} {r['peak_mb']:>8.1f} {'PASS' if r['ratio'] <= 0.10 else 'MISS':>8}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
