"""The report's words: names of coefficients, conventions, the methods paragraph, interpretation,
cautions, the settings line and the notes, all in the markup of `agree.core.format`
(``*N*`` an italic symbol, ``[[...]]`` a placeholder the author fills in; user text through `lit`).

Nothing is invented: what the tool cannot know stays a bracketed placeholder.

References
----------
Krippendorff, K. (2004). Content Analysis: An Introduction to Its Methodology (2nd ed.). Sage.
Landis, J. R., & Koch, G. G. (1977). The measurement of observer agreement for categorical
    data. Biometrics, 33(1), 159-174.
Lombard, M., Snyder-Duch, J., & Bracken, C. C. (2002). Content analysis in mass communication:
    Assessment and reporting of intercoder reliability. Human Communication Research, 28(4).
Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low kappa: I. J. Clin.
    Epidemiol., 43(6), 543-549.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Iterable, Sequence

from agree.analysis.rounds import round_name
from agree.core.constants import TENTATIVE, VERSION
from agree.core.format import format_bound, format_interval, format_value, lit, percent_label
from agree.core.format import result_label as format_result_label
from agree.core.registry import coefficient, family
from agree.core.results import AgreementResult

if TYPE_CHECKING:
    from agree.output.report.model import ConsensusSummary, Report

PLACEHOLDER_NOTE = "Bracketed, highlighted text is for you to fill in; edit the wording freely."

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
    names = join_words(shown)
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
        text += f", {percent_label(r.confidence_level)} CI {format_interval(r.ci_low, r.ci_high, digits)}"
    return text


def _symbol(name: str) -> str:
    row = coefficient(name)
    return row.markup_symbol if row is not None else coefficient_label(name)


def _rounds_sample_text(report: Report, coders: str) -> list[str]:
    """Sentences on the sample when coding ran in rounds: all rounds together (*N*), and the
    round the figures describe (*n*), each with its share of the corpus, so the two counts
    cannot be confused; and whether the rounds coded different units."""
    s = report.sample
    rounds = report.rounds
    k = len(rounds.rounds)
    total = s.units_double_coded if s.units_double_coded is not None else sum(r.n_units for r in rounds.rounds)
    names = join_words([lit(r.round) for r in rounds.rounds])
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
            coef_text += f"; {join_words(others)} {'is' if len(others) == 1 else 'are'} reported alongside for comparison"
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
                p.append(f"Confidence intervals ({percent_label(prim.confidence_level)}) are {method} intervals from "
                         f"{format_value(b.replicates, 'count')} bootstrap resamples{seed_text} in which "
                         f"whole {lit(column)} groups{groups} were resampled, each with all its units, so "
                         f"that units from the same {lit(column)} stay together.")
            else:
                p.append(f"Confidence intervals ({percent_label(prim.confidence_level)}) are {method} intervals from "
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
                 f"then resolved {how}: of the {_units(c.n_units)} in the final data, " + join_words(parts) + ".")
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
    return join_words(parts)


_SOURCE_TEXT = {"agreed": "were coded alike by the coders", "decided": "were decided after discussion "
                "or adjudication", "majority": "took the majority code", "unresolved": "remained unresolved",
                "single coder": "kept the code of the one coder who coded them",
                "not coded": "were coded by nobody"}


def join_words(parts: Sequence[str]) -> str:
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




def notes_markup(report: Report) -> list[str]:
    """Notes in markup: warnings, what was left out, the data files and checksums."""
    out = [lit(w.message) for w in report.warnings]
    out += [f"Left out while reading: {lit(x)}" for x in report.sample.reader_left_out]
    for f in report.sample.files:
        digest = report.sample.checksums.get(f)
        out.append(f"Data file: {lit(f)}" + (f" (SHA-256 {digest})" if digest else ""))
    out.append(f"Made with agree {VERSION}.")
    return out


def settings_line(report: Report) -> str:
    s = report.sample
    seed = "none drawn" if report.seed is None else str(report.seed)
    default = " (the default: no minimum was given)" if report.minimum_default else ""
    return (f"Level: {lit(report.level)} · minimum {format_value(report.minimum, 'threshold')}{default} · "
            f"{percent_label(report.confidence_level)} intervals · {format_value(report.n_resamples, 'count')} bootstrap "
            f"resamples · seed {seed} · {format_value(s.units_read, 'count')} units, {s.n_coders} coders")


