"""Reports: one result object (`Report`), one formatting function, four formats.

`build_report` computes everything a report shows (coefficients, per-code diagnostics,
confusion and code-use tables, rounds, the consensus summary) and keeps the raw numbers in a
frozen `Report`. `write_report` renders it as HTML, Markdown, DOCX or LaTeX. Every number in
every format goes through `agree.core.format.format_value`, applied once per table by
`report_tables`, so the formats cannot disagree with each other or with `Report.to_dict()`.

Text is written in a tiny markup shared by all formats: ``*N*`` is an italic symbol and
``[[...]]`` a placeholder the author must fill in (shown highlighted, never invented).

Typography follows APA 7: Latin-letter statistical symbols in italics (*N*, *n*, *SE*, *p*),
Greek letters upright (α, κ, π), no leading zero for values that cannot exceed 1
(coefficients, probabilities), confidence intervals in brackets.

References
----------
American Psychological Association (2020). Publication Manual (7th ed.), sections 6.36-6.46.
Krippendorff, K. (2004). Content Analysis: An Introduction to Its Methodology (2nd ed.). Sage.
Landis, J. R., & Koch, G. G. (1977). The measurement of observer agreement for categorical
    data. Biometrics, 33(1), 159-174.
Lombard, M., Snyder-Duch, J., & Bracken, C. C. (2002). Content analysis in mass communication:
    Assessment and reporting of intercoder reliability. Human Communication Research, 28(4).
Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low kappa: I. J. Clin.
    Epidemiol., 43(6), 543-549.
"""

from __future__ import annotations

import base64
import html
import io
import math
import os
import re
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.core.constants import VERSION
from agree.core.files import atomic_write_bytes, make_folder
from agree.core.format import format_bound, format_interval, format_value, lit, notebook_html, plain, spans  # noqa: F401
from agree.core.format import result_label as format_result_label
from agree.core.model import AgreeError, CodingData, as_coding_data, normalise_value, require_unit_rows
from agree.core.registry import coefficient, family, skipped_by_reason
from agree.core.results import AgreementResult, Note, json_safe
from agree.io.lists import read_consensus

Progress = Callable[[str, float], None]

TENTATIVE = 0.667
DEFAULT_MINIMUM = 0.8            # Krippendorff's (2004) convention, used when no minimum is given
HOW_DECIDED = "how decided"      # column of `agree reconcile`'s consensus file (agree.output.reconciliation.HOW)
HOW_ORDER = ("discussion", "adjudicator", "majority")
PLACEHOLDER_NOTE = "Bracketed, highlighted text is for you to fill in; edit the wording freely."

# ----------------------------------------------------------------------------------------
# markup: *italic symbol*, [[placeholder]]; literal text goes through lit()


# ----------------------------------------------------------------------------------------
# names of coefficients, in markup: from the registry (agree.core.registry)

INTERVAL_METHODS = {
    "bca": "bias-corrected and accelerated (BCa) bootstrap",
    "percentile": "percentile bootstrap",
    "wilson": "Wilson score interval",
    "wald": "normal-approximation (Wald) interval from the analytic standard error",
    "t": "t interval from the analytic standard error",
}


def coefficient_label(name: str, *, in_sentence: bool = False) -> str:
    """The coefficient's name as a reader expects it, in markup ("Krippendorff's α")."""
    row = coefficient(name)
    label = row.label if row is not None else lit(name.replace("_", " "))
    return label if in_sentence else label[:1].upper() + label[1:]


def result_label(result: AgreementResult, level: str = "nominal", *, in_sentence: bool = False) -> str:
    """The coefficient's name with alpha's metric or the weights, so the choice is never hidden
    ("(unweighted)" for a coefficient computed without weights on ordinal, interval or ratio
    data), in markup: the words of the CLI's name (`agree.core.format.result_label`)."""
    return format_result_label(result, level, markup=True, in_sentence=in_sentence)


def landis_koch(value: float) -> str:
    """Landis & Koch (1977) band of a kappa-type value (the authors call the bands arbitrary)."""
    if value < 0:
        return "poor"
    for upper, label in ((0.20, "slight"), (0.40, "fair"), (0.60, "moderate"), (0.80, "substantial")):
        if value <= upper:
            return label
    return "almost perfect"


def krippendorff_band(estimate: float, lower: float | None, minimum: float) -> str:
    """Where an α stands against the minimum and Krippendorff's .667: one of "reliable"
    (`lower` at or above the minimum; the report passes the one-sided lower bound, as
    ``agree score --min``), "estimate-only" (the estimate reaches it, the bound does not), "tentative" (.667 up to the minimum), "below", "undefined"."""
    if estimate is None or not math.isfinite(estimate):
        return "undefined"
    if estimate >= minimum:
        return "reliable" if lower is not None and math.isfinite(lower) and lower >= minimum else "estimate-only"
    if estimate >= TENTATIVE:
        return "tentative"
    return "below"


BAND_TEXT = {
    "reliable": "meets the minimum (one-sided lower bound at or above it)",
    "estimate-only": "estimate at or above the minimum, one-sided lower bound below it",
    "tentative": "tentative (.667 up to the minimum)",
    "below": "below .667",
    "undefined": "undefined",
}


# ----------------------------------------------------------------------------------------
# the result object


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


# ----------------------------------------------------------------------------------------
# building


def build_report(data: Any, *, level: str | None = None, minimum: float | None = None,
                 n_resamples: int = 2000, seed: int | None = None, confidence_level: float = 0.95,
                 corpus_size: int | None = None, consensus: Any = None, rounds: Any = None,
                 round_column: str = "round", codebooks: Mapping[str, Any] | None = None,
                 drift_round: str | None = None, analysed_round: str | None = None,
                 title: str = "Intercoder agreement", digits: int = 2, cluster: str | None = None,
                 progress: Progress | None = None) -> Report:
    """Compute everything an agreement report shows.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders). With `rounds` given as a
        {round: data} mapping, None means the last full round's data.
    level : level of measurement ("nominal", "ordinal", "interval", "ratio"); default the data's.
    minimum : the minimum acceptable agreement. None (default) uses .800, Krippendorff's
        convention; the settings line says that it was the default (the methods paragraph
        states the minimum with a placeholder for the reason, as for a given one).
    n_resamples, seed, confidence_level : the bootstrap settings (recorded in the report).
    corpus_size : the number of units in the whole corpus, to state the share double-coded.
    consensus : a consensus file (path) or DataFrame with a "source" column (agreed, decided,
        majority, unresolved) and a unit id column; its counts by source go in the report.
    rounds : None to analyse rounds when `data` has a `round_column`; a RoundsResult (or a
        {round: data} mapping) to include; False for none. When rounds come from the data's
        own column, the main figures describe the last round not marked as `drift_round`.
    codebooks, drift_round : passed to `compare_rounds`.
    analysed_round : the round `data` holds, when `rounds` are given separately (stated in the
        methods paragraph).
    title, digits : the report's title and the decimals shown for coefficients.
    cluster : the name of a kept per-unit column (e.g. the document or interview): every
        bootstrap (coefficients, per-code diagnostics, rounds) resamples its groups whole, and
        the methods paragraph says so.
    progress : optional callback(step, fraction done), for a progress bar.

    Returns
    -------
    Report

    Raises
    ------
    AgreeError
        "empty" when there are no units (or no coded values) to analyse; "boot", "ci" or
        "minimum" for settings out of range (as :func:`agree.score`).
    """
    from agree.analysis.rounds import RoundsResult, compare_rounds
    from agree.stats.resampling import check_settings
    from agree.stats.scoring import score

    tick = progress or (lambda step, done: None)
    minimum_default = minimum is None
    if minimum is None:
        minimum = DEFAULT_MINIMUM
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum)
    if corpus_size is not None and corpus_size < 1:
        raise AgreeError(f"corpus size must be a positive number of units; got {corpus_size}",
                         code="corpus-size")
    rounds_result = None
    if seed is None:
        # one recorded seed for every part (coefficients, per-code diagnostics, rounds), so a
        # round's per-code figures equal the per-code table of that round
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    round_opts = dict(level=level, minimum=minimum, n_resamples=n_resamples, seed=seed,
                      confidence_level=confidence_level, codebooks=codebooks, drift_round=drift_round,
                      cluster=cluster, progress=lambda step, done: tick(step, 0.2 * done))
    if isinstance(rounds, Mapping):
        tick("rounds", 0.0)
        parts = dict(rounds)
        rounds = compare_rounds(parts, **round_opts)
        if data is None:
            data = parts[rounds.final_round]
            analysed_round = rounds.final_round
    if data is None:
        raise AgreeError("no data to report on", code="no-input")
    d = as_coding_data(data)
    require_unit_rows(d, "the report")
    if d.n_units == 0 or not d.observed.any():
        raise AgreeError("no units to analyse" if d.n_units == 0 else
                         f"no units to analyse: none of the {d.n_units} units has a coded value",
                         hint="check that the data have one row per unit and one column per coder",
                         code="empty")
    if isinstance(rounds, RoundsResult):
        rounds_result = rounds
    elif rounds is None or rounds is True or isinstance(rounds, str):
        column = rounds if isinstance(rounds, str) else round_column
        if column in d.columns:
            tick("rounds", 0.0)
            rounds_result = compare_rounds(d, round_column=column, **round_opts)
            analysed_round = rounds_result.final_round
            labels = np.asarray(d.columns[column]).astype(str)
            d = d.subset(labels == analysed_round)
        elif isinstance(rounds, str):
            raise AgreeError(f"no round column '{column}' in the data (columns kept: "
                             f"{', '.join(d.columns) or 'none'})", code="round-column")
    elif rounds is not False:
        raise AgreeError("rounds must be a RoundsResult, a {round: data} mapping, a column name, "
                         "None or False", code="rounds")

    tick("scoring", 0.2)
    if cluster is not None and cluster not in d.columns:
        raise AgreeError(f"no column '{cluster}' to resample clusters by (columns kept: "
                         f"{', '.join(d.columns) or 'none'})", hint="read the data keeping the column "
                         "(--cluster NAME keeps it)", code="cluster")
    n_clusters = None if cluster is None else int(len(np.unique(np.asarray(d.columns[cluster]).astype(str))))
    scored = score(d, level=level, minimum=minimum, n_resamples=n_resamples, seed=seed,
                   confidence_level=confidence_level, cluster=cluster)
    used_seed = scored.seed if scored.seed is not None else seed
    coefs = dict(scored.coefficients)
    primary = "krippendorff_alpha" if "krippendorff_alpha" in coefs else next(iter(coefs), "")
    ordered = [coefs[primary]] + [r for k, r in coefs.items() if k != primary] if primary else []

    tick("diagnostics", 0.5)
    rating = (level or d.level) in ("ordinal", "interval", "ratio") and not d.set_valued
    per_code, pairs, confusion, diag_notes = _diagnostics(
        d, per_code=not rating, minimum=minimum, n_resamples=n_resamples, seed=used_seed,
        confidence_level=confidence_level, cluster=cluster)
    skipped_codes = ""
    if rating:
        skipped_codes = (f"Agreement per code is not reported: the values are points of an {level or d.level} "
                         "rating scale, and treating each point as a code that is present or absent would "
                         f"count every near miss as a full disagreement, so the overall α at the "
                         f"{level or d.level} level is the figure to judge.")
    code_use = _code_use(d)
    sample = _sample(d, corpus_size)
    if rounds_result is not None and analysed_round is not None:
        sample = replace(sample, units_double_coded=sum(r.n_units for r in rounds_result.rounds))
    cons = None if consensus is None else summarise_consensus(consensus, d)
    warnings = list(scored.warnings)
    if rounds_result is not None:
        warnings.extend(rounds_result.warnings)
    if cluster is not None and n_clusters is not None and n_resamples:
        # one clear note on few groups, naming the column, instead of one per computation
        warnings = [w for w in warnings if w.code != "few-clusters"]
        if n_clusters < 20:
            warnings.insert(0, Note("few-clusters", f"Only {n_clusters} {cluster} groups were resampled; "
                                    "bootstrap intervals from fewer than 20 groups are rough."))

    tick("text", 0.9)
    report = Report(
        title=title, level=scored.level, minimum=float(minimum), confidence_level=float(confidence_level),
        n_resamples=int(n_resamples), seed=used_seed, digits=int(digits), sample=sample,
        coefficients=tuple(ordered), primary=primary, skipped=dict(scored.skipped),
        per_code=per_code, confused_pairs=pairs, confusion=confusion, code_use=code_use,
        consensus=cons, rounds=rounds_result, analysed_round=analysed_round, methods="",
        interpretation=(), cautions=cautions(ordered), warnings=tuple(_dedupe(warnings)),
        minimum_default=minimum_default, per_code_skipped=skipped_codes, cluster=cluster,
        n_clusters=n_clusters)
    report = replace(report, methods=methods_paragraph(report, set_valued=d.set_valued),
                     interpretation=interpretation(report))
    tick("done", 1.0)
    return report


def _dedupe(notes: Iterable[Note]) -> list[Note]:
    seen, out = set(), []
    for n in notes:
        key = (n.code, n.message)
        if key not in seen:
            seen.add(key)
            out.append(n)
    return out


def _records(frame: pd.DataFrame | None) -> tuple[dict[str, Any], ...]:
    if frame is None or len(frame) == 0:
        return ()
    if frame.index.name is not None:
        frame = frame.reset_index()
    return tuple(json_safe({str(k): v for k, v in row.items()}) for row in frame.to_dict(orient="records"))


def _diagnostics(d: CodingData, *, per_code: bool = True, **kw: Any):
    """Per-code records, confused pairs, the confusion table and the diagnostics' notes from
    `agree.analysis.diagnostics` (no per-code records or pairs when `per_code` is False)."""
    from agree.analysis.diagnostics import confusion_table, diagnose_codes
    from agree.core.model import value_label

    notes: tuple[Note, ...] = ()
    if per_code:
        diag = diagnose_codes(d, **kw)
        records = _records(diag.to_frame())
        pairs = _records(diag.confused_pairs)
        notes = diag.notes
    else:
        records, pairs = (), ()
    if d.n_coders == 2 and not d.set_valued:
        table = confusion_table(d, directed=True)
        row_title = f"{table.index.name or d.coders[0]}'s code"
        column_title = f"{table.columns.name or d.coders[1]}'s code"
        source = "cross table of the two coders"
    else:
        table = confusion_table(d)
        row_title, column_title = "Code (one coder of a pair)", "Code (the other coder)"
        source = "coincidence matrix (pairs of values within units, all coder pairs)"
    confusion = CrossTable(
        rows=tuple(map(value_label, table.index)), columns=tuple(map(value_label, table.columns)),
        counts=tuple(tuple(float(x) for x in row) for row in table.to_numpy(dtype=float)),
        row_title=row_title, column_title=column_title, source=source)
    return records, pairs, confusion, notes


def _code_use(d: CodingData) -> CrossTable:
    """Units each coder gave each code (for sets of codes: units whose set contains it)."""
    V = len(d.values)
    if d.set_valued:
        cats = list(d.categories)
        member = np.array([[c in v for c in cats] for v in d.values], dtype=float).reshape(V, len(cats))
        labels = [str(c) for c in cats]
    else:
        member = np.eye(V)
        from agree.core.model import value_label
        labels = [value_label(v) for v in d.values]
    counts = []
    for i in range(d.n_coders):
        col = d.codes[:, i]
        counts.append(np.bincount(col[col >= 0], minlength=V) @ member)
    return CrossTable(rows=tuple(d.coders), columns=tuple(labels),
                      counts=tuple(tuple(float(x) for x in row) for row in counts),
                      row_title="Coder", column_title="Code", source="code use per coder")


def _sample(d: CodingData, corpus_size: int | None) -> SampleSummary:
    per_unit = d.observed.sum(axis=1)
    rep = d.report
    return SampleSummary(
        units_read=d.n_units, units_used=int((per_unit >= 2).sum()),
        units_left_out=int((per_unit < 2).sum()),
        units_partial=int(((per_unit >= 2) & (per_unit < d.n_coders)).sum()),
        n_coders=d.n_coders, coders=tuple(d.coders),
        values_per_coder=tuple(int(x) for x in d.observed.sum(axis=0)),
        values_read=int(d.observed.sum()), values_missing=int((~d.observed).sum()),
        corpus_size=corpus_size, reader_left_out=tuple(rep.left_out) if rep else (),
        files=tuple(rep.files) if rep else (), checksums=dict(rep.checksums) if rep else {})


def summarise_consensus(consensus: Any, data: CodingData | None = None) -> ConsensusSummary:
    """Counts by source of a consensus file (path; any table format `agree.read` reads), DataFrame
    or `agree.output.reconciliation.Consensus`.

    The table needs a "source" column (agreed, decided, majority, unresolved, ...). A unit id
    column (the first column whose name contains "unit", else the first column) is matched
    against the data's units to count units present in one and not the other.
    """
    file = None
    if isinstance(consensus, (str, os.PathLike)):
        file = str(consensus)
        frame = read_consensus(consensus)
    elif isinstance(consensus, pd.DataFrame):
        frame = consensus
    elif hasattr(consensus, "table") and isinstance(consensus.table, pd.DataFrame):
        frame = consensus.table          # an agree.output.reconciliation.Consensus
    else:
        raise AgreeError("consensus must be a file path or a DataFrame", code="consensus")
    cols = {str(c).strip().lower(): c for c in frame.columns}
    if "source" not in cols:
        raise AgreeError("the consensus table has no 'source' column", where=file,
                         hint="use the file written by `agree reconcile`", code="consensus")
    sources = frame[cols["source"]].fillna("").astype(str).str.strip()
    by_source = {str(k): int(v) for k, v in sources.value_counts(sort=False).items()}
    by_method: dict[str, int] = {}
    without = 0
    if HOW_DECIDED in cols:
        how = frame[cols[HOW_DECIDED]].fillna("").astype(str).str.strip().str.lower()
        how = how.where(~how.isin(["nan", "none"]), "")
        for k, v in how[how != ""].value_counts(sort=False).items():
            by_method[str(k)] = int(v)
        by_method = {k: by_method[k] for k in HOW_ORDER if k in by_method} | \
                    {k: v for k, v in by_method.items() if k not in HOW_ORDER}
        without = int(((sources == "decided") & (how == "")).sum())
    order = ["agreed", "decided", "majority", "single coder", "unresolved", "not coded"]
    by_source = {k: by_source[k] for k in order if k in by_source} | \
                {k: v for k, v in by_source.items() if k not in order}
    not_in_data = missing = 0
    unit_col = next((cols[c] for c in cols if "unit" in c), frame.columns[0])
    if data is not None:
        ids = {str(v) for v in map(normalise_value, frame[unit_col].tolist()) if v is not None}
        known = set(map(str, data.unit_ids))
        not_in_data, missing = len(ids - known), len(known - ids)
    return ConsensusSummary(n_units=int(len(frame)), by_source=by_source, units_not_in_data=not_in_data,
                            data_units_missing=missing, file=file, by_method=by_method,
                            decided_without_method=without)


# ----------------------------------------------------------------------------------------
# text


CAUTIONS = (
    "Conventions are not laws: the thresholds are conventions, not derived cut-offs (Landis and Koch "
    "call their bands arbitrary). Choose the minimum by the cost of drawing a wrong conclusion, and "
    "judge it by the one-sided lower confidence bound (or the share of bootstrap resamples below it), not "
    "by the point estimate alone (Krippendorff, 2004).",
    "Kappa and skewed prevalence: when a code is very common or very rare, κ and α can be low although "
    "the coders mostly agree, because chance agreement is high (Feinstein & Cicchetti, 1990). The bands "
    "of one coefficient do not carry over to another; read the per-code table beside the overall figure.",
    "Percent agreement alone overstates reliability: it counts the agreement expected by chance "
    "(Lombard, Snyder-Duch, & Bracken, 2002). Report it only next to a chance-corrected coefficient.",
    "Agreement describes these coders on units like these. It must be computed on the coders' "
    "independent codes, before any disagreement is resolved.",
)



def cautions(coefficients: Iterable[AgreementResult] = ()) -> tuple[str, ...]:
    """The usual cautions; the prevalence caution names the coefficients less affected by
    prevalence (Gwet's AC1/AC2, Brennan–Prediger, PABAK) only when the report shows them."""
    shown = [coefficient_label(r.name) for r in coefficients if family(r.name) == "high-running"]
    if not shown:
        return CAUTIONS
    verb = "it" if len(shown) == 1 else "they"
    names = _join(shown)
    extra = (f" {names}, also reported here, {'is' if len(shown) == 1 else 'are'} less affected by prevalence: "
             f"{verb} can run well above κ and α on skewed codes, so a higher value there is not more "
             "agreement.")
    first, rest = CAUTIONS[1].split(" The bands", 1)
    return (CAUTIONS[0], first + extra + " The bands" + rest) + CAUTIONS[2:]


_NUMBER_WORDS = {2: "Two", 3: "Three", 4: "Four", 5: "Five", 6: "Six", 7: "Seven", 8: "Eight", 9: "Nine"}


def _count_words(n: int, noun: str) -> str:
    head = _NUMBER_WORDS.get(n, format_value(n, "count"))
    return f"{head} {noun}{'' if n == 1 else 's'}"


def _units(n: int) -> str:
    return f"{format_value(n, 'count')} unit{'' if n == 1 else 's'}"


def _stat_markup(r: AgreementResult, digits: int) -> str:
    """``α = .84, 95% CI [.79, .88]`` in markup."""
    sym = _symbol(r.name)
    text = f"{sym} = {format_value(r.estimate, 'coefficient', digits)}"
    if r.ci_low is not None and r.ci_high is not None and math.isfinite(r.ci_low or math.nan):
        text += f", {r.confidence_level:.0%} CI {format_interval(r.ci_low, r.ci_high, digits)}"
    return text


def _symbol(name: str) -> str:
    row = coefficient(name)
    return row.markup_symbol if row is not None else coefficient_label(name)


def _rounds_sample_text(report: Report, coders: str) -> list[str]:
    """Sentences on the sample when coding ran in rounds: all rounds together (*N*), and the
    round the figures describe (*n*), each with its share of the corpus, so the two counts
    cannot be confused; and whether the rounds coded different units."""
    from agree.analysis.rounds import round_name

    s = report.sample
    rounds = report.rounds
    k = len(rounds.rounds)
    total = s.units_double_coded if s.units_double_coded is not None else sum(r.n_units for r in rounds.rounds)
    names = _join([lit(r.round) for r in rounds.rounds])
    out = [f"{coders} ([[who the coders were and how they were trained]]) coded the units "
           "([[describe the coding unit]]) [[independently of each other: confirm]] in "
           f"{k} rounds ({names}), from [[the codebook version of each round]]."]
    whole = f"Over {k} rounds, *N* = {format_value(total, 'count')} units were double-coded"
    if s.corpus_size:
        whole += (f" ({format_value(total / s.corpus_size, 'percent')} of the "
                  f"{format_value(s.corpus_size, 'count')}-unit corpus)")
    whole += ", selected [[how the units of each round were selected, e.g. at random]]"
    part = f"*n* = {format_value(s.units_read, 'count')} units"
    if s.corpus_size:
        part += f" ({format_value(s.units_read / s.corpus_size, 'percent')} of the corpus)"
    out.append(f"{whole}; the figures below describe {round_name(report.analysed_round)}, the last full round, "
               f"{part}, and the rounds are compared in a separate table.")
    shared = rounds.shared_units() if hasattr(rounds, "shared_units") else None
    if shared == 0 and k > 1:
        out.append("Different rounds coded different units, so a change in agreement between rounds mixes "
                   "the revisions of the codebook with differences between the units coded.")
    elif shared:
        out.append(f"{format_value(shared, 'count')} unit{' was' if shared == 1 else 's were'} coded in more "
                   "than one round; the other units differ between rounds, so a change in agreement between "
                   "rounds mixes the revisions of the codebook with differences between the units coded.")
    return out


def methods_paragraph(report: Report, *, set_valued: bool = False) -> str:
    """The methods paragraph, in markup: facts from the data and settings, placeholders for the
    rest. Nothing is invented: what the tool cannot know stays a bracketed placeholder."""
    s = report.sample
    digits = report.digits
    p: list[str] = []
    coders = _count_words(s.n_coders, "coder")
    with_rounds = report.analysed_round is not None and report.rounds is not None
    if with_rounds:
        p.extend(_rounds_sample_text(report, coders))
    else:
        p.append(f"{coders} ([[who the coders were and how they were trained]]) coded "
                 f"*N* = {format_value(s.units_read, 'count')} units ([[describe the coding unit]]) "
                 "[[independently of each other: confirm]]")
        if s.corpus_size:
            p[-1] += (f", {format_value(s.share_of_corpus, 'percent')} of the "
                      f"{format_value(s.corpus_size, 'count')} units in the corpus, selected "
                      f"[[how the sample was selected, e.g. at random]]")
        else:
            p[-1] += ", selected [[how the sample was selected, e.g. at random, and what share of the corpus it is]]"
        p[-1] += ". Coders worked from [[the codebook version]]."
    level = "sets of codes per unit" if set_valued else f"{report.level} data"
    p.append(f"The codes were analysed as {lit(level)}.")
    partial = ""
    if s.units_partial:
        partial = (f"; {format_value(s.units_partial, 'count')} of them were coded by fewer than all "
                   f"{s.n_coders} coders, and the coefficients use every pair of values available")
    if s.units_left_out:
        p.append(f"Units coded by fewer than two coders cannot be compared and were left out "
                 f"(*n* = {format_value(s.units_left_out, 'count')}), so "
                 f"*n* = {format_value(s.units_used, 'count')} units entered the analysis{partial}.")
    else:
        p.append(f"Every unit was coded by at least two coders, so all "
                 f"*n* = {format_value(s.units_used, 'count')} units entered the analysis{partial}.")
    if s.reader_left_out:
        p.append(f"While reading the data, {format_value(len(s.reader_left_out), 'count')} "
                 f"entr{'y was' if len(s.reader_left_out) == 1 else 'ies were'} left out "
                 "(listed in the report's notes).")
    prim = report.primary_result
    if prim is not None:
        if set_valued:
            metric = {"masi": " with the MASI distance between sets of codes (Passonneau, 2006)",
                      "jaccard": " with the Jaccard distance between sets of codes"}.get(
                          str(prim.level), f" ({lit(prim.level or 'set')} distance)")
        else:
            metric = f" ({lit(prim.level or report.level)} metric)"
        coef_text = (f"Agreement was measured with {coefficient_label(prim.name, in_sentence=True)}{metric}, chosen because "
                     "[[why this coefficient]]")
        others = [result_label(r, report.level, in_sentence=True) for r in report.coefficients[1:]]
        if others:
            coef_text += f"; {_join(others)} {'is' if len(others) == 1 else 'are'} reported alongside for comparison"
        p.append(coef_text + ".")
        if prim.bootstrap is not None:
            b = prim.bootstrap
            seed_text = f", random seed {b.seed}" if b.seed is not None else ""
            if b.unit != "unit" or report.cluster is not None:
                seed_text = f" (random seed {b.seed})" if b.seed is not None else ""
            method = INTERVAL_METHODS.get(b.method, lit(b.method))
            if b.unit != "unit" or report.cluster is not None:
                column = report.cluster or b.unit.split(":", 1)[-1]
                groups = ("" if report.n_clusters is None else
                          f" (*n* = {format_value(report.n_clusters, 'count')} groups)")
                p.append(f"Confidence intervals ({prim.confidence_level:.0%}) are {method} intervals from "
                         f"{format_value(b.replicates, 'count')} bootstrap resamples{seed_text} in which "
                         f"whole {lit(column)} groups{groups} were resampled, each with all its units, so "
                         f"that units from the same {lit(column)} stay together.")
            else:
                p.append(f"Confidence intervals ({prim.confidence_level:.0%}) are {method} intervals from "
                         f"{format_value(b.replicates, 'count')} resamples of units{seed_text}.")
        elif prim.ci_method:
            p.append(f"The confidence interval is a {INTERVAL_METHODS.get(prim.ci_method, lit(prim.ci_method))}.")
        result = f"Overall, {_stat_markup(prim, digits)}"
        if prim.p_below_min is not None:
            result += (f"; a share of {format_value(prim.p_below_min, 'probability')} of the bootstrap "
                       f"resamples fell below the minimum of {format_value(report.minimum, 'threshold')}")
        result += "."
        p.append(result)
    threshold = format_value(report.minimum, "threshold")
    codes_clause = ("" if not report.per_code else
                    "; codes below it were [[what happened to them: dropped, merged or redefined]]")
    if report.minimum_default:
        # that .800 was the tool's default belongs to the settings and notes, not to a paper
        p.append(f"The minimum acceptable value was set at {threshold}, following Krippendorff's (2004) "
                 f"convention, because [[why this minimum]]{codes_clause}.")
    else:
        p.append(f"The minimum acceptable value was set at {threshold} because [[why this minimum]]"
                 f"{codes_clause}.")
    if report.consensus is not None:
        c = report.consensus
        parts = []
        for k, n in c.by_source.items():
            text = f"{format_value(n, 'count')} {_SOURCE_TEXT.get(k, f'had the source ‘{lit(k)}’')}"
            if k == "decided" and c.by_method:
                text = f"{format_value(n, 'count')} were decided ({_decided_text(c)})"
            parts.append(text)
        if c.by_method:
            how = "as recorded in the consensus file"
            if c.decided_without_method:
                how += " ([[how the decided units without a recorded procedure were decided]])"
        else:
            how = "by [[the procedure, e.g. discussion or a third coder]]"
        p.append("Agreement was computed on each coder's own codes, before resolution. Disagreements were "
                 f"then resolved {how}: of the {_units(c.n_units)} in the final data, " + _join(parts) + ".")
    else:
        p.append("Disagreements were resolved by [[how disagreements were resolved]]; agreement was computed "
                 "on each coder's own codes, before resolution.")
    p.append("The codebook and the reliability data are available at [[where]].")
    return " ".join(p)


_METHOD_TEXT = {"discussion": "by discussion", "adjudicator": "by an adjudicator",
                "majority": "by a majority of the coders"}


def _decided_text(c: ConsensusSummary) -> str:
    """'5 by discussion and 2 by an adjudicator' from the consensus file's "how decided"."""
    parts = [f"{format_value(n, 'count')} {_METHOD_TEXT.get(k, f'by ‘{lit(k)}’')}" for k, n in c.by_method.items()]
    if c.decided_without_method:
        parts.append(f"{format_value(c.decided_without_method, 'count')} with no procedure recorded")
    return _join(parts)


_SOURCE_TEXT = {"agreed": "were coded alike by the coders", "decided": "were decided after discussion "
                "or adjudication", "majority": "took the majority code", "unresolved": "remained unresolved",
                "single coder": "kept the code of the one coder who coded them",
                "not coded": "were coded by nobody"}


def _join(parts: Sequence[str]) -> str:
    if len(parts) <= 1:
        return "".join(parts)
    return ", ".join(parts[:-1]) + (", and " if len(parts) > 2 else " and ") + parts[-1]


def interpretation(report: Report) -> tuple[str, ...]:
    """Interpretation paragraphs (markup), naming the conventions used."""
    digits = report.digits
    out = []
    minimum = format_value(report.minimum, "threshold")
    # whether .800 was the tool's default is stated in the settings line, not in text for a paper
    here = f"the minimum here is {minimum}"
    out.append("Convention used: Krippendorff (2004) advises relying on variables with α ≥ .800, drawing only "
               "tentative conclusions for .667 ≤ α < .800, and discarding variables below .667; "
               f"{here}. Kappa-type values are labelled with the bands of Landis and Koch (1977): "
               "below 0 poor, .00–.20 slight, .21–.40 fair, .41–.60 moderate, .61–.80 substantial, "
               ".81–1.00 almost perfect.")
    prim = report.primary_result
    if prim is not None:
        one_sided = prim.lower_bound is not None and math.isfinite(prim.lower_bound)
        bound = prim.lower_bound if one_sided else prim.ci_low
        band = krippendorff_band(prim.estimate, bound, report.minimum)
        sym = _symbol(prim.name)
        level = f"{100 * prim.confidence_level:g}%"
        text = f"{coefficient_label(prim.name)}: {_stat_markup(prim, digits)}. "
        reached = (f"The one-sided {level} lower bound ({format_bound(bound, report.minimum)}) is at or above the minimum of "
                   f"{minimum}." if one_sided else
                   f"The whole interval lies at or above the minimum of {minimum}.")
        short = (f"The estimate reaches the minimum of {minimum}, but its one-sided {level} lower bound "
                 f"({format_bound(bound, report.minimum)}) is below it, so the data do not show with confidence that it is reached"
                 if one_sided else
                 f"The estimate reaches the minimum of {minimum}, but the interval extends below "
                 "it, so the data do not show with confidence that it is reached")
        text += {
            "reliable": reached,
            "estimate-only": short,
            "tentative": (f"This is below the minimum of {minimum} but at or above .667: by Krippendorff's "
                          "convention, enough for tentative conclusions only."),
            "below": ("This is below .667: by Krippendorff's convention the coding is not reliable enough to "
                      "draw conclusions from."),
            "undefined": f"{sym} is undefined for these data (see the notes).",
        }[band]
        if band == "estimate-only":
            if prim.p_below_min is not None:
                text += (f" (a share of {format_value(prim.p_below_min, 'probability')} of the bootstrap "
                         "resamples fell below it).")
            else:
                text += "."
        out.append(text)
    rest = []
    for r in report.coefficients:
        if r.name == report.primary or not r.defined:
            continue
        est = format_value(r.estimate, "coefficient", digits)
        label = result_label(r, report.level)
        if family(r.name) == "kappa-type":
            rest.append(f"{label} {est} ({landis_koch(r.estimate)} by Landis & Koch)")
        elif family(r.name) == "high-running":
            rest.append(f"{label} {est} (can run well above κ and α on skewed codes; no band applied)")
        elif family(r.name) == "percent":
            rest.append(f"{label} {est} (not corrected for chance)")
        else:
            rest.append(f"{label} {est}")
    if rest:
        out.append("Other coefficients: " + "; ".join(rest) + ".")
    if report.per_code:
        # the statuses of the per-code table, word for word: one source of truth
        groups: dict[str, list[str]] = {}
        for rec in report.per_code:
            groups.setdefault(str(rec.get("status")), []).append(str(rec.get("code")))
        order = [s for s in STATUS_TEXT if s in groups] + [s for s in groups if s not in STATUS_TEXT]
        texts = status_text(report.confidence_level)
        pieces = [f"{lit(s)} ({lit(texts.get(s, s))}): " + ", ".join(f"‘{lit(c)}’" for c in groups[s])
                  for s in order]
        judged = any(rec.get("judged_on") == "estimate" for rec in report.per_code)
        tail = (" Without bootstrap intervals the statuses compare the estimates with the minimum."
                if judged else "")
        out.append(f"Per code (presence/absence α, {len(report.per_code)} codes; status as in the per-code "
                   "table): " + "; ".join(pieces) + "." + tail)
    elif report.per_code_skipped:
        out.append(lit(report.per_code_skipped))
    return tuple(out)


#: Plain meaning of each per-code status of `agree.analysis.diagnostics.diagnose_codes`, worst first.
STATUS_TEXT = {
    "below minimum": "estimate below the minimum",
    "uncertain": "estimate at or above the minimum, one-sided 95% lower bound below it",
    "too rare": "used on too few units to judge",
    "undefined": "α undefined",
    "ok": "one-sided 95% lower bound at or above the minimum",
}


def status_text(confidence_level: float = 0.95) -> dict[str, str]:
    """`STATUS_TEXT` at another confidence level (the one-sided bound's level is named)."""
    level = f"{100 * confidence_level:g}%"
    return {k: v.replace("95%", level) for k, v in STATUS_TEXT.items()}


# ----------------------------------------------------------------------------------------
# tables: the one place numbers are turned into text


@dataclass(frozen=True)
class Cell:
    text: str                         # markup
    paths: tuple[str, ...] = ()       # where the number(s) live in Report.to_dict()
    numeric: bool = False


@dataclass(frozen=True)
class Table:
    key: str
    caption: str                      # markup
    header: tuple[str, ...]           # markup
    rows: tuple[tuple[Cell, ...], ...]
    note: str = ""                    # markup


def _c(value: Any, kind: str, digits: int, path: str) -> Cell:
    return Cell(format_value(value, kind, digits), (path,), True)


def _ci(low: Any, high: Any, digits: int, path: str) -> Cell:
    return Cell(format_interval(low, high, digits), (f"{path}.ci_low", f"{path}.ci_high"), True)


def _se_note(results: Sequence[AgreementResult], level: str) -> str:
    """Which *SE*s are analytic (and by which estimator) and which are the bootstrap standard
    deviation, from each result's `se_method`."""
    groups: dict[str, list[str]] = {}
    for r in results:
        if r.se is None or not math.isfinite(r.se):
            continue
        groups.setdefault(r.se_method or "method not recorded", []).append(result_label(r, level))
    if not groups:
        return "*SE*: none computed."
    boot = {k: v for k, v in groups.items() if k.startswith("bootstrap")}
    analytic = {k: v for k, v in groups.items() if not k.startswith("bootstrap")}
    parts = [f"analytic for {_join(v)}, by {lit(k)}" for k, v in analytic.items()]
    parts += [f"the {lit(k)} for {_join(v)}" for k, v in boot.items()]
    return "*SE*: " + "; ".join(parts) + "."


def report_tables(report: Report) -> list[Table]:
    """Every table of the report, with its numbers formatted once, for every format."""
    dg = report.digits
    level = f"{report.confidence_level:.0%} CI"
    minimum = format_value(report.minimum, "threshold")
    tables = []
    rows = []
    for i, r in enumerate(report.coefficients):
        path = f"coefficients.{i}"
        rows.append((Cell(result_label(r, report.level)), _c(r.estimate, "coefficient", dg, f"{path}.estimate"),
                     _c(r.se, "se", dg, f"{path}.se"), _ci(r.ci_low, r.ci_high, dg, path),
                     _c(r.p_below_min, "probability", dg, f"{path}.p_below_min"),
                     _c(r.n_units, "count", dg, f"{path}.n_units"),
                     Cell(lit(INTERVAL_METHODS.get(r.ci_method or "", r.ci_method or "–")))))
    skipped = "; ".join(f"{_join([coefficient_label(k) for k in names])}: {lit(reason)}"
                        for reason, names in skipped_by_reason(report.skipped).items())
    tables.append(Table(
        "coefficients", "Agreement coefficients",
        ("Coefficient", "Estimate", "*SE*", level, f"*P*(below {minimum})", "*n* units", "Interval"),
        tuple(rows),
        note=(_se_note(report.coefficients, report.level) + " "
              f"*P*(below {minimum}) is the share of bootstrap resamples below the minimum. *n* units: units "
              "entering the coefficient." + (f" Not computed: {skipped}." if skipped else ""))))
    if report.per_code:
        columns = report.per_code[0].keys()
        bound = f"One-sided {100 * report.confidence_level:g}% lower bound"
        spec = [("alpha", "α", "coefficient"), ("ci", level, None), ("lower_bound", bound, "bound"),
                ("p_below_min", f"*P*(below {minimum})", "probability"),
                ("specific_agreement", "Specific agreement", "coefficient"), ("kappa", "κ", "coefficient"),
                ("units_with_code", "Units with code", "count")]
        spec = [s for s in spec if s[0] in columns or (s[0] == "ci" and "ci_low" in columns)]
        text_cols = [c for c in ("status", "reason") if c in columns]
        rows = []
        for i, rec in enumerate(report.per_code):
            path = f"per_code.{i}"
            row = [Cell(lit(rec.get("code", "")))]
            for key, _, kind in spec:
                if key == "ci":
                    row.append(_ci(rec.get("ci_low"), rec.get("ci_high"), dg, path))
                elif kind == "bound":
                    row.append(Cell(format_bound(rec.get(key), report.minimum), (f"{path}.{key}",), True))
                else:
                    row.append(_c(rec.get(key), kind, dg, f"{path}.{key}"))
            row += [Cell(lit(rec.get(c) or "")) for c in text_cols]
            rows.append(tuple(row))
        header = ("Code",) + tuple(h for _, h, _ in spec) + tuple(c.capitalize() for c in text_cols)
        tables.append(Table("per_code", "Agreement per code (each code as present or absent)", header,
                            tuple(rows), note="From the per-code diagnostics; α here is nominal α on the "
                            "presence/absence recoding of each code. Status compares the one-sided "
                            f"{100 * report.confidence_level:g}% lower bound with the minimum (the rule of "
                            "the overall decision); bounds are shown to three decimals, rounded down where rounding would "
                            "reach the minimum. Status: "
                            + "; ".join(f"{lit(k)}, {lit(v)}" for k, v in
                                        status_text(report.confidence_level).items()) + "."))
    if report.confused_pairs:
        recs = report.confused_pairs[:10]
        spec = [("count", "Count", "amount"), ("share", "Share of disagreement", "percent"),
                ("alpha_if_merged", "α if merged", "coefficient"), ("delta_alpha", "Change in α", "coefficient")]
        spec = [s for s in spec if s[0] in recs[0]]
        rows = []
        for i, rec in enumerate(recs):
            rows.append((Cell(lit(rec.get("code_a", ""))), Cell(lit(rec.get("code_b", "")))) + tuple(
                _c(rec.get(key), kind, dg, f"confused_pairs.{i}.{key}") for key, _, kind in spec))
        tables.append(Table("confused_pairs", "Most often confused code pairs",
                            ("Code", "Confused with") + tuple(h for _, h, _ in spec), tuple(rows),
                            note="Count: coincidences of the two codes within units (for two coders, units "
                                 "where one gave each; with more coders each pair of values is weighted "
                                 "1/(*m* − 1), so counts can be fractional). α if merged: overall α (nominal; "
                                 "for sets of codes with the same set distance as the coefficients) with the "
                                 "two codes merged into one."))
    if report.code_use is not None:
        cu = report.code_use
        rows = []
        for j, code in enumerate(cu.columns):
            rows.append((Cell(lit(code)),) + tuple(
                _c(cu.counts[i][j], "count", dg, f"code_use.counts.{i}.{j}") for i in range(len(cu.rows))))
        tables.append(Table("code_use", "Code use per coder (units)", ("Code",) + tuple(lit(c) for c in cu.rows),
                            tuple(rows)))
    if report.rounds is not None:
        tables.extend(rounds_tables(report.rounds, dg, prefix="rounds"))
    if report.consensus is not None:
        c = report.consensus
        rows = tuple((Cell(lit(k)), _c(n, "count", dg, f"consensus.by_source.{k}"),
                      Cell(format_value(n / c.n_units if c.n_units else None, "percent")))
                     for k, n in c.by_source.items())
        note = ""
        if c.units_not_in_data or c.data_units_missing:
            note = (f"{format_value(c.units_not_in_data, 'count')} consensus units are not in the agreement data; "
                    f"{format_value(c.data_units_missing, 'count')} units of the agreement data have no consensus row.")
        tables.append(Table("consensus", "How disagreements were resolved", ("Source", "Units", "Share"), rows,
                            note=note))
    return tables


def rounds_tables(rounds: Any, dg: int, prefix: str = "") -> list[Table]:
    """Tables of a RoundsResult (per round; changes between rounds; drift; definitions)."""
    pre = f"{prefix}." if prefix else ""
    minimum = format_value(rounds.minimum, "threshold")
    level = f"{rounds.confidence_level:.0%} CI"
    out = []
    rows = []
    for i, r in enumerate(rounds.rounds):
        path = f"{pre}rounds.{i}"
        below = [lit(c) for c in r.codes_below(rounds.minimum)]
        below += [f"{lit(c)} (too rare)" for c in r.too_rare]
        rows.append((Cell(lit(r.round) + (" (drift check)" if r.drift else "")),
                     _c(r.n_units, "count", dg, f"{path}.n_units"),
                     _c(r.overall.n_units, "count", dg, f"{path}.overall.n_units"),
                     _c(r.overall.estimate, "coefficient", dg, f"{path}.overall.estimate"),
                     _ci(r.overall.ci_low, r.overall.ci_high, dg, f"{path}.overall"),
                     _c(r.overall.p_below_min, "probability", dg, f"{path}.overall.p_below_min"),
                     Cell(", ".join(below) or "none")))
    out.append(Table("rounds", "Agreement per coding round",
                     ("Round", "Units", "*n* pairable", "α", level, f"*P*(below {minimum})",
                      f"Codes below {minimum}"), tuple(rows),
                     note=f"α: Krippendorff's α ({lit(rounds.level)}) over all codes; per code, α on the "
                          "presence/absence recoding, as in the per-code diagnostics with the same seed. "
                          "Too rare: used on fewer than "
                          f"{format_value(getattr(rounds, 'min_units_per_code', 5), 'count')} pairable units "
                          "in the round, so not judged."))
    rows = []
    for i, ch in enumerate(rounds.changes):
        path = f"{pre}changes.{i}"
        rare = rounds._rare_mark(ch) if hasattr(rounds, "_rare_mark") else ""
        rows.append((Cell(f"{lit(ch.from_round)} → {lit(ch.to_round)}"), Cell(lit(ch.code or "all codes") + rare),
                     _c(ch.difference, "coefficient", dg, f"{path}.difference"),
                     _ci(ch.ci_low, ch.ci_high, dg, path),
                     Cell("yes" if ch.beyond_noise else "no", (f"{path}.beyond_noise",))))
    if rows:
        out.append(Table("round_changes", "Change in agreement between consecutive rounds",
                         ("Rounds", "Code", "Difference in α", level, "Beyond sampling noise"), tuple(rows),
                         note="Interval of the difference from independent unit resamples within each round "
                              "(other resamples than the intervals shown per round); “beyond sampling noise” "
                              "means the interval excludes 0. With many codes, some intervals exclude 0 by "
                              "chance. A code marked too rare was used on too few units in that round to "
                              "judge, so its change says little."))
    if rounds.drift is not None:
        dr = rounds.drift
        path = f"{pre}drift"
        out.append(Table("drift", "Drift check", ("Round", "Compared with", "α", level, "Difference",
                                                  f"{level} of difference", "Verdict"),
                         ((Cell(lit(dr.round)), Cell(lit(dr.reference)),
                           _c(dr.estimate, "coefficient", dg, f"{path}.estimate"),
                           _ci(dr.ci_low, dr.ci_high, dg, path),
                           _c(dr.change.difference, "coefficient", dg, f"{path}.change.difference"),
                           _ci(dr.change.ci_low, dr.change.ci_high, dg, f"{path}.change"),
                           Cell(lit(dr.verdict))),)))
    if rounds.definition_changes:
        rows = tuple((Cell(lit(dc.code)), Cell(lit(dc.round)), Cell(lit(dc.since_round or "–")),
                      Cell(lit(dc.kind))) for dc in rounds.definition_changes)
        out.append(Table("definitions", "Codes whose definition changed since last measured",
                         ("Code", "Round", "Last measured in", "Change"), rows))
    return out


# ----------------------------------------------------------------------------------------
# figures


@dataclass(frozen=True)
class ReportFigure:
    key: str
    title: str
    caption: str
    png: bytes


def report_figures(report: Report) -> list[ReportFigure]:
    """The report's plots as PNG bytes (matplotlib, Agg backend), made once per report."""
    if "all" not in report._figures:
        report._figures["all"] = _make_figures(report)
    return list(report._figures["all"])


def _make_figures(report: Report) -> list[ReportFigure]:
    from agree.output import plots

    figs: list[ReportFigure] = []
    if report.per_code:
        recs = [r for r in report.per_code if "alpha" in r]
        if recs:
            fig = plots.forest_plot([r.get("code") for r in recs], [r.get("alpha") for r in recs],
                                    [r.get("ci_low") for r in recs], [r.get("ci_high") for r in recs],
                                    minimum=report.minimum, symbol="Presence/absence α",
                                    title="Agreement per code", confidence_level=report.confidence_level)
            figs.append(ReportFigure("forest", "Agreement per code",
                                     "Each code's α with its interval; dashed line: the minimum; dotted line: "
                                     ".667. " + plots.MARKER_LEGEND, plots.figure_png(fig)))
    if report.confusion is not None and report.confusion.rows:
        c = report.confusion
        fig = plots.confusion_heatmap(c.counts, c.rows, c.columns, row_title=c.row_title,
                                      col_title=c.column_title, title=f"Confusion between coders ({c.source})")
        figs.append(ReportFigure("confusion", "Confusion between coders",
                                 f"Counts from the {c.source}; agreeing cells on the outlined diagonal. "
                                 "Colour scale (cividis) starts at 0 and repeats the printed counts.",
                                 plots.figure_png(fig)))
    if report.code_use is not None and report.code_use.columns:
        cu = report.code_use
        fig = plots.code_use_bars(cu.columns, cu.rows, cu.counts, title="Code use per coder")
        figs.append(ReportFigure("code_use", "Code use per coder",
                                 "Units each coder gave each code; bars start at 0; each coder has its own "
                                 "hatching and the count is printed at the end of each bar.",
                                 plots.figure_png(fig)))
    if report.rounds is not None:
        png = plots.figure_png(plots.rounds_trend_figure(report.rounds))
        if png:
            figs.append(ReportFigure("rounds", "Agreement across rounds",
                                     "α per round with intervals, overall and per code, on one fixed axis; "
                                     "dashed line: the minimum.", png))
    return figs


# ----------------------------------------------------------------------------------------
# HTML

_CSS = """
:root { --ink: #1a1a1a; --rule: #444; --soft: #666; }
body { font-family: Georgia, 'Times New Roman', serif; color: var(--ink); max-width: 62rem;
       margin: 2rem auto; padding: 0 1.2rem; line-height: 1.5; }
h1, h2, h3 { font-family: 'Helvetica Neue', Arial, sans-serif; line-height: 1.2; }
h1 { font-size: 1.6rem; margin-bottom: .2rem; } h2 { font-size: 1.2rem; margin-top: 2rem;
       border-bottom: 1px solid #bbb; padding-bottom: .2rem; }
.settings, .note, figcaption, .meta { color: var(--soft); font-size: .9rem; }
.placeholder { background: #fff3b0; border: 1px dashed #8a6d00; padding: 0 .15em; }
.methods { background: #f7f7f7; border-left: 4px solid #0072B2; padding: .6rem 1rem; }
table { border-collapse: collapse; margin: .8rem 0; font-size: .92rem; }
caption { text-align: left; font-weight: bold; padding-bottom: .3rem; font-family: Arial, sans-serif; }
thead th { border-top: 2px solid var(--rule); border-bottom: 1px solid var(--rule); padding: .25rem .6rem;
           text-align: left; vertical-align: bottom; }
tbody td { padding: .2rem .6rem; vertical-align: top; }
tbody tr:last-child td { border-bottom: 2px solid var(--rule); }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
figure { margin: 1rem 0; } figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
ul.cautions li { margin-bottom: .4rem; }
@media print {
  body { max-width: none; margin: 0; font-size: 10.5pt; }
  h2 { break-after: avoid; } table, figure { break-inside: avoid; }
  .placeholder { background: none; border: 1px dashed #000; }
  .methods { background: none; border-left: 2px solid #000; }
  a { color: inherit; text-decoration: none; }
}
"""


def _html_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = html.escape(text)
        if kind == "italic":
            out.append(f"<i>{t}</i>")
        elif kind == "placeholder":
            out.append(f'<span class="placeholder">{t}</span>')
        else:
            out.append(t)
    return "".join(out)


def _html_table(t: Table) -> str:
    head = "".join(f"<th scope=\"col\">{_html_markup(h)}</th>" for h in t.header)
    body = []
    for row in t.rows:
        cells = []
        for c in row:
            attrs = ' class="num"' if c.numeric else ""
            if c.paths:
                attrs += f' data-field="{html.escape(" ".join(c.paths))}"'
            cells.append(f"<td{attrs}>{_html_markup(c.text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    note = f'<p class="note">{_html_markup(t.note)}</p>' if t.note else ""
    return (f'<table id="table-{t.key}"><caption>{_html_markup(t.caption)}</caption><thead><tr>{head}</tr>'
            f'</thead><tbody>{"".join(body)}</tbody></table>{note}')


def render_html(report: Report, *, standalone: bool = True, figures: bool = True) -> str:
    """The report as HTML: one self-contained file (CSS inline, plots as base64 PNG)."""
    tables = {t.key: t for t in report_tables(report)}
    figs = {f.key: f for f in report_figures(report)} if figures else {}
    parts = [f"<h1>{html.escape(report.title)}</h1>", f'<p class="settings">{_html_markup(_settings_line(report))}</p>']

    def fig_html(key: str) -> str:
        f = figs.get(key)
        if f is None:
            return ""
        data = base64.b64encode(f.png).decode("ascii")
        return (f'<figure id="figure-{key}"><img src="data:image/png;base64,{data}" alt="{html.escape(f.title)}">'
                f"<figcaption><b>{html.escape(f.title)}.</b> {html.escape(f.caption)}</figcaption></figure>")

    parts.append("<h2>Methods paragraph</h2>")
    parts.append(f'<p class="note">{html.escape(PLACEHOLDER_NOTE)}</p>')
    parts.append(f'<div class="methods"><p>{_html_markup(report.methods)}</p></div>')
    parts.append("<h2>Agreement</h2>" + _html_table(tables["coefficients"]))
    parts.append("<h2>Interpretation</h2>" + "".join(f"<p>{_html_markup(p)}</p>" for p in report.interpretation))
    parts.append("<h3>Cautions</h3><ul class=\"cautions\">" +
                 "".join(f"<li>{_html_markup(c)}</li>" for c in report.cautions) + "</ul>")
    if "per_code" in tables or "forest" in figs:
        parts.append("<h2>Codes</h2>" + (_html_table(tables["per_code"]) if "per_code" in tables else "")
                     + fig_html("forest"))
    if "confused_pairs" in tables:
        parts.append(_html_table(tables["confused_pairs"]))
    parts.append("<h2>Coders</h2>" + fig_html("confusion") + (_html_table(tables["code_use"])
                                                            if "code_use" in tables else "") + fig_html("code_use"))
    if report.rounds is not None:
        parts.append("<h2>Coding rounds</h2>")
        parts.append("<ul>" + "".join(f"<li>{_html_markup(s)}</li>" for s in report.rounds.summary_markup(report.digits))
                     + "</ul>")
        for key in ("rounds", "round_changes", "drift", "definitions"):
            if key in tables:
                parts.append(_html_table(tables[key]))
        parts.append(fig_html("rounds"))
    if "consensus" in tables:
        parts.append("<h2>Resolution of disagreements</h2>" + _html_table(tables["consensus"]))
    parts.append("<h2>Notes</h2>" + _html_notes(report))
    body = "\n".join(parts)
    if not standalone:
        return f'<div class="agree-report"><style>{_scoped_css()}</style>{body}</div>'
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{html.escape(report.title)}</title><style>{_CSS}</style></head>\n<body>\n{body}\n</body></html>\n")


def _scoped_css() -> str:
    rules = [".agree-report table { border-collapse: collapse; } .agree-report td.num { text-align: right; }",
             ".agree-report .placeholder { background: #fff3b0; border: 1px dashed #8a6d00; }",
             ".agree-report thead th { border-bottom: 1px solid #444; text-align: left; }",
             ".agree-report figure img { max-width: 100%; }"]
    return " ".join(rules)


def _html_notes(report: Report) -> str:
    items = [f"<li>{_html_markup(n)}</li>" for n in _notes(report)]
    return "<ul>" + "".join(items) + "</ul>"


def _notes(report: Report) -> list[str]:
    """Notes in markup: warnings, what was left out, the data files and checksums."""
    out = [lit(w.message) for w in report.warnings]
    out += [f"Left out while reading: {lit(x)}" for x in report.sample.reader_left_out]
    for f in report.sample.files:
        digest = report.sample.checksums.get(f)
        out.append(f"Data file: {lit(f)}" + (f" (SHA-256 {digest})" if digest else ""))
    out.append(f"Made with agree {VERSION}.")
    return out


def _settings_line(report: Report) -> str:
    s = report.sample
    seed = "none drawn" if report.seed is None else str(report.seed)
    default = " (the default: no minimum was given)" if report.minimum_default else ""
    return (f"Level: {lit(report.level)} · minimum {format_value(report.minimum, 'threshold')}{default} · "
            f"{report.confidence_level:.0%} intervals · {format_value(report.n_resamples, 'count')} bootstrap "
            f"resamples · seed {seed} · {format_value(s.units_read, 'count')} units, {s.n_coders} coders")


# ----------------------------------------------------------------------------------------
# Markdown


def _md_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = re.sub(r"([\\`*_|<>])", r"\\\1", text).replace("](", "\\](")
        out.append(f"*{t}*" if kind == "italic" else f"**{t}**" if kind == "placeholder" else t)
    return "".join(out)


def _md_table(t: Table) -> str:
    lines = [f"**{_md_markup(t.caption)}**", "", "| " + " | ".join(_md_markup(h) for h in t.header) + " |",
             "| " + " | ".join("---:" if i and t.rows and t.rows[0][i].numeric else "---"
                                for i in range(len(t.header))) + " |"]
    for row in t.rows:
        lines.append("| " + " | ".join(_md_markup(c.text) for c in row) + " |")
    if t.note:
        lines += ["", f"*Note.* {_md_markup(t.note)}"]
    return "\n".join(lines) + "\n"


def render_markdown(report: Report, *, figure_dir: str | None = None,
                    figures: Sequence[ReportFigure] = ()) -> str:
    """The report as Markdown. Figures are linked from `figure_dir` (relative) when given."""
    tables = {t.key: t for t in report_tables(report)}
    out = [f"# {_md_markup(lit(report.title))}", "", _md_markup(_settings_line(report)), "",
           "## Methods paragraph", "", f"*{PLACEHOLDER_NOTE}*", "", _md_markup(report.methods), "",
           "## Agreement", "", _md_table(tables["coefficients"]), "## Interpretation", ""]
    out += [_md_markup(p) + "\n" for p in report.interpretation]
    out += ["### Cautions", ""] + [f"- {_md_markup(c)}" for c in report.cautions] + [""]
    order = ["per_code", "confused_pairs", "code_use"]
    if report.rounds is not None:
        out += ["## Coding rounds", ""] + [f"- {_md_markup(s)}" for s in report.rounds.summary_markup(report.digits)]
        out.append("")
        order += ["rounds", "round_changes", "drift", "definitions"]
    order.append("consensus")
    for key in order:
        if key in tables:
            out += [_md_table(tables[key])]
    if figure_dir is not None:
        out += ["## Figures", ""]
        for f in figures:
            out += [f"![{f.title}]({figure_dir}/{f.key}.png)", "", f"*{f.title}.* {f.caption}", ""]
    out += ["## Notes", ""] + [f"- {_md_markup(n)}" for n in _notes(report)]
    return "\n".join(out) + "\n"


# ----------------------------------------------------------------------------------------
# LaTeX

_LATEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
                  "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
                  "α": r"$\alpha$", "κ": r"$\kappa$", "π": r"$\pi$", "−": r"$-$", "–": "--", "—": "---",
                  "≥": r"$\geq$", "≤": r"$\leq$", "→": r"$\rightarrow$", "·": r"\textperiodcentered{}",
                  "‘": "`", "’": "'", "“": "``", "”": "''", "<": r"\textless{}", ">": r"\textgreater{}",
                  "…": r"\ldots{}"}


def latex_escape(text: str) -> str:
    """Escape LaTeX special characters (and map the few Unicode symbols the report uses)."""
    return "".join(_LATEX_SPECIAL.get(ch, ch) for ch in text)


def _tex_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = latex_escape(text)
        out.append(f"\\textit{{{t}}}" if kind == "italic" else f"\\textbf{{{t}}}" if kind == "placeholder" else t)
    return "".join(out)


def _tex_table(t: Table) -> str:
    align = "".join("r" if t.rows and t.rows[0][i].numeric else "l" for i in range(len(t.header)))
    lines = ["\\begin{table}[htbp]", "\\centering", "\\small", f"\\caption{{{_tex_markup(t.caption)}}}",
             f"\\label{{tab:agree-{t.key.replace('_', '-')}}}", f"\\begin{{tabular}}{{{align}}}", "\\toprule",
             " & ".join(_tex_markup(h) for h in t.header) + " \\\\", "\\midrule"]
    lines += [" & ".join(_tex_markup(c.text) for c in row) + " \\\\" for row in t.rows]
    lines += ["\\bottomrule", "\\end{tabular}"]
    if t.note:
        lines += ["", f"\\parbox{{\\linewidth}}{{\\footnotesize\\textit{{Note.}} {_tex_markup(t.note)}}}"]
    lines.append("\\end{table}")
    return "\n".join(lines) + "\n"


def render_latex(report: Report, *, figure_dir: str | None = None,
                 figures: Sequence[ReportFigure] = ()) -> str:
    """The report as a LaTeX fragment: the methods paragraph, booktabs tables, interpretation.

    Needs ``\\usepackage{booktabs}`` (and ``graphicx`` when figures are included); for
    ``\\input`` into a paper. Placeholders are set in bold.
    """
    tables = report_tables(report)
    out = ["% Agreement report written by agree. Needs \\usepackage{booktabs}"
           + (" and \\usepackage{graphicx}." if figure_dir else "."),
           "% Bold bracketed text is for you to fill in.", "",
           f"\\section*{{{latex_escape(report.title)}}}", "", "\\subsection*{Methods}", "",
           _tex_markup(report.methods), "", "\\subsection*{Interpretation}", ""]
    out += [_tex_markup(p) + "\n" for p in report.interpretation]
    out += ["\\begin{itemize}"] + [f"  \\item {_tex_markup(c)}" for c in report.cautions] + ["\\end{itemize}", ""]
    if report.rounds is not None:
        out += ["\\subsection*{Coding rounds}", "", "\\begin{itemize}"]
        out += [f"  \\item {_tex_markup(s)}" for s in report.rounds.summary_markup(report.digits)]
        out += ["\\end{itemize}", ""]
    out += [_tex_table(t) for t in tables]
    for f in figures:
        out += ["\\begin{figure}[htbp]", "\\centering",
                f"\\includegraphics[width=\\linewidth]{{{figure_dir}/{f.key}.png}}",
                f"\\caption{{{latex_escape(f.title)}. {latex_escape(f.caption)}}}", "\\end{figure}", ""]
    out += ["\\subsection*{Notes}", "", "\\begin{itemize}"] + [f"  \\item {_tex_markup(n)}" for n in _notes(report)]
    out += ["\\end{itemize}"]
    return "\n".join(out) + "\n"


# ----------------------------------------------------------------------------------------
# DOCX


def render_docx(report: Report) -> bytes:
    """The report as a Word document (python-docx): real tables, the plots as pictures."""
    from docx import Document
    from docx.enum.text import WD_ALIGN_PARAGRAPH, WD_COLOR_INDEX
    from docx.shared import Inches, Pt

    doc = Document()
    doc.core_properties.title = report.title

    def add_markup(paragraph, markup: str, *, size: float | None = None):
        for kind, text in spans(markup):
            run = paragraph.add_run(text)
            if kind == "italic":
                run.italic = True
            elif kind == "placeholder":
                run.font.highlight_color = WD_COLOR_INDEX.YELLOW
                run.bold = True
            if size:
                run.font.size = Pt(size)
        return paragraph

    def add_table(t: Table):
        add_markup(doc.add_paragraph(style="Caption") if "Caption" in [s.name for s in doc.styles]
                   else doc.add_paragraph(), t.caption)
        table = doc.add_table(rows=1, cols=len(t.header))
        table.style = "Table Grid"
        for cell, text in zip(table.rows[0].cells, t.header):
            p = cell.paragraphs[0]
            add_markup(p, text)
            for run in p.runs:
                run.bold = True
        for row in t.rows:
            cells = table.add_row().cells
            for cell, c in zip(cells, row):
                p = cell.paragraphs[0]
                add_markup(p, c.text)
                if c.numeric:
                    p.alignment = WD_ALIGN_PARAGRAPH.RIGHT
        if t.note:
            add_markup(doc.add_paragraph(), "*Note.* " + t.note, size=9)

    tables = {t.key: t for t in report_tables(report)}
    figs = {f.key: f for f in report_figures(report)}

    def add_figure(key: str):
        f = figs.get(key)
        if f is None:
            return
        doc.add_picture(io.BytesIO(f.png), width=Inches(6.0))
        add_markup(doc.add_paragraph(), f"*{lit(f.title)}.* {lit(f.caption)}", size=9)

    doc.add_heading(report.title, level=1)
    add_markup(doc.add_paragraph(), _settings_line(report), size=9)
    doc.add_heading("Methods paragraph", level=2)
    add_markup(doc.add_paragraph(), lit(PLACEHOLDER_NOTE), size=9)
    add_markup(doc.add_paragraph(), report.methods)
    doc.add_heading("Agreement", level=2)
    add_table(tables["coefficients"])
    doc.add_heading("Interpretation", level=2)
    for p in report.interpretation:
        add_markup(doc.add_paragraph(), p)
    doc.add_heading("Cautions", level=3)
    for c in report.cautions:
        add_markup(doc.add_paragraph(style="List Bullet"), c)
    if "per_code" in tables:
        doc.add_heading("Codes", level=2)
        add_table(tables["per_code"])
    add_figure("forest")
    if "confused_pairs" in tables:
        add_table(tables["confused_pairs"])
    doc.add_heading("Coders", level=2)
    add_figure("confusion")
    if "code_use" in tables:
        add_table(tables["code_use"])
    add_figure("code_use")
    if report.rounds is not None:
        doc.add_heading("Coding rounds", level=2)
        for s in report.rounds.summary_markup(report.digits):
            add_markup(doc.add_paragraph(style="List Bullet"), s)
        for key in ("rounds", "round_changes", "drift", "definitions"):
            if key in tables:
                add_table(tables[key])
        add_figure("rounds")
    if "consensus" in tables:
        doc.add_heading("Resolution of disagreements", level=2)
        add_table(tables["consensus"])
    doc.add_heading("Notes", level=2)
    for n in _notes(report):
        add_markup(doc.add_paragraph(style="List Bullet"), n, size=9)
    buffer = io.BytesIO()
    doc.save(buffer)
    return buffer.getvalue()


# ----------------------------------------------------------------------------------------
# writing

FORMATS = {".html": "html", ".htm": "html", ".md": "markdown", ".markdown": "markdown", ".docx": "docx",
           ".tex": "latex"}


def write_report(report: Report, path: str | os.PathLike, *, figures: bool = True) -> list[Path]:
    """Write the report in the format its suffix names (.html, .md, .docx, .tex), atomically.

    HTML and DOCX carry their figures inside the file. For Markdown and LaTeX the figures are
    written as PNG files into a folder beside the report, ``<name>-figures/`` (unless
    ``figures=False``). Returns the paths written.
    """
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise AgreeError(f"cannot tell the report format from '{path.name}'",
                         hint="end the file name in .html, .md, .docx or .tex", code="report-format")
    if not path.parent.exists():
        raise AgreeError(f"the folder {path.parent} does not exist", code="output-folder")
    written = []
    if fmt == "html":
        payload: bytes = render_html(report, figures=figures).encode("utf-8")
    elif fmt == "docx":
        payload = render_docx(report)
    else:
        figs = report_figures(report) if figures else []
        fig_dir = f"{path.stem}-figures" if figs else None
        if figs:
            folder = make_folder(path.parent / fig_dir)
            for f in figs:
                written.append(atomic_write_bytes(folder / f"{f.key}.png", f.png))
        render = render_markdown if fmt == "markdown" else render_latex
        payload = render(report, figure_dir=fig_dir, figures=figs).encode("utf-8")
    written.insert(0, atomic_write_bytes(path, payload))
    return written


