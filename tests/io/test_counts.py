"""Counts tables: a pattern-count table read as weighted CodingData scores exactly as the units it
counts (identity: a row of count w is w identical units), in both layouts, from every format; bad
counts, unknown codes and check columns are refused naming file, row and column."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import agree
from agree.core.model import AgreeError, from_table
from agree.io.counts import pattern_count_table, read_counts
from tests.io.logs import same_scores

# synthetic: three coders sorting customer e-mails into topics; counts per (thread, pattern)
COUNTS = pd.DataFrame({
    "ana": ["bill", "bill", "ship", "ship", None, "bill", "other"],
    "ben": ["bill", "ship", "ship", "ship", "bill", "bill", "other"],
    "cyd": ["bill", "bill", "ship", None, "bill", None, "ship"],
    "thread": ["q1", "q1", "q1", "q2", "q2", "q2", "q2"],
    "count": [14, 3, 9, 4, 2, 6, 5],
})


def expanded(frame: pd.DataFrame, coders=("ana", "ben", "cyd")):
    """The units the table counts, one row each."""
    rows = frame.loc[frame.index.repeat(frame["count"])].reset_index(drop=True)
    data = from_table(rows[list(coders)], categories=["bill", "other", "ship"])
    object.__setattr__(data, "columns", {"thread": rows["thread"].to_numpy(dtype=object)})
    return data


@pytest.mark.parametrize("fmt", ["frame", "csv", "parquet", "xlsx"])
def test_coder_columns_score_as_the_units_they_count(tmp_path, fmt):
    source = COUNTS
    if fmt != "frame":
        source = tmp_path / f"counts.{fmt}"
        getattr(COUNTS, "to_excel" if fmt == "xlsx" else f"to_{fmt}")(source, index=False)
    data = read_counts(source, codebook=["bill", "other", "ship"])
    assert data.units_represented == 43 and data.coders == ("ana", "ben", "cyd")
    assert list(data.columns) == ["thread"]  # a column named like a kept column is kept, not a coder
    for cluster in (None, "thread"):
        same_scores(agree.score(expanded(COUNTS), n_resamples=200, seed=4, cluster=cluster),
                    agree.score(data, n_resamples=200, seed=4, cluster=cluster))
    rep = data.report
    assert rep.units_read == 43 and "7 rows stand for 43 units" in rep.detected
    assert rep.values_read == 43 * 3 - 12 and rep.values_missing == 12  # 4 + 2 + 6 units miss one coder


def test_multiset_layout_gives_the_coefficients_that_ignore_coder_identity(tmp_path):
    multiset = pd.DataFrame({"values": ["|".join(sorted(x for x in row if isinstance(x, str))) for row in
                                        COUNTS[["ana", "ben", "cyd"]].itertuples(index=False)],
                             "count": COUNTS["count"]})
    as_list = pd.DataFrame({"values": [v.split("|") for v in multiset["values"]], "count": COUNTS["count"]})
    as_list.to_parquet(tmp_path / "m.parquet", index=False)
    reference = agree.score(expanded(COUNTS), n_resamples=200, seed=2)
    for source in (multiset, tmp_path / "m.parquet"):
        data = read_counts(source)
        assert not data.coder_identity and data.coders == ("value 1", "value 2", "value 3")
        result = agree.score(data, n_resamples=200, seed=2)
        assert set(result.skipped) == {"cohen_kappa", "conger_kappa"}
        assert all("which coder gave which value" in result.skipped[k] for k in result.skipped)
        for name, r in result.coefficients.items():
            ref = reference.coefficients[name]
            assert (r.estimate, r.ci_low, r.ci_high) == pytest.approx((ref.estimate, ref.ci_low, ref.ci_high))
    with pytest.raises(AgreeError) as err:
        agree.cohen_kappa(read_counts(multiset.iloc[:3]))
    assert err.value.code == "no-coder-identity"


def test_pattern_count_table_round_trips():
    data = expanded(COUNTS)
    table = pattern_count_table(data)
    assert int(table["count"].sum()) == 43 and len(table) == 7
    same_scores(agree.score(data, n_resamples=100, seed=1, cluster="thread"),
                agree.score(read_counts(table, cluster="thread"), n_resamples=100, seed=1, cluster="thread"))


@pytest.mark.parametrize("value, fragment", [("2.5", "got '2.5'"), ("-1", "got '-1'"), ("", "got empty"),
                                             ("many", "got 'many'")])
def test_bad_counts_are_refused_naming_file_row_and_column(tmp_path, value, fragment):
    frame = COUNTS.astype({"count": object})
    frame.loc[2, "count"] = value
    path = tmp_path / "counts.csv"
    frame.to_csv(path, index=False)
    with pytest.raises(AgreeError) as err:
        read_counts(path)
    assert err.value.code == "bad-count" and fragment in err.value.message
    assert err.value.where == f"{path}, row 4, column 'count'"


def test_zero_counts_are_left_out_and_reported():
    frame = COUNTS.copy()
    frame.loc[0, "count"] = 0
    data = read_counts(frame)
    assert data.units_represented == 29 and data.n_units == 6
    assert any("1 row(s) with count 0" in x for x in data.report.left_out)


def test_unknown_codes_name_the_first_cell_and_how_many_units(tmp_path):
    path = tmp_path / "counts.csv"
    COUNTS.to_csv(path, index=False)
    with pytest.raises(AgreeError) as err:
        read_counts(path, codebook=["bill", "ship"])
    assert err.value.code == "unknown-code"
    assert err.value.message == "code 'other' is not in the codebook (and 9 more cells)"  # 5 units x 2 coders
    assert err.value.where == f"{path}, row 8, column 'ana'"


def test_check_columns_unit_ids_and_missing_count_are_refused():
    bad = COUNTS.assign(duplicate_rows=[0, 0, 2, 0, 0, 0, 0])
    with pytest.raises(AgreeError, match="2 rows coded a unit a second time") as err:
        read_counts(bad)
    assert err.value.code == "duplicate-coding" and "row 2" in err.value.where
    with pytest.raises(AgreeError, match="looks like unit ids") as err:
        read_counts(COUNTS.assign(unit=range(7)))
    with pytest.raises(AgreeError, match="no count column") as err:
        read_counts(COUNTS.drop(columns="count"))
    assert err.value.code == "no-column"


def test_the_readers_warnings_on_codes(tmp_path):
    frame = pd.DataFrame({"a": ["1", "2", "NA", "Pos", " x"], "b": ["1", "2", "2", "pos", "x"], "count": [3, 4, 5, 1, 1]})
    path = tmp_path / "w.csv"
    frame.to_csv(path, index=False)
    notes = read_counts(path).report.notes
    ordinary = agree.read([path], layout="wide", coder=["a", "b"]).report.notes  # the same warnings, per cell
    assert len(notes) == len(ordinary) == 3
    assert notes[0].startswith("warning: 'NA' among numeric codes") and "(5 cells; first: " in notes[0]
    assert notes[1:] == ordinary[1:]
