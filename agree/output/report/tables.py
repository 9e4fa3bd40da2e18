"""The report's tables: the one place numbers are turned into text, once, for every format.

Every number goes through `agree.core.format`, so the formats cannot disagree with each other
or with `Report.to_dict()`; each cell records where its number lives in the dictionary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Sequence

from agree.core.format import (
    format_bound,
    format_interval,
    format_value,
    lit,
    p_min_label,
    p_min_note,
    percent_label,
    signed,
    signed_interval,
)
from agree.core.registry import skipped_by_reason
from agree.core.results import AgreementResult
from agree.output.report.text import INTERVAL_METHODS, coefficient_label, join_words, result_label, status_text

if TYPE_CHECKING:
    from agree.output.report.model import Report

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


def se_note(results: Sequence[AgreementResult], level: str) -> str:
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
    parts = [f"analytic for {join_words(v)}, by {lit(k)}" for k, v in analytic.items()]
    parts += [f"the {lit(k)} for {join_words(v)}" for k, v in boot.items()]
    return "*SE*: " + "; ".join(parts) + "."


def p_min_column_note(results: Sequence[AgreementResult], minimum: float, confidence_level: float,
                      level: str) -> str:
    """What the *p*(≤ minimum) column holds for each result: the one-sided p-value of the
    coefficient at or below the minimum, read off the draws of its bound or, for a result computed
    without resamples (``--boot 0``), from the normal or t approximation with its analytic *SE*."""
    boot = [result_label(r, level) for r in results if r.p_value_min is not None and r.bootstrap is not None]
    approx = [result_label(r, level) for r in results if r.p_value_min is not None and r.bootstrap is None]
    if not approx:
        return p_min_note(minimum, confidence_level, markup=True)
    if not boot:
        return p_min_note(minimum, confidence_level, resampled=False, markup=True)
    return (p_min_note(minimum, confidence_level, markup=True) + f" For {join_words(approx)} no resamples were "
            "drawn: there it is from the normal or t approximation with the analytic *SE* (the score test "
            "for the Wilson bound).")


def _coder_tables(report: Report) -> list[Table]:
    """Agreement of each pair of coders, and α with each coder left out (as `agree coders`)."""
    cs = report.coders
    if cs is None:
        return []
    dg = report.digits
    out = []
    rows = []
    for i, rec in enumerate(cs.pairs):
        path = f"coders.pairs.{i}"
        rows.append((Cell(lit(rec.get("coder_a", ""))), Cell(lit(rec.get("coder_b", ""))),
                     _c(rec.get("n_units"), "count", dg, f"{path}.n_units"),
                     _c(rec.get("percent_agreement"), "percent", dg, f"{path}.percent_agreement"),
                     _c(rec.get("kappa"), "coefficient", dg, f"{path}.kappa"),
                     _c(rec.get("alpha"), "coefficient", dg, f"{path}.alpha")))
    if rows:
        out.append(Table("coder_pairs", "Agreement of each pair of coders",
                         ("Coder", "Coder", "Units both coded", "Percent agreement", "Cohen's κ",
                          f"Krippendorff's α ({lit(cs.level)})"), tuple(rows),
                         note="Over the units both coders coded. Percent agreement: exact matches; Cohen's κ "
                              "treats the values as nominal categories (unweighted)."))
    order = sorted(range(len(cs.leave_one_out)), key=lambda i: -_number(cs.leave_one_out[i].get("delta")))
    rows = []
    for i in order:
        rec = cs.leave_one_out[i]
        path = f"coders.leave_one_out.{i}"
        rows.append((Cell(lit(rec.get("coder", ""))),
                     _c(rec.get("alpha_without"), "coefficient", dg, f"{path}.alpha_without"),
                     Cell(signed(rec.get("delta"), dg), (f"{path}.delta",), True),
                     Cell(signed_interval(rec.get("delta_ci_low"), rec.get("delta_ci_high"), dg),
                          (f"{path}.delta_ci_low", f"{path}.delta_ci_high"), True),
                     _c(rec.get("n_pairable_units"), "count", dg, f"{path}.n_pairable_units")))
    if rows:
        ci = f"{percent_label(cs.confidence_level)} CI of the change"
        how = ("paired bootstrap: α with and without the coder on the same resamples of units"
               if cs.bootstrap else "none, as no bootstrap resamples were drawn")
        out.append(Table("leave_one_out", "Krippendorff's α with each coder left out",
                         ("Coder left out", "α without the coder", "Change", ci, "*n* pairable units"),
                         tuple(rows),
                         note=f"Change: α without the coder minus α of all coders "
                              f"({format_value(cs.alpha, 'coefficient', dg)}); a positive change means the coder "
                              f"lowers agreement. Intervals: {how}. Coders in order of the change, largest first."))
    return out


def _number(x: Any) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return -math.inf
    return v if math.isfinite(v) else -math.inf


def report_tables(report: Report) -> list[Table]:
    """Every table of the report, with its numbers formatted once, for every format."""
    dg = report.digits
    level = f"{percent_label(report.confidence_level)} CI"
    minimum = format_value(report.minimum, "threshold")
    tables = []
    rows = []
    for i, r in enumerate(report.coefficients):
        path = f"coefficients.{i}"
        rows.append((Cell(result_label(r, report.level)), _c(r.estimate, "coefficient", dg, f"{path}.estimate"),
                     _c(r.se, "se", dg, f"{path}.se"), _ci(r.ci_low, r.ci_high, dg, path),
                     Cell(format_bound(r.lower_bound, report.minimum), (f"{path}.lower_bound",), True),
                     _c(r.p_value_min, "probability", dg, f"{path}.p_value_min"),
                     _c(r.n_units, "count", dg, f"{path}.n_units"),
                     Cell(lit(INTERVAL_METHODS.get(r.ci_method or "", r.ci_method or "–")))))
    skipped = "; ".join(f"{join_words([coefficient_label(k) for k in names])}: {lit(reason)}"
                        for reason, names in skipped_by_reason(report.skipped).items())
    tables.append(Table(
        "coefficients", "Agreement coefficients",
        ("Coefficient", "Estimate", "*SE*", level, "One-sided bound", p_min_label(report.minimum, markup=True),
         "*n* units", "Interval"),
        tuple(rows),
        note=(se_note(report.coefficients, report.level) + f" One-sided bound: the one-sided "
              f"{percent_label(report.confidence_level)} lower bound, which decides against the minimum (it must be "
              "above it). " + p_min_column_note(
            report.coefficients, report.minimum, report.confidence_level, report.level)
              + " *n* units: units entering the coefficient." + (f" Not computed: {skipped}." if skipped else "")
              + (f" Units: {lit(report.unit)}." if report.unit else ""))))
    if report.per_code:
        columns = report.per_code[0].keys()
        bound = f"One-sided {100 * report.confidence_level:g}% lower bound"
        spec = [("alpha", "α", "coefficient"), ("ci", level, None), ("lower_bound", bound, "bound"),
                ("p_value_min", p_min_label(report.minimum, markup=True), "probability"),
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
        tables.append(Table("confused_pairs", "Pairs of codes the coders most often disagreed between",
                            ("Code", "Confused with") + tuple(h for _, h, _ in spec), tuple(rows),
                            note="Count: coincidences of the two codes within units (for two coders, units "
                                 "where one gave each; with more coders each pair of values is weighted "
                                 "1/(*m* − 1), so counts can be fractional). α if merged: overall α (nominal; "
                                 "for sets of codes with the same set distance as the coefficients) with the "
                                 "two codes merged into one."))
    tables.extend(_coder_tables(report))
    if report.code_use is not None:
        cu = report.code_use
        rows = []
        for j, code in enumerate(cu.columns):
            rows.append((Cell(lit(code)),) + tuple(
                _c(cu.counts[i][j], "count", dg, f"code_use.counts.{i}.{j}") for i in range(len(cu.rows))))
        tables.append(Table("code_use", "Units given each code, per coder", ("Code",) + tuple(lit(c) for c in cu.rows),
                            tuple(rows)))
    if report.rounds is not None:
        tables.extend(rounds_tables(report.rounds, dg, prefix="rounds"))
    if report.consensus is not None:
        c = report.consensus
        rows = tuple((Cell(lit(k)), _c(n, "count", dg, f"consensus.by_source.{k}"),
                      Cell(format_value(n / c.n_units if c.n_units else None, "percent")))
                     for k, n in c.by_source.items())
        note = "The units of the consensus are the units analysed (checked)."
        tables.append(Table("consensus", "Units by how their final code was reached", ("Source", "Units", "Share"),
                            rows, note=note))
    return tables


def rounds_tables(rounds: Any, dg: int, prefix: str = "") -> list[Table]:
    """Tables of a RoundsResult (per round; changes between rounds; drift; definitions)."""
    pre = f"{prefix}." if prefix else ""
    minimum = format_value(rounds.minimum, "threshold")
    level = f"{percent_label(rounds.confidence_level)} CI"
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
                     _c(r.overall.p_value_min, "probability", dg, f"{path}.overall.p_value_min"),
                     Cell(", ".join(below) or "none")))
    out.append(Table("rounds", "Agreement per coding round",
                     ("Round", "Units", "*n* pairable", "α", level, p_min_label(rounds.minimum, markup=True),
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
                         note=" ".join(getattr(rounds, "pairing_lines", lambda: ())()) + " The interval of "
                              "each difference comes from resamples drawn for the pair of rounds (other "
                              "resamples than the intervals shown per round); “beyond sampling noise” "
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


