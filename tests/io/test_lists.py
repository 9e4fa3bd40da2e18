"""The list readers (corpus, unit-id lists, codebooks, consensus and review files) go through the
loaders, so each accepts every format `agree.read` accepts.

Before the one reading path these readers called pandas by file suffix: a Parquet, TSV or
unknown-suffix file, a CSV in Windows-1252 or UTF-16, or a CSV saved with ';' as separator
failed in some of them (several with an internal error), while `agree score` read the same file.
Each test below is parametrized over every format; `test_every_loader_has_a_writer` makes a new
loader fail here until it is added to `WRITERS`.

All data are synthetic: a made-up study of comments about a town library.
"""

from __future__ import annotations

import hashlib

import pandas as pd
import pytest

from agree.core.model import AgreeError
from agree.io.codebook import read_codebook
from agree.io.lists import find_records, read_consensus, read_corpus, read_unit_ids
from agree.io.loaders import LOADERS, load_tables


def _csv(sep=",", encoding="utf-8", suffix=".csv"):
    def write(frame, path):
        path = path.with_suffix(suffix)
        frame.to_csv(path, index=False, sep=sep, encoding=encoding)
        return path
    return write


def _xlsx(frame, path):
    path = path.with_suffix(".xlsx")
    frame.to_excel(path, index=False)
    return path


def _parquet(frame, path):
    path = path.with_suffix(".parquet")
    frame.to_parquet(path, index=False)
    return path


# format -> (loader kind, writer); the text variants are what spreadsheets and scripts save
WRITERS = {
    "csv": ("text", _csv()),
    "csv-semicolon": ("text", _csv(sep=";")),
    "csv-windows-1252": ("text", _csv(encoding="cp1252")),
    "csv-utf-16": ("text", _csv(encoding="utf-16")),
    "csv-utf-8-bom": ("text", _csv(encoding="utf-8-sig")),
    "tsv": ("text", _csv(sep="\t", suffix=".tsv")),
    "text-unknown-suffix": ("text", _csv(suffix=".dat")),
    "xlsx": ("workbook", _xlsx),
    "parquet": ("parquet", _parquet),
}
FORMATS = list(WRITERS)


def write(frame: pd.DataFrame, tmp_path, fmt: str, stem: str = "table"):
    return WRITERS[fmt][1](frame, tmp_path / stem)


def test_every_loader_has_a_writer():
    assert {kind for kind, _ in WRITERS.values()} == {loader.kind for loader in LOADERS}


def test_the_writers_give_what_the_loaders_read(tmp_path):
    frame = pd.DataFrame({"unit_id": ["b1", "b2"], "text": ["café au lait", "naïve"]})
    for fmt in FORMATS:
        [table], _ = load_tables(write(frame, tmp_path, fmt, stem=fmt))
        assert list(table.frame.columns) == ["unit_id", "text"], fmt
        assert table.frame["text"].tolist() == ["café au lait", "naïve"], fmt


# -- lists of units -------------------------------------------------------------------------
def corpus() -> pd.DataFrame:
    return pd.DataFrame({"unit_id": [f"b{i}" for i in range(1, 7)],
                         "branch": ["north", "north", "south", "south", "east", "east"],
                         "text": ["Le café est fermé", "Opening hours are too short", "Große Auswahl",
                                  "The quiet room is noisy", "Kids' corner is great", "Wi-Fi drops"]})


@pytest.mark.parametrize("fmt", FORMATS)
def test_corpus_in_every_format(tmp_path, fmt):
    # before: Parquet, unknown suffixes, Windows-1252 and UTF-16 CSV files were refused
    path = write(corpus(), tmp_path, fmt, stem="units")
    frame = read_corpus(path)
    assert list(frame.columns) == ["unit_id", "branch", "text"]
    assert frame["unit_id"].tolist() == corpus()["unit_id"].tolist()
    assert frame["text"].tolist() == corpus()["text"].tolist()
    assert frame.attrs["checksum"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert frame.attrs["source"] == str(path)


def test_corpus_empty_cells_are_empty_text_in_text_files(tmp_path):
    path = tmp_path / "units.csv"
    path.write_text("unit_id,branch,text\nb1,,hello\n")
    assert read_corpus(path)["branch"].tolist() == [""]


def test_corpus_errors_name_the_file(tmp_path):
    path = tmp_path / "units.csv"
    path.write_text("unit_id,text,text\nb1,a,b\n")
    with pytest.raises(AgreeError) as err:
        read_corpus(path)
    assert err.value.code == "duplicate-header" and "units.csv" in str(err.value)


# -- unit-id lists (--exclude) -----------------------------------------------------------------
@pytest.mark.parametrize("fmt", FORMATS)
def test_unit_ids_from_a_coding_file_in_every_format(tmp_path, fmt):
    # before: Parquet, unknown suffixes and UTF-16 files were refused; Windows-1252 failed
    coding = pd.DataFrame({"unit_id": ["b1", "b1", "b2", "é3"], "coder": ["ana", "ben", "ana", "ben"],
                           "code": ["praise", "praise", "complaint", "question"]})
    assert read_unit_ids(write(coding, tmp_path, fmt, stem="round1")) == ("b1", "b2", "é3")


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "cp1252", "utf-16"])
def test_plain_id_list_in_any_encoding(tmp_path, encoding):
    # before: a .txt list not in UTF-8 ended in an internal UnicodeDecodeError
    path = tmp_path / "done.txt"
    path.write_text("# coded in the pilot, spring\nb1\n\n  é2 \n", encoding=encoding)
    assert read_unit_ids(path) == ("b1", "é2")


def test_plain_list_with_another_suffix_and_a_one_column_table(tmp_path):
    (tmp_path / "done.lst").write_text("b1\nb2\n")
    assert read_unit_ids(tmp_path / "done.lst") == ("b1", "b2")
    # a first line that is an id column's name makes the file a table
    (tmp_path / "ids.txt").write_text("unit_id\nb3\n")
    assert read_unit_ids(tmp_path / "ids.txt") == ("b3",)
    # .csv files are always tables: the first line is the header
    (tmp_path / "ids.csv").write_text("key\nb4\n")
    assert read_unit_ids(tmp_path / "ids.csv", id_col="key") == ("b4",)


def test_unit_id_list_errors(tmp_path):
    (tmp_path / "odd.csv").write_text("key,code\nb1,a\n")
    with pytest.raises(AgreeError) as err:
        read_unit_ids(tmp_path / "odd.csv")
    assert err.value.code == "no-id-column" and "odd.csv" in err.value.message
    with pytest.raises(AgreeError) as err:
        read_unit_ids(tmp_path / "absent.csv")
    assert err.value.code == "file-not-found" and "absent.csv" in str(err.value)


# -- codebooks: one reader for sample, score and rounds ------------------------------------------
def codebook() -> pd.DataFrame:
    return pd.DataFrame({"code": ["praise", "complaint", "idée"],
                         "description": ["says something good", "says something bad", "suggests a change"]})


@pytest.mark.parametrize("fmt", FORMATS)
def test_codebook_in_every_format(tmp_path, fmt):
    book = read_codebook(write(codebook(), tmp_path, fmt, stem="codebook"))
    assert book.categories == ("praise", "complaint", "idée")
    assert book.definitions() == dict(zip(codebook()["code"], codebook()["description"]))


def test_codebook_plain_lists(tmp_path):
    (tmp_path / "c.txt").write_text("praise\n\ncomplaint, mild\n")
    assert read_codebook(tmp_path / "c.txt").categories == ("praise", "complaint, mild")
    (tmp_path / "d.txt").write_text("code,description\npraise,good\n")
    assert read_codebook(tmp_path / "d.txt").categories == ("praise",)
    (tmp_path / "e.txt").write_bytes("idée\nthé\n".encode("cp1252"))
    assert read_codebook(tmp_path / "e.txt").categories == ("idée", "thé")
    with pytest.raises(AgreeError) as err:
        read_codebook(tmp_path / "c.txt", sheet="codes")
    assert err.value.code == "bad-option"


# -- consensus files ------------------------------------------------------------------------------
def consensus() -> pd.DataFrame:
    return pd.DataFrame({"unit": ["b1", "b2", "-3", "b4"], "final code": ["praise", "idée", "praise", None],
                         "source": ["agreed", "decided", "majority", "unresolved"],
                         "how decided": [None, "discussion", None, None]})


# -- review files ---------------------------------------------------------------------------------


@pytest.mark.parametrize("fmt", FORMATS)
def test_consensus_table_in_every_format(tmp_path, fmt):
    frame = read_consensus(write(consensus(), tmp_path, fmt, stem="consensus"))
    assert list(frame.columns) == ["unit", "final code", "source", "how decided"]
    assert frame["unit"].tolist() == ["b1", "b2", "-3", "b4"]      # formula protection undone in CSV
    assert frame["final code"].tolist() == ["praise", "idée", "praise", None]


def review() -> pd.DataFrame:
    return pd.DataFrame({"unit": ["b1", "b3"], "status": ["needs review"] * 2, "decision": ["praise", "idée"],
                         "notes": ["long talk", None]})


@pytest.mark.parametrize("fmt", FORMATS)
def test_review_records_in_every_format(tmp_path, fmt):
    found = find_records(write(review(), tmp_path, fmt, stem="review"), columns=("unit", "decision"))
    assert found.header == ["unit", "status", "decision", "notes"]
    assert found.records == [["b1", "needs review", "praise", "long talk"], ["b3", "needs review", "idée", None]]
    assert found.rows == [2, 3]


def test_review_found_below_a_title_row(tmp_path):
    path = tmp_path / "review.xlsx"
    with pd.ExcelWriter(path) as xl:
        pd.DataFrame({"x": [1]}).to_excel(xl, sheet_name="Notes", index=False)
        pd.DataFrame([["Review of the library comments"]]).to_excel(xl, sheet_name="Review", index=False,
                                                                    header=False)
        review().to_excel(xl, sheet_name="Review", index=False, startrow=2)
    found = find_records(path, columns=("Unit", "decision"), prefer="Review")
    assert found.sheet == "Review" and found.rows == [4, 5] and found.records[1][2] == "idée"
    assert set(found.sheets) == {"Notes", "Review"}


def test_records_not_found(tmp_path):
    path = write(review().rename(columns={"decision": "verdict"}), tmp_path, "csv", stem="review")
    with pytest.raises(AgreeError) as err:
        find_records(path, columns=("unit", "decision"), code="review-columns")
    assert err.value.code == "review-columns" and "'decision'" in err.value.message
    path = write(review().rename(columns={"decision": "verdict"}), tmp_path, "xlsx", stem="review")
    with pytest.raises(AgreeError) as err:
        find_records(path, columns=("unit", "decision"), code="review-columns")
    assert "no sheet of" in err.value.message and "review.xlsx" in err.value.message
