"""Reports: the numbers, the wording, the formats and the plots.

External checks: the primary coefficient against the `krippendorff` package (reference
library); APA 7 number style (Publication Manual, 7th ed., sections 6.36 and 6.44: no leading
zero for values that cannot exceed 1, p < .001; from memory); Krippendorff's (2004) .800/.667
and Landis & Koch's (1977) bands (METHODS 10.1); hypothesis properties for the markup and
LaTeX escaping.
"""

from __future__ import annotations

import json
from pathlib import Path

import krippendorff
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from agree.core.format import format_bound, format_interval, format_value
from agree.core.model import AgreeError, from_table
from agree.io.readers import read
from agree.output.report import (
    build_report,
    krippendorff_band,
    landis_koch,
    latex_escape,
    lit,
    plain,
    render_html,
    render_latex,
    render_markdown,
    report_tables,
    spans,
    summarise_consensus,
    write_report,
)
from tests.conftest import as_labels, simulate_codes
from tests.io.test_lists import FORMATS, consensus
from tests.io.test_lists import write as write_table

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
SEED = 20240611


def _sample_round2():
    return read(SAMPLES / "round2.csv", codebook=SAMPLES / "codebook.csv", keep=["interview"])


@pytest.fixture(scope="module")
def sample_report():
    return build_report(_sample_round2(), n_resamples=400, seed=SEED, corpus_size=600)


def _missing_data(seed=7, n=80):
    rng = np.random.default_rng(seed)
    codes = simulate_codes(rng, n, 3, 4, alpha=0.7, missing=0.3)
    labels = as_labels(codes, ["apple", "pear & plum", "50% fig", "kiwi_x"])
    return from_table(labels, coders=["a", "b", "c"]), codes


# -- the formatting function (APA 7 style; Publication Manual 6.36, 6.44, from memory) --------

@pytest.mark.parametrize("value,kind,expected", [
    (0.8432, "coefficient", ".843"),          # three decimals: coefficients that differ there never print alike
    (-0.1234, "coefficient", "\u2212.123"),
    (1.0, "coefficient", "1.000"),
    (-0.0001, "coefficient", ".000"),         # no negative zero
    (0.0004, "probability", "< .001"),
    (0.25, "probability", ".250"),
    (0.8, "threshold", ".800"),
    (2 / 3, "threshold", ".667"),
    (0.034, "se", ".034"),                    # an SE of a coefficient cannot exceed 1: no leading zero either
    (1.25, "number", "1.250"),                # a quantity that can exceed 1 keeps its leading zero
    (0.5, "number", "0.500"),
    (12345, "count", "12,345"),
    (0.25, "percent", "25.0%"),
    (None, "coefficient", "–"),
    (float("nan"), "coefficient", "–"),
])
def test_format_value_apa(value, kind, expected):
    assert format_value(value, kind) == expected


def test_format_interval():
    assert format_interval(0.79, 0.884) == "[.790, .884]"
    assert format_interval(None, 0.5) == "–"


# -- markup and escaping -------------------------------------------------------------------

def test_markup_spans():
    assert spans("*N* = 5 [[fill]] x") == [("italic", "N"), ("text", " = 5 "), ("placeholder", "[fill]"),
                                            ("text", " x")]


@given(st.text(max_size=40))
def test_literal_text_survives_markup(text):
    # user text (code names, file names) is never read as markup
    assert plain(lit(text)) == text
    assert all(kind == "text" for kind, _ in spans(lit(text)))


@settings(max_examples=200)
@given(st.text(alphabet="ab&%$#_{}~^\\ ", max_size=30))
def test_latex_escape_leaves_no_special_character_bare(text):
    out = latex_escape(text)
    i = 0
    while i < len(out):
        ch = out[i]
        if ch == "\\":
            # a control word or an escaped character
            j = i + 1
            while j < len(out) and out[j].isalpha():
                j += 1
            i = max(j, i + 2) if j == i + 1 else j
            if out.startswith("{}", i):
                i += 2
            continue
        assert ch not in "&%$#_{}~^", (text, out)
        i += 1


# -- conventions ---------------------------------------------------------------------------

@pytest.mark.parametrize("value,label", [(-0.1, "poor"), (0.0, "slight"), (0.2, "slight"), (0.21, "fair"),
                                         (0.5, "moderate"), (0.7, "substantial"), (0.81, "almost perfect")])
def test_landis_koch_bands(value, label):
    # Landis & Koch (1977), Biometrics 33(1), p. 165 (bands as in METHODS 10.1)
    assert landis_koch(value) == label


@pytest.mark.parametrize("est,low,band", [(0.85, 0.81, "reliable"), (0.85, 0.75, "estimate-only"),
                                          (0.7, 0.6, "tentative"), (0.6, 0.5, "below"),
                                          (float("nan"), None, "undefined")])
def test_krippendorff_band(est, low, band):
    # Krippendorff (2004): rely at >= .800, tentative from .667; judge by the interval
    assert krippendorff_band(est, low, 0.8) == band


# -- building ------------------------------------------------------------------------------

def test_primary_coefficient_matches_reference_library(sample_report):
    data = _sample_round2()
    matrix = np.where(data.codes.T >= 0, data.codes.T, np.nan).astype(float)
    reference = krippendorff.alpha(reliability_data=matrix, level_of_measurement="nominal")
    out = sample_report.to_dict()
    assert out["primary"] == "krippendorff_alpha"
    assert out["coefficients"][0]["name"] == "krippendorff_alpha"
    assert out["coefficients"][0]["estimate"] == pytest.approx(reference, abs=1e-12)


def test_to_dict_is_json_safe(sample_report):
    text = json.dumps(sample_report.to_dict(), allow_nan=False)
    assert "methods" in json.loads(text)


def test_methods_paragraph_states_facts_and_leaves_placeholders(sample_report):
    text = sample_report.to_dict()["methods"]
    prim = sample_report.primary_result
    assert "Three coders" in text
    assert "N = 150 units" in text
    assert "25.0% of the 600 units" in text
    assert f"random seed {SEED}" in text
    assert "400 draws of the Bayesian bootstrap (Rubin, 1981) with one least-favourable pseudo-unit" in text
    assert "of the units" in text and "keeps its level when few units disagree" in text
    assert "Bayesian bootstrap" in text and "bias-corrected and accelerated" not in text
    assert f"α = {format_value(prim.estimate)}, 95% CI {format_interval(prim.ci_low, prim.ci_high)}" in text
    for placeholder in ("[who the coders were and how they were trained]", "[describe the coding unit]",
                        "[how the sample was selected", "[how disagreements were resolved]"):
        assert placeholder in text
    # italic Latin symbols, upright Greek (APA 7)
    assert ("italic", "N") in spans(sample_report.methods)
    assert not any(kind == "italic" and "α" in t for kind, t in spans(sample_report.methods))


def test_missing_values_are_counted_not_hidden():
    data, codes = _missing_data()
    per_unit = (codes >= 0).sum(axis=1)
    report = build_report(data, n_resamples=0, seed=1)
    s = report.to_dict()["sample"]
    assert s["units_left_out"] == int((per_unit < 2).sum()) > 0
    assert s["units_used"] == int((per_unit >= 2).sum())
    assert s["units_partial"] == int(((per_unit >= 2) & (per_unit < 3)).sum())
    text = report.to_dict()["methods"]
    assert f"left out (n = {s['units_left_out']})" in text
    assert f"n = {s['units_used']} units entered the analysis" in text
    assert "share of the corpus" in text          # no corpus size: a placeholder, not a number


def test_interpretation_names_conventions_and_cautions(sample_report):
    out = sample_report.to_dict()
    joined = " ".join(out["interpretation"])
    assert "Krippendorff (2004)" in joined and "Landis and Koch (1977)" in joined
    assert ".800" in joined and ".667" in joined
    cautions = " ".join(out["cautions"])
    assert "Conventions are not laws" in cautions
    assert "skewed prevalence" in cautions
    assert "Percent agreement alone overstates reliability" in cautions


def test_consensus_counts_by_source():
    data, _ = _missing_data()
    ids = list(map(str, data.unit_ids))
    sources = ["agreed"] * 50 + ["decided"] * 20 + ["majority"] * 7 + ["unresolved"] * 3
    frame = pd.DataFrame({"unit": ids, "final code": "apple", "source": sources})
    report = build_report(data, n_resamples=0, seed=1, consensus=frame)
    c = report.to_dict()["consensus"]
    assert c["by_source"] == {"agreed": 50, "decided": 20, "majority": 7, "unresolved": 3}
    assert c["units_not_in_data"] == 0 and c["data_units_missing"] == 0
    text = report.to_dict()["methods"]
    assert "of the 80 units in the final data, 50 were coded alike" in text
    assert "3 remained unresolved" in text
    tables = {t.key: t for t in report_tables(report)}
    assert [r[1].text for r in tables["consensus"].rows] == ["50", "20", "7", "3"]


def test_consensus_needs_a_source_column(tmp_path):
    bad = tmp_path / "consensus.csv"
    bad.write_text("unit,final code\n1,a\n")
    with pytest.raises(AgreeError) as err:
        summarise_consensus(bad)
    assert err.value.code == "consensus"
    with pytest.raises(AgreeError):
        summarise_consensus(tmp_path / "nope.csv")


def test_bad_settings_raise():
    data, _ = _missing_data()
    with pytest.raises(AgreeError):
        build_report(data, minimum=1.5, n_resamples=0)
    with pytest.raises(AgreeError):
        build_report(data, corpus_size=0, n_resamples=0)
    with pytest.raises(AgreeError):
        build_report(data, rounds="round", n_resamples=0)   # no such column


# -- formats -------------------------------------------------------------------------------

def test_every_format_shows_the_same_numbers(sample_report, tmp_path):
    prim = sample_report.coefficients[0]
    est = format_value(prim.estimate)
    ci = format_interval(prim.ci_low, prim.ci_high)
    md = render_markdown(sample_report)
    tex = render_latex(sample_report)
    html_text = render_html(sample_report, figures=False)
    for text in (md, html_text):
        assert est in text and ci in text
    assert latex_escape(est) in tex and latex_escape(ci) in tex


def test_latex_is_booktabs_and_escaped():
    data, _ = _missing_data()
    report = build_report(data, n_resamples=0, seed=1)
    tex = render_latex(report)
    for rule in ("\\toprule", "\\midrule", "\\bottomrule", "\\begin{tabular}"):
        assert rule in tex
    assert "pear \\& plum" in tex and "50\\% fig" in tex and "kiwi\\_x" in tex
    assert "pear & plum" not in tex
    assert "$\\alpha$" in tex


def test_write_report_formats(sample_report, tmp_path):
    for suffix in (".html", ".md", ".docx", ".tex"):
        written = write_report(sample_report, tmp_path / f"report{suffix}")
        assert written[0].exists() and written[0].stat().st_size > 0
    # each report its own figure folder, so a .md and a .tex of the same name do not collide
    for folder in ("report-md-figures", "report-tex-figures"):
        assert sorted(p.name for p in (tmp_path / folder).iterdir()) == \
            ["code_use.png", "confusion.png", "forest.png"]
    md = (tmp_path / "report.md").read_text()
    assert "](report-md-figures/forest.png)" in md
    assert "{report-tex-figures/forest.png}" in (tmp_path / "report.tex").read_text()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]     # atomic: no leftovers
    with pytest.raises(AgreeError) as err:
        write_report(sample_report, tmp_path / "report.pdf")
    assert err.value.code == "report-format"


def test_html_is_self_contained(sample_report):
    from html.parser import HTMLParser

    class Refs(HTMLParser):
        def __init__(self):
            super().__init__()
            self.refs, self.scripts, self.imgs = [], 0, 0

        def handle_starttag(self, tag, attrs):
            a = dict(attrs)
            if tag == "script":
                self.scripts += 1
            if tag == "img":
                self.imgs += 1
            for key in ("src", "href"):
                if key in a:
                    self.refs.append(a[key])

    p = Refs()
    p.feed(render_html(sample_report))
    assert p.scripts == 0
    assert p.imgs == 3
    assert all(r.startswith("data:image/png;base64,") for r in p.refs)
    assert "@media print" in render_html(sample_report, figures=False)


def test_repr_html(sample_report):
    text = sample_report._repr_html_()
    assert text.startswith('<div class="agree-report">') and "<table" in text


# -- plots: fixed axes, bars from 0, colour-blind-safe palette, not colour alone ------------------

def test_plots_follow_the_rules():
    from agree.output import plots

    fig = plots.forest_plot(["a", "b"], [0.5, 0.9], [0.3, 0.8], minimum=0.8, symbol="α", title="t")
    ax = fig.axes[0]
    assert ax.get_xlim()[0] == pytest.approx(-0.2)              # fixed, not fitted to the data
    assert "axis fixed at \u2212.2 to 1" in ax.get_xlabel()
    assert any(line.get_xdata()[0] == 0.8 for line in ax.get_lines() if line.get_linestyle() == "--")
    assert {line.get_marker() for line in ax.get_lines() if line.get_marker() not in ("None", None, "", "|")} == \
        {"^", "o"}                                                # shape carries the status
    wide = plots.forest_plot(["a"], [-0.5], [-0.7], minimum=0.8, symbol="α", title="t")
    assert wide.axes[0].get_xlim()[0] == pytest.approx(-1.0)

    bars = plots.code_use_bars(["x", "y"], ["c1", "c2"], [[3, 5], [4, 1]], title="t")
    bax = bars.axes[0]
    assert bax.get_xlim()[0] == 0
    hatches = {p.get_hatch() for p in bax.patches}
    assert len(hatches) == 2                                      # coders differ by hatching too
    assert {p.get_facecolor()[:3] for p in bax.patches} <= {tuple(int(h[i:i + 2], 16) / 255 for i in (1, 3, 5))
                                                            for h in plots.OKABE_ITO}

    heat = plots.confusion_heatmap([[5, 1], [2, 7]], ["a", "b"], ["a", "b"], row_title="r", col_title="c",
                                   title="t")
    image = heat.axes[0].images[0]
    assert image.get_cmap().name == "cividis" and image.norm.vmin == 0
    assert image.norm.vmax == 2                                   # the disagreements set the scale
    assert sorted(t.get_text() for t in heat.axes[0].texts) == ["1", "2", "5", "7"]   # counts printed


# -- review fixes ----------------------------------------------------------------------------

def test_interpretation_uses_exactly_the_per_code_statuses(sample_report):
    from agree.output.report import STATUS_TEXT

    text = plain(sample_report.interpretation[-1])
    assert text.startswith("Per code")
    sentences = {}
    for piece in text.split(": ", 1)[1].rstrip(".").split("; "):
        head, names = piece.rsplit("): ", 1)
        status = head.split(" (", 1)[0]
        sentences[status] = {n.strip("‘’") for n in names.split(", ")}
    table = {}
    for rec in sample_report.per_code:
        table.setdefault(rec["status"], set()).add(rec["code"])
    assert sentences == table                         # one source of truth
    assert set(table) <= set(STATUS_TEXT)
    # the old estimate-based bands are gone from the per-code sentence
    assert "tentative" not in text and "below .667" not in text
    # and the per-code table carries the same statuses
    per_code = {t.key: t for t in report_tables(sample_report)}["per_code"]
    col = per_code.header.index("Status")
    assert [r[col].text for r in per_code.rows] == [rec["status"] for rec in sample_report.per_code]


def test_methods_wording_of_the_share_below_and_the_default_minimum(sample_report):
    text = sample_report.to_dict()["methods"]
    prim = sample_report.primary_result
    bound = format_bound(prim.lower_bound, 0.8)
    verdict = "above" if prim.lower_bound > 0.8 else "not above"
    assert f"its one-sided 95% lower bound was {bound}, {verdict} the minimum of .800" in text
    # the p-value against the minimum is never offered as if it were the bound
    assert "probability that" not in text and "share of" not in text and "p-value" not in text
    # text to paste into a paper: no tool-speak about defaults, the reason left to the author
    assert ("The minimum acceptable value was set at .800, following Krippendorff's (2004) convention, "
            "because [why this minimum]") in text
    assert "default" not in text and "no other minimum" not in text
    assert not any("default" in p or "--min" in p for p in sample_report.to_dict()["interpretation"])
    # the fact that it was the default stays in the settings (line and JSON)
    assert sample_report.minimum_default and sample_report.to_dict()["settings"]["minimum_default"]
    from agree.output.report import settings_line
    assert "minimum .800 (the default: no minimum was given)" in settings_line(sample_report)
    given = build_report(_sample_round2(), n_resamples=0, seed=1, minimum=0.8)
    assert not given.minimum_default
    assert "default" not in settings_line(given)
    assert "set at .800 because [why this minimum]" in given.to_dict()["methods"]


def test_cluster_resampling_is_stated_in_the_methods():
    report = build_report(_sample_round2(), n_resamples=200, seed=3, cluster="interview")
    text = report.to_dict()["methods"]
    assert "whole interview groups (n = 12 groups) are weighted" in text
    assert "pseudo-unit is a group of the mean size" in text
    assert "resamples of units" not in text and "of the units" not in text
    assert report.primary_result.bootstrap.unit == "cluster:interview"
    assert report.n_clusters == 12 and report.to_dict()["settings"]["cluster"] == "interview"
    few = [w for w in report.warnings if w.code == "few-clusters"]
    assert len(few) == 1 and "12 interview groups" in few[0].message
    # per-code intervals come from the same kind of resamples
    unclustered = build_report(_sample_round2(), n_resamples=200, seed=3)
    by_code = {r["code"]: r for r in unclustered.per_code}
    assert [r["alpha"] for r in report.per_code] == pytest.approx([by_code[r["code"]]["alpha"]
                                                                   for r in report.per_code])
    assert [r["ci_low"] for r in report.per_code] != [by_code[r["code"]]["ci_low"] for r in report.per_code]
    with pytest.raises(AgreeError):
        build_report(_sample_round2(), n_resamples=0, cluster="nope")


def test_rating_scale_report_skips_the_per_code_section():
    data = read(SAMPLES / "ratings.csv", codebook=SAMPLES / "ratings_codebook.csv")
    report = build_report(data, n_resamples=0, seed=1)
    assert report.level == "ordinal"
    assert report.per_code == () and report.confused_pairs == ()
    keys = {t.key for t in report_tables(report)}
    assert "per_code" not in keys and "confused_pairs" not in keys
    joined = " ".join(plain(p) for p in report.interpretation)
    assert "Agreement per code is not reported" in joined and "rating scale" in joined
    methods = report.to_dict()["methods"]
    assert "codes below it" not in methods
    assert "below .667" not in joined.split("Agreement per code")[-1]
    md = render_markdown(report)
    assert "Agreement per code is not reported" in md and "'2'" not in md


def test_consensus_how_decided_replaces_the_placeholder():
    from agree.output.reconciliation import HOW
    from agree.output.report import HOW_DECIDED

    assert HOW_DECIDED == HOW
    data, _ = _missing_data()
    ids = list(map(str, data.unit_ids))
    sources = ["agreed"] * 50 + ["decided"] * 20 + ["majority"] * 7 + ["unresolved"] * 3
    how = [""] * 50 + ["discussion"] * 12 + ["adjudicator"] * 6 + [""] * 2 + [""] * 10
    frame = pd.DataFrame({"unit": ids, "final code": "apple", "source": sources, HOW: how})
    report = build_report(data, n_resamples=0, seed=1, consensus=frame)
    c = report.to_dict()["consensus"]
    assert c["by_method"] == {"discussion": 12, "adjudicator": 6}
    assert c["decided_without_method"] == 2
    text = report.to_dict()["methods"]
    assert "[how disagreements were resolved]" not in text
    assert "[the procedure" not in text
    assert "20 were decided (12 by discussion, 6 by an adjudicator, and 2 with no procedure recorded)" in text
    assert "as recorded in the consensus file" in text
    # without the column the placeholder stays
    plain_frame = frame.drop(columns=[HOW])
    text = build_report(data, n_resamples=0, seed=1, consensus=plain_frame).to_dict()["methods"]
    assert "[the procedure, e.g. discussion or a third coder]" in text


@pytest.mark.parametrize("kwargs, code", [
    ({"confidence_level": 95}, "ci"), ({"n_resamples": -5}, "boot"), ({"minimum": 1.5}, "minimum"),
    ({"minimum": -1.5}, "minimum"),
])
def test_report_settings_are_checked_like_score(kwargs, code):
    x = np.array([[0, 0], [1, 1], [0, 1], [1, 1], [0, 0]])
    with pytest.raises(AgreeError) as err:
        build_report(x, **kwargs)
    assert err.value.code == code


def test_report_accepts_a_minimum_in_minus_one_to_one():
    # score accepts any minimum in [-1, 1]; so does the report
    x = np.array([[0, 0], [1, 1], [0, 1], [1, 1], [0, 0], [1, 0], [1, 1]])
    assert build_report(x, minimum=-0.2, n_resamples=0).minimum == -0.2


def test_report_on_no_units_raises_empty():
    with pytest.raises(AgreeError) as err:
        build_report(np.empty((0, 2)), n_resamples=0)
    assert err.value.code == "empty"


def test_notebook_html_escapes_and_dashes():
    from agree.core.format import notebook_html
    page = notebook_html("a <summary> & more", pd.DataFrame({"code": ["<x>"], "alpha": [np.nan],
                                                             "n": [12.0], "k": [0.5]}))
    assert "a &lt;summary&gt; &amp; more" in page and "&lt;x&gt;" in page
    assert "<td>–</td>" in page and "<td>12</td>" in page and "<td>.500</td>" in page


def test_prevalence_caution_names_only_the_coefficients_shown(sample_report):
    from agree import score
    from agree.output.report import cautions

    text = " ".join(sample_report.to_dict()["cautions"])
    shown = {r.name for r in sample_report.coefficients}
    assert "run higher on the same data" not in text
    assert "can run well above κ and α on skewed codes" in text
    for name, label in (("gwet_ac1", "Gwet's AC1"), ("brennan_prediger", "Brennan–Prediger"), ("pabak", "PABAK")):
        assert (label in text) == (name in shown)
    # with none of them shown, none is named
    alpha_only = [r for r in sample_report.coefficients if r.name == "krippendorff_alpha"]
    plain_text = " ".join(cautions(alpha_only))
    assert not any(x in plain_text for x in ("AC1", "Brennan", "PABAK", "run well above"))
    # two coders, two categories: PABAK is shown and named
    data = pd.DataFrame({"A": ["y"] * 45 + ["n"] * 5, "B": ["y"] * 43 + ["n"] * 7})
    res = score(data, n_resamples=0)
    if "pabak" in res.coefficients:
        assert "PABAK" in " ".join(cautions(res.coefficients.values()))


def test_coefficients_table_note_says_which_se_is_analytic_and_which_bootstrap(sample_report):
    from agree.output.report import result_label, se_note

    note = {t.key: t for t in report_tables(sample_report)}["coefficients"].note
    for r in sample_report.coefficients:
        if r.se is None:
            continue
        label = result_label(r, sample_report.level)
        assert lit(label) in note
        assert r.se_method in note
    boot = [r for r in sample_report.coefficients if r.se_method and r.se_method.startswith("bootstrap")]
    analytic = [r for r in sample_report.coefficients if r.se_method and not r.se_method.startswith("bootstrap")]
    assert boot and analytic                  # α's SE is a bootstrap SD; the kappas' are analytic
    assert "*SE*: analytic for" in note and "the bootstrap standard deviation for Krippendorff's α" in note
    assert se_note([], "nominal") == "*SE*: none computed."


def test_per_code_table_shows_the_one_sided_bound_rounded_down(sample_report):
    from agree.core.format import format_bound

    table = {t.key: t for t in report_tables(sample_report)}["per_code"]
    col = table.header.index("One-sided 95% lower bound")
    for row, rec in zip(table.rows, sample_report.per_code):
        assert row[col].text == format_bound(rec["lower_bound"], sample_report.minimum)
        if rec["lower_bound"] is not None and rec["lower_bound"] < sample_report.minimum:
            assert float(row[col].text.replace("−", "-")) < sample_report.minimum
        if rec["status"] == "ok":
            assert rec["lower_bound"] >= sample_report.minimum
        if rec["status"] == "uncertain":
            assert rec["alpha"] >= sample_report.minimum > rec["lower_bound"]
    assert "one-sided 95% lower bound" in table.note
    assert "interval reaches below" not in table.note
    assert "one-sided 95% lower bound" in " ".join(sample_report.to_dict()["interpretation"])


def test_methods_paragraph_with_rounds_separates_all_rounds_from_the_round_described():
    from agree.analysis.rounds import compare_rounds

    rng = np.random.default_rng(8)
    def part(ids):
        codes = simulate_codes(rng, len(ids), 2, 3, alpha=0.7)
        return from_table(as_labels(codes, ["x", "y", "z"]), coders=["a", "b"], unit_ids=ids,
                          categories=["x", "y", "z"])
    r1, r2 = part([f"u{i}" for i in range(40)]), part([f"u{i}" for i in range(40, 100)])
    rep = build_report(None, rounds={"1": r1, "2": r2}, n_resamples=0, seed=1, corpus_size=400)
    text = rep.to_dict()["methods"]
    assert "Over 2 rounds, N = 100 units were double-coded (25.0% of the 400-unit corpus)" in text
    assert "describe round 2, the last full round, n = 60 units (15.0% of the corpus)" in text
    assert "Different rounds coded different units" in text
    # overlapping unit ids: counted, not called different
    r3 = part([f"u{i}" for i in range(30, 90)])
    rep = build_report(None, rounds={"1": r1, "2": r3}, n_resamples=0, seed=1)
    text = rep.to_dict()["methods"]
    assert "Different rounds coded different units" not in text
    assert "10 units were coded in more than one round" in text
    assert "corpus" not in text.split("were double-coded")[1].split(";")[0]


# -- consensus files in every format the loaders read --------------------------------------------
@pytest.mark.parametrize("fmt", FORMATS)
def test_consensus_in_every_format(tmp_path, fmt):
    # before: a ';' separated, TSV, Parquet or UTF-16 consensus file had "no 'source' column" or
    # could not be read
    path = write_table(consensus(), tmp_path, fmt, stem="consensus")
    data = from_table([["praise", "praise"], ["idée", "praise"], ["praise", "x"], ["a", "b"]],
                      unit_ids=["b1", "b2", "-3", "b4"])
    summary = summarise_consensus(path, data)
    assert summary.by_source == {"agreed": 1, "decided": 1, "majority": 1, "unresolved": 1}
    assert summary.by_method == {"discussion": 1} and summary.decided_without_method == 0
    assert summary.units_not_in_data == 0 and summary.data_units_missing == 0


def test_consensus_with_numeric_ids_in_a_workbook_matches_the_data(tmp_path):
    path = tmp_path / "consensus.xlsx"
    pd.DataFrame({"unit": [1, 2.0], "source": ["agreed", "agreed"]}).to_excel(path, index=False)
    data = from_table([["a", "a"], ["b", "b"]], unit_ids=["1", "2"])
    assert summarise_consensus(path, data).units_not_in_data == 0


def test_rounds_take_a_mapping_or_a_rounds_result_only():
    from agree.analysis.rounds import compare_rounds, split_rounds

    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    parts = split_rounds(data)
    by_mapping = build_report(None, rounds=parts, n_resamples=0, seed=1)
    compared = compare_rounds(parts, n_resamples=0, seed=1, minimum=0.8)
    by_result = build_report(parts["2"], rounds=compared, n_resamples=0, seed=1)
    assert by_mapping.analysed_round == by_result.analysed_round == "2"
    assert by_mapping.to_dict()["coefficients"] == by_result.to_dict()["coefficients"]
    for bad in ("round", True, False, ["1", "2"]):
        with pytest.raises(AgreeError) as err:
            build_report(data, rounds=bad, n_resamples=0)
        assert err.value.code == "rounds"
    with pytest.raises(AgreeError) as err:
        build_report(parts["2"], drift_round="2", n_resamples=0)
    assert err.value.code == "rounds"
    # a round column without rounds: analysed as one set, and the report says so
    pooled = build_report(data, n_resamples=0, seed=1)
    assert pooled.rounds is None and pooled.sample.units_read == data.n_units
    assert any(w.code == "rounds-pooled" for w in pooled.warnings)
