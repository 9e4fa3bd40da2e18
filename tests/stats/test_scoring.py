"""Tests for `agree.score`: every standard coefficient for one data set (synthetic data only).

External checks: the `krippendorff` package (reference library) for alpha, a hand computation
of alpha with the MASI distance (Passonneau 2006), and the individual coefficient functions,
which have their own published/reference tests.
"""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import krippendorff
import numpy as np
import pytest

import agree
from agree.core.model import AgreeError
from agree.core.results import display_name
from agree.stats import coefficients as coef
from tests.conftest import as_float, as_labels, simulate_codes, warning_codes

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
BOOT = 120  # small: the equality checks need the same replicates, not precise intervals

NOMINAL_SET = ["percent_agreement", "scott_pi", "fleiss_kappa", "conger_kappa", "brennan_prediger",
               "gwet_ac1", "krippendorff_alpha"]

# name -> (individual function, its specific keywords); alpha's level is added per test
INDIVIDUAL = {
    "percent_agreement": (coef.percent_agreement, {}),
    "cohen_kappa": (coef.cohen_kappa, {}),
    "scott_pi": (coef.scott_pi, {}),
    "fleiss_kappa": (coef.fleiss_kappa, {}),
    "conger_kappa": (coef.conger_kappa, {}),
    "brennan_prediger": (coef.brennan_prediger, {}),
    "gwet_ac1": (coef.gwet_ac1, {}),
    "krippendorff_alpha": (coef.krippendorff_alpha, {}),
    "weighted_kappa_linear": (coef.cohen_kappa, {"weights": "linear"}),
    "weighted_kappa_quadratic": (coef.cohen_kappa, {"weights": "quadratic"}),
    "gwet_ac2": (coef.gwet_ac1, {"weights": "quadratic"}),
}


def labelled(rng, n_units, n_coders, *, missing=0.0, alpha=0.6, q=4):
    codes = simulate_codes(rng, n_units, n_coders, q, alpha=alpha, missing=missing)
    return agree.from_table(as_labels(codes, ["care", "blame", "anger", "hope"][:q]))


def numeric(rng, n_units, n_coders, *, level, missing=0.1):
    codes = simulate_codes(rng, n_units, n_coders, 5, alpha=0.6, missing=missing)
    return agree.from_table(as_float(codes, [1, 2, 3, 4, 5]), level=level)


def reference_alpha(d, level):
    """Krippendorff's alpha from the `krippendorff` package (coders x units, NaN missing)."""
    codes = d.codes.T
    if level == "interval":
        data = np.where(codes >= 0, np.asarray(d.scores, dtype=float)[np.maximum(codes, 0)], np.nan)
    else:  # nominal and ordinal need only the (ordered) value index
        data = np.where(codes >= 0, codes, -1).astype(float)
        data[codes < 0] = np.nan
    return krippendorff.alpha(reliability_data=data, level_of_measurement=level)


def individual(name, d, *, seed, level="nominal", **opts):
    fn, kw = INDIVIDUAL[name]
    if name == "krippendorff_alpha":
        kw = {**kw, "level": level}
    return fn(d, n_resamples=BOOT, seed=seed, **opts, **kw)


# -- the coefficient set ----------------------------------------------------------------------
def test_nominal_three_coders_coefficient_set(rng):
    d = labelled(rng, 80, 3, missing=0.1)
    r = agree.score(d, n_resamples=BOOT, seed=5)
    assert list(r.coefficients) == NOMINAL_SET
    assert "cohen_kappa" in r.skipped and "two coders" in r.skipped["cohen_kappa"]
    assert r.level == "nominal"
    for name, res in r.coefficients.items():
        assert res.to_dict() == individual(name, d, seed=5).to_dict(), name


def test_nominal_two_coders_adds_cohen_kappa(rng):
    d = labelled(rng, 60, 2, missing=0.1)
    r = agree.score(d, n_resamples=BOOT, seed=9)
    assert set(r.coefficients) == set(NOMINAL_SET) | {"cohen_kappa"}
    assert "cohen_kappa" not in r.skipped
    assert not any(k.startswith("weighted") for k in r.coefficients) and "gwet_ac2" not in r.coefficients
    for name, res in r.coefficients.items():
        assert res.to_dict() == individual(name, d, seed=9).to_dict(), name


@pytest.mark.parametrize("level", ["ordinal", "interval"])
def test_ordered_levels_add_weighted_coefficients(rng, level):
    d = numeric(rng, 70, 2, level=level)
    r = agree.score(d, n_resamples=BOOT, seed=2)
    assert set(r.coefficients) == (set(NOMINAL_SET) | {"cohen_kappa", "weighted_kappa_linear",
                                                       "weighted_kappa_quadratic", "gwet_ac2"})
    assert r.level == level and r.coefficients["krippendorff_alpha"].level == level
    assert r.coefficients["weighted_kappa_linear"].weights == "linear"
    assert r.coefficients["weighted_kappa_quadratic"].weights == "quadratic"
    for name, res in r.coefficients.items():
        assert res.to_dict() == individual(name, d, seed=2, level=level).to_dict(), name


def test_three_coders_ordinal_has_ac2_but_no_weighted_kappa(rng):
    d = numeric(rng, 50, 3, level="ordinal")
    r = agree.score(d, n_resamples=0, seed=1)
    assert "gwet_ac2" in r.coefficients
    assert not any(k.startswith("weighted_kappa") for k in r.coefficients)
    assert "cohen_kappa" in r.skipped


def test_level_argument_overrides_the_data_level(rng):
    d = numeric(rng, 40, 2, level="nominal")
    r = agree.score(d, level="interval", n_resamples=0, seed=1)
    assert r.level == "interval" and "weighted_kappa_quadratic" in r.coefficients
    with pytest.raises(AgreeError) as err:
        agree.score(d, level="fuzzy", n_resamples=0)
    assert err.value.code == "level"


def test_one_coder_is_an_error():
    with pytest.raises(AgreeError) as err:
        agree.score(agree.from_table([["a"], ["b"]]), n_resamples=0)
    assert err.value.code == "one-coder"


# -- alpha against the reference library (krippendorff package) --------------------------------
@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval"])
@pytest.mark.parametrize("n_coders", [2, 4])
def test_alpha_equals_krippendorff_package(rng, level, n_coders):
    d = numeric(rng, 90, n_coders, level=level, missing=0.2)
    r = agree.score(d, n_resamples=0, seed=1)
    assert r.coefficients["krippendorff_alpha"].estimate == pytest.approx(reference_alpha(d, level), abs=1e-10)


def test_alpha_on_sample_round1_equals_krippendorff_package():
    d = agree.read(SAMPLES / "round1.csv", codebook=SAMPLES / "codebook.csv")
    r = agree.score(d, n_resamples=0, seed=1)
    assert r.coefficients["krippendorff_alpha"].estimate == pytest.approx(reference_alpha(d, "nominal"),
                                                                            abs=1e-10)


# -- units and values accounted for ----------------------------------------------------------
def test_units_with_fewer_than_two_values_are_left_out_and_named():
    table = [["a", "b", None], ["a", None, None], ["b", "b", "b"], [None, None, None],
             ["a", "a", None], [None, "b", None]]
    ids = ["u1", "u2", "u3", "u4", "u5", "u6"]
    r = agree.score(agree.from_table(table, unit_ids=ids), n_resamples=0, seed=1)
    out = r.to_dict()
    assert r.units_read == 6 and r.units_used == 3
    assert r.units_left_out == ("u2", "u4", "u6")
    assert out["units"]["left_out"] == 3 and out["units"]["left_out_ids"] == ["u2", "u4", "u6"]
    assert out["units"]["read"] == out["units"]["used"] + out["units"]["left_out"]
    assert out["values"] == {"read": 9, "missing": 9, "used": 7}
    assert out["values"]["read"] + out["values"]["missing"] == 6 * 3
    for res in r.coefficients.values():           # the left-out units are in no coefficient
        assert res.n_units == 3


def test_values_add_up_on_simulated_data(rng):
    codes = simulate_codes(rng, 200, 3, 4, alpha=0.5, missing=0.45)
    d = agree.from_table(as_labels(codes, list("abcd")))
    r = agree.score(d, n_resamples=0, seed=1)
    per_unit = (codes >= 0).sum(axis=1)
    assert r.units_used == int((per_unit >= 2).sum()) and len(r.units_left_out) == int((per_unit < 2).sum())
    assert r.values_read == int((codes >= 0).sum()) and r.values_missing == int((codes < 0).sum())
    # values read = values used + the lone values of left-out units
    assert r.values_read - r.values_used == int(per_unit[per_unit < 2].sum())
    assert r.coefficients["krippendorff_alpha"].n_values == r.values_used


# -- warnings ------------------------------------------------------------------------------------
def test_few_units_warning_below_thirty_used_units(rng):
    # 'common practice': fewer than 30 units is a warning level. Left-out units do not count.
    codes = simulate_codes(rng, 29, 2, 3, alpha=0.7)
    lone = np.array([[0, -1], [-1, 1], [2, -1]])
    few = agree.score(agree.from_table(as_labels(np.vstack([codes, lone]), "xyz")), n_resamples=0, seed=1)
    assert few.units_read == 32 and few.units_used == 29
    assert "few-units" in warning_codes(few)
    assert "29" in next(w.message for w in few.warnings if w.code == "few-units")
    enough = agree.score(agree.from_table(as_labels(np.vstack([codes, codes[:1]]), "xyz")), n_resamples=0,
                         seed=1)
    assert enough.units_used == 30 and "few-units" not in warning_codes(enough)


def test_prevalence_skew_warning():
    # High percent agreement, kappa/alpha near zero, one category dominant: the prevalence
    # paradox (Feinstein & Cicchetti 1990). 90 units a/a, 5 a/b, 5 b/a: p_o = .90, the
    # category 'a' takes 95% of the values, so p_e = .95² + .05² = .905 and kappa < 0.
    rows = [["a", "a"]] * 90 + [["a", "b"]] * 5 + [["b", "a"]] * 5
    r = agree.score(rows, n_resamples=0, seed=1)
    assert r.coefficients["percent_agreement"].estimate == pytest.approx(0.90)
    assert r.coefficients["cohen_kappa"].estimate == pytest.approx((0.90 - 0.905) / (1 - 0.905))
    assert r.coefficients["krippendorff_alpha"].estimate < 0.67
    assert "prevalence-skew" in warning_codes(r)
    message = next(w.message for w in r.warnings if w.code == "prevalence-skew")
    assert "95%" in message
    # balanced categories with high agreement: no such warning
    balanced = [["a", "a"]] * 45 + [["b", "b"]] * 45 + [["a", "b"]] * 5 + [["b", "a"]] * 5
    assert "prevalence-skew" not in warning_codes(agree.score(balanced, n_resamples=0, seed=1))


def test_undefined_coefficients_are_nan_with_a_warning_and_json_none():
    # every value alike, two codebook categories: no expected disagreement, so the
    # chance-corrected coefficients are 0/0
    r = agree.score([["a", "a"]] * 40, categories=["a", "b"], n_resamples=50, seed=1)
    undefined = {"cohen_kappa", "scott_pi", "fleiss_kappa", "conger_kappa", "krippendorff_alpha"}
    for name in undefined:
        assert np.isnan(r.coefficients[name].estimate), name
    assert r.coefficients["percent_agreement"].estimate == 1.0
    messages = [w.message for w in r.warnings if w.code == "undefined"]
    assert len(messages) == len(undefined)
    assert {m.split(" is undefined")[0] for m in messages} == {display_name(n) for n in undefined}
    out = json.loads(json.dumps(r.to_dict(), allow_nan=False))
    for name in undefined:
        assert out["coefficients"][name]["estimate"] is None


def test_one_category_skips_the_kappa_family_with_reasons():
    r = agree.score([["a", "a"]] * 5, n_resamples=0, seed=1)
    assert np.isnan(r.coefficients["krippendorff_alpha"].estimate)
    for name in ("cohen_kappa", "scott_pi", "fleiss_kappa", "conger_kappa", "gwet_ac1"):
        assert "two categories" in r.skipped[name]
    assert {"undefined", "few-units"} <= warning_codes(r)
    json.dumps(r.to_dict(), allow_nan=False)


# -- the decision against a minimum --------------------------------------------------------------
DECISION_KEYS = {"coefficient", "minimum", "estimate", "lower_bound", "bound", "clears_minimum", "rule",
                 "p_value_min", "disagreeing_units", "sentence"}


@pytest.fixture(scope="module")
def round1():
    return agree.read(SAMPLES / "round1.csv", codebook=SAMPLES / "codebook.csv", keep=["interview"])


@pytest.mark.parametrize("minimum", [0.4, 0.7])
def test_decision_with_a_minimum(round1, minimum):
    r = agree.score(round1, minimum=minimum, n_resamples=200, seed=1)
    dec = r.decision()
    assert set(dec) == DECISION_KEYS
    alpha = r.coefficients["krippendorff_alpha"]
    assert dec["coefficient"] == "krippendorff_alpha" == r.primary
    assert dec["estimate"] == alpha.estimate and dec["lower_bound"] == alpha.lower_bound
    assert dec["clears_minimum"] is (alpha.lower_bound > minimum)
    assert dec["clears_minimum"] is (minimum == 0.4)   # alpha ≈ .59 with a lower bound above .5
    assert dec["p_value_min"] == alpha.p_value_min
    assert dec["clears_minimum"] is (alpha.p_value_min < 0.05)
    assert dec["disagreeing_units"] == alpha.details["disagreeing_units"] > 0
    assert "one-sided" in dec["sentence"] and "one-sided" in dec["bound"]
    assert ("does not clear" in dec["sentence"]) is (not dec["clears_minimum"])
    assert r.to_dict()["decision"] == dec
    for res in r.coefficients.values():
        assert res.minimum == minimum


def test_no_decision_without_a_minimum(round1):
    r = agree.score(round1, n_resamples=0, seed=1)
    assert r.decision() is None and r.to_dict()["decision"] is None and r.to_dict()["minimum"] is None


def test_decision_without_bootstrap_does_not_describe_a_missing_bound(round1):
    dec = agree.score(round1, minimum=0.5, n_resamples=0, seed=1).decision()
    assert dec["lower_bound"] is None and dec["clears_minimum"] is None
    assert dec["bound"] is None


# -- sets of codes -----------------------------------------------------------------------------
# MASI distance (Passonneau 2006): d(A, B) = 1 - J(A, B) * M(A, B), with J the Jaccard index and
# M = 1 (A = B), 2/3 (one contains the other), 1/3 (overlap otherwise), 0 (disjoint).
SET_UNITS = [[{"a"}, {"a", "b"}],      # subset: J = 1/2, M = 2/3 -> d = 2/3
             [{"b"}, {"b"}],           # equal:  d = 0
             [{"a", "c"}, {"c"}],      # subset: d = 2/3
             [{"a"}, {"b"}]]           # disjoint: d = 1


def masi_alpha_by_hand() -> Fraction:
    """Alpha = 1 - D_o / D_e for SET_UNITS, worked out with exact fractions.

    Pairable values n = 8. D_o = (1/n) Σ_u Σ_{ordered pairs} d / (m_u - 1)
        = (1/8)(2·2/3 + 0 + 2·2/3 + 2·1) = 7/12.
    Value margins: {a} 2, {a,b} 1, {b} 3, {a,c} 1, {c} 1. Distances between distinct sets:
      {a}-{a,b} 2/3, {a}-{b} 1, {a}-{a,c} 2/3, {a}-{c} 1, {a,b}-{b} 2/3,
      {a,b}-{a,c} 1 - (1/3)(1/3) = 8/9, {a,b}-{c} 1, {b}-{a,c} 1, {b}-{c} 1, {a,c}-{c} 2/3.
    Σ_{c<k} n_c n_k d = 4/3 + 6 + 4/3 + 2 + 2 + 8/9 + 1 + 3 + 3 + 2/3 = 191/9,
    D_e = 2 · (191/9) / (8 · 7) = 191/252, so alpha = 1 - (7/12)/(191/252) = 44/191.
    """
    t = Fraction(2, 3)
    d_o = Fraction(1, 8) * (2 * t + 0 + 2 * t + 2 * 1)
    pairs = (2 * 1 * t + 2 * 3 * 1 + 2 * 1 * t + 2 * 1 * 1 + 1 * 3 * t + 1 * 1 * Fraction(8, 9)
             + 1 * 1 * 1 + 3 * 1 * 1 + 3 * 1 * 1 + 1 * 1 * t)
    d_e = 2 * pairs / (8 * 7)
    return 1 - d_o / d_e


def test_set_valued_alpha_with_masi_matches_hand_computation():
    expected = masi_alpha_by_hand()
    assert expected == Fraction(44, 191)
    r = agree.score(agree.from_table(SET_UNITS), n_resamples=0, seed=1)
    assert list(r.coefficients) == ["percent_agreement", "krippendorff_alpha"]
    assert r.coefficients["krippendorff_alpha"].estimate == pytest.approx(float(expected), abs=1e-12)
    assert r.coefficients["krippendorff_alpha"].level == "masi"
    assert "masi" in r.level
    assert r.coefficients["percent_agreement"].estimate == pytest.approx(0.25)  # 1 of 4 units: equal sets
    assert "kappa family" in r.skipped and "one code per unit" in r.skipped["kappa family"]
    json.dumps(r.to_dict(), allow_nan=False)


def test_set_valued_alpha_with_jaccard_distance():
    # Jaccard distances of SET_UNITS: 1/2, 0, 1/2, 1; D_o = (1/8)(1 + 0 + 1 + 2) = 1/2.
    # Between distinct sets: {a}-{a,b} 1/2, {a}-{b} 1, {a}-{a,c} 1/2, {a}-{c} 1, {a,b}-{b} 1/2,
    # {a,b}-{a,c} 2/3, {a,b}-{c} 1, {b}-{a,c} 1, {b}-{c} 1, {a,c}-{c} 1/2.
    h = Fraction(1, 2)
    pairs = 2 * h + 6 + 2 * h + 2 + 3 * h + Fraction(2, 3) + 1 + 3 + 3 + h
    expected = 1 - Fraction(1, 2) / (2 * pairs / 56)
    r = agree.score(agree.from_table(SET_UNITS), n_resamples=0, seed=1, distance="jaccard")
    assert r.coefficients["krippendorff_alpha"].estimate == pytest.approx(float(expected), abs=1e-12)
    assert "jaccard" in r.level


def test_set_valued_sample_workbook():
    d = agree.read(SAMPLES / "multicode.xlsx")
    r = agree.score(d, n_resamples=0, seed=1)
    assert d.set_valued and set(r.coefficients) == {"percent_agreement", "krippendorff_alpha"}
    assert "kappa family" in r.skipped
    assert r.coefficients["krippendorff_alpha"].to_dict() == coef.krippendorff_alpha(
        d, n_resamples=0, seed=1).to_dict()


# -- reproducibility and JSON --------------------------------------------------------------------
def test_same_seed_same_result_and_json_safe(round1):
    a = agree.score(round1, minimum=0.6, n_resamples=150, seed=42).to_dict()
    b = agree.score(round1, minimum=0.6, n_resamples=150, seed=42).to_dict()
    assert a == b
    text = json.dumps(a, allow_nan=False)
    assert json.loads(text) == a
    assert a["bootstrap"]["seed"] == 42 and a["bootstrap"]["replicates"] == 150
    assert a["bootstrap"]["method"] == "pseudo-unit"
    c = agree.score(round1, minimum=0.6, n_resamples=150, seed=43).to_dict()
    alpha_a, alpha_c = a["coefficients"]["krippendorff_alpha"], c["coefficients"]["krippendorff_alpha"]
    assert alpha_a["estimate"] == alpha_c["estimate"]
    assert (alpha_a["ci_low"], alpha_a["ci_high"]) != (alpha_c["ci_low"], alpha_c["ci_high"])


def test_no_seed_given_records_the_seed_used(rng):
    d = labelled(rng, 40, 2)
    r = agree.score(d, n_resamples=60)
    assert isinstance(r.seed, int)
    assert agree.score(d, n_resamples=60, seed=r.seed).to_dict() == r.to_dict()


# -- clusters ----------------------------------------------------------------------------------
def test_cluster_by_a_kept_column(round1):
    r = agree.score(round1, cluster="interview", n_resamples=100, seed=1)
    plain = agree.score(round1, n_resamples=0, seed=1)
    for name, res in r.coefficients.items():
        assert res.bootstrap.unit == "cluster:interview", name
        assert res.estimate == plain.coefficients[name].estimate
    alpha = coef.krippendorff_alpha(round1, cluster="interview", n_resamples=100, seed=1)
    assert r.coefficients["krippendorff_alpha"].to_dict() == alpha.to_dict()


def test_cluster_unknown_column_is_an_error(round1):
    with pytest.raises(AgreeError) as err:
        agree.score(round1, cluster="household", n_resamples=50, seed=1)
    assert err.value.code == "cluster"
    assert "household" in err.value.message and "interview" in err.value.message


# -- an ordinal scale whose order was only guessed from the labels ---------------------------
ORDINAL_TEXT = [["low", "low"], ["mid", "high"], ["high", "high"], ["mid", "mid"], ["low", "mid"],
                ["high", "mid"], ["low", "low"], ["mid", "mid"]] * 4


def test_alphabetical_scale_order_is_flagged_for_ordinal_alpha_and_weights():
    res = agree.krippendorff_alpha(ORDINAL_TEXT, level="ordinal", n_resamples=0)
    assert [w.code for w in res.warnings] == ["alphabetical-order"]
    assert "high < low < mid" in res.warnings[0].message
    weighted = agree.cohen_kappa(ORDINAL_TEXT, weights="linear", n_resamples=0)
    assert "alphabetical-order" in {w.code for w in weighted.warnings}
    assert "alphabetical-order" in warning_codes(agree.score(ORDINAL_TEXT, level="ordinal", n_resamples=0))


def test_scale_order_given_by_categories_or_numbers_is_not_flagged():
    given = agree.krippendorff_alpha(ORDINAL_TEXT, level="ordinal", n_resamples=0,
                                     categories=["low", "mid", "high"])
    assert not given.warnings
    numbers = [[1, 1], [2, 3], [3, 3], [2, 2], [1, 2]] * 4
    assert not agree.krippendorff_alpha(numbers, level="ordinal", n_resamples=0).warnings
    nominal = agree.krippendorff_alpha(ORDINAL_TEXT, level="nominal", n_resamples=0)
    assert not nominal.warnings   # the order does not matter at nominal level


def test_notebook_view_names_coefficients_for_people_and_shows_the_decision(round1):
    r = agree.score(round1, n_resamples=200, seed=1, minimum=0.8)
    frame = r.to_frame()
    assert list(frame["coefficient"]) == [display_name(k) for k in r.coefficients]
    page = r._repr_html_()
    assert "Krippendorff&#x27;s alpha" in page or "Krippendorff's alpha" in page
    assert "krippendorff_alpha" not in page and "Decision:" in page and ">nan<" not in page.lower()
    assert "<table" in r.coefficients["krippendorff_alpha"]._repr_html_()


def test_alpha_on_coding_data_uses_the_datas_level_unless_given():
    """A coefficient called on CodingData read at the ordinal level computes ordinal alpha, as
    `score` does; an explicit level still wins."""
    from agree.core.model import from_table
    from agree.stats.coefficients import krippendorff_alpha
    from agree.stats.scoring import score

    table = [[1, 2], [2, 2], [3, 1], [4, 4], [2, 3], [1, 1]]
    ordinal = from_table(table, level="ordinal")
    assert krippendorff_alpha(ordinal, n_resamples=0).level == "ordinal"
    assert krippendorff_alpha(ordinal, n_resamples=0).estimate == pytest.approx(
        krippendorff_alpha(from_table(table), level="ordinal", n_resamples=0).estimate)
    assert krippendorff_alpha(ordinal, level="nominal", n_resamples=0).level == "nominal"
    assert score(ordinal, n_resamples=0).coefficients["krippendorff_alpha"].estimate == pytest.approx(
        krippendorff_alpha(ordinal, n_resamples=0).estimate)
