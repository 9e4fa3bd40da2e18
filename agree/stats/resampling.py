"""Intervals, one-sided lower bounds and the p-value against a minimum: one function for every
coefficient, diagnostic and simulated study (`resample`).

Every coefficient in `agree` is a function of sums over units of per-unit feature vectors
(the coincidence matrix, the coders' margins, the within-unit agreement, ...). Units with
the same pattern of values have the same features, so a statistic is ``finish(counts @ F)``
where F holds one row of features per pattern (or per cluster) and `counts` how often each
occurs. Resampling only changes the weights given to the rows of F.

Methods (``method=``):

"pseudo-unit" (the default)
    Rubin's (1981) Bayesian bootstrap with one pseudo-unit added: the weights of the N units
    and of one extra unit are Dirichlet(1, ..., 1, 1) (over patterns: Dirichlet(c_1, ..., c_P, 1)),
    and the extra unit is the *least favourable* possible unit, the one whose addition lowers
    the statistic most (found among every unit the design allows, `PseudoUnits`). A draw is
    ``finish(N (w @ F + w_0 f*))``. The one-sided lower bound is the ε-quantile of the draws
    (ε = 1 - confidence level); the two-sided interval runs from their ε/2-quantile to the
    1 - ε/2 quantile of the draws made with the *most* favourable unit instead (the same
    Dirichlet weights). For the mean of a bounded variable this is the bound of Gaffke (2005)
    and Learned-Miller & Thomas (2019) (a pseudo-observation at the end of the support), the
    posterior of a Dirichlet process whose prior mass 1 sits on that unit (Ferguson 1973); for a
    0/1 per-unit statistic (d of N units disagreeing) its bound is the Clopper-Pearson (1934)
    bound exactly. With no disagreement in the data every ordinary resample is identical (the
    percentile and BCa intervals are [1, 1]); this bound then rests on the number of units.
    For ratios such as alpha and kappa the coverage rests on simulation (README, "How the
    bound is made"): the one-sided 95% bound held its level in every cell of a grid of 2-4
    coders, 2-8 categories, alpha .7-.97 and 20-500 units, where BCa fell short in 181 of 450.
"bca", "percentile"
    The unit bootstrap (multinomial over patterns, METHODS 7.5) with BCa or percentile
    intervals (METHODS 7.2). Kept as named options for comparison; they fall short of their
    level with few disagreeing units.

The p-value against a minimum (``p_value_min``) is read off the same draws as the bound: the
level at which the one-sided bound equals the minimum. For "pseudo-unit" it is the share of
draws at or below the minimum (the posterior probability P(θ ≤ minimum)); for "percentile"
the same share of the replicates; for "bca" the inversion of the BCa level mapping. So the
bound clears the minimum (is strictly above it, `agree.core.results.reaches_minimum`)
exactly when ``p_value_min < 1 - confidence_level``.

References
----------
Rubin, D. B. (1981). The Bayesian bootstrap. The Annals of Statistics, 9(1), 130-134.
Ferguson, T. S. (1973). A Bayesian analysis of some nonparametric problems. The Annals of
    Statistics, 1(2), 209-230.
Gaffke, N. (2005). Three test statistics for a nonparametric one-sided hypothesis on the mean
    of a nonnegative variable. Mathematical Methods of Statistics, 14(4), 451-467.
Learned-Miller, E., & Thomas, P. S. (2019). A new confidence interval for the mean of a bounded
    random variable. arXiv:1905.06208.
Clopper, C. J., & Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated in
    the case of the binomial. Biometrika, 26(4), 404-413.
Efron, B. (1987). Better bootstrap confidence intervals. JASA, 82(397), 171-185.
Efron, B., & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall.
DiCiccio, T. J., & Efron, B. (1996). Bootstrap confidence intervals. Statistical Science, 11(3).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any, Callable

import numpy as np
import pandas as pd

from agree.core.constants import CI_METHODS, DEFAULT_CI_METHOD
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


# Largest number of (replicate x data set x item) weights held in memory at once.
_CHUNK_CELLS = 4_000_000
# Candidate units tried one by one at most; beyond, the pseudo-unit is built greedily.
CANDIDATE_LIMIT = 20_000


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
    if ci_method not in CI_METHODS:
        raise AgreeError(f"the interval method must be one of {', '.join(repr(m) for m in CI_METHODS)}; "
                         f"got '{ci_method}'", code="ci")
    if minimum is not None and (not number(minimum) or not -1 <= minimum <= 1):
        raise AgreeError(f"the minimum is a value of the coefficient, between -1 and 1; got {minimum!r}",
                         hint="e.g. --min 0.8 (minimum=0.8), not 80", code="minimum")
    if seed is not None and not isinstance(seed, (int, np.integer, np.random.Generator)):
        raise AgreeError(f"the seed must be a whole number; got {seed!r}", code="seed")


# ----------------------------------------------------------------------------------------
# quantiles of draws (axis 0), vectorised over every other axis


def _sorted_draws(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Draws sorted along axis 0 (NaN last) and the number of defined draws per column."""
    return np.sort(values, axis=0), np.sum(~np.isnan(values), axis=0)


def _quantile(ordered: np.ndarray, defined: np.ndarray, prob) -> np.ndarray:
    """np.quantile(column without NaN, prob) for every column of sorted draws (numpy's linear
    method, computed the same way, so a single column gives the same number); NaN where a
    column has no defined draw. `prob` is a number or an array shaped like `defined`."""
    prob = np.broadcast_to(np.asarray(prob, dtype=float), defined.shape)
    last = np.maximum(defined - 1, 0)
    h = prob * last
    lo = np.clip(np.floor(h), 0, last).astype(np.int64)
    hi = np.minimum(lo + 1, last)
    t = h - lo
    a = np.take_along_axis(ordered, lo[None], axis=0)[0]
    b = np.take_along_axis(ordered, hi[None], axis=0)[0]
    diff = b - a
    out = np.where(t >= 0.5, b - diff * (1 - t), a + diff * t)
    return np.where(defined > 0, out, np.nan)


def _level(ordered: np.ndarray, defined: np.ndarray, x: float) -> np.ndarray:
    """The inverse of `_quantile`: for each column the largest p in [0, 1] whose quantile is at
    most `x` (0 when every defined draw is above `x`, 1 when none is; NaN with no defined draw).
    So ``_quantile(p) > x`` exactly when ``p > _level(x)``; for draws without ties at `x` it is
    the share of draws at or below `x`, up to the interpolation between neighbouring draws."""
    k = np.sum(ordered <= x, axis=0)                      # NaN compares False
    n = defined
    last = np.maximum(n - 1, 1)
    below = np.take_along_axis(ordered, np.clip(k - 1, 0, None)[None], axis=0)[0]
    above = np.take_along_axis(ordered, np.minimum(k, np.maximum(n - 1, 0))[None], axis=0)[0]
    with np.errstate(invalid="ignore", divide="ignore"):
        step = np.where(above > below, (x - below) / (above - below), 0.0)
    inner = ((k - 1) + step) / last
    out = np.where(k <= 0, 0.0, np.where(k >= n, 1.0, inner))
    return np.where(n > 0, out, np.nan)


# ----------------------------------------------------------------------------------------
# the least and most favourable pseudo-unit


@dataclass(frozen=True)
class PseudoUnits:
    """The units a pseudo-unit may be, and how to turn them into features.

    features : maps code rows (C, width) of value indices (-1 = not coded) to (C, K) features,
        the same features the statistic's rows have (`_Statistic.features`).
    n_values : V, the values a coder may give (codebook categories, or the distinct sets).
    width : values per unit at most (the coders).
    ordered : rows are tuples coder -> value (Cohen, Conger, leave-one-coder-out); else
        multisets of 1..width values (sorted rows, missing first).
    scale : the pseudo-unit stands for this many units (a pseudo-cluster: the mean number of
        units per cluster, when whole clusters are resampled).
    fixed : (C, K) features of the candidates given directly (then `features` and the rows are
        not used; `rows` may still name them for the record).
    rows : (C, width) the rows behind `fixed`, for the record.

    Every candidate is tried when there are at most `CANDIDATE_LIMIT`; otherwise the unit is
    built greedily (a value at a time for multisets; coder by coder, sweeping until nothing
    changes, for tuples) and the result records that the search was greedy.
    """

    features: Callable[[np.ndarray], np.ndarray] | None
    n_values: int
    width: int
    ordered: bool = False
    scale: float = 1.0
    fixed: np.ndarray | None = None
    rows: np.ndarray | None = None

    def n_candidates(self) -> int:
        if self.fixed is not None:
            return len(self.fixed)
        V, m = self.n_values, self.width
        if self.ordered:
            return V ** m
        return sum(math.comb(V + s - 1, s) for s in range(1, m + 1))

    @property
    def exhaustive(self) -> bool:
        return self.fixed is not None or self.n_candidates() <= CANDIDATE_LIMIT

    def candidate_rows(self) -> np.ndarray:
        """(C, width) every candidate unit (only when `exhaustive`)."""
        if self.fixed is not None:
            return self.rows if self.rows is not None else np.zeros((len(self.fixed), 0), np.int32)
        V, m = self.n_values, self.width
        if self.ordered:
            return np.array(list(itertools.product(range(V), repeat=m)), dtype=np.int32).reshape(-1, m)
        rows = [(-1,) * (m - s) + combo for s in range(1, m + 1)
                for combo in itertools.combinations_with_replacement(range(V), s)]  # candidates, not units
        return np.array(rows, dtype=np.int32).reshape(-1, m)


def _finish_k(finish: Finish) -> Callable[[np.ndarray], np.ndarray]:
    """finish for (..., K) sums returning (..., k): the statistics' values as a trailing axis."""
    def f(S: np.ndarray) -> np.ndarray:
        S = np.asarray(S, dtype=float)
        out = np.asarray(finish(S.reshape(-1, S.shape[-1])), dtype=float)
        return out.reshape(S.shape[:-1] + (-1,))
    return f


def _search(S: np.ndarray, fk, space: PseudoUnits, worst: bool) -> tuple[np.ndarray, np.ndarray]:
    """The pseudo-unit for each data set and statistic: rows (r, k, width) and features (r, k, K).

    `worst` looks for the unit that lowers each statistic most (NaN counts as +inf), else for the
    one that raises it most (NaN as -inf). S (r, K) are the data sets' sums."""
    sign = 1.0 if worst else -1.0
    r = S.shape[0]
    if space.exhaustive:
        rows = space.candidate_rows()
        F = space.fixed if space.fixed is not None else np.asarray(space.features(rows), dtype=float)
        Fs = space.scale * F
        C = len(F)
        step = max(1, _CHUNK_CELLS // max(1, C * S.shape[1]))
        picks = []
        for s0 in range(0, r, step):  # chunks of data sets
            vals = fk(S[s0:s0 + step, None, :] + Fs[None, :, :])            # (r', C, k)
            vals = np.where(np.isnan(vals), np.inf, sign * vals)
            picks.append(np.argmin(vals, axis=1))                           # (r', k)
        pick = np.concatenate(picks, axis=0)
        return rows[pick], Fs[pick]
    return _greedy(S, fk, space, sign)


def _greedy(S: np.ndarray, fk, space: PseudoUnits, sign: float) -> tuple[np.ndarray, np.ndarray]:
    """Greedy search for spaces too large to try every unit (see `PseudoUnits`), for each data
    set and statistic at once. Multisets: add the value that lowers the statistic most, one at a
    time up to `width` values, keeping the best unit met; then exchange one value (or drop or add
    one) while that helps. Tuples: from each unit where every coder gives the same value, change
    one coder at a time while that helps; then two coders at once while that helps."""
    V, m = space.n_values, space.width
    r = S.shape[0]
    jj = np.arange(fk(S[:1]).shape[-1])

    def value_of(rows: np.ndarray) -> np.ndarray:
        """(r, k, n) statistic j of each data set with each of n candidate rows (r, k, n, m)."""
        F = space.scale * np.asarray(space.features(rows.reshape(-1, m)), dtype=float)
        vals = fk(S[:, None, None, :] + F.reshape(rows.shape[:3] + (-1,)))
        vals = np.take_along_axis(vals, jj[None, :, None, None], axis=3)[..., 0]
        return np.where(np.isnan(vals), np.inf, sign * vals)

    def best_of(trial: np.ndarray, rows: np.ndarray, val: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
        """Replace rows (r, k, m) by the best of the trial rows (r, k, n, m) where it is better."""
        vals = value_of(trial)
        choice = np.argmin(vals, axis=2)
        new_val = np.take_along_axis(vals, choice[:, :, None], axis=2)[..., 0]
        better = new_val < val - 1e-15
        rows = np.where(better[..., None], np.take_along_axis(trial, choice[:, :, None, None], axis=2)[:, :, 0, :],
                        rows)
        return rows, np.where(better, new_val, val), bool(better.any())

    def repeat(rows: np.ndarray, n: int) -> np.ndarray:
        return np.repeat(rows[:, :, None, :], n, axis=2)

    best_rows = np.full((r, len(jj), m), -1, np.int32)
    best_val = np.full((r, len(jj)), np.inf)
    if space.ordered:
        for v in range(V):  # a start per value: every coder gives it
            rows = np.full_like(best_rows, v)
            val = np.full_like(best_val, np.inf)
            for _ in range(5):  # sweeps over the coders until nothing changes
                changed = False
                for c in range(m):
                    trial = repeat(rows, V)
                    trial[:, :, :, c] = np.arange(V)
                    rows, val, moved = best_of(trial, rows, val)
                    changed |= moved
                if not changed:
                    break
            best_rows, best_val, _ = best_of(rows[:, :, None, :], best_rows, best_val)
        pairs = np.array(list(itertools.product(range(V), repeat=2)), np.int32)
        moves = [((c1, c2), pairs) for c1, c2 in itertools.combinations(range(m), 2)]
    else:
        rows = best_rows.copy()
        for _ in range(m):  # add one value at a time; rows keep missing first, values last
            trial = repeat(rows, V)
            trial[:, :, :, :m - 1] = trial[:, :, :, 1:]
            trial[:, :, :, m - 1] = np.arange(V)
            rows, _, _ = best_of(np.sort(trial, axis=3), rows, np.full_like(best_val, np.inf))
            best_rows, best_val, _ = best_of(rows[:, :, None, :], best_rows, best_val)
        moves = [((c,), np.arange(-1, V)[:, None]) for c in range(m)]
    for _ in range(10):  # then change one value (tuples: two) while that helps
        changed = False
        for where, options in moves:
            trial = repeat(best_rows, len(options))
            for i, c in enumerate(where):
                trial[:, :, :, c] = options[:, i]
            if not space.ordered:
                trial = np.sort(trial, axis=3)
            best_rows, best_val, moved = best_of(trial, best_rows, best_val)
            changed |= moved
        if not changed:
            break
    F = space.scale * np.asarray(space.features(best_rows.reshape(-1, m)), dtype=float)
    return best_rows, F.reshape(r, len(jj), -1)


# ----------------------------------------------------------------------------------------
# the one function


@dataclass(frozen=True)
class Bounds:
    """Intervals of k statistics on R data sets by one method (arrays (R, k)).

    low, high : the two-sided interval at the confidence level.
    lower : the one-sided lower bound at the same level (it decides against a minimum).
    p_value_min : the level at which `lower` equals the minimum (NaN without one): the bound
        clears the minimum exactly when this is below 1 - confidence level.
    se : SD of the draws the bound is made from.
    n_undefined : draws where the statistic was undefined (left out).
    fallback : BCa could not be formed; the percentile interval is given there.
    constant : every defined draw was the same.
    pseudo_unit : (R, k, width) rows of the least favourable unit ("pseudo-unit"; else None).
    greedy : the pseudo-unit was built greedily (too many units to try them all).
    replicates : (B, R, k) the draws the bound is made from (when asked for).
    """

    method: str
    estimate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    lower: np.ndarray
    p_value_min: np.ndarray
    se: np.ndarray
    n_undefined: np.ndarray
    fallback: np.ndarray
    constant: np.ndarray
    n_resamples: int
    pseudo_unit: np.ndarray | None = None
    greedy: bool = False
    replicates: np.ndarray | None = None


def resample(features: np.ndarray, counts: np.ndarray, finish: Finish, *, method: str, n_resamples: int,
             confidence_level: float, rng: np.random.Generator, minimum: float | None = None,
             pseudo: PseudoUnits | None = None, keep_replicates: bool = False, two_sided: bool = True) -> Bounds:
    """Intervals, one-sided lower bounds and p-values against `minimum` for R data sets.

    Parameters
    ----------
    features : (I, K) one row per distinct item (pattern, or cluster).
    counts : (I,) how often each item occurs in one data set, or (R, I) for R data sets over the
        same items (simulated studies).
    finish : maps (n, K) sums to (n,) values, or to (n, k) for k statistics from the same draws.
    method : "pseudo-unit", "bca" or "percentile" (module notes).
    pseudo : where the pseudo-unit is searched ("pseudo-unit" needs it).
    keep_replicates : keep the draws in the result.
    two_sided : also make the two-sided interval's upper end (the planner needs only the bound;
        for "pseudo-unit" this saves the draws with the most favourable unit).

    Returns
    -------
    Bounds, arrays (R, k) (R = 1 for one data set).

    Notes
    -----
    "pseudo-unit": per data set with sums S = c @ F and n = Σ c items, f* = the candidate f
    minimising finish(S + f) (f** maximising it); B draws g_i ~ Gamma(c_i), g_0 ~ Exp(1),
    T = Σ g_i + g_0, base = n (g @ F) / T, θ*_lo = finish(base + n g_0 / T · f*) and θ*_hi the same
    with f**. Then lower = Q_lo(ε), low = Q_lo(ε/2), high = Q_hi(1 - ε/2), p_value_min = the level
    of the minimum among θ*_lo, se = SD(θ*_lo). Weights sum to n, so a draw sees as many units
    (or clusters) as the data. Cost: B x items gamma draws and one product, no jackknife.

    "bca"/"percentile": B multinomial resamples of the items (METHODS 7.5, 7.2); for BCa the bias
    correction counts ties with the estimate as one half and the acceleration comes from the
    weighted jackknife over items; where it cannot be formed the percentile interval is used.
    """
    if method not in CI_METHODS:
        raise ValueError(f"unknown interval method {method!r}")
    features = np.asarray(features, dtype=float)
    counts = np.asarray(counts)
    single = counts.ndim == 1
    counts2 = counts[None, :] if single else counts
    R, I = counts2.shape
    fk = _finish_k(finish)
    estimate = fk(counts2.astype(float) @ features)                          # (R, k)
    k = estimate.shape[1]
    eps = 1.0 - confidence_level
    B = int(n_resamples)
    nan = np.full((R, k), np.nan)
    out = {name: nan.copy() for name in ("low", "high", "lower", "p_value_min", "se")}
    n_undefined = np.zeros((R, k), np.int64)
    fallback = np.zeros((R, k), bool)
    constant = np.zeros((R, k), bool)
    width = pseudo.width if pseudo is not None else 0
    pseudo_rows = np.full((R, k, width), -1, np.int32) if method == "pseudo-unit" else None
    kept = np.full((B, R, k), np.nan) if keep_replicates else None
    if method == "pseudo-unit" and pseudo is None:
        raise ValueError("the pseudo-unit method needs the units a pseudo-unit may be (pseudo=)")
    active = np.flatnonzero(counts2.any(axis=0))
    A = max(len(active), 1)
    step = R if single else max(1, _CHUNK_CELLS // max(1, B * max(A, features.shape[1], k)))
    for s0 in range(0, R, step):  # chunks of data sets (one chunk for a single data set)
        s1 = min(R, s0 + step)
        c = counts2[s0:s1][:, active].astype(float)
        F = features[active]
        jack = None
        if method == "pseudo-unit":
            lo_draws, hi_draws, rows = _pseudo_unit_chunk(c, F, fk, pseudo, B, rng, two_sided)
            pseudo_rows[s0:s1] = rows
        else:
            lo_draws = hi_draws = _multinomial_chunk(c, F, fk, B, rng, single, counts2[s0:s1][:, active])
            if method == "bca":
                jack = fk((c @ F)[:, None, :] - F[None, :, :])                    # (r, A, k)
        part = _summarise(lo_draws, hi_draws, estimate[s0:s1], method=method, eps=eps, minimum=minimum,
                          jack=jack, jack_weights=c)
        for name in out:
            out[name][s0:s1] = part[name]
        n_undefined[s0:s1] = part["n_undefined"]
        fallback[s0:s1] = part["fallback"]
        constant[s0:s1] = part["constant"]
        if kept is not None:
            kept[:, s0:s1] = lo_draws
    return Bounds(method=method, estimate=estimate, low=out["low"], high=out["high"], lower=out["lower"],
                  p_value_min=out["p_value_min"], se=out["se"], n_undefined=n_undefined, fallback=fallback,
                  constant=constant, n_resamples=B, pseudo_unit=pseudo_rows,
                  greedy=bool(pseudo is not None and method == "pseudo-unit" and not pseudo.exhaustive),
                  replicates=kept)


def _summarise(lo_draws: np.ndarray, hi_draws: np.ndarray, est: np.ndarray, *, method: str, eps: float,
               minimum: float | None, jack: np.ndarray | None, jack_weights: np.ndarray | None) -> dict:
    """Interval, bound, p-value and SE of each column from draws (B, r, k): the bound side from
    `lo_draws`, the upper end of the two-sided interval from `hi_draws` (the same array except
    for "pseudo-unit"). For BCa, `jack` (r, J, k) are jackknife values with weights (r, J)."""
    B = lo_draws.shape[0]
    ordered, defined = _sorted_draws(lo_draws)
    first = ordered[0]
    top = np.take_along_axis(ordered, np.maximum(defined - 1, 0)[None], axis=0)[0]
    constant = (defined > 0) & (top == first)
    probs = np.array([eps / 2, 1 - eps / 2, eps])
    levels = np.broadcast_to(probs, est.shape + (3,))
    usable = np.zeros(est.shape, bool)
    if method == "bca" and jack is not None:
        z0, accel, usable = _bca_parts(lo_draws, est, jack, jack_weights)
        zq = norm_ppf(probs)
        with np.errstate(invalid="ignore", divide="ignore"):
            adj = norm_cdf(z0[..., None] + (z0[..., None] + zq) / (1 - accel[..., None] * (z0[..., None] + zq)))
        levels = np.where(usable[..., None], adj, probs)
    out = {"low": _quantile(ordered, defined, levels[..., 0]),
           "lower": _quantile(ordered, defined, levels[..., 2])}
    if hi_draws is lo_draws:
        out["high"] = _quantile(ordered, defined, levels[..., 1])
    else:
        out["high"] = _quantile(*_sorted_draws(hi_draws), levels[..., 1])
    p = np.full(est.shape, np.nan)
    if minimum is not None:
        p = _level(ordered, defined, float(minimum))
        if method == "bca":
            p = np.where(usable, _bca_tail(p, z0, accel), p)
        # the level and the bound are exact inverses; at a tie, rounding in the last bit must not
        # make them disagree, so the bound's side decides there
        clears = out["lower"] > minimum
        p = np.where(clears & (p >= eps), np.nextafter(eps, 0.0), np.where(~clears & (p < eps), eps, p))
    out["p_value_min"] = p
    with np.errstate(invalid="ignore", divide="ignore"):
        out["se"] = np.nanstd(lo_draws, axis=0, ddof=1) if B > 1 else np.full(est.shape, np.nan)
    undefined = ~np.isfinite(est) | (defined < 2)
    for name in list(out):
        out[name] = np.where(undefined, np.nan, out[name])
    out["n_undefined"] = B - defined
    out["fallback"] = (method == "bca") & ~usable & ~undefined & ~constant
    out["constant"] = constant
    return out


def _dirichlet_sums(c: np.ndarray, F: np.ndarray, B: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Bayesian-bootstrap sums (B, r, K) of the data's items and the pseudo-unit's weight (B, r, 1):
    weights Dirichlet(c_1, ..., c_A, 1), scaled so that they sum to the number of items n."""
    r, A = c.shape
    n = c.sum(axis=1)                                                         # (r,)
    g = rng.standard_gamma(np.broadcast_to(c, (B, r, A)))                     # Gamma(0) = 0
    g0 = rng.standard_exponential((B, r))
    total = g.sum(axis=2) + g0
    base = np.einsum("bra,ak->brk", g, F) * (n / total)[..., None]            # (B, r, K)
    return base, (n * g0 / total)[..., None]


def _pseudo_unit_chunk(c: np.ndarray, F: np.ndarray, fk, space: PseudoUnits, B: int,
                       rng: np.random.Generator, two_sided: bool = True) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Draws (B, r, k) with the least and (`two_sided`; else NaN) the most favourable pseudo-unit,
    and the rows (r, k, m) of the least favourable one, for r data sets with counts c (r, A) over
    item features F (A, K)."""
    S = c @ F
    rows_lo, f_lo = _search(S, fk, space, worst=True)                        # (r, k, K)
    f_hi = _search(S, fk, space, worst=False)[1] if two_sided else None
    base, extra = _dirichlet_sums(c, F, B, rng)
    B, r, k = base.shape[0], c.shape[0], f_lo.shape[1]
    lo = np.empty((B, r, k))
    hi = np.full((B, r, k), np.nan)
    for j in range(k):  # a loop over statistics, each with its own pseudo-unit
        lo[..., j] = fk(base + extra * f_lo[None, :, j, :])[..., j]
        if f_hi is not None:
            hi[..., j] = fk(base + extra * f_hi[None, :, j, :])[..., j]
    return lo, hi, rows_lo


def pseudo_unit_sums(features: np.ndarray, counts: np.ndarray, finish: Finish, pseudo: PseudoUnits,
                     n_draws: int, rng: np.random.Generator) -> np.ndarray:
    """(n_draws, K) feature sums of the draws the default bound of one data set is made from
    (Dirichlet weights on the items and on the least-favourable unit for `finish`), so that any
    other function of the same draws can be read off them: ``finish(sums)`` are the draws of the
    statistic; the planner reads the category shares of each draw from them as well."""
    features = np.asarray(features, dtype=float)
    c = np.asarray(counts, dtype=float)[None, :]
    fk = _finish_k(finish)
    _, f_lo = _search(c @ features, fk, pseudo, worst=True)
    base, extra = _dirichlet_sums(c, features, int(n_draws), rng)
    return (base + extra * f_lo[None, :, 0, :])[:, 0, :]


def _multinomial_chunk(c: np.ndarray, F: np.ndarray, fk, B: int, rng: np.random.Generator, single: bool,
                       counts: np.ndarray) -> np.ndarray:
    """Unit-bootstrap replicates (B, r, k): multinomial resamples of the items (METHODS 7.5)."""
    r, A = c.shape
    if single:
        return bootstrap_replicates(F, counts[0], fk, B, rng)[:, None, :].reshape(B, 1, -1)
    n = c.sum(axis=1).astype(np.int64)
    draws = np.empty((B, r, A))
    for size in np.unique(n):  # usually one size per batch of simulated studies
        rows = np.flatnonzero(n == size)
        draws[:, rows] = rng.multinomial(int(size), c[rows] / max(size, 1), size=(B, len(rows)))
    return fk(np.einsum("bra,ak->brk", draws, F))


def _bca_parts(reps: np.ndarray, est: np.ndarray, jack: np.ndarray, weights: np.ndarray):
    """BCa bias correction z0 (r, k), acceleration (r, k) and where both exist."""
    ok = ~np.isnan(reps)
    defined = ok.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        below = (np.sum(ok & (reps < est[None]), axis=0) + 0.5 * np.sum(ok & (reps == est[None]), axis=0)) \
            / np.maximum(defined, 1)
    z0 = norm_ppf(below)
    jok = np.isfinite(jack) & (weights[:, :, None] > 0)
    w = np.where(jok, weights[:, :, None], 0.0)
    v = np.where(jok, jack, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = (w * v).sum(axis=1) / w.sum(axis=1)
        d = np.where(jok, mean[:, None, :] - v, 0.0)
        denom = (w * d ** 2).sum(axis=1)
        accel = (w * d ** 3).sum(axis=1) / (6.0 * denom ** 1.5)
    usable = np.isfinite(z0) & (denom > 0) & jok.any(axis=1) & np.isfinite(accel)
    return np.where(usable, z0, 0.0), np.where(usable, accel, 0.0), usable


def _bca_tail(level: np.ndarray, z0: np.ndarray, accel: np.ndarray) -> np.ndarray:
    """The one-sided error rate at which the BCa lower bound equals the minimum, from the level
    of the minimum among the replicates (the inverse of the BCa level mapping)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        y = norm_ppf(level) - z0
        z = y / (1 + accel * y) - z0
        tail = norm_cdf(np.where(np.isfinite(z), z, 0.0))
        tail = np.where(np.isfinite(z), tail, np.where(z > 0, 1.0, 0.0))
        # beyond 1 + a y = 0 the mapping folds back: the level is at its limit on that side
        # (a y is NaN where a = 0 and y is infinite: no fold there)
        tail = np.where(1 + accel * y <= 0, np.where(y > 0, 1.0, 0.0), tail)
    return np.where(level <= 0, 0.0, np.where(level >= 1, 1.0, tail))


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


# ----------------------------------------------------------------------------------------
# one statistic of one data set, with its notes


@dataclass(frozen=True)
class Interval:
    low: float
    high: float
    lower_bound: float       # one-sided lower bound at the same confidence level
    method: str
    se: float
    p_value_min: float | None
    n_undefined: int
    notes: tuple[Note, ...]
    pseudo_unit: tuple[int, ...] | None = None


def interval_of(bounds: Bounds, j: int = 0, *, row: int = 0, minimum: float | None = None,
                disagreeing: float | None = None, n_items: float | None = None,
                item: str = "unit") -> Interval:
    """Statistic `j` of data set `row` of `bounds` as an `Interval`, with the notes a reader needs:
    undefined draws, BCa fallback, no (or few) disagreeing units, constant draws, few draws.

    `disagreeing` (units whose values are not all alike) and `n_items` (units, or clusters) are
    only used for the wording of the notes."""
    notes: list[Note] = []
    B = bounds.n_resamples
    undefined = int(bounds.n_undefined[row, j])
    if undefined > 0.01 * B:
        notes.append(Note("undefined-replicates",
                          f"{undefined} of {B} resamples were undefined and left out; the interval is "
                          "conditional on a defined coefficient and may be unstable."))
    method = bounds.method
    if bounds.fallback[row, j]:
        method = "percentile"
        notes.append(Note("bca-fallback", "The BCa interval could not be formed (bias correction "
                          "or acceleration undefined); the percentile interval is shown instead."))
    low, high, lower = (float(bounds.low[row, j]), float(bounds.high[row, j]), float(bounds.lower[row, j]))
    estimate = float(bounds.estimate[row, j])
    pseudo = None
    if bounds.method == "pseudo-unit" and bounds.pseudo_unit is not None:
        pseudo = tuple(int(v) for v in bounds.pseudo_unit[row, j])
    constant = bool(bounds.constant[row, j])
    if math.isfinite(lower):
        if bounds.method == "pseudo-unit" and disagreeing == 0:
            notes.append(Note("no-disagreement", f"No disagreement among the {_count(n_items)} {item}s: every "
                              "resample of them would give the same value, so the interval rests on their "
                              "number (through the least-favourable pseudo-unit; for the share of disagreeing "
                              f"{item}s this is the Clopper–Pearson bound)."))
        elif bounds.method != "pseudo-unit" and (disagreeing == 0 or (constant and estimate == 1.0)):
            notes.append(Note("no-disagreement", "Every replicate equals 1: there is no disagreement in these "
                              f"{item}s, so this interval is not informative about the coders' reliability "
                              "(the default pseudo-unit method bounds it by their number)."))
        elif disagreeing is not None and 0 < disagreeing < 5:
            notes.append(Note("few-disagreements", f"Only {_count(disagreeing)} of {_count(n_items)} {item}s "
                              "show any disagreement: the interval rests mainly on their number."))
        elif constant and bounds.method != "pseudo-unit":
            notes.append(Note("constant-replicates", "Every bootstrap replicate gives the same value (too few "
                              "distinct units to resample), so the interval has no width and says nothing "
                              "about uncertainty."))
    if bounds.greedy:
        notes.append(Note("pseudo-unit-greedy", "There were too many possible units to try each as the "
                          "least-favourable pseudo-unit; it was built greedily, one value at a time."))
    if B < 200:
        notes.append(Note("few-replicates", f"Only {B} resamples: intervals and p-values against the minimum "
                          "are rough; use 2,000 or more."))
    p = None
    if minimum is not None:
        v = float(bounds.p_value_min[row, j])
        p = v if math.isfinite(v) else None
    return Interval(low, high, lower, method, float(bounds.se[row, j]), p, undefined, tuple(notes), pseudo)


def _count(x: float | None) -> str:
    if x is None:
        return "–"
    return f"{int(round(float(x))):,}" if float(x).is_integer() else f"{float(x):,.1f}"


def bootstrap_interval(estimate: float, replicates: np.ndarray, *, confidence_level: float,
                       method: str, jack: np.ndarray | None = None, jack_weights: np.ndarray | None = None,
                       minimum: float | None = None) -> Interval:
    """Percentile or BCa interval from given bootstrap replicates (for statistics that are not
    ``finish(counts @ F)``, such as unitizing alpha, whose resamples are drawn elsewhere): the
    same quantiles, BCa formulas, p-value against the minimum and notes as `resample`."""
    if method not in ("bca", "percentile"):
        raise ValueError(f"bootstrap_interval makes BCa or percentile intervals, not {method!r}")
    reps = np.asarray(replicates, dtype=float).reshape(-1, 1, 1)
    est = np.array([[estimate]], dtype=float)
    jk = jw = None
    if method == "bca" and jack is not None:
        jk = np.asarray(jack, dtype=float).reshape(1, -1, 1)
        jw = (np.ones(jk.shape[1]) if jack_weights is None else np.asarray(jack_weights, float))[None, :]
    part = _summarise(reps, reps, est, method=method, eps=1.0 - confidence_level, minimum=minimum,
                      jack=jk, jack_weights=jw)
    if method == "bca" and jack is None:
        part["fallback"] = ~part["constant"] & np.isfinite(part["lower"])
    bounds = Bounds(method=method, estimate=est, low=part["low"], high=part["high"], lower=part["lower"],
                    p_value_min=part["p_value_min"], se=part["se"], n_undefined=part["n_undefined"],
                    fallback=part["fallback"], constant=part["constant"], n_resamples=len(reps))
    return interval_of(bounds, minimum=minimum)


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
