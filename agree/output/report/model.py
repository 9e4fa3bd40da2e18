"""The report's result objects: `Report` (one variable's figures, raw numbers) and its parts.

Everything here is data: `agree.output.report.build` computes it, the renderers format it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from agree.core.format import plain
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
            "settings": {"level": self.level, "minimum": self.minimum,
                         "minimum_default": self.minimum_default,
                         "confidence_level": self.confidence_level, "n_resamples": self.n_resamples,
                         "seed": self.seed, "digits": self.digits, "cluster": self.cluster,
                         "n_clusters": self.n_clusters},
            "per_code_skipped": self.per_code_skipped or None,
            "sample": self.sample.to_dict(),
            "primary": self.primary,
            "coefficients": [r.to_dict() for r in self.coefficients],
            "skipped": dict(self.skipped),
            "per_code": [dict(r) for r in self.per_code],
            "confused_pairs": [dict(r) for r in self.confused_pairs],
            "confusion": None if self.confusion is None else self.confusion.to_dict(),
            "code_use": None if self.code_use is None else self.code_use.to_dict(),
            "consensus": None if self.consensus is None else self.consensus.to_dict(),
            "rounds": None if self.rounds is None else self.rounds.to_dict(),
            "analysed_round": self.analysed_round,
            "methods": plain(self.methods),
            "interpretation": [plain(p) for p in self.interpretation],
            "cautions": [plain(c) for c in self.cautions],
            "warnings": [w.to_dict() for w in self.warnings],
        })

    def _repr_html_(self) -> str:
        return render_html(self, standalone=False)


