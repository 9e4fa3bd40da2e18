"""What the per-code and per-coder diagnostics share: checking the data, the choice of set
distance, the clusters to resample, each coder's use of the codes, and bootstrap intervals of
several statistics from the same resamples."""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import numpy as np

from agree.core.constants import DEFAULT_SET_DISTANCE, FEW_CLUSTERS
from agree.core.model import AgreeError, CodingData, as_coding_data, expand_weights
from agree.core.results import BootstrapInfo, Note
from agree.core.seeds import make_rng
from agree.stats.kernels import SET_DISTANCES
from agree.stats.patterns import cluster_sums
from agree.stats.resampling import PseudoUnits, interval_of, resample, resolve_clusters


def check_data(data: Any, allow_empty: bool = False) -> CodingData:
    """CodingData with two or more coders and (unless `allow_empty`) some coded value."""
    data = as_coding_data(data)
    data = expand_weights(data, "diagnostics")  # positions as units: one row per position (small data only)
    if data.n_coders < 2:
        raise AgreeError("diagnostics need at least two coders", code="too-few-coders",
                         hint="give one column per coder")
    if not allow_empty and (data.n_units == 0 or not data.observed.any()):
        raise AgreeError("no units to analyse" if data.n_units == 0 else
                         f"no units to analyse: none of the {data.n_units} units has a coded value",
                         hint="check that the data have one row per unit and one column per coder",
                         code="empty")
    return data


def set_distance(data: CodingData, distance: str | None) -> str | None:
    """The set distance to use: None for single codes, else "masi" (default) or "jaccard"."""
    if distance is not None and distance not in SET_DISTANCES:
        raise AgreeError(f"distance for sets of codes must be 'masi' or 'jaccard'; got '{distance}'",
                         hint="use masi (the default, as in agree score) or jaccard", code="bad-option")
    if not data.set_valued:
        return None
    return distance or DEFAULT_SET_DISTANCE


def cluster_labels(data: CodingData, cluster: Any) -> tuple[np.ndarray | None, str | None]:
    """Per-unit cluster labels (as text) and the name to report; (None, None) when units are
    resampled one by one."""
    labels, name = resolve_clusters(data, cluster)
    return (None, None) if labels is None else (labels.astype(str), name)


@dataclass(frozen=True)
class CoderShares:
    """Each coder's use of each code against the other coders' (arrays (m, q)).

    The reference for a coder is the median of the other coders' shares, not their pooled
    share: one coder who over-uses a code raises the pooled share of everybody else's
    "others" and would make accurate coders look like under-users, while the median of the
    others stays with the majority (with two coders it is the other coder's share)."""

    uses: np.ndarray            # units the coder gave the code
    units_coded: np.ndarray     # (m,) units the coder coded
    share: np.ndarray           # uses / units_coded
    share_others: np.ndarray    # the other coders' pooled share
    share_median_others: np.ndarray  # the median of the other coders' shares
    ratio: np.ndarray           # share / share_median_others

    @property
    def others_units(self) -> np.ndarray:
        """(m,) units coded by the other coders together."""
        return self.units_coded.sum() - self.units_coded

    @classmethod
    def of(cls, x: np.ndarray, observed: np.ndarray, weights: np.ndarray | None = None) -> "CoderShares":
        """From presence X (N, m, q) and the (N, m) mask of coded cells, rows standing for
        `weights` units each (default 1)."""
        if weights is None:
            uses = x.sum(axis=0)
            units = observed.sum(axis=0).astype(float)
        else:
            uses = np.tensordot(weights.astype(float), x, axes=(0, 0))
            units = weights.astype(float) @ observed
        m = len(units)
        with np.errstate(divide="ignore", invalid="ignore"):
            share = uses / units[:, None]
            share_others = (uses.sum(axis=0)[None, :] - uses) / (units.sum() - units)[:, None]
            others = np.array([[j for j in range(m) if j != i] for i in range(m)], dtype=int).reshape(m, m - 1)
            with warnings.catch_warnings():   # a coder who coded nothing has no share
                warnings.simplefilter("ignore", RuntimeWarning)
                median = np.nanmedian(share[others], axis=1)               # (m, q)
            ratio = share / median
        return cls(uses, units, share, share_others, median, ratio)


@dataclass(frozen=True)
class Intervals:
    """Intervals of several statistics from the same resamples (arrays, one entry per
    statistic; NaN without resampling), by the rule of every coefficient
    (`agree.stats.resampling.resample`)."""

    low: np.ndarray
    high: np.ndarray
    p_value_min: np.ndarray
    lower_bound: np.ndarray      # one-sided lower confidence bound at the same level
    bootstrap: BootstrapInfo | None
    notes: tuple[Note, ...]


def bootstrap_intervals(estimates: np.ndarray, features: np.ndarray, finish: Callable[[np.ndarray], np.ndarray],
                        *, n_resamples: int, seed: Any, confidence_level: float, ci_method: str,
                        minimum: float | None = None, counts: np.ndarray | None = None,
                        clusters: np.ndarray | None = None, inverse: np.ndarray | None = None,
                        cluster_name: str | None = None, labels: Sequence[str] | None = None,
                        pseudo: PseudoUnits | None = None, disagreeing: np.ndarray | None = None,
                        n_units: float | None = None, weights: np.ndarray | None = None) -> Intervals:
    """Intervals for several statistics from the same unit (or cluster) resamples.

    Items are the distinct rows of `features` (units with the same features resample alike),
    or, with `counts`, the rows of `features` are already distinct patterns occurring
    `counts` times; with `weights`, each row of `features` stands for that many units (rows with
    the same features are merged all the same, so the items and counts, and with them the
    resamples, are those of the units the rows stand for). With `clusters` (one label per unit,
    rows being units) the items are the clusters: the
    features of their units summed, each drawn whole; the rows of `features` are then units, or
    patterns when `inverse` gives the pattern of each unit. `pseudo` says which units a
    pseudo-unit may be (needed by the default method, "pseudo-unit"; with clusters it stands
    for a cluster of the mean size).
    `labels` name the statistics in the notes ("code 'X', α"); `disagreeing` (units whose values
    differ on each statistic) and `n_units` only word the notes. The lower bound is the
    one-sided lower confidence bound at `confidence_level` (the rule of ``agree score --min``).
    """
    k = len(estimates)
    nan = np.full(k, np.nan)
    if n_resamples <= 0 or features.shape[0] == 0:
        return Intervals(nan, nan.copy(), nan.copy(), nan.copy(), None, ())
    rng, used_seed = make_rng(seed)
    notes: list[Note] = []
    unit = "unit"
    if clusters is not None:
        rows = np.arange(len(features)) if inverse is None else inverse
        items, n_items = cluster_sums(features, rows, clusters)
        counts = np.ones(n_items, dtype=np.int64)
        unit = f"cluster:{cluster_name or 'cluster'}"
        if pseudo is not None:
            pseudo = replace(pseudo, scale=len(rows) / n_items)
        if n_items < FEW_CLUSTERS:
            notes.append(Note("few-clusters", f"Only {n_items} clusters ({cluster_name or 'cluster'}) were "
                              "resampled; bootstrap intervals from fewer than "
                              f"{FEW_CLUSTERS} groups are rough."))
    elif counts is None and weights is None:
        items, counts = np.unique(features, axis=0, return_counts=True)
    elif counts is None:
        items, inverse = np.unique(features, axis=0, return_inverse=True)
        counts = np.rint(np.bincount(inverse.ravel(), weights=weights, minlength=len(items))).astype(np.int64)
    else:
        items = features
    bounds = resample(items, counts, finish, method=ci_method, n_resamples=n_resamples,
                      confidence_level=confidence_level, rng=rng, minimum=minimum, pseudo=pseudo)
    low, high, below, bound = nan.copy(), nan.copy(), nan.copy(), nan.copy()
    n_undefined = 0
    method_used = ci_method
    fallback = []
    for j in range(k):  # a loop over statistics (codes, coders), not units
        iv = interval_of(bounds, j, minimum=minimum, n_items=n_units,
                         disagreeing=None if disagreeing is None else float(disagreeing[j]))
        low[j], high[j], bound[j] = iv.low, iv.high, iv.lower_bound
        below[j] = np.nan if iv.p_value_min is None else iv.p_value_min
        n_undefined = max(n_undefined, iv.n_undefined)
        if iv.method != ci_method and np.isfinite(estimates[j]):
            method_used = f"{ci_method} (percentile where BCa could not be formed)"
        name = labels[j] if labels is not None else f"statistic {j + 1}"
        for n in iv.notes:
            if n.code == "bca-fallback":
                fallback.append(name)
            elif n.code in ("pseudo-unit-greedy", "few-replicates"):
                notes.append(n)
            else:
                notes.append(Note(n.code, f"{name}: {n.message}"))
    if fallback:
        notes.append(Note("bca-fallback", "The BCa interval could not be formed (bias correction or "
                          "acceleration undefined) for " + ", ".join(fallback) + "; the percentile "
                          "interval is shown there instead."))
    info = BootstrapInfo(replicates=n_resamples, seed=used_seed, method=method_used, unit=unit,
                         n_undefined=n_undefined)
    unique = {(n.code, n.message): n for n in notes}
    return Intervals(low, high, below, bound, info, tuple(unique.values()))
