"""The HTML summary's render time with the Jinja2 environment built once per process (how lanesolve renders) against
rebuilding it, and recompiling the template, for every render (how it rendered before).

The bundled example workbook is solved once; its summary is then rendered ``--repeat`` times each way in this one
process, as a batch of small workbooks renders one summary per workbook. Nothing here asserts a time.

Usage::

    python benchmarks/bench_render.py [--repeat 30]
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


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeat", type=int, default=30)
    args = parser.parse_args(argv)

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


if __name__ == "__main__":
    sys.exit(main())
