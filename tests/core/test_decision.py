"""The one rule for deciding against a minimum (a bound reaches it when strictly above it) and the
sentence that states a decision and what it rests on.

External checks: the rule is a definition, tested as such at the tie in every output that decides
(the decision sentence, `score`'s decision, the report's band, the per-code status, the forest
plot's marker); the sentences are compared with text written out by hand.
"""

from __future__ import annotations

import numpy as np
import pytest

import agree
from agree.analysis.diagnostics import diagnose_codes
from agree.core.format import bound_method, decision_sentence
from agree.core.results import AgreementResult, BootstrapInfo, reaches_minimum
from agree.output.report.text import krippendorff_band


def _result(estimate, lower=None, ci_low=None, level=0.95, **kw):
    return AgreementResult(name="krippendorff_alpha", estimate=estimate, lower_bound=lower,
                           ci_low=ci_low, confidence_level=level, **kw)


def test_reaches_minimum_is_strictly_above():
    assert reaches_minimum(0.81, 0.8) is True
    assert reaches_minimum(0.8, 0.8) is False
    assert reaches_minimum(0.79, 0.8) is False
    assert reaches_minimum(None, 0.8) is None and reaches_minimum(float("nan"), 0.8) is None


def test_decision_sentence_clears():
    text = decision_sentence(_result(0.84, lower=0.81), 0.8, 0.95)
    assert text == "alpha = .840; the one-sided 95% lower bound .810 clears the minimum .800"   # three decimals


def test_decision_sentence_does_not_clear():
    text = decision_sentence(_result(0.84, lower=0.77), 0.8, 0.95)
    assert text == "alpha = .840; the one-sided 95% lower bound .770 does not clear the minimum .800"


def test_decision_sentence_shows_digits_that_decide():
    text = decision_sentence(_result(0.84, lower=0.8003), 0.8, 0.95)
    assert "lower bound .8003 clears the minimum .8000" in text
    text = decision_sentence(_result(0.84, lower=0.7996), 0.8, 0.95)
    assert "does not clear" in text and ".7996" in text


def test_decision_sentence_at_the_tie_does_not_clear():
    text = decision_sentence(_result(0.84, lower=0.8), 0.8, 0.95)
    assert text == ("alpha = .840; the one-sided 95% lower bound .800 equals the minimum .800, so it does "
                    "not clear it")


def test_decision_sentence_two_sided_fallback_and_undefined():
    text = decision_sentence(_result(0.9, ci_low=0.85, level=0.9), 0.8)
    assert "the lower end of the two-sided 90% interval .850 clears the minimum .800" in text
    assert "undefined" in decision_sentence(_result(float("nan")), 0.8)
    assert "no confidence bound" in decision_sentence(_result(0.9), 0.8)
    neg = decision_sentence(_result(-0.12, lower=-0.3), 0.667, 0.95)
    assert neg.startswith("alpha = \u2212.120;") and ".667" in neg      # the minus sign, as everywhere


def test_decision_sentence_says_what_the_bound_rests_on():
    boot = BootstrapInfo(replicates=2000, seed=1, method="pseudo-unit")
    none = _result(1.0, lower=0.72, ci_method="pseudo-unit", bootstrap=boot, n_units=20,
                   details={"disagreeing_units": 0})
    assert decision_sentence(none, 0.8) == (
        "alpha = 1.000: no disagreement among the 20 units; with so few units the one-sided 95% lower bound "
        ".720 (Bayesian bootstrap with a least-favourable pseudo-unit, 2,000 draws) does not clear the "
        "minimum .800")
    many = _result(1.0, lower=0.97, ci_method="pseudo-unit", bootstrap=boot, n_units=200,
                   details={"disagreeing_units": 0})
    assert decision_sentence(many, 0.8).startswith("alpha = 1.000: no disagreement among the 200 units; the "
                                                   "one-sided 95% lower bound .970 (")
    few = _result(0.95, lower=0.83, ci_method="pseudo-unit", bootstrap=boot, n_units=60,
                  details={"disagreeing_units": 3})
    assert decision_sentence(few, 0.8).endswith("clears the minimum .800; with only 3 of 60 units disagreeing, "
                                                "the bound rests mainly on how many units disagree")
    clustered = BootstrapInfo(replicates=1000, seed=1, method="bca", unit="cluster:interview")
    assert bound_method(_result(0.9, ci_method="bca", bootstrap=clustered)) == \
        "BCa bootstrap, 1,000 resamples of whole interview groups"
    assert bound_method(_result(0.9, ci_method="t")) == "t approximation from the analytic SE, no resampling"


@pytest.fixture(scope="module")
def coded():
    rng = np.random.default_rng(5)
    truth = rng.integers(0, 3, 80)
    other = np.where(rng.random(80) < 0.85, truth, rng.integers(0, 3, 80))
    return np.column_stack([truth, other]).astype(float)


def test_every_output_agrees_at_the_tie(coded):
    """With the minimum set exactly at the bound (the draws do not depend on the minimum, so the
    same seed gives the same bound), the score's decision, the sentence and the report's band all
    say it is not reached."""
    first = agree.score(coded, minimum=0.5, n_resamples=400, seed=3)
    bound = first.coefficients["krippendorff_alpha"].lower_bound
    tie = agree.score(coded, minimum=bound, n_resamples=400, seed=3)
    alpha = tie.coefficients["krippendorff_alpha"]
    assert alpha.lower_bound == bound
    decision = tie.decision()
    assert decision["clears_minimum"] is False
    assert "so it does not clear it" in decision["sentence"]
    assert alpha.p_value_min >= 0.05
    assert krippendorff_band(alpha.estimate, alpha.lower_bound, bound) == "estimate-only"


def test_per_code_status_at_the_tie(coded):
    first = diagnose_codes(coded, minimum=0.3, n_resamples=400, seed=3)
    row = first.per_code.iloc[0]
    tie = diagnose_codes(coded, minimum=float(row.lower_bound), n_resamples=400, seed=3)
    again = tie.per_code.iloc[0]
    assert again.lower_bound == row.lower_bound
    assert again.status == "uncertain"
