"""Agreement coefficients against general-purpose reference libraries, to 1e-9.

Oracles (test-only dependencies): the `krippendorff` package, statsmodels
(`stats.inter_rater.cohens_kappa`, `fleiss_kappa`, `aggregate_raters`) and scikit-learn
(`metrics.cohen_kappa_score`, `metrics.accuracy_score`). Where no library computes a coefficient
(AC1/AC2, Brennan-Prediger, Conger, the missing-data forms of Fleiss' kappa), the formula of
METHODS.md is written out here, independently of the engine, and the engine must match it.

Data are synthetic (METHODS.md 8.2 model), on many random shapes with fixed seeds.
"""

from __future__ import annotations

import math

import krippendorff
import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import accuracy_score, cohen_kappa_score
from statsmodels.stats.inter_rater import aggregate_raters, cohens_kappa, fleiss_kappa

import agree
from tests.conftest import as_float, as_labels, counts_matrix, cross_table, shape_cases, simulate_codes

TOL = 1e-9
LEVELS = ("nominal", "ordinal", "interval", "ratio")

COMPLETE = shape_cases(12, seed=101, missing=False)
WITH_MISSING = shape_cases(12, seed=202, missing=True)
TWO_CODERS = shape_cases(10, seed=303, missing=False, m_range=(2, 2))
TWO_CODERS_MISSING = shape_cases(6, seed=404, missing=True, m_range=(2, 2))


def _data(seed, m, q, n, rate, **kw):
    rng = np.random.default_rng(seed)
    prevalence = rng.dirichlet(np.full(q, 2.0))
    return simulate_codes(rng, n, m, q, alpha=float(rng.uniform(0.2, 0.9)), missing=rate,
                          prevalence=prevalence, **kw)


def _close(actual, expected, tol=TOL):
    if expected is None or (isinstance(expected, float) and math.isnan(expected)):
        assert actual is None or math.isnan(actual)
    else:
        assert actual == pytest.approx(expected, abs=tol, rel=tol)


# --------------------------------------------------------------------------------------------
# Krippendorff's alpha vs the krippendorff package (reliability_data is coders x units)
# --------------------------------------------------------------------------------------------

def _spaced_values(rng, q, level):
    """Unequally spaced numeric values, so interval/ratio use the numbers, not ranks."""
    low = 0.0 if level == "interval" else 0.5
    return np.round(np.sort(rng.choice(np.arange(1, 400), size=q, replace=False)) / 10 + low, 2)


@pytest.mark.parametrize("level", LEVELS)
@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE + WITH_MISSING)
def test_alpha_matches_krippendorff_package(seed, m, q, n, rate, level):
    codes = _data(seed, m, q, n, rate)
    values = _spaced_values(np.random.default_rng(seed + 1), q, level)
    x = as_float(codes, values)
    expected = krippendorff.alpha(reliability_data=x.T, level_of_measurement=level,
                                  value_domain=values)
    result = agree.krippendorff_alpha(x, level=level, categories=list(values), n_resamples=0)
    _close(result.estimate, float(expected))
    assert result.level == level
    assert result.n_coders == m


@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::3])
def test_alpha_ratio_with_zero_value(seed, m, q, n, rate):
    """Ratio metric: delta(0, 0) = 0 by convention; 0 against k > 0 is 1 (METHODS 4.3)."""
    codes = _data(seed, m, q, n, rate)
    values = np.arange(q, dtype=float) * 1.5  # includes 0
    x = as_float(codes, values)
    expected = krippendorff.alpha(reliability_data=x.T, level_of_measurement="ratio",
                                  value_domain=values)
    result = agree.krippendorff_alpha(x, level="ratio", categories=list(values), n_resamples=0)
    _close(result.estimate, float(expected))


@pytest.mark.parametrize("level", ("nominal", "ordinal"))
@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::2])
def test_alpha_text_labels_match_numeric_codes(seed, m, q, n, rate, level):
    """Nominal and ordinal alpha see only the category order, not labels or spacing."""
    codes = _data(seed, m, q, n, rate)
    labels = [f"cat {chr(ord('a') + k)}" for k in range(q)]
    expected = krippendorff.alpha(reliability_data=as_float(codes).T, level_of_measurement=level,
                                  value_domain=np.arange(q, dtype=float))
    result = agree.krippendorff_alpha(as_labels(codes, labels), level=level, categories=labels,
                                      n_resamples=0)
    _close(result.estimate, float(expected))


@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::2])
def test_alpha_ordinal_unused_categories_contribute_nothing(seed, m, q, n, rate):
    """Krippendorff's ordinal metric sums the margins n_g between c and k; unused categories
    have n_g = 0, so inserting them into the scale changes nothing (METHODS 4.3)."""
    codes = _data(seed, m, q, n, rate)
    # Spread the used categories over a longer scale: unused ones in between and at the ends.
    full = np.arange(2 * q + 2, dtype=float)
    used_positions = 1 + 2 * np.arange(q)
    x = as_float(codes, full[used_positions])
    with_domain = krippendorff.alpha(reliability_data=x.T, level_of_measurement="ordinal",
                                     value_domain=full)
    without = krippendorff.alpha(reliability_data=x.T, level_of_measurement="ordinal")
    assert with_domain == pytest.approx(without, abs=TOL)  # the oracle agrees with itself
    ours_full = agree.krippendorff_alpha(x, level="ordinal", categories=list(full), n_resamples=0)
    ours_used = agree.krippendorff_alpha(x, level="ordinal", n_resamples=0)
    _close(ours_full.estimate, float(with_domain))
    _close(ours_used.estimate, float(without))


@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::2])
def test_alpha_nominal_unused_categories_change_nothing(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    x = as_float(codes)
    expected = krippendorff.alpha(reliability_data=x.T, level_of_measurement="nominal",
                                  value_domain=np.arange(q + 3, dtype=float))
    result = agree.krippendorff_alpha(x, level="nominal", categories=list(range(q + 3)),
                                      n_resamples=0)
    _close(result.estimate, float(expected))


def _coincidences(codes, q):
    """o_ck = sum_u r_uc (r_uk - [c = k]) / (m_u - 1) over pairable units (METHODS 4.1)."""
    r = counts_matrix(codes, q).astype(float)
    mu = r.sum(axis=1)
    r, mu = r[mu >= 2], mu[mu >= 2]
    per_unit = r[:, :, None] * r[:, None, :] - np.einsum("uk,kl->ukl", r, np.eye(q))
    return (per_unit / (mu - 1)[:, None, None]).sum(axis=0)


@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::2])
def test_coincidence_matrix(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    o = agree.coincidence_matrix(as_float(codes))
    expected = _coincidences(codes, q)
    used = np.unique(codes[codes >= 0])
    np.testing.assert_allclose(o.to_numpy(dtype=float), expected[np.ix_(used, used)],
                               atol=TOL, rtol=0)
    assert np.allclose(o.to_numpy(dtype=float), o.to_numpy(dtype=float).T)


# --------------------------------------------------------------------------------------------
# Cohen's kappa vs statsmodels and scikit-learn
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("weights", (None, "linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS + TWO_CODERS_MISSING)
def test_cohen_kappa_matches_statsmodels(seed, m, q, n, rate, weights):
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    table = cross_table(codes[:, 0], codes[:, 1], q)
    ref = cohens_kappa(table, wt=weights)
    # equally spaced categories 0..q-1: statsmodels' weights use the category index
    result = agree.cohen_kappa(as_float(codes), weights=weights, categories=list(range(q)),
                               n_resamples=0)
    _close(result.estimate, ref.kappa)
    _close(result.se, ref.std_kappa)
    _close(result.details["se0"], ref.std_kappa0)
    _close(result.z, ref.kappa / ref.std_kappa0)
    _close(result.p_value, 2 * stats.norm.sf(abs(ref.kappa / ref.std_kappa0)))
    _close(result.p_value_one_sided, stats.norm.sf(ref.kappa / ref.std_kappa0))
    if weights is None:
        # statsmodels' kappa_max is the unweighted closed form (Cohen 1960) only
        _close(result.details["kappa_max"], ref.kappa_max)
    both = int(((codes[:, 0] >= 0) & (codes[:, 1] >= 0)).sum())
    assert result.n_units == both
    # analytic Wald interval from Var1 when there is no bootstrap, cut at the range [-1, 1]
    zc = stats.norm.ppf(0.975)
    _close(result.ci_low, max(-1.0, ref.kappa - zc * ref.std_kappa))
    _close(result.ci_high, min(1.0, ref.kappa + zc * ref.std_kappa))


@pytest.mark.parametrize("weights", (None, "linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS + TWO_CODERS_MISSING)
def test_cohen_kappa_matches_sklearn(seed, m, q, n, rate, weights):
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    ok = (codes >= 0).all(axis=1)
    expected = cohen_kappa_score(codes[ok, 0], codes[ok, 1], labels=list(range(q)),
                                 weights=weights)
    result = agree.cohen_kappa(as_float(codes), weights=weights, categories=list(range(q)),
                               n_resamples=0)
    _close(result.estimate, expected)


@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS[:5])
def test_cohen_kappa_text_labels_rank_scores(seed, m, q, n, rate):
    """Non-numeric categories get scores 1..q (equally spaced), so linear/quadratic weights
    equal statsmodels' index weights."""
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    labels = [f"level {k}" for k in "abcdefgh"[:q]]
    table = cross_table(codes[:, 0], codes[:, 1], q)
    for weights in ("linear", "quadratic"):
        ref = cohens_kappa(table, wt=weights)
        result = agree.cohen_kappa(as_labels(codes, labels), weights=weights, categories=labels,
                                   n_resamples=0)
        _close(result.estimate, ref.kappa)
        _close(result.se, ref.std_kappa)


def test_cohen_kappa_numeric_categories_use_their_values():
    """Numeric categories use the numbers themselves as scores: unequal spacing changes the
    linear weights. Compare with statsmodels given the same scores."""
    rng = np.random.default_rng(5)
    codes = simulate_codes(rng, 150, 2, 4, alpha=0.5, coder_bias=0.5)
    values = np.array([0.0, 1.0, 5.0, 6.0])
    table = cross_table(codes[:, 0], codes[:, 1], 4)
    for wt in ("linear", "quadratic"):
        ref = cohens_kappa(table, wt=wt, weights=values)
        result = agree.cohen_kappa(as_float(codes, values), weights=wt, categories=list(values),
                                   n_resamples=0)
        _close(result.estimate, ref.kappa)
        _close(result.se, ref.std_kappa)


# --------------------------------------------------------------------------------------------
# Scott's pi and Fleiss' kappa vs statsmodels
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS)
def test_scott_pi_is_fleiss_kappa_with_two_coders(seed, m, q, n, rate):
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    table, _ = aggregate_raters(codes, n_cat=q)
    expected = fleiss_kappa(table, method="fleiss")
    result = agree.scott_pi(as_float(codes), n_resamples=0)
    _close(result.estimate, expected)


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE)
def test_fleiss_kappa_matches_statsmodels(seed, m, q, n, rate):
    codes = _data(seed, max(m, 2), q, n, rate)
    table, _ = aggregate_raters(codes, n_cat=q)
    expected = fleiss_kappa(table, method="fleiss")
    result = agree.fleiss_kappa(as_float(codes), n_resamples=0)
    _close(result.estimate, expected)
    assert result.n_units == n
    assert result.n_coders == m


def _fleiss_formulas(codes, q):
    """Fleiss (1971) per-category kappa and Fleiss, Nee & Landis (1979) null variances,
    written out from METHODS 3.2 (complete data, n coders per unit)."""
    r = counts_matrix(codes, q).astype(float)
    big_n, n = r.shape[0], codes.shape[1]
    p = r.sum(axis=0) / (big_n * n)
    qq = 1 - p
    pq = p * qq
    with np.errstate(divide="ignore", invalid="ignore"):
        kappa_j = 1 - (r * (n - r)).sum(axis=0) / (big_n * n * (n - 1) * pq)
    var0 = 2 / (big_n * n * (n - 1)) * (pq.sum() ** 2 - (pq * (qq - p)).sum()) / pq.sum() ** 2
    var0_j = 2 / (big_n * n * (n - 1))
    return p, kappa_j, var0, var0_j


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE[:8])
def test_fleiss_per_category_and_null_test(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    p, kappa_j, var0, var0_j = _fleiss_formulas(codes, q)
    result = agree.fleiss_kappa(as_float(codes), categories=list(range(q)), n_resamples=0)
    per = result.details["per_category"]
    for k in range(q):
        entry = per.get(k, per.get(str(k)))
        assert entry is not None, f"category {k} missing from per_category"
        if 0 < p[k] < 1:
            _close(entry["kappa"], kappa_j[k])
            _close(entry["se0"], math.sqrt(var0_j))
            _close(entry["z"], kappa_j[k] / math.sqrt(var0_j))
            _close(entry["p_value"], 2 * stats.norm.sf(abs(kappa_j[k] / math.sqrt(var0_j))))
        else:  # unused category: undefined, never silently 0 or 1
            assert entry["kappa"] is None or math.isnan(entry["kappa"])
    _close(result.z, result.estimate / math.sqrt(var0))
    _close(result.p_value, 2 * stats.norm.sf(abs(result.estimate / math.sqrt(var0))))


def _unit_agreement(r, w=None):
    """a_u for units with r_u >= 2 (METHODS 1): share of agreeing ordered pairs."""
    r = r.astype(float)
    ru = r.sum(axis=1)
    rstar = r if w is None else r @ np.asarray(w).T
    keep = ru >= 2
    a = (r[keep] * (rstar[keep] - 1)).sum(axis=1) / (ru[keep] * (ru[keep] - 1))
    return a, keep


@pytest.mark.parametrize("seed,m,q,n,rate", WITH_MISSING[:8])
def test_fleiss_kappa_missing_data_generalisation(seed, m, q, n, rate):
    """METHODS 3.2 (Gwet 2014, from memory): P_bar over units with r_u >= 2,
    pi_k = mean over units with r_u >= 1 of r_uk / r_u, P_e = sum pi_k²."""
    codes = _data(seed, max(m, 3), q, n, rate)
    r = counts_matrix(codes, q).astype(float)
    ru = r.sum(axis=1)
    a, _ = _unit_agreement(r)
    pi = (r[ru >= 1] / ru[ru >= 1, None]).mean(axis=0)
    pe = (pi ** 2).sum()
    expected = (a.mean() - pe) / (1 - pe)
    result = agree.fleiss_kappa(as_float(codes), n_resamples=0)
    _close(result.estimate, expected)


# --------------------------------------------------------------------------------------------
# Percent agreement, Conger, AC1/AC2, Brennan-Prediger: formulas written out (METHODS 1, 3.3, 5)
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS + TWO_CODERS_MISSING)
def test_percent_agreement_two_coders_is_accuracy(seed, m, q, n, rate):
    codes = _data(seed, 2, q, n, rate)
    ok = (codes >= 0).all(axis=1)
    result = agree.percent_agreement(as_float(codes), n_resamples=0)
    _close(result.estimate, accuracy_score(codes[ok, 0], codes[ok, 1]))


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE + WITH_MISSING)
def test_percent_agreement_unit_weighted(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    a, _ = _unit_agreement(counts_matrix(codes, q))
    result = agree.percent_agreement(as_float(codes), n_resamples=0)
    _close(result.estimate, a.mean())


def _conger(codes, q):
    """Conger (1980), complete data: p_e = sum_k (pbar_k² - s_k²/m) (METHODS 3.3)."""
    m = codes.shape[1]
    p_ik = np.stack([(codes == k).mean(axis=0) for k in range(q)], axis=1)  # m x q
    pe = (p_ik.mean(axis=0) ** 2 - p_ik.var(axis=0, ddof=1) / m).sum()
    # the same p_e as the average over ordered coder pairs
    pairs = sum(p_ik[i] @ p_ik[j] for i in range(m) for j in range(m) if i != j) / (m * (m - 1))
    assert pe == pytest.approx(pairs, abs=1e-12)
    a, _ = _unit_agreement(counts_matrix(codes, q))
    return (a.mean() - pe) / (1 - pe)


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE)
def test_conger_kappa_formula(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate, coder_bias=0.6)
    result = agree.conger_kappa(as_float(codes), n_resamples=0)
    _close(result.estimate, _conger(codes, q))
    fleiss = agree.fleiss_kappa(as_float(codes), n_resamples=0).estimate
    assert result.estimate >= fleiss - 1e-12  # Conger's p_e <= Fleiss' P_e (METHODS 3.3)


def _weights(q, kind, scores=None):
    s = np.arange(1, q + 1, dtype=float) if scores is None else np.asarray(scores, dtype=float)
    d = s[:, None] - s[None, :]
    span = s.max() - s.min()
    if kind is None:
        return np.eye(q)
    if kind == "linear":
        return 1 - np.abs(d) / span
    if kind == "quadratic":
        return 1 - d ** 2 / span ** 2
    raise ValueError(kind)


def gwet_reference(codes, q, w=None):
    """AC1/AC2 and its linearisation SE (METHODS 5.1-5.2, p_a-centred e_u, f = 0)."""
    w = np.eye(q) if w is None else np.asarray(w, dtype=float)
    r = counts_matrix(codes, q).astype(float)
    ru = r.sum(axis=1)
    r, ru = r[ru >= 1], ru[ru >= 1]
    n1 = len(ru)
    pair = ru >= 2
    n2 = int(pair.sum())
    pi = (r / ru[:, None]).mean(axis=0)
    tw = w.sum()
    pe = tw / (q * (q - 1)) * (pi * (1 - pi)).sum()
    rstar = r @ w.T
    pa_u = np.zeros(n1)
    pa_u[pair] = (r[pair] * (rstar[pair] - 1)).sum(axis=1) / (ru[pair] * (ru[pair] - 1))
    pa = pa_u[pair].mean()
    gamma = (pa - pe) / (1 - pe)
    pe_u = tw / (q * (q - 1)) * ((r / ru[:, None]) * (1 - pi)).sum(axis=1)
    e = (n1 / n2) * pair * (pa_u - pa) / (1 - pe) - 2 * (1 - gamma) * (pe_u - pe) / (1 - pe)
    var = (e ** 2).sum() / (n1 * (n1 - 1))
    return gamma, math.sqrt(var), pa, pe


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE + WITH_MISSING)
def test_gwet_ac1_formula(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    gamma, se, _, _ = gwet_reference(codes, q)
    result = agree.gwet_ac1(as_float(codes), categories=list(range(q)), n_resamples=0)
    assert result.name == "gwet_ac1"
    _close(result.estimate, gamma)
    _close(result.se, se)


@pytest.mark.parametrize("kind", ("linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::2])
def test_gwet_ac2_formula(seed, m, q, n, rate, kind):
    codes = _data(seed, m, q, n, rate)
    gamma, se, _, _ = gwet_reference(codes, q, _weights(q, kind))
    result = agree.gwet_ac1(as_float(codes), weights=kind, categories=list(range(q)),
                            n_resamples=0)
    assert result.name == "gwet_ac2"
    _close(result.estimate, gamma)
    _close(result.se, se)


@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE + WITH_MISSING)
def test_brennan_prediger_formula(seed, m, q, n, rate):
    codes = _data(seed, m, q, n, rate)
    a, _ = _unit_agreement(counts_matrix(codes, q))
    q_total = q + 2  # two unused codebook categories count in q
    result = agree.brennan_prediger(as_float(codes), categories=list(range(q_total)),
                                    n_resamples=0)
    _close(result.estimate, (a.mean() - 1 / q_total) / (1 - 1 / q_total))
    assert result.n_categories == q_total


@pytest.mark.parametrize("kind", ("linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", COMPLETE[::2])
def test_brennan_prediger_weighted_formula(seed, m, q, n, rate, kind):
    """Weighted form: p_e = T_w / q² (METHODS 5.3, from memory there)."""
    codes = _data(seed, m, q, n, rate)
    w = _weights(q, kind)
    a, _ = _unit_agreement(counts_matrix(codes, q), w)
    pe = w.sum() / q ** 2
    result = agree.brennan_prediger(as_float(codes), weights=kind, categories=list(range(q)),
                                    n_resamples=0)
    _close(result.estimate, (a.mean() - pe) / (1 - pe))


@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS_MISSING + TWO_CODERS[:4])
def test_pabak_and_indices(seed, m, q, n, rate):
    """Byrt, Bishop & Carlin (1993): PABAK = 2 p_o - 1, PI = (a - d)/N, BI = (b - c)/N."""
    codes = _data(seed, 2, 2, n, rate, coder_bias=0.5)
    t = cross_table(codes[:, 0], codes[:, 1], 2)
    # a 0/1 code: 1 is the positive category; a = both 1, b = first coder 1 and second 0
    a, b, c, d = t[1, 1], t[1, 0], t[0, 1], t[0, 0]
    total = t.sum()
    result = agree.pabak(as_float(codes), n_resamples=0)
    _close(result.estimate, 2 * (a + d) / total - 1)
    _close(result.details["prevalence_index"], (a - d) / total)
    _close(result.details["bias_index"], (b - c) / total)


@pytest.mark.parametrize("kind", ("linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::3])
def test_weighted_percent_agreement_and_pi_formula(seed, m, q, n, rate, kind):
    """Weighted a_u with r*_uk = sum_l w_kl r_ul (METHODS 1); weighted pi-type chance term
    p_e = sum_kl w_kl pi_k pi_l (METHODS 5.1)."""
    codes = _data(seed, m, q, n, rate)
    w = _weights(q, kind)
    r = counts_matrix(codes, q).astype(float)
    ru = r.sum(axis=1)
    a, _ = _unit_agreement(r, w)
    pi = (r[ru >= 1] / ru[ru >= 1, None]).mean(axis=0)
    pe = pi @ w @ pi
    x = as_float(codes)
    cats = list(range(q))
    pa = agree.percent_agreement(x, weights=kind, categories=cats, n_resamples=0)
    _close(pa.estimate, a.mean())
    pi_w = agree.scott_pi(x, weights=kind, categories=cats, n_resamples=0)
    _close(pi_w.estimate, (a.mean() - pe) / (1 - pe))


@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS[:5])
def test_percent_agreement_wilson_interval(seed, m, q, n, rate):
    """Two coders, no bootstrap: Wilson (1927) interval, as statsmodels computes it."""
    from statsmodels.stats.proportion import proportion_confint

    codes = _data(seed, 2, q, n, rate)
    agreeing = int((codes[:, 0] == codes[:, 1]).sum())
    result = agree.percent_agreement(as_float(codes), n_resamples=0, confidence_level=0.9)
    low, high = proportion_confint(agreeing, n, alpha=0.1, method="wilson")
    _close(result.ci_low, low)
    _close(result.ci_high, high)


@pytest.mark.parametrize("seed,m,q,n,rate", (COMPLETE + WITH_MISSING)[::4])
def test_ac1_interval_uses_t_with_n_minus_one_df(seed, m, q, n, rate):
    """Gwet: gamma +- t_{n-1, 1-eps/2} SE, n the units with at least one value (METHODS 5.2)."""
    codes = _data(seed, m, q, n, rate)
    gamma, se, _, _ = gwet_reference(codes, q)
    n1 = int(((codes >= 0).sum(axis=1) >= 1).sum())
    crit = stats.t.ppf(0.975, n1 - 1)
    result = agree.gwet_ac1(as_float(codes), categories=list(range(q)), n_resamples=0)
    _close(result.ci_low, max(-1.0, gamma - crit * se))
    _close(result.ci_high, min(1.0, gamma + crit * se))


def _jackknife_se(f, codes, **kw):
    """SE_J² = ((n-1)/n) sum (theta_(i) - mean)², leaving out one unit at a time (METHODS 7.4)."""
    from agree.core.model import from_table

    data = from_table(as_float(codes), categories=list(range(codes.max() + 1)))
    n = data.n_units
    keep = np.ones(n, dtype=bool)
    values = []
    for i in range(n):
        keep[i] = False
        values.append(f(data.subset(keep), n_resamples=0, **kw).estimate)
        keep[i] = True
    values = np.array(values)
    return math.sqrt((n - 1) / n * ((values - values.mean()) ** 2).sum())


@pytest.mark.parametrize("f", [agree.fleiss_kappa, agree.conger_kappa, agree.brennan_prediger,
                               agree.gwet_ac1, agree.percent_agreement])
@pytest.mark.parametrize("rate", (0.0, 0.15))
def test_linearised_se_close_to_jackknife(f, rate):
    """The linearisation SEs (Gwet 2008; 2014) agree with the leave-one-unit-out jackknife
    within a few percent (METHODS 7.4); allow 10%."""
    rng = np.random.default_rng(77)
    codes = simulate_codes(rng, 150, 4, 3, alpha=0.5, missing=rate, prevalence=[0.5, 0.3, 0.2],
                           coder_bias=0.4)
    if rate:
        codes[:8] = np.array([0, 1, 2, 0])  # keep a few complete units whatever the draw
    result = f(as_float(codes), n_resamples=0)
    assert result.se_method
    assert result.se == pytest.approx(_jackknife_se(f, codes), rel=0.10)


@pytest.mark.parametrize("weights", (None, "linear", "quadratic"))
@pytest.mark.parametrize("seed,m,q,n,rate", TWO_CODERS[:6])
def test_kappa_max_bounds(seed, m, q, n, rate, weights):
    """kappa <= kappa_max <= 1, and kappa_max = 1 when both coders have the same margins
    (Cohen 1960; the weighted form by linear programming, METHODS 2.3)."""
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    cats = list(range(q))
    result = agree.cohen_kappa(as_float(codes), weights=weights, categories=cats, n_resamples=0)
    assert result.estimate <= result.details["kappa_max"] + 1e-9 <= 1 + 2e-9
    same_margins = np.column_stack([codes[:, 0], np.roll(codes[:, 0], 3)])
    mirrored = agree.cohen_kappa(as_float(same_margins), weights=weights, categories=cats,
                                 n_resamples=0)
    _close(mirrored.details["kappa_max"], 1.0, tol=1e-7)


CUSTOM_WEIGHT_CASES = [c for c in TWO_CODERS if c.values[2] >= 3][:4]


def _custom_weights(seed, q):
    rng = np.random.default_rng(seed)
    w = np.clip(_weights(q, "linear") + rng.uniform(-0.2, 0.2, (q, q)), 0, 1)
    np.fill_diagonal(w, 1.0)
    return w


@pytest.mark.parametrize("seed,m,q,n,rate", CUSTOM_WEIGHT_CASES)
def test_cohen_kappa_custom_weight_matrix_matches_statsmodels(seed, m, q, n, rate):
    """A custom (here asymmetric) agreement matrix W; statsmodels takes the disagreement
    weights 1 - W."""
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    w = _custom_weights(seed, q)
    ref = cohens_kappa(cross_table(codes[:, 0], codes[:, 1], q), weights=1 - w)
    result = agree.cohen_kappa(as_float(codes), weights=w, categories=list(range(q)),
                               n_resamples=0)
    _close(result.estimate, ref.kappa)
    _close(result.se, ref.std_kappa)
    _close(result.details["se0"], ref.std_kappa0)
    assert result.weights == "custom"


@pytest.mark.parametrize("seed,m,q,n,rate", CUSTOM_WEIGHT_CASES[:1])
def test_asymmetric_custom_weights_are_flagged(seed, m, q, n, rate):
    codes = _data(seed, 2, q, n, rate, coder_bias=0.5)
    w = _custom_weights(seed, q)
    result = agree.cohen_kappa(as_float(codes), weights=w, categories=list(range(q)),
                               n_resamples=0)
    symmetric = agree.cohen_kappa(as_float(codes), weights=(w + w.T) / 2,
                                  categories=list(range(q)), n_resamples=0)
    assert not symmetric.warnings
    assert result.warnings, "asymmetric weights should come with a warning"


@pytest.mark.parametrize("m,q,n", [(25, 8, 120), (40, 3, 80), (3, 40, 300)])
def test_wide_designs_match_krippendorff_package(m, q, n):
    """Many coders or many values (patterns no longer fit one integer key)."""
    rng = np.random.default_rng(m * 100 + q)
    codes = simulate_codes(rng, n, m, q, alpha=0.5, missing=0.3)
    x = as_float(codes)
    for level in ("nominal", "ordinal", "interval"):
        expected = krippendorff.alpha(reliability_data=x.T, level_of_measurement=level)
        _close(agree.krippendorff_alpha(x, level=level, n_resamples=0).estimate, float(expected))
    r = counts_matrix(codes, q)
    a, _ = _unit_agreement(r)
    _close(agree.percent_agreement(x, n_resamples=0).estimate, a.mean())


def test_dataframe_input_with_none_equals_array_input():
    import pandas as pd

    rng = np.random.default_rng(8)
    codes = simulate_codes(rng, 60, 3, 3, alpha=0.5, missing=0.2)
    labels = ["low", "mid", "high"]
    frame = pd.DataFrame(as_labels(codes, labels), columns=["ana", "ben", "cleo"])
    from_frame = agree.krippendorff_alpha(frame, level="ordinal", categories=labels, n_resamples=0)
    expected = krippendorff.alpha(reliability_data=as_float(codes).T, level_of_measurement="ordinal",
                                  value_domain=[0.0, 1.0, 2.0])
    _close(from_frame.estimate, float(expected))
    assert from_frame.n_coders == 3


# --------------------------------------------------------------------------------------------
# The linearisation SEs against the delta method by numerical differentiation
# --------------------------------------------------------------------------------------------
#
# A second derivation, written differently from the engine and from METHODS 5.2: each
# coefficient is written as a function of unit weights w (all ratios, so homogeneous of degree
# 0 in w), its influence values are n1 * dγ/dw_u by central differences, and the delta-method
# variance is Σ IF_u² / (n1 (n1 - 1)) over the n1 units with a value. No formula for e_u is
# written here, so this checks the engine's influence terms (per-coder denominators included).


def _weighted_chance_corrected(codes, q, kind, w_units, weights=None):
    """γ with unit weights: P_bar over units with two or more values, the chance term from
    the units' weighted category shares (AC1/AC2, pi-type) or the coders' (Conger)."""
    W = np.eye(q) if weights is None else weights
    r = counts_matrix(codes, q).astype(float)
    ru = r.sum(axis=1)
    pair = ru >= 2
    rstar = r @ W.T
    a = np.zeros(len(r))
    a[pair] = (r[pair] * (rstar[pair] - 1)).sum(axis=1) / (ru[pair] * (ru[pair] - 1))
    pa = (w_units * a)[pair].sum() / w_units[pair].sum()
    if kind == "conger":
        m = codes.shape[1]
        p = np.array([[(w_units * (codes[:, i] == k)).sum() / (w_units * (codes[:, i] >= 0)).sum()
                       for k in range(q)] for i in range(m)])
        pe = sum(p[i] @ p[j] for i in range(m) for j in range(m) if i != j) / (m * (m - 1))
    else:
        share = r / ru[:, None]
        pi = (w_units[:, None] * share).sum(axis=0) / w_units.sum()
        if kind == "ac":
            pe = W.sum() / (q * (q - 1)) * (pi * (1 - pi)).sum()
        elif kind == "pi":
            pe = pi @ W @ pi
        else:
            pe = W.sum() / q ** 2
    return (pa - pe) / (1 - pe)


def _numerical_delta_se(codes, q, kind, weights=None, h=1e-6):
    codes = codes[(codes >= 0).any(axis=1)]
    n1 = len(codes)
    infl = np.empty(n1)
    for u in range(n1):  # one central difference per unit
        up, down = np.ones(n1), np.ones(n1)
        up[u] += h
        down[u] -= h
        infl[u] = n1 * (_weighted_chance_corrected(codes, q, kind, up, weights)
                        - _weighted_chance_corrected(codes, q, kind, down, weights)) / (2 * h)
    return math.sqrt((infl ** 2).sum() / (n1 * (n1 - 1)))


def _single_rated(seed, m, q, n, share=0.3):
    """Codes with `share` of the units coded by one coder only (the others complete)."""
    codes = _data(seed, m, q, n, 0.0, coder_bias=0.5)
    rng = np.random.default_rng(seed + 1)
    single = rng.random(n) < share
    keep = rng.integers(0, m, size=n)
    for i in range(m):
        codes[single & (keep != i), i] = -1
    return codes


DELTA_CASES = [c for c in WITH_MISSING if c.values[3] <= 150][:4] + \
    [c for c in COMPLETE if c.values[3] <= 150][:2]


@pytest.mark.parametrize("f,kind", [(agree.gwet_ac1, "ac"), (agree.fleiss_kappa, "pi"),
                                    (agree.brennan_prediger, "bp"), (agree.conger_kappa, "conger")])
@pytest.mark.parametrize("seed,m,q,n,rate", DELTA_CASES)
def test_linearised_se_is_the_delta_method(seed, m, q, n, rate, f, kind):
    m = max(m, 3)
    codes = _data(seed, m, q, n, rate, coder_bias=0.5)
    if kind == "conger":       # Conger needs (nearly) every coder on most units: half complete
        codes[: n // 2] = _data(seed + 7, m, q, n // 2, 0.0, coder_bias=0.5)
    result = f(as_float(codes), categories=list(range(q)), n_resamples=0)
    if not result.defined:
        pytest.skip("coefficient undefined on this draw")
    _close(result.estimate, _weighted_chance_corrected(codes[(codes >= 0).any(axis=1)], q, kind,
                                                       np.ones(int((codes >= 0).any(axis=1).sum()))))
    assert result.se == pytest.approx(_numerical_delta_se(codes, q, kind), rel=1e-5)


@pytest.mark.parametrize("kind", ("linear", "quadratic"))
def test_weighted_linearised_se_is_the_delta_method(kind):
    codes = _single_rated(31, 3, 4, 90)
    w = _weights(4, kind)
    ac2 = agree.gwet_ac1(as_float(codes), weights=kind, categories=list(range(4)), n_resamples=0)
    assert ac2.se == pytest.approx(_numerical_delta_se(codes, 4, "ac", w), rel=1e-5)
    pi = agree.scott_pi(as_float(codes), weights=kind, categories=list(range(4)), n_resamples=0)
    assert pi.se == pytest.approx(_numerical_delta_se(codes, 4, "pi", w), rel=1e-5)


def test_pi_type_se_with_asymmetric_weights_is_the_delta_method():
    """An asymmetric weight matrix: p_e = πᵀ W π, whose derivative uses W + Wᵀ."""
    codes = _single_rated(5, 3, 3, 80)
    w = np.array([[1.0, 0.6, 0.0], [0.2, 1.0, 0.5], [0.0, 0.9, 1.0]])
    res = agree.scott_pi(as_float(codes), weights=w, categories=list(range(3)), n_resamples=0)
    assert res.se == pytest.approx(_numerical_delta_se(codes, 3, "pi", w), rel=1e-5)


@pytest.mark.parametrize("f,kind", [(agree.gwet_ac1, "ac"), (agree.fleiss_kappa, "pi")])
def test_handbook_se_centred_at_pe_beside_the_default(f, kind):
    """details["se_handbook"]: Gwet's (2014) unit terms centred at p_e (METHODS 5.2, from
    memory there): γ*_u = (n1/n') [r_u >= 2] (p_a|u - p_e)/(1 - p_e) - 2 (1 - γ)(p_e|u - p_e)
    /(1 - p_e), Var = Σ (γ*_u - γ)² / (n1 (n1 - 1)), written out here. With 30% of units
    coded once it differs from the default (the delta method, checked above); with complete
    data the two are equal."""
    q = 4
    codes = _single_rated(11, 3, q, 120)
    res = f(as_float(codes), categories=list(range(q)), n_resamples=0)
    r = counts_matrix(codes, q).astype(float)
    ru = r.sum(axis=1)
    r, ru = r[ru >= 1], ru[ru >= 1]
    n1, pair = len(ru), ru >= 2
    share = r / ru[:, None]
    pi = share.mean(axis=0)
    a = np.zeros(n1)
    a[pair] = (r[pair] * (r[pair] - 1)).sum(axis=1) / (ru[pair] * (ru[pair] - 1))
    pa = a[pair].mean()
    if kind == "ac":
        pe, pe_u = (pi * (1 - pi)).sum() / (q - 1), (share * (1 - pi)).sum(axis=1) / (q - 1)
    else:
        pe, pe_u = pi @ pi, share @ pi
    g = (pa - pe) / (1 - pe)
    g_u = (n1 / pair.sum()) * pair * (a - pe) / (1 - pe) - 2 * (1 - g) * (pe_u - pe) / (1 - pe)
    handbook = math.sqrt(((g_u - g) ** 2).sum() / (n1 * (n1 - 1)))
    _close(res.details["se_handbook"], handbook)
    assert res.details["se_handbook"] > res.se          # the p_e-centred form is the larger here
    assert "centred at p_a" in res.se_method
    complete = f(as_float(_data(11, 3, q, 120, 0.0)), categories=list(range(q)), n_resamples=0)
    _close(complete.details["se_handbook"], complete.se)
    assert complete.se_method == "linearisation (Gwet 2008; 2014)"
