"""The report's result objects: `Report` (one variable's figures, raw numbers) and its parts.

Everything here is data: `agree.output.report.build` computes it, the renderers format it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from agree.core.format import notebook_text, plain
from agree.core.registry import display_name
from agree.core.results import AgreementResult, Note, json_safe
from agree.output.report.html import render_html

@dataclass(frozen=True)
class SampleSummary:
    """How many units and values went in, and what was left out and why."""

    units_read: int
    units_used: int                 # coded by at least two coders
    units_left_out: int             # coded by fewer than two coders
    units_partial: int              # used, but coded by fewer than all coders
    n_coders: int
    coders: tuple[str, ...]
    values_per_coder: tuple[int, ...]
    values_read: int
    values_missing: int
    corpus_size: int | None = None
    units_double_coded: int | None = None   # over every round, when the data have rounds
    reader_left_out: tuple[str, ...] = ()
    files: tuple[str, ...] = ()
    checksums: Mapping[str, str] = field(default_factory=dict)

    @property
    def share_of_corpus(self) -> float | None:
        coded = self.units_read if self.units_double_coded is None else self.units_double_coded
        return None if not self.corpus_size else coded / self.corpus_size

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "units_read": self.units_read, "units_used": self.units_used,
            "units_left_out": self.units_left_out, "units_partial": self.units_partial,
            "n_coders": self.n_coders, "coders": list(self.coders),
            "values_per_coder": list(self.values_per_coder), "values_read": self.values_read,
            "values_missing": self.values_missing, "corpus_size": self.corpus_size,
            "units_double_coded": self.units_double_coded,
            "share_of_corpus": self.share_of_corpus, "reader_left_out": list(self.reader_left_out),
            "files": list(self.files), "checksums": dict(self.checksums),
        })


@dataclass(frozen=True)
class ConsensusSummary:
    """How disagreements were resolved in the final data: units per source."""

    n_units: int
    by_source: Mapping[str, int]
    units_not_in_data: int = 0
    data_units_missing: int = 0
    file: str | None = None
    by_method: Mapping[str, int] = field(default_factory=dict)   # "how decided": units per way
    decided_without_method: int = 0                               # decided units with no "how decided"

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"n_units": self.n_units, "by_source": dict(self.by_source),
                       "by_method": dict(self.by_method),
                       "decided_without_method": self.decided_without_method,
                       "units_not_in_data": self.units_not_in_data,
                       "data_units_missing": self.data_units_missing, "file": self.file})


@dataclass(frozen=True)
class CrossTable:
    """A labelled table of counts (a confusion table or code use per coder)."""

    rows: tuple[str, ...]
    columns: tuple[str, ...]
    counts: tuple[tuple[float, ...], ...]
    row_title: str
    column_title: str
    source: str

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"rows": list(self.rows), "columns": list(self.columns),
                       "counts": [list(r) for r in self.counts], "row_title": self.row_title,
                       "column_title": self.column_title, "source": self.source})


@dataclass(frozen=True)
class CoderSummary:
    """The coders compared, from `agree.analysis.diagnostics.diagnose_coders` (raw numbers).

    pairs : one record per pair of coders: ``coder_a``, ``coder_b``, ``n_units`` (units both
        coded), ``percent_agreement``, ``kappa`` (Cohen's, unweighted), ``alpha`` (at ``level``).
    leave_one_out : one record per coder: ``coder``, ``alpha_without``, ``delta``
        (``alpha_without`` minus α of all coders: positive when the coder lowers agreement),
        ``delta_ci_low``, ``delta_ci_high`` (paired bootstrap), ``n_pairable_units``; empty with
        fewer than three coders.
    alpha : α of all coders at ``level``; level : the level or set distance used.
    bootstrap : whether the leave-one-out intervals come from bootstrap resamples.
    """

    pairs: tuple[Mapping[str, Any], ...]
    leave_one_out: tuple[Mapping[str, Any], ...]
    alpha: float
    level: str
    confidence_level: float
    bootstrap: bool = False

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"pairs": [dict(r) for r in self.pairs],
                          "leave_one_out": [dict(r) for r in self.leave_one_out], "alpha": self.alpha,
                          "level": self.level, "confidence_level": self.confidence_level,
                          "bootstrap": self.bootstrap})


@dataclass(frozen=True, eq=False)
class Report:
    """Everything a report shows, with raw (unrounded) numbers.

    Attributes
    ----------
    title : the report's title.
    level : the level of measurement as analysed (a label, e.g. "nominal").
    minimum, confidence_level, n_resamples, seed : the settings used.
    digits : decimals shown for coefficients in every format.
    sample : units and values read, used and left out.
    coefficients : one AgreementResult per coefficient, the primary one first.
    primary : the name of the coefficient the methods paragraph leads with.
    skipped : coefficients not computed, with the reason.
    per_code : one record per code from the diagnostics (raw values).
    confused_pairs : records of the most confused code pairs.
    confusion : the confusion table behind the heat map.
    code_use : units per code (columns) and coder (rows).
    consensus : how disagreements were resolved, when a consensus file was given.
    rounds : agreement per coding round, when the data have rounds.
    analysed_round : the round the main figures describe, when the data have rounds.
    methods : the methods paragraph (markup).
    interpretation : interpretation paragraphs (markup).
    cautions : the usual cautions (markup).
    warnings : notes from the computations.
    minimum_default : True when no minimum was given and the default .800 was used.
    per_code_skipped : why the per-code section was left out (rating scales), else "".
    cluster, n_clusters : the column whose groups were resampled whole and how many groups
        (in the data the figures describe); None when units were resampled.
    coders : the per-coder diagnostics (`agree.analysis.diagnostics.diagnose_coders`): agreement
        of each pair of coders and α with each coder left out; None when not computed.
    set_valued : True when units carry sets of codes (several codes per unit).
    variable : the variable's name when the report is one section of a `StudyReport`, else None.
    unit : what a unit is, when the data say it (the view of highlighted passages), else None.
    """

    title: str
    level: str
    minimum: float
    confidence_level: float
    n_resamples: int
    seed: int | None
    digits: int
    sample: SampleSummary
    coefficients: tuple[AgreementResult, ...]
    primary: str
    skipped: Mapping[str, str]
    per_code: tuple[Mapping[str, Any], ...]
    confused_pairs: tuple[Mapping[str, Any], ...]
    confusion: CrossTable | None
    code_use: CrossTable | None
    consensus: ConsensusSummary | None
    rounds: Any | None
    analysed_round: str | None
    methods: str
    interpretation: tuple[str, ...]
    cautions: tuple[str, ...]
    warnings: tuple[Note, ...]
    minimum_default: bool = False
    per_code_skipped: str = ""
    cluster: str | None = None
    n_clusters: int | None = None
    coders: CoderSummary | None = None
    set_valued: bool = False
    variable: str | None = None
    unit: str | None = None
    _figures: dict = field(default_factory=dict, init=False, repr=False, compare=False)  # figure cache

    @property
    def primary_result(self) -> AgreementResult | None:
        for r in self.coefficients:
            if r.name == self.primary:
                return r
        return None

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "title": self.title,
            "variable": self.variable,
            "settings": {"level": self.level, "set_valued": self.set_valued, "minimum": self.minimum,
                         "minimum_default": self.minimum_default,
                         "confidence_level": self.confidence_level, "n_resamples": self.n_resamples,
                         "seed": self.seed, "digits": self.digits, "cluster": self.cluster,
                         "n_clusters": self.n_clusters, "unit": self.unit},
            "per_code_skipped": self.per_code_skipped or None,
            "sample": self.sample.to_dict(),
            "primary": self.primary,
            "coefficients": [r.to_dict() for r in self.coefficients],
            "skipped": dict(self.skipped),
            "per_code": [dict(r) for r in self.per_code],
            "confused_pairs": [dict(r) for r in self.confused_pairs],
            "confusion": None if self.confusion is None else self.confusion.to_dict(),
            "code_use": None if self.code_use is None else self.code_use.to_dict(),
            "coders": None if self.coders is None else self.coders.to_dict(),
            "consensus": None if self.consensus is None else self.consensus.to_dict(),
            "rounds": None if self.rounds is None else self.rounds.to_dict(),
            "analysed_round": self.analysed_round,
            "methods": plain(self.methods),
            "interpretation": [plain(p) for p in self.interpretation],
            "cautions": [plain(c) for c in self.cautions],
            "warnings": [w.to_dict() for w in self.warnings],
        })

    def _summary(self) -> str:
        name = f"{self.variable}: " if self.variable else ""
        return (f"{self.title} — {name}{self.sample.units_used} of {self.sample.units_read} units used, "
                f"{self.sample.n_coders} coders, level {self.level}, minimum {self.minimum:g}")

    def __repr__(self) -> str:
        return notebook_text("Report", self._summary(), coefficient_frame(self.coefficients),
                             notes=[w.message for w in self.warnings])

    def _repr_html_(self) -> str:
        return render_html(self, standalone=False)




@dataclass(frozen=True)
class Variable:
    """One coded variable of a study, for `build_study_report`: its data and what is its own.

    data : CodingData, DataFrame or array (units x coders); None with `rounds` as a mapping.
    level : its level of measurement (default the data's).
    consensus : its consensus file or table (see `build_report`).
    rounds, codebooks, drift_round, analysed_round : its coding rounds (see `build_report`).
    corpus_size : units in its corpus, when it differs from the study's.
    """

    data: Any = None
    level: str | None = None
    consensus: Any = None
    rounds: Any = None
    codebooks: Mapping[str, Any] | None = None
    drift_round: str | None = None
    analysed_round: str | None = None
    corpus_size: int | None = None


@dataclass(frozen=True, eq=False)
class StudyReport:
    """One report for a study with several coded variables: a section per variable (a `Report`
    each, in the order given) and one methods paragraph covering them all.

    Attributes
    ----------
    title : the report's title.
    sections : one `Report` per variable; each one's `variable` is its name.
    methods : the methods paragraph for the whole study (markup).
    cautions : the usual cautions, naming the coefficients any section shows (markup).
    minimum, minimum_default, confidence_level, n_resamples, seed, digits, cluster : the settings
        every section shares.
    """

    title: str
    sections: tuple[Report, ...]
    methods: str
    cautions: tuple[str, ...]
    minimum: float
    minimum_default: bool
    confidence_level: float
    n_resamples: int
    seed: int | None
    digits: int
    cluster: str | None = None

    @property
    def variables(self) -> tuple[str, ...]:
        """The variables' names, in order."""
        return tuple(str(r.variable) for r in self.sections)

    def section(self, name: str) -> Report:
        """The section of the variable `name`."""
        for r in self.sections:
            if r.variable == name:
                return r
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "title": self.title,
            "settings": {"minimum": self.minimum, "minimum_default": self.minimum_default,
                         "confidence_level": self.confidence_level, "n_resamples": self.n_resamples,
                         "seed": self.seed, "digits": self.digits, "cluster": self.cluster},
            "variables": list(self.variables),
            "methods": plain(self.methods),
            "cautions": [plain(c) for c in self.cautions],
            "sections": [r.to_dict() for r in self.sections],
        })

    def __repr__(self) -> str:
        return notebook_text("StudyReport", f"{self.title} — {len(self.sections)} variables",
                             coefficient_frame([r.primary_result for r in self.sections
                                                if r.primary_result is not None],
                                               [r.variable for r in self.sections if r.primary_result is not None]))

    def _repr_html_(self) -> str:
        return render_html(self, standalone=False)


def coefficient_frame(results: Any, variables: Any = None) -> Any:
    """Coefficients as a small table (coefficient, estimate, interval, units), for the reprs."""
    import pandas as pd

    rows = [{"coefficient": display_name(r.name), "estimate": r.estimate, "ci_low": r.ci_low,
             "ci_high": r.ci_high, "n_units": r.n_units} for r in results]
    frame = pd.DataFrame(rows, columns=["coefficient", "estimate", "ci_low", "ci_high", "n_units"])
    if variables is not None:
        frame.insert(0, "variable", list(variables))
    return frame
