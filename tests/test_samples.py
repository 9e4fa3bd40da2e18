"""The bundled sample data: reproducible, well-formed, and carrying the structure the README
says was planted (checked against the `krippendorff` and `statsmodels` packages as references)."""

from __future__ import annotations

import importlib.util
import sys
import zipfile
from itertools import combinations
from pathlib import Path

import krippendorff
import numpy as np
import openpyxl
import pandas as pd
import pytest
from statsmodels.stats.contingency_tables import mcnemar

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
CSV_FILES = ("codebook.csv", "round1.csv", "round2.csv", "rounds_long.csv", "ratings.csv",
             "ratings_codebook.csv", "corpus.csv")
PASSAGE_TEXTS = ("T01.txt", "T02.txt", "T03.txt", "T04.txt")
ALL_FILES = CSV_FILES + ("multicode.xlsx",) + PASSAGE_TEXTS + ("passages_spans.csv", "passages.qdpx")


def _load_script():
    spec = importlib.util.spec_from_file_location("agree_make_samples", SAMPLES / "make_samples.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


ms = _load_script()


def read(name: str) -> pd.DataFrame:
    # keep_default_na=False: an empty cell is a skipped value (""), and no code is read as NaN
    return pd.read_csv(SAMPLES / name, dtype=str, keep_default_na=False, encoding="utf-8")


def codebook() -> list[str]:
    return read("codebook.csv")["code"].tolist()


def reliability_data(frame: pd.DataFrame, coders=ms.CODERS) -> np.ndarray:
    """coders x units array of codebook indices, NaN where skipped (the krippendorff layout)."""
    index = {c: float(i) for i, c in enumerate(codebook())}
    return np.array([[index.get(v, np.nan) for v in frame[c]] for c in coders])


def nominal_alpha(data: np.ndarray) -> float:
    return float(krippendorff.alpha(reliability_data=data, level_of_measurement="nominal",
                                    value_domain=list(range(len(codebook())))))


def coincidences(data: np.ndarray, q: int) -> np.ndarray:
    """Krippendorff's coincidence matrix o_ck from a coders x units array (NaN missing)."""
    observed = ~np.isnan(data)
    counts = np.zeros((data.shape[1], q))
    units, values = np.nonzero(observed.T)
    np.add.at(counts, (units, data.T[observed.T].astype(int)), 1.0)
    m_u = counts.sum(axis=1)
    keep = m_u >= 2
    c = counts[keep]
    o = (c[:, :, None] * c[:, None, :]) / (m_u[keep] - 1)[:, None, None]
    o = o.sum(axis=0)
    o[np.diag_indices(q)] -= (c / (m_u[keep] - 1)[:, None]).sum(axis=0)
    return o


# -- reproducibility --------------------------------------------------------------------------
def test_generator_is_deterministic_and_matches_committed_files(tmp_path):
    first = ms.write_samples(tmp_path / "a")
    second = ms.write_samples(tmp_path / "b")
    assert sorted(p.name for p in first) == sorted(ALL_FILES) == sorted(p.name for p in second)
    for name in CSV_FILES:
        a = (tmp_path / "a" / name).read_bytes()
        assert a == (tmp_path / "b" / name).read_bytes(), name
        assert a == (SAMPLES / name).read_bytes(), f"{name} differs: rerun samples/make_samples.py"
    # the workbook's zip container stores write times, so compare its cells
    for other in (tmp_path / "a" / "multicode.xlsx", tmp_path / "b" / "multicode.xlsx"):
        assert _workbook_cells(other) == _workbook_cells(SAMPLES / "multicode.xlsx")


def test_another_seed_gives_other_data(tmp_path):
    ms.write_samples(tmp_path, seed=ms.SEED + 1)
    assert (tmp_path / "round1.csv").read_bytes() != (SAMPLES / "round1.csv").read_bytes()


def test_script_runs_from_the_command_line(tmp_path):
    import subprocess
    done = subprocess.run([sys.executable, str(SAMPLES / "make_samples.py"), str(tmp_path)],
                          capture_output=True, text=True, check=True)
    assert done.stderr == ""
    top = set(ALL_FILES) - set(PASSAGE_TEXTS) | {"passages"}
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(top)


def _workbook_cells(path: Path) -> dict:
    wb = openpyxl.load_workbook(path)
    return {ws.title: [[(c.value, c.data_type) for c in row] for row in ws.iter_rows()]
            for ws in wb.worksheets}


# -- well-formed files --------------------------------------------------------------------------
EXPECTED_COLUMNS = {
    "codebook.csv": ["code", "description"],
    "round1.csv": ["excerpt_id", "interview", "excerpt", "amara", "bastien", "chen"],
    "round2.csv": ["excerpt_id", "interview", "excerpt", "amara", "bastien", "chen"],
    "rounds_long.csv": ["round", "excerpt_id", "coder", "code"],
    "ratings.csv": ["response_id", "answer", "amara", "bastien", "chen"],
    "ratings_codebook.csv": ["code", "order", "description"],
    "corpus.csv": ["unit_id", "interview", "participant_role", "text"],
}


@pytest.mark.parametrize("name", CSV_FILES)
def test_csv_parses_with_the_header_on_the_first_line(name):
    raw = (SAMPLES / name).read_bytes()
    text = raw.decode("utf-8")          # fails on anything that is not UTF-8
    assert not text.startswith("\ufeff")
    assert text.splitlines()[0] == ",".join(EXPECTED_COLUMNS[name])
    assert "\r" not in text
    frame = read(name)
    assert list(frame.columns) == EXPECTED_COLUMNS[name]
    assert len(frame) > 0
    first_column = frame.columns[0]
    if name != "rounds_long.csv":
        assert frame[first_column].is_unique


def test_readme_and_source_note_say_synthetic_and_quote_the_measured_alphas():
    readme = (SAMPLES / "README.md").read_text(encoding="utf-8")
    note = (SAMPLES / "SOURCE.txt").read_text(encoding="utf-8")
    for text in (readme, note):
        assert "synthetic" in text.lower() and str(ms.SEED) in text
    for number in (1, 2):
        alpha = nominal_alpha(reliability_data(read(f"round{number}.csv")))
        assert f"| `round{number}.csv` | {alpha:.3f}" in readme


def test_files_are_small():
    assert sum(p.stat().st_size for p in SAMPLES.rglob("*") if p.name in ALL_FILES) < 500_000


def test_sizes_match_the_readme():
    assert len(codebook()) == 8
    assert len(read("round1.csv")) == 120 and len(read("round2.csv")) == 150
    assert len(read("ratings.csv")) == 80 and len(read("corpus.csv")) == 600
    for name in ("round1.csv", "round2.csv"):
        assert read(name)["interview"].nunique() == 12


def test_every_code_is_in_the_codebook():
    codes = set(codebook())
    for name in ("round1.csv", "round2.csv"):
        frame = read(name)
        used = set(frame[list(ms.CODERS)].to_numpy().ravel()) - {""}
        assert used <= codes, name
    assert set(read("rounds_long.csv")["code"]) <= codes
    for ws_name, frame in pd.read_excel(SAMPLES / "multicode.xlsx", sheet_name=None,
                                        dtype=str).items():
        pieces = {p.strip() for cell in frame["codes"] for p in cell.split(";")}
        assert pieces <= codes, ws_name


def test_long_layout_holds_the_same_values_as_the_wide_files():
    long = read("rounds_long.csv")
    assert set(long["round"]) == {"1", "2"}
    for number in (1, 2):
        wide = read(f"round{number}.csv").melt(id_vars=["excerpt_id"], value_vars=list(ms.CODERS),
                                               var_name="coder", value_name="code")
        wide = wide[wide["code"] != ""]
        part = long[long["round"] == str(number)].drop(columns="round")
        key = ["excerpt_id", "coder"]
        pd.testing.assert_frame_equal(part.sort_values(key).reset_index(drop=True),
                                      wide.sort_values(key).reset_index(drop=True))


def test_round_excerpts_come_from_the_corpus():
    corpus = read("corpus.csv").set_index("unit_id")
    assert corpus.groupby("interview")["participant_role"].nunique().max() == 1
    assert set(corpus["participant_role"]) == {"volunteer", "coordinator", "visitor"}
    ids = []
    for name in ("round1.csv", "round2.csv"):
        frame = read(name).set_index("excerpt_id")
        assert frame.index.isin(corpus.index).all()
        assert (corpus.loc[frame.index, "text"] == frame["excerpt"]).all()
        assert (corpus.loc[frame.index, "interview"] == frame["interview"]).all()
        ids.append(set(frame.index))
    assert not ids[0] & ids[1], "the rounds code different excerpts"


def test_texts_exercise_non_ascii_and_formula_like_cells():
    round1, round2 = read("round1.csv"), read("round2.csv")
    assert round1["excerpt"].str.startswith("=").sum() == 1
    assert round2["excerpt"].str.startswith("-").sum() == 1
    everything = " ".join(pd.concat([round1["excerpt"], round2["excerpt"],
                                     read("corpus.csv")["text"]]))
    for word in ("café", "naïve"):
        assert word in everything
    wb = openpyxl.load_workbook(SAMPLES / "multicode.xlsx")
    starts = [c for c in wb["amara"]["B"] if str(c.value).startswith("=")]
    assert len(starts) == 1 and starts[0].data_type == "s"   # text, not a formula


def test_ratings_sheet_and_its_codebook():
    levels = read("ratings_codebook.csv")
    assert levels["code"].tolist() == ["1", "2", "3", "4", "5"]
    assert levels["order"].tolist() == ["1", "2", "3", "4", "5"]
    ratings = read("ratings.csv")
    values = ratings[list(ms.CODERS)].to_numpy().ravel()
    assert set(values) <= {"1", "2", "3", "4", "5", ""}
    assert (values == "").sum() == sum(ms.RATING_SKIPPED)


# -- planted structure ----------------------------------------------------------------------------
def test_round_two_agrees_better_than_round_one():
    alpha1 = nominal_alpha(reliability_data(read("round1.csv")))
    alpha2 = nominal_alpha(reliability_data(read("round2.csv")))
    assert 0.5 < alpha1 < 0.7      # "moderate"
    assert 0.72 < alpha2 < 0.88    # "better"
    assert alpha2 > alpha1 + 0.1


@pytest.mark.parametrize("number", [1, 2])
def test_time_pressure_and_burnout_are_the_most_confused_pair(number):
    cats = codebook()
    data = reliability_data(read(f"round{number}.csv"))
    o = coincidences(data, len(cats))
    n_c = o.sum(axis=1)
    # The matrix reproduces the reference alpha:
    # nominal alpha = 1 - (n-1) sum_{c!=k} o_ck / (n^2 - sum_c n_c^2)
    # (Krippendorff 2011, "Computing Krippendorff's alpha-reliability").
    n = n_c.sum()
    disagreeing = n - np.trace(o)
    alpha = 1 - (n - 1) * disagreeing / (n ** 2 - (n_c ** 2).sum())
    assert alpha == pytest.approx(nominal_alpha(data), abs=1e-12)
    off = o.copy()
    np.fill_diagonal(off, 0.0)
    c, k = np.unravel_index(np.argmax(off), off.shape)
    assert {cats[c], cats[k]} == set(ms.CONFUSED)
    a, b = cats.index(ms.CONFUSED[0]), cats.index(ms.CONFUSED[1])
    # o_ck against its chance value e_ck = n_c n_k / (n - 1) (METHODS.md 6.4): above chance even
    # though most values agree, and the highest ratio of all pairs
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = off / (np.outer(n_c, n_c) / (n - 1))
    assert ratio[a, b] > 1.0
    assert np.unravel_index(np.nanargmax(ratio), ratio.shape) in {(a, b), (b, a)}
    # merging the pair raises alpha more than merging any other pair
    gains = {}
    base = nominal_alpha(data)
    for i, j in combinations(range(len(cats)), 2):
        merged = np.where(data == j, i, data)
        gains[(cats[i], cats[j])] = nominal_alpha(merged) - base
    assert set(max(gains, key=gains.get)) == set(ms.CONFUSED)


@pytest.mark.parametrize("number", [1, 2])
def test_bastien_over_uses_coordination(number):
    frame = read(f"round{number}.csv")
    counts = pd.DataFrame({c: frame[c].value_counts() for c in ms.CODERS}).fillna(0)
    counts = counts.drop(index="", errors="ignore")
    excess = counts.sub(counts.mean(axis=1), axis=0)
    coder, code = excess.stack().idxmax()[::-1]
    assert (coder, code) == (ms.OVERUSER, ms.OVERUSED)
    for other in ("amara", "chen"):
        both = frame[(frame[ms.OVERUSER] != "") & (frame[other] != "")]
        only_bastien = ((both[ms.OVERUSER] == ms.OVERUSED) & (both[other] != ms.OVERUSED)).sum()
        only_other = ((both[ms.OVERUSER] != ms.OVERUSED) & (both[other] == ms.OVERUSED)).sum()
        test = mcnemar([[0, only_bastien], [only_other, 0]], exact=True)
        assert only_bastien > only_other and test.pvalue < 0.05, other


def test_leaving_bastien_out_raises_round_one_alpha():
    frame = read("round1.csv")
    base = nominal_alpha(reliability_data(frame))
    without = {c: nominal_alpha(reliability_data(frame, [x for x in ms.CODERS if x != c]))
               for c in ms.CODERS}
    assert max(without, key=without.get) == ms.OVERUSER and without[ms.OVERUSER] > base


@pytest.mark.parametrize("number", [1, 2])
def test_conflict_is_rare_but_used(number):
    values = read(f"round{number}.csv")[list(ms.CODERS)].to_numpy().ravel()
    values = values[values != ""]
    share = (values == "Conflict").mean()
    assert 0 < share < 0.05
    counts = pd.Series(values).value_counts()
    assert counts.idxmin() == "Conflict"


@pytest.mark.parametrize("number", [1, 2])
def test_a_few_values_are_missing_one_per_excerpt_at_most(number):
    frame = read(f"round{number}.csv")
    missing = frame[list(ms.CODERS)] == ""
    assert missing.sum().tolist() == list(ms.ROUNDS[number]["skipped"])
    assert missing.sum(axis=1).max() == 1


def test_ratings_are_reliable_and_chen_is_lenient():
    ratings = read("ratings.csv")
    data = ratings[list(ms.CODERS)].replace("", np.nan).astype(float)
    alpha = krippendorff.alpha(reliability_data=data.to_numpy().T, level_of_measurement="ordinal",
                               value_domain=[1, 2, 3, 4, 5])
    assert 0.65 < alpha < 0.9
    means = data.mean()
    assert means.idxmax() == "chen" and means["chen"] - means.drop("chen").max() > 0.2


def test_multicode_workbook():
    sheets = pd.read_excel(SAMPLES / "multicode.xlsx", sheet_name=None, dtype=str)
    assert list(sheets) == ["amara", "bastien"]
    amara, bastien = sheets["amara"], sheets["bastien"]
    assert list(amara.columns) == ["excerpt_id", "excerpt", "codes"] == list(bastien.columns)
    assert len(amara) == 60 and amara["excerpt_id"].tolist() == bastien["excerpt_id"].tolist()
    assert amara["codes"].notna().all() and bastien["codes"].notna().all()

    def sets(frame):
        return [frozenset(p.strip() for p in cell.split(";")) for cell in frame["codes"]]

    a, b = sets(amara), sets(bastien)
    assert sum(len(s) > 1 for s in a) > 20                    # set-valued, not single codes
    jaccard = np.mean([len(x & y) / len(x | y) for x, y in zip(a, b)])
    assert 0.5 < jaccard < 0.9
    assert sum(ms.OVERUSED in s for s in b) > 1.5 * sum(ms.OVERUSED in s for s in a)


# -- coded passages ---------------------------------------------------------------------------------
PASSAGES = SAMPLES / "passages"


def test_passages_are_reproducible(tmp_path):
    ms.write_passages(tmp_path)
    for name in [*PASSAGE_TEXTS, "passages_spans.csv"]:
        sub = f"passages/{name}" if name.endswith(".txt") else name
        assert (tmp_path / sub).read_bytes() == (SAMPLES / sub).read_bytes(), f"{name} differs: rerun the script"
    with zipfile.ZipFile(tmp_path / "passages.qdpx") as a, zipfile.ZipFile(SAMPLES / "passages.qdpx") as b:
        assert a.namelist() == b.namelist()
        assert all(a.read(n) == b.read(n) for n in a.namelist())


def test_passages_package_and_table_hold_the_same_spans_and_the_planted_structure():
    from agree.io.refi import read_project
    from agree.io.spans import read_spans

    package = read_project(SAMPLES / "passages.qdpx")
    table = read_spans(SAMPLES / "passages_spans.csv", documents_dir=PASSAGES)
    rows = lambda d: sorted(map(tuple, d.table().itertuples(index=False, name=None)))  # noqa: E731
    assert rows(package) == rows(table)
    assert package.coders == ms.PASSAGE_CODERS and package.documents == tuple(d for d, _ in ms.PASSAGE_PEOPLE)
    assert package.texts == table.texts
    assert (package.depth() == 2).sum() == 6 and "Strain/Burnout" in package.codes  # nested codes
    spans = pd.read_csv(SAMPLES / "passages_spans.csv")
    texts = {p.stem: p.read_bytes().decode("utf-8") for p in PASSAGES.glob("*.txt")}
    assert all(texts[d][s:e] == x for d, s, e, x in zip(spans.document, spans.start, spans.end, spans.excerpt))
    assert any(not t.isascii() for t in texts.values()) and any(ord(c) > 0xFFFF for c in texts["T03"])
    # the planted passage: coded by chen only
    emoji = spans[spans.excerpt.str.contains("magician")]
    assert set(emoji.coder) == {"chen"}
    # overlapping spans of different coders that do not coincide
    a = spans[(spans.document == "T01") & (spans.coder == "amara")]
    b = spans[(spans.document == "T01") & (spans.coder == "bastien")]
    assert any((s1 < e2) and (s2 < e1) and (s1, e1) != (s2, e2)
               for s1, e1 in zip(a.start, a.end) for s2, e2 in zip(b.start, b.end))


def test_passages_package_is_valid_against_the_project_schema():
    xmlschema = pytest.importorskip("xmlschema")
    schema = xmlschema.XMLSchema10(str(ROOT / "tests" / "io" / "schemas" / "Project-mrt2019.xsd"))
    with zipfile.ZipFile(SAMPLES / "passages.qdpx") as z:
        schema.validate(z.read("project.qde").decode("utf-8"))
