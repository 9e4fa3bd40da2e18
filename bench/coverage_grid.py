"""Does the one-sided 95% lower bound hold its level? Coverage over a grid, by simulation
(run: `nice .venv/bin/python bench/coverage_grid.py`).

Every data set is scored as a user would score it: ``agree.krippendorff_alpha(x, categories=...,
seed=..., minimum=0.8)`` with the default interval method (the Bayesian bootstrap with a
least-favourable pseudo-unit) and its default number of draws, and again with
``ci_method="bca"`` on the same data set for comparison. The data come from the model of
METHODS.md 8.2 (`tests.conftest.simulate_codes`): each unit has a true category drawn from the
shares; each coder reports it with probability sqrt(alpha), otherwise guesses from the shares,
so the population alpha is `alpha` for any number of coders. The categories are passed as a
codebook would pass them (unused ones included).

Grid: coders {2, 3, 4} x categories {2, 4, 8} x shares {equal, skewed} x alpha {.70, .80, .90,
.95, .97} x units {20, 50, 100, 200, 500} = 450 cells. Skewed shares: 2 -> (.9, .1),
4 -> (.7, .1, .1, .1), 8 -> (.51, .07 x 7).

Per cell (csv columns):

- `no_disagreement`: share of data sets in which every unit's coders agree; `undefined`: share
  whose alpha is undefined (every value the same category; no bound, counted apart).
- `cov`, `cov_se` (and `bca_cov`, `bca_cov_se`): coverage of the one-sided lower bound, the share
  of data sets with a defined alpha whose bound is at or below the population alpha, and its
  Monte Carlo error sqrt(p(1 - p) / n).
- `clears`, `clears_se` (and `bca_...`): share of all data sets whose bound is strictly above .80,
  the rule `score` decides by. Where alpha = .80 this is the type I error (at most .05 if the
  bound holds its level); above .80, the power to show that the minimum is reached.
- `contradictions`: data sets where the decision (bound > .80) and the p-value against the
  minimum (p_value_min < .05) disagree (must be 0).

Options: --datasets R (data sets per cell), --resamples B (draws per data set; default agree's
default), --full-datasets / --full-units: cells with at most that many units get R_full data
sets (the cells where the bound rests on few disagreements; documented in the output), --only
to run a part of the grid (e.g. --only coders=2 units=20,50), --seed. Resumable: cells already
in the csv with the same R and B are kept. Writes bench/results/coverage_grid.csv and
coverage_grid.md (the table in docs/coverage.md is that file).
"""

from __future__ import annotations

import argparse
import datetime
import itertools
import math
import os
import platform
import sys
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")  # one core: others share the machine
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
import agree  # noqa: E402
from agree.core.constants import DEFAULT_RESAMPLES  # noqa: E402
from tests.conftest import as_float, simulate_codes  # noqa: E402  (the tests' simulation model)

MINIMUM = 0.8
LEVEL = 0.95
GRID = {"coders": (2, 3, 4), "categories": (2, 4, 8), "shares": ("equal", "skewed"),
        "alpha": (0.70, 0.80, 0.90, 0.95, 0.97), "units": (20, 50, 100, 200, 500)}
SKEWED = {2: (0.9, 0.1), 4: (0.7, 0.1, 0.1, 0.1), 8: (0.51,) + (0.07,) * 7}
RESULTS = HERE / "results"


def shares(q: int, kind: str) -> tuple[float, ...]:
    return (1 / q,) * q if kind == "equal" else SKEWED[q]


def cell_seed(seed: int, cell: dict) -> int:
    """One seed per cell, the same whatever part of the grid is run."""
    key = (cell["coders"], cell["categories"], GRID["shares"].index(cell["shares"]),
           int(round(cell["alpha"] * 100)), cell["units"])
    return int(np.random.SeedSequence([seed, *key]).generate_state(1)[0])


def share(hits: int, total: int) -> tuple[float, float]:
    """A proportion and its Monte Carlo error."""
    if total == 0:
        return math.nan, math.nan
    p = hits / total
    return p, math.sqrt(p * (1 - p) / total)


def run_cell(cell: dict, *, datasets: int, resamples: int, seed: int, bca: bool = True) -> dict:
    """Simulate `datasets` data sets of one cell and score each through the public API."""
    m, q, a, n = cell["coders"], cell["categories"], cell["alpha"], cell["units"]
    prevalence = shares(q, cell["shares"])
    base = cell_seed(seed, cell)
    rng = np.random.default_rng(base)
    categories = list(range(q))
    methods = ("pseudo-unit", "bca") if bca else ("pseudo-unit",)
    lower = {meth: np.full(datasets, np.nan) for meth in methods}
    p_min = np.full(datasets, np.nan)
    estimate = np.full(datasets, np.nan)
    agreeing = np.zeros(datasets, bool)
    start = time.perf_counter()
    for d in range(datasets):
        codes = simulate_codes(rng, n, m, q, alpha=a, prevalence=prevalence)
        agreeing[d] = bool(np.all(codes == codes[:, :1]))
        x = as_float(codes)
        for meth in methods:
            r = agree.krippendorff_alpha(x, categories=categories, seed=base + d, minimum=MINIMUM,
                                         n_resamples=resamples, ci_method=meth)
            if meth == "pseudo-unit":
                estimate[d] = np.nan if r.estimate is None else r.estimate
                p_min[d] = np.nan if r.p_value_min is None else r.p_value_min
            lower[meth][d] = np.nan if r.lower_bound is None else r.lower_bound
    defined = np.isfinite(estimate)
    row = dict(cell, datasets=datasets, resamples=resamples, defined=int(defined.sum()),
               no_disagreement=float(agreeing.mean()), undefined=float(1 - defined.mean()))
    for meth, prefix in (("pseudo-unit", ""), ("bca", "bca_")):
        if meth not in lower:
            continue
        lb = lower[meth]
        # a defined estimate without a bound makes no claim: it covers and does not clear
        covered = defined & ~(lb > a + 1e-12)
        row[f"{prefix}cov"], row[f"{prefix}cov_se"] = share(int(covered.sum()), int(defined.sum()))
        row[f"{prefix}clears"], row[f"{prefix}clears_se"] = share(int(np.sum(lb > MINIMUM)), datasets)
        row[f"{prefix}mean_bound"] = float(np.nanmean(lb)) if np.isfinite(lb).any() else math.nan
    decides = lower["pseudo-unit"] > MINIMUM
    row["contradictions"] = int(np.sum(defined & np.isfinite(p_min) & (decides != (p_min < 1 - LEVEL))))
    row["seconds"] = round(time.perf_counter() - start, 1)
    return row


def cells(only: dict) -> list[dict]:
    names = list(GRID)
    out = []
    for values in itertools.product(*(GRID[k] for k in names)):
        cell = dict(zip(names, values))
        if all(cell[k] in v for k, v in only.items()):
            out.append(cell)
    return out


def parse_only(items: list[str]) -> dict:
    """`coders=2 units=20,50` -> {"coders": (2,), "units": (20, 50)}."""
    out = {}
    for item in items:
        key, _, values = item.partition("=")
        if key not in GRID:
            raise SystemExit(f"--only: unknown key {key!r}; keys: {', '.join(GRID)}")
        kind = type(GRID[key][0])
        out[key] = tuple(kind(v) for v in values.split(","))
    return out


def fmt(p: float, se: float) -> str:
    """.950 ± .007 (three decimals, no leading zero, as agree writes probabilities)."""
    if not math.isfinite(p):
        return "—"
    return f"{p:.3f} ± {se:.3f}".replace("0.", ".")


def summary(frame: pd.DataFrame) -> dict:
    """The figures the README quotes."""
    cov = frame["cov"]
    worst = frame.loc[cov.idxmin()]
    below = frame[cov < LEVEL - 2 * frame["cov_se"]]
    out = {"cells": len(frame), "min": float(cov.min()), "min_se": float(worst["cov_se"]),
           "median": float(cov.median()),
           "median_se": float(frame["cov_se"].median()), "below": len(below),
           "worst": worst, "contradictions": int(frame["contradictions"].sum())}
    at_min = frame[np.isclose(frame["alpha"], MINIMUM)]
    if len(at_min):
        top = at_min.loc[at_min["clears"].idxmax()]
        out.update(type1_max=float(top["clears"]), type1_max_se=float(top["clears_se"]),
                   type1_above=int(np.sum(at_min["clears"] > 1 - LEVEL + 2 * at_min["clears_se"])),
                   type1_cells=len(at_min))
    if "bca_cov" in frame:
        bca = frame["bca_cov"]
        out.update(bca_min=float(bca.min()), bca_median=float(bca.median()),
                   bca_below=int(np.sum(bca < LEVEL - 2 * frame["bca_cov_se"])))
        if len(at_min):
            out["bca_type1_above"] = int(np.sum(at_min["bca_clears"] > 1 - LEVEL + 2 * at_min["bca_clears_se"]))
    return out


def markdown(frame: pd.DataFrame, command: str) -> str:
    s = summary(frame)
    runs = ", ".join(f"{int(r)} data sets in {int(c)} cells" for r, c in
                     frame.groupby("datasets").size().sort_index(ascending=False).items())
    w = s["worst"]
    lines = [
        "# Coverage of the one-sided 95% lower bound (Krippendorff's alpha, nominal)",
        "",
        f"Made by `{command}` on {datetime.date.today().isoformat()} (agree {agree.__version__}, "
        f"Python {platform.python_version()}, numpy {np.__version__}); "
        f"{int(frame['resamples'].iloc[0])} draws per data set; {runs}.",
        "Each data set is simulated from the model of METHODS.md 8.2 (population alpha known) and scored "
        "with `agree.krippendorff_alpha(x, categories=..., seed=..., minimum=0.8)`, the default method "
        "(Bayesian bootstrap with a least-favourable pseudo-unit), and with `ci_method=\"bca\"` on the same "
        "data set. ± is one Monte Carlo error, sqrt(p(1 - p)/n).",
        "",
        f"**Summary.** Coverage of the default bound: minimum {fmt(s['min'], s['min_se'])} "
        f"({int(w['coders'])} coders, {int(w['categories'])} categories, {w['shares']} shares, alpha "
        f"{w['alpha']:.2f}, {int(w['units'])} units), median {s['median']:.3f} (typical Monte Carlo error "
        f"{s['median_se']:.3f}); {s['below']} of {s['cells']} cells more than two Monte Carlo errors below .95."
        .replace("0.", "."),
    ]
    if "type1_max" in s:
        lines.append(
            f"Type I error (bound above .80 when alpha is .80): at most {fmt(s['type1_max'], s['type1_max_se'])}; "
            f"{s['type1_above']} of {s['type1_cells']} cells more than two Monte Carlo errors above .05.")
    if "bca_min" in s:
        lines.append(
            f"BCa on the same data sets: minimum coverage {s['bca_min']:.3f}, median {s['bca_median']:.3f}, "
            f"{s['bca_below']} cells more than two errors below .95; type I error more than two errors "
            f"above .05 in {s.get('bca_type1_above', 0)} cells.".replace("0.", ".").replace(" .05", " .05"))
    lines.append(f"Decision and p-value against the minimum disagreed in {s['contradictions']} data sets.")
    lines += ["",
              "Columns: P(no dis.) = share of data sets in which the coders agree on every unit; "
              "undef. = share whose alpha is undefined (one category throughout; left out of coverage); "
              "coverage = P(bound ≤ alpha); P(> .80) = share whose bound is above .80 (type I error where "
              "alpha = .80, power above).",
              "",
              "| coders | categories | shares | alpha | units | data sets | P(no dis.) | undef. | coverage | "
              "BCa coverage | P(> .80) | BCa P(> .80) |",
              "|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for _, r in frame.iterrows():
        lines.append(
            f"| {int(r['coders'])} | {int(r['categories'])} | {r['shares']} | {r['alpha']:.2f} | {int(r['units'])} "
            f"| {int(r['datasets'])} | {r['no_disagreement']:.3f} | {r['undefined']:.3f} | {fmt(r['cov'], r['cov_se'])} "
            f"| {fmt(r.get('bca_cov', math.nan), r.get('bca_cov_se', math.nan))} "
            f"| {fmt(r['clears'], r['clears_se'])} "
            f"| {fmt(r.get('bca_clears', math.nan), r.get('bca_clears_se', math.nan))} |".replace("| 0.", "| ."))
    return "\n".join(lines) + "\n"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", type=int, default=400, help="data sets per cell")
    parser.add_argument("--full-datasets", type=int, default=1000,
                        help="data sets per cell in the cells with at most --full-units units")
    parser.add_argument("--full-units", type=int, default=50)
    parser.add_argument("--resamples", type=int, default=DEFAULT_RESAMPLES)
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--no-bca", action="store_true", help="skip the BCa comparison")
    parser.add_argument("--only", nargs="*", default=[], help="part of the grid, e.g. coders=2 units=20,50")
    parser.add_argument("--out", type=Path, default=RESULTS / "coverage_grid.csv")
    args = parser.parse_args()
    args.out.parent.mkdir(parents=True, exist_ok=True)
    command = "nice .venv/bin/python bench/coverage_grid.py " + " ".join(sys.argv[1:])
    done = pd.read_csv(args.out) if args.out.exists() else pd.DataFrame()
    rows = [] if done.empty else done.to_dict("records")
    key = ("coders", "categories", "shares", "alpha", "units")
    have = {(tuple(r[k] for k in key), r["datasets"], r["resamples"]) for r in rows}
    todo = cells(parse_only(args.only))
    start = time.perf_counter()
    for i, cell in enumerate(todo):
        R = args.full_datasets if cell["units"] <= args.full_units else args.datasets
        if (tuple(cell[k] for k in key), R, args.resamples) in have:
            continue
        rows = [r for r in rows if tuple(r[k] for k in key) != tuple(cell[k] for k in key)]
        row = run_cell(cell, datasets=R, resamples=args.resamples, seed=args.seed, bca=not args.no_bca)
        rows.append(row)
        frame = pd.DataFrame(rows).sort_values(list(key)).reset_index(drop=True)
        frame.to_csv(args.out, index=False, float_format="%.6g")
        print(f"[{i + 1}/{len(todo)} {time.perf_counter() - start:.0f}s] {cell}: cov {fmt(row['cov'], row['cov_se'])}"
              f" bca {fmt(row.get('bca_cov', math.nan), row.get('bca_cov_se', math.nan))}"
              f" clears {row['clears']:.3f} ({row['seconds']}s)", flush=True)
    frame = pd.DataFrame(rows).sort_values(list(key)).reset_index(drop=True)
    args.out.with_suffix(".md").write_text(markdown(frame, command), encoding="utf-8")
    s = summary(frame)
    print(f"coverage: min {fmt(s['min'], s['min_se'])}, median {s['median']:.3f}; "
          f"{s['below']} of {s['cells']} cells below .95 by more than 2 MC errors")


if __name__ == "__main__":
    main()
