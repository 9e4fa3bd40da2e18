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
