"""Past one machine's memory: `agree score` on a long Parquet label log against DuckDB's own time
for the bare group-by on the same files (run: `nice .venv/bin/python bench/bench_scale.py --rows 1e8`).

The generator (`bench/make_logs.py`) writes the files under bench/data/logs-<rows>/ (not
committed; about 3 bytes a row in Parquet) unless they are there. Then, each in a fresh process,
one after the other:

1. bare: DuckDB (its default settings, but at most 8 GB of memory on this shared machine: more
   than it needs to keep the whole group-by in memory) runs the group-by a user would write to count the
   patterns: pivot the rows to one row per unit (MAX(label) FILTER (WHERE annotator = ...)),
   then GROUP BY the coder columns with COUNT(*);
2. agree: ``agree score 'bench/data/logs-<rows>/*.parquet' --engine duckdb`` (2000 bootstrap
   replicates), reading, checks, reduction and every coefficient.

Reported: wall time and peak memory (the process's VmHWM) of each, and agree / bare.
Targets: peak memory of agree under 2 GB; agree within 2x of bare. With --cluster both runs
also keep the document column (counts per document and pattern; agree resamples documents).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
PY = sys.executable
PEAK = ("import atexit, sys\n"
        "def _peak():\n"
        "    for line in open('/proc/self/status'):\n"
        "        if line.startswith('VmHWM:'):\n"
        "            sys.stderr.write('PEAK_KB ' + line.split()[1] + '\\n')\n"
        "atexit.register(_peak)\n")
CODERS = ("ann", "bea", "cyd", "dov")  # bench/make_logs.py


def child(code: str) -> tuple[float, float, str]:
    """Run Python code in a fresh process: (wall seconds, peak RSS in MB, stdout)."""
    t = time.perf_counter()
    proc = subprocess.run([PY, "-c", PEAK + code], capture_output=True, text=True)
    wall = time.perf_counter() - t
    if proc.returncode != 0:
        raise SystemExit(f"child failed ({proc.returncode}):\n{proc.stderr[-3000:]}")
    peaks = [int(x.split()[1]) for x in proc.stderr.splitlines() if x.startswith("PEAK_KB ")]
    return wall, peaks[-1] / 1024, proc.stdout


def bare_sql(pattern: str, cluster: bool) -> str:
    pivot = ", ".join(f"max(label) FILTER (WHERE annotator = '{c}') AS {c}" for c in CODERS)
    doc = "min(document) AS document, " if cluster else ""
    return (f"SELECT * EXCLUDE (unit_id), count(*) AS n FROM (SELECT unit_id, {doc}{pivot} "
            f"FROM read_parquet('{pattern}') GROUP BY unit_id) GROUP BY ALL")


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--rows", type=float, default=1e7)
    p.add_argument("--files", type=int, default=0, help="files to write (default: one per 1e7 rows, at least 4)")
    p.add_argument("--cluster", action="store_true", help="keep the document column (cluster bootstrap)")
    p.add_argument("--boot", type=int, default=2000)
    p.add_argument("--out", type=Path, help="write the figures as JSON")
    a = p.parse_args()
    folder = HERE / "data" / f"logs-{a.rows:.0e}"
    if not folder.exists() or not any(folder.glob("*.parquet")):
        files = a.files or max(4, int(a.rows // 1e7))
        subprocess.run([PY, str(HERE / "make_logs.py"), str(folder), "--rows", str(a.rows), "--files", str(files)],
                       check=True)
    pattern = str(folder / "*.parquet")
    size = sum(f.stat().st_size for f in folder.glob("*.parquet")) / 1e6
    bare = child(f"import duckdb\ncon = duckdb.connect(config={{'memory_limit': '8GB'}})\n"
                 "con.execute('SET enable_progress_bar=false')\n"
                 f"rows = con.execute({bare_sql(pattern, a.cluster)!r}).fetchall()\nprint(len(rows))")
    cluster = ["--cluster", "document"] if a.cluster else []
    ours = child("import sys\nfrom agree.cli import main\n"
                 f"sys.argv = ['agree', '-q', 'score', {pattern!r}, '--engine', 'duckdb', '--boot', '{a.boot}', "
                 f"'--format', 'json', *{cluster!r}]\nmain()")
    result = json.loads(ours[2])
    figures = {
        "rows": a.rows, "files_mb": round(size), "cluster": a.cluster, "boot": a.boot,
        "units": result["units"]["read"], "alpha": result["coefficients"]["krippendorff_alpha"]["estimate"],
        "bare_groupby_s": round(bare[0], 1), "bare_groupby_peak_mb": round(bare[1]), "bare_rows": int(bare[2]),
        "agree_score_s": round(ours[0], 1), "agree_score_peak_mb": round(ours[1]),
        "ratio": round(ours[0] / bare[0], 2),
    }
    print(f"{a.rows:.0e} rows ({size:.0f} MB of Parquet, {figures['units']:,} units"
          f"{', per document' if a.cluster else ''}):")
    print(f"  DuckDB bare group-by: {bare[0]:6.1f} s, peak {bare[1]:6.0f} MB")
    print(f"  agree score --engine duckdb (--boot {a.boot}): {ours[0]:6.1f} s, peak {ours[1]:6.0f} MB "
          f"(target under 2048 MB)")
    print(f"  ratio agree / bare: {figures['ratio']:.2f} (target at most 2)")
    if a.out:
        a.out.write_text(json.dumps(figures, indent=2))


if __name__ == "__main__":
    main()
