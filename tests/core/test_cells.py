"""The one rule for cells agree writes (agree.core.cells): CSV quoting and formula protection, xlsx text cells.

Read-back is checked with readers outside agree: Python's csv module, pandas and openpyxl.
"""

import csv
import io

import openpyxl
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from agree.core.cells import (
    cell_text,
    csv_field,
    csv_text,
    formula_like,
    frame_csv,
    protect_text,
    put_cell,
    unprotect_text,
)

AWKWARD = ["plain", "=SUM(A1)", "+cmd", "-fine", "@here", "\tpad", "\rcr", "'=already", "''=twice",
           "'tis", "'", "-1", "+0.5", "-2e3", "a\rb", "a\nb", "a\r\nb", "\r\n", 'say "hi"', "a,b", "x;y",
           "café", "日本語", "emoji 🙂", " lead", "trail ", "=1+1\r\n=2", "-", "+", "=", "@"]


@pytest.mark.parametrize("text", AWKWARD)
def test_protection_round_trips_and_never_starts_a_formula(text):
    written = protect_text(text)
    assert unprotect_text(written) == text
    assert not formula_like(written)


@pytest.mark.parametrize("text,written", [
    ("=SUM(A1)", "'=SUM(A1)"), ("-fine", "'-fine"), ("@x", "'@x"), ("\tx", "'\tx"), ("\rx", "'\rx"),
    ("'=x", "''=x"), ("-1", "-1"), ("+0.5", "+0.5"), ("-2e3", "-2e3"), ("'tis", "'tis"), ("plain", "plain"),
    ("-inf", "'-inf"), ("-1+1", "'-1+1"),
])
def test_the_documented_rule(text, written):
    assert protect_text(text) == written


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=st.sampled_from("'=+-@\t\r\n,\"a1.eé "), max_size=8))
def test_protection_is_lossless_on_any_text(text):
    assert unprotect_text(protect_text(text)) == text
    assert not formula_like(protect_text(text))


def test_a_cell_with_a_carriage_return_is_quoted():
    # the old writer left "a\rb" bare, and a lone CR ends a row for most CSV readers
    assert csv_field("a\rb") == '"a\rb"'
    assert csv_field("a,b") == '"a,b"' and csv_field('a"b') == '"a""b"' and csv_field("ab") == "ab"
    assert csv_field(None) == "" and csv_field(float("nan")) == "" and csv_field(0.1) == "0.1"
    assert csv_field(3) == "3" and csv_field("=x") == "'=x" and csv_field("=x\ny") == "\"'=x\ny\""


ROWS = [[text, i, None if i % 3 else 0.25 * i] for i, text in enumerate(AWKWARD)]


def test_csv_reads_back_through_python_csv():
    text = csv_text(["text", "n", "x"], ROWS)
    back = list(csv.reader(io.StringIO(text, newline="")))
    assert back[0] == ["text", "n", "x"]
    assert [unprotect_text(r[0]) for r in back[1:]] == AWKWARD
    assert [r[1] for r in back[1:]] == [str(i) for i in range(len(AWKWARD))]


def test_csv_reads_back_through_pandas():
    frame = pd.DataFrame(ROWS, columns=["te,xt", "=n", "x"])
    text = frame_csv(frame)
    back = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False).map(unprotect_text)
    assert [unprotect_text(c) for c in back.columns] == ["te,xt", "=n", "x"]
    assert list(back["te,xt"]) == AWKWARD
    assert len(back) == len(AWKWARD)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.lists(st.text(max_size=12), min_size=3, max_size=3), max_size=6))
def test_random_text_reads_back_through_python_csv(rows):
    text = csv_text(["a", "b", "c"], rows)
    back = list(csv.reader(io.StringIO(text, newline="")))
    assert [[unprotect_text(c) for c in r] for r in back[1:]] == rows


def test_workbook_cells_stay_text(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    values = [*AWKWARD, "007", "bad\x01char", "\ufffe"]
    for i, value in enumerate(values, start=1):
        put_cell(ws.cell(row=i, column=1), value)
    put_cell(ws.cell(row=1, column=2), 3)
    put_cell(ws.cell(row=2, column=2), float("nan"))
    wb.save(tmp_path / "t.xlsx")
    back = openpyxl.load_workbook(tmp_path / "t.xlsx")
    got = [back.active.cell(row=i, column=1).value for i in range(1, len(values) + 1)]
    assert got[:len(AWKWARD) + 1] == [*AWKWARD, "007"]
    assert got[-2:] == ["bad\ufffdchar", "\ufffd"]       # XML cannot hold these characters
    assert back.active.cell(row=1, column=2).value == 3 and back.active.cell(row=2, column=2).value is None
    assert back.active["A2"].quotePrefix                # "=SUM(A1)" stays text when edited
    frame = pd.read_excel(tmp_path / "t.xlsx", header=None, dtype=object)
    assert list(frame[0])[:len(AWKWARD)] == AWKWARD


def test_cell_text_of_copied_values():
    assert cell_text(17.0) == "17" and cell_text(2.5) == "2.5" and cell_text(None) is None
    assert cell_text(float("nan")) is None and cell_text("=x") == "=x" and cell_text(3) == "3"
