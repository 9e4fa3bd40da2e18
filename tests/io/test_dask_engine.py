"""The Dask reduction's own checks (run with Dask's synchronous scheduler; the run on a local
cluster of two workers is in test_engines.py): duplicates and codes without coder or unit are
refused, and coders come in order of first appearance across partitions."""

from __future__ import annotations

import pytest

from agree.core.model import AgreeError
from agree.io.counts import read_counts
from tests.io.logs import long_log

dd = pytest.importorskip("dask.dataframe")
dask = pytest.importorskip("dask")

COLUMNS = dict(unit="ticket", coder="annotator", code="label")


def reduce(frame, **kw):
    from agree.io.dask_engine import pattern_counts_dask

    with dask.config.set(scheduler="synchronous"):
        return pattern_counts_dask(dd.from_pandas(frame, npartitions=4), **COLUMNS, **kw)


def test_counts_and_coder_order():
    log = long_log(6, units=120)
    table = reduce(log)
    assert list(table.columns[:3]) == list(dict.fromkeys(log["annotator"]))
    assert int(table["count"].sum()) == log["ticket"].nunique()
    assert read_counts(table).units_represented == log["ticket"].nunique()
    many = reduce(log, coders=["annotator_b", "annotator_a", "annotator_c"])
    assert list(many.columns[:3]) == ["annotator_b", "annotator_a", "annotator_c"]


def test_duplicates_and_rows_without_coder_are_refused():
    log = long_log(6, units=60)
    import pandas as pd

    twice = pd.concat([log, log.iloc[[3, 8]]], ignore_index=True)
    with pytest.raises(AgreeError, match="2 unit\\(s\\) are coded more than once") as err:
        reduce(twice)
    assert err.value.code == "duplicate-coding"
    nameless = log.copy()
    nameless.loc[5, "annotator"] = None
    with pytest.raises(AgreeError, match="1 row\\(s\\) have a code but no coder"):
        reduce(nameless)
    with pytest.raises(AgreeError, match="no cluster column"):
        reduce(log, cluster="nothing")
