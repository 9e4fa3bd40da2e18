"""Unit multiplicities (`CodingData.weights`): a row of weight w is w identical units.

External check: the identity itself. Every coefficient of `score` (and the coincidence matrix,
Fleiss' per-category kappas, PABAK's indices) computed on weighted rows must equal the same
coefficient on the table expanded with ``np.repeat`` (synthetic data). For the unit bootstrap the
patterns and their counts are the same, so the same seed gives the same replicates; with clusters the
per-cluster sums are made from the same (cluster, pattern) counts, so the replicates are identical too.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

import agree
from agree.core.model import AgreeError, CodingData
from agree.stats import coefficients as coef
from agree.stats.patterns import compress
from tests.conftest import as_float, as_labels, simulate_codes

BOOT = 150
FIELDS = ("estimate", "se", "ci_low", "ci_high", "lower_bound", "p_value_min", "n_units", "n_values", "z",
          "p_value")


def weighted_and_expanded(d: CodingData, rng, *, clusters: int = 0) -> tuple[CodingData, CodingData]:
    """`d` with random weights 1..6 (and a random cluster column), and the same data expanded."""
    w = rng.integers(1, 7, size=d.n_units)
    columns = {"group": rng.integers(0, clusters, size=d.n_units).astype(str)} if clusters else {}
    weighted = replace(d, weights=w, columns=columns)
    expanded = replace(d, codes=np.repeat(d.codes, w, axis=0), unit_ids=np.repeat(d.unit_ids, w),
                       columns={k: np.repeat(v, w) for k, v in columns.items()}, weights=None)
    return weighted, expanded


def same_result(a, b):
    for f in FIELDS:
        x, y = getattr(a, f), getattr(b, f)
        if x is None or y is None:
            assert x is None and y is None, f
        else:
            assert x == pytest.approx(y, rel=1e-12, abs=1e-12, nan_ok=True), f


def designs(rng):
    two = agree.from_table(as_labels(simulate_codes(rng, 30, 2, 3, alpha=0.5, missing=0.1), ["a", "b", "c"]))
    three = agree.from_table(as_labels(simulate_codes(rng, 30, 3, 3, alpha=0.5, missing=0.1), ["a", "b", "c"]))
    ordinal = agree.from_table(as_float(simulate_codes(rng, 30, 2, 4, alpha=0.5, missing=0.1), [1, 2, 3, 4]),
                               level="ordinal")
    binary = agree.from_table(as_float(simulate_codes(rng, 30, 2, 2, alpha=0.4), [0, 1]))
    sets = [[{"x"}, {"x", "y"}], [set(), set()], [{"y"}, {"y"}], [{"x"}, None], [{"x", "y"}, {"y"}],
            [set(), {"x"}], [{"y"}, {"x"}]] * 3
    return {"two": two, "three": three, "ordinal": ordinal, "binary": binary, "sets": agree.from_table(sets)}


@pytest.mark.parametrize("design", ["two", "three", "ordinal", "sets"])
@pytest.mark.parametrize("clusters", [0, 6])
def test_score_on_weighted_rows_equals_score_on_expanded_rows(design, clusters):
    rng = np.random.default_rng(11)
    d = designs(rng)[design]
    weighted, expanded = weighted_and_expanded(d, rng, clusters=clusters)
    cluster = "group" if clusters else None
    a = agree.score(weighted, n_resamples=BOOT, seed=5, cluster=cluster, minimum=0.5)
    b = agree.score(expanded, n_resamples=BOOT, seed=5, cluster=cluster, minimum=0.5)
    assert list(a.coefficients) == list(b.coefficients) and len(a.coefficients) >= 2
    for name in a.coefficients:
        same_result(a.coefficients[name], b.coefficients[name])
        np.testing.assert_array_equal(a.coefficients[name].replicates, b.coefficients[name].replicates)
    for f in ("units_read", "units_used", "values_read", "values_missing", "values_used"):
        assert getattr(a, f) == getattr(b, f), f
    assert a.units_read == weighted.units_represented == expanded.n_units


@pytest.mark.parametrize("design", ["two", "three", "ordinal"])
def test_analytic_standard_errors_equal_on_expanded_rows(design):
    rng = np.random.default_rng(3)
    weighted, expanded = weighted_and_expanded(designs(rng)[design], rng)
    a = agree.score(weighted, n_resamples=0)
    b = agree.score(expanded, n_resamples=0)
    for name in a.coefficients:
        same_result(a.coefficients[name], b.coefficients[name])
        da, db = a.coefficients[name].details, b.coefficients[name].details
        assert da.keys() == db.keys()
        for key, value in da.items():
            if isinstance(value, float):
                assert value == pytest.approx(db[key], nan_ok=True), (name, key)


def test_pabak_fleiss_per_category_and_coincidences_use_the_weights():
    rng = np.random.default_rng(8)
    ds = designs(rng)
    weighted, expanded = weighted_and_expanded(ds["binary"], rng)
    a, b = coef.pabak(weighted, n_resamples=0), coef.pabak(expanded, n_resamples=0)
    assert a.estimate == pytest.approx(b.estimate)
    for key in ("prevalence_index", "bias_index"):
        assert a.details[key] == pytest.approx(b.details[key])
    three_w, three_e = weighted_and_expanded(ds["three"].subset((ds["three"].codes >= 0).all(axis=1)), rng)
    fa, fb = coef.fleiss_kappa(three_w, n_resamples=0), coef.fleiss_kappa(three_e, n_resamples=0)
    pa, pb = fa.details["per_category"], fb.details["per_category"]
    assert pa.keys() == pb.keys()
    for k in pa:
        assert pa[k] == pytest.approx(pb[k]), k
    assert fa.se == pytest.approx(fb.se) and fa.z == pytest.approx(fb.z)
    np.testing.assert_allclose(coef.coincidence_matrix(three_w).to_numpy(),
                               coef.coincidence_matrix(three_e).to_numpy())


def test_compress_sums_weights_into_pattern_counts():
    rng = np.random.default_rng(1)
    codes = simulate_codes(rng, 200, 3, 3, missing=0.2)
    w = rng.integers(1, 9, size=200)
    for ordered in (True, False):
        a = compress(codes, 3, ordered=ordered, weights=w, keep_inverse=True)
        b = compress(np.repeat(codes, w, axis=0), 3, ordered=ordered)
        np.testing.assert_array_equal(a.codes, b.codes)
        np.testing.assert_array_equal(a.counts, b.counts)
        assert a.counts.sum() == w.sum() and len(a.inverse) == 200


def test_subset_keeps_the_weights_and_validation_refuses_bad_weights():
    d = agree.from_table([["a", "b"], ["a", "a"], ["b", "b"]])
    w = replace(d, weights=[2, 1, 5])
    assert w.units_represented == 8 and w.subset(np.array([True, False, True])).weights.tolist() == [2, 5]
    assert w.presence("a").weights.tolist() == [2, 1, 5]
    for bad in ([1, 2], [1, 0, 2], [1.5, 1, 1], ["x", "y", "z"]):
        with pytest.raises(AgreeError):
            replace(d, weights=bad)


def test_diagnostics_expand_small_weighted_data_and_refuse_huge():
    from agree.analysis.diagnostics import diagnose_codes, diagnose_coders

    d = replace(agree.from_table([["a", "b"], ["a", "a"], ["b", "b"]] * 5), weights=np.arange(1, 16))
    expanded = replace(d, codes=np.repeat(d.codes, d.weights, axis=0), unit_ids=np.repeat(d.unit_ids, d.weights),
                       weights=None)
    a = diagnose_codes(d, n_resamples=0).to_frame()
    b = diagnose_codes(expanded, n_resamples=0).to_frame()
    pd.testing.assert_frame_equal(a, b)
    assert diagnose_coders(d, n_resamples=0).to_frame().equals(diagnose_coders(expanded, n_resamples=0).to_frame())
    huge = replace(d, weights=np.full(15, 100_000))
    with pytest.raises(AgreeError) as err:
        diagnose_codes(huge)
    assert err.value.code == "weighted" and "1,500,000 units" in str(err.value)


def test_functions_that_need_one_row_per_unit_refuse_weighted_data(tmp_path):
    from agree.output.reconciliation import review_table, write_review
    from agree.output.report import build_report

    d = replace(agree.from_table([["a", "b"], ["a", "a"], ["b", "b"]] * 5), weights=np.arange(1, 16))
    for call in (lambda: review_table(d), lambda: write_review(d, tmp_path / "r.xlsx"), lambda: build_report(d)):
        with pytest.raises(AgreeError) as err:
            call()
        assert err.value.code == "weighted" and "one row per unit" in str(err.value)
