"""The coefficient registry: one row per result name, read by everything that names, groups,
cites or runs a coefficient.

`score` runs the standard rows that fit the data (looking each row's `function` up in
`agree.stats.coefficients`); the CLI, reports, notebook tables and the decision sentence take
their names from here; the coefficients' docstrings take their References from here.

Adding a coefficient: a `_Statistic`, a public function, one row below, its tests
(tests/core/test_registry.py checks that every row is computed and every exported
coefficient has a row).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

ALL_LEVELS = ("nominal", "ordinal", "interval", "ratio")
ORDERED_LEVELS = ("ordinal", "interval", "ratio")

#: Interpretation families: which conventions a report applies to a coefficient's value.
FAMILIES = {
    "alpha": "judged against the minimum and Krippendorff's (2004) .667/.800 convention",
    "kappa-type": "labelled with the Landis & Koch (1977) bands",
    "high-running": "can run well above kappa and alpha on skewed codes; no band applied",
    "percent": "not corrected for chance; reported only beside a chance-corrected coefficient",
}

# -- sources (one string each, so a source cited by several rows is listed once) ------------------

BRENNAN_PREDIGER_1981 = ("Brennan, R. L., & Prediger, D. J. (1981). Coefficient kappa: Some uses, misuses, and "
                         "alternatives. EPM, 41(3), 687-699.")
BYRT_1993 = ("Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. Journal of Clinical "
             "Epidemiology, 46(5), 423-429.")
CICCHETTI_ALLISON_1971 = ("Cicchetti, D. V., & Allison, T. (1971). A new procedure for assessing reliability of "
                          "scoring EEG sleep recordings. American Journal of EEG Technology, 11, 263-274.")
COHEN_1960 = "Cohen, J. (1960). A coefficient of agreement for nominal scales. EPM, 20(1), 37-46."
COHEN_1968 = "Cohen, J. (1968). Weighted kappa. Psychological Bulletin, 70(4), 213-220."
CONGER_1980 = ("Conger, A. J. (1980). Integration and generalization of kappas for multiple raters. "
               "Psychological Bulletin, 88(2), 322-328.")
FLEISS_1971 = ("Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psychological "
               "Bulletin, 76(5), 378-382.")
FLEISS_COHEN_1973 = ("Fleiss, J. L., & Cohen, J. (1973). The equivalence of weighted kappa and the intraclass "
                     "correlation coefficient as measures of reliability. EPM, 33, 613-619.")
FLEISS_COHEN_EVERITT_1969 = ("Fleiss, J. L., Cohen, J., & Everitt, B. S. (1969). Large sample standard errors of "
                             "kappa and weighted kappa. Psychological Bulletin, 72(5), 323-327.")
FLEISS_NEE_LANDIS_1979 = "Fleiss, J. L., Nee, J. C. M., & Landis, J. R. (1979). Psychological Bulletin, 86(5), 974-977."
GWET_2008 = ("Gwet, K. L. (2008). Computing inter-rater reliability and its variance in the presence of high "
             "agreement. BJMSP, 61, 29-48.")
GWET_2014 = "Gwet, K. L. (2014). Handbook of Inter-Rater Reliability (4th ed.)."
KRIPPENDORFF_1995 = ("Krippendorff, K. (1995). On the reliability of unitizing continuous data. Sociological "
                     "Methodology, 25, 47-76.")
KRIPPENDORFF_2004 = ("Krippendorff, K. (2004). Content Analysis: An Introduction to Its Methodology (2nd ed.), "
                     "ch. 12.")
KMBW_2016 = ("Krippendorff, K., Mathet, Y., Bouvry, S., & Widlöcher, A. (2016). On the reliability of unitizing "
             "textual continua: Further developments. Quality & Quantity, 50, 2347-2364.")
KRIPPENDORFF_2011 = ("Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School "
                     "for Communication.")
PASSONNEAU_2006 = "Passonneau, R. (2006). Measuring agreement on set-valued items (MASI). LREC 2006."
SCOTT_1955 = "Scott, W. A. (1955). Reliability of content analysis. Public Opinion Quarterly, 19(3), 321-325."
WILSON_1927 = "Wilson, E. B. (1927). Probable inference. JASA, 22, 209-212."


@dataclass(frozen=True)
class Coefficient:
    """One result name and everything the package says about it.

    name : the result's name (`AgreementResult.name`), e.g. "weighted_kappa_quadratic".
    display : plain-text name, as it reads inside a sentence ("percent agreement", "Cohen's kappa");
        the CLI, messages and notebook tables use it, capitalised at the start of a line.
    label : the same words in report markup (Greek letters for the symbols, ``*x*`` italics):
        "Cohen's κ". Only the symbols may differ from `display`.
    family : interpretation family, a key of `FAMILIES`.
    references : the sources, as listed under References in the function's docstring.
    function : the public function that computes it, in `module`.
    module : where `function` lives: `agree.stats.coefficients`, or for coded spans
        `agree.stats.unitizing` (data: SpanData).
    options : keyword arguments that make `function` compute this result, e.g. weights="quadratic".
    standard : whether `score` computes it.
    levels : the levels of measurement at which `score` computes it.
    refuses : `AgreeError` codes by which `function` refuses a design; `score` then skips the
        coefficient and says why, rather than fail. "set-valued" means it needs one code per
        unit and coder.
    score_options : `score` arguments passed on to `function` ("level", "distance").
    designs : which data it suits, in a few words.
    symbol : markup symbol in "α = .84" (the label when empty).
    short : plain text in a sentence such as "alpha = .84" (the display name when empty).
    """

    name: str
    display: str
    label: str
    family: str
    references: tuple[str, ...]
    function: str
    options: tuple[tuple[str, Any], ...] = ()
    module: str = "agree.stats.coefficients"
    standard: bool = True
    levels: tuple[str, ...] = ALL_LEVELS
    refuses: frozenset[str] = frozenset({"set-valued", "q"})
    score_options: tuple[str, ...] = ()
    designs: str = ""
    symbol: str = ""
    short: str = ""

    @property
    def kwargs(self) -> dict[str, Any]:
        return dict(self.options)

    @property
    def takes_sets(self) -> bool:
        """Computed on sets of codes (several codes per unit and coder)."""
        return "set-valued" not in self.refuses

    @property
    def markup_symbol(self) -> str:
        return self.symbol or self.label

    @property
    def sentence_name(self) -> str:
        return self.short or self.display


_TWO = frozenset({"set-valued", "two-coders", "q", "no-coder-identity"})

COEFFICIENTS: tuple[Coefficient, ...] = (
    Coefficient("percent_agreement", "percent agreement", "percent agreement", "percent",
                (FLEISS_1971, WILSON_1927), "percent_agreement", refuses=frozenset(), symbol="*P*",
                designs="any number of coders, missing values, sets of codes (equal sets agree)"),
    Coefficient("cohen_kappa", "Cohen's kappa", "Cohen's κ", "kappa-type",
                (COHEN_1960, FLEISS_COHEN_EVERITT_1969), "cohen_kappa", refuses=_TWO, symbol="κ", short="kappa",
                designs="exactly two coders, one code each; units both coded"),
    Coefficient("scott_pi", "Scott's pi", "Scott's π", "kappa-type", (SCOTT_1955, GWET_2014), "scott_pi",
                symbol="π", short="pi", designs="two or more coders, missing values"),
    Coefficient("fleiss_kappa", "Fleiss' kappa", "Fleiss' κ", "kappa-type",
                (FLEISS_1971, FLEISS_NEE_LANDIS_1979, GWET_2014), "fleiss_kappa", symbol="κ",
                designs="two or more coders, who may differ from unit to unit"),
    Coefficient("conger_kappa", "Conger's kappa", "Conger's κ", "kappa-type", (CONGER_1980, GWET_2014),
                "conger_kappa", refuses=frozenset({"set-valued", "q", "rotating", "no-coder-identity"}), symbol="κ",
                designs="two or more identified coders, the same coders on (nearly) every unit"),
    Coefficient("brennan_prediger", "Brennan–Prediger kappa", "Brennan–Prediger κ", "high-running",
                (BRENNAN_PREDIGER_1981,), "brennan_prediger",
                designs="two or more coders; chance agreement from the number of categories"),
    Coefficient("gwet_ac1", "Gwet's AC1", "Gwet's AC1", "high-running", (GWET_2008, GWET_2014), "gwet_ac1",
                symbol="AC1", designs="two or more coders, missing values"),
    Coefficient("krippendorff_alpha", "Krippendorff's alpha", "Krippendorff's α", "alpha",
                (KRIPPENDORFF_2011, PASSONNEAU_2006), "krippendorff_alpha", refuses=frozenset(),
                score_options=("level", "distance"), symbol="α", short="alpha",
                designs="any number of coders, missing values, every level, sets of codes (MASI or Jaccard)"),
    Coefficient("weighted_kappa_linear", "Cohen's weighted kappa (linear weights)",
                "Cohen's weighted κ (linear weights)", "kappa-type",
                (COHEN_1968, CICCHETTI_ALLISON_1971, FLEISS_COHEN_EVERITT_1969), "cohen_kappa",
                options=(("weights", "linear"),), levels=ORDERED_LEVELS, refuses=_TWO, symbol="κ",
                short="weighted kappa", designs="exactly two coders, ordered categories"),
    Coefficient("weighted_kappa_quadratic", "Cohen's weighted kappa (quadratic weights)",
                "Cohen's weighted κ (quadratic weights)", "kappa-type",
                (COHEN_1968, FLEISS_COHEN_1973, FLEISS_COHEN_EVERITT_1969), "cohen_kappa",
                options=(("weights", "quadratic"),), levels=ORDERED_LEVELS, refuses=_TWO, symbol="κ",
                short="weighted kappa", designs="exactly two coders, ordered categories"),
    Coefficient("gwet_ac2", "Gwet's AC2", "Gwet's AC2", "high-running", (GWET_2014,), "gwet_ac1",
                options=(("weights", "quadratic"),), levels=ORDERED_LEVELS, symbol="AC2",
                designs="two or more coders, ordered categories (any weights; quadratic in score)"),
    Coefficient("weighted_kappa_custom", "Cohen's weighted kappa (custom weights)",
                "Cohen's weighted κ (custom weights)", "kappa-type", (COHEN_1968, FLEISS_COHEN_EVERITT_1969),
                "cohen_kappa", standard=False, levels=(), refuses=_TWO, symbol="κ", short="weighted kappa",
                designs="exactly two coders, a q x q agreement-weight matrix passed as weights="),
    Coefficient("pabak", "PABAK", "PABAK", "high-running", (BYRT_1993,), "pabak", standard=False, levels=(),
                refuses=frozenset({"set-valued", "binary"}),
                designs="a binary code (two categories), two or more coders"),
    Coefficient("unitizing_alpha_experimental", "Krippendorff's alpha for unitizing (experimental)",
                "Krippendorff's α for unitizing (experimental)", "alpha", (KRIPPENDORFF_1995, KRIPPENDORFF_2004,
                                                                          KMBW_2016),
                "unitizing_alpha", module="agree.stats.unitizing", standard=False, levels=(), refuses=frozenset(),
                designs="coded spans (SpanData), every coder on every document; EXPERIMENTAL: partly from "
                        "memory, not checked against a published worked example"),
)

BY_NAME: dict[str, Coefficient] = {c.name: c for c in COEFFICIENTS}


def coefficient(name: str) -> Coefficient | None:
    """The registry row of a result name (None for a name that is not a coefficient)."""
    return BY_NAME.get(name)


def display_name(name: str) -> str:
    """Plain-text name of a result, for messages and tables (inside a sentence)."""
    row = BY_NAME.get(name)
    return row.display if row is not None else name.replace("_", " ")


def family(name: str) -> str | None:
    row = BY_NAME.get(name)
    return row.family if row is not None else None


def standard_set(level: str, *, set_valued: bool = False) -> tuple[Coefficient, ...]:
    """The rows `score` attempts for data at `level` (in the order it reports them); those
    refusing sets of codes are left out for set-valued data."""
    return tuple(c for c in COEFFICIENTS
                 if c.standard and level in c.levels and (c.takes_sets or not set_valued))


def references_for(function: str) -> tuple[str, ...]:
    """The sources of every result `function` computes, in alphabetical order, each once."""
    return tuple(sorted({r for c in COEFFICIENTS if c.function == function for r in c.references}))


def skipped_by_reason(skipped: Mapping[str, str]) -> dict[str, list[str]]:
    """Coefficients not computed, grouped by their reason (reason -> names, in order), so that
    a reason shared by several (Cohen's kappa and the weighted kappas) is said once."""
    groups: dict[str, list[str]] = {}
    for name, reason in skipped.items():
        groups.setdefault(reason, []).append(name)
    return groups
