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


@dataclass(frozen=True)
class Patterns:
    """Distinct rows of a codes table.

    codes : (P, m) int32, -1 for missing (sorted within each row when unordered).
    counts : (P,) int64, how many units have each pattern.
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
        V = self.n_values
        onehot = self.codes[:, :, None] == np.arange(V)[None, None, :]
        return onehot.sum(axis=1).astype(float)

    def coder_onehot(self) -> np.ndarray:
        """(P, m, V) indicator x_pik: coder i gave value k in pattern p."""
        V = self.n_values
        return (self.codes[:, :, None] == np.arange(V)[None, None, :]).astype(float)


# Recently compressed read-only tables (CodingData.codes is read-only), so that scoring one data
# set with several coefficients compresses its units once per kind of pattern.
_RECENT: dict[tuple, tuple[weakref.ref, Patterns]] = {}
_RECENT_SIZE = 4


def compress(codes: np.ndarray, n_values: int, *, ordered: bool, keep_inverse: bool = False) -> Patterns:
    """Group the units of a (N, m) codes table into distinct patterns (see `_compress`);
    a read-only table compressed recently is not compressed again."""
    codes = np.asarray(codes)
    if codes.flags.writeable or codes.base is not None:  # only arrays nobody can change are remembered
        return _compress(codes, n_values, ordered=ordered, keep_inverse=keep_inverse)
    key = (id(codes), n_values, ordered, keep_inverse)
    hit = _RECENT.get(key)
    if hit is not None and hit[0]() is codes:
        return hit[1]
    result = _compress(codes, n_values, ordered=ordered, keep_inverse=keep_inverse)
    if len(_RECENT) >= _RECENT_SIZE:
        _RECENT.pop(next(iter(_RECENT)))
    _RECENT[key] = (weakref.ref(codes), result)
    return result


def _compress(codes: np.ndarray, n_values: int, *, ordered: bool, keep_inverse: bool = False) -> Patterns:
    """Group the units of a (N, m) codes table into distinct patterns.

    Each row is encoded as one integer in base V + 1 (missing = 0) when that fits in
    63 bits, and counted with `bincount` when the key space is small; otherwise rows are
    grouped with ``np.unique``. Unordered patterns are made from the ordered ones (sorting
    the few distinct rows instead of every unit's row).
    """
    codes = np.asarray(codes)
    N, m = codes.shape
    if N == 0:
        return Patterns(np.zeros((0, m), np.int32), np.zeros(0, np.int64),
                        np.zeros(0, np.int64) if keep_inverse else None, n_values)
    exact = _group_rows(codes, n_values, keep_inverse)
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
