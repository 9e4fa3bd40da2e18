"""Value patterns: compress units with the same values into one row with a count.

A coefficient that does not care which coder gave which value (alpha, Fleiss, AC1, ...)
depends on the data only through the counts of distinct unordered patterns (the multiset
of a unit's values). One that does (Cohen, Conger) needs ordered patterns (the tuple
coder -> value). A unit bootstrap replicate is then one multinomial draw over the pattern
counts (METHODS 7.5), at a cost independent of the number of units.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np

from agree.stats.kernels import value_counts


@dataclass(frozen=True)
class Patterns:
    """Distinct rows of a codes table.

    codes : (P, m) int32, -1 for missing (sorted within each row when unordered).
    counts : (P,) int64, how many units have each pattern (rows weighted by their multiplicity
        when the table was compressed with `weights`).
    inverse : (N,) int64 or None, the pattern of each unit (kept for cluster resampling).
    n_values : V, the number of distinct values codes refer to.
    """

    codes: np.ndarray
    counts: np.ndarray
    inverse: np.ndarray | None
    n_values: int

    @property
    def n_units(self) -> int:
        return int(self.counts.sum())

    def value_counts(self) -> np.ndarray:
        """(P, V) counts r_pv: how many coders gave value v in pattern p."""
        return value_counts(self.codes, self.n_values)

    def coder_onehot(self) -> np.ndarray:
        """(P, m, V) indicator x_pik: coder i gave value k in pattern p."""
        V = self.n_values
        return (self.codes[:, :, None] == np.arange(V)[None, None, :]).astype(float)


# Recently compressed read-only tables (CodingData.codes is read-only), so that scoring one data
# set with several coefficients compresses its units once per kind of pattern.
_RECENT: dict[tuple, tuple[weakref.ref, weakref.ref | None, Patterns]] = {}
_RECENT_SIZE = 4


def _frozen(a: np.ndarray | None) -> bool:
    return a is None or (not a.flags.writeable and a.base is None)


def compress(codes: np.ndarray, n_values: int, *, ordered: bool, keep_inverse: bool = False,
             weights: np.ndarray | None = None) -> Patterns:
    """Group the units of a (N, m) codes table into distinct patterns (see `_compress`);
    a read-only table compressed recently is not compressed again.

    `weights` (N,) are unit multiplicities (`CodingData.weights`): row u counts as
    `weights[u]` identical units, so the pattern counts are sums of weights and every
    statistic, bootstrap and jackknife made from them equals that of the expanded table."""
    codes = np.asarray(codes)
    if not (_frozen(codes) and _frozen(weights)):  # only arrays nobody can change are remembered
        return _compress(codes, n_values, ordered=ordered, keep_inverse=keep_inverse, weights=weights)
    key = (id(codes), n_values, ordered, keep_inverse, None if weights is None else id(weights))
    hit = _RECENT.get(key)
    if hit is not None and hit[0]() is codes and (weights is None or hit[1]() is weights):
        return hit[2]
    result = _compress(codes, n_values, ordered=ordered, keep_inverse=keep_inverse, weights=weights)
    if len(_RECENT) >= _RECENT_SIZE:
        _RECENT.pop(next(iter(_RECENT)))
    _RECENT[key] = (weakref.ref(codes), None if weights is None else weakref.ref(weights), result)
    return result


def _compress(codes: np.ndarray, n_values: int, *, ordered: bool, keep_inverse: bool = False,
              weights: np.ndarray | None = None) -> Patterns:
    """Group the units of a (N, m) codes table into distinct patterns.

    Each row is encoded as one integer in base V + 1 (missing = 0) when that fits in
    63 bits, and counted with `bincount` when the key space is small; otherwise rows are
    grouped with ``np.unique``. Unordered patterns are made from the ordered ones (sorting
    the few distinct rows instead of every unit's row). With `weights` the counts are sums
    of row weights (exact in float64 up to 2**53 units).
    """
    codes = np.asarray(codes)
    N, m = codes.shape
    if N == 0:
        return Patterns(np.zeros((0, m), np.int32), np.zeros(0, np.int64),
                        np.zeros(0, np.int64) if keep_inverse else None, n_values)
    if weights is not None:
        weights = np.asarray(weights, dtype=float)
    exact = _group_rows(codes, n_values, keep_inverse, weights=weights)
    if ordered:
        return exact
    rows = np.sort(exact.codes, axis=1)
    merged = _group_rows(rows, n_values, True, weights=exact.counts)
    inverse = None if exact.inverse is None else merged.inverse[exact.inverse]
    return Patterns(merged.codes, merged.counts, inverse, n_values)


def _group_rows(rows: np.ndarray, n_values: int, keep_inverse: bool,
                weights: np.ndarray | None = None) -> Patterns:
    """Distinct rows with their (weighted) counts."""
    N, m = rows.shape
    base = n_values + 1
    if m * np.log2(base) < 62:
        powers = base ** np.arange(m, dtype=np.int64)
        key = np.zeros(N, dtype=np.int64)
        for i in range(m):  # a loop over coders, not units
            key += (rows[:, i].astype(np.int64) + 1) * powers[i]
        space = int(base ** m)
        if space <= max(4 * N, 1 << 16) and not keep_inverse:
            counts_all = np.bincount(key, weights=weights, minlength=space)
            keys = np.flatnonzero(counts_all)
            counts = counts_all[keys]
            inverse = None
        else:
            keys, inverse = np.unique(key, return_inverse=True)
            counts = np.bincount(inverse, weights=weights, minlength=len(keys))
        digits = (keys[:, None] // powers[None, :]) % base
        pattern_codes = (digits - 1).astype(np.int32)
    else:
        pattern_codes, inverse = np.unique(rows, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        counts = np.bincount(inverse, weights=weights, minlength=len(pattern_codes))
        pattern_codes = pattern_codes.astype(np.int32)
    return Patterns(pattern_codes, np.rint(counts).astype(np.int64), inverse if keep_inverse else None, n_values)


def cluster_sums(features: np.ndarray, inverse: np.ndarray, clusters: np.ndarray,
                 weights: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """Per-cluster sums of unit features, (G, K), and the number of clusters G.

    `features` (P, K) holds one row per pattern, `inverse` (N,) the pattern of each unit row,
    `clusters` (N,) its cluster label and `weights` (N,) its multiplicity. The rows are first
    counted per (cluster, pattern) pair, so the sums depend only on those integer counts: a
    weighted table and its expansion give bit-identical sums, and no (N, K) array is formed.
    """
    labels, idx = np.unique(np.asarray(clusters).astype(str), return_inverse=True)
    G, P = len(labels), features.shape[0]
    key = idx.astype(np.int64).ravel() * P + np.asarray(inverse, dtype=np.int64)
    pairs, where = np.unique(key, return_inverse=True)
    counts = np.bincount(where, weights=None if weights is None else np.asarray(weights, float),
                         minlength=len(pairs))
    out = np.zeros((G, features.shape[1]))
    if len(pairs):
        cl = pairs // P                                  # sorted, as `pairs` is
        first = np.flatnonzero(np.r_[True, cl[1:] != cl[:-1]])
        out[cl[first]] = np.add.reduceat(features[pairs % P] * counts[:, None], first, axis=0)
    return out, G
