"""Drawing the reliability sample (agree.analysis.sampling); the workbooks are in tests/output/test_sheets.py.

All corpora here are synthetic: invented unit ids, invented answers and invented groups.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from agree.analysis.sampling import (
    draw_sample,
    largest_remainder_allocation,
    load_codebook_categories,
    read_corpus,
    read_unit_ids,
)
from agree.core.model import AgreeError
from agree.io.codebook import read_codebook
from tests.io.test_lists import FORMATS
from tests.io.test_lists import codebook as lists_codebook
from tests.io.test_lists import write as write_table

CODES = ["praise", "complaint", "question"]


def make_corpus(n=240, seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "unit_id": [f"u{i:04d}" for i in range(n)],
        "text": [f"synthetic answer number {i} about the invented service" for i in range(n)],
        "participant": rng.choice(["p1", "p2", "p3", "p4", "p5"], size=n, p=[0.4, 0.25, 0.2, 0.1, 0.05]),
    })


# -- allocation and draws ------------------------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(st.lists(st.integers(1, 60), min_size=1, max_size=12), st.data())
def test_largest_remainder_is_within_one_unit(sizes, data):
    total = sum(sizes)
    n = data.draw(st.integers(1, total))
    alloc = largest_remainder_allocation(sizes, n)
    quota = n * np.array(sizes) / total
    assert alloc.sum() == n
    assert np.all(np.abs(alloc - quota) < 1)
    assert np.all(alloc <= np.array(sizes))


def test_stratified_draw_keeps_every_share_within_one_unit():
    corpus = make_corpus()
    sample = draw_sample(corpus, 50, stratify="participant", seed=3)
    sizes = corpus["participant"].value_counts()
    drawn = sample["participant"].value_counts()
    for group, size in sizes.items():
        assert abs(drawn.get(group, 0) - 50 * size / len(corpus)) < 1
    assert sample.attrs["allocation"] == {g: int(drawn.get(g, 0)) for g in sample.attrs["allocation"]}


def test_draw_is_reproducible_without_duplicates():
    corpus = make_corpus()
    a = draw_sample(corpus, 60, seed=11)
    b = draw_sample(corpus, 60, seed=11)
    c = draw_sample(corpus, 60, seed=12)
    pd.testing.assert_frame_equal(a, b)
    assert a["unit_id"].is_unique and len(a) == 60
    assert list(a["unit_id"]) != list(c["unit_id"])
    assert list(a["draw_order"]) == list(range(1, 61))
    # corpus_row points back at the row of the sheet (header = row 1)
    for uid, row in zip(a["unit_id"], a["corpus_row"]):
        assert corpus["unit_id"].iloc[row - 2] == uid
    assert a.attrs["seed"] == 11 and a.attrs["corpus_size"] == len(corpus)


def test_whole_corpus_can_be_drawn():
    corpus = make_corpus(30)
    sample = draw_sample(corpus, 30, stratify="participant", seed=1)
    assert set(sample["unit_id"]) == set(corpus["unit_id"])


def test_seed_is_recorded_when_not_given():
    corpus = make_corpus()
    a = draw_sample(corpus, 20)
    b = draw_sample(corpus, 20, seed=a.attrs["seed"])
    assert list(a["unit_id"]) == list(b["unit_id"])


def test_duplicate_and_blank_ids_are_errors_with_rows():
    corpus = make_corpus(10)
    corpus.loc[4, "unit_id"] = "u0001"
    corpus.loc[7, "unit_id"] = "u0002"
    corpus.loc[8, "unit_id"] = ""
    with pytest.raises(AgreeError) as err:
        draw_sample(corpus, 3, seed=1)
    codes = [p.code for p in err.value.problems]
    assert codes.count("duplicate-unit-id") == 2 and "blank-unit-id" in codes
    assert "row 6" in err.value.problems[0].where          # 0-based 4 -> spreadsheet row 6


def test_numeric_ids_one_and_one_point_zero_are_the_same():
    corpus = pd.DataFrame({"id": [1, 2, 1.0], "text": ["a", "b", "c"]})
    with pytest.raises(AgreeError) as err:
        draw_sample(corpus, 1, seed=1)
    assert err.value.code == "duplicate-unit-id"


@pytest.mark.parametrize("kwargs,code", [
    (dict(n=500), "sample-too-large"),
    (dict(n=0), "sample-size"),
    (dict(n=5, stratify="nope"), "no-stratify-column"),
    (dict(n=5, id_col="nope"), "no-id-column"),
])
def test_bad_draws(kwargs, code):
    with pytest.raises(AgreeError) as err:
        draw_sample(make_corpus(), **kwargs)
    assert err.value.code == code


def test_id_column_must_be_found():
    with pytest.raises(AgreeError) as err:
        draw_sample(pd.DataFrame({"round": [1, 1, 2], "x": [1, 1, 2]}), 1)
    assert err.value.code == "no-id-column" and "--unit-col" in err.value.hint and "'round'" in err.value.hint


# -- the workbooks --------------------------------------------------------------------------------

def test_codebook_files(tmp_path):
    (tmp_path / "c.txt").write_text("praise\n\ncomplaint\n")
    assert list(load_codebook_categories(tmp_path / "c.txt")) == ["praise", "complaint"]
    pd.DataFrame({"Code": ["a", "b"], "Description": ["first", "second"]}).to_csv(tmp_path / "c.csv", index=False)
    assert load_codebook_categories(tmp_path / "c.csv") == {"a": "first", "b": "second"}


# -- leaving out units already coded ------------------------------------------------------------

def test_excluded_units_are_never_drawn_and_counted():
    corpus = make_corpus(100)
    done = [f"u{i:04d}" for i in range(0, 100, 3)] + ["not-in-corpus", " u0001 "]
    sample = draw_sample(corpus, 40, seed=3, exclude=done)
    excluded = {f"u{i:04d}" for i in range(0, 100, 3)} | {"u0001"}
    assert not set(sample["unit_id"]) & excluded
    assert sample.attrs["excluded"] == len(excluded) == 35
    assert sample.attrs["exclude_given"] == 36 and sample.attrs["exclude_not_in_corpus"] == 1
    for uid, row in zip(sample["unit_id"], sample["corpus_row"]):
        assert corpus["unit_id"].iloc[row - 2] == uid        # rows still point into the full corpus


@settings(max_examples=60, deadline=None)
@given(st.sets(st.integers(0, 119), max_size=80), st.data())
def test_stratified_draw_with_exclusions_is_proportional_over_what_is_left(done, data):
    corpus = make_corpus(120, seed=4)
    left = corpus[~corpus.index.isin(sorted(done))]
    n = data.draw(st.integers(1, len(left)))
    ids = corpus["unit_id"].iloc[sorted(done)].tolist()
    sample = draw_sample(corpus, n, stratify="participant", seed=9, exclude=ids)
    assert len(sample) == n and sample["unit_id"].is_unique and not set(sample["unit_id"]) & set(ids)
    sizes = left["participant"].value_counts()
    drawn = sample["participant"].value_counts()
    for group, size in sizes.items():
        assert abs(drawn.get(group, 0) - n * size / len(left)) < 1
    assert sample.attrs["strata_sizes"] == {g: int(sizes.get(g, 0)) for g in sample.attrs["strata_sizes"]}


def test_numeric_ids_excluded_alike():
    corpus = pd.DataFrame({"id": [1, 2, 3, 4], "text": list("abcd")})
    sample = draw_sample(corpus, 2, seed=1, exclude=[" 1 ", 2.0])   # text "1" from a CSV, 2.0 from a workbook
    assert sorted(sample["id"]) == [3, 4] and sample.attrs["excluded"] == 2


def test_too_few_units_left_after_exclusion():
    corpus = make_corpus(10)
    with pytest.raises(AgreeError) as err:
        draw_sample(corpus, 8, seed=1, exclude=corpus["unit_id"][:5])
    assert err.value.code == "sample-too-large" and "excluding 5 already coded" in err.value.message
    assert err.value.hint == "draw at most 5"


def test_read_unit_ids_from_coding_files_and_lists(tmp_path):
    # wide coding file with an excerpt_id column (as samples/round1.csv)
    (tmp_path / "r1.csv").write_text("excerpt_id,interview,ann,bo\nE1,I1,a,b\nE2,I1,a,a\n")
    # long file: one row per unit and coder, each id once
    (tmp_path / "r2.csv").write_text("unit,coder,code\nE3,ann,a\nE3,bo,b\nE4,ann,a\n")
    # workbook with one sheet per coder
    with pd.ExcelWriter(tmp_path / "r3.xlsx") as xl:
        pd.DataFrame({"unit_id": ["E5", 6], "code": ["a", "b"]}).to_excel(xl, sheet_name="ann", index=False)
        pd.DataFrame({"unit_id": ["E5", 7.0], "code": ["a", "b"]}).to_excel(xl, sheet_name="bo", index=False)
    (tmp_path / "done.txt").write_text("# coded in the pilot\nE8\n\n E9 \n")
    ids = read_unit_ids([tmp_path / "r1.csv", tmp_path / "r2.csv", tmp_path / "r3.xlsx", tmp_path / "done.txt"])
    assert ids == ("E1", "E2", "E3", "E4", "E5", "6", "7", "E8", "E9")
    (tmp_path / "odd.csv").write_text("key,code\nE1,a\n")
    assert read_unit_ids(tmp_path / "odd.csv", id_col="key") == ("E1",)
    with pytest.raises(AgreeError) as err:
        read_unit_ids(tmp_path / "odd.csv")
    assert err.value.code == "no-id-column" and "odd.csv" in err.value.message


def test_bundled_rounds_are_excluded_from_the_next_sample():
    from pathlib import Path

    samples = Path(__file__).resolve().parents[2] / "samples"
    corpus = read_corpus(samples / "corpus.csv")
    done = read_unit_ids([samples / "round1.csv", samples / "round2.csv"])
    rounds = set(pd.read_csv(samples / "round1.csv")["excerpt_id"]) | set(pd.read_csv(samples / "round2.csv")["excerpt_id"])
    assert set(done) == rounds
    sample = draw_sample(corpus, 200, stratify="interview", seed=1, exclude=done)
    assert not set(sample["unit_id"]) & rounds
    assert sample.attrs["excluded"] == len(rounds) and sample.attrs["exclude_not_in_corpus"] == 0


# -- the codebook: read by the one codebook reader, in every format -------------------------------
@pytest.mark.parametrize("fmt", FORMATS)
def test_codebook_categories_in_every_format(tmp_path, fmt):
    # before: this reader failed on Windows-1252 and UTF-16 CSV files with an internal error, and
    # refused Parquet files and unknown suffixes
    frame = lists_codebook()
    path = write_table(frame, tmp_path, fmt, stem="codebook")
    assert load_codebook_categories(path) == dict(zip(frame["code"], frame["description"]))


def test_sample_and_score_read_a_codebook_alike(tmp_path):
    # before: the sample command's reader ignored the order column and merged repeated codes
    path = tmp_path / "scale.csv"
    pd.DataFrame({"label": ["high", "low", "mid"], "rank": [3, 1, 2]}).to_csv(path, index=False)
    assert list(load_codebook_categories(path)) == [str(c) for c in read_codebook(path).categories] \
        == ["low", "mid", "high"]
    path.write_text("code\npraise\npraise\n")
    with pytest.raises(AgreeError) as err:
        load_codebook_categories(path)
    assert err.value.code == "bad-codebook" and "row 3" in str(err.value)


# -- reading a stratified draw back: units, not strata, are resampled (slow simulation) -------------
def _stratified_coverage(alphas, sizes, *, n=120, draws=300, n_resamples=500, seed=11):
    """Coverage and mean width of the 95% percentile interval of nominal alpha over repeated
    proportional stratified draws from one synthetic corpus that two coders coded in full
    (the corpus alpha is the target): resampling units, and resampling the strata as clusters."""
    from dataclasses import replace

    import agree
    from agree.core.model import from_table
    from tests.conftest import simulate_codes

    rng = np.random.default_rng(seed)
    blocks = [simulate_codes(rng, size, 2, 4, alpha=a, prevalence=(0.4, 0.3, 0.2, 0.1))
              for a, size in zip(alphas, sizes)]
    codes = np.vstack(blocks).astype(float)
    strata = np.repeat([f"s{i}" for i in range(len(sizes))], sizes)
    corpus = pd.DataFrame({"unit_id": [f"u{i}" for i in range(len(codes))], "stratum": strata})
    corpus.attrs["checksum"] = "synthetic"
    target = agree.krippendorff_alpha(codes, n_resamples=0).estimate
    hits = {"units": 0, "strata": 0}
    widths: dict[str, list[float]] = {"units": [], "strata": []}
    for r in range(draws):
        rows = draw_sample(corpus, n, stratify="stratum", seed=r)["corpus_row"].to_numpy() - 2
        data = replace(from_table(codes[rows], coders=["a", "b"]), columns={"stratum": strata[rows]})
        for kind, cluster in (("units", None), ("strata", "stratum")):
            res = agree.krippendorff_alpha(data, n_resamples=n_resamples, seed=r, cluster=cluster,
                                           ci_method="percentile")
            hits[kind] += res.ci_low <= target <= res.ci_high
            widths[kind].append(res.ci_high - res.ci_low)
    return {k: hits[k] / draws for k in hits}, {k: float(np.mean(v)) for k, v in widths.items()}


@pytest.mark.slow
def test_stratified_draw_is_read_back_resampling_units_not_strata():
    """Backs the note `agree sample --stratify` prints (and its read-back command, which has no
    --cluster): after a proportional stratified draw the unit bootstrap keeps its 95% coverage,
    while resampling the strata as clusters gives too narrow intervals (three similar strata)
    or far too wide ones (strata of very different agreement). 300 draws each: the Monte
    Carlo SE of a coverage near .95 is about .013."""
    similar, similar_width = _stratified_coverage([0.7, 0.7, 0.7], [1500, 1200, 900])
    assert 0.91 <= similar["units"] <= 0.99, similar
    assert similar["strata"] < 0.85 and similar_width["strata"] < 0.85 * similar_width["units"]
    different, different_width = _stratified_coverage([0.45, 0.6, 0.75, 0.92], [900] * 4)
    assert 0.91 <= different["units"] <= 0.99, different
    assert different_width["strata"] > 1.4 * different_width["units"]
