"""Coverage of the bootstrap interval for alpha under a model with known population alpha.

METHODS.md 8.2: each unit's true category T ~ prevalences; each coder reports T with
probability theta and otherwise guesses from the prevalences. The population alpha (and
Scott's pi) is theta², for any number of coders, so theta = sqrt(alpha_target).

Run with `make test-slow` (excluded from `make test`).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import agree
from tests.conftest import as_float, simulate_codes

pytestmark = pytest.mark.slow


def _coverage(method, *, target=0.7, n_units=100, n_coders=3, prevalence=(0.4, 0.3, 0.2, 0.1),
              n_datasets=300, n_resamples=1000, seed=2024):
    rng = np.random.default_rng(seed)
    hits = defined = 0
    estimates = []
    for d in range(n_datasets):
        x = as_float(simulate_codes(rng, n_units, n_coders, len(prevalence), alpha=target,
                                    prevalence=prevalence))
        result = agree.krippendorff_alpha(x, n_resamples=n_resamples, seed=d, ci_method=method)
        if result.ci_low is None or not math.isfinite(result.ci_low):
            continue
        defined += 1
        estimates.append(result.estimate)
        hits += result.ci_low <= target <= result.ci_high
    return hits / defined, float(np.mean(estimates)), defined


@pytest.mark.parametrize("method", ["bca", "percentile"])
def test_alpha_bootstrap_interval_covers_population_alpha(method):
    coverage, mean_estimate, defined = _coverage(method)
    assert defined == 300
    # the simulation model is calibrated: the estimates centre on the population alpha
    assert mean_estimate == pytest.approx(0.7, abs=0.02)
    # nominal 95%; Monte Carlo SE of a proportion near 0.95 over 300 sets is about 0.013
    assert 0.90 <= coverage <= 0.99, f"{method}: coverage {coverage:.3f}"


def test_alpha_bootstrap_coverage_with_missing_values():
    rng = np.random.default_rng(99)
    hits = 0
    for d in range(300):
        x = as_float(simulate_codes(rng, 100, 3, 4, alpha=0.7, missing=0.2,
                                    prevalence=(0.4, 0.3, 0.2, 0.1)))
        result = agree.krippendorff_alpha(x, n_resamples=1000, seed=d)
        hits += result.ci_low <= 0.7 <= result.ci_high
    assert 0.90 <= hits / 300 <= 0.99


# -- the default one-sided bound holds its level where the unit bootstrap does not -------------
# The hardest cells of the grid in bench/coverage_grid.py (docs/coverage.md): few units, high
# alpha, skewed shares, two coders (where most data sets hold no or few disagreements), and one
# cell with four coders and eight categories. Each data set is scored as a user would, with the
# default method; the categories are given as a codebook gives them.

HARD_CELLS = [
    # coders, categories, shares, alpha, units
    (2, 2, (0.9, 0.1), 0.95, 20),
    (2, 2, (0.9, 0.1), 0.90, 50),
    (2, 4, (0.7, 0.1, 0.1, 0.1), 0.97, 100),
    (4, 8, (0.125,) * 8, 0.90, 50),
]


def _one_sided(n_coders, prevalence, alpha, n_units, *, n_datasets=1000, n_resamples=1000, seed=11):
    """Bounds of the default method on simulated data sets (NaN where alpha is undefined) and
    which data sets hold no disagreement."""
    rng = np.random.default_rng(seed)
    q = len(prevalence)
    bounds = np.full(n_datasets, np.nan)
    agreeing = np.zeros(n_datasets, bool)
    for d in range(n_datasets):
        codes = simulate_codes(rng, n_units, n_coders, q, alpha=alpha, prevalence=prevalence)
        agreeing[d] = bool(np.all(codes == codes[:, :1]))
        r = agree.krippendorff_alpha(as_float(codes), categories=list(range(q)), seed=d,
                                     n_resamples=n_resamples, minimum=0.8)
        if r.estimate is not None:
            bounds[d] = r.lower_bound
    return bounds, agreeing


@pytest.mark.parametrize("n_coders,q,prevalence,alpha,n_units", HARD_CELLS)
def test_default_lower_bound_holds_its_level_in_the_hardest_cells(n_coders, q, prevalence, alpha, n_units):
    bounds, _ = _one_sided(n_coders, prevalence, alpha, n_units)
    defined = np.isfinite(bounds)
    n = int(defined.sum())
    coverage = float(np.mean(bounds[defined] <= alpha))
    mc_se = math.sqrt(coverage * (1 - coverage) / n)
    assert coverage >= 0.95 - 2 * mc_se, (
        f"{n_coders} coders, shares {prevalence}, alpha {alpha}, {n_units} units: one-sided 95% coverage "
        f"{coverage:.3f} (Monte Carlo SE {mc_se:.3f}, {n} data sets)")


def test_data_sets_without_disagreement_get_a_bound_that_rests_on_their_number():
    """2 coders, equal shares, alpha .97, 20 units: most data sets hold no disagreement. The
    unit bootstrap gives them [1, 1] (coverage about 1 - P(no disagreement), about .3 here);
    the default bound stays below 1 on every such data set, and the cell keeps its level."""
    bounds, agreeing = _one_sided(2, (0.5, 0.5), 0.97, 20)
    defined = np.isfinite(bounds)
    assert agreeing.mean() > 0.5                              # the case this test is about
    assert np.all(bounds[agreeing & defined] < 1)
    n = int(defined.sum())
    coverage = float(np.mean(bounds[defined] <= 0.97))
    mc_se = math.sqrt(coverage * (1 - coverage) / n)
    assert coverage >= 0.95 - 2 * mc_se, f"coverage {coverage:.3f} (Monte Carlo SE {mc_se:.3f})"
    # and none of them is taken for reliable at .80 on 20 agreeing units
    assert not np.any(bounds[agreeing & defined] > 0.8)
