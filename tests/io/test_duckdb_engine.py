"""The DuckDB reduction: the same data and the same checks as the ordinary reader, from CSV,
TSV and Parquet files and globs of them; errors name how many rows and the first (file, row)."""

from __future__ import annotations

import pandas as pd
import pytest

import agree
from agree.core.model import AgreeError
from agree.io.duckdb_engine import choose_engine, read_duckdb
from tests.io.logs import long_log, same_scores


def write(frame: pd.DataFrame, path, fmt: str) -> None:
    if fmt == "parquet":
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False, sep="\t" if fmt == "tsv" else ",")


@pytest.mark.parametrize("fmt", ["parquet", "csv", "tsv"])
def test_files_and_globs_read_as_the_ordinary_reader_reads_them(tmp_path, fmt):
    log = long_log(3, units=240)
    parts = [log.iloc[:300], log.iloc[300:500], log.iloc[500:]]
    paths = [tmp_path / f"part-{i}.{fmt}" for i in range(3)]
    for part, path in zip(parts, paths):
        write(part, path, fmt)
    ordinary = agree.read(paths, keep=("queue",))
    for source in (paths, str(tmp_path / f"part-*.{fmt}")):
        reduced = read_duckdb(source, cluster="queue")
        assert reduced.coders == ordinary.coders and reduced.values == ordinary.values
        assert reduced.units_represented == ordinary.n_units
        assert (reduced.report.values_read, reduced.report.values_missing) == (ordinary.report.values_read,
                                                                               ordinary.report.values_missing)
        same_scores(agree.score(ordinary, n_resamples=100, seed=2, cluster="queue"),
                    agree.score(reduced, n_resamples=100, seed=2, cluster="queue"))
        assert f"{len(log):,} rows in 3 files" in reduced.report.detected


def test_many_coders_split_the_key_into_chunks(tmp_path):
    # 30 coders x 4 codes: base 5, 26 coders per 62-bit key, so two keys per unit
    log = long_log(8, units=150, coders=30, missing=0.6)
    path = tmp_path / "log.parquet"
    log.to_parquet(path, index=False)
    ordinary, reduced = agree.read(path, keep=("queue",)), read_duckdb(path, cluster="queue")
    assert reduced.coders == ordinary.coders and len(reduced.coders) == 30
    same_scores(agree.score(ordinary, n_resamples=50, seed=1), agree.score(reduced, n_resamples=50, seed=1))


def test_codebook_level_and_several_codes_per_cell(tmp_path):
    log = long_log(5, units=120)
    path = tmp_path / "log.parquet"
    log.to_parquet(path, index=False)
    book = ["low", "medium", "high", "urgent"]
    ordinary, reduced = agree.read(path, codebook=book, level="ordinal"), read_duckdb(path, codebook=book,
                                                                                      level="ordinal")
    assert reduced.values == ordinary.values and reduced.level == "ordinal"
    same_scores(agree.score(ordinary, n_resamples=50, seed=1), agree.score(reduced, n_resamples=50, seed=1))
    multi = log.copy()
    multi.loc[[0, 7], "label"] = "low;high"
    multi.to_csv(tmp_path / "multi.csv", index=False)
    reduced = read_duckdb(tmp_path / "multi.csv")
    assert reduced.set_valued and frozenset({"low", "high"}) in reduced.values
    same_scores(agree.score(agree.read(tmp_path / "multi.csv"), n_resamples=50, seed=1),
                agree.score(reduced, n_resamples=50, seed=1))


@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_duplicates_unknown_codes_and_missing_names_are_refused_like_the_ordinary_reader(tmp_path, fmt):
    log = long_log(1, units=60)
    twice = pd.concat([log.iloc[:10], log.iloc[[4]], log.iloc[10:]], ignore_index=True)  # row 12 repeats row 6
    path = tmp_path / f"twice.{fmt}"
    write(twice, path, fmt)
    with pytest.raises(AgreeError) as dup:
        read_duckdb(path)
    with pytest.raises(AgreeError) as ref:
        agree.read(path)
    assert dup.value.code == ref.value.code == "duplicate-coding"
    assert dup.value.problems[0].message == ref.value.problems[0].message if ref.value.problems else \
        dup.value.message.endswith(ref.value.message)
    assert "(rows 6, 12)" in dup.value.message and dup.value.where == f"{path}, row 6, column 'label'"

    unknown = log.copy()
    unknown.loc[[20, 30, 31], "label"] = "critical"
    write(unknown, path, fmt)
    with pytest.raises(AgreeError) as err:
        read_duckdb(path, codebook=["low", "medium", "high", "urgent"])
    assert err.value.code == "unknown-code"
    assert err.value.message == "code 'critical' is not in the codebook (and 2 more cells)"
    assert err.value.where == f"{path}, row 22, column 'label'"

    nameless = log.copy()
    nameless.loc[[8, 9], "annotator"] = None
    write(nameless, path, fmt)
    with pytest.raises(AgreeError) as err:
        read_duckdb(path)
    assert err.value.code == "missing-coder" and err.value.message.startswith("2 row(s) have no coder name")
    assert err.value.where == f"{path}, row 10, column 'annotator'"
    nameless = log.copy()
    nameless.loc[[3], "ticket"] = None
    write(nameless, path, fmt)
    with pytest.raises(AgreeError) as err:
        read_duckdb(path)
    assert err.value.code == "missing-unit-id" and err.value.where == f"{path}, row 5, column 'ticket'"


def test_progress_is_reported_and_engine_auto_follows_the_size(tmp_path, monkeypatch):
    path = tmp_path / "log.parquet"
    long_log(2, units=200).to_parquet(path, index=False)
    steps = []
    read_duckdb(path, progress=lambda step, done: steps.append((step, done)))
    assert steps[0][1] == 0.0 and steps[-1] == ("reducing to pattern counts", 1.0)
    assert [d for _, d in steps] == sorted(d for _, d in steps)
    assert choose_engine([path]) == "pandas" and choose_engine([path], rows=100) == "duckdb"
    monkeypatch.setenv("AGREE_DUCKDB_ROWS", "100")
    assert choose_engine([path]) == "duckdb" and choose_engine([path], layout="wide") == "pandas"
    assert choose_engine([str(tmp_path / "*.parquet")], rows=10 ** 9) == "duckdb"
    assert choose_engine([path], "pandas") == "pandas"
    with pytest.raises(AgreeError, match="no file matches"):
        read_duckdb(tmp_path / "nothing-*.parquet")
    with pytest.raises(AgreeError, match="not-long|no coder column") as err:
        pd.DataFrame({"unit": [1, 2], "ann": ["a", "b"], "bob": ["a", "a"]}).to_csv(tmp_path / "w.csv", index=False)
        read_duckdb(tmp_path / "w.csv")
    assert err.value.code == "not-long"
