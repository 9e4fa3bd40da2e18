"""Planning the reliability sample (agree.analysis.planning).

Oracles: the `krippendorff` package for the vectorised alpha; the closed forms of METHODS 8.1
and 8.3 (recalled from memory there) against independent checks: Krippendorff's minimum
against a second derivation from the Bloch-Kraemer variance, Donner-Eliasziw's N against a
simulation of the test it plans for; the exact population alpha of the simulation model;
properties (reproducibility, monotonicity).
"""

from __future__ import annotations

import json
import math

import krippendorff
import numpy as np
import pytest

from agree.analysis.planning import (
    _latent_pair_probabilities,
    _nominal_pair_probabilities,
    _pattern_counts,
    _pattern_ids,
    _population_alpha,
    _Studies,
    build_model,
    donner_eliasziw_units,
    krippendorff_minimum_units,
    plan_sample,
    resolve_shares,
)
from agree.core.model import AgreeError
from agree.output.plots import assurance_figure, save_figure
from agree.stats.coefficients import alpha_statistic
from agree.stats.kernels import alpha_from_coincidence, delta_for, ordinal_delta

FAST = dict(replicates=100, n_resamples=100)


def _reference_alpha(codes: np.ndarray, q: int, level: str) -> float:
    data = np.where(codes < 0, np.nan, codes).T.astype(float)
    return krippendorff.alpha(reliability_data=data, level_of_measurement=level,
                              value_domain=list(range(q)))


def _alphas(counts: np.ndarray, patterns, q: int, level: str) -> np.ndarray:
    """Alpha of studies given as pattern counts, as the planner scores them (`score`'s statistic)."""
    stat = alpha_statistic(delta_for(level, scores=np.arange(1, q + 1)))
    return stat.finish(np.asarray(counts, float) @ stat.features(patterns))


def _alpha_via_patterns(codes: np.ndarray, q: int, level: str) -> float:
    ids, pat = _pattern_ids(codes[None], q)
    return float(_alphas(_pattern_counts(ids, codes.shape[0], len(pat.counts)), pat, q, level)[0])


# -- the vectorised alpha against the krippendorff package --------------------------------

@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval"])
@pytest.mark.parametrize("m,q,n,miss", [(2, 2, 40, 0.0), (3, 4, 120, 0.2), (5, 6, 75, 0.35),
                                        (2, 7, 300, 0.1)])
def test_pattern_alpha_matches_krippendorff_package(level, m, q, n, miss):
    rng = np.random.default_rng(1000 * m + q)
    shares = rng.dirichlet(np.ones(q) * 2)
    model, _ = build_model(level, shares, m, 0.6, miss)
    for codes in model.simulate(rng, 3, n):
        codes = codes.astype(np.int64)
        assert _alpha_via_patterns(codes, q, level) == pytest.approx(_reference_alpha(codes, q, level),
                                                                     abs=1e-10)


def test_ordinal_without_delta_equals_delta_form():
    # ordinal δ = (u_c - u_k)² with mid-rank scores u (METHODS 4.3): both routes agree
    rng = np.random.default_rng(7)
    o = rng.integers(0, 20, size=(50, 5, 5)).astype(float)
    o = o + np.swapaxes(o, 1, 2)
    delta = ordinal_delta(o.sum(axis=-1))
    n_c = o.sum(axis=-1)
    n = n_c.sum(axis=-1)
    direct = 1 - (n - 1) * (o * delta).sum(axis=(1, 2)) / (n_c[:, :, None] * n_c[:, None, :] * delta).sum(axis=(1, 2))
    np.testing.assert_allclose(alpha_from_coincidence(o, None), direct, rtol=1e-10, atol=1e-12)


def test_undefined_alpha_is_nan():
    codes = np.zeros((10, 2), dtype=np.int64)            # every value identical: D_e = 0
    assert math.isnan(_alpha_via_patterns(codes, 3, "nominal"))
    one_coder = np.full((10, 2), -1)
    one_coder[:, 0] = 1                                    # no pairable unit
    assert math.isnan(_alpha_via_patterns(one_coder, 3, "nominal"))


def test_resampled_pattern_counts_equal_resampled_units():
    # METHODS 12: a pattern-count replicate gives the value of the unit-level replicate
    rng = np.random.default_rng(3)
    model, _ = build_model("nominal", np.array([0.5, 0.3, 0.2]), 3, 0.7, 0.2)
    codes = model.simulate(rng, 1, 80)[0].astype(np.int64)
    ids, pat = _pattern_ids(codes[None], 3)
    pick = rng.integers(0, 80, size=80)
    counts = np.bincount(ids[0, pick], minlength=len(pat.counts))[None]
    mine = _alphas(counts, pat, 3, "nominal")[0]
    assert mine == pytest.approx(_reference_alpha(codes[pick], 3, "nominal"), abs=1e-12)


def test_simulated_studies_are_scored_repeatably_and_below_their_estimates():
    model, _ = build_model("nominal", np.array([0.6, 0.4]), 2, 0.8, 0.0)
    runs = []
    for _ in range(2):
        studies = _Studies(model, 150, 5, alpha_statistic(delta_for("nominal", n_values=2)), "pseudo-unit", 200,
                           0.95, 0.6, block_size=20)
        studies.add_blocks(2)
        for n in (12, 150):
            studies.evaluate(n)
        runs.append(studies.table())
    for a, b in zip(*runs):
        np.testing.assert_array_equal(a, b)
    units, hits, totals, none = runs[0]
    assert list(units) == [12, 150] and list(totals) == [40, 40]
    assert hits[1] >= hits[0] and none[0] >= none[1]


# -- the simulation model reaches the expected agreement --------------------------------------

@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval"])
@pytest.mark.parametrize("shares", [[0.25, 0.25, 0.25, 0.25], [0.6, 0.25, 0.1, 0.05]])
def test_population_alpha_is_the_target(level, shares):
    shares = np.array(shares)
    _, pop = build_model(level, shares, 3, 0.8, 0.0)
    assert pop == pytest.approx(0.8, abs=1e-6)


def test_nominal_population_alpha_is_theta_squared():
    # METHODS 8.2: population alpha (and Scott's pi) is θ² for any m
    shares = np.array([0.5, 0.3, 0.2])
    for theta in (0.5, 0.8, 0.95):
        assert _population_alpha(_nominal_pair_probabilities(shares, theta), "nominal") == \
            pytest.approx(theta ** 2, abs=1e-12)


def test_latent_pair_probabilities_are_a_distribution():
    p = _latent_pair_probabilities(np.array([0.1, 0.2, 0.3, 0.4]), 0.7)
    assert p.sum() == pytest.approx(1.0, abs=1e-8)
    np.testing.assert_allclose(p, p.T, atol=1e-12)
    np.testing.assert_allclose(p.sum(axis=1), [0.1, 0.2, 0.3, 0.4], atol=1e-8)


@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval"])
def test_simulated_alpha_reaches_target_on_large_samples(level):
    shares = np.array([0.5, 0.3, 0.15, 0.05])
    model, _ = build_model(level, shares, 3, 0.75, 0.1)
    rng = np.random.default_rng(2024)
    # mean of alpha over many simulated data sets, within Monte Carlo error
    ids, pat = _pattern_ids(model.simulate(rng, 400, 500), 4)
    alphas = _alphas(_pattern_counts(ids, 500, len(pat.counts)), pat, 4, level)
    mc = alphas.std(ddof=1) / math.sqrt(len(alphas))
    assert abs(alphas.mean() - 0.75) < 4 * mc + 0.002    # 0.002: alpha's small-sample bias
    # and one big data set checked with the krippendorff package
    big = model.simulate(rng, 1, 20000)[0].astype(np.int64)
    assert _reference_alpha(big, 4, level) == pytest.approx(0.75, abs=0.015)


# -- the planner -------------------------------------------------------------------------------

def test_plan_is_reproducible_with_a_seed():
    a = plan_sample(coders=2, categories=3, expected=0.9, seed=42, **FAST).to_dict()
    b = plan_sample(coders=2, categories=3, expected=0.9, seed=42, **FAST).to_dict()
    c = plan_sample(coders=2, categories=3, expected=0.9, seed=43, **FAST).to_dict()
    assert a == b
    assert a["curve"] != c["curve"]


def test_plan_records_a_seed_when_none_given():
    p = plan_sample(coders=2, categories=2, expected=0.9, seed=None, **FAST)
    again = plan_sample(coders=2, categories=2, expected=0.9, seed=p.seed, **FAST)
    assert again.to_dict()["curve"] == p.to_dict()["curve"]


def test_more_units_more_assurance():
    p = plan_sample(coders=2, categories=3, expected=0.9, minimum=0.8, seed=1, replicates=200,
                    n_resamples=200)
    smooth = [pt.smoothed for pt in p.curve]
    raw = [pt.assurance for pt in p.curve]
    assert all(b >= a for a, b in zip(smooth, smooth[1:]))
    assert raw[-1] > raw[0] + 0.5
    # raw points stay within a few Monte Carlo errors of the smooth curve
    for pt in p.curve:
        assert abs(pt.assurance - pt.smoothed) < 4 * max(pt.mc_error, 0.02)


def test_higher_minimum_needs_more_units():
    common = dict(coders=2, categories=3, expected=0.9, seed=3, **FAST)
    low = plan_sample(minimum=0.7, **common).units_needed
    high = plan_sample(minimum=0.8, **common).units_needed
    assert low is not None and high is not None and high > low


def test_units_needed_reaches_the_assurance():
    p = plan_sample(coders=3, shares=[0.5, 0.3, 0.2], expected=0.85, minimum=0.7, seed=9, **FAST)
    assert p.units_needed is not None
    assert p.assurance_at_units_needed == pytest.approx(0.8, abs=0.02)
    below = [pt for pt in p.curve if pt.units < p.units_needed]
    assert all(pt.smoothed < 0.8 for pt in below)


def test_plan_beyond_range_warns():
    p = plan_sample(coders=2, categories=2, expected=0.82, minimum=0.8, seed=1, max_units=100, **FAST)
    assert p.units_needed is None
    assert "plan-beyond-range" in {w.code for w in p.warnings}
    assert "plan-close-to-minimum" in {w.code for w in p.warnings}


def test_plan_states_model_interval_and_sources():
    p = plan_sample(coders=2, shares=[0.7, 0.3], expected=0.85, minimum=0.6, level="nominal",
                    missing=0.1, seed=5, **FAST)
    d = p.to_dict()
    json.dumps(d, allow_nan=False)
    for key in ("units_needed", "curve", "inputs", "model", "closed_forms", "rules_of_thumb",
                "warnings", "seed", "replicates"):
        assert key in d
    assert set(d["curve"][0]) >= {"units", "assurance", "mc_error"}
    assert "θ = sqrt(.850)" in p.model and "missing completely at random" in p.model
    assert "what agree score computes" in p.interval and "B = 100 draws" in p.interval
    assert "least-favourable pseudo-unit" in p.interval and "strictly above" in p.interval
    names = [c["name"] for c in d["closed_forms"]]
    assert any("Krippendorff" in n for n in names) and any("Donner" in n for n in names)
    assert all(set(c) == {"name", "units", "source", "assumptions"} for c in d["closed_forms"])
    # user-facing text cites the published sources; 'from memory' and internal section
    # numbers stay in the code comments and these tests
    for item in d["closed_forms"] + d["rules_of_thumb"]:
        text = " ".join(str(v) for v in item.values())
        assert "memory" not in text and "METHODS" not in text and "[" not in text
    assert "Krippendorff (2004; 2013), Content Analysis" in d["closed_forms"][0]["source"]
    assert "as given in Krippendorff (2004)" in d["closed_forms"][0]["source"]
    assert ("Whether N counts units or values is not settled here: it is treated as units, which is "
            "conservative") in d["closed_forms"][0]["assumptions"]
    assert d["closed_forms"][0]["assumptions"].startswith("Assumes two coders;")
    assert all("ignores the prevalence" in r["note"] for r in d["rules_of_thumb"])
    mc = [pt["mc_error"] for pt in d["curve"]]
    for pt, err in zip(d["curve"], mc):
        assert err == pytest.approx(math.sqrt(pt["assurance"] * (1 - pt["assurance"]) / pt["studies"]))
        assert pt["studies"] >= 100 and 0 <= pt["no_disagreement"] <= 1


def test_donner_eliasziw_only_for_two_coders_two_categories():
    p = plan_sample(coders=3, shares=[0.7, 0.3], expected=0.9, seed=5, **FAST)
    assert not any("Donner" in c.name for c in p.closed_forms)


def test_ordinal_plan_states_latent_model():
    p = plan_sample(coders=2, categories=4, expected=0.9, level="ordinal", seed=2, **FAST)
    assert "latent normal" in p.model
    assert p.population_alpha == pytest.approx(0.9, abs=1e-6)
    assert 0.9 < p.details["latent_correlation"] < 1


def test_rules_of_thumb_with_corpus_size():
    p = plan_sample(coders=2, categories=2, expected=0.9, seed=1, corpus_size=1000, **FAST)
    lombard, oconnor = p.rules_of_thumb
    # Lombard et al. (2002): at least 50 units or 10% (common practice); O'Connor & Joffe (2020): 10-25%
    assert lombard.units == 100
    assert (oconnor.units, oconnor.units_high) == (100, 250)


def test_plot_is_written(tmp_path):
    p = plan_sample(coders=2, categories=2, expected=0.9, seed=1, **FAST)
    out = tmp_path / "curve.png"
    save_figure(assurance_figure(p), out)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [f.name for f in tmp_path.iterdir()] == ["curve.png"]


# -- closed forms -------------------------------------------------------------------------------

def test_donner_eliasziw_worked_value():
    # METHODS 8.3, Donner & Eliasziw (1992): the value N = 38 for κ0 = 0.4, κ1 = 0.8, π = 0.3,
    # one-sided 0.05, power 0.8 was computed from the formula as recalled there [from memory];
    # it is not read from the paper's table. The simulation below checks it independently.
    n = donner_eliasziw_units(0.4, 0.8, 0.3, significance=0.05, power=0.8)
    assert math.ceil(n) == 38
    assert donner_eliasziw_units(0.4, 0.8, 0.7) == pytest.approx(n)          # symmetric in π
    assert donner_eliasziw_units(0.4, 0.8, 0.3, two_sided=True) > n


def _goodness_of_fit_rejects(rng, kappa, n_units, reps, kappa0=0.4, prevalence=0.3, significance=0.05):
    """Simulate the test the formula plans for: two coders, a binary code with common
    prevalence π, cells (both yes, one yes, both no) with P1 = π² + π(1-π)κ, P2 = 2π(1-π)(1-κ),
    P3 = (1-π)² + π(1-π)κ; π estimated from the data, the goodness-of-fit X² of the counts
    against the cells at κ0 on one degree of freedom, one-sided (κ̂ > κ0 and X² beyond the
    two-sided critical value of 2 x significance). Returns the share of rejections."""
    pq = prevalence * (1 - prevalence)
    cells = [prevalence ** 2 + pq * kappa, 2 * pq * (1 - kappa), (1 - prevalence) ** 2 + pq * kappa]
    counts = rng.multinomial(n_units, cells, size=reps).astype(float)
    pi_hat = (2 * counts[:, 0] + counts[:, 1]) / (2 * n_units)
    pq_hat = pi_hat * (1 - pi_hat)
    ok = pq_hat > 0
    expected = n_units * np.column_stack([pi_hat ** 2 + pq_hat * kappa0, 2 * pq_hat * (1 - kappa0),
                                          (1 - pi_hat) ** 2 + pq_hat * kappa0])
    with np.errstate(divide="ignore", invalid="ignore"):
        x2 = ((counts - expected) ** 2 / expected).sum(axis=1)
        kappa_hat = 1 - counts[:, 1] / (2 * n_units * pq_hat)
    from scipy import stats

    reject = ok & (kappa_hat > kappa0) & (x2 > stats.chi2.ppf(1 - 2 * significance, 1))
    return reject.mean()


def test_donner_eliasziw_units_give_the_power_by_simulation():
    """At the formula's N the simulated test holds its level at κ0 and reaches about the
    planned power at κ1 (the formula is a large-sample approximation: with π estimated the
    simulated power at N = 38 is about .86, so it errs on the safe side). 4,000 data sets:
    Monte Carlo SE about .006."""
    rng = np.random.default_rng(2)
    n = math.ceil(donner_eliasziw_units(0.4, 0.8, 0.3, significance=0.05, power=0.8))
    power = _goodness_of_fit_rejects(rng, 0.8, n, 4000)
    size = _goodness_of_fit_rejects(rng, 0.4, n, 4000)
    assert 0.78 < power < 0.93
    assert size < 0.05 + 3 * math.sqrt(0.05 * 0.95 / 4000)


# Krippendorff's minimum sample, METHODS 8.1 table (p = 0.05). The values were computed from
# the formula as recalled (Krippendorff 2004) [from memory]; they are not read from the book's
# printed table, which we cannot recall with confidence. Checked below by a second derivation.
KRIPPENDORFF_TABLE = [
    (0.667, 0.5, 60), (0.667, 0.25, 81), (0.667, 0.10, 172), (0.667, 0.05, 330),
    (0.800, 0.5, 103), (0.800, 0.25, 139), (0.800, 0.10, 294), (0.800, 0.05, 560),
    (0.900, 0.5, 212), (0.900, 0.25, 283), (0.900, 0.10, 595), (0.900, 0.05, 1132),
]


def _bloch_kraemer_units(alpha_min, pc, significance=0.05):
    """A second derivation (METHODS 8.1, the identity checked there): the units a one-sided
    z-test of κ = α_min needs when the true intraclass kappa is κ* = (1 + α_min)/2, with the
    Bloch & Kraemer (1989) large-sample variance of the intraclass kappa of two coders on a
    binary code, Var = ((1 - κ)/N) [(1 - κ)(1 - 2κ) + κ(2 - κ) / (2 p_c (1 - p_c))] [from
    memory]: N = z² N·Var(κ*) / (κ* - α_min)². Krippendorff's N counts twice these units."""
    from scipy import stats

    z = stats.norm.ppf(1 - significance)
    k = (1 + alpha_min) / 2
    n_var = (1 - k) * ((1 - k) * (1 - 2 * k) + k * (2 - k) / (2 * pc * (1 - pc)))
    return z ** 2 * n_var / (k - alpha_min) ** 2


@pytest.mark.parametrize("alpha_min,pc,units", KRIPPENDORFF_TABLE)
def test_krippendorff_minimum_sample_table(alpha_min, pc, units):
    value = krippendorff_minimum_units(alpha_min, pc, significance=0.05)
    assert value == pytest.approx(2 * _bloch_kraemer_units(alpha_min, pc), rel=1e-12)
    assert math.ceil(value) == units


def test_plan_reports_krippendorff_value_from_rarest():
    p = plan_sample(coders=2, categories=4, rarest=0.10, expected=0.95, minimum=0.8, seed=1, **FAST)
    assert p.closed_forms[0].units == 294


# -- inputs ---------------------------------------------------------------------------------------

def test_resolve_shares():
    np.testing.assert_allclose(resolve_shares(categories=4), [0.25] * 4)
    np.testing.assert_allclose(resolve_shares(categories=3, rarest=0.1), [0.1, 0.45, 0.45])
    np.testing.assert_allclose(resolve_shares(shares=[0.5, 0.5]), [0.5, 0.5])


@pytest.mark.parametrize("kwargs,code", [
    (dict(coders=2, shares=[0.5, 0.4], expected=0.9), "plan-shares"),
    (dict(coders=2, shares=[0.5, 0.6, -0.1], expected=0.9), "plan-shares"),
    (dict(coders=2, shares=[1.0], expected=0.9), "plan-shares"),
    (dict(coders=2, categories=3, shares=[0.5, 0.5], expected=0.9), "plan-shares"),
    (dict(coders=2, categories=4, rarest=0.3, expected=0.9), "plan-shares"),
    (dict(coders=2, expected=0.9), "plan-shares"),
    (dict(coders=2, categories=1, expected=0.9), "plan-shares"),
    (dict(coders=2, categories=3, expected=0.8, minimum=0.8), "plan-expected-below-minimum"),
    (dict(coders=2, categories=3, expected=0.7), "plan-expected-below-minimum"),
    (dict(coders=1, categories=3, expected=0.9), "plan-coders"),
    (dict(coders=2, categories=3, expected=1.0), "plan-expected"),
    (dict(coders=2, categories=3, expected=0.9, level="ratio"), "plan-level"),
    (dict(coders=2, categories=3, expected=0.9, confidence_level=1.2), "plan-ci"),
    (dict(coders=2, categories=3, expected=0.9, assurance=1.0), "plan-assurance"),
    (dict(coders=2, categories=3, expected=0.9, missing=0.95), "plan-missing"),
    (dict(coders=2, categories=3, expected=0.9, replicates=10), "plan-replicates"),
    (dict(coders=2, categories=3, expected=0.9, min_units=50, max_units=40), "plan-range"),
])
def test_bad_inputs_raise(kwargs, code):
    with pytest.raises(AgreeError) as err:
        plan_sample(**kwargs)
    codes = {err.value.code} | {p.code for p in err.value.problems}
    assert code in codes


def test_several_problems_reported_together():
    with pytest.raises(AgreeError) as err:
        plan_sample(coders=1, categories=3, expected=0.9, assurance=2.0, level="ratio")
    assert {p.code for p in err.value.problems} == {"plan-coders", "plan-assurance", "plan-level"}


# -- decision text ----------------------------------------------------------------------------------

def test_plan_to_frame_and_notebook_display():
    p = plan_sample(coders=2, categories=2, expected=0.9, seed=7, **FAST)
    frame = p.to_frame()
    assert list(frame.columns) == ["units", "assurance", "mc_error", "smoothed", "studies", "no_disagreement"]
    assert frame["units"].tolist() == [pt.units for pt in p.curve]
    # Monte Carlo error of a share: sqrt(P(1 - P)/R), R the studies simulated at that size
    assert np.allclose(frame["mc_error"], np.sqrt(frame["assurance"] * (1 - frame["assurance"]) / frame["studies"]))
    page = p._repr_html_()
    assert page.startswith('<div class="agree-result"><p>Plan: ') and "<table" in page
    assert ">nan<" not in page.lower()


# -- the planner simulates score's decision, with its Monte Carlo uncertainty ------------------------

def test_assurance_is_the_rate_at_which_score_clears_the_minimum():
    """External check through the public coefficient: the planner's assurance at a size equals, within
    Monte Carlo error, the share of freshly simulated studies whose `krippendorff_alpha` bound (the
    default method, as `score`) is above the minimum."""
    import agree

    model, _ = build_model("nominal", np.array([0.5, 0.5]), 2, 0.9, 0.0)
    studies = _Studies(model, 60, 3, alpha_statistic(delta_for("nominal", n_values=2)), "pseudo-unit", 500,
                       0.95, 0.7, block_size=100)
    studies.add_blocks(2)
    studies.evaluate(60)
    _, hits, totals, _ = studies.table()
    planned = hits[0] / totals[0]
    rng = np.random.default_rng(99)
    codes = model.simulate(rng, 200, 60)
    cleared = [agree.krippendorff_alpha(np.where(c < 0, np.nan, c).astype(float), n_resamples=500, seed=i,
                                        minimum=0.7).lower_bound > 0.7 for i, c in enumerate(codes)]
    direct = float(np.mean(cleared))
    se = math.sqrt(planned * (1 - planned) / totals[0] + direct * (1 - direct) / len(cleared))
    assert abs(planned - direct) < 3 * se + 0.01


def test_high_agreement_plan_is_honest_and_states_its_monte_carlo_range():
    """Expected .95 against .80 with two equal categories: the percentile planner asked for 32 units,
    where about 28% of studies have no disagreement. Now the plan simulates the pseudo-unit bound, says
    how many studies have no disagreement, and gives the range of its answer."""
    p = plan_sample(coders=2, categories=2, expected=0.95, minimum=0.8, seed=1, replicates=200, n_resamples=500,
                    tolerance=0.1)
    assert p.units_needed is not None and p.units_needed > 50
    low, high = p.units_range
    assert low <= p.units_needed <= high and high - low < 0.25 * p.units_needed
    small = min(p.curve, key=lambda pt: abs(pt.units - 32))
    assert small.assurance < 0.8 and small.no_disagreement > 0.15
    assert p.to_dict()["units_range"] == [low, high]
    assert "Monte Carlo range" in p.interval or "Monte Carlo" in p.interval


def test_the_simulation_grows_until_the_answer_is_stable():
    loose = plan_sample(coders=2, categories=3, expected=0.88, minimum=0.8, seed=2, replicates=100,
                        n_resamples=200, tolerance=0.5)
    tight = plan_sample(coders=2, categories=3, expected=0.88, minimum=0.8, seed=2, replicates=100,
                        n_resamples=200, tolerance=0.04, max_replicates=800)
    assert loose.replicates == 100 and tight.replicates > 100
    width = [p.units_range[1] - p.units_range[0] for p in (loose, tight)]
    assert width[1] < width[0]
    assert tight.details["blocks"] == tight.replicates // tight.details["block_size"]


# -- plans from a pilot round --------------------------------------------------------------------------

def _pilot(alpha=0.85, n=80, seed=4):
    model, _ = build_model("nominal", np.array([0.5, 0.3, 0.2]), 2, alpha, 0.1)
    codes = model.simulate(np.random.default_rng(seed), 1, n)[0]
    return np.where(codes < 0, np.nan, codes).astype(float)


def test_pilot_estimates_what_the_plan_uses():
    import agree
    from agree.analysis.planning import pilot_estimate

    x = _pilot()
    est, alphas, shares = pilot_estimate(x, seed=1, draws=300)
    ref = agree.krippendorff_alpha(x, n_resamples=0)
    assert est.alpha == pytest.approx(ref.estimate, abs=1e-12)
    assert est.coders == 2 and est.units == ref.n_units and est.level == "nominal"
    # the shares are the pairable values' shares; the missing share is the empty cells' share
    pairable = ~np.isnan(x).any(axis=1)
    values = x[pairable].ravel()
    np.testing.assert_allclose(est.shares, [np.mean(values == v) for v in (0, 1, 2)], atol=0.03)
    coded = ~np.isnan(x).all(axis=1)
    assert est.missing == pytest.approx(np.isnan(x[coded]).mean())
    # the draws are those of the pilot's own bound: their 5% quantile is its one-sided bound
    bound = agree.krippendorff_alpha(x, n_resamples=4000, seed=3).lower_bound
    assert np.quantile(alphas, 0.05) == pytest.approx(bound, abs=0.02)
    assert shares.shape == (300, 3) and np.allclose(shares.sum(axis=1), 1)


def test_plan_from_pilot_plans_the_next_round_and_says_what_it_estimated():
    from agree.analysis.planning import plan_from_pilot

    x = _pilot(0.9, 120)
    pairable = int((~np.isnan(x)).all(axis=1).sum())          # units both coders coded
    p = plan_from_pilot(x, minimum=0.7, seed=1, replicates=100, n_resamples=200, tolerance=0.2)
    assert p.pilot is not None and p.units_needed is not None
    assert "draws from the pilot's posterior" in p.model
    notes = {w.code: w.message for w in p.warnings}
    assert f"Estimated from the pilot ({pairable} units, 2 coders)" in notes["plan-pilot"]
    d = p.to_dict()
    assert d["pilot"]["units"] == pairable and d["inputs"]["coders"] == 2
    json.dumps(d, allow_nan=False)


def test_pilot_that_may_be_below_the_minimum_caps_the_assurance():
    from agree.analysis.planning import plan_from_pilot

    p = plan_from_pilot(_pilot(0.75, 40), minimum=0.7, seed=1, replicates=100, n_resamples=200, max_units=400,
                        tolerance=0.3)
    assert p.pilot.p_value_min > 0.2
    assert "plan-pilot-ceiling" in {w.code for w in p.warnings}
    assert max(pt.assurance for pt in p.curve) < 0.8 + 0.1


def test_pilot_with_sets_of_codes_is_refused():
    from agree.analysis.planning import plan_from_pilot

    with pytest.raises(AgreeError) as err:
        plan_from_pilot([[{"a"}, {"a", "b"}], [{"b"}, {"b"}]] * 5, seed=1)
    assert err.value.code == "plan-pilot"
