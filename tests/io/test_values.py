"""Codes as read: text kept exactly, numbers by value where a number is meant, non-finite and
overflowing numbers refused naming the cell; unit ids and codebook entries that differ only in
spaces or case. Synthetic data."""

from __future__ import annotations

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from agree.core.model import AgreeError, from_table
from agree.io.readers import read


def _csv(tmp_path, text, name="c.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def _cells(data):
    return {u: tuple(None if c < 0 else data.values[c] for c in row) for u, row in zip(data.unit_ids, data.codes)}


def test_text_of_a_code_is_kept_as_read(tmp_path):
    data = read(_csv(tmp_path, "unit,ann,bo\nu1,+1,1.50\nu2,007,+1\nu3,1e300,1e300\n"))
    assert _cells(data) == {"u1": ("+1", "1.50"), "u2": ("007", "+1"), "u3": ("1e300", "1e300")}
    # a plain number of equal value makes them one code; 2 and 2.0 are one code as before
    data = read(_csv(tmp_path, "unit,ann,bo\nu1,7,007\nu2,2.0,2\nu3,1.5,1.50\n"))
    assert _cells(data) == {"u1": (7, 7), "u2": (2, 2), "u3": (1.5, 1.5)}
    # at a numeric level every spelling is its number
    data = read(_csv(tmp_path, "unit,ann,bo\nu1,+1,1.50\nu2,007,2\n"), level="interval")
    assert _cells(data) == {"u1": (1, 1.5), "u2": (7, 2)}


def test_a_codebook_spelling_is_the_code(tmp_path):
    book = _csv(tmp_path, "code\n007\n008\n", "book.csv")
    data = read(_csv(tmp_path, "unit,ann,bo\nu1,007,008\nu2,007,007\n"), codebook=book)
    assert data.values == ("007", "008")
    numeric = _csv(tmp_path, "code\n01\n2.0\n03\n", "scale.csv")
    data = read(_csv(tmp_path, "unit,ann,bo\nu1,1,2\nu2,3,3.0\n"), codebook=numeric, level="interval")
    assert data.values == (1, 2, 3)
    assert read(_csv(tmp_path, "unit,ann,bo\nu1,01,2\nu2,03,03\n"), codebook=numeric).values == ("01", 2, "03")


@pytest.mark.parametrize("cells, shown", [("1e309", "'1e309'"), ("-1e999", "'-1e999'")])
def test_overflowing_text_numbers_are_refused_naming_the_cell(tmp_path, cells, shown):
    path = _csv(tmp_path, f"unit,ann,bo\nu1,1,2\nu2,2,{cells}\n")
    for level in (None, "interval"):
        with pytest.raises(AgreeError) as err:
            read(path, level=level)
        assert err.value.code == "non-finite" and f"{shown} is not a finite number" in str(err.value)
        assert "c.csv, row 3, column 'bo'" in str(err.value)


def test_numeric_infinity_is_refused_as_from_table_refuses_it(tmp_path):
    path = tmp_path / "inf.parquet"
    pq.write_table(pa.table({"unit": ["u1", "u2"], "ann": [float("inf"), 2.0], "bo": [1.0, 2.0]}), path)
    with pytest.raises(AgreeError) as err:
        read(path)
    assert err.value.code == "non-finite" and "inf.parquet, row 2, column 'ann'" in str(err.value)
    with pytest.raises(AgreeError) as err2:
        from_table([[float("inf"), 1.0], [2.0, 2.0]])
    assert err2.value.code == err.value.code
    # the text 'inf' is a text code: an error at the interval level, a code of its own at the nominal
    text = _csv(tmp_path, "unit,ann,bo\nu1,inf,1\nu2,2,2\n")
    assert "inf" in read(text).values
    with pytest.raises(AgreeError) as err:
        read(text, level="interval")
    assert "text at interval level: 'inf'" in str(err.value)


def test_huge_numbers_at_the_interval_level(tmp_path):
    path = _csv(tmp_path, "unit,ann,bo\nu1,1e300,1\nu2,2,2\n")
    with pytest.raises(AgreeError) as err:
        read(path, level="interval")
    assert "'1e300' is too large for the interval metric" in str(err.value) and "row 2, column 'ann'" in str(err.value)
    assert read(path, level="ordinal").values[-1] == 1e300      # a float, never a 301-digit integer


def test_unit_ids_that_differ_only_in_spaces_are_named(tmp_path):
    path = _csv(tmp_path, "unit,ann,bo\nu1,A,A\nu1 ,B,A\nu2,B,B\n")
    data = read(path)
    assert len(data.unit_ids) == 3
    warning = [n for n in data.report.notes if "unit id" in n]
    assert warning and warning[0].startswith("warning: 1 unit id differs only in spaces") and "--trim" in warning[0]
    with pytest.raises(AgreeError) as err:        # merged with --trim: then the unit is coded twice
        read(path, trim=True)
    assert err.value.code == "duplicate-unit"


def test_casefold_refuses_a_codebook_with_two_entries_that_differ_only_in_case(tmp_path):
    book = _csv(tmp_path, "code\nPraise\npraise\nblame\n", "book.csv")
    path = _csv(tmp_path, "unit,ann,bo\nu1,praise,PRAISE\nu2,blame,blame\n")
    with pytest.raises(AgreeError) as err:
        read(path, codebook=book, casefold=True)
    assert "'Praise' and 'praise'" in str(err.value) and "book.csv" in str(err.value)
