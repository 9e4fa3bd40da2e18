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
from agree.core.results import AgreementResult, reaches_minimum

if TYPE_CHECKING:
    from agree.output.report.model import ConsensusSummary, Report, StudyReport

PLACEHOLDER_NOTE = "Bracketed, highlighted text is for you to fill in; edit the wording freely."

#: The report's title unless one is given.
DEFAULT_TITLE = "Reliability of the coding"

#: The headings of a report, in the order they appear; every format shows the same ones
#: (`agree.output.report.document`). Our own words; the coefficients keep the trade's names.
HEADINGS = {
    "methods": "Paragraph for the methods section",
    "agreement": "Overall agreement",
    "interpretation": "Interpretation",
    "codes": "Agreement per code",
    "coders": "The coders compared",
    "rounds": "Rounds of coding",
    "resolution": "How disagreements were settled",
    "cautions": "Conventions and cautions",
    "notes": "Data files and notes",
}

# ----------------------------------------------------------------------------------------
# names of coefficients, in markup: from the registry (agree.core.registry)

INTERVAL_METHODS = {
    "pseudo-unit": "Bayesian bootstrap with a least-favourable pseudo-unit",
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
    (`lower` above the minimum, `agree.core.results.reaches_minimum`; the report passes the
    one-sided lower bound, as ``agree score --min``), "estimate-only" (the estimate reaches it,
    the bound does not), "tentative" (.667 up to the minimum), "below", "undefined"."""
    if estimate is None or not math.isfinite(estimate):
        return "undefined"
    if estimate >= minimum:
        return "reliable" if reaches_minimum(lower, minimum) else "estimate-only"
    if estimate >= TENTATIVE:
        return "tentative"
    return "below"


BAND_TEXT = {
    "reliable": "meets the minimum (one-sided lower bound above it)",
    "estimate-only": "estimate at or above the minimum, one-sided lower bound not above it",
    "tentative": "tentative (.667 up to the minimum)",
    "below": "below .667",
    "undefined": "undefined",
}



# ----------------------------------------------------------------------------------------
# text


CAUTIONS = (
    "Conventions are not laws: the thresholds are conventions, not derived cut-offs (Landis and Koch "
    "call their bands arbitrary). Choose the minimum by the cost of drawing a wrong conclusion, and "
    "judge it by the one-sided lower confidence bound, not by the point estimate alone (Krippendorff, 2004).",
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
    shown = list(dict.fromkeys(coefficient_label(r.name) for r in coefficients
                               if family(r.name) == "high-running"))
    if not shown:
        return CAUTIONS
    verb = "it" if len(shown) == 1 else "they"
    names = join_words(shown)
    extra = (f" {names}, also reported here, {'is' if len(shown) == 1 else 'are'} less affected by prevalence: "
             f"{verb} can run well above κ and α on skewed codes, so a higher value there is not more "
             "agreement.")
    first, rest = CAUTIONS[1].split(" The bands", 1)
    return (CAUTIONS[0], first + extra + " The bands" + rest) + CAUTIONS[2:]


_NUMBER_WORDS = {1: "One", 2: "Two", 3: "Three", 4: "Four", 5: "Five", 6: "Six", 7: "Seven", 8: "Eight", 9: "Nine"}


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
                   "than one round (the note to the table of changes says how each difference was "
                   "resampled, paired or not); the other units "
                   "differ between rounds, so a change in agreement between rounds mixes the revisions of the "
                   "codebook with differences between the units coded.")
    return out


def _sample_text(report: Report, coders: str) -> list[str]:
    """Sentences on who coded how many units, and how they were selected (no rounds)."""
    s = report.sample
    unit = "[[describe the coding unit]]" if report.unit is None else lit(report.unit)
    text = (f"{coders} ([[who the coders were and how they were trained]]) coded "
            f"*N* = {format_value(s.units_read, 'count')} units ({unit}) "
            "[[independently of each other: confirm]]")
    if s.corpus_size:
        text += (f", {format_value(s.share_of_corpus, 'percent')} of the "
                 f"{format_value(s.corpus_size, 'count')} units in the corpus, selected "
                 f"[[how the sample was selected, e.g. at random]]")
    else:
        text += ", selected [[how the sample was selected, e.g. at random, and what share of the corpus it is]]"
    return [text + ". Coders worked from [[the codebook version]]."]


def level_text(report: Report) -> str:
    """How the values were analysed: "sets of codes per unit" or "<level> data"."""
    return "sets of codes per unit" if report.set_valued else f"{report.level} data"


def _entered_text(report: Report) -> list[str]:
    """Sentences on the units that entered the analysis and what was left out while reading."""
    s = report.sample
    out = []
    partial = ""
    if s.units_partial:
        partial = (f"; {format_value(s.units_partial, 'count')} of them were coded by fewer than all "
                   f"{s.n_coders} coders, and the coefficients use every pair of values available")
    if s.units_left_out:
        out.append(f"Units coded by fewer than two coders cannot be compared and were left out "
                   f"(*n* = {format_value(s.units_left_out, 'count')}), so "
                   f"*n* = {format_value(s.units_used, 'count')} units entered the analysis{partial}.")
    else:
        out.append(f"Every unit was coded by at least two coders, so all "
                   f"*n* = {format_value(s.units_used, 'count')} units entered the analysis{partial}.")
    if s.reader_left_out:
        out.append(f"While reading the data, {format_value(len(s.reader_left_out), 'count')} "
                   f"entr{'y was' if len(s.reader_left_out) == 1 else 'ies were'} left out "
                   "(listed in the report's notes).")
    return out


_SET_DISTANCES = {"masi": "the MASI distance between sets of codes (Passonneau, 2006)",
                  "jaccard": "the Jaccard distance between sets of codes"}


def _metric_text(report: Report, prim: AgreementResult) -> str:
    """" (nominal metric)" or " with the MASI distance between sets of codes (...)"."""
    if report.set_valued:
        return (f" with {_SET_DISTANCES[str(prim.level)]}" if str(prim.level) in _SET_DISTANCES
                else f" ({lit(prim.level or 'set')} distance)")
    return f" ({lit(prim.level or report.level)} metric)"


def _metric_phrase(report: Report, prim: AgreementResult) -> str:
    """"the ordinal metric" or "the MASI distance between sets of codes (...)"."""
    if report.set_valued:
        return _SET_DISTANCES.get(str(prim.level), f"the {lit(prim.level or 'set')} distance")
    return f"the {lit(prim.level or report.level)} metric"


def _interval_text(report: Report, prim: AgreementResult) -> str:
    """How the confidence intervals and the one-sided bound were made ("" when there are none)."""
    if prim.bootstrap is not None:
        b = prim.bootstrap
        seed_text = f", random seed {b.seed}" if b.seed is not None else ""
        method = INTERVAL_METHODS.get(b.method, lit(b.method))
        clustered = b.unit != "unit" or report.cluster is not None
        column = report.cluster or b.unit.split(":", 1)[-1]
        groups = ("" if report.n_clusters is None else
                  f" (*n* = {format_value(report.n_clusters, 'count')} groups)")
        if clustered:
            seed_text = f" (random seed {b.seed})" if b.seed is not None else ""
        if b.method == "pseudo-unit":
            draws = (f"{format_value(b.replicates, 'count')} draws of the Bayesian bootstrap (Rubin, 1981) "
                     "with one least-favourable pseudo-unit added (the unit that would lower the coefficient "
                     "most; Gaffke, 2005; Learned-Miller & Thomas, 2019)")
            keeps = "; unlike the percentile and BCa bootstrap, this bound keeps its level when few units disagree"
            if clustered:
                return (f"Confidence intervals ({percent_label(prim.confidence_level)}) and the one-sided lower "
                        f"bound come from {draws}{seed_text}, in which whole {lit(column)} groups{groups} are "
                        f"weighted, each with all its units, and the pseudo-unit is a group of the mean size"
                        f"{keeps}.")
            return (f"Confidence intervals ({percent_label(prim.confidence_level)}) and the one-sided lower "
                    f"bound come from {draws} of the units{seed_text}{keeps}.")
        if clustered:
            return (f"Confidence intervals ({percent_label(prim.confidence_level)}) are {method} intervals from "
                    f"{format_value(b.replicates, 'count')} bootstrap resamples{seed_text} in which "
                    f"whole {lit(column)} groups{groups} were resampled, each with all its units, so "
                    f"that units from the same {lit(column)} stay together.")
        return (f"Confidence intervals ({percent_label(prim.confidence_level)}) are {method} intervals from "
                f"{format_value(b.replicates, 'count')} resamples of units{seed_text}.")
    if prim.ci_method:
        return f"The confidence interval is a {INTERVAL_METHODS.get(prim.ci_method, lit(prim.ci_method))}."
    return ""


def bound_text(result: AgreementResult, minimum: float) -> str:
    """The one-sided lower bound against the minimum, as a clause ("" without a bound): "its
    one-sided 95% lower bound was .812, above the minimum of .800" (above = strictly,
    `agree.core.results.reaches_minimum`)."""
    if result.lower_bound is None or not math.isfinite(result.lower_bound):
        return ""
    verdict = "above" if reaches_minimum(result.lower_bound, minimum) else "not above"
    return (f"its one-sided {percent_label(result.confidence_level)} lower bound was "
            f"{format_bound(result.lower_bound, minimum)}, {verdict} the minimum of {format_value(minimum, 'threshold')}")


def _result_text(report: Report, prim: AgreementResult, lead: str = "Overall, ") -> str:
    text = f"{lead}{_stat_markup(prim, report.digits)}"
    bound = bound_text(prim, report.minimum)
    return text + (f"; {bound}" if bound else "")


def _minimum_text(minimum: float, minimum_default: bool, per_code: bool) -> str:
    threshold = format_value(minimum, "threshold")
    codes_clause = ("" if not per_code else
                    "; codes below it were [[what happened to them: dropped, merged or redefined]]")
    if minimum_default:
        # that .800 was the tool's default belongs to the settings and notes, not to a paper
        return (f"The minimum acceptable value was set at {threshold}, following Krippendorff's (2004) "
                f"convention, because [[why this minimum]]{codes_clause}.")
    return f"The minimum acceptable value was set at {threshold} because [[why this minimum]]{codes_clause}."


def _resolution_text(c: ConsensusSummary, name: str = "") -> str:
    """How disagreements were resolved, from a consensus summary (`name`: the variable's)."""
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
    whose = f" of ‘{lit(name)}’" if name else ""
    return (f"Agreement was computed on each coder's own codes, before resolution. Disagreements{whose} were "
            f"then resolved {how}: of the {_units(c.n_units)} in the final data, " + join_words(parts) + ".")


_UNRESOLVED = ("Disagreements were resolved by [[how disagreements were resolved]]; agreement was computed "
               "on each coder's own codes, before resolution.")


def methods_paragraph(report: Report) -> str:
    """The methods paragraph, in markup: facts from the data and settings, placeholders for the
    rest. Nothing is invented: what the tool cannot know stays a bracketed placeholder."""
    p: list[str] = []
    coders = _count_words(report.sample.n_coders, "coder")
    if report.analysed_round is not None and report.rounds is not None:
        p.extend(_rounds_sample_text(report, coders))
    else:
        p.extend(_sample_text(report, coders))
    p.append(f"The codes were analysed as {lit(level_text(report))}.")
    p.extend(_entered_text(report))
    prim = report.primary_result
    if prim is not None:
        coef_text = (f"Agreement was measured with {coefficient_label(prim.name, in_sentence=True)}"
                     f"{_metric_text(report, prim)}, chosen because [[why this coefficient]]")
        others = [result_label(r, report.level, in_sentence=True) for r in report.coefficients[1:]]
        if others:
            coef_text += f"; {join_words(others)} {'is' if len(others) == 1 else 'are'} reported alongside for comparison"
        p.append(coef_text + ".")
        interval = _interval_text(report, prim)
        if interval:
            p.append(interval)
        p.append(_result_text(report, prim) + ".")
    p.append(_minimum_text(report.minimum, report.minimum_default, bool(report.per_code)))
    p.append(_UNRESOLVED if report.consensus is None else _resolution_text(report.consensus))
    p.append("The codebook and the reliability data are available at [[where]].")
    return " ".join(p)


def study_methods_paragraph(sections: Sequence[Report]) -> str:
    """One methods paragraph for several coded variables (each a `Report` whose `variable` is its
    name): what every variable shares is said once, what differs is said per variable."""
    first = sections[0]
    names = [f"‘{lit(r.variable)}’" for r in sections]
    kinds = [f"‘{lit(r.variable)}’ ({lit(level_text(r))})" for r in sections]
    p = [f"{_count_words(len(sections), 'variable')} {'was' if len(sections) == 1 else 'were'} coded: "
         f"{join_words(kinds)}.",
         "The coders ([[who the coders were and how they were trained]]) coded the units "
         "([[describe the coding unit of each variable]]) [[independently of each other: confirm]], "
         "from [[the codebook version of each variable]]."]
    for r in sections:
        s = r.sample
        who = _count_words(s.n_coders, "coder").lower()
        if r.analysed_round is not None and r.rounds is not None:
            k = len(r.rounds.rounds)
            total = s.units_double_coded if s.units_double_coded is not None else s.units_read
            text = (f"For ‘{lit(r.variable)}’, {who} double-coded *N* = {format_value(total, 'count')} units over "
                    f"{k} rounds ({join_words([lit(x.round) for x in r.rounds.rounds])}); the figures describe "
                    f"{round_name(r.analysed_round)}, *n* = {format_value(s.units_read, 'count')} units")
        else:
            text = f"For ‘{lit(r.variable)}’, {who} coded *N* = {format_value(s.units_read, 'count')} units"
            if s.corpus_size:
                text += (f" ({format_value(s.share_of_corpus, 'percent')} of the "
                         f"{format_value(s.corpus_size, 'count')} units in the corpus)")
        if s.units_left_out:
            text += (f"; units coded by fewer than two coders were left out (*n* = "
                     f"{format_value(s.units_left_out, 'count')}), so *n* = {format_value(s.units_used, 'count')} "
                     "units entered the analysis")
        else:
            text += (f"; every unit was coded by at least two coders, so all *n* = "
                     f"{format_value(s.units_used, 'count')} units entered the analysis")
        if s.units_partial:
            text += (f" ({format_value(s.units_partial, 'count')} of them by fewer than all {s.n_coders} coders; "
                     "the coefficients use every pair of values available)")
        if s.reader_left_out:
            text += (f"; while reading, {format_value(len(s.reader_left_out), 'count')} "
                     f"entr{'y was' if len(s.reader_left_out) == 1 else 'ies were'} left out (listed in the notes)")
        p.append(text + ".")
    p.append("The units were selected [[how the sample of each variable was selected, e.g. at random]].")
    with_primary = [r for r in sections if r.primary_result is not None]
    by_coefficient: dict[str, list[Report]] = {}
    for r in with_primary:
        by_coefficient.setdefault(r.primary, []).append(r)
    measures = []
    for name, group in by_coefficient.items():
        metrics = [f"{_metric_phrase(r, r.primary_result)} for ‘{lit(r.variable)}’" for r in group]
        measures.append(f"{coefficient_label(name, in_sentence=True)} (with {join_words(metrics)})")
    if measures:
        text = f"Agreement was measured with {'; '.join(measures)}, chosen because [[why this coefficient]]"
        if any(len(r.coefficients) > 1 for r in with_primary):
            text += "; the tables report other coefficients alongside for comparison"
        p.append(text + ".")
        intervals = [_interval_text(r, r.primary_result) for r in with_primary]
        if len(set(intervals)) == 1 and intervals[0]:
            p.append(intervals[0])
        else:
            p.extend(f"For ‘{lit(r.variable)}’: {t[:1].lower()}{t[1:]}" for r, t in zip(with_primary, intervals) if t)
        results = [_result_text(r, r.primary_result, lead=f"for ‘{lit(r.variable)}’, ") for r in with_primary]
        p.append(results[0][:1].upper() + results[0][1:] + "".join(f"; {x}" for x in results[1:]) + ".")
    p.append(_minimum_text(first.minimum, first.minimum_default, any(r.per_code for r in sections)))
    resolved = [r for r in sections if r.consensus is not None]
    p.extend(_resolution_text(r.consensus, r.variable) for r in resolved)
    if len(resolved) < len(sections):
        rest = [f"‘{lit(r.variable)}’" for r in sections if r.consensus is None]
        p.append(_UNRESOLVED if not resolved else
                 f"Disagreements of {join_words(rest)} were resolved by [[how disagreements were resolved]].")
    p.append(f"The codebooks of {join_words(names)} and the reliability data are available at [[where]].")
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
                "single coder": "were coded by one coder only and kept that coder's code without review",
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
        reached = (f"The one-sided {level} lower bound ({format_bound(bound, report.minimum)}) is above the minimum of "
                   f"{minimum}." if one_sided else
                   f"The whole interval lies above the minimum of {minimum}.")
        short = (f"The estimate reaches the minimum of {minimum}, but its one-sided {level} lower bound "
                 f"({format_bound(bound, report.minimum)}) is not above it, so the data do not show with confidence "
                 "that it is reached"
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
            text += "."
        disagreeing = prim.details.get("disagreeing_units") if prim.details else None
        if disagreeing == 0 and prim.n_units and band in ("reliable", "estimate-only"):
            text += (f" There was no disagreement among the {format_value(prim.n_units, 'count')} units, so the "
                     "bound rests on their number alone.")
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
    "uncertain": "estimate at or above the minimum, one-sided 95% lower bound not above it",
    "too rare": "used on too few units to judge",
    "undefined": "α undefined",
    "ok": "one-sided 95% lower bound above the minimum",
}


def status_text(confidence_level: float = 0.95) -> dict[str, str]:
    """`STATUS_TEXT` at another confidence level (the one-sided bound's level is named)."""
    level = f"{100 * confidence_level:g}%"
    return {k: v.replace("95%", level) for k, v in STATUS_TEXT.items()}


def notes_markup(report: Report, *, footer: bool = True) -> list[str]:
    """Notes in markup: warnings, what was left out, the data files and checksums (and, with
    `footer`, the version of agree that made the report)."""
    out = [lit(w.message) for w in report.warnings]
    out += [f"Left out while reading: {lit(x)}" for x in report.sample.reader_left_out]
    for f in report.sample.files:
        digest = report.sample.checksums.get(f)
        out.append(f"Data file: {lit(f)}" + (f" (SHA-256 {digest})" if digest else ""))
    if footer:
        out.append(made_with())
    return out


def made_with() -> str:
    return f"Made with agree {VERSION}."


def _shared_settings(minimum: float, minimum_default: bool, confidence_level: float, n_resamples: int,
                     seed: int | None) -> str:
    shown_seed = "none drawn" if seed is None else str(seed)
    default = " (the default: no minimum was given)" if minimum_default else ""
    boot = (f"{format_value(n_resamples, 'count')} bootstrap resamples" if n_resamples else
            "no bootstrap resamples (intervals from analytic standard errors where they exist)")
    return (f"minimum {format_value(minimum, 'threshold')}{default} · {percent_label(confidence_level)} "
            f"intervals · {boot} · seed {shown_seed}")


def variable_settings_line(report: Report) -> str:
    """What is the variable's own: level, units, coders."""
    s = report.sample
    return (f"Level: {lit(level_text(report))} · {format_value(s.units_read, 'count')} units, "
            f"{s.n_coders} coders")


def settings_line(report: Report) -> str:
    """The settings of a one-variable report, in one line."""
    s = report.sample
    shared = _shared_settings(report.minimum, report.minimum_default, report.confidence_level,
                              report.n_resamples, report.seed)
    return (f"Level: {lit(report.level)} · {shared} · {format_value(s.units_read, 'count')} units, "
            f"{s.n_coders} coders")


def study_settings_line(study: StudyReport) -> str:
    """The settings every variable of a study shares, in one line."""
    shared = _shared_settings(study.minimum, study.minimum_default, study.confidence_level,
                              study.n_resamples, study.seed)
    return f"{_count_words(len(study.sections), 'variable')} · {shared}"
