"""Coding rounds: agreement per round, whether it changed beyond sampling noise, and drift.

A coding project often runs in rounds: code a batch, meet, sharpen the codebook, code the
next batch. `compare_rounds` measures each round (Krippendorff's α at the level over all
codes, and nominal α on each code's presence/absence recoding), with unit-bootstrap
intervals, and compares consecutive rounds by the bootstrap interval of the difference.
When only a share of units is still double-coded after the split (the drift phase), a round
marked as the drift round is compared with the last full round.

Notes
-----
Rounds hold different units, so they are independent samples. The difference of α between
round a and round b is estimated by α_b - α_a; its interval is the percentile interval of
α*_b,i - α*_a,i over i = 1..B, where α*_a and α*_b are bootstrap replicates drawn
independently within each round (units resampled with all their values, METHODS 7.1). The
change is "beyond sampling noise" when that interval excludes 0. Every round and code has
its own seed derived from the one recorded seed, so a run repeats exactly.

References
----------
Efron, B., & Tibshirani, R. J. (1993). An Introduction to the Bootstrap, ch. 8 (two-sample
    problems). Chapman & Hall.
Krippendorff, K. (2004). Content Analysis (2nd ed.), ch. 11. Sage.
O'Connor, C., & Joffe, H. (2020). Intercoder reliability in qualitative research. IJQM, 19.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from dataclasses import replace as _replace
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_MINIMUM, DEFAULT_RESAMPLES, MIN_UNITS_PER_CODE, TENTATIVE
from agree.core.format import percent_label
from agree.core.model import AgreeError, CodingData, as_coding_data
from agree.core.results import AgreementResult, Note, json_safe
from agree.core.seeds import child_seed, draw_seed
from agree.io.codebook import as_codebook
from agree.stats.resampling import check_settings


@dataclass(frozen=True)
class RoundAgreement:
    """One round: overall α and α per code (presence/absence), with intervals."""

    round: str
    n_units: int
    n_coders: int
    overall: AgreementResult
    per_code: Mapping[str, AgreementResult]
    drift: bool = False
    changed_codes: tuple[str, ...] = ()
    code_status: Mapping[str, str] = field(default_factory=dict)
    unit_ids: tuple[str, ...] = field(default=(), repr=False, compare=False)

    @property
    def too_rare(self) -> tuple[str, ...]:
        """Codes used on too few pairable units in this round to judge (status "too rare" of
        :func:`agree.analysis.diagnostics.diagnose_codes`, the same rule)."""
        return tuple(c for c, s in self.code_status.items() if s == "too rare")

    def codes_below(self, limit: float) -> list[str]:
        """Codes with a defined α below `limit`, leaving out codes too rare to judge."""
        rare = set(self.too_rare)
        return [c for c, res in self.per_code.items() if res.defined and res.estimate < limit and c not in rare]

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"round": self.round, "n_units": self.n_units, "n_coders": self.n_coders,
                       "drift": self.drift, "overall": self.overall.to_dict(),
                       "per_code": {k: v.to_dict() for k, v in self.per_code.items()},
                       "code_status": dict(self.code_status),
                       "changed_codes": list(self.changed_codes)})


@dataclass(frozen=True)
class RoundChange:
    """The change in α from one round to another, with the bootstrap interval of the difference.

    `code` is None for the overall α. `beyond_noise` is True when the interval excludes 0.
    `p_decrease` is the share of difference replicates below 0.
    """

    from_round: str
    to_round: str
    code: str | None
    difference: float
    ci_low: float | None
    ci_high: float | None
    confidence_level: float
    beyond_noise: bool
    p_decrease: float | None
    n_replicates: int

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"from_round": self.from_round, "to_round": self.to_round, "code": self.code,
                       "difference": self.difference, "ci_low": self.ci_low, "ci_high": self.ci_high,
                       "confidence_level": self.confidence_level, "beyond_noise": self.beyond_noise,
                       "p_decrease": self.p_decrease, "n_replicates": self.n_replicates})


@dataclass(frozen=True)
class DefinitionChange:
    """A code whose codebook definition in `round` differs from the one in force when the
    code was last measured (`since_round`). `kind` is "definition changed" or "new code"."""

    code: str
    round: str
    since_round: str | None
    kind: str
    before: str | None
    after: str | None

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "round": self.round, "since_round": self.since_round, "kind": self.kind,
                "before": self.before, "after": self.after}


@dataclass(frozen=True)
class DriftCheck:
    """The drift round (only a share of units still double-coded) against the last full round.

    `drifted` is True when the interval of the difference lies wholly below 0;
    `below_minimum` when the drift round's estimate is below the minimum;
    `clearly_below_minimum` when its whole interval is.
    """

    round: str
    reference: str
    estimate: float
    ci_low: float | None
    ci_high: float | None
    p_value_min: float | None
    minimum: float
    change: RoundChange
    drifted: bool
    below_minimum: bool
    clearly_below_minimum: bool

    @property
    def verdict(self) -> str:
        if not math.isfinite(self.estimate):
            return "α undefined in the drift round"
        drop = "dropped beyond sampling noise" if self.drifted else "no drop beyond sampling noise"
        if self.clearly_below_minimum:
            level = "below the minimum (whole interval)"
        elif self.below_minimum:
            level = "estimate below the minimum"
        else:
            level = "estimate at or above the minimum"
        return f"{drop}; {level}"

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"round": self.round, "reference": self.reference, "estimate": self.estimate,
                       "ci_low": self.ci_low, "ci_high": self.ci_high, "p_value_min": self.p_value_min,
                       "minimum": self.minimum, "change": self.change.to_dict(), "drifted": self.drifted,
                       "below_minimum": self.below_minimum,
                       "clearly_below_minimum": self.clearly_below_minimum, "verdict": self.verdict})


@dataclass(frozen=True, eq=False)
class RoundsResult:
    """Agreement per coding round and the comparisons between rounds.

    Attributes
    ----------
    rounds : one RoundAgreement per round, in order.
    changes : consecutive full rounds compared, overall (code None) and per code.
    drift : the drift check, when a drift round was named.
    definition_changes : codes whose definition changed since they were last measured.
    codes : the codes compared per round.
    level, minimum, confidence_level, n_resamples, seed : the settings used.
    warnings : notes from the computations.
    cluster : the column whose groups were resampled whole within each round (None: units).
    n_clusters : {round: number of groups} when `cluster` is set.
    """

    rounds: tuple[RoundAgreement, ...]
    changes: tuple[RoundChange, ...]
    drift: DriftCheck | None
    definition_changes: tuple[DefinitionChange, ...]
    codes: tuple[str, ...]
    level: str
    minimum: float
    confidence_level: float
    n_resamples: int
    seed: int | None
    warnings: tuple[Note, ...] = ()
    cluster: str | None = None
    n_clusters: Mapping[str, int] | None = None
    min_units_per_code: int = MIN_UNITS_PER_CODE

    @property
    def final_round(self) -> str:
        """The last round not marked as the drift round."""
        full = [r.round for r in self.rounds if not r.drift]
        return full[-1] if full else self.rounds[-1].round

    def round(self, name: str) -> RoundAgreement:
        for r in self.rounds:
            if r.round == name:
                return r
        raise KeyError(name)

    def summary_markup(self, digits: int = 2) -> tuple[str, ...]:
        """Plain-language summary lines, in the report markup (see `agree.output.report`)."""
        from agree.core.format import format_interval, format_value, lit

        def stat(res: AgreementResult) -> str:
            text = f"α {format_value(res.estimate, 'coefficient', digits)}"
            if res.ci_low is not None and res.ci_high is not None:
                text += f" {format_interval(res.ci_low, res.ci_high, digits)}"
            return text

        lines = []
        for r in self.rounds:
            tag = " (drift check)" if r.drift else ""
            lines.append(f"{round_name(r.round, capital=True)}{tag} reached {stat(r.overall)} on "
                         f"{format_value(r.overall.n_units, 'count')} pairable units.")
        for ch in self.changes:
            if ch.code is not None:
                continue
            lines.append(_change_line(ch, digits))
        per_code_changes = [ch for ch in self.changes if ch.code is not None and ch.beyond_noise]
        if per_code_changes:
            lines.append("Codes whose α changed beyond sampling noise: " + "; ".join(
                f"‘{lit(ch.code)}’{self._rare_mark(ch)} {lit(ch.from_round)} → {lit(ch.to_round)} "
                f"{format_value(ch.difference, 'coefficient', digits)} "
                f"{format_interval(ch.ci_low, ch.ci_high, digits)}" for ch in per_code_changes)
                + " (with many codes, some such changes arise by chance).")
        final = self.round(self.final_round)
        previous = [r for r in self.rounds if not r.drift and r.round != final.round]
        before = previous[-1] if previous else None
        low = [c for c in final.codes_below(TENTATIVE)]
        mid = [c for c in final.codes_below(self.minimum) if c not in low]
        minimum = format_value(self.minimum, "threshold")
        for codes, bound in ((low, ".667"), (mid, minimum)):
            if not codes:
                continue
            limit = TENTATIVE if bound == ".667" else self.minimum
            was = [before is not None and c in before.codes_below(limit) for c in codes]
            mark_new = before is not None and not all(was)
            words = [f"‘{lit(c)}’ ({format_value(final.per_code[c].estimate, 'coefficient', digits)}"
                     + (f"; not below it in {round_name(before.round)}" if mark_new and not w else "") + ")"
                     for c, w in zip(codes, was)]
            verb = "is" if len(codes) == 1 else "are"
            still = " still" if all(was) else ""
            lines.append(f"In {round_name(final.round)}, {_join(words)} {verb}{still} below {bound}.")
        rare = final.too_rare
        if rare:
            lines.append(f"In {round_name(final.round)}, {_join([f'‘{lit(c)}’' for c in rare])} "
                         f"{'was' if len(rare) == 1 else 'were'} used on too few units to judge (too rare: "
                         f"fewer than {self.min_units_per_code} pairable units with the code).")
        if not low and not mid and final.per_code:
            judged = " and used often enough to judge" if rare else ""
            lines.append(f"In {round_name(final.round)}, every code with a defined α{judged} reached {minimum}.")
        for dc in self.definition_changes:
            since = f" since {round_name(dc.since_round)}" if dc.since_round else ""
            lines.append(f"‘{lit(dc.code)}’: {dc.kind} in {round_name(dc.round)}{since}; compare its α across "
                         "these rounds with care.")
        if self.drift is not None:
            dr = self.drift
            lines.append(f"Drift check: {round_name(dr.round)} reached α "
                         f"{format_value(dr.estimate, 'coefficient', digits)} "
                         f"{format_interval(dr.ci_low, dr.ci_high, digits)} against "
                         f"{format_value(self.round(dr.reference).overall.estimate, 'coefficient', digits)} "
                         f"in {round_name(dr.reference)}: difference "
                         f"{format_value(dr.change.difference, 'coefficient', digits)} "
                         f"{format_interval(dr.change.ci_low, dr.change.ci_high, digits)}; {lit(dr.verdict)}.")
        return tuple(lines)

    def _rare_mark(self, ch: "RoundChange") -> str:
        """" (too rare in round 1)" when the change's code was too rare to judge in either round."""
        if ch.code is None:
            return ""
        names = [r for r in (ch.from_round, ch.to_round) if ch.code in self.round(r).too_rare]
        if not names:
            return ""
        return " (too rare in " + _join([round_name(r) for r in names]) + ")"

    def shared_units(self) -> int | None:
        """Units (by id) coded in more than one round; None when the unit ids are not known."""
        if any(not r.unit_ids for r in self.rounds):
            return None
        seen: dict[str, int] = {}
        for r in self.rounds:
            for u in set(r.unit_ids):
                seen[u] = seen.get(u, 0) + 1
        return sum(1 for n in seen.values() if n > 1)

    def code_status(self, round: str, code: str) -> str | None:
        """The diagnostics status of `code` in `round` (None when not measured there)."""
        return self.round(round).code_status.get(code)

    @property
    def summary(self) -> tuple[str, ...]:
        """The summary lines as plain text."""
        from agree.core.format import plain

        return tuple(plain(s) for s in self.summary_markup())

    def to_frame(self):
        """One row per round and code (code None: all codes): estimate, interval, units."""
        import pandas as pd

        rows = []
        for r in self.rounds:
            for code, res in [(None, r.overall)] + list(r.per_code.items()):
                rows.append({"round": r.round, "code": code, "estimate": res.estimate, "ci_low": res.ci_low,
                             "ci_high": res.ci_high, "p_value_min": res.p_value_min, "n_units": res.n_units,
                             "drift": r.drift, "definition_changed": code in r.changed_codes,
                             "status": None if code is None else r.code_status.get(code)})
        return pd.DataFrame(rows)

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "settings": {"level": self.level, "minimum": self.minimum, "confidence_level": self.confidence_level,
                         "n_resamples": self.n_resamples, "seed": self.seed, "cluster": self.cluster,
                         "min_units_per_code": self.min_units_per_code,
                         "n_clusters": None if self.n_clusters is None else dict(self.n_clusters)},
            "codes": list(self.codes),
            "rounds": [r.to_dict() for r in self.rounds],
            "changes": [c.to_dict() for c in self.changes],
            "drift": None if self.drift is None else self.drift.to_dict(),
            "definition_changes": [d.to_dict() for d in self.definition_changes],
            "final_round": self.final_round,
            "summary": list(self.summary),
            "warnings": [w.to_dict() for w in self.warnings],
        })

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        return notebook_text("RoundsResult", " ".join(self.summary), self.to_frame(),
                             notes=[w.message for w in self.warnings],
                             columns=["round", "code", "estimate", "ci_low", "ci_high", "n_units", "status"])

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        return notebook_html(" ".join(self.summary), self.to_frame(), notes=[w.message for w in self.warnings])


def round_name(name: str, *, capital: bool = False) -> str:
    """'round 2' for a round called '2'; a name that already says 'round' is kept as it is."""
    from agree.core.format import lit

    text = lit(name) if name.lower().startswith("round") else f"round {lit(name)}"
    return text[0].upper() + text[1:] if capital else text


def _join(parts: Sequence[str]) -> str:
    if len(parts) <= 1:
        return "".join(parts)
    return ", ".join(parts[:-1]) + " and " + parts[-1]


def _change_line(ch: RoundChange, digits: int) -> str:
    from agree.core.format import format_interval, format_value

    if ch.difference is None or not math.isfinite(ch.difference):
        return f"From {round_name(ch.from_round)} to {round_name(ch.to_round)} the change in α is undefined."
    direction = "rose" if ch.difference > 0 else "fell" if ch.difference < 0 else "did not change"
    verdict = "larger than sampling noise" if ch.beyond_noise else "within sampling noise"
    return (f"From {round_name(ch.from_round)} to {round_name(ch.to_round)}, α {direction} by "
            f"{format_value(abs(ch.difference), 'coefficient', digits)} (difference "
            f"{format_value(ch.difference, 'coefficient', digits)}, {percent_label(ch.confidence_level)} CI "
            f"{format_interval(ch.ci_low, ch.ci_high, digits)}): {verdict}.")


# ----------------------------------------------------------------------------------------
# computing


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


def _replicates(result: AgreementResult, n_resamples: int) -> np.ndarray:
    """The bootstrap values behind a result's interval (all NaN when it was undefined)."""
    if result.replicates is None:
        return np.full(n_resamples, np.nan)
    return np.asarray(result.replicates, dtype=float)


def difference_interval(from_replicates: np.ndarray, to_replicates: np.ndarray, *, estimate: float,
                        confidence_level: float) -> tuple[float | None, float | None, float | None]:
    """Percentile interval of to - from from independent replicate arrays, and the share of
    differences below 0. Replicates undefined in either round are left out."""
    diff = np.asarray(to_replicates, float) - np.asarray(from_replicates, float)
    diff = diff[np.isfinite(diff)]
    if len(diff) < 2 or not math.isfinite(estimate):
        return None, None, None
    eps = 1 - confidence_level
    low, high = np.quantile(diff, [eps / 2, 1 - eps / 2])
    return float(low), float(high), float(np.mean(diff < 0))


def _finite(x: Any) -> float | None:
    return None if x is None or not math.isfinite(float(x)) else float(x)


def _shown(independent: AgreementResult, row: Mapping[str, Any], diag: Any) -> AgreementResult:
    """A code's α as shown for a round: estimate, interval, one-sided bound and p-value against
    the minimum from `diagnose_codes` (with `seed`); the replicates kept for the differences
    between rounds are the independent ones. The SE is left out: the interval shown and the
    independent replicates come from different resamples."""
    boot = diag.bootstrap
    return _replace(independent, estimate=float(row["alpha"]), ci_low=_finite(row["ci_low"]),
                    ci_high=_finite(row["ci_high"]), lower_bound=_finite(row["lower_bound"]),
                    p_value_min=_finite(row["p_value_min"]), se=None, se_method=None,
                    ci_method=boot.method if boot is not None else independent.ci_method, bootstrap=boot)


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


def compare_rounds(data_by_round: Mapping[str, Any] | CodingData, *, level: str | None = None,
                   minimum: float = DEFAULT_MINIMUM, n_resamples: int = DEFAULT_RESAMPLES, seed: int | None = None,
                   confidence_level: float = DEFAULT_CONFIDENCE, codebooks: Mapping[str, Any] | None = None,
                   drift_round: str | None = None, round_column: str = "round", ci_method: str = DEFAULT_CI_METHOD,
                   cluster: str | None = None, min_units_per_code: int = MIN_UNITS_PER_CODE,
                   progress: Callable[[str, float], None] | None = None) -> RoundsResult:
    """Agreement per coding round, changes between rounds, definition changes and drift.

    Parameters
    ----------
    data_by_round : {round name: data} in round order, or CodingData with a per-unit round
        column (`round_column`; rounds in order of first appearance).
    level : level of measurement of the overall α (default: the data's). Per code, α is
        nominal on the presence/absence recoding.
    minimum : the minimum acceptable α (default .800).
    n_resamples, seed, confidence_level, ci_method : the bootstrap. Each round and code gets
        its own seed derived from `seed` (drawn and recorded when None).
    codebooks : {round: codebook file, Codebook or {code: definition}}; codes whose definition
        changed since the round they were last measured in are flagged.
    drift_round : the round in which only a share of units is still double-coded; it is
        compared with the last full round before it instead of being a round of its own.
    cluster : the name of a kept per-unit column (e.g. the interview): within each round,
        whole groups are resampled instead of units (a note warns when a round has fewer
        than 20 groups).
    min_units_per_code : a code used on fewer pairable units than this in a round is "too
        rare" to judge there (the rule of :func:`agree.analysis.diagnostics.diagnose_codes`).
    progress : optional callback(step, fraction done).

    Returns
    -------
    RoundsResult

    Notes
    -----
    The figures shown for a round (overall and per code) are the ones a single analysis of
    that round gives with `seed`: the overall α equals ``krippendorff_alpha(round, seed=seed)``
    (as ``agree score``) and each code's α, interval, one-sided lower bound and status equal
    ``diagnose_codes(round, seed=seed, ...)`` (all codes from one set of resamples, as in the
    report's per-code table). The intervals of differences between rounds use other,
    independent resamples, drawn with a seed derived from `seed` per round and code.

    Difference of α between independent rounds: α_b - α_a with the percentile interval of
    α*_b,i - α*_a,i, the replicates drawn independently in each round (units resampled with
    all their values, or whole clusters with `cluster`). Beyond sampling noise when the
    interval excludes 0.
    """
    from agree.analysis.diagnostics import diagnose_codes
    from agree.stats.coefficients import krippendorff_alpha

    tick = progress or (lambda step, done: None)
    if isinstance(data_by_round, CodingData):
        parts = split_rounds(data_by_round, round_column)
    elif isinstance(data_by_round, Mapping):
        parts = {str(k): as_coding_data(v) for k, v in data_by_round.items()}
    else:
        raise AgreeError("rounds: give {round: data} or data with a round column", code="rounds")
    if not parts:
        raise AgreeError("no rounds to compare", code="rounds")
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum, ci_method=ci_method)
    order = list(parts)
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
    first = parts[order[0]]
    set_valued = first.set_valued
    level = level or first.level or "nominal"
    distance = "masi" if set_valued else None
    alpha_level = "nominal" if set_valued else level
    if seed is None:
        seed = draw_seed()
    codes: dict[str, None] = {}
    for d in parts.values():
        for c in d.categories:
            codes.setdefault(str(c), None)
    code_list = list(codes)
    opts = dict(confidence_level=confidence_level, n_resamples=n_resamples, ci_method=ci_method, minimum=minimum)

    results: list[RoundAgreement] = []
    reps: dict[tuple[str, str | None], np.ndarray] = {}
    warnings: list[Note] = []
    measured: dict[str, set[str]] = {}
    total = len(order) * (len(code_list) + 1)
    step = 0
    for i, name in enumerate(order):
        d = parts[name]
        s0 = child_seed(seed, i, 0)
        groups = None if cluster is None else np.asarray(d.columns[cluster]).astype(str)
        # the figure shown uses `seed` itself, so it equals `agree score` on the same round; the
        # differences between rounds need independent resamples, drawn with a seed per round
        overall = krippendorff_alpha(d, level=alpha_level, distance=distance, seed=seed, cluster=groups, **opts)
        if cluster is not None and n_resamples:
            # the engine's note says "clusters"; name the column and the round instead
            overall = _replace(overall, warnings=tuple(w for w in overall.warnings if w.code != "few-clusters"))
            if n_clusters[name] < 20:
                warnings.append(Note("few-clusters", f"Round {name}: only {n_clusters[name]} {cluster} groups "
                                     "were resampled; bootstrap intervals from fewer than 20 groups are rough."))
        if n_resamples:
            independent = krippendorff_alpha(d, level=alpha_level, distance=distance, seed=s0, cluster=groups,
                                             **opts)
            reps[(name, None)] = _replicates(independent, n_resamples)
        warnings.extend(Note(w.code, f"Round {name}: {w.message}") for w in overall.warnings)
        step += 1
        tick(f"round {name}", step / total)
        per_code = {}
        status: dict[str, str] = {}
        by_label = {str(c): c for c in d.categories}
        # per code, the figures shown are diagnose_codes' with `seed` (one set of resamples for
        # all codes, as the report's per-code table); differences use independent resamples
        diag = diagnose_codes(d, minimum=minimum, n_resamples=n_resamples, seed=seed,
                              confidence_level=confidence_level, min_units_per_code=min_units_per_code,
                              ci_method=ci_method, cluster=groups) if by_label else None
        rows = {} if diag is None else {str(rec["code"]): rec for rec in diag.per_code.to_dict("records")}
        for j, code in enumerate(code_list, start=1):
            if code in by_label:
                binary = d.presence(by_label[code])
                sj = child_seed(seed, i, j)
                independent = krippendorff_alpha(binary, level="nominal", seed=sj, cluster=groups, **opts)
                if n_resamples:
                    reps[(name, code)] = _replicates(independent, n_resamples)
                per_code[code] = _shown(independent, rows[code], diag)
                status[code] = str(rows[code]["status"])
            step += 1
            tick(f"round {name}", step / total)
        measured[name] = set(per_code)
        results.append(RoundAgreement(round=name, n_units=d.n_units, n_coders=d.n_coders, overall=overall,
                                      per_code=per_code, drift=name == drift_round, code_status=status,
                                      unit_ids=tuple(str(u) for u in d.unit_ids)))

    books = {str(k): _load_codebook(v) for k, v in (codebooks or {}).items()}
    definition_changes = _definition_changes(order, measured, books)
    changed = {}
    for dc in definition_changes:
        changed.setdefault(dc.round, []).append(dc.code)
    results = [_replace(r, changed_codes=tuple(changed.get(r.round, ()))) for r in results]
    by_name = {r.round: r for r in results}

    def change(a: str, b: str, code: str | None) -> RoundChange | None:
        ra = by_name[a].overall if code is None else by_name[a].per_code.get(code)
        rb = by_name[b].overall if code is None else by_name[b].per_code.get(code)
        if ra is None or rb is None:
            return None
        est = rb.estimate - ra.estimate
        low = high = p_dec = None
        if n_resamples and (a, code) in reps and (b, code) in reps:
            low, high, p_dec = difference_interval(reps[(a, code)], reps[(b, code)], estimate=est,
                                                   confidence_level=confidence_level)
        beyond = low is not None and (low > 0 or high < 0)
        return RoundChange(a, b, code, est, low, high, confidence_level, bool(beyond), p_dec, int(n_resamples))

    full = [n for n in order if n != drift_round]
    changes = []
    for a, b in zip(full, full[1:]):
        for code in [None] + code_list:
            ch = change(a, b, code)
            if ch is not None:
                changes.append(ch)
    drift = None
    if drift_round is not None:
        reference = [n for n in order[:order.index(drift_round)] if n != drift_round][-1]
        ch = change(reference, drift_round, None)
        res = by_name[drift_round].overall
        est = res.estimate
        drift = DriftCheck(
            round=drift_round, reference=reference, estimate=est, ci_low=res.ci_low, ci_high=res.ci_high,
            p_value_min=res.p_value_min, minimum=minimum, change=ch,
            drifted=bool(ch.ci_high is not None and ch.ci_high < 0),
            below_minimum=bool(math.isfinite(est) and est < minimum),
            clearly_below_minimum=bool(res.ci_high is not None and math.isfinite(res.ci_high)
                                       and res.ci_high < minimum))
    if len(order) < 2:
        warnings.append(Note("one-round", "Only one round: there is nothing to compare it with."))
    return RoundsResult(rounds=tuple(results), changes=tuple(changes), drift=drift,
                        definition_changes=tuple(definition_changes), codes=tuple(code_list),
                        level=("sets of codes (masi distance)" if set_valued else str(level)),
                        minimum=float(minimum), confidence_level=float(confidence_level),
                        n_resamples=int(n_resamples), seed=seed, warnings=tuple(warnings), cluster=cluster,
                        n_clusters=n_clusters, min_units_per_code=int(min_units_per_code))
