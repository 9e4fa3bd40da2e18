"""Reading workbooks: time and peak memory by what a sheet holds, not what it declares
(run: `.venv/bin/python bench/bench_workbooks.py`; `--quick` for smaller sizes).

Generates its own synthetic workbooks under bench/data/ (not committed), written as raw XML so
that a sheet can declare what it likes:

declared-far-row
    a header and three rows, plus one cell in row 20,000,000 (and a dimension to match): a few KB.
styled-last-column
    20,000 rows of a wide table, each with a styled empty cell in the last column (XFD).
declared-dimension
    a dimension of A1:XFD1048576 over a four-row table.
empty-rows
    a four-row table followed by 2,000,000 empty row elements (a few KB compressed).
wide-200k / long-1m
    genuinely large: 200,000 units x (unit, text, 3 coders); 1,000,000 rows of (unit, coder, code).
duplicates-1m
    1,000,000 identical rows of a wide table (the duplicate error must come quickly).

Readers, each in a fresh process with its peak memory (VmHWM) and wall time:

agree
    `agree.io.loaders.load` (openpyxl's sheet parser streamed, only cells with values kept).
openpyxl-rows
    the earlier way: openpyxl read-only `iter_rows(values_only=True)` into lists, padded to a
    rectangle (rows and widths as the sheet declares them).
calamine
    python-calamine (Rust) `to_python()`, when installed (`pip install python-calamine`).

A run that passes the memory cap (4 GB address space) or the time cap is reported as such.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
from tests.io.xlsx import STYLED_EMPTY, write_xlsx  # noqa: E402  (the raw-XML writer the tests use)

DATA = HERE / "data" / "workbooks"
PY = sys.executable
MEMORY_CAP = 4 << 30
TIME_CAP = 300

def _table(n: int):
    yield 1, [(1, "unit"), (2, "ann"), (3, "bo")]
    for i in range(n):
        yield i + 2, [(1, f"u{i}"), (2, "alpha" if i % 3 else "beta"), (3, "alpha" if i % 4 else "gamma")]


def make(kind: str, quick: bool) -> Path:
    path = DATA / f"{kind}{'-quick' if quick else ''}.xlsx"
    if path.exists():
        return path
    DATA.mkdir(parents=True, exist_ok=True)
    scale = 10 if quick else 1
    if kind == "declared-far-row":
        far = 20_000_000 // scale
        rows = [*_table(3), (far, [(1, "stray")])]
        return write_xlsx(path, rows, dimension=f"A1:C{far}")
    if kind == "styled-last-column":
        rows = ((r, cells + [(16384, STYLED_EMPTY)]) for r, cells in _table(20_000 // scale))
        return write_xlsx(path, rows)
    if kind == "declared-dimension":
        return write_xlsx(path, _table(3), dimension="A1:XFD1048576")
    if kind == "empty-rows":
        rows = [*_table(3), *((r, []) for r in range(6, 6 + 2_000_000 // scale))]
        return write_xlsx(path, rows)
    if kind == "wide-200k":
        n = 200_000 // scale
        rows = [(1, [(1, "unit"), (2, "text"), (3, "ann"), (4, "bo"), (5, "cy")])]
        rows = (x for x in [rows[0]] + [
            (i + 2, [(1, f"u{i}"), (2, f"answer number {i} about the night shift"), (3, i % 5), (4, (i * 7) % 5),
                     (5, (i * 3) % 5)]) for i in range(n)])
        return write_xlsx(path, rows)
    if kind == "long-1m":
        n = 1_000_000 // scale
        rows = [(1, [(1, "unit"), (2, "coder"), (3, "code")])]
        return write_xlsx(path, (x for x in rows + [(i + 2, [(1, f"u{i // 3}"), (2, ("ann", "bo", "cy")[i % 3]),
                                                             (3, ("alpha", "beta", "gamma")[(i * 7) % 3])])
                                                    for i in range(n)]))
    if kind == "duplicates-1m":
        n = 1_000_000 // scale
        return write_xlsx(path, (x for x in [(1, [(1, "unit"), (2, "ann"), (3, "bo")])] +
                                 [(i + 2, [(1, "u1"), (2, "alpha"), (3, "beta")]) for i in range(n)]))
    raise ValueError(kind)


KINDS = ("declared-far-row", "styled-last-column", "declared-dimension", "empty-rows", "wide-200k", "long-1m",
         "duplicates-1m")

_READERS = {
    "agree": "from agree.io.loaders import load\n"
             "grids = load(PATH).grids\n"
             "print(sum(len(g.frame) for g in grids), max(len(g.header) for g in grids))\n",
    "openpyxl-rows": "import openpyxl\n"
                     "wb = openpyxl.load_workbook(PATH, read_only=True, data_only=True)\n"
                     "ws = wb.worksheets[0]\n"
                     "ws.reset_dimensions()\n"
                     "rows = [list(r) for r in ws.iter_rows(values_only=True)]\n"
                     "width = max(len(r) for r in rows)\n"
                     "rows = [r + [None] * (width - len(r)) for r in rows]\n"
                     "print(len(rows), width)\n",
    "calamine": "from python_calamine import CalamineWorkbook\n"
                "rows = CalamineWorkbook.from_path(PATH).get_sheet_by_index(0).to_python()\n"
                "print(len(rows), max(len(r) for r in rows))\n",
    "agree score": "import sys\n"
                   "from agree.cli import main\n"
                   "sys.argv = ['agree', 'score', PATH, '--boot', '0']\n"
                   "main()\n",
}

_PEAK = ("import atexit, sys\n"
         "def _peak():\n"
         "    for line in open('/proc/self/status'):\n"
         "        if line.startswith('VmHWM:'):\n"
         "            sys.stderr.write('PEAK_KB ' + line.split()[1] + '\\n')\n"
         "atexit.register(_peak)\n")


def _cap():
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_CAP, MEMORY_CAP))


def run(reader: str, path: Path) -> dict:
    code = _PEAK + f"PATH = {str(path)!r}\n" + _READERS[reader]
    t = time.perf_counter()
    try:
        proc = subprocess.run([PY, "-c", code], capture_output=True, text=True, timeout=TIME_CAP, preexec_fn=_cap)
    except subprocess.TimeoutExpired:
        return {"reader": reader, "seconds": None, "peak_mb": None, "outcome": f"over {TIME_CAP} s"}
    wall = time.perf_counter() - t
    peaks = [int(x.split()[1]) for x in proc.stderr.splitlines() if x.startswith("PEAK_KB ")]
    if proc.returncode == 0:
        outcome = "read: " + proc.stdout.strip().splitlines()[-1] if proc.stdout.strip() else "read"
    elif "MemoryError" in proc.stderr or "memory allocation" in proc.stderr or proc.returncode < 0:
        outcome = f"over the {MEMORY_CAP >> 30} GB cap"
    else:
        lines = [x for x in proc.stderr.splitlines() if x.strip() and not x.startswith("PEAK_KB")]
        outcome = "error: " + (lines[-1][:150] if lines else f"exit {proc.returncode}")
    return {"reader": reader, "seconds": round(wall, 2), "peak_mb": round(peaks[-1] / 1024) if peaks else None,
            "outcome": outcome}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="a tenth of the sizes")
    ap.add_argument("--readers", default="agree,openpyxl-rows,calamine,agree score")
    ap.add_argument("--kinds", default=",".join(KINDS))
    ap.add_argument("--out", help="write the results as JSON")
    args = ap.parse_args()
    readers = [r for r in args.readers.split(",") if r]
    try:
        import python_calamine  # noqa: F401
    except ImportError:
        readers = [r for r in readers if r != "calamine"]
    results = []
    print(f"{'workbook':<22} {'size':>9}  {'reader':<14} {'seconds':>8} {'peak MB':>8}  outcome")
    for kind in args.kinds.split(","):
        path = make(kind, args.quick)
        size = path.stat().st_size
        for reader in readers:
            r = run(reader, path)
            r.update(workbook=kind, bytes=size)
            results.append(r)
            secs = "-" if r["seconds"] is None else f"{r['seconds']:.2f}"
            peak = "-" if r["peak_mb"] is None else str(r["peak_mb"])
            print(f"{kind:<22} {size / 1024:>7.0f}KB  {reader:<14} {secs:>8} {peak:>8}  {r['outcome']}", flush=True)
    if args.out:
        Path(args.out).write_text(json.dumps({"machine": platform.platform(), "cpus": os.cpu_count(),
                                              "results": results}, indent=2))


if __name__ == "__main__":
    main()
