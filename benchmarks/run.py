"""Benchmark lanesolve end to end against the naive pipeline and the bare HiGHS LP solve, in one run.

For every size (lane count) the script makes sure the seeded instance is cached (generate.py), then measures, each
in a fresh child process so that peak memory and warm caches of one measurement do not leak into the next:

- **bare**: the LP as a scipy.sparse matrix, ``linprog(method="highs")``: matrix build and solve timed apart;
- **ours**: ``lanesolve.pipeline.run(workbook, output=<copy in a temp dir>, write=True)`` with its stage timings;
- **naive**: benchmarks/naive.py (pandas+openpyxl read, per-node lpSum, CBC, openpyxl load+save);
- **ours --json** (with ``--with-json``): the same run, then the ``--json`` document built and printed as
  ``lanesolve solve --json`` prints it (into a file in the temporary folder), so its peak memory is the CLI's.

Peak RSS is taken in the child: the largest of ``getrusage(RUSAGE_SELF)`` (the Python process) and the sampled sum
of the Python process and the solver program PuLP starts (CBC runs as a separate process), see :class:`TreeSampler`.

The objectives must agree with the bare HiGHS objective within 1e-6 relative. Then the script prints the figures,
the ratios ours / bare HiGHS solve and naive / ours, the growth of time per lane from the smallest to the largest
size, and PASS/MISS against the 100k-lane targets.

Usage::

    python benchmarks/run.py [--sizes 10k,100k,500k] [--skip-naive-above 100k] [--skip-bare-above 1m]
                             [--with-json] [--seed 7] [--bare-engine linprog|highspy] [--repeat 3]
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import os
import platform
import resource
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import generate  # noqa: E402  (benchmarks/ is a folder of scripts, not a package)

#: Relative objective agreement required between every pipeline and bare HiGHS (a target of the 100k benchmark).
OBJECTIVE_TOLERANCE = 1e-6
#: Targets at 100k lanes (the 100k benchmark).
TARGET_VS_BARE = 3.0
#: At 100k lanes, end to end against HiGHS solving the same arrays in memory (``--bare-engine highspy``), the median
#: of ``--repeat`` back-to-back pairs (the one-model target).
TARGET_VS_BARE_IN_MEMORY = 2.0
TARGET_VS_NAIVE = 8.0
TARGET_RSS_MB = 1024.0
#: "No worse than linear": time per lane outside the solver may grow by at most this factor from one size to the
#: next. The 10 % allowance is for timing noise on a shared machine (our choice, not part of the target).
LINEAR_ALLOWANCE = 1.10


# --------------------------------------------------------------------------------------------- child measurements
class TreeSampler(threading.Thread):
    """Sample the resident memory of this process plus its child processes (the solver program) every 20 ms.

    ``RUSAGE_CHILDREN`` alone cannot be used for the solver: on Linux a child forked from a large Python process
    inherits the parent's high-water mark, so it reports at least the parent's size at fork time. Sampling
    ``/proc/<pid>/status`` (``VmRSS``) of the tree gives the simultaneous total; it can miss a peak shorter than the
    sampling interval, which is why the ``getrusage`` figures are reported beside it.
    """

    def __init__(self) -> None:
        super().__init__(daemon=True)
        self.peak_kib = 0
        self.solver_peak_kib = 0
        self.stage = "start"  # set from the pipeline's progress callback: which stage each sample belongs to
        self.stage_peak_kib: dict[str, int] = {}
        self._stop_flag = threading.Event()

    @staticmethod
    def _rss_kib(pid: int) -> int:
        try:
            with open(f"/proc/{pid}/status") as fh:
                for line in fh:
                    if line.startswith("VmRSS:"):
                        return int(line.split()[1])
        except OSError:
            pass
        return 0

    @staticmethod
    def _children(pid: int) -> list[int]:
        kids = []
        try:
            for tid in os.listdir(f"/proc/{pid}/task"):
                with open(f"/proc/{pid}/task/{tid}/children") as fh:
                    kids += [int(k) for k in fh.read().split()]
        except OSError:
            pass
        return kids

    def run(self) -> None:
        me = os.getpid()
        while not self._stop_flag.wait(0.02):
            kids = sum((self._rss_kib(k) for k in self._children(me)), 0)
            self.solver_peak_kib = max(self.solver_peak_kib, kids)
            total = self._rss_kib(me) + kids
            self.peak_kib = max(self.peak_kib, total)
            self.stage_peak_kib[self.stage] = max(self.stage_peak_kib.get(self.stage, 0), total)

    def stop(self) -> None:
        self._stop_flag.set()
        self.join()


def _rss_mb(sampler: TreeSampler) -> dict:
    sampler.stop()
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # KiB on Linux
    return {"rss_by_stage_mb": {k: v / 1024.0 for k, v in sampler.stage_peak_kib.items()},
            "rss_python_mb": own, "rss_solver_mb": sampler.solver_peak_kib / 1024.0,
            "rss_peak_mb": max(own, sampler.peak_kib / 1024.0),
            "rss_children_getrusage_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0}


def child_bare(network_pickle: str, engine: str = "linprog") -> dict:
    import bare_highs

    return bare_highs.measure(network_pickle, engine)


def child_ours(workbook: str, workdir: str, as_json: str = "") -> dict:
    tick = time.perf_counter()
    from lanesolve import pipeline

    import_s = time.perf_counter() - tick
    output = Path(workdir) / "ours-solved.xlsx"
    tick = time.perf_counter()
    stages = {"reading": "read", "checking": "validate", "solving": "solve", "writing results": "write"}

    cpu: dict[str, float] = {}  # CPU seconds of this Python process per stage (the solver program's are its own)
    started = [None, time.process_time()]

    def progress(stage, _limit) -> None:  # the pipeline's progress callback names the stage that starts
        name = stages.get(stage, "solve" if stage else "after")
        now = time.process_time()
        if started[0] is not None:
            cpu[started[0]] = cpu.get(started[0], 0.0) + now - started[1]
        started[:] = [name, now]
        if SAMPLER is not None:
            SAMPLER.stage = name

    outcome = pipeline.run(workbook, output=output, write=True, progress=progress)
    json_mb = None
    if as_json:
        # What `lanesolve solve --json` does after the run: build the document and print it with indent=2.
        from lanesolve.json_text import dumps_indented

        if SAMPLER is not None:
            SAMPLER.stage = "json"
        json_tick = time.perf_counter()
        printed = Path(workdir) / "ours-solved.json"
        with open(printed, "w", encoding="utf-8") as fh:
            fh.write(dumps_indented(outcome.to_json()))  # json.dumps(..., indent=2)'s text, as the CLI prints it
            fh.write("\n")
        json_mb = printed.stat().st_size / 2 ** 20
        outcome.result.timings["json"] = time.perf_counter() - json_tick
    total = time.perf_counter() - tick
    result = outcome.result
    timings = dict(result.timings)
    timings["total"] = total
    return {"timings": timings, "import": import_s, "objective": float(result.total_cost),
            "status": result.status.value, "solver": result.solver, "solve_seconds": result.solve_seconds,
            "output_mb": output.stat().st_size / 2 ** 20, "json_mb": json_mb, "cpu": cpu}


def child_ours_json(workbook: str, workdir: str) -> dict:
    """As :func:`child_ours`, then the ``--json`` document printed as the CLI prints it."""
    return child_ours(workbook, workdir, as_json="yes")


def child_naive(workbook: str, workdir: str) -> dict:
    import naive

    return naive.measure(workbook, str(Path(workdir) / "naive-solved.xlsx"))


#: The sampler of this child process, for :func:`child_ours` to tell it the stage.
SAMPLER: TreeSampler | None = None


def child_main(kind: str, args: list[str]) -> int:
    global SAMPLER
    sampler = SAMPLER = TreeSampler()
    sampler.start()
    try:
        doc = {"bare": child_bare, "ours": child_ours, "ours_json": child_ours_json,
               "naive": child_naive}[kind](*args)
        doc["ok"] = True
    except Exception as exc:  # a benchmark records a failed measurement and goes on; the parent reports it
        import traceback

        traceback.print_exc()
        doc = {"ok": False, "error": f"{type(exc).__name__}: {exc}"}
    doc.update(_rss_mb(sampler))
    print("@@RESULT " + json.dumps(doc))
    return 0


def measure(kind: str, *args: str) -> dict:
    """Run one measurement in a child process and return what it reported."""
    tick = time.perf_counter()
    proc = subprocess.run([sys.executable, __file__, "--child", kind, *args], capture_output=True, text=True)
    wall = time.perf_counter() - tick
    for line in proc.stdout.splitlines()[::-1]:
        if line.startswith("@@RESULT "):
            doc = json.loads(line[len("@@RESULT "):])
            break
    else:
        doc = {"ok": False, "error": f"child exited {proc.returncode}: {proc.stderr[-2000:]}"}
    if not doc.get("ok"):
        print(f"  {kind} FAILED: {doc.get('error')}\n{proc.stderr[-3000:]}", file=sys.stderr)
    doc["wall"] = wall
    return doc


# --------------------------------------------------------------------------------------------------- the table
def fmt(value, spec: str = "8.2f") -> str:
    width = spec.split(".")[0].rstrip("fde%")
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return format("—", ">" + (width or "8"))
    return format(value, spec)


def rel_diff(a: float, b: float) -> float:
    if a is None or b is None or not (math.isfinite(a) and math.isfinite(b)):
        return math.nan
    return abs(a - b) / max(abs(b), 1.0)


def outside_solver(doc: dict) -> float:
    """Seconds of lanesolve's end-to-end time not spent inside the solver program."""
    t = doc["timings"]
    return t["total"] - t.get("solver", doc.get("solve_seconds", 0.0))


def _lanesolve_where() -> str:
    """Which lanesolve the children import (version, folder, and git commit when the folder is a checkout)."""
    proc = subprocess.run([sys.executable, "-c", "import lanesolve, os; print(lanesolve.__version__, "
                           "os.path.dirname(os.path.dirname(lanesolve.__file__)))"], capture_output=True, text=True)
    version, _, folder = proc.stdout.strip().partition(" ")
    rev = subprocess.run(["git", "-C", folder, "rev-parse", "--short", "HEAD"], capture_output=True, text=True)
    dirty = subprocess.run(["git", "-C", folder, "status", "--porcelain", "--", "lanesolve"],
                           capture_output=True, text=True)
    where = f"{version} in {folder}"
    if rev.returncode == 0:
        where += f", git {rev.stdout.strip()}" + (" with uncommitted changes" if dirty.stdout.strip() else "")
    return where


def print_report(sizes: list[int], rows: dict[int, dict], command: str) -> None:
    labels = [generate.size_label(n) for n in sizes]
    print(f"\nlanesolve benchmark  {dt.datetime.now():%Y-%m-%d %H:%M}  {platform.system()} {platform.machine()}, "
          f"{os.cpu_count()} cores (shared), Python {platform.python_version()}")
    print("load average (1, 5, 15 min) at the start: {:.2f} {:.2f} {:.2f}, at the end: {:.2f} {:.2f} {:.2f}".format(
        *LOAD_AT_START, *os.getloadavg()))
    print(f"command: {command}")
    print(f"lanesolve: {_lanesolve_where()}")
    print("instances: generate.py, seed as given, pure LP (no fixed charges); times in seconds, memory in MB\n")

    def line(name: str, values: list, spec: str = "9.2f") -> None:
        print(f"{name:<34}" + "".join(fmt(v, spec) for v in values))

    print(f"{'':<34}" + "".join(f"{lab:>9}" for lab in labels))
    line("lanes", [rows[n]["lanes"] for n in sizes], "9d")
    line("nodes", [rows[n]["nodes"] for n in sizes], "9d")
    print(f"{'LP rows x columns':<34}" + "".join(
        f"{str(rows[n].get('bare', {}).get('rows', '—')) + 'x' + str(rows[n].get('bare', {}).get('columns', '—')):>13}"
        for n in sizes))

    def get(n: int, kind: str, key: str):
        doc = rows[n].get(kind) or {}
        if not doc.get("ok"):
            return None
        if kind == "bare" or key in ("rss_peak_mb", "rss_python_mb", "rss_solver_mb", "objective", "json_mb",
                                     "output_mb"):
            return doc.get(key)
        timings = doc.get("timings", {})
        if key == "solve_other":  # sensitivity figures, the plan read back, checks: solving outside build + solver
            return timings["solve_total"] - timings.get("build_model", 0.0) - timings.get("solver", 0.0)
        return timings.get(key)

    print("\nlanesolve (pipeline.run, write into a copy)")
    for key, name in (("read", "read"), ("validate", "validate"), ("build_model", "build model"),
                      ("solver", "solver (engine)"), ("solve_other", "sensitivity, plan, checks"),
                      ("solve_total", "checks + build + solve"),
                      ("write", "write back"), ("report", "HTML report"), ("total", "end to end")):
        line("  " + name, [get(n, "ours", key) for n in sizes])
    line("  peak RSS, process tree (MB)", [get(n, "ours", "rss_peak_mb") for n in sizes], "9.0f")
    line("    of which solver program (MB)", [get(n, "ours", "rss_solver_mb") for n in sizes], "9.0f")
    for stage in ("read", "validate", "solve", "write"):
        line(f"  CPU s in Python: {stage}", [((rows[n].get("ours") or {}).get("cpu") or {}).get(stage)
                                             for n in sizes])
    for stage in ("read", "validate", "solve", "write"):
        line(f"    peak while {stage} (MB)", [((rows[n].get("ours") or {}).get("rss_by_stage_mb") or {}).get(stage)
                                              for n in sizes], "9.0f")
    line("  solved workbook (MB)", [get(n, "ours", "output_mb") for n in sizes], "9.1f")
    line("  objective", [get(n, "ours", "objective") for n in sizes], "9.0f")
    if any(rows[n].get("ours_json") for n in sizes):
        print("lanesolve with --json (the same run, then the document printed as `solve --json` prints it)")
        line("  JSON document built + printed", [get(n, "ours_json", "json") for n in sizes])
        line("  JSON printed (MB)", [get(n, "ours_json", "json_mb") for n in sizes], "9.1f")
        line("  end to end", [get(n, "ours_json", "total") for n in sizes])
        line("  peak RSS, process tree (MB)", [get(n, "ours_json", "rss_peak_mb") for n in sizes], "9.0f")
        line("    peak while printing JSON (MB)", [((rows[n].get("ours_json") or {}).get("rss_by_stage_mb") or {})
                                                  .get("json") for n in sizes], "9.0f")
    print("naive (pandas+openpyxl read, per-node lpSum, CBC, openpyxl load+save)")
    for key, name in (("read", "read"), ("build", "build model"), ("solve", "solve (CBC)"), ("write", "write back"),
                      ("total", "end to end")):
        line("  " + name, [get(n, "naive", key) for n in sizes])
    line("  peak RSS, process tree (MB)", [get(n, "naive", "rss_peak_mb") for n in sizes], "9.0f")
    line("  objective", [get(n, "naive", "objective") for n in sizes], "9.0f")
    print(f"bare HiGHS ({BARE_LABEL[BARE_ENGINE]})")
    line("  matrix build", [get(n, "bare", "build") for n in sizes])
    line("  solve", [get(n, "bare", "solve") for n in sizes])
    line("  peak RSS (MB)", [get(n, "bare", "rss_peak_mb") for n in sizes], "9.0f")
    line("  objective", [get(n, "bare", "objective") for n in sizes], "9.0f")

    print("\nobjective agreement with bare HiGHS (relative, must be <= 1e-6)")
    for kind in ("ours", "naive"):
        diffs = [rel_diff(get(n, kind, "objective"), get(n, "bare", "objective")) for n in sizes]
        print(f"{'  ' + kind:<34}" + "".join(fmt(d, "9.1e") for d in diffs) + "   "
              + " ".join("ok" if d <= OBJECTIVE_TOLERANCE else ("—" if math.isnan(d) else "DIFFERS") for d in diffs))

    print("\nratios")

    def ratio(a, b):
        return a / b if a is not None and b not in (None, 0) else None

    vs_bare = [ratio(get(n, "ours", "total"), get(n, "bare", "solve")) for n in sizes]
    vs_naive = [ratio(get(n, "naive", "total"), get(n, "ours", "total")) for n in sizes]
    line("  ours end to end / bare solve", vs_bare)
    line("  naive end to end / ours", vs_naive)
    line("  ours solver / bare solve", [ratio(get(n, "ours", "solver"), get(n, "bare", "solve")) for n in sizes])

    ok_sizes = [n for n in sizes if (rows[n].get("ours") or {}).get("ok")]
    if len(ok_sizes) >= 2:
        small, large = ok_sizes[0], ok_sizes[-1]
        print(f"\ngrowth of time per lane, {generate.size_label(small)} -> {generate.size_label(large)} "
              "(1.0 = linear, above 1 = worse than linear)")
        for key in ("read", "validate", "build_model", "solver", "write", "report", "total"):
            a, b = get(small, "ours", key), get(large, "ours", key)
            growth = (b / large) / (a / small) if a and b else None
            line("  ours " + key, [growth])
        a = outside_solver(rows[small]["ours"])
        b = outside_solver(rows[large]["ours"])
        line("  ours outside the solver", [(b / large) / (a / small)])
        for key in ("read", "build", "solve", "write", "total"):
            if get(small, "naive", key) and get(large, "naive", key):
                line("  naive " + key, [(get(large, "naive", key) / large) / (get(small, "naive", key) / small)])

    target = 100_000
    print("\ntargets at 100k lanes")
    if target not in rows or not (rows[target].get("ours") or {}).get("ok"):
        print("  not measured (include 100k in --sizes, and lanesolve must complete)")
        return
    e2e = get(target, "ours", "total")
    bare = get(target, "bare", "solve")
    naive_total = get(target, "naive", "total")
    rss = get(target, "ours", "rss_peak_mb")

    def verdict(ok: bool | None) -> str:
        return "n/a " if ok is None else ("PASS" if ok else "MISS")

    print(f"  {verdict(e2e <= TARGET_VS_BARE * bare if bare else None)}  end to end {e2e:.2f} s <= "
          f"{TARGET_VS_BARE:g} x bare HiGHS solve {fmt(bare, '.2f')} s  (ratio {fmt(ratio(e2e, bare), '.2f')})")
    print(f"  {verdict(naive_total >= TARGET_VS_NAIVE * e2e if naive_total else None)}  naive {fmt(naive_total, '.2f')}"
          f" s >= {TARGET_VS_NAIVE:g} x end to end  (ratio {fmt(ratio(naive_total, e2e), '.2f')})")
    print(f"  {verdict(rss <= TARGET_RSS_MB)}  peak RSS {rss:.0f} MB <= {TARGET_RSS_MB:.0f} MB")
    smaller = [n for n in ok_sizes if n < target]
    larger = [n for n in ok_sizes if n > target]
    checks = []
    for a_n, b_n in ([(smaller[-1], target)] if smaller else []) + ([(target, larger[0])] if larger else []):
        growth = (outside_solver(rows[b_n]["ours"]) / b_n) / (outside_solver(rows[a_n]["ours"]) / a_n)
        checks.append((a_n, b_n, growth))
    if checks:
        ok = all(g <= LINEAR_ALLOWANCE for _, _, g in checks)
        detail = ", ".join(f"{generate.size_label(a)}->{generate.size_label(b)} {g:.2f}" for a, b, g in checks)
        print(f"  {verdict(ok)}  time outside the solver per lane grows <= {LINEAR_ALLOWANCE:.2f}x ({detail})")
    else:
        print("  n/a   time outside the solver: measure another size beside 100k")


LOAD_AT_START = os.getloadavg()
#: How the bare baseline solves the arrays (``--bare-engine``), and how the table names it.
BARE_ENGINE = "linprog"
BARE_LABEL = {"linprog": "scipy.sparse + linprog(method='highs')", "highspy": "highspy passModel + run, in memory"}


def median_run(docs: list[dict], key) -> dict:
    """The repeat whose ``key(doc)`` is the median (the lower middle one for an even count); failed runs last."""
    good = sorted((d for d in docs if d.get("ok")), key=key)
    return good[(len(good) - 1) // 2] if good else docs[0]


def print_repeats(sizes: list[int], rows: dict[int, dict]) -> None:
    """Each repeat's end to end / bare solve, in the order measured, and their median."""
    print("\nrepeats: ours end to end / bare solve, each pair measured back to back")
    for n in sizes:
        pairs = rows[n].get("repeats") or []
        ratios = [o["timings"]["total"] / b["solve"] for o, b in pairs
                  if o.get("ok") and b.get("ok") and b.get("solve")]
        if not ratios:
            continue
        ordered = sorted(ratios)
        half = len(ordered) // 2
        middle = ordered[half] if len(ordered) % 2 else (ordered[half - 1] + ordered[half]) / 2
        ours = ", ".join("{:.2f}".format(o["timings"]["total"]) for o, _ in pairs)
        bare = ", ".join("{:.2f}".format(b["solve"]) for _, b in pairs)
        print(f"  {generate.size_label(n):>6}: " + "  ".join(f"{r:.2f}" for r in ratios)
              + f"   median {middle:.2f}   (ours end to end {ours} s; bare solve {bare} s)")
        if n == 100_000 and BARE_ENGINE == "highspy":
            verdict = "PASS" if middle <= TARGET_VS_BARE_IN_MEMORY else "MISS"
            print(f"  {verdict}  median ratio {middle:.2f} <= {TARGET_VS_BARE_IN_MEMORY:g} x bare HiGHS in memory")


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["--child"]:
        return child_main(argv[1], argv[2:])
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="10k,100k,500k")
    parser.add_argument("--skip-naive-above", default="100k", help="run the naive pipeline only up to this size")
    parser.add_argument("--skip-bare-above", default="100m",
                        help="run the bare HiGHS baseline only up to this size (at 1m lanes it takes minutes)")
    parser.add_argument("--with-json", action="store_true",
                        help="also measure a run that prints the --json document (peak memory with --json)")
    parser.add_argument("--seed", type=int, default=generate.DEFAULT_SEED)
    parser.add_argument("--json", help="also write the raw measurements to this file")
    parser.add_argument("--bare-engine", choices=sorted(BARE_LABEL), default="linprog",
                        help="how the bare baseline solves the arrays: SciPy's linprog or highspy in memory")
    parser.add_argument("--repeat", type=int, default=1,
                        help="measure ours and the bare baseline this many times, back to back; the tables show "
                             "the median run and a line lists every repeat's ratio")
    args = parser.parse_args(argv)
    global BARE_ENGINE
    BARE_ENGINE = args.bare_engine
    sizes = sorted(generate.parse_size(s) for s in args.sizes.split(","))
    naive_limit = generate.parse_size(args.skip_naive_above)
    bare_limit = generate.parse_size(args.skip_bare_above)

    rows: dict[int, dict] = {}
    for n in sizes:
        book, net = generate.ensure_instance(n, args.seed)
        counts = generate.node_counts(n)
        rows[n] = {"lanes": n, "nodes": sum(counts)}
        with tempfile.TemporaryDirectory(prefix="lanesolve-bench-") as workdir:
            # Ours writes into a copy of the cached workbook so the cache is never touched.
            copy = Path(workdir) / book.name
            shutil.copyfile(book, copy)
            for kind, margs in (("bare", (str(net), args.bare_engine)), ("ours", (str(copy), workdir)),
                                ("ours_json", (str(copy), workdir)), ("naive", (str(copy), workdir))):
                if kind == "naive" and n > naive_limit or kind == "bare" and n > bare_limit \
                        or kind == "ours_json" and not args.with_json:
                    continue
                if kind == "ours_json":  # the run before wrote into the copy's output; start from the same file
                    shutil.copyfile(book, copy)
                print(f"  {generate.size_label(n)}: {kind} ...", file=sys.stderr, flush=True)
                rows[n][kind] = measure(kind, *margs)
            if args.repeat > 1 and n <= bare_limit:
                pairs = [(rows[n]["ours"], rows[n]["bare"])]
                for again in range(2, args.repeat + 1):
                    print(f"  {generate.size_label(n)}: ours and bare, repeat {again} ...", file=sys.stderr,
                          flush=True)
                    shutil.copyfile(book, copy)
                    pairs.append((measure("ours", str(copy), workdir), measure("bare", str(net), args.bare_engine)))
                rows[n]["repeats"] = pairs
                rows[n]["ours"] = median_run([o for o, _ in pairs], lambda d: d["timings"]["total"])
                rows[n]["bare"] = median_run([b for _, b in pairs], lambda d: d["solve"])
    command = "python benchmarks/run.py " + " ".join(argv)
    print_report(sizes, rows, command.strip())
    if args.repeat > 1:
        print_repeats(sizes, rows)
    if args.json:
        Path(args.json).write_text(json.dumps({str(k): v for k, v in rows.items()}, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
