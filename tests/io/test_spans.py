"""Reading span tables: offsets checked against str.find / str.split on the texts, the same spans
through every file format, and every row problem named with its file, row and column."""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

from agree.core.errors import AgreeError
from agree.core.spans import token_bounds
from agree.io.spans import code_tree, read_spans
from tests.io import projects as P

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def rows(data):
    return sorted(map(tuple, data.table().itertuples(index=False, name=None)))


@pytest.fixture
def texts(tmp_path):
    return P.text_folder(tmp_path / "texts")


def _table(tmp_path, records, name="spans.csv"):
    frame = pd.DataFrame(records)
    path = tmp_path / name
    if name.endswith(".csv"):
        frame.to_csv(path, index=False)
    elif name.endswith(".xlsx"):
        frame.to_excel(path, index=False)
    else:
        frame.to_parquet(path, index=False)
    return path


def test_spans_and_texts_from_a_folder(tmp_path, texts):
    data = read_spans(_table(tmp_path, P.span_rows()), documents_dir=texts)
    assert rows(data) == P.expected_rows()
    assert data.texts == (P.TEXTS["Baker A"], P.TEXTS["Baker B"])
    # CRLF counted twice: the file's text is read from its bytes, without newline translation
    assert data.lengths[0] == len(P.TEXTS["Baker A"]) == len(P.TEXTS["Baker A"].replace("\r\n", "\n")) + 3
    assert data.coders == ("Iris", "Tomás") and data.coverage == "inferred"
    assert data.codes == ("Feelings", "Feelings/Fatigue", "Feelings/Pride", "Work", "Work/Craft", "Work/Night shift")
    assert [data.codes[p] if p >= 0 else None for p in data.parents] == [None, "Feelings", "Feelings", None, "Work",
                                                                            "Work"]
    assert data.source_rows.min() == 2
    detected = data.report.detected
    assert detected.startswith("span table: 10 spans by 2 coders over 2 documents with 4 codes")
    assert "zero-based character offsets, end exclusive" in detected and "texts from the folder" in detected
    assert any("CRLF" in n for n in data.report.notes)


@pytest.mark.parametrize("name", ["spans.xlsx", "spans.parquet"])
def test_every_format_gives_the_same_spans(tmp_path, texts, name):
    assert rows(read_spans(_table(tmp_path, P.span_rows(), name), documents_dir=texts)) == P.expected_rows()


def test_inclusive_ends(tmp_path, texts):
    records = [dict(r, end=r["end"] - 1) for r in P.span_rows()]
    data = read_spans(_table(tmp_path, records), documents_dir=texts, span_end="inclusive")
    assert rows(data) == P.expected_rows()
    assert "end inclusive, read as exclusive (end + 1)" in data.report.detected


def test_token_offsets(tmp_path, texts):
    text = P.TEXTS["Baker B"]
    words = [m.span() for m in re.finditer(r"\S+", text)]  # the documented tokens: runs of non-whitespace
    assert [tuple(x) for x in zip(*token_bounds(text))] == words
    first = next(i for i, (s, _) in enumerate(words) if text[s:].startswith("Tiring."))
    records = [dict(document="Baker B", coder="Iris", code="Feelings/Fatigue", start=first, end=first + 1),
               dict(document="Baker B", coder="Tomás", code="Feelings/Fatigue", start=first, end=first + 10)]
    data = read_spans(_table(tmp_path, records), documents_dir=texts, unit="token")
    assert data.unit == "token" and data.lengths[0] == len(words)
    assert data.documents == ("Baker B", "Baker A")  # the folder's other text: a document nobody marked
    with pytest.raises(AgreeError, match="past the end of document 'Baker B'"):
        read_spans(_table(tmp_path, [dict(records[0], end=len(words) + 1)]), documents_dir=texts, unit="token")


def test_document_text_column_and_excerpt_check(tmp_path):
    records = [dict(r, text=P.TEXTS[r["document"]]) for r in P.span_rows()]
    data = read_spans(_table(tmp_path, records))
    assert rows(data) == P.expected_rows() and data.texts == (P.TEXTS["Baker A"], P.TEXTS["Baker B"])
    assert "texts from the column 'text'" in data.report.detected


def test_excerpts_that_fit_inclusive_ends_say_so(tmp_path, texts):
    records = [dict(r, excerpt=P.TEXTS[r["document"]][r["start"]:r["end"] + 1]) for r in P.span_rows()]
    # Parquet: pandas writes a cell ending in a carriage return to CSV without quotes
    data = read_spans(_table(tmp_path, records, "spans.parquet"), documents_dir=texts)
    note = next(n for n in data.report.notes if "excerpts in 'excerpt'" in n)
    assert note.startswith("warning: 10 of 10 excerpts") and "span_end='inclusive'" in note
    good = [dict(r, excerpt=P.TEXTS[r["document"]][r["start"]:r["end"]]) for r in P.span_rows()]
    ok = read_spans(_table(tmp_path, good), documents_dir=texts)
    assert "excerpts in 'excerpt' match the text at the offsets (10 checked)" in ok.report.notes


def test_a_text_column_that_varies_is_read_as_excerpts(tmp_path, texts):
    records = [dict(r, text=P.TEXTS[r["document"]][r["start"]:r["end"]]) for r in P.span_rows()]
    data = read_spans(_table(tmp_path, records), documents_dir=texts)
    assert "excerpts in 'text' checked" in data.report.detected


def test_every_row_problem_is_named_in_one_error(tmp_path, texts):
    good = P.span_rows()[0]
    records = [good,
               dict(good, start=-2),  # row 3
               dict(good, start=9, end=4),  # row 4
               dict(good, end=10_000),  # row 5
               dict(good, document="Baker Z"),  # row 6
               dict(good, coder=" "),  # row 7
               dict(good, start="five")]  # row 8
    with pytest.raises(AgreeError) as info:
        read_spans(_table(tmp_path, records), documents_dir=texts)
    err = info.value
    messages = [(p.where.split(", ", 1)[1], p.message) for p in err.problems]
    assert ("row 7, column 'coder'", "the coder is blank") in messages
    assert ("row 8, column 'start'", "the start is not a whole number") in messages
    assert ("row 3, column 'start'", "the start -2 is negative") in messages
    assert ("row 4, column 'end'", "the end 4 is before the start 9") in messages
    assert any(w == "row 6, column 'document'" and m.startswith("unknown document 'Baker Z'") for w, m in messages)
    assert str(err).startswith(f"{tmp_path / 'spans.csv'}, row 7, column 'coder': 5 problems in the span table")
    # an end past the text is checked once the texts are known and the rows are otherwise sound
    with pytest.raises(AgreeError, match=r"row 2, column 'end': the end 10000 is past the end of document"):
        read_spans(_table(tmp_path, [dict(good, end=10_000)]), documents_dir=texts)


def test_repeats_counted_once_and_empty_spans_left_out(tmp_path, texts):
    records = P.span_rows()
    records = records + [records[0], dict(records[1], end=records[1]["start"])]
    data = read_spans(_table(tmp_path, records), documents_dir=texts)
    assert rows(data) == P.expected_rows()
    left = " | ".join(data.report.left_out)
    assert "1 repeated span(s) (same document, coder, code, start and end) counted once, rows 12" in left
    assert "1 empty span(s) (start equal to the exclusive end) left out, rows 13" in left


def test_without_texts_the_length_is_the_largest_end(tmp_path):
    data = read_spans(_table(tmp_path, P.span_rows()))
    assert data.texts == (None, None)
    ends = pd.DataFrame(P.span_rows()).groupby("document")["end"].max()
    assert data.lengths.tolist() == ends.tolist()
    assert any(n.startswith("no document texts") for n in data.report.notes)


def test_declared_coverage_and_flat_codes(tmp_path, texts):
    records = [r for r in P.span_rows() if r["coder"] == "Iris" or r["document"] == "Baker A"]
    records = [r for r in records if not (r["coder"] == "Tomás" and r["document"] == "Baker B")]
    inferred = read_spans(_table(tmp_path, records), documents_dir=texts)
    assert inferred.coded.tolist() == [[True, True], [True, False]]
    declared = read_spans(_table(tmp_path, records), documents_dir=texts, coverage="declared",
                          code_separator=None)
    assert declared.coded.all() and declared.coverage == "declared"
    assert (declared.parents == -1).all() and "Feelings" not in declared.codes


def test_code_tree_orders_parents_first():
    codes, parents, index = code_tree(["b/x", "a", "b/x/deep", "a"])
    assert codes == ("a", "b", "b/x", "b/x/deep")
    assert parents.tolist() == [-1, -1, 1, 2] and index.tolist() == [2, 0, 3, 0]
    with pytest.raises(AgreeError, match="empty level"):
        code_tree(["a//b"])


def test_column_names_are_detected_and_overridable(tmp_path, texts):
    records = [dict(doc=r["document"], rater=r["coder"], label=r["code"], begin=r["start"], stop=r["end"])
               for r in P.span_rows()]
    assert rows(read_spans(_table(tmp_path, records), documents_dir=texts)) == P.expected_rows()
    renamed = [dict(a=r["document"], b=r["coder"], c=r["code"], d=r["start"], e=r["end"]) for r in P.span_rows()]
    path = _table(tmp_path, renamed)
    with pytest.raises(AgreeError, match="no document column found"):
        read_spans(path, documents_dir=texts)
    data = read_spans(path, documents_dir=texts, document="a", coder="b", code="c", start="d", end="e")
    assert rows(data) == P.expected_rows()


def test_bad_options_and_a_non_utf8_text(tmp_path, texts):
    path = _table(tmp_path, P.span_rows())
    with pytest.raises(AgreeError, match="span_end must be one of"):
        read_spans(path, span_end="last")
    (texts / "Baker A.txt").write_bytes("café".encode("cp1252"))
    with pytest.raises(AgreeError, match="not UTF-8"):
        read_spans(path, documents_dir=texts)


def test_a_workbook_problem_names_the_sheet(tmp_path, texts):
    path = tmp_path / "spans.xlsx"
    with pd.ExcelWriter(path) as writer:
        pd.DataFrame([dict(P.span_rows()[0], start=-1)]).to_excel(writer, sheet_name="Iris", index=False)
    with pytest.raises(AgreeError, match=r"sheet 'Iris', row 2, column 'start': the start -1 is negative"):
        read_spans(path, documents_dir=texts)


def test_the_texts_read_are_inputs_of_the_run(tmp_path, texts):
    from agree.core.files import run_scope

    path = _table(tmp_path, P.span_rows())
    with run_scope() as run:
        read_spans(path, documents_dir=texts)
        with pytest.raises(AgreeError, match="refusing to overwrite the input"):
            from agree.core.files import check_output
            check_output(texts / "Baker A.txt")
    assert run is not None


# -- telling span data from coding sheets by content (agree.io.spans.span_input) --------------------
@pytest.mark.parametrize("name", ["spans.csv", "spans.xlsx", "spans.parquet", "spans.dat"])
def test_span_tables_are_told_by_their_header_in_every_format(tmp_path, name):
    from agree.io.spans import span_input

    if name.endswith(".dat"):   # no known suffix: read by content
        path = _table(tmp_path, P.span_rows(), "spans.csv").rename(tmp_path / name)
    else:
        path = _table(tmp_path, P.span_rows(), name)
    assert span_input(path) == "span table"


def test_projects_are_told_by_content_not_only_by_name(tmp_path):
    import shutil

    from agree.io.spans import span_input

    sample = SAMPLES / "passages.qdpx"
    renamed = tmp_path / "export.zip"
    shutil.copy(sample, renamed)
    assert span_input(sample) == "project"
    assert span_input(renamed) == "project"          # a zip holding project.qde
    xml = tmp_path / "project.xml"
    xml.write_text('<?xml version="1.0"?>\n<Project xmlns="urn:QDA-XML:project:1.0" name="x"/>', encoding="utf-8")
    assert span_input(xml) == "project"
    damaged = tmp_path / "damaged.qdpx"
    damaged.write_text("document,start,end\n", encoding="utf-8")
    assert span_input(damaged) == "project"          # read_project explains what is wrong with it


def test_coding_sheets_and_other_files_are_not_span_data(tmp_path):
    from agree.io.spans import span_input

    for name in ("round1.csv", "multicode.xlsx", "ratings.csv", "passages/T01.txt"):
        assert span_input(SAMPLES / name) is None, name
    assert span_input(tmp_path / "missing.csv") is None   # the ordinary reader names the missing file
    almost = _table(tmp_path, [{"document": "d", "start": 1, "coder": "a", "code": "x"}], "almost.csv")
    assert span_input(almost) is None                     # no end column
    html = tmp_path / "page.html"
    html.write_text("<html><body>document,start,end</body></html>", encoding="utf-8")
    assert span_input(html) is None
