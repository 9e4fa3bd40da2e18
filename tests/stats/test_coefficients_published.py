"""Published worked examples, hand computations and the exact identities of METHODS.md 12.

Each value carries its source. 'from memory' marks values recalled rather than read from the
source here; each of those is also cross-checked with a reference library on the same data.
"""

from __future__ import annotations

import math

import krippendorff
import numpy as np
import pytest
from statsmodels.stats.inter_rater import cohens_kappa, fleiss_kappa

import agree
from agree.core.model import from_table
from tests.conftest import as_float, cross_table, expand_table, shape_cases, simulate_codes

TOL = 1e-9
nan = np.nan

# Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School for
# Communication, University of Pennsylvania. Section C: 4 coders (rows) x 12 units, missing
# values, values 1..5. The matrix and the four alphas are from memory (they are widely quoted);
# the krippendorff package reproduces them on the same matrix (checked below).
KRIPPENDORFF_2011_C = np.array([
    [1, 2, 3, 3, 2, 1, 4, 1, 2, nan, nan, nan],
    [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, nan, 3],
    [nan, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, nan],
    [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, nan],
])
KRIPPENDORFF_2011_C_ALPHA = {"nominal": 0.743, "ordinal": 0.815, "interval": 0.849,
                             "ratio": 0.797}

# Krippendorff (2011), section A: binary data, two coders, 10 units, no missing values;
# alpha = 0.095 (from memory; re-derived by hand in the test).
KRIPPENDORFF_2011_A = np.array([
    [0, 1, 0, 0, 0, 0, 0, 0, 1, 0],
    [1, 1, 1, 0, 0, 1, 0, 0, 0, 0],
])


@pytest.mark.parametrize("level", list(KRIPPENDORFF_2011_C_ALPHA))
def test_krippendorff_2011_four_coders_missing(level):
    data = KRIPPENDORFF_2011_C.T  # units x coders
    result = agree.krippendorff_alpha(data, level=level, n_resamples=0)
    assert result.estimate == pytest.approx(KRIPPENDORFF_2011_C_ALPHA[level], abs=5e-4)
    reference = krippendorff.alpha(reliability_data=KRIPPENDORFF_2011_C,
                                   level_of_measurement=level)
    assert result.estimate == pytest.approx(reference, abs=TOL)
    # unit 12 has a single value: not pairable, left out and said so
    assert result.n_units == 11
    assert result.n_values == 40


def test_krippendorff_2011_coincidences():
    """Krippendorff (2011) section C coincidence margins, counted by hand from the matrix
    (pairable values only; unit 12 has one value): n_1 = 9, n_2 = 13, n_3 = 10, n_4 = 5,
    n_5 = 3, n = 40."""
    o = agree.coincidence_matrix(KRIPPENDORFF_2011_C.T)
    margins = o.to_numpy(dtype=float).sum(axis=1)
    np.testing.assert_allclose(margins, [9, 13, 10, 5, 3], atol=TOL)
    # unit 6 has values 1, 2, 3, 4 (m_u = 4): each off-diagonal pair adds 1/3
    assert o.to_numpy(dtype=float)[0, 3] == pytest.approx(1 / 3, abs=TOL)


def test_krippendorff_2011_binary_two_coders():
    data = KRIPPENDORFF_2011_A.T
    # By hand: 5 units 0-0 -> o_00 = 10; 1 unit 1-1 -> o_11 = 2; 4 disagreements -> o_01 = 4.
    # n_0 = 14, n_1 = 6, n = 20. alpha = 1 - (n-1) o_01 / (n_0 n_1) = 1 - 19*4/84 = 0.0952...
    by_hand = 1 - 19 * 4 / (14 * 6)
    result = agree.krippendorff_alpha(data, level="nominal", n_resamples=0)
    assert result.estimate == pytest.approx(by_hand, abs=TOL)
    assert result.estimate == pytest.approx(0.095, abs=5e-4)
    assert result.estimate == pytest.approx(
        krippendorff.alpha(reliability_data=KRIPPENDORFF_2011_A, level_of_measurement="nominal"),
        abs=TOL)


def test_krippendorff_package_documentation_example():
    """3 coders x 15 units with missing values, as printed in the krippendorff package's
    documentation (nominal 0.691358, interval 0.810845)."""
    data = np.array([
        [nan, nan, nan, nan, nan, 3, 4, 1, 2, 1, 1, 3, 3, nan, 3],
        [1, nan, 2, 1, 3, 3, 4, 3, nan, nan, nan, nan, nan, nan, nan],
        [nan, nan, 2, 1, 3, 4, 4, nan, 2, 1, 1, 3, 3, nan, 4],
    ]).T
    assert agree.krippendorff_alpha(data, level="nominal", n_resamples=0).estimate == \
        pytest.approx(0.691358, abs=1e-6)
    assert agree.krippendorff_alpha(data, level="interval", n_resamples=0).estimate == \
        pytest.approx(0.810845, abs=1e-6)


# Fleiss' kappa: the widely reproduced 10 subjects x 14 raters x 5 categories example
# (category counts per subject), kappa = 0.210 (from memory; it is the example of the
# 'Fleiss' kappa' encyclopedia article, not Fleiss 1971's own table, which we could not
# reconstruct reliably). Cross-checked with statsmodels on the same table.
FLEISS_14_RATERS = np.array([
    [0, 0, 0, 0, 14],
    [0, 2, 6, 4, 2],
    [0, 0, 3, 5, 6],
    [0, 3, 9, 2, 0],
    [2, 2, 8, 1, 1],
    [7, 7, 0, 0, 0],
    [3, 2, 6, 3, 0],
    [2, 5, 3, 2, 2],
    [6, 5, 2, 1, 0],
    [0, 2, 2, 3, 7],
])


def _agreeing_pairs_by_enumeration(counts_row: np.ndarray) -> float:
    """Share of agreeing pairs among all pairs of raters of one subject, by listing every
    rater's category and enumerating the pairs (not the r(r-1) short cut)."""
    import itertools

    ratings = np.repeat(np.arange(len(counts_row)), counts_row)
    pairs = list(itertools.combinations(ratings, 2))
    return sum(a == b for a, b in pairs) / len(pairs)


def test_fleiss_kappa_fourteen_raters():
    codes = np.array([np.repeat(np.arange(5), row) for row in FLEISS_14_RATERS])
    result = agree.fleiss_kappa(codes, n_resamples=0)
    assert result.estimate == pytest.approx(0.210, abs=5e-4)
    assert result.estimate == pytest.approx(fleiss_kappa(FLEISS_14_RATERS), abs=TOL)
    # the engine's own P_bar and P_e against the published intermediate values (from memory:
    # P_bar = 0.378, P_e = 0.213, the example's printed three-decimal figures) ...
    assert result.details["p_o"] == pytest.approx(0.378, abs=5e-4)
    assert result.details["p_e"] == pytest.approx(0.213, abs=5e-4)
    # ... and against a second derivation written differently: P_bar by enumerating every pair
    # of raters of each subject, P_e as the chance that two ratings drawn at random (with
    # replacement) from all 140 ratings agree
    p_bar = np.mean([_agreeing_pairs_by_enumeration(row) for row in FLEISS_14_RATERS])
    everything = np.repeat(np.arange(5), FLEISS_14_RATERS.sum(axis=0))
    p_e = np.mean(everything[:, None] == everything[None, :])
    assert result.details["p_o"] == pytest.approx(p_bar, abs=TOL)
    assert result.details["p_e"] == pytest.approx(p_e, abs=TOL)


def test_cohen_kappa_two_by_two_by_hand():
    """Cohen (1960) formula on a 2x2 table, by hand:
    A rows, B columns: [[20, 5], [10, 15]], N = 50.
    p_o = (20 + 15)/50 = 0.70; A margins 0.5, 0.5; B margins 0.6, 0.4;
    p_e = 0.5*0.6 + 0.5*0.4 = 0.50; kappa = (0.70 - 0.50)/(1 - 0.50) = 0.40.
    kappa_max = (min(.5,.6) + min(.5,.4) - .5)/(1 - .5) = 0.80 (Cohen 1960).
    Null SE (Fleiss, Cohen & Everitt 1969):
    Var0 = [p_e + p_e² - sum p_k. p_.k (p_k. + p_.k)] / (N (1 - p_e)²)
         = [0.5 + 0.25 - (0.3*1.1 + 0.2*0.9)] / (50 * 0.25) = 0.24 / 12.5 = 0.0192."""
    table = np.array([[20, 5], [10, 15]])
    result = agree.cohen_kappa(expand_table(table), n_resamples=0)
    assert result.estimate == pytest.approx(0.40, abs=TOL)
    assert result.details["kappa_max"] == pytest.approx(0.80, abs=TOL)
    assert result.details["se0"] == pytest.approx(math.sqrt(0.0192), abs=TOL)
    assert result.z == pytest.approx(0.40 / math.sqrt(0.0192), abs=TOL)
    ref = cohens_kappa(table)
    assert result.se == pytest.approx(ref.std_kappa, abs=TOL)


def test_cohen_kappa_three_by_three_by_hand():
    """Cohen (1960) and Cohen (1968) linear weights (Cicchetti & Allison 1971), by hand:
    table [[25, 3, 2], [5, 30, 5], [0, 5, 25]], N = 100.
    rows 0.30, 0.40, 0.30; columns 0.30, 0.38, 0.32; p_o = 0.80;
    p_e = .3*.3 + .4*.38 + .3*.32 = 0.338; kappa = 0.462/0.662.
    Linear weights 1, 1/2, 0: p_o(w) = 0.80 + 0.5 * 18/100 = 0.89;
    p_e(w) = 0.338 + 0.5 * (.3*.38 + .4*.3 + .4*.32 + .3*.38) = 0.576;
    kappa_w = (0.89 - 0.576)/(1 - 0.576) = 0.314/0.424."""
    table = np.array([[25, 3, 2], [5, 30, 5], [0, 5, 25]])
    data = expand_table(table)
    assert agree.cohen_kappa(data, n_resamples=0).estimate == \
        pytest.approx(0.462 / 0.662, abs=TOL)
    assert agree.cohen_kappa(data, weights="linear", n_resamples=0).estimate == \
        pytest.approx(0.314 / 0.424, abs=TOL)
    assert agree.scott_pi(data, n_resamples=0).estimate == pytest.approx(
        (0.80 - (0.30 ** 2 + 0.39 ** 2 + 0.31 ** 2)) / (1 - (0.30 ** 2 + 0.39 ** 2 + 0.31 ** 2)),
        abs=TOL)
    # percent agreement and Brennan-Prediger (q = 3): (0.80 - 1/3)/(1 - 1/3) = 0.7
    assert agree.percent_agreement(data, n_resamples=0).estimate == pytest.approx(0.80, abs=TOL)
    assert agree.brennan_prediger(data, n_resamples=0).estimate == pytest.approx(0.70, abs=TOL)
    # AC1 (Gwet 2008): pi = (.30, .39, .31); p_e = sum pi(1 - pi)/(q - 1)
    pi = np.array([0.30, 0.39, 0.31])
    pe = (pi * (1 - pi)).sum() / 2
    assert agree.gwet_ac1(data, n_resamples=0).estimate == \
        pytest.approx((0.80 - pe) / (1 - pe), abs=TOL)


def _two_coder_labels(table, labels):
    """Units x 2 label matrix from a 2 x 2 table whose rows are the first coder's label and
    columns the second's, in the order of `labels`."""
    return np.array([[labels[k], labels[l]] for k in range(2) for l in range(2)
                     for _ in range(table[k][l])], dtype=object)


def test_pabak_by_hand():
    """Byrt, Bishop & Carlin (1993): PI = (a - d)/N, BI = (b - c)/N with a = both "yes",
    d = both "no", b = first coder "yes" and second "no", c the reverse. Explicit table,
    rows the first coder (yes, no), columns the second: [[15, 10], [5, 20]], N = 50:
    a = 15, b = 10, c = 5, d = 20; PABAK = 2 * 35/50 - 1 = 0.4;
    PI = (15 - 20)/50 = -0.1 ("yes" is the rarer answer); BI = (10 - 5)/50 = +0.1 (the first
    coder says "yes" more often: 25 against 20)."""
    data = from_table(_two_coder_labels([[15, 10], [5, 20]], ["yes", "no"]), coders=["ana", "ben"],
                      categories=["yes", "no"])
    result = agree.pabak(data, positive="yes", n_resamples=0)
    assert result.estimate == pytest.approx(0.4, abs=TOL)
    assert result.details["prevalence_index"] == pytest.approx(-0.1, abs=TOL)
    assert result.details["bias_index"] == pytest.approx(0.1, abs=TOL)
    assert result.details["positive"] == "yes" and result.details["first_coder"] == "ana"
    # "no" as the positive category swaps a with d and b with c: both signs flip
    flipped = agree.pabak(data, positive="no", n_resamples=0)
    assert flipped.details["prevalence_index"] == pytest.approx(0.1, abs=TOL)
    assert flipped.details["bias_index"] == pytest.approx(-0.1, abs=TOL)
    # by default the first category of the codebook ("yes" here), said in a note
    default = agree.pabak(data, n_resamples=0)
    assert default.details["positive"] == "yes"
    assert default.details["prevalence_index"] == pytest.approx(-0.1, abs=TOL)
    assert any(w.code == "pabak-positive" for w in default.warnings)
    # swapping the coders flips the sign of BI only
    swapped = agree.pabak(from_table(_two_coder_labels([[15, 5], [10, 20]], ["yes", "no"]),
                                     coders=["ben", "ana"], categories=["yes", "no"]),
                          positive="yes", n_resamples=0)
    assert swapped.details["bias_index"] == pytest.approx(-0.1, abs=TOL)
    assert swapped.details["prevalence_index"] == pytest.approx(-0.1, abs=TOL)


def test_pabak_zero_one_code_counts_one_as_positive():
    """A presence code (1 = applied): a = both 1, whatever order the values sort in.
    Rows the first coder (0, 1): [[20, 5], [10, 15]]: a = 15 (both 1), d = 20, b = 10
    (first 1, second 0), c = 5: PI = -0.1, BI = +0.1."""
    result = agree.pabak(expand_table(np.array([[20, 5], [10, 15]])), n_resamples=0)
    assert result.details["positive"] == "1"
    assert result.details["prevalence_index"] == pytest.approx(-0.1, abs=TOL)
    assert result.details["bias_index"] == pytest.approx(0.1, abs=TOL)
    assert not any(w.code == "pabak-positive" for w in result.warnings)
    with pytest.raises(agree.AgreeError):
        agree.pabak(expand_table(np.array([[20, 5], [10, 15]])), positive="maybe", n_resamples=0)


# --------------------------------------------------------------------------------------------
# Identities (METHODS.md section 12), on random shapes
# --------------------------------------------------------------------------------------------

TWO = shape_cases(8, seed=11, missing=False, m_range=(2, 2))
MANY = shape_cases(8, seed=12, missing=False, m_range=(3, 6))
MANY_MISSING = shape_cases(6, seed=13, missing=True, m_range=(3, 6))


def _codes(seed, m, q, n, rate, **kw):
    rng = np.random.default_rng(seed)
    return simulate_codes(rng, n, m, q, alpha=float(rng.uniform(0.2, 0.9)), missing=rate,
                          prevalence=rng.dirichlet(np.full(q, 2.0)), **kw)


@pytest.mark.parametrize("seed,m,q,n,rate", TWO)
def test_alpha_is_pi_plus_small_sample_term(seed, m, q, n, rate):
    """Two coders, nominal, complete: alpha = pi + (1 - pi)/(2N) (METHODS 4.5)."""
    x = as_float(_codes(seed, m, q, n, rate))
    alpha = agree.krippendorff_alpha(x, n_resamples=0).estimate
    pi = agree.scott_pi(x, n_resamples=0).estimate
    assert alpha == pytest.approx(pi + (1 - pi) / (2 * n), abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", MANY + TWO)
def test_fleiss_kappa_is_weighted_mean_of_category_kappas(seed, m, q, n, rate):
    codes = _codes(seed, m, q, n, rate)
    result = agree.fleiss_kappa(as_float(codes), n_resamples=0)
    per = result.details["per_category"]
    p = np.array([(codes == k).mean() for k in range(q)])
    used = [k for k in range(q) if 0 < p[k] < 1]
    pq = p * (1 - p)
    kappas = np.array([per.get(k, per.get(str(k)))["kappa"] for k in used])
    assert result.estimate == pytest.approx((pq[used] * kappas).sum() / pq[used].sum(), abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", shape_cases(8, seed=14, missing=True, m_range=(2, 2)))
def test_kappa_from_pabak_prevalence_and_bias(seed, m, q, n, rate):
    """kappa = (PABAK - PI² + BI²)/(1 - PI² + BI²) on 2x2 tables (Byrt et al. 1993)."""
    x = as_float(_codes(seed, 2, 2, n, rate, coder_bias=0.5))
    pabak = agree.pabak(x, n_resamples=0)
    pi2 = pabak.details["prevalence_index"] ** 2
    bi2 = pabak.details["bias_index"] ** 2
    kappa = agree.cohen_kappa(x, n_resamples=0).estimate
    assert kappa == pytest.approx((pabak.estimate - pi2 + bi2) / (1 - pi2 + bi2), abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", MANY + MANY_MISSING)
def test_category_alpha_is_alpha_on_presence_recoding(seed, m, q, n, rate):
    """alpha_k = 1 - (n-1)(n_k - o_kk)/(n_k (n - n_k)) = nominal alpha on k / not-k
    (METHODS 6.3), also checked with the krippendorff package on the recoded matrix."""
    codes = _codes(seed, m, q, n, rate)
    data = from_table(as_float(codes))
    o = agree.coincidence_matrix(data).to_numpy(dtype=float)
    nk = o.sum(axis=1)
    total = nk.sum()
    for idx, category in enumerate(data.values):
        if not 0 < nk[idx] < total:
            continue
        closed = 1 - (total - 1) * (nk[idx] - o[idx, idx]) / (nk[idx] * (total - nk[idx]))
        recoded = data.presence(category)
        ours = agree.krippendorff_alpha(recoded, level="nominal", n_resamples=0).estimate
        binary = np.where(codes < 0, nan, (codes == category).astype(float))
        reference = krippendorff.alpha(reliability_data=binary.T, level_of_measurement="nominal")
        assert ours == pytest.approx(closed, abs=TOL)
        assert ours == pytest.approx(reference, abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", TWO)
def test_conger_equals_cohen_with_two_coders(seed, m, q, n, rate):
    x = as_float(_codes(seed, 2, q, n, rate, coder_bias=0.6))
    cohen = agree.cohen_kappa(x, n_resamples=0).estimate
    assert agree.conger_kappa(x, n_resamples=0).estimate == pytest.approx(cohen, abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", TWO)
def test_identity_weights_give_unweighted_kappa(seed, m, q, n, rate):
    """w = I reduces the weighted formulas to the unweighted ones (METHODS 2.2): the identity-
    weighted kappa and its SEs against statsmodels' unweighted kappa, Var1 and Var0."""
    codes = _codes(seed, 2, q, n, rate, coder_bias=0.6)
    identity = agree.cohen_kappa(as_float(codes), categories=list(range(q)), weights=np.eye(q), n_resamples=0)
    reference = cohens_kappa(cross_table(codes[:, 0], codes[:, 1], q))
    assert identity.estimate == pytest.approx(reference.kappa, abs=TOL)
    assert identity.se == pytest.approx(reference.std_kappa, abs=TOL)
    assert identity.details["se0"] == pytest.approx(reference.std_kappa0, abs=TOL)


@pytest.mark.parametrize("scale", (0.25, 0.5, 0.9))
@pytest.mark.parametrize("seed,m,q,n,rate", TWO[:4])
def test_scaling_disagreement_weights_leaves_weighted_kappa(seed, m, q, n, rate, scale):
    """kappa_w = 1 - sum v p / sum v p_e is invariant to v -> c v (Cohen 1968)."""
    codes = _codes(seed, 2, q, n, rate, coder_bias=0.6)
    x = as_float(codes)
    s = np.arange(q, dtype=float)
    quadratic = 1 - (s[:, None] - s[None, :]) ** 2 / (q - 1) ** 2
    scaled = 1 - scale * (1 - quadratic)
    base = agree.cohen_kappa(x, categories=list(range(q)), weights="quadratic", n_resamples=0)
    other = agree.cohen_kappa(x, categories=list(range(q)), weights=scaled, n_resamples=0)
    assert other.estimate == pytest.approx(base.estimate, abs=TOL)
    reference = cohens_kappa(cross_table(codes[:, 0], codes[:, 1], q), weights=scale * (1 - quadratic))
    assert other.estimate == pytest.approx(reference.kappa, abs=TOL)


@pytest.mark.parametrize("seed,m,q,n,rate", TWO + shape_cases(4, seed=15, missing=False,
                                                              m_range=(2, 2), q_range=(2, 3)))
def test_ac1_two_coder_closed_form_variance(seed, m, q, n, rate):
    """Gwet (2008, BJMSP) two-coder closed form, f = 0 (METHODS 5.2):
    Var = {p_a(1-p_a) - 4(1-g)[sum_k p_kk(1-pi_k)/(q-1) - p_a p_e]
           + 4(1-g)²[sum_kl p_kl (1-(pi_k+pi_l)/2)²/(q-1)² - p_e²]} / (N (1-p_e)²).
    The linearisation the engine uses equals this times n/(n-1)."""
    codes = _codes(seed, 2, q, n, rate, coder_bias=0.4)
    p = cross_table(codes[:, 0], codes[:, 1], q) / n
    pi = (p.sum(axis=1) + p.sum(axis=0)) / 2
    pa = np.trace(p)
    pe = (pi * (1 - pi)).sum() / (q - 1)
    g = (pa - pe) / (1 - pe)
    inner = (p * (1 - (pi[:, None] + pi[None, :]) / 2) ** 2).sum() / (q - 1) ** 2
    closed = (pa * (1 - pa)
              - 4 * (1 - g) * ((np.diag(p) * (1 - pi)).sum() / (q - 1) - pa * pe)
              + 4 * (1 - g) ** 2 * (inner - pe ** 2)) / (n * (1 - pe) ** 2)
    result = agree.gwet_ac1(as_float(codes), categories=list(range(q)), n_resamples=0)
    assert result.estimate == pytest.approx(g, abs=TOL)
    assert result.se ** 2 == pytest.approx(closed * n / (n - 1), rel=1e-9, abs=1e-15)


@pytest.mark.parametrize("seed,m,q,n,rate", MANY[:4] + MANY_MISSING[:3])
def test_alpha_with_zero_distance_equals_merged_categories(seed, m, q, n, rate):
    """alpha with delta_ck = 0 for one pair = alpha after merging c and k (METHODS 6.3)."""
    codes = _codes(seed, m, q, n, rate)
    data = from_table(as_float(codes), categories=list(range(q)))

    def merged_distance(c, k):
        return 0.0 if c == k or {c, k} == {0, 1} else 1.0

    ours = agree.krippendorff_alpha(data, level=merged_distance, n_resamples=0).estimate
    merged = agree.krippendorff_alpha(data.merge({1: 0}), level="nominal", n_resamples=0).estimate
    assert ours == pytest.approx(merged, abs=TOL)
