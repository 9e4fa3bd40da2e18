"""One data set, four ways in: the ordinary (pandas) reader, the DuckDB reduction, the Dask
reduction and a counts table written by the warehouse SQL give the same coefficients and, with
the same seed, the same bootstrap intervals (unit and cluster bootstrap): every coefficient
depends on the data only through the pattern counts (`agree.stats.patterns`)."""

from __future__ import annotations

import duckdb
import pytest

import agree
from agree.io.counts import read_counts
from agree.io.duckdb_engine import read_duckdb
from agree.io.sql import pattern_count_sql
from tests.io.logs import long_log, same_scores


@pytest.mark.parametrize("coders", [2, 3])
def test_pandas_duckdb_dask_and_counts_table_score_the_same(tmp_path, coders):
    dd = pytest.importorskip("dask.dataframe")
    distributed = pytest.importorskip("distributed")
    log = long_log(7, units=300, coders=coders)
    path = tmp_path / "log.parquet"
    log.to_parquet(path, index=False)
    pandas_data = agree.read(path, keep=("queue",))
    duck_data = read_duckdb(path, cluster="queue")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster):
        table = agree.pattern_counts_dask(dd.from_pandas(log, npartitions=3), unit="ticket", coder="annotator",
                                          code="label", cluster="queue")
    dask_data = read_counts(table, cluster="queue")
    con = duckdb.connect()
    con.register("log", log)
    sql = pattern_count_sql("log", unit="ticket", coder="annotator", code="label", cluster="queue",
                            coders=list(pandas_data.coders))
    sql_data = read_counts(con.execute(sql).df(), cluster="queue")
    assert duck_data.coders == pandas_data.coders == dask_data.coders == sql_data.coders
    for cluster in (None, "queue"):
        reference = agree.score(pandas_data, n_resamples=300, seed=11, cluster=cluster, minimum=0.5)
        assert "cohen_kappa" in reference.coefficients or coders != 2
        for other in (duck_data, dask_data, sql_data):
            same_scores(reference, agree.score(other, n_resamples=300, seed=11, cluster=cluster, minimum=0.5))
