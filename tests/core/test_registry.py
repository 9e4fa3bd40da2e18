"""The coefficient registry against what the package computes and names (synthetic data).

Every row is computed by the function it names and nothing computes a result without a row;
`score`'s set for each design is the registry's standard set; the plain name and the report
label of a row say the same words (the label may use Greek symbols for them).
"""

from __future__ import annotations

import inspect

import numpy as np
import pytest

import agree
from agree.core.format import plain
from agree.core.model import LEVELS
from agree.core.registry import BY_NAME, COEFFICIENTS, FAMILIES, coefficient, display_name, standard_set
from agree.stats import coefficients as coef
from tests.conftest import as_float, simulate_codes

GREEK = {"α": "alpha", "κ": "kappa", "π": "pi"}


def in_words(label: str) -> str:
    """A report label as plain words: markup removed, Greek symbols spelled out."""
    words = plain(label)
    for letter, word in GREEK.items():
        words = words.replace(letter, word)
    return words
REFUSAL_CODES = {"set-valued", "two-coders", "q", "rotating", "binary", "no-coder-identity"}  # AgreeError codes of the coefficients


def binary_two_coders():
    """Two coders, a binary ordered code (1/2): data every coefficient accepts."""
    rng = np.random.default_rng(3)
    codes = simulate_codes(rng, 40, 2, 2, alpha=0.6)
    return agree.from_table(as_float(codes, [1, 2]), level="ordinal")


def exported_coefficient_functions():
    """Every function exported from `agree` that returns an `AgreementResult`."""
    out = []
    for name in agree.__all__:
        obj = getattr(agree, name)
        if inspect.isfunction(obj) and inspect.signature(obj).return_annotation in ("AgreementResult",
                                                                                   agree.AgreementResult):
            out.append(name)
    return sorted(out)


@pytest.mark.parametrize("row", COEFFICIENTS, ids=lambda r: r.name)
def test_every_row_is_computed_by_its_function(row):
    if row.module != "agree.stats.coefficients":   # coded spans: computed from SpanData
        import importlib

        from agree.core.spans import SpanData

        spans = SpanData(documents=("d",), texts=(None,), lengths=[20], coders=("a", "b"), codes=("x",),
                         parents=[-1], doc=[0, 0], coder=[0, 1], code=[0, 0], start=[2, 3], end=[9, 9],
                         coded=[[True, True]])
        results = getattr(importlib.import_module(row.module), row.function)(spans, n_resamples=0)
        assert {r.name for r in results.values()} == {row.name}
        return
    d = binary_two_coders()
    kw = row.kwargs
    if row.name == "weighted_kappa_custom":       # custom weights: any q x q agreement-weight matrix
        kw = {"weights": [[1.0, 0.5], [0.5, 1.0]]}
    result = getattr(coef, row.function)(d, n_resamples=0, **kw)
    assert result.name == row.name
    assert getattr(agree, row.function) is getattr(coef, row.function)   # exported


@pytest.mark.parametrize("function", exported_coefficient_functions())
def test_every_exported_coefficient_has_a_row_for_each_result_it_gives(function):
    assert any(row.function == function for row in COEFFICIENTS), function
    fn = getattr(agree, function)
    d = binary_two_coders()
    options = [{}]
    if "weights" in inspect.signature(fn).parameters:
        options += [{"weights": "linear"}, {"weights": "quadratic"}, {"weights": np.eye(2)}]
    for kw in options:
        name = fn(d, n_resamples=0, **kw).name
        assert name in BY_NAME, (function, kw, name)
        assert BY_NAME[name].function == function


def test_exported_coefficients_are_the_ones_expected():
    # guards the discovery above: a coefficient exported without its return annotation would slip by
    assert exported_coefficient_functions() == sorted({
        "percent_agreement", "cohen_kappa", "scott_pi", "fleiss_kappa", "conger_kappa", "brennan_prediger",
        "gwet_ac1", "pabak", "krippendorff_alpha"})


@pytest.mark.parametrize("row", COEFFICIENTS, ids=lambda r: r.name)
def test_every_row_is_complete(row):
    assert row.references and all(r.strip() for r in row.references)
    assert all(any(ch.isdigit() for ch in r) for r in row.references)      # a year in every citation
    assert row.family in FAMILIES
    assert row.display and row.label and row.designs and row.markup_symbol and row.sentence_name
    assert row.refuses <= REFUSAL_CODES
    assert row.standard == bool(row.levels)
    assert set(row.levels) <= set(LEVELS)
    assert row.score_options == () or set(row.score_options) <= {"level", "distance"}


@pytest.mark.parametrize("row", COEFFICIENTS, ids=lambda r: r.name)
def test_plain_name_and_report_label_say_the_same_words(row):
    assert in_words(row.label) == row.display
    assert display_name(row.name) == row.display
    assert coefficient(row.name) is row


def test_names_are_unique_and_unknown_names_fall_back():
    assert len({row.name for row in COEFFICIENTS}) == len(COEFFICIENTS)
    assert len({row.display for row in COEFFICIENTS}) == len(COEFFICIENTS)
    assert coefficient("kappa family") is None and display_name("kappa family") == "kappa family"


def test_families_follow_the_conventions():
    # Landis-Koch bands are customary for the kappa family (Landis & Koch 1977); AC1/AC2,
    # Brennan-Prediger and PABAK run high on skewed codes (Gwet 2008; Byrt et al. 1993)
    families = {row.name: row.family for row in COEFFICIENTS}
    assert {k for k, v in families.items() if v == "high-running"} == {"gwet_ac1", "gwet_ac2", "brennan_prediger",
                                                                       "pabak"}
    assert families["krippendorff_alpha"] == "alpha" and families["percent_agreement"] == "percent"
    assert {k for k, v in families.items() if v == "kappa-type"} == {
        "cohen_kappa", "weighted_kappa_linear", "weighted_kappa_quadratic", "weighted_kappa_custom", "scott_pi",
        "fleiss_kappa", "conger_kappa"}


# -- score's set, per design ------------------------------------------------------------------

NOMINAL = {"percent_agreement", "scott_pi", "fleiss_kappa", "conger_kappa", "brennan_prediger", "gwet_ac1",
           "krippendorff_alpha"}


def design(kind):
    rng = np.random.default_rng(11)
    if kind == "sets":
        units = [[{"a"}, {"a", "b"}], [{"b"}, {"b"}], [{"a", "c"}, {"c"}], [{"a"}, {"b"}], [{"c"}, {"c"}]] * 8
        return agree.from_table(units), "nominal"
    m = 3 if kind.startswith("3") else 2
    level = "ordinal" if "ordinal" in kind else "nominal"
    codes = simulate_codes(rng, 60, m, 4, alpha=0.6, missing=0.05)
    return agree.from_table(as_float(codes, [1, 2, 3, 4]), level=level), level


@pytest.mark.parametrize("kind, computed, skipped", [
    ("2 nominal", NOMINAL | {"cohen_kappa"}, set()),
    ("3 nominal", NOMINAL, {"cohen_kappa"}),
    ("2 ordinal", NOMINAL | {"cohen_kappa", "weighted_kappa_linear", "weighted_kappa_quadratic", "gwet_ac2"}, set()),
    ("3 ordinal", NOMINAL | {"gwet_ac2"}, {"cohen_kappa", "weighted_kappa_linear", "weighted_kappa_quadratic"}),
    ("sets", {"percent_agreement", "krippendorff_alpha"}, {"kappa family"}),
])
def test_score_computes_the_registry_standard_set(kind, computed, skipped):
    d, level = design(kind)
    r = agree.score(d, n_resamples=0, seed=1)
    rows = standard_set(level, set_valued=d.set_valued)
    assert set(r.coefficients) == computed
    assert set(r.skipped) == skipped
    # every standard row for the design is either computed or skipped with its refusal
    assert set(r.coefficients) | (set(r.skipped) - {"kappa family"}) == {row.name for row in rows}
    assert list(r.coefficients) == [row.name for row in rows if row.name in r.coefficients]   # registry order
    for name in set(r.skipped) - {"kappa family"}:
        assert "two coders" in r.skipped[name]


def test_score_reports_progress_over_the_planned_rows():
    d, level = design("2 ordinal")
    seen = []
    agree.score(d, n_resamples=0, seed=1, progress=lambda name, done: seen.append((name, done)))
    rows = standard_set(level)
    assert [name for name, _ in seen] == [row.name for row in rows]
    assert all(0 <= done < 1 for _, done in seen) and seen[0][1] == 0
