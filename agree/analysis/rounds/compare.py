"""`compare_rounds`, cut along its seams: the rounds and the options (`_rounds_of`,
`_check_options`), what each round shows (`_measure_round`), codebook definitions
(`_definition_changes`), and the differences between rounds (`_Comparer`: the paired
bootstrap of `agree.analysis.rounds.paired`, then `RoundChange` and `DriftCheck`)."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from dataclasses import replace as _replace
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from agree.analysis.diagnostics import diagnose_codes
from agree.analysis.rounds.paired import RoundItems, difference_interval, difference_replicates, round_items
from agree.analysis.rounds.results import DefinitionChange, DriftCheck, RoundAgreement, RoundChange, RoundsResult
from agree.core.constants import (
    DEFAULT_CI_METHOD,
    DEFAULT_CONFIDENCE,
    DEFAULT_MINIMUM,
    DEFAULT_RESAMPLES,
    FEW_CLUSTERS,
    MIN_UNITS_PER_CODE,
)
from agree.core.model import AgreeError, CodingData, as_coding_data
from agree.core.results import AgreementResult, Note
from agree.core.seeds import child_seed, draw_seed
from agree.io.codebook import as_codebook
from agree.stats.coefficients import distance_matrix, krippendorff_alpha
from agree.stats.resampling import check_settings

PAIRINGS = ("auto", "independent")


# ----------------------------------------------------------------------------------------
# the rounds and the options


def _natural_round_names(labels: np.ndarray) -> list[str]:
    """Round labels in order of first appearance."""
    seen: dict[str, None] = {}
    for x in labels:
        seen.setdefault(str(x), None)
    return list(seen)


def split_rounds(data: CodingData, round_column: str = "round") -> dict[str, CodingData]:
    """{round: data} from a kept per-unit round column, rounds in order of first appearance."""
    if round_column not in data.columns:
        kept = ", ".join(data.columns) or "none"
        raise AgreeError(f"the data have no round column '{round_column}' (columns kept: {kept})",
                         hint=f"read the data keeping the round column (--round-column NAME on the command line; "
                              f"agree.read(..., keep=['{round_column}']) in Python), or give one file per round "
                              "(--round-files; a {round: data} mapping)", code="round-column")
    labels = np.asarray(data.columns[round_column], dtype=object)
    missing = np.array([x is None or (isinstance(x, float) and math.isnan(x)) or str(x) == "" for x in labels])
    if missing.any():
        raise AgreeError(f"{int(missing.sum())} units have no round in column '{round_column}'",
                         hint="fill in the round of every unit", code="round-missing")
    labels = labels.astype(str)
    return {name: data.subset(labels == name) for name in _natural_round_names(labels)}


def _rounds_of(data_by_round: Mapping[str, Any] | CodingData, round_column: str) -> dict[str, CodingData]:
    if isinstance(data_by_round, CodingData):
        parts = split_rounds(data_by_round, round_column)
    elif isinstance(data_by_round, Mapping):
        parts = {str(k): as_coding_data(v) for k, v in data_by_round.items()}
    else:
        raise AgreeError("rounds: give {round: data} or data with a round column", code="rounds")
    if not parts:
        raise AgreeError("no rounds to compare", code="rounds")
    return parts


@dataclass(frozen=True)
class _Settings:
    """Everything every round is measured and compared with."""

    order: tuple[str, ...]
    codes: tuple[str, ...]
    alpha_level: str
    distance: str | None
    level_label: str
    minimum: float
    seed: int
    cluster: str | None
    n_clusters: Mapping[str, int] | None
    drift_round: str | None
    pairing: str
    confidence_level: float
    n_resamples: int
    ci_method: str
    min_units_per_code: int
    progress: Callable[[str, float], None] = field(compare=False, default=lambda step, done: None)

    @property
    def options(self) -> dict[str, Any]:
        return dict(confidence_level=self.confidence_level, n_resamples=self.n_resamples,
                    ci_method=self.ci_method, minimum=self.minimum)

    def groups(self, d: CodingData) -> np.ndarray | None:
        return None if self.cluster is None else np.asarray(d.columns[self.cluster]).astype(str)


def _check_options(parts: Mapping[str, CodingData], *, cluster: str | None, drift_round: str | None,
                   codebooks: Mapping[str, Any] | None, pairing: str) -> tuple[dict[str, int] | None, str | None]:
    """Refuse options that do not fit the rounds; the number of groups per round."""
    order = list(parts)
    if pairing not in PAIRINGS:
        raise AgreeError(f"pairing must be 'auto' or 'independent'; got '{pairing}'", code="pairing")
    n_clusters: dict[str, int] | None = None
    if cluster is not None:
        n_clusters = {}
        for name, part in parts.items():
            if cluster not in part.columns:
                raise AgreeError(f"round {name}: no column '{cluster}' to resample clusters by (columns kept: "
                                 f"{', '.join(part.columns) or 'none'})",
                                 hint="read the data keeping the column (--cluster NAME keeps it)", code="cluster")
            n_clusters[name] = int(len(np.unique(np.asarray(part.columns[cluster]).astype(str))))
    if drift_round is not None:
        drift_round = str(drift_round)
        if drift_round not in parts:
            raise AgreeError(f"no round named '{drift_round}' (rounds: {', '.join(order)})", code="drift-round")
        if order.index(drift_round) == 0:
            raise AgreeError(f"the drift round '{drift_round}' has no full round before it to compare with",
                             code="drift-round")
    if codebooks:
        unknown = [k for k in codebooks if str(k) not in parts]
        if unknown:
            raise AgreeError(f"codebook given for unknown round '{unknown[0]}' (rounds: {', '.join(order)})",
                             code="codebook-round")
    return n_clusters, drift_round


def _code_list(parts: Mapping[str, CodingData]) -> tuple[str, ...]:
    """Every code of every round, in order of first appearance."""
    codes: dict[str, None] = {}
    for d in parts.values():
        for c in d.categories:
            codes.setdefault(str(c), None)
    return tuple(codes)


# ----------------------------------------------------------------------------------------
# what each round shows


def _finite(x: Any) -> float | None:
    return None if x is None or not math.isfinite(float(x)) else float(x)


def _shown(template: AgreementResult, row: Mapping[str, Any], diag: Any) -> AgreementResult:
    """A code's α as shown for a round: estimate, interval, one-sided bound and p-value against
    the minimum from `diagnose_codes` (with `seed`), on the counts of `template` (the same
    α without a bootstrap). No SE: the differences between rounds use other resamples."""
    boot = diag.bootstrap
    return _replace(template, estimate=float(row["alpha"]), ci_low=_finite(row["ci_low"]),
                    ci_high=_finite(row["ci_high"]), lower_bound=_finite(row["lower_bound"]),
                    p_value_min=_finite(row["p_value_min"]), se=None, se_method=None,
                    ci_method=boot.method if boot is not None else template.ci_method, bootstrap=boot)


def _measure_round(name: str, d: CodingData, s: _Settings) -> tuple[RoundAgreement, list[Note]]:
    """One round's figures: the overall α as ``krippendorff_alpha(round, seed=seed)`` (so as
    `agree score`), and each code's as ``diagnose_codes(round, seed=seed)`` (all codes from
    one set of resamples, as in the report's per-code table)."""
    notes: list[Note] = []
    groups = s.groups(d)
    overall = krippendorff_alpha(d, level=s.alpha_level, distance=s.distance, seed=s.seed, cluster=groups,
                                 **s.options)
    if s.cluster is not None and s.n_resamples:
        # the engine's note says "clusters"; name the column and the round instead
        overall = _replace(overall, warnings=tuple(w for w in overall.warnings if w.code != "few-clusters"))
        if s.n_clusters[name] < FEW_CLUSTERS:
            notes.append(Note("few-clusters", f"Round {name}: only {s.n_clusters[name]} {s.cluster} groups "
                              f"were resampled; bootstrap intervals from fewer than {FEW_CLUSTERS} groups are "
                              "rough."))
    notes.extend(Note(w.code, f"Round {name}: {w.message}") for w in overall.warnings)
    by_label = {str(c): c for c in d.categories}
    per_code: dict[str, AgreementResult] = {}
    status: dict[str, str] = {}
    if by_label:
        diag = diagnose_codes(d, minimum=s.minimum, n_resamples=s.n_resamples, seed=s.seed,
                              confidence_level=s.confidence_level, min_units_per_code=s.min_units_per_code,
                              ci_method=s.ci_method, cluster=groups)
        rows = {str(rec["code"]): rec for rec in diag.per_code.to_dict("records")}
        for code in s.codes:  # a loop over codes, not units
            if code in by_label:
                template = krippendorff_alpha(d.presence(by_label[code]), level="nominal", n_resamples=0,
                                              confidence_level=s.confidence_level, minimum=s.minimum)
                per_code[code] = _shown(template, rows[code], diag)
                status[code] = str(rows[code]["status"])
    result = RoundAgreement(round=name, n_units=d.n_units, n_coders=d.n_coders, overall=overall,
                            per_code=per_code, drift=name == s.drift_round, code_status=status,
                            unit_ids=tuple(str(u) for u in d.unit_ids))
    return result, notes


# ----------------------------------------------------------------------------------------
# codebook definitions


def _load_codebook(spec: Any) -> dict[str, str]:
    """{code: definition} of a round's codebook (a file, a Codebook or a mapping), spaces normalised."""
    return {code: _normal_text(text) for code, text in as_codebook(spec).definitions().items()}


def _normal_text(text: Any) -> str:
    return re.sub(r"\s+", " ", "" if text is None else str(text)).strip()


def _definition_changes(order: Sequence[str], measured: Mapping[str, set[str]],
                        books: Mapping[str, dict[str, str]]) -> list[DefinitionChange]:
    """Codes whose definition in a round's codebook differs from the codebook of the round in
    which they were last measured."""
    out = []
    for i, name in enumerate(order):
        book = books.get(name)
        if book is None:
            continue
        for code, text in book.items():
            if code not in measured.get(name, set()):
                continue
            last = next((order[j] for j in range(i - 1, -1, -1) if code in measured.get(order[j], set())), None)
            if last is None or books.get(last) is None:
                continue
            before = books[last].get(code)
            if before is None:
                out.append(DefinitionChange(code, name, last, "new code", None, text))
            elif before != text:
                out.append(DefinitionChange(code, name, last, "definition changed", before, text))
    return out


# ----------------------------------------------------------------------------------------
# differences between rounds


class _Comparer:
    """The differences between two rounds, overall and per code, from one set of resamples per
    pair of rounds (paired where they share units or groups; `agree.analysis.rounds.paired`)."""

    def __init__(self, parts: Mapping[str, CodingData], shown: Mapping[str, RoundAgreement], s: _Settings):
        self.parts, self.shown, self.s = parts, shown, s
        self._items: dict[str, RoundItems] = {}
        self.notes: list[Note] = []

    def items(self, name: str) -> RoundItems:
        if name not in self._items:
            d = self.parts[name]
            delta, _ = distance_matrix(d, self.s.alpha_level, self.s.distance)
            self._items[name] = round_items(d, self.s.codes, delta, self.s.groups(d))
        return self._items[name]

    def changes(self, a: str, b: str, codes: Sequence[str | None]) -> list[RoundChange]:
        """The change from round `a` to round `b` for each of `codes` (None: all codes) that
        both rounds measured."""
        s = self.s
        reps = None
        n_shared, pairing = 0, "independent"
        if s.n_resamples:
            rng = np.random.default_rng(child_seed(s.seed, s.order.index(a), s.order.index(b), 1))
            first, second = self.items(a), self.items(b)
            va, vb, n_shared = difference_replicates(first, second, s.n_resamples, rng,
                                                     paired=s.pairing == "auto")
            reps = (va, vb)
            pairing = "paired" if n_shared else "independent"
            if s.pairing == "auto" and not n_shared and not first.groups and \
                    ((first.counts != 1).any() or (second.counts != 1).any()):
                self.notes.append(Note("rounds-weighted", f"Rounds {a} and {b} hold weighted rows, so units "
                                       "coded in both cannot be matched; the difference resamples each round "
                                       "on its own."))
        out = []
        for code in codes:
            ra = self.shown[a].overall if code is None else self.shown[a].per_code.get(code)
            rb = self.shown[b].overall if code is None else self.shown[b].per_code.get(code)
            if ra is None or rb is None:
                continue
            est = rb.estimate - ra.estimate
            low = high = p_dec = None
            if reps is not None:
                col = 0 if code is None else 1 + s.codes.index(code)
                low, high, p_dec = difference_interval(reps[0][:, col], reps[1][:, col], estimate=est,
                                                       confidence_level=s.confidence_level)
            beyond = low is not None and (low > 0 or high < 0)
            out.append(RoundChange(a, b, code, est, low, high, s.confidence_level, bool(beyond), p_dec,
                                   int(s.n_resamples), pairing=pairing, n_shared=int(n_shared)))
        return out

    def drift(self) -> DriftCheck | None:
        s = self.s
        if s.drift_round is None:
            return None
        order = list(s.order)
        reference = [n for n in order[:order.index(s.drift_round)] if n != s.drift_round][-1]
        ch = self.changes(reference, s.drift_round, [None])[0]
        res = self.shown[s.drift_round].overall
        est = res.estimate
        return DriftCheck(
            round=s.drift_round, reference=reference, estimate=est, ci_low=res.ci_low, ci_high=res.ci_high,
            p_value_min=res.p_value_min, minimum=s.minimum, change=ch,
            drifted=bool(ch.ci_high is not None and ch.ci_high < 0),
            below_minimum=bool(math.isfinite(est) and est < s.minimum),
            clearly_below_minimum=bool(res.ci_high is not None and math.isfinite(res.ci_high)
                                       and res.ci_high < s.minimum))


# ----------------------------------------------------------------------------------------
# the whole comparison


def compare_rounds(data_by_round: Mapping[str, Any] | CodingData, *, level: str | None = None,
                   minimum: float = DEFAULT_MINIMUM, n_resamples: int = DEFAULT_RESAMPLES, seed: int | None = None,
                   confidence_level: float = DEFAULT_CONFIDENCE, codebooks: Mapping[str, Any] | None = None,
                   drift_round: str | None = None, round_column: str = "round", ci_method: str = DEFAULT_CI_METHOD,
                   cluster: str | None = None, min_units_per_code: int = MIN_UNITS_PER_CODE,
                   pairing: str = "auto", progress: Callable[[str, float], None] | None = None) -> RoundsResult:
    """Agreement per coding round, changes between rounds, definition changes and drift.

    Parameters
    ----------
    data_by_round : {round name: data} in round order, or CodingData with a per-unit round
        column (`round_column`; rounds in order of first appearance).
    level : level of measurement of the overall α (default: the data's). Per code, α is
        nominal on the presence/absence recoding.
    minimum : the minimum acceptable α (default .800).
    n_resamples, seed, confidence_level, ci_method : the bootstrap. The comparisons get seeds
        derived from `seed` (drawn and recorded when None).
    codebooks : {round: codebook file, Codebook or {code: definition}}; codes whose definition
        changed since the round they were last measured in are flagged.
    drift_round : the round in which only a share of units is still double-coded; it is
        compared with the last full round before it instead of being a round of its own.
    cluster : the name of a kept per-unit column (e.g. the interview): whole groups are
        resampled instead of units (a note warns when a round has fewer than 20 groups).
    min_units_per_code : a code used on fewer pairable units than this in a round is "too
        rare" to judge there (the rule of :func:`agree.analysis.diagnostics.diagnose_codes`).
    pairing : "auto" (default): units coded in both of two compared rounds (the same unit id;
        with `cluster`, the same group) are resampled jointly for their difference;
        "independent": each round is resampled on its own, whatever they share.
    progress : optional callback(step, fraction done).

    Returns
    -------
    RoundsResult ; each change says how it was resampled (``pairing``, ``n_shared``).

    Notes
    -----
    The figures shown for a round (overall and per code) are the ones a single analysis of
    that round gives with `seed`: the overall α equals ``krippendorff_alpha(round, seed=seed)``
    (as ``agree score``) and each code's α, interval, one-sided lower bound and status equal
    ``diagnose_codes(round, seed=seed, ...)`` (all codes from one set of resamples, as in the
    report's per-code table).

    The difference between rounds a and b is α_b - α_a, with the percentile interval of
    α*_b,i - α*_a,i, i = 1..B, from one set of resamples per pair of rounds (a seed derived
    from `seed` and the two rounds; overall and every code from the same resamples). Units
    coded in both rounds are drawn jointly, bringing their values in both rounds, and the
    others within their own round, each stratum keeping its size: a paired bootstrap where the
    same units were recoded, the independent two-sample bootstrap where the rounds share none
    (Efron & Tibshirani 1993, ch. 8). Ignoring the pairing would treat correlated estimates as
    independent: for a unit that is hard in both rounds the interval comes out too wide. The
    change is "beyond sampling noise" when the interval excludes 0.
    """
    tick = progress or (lambda step, done: None)
    parts = _rounds_of(data_by_round, round_column)
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum, ci_method=ci_method)
    n_clusters, drift_round = _check_options(parts, cluster=cluster, drift_round=drift_round, codebooks=codebooks,
                                             pairing=pairing)
    first = parts[next(iter(parts))]
    level = level or first.level or "nominal"
    s = _Settings(order=tuple(parts), codes=_code_list(parts), alpha_level="nominal" if first.set_valued else level,
                  distance="masi" if first.set_valued else None,
                  level_label="sets of codes (masi distance)" if first.set_valued else str(level),
                  minimum=float(minimum), seed=draw_seed() if seed is None else int(seed), cluster=cluster,
                  n_clusters=n_clusters, drift_round=drift_round, pairing=pairing,
                  confidence_level=float(confidence_level), n_resamples=int(n_resamples), ci_method=ci_method,
                  min_units_per_code=int(min_units_per_code), progress=tick)
    full = [n for n in s.order if n != drift_round]
    steps = len(s.order) + max(len(full) - 1, 0) + (drift_round is not None)
    warnings: list[Note] = []
    shown: dict[str, RoundAgreement] = {}
    for i, name in enumerate(s.order):
        shown[name], notes = _measure_round(name, parts[name], s)
        warnings.extend(notes)
        tick(f"round {name}", (i + 1) / steps)

    books = {str(k): _load_codebook(v) for k, v in (codebooks or {}).items()}
    definition_changes = _definition_changes(list(s.order), {n: set(r.per_code) for n, r in shown.items()}, books)
    changed: dict[str, list[str]] = {}
    for dc in definition_changes:
        changed.setdefault(dc.round, []).append(dc.code)
    shown = {n: _replace(r, changed_codes=tuple(changed.get(n, ()))) for n, r in shown.items()}

    comparer = _Comparer(parts, shown, s)
    changes: list[RoundChange] = []
    for j, (a, b) in enumerate(zip(full, full[1:])):
        changes.extend(comparer.changes(a, b, [None, *s.codes]))
        tick(f"rounds {a} → {b}", (len(s.order) + j + 1) / steps)
    drift = comparer.drift()
    warnings.extend(comparer.notes)
    if len(s.order) < 2:
        warnings.append(Note("one-round", "Only one round: there is nothing to compare it with."))
    return RoundsResult(rounds=tuple(shown[n] for n in s.order), changes=tuple(changes), drift=drift,
                        definition_changes=tuple(definition_changes), codes=s.codes, level=s.level_label,
                        minimum=s.minimum, confidence_level=s.confidence_level, n_resamples=s.n_resamples,
                        seed=s.seed, warnings=tuple(warnings), cluster=cluster, n_clusters=n_clusters,
                        min_units_per_code=s.min_units_per_code, pairing=pairing)
