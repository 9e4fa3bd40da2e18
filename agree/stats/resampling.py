"""Unit (or cluster) bootstrap and jackknife on sufficient sums.

Every coefficient in `agree` is a function of sums over units of per-unit feature vectors
(the coincidence matrix, the coders' margins, the within-unit agreement, ...). Units with
the same pattern of values have the same features, so a statistic is ``finish(counts @ F)``
where F holds one row of features per pattern (or per cluster) and `counts` how often each
occurs. A bootstrap replicate draws new counts from a multinomial over the patterns
(exactly the unit bootstrap, METHODS 7.5); a jackknife value removes one unit (or cluster).

References
----------
Efron, B. (1987). Better bootstrap confidence intervals. JASA, 82(397), 171-185.
Efron, B., & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall.
DiCiccio, T. J., & Efron, B. (1996). Bootstrap confidence intervals. Statistical Science, 11(3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any, Callable

import numpy as np
import pandas as pd

from agree.core.constants import DEFAULT_CI_METHOD
from agree.core.model import AgreeError, CodingData
from agree.core.results import Note

Finish = Callable[[np.ndarray], np.ndarray]

_NORMAL = NormalDist()


def norm_cdf(x):
    """Standard normal distribution function Φ(x), elementwise (the standard library's, so
    the engine loads without scipy.stats)."""
    return np.vectorize(_NORMAL.cdf, otypes=[float])(x) if np.ndim(x) else _NORMAL.cdf(float(x))


def norm_ppf(p):
    """Standard normal quantile Φ⁻¹(p), elementwise; ±inf at 0 and 1."""
    def one(v: float) -> float:
        if v <= 0:
            return -math.inf
        if v >= 1:
            return math.inf
        return _NORMAL.inv_cdf(v)
    return np.vectorize(one, otypes=[float])(p) if np.ndim(p) else one(float(p))

# Largest number of (replicate x item) weights held in memory at once.
_CHUNK_CELLS = 4_000_000


def check_settings(*, n_resamples: Any = 0, confidence_level: Any = 0.95, minimum: Any = None,
                   ci_method: str = DEFAULT_CI_METHOD, seed: Any = None) -> None:
    """Raise AgreeError for settings out of range, with the codes every command uses: "boot"
    (`n_resamples` not a whole number >= 0), "ci" (`confidence_level` not strictly between 0
    and 1, or an unknown `ci_method`), "minimum" (not a number between -1 and 1), "seed"."""
    def number(x: Any) -> bool:
        return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, (bool, np.bool_))

    if not number(n_resamples) or int(n_resamples) != n_resamples or n_resamples < 0:
        raise AgreeError(f"the number of bootstrap replicates must be a whole number, 0 or more; "
                         f"got {n_resamples!r}", hint="use --boot 0 (n_resamples=0) for no bootstrap", code="boot")
    if not number(confidence_level) or not 0 < confidence_level < 1:
        raise AgreeError(f"the confidence level must be between 0 and 1; got {confidence_level!r}",
                         hint="e.g. --ci 0.95 (confidence_level=0.95), not 95", code="ci")
    if ci_method not in ("bca", "percentile"):
        raise AgreeError(f"the interval method must be 'bca' or 'percentile'; got '{ci_method}'", code="ci")
    if minimum is not None and (not number(minimum) or not -1 <= minimum <= 1):
        raise AgreeError(f"the minimum is a value of the coefficient, between -1 and 1; got {minimum!r}",
                         hint="e.g. --min 0.8 (minimum=0.8), not 80", code="minimum")
    if seed is not None and not isinstance(seed, (int, np.integer, np.random.Generator)):
        raise AgreeError(f"the seed must be a whole number; got {seed!r}", code="seed")


def bootstrap_replicates(features: np.ndarray, counts: np.ndarray, finish: Finish,
                         n_resamples: int, rng: np.random.Generator) -> np.ndarray:
    """θ* for `n_resamples` replicates: each draws sum(counts) items with replacement.

    `features` is (I, K): one row per distinct item (pattern or cluster); `counts` (I,) how
    often each item occurs. `finish` maps (b, K) sums to (b,) values, or to (b, k) when it
    computes several statistics from the same resamples. Returns (B,) or (B, k) replicate
    values (NaN where undefined).
    """
    counts = np.asarray(counts, dtype=np.int64)
    total = int(counts.sum())
    probs = counts / total
    chunk = max(1, min(n_resamples, _CHUNK_CELLS // max(len(counts), features.shape[1], 1)))
    parts = []
    done = 0
    while done < n_resamples:
        b = min(chunk, n_resamples - done)
        weights = rng.multinomial(total, probs, size=b).astype(float)
        parts.append(finish(weights @ features))
        done += b
    return np.concatenate(parts, axis=0)


def jackknife_values(features: np.ndarray, counts: np.ndarray, finish: Finish) -> np.ndarray:
    """θ with one item removed, for each distinct item (weight them by `counts`)."""
    total = np.asarray(counts, float) @ features
    return finish(total[None, :] - features)


@dataclass(frozen=True)
class Interval:
    low: float
    high: float
    lower_bound: float       # one-sided lower bound at the same confidence level
    method: str
    se: float
    p_below_min: float | None
    n_undefined: int
    notes: tuple[Note, ...]


def bootstrap_interval(estimate: float, replicates: np.ndarray, *, confidence_level: float,
                       method: str, jack: np.ndarray | None = None, jack_weights: np.ndarray | None = None,
                       minimum: float | None = None) -> Interval:
    """Percentile or BCa interval from bootstrap replicates (METHODS 7.2).

    Undefined replicates are left out and counted. For BCa the bias correction counts ties
    with the estimate as one half, and the acceleration comes from the jackknife values.
    Falls back to the percentile interval, with a note, when BCa cannot be formed.
    """
    notes: list[Note] = []
    defined = replicates[np.isfinite(replicates)]
    n_undefined = int(len(replicates) - len(defined))
    if n_undefined > 0.01 * len(replicates):
        notes.append(Note("undefined-replicates",
                          f"{n_undefined} of {len(replicates)} bootstrap replicates were undefined and "
                          "left out; the interval is conditional on a defined coefficient and may be unstable."))
    if len(defined) < 2 or not np.isfinite(estimate):
        nan = float("nan")
        return Interval(nan, nan, nan, method, nan, None, n_undefined, tuple(notes))
    eps = 1.0 - confidence_level
    probs = np.array([eps / 2, 1 - eps / 2, eps])
    used = method
    if method == "bca":
        below = np.mean(defined < estimate) + 0.5 * np.mean(defined == estimate)
        z0 = norm_ppf(below)
        accel = _acceleration(jack, jack_weights)
        if not np.isfinite(z0) or accel is None:
            used = "percentile"
            if np.ptp(defined) > 0:
                notes.append(Note("bca-fallback", "The BCa interval could not be formed (bias correction "
                                  "or acceleration undefined); the percentile interval is shown instead."))
        else:
            zq = norm_ppf(probs)
            probs = norm_cdf(z0 + (z0 + zq) / (1 - accel * (z0 + zq)))
    elif method != "percentile":
        raise ValueError(f"unknown interval method {method!r}")
    low, high, lower = np.quantile(defined, probs)
    if np.ptp(defined) == 0 and defined[0] == 1.0:
        notes.append(Note("no-disagreement", "Every replicate equals 1: there is no disagreement in these "
                          "units, so the interval is not informative about the coders' reliability."))
    elif np.ptp(defined) == 0:
        notes.append(Note("constant-replicates", "Every bootstrap replicate gives the same value (too few distinct "
                          "units to resample), so the interval has no width and says nothing about uncertainty."))
    if len(replicates) < 200:
        notes.append(Note("few-replicates", f"Only {len(replicates)} bootstrap replicates: intervals and shares "
                          "below the minimum are rough; use 2,000 or more (5,000+ for BCa)."))
    p_below = None if minimum is None else float(np.mean(defined < minimum))
    return Interval(float(low), float(high), float(lower), used, float(np.std(defined, ddof=1)),
                    p_below, n_undefined, tuple(notes))


def _acceleration(jack: np.ndarray | None, weights: np.ndarray | None) -> float | None:
    if jack is None:
        return None
    ok = np.isfinite(jack)
    if not ok.any():
        return None
    values = jack[ok]
    w = np.ones_like(values) if weights is None else np.asarray(weights, float)[ok]
    mean = np.sum(w * values) / np.sum(w)
    d = mean - values
    denom = np.sum(w * d ** 2)
    if denom <= 0:
        return None
    return float(np.sum(w * d ** 3) / (6.0 * denom ** 1.5))


def resolve_clusters(data: CodingData, cluster: Any) -> tuple[np.ndarray | None, str | None]:
    """Per-unit group labels for a cluster bootstrap and the name to report: from the name of a
    kept per-unit column (the column's name), or from one label per unit ("cluster"); (None,
    None) when units are resampled one by one. AgreeError (code "cluster") for an unknown
    column, labels of the wrong length, or missing labels."""
    if cluster is None:
        return None, None
    if isinstance(cluster, str):
        if cluster not in data.columns:
            known = ", ".join(data.columns) or "none"
            raise AgreeError(f"no column '{cluster}' to resample clusters by (columns kept: {known})",
                             hint="name the column with --cluster when reading the data", code="cluster")
        return np.asarray(data.columns[cluster]), cluster
    labels = np.asarray(cluster)
    if labels.ndim != 1 or len(labels) != data.n_units:
        raise AgreeError(f"cluster labels: one per unit is needed ({data.n_units}); got an array of shape "
                         f"{labels.shape}", code="cluster")
    if pd.isna(labels).any():
        raise AgreeError("cluster labels: every unit needs a group; some labels are missing", code="cluster")
    return labels, "cluster"
