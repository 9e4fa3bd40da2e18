"""The bootstrap of a difference of α between two rounds, paired where the rounds share units.

When the same units (or, with a cluster column, the same groups) were coded in both rounds,
the two estimates are correlated: a hard unit is hard in both rounds. Resampling each round on
its own then ignores that correlation (for a positive one, the interval of the difference is
too wide; Efron & Tibshirani 1993, ch. 8, on paired against two-sample designs). Here the units
fall into three strata: coded in both rounds, in the first only, in the second only. Each
replicate draws, with replacement, as many shared units as there are (each drawn unit brings
its values in both rounds), and as many units of each round's own stratum as it holds. Both
rounds keep their sizes; with no shared unit this is the independent two-sample bootstrap,
and with only shared units it is the paired bootstrap. Every code is computed from the same
resamples as the overall α.

Units with the same features are resampled as one pattern with a count (METHODS 7.5), so the
cost does not grow with the number of units.

References
----------
Efron, B., & Tibshirani, R. J. (1993). An Introduction to the Bootstrap, ch. 8. Chapman & Hall.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from agree.core.model import CodingData
from agree.stats.kernels import alpha_features, alpha_finish, delta_for, presence
from agree.stats.patterns import cluster_sums, compress

# Largest number of (replicate x item) weights held in memory at once.
_CHUNK_CELLS = 4_000_000
_BINARY = delta_for("nominal", n_values=2)


@dataclass(frozen=True)
class RoundItems:
    """What one round brings to the resampling of differences.

    `features` holds one row per item (a unit, or a group when groups are resampled), `keys`
    the unit id or group label of each row, `counts` how many units a row stands for (weighted
    data). `finish` maps summed features (B, K) to (B, 1 + C): α over all codes, then
    presence/absence α of each of the C codes compared (NaN for a code the round lacks)."""

    keys: np.ndarray
    features: np.ndarray
    counts: np.ndarray
    finish: Callable[[np.ndarray], np.ndarray]
    groups: bool

    @property
    def unique_keys(self) -> bool:
        return len(np.unique(self.keys)) == len(self.keys)


def round_items(data: CodingData, codes: Sequence[str], delta: np.ndarray | None,
                clusters: np.ndarray | None = None) -> RoundItems:
    """The items of one round: per unit (or per group of `clusters`), the features of the overall
    α with distance `delta` (None: ordinal) and of each code's presence/absence α."""
    V = len(data.values)
    pat = compress(data.codes, V, ordered=False, keep_inverse=True, weights=data.weights)
    overall = alpha_features(pat.value_counts(), delta, codes=pat.codes)
    width = overall.shape[1]
    x = presence(data)                                        # (N, m, C)
    r = x.sum(axis=1)
    m_u = data.observed.sum(axis=1).astype(float)
    position = {str(c): k for k, c in enumerate(data.categories)}
    per_code = []
    for code in codes:  # a loop over codes, not units
        k = position.get(code)
        if k is None:
            per_code.append(np.zeros((len(m_u), _BINARY.shape[0] + 1)))
        else:
            per_code.append(alpha_features(np.column_stack([m_u - r[:, k], r[:, k]]), _BINARY))
    features = np.hstack([overall[pat.inverse]] + per_code)
    n_codes = len(codes)

    def finish(sums: np.ndarray) -> np.ndarray:
        first = alpha_finish(sums[:, :width], delta)
        if not n_codes:
            return first[:, None]
        rest = alpha_finish(sums[:, width:].reshape(len(sums), n_codes, -1), _BINARY)
        return np.column_stack([first, rest])

    weights = np.ones(len(features)) if data.weights is None else np.asarray(data.weights, float)
    if clusters is None:
        return RoundItems(np.asarray(data.unit_ids).astype(str), features, weights, finish, False)
    sums, n_groups = cluster_sums(features, np.arange(len(features)), clusters, weights)
    labels = np.unique(np.asarray(clusters).astype(str))
    return RoundItems(labels, sums, np.ones(n_groups), finish, True)


def shared_items(first: RoundItems, second: RoundItems) -> tuple[np.ndarray, np.ndarray]:
    """Row indices of the items (unit ids or group labels) present in both rounds, aligned.
    Empty when either round repeats a key or stands for weighted rows (pairing is then not
    defined)."""
    empty = np.zeros(0, dtype=np.int64)
    if not (first.unique_keys and second.unique_keys):
        return empty, empty
    if not first.groups and ((first.counts != 1).any() or (second.counts != 1).any()):
        return empty, empty
    _, ia, ib = np.intersect1d(first.keys, second.keys, assume_unique=True, return_indices=True)
    return ia.astype(np.int64), ib.astype(np.int64)


def _patterns(features: np.ndarray, counts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct rows of `features` and how many units each stands for."""
    if len(features) == 0:
        return features, np.zeros(0)
    rows, inverse = np.unique(features, axis=0, return_inverse=True)
    return rows, np.bincount(inverse.ravel(), weights=counts, minlength=len(rows))


def _draw(rng: np.random.Generator, rows: np.ndarray, counts: np.ndarray, b: int) -> np.ndarray | None:
    """Summed features of `b` resamples of a stratum (its size kept), or None when empty."""
    total = int(round(counts.sum()))
    if total == 0:
        return None
    weights = rng.multinomial(total, counts / counts.sum(), size=b).astype(float)
    return weights @ rows


def difference_replicates(first: RoundItems, second: RoundItems, n_resamples: int, rng: np.random.Generator,
                          *, paired: bool = True) -> tuple[np.ndarray, np.ndarray, int]:
    """Bootstrap values (B, 1 + C) of both rounds from the same resamples, and the number of
    shared items resampled jointly (0 when `paired` is False or nothing is shared)."""
    ia, ib = shared_items(first, second) if paired else (np.zeros(0, np.int64), np.zeros(0, np.int64))
    only_a = np.setdiff1d(np.arange(len(first.keys)), ia)
    only_b = np.setdiff1d(np.arange(len(second.keys)), ib)
    ka = first.features.shape[1]
    joint, joint_counts = _patterns(np.hstack([first.features[ia], second.features[ib]]), np.ones(len(ia)))
    own_a = _patterns(first.features[only_a], first.counts[only_a])
    own_b = _patterns(second.features[only_b], second.counts[only_b])
    widest = max(len(joint), len(own_a[0]), len(own_b[0]), ka, second.features.shape[1], 1)
    chunk = max(1, min(n_resamples, _CHUNK_CELLS // widest))
    va, vb = [], []
    done = 0
    while done < n_resamples:
        b = min(chunk, n_resamples - done)
        sa = np.zeros((b, ka))
        sb = np.zeros((b, second.features.shape[1]))
        both = _draw(rng, joint, joint_counts, b)
        if both is not None:
            sa += both[:, :ka]
            sb += both[:, ka:]
        for sums, (rows, counts) in ((sa, own_a), (sb, own_b)):
            drawn = _draw(rng, rows, counts, b)
            if drawn is not None:
                sums += drawn
        va.append(first.finish(sa))
        vb.append(second.finish(sb))
        done += b
    return np.concatenate(va), np.concatenate(vb), len(ia)


def difference_interval(from_replicates: np.ndarray, to_replicates: np.ndarray, *, estimate: float,
                        confidence_level: float) -> tuple[float | None, float | None, float | None]:
    """Percentile interval of to - from over replicates drawn together (paired or not), and
    the share of differences below 0. Replicates undefined in either round are left out."""
    diff = np.asarray(to_replicates, float) - np.asarray(from_replicates, float)
    diff = diff[np.isfinite(diff)]
    if len(diff) < 2 or not math.isfinite(estimate):
        return None, None, None
    eps = 1 - confidence_level
    low, high = np.quantile(diff, [eps / 2, 1 - eps / 2])
    return float(low), float(high), float(np.mean(diff < 0))

