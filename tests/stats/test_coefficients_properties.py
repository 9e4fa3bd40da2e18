"""Properties of the agreement coefficients (hypothesis): invariances, bounds and edge cases
from METHODS.md sections 0, 2-5 and 12."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import agree
from agree.core.model import from_table
from tests.conftest import as_float, as_labels, simulate_codes

PROPERTY = settings(max_examples=50, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
TOL = 1e-10
LEVELS = ("nominal", "ordinal", "interval", "ratio")

# coefficient name -> (function, extra keyword arguments); which ones need exactly 2 coders
MANY_CODERS = {
    "percent_agreement": (agree.percent_agreement, {}),
    "fleiss_kappa": (agree.fleiss_kappa, {}),
    "gwet_ac1": (agree.gwet_ac1, {}),
    "brennan_prediger": (agree.brennan_prediger, {}),
    **{f"alpha_{lv}": (agree.krippendorff_alpha, {"level": lv}) for lv in LEVELS},
}
COMPLETE_ONLY = {"conger_kappa": (agree.conger_kappa, {})}
TWO_CODERS = {
    "cohen_kappa": (agree.cohen_kappa, {}),
    "cohen_kappa_linear": (agree.cohen_kappa, {"weights": "linear"}),
    "cohen_kappa_quadratic": (agree.cohen_kappa, {"weights": "quadratic"}),
    "scott_pi": (agree.scott_pi, {}),
}


@st.composite
def codings(draw, *, coders=(2, 5), categories=(2, 5), units=(5, 60), missing=True):
    """A random units x coders code matrix (ints 0..q-1, -1 missing) from the METHODS 8.2
    model, with random agreement, prevalence and coder bias."""
    m = draw(st.integers(*coders))
    q = draw(st.integers(*categories))
    n = draw(st.integers(*units))
    seed = draw(st.integers(0, 2**32 - 1))
    rate = draw(st.sampled_from([0.0, 0.2])) if missing else 0.0
    rng = np.random.default_rng(seed)
    alpha = draw(st.floats(0.0, 1.0))
    codes = simulate_codes(rng, n, m, q, alpha=alpha, missing=rate,
                           prevalence=rng.dirichlet(np.ones(q)), coder_bias=0.3)
    return codes, q, seed


def _same(a: float, b: float, tol: float = TOL) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= tol * max(1.0, abs(a))


def _estimates(x, table, categories=None):
    """Every coefficient of `table` on one data set (read once, like a user's file)."""
    data = from_table(x, categories=categories)
    return {name: f(data, n_resamples=0, **extra).estimate for name, (f, extra) in table.items()}


def _registry(codes):
    table = dict(MANY_CODERS)
    if (codes >= 0).all():
        table.update(COMPLETE_ONLY)
    if codes.shape[1] == 2:
        table.update(TWO_CODERS)
    return table


# --------------------------------------------------------------------------------------------
# Invariances
# --------------------------------------------------------------------------------------------

@PROPERTY
@given(codings(), st.integers(0, 2**32 - 1))
def test_invariant_to_unit_order(coding, perm_seed):
    codes, q, _ = coding
    order = np.random.default_rng(perm_seed).permutation(len(codes))
    cats = list(range(q))
    table = _registry(codes)
    before = _estimates(as_float(codes), table, categories=cats)
    after = _estimates(as_float(codes[order]), table, categories=cats)
    for name in table:
        assert _same(before[name], after[name]), name


@PROPERTY
@given(codings(coders=(2, 5)), st.integers(0, 2**32 - 1))
def test_invariant_to_coder_order(coding, perm_seed):
    codes, q, _ = coding
    order = np.random.default_rng(perm_seed).permutation(codes.shape[1])
    cats = list(range(q))
    before = _estimates(as_float(codes), MANY_CODERS, categories=cats)
    after = _estimates(as_float(codes[:, order]), MANY_CODERS, categories=cats)
    for name in MANY_CODERS:
        assert _same(before[name], after[name]), name


@PROPERTY
@given(codings(coders=(2, 2)))
def test_two_coder_kappas_symmetric_in_coders(coding):
    """Swapping the two coders transposes the table: kappa and pi do not change."""
    codes, q, _ = coding
    cats = list(range(q))
    before = _estimates(as_float(codes), TWO_CODERS, categories=cats)
    after = _estimates(as_float(codes[:, ::-1]), TWO_CODERS, categories=cats)
    for name in TWO_CODERS:
        assert _same(before[name], after[name]), name


@PROPERTY
@given(codings(), st.integers(0, 2**32 - 1))
def test_nominal_coefficients_invariant_to_relabelling(coding, perm_seed):
    codes, q, _ = coding
    relabel = np.random.default_rng(perm_seed).permutation(q)
    names = [f"code {chr(ord('p') + k)}" for k in range(q)]
    new_codes = np.where(codes >= 0, relabel[np.maximum(codes, 0)], -1)
    nominal = {k: v for k, v in _registry(codes).items()
               if k not in ("cohen_kappa_linear", "cohen_kappa_quadratic",
                            "alpha_ordinal", "alpha_interval", "alpha_ratio")}
    before = _estimates(as_float(codes), nominal, categories=list(range(q)))
    after = _estimates(as_labels(new_codes, names), nominal, categories=names)
    for name in nominal:
        assert _same(before[name], after[name]), name


@PROPERTY
@given(codings(), st.integers(1, 3))
def test_unused_category_changes_only_q_dependent_coefficients(coding, extra):
    """An unused codebook category leaves kappa, pi and alpha unchanged but changes AC1 and
    Brennan-Prediger, whose chance term depends on q (METHODS 0, 5.1, 12). Appended at the end
    of the scale it also leaves weighted kappa unchanged (the weights only rescale: kappa_w
    is invariant to scaling the disagreement weights)."""
    codes, q, _ = coding
    x = as_float(codes)
    small, large = list(range(q)), list(range(q + extra))
    invariant = {k: v for k, v in _registry(codes).items()
                 if k not in ("gwet_ac1", "brennan_prediger")}
    before = _estimates(x, invariant, categories=small)
    after = _estimates(x, invariant, categories=large)
    for name in invariant:
        assert _same(before[name], after[name]), name
    for f in (agree.gwet_ac1, agree.brennan_prediger):
        r_small = f(x, categories=small, n_resamples=0)
        r_large = f(x, categories=large, n_resamples=0)
        assert r_small.n_categories == q and r_large.n_categories == q + extra
        p_o = agree.percent_agreement(x, n_resamples=0).estimate
        if r_small.defined and p_o < 1 - 1e-12:
            assert not _same(r_small.estimate, r_large.estimate, 1e-12), f.__name__


@PROPERTY
@given(codings())
def test_alpha_unused_categories_at_scale_ends_no_effect_ordinal(coding):
    """Ordinal alpha: unused categories have n_g = 0 and contribute nothing (METHODS 4.3),
    wherever they sit in the scale."""
    codes, q, _ = coding
    x = as_float(codes, values=np.arange(1, 2 * q, 2))  # used: 1, 3, 5, ...
    plain = agree.krippendorff_alpha(x, level="ordinal", n_resamples=0).estimate
    spread = agree.krippendorff_alpha(x, level="ordinal", categories=list(range(0, 2 * q + 1)),
                                      n_resamples=0).estimate
    assert _same(plain, spread)


# --------------------------------------------------------------------------------------------
# Bounds, perfect agreement and undefined cases
# --------------------------------------------------------------------------------------------

@PROPERTY
@given(codings())
def test_bounds(coding):
    codes, q, _ = coding
    x = as_float(codes)
    cats = list(range(q))
    est = _estimates(x, _registry(codes), categories=cats)
    assert 0.0 <= est["percent_agreement"] <= 1.0 or math.isnan(est["percent_agreement"])
    # chance terms bounded by 1/2 (AC1, B-P) or complete-case two-coder tables (kappa) keep
    # the lower bound -1; Fleiss with missing data and alpha have data-dependent lower bounds
    at_least_minus_one = {"gwet_ac1", "brennan_prediger", "cohen_kappa", "cohen_kappa_linear",
                          "cohen_kappa_quadratic"}
    if (codes >= 0).all():
        at_least_minus_one |= {"fleiss_kappa", "scott_pi", "conger_kappa"}
    for name, value in est.items():
        if not math.isnan(value):
            assert value <= 1.0 + 1e-12, name
            if name in at_least_minus_one:
                assert value >= -1.0 - 1e-12, name


@PROPERTY
@given(st.integers(2, 6), st.integers(2, 6), st.integers(4, 60), st.integers(0, 2**32 - 1),
       st.booleans())
def test_perfect_agreement_gives_one(m, q, n, seed, with_missing):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, q, size=n)
    truth[:2] = [0, 1]  # at least two categories used: the coefficients are defined
    codes = np.repeat(truth[:, None], m, axis=1)
    if with_missing:
        drop = rng.random(codes.shape) < 0.3
        drop[:2] = False
        codes[drop] = -1
    x = as_float(codes)
    table = _registry(codes)
    for name, value in _estimates(x, table, categories=list(range(q))).items():
        assert value == pytest.approx(1.0, abs=1e-12), name


@pytest.mark.parametrize("m", (2, 3))
@pytest.mark.parametrize("with_missing", (False, True))
def test_no_variation_is_undefined_with_warning(m, with_missing):
    """Every value identical: p_e = 1 / D_e = 0, so kappa, pi and alpha are NaN with a
    warning that has a code (METHODS 0, 4.6). AC1 stays defined (= 1) but warns."""
    codes = np.zeros((20, m), dtype=int)
    if with_missing:
        codes[::4, 0] = -1
    x = as_float(codes)
    undefined = {k: v for k, v in _registry(codes).items()
                 if k not in ("percent_agreement", "gwet_ac1", "brennan_prediger")}
    for name, (f, extra) in undefined.items():
        result = f(x, categories=[0, 1], n_resamples=0, **extra)
        assert math.isnan(result.estimate), name
        assert not result.defined
        assert result.warnings, f"{name}: NaN without a warning"
        assert all(w.code for w in result.warnings)
        assert result.to_dict()["estimate"] is None
    ac1 = agree.gwet_ac1(x, categories=[0, 1], n_resamples=0)
    assert ac1.estimate == pytest.approx(1.0)
    assert ac1.warnings, "AC1 on data without variation should warn"
    assert agree.percent_agreement(x, n_resamples=0).estimate == 1.0


nan = float("nan")


def test_single_coder_units_only_is_undefined():
    """No pairable unit: undefined, with a warning (METHODS 0)."""
    x = np.array([[0, nan], [nan, 1], [1, nan], [nan, 0]])
    for f in (agree.krippendorff_alpha, agree.fleiss_kappa, agree.percent_agreement):
        result = f(x, n_resamples=0)
        assert math.isnan(result.estimate), f.__name__
        assert result.warnings


# --------------------------------------------------------------------------------------------
# Bootstrap reproducibility
# --------------------------------------------------------------------------------------------

@settings(max_examples=15, deadline=None)
@given(codings(units=(15, 60)), st.integers(0, 2**31 - 1))
def test_bootstrap_repeats_with_seed(coding, seed):
    codes, q, _ = coding
    x = as_float(codes)
    one = agree.krippendorff_alpha(x, n_resamples=200, seed=seed)
    two = agree.krippendorff_alpha(x, n_resamples=200, seed=seed)
    other = agree.krippendorff_alpha(x, n_resamples=200, seed=seed + 1)
    assert one.to_dict() == two.to_dict()
    # an undefined alpha (all pairable values alike) has no interval, so no bootstrap record
    assert not one.defined or (one.bootstrap is not None and one.bootstrap.seed == seed)
    if one.defined and one.ci_high is not None and one.ci_high - one.ci_low > 1e-9:
        assert (one.ci_low, one.ci_high, one.se) != (other.ci_low, other.ci_high, other.se)


@settings(max_examples=20, deadline=None)
@given(codings(units=(5, 30)))
def test_results_serialise_to_strict_json(coding):
    """to_dict() is JSON-safe (NaN -> None) for every coefficient, with or without bootstrap."""
    codes, q, _ = coding
    data = from_table(as_float(codes), categories=list(range(q + 1)))  # one unused category
    for name, (f, extra) in _registry(codes).items():
        for n_resamples in (0, 30):
            result = f(data, n_resamples=n_resamples, seed=1, minimum=0.5, **extra)
            text = json.dumps(result.to_dict(), allow_nan=False)
            assert json.loads(text)["name"] == result.name, name


# --------------------------------------------------------------------------------------------
# Refusals: AgreeError with a stable code, never a silent number
# --------------------------------------------------------------------------------------------

TEXT = np.array([["a", "b"], ["b", "b"], ["a", "c"]], dtype=object)
BAD_CALLS = {
    "one coder": (agree.krippendorff_alpha, np.array([[1.0], [2.0]]), {}),
    "interval on text": (agree.krippendorff_alpha, TEXT, {"level": "interval"}),
    "unknown level": (agree.krippendorff_alpha, TEXT, {"level": "circular-ish"}),
    "ratio with negative values": (agree.krippendorff_alpha, np.array([[-1.0, 2.0], [3.0, 3.0]]),
                                   {"level": "ratio"}),
    "pabak on three categories": (agree.pabak, TEXT, {}),
    "weights of wrong shape": (agree.cohen_kappa, TEXT, {"weights": np.eye(2)}),
    "weights off the diagonal": (agree.cohen_kappa, TEXT, {"weights": 2 * np.eye(3)}),
    "unknown weights": (agree.cohen_kappa, TEXT, {"weights": "cubic"}),
    "value outside categories": (agree.fleiss_kappa, TEXT, {"categories": ["a", "b"]}),
    "confidence level above 1": (agree.fleiss_kappa, TEXT, {"confidence_level": 95}),
    "single category": (agree.gwet_ac1, np.array([["a", "a"], ["a", "a"]], dtype=object), {}),
}


@pytest.mark.parametrize("case", list(BAD_CALLS))
def test_bad_requests_raise_agree_error_with_code(case):
    f, data, kw = BAD_CALLS[case]
    with pytest.raises(agree.AgreeError) as info:
        f(data, n_resamples=0, **kw)
    assert info.value.code and info.value.code != "bad-input", case
    assert info.value.message
