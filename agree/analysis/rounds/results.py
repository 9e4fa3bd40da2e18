"""What `compare_rounds` returns: agreement per round, changes between rounds, definition
changes, the drift check, and the plain-language summary of them."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

from agree.core.constants import MIN_UNITS_PER_CODE, TENTATIVE
from agree.core.format import DEFAULT_DIGITS, percent_label
from agree.core.results import AgreementResult, Note, json_safe


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
    `p_decrease` is the share of difference replicates below 0. `pairing` says how the
    difference was resampled: "paired" when `n_shared` units (or groups, with a cluster
    column) were coded in both rounds and resampled jointly, the others within their own
    round; "independent" when each round was resampled on its own.
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
    pairing: str = "independent"
    n_shared: int = 0

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"from_round": self.from_round, "to_round": self.to_round, "code": self.code,
                       "difference": self.difference, "ci_low": self.ci_low, "ci_high": self.ci_high,
                       "confidence_level": self.confidence_level, "beyond_noise": self.beyond_noise,
                       "p_decrease": self.p_decrease, "n_replicates": self.n_replicates,
                       "pairing": self.pairing, "n_shared": self.n_shared})


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
    pairing : what was asked: "auto" (units, or groups, coded in two compared rounds are
        resampled jointly) or "independent"; each change says what was done.
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
    pairing: str = "auto"

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

    def summary_markup(self, digits: int = DEFAULT_DIGITS) -> tuple[str, ...]:
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
        lines.extend(self.pairing_lines())
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

    def pairing_lines(self) -> tuple[str, ...]:
        """How the differences between rounds were resampled, one line per comparison of the
        overall α (the per-code differences of a comparison use the same resamples)."""
        what = "groups" if self.cluster else "units"
        one = "group" if self.cluster else "unit"
        overall = [ch for ch in self.changes if ch.code is None]
        if self.drift is not None:
            overall.append(self.drift.change)
        if not overall or not self.n_resamples:
            return ()
        if all(ch.pairing == "independent" for ch in overall):
            why = ("pairing was switched off" if self.pairing == "independent" else
                   f"no {one} was coded in two compared rounds")
            return (f"Differences between rounds resample each round on its own ({why}).",)
        lines = []
        for ch in overall:
            rounds = f"{round_name(ch.from_round, capital=True)} and {round_name(ch.to_round)}"
            if ch.pairing == "paired":
                n = ch.n_shared
                sizes = [(self.n_clusters or {}).get(r) if self.cluster else self.round(r).n_units
                         for r in (ch.from_round, ch.to_round)]
                rest = ("" if all(size == n for size in sizes) else
                        f"; the other {what} were resampled within their own round")
                lines.append(f"{rounds}: the {n} {one if n == 1 else what} coded in both were resampled "
                             f"jointly for the difference (a paired bootstrap){rest}.")
            else:
                lines.append(f"{rounds} share no {what}: the difference resamples each round on its own.")
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
                         "pairing": self.pairing,
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
    by = f" by {format_value(abs(ch.difference), 'coefficient', digits)}" if ch.difference != 0 else ""
    return (f"From {round_name(ch.from_round)} to {round_name(ch.to_round)}, α {direction}{by} (difference "
            f"{format_value(ch.difference, 'coefficient', digits)}, {percent_label(ch.confidence_level)} CI "
            f"{format_interval(ch.ci_low, ch.ci_high, digits)}): {verdict}.")
