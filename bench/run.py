"""Speed and memory benchmark for `agree` (run: `make bench` or `.venv/bin/python bench/run.py`).

Generates its own synthetic data under bench/data/ (not committed) and reports medians and
ratios measured in one run on the same data:

1. Krippendorff's alpha point estimate, `agree` against the `krippendorff` package, on the same
   float array (NaN = missing), also as a DataFrame and as ready CodingData; 1e6 units x 3 coders x
   5 categories, nominal and interval (target: at least 10x faster on the array and the DataFrame).
2. Peak memory of alpha on 1e6 units x 5 coders x 20 categories, in a fresh process
   (target: under 1 GB). `--reference-memory` also measures the reference package there
   (it needs about 9 GB and a few minutes).
3. A 10,000-replicate bootstrap interval for alpha on 1e6 x 3 against the point estimate
   (target: the bootstrap costs at most twice the point estimate).
4. `agree score` on a long CSV of 3e6 rows (1e6 units x 3 coders) against reading that file
   with pandas' pyarrow engine, each in a fresh process (target: within 3x; memory under 2 GB).
5. `agree --help` and `agree score --help` in a fresh process (target: under 0.3 s each;
   `bench/bench_help.py` runs this row alone).
6. `agree codes` and `agree disagreements` (review written as CSV and as Parquet) on the long CSV
   of 4, beside `agree score` on it, each in a fresh process, the four commands in turn in each
   repeat (targets: codes within 2x of score; the reviews in seconds).

Options: --quick (smaller sizes, for a smoke run), --repeat N, --only CASE... (run only these
cases: alpha, bootstrap, memory, score, review, help), --out FILE (JSON).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
from bench_help import bench_help
from bench_help import report as report_help

HERE = Path(__file__).resolve().parent
DATA = HERE / "data"
PY = sys.executable


def _timed(fn, repeat):
    """Median wall time of `fn` over `repeat` calls, each from cold (no compressed patterns kept)."""
    from agree.stats.patterns import _RECENT

    times = []
    value = None
    for _ in range(repeat):
        _RECENT.clear()
        t = time.perf_counter()
        value = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), value


_PEAK = ("import atexit, sys\n"
         "def _peak():\n"
         "    for line in open('/proc/self/status'):\n"
         "        if line.startswith('VmHWM:'):\n"
         "            sys.stderr.write('PEAK_KB ' + line.split()[1] + '\\n')\n"
         "atexit.register(_peak)\n")


def _child(code: str) -> tuple[float, float, int]:
    """Run Python code in a fresh process: (wall seconds, peak RSS MB, exit code).

    The peak is the child's own high-water mark (VmHWM, read at exit): the resource usage that
    wait4 reports would also count the parent's memory, which the child shares until exec.
    """
    t = time.perf_counter()
    proc = subprocess.run([PY, "-c", _PEAK + code], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    wall = time.perf_counter() - t
    err = proc.stderr.decode(errors="replace")
    peaks = [int(x.split()[1]) for x in err.splitlines() if x.startswith("PEAK_KB ")]
    if proc.returncode != 0:
        print(f"  child failed ({proc.returncode}):\n{err}", file=sys.stderr)
    return wall, (peaks[-1] / 1024 if peaks else float("nan")), proc.returncode


def _codes(n_units, n_coders, n_cat, seed, agree_share=0.7):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, n_cat, n_units)
    x = np.where(rng.random((n_units, n_coders)) < agree_share, truth[:, None],
                 rng.integers(0, n_cat, (n_units, n_coders)))
    return x.astype(np.int32)


def _coding_data(x):
    from agree.core.model import CodingData

    n, m = x.shape
    return CodingData(codes=x, values=tuple(range(int(x.max()) + 1)),
                      unit_ids=np.arange(n).astype(str).astype(object),
                      coders=tuple(f"c{i + 1}" for i in range(m)))


def bench_alpha(n_units, repeat):
    """Alpha on the same 1e6 x 3 data given three ways: the float array the reference package takes
    (NaN = missing; `agree` must normalise every value), a DataFrame of it, and ready CodingData."""
    import krippendorff
    import pandas as pd

    import agree

    x = _codes(n_units, 3, 5, seed=1)
    ref_data = x.T.astype(float)
    inputs = {"array": ref_data.T.copy(), "dataframe": pd.DataFrame(ref_data.T), "coding_data": _coding_data(x)}
    rows = []
    for level in ("nominal", "interval"):
        t_ref, b = _timed(lambda: krippendorff.alpha(reliability_data=ref_data, level_of_measurement=level,
                                                     value_domain=list(range(5))), max(1, repeat // 2))
        for kind, data in inputs.items():
            agree.krippendorff_alpha(data, level=level, n_resamples=0)  # warm-up
            t_agree, a = _timed(lambda: agree.krippendorff_alpha(data, level=level, n_resamples=0).estimate,
                                repeat)
            rows.append({"level": level, "input": kind, "agree_s": t_agree, "reference_s": t_ref,
                         "speedup": t_ref / t_agree, "same_value": bool(abs(a - b) < 1e-9)})
    return rows


def bench_bootstrap(n_units, repeat):
    import agree

    d = _coding_data(_codes(n_units, 3, 5, seed=2))
    agree.krippendorff_alpha(d, n_resamples=0)
    t_point, _ = _timed(lambda: agree.krippendorff_alpha(d, n_resamples=0), repeat)
    t_boot, res = _timed(lambda: agree.krippendorff_alpha(d, n_resamples=10_000, seed=1), repeat)
    return {"point_s": t_point, "with_bootstrap_s": t_boot, "bootstrap_extra_s": t_boot - t_point,
            "extra_over_point": (t_boot - t_point) / t_point, "total_over_point": t_boot / t_point,
            "ci": [res.ci_low, res.ci_high]}


_MEMORY_SCRIPT = """
import sys, numpy as np
sys.path[:0] = [{root!r}, {root!r} + "/bench"]  # bench.run imports bench_help from its own folder
x = np.load({path!r})
if {reference}:
    import krippendorff
    krippendorff.alpha(reliability_data=x.T.astype(float), level_of_measurement='nominal',
                       value_domain=list(range(20)))
else:
    import agree
    from bench.run import _coding_data
    agree.krippendorff_alpha(_coding_data(x), n_resamples=0)
"""


def bench_memory(n_units, reference):
    """Peak RSS of a fresh process that loads the codes (int32, from .npy) and computes alpha,
    against one that only loads them and imports the package."""
    root = str(HERE.parent)
    path = DATA / f"codes_{n_units}x5x20.npy"
    if not path.exists():
        DATA.mkdir(parents=True, exist_ok=True)
        np.save(path, _codes(n_units, 5, 20, seed=3))
    out = {}
    _, base_mb, _ = _child(f"import sys, numpy as np; sys.path.insert(0, {root!r}); import agree; "
                           f"x = np.load({str(path)!r})")
    out["load_only_mb"] = base_mb
    wall, mb, _ = _child(_MEMORY_SCRIPT.format(root=root, path=str(path), reference=False))
    out["agree_mb"] = mb
    out["agree_s"] = wall
    if reference:
        wall, mb, _ = _child(_MEMORY_SCRIPT.format(root=root, path=str(path), reference=True))
        out["reference_mb"] = mb
        out["reference_s"] = wall
    return out


def make_long_csv(n_units, path: Path):
    if path.exists():
        return
    path.parent.mkdir(parents=True, exist_ok=True)
    import pandas as pd

    x = _codes(n_units, 3, 5, seed=4)
    labels = np.array(["belonging", "skills", "time", "burnout", "conflict"])
    frame = pd.DataFrame({
        "unit": np.repeat(np.char.add("u", np.arange(n_units).astype(str)), 3),
        "coder": np.tile(["amara", "bastien", "chen"], n_units),
        "code": labels[x.ravel()],
    })
    frame.to_csv(path, index=False)


def bench_score(n_units, repeat):
    path = DATA / f"long_{n_units}.csv"
    make_long_csv(n_units, path)
    read = f"import pandas as pd; pd.read_csv({str(path)!r}, engine='pyarrow')"
    score = ("import sys; from agree.cli import main; "
             f"sys.argv = ['agree', '--quiet', 'score', {str(path)!r}, '--format', 'json', '--seed', '1']; main()")
    reads, scores = [], []
    for _ in range(repeat):  # alternated, so that load from others on the machine falls on both alike
        reads.append(_child(read))
        scores.append(_child(score))
    t_read = statistics.median(r[0] for r in reads)
    t_score = statistics.median(s[0] for s in scores)
    return {"rows": 3 * n_units, "pandas_pyarrow_read_s": t_read, "agree_score_s": t_score,
            "pandas_read_peak_mb": max(r[1] for r in reads),
            "ratio": t_score / t_read, "agree_score_peak_mb": max(s[1] for s in scores),
            "exit_codes": sorted({s[2] for s in scores})}


def _agree(*args: str) -> str:
    return ("import sys; from agree.cli import main; "
            f"sys.argv = ['agree', '--quiet', *{list(args)!r}]; main()")


def bench_review(n_units, repeat):
    """`agree score`, `agree codes` and `agree disagreements` (CSV, Parquet) on the same long CSV,
    fresh processes, the four in turn in each repeat; medians, peaks and ratios to score."""
    path = DATA / f"long_{n_units}.csv"
    make_long_csv(n_units, path)
    out = DATA / "review"
    out.mkdir(parents=True, exist_ok=True)
    commands = {
        "score": _agree("score", str(path), "--format", "json", "--seed", "1"),
        "codes": _agree("codes", str(path), "--format", "json", "--seed", "1"),
        "disagreements_csv": _agree("disagreements", str(path), "-o", str(out / "review.csv"), "--force"),
        "disagreements_parquet": _agree("disagreements", str(path), "-o", str(out / "review.parquet"), "--force"),
    }
    runs = {name: [] for name in commands}
    for _ in range(repeat):
        for name, code in commands.items():
            runs[name].append(_child(code))
    result = {"rows": 3 * n_units, "repeat": repeat}
    for name, rs in runs.items():
        result[f"{name}_s"] = statistics.median(r[0] for r in rs)
        result[f"{name}_peak_mb"] = max(r[1] for r in rs)
        result[f"{name}_exit_codes"] = sorted({r[2] for r in rs})
    for name in ("codes", "disagreements_csv", "disagreements_parquet"):
        result[f"{name}_over_score"] = result[f"{name}_s"] / result["score_s"]
    return result


def report_review(r):
    print(f"  agree score {r['score_s']:.2f}s ({r['score_peak_mb']:.0f} MB)  "
          f"agree codes {r['codes_s']:.2f}s ({r['codes_peak_mb']:.0f} MB, {r['codes_over_score']:.2f}x score)")
    for kind in ("csv", "parquet"):
        name = f"disagreements_{kind}"
        print(f"  agree disagreements -o review.{kind} {r[name + '_s']:.2f}s ({r[name + '_peak_mb']:.0f} MB, "
              f"{r[name + '_over_score']:.2f}x score)")
    codes = sorted({c for k, v in r.items() if k.endswith("_exit_codes") for c in v})
    print(f"  exit {codes}")


CASES = ("alpha", "bootstrap", "memory", "score", "review", "help")


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--quick", action="store_true", help="smaller sizes, for a smoke run")
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--reference-memory", action="store_true",
                   help="also measure the reference package's memory on 1e6 x 5 x 20 (about 9 GB)")
    p.add_argument("--only", nargs="+", choices=CASES, default=list(CASES), metavar="CASE",
                   help=f"run only these cases ({', '.join(CASES)})")
    p.add_argument("--out", type=Path, default=HERE / "results" / "latest.json")
    a = p.parse_args(argv)
    n = 100_000 if a.quick else 1_000_000
    result = {"machine": {"python": platform.python_version(), "cpus": os.cpu_count(),
                          "platform": platform.platform()},
              "units": n}
    if "alpha" in a.only:
        print(f"alpha point estimate, {n} units x 3 coders x 5 categories ...", flush=True)
        result["alpha"] = bench_alpha(n, a.repeat)
        for row in result["alpha"]:
            print(f"  {row['level']:9s} {row['input']:11s} agree {row['agree_s']:.3f}s  reference {row['reference_s']:.3f}s  "
                  f"speed-up {row['speedup']:.1f}x  same value: {row['same_value']}")
    if "bootstrap" in a.only:
        print(f"bootstrap, 10,000 replicates, {n} x 3 ...", flush=True)
        b = result["bootstrap"] = bench_bootstrap(n, a.repeat)
        print(f"  point {b['point_s']:.3f}s  with bootstrap {b['with_bootstrap_s']:.3f}s  "
              f"extra/point {b['extra_over_point']:.2f}  total/point {b['total_over_point']:.2f}")
    if "memory" in a.only:
        print(f"memory, alpha on {n} x 5 coders x 20 categories (fresh process) ...", flush=True)
        m = result["memory"] = bench_memory(n, a.reference_memory)
        print(f"  peak RSS agree {m['agree_mb']:.0f} MB (loading the codes and importing agree: {m['load_only_mb']:.0f} MB)"
              + (f", reference {m['reference_mb']:.0f} MB" if "reference_mb" in m else ""))
    if "score" in a.only:
        print(f"agree score on a long CSV of {3 * n} rows (fresh processes) ...", flush=True)
        s = result["score"] = bench_score(n, a.repeat)
        print(f"  pandas pyarrow read {s['pandas_pyarrow_read_s']:.2f}s  agree score {s['agree_score_s']:.2f}s  "
              f"ratio {s['ratio']:.2f}  peak {s['agree_score_peak_mb']:.0f} MB (pandas read {s['pandas_read_peak_mb']:.0f} MB)"
              f"  exit {s['exit_codes']}")
    if "review" in a.only:
        print(f"agree score, codes and disagreements on the same long CSV of {3 * n} rows (fresh processes) ...",
              flush=True)
        result["review"] = bench_review(n, a.repeat)
        report_review(result["review"])
    if "help" in a.only:
        print("agree --help and agree score --help (fresh processes) ...", flush=True)
        result["help"] = bench_help(max(a.repeat, 5))
        report_help(result["help"])
    a.out.parent.mkdir(parents=True, exist_ok=True)
    a.out.write_text(json.dumps(result, indent=2))
    print(f"written {a.out}")


if __name__ == "__main__":
    main()
