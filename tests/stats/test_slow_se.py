"""Standard errors, paired differences and clustered tests checked by simulation (slow).

The checks of bench/se_checks.py at 1,000 data sets each, with fixed seeds; the bounds allow
about three Monte Carlo errors. The full figures (2,000 data sets) are in DEVELOPERS.md,
"Standard errors checked by simulation". Run with `make test-slow`.
"""

from __future__ import annotations

import pytest

from bench.se_checks import check_conger, check_gwet, check_kappa_null, check_mcnemar, check_rounds

pytestmark = pytest.mark.slow
R = 1000


def _value(text: str) -> float:
    return float(text.split("±")[0])


def test_gwet_se_centred_at_pa_covers_and_the_handbook_form_overstates():
    out = check_gwet(R, seed=7)
    for name, res in out.items():
        sd = _value(res["sd"])
        assert abs(float(res["mean_se_pa"]) / sd - 1) < 0.10, name
        assert float(res["mean_se_pe_handbook"]) / sd > 1.12, name
        assert abs(_value(res["coverage_pa"]) - 0.95) < 0.025, name
        assert _value(res["coverage_pe_handbook"]) > 0.965, name


def test_conger_se_with_missing_values_matches_the_simulated_sd():
    res = check_conger(R, seed=8)
    assert abs(float(res["mean_se"]) / _value(res["sd"]) - 1) < 0.10
    assert abs(_value(res["coverage"]) - 0.95) < 0.025


def test_paired_difference_of_recoded_rounds_covers_and_is_narrower():
    res = check_rounds(R // 2, seed=9)
    assert abs(_value(res["coverage_paired"]) - 0.95) < 0.035
    assert _value(res["coverage_independent"]) > 0.965
    assert float(res["mean_width_paired"]) < 0.9 * float(res["mean_width_independent"])


def test_clustered_mcnemar_holds_its_level_where_mcnemar_does_not():
    res = check_mcnemar(R, seed=10)
    assert _value(res["rejection_clustered_mcnemar"]) < 0.05 + 0.02
    assert _value(res["rejection_mcnemar"]) > 0.10


def test_unclustered_kappa_test_rejects_too_often_on_clustered_units():
    res = check_kappa_null(R, seed=11)
    assert _value(res["rejection_unclustered_z"]) > 0.10
