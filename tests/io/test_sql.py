"""The warehouse query, run in DuckDB: both layouts give the counts of the patterns in the log,
and its check columns carry the reader's refusals (a unit coded twice by a coder, codes without a
coder or a unit) to `read_counts`."""

from __future__ import annotations

import duckdb
import pytest

import agree
from agree.core.model import AgreeError
from agree.io.counts import read_counts
from agree.io.sql import pattern_count_sql
from tests.io.logs import long_log, same_scores

COLUMNS = dict(unit="ticket", coder="annotator", code="label")


def run(sql: str, frame):
    con = duckdb.connect()
    con.register("log", frame)
    return con.execute(sql).df()


def test_multiset_query_gives_the_coefficients_that_ignore_coder_identity():
    log = long_log(9, units=250, coders=4)
    table = run(pattern_count_sql("log", **COLUMNS, cluster="queue"), log)
    assert list(table.columns) == ["values", "queue", "count", "duplicate_rows", "rows_without_coder",
                                   "rows_without_unit"]
    data = read_counts(table, cluster="queue")
    reference = agree.score(_ordinary(log), n_resamples=100, seed=3, cluster="queue")
    result = agree.score(data, n_resamples=100, seed=3, cluster="queue")
    assert set(result.skipped) >= {"conger_kappa"}
    for name, r in result.coefficients.items():
        ref = reference.coefficients[name]
        assert (r.estimate, r.ci_low, r.ci_high) == pytest.approx((ref.estimate, ref.ci_low, ref.ci_high))


def _ordinary(log):
    import tempfile
    from pathlib import Path

    path = Path(tempfile.mkdtemp()) / "log.parquet"
    log.to_parquet(path, index=False)
    return agree.read(path, keep=("queue",))


def test_coder_columns_query_equals_the_ordinary_reader(tmp_path):
    log = long_log(2, units=200)
    path = tmp_path / "log.parquet"
    log.to_parquet(path, index=False)
    ordinary = agree.read(path)
    table = run(pattern_count_sql("log", **COLUMNS, coders=list(ordinary.coders)), log)
    same_scores(agree.score(ordinary, n_resamples=100, seed=1), agree.score(read_counts(table), n_resamples=100,
                                                                            seed=1))


def test_check_columns_carry_the_refusals():
    log = long_log(1, units=50)
    twice = log.iloc[[0, 0, 1, 2]].reset_index(drop=True)
    for sql in (pattern_count_sql("log", **COLUMNS), pattern_count_sql("log", **COLUMNS, coders=["annotator_a"])):
        table = run(sql, twice)
        assert int(table["duplicate_rows"].sum()) == 1
        with pytest.raises(AgreeError, match="1 rows coded a unit a second time") as err:
            read_counts(table)
        assert err.value.code == "duplicate-coding" and "column 'duplicate_rows'" in err.value.where
    no_coder = log.copy()
    no_coder.loc[3, "annotator"] = None
    with pytest.raises(AgreeError, match="1 rows have a code but no coder"):
        read_counts(run(pattern_count_sql("log", **COLUMNS), no_coder))
    no_unit = log.copy()
    no_unit.loc[[4, 5], "ticket"] = None
    with pytest.raises(AgreeError, match="2 rows have a code but no unit id"):
        read_counts(run(pattern_count_sql("log", **COLUMNS), no_unit))


def test_identifiers_and_names_are_quoted():
    sql = pattern_count_sql("db.log", unit='my "unit"', coder="coder", code="code", coders=["o'neil", "b"],
                            quote="`")
    assert "`my \"unit\"`" in sql and "'o''neil'" in sql and "FROM db.log" in sql
    with pytest.raises(AgreeError):
        pattern_count_sql("log", unit="u", coder="c", code="v", coders=["a", "a"])
