"""The results of the diagnostics: per code (`CodeDiagnostics`) and per coder (`CoderDiagnostics`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
import pandas as pd

from agree.core.format import format_value
from agree.core.model import AgreeError
from agree.core.results import BootstrapInfo, Note, json_safe
from agree.stats.kernels import SET_DISTANCES

#: Status of a code, worst first (the order used to rank codes).
STATUSES = ("below minimum", "uncertain", "too rare", "undefined", "ok")


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
          (what the status compares with the minimum); ``p_value_min``: the one-sided p-value of
          alpha at or below the minimum from the same draws (the bound is above the minimum
          exactly when it is below 1 - the confidence level).
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
        - ``usage_test`` ("mcnemar exact", "mcnemar chi-square", "clustered mcnemar",
          "cochran q" or None),
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
        ``units_coded``, ``share``, ``share_others`` (the other coders' pooled share),
        ``share_median_others`` (the median of the other coders' shares), ``ratio``
        (share / share_median_others), ``test``, ``p_value``, ``p_holm`` (the p at which the
        coder differs from a strict majority of the others, see :func:`diagnose_codes`),
        ``flag`` ("more", "less" or "").
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

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        summary, frame = self._view()
        return notebook_text("CodeDiagnostics", summary, frame, notes=[n.message for n in self.notes],
                             columns=["rank", "code", "status", "alpha", "ci_low", "ci_high", "lower_bound"])

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        summary, frame = self._view()
        shown = ["rank", "code", "status", "alpha", "ci_low", "ci_high", "lower_bound", "specific_agreement",
                 "kappa", "units_with_code", "top_confusion", "reason"]
        return notebook_html(summary, frame[shown], notes=[n.message for n in self.notes])

    def _view(self) -> tuple[str, pd.DataFrame]:
        frame = self.to_frame()
        counts = frame["status"].value_counts()
        statuses = ", ".join(f"{int(counts[s])} {s}" for s in STATUSES if s in counts)
        minimum = "no minimum" if self.minimum is None else f"minimum {format_value(self.minimum, 'threshold')}"
        summary = (f"Code diagnostics: {len(frame)} codes, {len(self.coders)} coders, "
                   f"{self.n_pairable_units} of {self.n_units} units pairable; "
                   f"overall α = {_display(self.alpha)} ({self.alpha_label}); {minimum}: {statuses}.")
        return summary, frame

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
        ``units_coded``, ``share``, ``share_others`` (pooled), ``share_median_others``,
        ``ratio`` (share / share_median_others).
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

    def _summary(self) -> str:
        return (f"Coder diagnostics: {len(self.coders)} coders, {self.n_units} units; "
                f"α = {_display(self.alpha)} ({self.level_label}).")

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        return notebook_text("CoderDiagnostics", self._summary(), self.to_frame(),
                             notes=[n.message for n in self.notes],
                             columns=["coder", "units_coded", "alpha_without", "delta", "delta_ci_low",
                                      "delta_ci_high", "mean_alpha"])

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        return notebook_html(self._summary(), self.to_frame(), notes=[n.message for n in self.notes])

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
    """A coefficient for a summary line (three decimals, no leading zero; NaN as an en dash)."""
    return format_value(x, "coefficient")


def _nanmean(x) -> float:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    return float(x.mean()) if x.size else float("nan")
