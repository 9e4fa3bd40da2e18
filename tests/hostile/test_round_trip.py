"""Property test: random tables with awkward text, written to every output format agree writes, read
back unchanged: by readers outside agree (pandas, Python's csv module, openpyxl) and by agree's own
(`reconcile` reads review files, `read` reads consensus files and coding sheets, `read_unit_ids`
reads manifests). All data are generated, synthetic."""

from __future__ import annotations

import csv
import io
import math
import os
import re
import tempfile
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import agree
from agree.analysis.sampling import read_unit_ids
from agree.core.cells import frame_csv, unprotect_text, xml_safe
from agree.core.model import from_table
from agree.output.reconciliation import consensus_frame, reconcile, review_table, write_consensus, write_review
from agree.output.sheets import write_coding_sheets
from tests.hostile.cases import AWKWARD

SETTINGS = settings(max_examples=int(os.environ.get("AGREE_HOSTILE_EXAMPLES", 20)), deadline=None, suppress_health_check=[HealthCheck.too_slow])

# any character but surrogates (not text) and the zero byte (a file holding one is binary data),
# control characters a sprinkling among the rest (a file of mostly control characters is binary
# data too: tests/core/test_cells.py writes those through the CSV writer with Python's csv module
# as reader)
_TEXT = st.characters(blacklist_categories=("Cs", "Cc"))
_ANY = st.one_of(_TEXT, _TEXT, _TEXT, st.sampled_from("\t\n\r"), st.characters(min_codepoint=1, max_codepoint=31))
awkward = st.one_of(st.sampled_from(AWKWARD), st.text(_ANY, min_size=1, max_size=10),
                    st.builds(lambda a, b: a + b, st.sampled_from(AWKWARD), st.text(_ANY, max_size=4)))
# in workbooks: only what XML can hold (the rest becomes U+FFFD, tested on its own below)
in_xml = awkward.map(xml_safe)
# ids: distinct, not blank, no surrounding spaces, no ";" (the readers' set separator), not numbers
ids = awkward.filter(lambda s: s.strip() == s and s.strip() and ";" not in s and not _numeric(s))


def _numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


@st.composite
def tables(draw, text=awkward):
    n = draw(st.integers(2, 7))
    units = draw(st.lists(ids.filter(lambda s: s == text_filter(text, s)), min_size=n, max_size=n, unique=True))
    codes = draw(st.lists(ids.filter(lambda s: s == text_filter(text, s)), min_size=2, max_size=4, unique=True))
    coders = ["ann", "bo", "cy"][:draw(st.integers(2, 3))]
    rows = [[draw(st.one_of(st.none(), st.sampled_from(codes))) for _ in coders] for _ in units]
    rows[0][:2] = codes[:2]                                    # at least one unit needs review
    texts = draw(st.lists(text, min_size=n, max_size=n))
    data = from_table(pd.DataFrame(rows, columns=coders, dtype=object), unit_ids=units)
    return data.__class__(**{**{f: getattr(data, f) for f in data.__dataclass_fields__},
                             "text": np.array(texts, dtype=object)})


def text_filter(strategy, s):
    return xml_safe(s) if strategy is in_xml else s


def _as_text(frame: pd.DataFrame) -> list[list[str]]:
    return [["" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v) for v in row]
            for row in frame.itertuples(index=False)]


def _csv_back(path: Path) -> tuple[list[str], list[list[str]]]:
    """Read by pandas and by the csv module (they must agree), agree's formula rule undone."""
    frame = pd.read_csv(path, dtype=str, keep_default_na=False).map(unprotect_text)
    with open(path, newline="", encoding="utf-8") as handle:
        rows = [[unprotect_text(c) for c in r] for r in csv.reader(handle)]
    assert rows[1:] == frame.to_numpy().tolist()
    assert rows[0] == [unprotect_text(c) for c in frame.columns]
    return rows[0], rows[1:]


def _xlsx_back(path: Path, sheet: str | None = None) -> tuple[list[str], list[list[str]]]:
    wb = openpyxl.load_workbook(path)
    ws = wb[sheet] if sheet else wb.active
    rows = [["" if v is None else v for v in row] for row in ws.iter_rows(values_only=True)]
    for row in ws.iter_rows():
        assert all(c.data_type != "f" for c in row)            # never a formula
    return rows[0], rows[1:]


def _md_back(path: Path) -> list[list[str]]:
    """The table rows of agree's Markdown review, split on unescaped pipes and unescaped."""
    rows = []
    for line in path.read_text(encoding="utf-8").split("\n"):
        if not line.startswith("| "):
            continue
        cells, cell, i = [], "", 2
        while i < len(line):
            ch = line[i]
            if ch == "\\" and i + 1 < len(line):
                cell += line[i + 1]
                i += 2
                continue
            if ch == "|":
                cells.append(cell[:-1] if cell.endswith(" ") else cell)
                cell = ""
                i += 2                                          # the space after the pipe
                continue
            cell += ch
            i += 1
        rows.append(cells)
    return rows


def _breaks(text: str) -> str:
    return text.replace("\r\n", "<br>").replace("\n", "<br>").replace("\r", "<br>")


def _review_and_consensus(data, suffix: str, back) -> None:
    """Review and consensus written as `suffix`, read back by `back` (outside agree) and by agree."""
    with tempfile.TemporaryDirectory() as tmp:
        review, consensus_file = Path(tmp) / f"review{suffix}", Path(tmp) / f"consensus{suffix}"
        expected = review_table(data)
        write_review(data, review)
        header, rows = back(review, "Review")
        assert header == list(expected.columns) and rows == _as_text(expected)
        consensus = reconcile(data, review, allow_unresolved=True)              # agree's reader
        assert list(consensus.table["unit"]) == [str(u) for u in data.unit_ids]
        write_consensus(consensus, consensus_file, data=data)
        header, rows = back(consensus_file, None)
        assert rows == _as_text(consensus_frame(consensus, data))
        again = agree.read(consensus_file, unit="unit", coder=list(data.coders), sep="")
        assert list(map(str, again.unit_ids)) == [str(u) for u in data.unit_ids]


@SETTINGS
@given(tables())
def test_review_and_consensus_csv(data):
    _review_and_consensus(data, ".csv", lambda path, sheet: _csv_back(path))


@SETTINGS
@given(tables(text=in_xml))
def test_review_and_consensus_xlsx(data):
    _review_and_consensus(data, ".xlsx", _xlsx_back)


@SETTINGS
@given(tables())
def test_review_parquet(data):
    """A Parquet review keeps every cell's text exactly (read by pyarrow) and reconcile reads it."""
    import pyarrow.parquet as pq

    with tempfile.TemporaryDirectory() as tmp:
        review = Path(tmp) / "review.parquet"
        expected = review_table(data)
        write_review(data, review)
        table = pq.read_table(review)
        assert table.column_names == list(expected.columns)
        assert [list(row) for row in zip(*table.to_pydict().values())] == _as_text(expected)
        consensus = reconcile(data, review, allow_unresolved=True)
        assert list(consensus.table["unit"]) == [str(u) for u in data.unit_ids]


@SETTINGS
@given(tables())
def test_review_markdown(data):
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "review.md"
        expected = review_table(data)
        write_review(data, path)
        rows = _md_back(path)
        assert rows[0] == [_breaks(c) for c in expected.columns]
        assert rows[1:] == [[_breaks(c) for c in row] for row in _as_text(expected)]


@SETTINGS
@given(st.lists(ids, min_size=2, max_size=8, unique=True), st.data())
def test_coding_sheets_and_manifest(units, draw):
    texts = draw.draw(st.lists(in_xml, min_size=len(units), max_size=len(units)))
    context = draw.draw(st.lists(in_xml, min_size=len(units), max_size=len(units)))
    codebook = draw.draw(st.lists(awkward.filter(lambda s: s.strip() == s and s and not _numeric(s)), min_size=1,
                                  max_size=4, unique=True))
    column = draw.draw(in_xml.filter(lambda s: s.strip().lower() not in ("unit_id", "text", "code", "notes", "")))
    sample = pd.DataFrame({"unit_id": [xml_safe(u) for u in units], "text": texts, column: context})
    if len(set(sample["unit_id"])) < len(units) or column in ("unit_id", "text", "draw_order", "corpus_row"):
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "sheets"
        write_coding_sheets(sample, folder, coders=["ann", "bo"], keep=[column], id_col="unit_id", text_col="text",
                            codebook=codebook)
        for coder in ("ann", "bo"):
            header, rows = _xlsx_back(folder / f"{coder}.xlsx", "coding")
            assert header == ["unit_id", column, "text", "code", "notes"]
            assert [r[:3] for r in rows] == [[u, c, t] for u, c, t in zip(sample["unit_id"], context, texts)]
        header, rows = _csv_back(folder / "manifest.csv")
        assert [r[0] for r in rows] == list(sample["unit_id"])
        assert set(read_unit_ids(folder / "manifest.csv")) == {u.strip() for u in sample["unit_id"]}


@SETTINGS
@given(st.lists(st.tuples(awkward, st.integers(-10**12, 10**12), st.floats(allow_nan=True, allow_infinity=False),
                          st.one_of(st.none(), awkward)), max_size=8),
       st.lists(awkward, min_size=4, max_size=4, unique=True))
def test_tables_as_csv(rows, columns):
    """The writer of `codes/coders/score --format csv`: text, integers and floats read back exactly."""
    frame = pd.DataFrame(rows, columns=columns, dtype=object)
    back = pd.read_csv(io.StringIO(frame_csv(frame)), dtype=str, keep_default_na=False).map(unprotect_text)
    assert [unprotect_text(c) for c in back.columns] == columns
    assert len(back) == len(rows)
    for got, want in zip(back.itertuples(index=False), rows):
        assert got[0] == want[0] and int(got[1]) == want[1] and got[3] == (want[3] or "")
        assert (got[2] == "" and math.isnan(want[2])) or float(got[2]) == want[2]


def test_characters_xml_cannot_hold_become_the_replacement_character(tmp_path):
    data = from_table(pd.DataFrame([["a\x01", "b"], ["b", "a\x01"]], columns=["ann", "bo"], dtype=object),
                      unit_ids=["u\x0b1", "u2"])
    write_review(data, tmp_path / "review.xlsx")
    _, rows = _xlsx_back(tmp_path / "review.xlsx", "Review")
    assert [r[0] for r in rows] == ["u\ufffd1", "u2"]
    write_review(data, tmp_path / "review.csv")                # CSV keeps them
    _, rows = _csv_back(tmp_path / "review.csv")
    assert [r[0] for r in rows] == ["u\x0b1", "u2"]


def test_a_csv_of_control_characters_reads_back(tmp_path):
    data = from_table(pd.DataFrame([["\x08\x08", "b"], ["b", "\x08\x08"]], columns=["ann", "bo"], dtype=object),
                      unit_ids=["\x01", "\x02"])
    write_review(data, tmp_path / "review.csv")
    consensus = reconcile(data, tmp_path / "review.csv", allow_unresolved=True)
    write_consensus(consensus, tmp_path / "consensus.csv", data=data)
    back = agree.read(tmp_path / "consensus.csv", unit="unit", coder=["ann", "bo"], sep="")
    assert list(back.unit_ids) == ["\x01", "\x02"]


# codes written like numbers: kept exactly as read (a plain whole number written "N.0" is the
# number N, the documented exception, so it is not drawn); distinct values, so no two are one code
_number_like = st.one_of(
    st.integers(-10**6, 10**6).map(str), st.integers(0, 999).map(lambda i: f"{i:03d}"),
    st.integers(0, 99).map(lambda i: f"+{i}"), st.floats(-1e6, 1e6, allow_nan=False).map(lambda f: f"{f:.2f}"),
    st.floats(1e-300, 1e300).map(lambda f: f"{f:e}"), st.sampled_from(["1e300", "-0.0", "0.50", ".5", "5."]))


def _value_text(v) -> str:
    return "" if v is None else str(v) if not isinstance(v, float) else repr(v)


@SETTINGS
@given(st.lists(_number_like, min_size=2, max_size=5, unique_by=float).filter(
    lambda codes: not any(re.fullmatch(r"-?[0-9]+\.0", c) for c in codes)), st.data())
def test_codes_that_look_like_numbers_read_back_as_written(codes, draw):
    """A code's text survives agree's writers (review, consensus: CSV and XLSX) and every reader
    (agree.read of CSV, TSV, XLSX and Parquet; reconcile of the review)."""
    rows = [[draw.draw(st.sampled_from(codes)) for _ in range(2)] for _ in range(draw.draw(st.integers(2, 6)))]
    rows[0] = codes[:2]
    units = [f"u{i}" for i in range(len(rows))]
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        frame = pd.DataFrame(rows, columns=["ann", "bo"]).assign(unit=units)[["unit", "ann", "bo"]]
        paths = [tmp / "t.csv", tmp / "t.tsv", tmp / "t.parquet"]
        frame.to_csv(paths[0], index=False)
        frame.to_csv(paths[1], index=False, sep="\t")
        frame.to_parquet(paths[2], index=False)
        for path in paths:
            data = agree.read(path)
            got = [[_value_text(None if c < 0 else data.values[c]) for c in row] for row in data.codes]
            assert got == rows, path.suffix
        for suffix in (".csv", ".xlsx"):
            review, consensus_file = tmp / f"review{suffix}", tmp / f"consensus{suffix}"
            write_review(data, review)
            consensus = reconcile(data, review, allow_unresolved=True)
            write_consensus(consensus, consensus_file, data=data)
            again = agree.read(consensus_file, unit="unit", coder=["ann", "bo"], sep="")
            got = [[_value_text(None if c < 0 else again.values[c]) for c in row] for row in again.codes]
            assert got == rows, suffix
