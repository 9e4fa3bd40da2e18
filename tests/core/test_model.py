"""Building CodingData from arrays and DataFrames: every kind of cell is encoded alike.

The cell rule is `normalise_value` (whole numbers are one code whatever their type, text is kept
as read, None/NaN/"" are missing, sets or lists of codes are sets); the encoder runs it on the
distinct values only, so each case below is also checked against the rule applied cell by cell.
"""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from agree.core.model import MISSING, AgreeError, from_table, normalise_value


def _cellwise(table):
    """The per-cell definition: labels per cell after `normalise_value` (sets kept as sets)."""
    cells = [[normalise_value(v) for v in row] for row in np.asarray(table, dtype=object).tolist()]
    if any(isinstance(v, frozenset) for row in cells for v in row):
        cells = [[v if v is None or isinstance(v, frozenset) else frozenset([v]) for v in row] for row in cells]
    return cells


def _decoded(data):
    lookup = list(data.values) + [None]
    return [[lookup[c] for c in row] for row in data.codes.tolist()]


@pytest.mark.parametrize("table", [
    [[1, "a"], [1.0, None], ["", True]],
    [[1, 2.5], [np.nan, 2.5], [3, 1]],
    np.array([[1, 2], [2, 3]], dtype=np.int16),
    np.array([[0.0, np.nan], [1.0, 1.0]]),
    [["x", " x"], ["X", None]],
    [[{"a", "b"}, "a"], [["b"], None], [set(), "b"]],
    [["1", 1], ["01", 1.0]],
])
def test_every_kind_of_cell_is_encoded_as_the_cell_rule_says(table):
    assert _decoded(from_table(table)) == _cellwise(table)


def test_whole_numbers_are_one_code_whatever_their_type():
    d = from_table([[1, 1.0], [np.int64(1), True]])
    assert d.values == (1,) and (d.codes == 0).all()


def test_text_that_looks_like_a_number_stays_text():
    d = from_table([["1", 1]])
    assert set(d.values) == {"1", 1}


def test_numeric_dataframes_and_nullable_columns():
    frame = pd.DataFrame({"a": pd.array([1, None, 3], dtype="Int64"), "b": [1.0, 2.0, np.nan],
                          "c": [True, False, True]})
    d = from_table(frame)
    assert d.values == (0, 1, 2, 3)
    assert d.codes.tolist() == [[1, 1, 1], [MISSING, 2, 0], [3, MISSING, 1]]
    assert d.coders == ("a", "b", "c") and d.unit_ids.tolist() == [0, 1, 2]


def test_units_are_numbered_when_the_input_names_none():
    assert from_table(np.zeros((3, 2))).unit_ids.tolist() == [1, 2, 3]
    assert from_table(pd.DataFrame({"a": [1, 2]}, index=["u1", "u2"])).unit_ids.tolist() == ["u1", "u2"]


@pytest.mark.parametrize("table", [np.array([[1.0, np.inf]]), [[1, float("-inf")]], pd.DataFrame({"a": [np.inf]})])
def test_non_finite_numbers_are_refused_naming_the_cell(table):
    with pytest.raises(AgreeError, match="is not a finite number") as err:
        from_table(table)
    assert err.value.code == "non-finite" and "coder" in str(err.value)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.one_of(st.none(), st.integers(-3, 3), st.floats(-3, 3), st.just(float("nan")),
                                   st.sampled_from(["a", "b", "", "1", "A"])), min_size=2, max_size=2),
                min_size=1, max_size=12))
def test_mixed_tables_follow_the_cell_rule(rows):
    assert _decoded(from_table(rows)) == _cellwise(rows)


# -- how a CodingData prints -------------------------------------------------------------------
def _bigger(n_units: int):
    rng = np.random.default_rng(0)
    codes = rng.integers(0, 6, size=(n_units, 3)).astype(float)
    codes[rng.random(codes.shape) < 0.05] = np.nan
    return from_table(codes, coders=["amara", "bastien", "chen"])


def test_repr_is_a_short_summary_whatever_the_size():
    """Before: printing CodingData dumped every array (about 5,000 characters for 80 units and
    growing with them). Now a few lines say units, coders, level, categories and missing cells,
    the same length for 80 units as for 200,000, as pandas and scipy objects do."""
    small, large = _bigger(80), _bigger(200_000)
    for data in (small, large):
        text = repr(data)
        assert text.startswith(f"CodingData: {data.n_units:,} units × 3 coders, level ")
        assert "array(" not in text and len(text.splitlines()) <= 10
        assert "amara, bastien, chen" in text and "6 categories" in text
        missing = int(np.sum(data.codes < 0))
        assert f"missing     {missing:,} of {data.codes.size:,} cells" in text
    assert abs(len(repr(large)) - len(repr(small))) < 30
    page = small._repr_html_()
    assert "<table" in page and "CodingData: 80 units" in page and "array(" not in page


def test_repr_says_weights_sets_and_long_lists_shortened():
    from dataclasses import replace

    weighted = replace(from_table([[1, 1], [1, 2]], coders=["a", "b"]), weights=np.array([1000, 5]))
    text = repr(weighted)
    assert "2 rows standing for 1,005 units" in text and "weights     5 to 1,000 units per row" in text
    sets = from_table([[{"x", "y"}, set()], [{"x"}, None]], coders=["a", "b"])
    assert "set-valued  several codes per cell; 1 empty set (coded, no code applied)" in repr(sets)
    many = from_table([[f"code {i}" for i in range(40)]], coders=[f"coder {i}" for i in range(40)])
    text = repr(many)
    assert "… (40 coders)" in text and "… (40 categories)" in text and len(text) < 600
