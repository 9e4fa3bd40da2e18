"""Which coders drive disagreement: pairwise agreement, alpha with each coder left out (with a
paired bootstrap of the change), and each coder's use of the codes (METHODS 6.6)."""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
import pandas as pd

from agree.analysis.diagnostics.common import CoderShares, bootstrap_intervals, check_data, cluster_labels, set_distance
from agree.analysis.diagnostics.results import CoderDiagnostics
from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_RESAMPLES
from agree.core.model import LEVELS, AgreeError, CodingData
from agree.core.results import Note
from agree.stats.kernels import (
    SET_DISTANCES,
    alpha_features,
    alpha_finish,
    alpha_from_coincidence,
    coincidences,
    contingency,
    delta_for,
    presence,
    value_counts,
)
from agree.stats.patterns import compress
from agree.stats.resampling import PseudoUnits, check_settings


def _level_of(data: CodingData, level: str | None, distance: str | None = None) -> str:
    if data.set_valued:
        return set_distance(data, distance)
    level = level or data.level
    if level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="level")
    if level in ("interval", "ratio") and not data.is_numeric:
        raise AgreeError(f"the {level} level needs numeric values", code="level",
                         hint="use level='nominal' or 'ordinal'")
    return level


def diagnose_coders(data: Any, *, level: str | None = None, n_resamples: int = DEFAULT_RESAMPLES,
                    seed: int | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                    ci_method: str = DEFAULT_CI_METHOD, distance: str | None = None,
                    cluster: Any = None) -> CoderDiagnostics:
    """Which coders drive disagreement.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders).
    level : level of measurement for alpha (default: the data's level).
    distance : set-valued data: "masi" (default, as in :func:`agree.score`) or "jaccard".
    n_resamples : unit bootstrap replicates for the intervals of the leave-one-out changes
        (0: none). Seeded by `seed`, recorded in the result.
    confidence_level, ci_method : as for the coefficients.
    cluster : per-unit group labels, or the name of a kept per-unit column: the bootstrap
        resamples whole groups (a note warns below 20 groups).

    Returns
    -------
    CoderDiagnostics ; ``.to_frame()`` gives one row per coder.

    Notes
    -----
    - Pairwise: for each pair of coders, over the units both coded, percent agreement (exact
      match), Cohen's kappa (values as nominal categories) and alpha at `level`.
    - Leave one coder out (METHODS 6.6): alpha_(-i) on the data without coder i, and
      Δ_i = alpha_(-i) - alpha. Δ_i > 0 means coder i lowers reliability. Dropping a coder
      changes which units are pairable. The interval for Δ_i is paired: alpha and alpha_(-i)
      are recomputed from the same draws, by the interval method of every coefficient (by
      default the Bayesian bootstrap with, at each end, the unit that moves Δ_i most). Needs
      three or more coders.
    - Code use: each coder's share of the units they coded that got each value (set-valued:
      each code), against the pooled share of the other coders and the median of their
      shares; ``ratio`` is over the median, which one coder who over-uses a code does not
      move (the pooled share would make the accurate coders look like under-users).

    References
    ----------
    Krippendorff (2004); Cohen, J. (1960). Educational and Psychological Measurement, 20, 37-46.
    """
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, ci_method=ci_method)
    data = check_data(data)
    kind = _level_of(data, level, distance)
    clusters, cluster_name = cluster_labels(data, cluster)
    notes: list[Note] = []
    m = data.n_coders
    V = len(data.values)
    delta = delta_for(kind, scores=data.scores if kind in ("interval", "ratio") else None,
                      values=list(data.values), n_values=V)
    codes = data.codes

    def alpha_of(cols) -> float:
        return float(alpha_from_coincidence(coincidences(value_counts(codes[:, cols], V)), delta))

    everyone = list(range(m))
    alpha = alpha_of(everyone)

    rows = []
    for i, j in itertools.combinations(range(m), 2):  # a loop over pairs of coders
        table = contingency(codes[:, i], codes[:, j], V)
        nb = int(table.sum())
        if nb:
            po = np.trace(table) / nb
            pe = float(table.sum(1) @ table.sum(0)) / nb ** 2
            kappa = (po - pe) / (1 - pe) if pe < 1 else np.nan
        else:
            po = kappa = np.nan
        rows.append({"coder_a": data.coders[i], "coder_b": data.coders[j], "n_units": nb,
                     "percent_agreement": po, "kappa": kappa, "alpha": alpha_of([i, j])})
    pairwise = pd.DataFrame(rows, columns=["coder_a", "coder_b", "n_units", "percent_agreement",
                                           "kappa", "alpha"])
    if kind != "nominal":
        notes.append(Note("pairwise-kappa-nominal", "Pairwise kappa treats the values as nominal "
                          f"categories (unweighted); pairwise alpha uses the {kind} "
                          f"{'distance' if kind in SET_DISTANCES else 'level'}."))

    # leave one coder out, with a paired bootstrap of the change
    subsets = [everyone] + [[j for j in everyone if j != i] for i in everyone]
    if m >= 3:
        # Leave-one-out needs coder identity: resample ordered patterns (METHODS 7.5).
        pat = compress(codes, V, ordered=True, keep_inverse=clusters is not None)
        def unit_features(rows: np.ndarray) -> np.ndarray:
            return np.hstack([alpha_features(value_counts(rows[:, cols], V), delta) for cols in subsets])

        features = unit_features(pat.codes)
        width = features.shape[1] // (m + 1)
        without = np.array([alpha_of(cols) for cols in subsets[1:]])
        pairable_without = [int(((codes[:, cols] >= 0).sum(axis=1) >= 2).sum()) for cols in subsets[1:]]

        def finish(sums):
            a = alpha_finish(sums.reshape(sums.shape[:-1] + (m + 1, width)), delta)
            return a[..., 1:] - a[..., :1]

        names = [f"change in alpha without {c}" for c in data.coders]
        iv = bootstrap_intervals(without - alpha, features, finish, n_resamples=n_resamples, seed=seed,
                                 confidence_level=confidence_level, ci_method=ci_method, counts=pat.counts,
                                 clusters=clusters, inverse=pat.inverse, cluster_name=cluster_name,
                                 labels=names, pseudo=PseudoUnits(unit_features, V, m, ordered=True))
        low, high, boot_info = iv.low, iv.high, iv.bootstrap
        notes.extend(iv.notes)
    else:
        without = np.full(m, np.nan)
        pairable_without = [0] * m
        low = high = np.full(m, np.nan)
        boot_info = None
        notes.append(Note("leave-one-out-needs-three", "Leaving one coder out needs three or more "
                          "coders; with two, see the pairwise table."))
    leave = pd.DataFrame({"coder": list(data.coders), "alpha_without": without,
                          "delta": without - alpha, "delta_ci_low": low, "delta_ci_high": high,
                          "n_pairable_units": pairable_without})

    # each coder's use of the values (codes) against the others'
    use = CoderShares.of(presence(data), data.observed)
    labels = list(data.categories)
    use_rows = [{"coder": data.coders[i], "code": labels[k], "uses": use.uses[i, k],
                 "units_coded": use.units_coded[i], "share": use.share[i, k],
                 "share_others": use.share_others[i, k], "share_median_others": use.share_median_others[i, k],
                 "ratio": use.ratio[i, k]}
                for i in range(m) for k in range(len(labels))]
    code_use = pd.DataFrame(use_rows, columns=["coder", "code", "uses", "units_coded", "share",
                                               "share_others", "share_median_others", "ratio"])
    return CoderDiagnostics(pairwise=pairwise, leave_one_out=leave, code_use=code_use, alpha=alpha,
                            level=kind, coders=tuple(data.coders), n_units=data.n_units,
                            confidence_level=confidence_level, bootstrap=boot_info, notes=tuple(notes),
                            cluster=cluster_name,
                            n_clusters=None if clusters is None else int(len(np.unique(clusters))))
