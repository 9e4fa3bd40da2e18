"""Standard errors and tests checked by simulation (run: `nice .venv/bin/python bench/se_checks.py`).

Each check simulates data sets from a model whose population value is known (or computed on
one very large data set), and reports Monte Carlo figures with their Monte Carlo error:

1. `gwet`: AC1 and Fleiss' kappa with 30% of the units coded by a single coder. The SD of
   the estimates against the mean of the two linearisation SEs (unit terms centred at p_a,
   the default, and at p_e, Gwet's 2014 form, details["se_handbook"]) and the coverage of the
   95% t interval (n1 - 1 df) made with each.
2. `conger`: Conger's kappa with 60% of the units complete (the others miss one coder): SD
   against the mean SE and the coverage of its 95% t interval.
3. `rounds`: the same units recoded in two rounds (a hard unit is hard in both): coverage and
   width of the 95% percentile interval of the difference of α, paired (shared units resampled
   jointly, the default of `compare_rounds`) and independent.
4. `mcnemar`: two coders, units nested in groups whose members share a propensity to get the
   code, equal use by both coders (the null): the rejection rate at .05 of McNemar's test and
   of the clustered McNemar test (Durkalski et al. 2003).
5. `kappa-null`: the z-test of kappa = 0 with independent-units null SE (Fleiss, Cohen &
   Everitt 1969) on units nested in groups, under no agreement beyond chance: its rejection
   rate at .05 (why a clustered design gets no such test).

The figures in DEVELOPERS.md ("Standard errors checked by simulation") come from
`--replicates 2000` (the default); `--quick` runs 200 per check. Options: --only NAME, --seed.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from scipy import stats

import agree
from agree.analysis.diagnostics.homogeneity import clustered_mcnemar, mcnemar
from agree.analysis.rounds.paired import difference_interval, difference_replicates, round_items
from agree.core.model import from_table
from agree.stats.kernels import delta_for


def _codes(rng, n, m, q, alpha, prevalence=None):
    """The model of METHODS 8.2: a true category per unit; each coder reports it with
    probability sqrt(alpha), else guesses from the prevalences (population alpha = alpha)."""
    p = np.full(q, 1 / q) if prevalence is None else np.asarray(prevalence)
    truth = rng.choice(q, size=n, p=p)
    knows = rng.random((n, m)) < math.sqrt(alpha)
    return np.where(knows, truth[:, None], rng.choice(q, size=(n, m), p=p))


def _single_rated(rng, codes, share):
    n, m = codes.shape
    single = rng.random(n) < share
    keep = rng.integers(0, m, n)
    out = codes.copy()
    for i in range(m):
        out[single & (keep != i), i] = -1
    return out


def _float(codes):
    return np.where(codes < 0, np.nan, codes).astype(float)


def _share(hits, total):
    p = hits / total
    return f"{p:.3f} ± {math.sqrt(p * (1 - p) / total):.3f}"


def _sd(values):
    values = np.asarray(values)
    sd = values.std(ddof=1)
    return f"{sd:.4f} ± {sd / math.sqrt(2 * (len(values) - 1)):.4f}"


def check_gwet(replicates: int, seed: int, n: int = 150, share: float = 0.3) -> dict:
    """AC1 and Fleiss' kappa with `share` of units coded once: both SE forms."""
    rng = np.random.default_rng(seed)
    prevalence = [0.4, 0.3, 0.2, 0.1]
    out = {}
    for name in ("gwet_ac1", "fleiss_kappa"):
        f = getattr(agree, name)
        big = _single_rated(rng, _codes(rng, 400_000, 3, 4, 0.6, prevalence), share)
        truth = f(_float(big), categories=[0, 1, 2, 3], n_resamples=0).estimate
        est, se, se_hb, cover, cover_hb = [], [], [], 0, 0
        for _ in range(replicates):
            codes = _single_rated(rng, _codes(rng, n, 3, 4, 0.6, prevalence), share)
            r = f(_float(codes), categories=[0, 1, 2, 3], n_resamples=0)
            t = stats.t.ppf(0.975, r.n_units - 1)
            est.append(r.estimate)
            se.append(r.se)
            se_hb.append(r.details["se_handbook"])
            cover += abs(r.estimate - truth) <= t * r.se
            cover_hb += abs(r.estimate - truth) <= t * r.details["se_handbook"]
        out[name] = {"population": round(truth, 4), "sd": _sd(est), "mean_se_pa": f"{np.mean(se):.4f}",
                     "mean_se_pe_handbook": f"{np.mean(se_hb):.4f}",
                     "coverage_pa": _share(cover, replicates), "coverage_pe_handbook": _share(cover_hb, replicates)}
    return out


def check_conger(replicates: int, seed: int, n: int = 150) -> dict:
    rng = np.random.default_rng(seed)

    def draw(size):
        codes = _codes(rng, size, 3, 3, 0.5, [0.5, 0.3, 0.2])
        # coder bias: the third coder guesses category 0 more often
        biased = rng.random(size) < 0.15
        codes[biased, 2] = 0
        half = rng.permutation(size) < int(0.4 * size)     # exactly 40% of units miss one coder
        codes[half, rng.integers(0, 3, size)[half]] = -1
        return codes

    truth = agree.conger_kappa(_float(draw(400_000)), n_resamples=0).estimate
    est, se, cover = [], [], 0
    for _ in range(replicates):
        r = agree.conger_kappa(_float(draw(n)), n_resamples=0)
        est.append(r.estimate)
        se.append(r.se)
        cover += abs(r.estimate - truth) <= stats.t.ppf(0.975, r.n_units - 1) * r.se
    return {"population": round(truth, 4), "sd": _sd(est), "mean_se": f"{np.mean(se):.4f}",
            "coverage": _share(cover, replicates)}


def _recoded(rng, n, first, second, hard_share=0.4):
    truth = rng.integers(0, 3, n)
    hard = rng.random(n) < hard_share
    out = []
    for level in (first, second):
        knows = (rng.random((n, 3)) < math.sqrt(level)) & ~hard[:, None]
        out.append(np.where(knows, truth[:, None], rng.integers(0, 3, (n, 3))))
    return out


def check_rounds(replicates: int, seed: int, n: int = 120, n_resamples: int = 500) -> dict:
    rng = np.random.default_rng(seed)
    delta = delta_for("nominal", n_values=3)
    big = _recoded(rng, 400_000, 0.55, 0.8)
    truth = (agree.krippendorff_alpha(_float(big[1]), n_resamples=0).estimate
             - agree.krippendorff_alpha(_float(big[0]), n_resamples=0).estimate)
    res = {"paired": [0, []], "independent": [0, []]}
    diffs = []
    for _ in range(replicates):
        a, b = (from_table(_float(c)) for c in _recoded(rng, n, 0.55, 0.8))
        ia, ib = round_items(a, (), delta), round_items(b, (), delta)
        est = (agree.krippendorff_alpha(b, n_resamples=0).estimate
               - agree.krippendorff_alpha(a, n_resamples=0).estimate)
        diffs.append(est)
        for key, paired in (("paired", True), ("independent", False)):
            va, vb, _ = difference_replicates(ia, ib, n_resamples, rng, paired=paired)
            low, high, _ = difference_interval(va[:, 0], vb[:, 0], estimate=est, confidence_level=0.95)
            res[key][0] += low <= truth <= high
            res[key][1].append(high - low)
    return {"population_difference": round(truth, 4), "sd_of_difference": _sd(diffs),
            **{f"coverage_{k}": _share(v[0], replicates) for k, v in res.items()},
            **{f"mean_width_{k}": f"{np.mean(v[1]):.4f}" for k, v in res.items()}}


def check_mcnemar(replicates: int, seed: int, groups: int = 40, size: int = 8) -> dict:
    rng = np.random.default_rng(seed)
    plain = clustered = 0
    labels = np.repeat(np.arange(groups), size)
    for _ in range(replicates):
        # each group has its own propensity; both coders apply the code with it, independently,
        # and a group-level tilt towards one coder or the other that averages out (equal use)
        p = rng.beta(1, 3, groups)
        tilt = rng.normal(0, 0.15, groups)
        pa = np.clip(p + tilt, 0, 1)[labels]
        pb = np.clip(p - tilt, 0, 1)[labels]
        xa, xb = rng.random(len(labels)) < pa, rng.random(len(labels)) < pb
        first, second = (xa & ~xb).astype(float)[:, None], (~xa & xb).astype(float)[:, None]
        plain += mcnemar(first.sum(0), second.sum(0))[1][0] < 0.05
        clustered += clustered_mcnemar(first, second, labels)[1][0] < 0.05
    return {"units": groups * size, "groups": groups, "rejection_mcnemar": _share(plain, replicates),
            "rejection_clustered_mcnemar": _share(clustered, replicates)}


def check_kappa_null(replicates: int, seed: int, groups: int = 30, size: int = 8) -> dict:
    rng = np.random.default_rng(seed)
    rejected = 0
    labels = np.repeat(np.arange(groups), size)
    for _ in range(replicates):
        # each coder's use of the code drifts from group to group (an interview's topic reads
        # differently to each), the two drifts independent of each other and of the units: no
        # agreement beyond chance in the population, but agreement is correlated within a group
        pa = rng.beta(0.5, 0.5, groups)[labels]
        pb = rng.beta(0.5, 0.5, groups)[labels]
        a = (rng.random(len(labels)) < pa).astype(int)
        b = (rng.random(len(labels)) < pb).astype(int)
        r = agree.cohen_kappa(np.column_stack([a, b]).astype(float), categories=[0, 1], n_resamples=0)
        rejected += r.p_value is not None and r.p_value < 0.05
    return {"units": groups * size, "groups": groups, "rejection_unclustered_z": _share(rejected, replicates)}


CHECKS = {"gwet": check_gwet, "conger": check_conger, "rounds": check_rounds, "mcnemar": check_mcnemar,
          "kappa-null": check_kappa_null}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--only", choices=list(CHECKS))
    parser.add_argument("--seed", type=int, default=2024)
    args = parser.parse_args()
    reps = 200 if args.quick else args.replicates
    for name, check in CHECKS.items():
        if args.only and name != args.only:
            continue
        start = time.perf_counter()
        result = check(reps, args.seed)
        print(f"{name} ({reps} data sets, {time.perf_counter() - start:.0f} s): {result}", flush=True)


if __name__ == "__main__":
    main()
