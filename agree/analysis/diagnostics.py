"""Which codes and which coders drive disagreement.

`diagnose_codes` looks at each category of the codebook on its own: how often each coder
used it, how well the coders agree on it (present against absent), which other codes it is
confused with and what merging two codes would do to alpha, and whether the coders use it
equally often. `diagnose_coders` looks at the coders: pairwise agreement, alpha with each
coder left out, and each coder's use of the codes against the others'. `confusion_table`
gives the coincidence matrix (several coders) or the directed coder x coder table (two).

Conventions used throughout (METHODS sections 0, 4, 5.4, 5.5, 6):

- Missing means the coder did not code the unit. In the per-code view a coder who coded the
  unit without applying code k gives 0 for k, never missing.
- Set-valued data (several codes per coder and unit) are analysed code by code as presence
  or absence. A *confusion* between codes c and k is a pair of coders on one unit where one
  applied c and not k and the other applied k and not c. A coder who applied c while the
  other applied neither c nor some alternative makes an *omission*, not a confusion.
- Category diagnostics are nominal: a code is applied or not, whatever the data's level.
- Nothing here rounds or prints. Reasons are plain sentences for people; every number in a
  reason is also a column of its own.

References
----------
Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. Journal of
    Clinical Epidemiology, 46(5), 423-429.
Cicchetti, D. V., & Feinstein, A. R. (1990). High agreement but low kappa: II. Resolving the
    paradoxes. Journal of Clinical Epidemiology, 43(6), 551-558.
Cochran, W. G. (1950). The comparison of percentages in matched samples. Biometrika, 37.
Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low kappa: I. The problems
    of two paradoxes. Journal of Clinical Epidemiology, 43(6), 543-549.
Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psychological
    Bulletin, 76(5), 378-382.
Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scandinavian
    Journal of Statistics, 6(2), 65-70.
Krippendorff, K. (2004/2013/2019). Content Analysis: An Introduction to Its Methodology.
McNemar, Q. (1947). Note on the sampling error of the difference between correlated
    proportions or percentages. Psychometrika, 12(2), 153-157.
Maxwell, A. E. (1970). Comparing the classification of subjects by two independent judges.
    British Journal of Psychiatry, 116, 651-655.
Spitzer, R. L., & Fleiss, J. L. (1974). A re-analysis of the reliability of psychiatric
    diagnosis. British Journal of Psychiatry, 125, 341-347.
Stuart, A. (1955). A test for homogeneity of the marginal distributions in a two-way
    classification. Biometrika, 42, 412-416.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd
from scipy import stats
from scipy.sparse.csgraph import connected_components

from agree.core.format import format_value
from agree.core.model import LEVELS, AgreeError, CodingData, as_coding_data, expand_weights
from agree.core.results import BootstrapInfo, Note, json_safe
from agree.stats.coefficients import alpha_from_coincidence, krippendorff_alpha, level_delta, set_delta
from agree.stats.patterns import compress
from agree.stats.resampling import (
    bootstrap_interval,
    bootstrap_replicates,
    check_settings,
    cluster_features,
    jackknife_values,
    make_rng,
)

__all__ = ["CodeDiagnostics", "CoderDiagnostics", "confusion_table", "diagnose_codes",
           "diagnose_coders"]

#: Status of a code, worst first (the order used to rank codes).
STATUSES = ("below minimum", "uncertain", "too rare", "undefined", "ok")
#: Distances between sets of codes (set-valued data), as in `agree.score`.
SET_DISTANCES = ("masi", "jaccard")
DEFAULT_SET_DISTANCE = "masi"

_SIGNIFICANCE = 0.05          # Holm-adjusted p below this flags unequal use
_EXACT_BELOW = 25             # McNemar: exact binomial test when b + c < 25 (METHODS 6.5)
_CONFUSION_REASON = 0.25      # name the main confusion in a reason from this share upward
_PARADOX_PREVALENCE = 0.5     # |PI| from which prevalence explains high p_o with low kappa
_PARADOX_BIAS = 0.1           # |BI| from which bias is named as a cause
_CHUNK_CELLS = 4_000_000
_FEW_CLUSTERS = 20           # fewer clusters than this: intervals are rough (common practice)


# =========================================================================================
# Result objects
# =========================================================================================

def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return json_safe(frame.astype(object).where(frame.notna(), None).to_dict(orient="records"))


@dataclass(frozen=True, eq=False)
class CodeDiagnostics:
    """Per-code diagnostics, from :func:`diagnose_codes`.

    Attributes
    ----------
    per_code : DataFrame, one row per code in codebook order (``to_frame()`` ranks them). The
        columns are stable; the report writer relies on them:

        - ``code``, ``status`` (one of "below minimum", "uncertain", "too rare",
          "undefined", "ok"; see Notes of :func:`diagnose_codes`), ``judged_on``
          ("interval": the one-sided lower confidence bound, or "estimate": what the status
          compares with the minimum),
          ``reason`` (short, plain language), ``rank`` (1 = worst), ``explanation`` (longer
          text: the kappa paradox, why a code is undefined), ``paradox`` (bool).
        - ``alpha``, ``ci_low``, ``ci_high``: Krippendorff's alpha for the code against all
          others (nominal alpha on ``data.presence(code)``) and its two-sided bootstrap
          interval; ``lower_bound``: the one-sided lower confidence bound at the same level
          (what the status compares with the minimum); ``p_below_min``: share of replicates
          below the minimum.
        - ``specific_agreement`` (p_s) with ``specific_ci_low``, ``specific_ci_high``.
        - ``kappa`` and ``kappa_method`` ("cohen" for two coders, "fleiss" otherwise),
          ``percent_agreement`` (presence/absence agreement, mean over pairable units).
        - ``prevalence_index``, ``bias_index`` (Byrt et al. 1993; see Notes of
          :func:`diagnose_codes` for several coders).
        - ``n_pairable`` (pairable values that are, or contain, the code), ``n_values``
          (all pairable values), ``units_with_code`` (pairable units where someone used it),
          ``n_pairable_units``.
        - ``top_confusion``, ``top_confusion_share`` (share of this code's disagreements that
          are confusions with ``top_confusion``), ``omission_share`` (set-valued: share of
          its disagreements where the other coder applied no alternative; 0 otherwise).
        - ``usage_test`` ("mcnemar exact", "mcnemar chi-square", "cochran q" or None),
          ``usage_statistic``, ``usage_df``, ``usage_p``, ``usage_p_holm``, and the same
          adjusted p under its test's name: ``mcnemar_p_holm`` (two coders) and
          ``cochran_p_holm`` (more; NaN where not applicable). ``usage_flag`` names coders
          who use the code markedly more or less than the others ("" if none).
        - ``uses_<coder>`` and ``share_<coder>`` per coder: units the coder applied the code
          to, and that count over the units the coder coded.
    confused_pairs : DataFrame ranked by ``share``: ``code_a``, ``code_b``, ``count``
        (coincidences o_ab: for two coders the number of units where one said a and the
        other b), ``units`` (pairable units with such a pair), ``share`` (of all observed
        disagreement; of all confusions for set-valued data), ``expected`` (e_ab),
        ``o_over_e``, ``a_to_b`` and ``b_to_a`` (two coders: first coder a and second b,
        and the reverse; NaN otherwise), ``alpha_if_merged``, ``delta_alpha``. Only pairs
        that were confused at least once appear: merging a never-confused pair always
        lowers alpha.
    usage : DataFrame, one row per code and coder: ``code``, ``coder``, ``uses``,
        ``units_coded``, ``share``, ``share_others``, ``ratio`` (share / share_others),
        ``test``, ``p_value``, ``p_holm``, ``flag`` ("more", "less" or "").
    marginal_homogeneity : dict with ``test``, ``statistic``, ``df``, ``p_value``,
        ``dropped`` (categories left out as singular), ``groups``, ``bhapkar_statistic``,
        ``bhapkar_p_value``, ``n_units`` and ``reason`` when no test was made.
    alpha : overall alpha of the data (nominal; for set-valued data with the set distance
        ``distance``, MASI by default as in :func:`agree.score`).
    distance : the distance between sets of codes ("masi" or "jaccard"); None for data
        with one code per unit and coder.
    cluster, n_clusters : the column (or "cluster" for given labels) whose groups were
        resampled whole, and how many groups; None when units were resampled.
    level : the data's declared level of measurement.
    notes : what the reader should know (units left out, levels ignored, ...).
    """

    per_code: pd.DataFrame
    confused_pairs: pd.DataFrame
    usage: pd.DataFrame
    marginal_homogeneity: Mapping[str, Any]
    alpha: float
    coders: tuple[str, ...]
    n_units: int
    n_pairable_units: int
    set_valued: bool
    minimum: float | None
    confidence_level: float
    min_units_per_code: int
    bootstrap: BootstrapInfo | None = None
    notes: tuple[Note, ...] = ()
    distance: str | None = None
    cluster: str | None = None
    n_clusters: int | None = None
    level: str = "nominal"
    alpha_ci_low: float | None = None     # two-sided bootstrap interval of the overall alpha
    alpha_ci_high: float | None = None

    @property
    def alpha_label(self) -> str:
        """What the overall alpha is: "nominal", or "sets of codes, masi distance"."""
        return f"sets of codes, {self.distance} distance" if self.distance else "nominal"

    def to_frame(self) -> pd.DataFrame:
        """One row per code, worst first (see ``per_code`` for the columns)."""
        return self.per_code.sort_values("rank", kind="stable").reset_index(drop=True)

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        frame = self.to_frame()
        counts = frame["status"].value_counts()
        statuses = ", ".join(f"{int(counts[s])} {s}" for s in STATUSES if s in counts)
        minimum = "no minimum" if self.minimum is None else f"minimum {self.minimum:g}"
        summary = (f"Code diagnostics: {len(frame)} codes, {len(self.coders)} coders, "
                   f"{self.n_pairable_units} of {self.n_units} units pairable; "
                   f"overall α = {_display(self.alpha)} ({self.alpha_label}); {minimum}: {statuses}.")
        shown = ["rank", "code", "status", "alpha", "ci_low", "ci_high", "lower_bound", "specific_agreement",
                 "kappa", "units_with_code", "top_confusion", "reason"]
        return notebook_html(summary, frame[shown], notes=[n.message for n in self.notes])

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe dict: ``codes`` (rows of ``to_frame()``), ``confused_pairs``, ``usage``,
        ``marginal_homogeneity``, ``alpha``, settings and ``notes``."""
        return json_safe({
            "alpha": self.alpha,
            "alpha_ci_low": self.alpha_ci_low,
            "alpha_ci_high": self.alpha_ci_high,
            "alpha_level": self.alpha_label,
            "distance": self.distance,
            "level": self.level,
            "coders": list(self.coders),
            "n_units": self.n_units,
            "n_pairable_units": self.n_pairable_units,
            "set_valued": self.set_valued,
            "cluster": self.cluster,
            "n_clusters": self.n_clusters,
            "minimum": self.minimum,
            "confidence_level": self.confidence_level,
            "min_units_per_code": self.min_units_per_code,
            "bootstrap": None if self.bootstrap is None else self.bootstrap.to_dict(),
            "codes": _records(self.to_frame()),
            "confused_pairs": _records(self.confused_pairs),
            "usage": _records(self.usage),
            "marginal_homogeneity": dict(self.marginal_homogeneity),
            "notes": [n.to_dict() for n in self.notes],
        })


@dataclass(frozen=True, eq=False)
class CoderDiagnostics:
    """Per-coder diagnostics, from :func:`diagnose_coders`.

    Attributes
    ----------
    pairwise : DataFrame, one row per pair of coders: ``coder_a``, ``coder_b``, ``n_units``
        (units both coded), ``percent_agreement`` (exact match), ``kappa`` (Cohen's,
        unweighted, values as nominal categories), ``alpha`` (at ``level``).
    leave_one_out : DataFrame, one row per coder: ``coder``, ``alpha_without``, ``delta``
        (alpha_without - alpha; positive means the coder lowers reliability), ``delta_ci_low``,
        ``delta_ci_high`` (paired unit bootstrap), ``n_pairable_units`` (without the coder).
    code_use : DataFrame, one row per coder and value: ``coder``, ``code``, ``uses``,
        ``units_coded``, ``share``, ``share_others``, ``ratio``.
    alpha : alpha of all coders at ``level``.
    level : the level used; for set-valued data the set distance ("masi" by default, as in
        :func:`agree.score`, or "jaccard").
    cluster, n_clusters : the column whose groups were resampled whole, and how many; None
        when units were resampled.
    """

    pairwise: pd.DataFrame
    leave_one_out: pd.DataFrame
    code_use: pd.DataFrame
    alpha: float
    level: str
    coders: tuple[str, ...]
    n_units: int
    confidence_level: float
    bootstrap: BootstrapInfo | None = None
    notes: tuple[Note, ...] = ()
    cluster: str | None = None
    n_clusters: int | None = None

    @property
    def level_label(self) -> str:
        """The level for people: "nominal", or "sets of codes, masi distance"."""
        return f"sets of codes, {self.level} distance" if self.level in SET_DISTANCES else self.level

    def pairwise_matrix(self, statistic: str = "kappa") -> pd.DataFrame:
        """Coder x coder matrix of ``statistic`` ("percent_agreement", "kappa", "alpha" or
        "n_units"); the diagonal is empty."""
        if statistic not in ("percent_agreement", "kappa", "alpha", "n_units"):
            raise AgreeError(f"unknown statistic '{statistic}'",
                             hint="use percent_agreement, kappa, alpha or n_units", code="bad-option")
        out = pd.DataFrame(np.nan, index=list(self.coders), columns=list(self.coders))
        for row in self.pairwise.itertuples(index=False):
            value = getattr(row, statistic)
            out.loc[row.coder_a, row.coder_b] = value
            out.loc[row.coder_b, row.coder_a] = value
        return out

    def code_use_table(self) -> pd.DataFrame:
        """Coder x code table of shares (each coder's share of units given the code)."""
        return self.code_use.pivot(index="coder", columns="code", values="share").reindex(
            index=list(self.coders), columns=list(dict.fromkeys(self.code_use["code"])))

    def to_frame(self) -> pd.DataFrame:
        """One row per coder: ``coder``, ``units_coded``, ``alpha_without``, ``delta``,
        ``delta_ci_low``, ``delta_ci_high``, ``mean_percent_agreement``, ``mean_kappa``,
        ``mean_alpha`` (means over the pairs the coder is in)."""
        rows = []
        units = self.code_use.groupby("coder", sort=False)["units_coded"].first()
        for name in self.coders:
            pairs = self.pairwise[(self.pairwise.coder_a == name) | (self.pairwise.coder_b == name)]
            loo = self.leave_one_out.set_index("coder").loc[name]
            rows.append({"coder": name, "units_coded": int(units.get(name, 0)),
                         "alpha_without": loo.alpha_without, "delta": loo.delta,
                         "delta_ci_low": loo.delta_ci_low, "delta_ci_high": loo.delta_ci_high,
                         "mean_percent_agreement": _nanmean(pairs.percent_agreement),
                         "mean_kappa": _nanmean(pairs.kappa), "mean_alpha": _nanmean(pairs.alpha)})
        return pd.DataFrame(rows)

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        summary = (f"Coder diagnostics: {len(self.coders)} coders, {self.n_units} units; "
                   f"α = {_display(self.alpha)} ({self.level_label}).")
        return notebook_html(summary, self.to_frame(), notes=[n.message for n in self.notes])

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe dict: ``coders`` (rows of ``to_frame()``), ``pairwise``,
        ``leave_one_out``, ``code_use``, ``alpha``, ``level``, settings and ``notes``."""
        return json_safe({
            "alpha": self.alpha,
            "level": self.level,
            "level_label": self.level_label,
            "n_units": self.n_units,
            "confidence_level": self.confidence_level,
            "cluster": self.cluster,
            "n_clusters": self.n_clusters,
            "bootstrap": None if self.bootstrap is None else self.bootstrap.to_dict(),
            "coders": _records(self.to_frame()),
            "pairwise": _records(self.pairwise),
            "leave_one_out": _records(self.leave_one_out),
            "code_use": _records(self.code_use),
            "notes": [n.to_dict() for n in self.notes],
        })


def _display(x: Any) -> str:
    """A number for a summary line (three decimals; NaN as an en dash)."""
    return format_value(x, "number", 3)


def _nanmean(x) -> float:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    return float(x.mean()) if x.size else float("nan")


# =========================================================================================
# Building blocks (all vectorised over units)
# =========================================================================================

def _check(data: Any, allow_empty: bool = False) -> CodingData:
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


def _presence(data: CodingData) -> np.ndarray:
    """X (N, m, q) float: 1 where coder i applied category k to unit u (0 if missing)."""
    q = len(data.categories)
    V = len(data.values)
    member = np.zeros((V + 1, q))
    position = {c: k for k, c in enumerate(data.categories)}
    for v, value in enumerate(data.values):
        for c in (value if data.set_valued else (value,)):
            if c not in position:
                raise AgreeError(f"value '{c}' is not among the categories", code="unknown-code")
            member[v, position[c]] = 1.0
    return member[np.where(data.codes < 0, V, data.codes)]


def _value_counts(codes: np.ndarray, n_values: int) -> np.ndarray:
    """r (N, V): how many coders gave each value to each unit."""
    N = codes.shape[0]
    ok = codes >= 0
    rows = np.broadcast_to(np.arange(N)[:, None], codes.shape)[ok]
    flat = np.bincount(rows * n_values + codes[ok], minlength=N * n_values)
    return flat.reshape(N, n_values).astype(float)


def _coincidence(r: np.ndarray) -> np.ndarray:
    """Krippendorff's o (V, V) from value counts r (N, V); units with m_u < 2 drop out."""
    m = r.sum(axis=1)
    ok = m >= 2
    scaled = r[ok] / (m[ok] - 1)[:, None]
    return scaled.T @ r[ok] - np.diag(scaled.sum(axis=0))


def _delta(kind: str, scores: np.ndarray | None = None, values: Sequence | None = None) -> np.ndarray | None:
    """δ (V, V) for a level, or None for ordinal (built from the margins of each o)."""
    if kind == "ordinal":
        return None
    if kind in SET_DISTANCES:
        return set_delta(kind, values)
    return level_delta(kind, scores)


def _alpha_from_o(o: np.ndarray, kind: str, scores=None, values=None) -> np.ndarray:
    """Alpha for o (V, V) or (B, V, V); NaN if undefined (see coefficients.alpha_from_coincidence)."""
    if kind == "nominal":
        delta = 1.0 - np.eye(o.shape[-1])
    else:
        delta = _delta(kind, scores, values)
    return alpha_from_coincidence(o, delta)


def _holm(p: np.ndarray) -> np.ndarray:
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


def _mcnemar(b: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[str | None]]:
    """Per-code McNemar: exact binomial when b + c < 25, else chi-square without continuity
    correction; p = 1 when b + c = 0 (METHODS 6.5)."""
    n = b + c
    stat = np.full(len(b), np.nan)
    p = np.ones(len(b))
    method: list[str | None] = []
    for j in range(len(b)):
        if n[j] == 0:
            stat[j] = 0.0
            method.append("mcnemar exact")
        elif n[j] < _EXACT_BELOW:
            stat[j] = min(b[j], c[j])
            p[j] = min(1.0, 2.0 * stats.binom.cdf(min(b[j], c[j]), n[j], 0.5))
            method.append("mcnemar exact")
        else:
            stat[j] = (b[j] - c[j]) ** 2 / n[j]
            p[j] = stats.chi2.sf(stat[j], 1)
            method.append("mcnemar chi-square")
    return stat, p, method


def _cochran_q(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cochran's Q per code from X (N, m, q) of complete units; p = 1 where no unit splits."""
    m = x.shape[1]
    col = x.sum(axis=0)                       # (m, q)
    row = x.sum(axis=1)                       # (N, q)
    total = col.sum(axis=0)
    num = (m - 1) * (m * (col ** 2).sum(axis=0) - total ** 2)
    den = m * total - (row ** 2).sum(axis=0)
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


def _cluster_labels(data: CodingData, cluster: Any) -> tuple[np.ndarray | None, str | None]:
    """Per-unit cluster labels (as text) and the name to report, from a kept column name or
    an array of labels; (None, None) when units are resampled one by one."""
    if cluster is None:
        return None, None
    if isinstance(cluster, str):
        if cluster not in data.columns:
            known = ", ".join(data.columns) or "none"
            raise AgreeError(f"no column '{cluster}' to resample clusters by (columns kept: {known})",
                             hint="name the column with --cluster when reading the data", code="cluster")
        return np.asarray(data.columns[cluster]).astype(str), cluster
    labels = np.asarray(cluster)
    if labels.ndim != 1 or len(labels) != data.n_units:
        raise AgreeError(f"cluster labels: one per unit is needed ({data.n_units}); got {labels.size}",
                         code="cluster")
    return labels.astype(str), "cluster"


def _intervals(estimates: np.ndarray, features: np.ndarray, finish, *, n_resamples: int, seed,
               confidence_level: float, ci_method: str, minimum: float | None = None,
               counts: np.ndarray | None = None, clusters: np.ndarray | None = None,
               cluster_name: str | None = None, labels: Sequence[str] | None = None):
    """Bootstrap intervals for several statistics from the same unit (or cluster) resamples.

    Items are the distinct rows of `features` (units with the same features resample alike),
    or, with `counts`, the rows of `features` are already distinct patterns occurring
    `counts` times. With `clusters` (one label per row of `features`, which are then units),
    the items are the clusters: the features of their units summed, each drawn whole.
    `labels` name the statistics in the notes ("code 'X', α"). Returns (low, high,
    p_below_min, BootstrapInfo, notes, lower_bound), where ``lower_bound`` is the one-sided
    lower confidence bound at `confidence_level` (the rule of ``agree score --min``).
    """
    k = len(estimates)
    nan = np.full(k, np.nan)
    if n_resamples <= 0 or features.shape[0] == 0:
        return nan, nan.copy(), nan.copy(), None, [], nan.copy()
    rng, used_seed = make_rng(seed)
    notes: list[Note] = []
    unit = "unit"
    if clusters is not None:
        items, n_items = cluster_features(features, clusters)
        counts = np.ones(n_items, dtype=np.int64)
        unit = f"cluster:{cluster_name or 'cluster'}"
        if n_items < _FEW_CLUSTERS:
            notes.append(Note("few-clusters", f"Only {n_items} clusters ({cluster_name or 'cluster'}) were "
                              "resampled; bootstrap intervals from fewer than "
                              f"{_FEW_CLUSTERS} groups are rough."))
    elif counts is None:
        items, counts = np.unique(features, axis=0, return_counts=True)
    else:
        items = features
    boot = bootstrap_replicates(items, counts, finish, n_resamples, rng).reshape(n_resamples, k)
    informative = np.any(items != 0, axis=1)
    jack = jackknife_values(items[informative], counts[informative], finish) if informative.any() else None
    weights = counts[informative]
    low, high, below, bound = nan.copy(), nan.copy(), nan.copy(), nan.copy()
    n_undefined = 0
    method_used = ci_method
    fallback = []
    for j in range(k):
        iv = bootstrap_interval(float(estimates[j]), boot[:, j], confidence_level=confidence_level,
                                method=ci_method, jack=None if jack is None else jack[:, j],
                                jack_weights=weights, minimum=minimum)
        low[j], high[j], bound[j] = iv.low, iv.high, iv.lower_bound
        below[j] = np.nan if iv.p_below_min is None else iv.p_below_min
        n_undefined = max(n_undefined, iv.n_undefined)
        if iv.method != ci_method and np.isfinite(estimates[j]):
            method_used = f"{ci_method} (percentile where BCa could not be formed)"
        name = labels[j] if labels is not None else f"statistic {j + 1}"
        for n in iv.notes:
            if n.code == "bca-fallback":
                fallback.append(name)
            else:
                notes.append(Note(n.code, f"{name}: {n.message}"))
    if fallback:
        notes.append(Note("bca-fallback", "The BCa interval could not be formed (bias correction or "
                          "acceleration undefined) for " + ", ".join(fallback) + "; the percentile "
                          "interval is shown there instead."))
    info = BootstrapInfo(replicates=n_resamples, seed=used_seed, method=method_used, unit=unit,
                         n_undefined=n_undefined)
    unique = {(n.code, n.message): n for n in notes}
    return low, high, below, info, list(unique.values()), bound


# =========================================================================================
# confusion_table
# =========================================================================================

def _set_confusion(x: np.ndarray, m_u: np.ndarray) -> np.ndarray:
    """Set-valued confusions (q, q): Σ_u |c¬k|_u |k¬c|_u / (m_u - 1) over pairable units,
    where |c¬k|_u counts the coders of unit u who applied c and not k. On the diagonal,
    the presence coincidences o_kk = Σ_u r_uk (r_uk - 1) / (m_u - 1)."""
    ok = m_u >= 2
    xs = x[ok]
    r = xs.sum(axis=1)
    both = np.einsum("uic,uik->uck", xs, xs)
    only = r[:, :, None] - both                              # coders with c and not k
    weight = 1.0 / (m_u[ok] - 1.0)
    conf = np.einsum("u,uck,ukc->ck", weight, only, only)
    np.fill_diagonal(conf, (weight[:, None] * r * (r - 1)).sum(axis=0))
    return conf


def _directed(data: CodingData, a: int, b: int) -> np.ndarray:
    """Two coders' table over the units both coded: rows coder a, columns coder b. For
    set-valued data over codes: [c, k] counts units where a applied c and not k and b
    applied k and not c; the diagonal counts units where both applied k."""
    both = (data.codes[:, a] >= 0) & (data.codes[:, b] >= 0)
    if data.set_valued:
        x = _presence(data)[both]
        xa, xb = x[:, a, :], x[:, b, :]
        only_a = xa[:, :, None] * (1 - xa[:, None, :])      # a applied c and not k
        only_b = xb[:, None, :] * (1 - xb[:, :, None])      # b applied k and not c
        out = (only_a * only_b).sum(axis=0)
        np.fill_diagonal(out, (xa * xb).sum(axis=0))
        return out
    V = len(data.values)
    flat = np.bincount(data.codes[both, a] * V + data.codes[both, b], minlength=V * V)
    return flat.reshape(V, V).astype(float)


def confusion_table(data: Any, *, directed: bool = False,
                    coders: Sequence[str] | None = None) -> pd.DataFrame:
    """The coincidence matrix of the codes, or two coders' directed contingency table.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders).
    directed : False (default) gives Krippendorff's coincidence matrix o over all coders,
        values x values, symmetric. True gives the contingency table of two coders (rows the
        first, columns the second), over the units both coded.
    coders : the two coders for ``directed=True`` (default: the only two coders).

    Returns
    -------
    DataFrame with the values (codes) as index and columns. For set-valued data both tables
    are over the single codes: off the diagonal the confusions (one coder applied c and not
    k, the other k and not c), on the diagonal agreements on a code's presence.

    Notes
    -----
    o_ck = Σ_{u: m_u >= 2} r_uc (r_uk - [c = k]) / (m_u - 1) (METHODS 4.1). For set-valued
    data o_ck = Σ_u |c¬k|_u |k¬c|_u / (m_u - 1) for c ≠ k, which is the coincidence matrix
    again when every set has one code.

    References
    ----------
    Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability.
    """
    data = _check(data, allow_empty=True)
    labels = list(data.categories) if data.set_valued else list(data.values)
    if not directed:
        if coders is not None:
            data = data.subset(coders=[_coder_index(data, c) for c in coders])
        if data.set_valued:
            table = _set_confusion(_presence(data), data.values_per_unit.astype(float))
        else:
            table = _coincidence(_value_counts(data.codes, len(data.values)))
        return pd.DataFrame(table, index=pd.Index(labels, name="code"),
                            columns=pd.Index(labels, name="code"))
    if coders is None:
        if data.n_coders != 2:
            raise AgreeError("a directed table needs exactly two coders", code="two-coders",
                             hint="name the two coders with coders=[a, b]")
        pair = (0, 1)
    else:
        if len(coders) != 2:
            raise AgreeError("name exactly two coders for a directed table", code="two-coders")
        pair = tuple(_coder_index(data, c) for c in coders)
    table = _directed(data, *pair)
    return pd.DataFrame(table, index=pd.Index(labels, name=data.coders[pair[0]]),
                        columns=pd.Index(labels, name=data.coders[pair[1]]))


def _coder_index(data: CodingData, name: Any) -> int:
    if isinstance(name, (int, np.integer)) and not isinstance(name, bool) and name not in data.coders:
        return int(name)
    if name not in data.coders:
        raise AgreeError(f"no coder named '{name}'", hint=f"coders are {', '.join(data.coders)}",
                         code="unknown-coder")
    return data.coders.index(name)


# =========================================================================================
# diagnose_codes
# =========================================================================================

def _code_alpha_finish(q: int):
    """Features per unit: [m_u, r_uk (q), r_uk(r_uk-1)/(m_u-1) (q), r_uk(r_uk-1) (q),
    r_uk(m_u-1) (q)] -> (alpha_k, p_s(k)) for every code, (..., 2q)."""
    def finish(sums: np.ndarray) -> np.ndarray:
        n = sums[..., :1]
        n_k = sums[..., 1:1 + q]
        o_kk = sums[..., 1 + q:1 + 2 * q]
        agree_pairs = sums[..., 1 + 2 * q:1 + 3 * q]
        all_pairs = sums[..., 1 + 3 * q:1 + 4 * q]
        with np.errstate(divide="ignore", invalid="ignore"):
            den = n_k * (n - n_k)
            alpha = np.where((den > 0) & (n > 1), 1.0 - (n - 1.0) * (n_k - o_kk) / den, np.nan)
            ps = np.where(all_pairs > 0, agree_pairs / all_pairs, np.nan)
        return np.concatenate([alpha, ps], axis=-1)
    return finish


def _code_features(r: np.ndarray, m_u: np.ndarray) -> np.ndarray:
    ok = (m_u >= 2)[:, None]
    m = m_u[:, None].astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        o_kk = np.where(ok, r * (r - 1) / (m - 1), 0.0)
    return np.hstack([np.where(ok, m, 0.0), np.where(ok, r, 0.0), o_kk,
                      np.where(ok, r * (r - 1), 0.0), np.where(ok, r * (m - 1), 0.0)])


def _two_by_two(x: np.ndarray, observed: np.ndarray, a: int, b: int):
    both = observed[:, a] & observed[:, b]
    xa, xb = x[both, a, :], x[both, b, :]
    return ((xa * xb).sum(0), (xa * (1 - xb)).sum(0), ((1 - xa) * xb).sum(0),
            ((1 - xa) * (1 - xb)).sum(0))


def _cohen_2x2(a, b, c, d):
    n = a + b + c + d
    with np.errstate(divide="ignore", invalid="ignore"):
        po = (a + d) / n
        pe = ((a + b) * (a + c) + (c + d) * (b + d)) / n ** 2
        return np.where((n > 0) & (pe < 1), (po - pe) / (1 - pe), np.nan)


def _fleiss_binary(r: np.ndarray, m_u: np.ndarray):
    """Fleiss' kappa for each code against the rest, for unequal numbers of coders: P_bar over
    units with m_u >= 2, pi_k over units with m_u >= 1 (METHODS 3.2). With complete data this
    is Fleiss' per-category kappa_j."""
    pair = m_u >= 2
    any_ = m_u >= 1
    m = m_u[:, None].astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        a_u = (r * (r - 1) + (m - r) * (m - r - 1)) / (m * (m - 1))
        p_bar = a_u[pair].mean(axis=0) if pair.any() else np.full(r.shape[1], np.nan)
        pi = (r[any_] / m[any_]).mean(axis=0) if any_.any() else np.full(r.shape[1], np.nan)
        p_e = pi ** 2 + (1 - pi) ** 2
        kappa = np.where(p_e < 1, (p_bar - p_e) / (1 - p_e), np.nan)
    return kappa, p_bar


def _pct_level(confidence_level: float) -> str:
    """The confidence level for people: 0.95 -> "95%", 0.975 -> "97.5%"."""
    return f"{100 * confidence_level:g}%"


def _fmt_pct(x: float) -> str:
    return f"{100 * x:.0f}%"


def _signed(x: float) -> str:
    text = format_value(x, "coefficient", 2)
    return text if text.startswith("\u2212") else "+" + text


def _ratio_text(ratio: float) -> str:
    return f"{ratio:.1f}x" if ratio >= 1 else f"{ratio:.2f}x"


def diagnose_codes(data: Any, *, minimum: float | None = 0.8, n_resamples: int = 1000,
                   seed: int | None = None, confidence_level: float = 0.95,
                   min_units_per_code: int = 5, ci_method: str = "bca",
                   distance: str | None = None, cluster: Any = None) -> CodeDiagnostics:
    """Which codes of the codebook drive disagreement, and why.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders; None/NaN missing; sets for
        set-valued coding).
    minimum : the alpha a code should reach (default 0.8, a common benchmark); None for none.
    n_resamples : unit bootstrap replicates for the intervals (0: no intervals). Every code is
        computed from the same resamples.
    seed : seed of the bootstrap (recorded in the result; drawn and recorded if None).
    confidence_level : of the intervals.
    min_units_per_code : a code used on fewer pairable units than this is "too rare" to judge
        (default 5: common practice, not a published threshold).
    ci_method : "bca" (default) or "percentile".
    distance : set-valued data: the distance between sets of codes for the overall alpha and
        the alpha after merging two codes, "masi" (default, as in :func:`agree.score`, so
        the overall alpha is the same figure) or "jaccard". Ignored for single codes.
    cluster : per-unit group labels, or the name of a kept per-unit column (e.g. the
        document): the bootstrap resamples whole groups (every code from the same
        resamples). A note warns when there are fewer than 20 groups.

    Returns
    -------
    CodeDiagnostics ; ``.to_frame()`` gives one row per code, worst first.

    Notes
    -----
    For code k, with r_uk the number of coders who applied k to unit u, m_u the number of
    coders who coded u, over the pairable units (m_u >= 2):

    - alpha_k = 1 - (n - 1)(n_k - o_kk) / (n_k (n - n_k)), n_k = Σ r_uk, n = Σ m_u,
      o_kk = Σ r_uk (r_uk - 1)/(m_u - 1): nominal alpha on the present/absent recoding
      (METHODS 6.3). Undefined if nobody or everybody used k.
    - p_s(k) = Σ r_uk (r_uk - 1) / Σ r_uk (m_u - 1), the share of agreeing pairs among the
      pairs of values that involve k; with two coders 2 n_kk / (n_k. + n_.k) (Spitzer &
      Fleiss 1974; p_pos of Cicchetti & Feinstein 1990).
    - kappa: Cohen's kappa on the k / not-k table (two coders, units both coded); Fleiss'
      kappa_j otherwise (with missing values, P_bar over pairable units and pi_k over coded
      units, METHODS 3.2).
    - prevalence index PI = 2 n_k / n - 1; with two coders this is Byrt et al.'s (a - d)/N.
      Bias index: with two coders Byrt et al.'s BI = (b - c)/N (positive: the first coder
      uses k more); with more coders the mean over pairs of coders of |b - c|/N, each pair
      on the units both coded (so it is never negative).
    - kappa paradox: flagged when the present/absent percent agreement and the specific
      agreement p_s both reach the minimum, alpha or kappa does not, and prevalence
      (|PI| >= 0.5) or bias (|BI| >= 0.1) explains the gap; the explanation names the cause
      (Feinstein & Cicchetti 1990). When p_s is low too, the coders really disagree on the
      code's presence and there is no paradox to explain. These cut-offs are our own choice
      for wording, not published thresholds.
    - unequal use: with two coders the per-code McNemar test (exact binomial when
      b + c < 25, else chi-square without continuity correction), Holm over the codes; a
      significant test flags the coder who uses k more and the one who uses it less. With
      more coders, Cochran's Q per code on the units every coder coded (Holm over codes), and
      for each coder a two-proportion z-test of their share against the pooled share of the
      others (Holm over all codes and coders; it ignores that the coders coded the same units,
      which usually makes it conservative) flags "more" or "less" at p_holm < 0.05.
    - confusions: share_ck = 2 o_ck / Σ_{g≠h} o_gh, expected e_ck = n_c n_k / (n - 1), and
      alpha after merging c and k (METHODS 6.3, 6.4). For set-valued data o_ck counts pairs of
      coders where one applied c and not k and the other k and not c; shares are of all such
      confusions, e_ck uses the numbers of values with c and not k, and alpha (with
      `distance`, MASI by default) is recomputed after replacing k by c in every set.
    - status: "undefined" (nobody, or every value, has the code, or alpha is undefined),
      "too rare" (used on fewer than `min_units_per_code` pairable units), "below minimum"
      (alpha < minimum), "uncertain" (alpha at or above the minimum, but its one-sided lower
      confidence bound at `confidence_level` below it), "ok" (the one-sided lower bound at or
      above the minimum). The one-sided bound is the bootstrap quantile at 1 - level (BCa-
      adjusted like the interval; column ``lower_bound``), the same rule as the overall
      decision of ``agree score --min``; it lies above the lower end of the two-sided
      interval. This follows the advice to judge a coefficient by its interval, not its
      estimate (Krippendorff 2004). Without an interval (``n_resamples=0``, or too few defined
      replicates) the estimate is compared with the minimum and the reason says so
      (``judged_on`` = "estimate"). Codes are ranked by status in the order of concern —
      below minimum, uncertain, too rare, undefined, ok — and by alpha within a status,
      lowest first.

    References
    ----------
    Byrt, Bishop & Carlin (1993); Cicchetti & Feinstein (1990); Feinstein & Cicchetti (1990);
    Spitzer & Fleiss (1974); Krippendorff (2004); McNemar (1947); Cochran (1950); Holm (1979);
    Stuart (1955); Maxwell (1970).
    """
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum,
                   ci_method=ci_method)
    data = _check(data)
    distance = _set_distance(data, distance)
    clusters, cluster_name = _cluster_labels(data, cluster)
    notes: list[Note] = []
    cats = list(data.categories)
    q = len(cats)
    m = data.n_coders
    coders = data.coders
    observed = data.observed
    x = _presence(data)                                   # (N, m, q)
    m_u = observed.sum(axis=1).astype(float)
    r = x.sum(axis=1)                                     # (N, q)
    pairable = m_u >= 2
    n_pairable_units = int(pairable.sum())
    if n_pairable_units < data.n_units:
        notes.append(Note("units-left-out", f"{data.n_units - n_pairable_units} of {data.n_units} "
                          "units were coded by fewer than two coders and do not enter agreement."))
    if data.level != "nominal" and not data.set_valued:
        notes.append(Note("nominal-diagnostics", f"The data are declared {data.level}; code "
                          "diagnostics treat each value as a nominal category (applied or not)."))
        notes.append(Note("rating-scale", "For a rating scale, presence/absence diagnostics per scale "
                          "point are of limited use: a near miss (e.g. 3 against 4) counts as a full "
                          "disagreement on both points. Judge the scale by the overall alpha at its "
                          f"level ({data.level})."))

    # --- agreement on each code --------------------------------------------------------
    features = _code_features(r, m_u)
    finish = _code_alpha_finish(q)
    point = finish(features.sum(axis=0))
    alpha_k, ps_k = point[:q], point[q:]
    names = [f"code '{c}', α" for c in cats] + [f"code '{c}', specific agreement" for c in cats]
    low, high, below, boot_info, boot_notes, bound = _intervals(
        point, features, finish, n_resamples=n_resamples, seed=seed,
        confidence_level=confidence_level, ci_method=ci_method, minimum=minimum,
        clusters=clusters, cluster_name=cluster_name, labels=names)
    notes.extend(boot_notes)
    n = float(m_u[pairable].sum())
    n_k = r[pairable].sum(axis=0)
    units_with = (r[pairable] > 0).sum(axis=0)
    prevalence = 2.0 * n_k / n - 1.0 if n > 0 else np.full(q, np.nan)

    if m == 2:
        a, b, c, d = _two_by_two(x, observed, 0, 1)
        kappa = _cohen_2x2(a, b, c, d)
        kappa_method = "cohen"
        n2 = a + b + c + d
        with np.errstate(divide="ignore", invalid="ignore"):
            bias = np.where(n2 > 0, (b - c) / n2, np.nan)
    else:
        kappa, _ = _fleiss_binary(r, m_u)
        kappa_method = "fleiss"
        parts = []
        for i, j in itertools.combinations(range(m), 2):
            a_, b_, c_, d_ = _two_by_two(x, observed, i, j)
            tot = a_ + b_ + c_ + d_
            if tot.sum() > 0:
                parts.append(np.abs(b_ - c_) / np.where(tot > 0, tot, np.nan))
        bias = np.nanmean(np.vstack(parts), axis=0) if parts else np.full(q, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        mm = m_u[pairable, None]
        rr = r[pairable]
        a_u = (rr * (rr - 1) + (mm - rr) * (mm - rr - 1)) / (mm * (mm - 1))
    percent = a_u.mean(axis=0) if n_pairable_units else np.full(q, np.nan)

    # --- use by each coder and tests of equal use ---------------------------------------
    uses = x.sum(axis=0)                                  # (m, q)
    units_coded = observed.sum(axis=0).astype(float)      # (m,)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = uses / units_coded[:, None]
        others_uses = uses.sum(axis=0)[None, :] - uses
        others_units = units_coded.sum() - units_coded
        share_others = others_uses / others_units[:, None]
        ratio = share / share_others
    usage_rows = []
    code_test = [None] * q
    code_stat = np.full(q, np.nan)
    code_df = np.full(q, np.nan)
    code_p = np.full(q, np.nan)
    flags = np.full((m, q), "", dtype=object)
    coder_p = np.full((m, q), np.nan)
    coder_test = np.full((m, q), None, dtype=object)
    if m == 2:
        code_stat, code_p, code_test = _mcnemar(b, c)
        code_df = np.where([t == "mcnemar chi-square" for t in code_test], 1.0, np.nan)
        code_p_holm = _holm(code_p)
        for k in range(q):
            coder_p[:, k] = code_p[k]
            coder_test[:, k] = code_test[k]
            if code_p_holm[k] < _SIGNIFICANCE and b[k] != c[k]:
                more = 0 if b[k] > c[k] else 1
                flags[more, k], flags[1 - more, k] = "more", "less"
        coder_p_holm = np.vstack([code_p_holm, code_p_holm])
    else:
        complete = observed.all(axis=1)
        if complete.sum() >= 2:
            code_stat, code_p = _cochran_q(x[complete])
            code_test = ["cochran q"] * q
            code_df = np.full(q, float(m - 1))
            if complete.sum() < data.n_units:
                notes.append(Note("cochran-complete-units", f"Cochran's Q uses the {int(complete.sum())} "
                                  f"units every coder coded ({data.n_units - int(complete.sum())} left out)."))
        else:
            notes.append(Note("cochran-not-run", "Cochran's Q needs units coded by every coder; "
                              "there are fewer than two."))
        code_p_holm = _holm(code_p)
        pooled = uses.sum(axis=0) / units_coded.sum()
        with np.errstate(divide="ignore", invalid="ignore"):
            se = np.sqrt(pooled * (1 - pooled) * (1.0 / units_coded[:, None] + 1.0 / others_units[:, None]))
            z = (share - share_others) / se
        coder_p = np.where(se > 0, 2 * stats.norm.sf(np.abs(z)), 1.0)
        coder_p[~np.isfinite(share - share_others)] = np.nan
        coder_test[:] = "two-proportion z"
        coder_p_holm = _holm(coder_p.ravel()).reshape(m, q)
        flags = np.where(coder_p_holm < _SIGNIFICANCE, np.where(share > share_others, "more", "less"), "")
    for k in range(q):
        for i in range(m):
            usage_rows.append({"code": cats[k], "coder": coders[i], "uses": uses[i, k],
                               "units_coded": units_coded[i], "share": share[i, k],
                               "share_others": share_others[i, k], "ratio": ratio[i, k],
                               "test": coder_test[i, k], "p_value": coder_p[i, k],
                               "p_holm": coder_p_holm[i, k], "flag": flags[i, k]})
    usage = pd.DataFrame(usage_rows, columns=["code", "coder", "uses", "units_coded", "share",
                                              "share_others", "ratio", "test", "p_value", "p_holm",
                                              "flag"])

    # --- confusions -----------------------------------------------------------------------
    pairs, overall_alpha, conf = _confusions(data, x, m_u, r, distance)
    disagreements_k = n_k - np.array([conf[k, k] for k in range(q)])
    off = conf.copy()
    np.fill_diagonal(off, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        conf_share = off / disagreements_k[:, None]
    top_idx = np.argmax(np.where(np.isfinite(conf_share), conf_share, -1), axis=1)
    top_share = conf_share[np.arange(q), top_idx]
    has_top = np.isfinite(top_share) & (top_share > 0)
    omission = np.where(disagreements_k > 0, 1.0 - np.nansum(conf_share, axis=1), np.nan)
    if not data.set_valued:
        omission = np.where(disagreements_k > 0, 0.0, np.nan)

    # --- marginal homogeneity ----------------------------------------------------------------
    if m == 2 and not data.set_valued:
        homogeneity = stuart_maxwell(_directed(data, 0, 1), list(data.values))
    elif m == 2:
        homogeneity = {"test": None, "statistic": None, "df": None, "p_value": None, "dropped": [],
                       "reason": "set-valued data have no single category table; see the per-code "
                                 "McNemar tests"}
    else:
        homogeneity = {"test": None, "statistic": None, "df": None, "p_value": None, "dropped": [],
                       "reason": "the Stuart–Maxwell test compares two coders; see the per-code "
                                 "Cochran's Q tests"}

    # --- status, reasons, explanations --------------------------------------------------
    rows = []
    for k in range(q):
        status, reason_parts, explanation, judged_on = _judge(
            k, cats, coders, alpha_k[k], kappa[k], percent[k], n_k[k], n, units_with[k], uses[:, k],
            flags[:, k], ratio[:, k], share[:, k], prevalence[k], bias[k], top_idx[k], top_share[k],
            has_top[k], omission[k], ps_k[k], minimum, min_units_per_code, data.set_valued,
            lower_bound=bound[k], bootstrapped=boot_info is not None,
            confidence_level=confidence_level)
        row = {"code": cats[k], "status": status, "judged_on": judged_on,
               "reason": "; ".join(reason_parts), "rank": 0,
               "alpha": alpha_k[k], "ci_low": low[k], "ci_high": high[k], "lower_bound": bound[k],
               "p_below_min": below[k],
               "specific_agreement": ps_k[k], "specific_ci_low": low[q + k],
               "specific_ci_high": high[q + k], "kappa": kappa[k], "kappa_method": kappa_method,
               "percent_agreement": percent[k], "prevalence_index": prevalence[k],
               "bias_index": bias[k], "paradox": explanation[0], "explanation": explanation[1],
               "n_pairable": n_k[k], "n_values": n, "units_with_code": units_with[k],
               "n_pairable_units": n_pairable_units,
               "top_confusion": cats[top_idx[k]] if has_top[k] else None,
               "top_confusion_share": top_share[k] if has_top[k] else np.nan,
               "omission_share": omission[k],
               "usage_test": code_test[k], "usage_statistic": code_stat[k], "usage_df": code_df[k],
               "usage_p": code_p[k], "usage_p_holm": code_p_holm[k],
               "mcnemar_p_holm": code_p_holm[k] if m == 2 else np.nan,
               "cochran_p_holm": code_p_holm[k] if m > 2 else np.nan,
               "usage_flag": ", ".join(f"{coders[i]} {flags[i, k]}" for i in range(m) if flags[i, k])}
        for i in range(m):
            row[f"uses_{coders[i]}"] = uses[i, k]
        for i in range(m):
            row[f"share_{coders[i]}"] = share[i, k]
        rows.append(row)
    per_code = pd.DataFrame(rows)
    order = sorted(range(q), key=lambda k: (STATUSES.index(rows[k]["status"]),
                                            alpha_k[k] if np.isfinite(alpha_k[k]) else np.inf, k))
    per_code.loc[order, "rank"] = np.arange(1, q + 1)
    per_code["rank"] = per_code["rank"].astype(int)
    if minimum is not None:
        judged = (f"each code's one-sided {_pct_level(confidence_level)} lower bound" if boot_info is not None
                  else "each code's estimate (no bootstrap, so no interval)")
        notes.append(Note("minimum", f"Codes are judged against a minimum alpha of {minimum}, comparing "
                          f"{judged} with it (a convention; choose it before looking at the data)."))
    overall_ci = (None, None)
    if n_resamples:  # the same figure and interval as krippendorff_alpha / agree score with this seed
        overall = krippendorff_alpha(data, level="nominal", distance=distance if data.set_valued else None,
                                     n_resamples=n_resamples, seed=boot_info.seed if boot_info else seed,
                                     confidence_level=confidence_level,
                                     ci_method=ci_method, cluster=clusters)
        overall_ci = (overall.ci_low, overall.ci_high)
    return CodeDiagnostics(per_code=per_code, confused_pairs=pairs, usage=usage,
                           marginal_homogeneity=json_safe(homogeneity), alpha=overall_alpha,
                           alpha_ci_low=overall_ci[0], alpha_ci_high=overall_ci[1],
                           coders=tuple(coders), n_units=data.n_units,
                           n_pairable_units=n_pairable_units, set_valued=data.set_valued,
                           minimum=None if minimum is None else float(minimum),
                           confidence_level=confidence_level, min_units_per_code=min_units_per_code,
                           bootstrap=boot_info, notes=tuple(notes), distance=distance,
                           cluster=cluster_name,
                           n_clusters=None if clusters is None else int(len(np.unique(clusters))),
                           level=data.level)


def _set_distance(data: CodingData, distance: str | None) -> str | None:
    """The set distance to use: None for single codes, else "masi" (default) or "jaccard"."""
    if distance is not None and distance not in SET_DISTANCES:
        raise AgreeError(f"distance for sets of codes must be 'masi' or 'jaccard'; got '{distance}'",
                         hint="use masi (the default, as in agree score) or jaccard", code="bad-option")
    if not data.set_valued:
        return None
    return distance or DEFAULT_SET_DISTANCE


def _confusions(data: CodingData, x: np.ndarray, m_u: np.ndarray, r: np.ndarray,
                distance: str | None = None):
    """The ranked confused pairs, the overall alpha and the (q, q) confusion matrix."""
    distance = distance or DEFAULT_SET_DISTANCE
    cats = list(data.categories)
    if data.set_valued:
        conf = _set_confusion(x, m_u)
        values = list(data.values)
        rv = _value_counts(data.codes, len(values))
        o_values = _coincidence(rv)
        overall = float(_alpha_from_o(o_values, distance, values=values))
        ok = m_u >= 2
        both = np.einsum("uic,uik->uck", x[ok], x[ok])
        n_only = (r[ok][:, :, None] - both).sum(axis=0)     # values with c and not k
        n = float(m_u[ok].sum())
        total = np.triu(conf, 1).sum()
        share_of = lambda c, k: conf[c, k] / total if total > 0 else np.nan  # noqa: E731
        expected = lambda c, k: n_only[c, k] * n_only[k, c] / (n - 1) if n > 1 else np.nan  # noqa: E731
    else:
        o = _coincidence(_value_counts(data.codes, len(data.values)))
        conf = o
        o_values = None
        overall = float(_alpha_from_o(o, "nominal"))
        n_c = o.sum(axis=1)
        n = float(n_c.sum())
        total = o.sum() - np.trace(o)
        share_of = lambda c, k: 2 * o[c, k] / total if total > 0 else np.nan  # noqa: E731
        expected = lambda c, k: n_c[c] * n_c[k] / (n - 1) if n > 1 else np.nan  # noqa: E731
    directed = _directed(data, 0, 1) if data.n_coders == 2 else None
    pair_c, pair_k = np.nonzero(np.triu(conf, 1) > 0)
    pair_units = _pair_units(x[m_u >= 2], pair_c, pair_k)
    rows = []
    for c, k, units in zip(pair_c, pair_k, pair_units.tolist()):
        e = expected(c, k)
        merged = _merged_alpha(data, conf if not data.set_valued else None, c, k, o_values, distance)
        rows.append({"code_a": cats[c], "code_b": cats[k], "count": conf[c, k], "units": units,
                     "share": share_of(c, k), "expected": e,
                     "o_over_e": conf[c, k] / e if e and e > 0 else np.nan,
                     "a_to_b": directed[c, k] if directed is not None else np.nan,
                     "b_to_a": directed[k, c] if directed is not None else np.nan,
                     "alpha_if_merged": merged, "delta_alpha": merged - overall})
    columns = ["code_a", "code_b", "count", "units", "share", "expected", "o_over_e", "a_to_b",
               "b_to_a", "alpha_if_merged", "delta_alpha"]
    pairs = pd.DataFrame(rows, columns=columns)
    if len(pairs):
        pairs = pairs.sort_values(["share", "delta_alpha"], ascending=[False, False],
                                  kind="stable").reset_index(drop=True)
    return pairs, overall, conf


def _pair_units(x: np.ndarray, cs: np.ndarray, ks: np.ndarray) -> np.ndarray:
    """For each pair (c, k): the units where one coder applied c and not k and another k and
    not c. `x` is the (N, m, q) presence array of the pairable units; all pairs at once, in
    chunks of units so that memory stays bounded."""
    out = np.zeros(len(cs), dtype=np.int64)
    if not len(cs) or not x.shape[0]:
        return out
    step = max(1, _CHUNK_CELLS // max(1, x.shape[1] * len(cs)))
    for start in range(0, x.shape[0], step):
        xc = x[start:start + step, :, cs]                     # (n, m, P)
        xk = x[start:start + step, :, ks]
        c_only = (xc * (1.0 - xk)).sum(axis=1) > 0            # some coder: c and not k
        k_only = (xk * (1.0 - xc)).sum(axis=1) > 0
        out += (c_only & k_only).sum(axis=0)
    return out


def _merged_alpha(data: CodingData, o: np.ndarray | None, c: int, k: int,
                  o_values: np.ndarray | None = None, distance: str = DEFAULT_SET_DISTANCE) -> float:
    """Alpha after merging categories c and k (k becomes c).

    The coincidences after relabelling are Pᵀ o P, with P the 0/1 map from old values to new
    ones, so nothing is recounted per unit. For set-valued data the values are the sets and
    k is replaced by c in each before alpha is recomputed with the set distance."""
    if o is not None:
        keep = [j for j in range(o.shape[0]) if j != k]
        merged = o.copy()
        merged[c, :] += merged[k, :]
        merged[:, c] += merged[:, k]
        return float(_alpha_from_o(merged[np.ix_(keep, keep)], "nominal"))
    cats = data.categories
    relabel = {cats[k]: cats[c]}
    new_values = [frozenset(relabel.get(v, v) for v in s) for s in data.values]
    distinct = list(dict.fromkeys(new_values))
    P = np.zeros((len(new_values), len(distinct)))
    P[np.arange(len(new_values)), [distinct.index(v) for v in new_values]] = 1.0
    return float(_alpha_from_o(P.T @ o_values @ P, distance, values=distinct))


def _judge(k, cats, coders, alpha, kappa, percent, n_k, n, units_with, uses, flags, ratio, share,
           prevalence, bias, top, top_share, has_top, omission, ps, minimum, min_units, set_valued,
           lower_bound=np.nan, bootstrapped=False, confidence_level=0.95):
    """Status, reason fragments, (paradox, explanation) and what was judged ("interval",
    "estimate" or "") for one code."""
    parts: list[str] = []
    explanation = ""
    paradox = False
    judged_on = ""
    users = [coders[i] for i in range(len(coders)) if uses[i] > 0]
    if n_k == 0:
        status = "undefined"
        if len(users) == 0:
            parts.append("not used by any coder")
        else:
            parts.append("never used on a unit that two or more coders coded")
        explanation = "Agreement on a code nobody applied to a shared unit is undefined (0/0)."
    elif n_k == n:
        status = "undefined"
        parts.append("applied to every value: no variation to agree on")
        explanation = ("When every coder applies the code to every unit, expected disagreement is "
                       "zero and chance-corrected agreement is undefined.")
    elif units_with < min_units:
        status = "too rare"
        parts.append(f"used on only {int(units_with)} shared unit{'s' if units_with != 1 else ''} "
                     f"(fewer than {min_units}): too rare to judge")
    elif not np.isfinite(alpha):
        status = "undefined"
        parts.append("alpha is undefined")
    elif minimum is None:
        status = "ok"
    elif np.isfinite(lower_bound):
        judged_on = "interval"
        level = _pct_level(confidence_level)
        if alpha < minimum:
            status = "below minimum"
        elif lower_bound >= minimum:
            status = "ok"
            parts.append(f"the one-sided {level} lower bound is at or above the minimum")
        else:
            status = "uncertain"
            parts.append(f"the estimate reaches the minimum but its one-sided {level} lower bound "
                         "is below it")
    else:
        judged_on = "estimate"
        why = "no bootstrap" if not bootstrapped else "no interval could be formed"
        if alpha < minimum:
            status = "below minimum"
            parts.append(f"estimate below the minimum ({why}: judged on the estimate alone)")
        else:
            status = "ok"
            parts.append(f"estimate at or above the minimum ({why}: judged on the estimate alone, "
                         "not on an interval)")
    if status == "undefined" and n_k == 0:
        return status, parts, (paradox, explanation), judged_on
    if len(users) == 1 and len(coders) > 1:
        parts.append(f"used by {users[0]} only")
    else:
        for i in range(len(coders)):
            if flags[i] and np.isfinite(ratio[i]) and ratio[i] > 0:
                against = "the others" if len(coders) > 2 else coders[1 - i]
                if flags[i] == "more" or len(coders) > 2:
                    parts.append(f"used by {coders[i]} {_ratio_text(ratio[i])} as often as {against}")
    if has_top and top_share >= _CONFUSION_REASON and status != "ok" and (set_valued or len(cats) > 2):
        parts.append(f"confused with {cats[top]} in {_fmt_pct(top_share)} of its disagreements")
    if set_valued and np.isfinite(omission) and omission >= 0.5 and status != "ok":
        parts.append(f"{_fmt_pct(omission)} of its disagreements are omissions (applied by one "
                     "coder, no alternative by the other)")
    chance = np.nanmin([alpha, kappa]) if np.isfinite(alpha) or np.isfinite(kappa) else np.nan
    causes = []
    if np.isfinite(prevalence) and abs(prevalence) >= _PARADOX_PREVALENCE:
        side = "absence" if prevalence < 0 else "presence"
        causes.append(f"the coders mostly agree on the code's {side} (prevalence index "
                      f"{_signed(prevalence)}), so high agreement is expected by chance alone")
    if np.isfinite(bias) and abs(bias) >= _PARADOX_BIAS:
        causes.append(f"the coders apply it at different rates (bias index {_signed(bias)})")
    if (minimum is not None and np.isfinite(percent) and np.isfinite(chance) and np.isfinite(ps)
            and percent >= minimum and ps >= minimum and chance < minimum and causes):
        paradox = True
        cause = "; ".join(causes)
        explanation = (f"Percent agreement is {_fmt_pct(percent)} but chance-corrected agreement is "
                       f"{format_value(chance, 'coefficient', 2)}: {cause}. When one coder applied the code, another applied it "
                       f"too in {_fmt_pct(ps) if np.isfinite(ps) else 'no'} of the pairs (specific "
                       "agreement). This is the kappa paradox (Feinstein & Cicchetti 1990): report "
                       "specific agreement beside the coefficient.")
        if status in ("below minimum", "uncertain"):
            parts.append(f"{_fmt_pct(percent)} raw agreement, mostly on absence"
                         if np.isfinite(prevalence) and prevalence <= -0.5
                         else f"{_fmt_pct(percent)} raw agreement but low chance-corrected agreement")
    if status == "below minimum" and not parts:
        parts.append("disagreement spread over several codes")
    if status == "ok" and not parts:
        parts.append("defined (no minimum given)")
    return status, parts, (paradox, explanation), judged_on


# =========================================================================================
# diagnose_coders
# =========================================================================================

def _level_of(data: CodingData, level: str | None, distance: str | None = None) -> str:
    if data.set_valued:
        return _set_distance(data, distance)
    level = level or data.level
    if level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="level")
    if level in ("interval", "ratio") and not data.is_numeric:
        raise AgreeError(f"the {level} level needs numeric values", code="level",
                         hint="use level='nominal' or 'ordinal'")
    return level


def diagnose_coders(data: Any, *, level: str | None = None, n_resamples: int = 1000,
                    seed: int | None = None, confidence_level: float = 0.95,
                    ci_method: str = "bca", distance: str | None = None,
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
      changes which units are pairable. The interval for Δ_i is a paired bootstrap: alpha and
      alpha_(-i) are recomputed on the same unit resamples. Needs three or more coders.
    - Code use: each coder's share of the units they coded that got each value (set-valued:
      each code), against the pooled share of the other coders.

    References
    ----------
    Krippendorff (2004); Cohen, J. (1960). Educational and Psychological Measurement, 20, 37-46.
    """
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, ci_method=ci_method)
    data = _check(data)
    kind = _level_of(data, level, distance)
    clusters, cluster_name = _cluster_labels(data, cluster)
    notes: list[Note] = []
    m = data.n_coders
    values = list(data.values)
    V = len(values)
    scores = data.scores if kind in ("interval", "ratio") else None
    args = dict(scores=scores, values=values)
    codes = data.codes

    def alpha_of(cols) -> float:
        return float(_alpha_from_o(_coincidence(_value_counts(codes[:, cols], V)), kind, **args))

    everyone = list(range(m))
    alpha = alpha_of(everyone)

    rows = []
    for i, j in itertools.combinations(range(m), 2):
        both = (codes[:, i] >= 0) & (codes[:, j] >= 0)
        nb = int(both.sum())
        table = np.bincount(codes[both, i] * V + codes[both, j], minlength=V * V).reshape(V, V)
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
        blocks = [_value_counts(pat.codes[:, cols], V) for cols in subsets]
        without = np.array([alpha_of(cols) for cols in subsets[1:]])
        pairable_without = [int((codes[:, cols] >= 0).sum(1).__ge__(2).sum()) for cols in subsets[1:]]

        def unit_o(r):
            mm = r.sum(1)
            ok = (mm >= 2)[:, None, None]
            with np.errstate(divide="ignore", invalid="ignore"):
                o = (r[:, :, None] * r[:, None, :] - r[:, :, None] * np.eye(V)) / (mm - 1)[:, None, None]
            return np.where(ok, o, 0.0).reshape(len(r), V * V)

        features = np.hstack([unit_o(blk) for blk in blocks])

        def finish(sums):
            o = sums.reshape(sums.shape[:-1] + (m + 1, V, V))
            a = _alpha_from_o(o, kind, **args)
            return a[..., 1:] - a[..., :1]

        names = [f"change in alpha without {c}" for c in data.coders]
        if clusters is not None:
            features, counts = features[pat.inverse], None
        else:
            counts = pat.counts
        low, high, _, boot_info, boot_notes, _ = _intervals(
            without - alpha, features, finish, n_resamples=n_resamples, seed=seed,
            confidence_level=confidence_level, ci_method=ci_method, counts=counts,
            clusters=clusters, cluster_name=cluster_name, labels=names)
        notes.extend(boot_notes)
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
    if data.set_valued:
        x = _presence(data)
        labels = list(data.categories)
    else:
        x = (codes[:, :, None] == np.arange(V)).astype(float)
        labels = values
    uses = x.sum(0)
    units = data.observed.sum(0).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = uses / units[:, None]
        share_others = (uses.sum(0)[None, :] - uses) / (units.sum() - units)[:, None]
        ratio = share / share_others
    use_rows = [{"coder": data.coders[i], "code": labels[k], "uses": uses[i, k],
                 "units_coded": units[i], "share": share[i, k], "share_others": share_others[i, k],
                 "ratio": ratio[i, k]} for i in range(m) for k in range(len(labels))]
    code_use = pd.DataFrame(use_rows, columns=["coder", "code", "uses", "units_coded", "share",
                                               "share_others", "ratio"])
    return CoderDiagnostics(pairwise=pairwise, leave_one_out=leave, code_use=code_use, alpha=alpha,
                            level=kind, coders=tuple(data.coders), n_units=data.n_units,
                            confidence_level=confidence_level, bootstrap=boot_info, notes=tuple(notes),
                            cluster=cluster_name,
                            n_clusters=None if clusters is None else int(len(np.unique(clusters))))
