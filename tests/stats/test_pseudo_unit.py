"""The default interval: Rubin's (1981) Bayesian bootstrap with one least-favourable pseudo-unit
(agree.stats.resampling, method "pseudo-unit").

External checks:
- for a 0/1 per-unit statistic (two coders' percent agreement) the bound is the Clopper-Pearson
  (1934) bound on the share of agreeing units (scipy.stats.beta), and the p-value against the
  minimum the exact binomial tail: weight on the agreeing units and the pseudo-unit is
  Beta(N - d, d + 1) (Dirichlet aggregation);
- the pseudo-unit is the least favourable one: no unit added to the data lowers alpha more
  (alpha with the unit added computed by the `krippendorff` package);
- properties: the bound lies at or below the estimate and inside the interval; the same seed
  gives the same bound.
"""

from __future__ import annotations

import itertools

import krippendorff
import numpy as np
import pytest
from scipy import stats

import agree
from agree.stats import resampling
from agree.stats.coefficients import _Alpha, _Conger, pseudo_units
from agree.stats.kernels import level_delta
from agree.stats.patterns import compress
from tests.conftest import as_float, simulate_codes


def _agreeing(n, d):
    """Two coders, n units, the first d coded differently (0 against 1), the rest alike."""
    rows = [[0, 1]] * d + [[0, 0], [1, 1]] * ((n - d) // 2) + [[0, 0]] * ((n - d) % 2)
    return np.array(rows, dtype=float)


@pytest.mark.parametrize("n,d", [(20, 0), (30, 2), (100, 10)])
def test_percent_agreement_bound_is_clopper_pearson(n, d):
    """Percent agreement of two coders is the share of agreeing units: its bound is the
    Clopper-Pearson lower bound beta.ppf(.05, N - d, d + 1), and with d = 0 the interval's upper
    end is 1 (no unit can raise agreement above 1)."""
    minimum = 0.8
    r = agree.percent_agreement(_agreeing(n, d), n_resamples=40_000, seed=2, minimum=minimum)
    cp_lower = stats.beta.ppf(0.05, n - d, d + 1)
    assert r.ci_method == "pseudo-unit"
    assert r.lower_bound == pytest.approx(cp_lower, abs=0.004)
    assert r.p_value_min == pytest.approx(stats.beta.cdf(minimum, n - d, d + 1), abs=0.004)
    # two-sided: Clopper-Pearson at .025 on each side (the upper end with the most favourable unit)
    assert r.ci_low == pytest.approx(stats.beta.ppf(0.025, n - d, d + 1), abs=0.004)
    upper = 1.0 if d == 0 else stats.beta.ppf(0.975, n - d + 1, d)
    assert r.ci_high == pytest.approx(upper, abs=0.004)
    assert r.details["disagreeing_units"] == d


def test_no_disagreement_gives_a_bound_below_one_that_grows_with_the_units():
    bounds = [agree.krippendorff_alpha(_agreeing(n, 0), n_resamples=4000, seed=1).lower_bound
              for n in (10, 20, 50, 200)]
    assert all(b < 1 for b in bounds) and bounds == sorted(bounds)
    r = agree.krippendorff_alpha(_agreeing(20, 0), n_resamples=4000, seed=1, minimum=0.8)
    assert r.estimate == 1.0 and r.details["disagreeing_units"] == 0
    assert any(w.code == "no-disagreement" and "20 units" in w.message for w in r.warnings)
    # the ordinary bootstrap has nothing to resample: its interval is [1, 1]
    bca = agree.krippendorff_alpha(_agreeing(20, 0), n_resamples=500, seed=1, ci_method="bca")
    assert bca.ci_low == bca.ci_high == bca.lower_bound == 1.0


def _with_unit(codes, unit):
    """The units x coders table with one more unit (NaN where its coder did not code it)."""
    return np.vstack([codes, np.asarray(unit, float)[None, :]])


@pytest.mark.parametrize("level", ["nominal", "interval"])
def test_the_pseudo_unit_is_the_least_favourable_unit(level):
    rng = np.random.default_rng(3)
    codes = as_float(simulate_codes(rng, 40, 3, 3, alpha=0.7, missing=0.1))
    r = agree.krippendorff_alpha(codes, level=level, n_resamples=200, seed=1)
    chosen = [float(v) for v in r.details["pseudo_unit"]]
    # every unit three coders could give, with 2 or 3 values
    units = [list(u) + [np.nan] * (3 - len(u)) for s in (2, 3)
             for u in itertools.combinations_with_replacement([0.0, 1.0, 2.0], s)]
    lowest = min(krippendorff.alpha(reliability_data=_with_unit(codes, u).T, level_of_measurement=level)
                 for u in units)
    mine = krippendorff.alpha(reliability_data=_with_unit(codes, chosen + [np.nan] * (3 - len(chosen))).T,
                              level_of_measurement=level)
    assert mine == pytest.approx(lowest, abs=1e-12)


def _worst(stat, codes, n_values, greedy):
    """The statistic with the least-favourable unit added, found by trying every unit or greedily."""
    pat = compress(codes, n_values, ordered=stat.ordered)
    S = (pat.counts @ stat.features(pat))[None, :]
    fk = resampling._finish_k(stat.finish)
    space = pseudo_units(stat, pat)
    _, unit = resampling._greedy(S, fk, space, 1.0) if greedy else resampling._search(S, fk, space, worst=True)
    return fk(S + unit[:, 0])[0, 0]


def test_greedy_search_finds_the_least_favourable_unit_when_there_are_too_many(monkeypatch):
    """Beyond CANDIDATE_LIMIT units the pseudo-unit is built greedily; on spaces small enough to
    try every unit it finds the same worst value (multisets: alpha; tuples: Conger's kappa)."""
    rng = np.random.default_rng(4)
    for trial in range(5):
        codes = simulate_codes(rng, 60, 4, 5, alpha=0.6, missing=0.15)
        stat = _Alpha(name="krippendorff_alpha", delta=level_delta("nominal", np.arange(5)))
        assert _worst(stat, codes, 5, True) == pytest.approx(_worst(stat, codes, 5, False), abs=1e-9), trial
        codes = simulate_codes(rng, 60, 3, 4, alpha=0.6)
        stat = _Conger(name="conger_kappa", ordered=True, m=3, V=4)
        assert _worst(stat, codes, 4, True) == pytest.approx(_worst(stat, codes, 4, False), abs=1e-4), trial
    monkeypatch.setattr(resampling, "CANDIDATE_LIMIT", 10)
    r = agree.krippendorff_alpha(as_float(codes), n_resamples=200, seed=1)
    assert any(w.code == "pseudo-unit-greedy" for w in r.warnings)


@pytest.mark.parametrize("f,coders,kw", [
    (agree.krippendorff_alpha, 3, {}), (agree.krippendorff_alpha, 3, {"level": "ordinal"}),
    (agree.cohen_kappa, 2, {}), (agree.fleiss_kappa, 3, {}), (agree.gwet_ac1, 3, {}),
    (agree.conger_kappa, 3, {}), (agree.percent_agreement, 4, {}), (agree.brennan_prediger, 3, {}),
])
def test_bound_below_estimate_inside_interval_and_repeatable(f, coders, kw):
    rng = np.random.default_rng(8)
    for trial in range(4):
        codes = as_float(simulate_codes(rng, 50, coders, 4, alpha=0.75, missing=0.0 if coders == 2 else 0.05))
        r = f(codes, n_resamples=1000, seed=trial, minimum=0.6, **kw)
        assert r.ci_low <= r.lower_bound <= r.estimate <= r.ci_high, (f.__name__, trial)
        again = f(codes, n_resamples=1000, seed=trial, minimum=0.6, **kw)
        assert (again.lower_bound, again.ci_low, again.ci_high, again.p_value_min) == \
            (r.lower_bound, r.ci_low, r.ci_high, r.p_value_min)
        other = f(codes, n_resamples=1000, seed=trial + 100, minimum=0.6, **kw)
        assert other.lower_bound != r.lower_bound


def test_sets_of_codes_get_a_pseudo_unit_among_the_sets():
    sets = [[{"x"}, {"x", "y"}], [set(), set()], [{"y"}, {"y"}], [{"x"}, None], [{"x", "y"}, {"y"}],
            [set(), {"x"}], [{"y"}, {"x"}], [{"x"}, {"x"}], [{"z"}, {"z"}]] * 4
    r = agree.krippendorff_alpha(sets, n_resamples=500, seed=1)
    assert r.ci_method == "pseudo-unit" and r.level == "masi"
    assert r.ci_low <= r.lower_bound <= r.estimate <= r.ci_high
    assert len(r.details["pseudo_unit"]) == 2


def test_clusters_get_a_pseudo_cluster_of_the_mean_size():
    rng = np.random.default_rng(6)
    codes = as_float(simulate_codes(rng, 90, 2, 3, alpha=0.7))
    labels = np.repeat([f"g{i}" for i in range(30)], 3)
    r = agree.krippendorff_alpha(codes, n_resamples=500, seed=1, cluster=labels)
    assert r.bootstrap.unit == "cluster" and r.details["pseudo_cluster_units"] == 3.0
    units = agree.krippendorff_alpha(codes, n_resamples=500, seed=1)
    assert r.lower_bound < units.lower_bound     # whole groups and a group-sized pseudo-unit: wider


def test_without_resampling_the_p_value_is_the_analytic_tail():
    codes = _agreeing(60, 6)
    k = agree.cohen_kappa(codes, n_resamples=0, minimum=0.7)
    z = stats.norm.ppf(0.95)
    assert k.ci_method == "wald"
    assert k.lower_bound == pytest.approx(k.estimate - z * k.se)
    assert k.p_value_min == pytest.approx(stats.norm.cdf((0.7 - k.estimate) / k.se))
    p = agree.percent_agreement(codes, n_resamples=0, minimum=0.8)
    assert p.ci_method == "wilson"
    # the score test the Wilson bound inverts: p < .05 exactly when the bound is above the minimum
    assert p.p_value_min == pytest.approx(stats.norm.sf((0.9 - 0.8) / np.sqrt(0.8 * 0.2 / 60)))
    assert (p.lower_bound > 0.8) is (p.p_value_min < 0.05)
