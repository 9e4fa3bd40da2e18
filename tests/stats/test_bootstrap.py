"""The unit (and cluster) bootstrap behind every interval (METHODS.md section 7), and how the
coefficients accept designs where coders rotate.

Oracles: scipy.stats.bootstrap (BCa) run on unit indices, and a brute-force unit-resampling
loop written here (slow, exact by definition) for the pattern-compressed bootstrap.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy import stats

import agree
from agree.core.model import AgreeError, from_table
from tests.conftest import as_float, counts_matrix, simulate_codes, warning_codes


@pytest.fixture(scope="module")
def typical():
    """120 units, 3 coders, 4 categories, some missing values, alpha around 0.6."""
    rng = np.random.default_rng(7)
    return as_float(simulate_codes(rng, 120, 3, 4, alpha=0.6, missing=0.1,
                                   prevalence=[0.4, 0.3, 0.2, 0.1]))


# --------------------------------------------------------------------------------------------
# Reproducibility and bookkeeping
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("f", [agree.krippendorff_alpha, agree.fleiss_kappa, agree.gwet_ac1,
                               agree.percent_agreement, agree.brennan_prediger])
def test_same_seed_same_result_other_seed_differs(typical, f):
    one = f(typical, n_resamples=300, seed=11)
    two = f(typical, n_resamples=300, seed=11)
    other = f(typical, n_resamples=300, seed=12)
    assert one.to_dict() == two.to_dict()
    assert (one.ci_low, one.ci_high) != (other.ci_low, other.ci_high)
    assert one.estimate == other.estimate  # the point estimate does not depend on the seed
    info = one.bootstrap
    assert info is not None
    assert info.replicates == 300 and info.seed == 11 and info.unit == "unit"


def test_seed_none_is_recorded_and_repeatable(typical):
    first = agree.krippendorff_alpha(typical, n_resamples=200)
    assert first.bootstrap is not None and first.bootstrap.seed is not None
    again = agree.krippendorff_alpha(typical, n_resamples=200, seed=first.bootstrap.seed)
    assert (again.ci_low, again.ci_high) == (first.ci_low, first.ci_high)


def test_no_resampling_when_n_resamples_zero(typical):
    alpha = agree.krippendorff_alpha(typical, n_resamples=0)
    assert alpha.bootstrap is None
    # alpha has no standard analytic SE (METHODS 7.6): no interval rather than a made-up one
    assert alpha.ci_low is None or math.isnan(alpha.ci_low)
    two = typical[:, :2]
    kappa = agree.cohen_kappa(two, n_resamples=0)
    assert kappa.bootstrap is None
    assert kappa.se is not None and kappa.se_method  # Fleiss, Cohen & Everitt (1969)
    assert kappa.ci_low < kappa.estimate < kappa.ci_high


@pytest.mark.parametrize("method", ["percentile", "bca"])
def test_interval_methods(typical, method):
    result = agree.krippendorff_alpha(typical, n_resamples=1000, seed=3, ci_method=method)
    assert result.ci_method == method
    assert result.bootstrap.method == method
    assert result.ci_low < result.estimate < result.ci_high
    assert result.ci_low <= result.lower_bound <= result.estimate
    assert result.confidence_level == 0.95
    assert result.se > 0


def test_percentile_and_bca_differ_on_same_resamples(typical):
    p = agree.krippendorff_alpha(typical, n_resamples=1000, seed=3, ci_method="percentile")
    b = agree.krippendorff_alpha(typical, n_resamples=1000, seed=3, ci_method="bca")
    assert p.se == b.se  # same replicates
    assert (p.ci_low, p.ci_high) != (b.ci_low, b.ci_high)


def test_unknown_interval_method_is_refused(typical):
    with pytest.raises((AgreeError, ValueError)):
        agree.krippendorff_alpha(typical, n_resamples=50, ci_method="studentised-whatever")


def test_confidence_level_orders_intervals(typical):
    narrow = agree.krippendorff_alpha(typical, n_resamples=1000, seed=5, confidence_level=0.80,
                                      ci_method="percentile")
    wide = agree.krippendorff_alpha(typical, n_resamples=1000, seed=5, confidence_level=0.99,
                                    ci_method="percentile")
    assert wide.ci_low < narrow.ci_low < narrow.ci_high < wide.ci_high
    assert narrow.confidence_level == 0.80


# --------------------------------------------------------------------------------------------
# BCa against scipy, pattern bootstrap against brute force
# --------------------------------------------------------------------------------------------

def _nominal_alpha_of_units(codes, q):
    """Nominal alpha as a vectorised function of resampled unit indices, for scipy:
    alpha = [(n-1) sum_c o_cc - sum_c n_c(n_c-1)] / [n(n-1) - sum_c n_c(n_c-1)]
    (Krippendorff 2011; METHODS 4.2), from per-unit sums over pairable units."""
    r = counts_matrix(codes, q).astype(float)
    mu = r.sum(axis=1, keepdims=True)
    pairable = mu >= 2
    o_diag = np.where(pairable, r * (r - 1) / np.maximum(mu - 1, 1), 0.0)
    n_c = np.where(pairable, r, 0.0)

    def statistic(idx, axis=-1):
        idx = np.asarray(idx, dtype=int)
        o = o_diag[idx].sum(axis=-2)
        nc = n_c[idx].sum(axis=-2)
        n = nc.sum(axis=-1)
        same = (nc * (nc - 1)).sum(axis=-1)
        return ((n - 1) * o.sum(axis=-1) - same) / (n * (n - 1) - same)

    return statistic


def test_bca_close_to_scipy_on_unit_indices():
    """Different resamples, so not exact: the interval must bracket the estimate and its
    width be within 15% of scipy's BCa on the same statistic of unit indices."""
    rng = np.random.default_rng(21)
    codes = simulate_codes(rng, 250, 3, 3, alpha=0.55, missing=0.1, prevalence=[0.5, 0.3, 0.2])
    statistic = _nominal_alpha_of_units(codes, 3)
    ours = agree.krippendorff_alpha(as_float(codes), n_resamples=4000, seed=1, ci_method="bca")
    assert statistic(np.arange(len(codes))) == pytest.approx(ours.estimate, abs=1e-12)
    ref = stats.bootstrap((np.arange(len(codes)),), statistic, vectorized=True,
                          n_resamples=4000, method="BCa", confidence_level=0.95,
                          random_state=np.random.default_rng(1))
    assert ours.ci_low < ours.estimate < ours.ci_high
    ref_width = ref.confidence_interval.high - ref.confidence_interval.low
    assert ours.ci_high - ours.ci_low == pytest.approx(ref_width, rel=0.15)
    assert ours.ci_low == pytest.approx(ref.confidence_interval.low, abs=0.15 * ref_width)
    assert ours.ci_high == pytest.approx(ref.confidence_interval.high, abs=0.15 * ref_width)
    assert ours.se == pytest.approx(ref.standard_error, rel=0.1)


def _brute_force(f, x, n_boot, seed, **kw):
    """Resample whole units with replacement and recompute, keeping the category list (q)."""
    rng = np.random.default_rng(seed)
    data = from_table(x)
    n = data.n_units
    out = np.array([f(data.subset(rng.integers(0, n, n)), n_resamples=0, **kw).estimate
                    for _ in range(n_boot)])
    return out[np.isfinite(out)]


@pytest.mark.parametrize("f,coders,kw", [
    (agree.krippendorff_alpha, 3, {}),
    # the ordinal metric depends on the margins: it must be recomputed in every replicate
    (agree.krippendorff_alpha, 3, {"level": "ordinal"}),
    (agree.gwet_ac1, 3, {}),
    (agree.cohen_kappa, 2, {}),
])
def test_pattern_bootstrap_matches_brute_force_unit_bootstrap(f, coders, kw):
    """The pattern-compressed bootstrap (multinomial over pattern counts, METHODS 7.5) has
    the distribution of resampling units: compare the replicates' SD and percentile interval
    with a plain unit-resampling loop (loose tolerances: Monte Carlo error)."""
    rng = np.random.default_rng(33)
    x = as_float(simulate_codes(rng, 80, coders, 4, alpha=0.5, missing=0.1, coder_bias=0.3,
                                prevalence=[0.1, 0.2, 0.3, 0.4]))
    brute = _brute_force(f, x, 400, seed=2, **kw)
    ours = f(x, n_resamples=4000, seed=2, ci_method="percentile", **kw)
    assert ours.se == pytest.approx(brute.std(ddof=1), rel=0.12)
    lo, hi = np.quantile(brute, [0.025, 0.975])
    sd = brute.std(ddof=1)
    # a 2.5% quantile from 400 replicates has a Monte Carlo SE of about 0.17 sd
    assert ours.ci_low == pytest.approx(lo, abs=0.5 * sd)
    assert ours.ci_high == pytest.approx(hi, abs=0.5 * sd)
    replicates = ours.details.get("replicates") if hasattr(ours.details, "get") else None
    if replicates is not None:
        replicates = np.asarray(replicates, dtype=float)
        assert np.nanmean(replicates) == pytest.approx(brute.mean(), abs=0.15 * sd)


# --------------------------------------------------------------------------------------------
# Tail probability below a minimum
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("method", ["pseudo-unit", "bca", "percentile"])
def test_p_value_min_is_monotone_and_agrees_with_the_bound(typical, method):
    """The p-value against the minimum is the level at which the one-sided bound equals the
    minimum: it grows with the minimum, and the bound clears the minimum exactly when the
    p-value is below 1 - level (property of inverting a bound)."""
    minima = [-0.2, 0.3, 0.5, 0.55, 0.6, 0.65, 0.7, 0.9, 1.0]
    shares = []
    for minimum in minima:
        result = agree.krippendorff_alpha(typical, n_resamples=800, seed=9, minimum=minimum, ci_method=method)
        assert result.minimum == minimum
        assert 0.0 <= result.p_value_min <= 1.0
        assert (result.lower_bound > minimum) is (result.p_value_min < 0.05)
        shares.append(result.p_value_min)
    assert shares == sorted(shares)
    assert shares[0] == 0.0 and shares[-1] == 1.0
    assert result.to_dict()["p_value_min"] == shares[-1]
    assert "p_below_min" not in result.to_dict()


def test_no_minimum_no_tail_probability(typical):
    result = agree.krippendorff_alpha(typical, n_resamples=100, seed=9)
    assert result.minimum is None and result.p_value_min is None


# --------------------------------------------------------------------------------------------
# Cluster bootstrap
# --------------------------------------------------------------------------------------------

def _clustered(seed=4, n_clusters=25, copies=8):
    """Homogeneous clusters: every unit of a cluster is a copy of one simulated unit."""
    rng = np.random.default_rng(seed)
    base = simulate_codes(rng, n_clusters, 3, 3, alpha=0.5)
    codes = np.repeat(base, copies, axis=0)
    labels = np.repeat([f"interview {g:02d}" for g in range(n_clusters)], copies)
    return codes, labels


def test_cluster_bootstrap_widens_interval_for_homogeneous_clusters():
    codes, labels = _clustered()
    x = as_float(codes)
    units = agree.krippendorff_alpha(x, n_resamples=1500, seed=8, ci_method="percentile")
    clusters = agree.krippendorff_alpha(x, n_resamples=1500, seed=8, ci_method="percentile",
                                        cluster=labels)
    assert clusters.estimate == units.estimate
    # copies carry no new information: the SE should grow by about sqrt(8) ~ 2.8
    assert clusters.se > 2.0 * units.se
    assert clusters.ci_high - clusters.ci_low > 2.0 * (units.ci_high - units.ci_low)
    assert clusters.bootstrap.unit.startswith("cluster")


@pytest.mark.parametrize("name", ["cohen_kappa", "scott_pi", "fleiss_kappa", "conger_kappa"])
def test_clustered_design_gives_no_unclustered_test(name):
    """The null SEs behind z and the p-values (Fleiss, Cohen & Everitt 1969; Fleiss, Nee &
    Landis 1979) and Conger's Wald z assume independent units. With units nested in groups
    (here copies of one unit per group: 8 copies carry the information of one), the test would
    claim about sqrt(8) times the evidence there is, so none is given; the independent-units
    SEs stay in the details, named as such."""
    codes, labels = _clustered(seed=3)
    if name in ("cohen_kappa", "scott_pi"):
        codes = codes[:, :2]
    f = getattr(agree, name)
    plain = f(as_float(codes), n_resamples=200, seed=1)
    clustered = f(as_float(codes), n_resamples=200, seed=1, cluster=labels)
    assert plain.z is not None and plain.p_value is not None
    assert clustered.z is None and clustered.p_value is None and clustered.p_value_one_sided is None
    assert "z_method" not in clustered.details and clustered.details.get("se0") is None
    assert any(w.code == "no-test-clustered" for w in clustered.warnings)
    if "se0" in plain.details and plain.details["se0"]:
        assert clustered.details["se0_independent_units"] == pytest.approx(plain.details["se0"])
    if name == "fleiss_kappa":
        per = clustered.details["per_category"]
        assert all(v["z"] is None and v["p_value"] is None for v in per.values())
    assert clustered.to_dict()["z"] is None


def test_clustered_design_without_bootstrap_gives_no_analytic_se():
    codes, labels = _clustered(seed=3)
    res = agree.gwet_ac1(as_float(codes), n_resamples=0, cluster=labels)
    assert res.se is None and res.ci_low is None and res.ci_high is None
    assert res.details["se_independent_units"] > 0 and "se_handbook" not in res.details
    assert any(w.code == "clustered-no-bootstrap" for w in res.warnings)
    pa = agree.percent_agreement(as_float(codes[:, :2]), n_resamples=0, cluster=labels)
    assert pa.ci_low is None and pa.ci_method is None


def test_cluster_bca_interval():
    codes, labels = _clustered(seed=6)
    result = agree.krippendorff_alpha(as_float(codes), n_resamples=1500, seed=8, cluster=labels, ci_method="bca")
    assert result.ci_method == "bca"  # the jackknife over clusters gives the acceleration
    assert result.ci_low < result.estimate < result.ci_high


def test_few_clusters_are_flagged():
    codes, labels = _clustered(seed=6, n_clusters=8, copies=5)
    result = agree.krippendorff_alpha(as_float(codes), n_resamples=300, seed=8, cluster=labels)
    assert result.warnings, "an interval from 8 clusters deserves a caution"


def test_cluster_by_column_name_equals_cluster_by_labels():
    codes, labels = _clustered(seed=5)
    data = replace(from_table(as_float(codes)), columns={"interview": labels})
    by_name = agree.krippendorff_alpha(data, n_resamples=500, seed=8, cluster="interview")
    by_labels = agree.krippendorff_alpha(data, n_resamples=500, seed=8, cluster=labels)
    assert (by_name.ci_low, by_name.ci_high) == (by_labels.ci_low, by_labels.ci_high)
    assert by_name.bootstrap.unit == "cluster:interview"


def test_cluster_of_single_units_is_the_unit_bootstrap_in_distribution(typical):
    labels = np.array([f"u{i}" for i in range(len(typical))])
    a = agree.krippendorff_alpha(typical, n_resamples=3000, seed=1, ci_method="percentile")
    b = agree.krippendorff_alpha(typical, n_resamples=3000, seed=2, ci_method="percentile",
                                 cluster=labels)
    assert b.se == pytest.approx(a.se, rel=0.1)


def test_unknown_cluster_column_is_refused(typical):
    with pytest.raises(AgreeError):
        agree.krippendorff_alpha(typical, n_resamples=50, cluster="no such column")


def test_cluster_labels_of_wrong_length_are_refused(typical):
    with pytest.raises(AgreeError):
        agree.krippendorff_alpha(typical, n_resamples=50, cluster=np.arange(5))


# --------------------------------------------------------------------------------------------
# Edge cases in resampling
# --------------------------------------------------------------------------------------------

def test_undefined_replicates_are_counted_and_reported():
    """A few units, nearly all identical: many replicates have no variation (D_e = 0)."""
    x = np.array([[0, 0]] * 9 + [[0, 1]], dtype=float)
    result = agree.krippendorff_alpha(x, n_resamples=1000, seed=4, ci_method="percentile")
    assert result.bootstrap.n_undefined > 10
    assert "undefined-replicates" in warning_codes(result)


def test_no_disagreement_interval_is_flagged():
    x = np.array([[0, 0], [1, 1], [2, 2], [1, 1], [0, 0]] * 4, dtype=float)
    result = agree.krippendorff_alpha(x, n_resamples=500, seed=4)
    assert result.estimate == 1.0
    assert "no-disagreement" in warning_codes(result)


# --------------------------------------------------------------------------------------------
# Designs where coders rotate (not every coder codes every unit)
# --------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def rotating():
    """5 coders, each unit coded by 2 or 3 of them."""
    rng = np.random.default_rng(17)
    codes = simulate_codes(rng, 90, 5, 4, alpha=0.6)
    for u in range(len(codes)):
        keep = rng.choice(5, size=rng.integers(2, 4), replace=False)
        mask = np.ones(5, bool)
        mask[keep] = False
        codes[u, mask] = -1
    return codes


@pytest.mark.parametrize("f", [agree.krippendorff_alpha, agree.gwet_ac1, agree.fleiss_kappa,
                               agree.percent_agreement, agree.brennan_prediger])
def test_rotating_coders_accepted(rotating, f):
    result = f(as_float(rotating), n_resamples=200, seed=1)
    assert result.defined
    assert result.n_units == len(rotating)
    assert result.n_coders == 5
    assert result.ci_low <= result.estimate <= result.ci_high


def test_cohen_kappa_refuses_three_coders(rotating):
    with pytest.raises(AgreeError) as info:
        agree.cohen_kappa(as_float(rotating[:, :3]), n_resamples=0)
    err = info.value
    assert err.code and err.code != "bad-input"
    assert "two" in err.message.lower() or "2" in err.message


def test_conger_with_missing_values_works_or_refuses_clearly(rotating):
    try:
        result = agree.conger_kappa(as_float(rotating), n_resamples=0)
    except AgreeError as err:
        assert err.message and err.code
    else:
        assert result.defined
        assert -1.0 <= result.estimate <= 1.0


def test_bca_tail_at_the_ends_gives_no_numpy_warning():
    """The level of a minimum below or above every replicate is 0 or 1 (y = ∓inf); with no
    acceleration a·y is 0·inf, which must not leak a RuntimeWarning to the user."""
    import warnings

    from agree.stats.resampling import _bca_tail
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        tail = _bca_tail(np.array([0.0, 1.0, 0.5]), np.zeros(3), np.zeros(3))
    assert tail.tolist() == [0.0, 1.0, 0.5]
