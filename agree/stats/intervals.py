"""Interval arithmetic on coded spans, vectorised over spans (used by the passages views and the
unitizing coefficient). Positions are integers, intervals [start, end) with the end exclusive."""

from __future__ import annotations

import numpy as np


def expand_ranges(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """All (owner, index) with lo[owner] <= index < hi[owner], without a Python loop."""
    n = np.maximum(np.asarray(hi) - np.asarray(lo), 0)
    owner = np.repeat(np.arange(len(n)), n)
    first = np.repeat(np.cumsum(n) - n, n)
    return owner, np.asarray(lo)[owner] + (np.arange(int(n.sum())) - first)


def overlap_pairs(seg_start: np.ndarray, seg_end: np.ndarray, iv_start: np.ndarray, iv_end: np.ndarray):
    """Pairs (segment, interval, overlap length > 0) for disjoint segments sorted by start
    (segments may touch) against any intervals."""
    lo = np.searchsorted(seg_end, iv_start, side="right")
    hi = np.searchsorted(seg_start, iv_end, side="left")
    iv, seg = expand_ranges(lo, hi)
    overlap = np.minimum(seg_end[seg], iv_end[iv]) - np.maximum(seg_start[seg], iv_start[iv])
    ok = overlap > 0
    return seg[ok], iv[ok], overlap[ok]
