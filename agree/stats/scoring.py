"""`score`: every standard coefficient for one data set, with one summary of what was used."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_RESAMPLES, FEW_UNITS
from agree.core.format import format_value, percent_label
from agree.core.model import LEVELS, AgreeError, CodingData, value_label
from agree.core.registry import display_name, family, skipped_by_reason, standard_set
from agree.core.results import AgreementResult, Note, json_safe, reaches_minimum
from agree.core.seeds import draw_seed
from agree.stats import coefficients as coef


@dataclass(frozen=True)
class ScoreResult:
    """All coefficients for one data set and the account of the units and values used."""

    coefficients: Mapping[str, AgreementResult]
    level: str
    coders: tuple[str, ...]
    units_read: int
    units_used: int
    units_left_out: tuple[str, ...]   # ids of the units left out (empty for weighted data: rows are not units)
    values_read: int
    values_missing: int
    values_used: int
    n_categories: int
    categories: tuple[str, ...]
    n_resamples: int
    seed: int | None
    ci_method: str
    confidence_level: float
    minimum: float | None
    resampled: str = "unit"     # "unit", or "cluster:<column>" when whole groups were resampled
    skipped: Mapping[str, str] = field(default_factory=dict)
    warnings: tuple[Note, ...] = ()
    read: Mapping[str, Any] | None = None

    @property
    def primary(self) -> str:
        """The coefficient decisions are made on: Krippendorff's alpha when computed."""
        for name in ("krippendorff_alpha", "cohen_kappa", "fleiss_kappa"):
            if name in self.coefficients:
                return name
        return next(iter(self.coefficients), "")

    def decision(self) -> dict[str, Any] | None:
        """Against the minimum: the one-sided lower bound and how it was made, whether it clears
        the minimum (strictly above it: `agree.core.results.reaches_minimum`), the p-value of
        the coefficient at or below the minimum from the same draws, the units whose values
        differ, and the sentence saying so (None without a minimum)."""
        if self.minimum is None or self.primary not in self.coefficients:
            return None
        from agree.core.format import bound_method, decision_sentence

        r = self.coefficients[self.primary]
        bound = r.lower_bound if r.lower_bound is not None and math.isfinite(r.lower_bound) else None
        return json_safe({
            "coefficient": self.primary, "minimum": self.minimum, "estimate": r.estimate, "lower_bound": bound,
            "bound": None if bound is None else
            f"one-sided {percent_label(self.confidence_level)} lower bound ({bound_method(r)})",
            "clears_minimum": reaches_minimum(bound, self.minimum),
            "rule": "clears = lower bound strictly above the minimum",
            "p_value_min": r.p_value_min, "disagreeing_units": r.details.get("disagreeing_units"),
            "sentence": decision_sentence(r, self.minimum),
        })

    def to_dict(self) -> dict[str, Any]:
        return {
            "units": {"read": self.units_read, "used": self.units_used,
                      "left_out": self.units_read - self.units_used,
                      "left_out_reason": "fewer than two coders coded these units",
                      "left_out_ids": list(self.units_left_out)},
            "values": {"read": self.values_read, "missing": self.values_missing, "used": self.values_used},
            "coders": list(self.coders),
            "level": self.level,
            "categories": list(self.categories),
            "coefficients": {k: v.to_dict() for k, v in self.coefficients.items()},
            "skipped": dict(self.skipped),
            "bootstrap": {"replicates": self.n_resamples, "seed": self.seed, "method": self.ci_method,
                          "confidence_level": self.confidence_level, "unit": self.resampled},
            "minimum": self.minimum,
            "decision": self.decision(),
            "warnings": [w.to_dict() for w in self.warnings],
            "read": None if self.read is None else dict(self.read),
        }

    def to_frame(self):
        """One row per coefficient (pandas DataFrame), named for people."""
        import pandas as pd

        return pd.DataFrame([{
            "coefficient": display_name(name), "estimate": r.estimate, "se": r.se, "ci_low": r.ci_low,
            "ci_high": r.ci_high, "lower_bound": r.lower_bound, "p_value_min": r.p_value_min,
            "n_units": r.n_units, "weights": r.weights or ("" if family(name) in ("alpha", "percent") else "unweighted"),
            "se_method": r.se_method, "ci_method": r.ci_method} for name, r in self.coefficients.items()])

    def _view(self) -> tuple[str, Any, list[str]]:
        """Summary line, table and notes, for the notebook and the repr."""
        summary = (f"{self.units_used} of {self.units_read} units used, {len(self.coders)} coders "
                   f"({', '.join(self.coders)}), level {self.level}; {percent_label(self.confidence_level)} intervals"
                   + (f" from {self.n_resamples:,} bootstrap replicates ({self.ci_method}, {self.resampled}), seed "
                      f"{self.seed}" if self.n_resamples else ", analytic"))
        notes = [w.message for w in self.warnings]
        notes += [f"Not computed, {', '.join(map(display_name, names))}: {reason}"
                  for reason, names in skipped_by_reason(self.skipped).items()]
        decision = self.decision()
        if decision is not None:
            notes.insert(0, "Decision: " + decision["sentence"] + ".")
        return summary, self.to_frame(), notes

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        summary, frame, notes = self._view()
        return notebook_text("ScoreResult", summary, frame, notes=notes,
                             columns=["coefficient", "estimate", "se", "ci_low", "ci_high", "lower_bound"])

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        summary, frame, notes = self._view()
        return notebook_html(summary, frame, notes=notes)


def score(data: Any, *, level: str | None = None, minimum: float | None = None, n_resamples: int = DEFAULT_RESAMPLES,
          seed: int | None = None, confidence_level: float = DEFAULT_CONFIDENCE, ci_method: str = DEFAULT_CI_METHOD,
          cluster: Any = None, categories: Any = None, distance: str | None = None,
          progress: Any = None) -> ScoreResult:
    """Compute every standard coefficient that fits the data and the level of measurement.

    The standard set is the registry's (`agree.core.registry.standard_set`). Nominal data:
    percent agreement, Cohen's kappa (two coders), Scott's pi, Fleiss', Conger's and
    Brennan–Prediger kappa, Gwet's AC1 and Krippendorff's alpha. Ordinal, interval and ratio
    data add linear and quadratic weighted kappa (two coders) and AC2 (quadratic weights),
    and alpha uses the level's metric. Sets of codes get percent agreement (equal sets) and
    alpha with the MASI (default) or Jaccard distance. A coefficient the design rules out
    (Cohen's and the weighted kappas beyond two coders, Conger's kappa with rotating coders,
    fewer than two categories) is listed in `skipped` with the reason.

    Every coefficient uses the same seed, so the run repeats exactly. Units with fewer
    than two values are left out of every coefficient and named in the result.
    `progress`, if given, is called as progress(name, fraction_done) before each coefficient.

    Warnings (``warnings``): "few-units" below 30 units with two or more values (common practice);
    "prevalence-skew" when percent agreement is at least .80 while alpha, kappa or Fleiss' kappa
    is below .67 and one category takes at least 60% of the values (the prevalence paradox of
    Feinstein & Cicchetti 1990; the cut-offs are ours, only to decide when to say it); undefined
    coefficients; and data-wide notes from the coefficients (few clusters, an alphabetical scale
    order, asymmetric weights, clipped normal-approximation intervals).
    """
    d = coef._prepare(data, categories, single=False)
    level = level or d.level or "nominal"
    if level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="level")
    if d.set_valued:
        level_label = f"sets of codes ({distance or 'masi'} distance)"
    else:
        level_label = level
    if seed is None:
        seed = draw_seed()
    opts = dict(confidence_level=confidence_level, n_resamples=n_resamples, ci_method=ci_method, seed=seed,
                minimum=minimum, cluster=cluster)
    results: dict[str, AgreementResult] = {}
    skipped: dict[str, str] = {}
    # the registry's standard rows for this design; each names the function that computes it
    design = {"level": "nominal" if d.set_valued else level, "distance": distance}
    planned = standard_set(level, set_valued=d.set_valued)
    for i, row in enumerate(planned):
        if progress is not None:
            progress(row.name, i / len(planned))
        kw = {**row.kwargs, **{k: design[k] for k in row.score_options}}
        try:
            results[row.name] = getattr(coef, row.function)(d, **opts, **kw)
        except AgreeError as exc:
            if exc.code not in row.refuses:
                raise
            skipped[row.name] = exc.message
    if d.set_valued:
        skipped["kappa family"] = ("kappa-type coefficients need one code per unit and coder; "
                                   "analyse each code as present/absent with `agree codes`")

    per_unit = (d.codes >= 0).sum(axis=1)  # once for every count below
    # rows of weighted data (pattern counts) are not units: their ids name no unit left out
    left = d.unit_ids[per_unit < 2] if d.weights is None else d.unit_ids[:0]
    used = per_unit >= 2
    uw = d.unit_weights()  # rows of weighted data stand for several units
    warnings = _score_warnings(d, results, int(uw[used].sum()))
    rep = d.report.to_dict() if d.report is not None else None
    return ScoreResult(
        coefficients=results, level=level_label, coders=d.coders, units_read=d.units_represented,
        units_used=int(uw[used].sum()), units_left_out=tuple(str(u) for u in left),
        values_read=int(uw @ per_unit), values_missing=int(uw @ (d.n_coders - per_unit)),
        values_used=int(uw[used] @ per_unit[used]), n_categories=len(d.values),
        categories=tuple(value_label(v) for v in d.values), n_resamples=int(n_resamples),
        seed=seed if n_resamples else None, ci_method=ci_method, confidence_level=confidence_level,
        minimum=minimum, resampled=f"cluster:{cluster}" if isinstance(cluster, str) else
        ("cluster" if cluster is not None else "unit"), skipped=skipped, warnings=tuple(warnings), read=rep)


def _score_warnings(d: CodingData, results: Mapping[str, AgreementResult], n_used: int) -> list[Note]:
    notes: list[Note] = []
    if n_used < FEW_UNITS:
        notes.append(Note("few-units", f"Only {n_used} units have two or more values; intervals are wide and "
                          f"benchmarks such as .800 are hard to judge on so few units (fewer than {FEW_UNITS} is "
                          "a common-practice warning level)."))
    pa = results.get("percent_agreement")
    chance = [results[k] for k in ("krippendorff_alpha", "cohen_kappa", "fleiss_kappa") if k in results]
    if not d.set_valued and d.codes.size:
        seen = d.codes >= 0
        if d.weights is None:
            shares = np.bincount(d.codes[seen], minlength=len(d.values)) / max(int(seen.sum()), 1)
        else:
            row_w = np.broadcast_to(d.weights[:, None], d.codes.shape)
            shares = np.bincount(d.codes[seen], weights=row_w[seen], minlength=len(d.values)) / max(row_w[seen].sum(), 1)
        top = float(shares.max()) if len(shares) else 0.0
        low_chance = [r for r in chance if r.defined and r.estimate < 0.67]
        if pa is not None and pa.defined and pa.estimate >= 0.8 and low_chance and top >= 0.6:
            notes.append(Note("prevalence-skew",
                              f"Percent agreement is high ({format_value(pa.estimate)}) but {low_chance[0].name} is low "
                              f"({format_value(low_chance[0].estimate)}): one category takes {percent_label(top, 0)} of all values, so "
                              "chance agreement is high and kappa-type coefficients are pulled down (the "
                              "prevalence paradox, Feinstein & Cicchetti 1990). Report both, with the "
                              "per-code diagnostics."))
    for r in results.values():
        notes.extend(w for w in r.warnings if w.code == "undefined")
    once = {}  # warnings that concern the data, not one coefficient: shown once
    for r in results.values():
        for w in r.warnings:
            if w.code in ("few-clusters", "alphabetical-order", "codebook-row-order", "asymmetric-weights",
                          "interval-clipped"):
                once.setdefault(w.code, w)
    notes.extend(once.values())
    return notes
