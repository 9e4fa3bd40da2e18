"""Building a report: from coded data to the numbers a `Report` holds (coefficients, per-code
and per-coder diagnostics, confusion and code use, rounds, the consensus summary), then its text."""

from __future__ import annotations

import os
from dataclasses import replace
from typing import Any, Callable, Iterable, Mapping

import numpy as np
import pandas as pd

from agree.analysis.diagnostics import confusion_table, diagnose_coders, diagnose_codes
from agree.analysis.rounds import RoundsResult, compare_rounds
from agree.core.constants import DEFAULT_CONFIDENCE, DEFAULT_MINIMUM, DEFAULT_RESAMPLES, FEW_CLUSTERS
from agree.core.format import DEFAULT_DIGITS
from agree.core.model import AgreeError, CodingData, as_coding_data, normalise_value, require_unit_rows, value_label
from agree.core.results import Note, json_safe
from agree.core.seeds import draw_seed
from agree.io.lists import read_consensus
from agree.output.report.model import (
    CoderSummary,
    ConsensusSummary,
    CrossTable,
    Report,
    SampleSummary,
    StudyReport,
    Variable,
)
from agree.output.report.text import DEFAULT_TITLE, cautions, interpretation, methods_paragraph, study_methods_paragraph
from agree.stats.kernels import membership
from agree.stats.resampling import check_settings
from agree.stats.scoring import score

Progress = Callable[[str, float], None]

HOW_DECIDED = "how decided"      # column of `agree reconcile`'s consensus file (agree.output.reconciliation.HOW)
HOW_ORDER = ("discussion", "adjudicator", "majority")

def build_report(data: Any, *, level: str | None = None, minimum: float | None = None,
                 n_resamples: int = DEFAULT_RESAMPLES, seed: int | None = None,
                 confidence_level: float = DEFAULT_CONFIDENCE,
                 corpus_size: int | None = None, consensus: Any = None,
                 rounds: RoundsResult | Mapping[str, Any] | None = None,
                 codebooks: Mapping[str, Any] | None = None, drift_round: str | None = None,
                 analysed_round: str | None = None,
                 title: str = DEFAULT_TITLE, digits: int = DEFAULT_DIGITS, cluster: str | None = None,
                 variable: str | None = None, unit: str | None = None, progress: Progress | None = None) -> Report:
    """Compute everything an agreement report shows.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders): the units the figures describe.
        With `rounds` given as a {round: data} mapping, None means the last full round's data.
    level : level of measurement ("nominal", "ordinal", "interval", "ratio"); default the data's.
    minimum : the minimum acceptable agreement. None (default) uses .800, Krippendorff's
        convention; the settings line says that it was the default (the methods paragraph
        states the minimum with a placeholder for the reason, as for a given one).
    n_resamples, seed, confidence_level : the bootstrap settings (recorded in the report).
    corpus_size : the number of units in the whole corpus, to state the share double-coded.
    consensus : a consensus file (path) or DataFrame with a "source" column (agreed, decided,
        majority, unresolved) and a unit id column; its counts by source go in the report.
    rounds : coding rounds to compare, one of two kinds:

        - a mapping {round name: data}, in round order: compared here with `compare_rounds`
          (same settings and seed as the rest of the report); `codebooks` and `drift_round`
          go to it. With `data` None the figures describe the last round not marked as
          `drift_round`.
        - a `RoundsResult` already computed; `data` is then the data of the round analysed.

        None (default): no rounds. For data with a round column, pass
        ``rounds=agree.analysis.rounds.split_rounds(data, column)`` (the command line does);
        data that keep a "round" column but get no `rounds` are analysed as one set, with a note.
    codebooks, drift_round : passed to `compare_rounds` (only with `rounds` as a mapping).
    analysed_round : the round `data` holds (stated in the methods paragraph); default the
        last full round when `rounds` are given.
    title, digits : the report's title and the decimals shown for coefficients.
    unit : what a unit is, in words, when the data say it (e.g. the view of highlighted passages,
        "segments as units (paragraphs), 4 documents"): stated in the methods paragraph instead
        of the placeholder for the coding unit, and in the note of the coefficient table.
    cluster : the name of a kept per-unit column (e.g. the document or interview): every
        bootstrap (coefficients, per-code diagnostics, rounds) resamples its groups whole, and
        the methods paragraph says so.
    variable : the variable's name, when the report is one section of a study (see
        `build_study_report`).
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

    tick = progress or (lambda step, done: None)
    minimum_default = minimum is None
    if minimum is None:
        minimum = DEFAULT_MINIMUM
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum)
    if corpus_size is not None and corpus_size < 1:
        raise AgreeError(f"corpus size must be a positive number of units; got {corpus_size}",
                         code="corpus-size")
    if seed is None:
        # one recorded seed for every part (coefficients, per-code diagnostics, rounds), so a
        # round's per-code figures equal the per-code table of that round
        seed = draw_seed()
    if (codebooks or drift_round) and not isinstance(rounds, Mapping):
        raise AgreeError("codebooks and drift_round need rounds given as a {round: data} mapping",
                         code="rounds")
    if isinstance(rounds, Mapping):
        tick("rounds", 0.0)
        parts = dict(rounds)
        rounds = compare_rounds(parts, level=level, minimum=minimum, n_resamples=n_resamples, seed=seed,
                                confidence_level=confidence_level, codebooks=codebooks,
                                drift_round=drift_round, cluster=cluster,
                                progress=lambda step, done: tick(step, 0.2 * done))
        if data is None:
            data = parts[rounds.final_round]
    elif rounds is not None and not isinstance(rounds, RoundsResult):
        raise AgreeError(f"rounds must be a {{round: data}} mapping or a RoundsResult; got "
                         f"{type(rounds).__name__}", hint="for a round column, pass "
                         "rounds=split_rounds(data, column) (agree.analysis.rounds)", code="rounds")
    if rounds is not None and analysed_round is None:
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
    rounds_result = rounds
    pooled = None
    if rounds is None and "round" in d.columns:
        pooled = Note("rounds-pooled", "The data have a 'round' column, but all rounds were analysed "
                      "together as one set; to compare the rounds and describe the last one, give "
                      "rounds=split_rounds(data) (on the command line, --round-column round).")

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
    tick("coders", 0.75)
    coders, coder_notes = _coders(d, level=level, n_resamples=n_resamples, seed=used_seed,
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
    cons = None if consensus is None else summarise_consensus(consensus, d, round_name=analysed_round)
    # the diagnostics' own notes, except what the report says elsewhere (the minimum, the units left
    # out, the coder tables' notes)
    said = {"minimum", "units-left-out", "leave-one-out-needs-three", "pairwise-kappa-nominal"}
    warnings = list(scored.warnings) + ([pooled] if pooled is not None else [])
    warnings += [n for n in (*diag_notes, *coder_notes) if n.code not in said]
    if rounds_result is not None:
        warnings.extend(rounds_result.warnings)
    if cluster is not None and n_clusters is not None and n_resamples:
        # one clear note on few groups, naming the column, instead of one per computation
        warnings = [w for w in warnings if w.code != "few-clusters"]
        if n_clusters < FEW_CLUSTERS:
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
        n_clusters=n_clusters, coders=coders, set_valued=bool(d.set_valued), variable=variable, unit=unit)
    report = replace(report, methods=methods_paragraph(report), interpretation=interpretation(report))
    tick("done", 1.0)
    return report


def build_study_report(variables: Mapping[str, Any], *, minimum: float | None = None,
                       n_resamples: int = DEFAULT_RESAMPLES, seed: int | None = None,
                       confidence_level: float = DEFAULT_CONFIDENCE, corpus_size: int | None = None,
                       title: str = DEFAULT_TITLE, digits: int = DEFAULT_DIGITS, cluster: str | None = None,
                       progress: Progress | None = None) -> StudyReport:
    """One report for a study that coded several variables: a section per variable and one
    methods paragraph that covers them all.

    Parameters
    ----------
    variables : {name: data or `Variable`}, in the order the report shows them. A `Variable`
        carries what is the variable's own: its level, consensus file, rounds, corpus size;
        plain data (CodingData, DataFrame, array) is analysed at its own level.
    minimum, n_resamples, seed, confidence_level, digits, cluster : shared by every variable, as
        in `build_report`; one seed (drawn when None) is used for every section.
    corpus_size : units in the corpus, unless a `Variable` gives its own.
    title : the report's title.
    progress : optional callback(step, fraction done).

    Returns
    -------
    StudyReport

    Raises
    ------
    AgreeError
        "no-input" when no variable is given; "variable" for an empty name or a value that is
        neither data nor a `Variable`; any error of `build_report`, naming the variable.
    """
    tick = progress or (lambda step, done: None)
    if not variables:
        raise AgreeError("no variables to report on", hint="give at least one {name: data}", code="no-input")
    if seed is None:
        seed = draw_seed()
    names = [str(k) for k in variables]
    if any(not n.strip() for n in names):
        raise AgreeError("a variable has an empty name", hint="name every variable", code="variable")
    sections = []
    for i, (name, spec) in enumerate(variables.items()):
        var = spec if isinstance(spec, Variable) else Variable(data=spec)
        if var.data is None and var.rounds is None:
            raise AgreeError(f"variable '{name}' has no data", code="variable")
        share = 1 / len(variables)
        try:
            sections.append(build_report(
                var.data, level=var.level, minimum=minimum, n_resamples=n_resamples, seed=seed,
                confidence_level=confidence_level, corpus_size=var.corpus_size or corpus_size,
                consensus=var.consensus, rounds=var.rounds, codebooks=var.codebooks, drift_round=var.drift_round,
                analysed_round=var.analysed_round, title=str(name), digits=digits, cluster=cluster,
                variable=str(name), progress=lambda step, done, i=i: tick(f"{name}: {step}", (i + done) * share)))
        except AgreeError as exc:
            raise AgreeError(f"variable '{name}': {exc.message}", hint=exc.hint, where=exc.where,
                             code=exc.code, problems=exc.problems) from exc
    first = sections[0]
    coefficients = [r for part in sections for r in part.coefficients]
    study = StudyReport(title=title, sections=tuple(sections), methods=study_methods_paragraph(sections),
                        cautions=cautions(coefficients), minimum=first.minimum,
                        minimum_default=first.minimum_default, confidence_level=first.confidence_level,
                        n_resamples=first.n_resamples, seed=first.seed, digits=first.digits, cluster=cluster)
    tick("done", 1.0)
    return study


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


def _coders(d: CodingData, *, level: str | None, **kw: Any) -> tuple[CoderSummary, tuple[Note, ...]]:
    """The coders compared (`agree.analysis.diagnostics.diagnose_coders`, with the report's seed
    and settings): agreement per pair of coders and α with each coder left out."""
    diag = diagnose_coders(d, level=level, **kw)
    leave = diag.leave_one_out if diag.leave_one_out["alpha_without"].notna().any() else None
    return CoderSummary(pairs=_records(diag.pairwise), leave_one_out=_records(leave), alpha=float(diag.alpha),
                        level=diag.level_label, confidence_level=float(diag.confidence_level),
                        bootstrap=diag.bootstrap is not None), tuple(diag.notes)


def _code_use(d: CodingData) -> CrossTable:
    """Units each coder gave each code (for sets of codes: units whose set contains it)."""
    V = len(d.values)
    member = membership(d)[:V]
    labels = [str(c) for c in d.categories] if d.set_valued else [value_label(v) for v in d.values]
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


def _other_units(file: str | None, data: CodingData, n_consensus: int, n_data: int, not_in_data: int,
                 missing: int, round_name: str | None) -> AgreeError:
    """The error for a consensus file whose units are not those analysed."""
    consensus = f"the consensus file {file}" if file else "the consensus table"
    files = list(data.report.files) if data.report is not None else []
    analysed = ("the data " + ", ".join(files)) if files else "the data"
    if round_name is not None:
        analysed += f" (round {round_name}, the round analysed)"
    counts = []
    if not_in_data:
        counts.append(f"{not_in_data:,} of its {n_consensus:,} units are not in the data")
    if missing:
        counts.append(f"{missing:,} of the {n_data:,} units analysed have no row in it")
    return AgreeError(f"{consensus} is for other units than {analysed}: {' and '.join(counts)}",
                      hint="give the consensus file that `agree reconcile` wrote for the data (and round) "
                           "analysed", code="consensus-units")


def summarise_consensus(consensus: Any, data: CodingData | None = None, *,
                        round_name: str | None = None) -> ConsensusSummary:
    """Counts by source of a consensus file (path; any table format `agree.read` reads), DataFrame
    or `agree.output.reconciliation.Consensus`.

    The table needs a "source" column (agreed, decided, majority, unresolved, ...). A unit id
    column (the first column whose name contains "unit", else the first column) is matched
    against the data's units: a consensus file of other units (another round, another sample)
    is refused with an `AgreeError` ("consensus-units") naming both files and how many units
    differ. `round_name` is the round the data are, for the message.
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
        if not_in_data or missing:
            raise _other_units(file, data, len(ids), len(known), not_in_data, missing, round_name)
    return ConsensusSummary(n_units=int(len(frame)), by_source=by_source, units_not_in_data=not_in_data,
                            data_units_missing=missing, file=file, by_method=by_method,
                            decided_without_method=without)


