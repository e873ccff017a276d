"""The HTML summary's render time with the Jinja2 environment built once per process (how lanesolve renders) against
rebuilding it, and recompiling the template, for every render (how it rendered before).

The bundled example workbook is solved once; its summary is then rendered ``--repeat`` times each way in this one
process, as a batch of small workbooks renders one summary per workbook. Nothing here asserts a time.

With ``--book`` the summary of a large benchmark workbook is rendered instead (the pipeline's report stage: the
page with its charts and the plan-changes and carrier sections): ``netgen`` (benchmarks/cache/
netgen-16384-s14001.xlsx), ``1m`` (lanes-1m-s7.xlsx) or a path. The workbook is solved once into a temporary
folder; ``--keep DIR`` pickles the solved outcome there and reuses it, so a run of the code before a change
(``--tree``) renders the very same plan. Printed: process CPU and wall time per render (median and fastest), the
page's size, and with ``--profile N`` the N largest cumulative entries of a cProfile of one render.

Usage::

    python benchmarks/bench_render.py [--repeat 30]
    python benchmarks/bench_render.py --book netgen --repeat 5 --keep /tmp/render-keep [--profile 25]
    git -C /work/main archive main | tar -x -C /tmp/before     # the code before a change
    python benchmarks/bench_render.py --book netgen --repeat 5 --keep /tmp/render-keep --tree /tmp/before
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


BOOKS = {"netgen": ROOT / "benchmarks" / "cache" / "netgen-16384-s14001.xlsx",
         "1m": ROOT / "benchmarks" / "cache" / "lanes-1m-s7.xlsx"}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeat", type=int, default=30)
    parser.add_argument("--book", help="netgen, 1m or a workbook path: time the report stage of its summary")
    parser.add_argument("--keep", type=Path, help="folder to keep the solved outcome in and reuse it from")
    parser.add_argument("--tree", type=Path, help="a source tree of lanesolve to render with (default: this one)")
    parser.add_argument("--profile", type=int, default=0, help="print this many entries of a cProfile of a render")
    args = parser.parse_args(argv)
    if args.tree is not None:
        tree = args.tree.resolve()
        sys.path.insert(0, str(tree))
        from lanesolve.report import summary

        assert summary.__file__.startswith(str(tree)), summary.__file__
        if (tree / "templates").is_dir():  # an editable install maps lanesolve.templates to its own checkout's
            summary.template_folder = lambda: tree / "templates"
    if args.book:
        return large(args)

    from lanesolve import pipeline
    from lanesolve.report import summary

    with tempfile.TemporaryDirectory(prefix="lanesolve-render-") as folder:
        book = Path(folder) / "example.xlsx"
        shutil.copyfile(ROOT / "example_workbooks" / "orvale_larder_supply.xlsx", book)
        outcome = pipeline.run(book, output=Path(folder) / "solved.xlsx")

    def render() -> None:
        summary.render_html(outcome.network, outcome.result, outcome.info, outcome.warnings,
                            comparison=outcome.comparison)

    timings: dict[str, list[float]] = {"environment built once": [], "rebuilt every render": []}
    for _ in range(args.repeat):
        for way, spent in timings.items():
            if way == "rebuilt every render":
                summary._environment.cache_clear()  # a fresh environment: the template is parsed and compiled again
            tick = time.perf_counter()
            render()
            spent.append(time.perf_counter() - tick)
            if way == "rebuilt every render":
                summary._environment.cache_clear()  # leave no compiled template for the other way's next render
                summary._environment().get_template(summary.TEMPLATE_NAME)
    load = os.getloadavg()[0]
    print(f"HTML summary of example_workbooks/orvale_larder_supply.xlsx, {args.repeat} renders each way, "
          f"load average {load:.2f}")
    print(f"{'way':<26}{'median ms':>10}{'min ms':>9}")
    for way, spent in timings.items():
        print(f"{way:<26}{1000 * statistics.median(spent):>10.1f}{1000 * min(spent):>9.1f}")
    once, every = (statistics.median(v) for v in timings.values())
    print(f"saved per render: {1000 * (every - once):.1f} ms ({every / once:.2f}x)")
    return 0


def large(args: argparse.Namespace) -> int:
    """Render one large workbook's summary ``--repeat`` times (the pipeline's report stage, without the file write)."""
    import pickle

    from lanesolve import pipeline
    from lanesolve.report import carrier_report, summary

    book = Path(BOOKS.get(args.book, args.book))
    kept = args.keep / f"{book.stem}.outcome.pkl" if args.keep else None
    if kept is not None and kept.exists():
        with open(kept, "rb") as handle:
            outcome = pickle.load(handle)
    else:
        with tempfile.TemporaryDirectory(prefix="lanesolve-render-") as folder:
            copy = Path(folder) / book.name
            shutil.copyfile(book, copy)
            outcome = pipeline.run(copy, output=Path(folder) / "solved.xlsx")
        outcome.plan = None
        if kept is not None:
            kept.parent.mkdir(parents=True, exist_ok=True)
            with open(kept, "wb") as handle:
                pickle.dump(outcome, handle)
    network, result = outcome.network, outcome.result

    def render() -> str:
        return summary.render_html(network, result, outcome.info, outcome.warnings, comparison=outcome.comparison,
                                   extra=carrier_report.summary_extra(result, outcome.changes, network.settings))

    page = render()  # the template compiled, imports done
    cpu, wall = [], []
    for _ in range(args.repeat):
        tick, clock = time.process_time(), time.perf_counter()
        render()
        cpu.append(time.process_time() - tick)
        wall.append(time.perf_counter() - clock)
    print(f"HTML summary of {book.name} ({len(result.nodes):,d} nodes, {len(result.flows):,d} lanes with flow), "
          f"{args.repeat} renders, lanesolve from {Path(summary.__file__).parents[2]}, "
          f"load average {os.getloadavg()[0]:.2f}")
    print(f"{'':<10}{'median s':>10}{'min s':>9}")
    print(f"{'CPU':<10}{statistics.median(cpu):>10.3f}{min(cpu):>9.3f}")
    print(f"{'wall':<10}{statistics.median(wall):>10.3f}{min(wall):>9.3f}")
    print(f"page: {len(page.encode('utf-8')):,d} bytes")
    if args.profile:
        import cProfile
        import io
        import pstats

        profiler = cProfile.Profile()
        profiler.enable()
        render()
        profiler.disable()
        listing = io.StringIO()
        pstats.Stats(profiler, stream=listing).sort_stats("cumulative").print_stats(args.profile)
        print(listing.getvalue())
    return 0


if __name__ == "__main__":
    sys.exit(main())
