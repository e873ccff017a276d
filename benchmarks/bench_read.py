"""Reading cost: lanesolve's reader against loading every sheet, on a benchmark workbook with and without a notes
sheet lanesolve never needs.

Each figure comes from a fresh child process: wall time of the step (imports excluded) and the child's peak resident
memory (``VmHWM`` from /proc, Linux only; it includes calamine's Rust allocations, which tracemalloc cannot see, and
the imports of pandas and lanesolve, the same in every column). Three ways are measured:

- ``every sheet``: python-calamine loads and converts every worksheet, as lanesolve's reader did before it loaded only
  the sheets it needs (the baseline);
- ``read``: :func:`lanesolve.read.reader.read_workbook` (only the contract sheets, sizes checked in the XML first);
- ``read+validate``: the reader and :func:`lanesolve.read.validate.validate`.

Workbooks: the generated instance of ``--size`` lanes (benchmarks/generate.py), the same with a ``Notes`` sheet of
``--notes-cells`` numbers spread over 1,000 rows, one every 50 columns (at most 16,384 columns, so at most 327
per row), and the same with a ``Notes`` sheet holding only A1 and XFD1048576 (a stray formatted
cell). They are cached in benchmarks/cache/. Nothing here asserts a time.

Usage::

    python benchmarks/bench_read.py --size 100k --notes-cells 300000
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent / "tests"))

CHILD = r"""
import json, sys, time
import python_calamine
from lanesolve.read.reader import read_workbook
from lanesolve.read.validate import validate
kind, path = sys.argv[1], sys.argv[2]
tick = time.perf_counter()  # imports above are left out: they cost the same whatever the workbook
if kind == "every sheet":
    book = python_calamine.CalamineWorkbook.from_path(path)
    cells = sum(len(row) for name in book.sheet_names
                for row in book.get_sheet_by_name(name).to_python(skip_empty_area=False))
else:
    raw = read_workbook(path)
    if kind == "read+validate":
        validate(raw)
seconds = time.perf_counter() - tick
# VmHWM is the peak resident memory of this process image (it starts afresh at exec, unlike ru_maxrss).
peak_kb = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM:"))
print(json.dumps({"seconds": seconds, "peak_mb": peak_kb / 1024}))
"""


def measure(kind: str, path: Path) -> dict:
    done = subprocess.run([sys.executable, "-c", CHILD, kind, str(path)], capture_output=True, text=True)
    if done.returncode != 0:
        last = (done.stderr.strip().splitlines() or ["?"])[0]
        return {"failed": f"exit {done.returncode}: {last[:60]}"}
    return json.loads(done.stdout.strip().splitlines()[-1])


def with_notes(base: Path, target: Path, cells: dict[str, object]) -> Path:
    """A copy of ``base`` with a Notes sheet holding ``cells``, written as sheet XML (tests/_sheet_parts.py)."""
    if target.exists():
        return target
    import openpyxl
    from _sheet_parts import write_sheet_xml

    shutil.copy(base, target)
    book = openpyxl.load_workbook(target, read_only=False) if target.stat().st_size < 2_000_000 else None
    if book is not None:
        book.create_sheet("Notes")
        book.save(target)
    else:
        _add_empty_sheet(target, "Notes")
    write_sheet_xml(target, "Notes", cells)
    return target


def _add_empty_sheet(path: Path, name: str) -> None:
    """Add an empty worksheet to a large workbook at the zip level (loading it with openpyxl would take minutes)."""
    from _workbooks import REL_NS, rewrite_zip

    with zipfile.ZipFile(path) as z:
        workbook = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        types = z.read("[Content_Types].xml").decode()
    workbook = workbook.replace("</sheets>", f'<sheet name="{name}" sheetId="99" r:id="rIdNotes"/></sheets>')
    if 'xmlns:r="' not in workbook:
        workbook = workbook.replace("<workbook ", f'<workbook xmlns:r="{REL_NS}" ', 1)
    rels = rels.replace("</Relationships>", f'<Relationship Id="rIdNotes" Type="{REL_NS}/worksheet" '
                        'Target="/xl/worksheets/notes.xml"/></Relationships>')
    types = types.replace("</Types>", '<Override PartName="/xl/worksheets/notes.xml" ContentType="application/vnd.'
                          'openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>')
    rewrite_zip(path, {"xl/workbook.xml": workbook.encode(), "xl/_rels/workbook.xml.rels": rels.encode(),
                       "[Content_Types].xml": types.encode()},
                {"xl/worksheets/notes.xml": b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/'
                                            b'2006/main"><sheetData/></worksheet>'})


def main(argv: list[str] | None = None) -> int:
    import generate

    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", default="100k")
    parser.add_argument("--notes-cells", type=int, default=300_000)
    args = parser.parse_args(argv)
    lanes = generate.parse_size(args.size)
    base, _ = generate.ensure_instance(lanes)
    label = generate.size_label(lanes)
    # Notes as planners keep them: a block of 1,000 rows whose cells sit every 50th column, so the sheet's used
    # area (what calamine allocates) is 50 times its cell count.
    from lanesolve.read.sheet_xml import column_letters

    per_row = min(327, max(1, args.notes_cells // 1000))
    notes = with_notes(base, base.with_name(f"{base.stem}-notes{args.notes_cells}.xlsx"),
                       {f"{column_letters(1 + 50 * k)}{row}": row for row in range(1, 1001) for k in range(per_row)})
    far = with_notes(base, base.with_name(f"{base.stem}-farcell.xlsx"), {"A1": "note", "XFD1048576": 1})
    books = [(f"{label}", base), (f"{label} + notes ({args.notes_cells:,} cells)", notes),
             (f"{label} + cell at XFD1048576", far)]
    kinds = ("every sheet", "read", "read+validate")
    print(f"| workbook | {' | '.join(f'{k} s | {k} peak MB' for k in kinds)} | read / every sheet (time, memory) |")
    print("| --- " * (2 * len(kinds) + 2) + "|")
    for name, path in books:
        figures = {kind: measure(kind, path) for kind in kinds}
        cells = []
        for kind in kinds:
            f = figures[kind]
            cells += [f["failed"], "—"] if "failed" in f else [f"{f['seconds']:.2f}", f"{f['peak_mb']:.0f}"]
        base_f, ours = figures["every sheet"], figures["read"]
        ratio = ("—" if "failed" in base_f or "failed" in ours else
                 f"{ours['seconds'] / base_f['seconds']:.2f}, {ours['peak_mb'] / base_f['peak_mb']:.2f}")
        print(f"| {name} | {' | '.join(cells)} | {ratio} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
