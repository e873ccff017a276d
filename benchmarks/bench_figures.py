"""What the exact sensitivity figures add to the solve stage, per engine, on the invented benchmark networks of
generate.py.

For each size and engine (``auto``, the default, which takes OR-Tools' network-flow algorithm on these pure flows;
``highs``; ``cbc``): the solve stage (:func:`lanesolve.model.solve.solve`: model build plus engine) and then the
figures of its plan as :func:`lanesolve.model.analyse.solve_and_analyse` computes them
(:func:`lanesolve.model.sensitivity.plan_figures` with rows for the 500 unused lanes nearest to paying, the rest
kept as numbers), each timed ``--repeat`` times in one process with the best kept, and their share. Beside it: the
rows the default run never makes (``more.rows()``: what ``--json --all-figures`` adds), the figures with every row
made at once (:func:`~lanesolve.model.sensitivity.analyse_plan`), the figure count, and the peak memory the
figures allocate (tracemalloc, a separate run). The target for 100k lanes: figures add at most 10 % to the solve
stage. A script, not a test: it prints, it asserts nothing.

With ``--netgen NODES`` the network is instead netgen.py's NETGEN network of that many nodes (a meshed network,
where the root's trees settle few figures and the rest are searched; ``pip install ".[bench]"``); the rows only
``--all-figures`` makes and every row at once are then not timed (``-``): on that network they take minutes.

Usage::

    python benchmarks/bench_figures.py --sizes 10k,100k [--engines auto,highs,cbc] [--seed 7] [--repeat 3]
    python benchmarks/bench_figures.py --netgen 16384 --engines auto --repeat 3
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
from lanesolve.model.result import JSON_UNUSED_LANES  # noqa: E402
from lanesolve.model.solve import solve  # noqa: E402


def best_of(repeat: int, work) -> tuple[float, object]:
    """The fastest of ``repeat`` timed calls of ``work()`` and the last call's answer."""
    best, answer = float("inf"), None
    for _ in range(repeat):
        tick = time.perf_counter()
        answer = work()
        best = min(best, time.perf_counter() - tick)
    return best, answer


def measure(network, lanes: int, engine: str, repeat: int, every_row: bool = True) -> dict:
    solve_seconds, result = best_of(repeat, lambda: solve(network, solver=engine))
    figures, (frame, more) = best_of(repeat, lambda: sensitivity.plan_figures(network, result, JSON_UNUSED_LANES))
    nan = float("nan")
    rest = (best_of(repeat, more.rows)[0] if more is not None else 0.0) if every_row else nan
    every, full = best_of(repeat, lambda: sensitivity.analyse_plan(network, result)) if every_row else (nan, None)
    count = len(full) if full is not None else len(frame) + (len(more) if more is not None else 0)
    tracemalloc.start()
    sensitivity.plan_figures(network, result, JSON_UNUSED_LANES)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return {"lanes": lanes, "engine": engine, "solver": result.solver.split(" (")[0], "status": result.status.value,
            "solve": solve_seconds, "figures": figures, "ratio": figures / solve_seconds, "rest": rest,
            "every": every, "every_ratio": every / solve_seconds, "count": count, "rows": len(frame),
            "peak_mb": peak / 2**20}


def _or_dash(value: float, spec: str) -> str:
    """``value`` in ``spec`` (width first), or a dash as wide where it was not measured (NaN)."""
    width = int(spec.split(".")[0])
    return f"{'-':>{width}}" if value != value else f"{value:>{spec}}"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="10k,100k")
    parser.add_argument("--engines", default="auto,highs,cbc")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--netgen", type=int, metavar="NODES",
                        help="netgen.py's NETGEN network of this many nodes instead of --sizes (16384: 131,072 arcs)")
    args = parser.parse_args(argv)
    rows = []
    if args.netgen:
        import pickle

        import netgen

        _, pickled, arcs = netgen.ensure_instance(args.netgen)
        with open(pickled, "rb") as fh:
            network = pickle.load(fh)
        rows += [measure(network, len(network.lanes), engine, args.repeat, every_row=False)
                 for engine in args.engines.split(",")]
    for size in [] if args.netgen else args.sizes.split(","):
        network = to_network(generate_network(parse_size(size), args.seed))
        rows += [measure(network, parse_size(size), engine, args.repeat) for engine in args.engines.split(",")]
    print(f"{'lanes':>9} {'engine':>6} {'solver':>26} {'status':>8} {'solve s':>8} {'figures s':>10} "
          f"{'fig/solve':>10} {'<= 10 %':>8} {'rest s':>7} {'all rows s':>10} {'all/solve':>10} {'figures':>8} "
          f"{'rows':>6} {'peak MB':>8}")
    for r in rows:
        print(f"{r['lanes']:>9,} {r['engine']:>6} {r['solver'][:26]:>26} {r['status']:>8} {r['solve']:>8.3f} "
              f"{r['figures']:>10.4f} {r['ratio']:>10.1%} {'PASS' if r['ratio'] <= 0.10 else 'MISS':>8} "
              f"{_or_dash(r['rest'], '7.3f')} {_or_dash(r['every'], '10.4f')} {_or_dash(r['every_ratio'], '10.1%')} "
              f"{r['count']:>8,} {r['rows']:>6,} "
              f"{r['peak_mb']:>8.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
