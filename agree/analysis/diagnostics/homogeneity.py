"""Do the coders use the codes equally often? McNemar and Cochran's Q per code with Holm's
adjustment, the Stuart–Maxwell test of marginal homogeneity (METHODS 6.5), and McNemar's test
for units nested in groups (Durkalski et al. 2003).

References
----------
Bhapkar, V. P. (1966). A note on the equivalence of two test criteria for hypotheses in
    categorical data. JASA, 61, 228-235.
Cochran, W. G. (1950). The comparison of percentages in matched samples. Biometrika, 37.
Durkalski, V. L., Palesch, Y. Y., Lipsitz, S. R., & Rust, P. F. (2003). Analysis of clustered
    matched-pair data. Statistics in Medicine, 22(15), 2417-2428.
Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scandinavian
    Journal of Statistics, 6(2), 65-70.
Maxwell, A. E. (1970). Comparing the classification of subjects by two independent judges.
    British Journal of Psychiatry, 116, 651-655.
McNemar, Q. (1947). Note on the sampling error of the difference between correlated
    proportions or percentages. Psychometrika, 12(2), 153-157.
Stuart, A. (1955). A test for homogeneity of the marginal distributions in a two-way
    classification. Biometrika, 42, 412-416.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from scipy import stats
from scipy.sparse.csgraph import connected_components

#: McNemar: the exact binomial test when b + c is below this (a common convention, METHODS 6.5).
EXACT_BELOW = 25


def holm(p: np.ndarray) -> np.ndarray:
    """Holm (1979) step-down adjustment; NaN entries are not tests and stay NaN."""
    p = np.asarray(p, dtype=float)
    out = np.full_like(p, np.nan)
    ok = np.flatnonzero(np.isfinite(p))
    if ok.size == 0:
        return out
    order = ok[np.argsort(p[ok], kind="stable")]
    k = len(order)
    adjusted = np.minimum(1.0, np.maximum.accumulate((k - np.arange(k)) * p[order]))
    out[order] = adjusted
    return out


def mcnemar(b: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[str | None]]:
    """Per-code McNemar: exact binomial when b + c < 25, else chi-square without continuity
    correction; p = 1 when b + c = 0 (METHODS 6.5). Returns statistics, p-values and the test
    used for each code."""
    b, c = np.asarray(b, dtype=float), np.asarray(c, dtype=float)
    n = b + c
    low = np.minimum(b, c)
    exact = n < EXACT_BELOW
    with np.errstate(divide="ignore", invalid="ignore"):
        chi2 = np.where(n > 0, (b - c) ** 2 / n, 0.0)
    stat = np.where(exact, low, chi2)
    p = np.where(exact, np.minimum(1.0, 2.0 * stats.binom.cdf(low, np.maximum(n, 1), 0.5)), stats.chi2.sf(chi2, 1))
    p = np.where(n == 0, 1.0, p)
    stat = np.where(n == 0, 0.0, stat)
    method = ["mcnemar exact" if e else "mcnemar chi-square" for e in exact]
    return stat, p, method


def clustered_mcnemar(first_only: np.ndarray, second_only: np.ndarray,
                      clusters: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """McNemar's test for matched pairs nested in groups (Durkalski et al. 2003), per code.

    `first_only`, `second_only` (N, q): 1 where only the first (second) coder of the pair
    applied the code to the unit (0 for units not coded by both); `clusters` (N,) the group of
    each unit. With b_g - c_g the difference of discordant units in group g,

        X² = (Σ_g (b_g - c_g))² / Σ_g (b_g - c_g)²   on 1 degree of freedom,

    which is McNemar's (b - c)² / (b + c) when every group holds one unit. The groups are
    independent and each difference has mean 0 under equal use, whatever the correlation of
    the units within a group, so the test holds its level where McNemar's does not (checked
    by simulation in bench/se_checks.py). p = 1 when no group has a discordant difference.
    The formula is given from memory of the paper and stands on the argument above.
    """
    _, idx = np.unique(np.asarray(clusters).astype(str), return_inverse=True)
    diff = np.asarray(first_only, float) - np.asarray(second_only, float)
    per_group = np.zeros((int(idx.max()) + 1 if idx.size else 0, diff.shape[1]))
    np.add.at(per_group, idx.ravel(), diff)
    num = per_group.sum(axis=0) ** 2
    den = (per_group ** 2).sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        stat = np.where(den > 0, num / den, 0.0)
    p = np.where(den > 0, stats.chi2.sf(stat, 1), 1.0)
    return stat, p, ["clustered mcnemar"] * diff.shape[1]


def cochran_q(x: np.ndarray, weights: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Cochran's Q per code from X (N, m, q) of complete units (rows standing for `weights`
    units each, default 1); p = 1 where no unit splits."""
    m = x.shape[1]
    w = np.ones(x.shape[0]) if weights is None else np.asarray(weights, dtype=float)
    col = np.tensordot(w, x, axes=(0, 0))     # (m, q)
    row = x.sum(axis=1)                       # (N, q)
    total = col.sum(axis=0)
    num = (m - 1) * (m * (col ** 2).sum(axis=0) - total ** 2)
    den = m * total - w @ (row ** 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.where(den > 0, num / den, 0.0)
    p = np.where(den > 0, stats.chi2.sf(q, m - 1), 1.0)
    return q, p


def stuart_maxwell(table: np.ndarray, categories: Sequence | None = None) -> dict[str, Any]:
    """Stuart–Maxwell test of marginal homogeneity for a two-coder q x q table.

    Parameters
    ----------
    table : (q, q) counts, rows the first coder, columns the second.
    categories : labels for the rows (used to report what was dropped).

    Returns
    -------
    dict with ``test``, ``statistic``, ``df``, ``p_value``, ``dropped``, ``groups``,
    ``bhapkar_statistic``, ``bhapkar_p_value``, ``n_units``.

    Notes
    -----
    d_k = n_k. - n_.k, S_kk = n_k. + n_.k - 2 n_kk, S_kl = -(n_kl + n_lk), X² = dᵀ S⁻¹ d
    with one category removed, on q - 1 degrees of freedom (METHODS 6.5). S is the Laplacian
    of the graph whose edges are disagreements. A category never involved in a disagreement
    (S_kk = 0) is dropped; if the remaining categories fall into several groups that are
    never confused with each other, each group of size s contributes its own statistic on
    s - 1 degrees of freedom and the statistics add. Bhapkar's X²_B = X² / (1 - X²/N) uses
    the same df.

    References
    ----------
    Stuart (1955); Maxwell (1970); Bhapkar, V. P. (1966). JASA, 61, 228-235.
    """
    t = np.asarray(table, dtype=float)
    q = t.shape[0]
    labels = list(categories) if categories is not None else list(range(q))
    n_obs = float(t.sum())
    d = t.sum(axis=1) - t.sum(axis=0)
    off = t + t.T
    np.fill_diagonal(off, 0.0)
    S = np.diag(off.sum(axis=1)) - off
    active = np.flatnonzero(np.diag(S) > 0)
    dropped = [labels[k] for k in range(q) if k not in set(active)]
    result: dict[str, Any] = {"test": "stuart-maxwell", "statistic": 0.0, "df": 0, "p_value": 1.0,
                              "dropped": dropped, "groups": [], "bhapkar_statistic": 0.0,
                              "bhapkar_p_value": 1.0, "n_units": int(n_obs)}
    if active.size < 2:
        result["reason"] = "the coders never disagreed, so their category use cannot differ"
        return result
    n_groups, group = connected_components((off[np.ix_(active, active)] > 0).astype(int), directed=False)
    statistic, df = 0.0, 0
    for g in range(n_groups):
        members = active[group == g]
        keep = members[:-1]
        statistic += float(d[keep] @ np.linalg.solve(S[np.ix_(keep, keep)], d[keep]))
        df += len(members) - 1
        result["groups"].append([labels[k] for k in members])
    bhapkar = statistic / (1.0 - statistic / n_obs) if statistic < n_obs else float("inf")
    result.update(statistic=statistic, df=df, p_value=float(stats.chi2.sf(statistic, df)),
                  bhapkar_statistic=bhapkar, bhapkar_p_value=float(stats.chi2.sf(bhapkar, df)))
    if n_groups == 1:
        result["groups"] = []
    return result
