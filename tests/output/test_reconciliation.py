"""The reconciliation loop: review list -> filled-in workbook -> consensus.

All data are synthetic. Files are real: written by `agree`, filled in with openpyxl the way a
person would fill them in, and read back. Checksums are checked against hashlib, confusion
counts against pandas.crosstab, and the xlsx cell types against openpyxl.
"""

from __future__ import annotations

import hashlib
import importlib
import os
from dataclasses import replace
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from agree.core.model import AgreeError, from_table
from agree.output.reconciliation import (
    ABOUT_SHEET,
    LISTS_SHEET,
    PAIR_UNITS,
    PAIRS_SHEET,
    REVIEW_SHEET,
    Consensus,
    _confused_pairs,
    protect_text,
    reconcile,
    review_table,
    unprotect_text,
    write_consensus,
    write_review,
)
from tests.io.test_lists import FORMATS
from tests.io.test_lists import write as write_table

TRICKY = ["=SUM(A1)", "-fine", "@here", "+1", "café", "Zürich", "日本", "\tpad", "'quoted"]


# -- helpers -------------------------------------------------------------------------------
def tricky_data():
    """Three coders on nine units whose ids and text are formula-like or non-ASCII."""
    rows = [
        ["pos", "neg", "mixed"],   # =SUM(A1): 3 distinct
        ["pos", "pos", "pos"],     # -fine: agreed
        ["neg", "pos", "pos"],     # @here: 2 distinct, majority pos
        ["pos", None, "neg"],      # +1: 2 distinct
        ["neg", "neg", None],      # café: agreed (a coder missing)
        [None, "mixed", None],     # Zürich: one coder only
        [None, None, None],        # 日本: nobody
        ["=odd", "pos", "=odd"],   # \tpad: 2 distinct, formula-like code
        ["mixed", "pos", "neg"],   # 'quoted: 3 distinct
    ]
    data = from_table(rows, coders=["ann", "bo", "cy"], unit_ids=TRICKY,
                      categories=["pos", "neg", "mixed", "=odd"])
    text = np.array([f"text of {u} | with a pipe" for u in TRICKY], dtype=object)
    return replace(data, text=text, codebook={"pos": "Positive stance", "neg": "Negative stance",
                                               "mixed": "Both"})


def header_index(ws):
    return {c.value: c.column for c in ws[1]}


def fill(path, decisions, *, out=None, how=None, who=None, notes=None):
    """Fill in a review workbook as a person would: text typed into cells stays text."""
    wb = openpyxl.load_workbook(path)
    ws = wb[REVIEW_SHEET]
    cols = header_index(ws)
    for r in range(2, ws.max_row + 1):
        unit = ws.cell(r, cols["unit"]).value
        for column, values in (("decision", decisions), ("how decided", how or {}),
                               ("decided by", who or {}), ("notes", notes or {})):
            if unit in values:
                cell = ws.cell(r, cols[column])
                cell.value = values[unit]
                if isinstance(values[unit], str):
                    cell.data_type = "s"
    wb.save(out or path)
    return out or path


def review_units(path):
    wb = openpyxl.load_workbook(path)
    ws = wb[REVIEW_SHEET]
    return [ws.cell(r, 1).value for r in range(2, ws.max_row + 1)]


def decision_choices(data, path):
    """Write the review workbook; the list the decision column's drop-down offers."""
    write_review(data, path)
    return openpyxl.load_workbook(path)[REVIEW_SHEET].data_validations.dataValidation[0].formula1


def no_temp_files(folder):
    return not [f for f in os.listdir(folder) if f.endswith(".tmp")]


# -- the xlsx round trip -------------------------------------------------------------------
def test_xlsx_round_trip_keeps_text_and_every_unit(tmp_path):
    data = tricky_data()
    review = tmp_path / "review.xlsx"
    summary = write_review(data, review)
    # the unit one coder coded is listed for review after the disagreements; nobody's unit is not
    assert summary.units_read == 9 and summary.agreed == 2 and summary.needing_review == 6
    assert summary.disagreements == 5 and summary.single_coder == 1
    assert dict(summary.left_out) == {"日本": "coded by no coder"}

    wb = openpyxl.load_workbook(review)
    assert wb.sheetnames[:3] == [REVIEW_SHEET, PAIRS_SHEET, ABOUT_SHEET]
    ws = wb[REVIEW_SHEET]
    assert ws.freeze_panes == "B2"
    # every text cell was saved as text, never as a formula, and reads back unchanged
    for row in ws.iter_rows():
        for cell in row:
            if cell.value is not None:
                assert cell.data_type == "s", (cell.coordinate, cell.value)
    units = review_units(review)
    assert set(units[:5]) == {"=SUM(A1)", "@here", "+1", "\tpad", "'quoted"} and units[5] == "Zürich"
    cols = header_index(ws)
    texts = {ws.cell(r, 1).value: ws.cell(r, cols["text"]).value for r in range(2, ws.max_row + 1)}
    assert texts["=SUM(A1)"] == "text of =SUM(A1) | with a pipe"
    assert ws.cell(2, cols["text"]).alignment.wrap_text
    assert ws.column_dimensions["B"].width >= 10

    # a decision drop-down (list of the codebook's codes) covers the decision column
    decision_letter = openpyxl.utils.get_column_letter(cols["decision"])
    how_letter = openpyxl.utils.get_column_letter(cols["how decided"])
    lists = {str(dv.sqref): dv for dv in ws.data_validations.dataValidation}
    dv = lists[f"{decision_letter}2:{decision_letter}7"]
    assert dv.type == "list" and dv.formula1 == '"pos,neg,mixed,=odd,(none)"'
    assert lists[f"{how_letter}2:{how_letter}7"].formula1 == '"discussion,adjudicator,majority"'
    statuses = {ws.cell(r, 1).value: ws.cell(r, cols["status"]).value for r in range(2, ws.max_row + 1)}
    assert statuses["Zürich"] == "coded by one coder only" and statuses["+1"] == "disagreement"

    filled = fill(review,
                  {"=SUM(A1)": "mixed", "@here": "pos", "+1": "neg", "\tpad": "=odd", "'quoted": "neg",
                   "Zürich": "mixed"},
                  how={"=SUM(A1)": "discussion", "@here": "Adjudicator"},
                  who={"@here": "Zoë"},
                  notes={"=SUM(A1)": "=HYPERLINK(\"x\")", "+1": "-context decides"},
                  out=tmp_path / "filled.xlsx")
    consensus = reconcile(data, filled)
    table = consensus.table
    assert list(table["unit"]) == TRICKY  # every unit exactly once, in input order
    final = dict(zip(table["unit"], table["final code"]))
    source = dict(zip(table["unit"], table["source"]))
    assert final == {"=SUM(A1)": "mixed", "-fine": "pos", "@here": "pos", "+1": "neg", "café": "neg",
                     "Zürich": "mixed", "日本": None, "\tpad": "=odd", "'quoted": "neg"}
    assert source == {"=SUM(A1)": "decided", "-fine": "agreed", "@here": "decided", "+1": "decided",
                      "café": "agreed", "Zürich": "decided", "日本": "not coded",
                      "\tpad": "decided", "'quoted": "decided"}
    row = table.set_index("unit")
    assert row.loc["=SUM(A1)", "notes"] == "=HYPERLINK(\"x\")"
    assert row.loc["@here", "how decided"] == "adjudicator" and row.loc["@here", "decided by"] == "Zoë"
    # the coders' independent codes are carried unchanged
    for j, coder in enumerate(data.coders):
        expected = [None if c < 0 else data.values[c] for c in data.codes[:, j]]
        assert list(table[coder]) == expected
    assert consensus.to_dict()["written"] == 9
    assert consensus.to_dict()["not_coded_units"] == ["日本"]
    assert consensus.to_dict()["single_coder"] == 0 and consensus.single_coder == ()

    out = tmp_path / "consensus.csv"
    write_consensus(consensus, out, inputs=[filled], data=data)
    raw = out.read_text(encoding="utf-8")
    assert "'=SUM(A1)" in raw and "\n'quoted," in raw  # formula protected; a plain quote left as it is
    back = pd.read_csv(out, dtype=str, keep_default_na=False).map(unprotect_text)
    assert list(back["unit"]) == TRICKY
    assert back.set_index("unit").loc["+1", "notes"] == "-context decides"
    assert no_temp_files(tmp_path)


def test_consensus_xlsx_keeps_text_as_text(tmp_path):
    data = tricky_data()
    review = tmp_path / "review.xlsx"
    write_review(data, review)
    consensus = reconcile(data, review, allow_unresolved=True)
    out = write_consensus(consensus, tmp_path / "consensus.xlsx")
    ws = openpyxl.load_workbook(out).active
    ids = [ws.cell(r, 1).value for r in range(2, ws.max_row + 1)]
    assert ids == TRICKY
    assert all(ws.cell(r, 1).data_type == "s" for r in range(2, ws.max_row + 1))


def test_provenance_sheet_records_checksums_counts_and_left_out(tmp_path):
    from agree.io.readers import read

    source = tmp_path / "coding.csv"
    source.write_text("unit,text,ann,bo\nu1,café,pos,neg\nu2,Zürich,pos,pos\nu3,日本,neg,\n"
                      "u4,=1+1,neg,pos\n", encoding="utf-8")
    data = read(source)
    write_review(data, tmp_path / "review.xlsx", options={"level": "nominal", "sep": ";"})
    ws = openpyxl.load_workbook(tmp_path / "review.xlsx")[ABOUT_SHEET]
    rows = {r[0]: r[1] for r in ws.iter_rows(values_only=True) if r[0]}
    assert rows[str(source)] == hashlib.sha256(source.read_bytes()).hexdigest()
    assert rows["units read"] == 4
    assert rows["units agreed"] == 1
    assert rows["units needing review"] == 3
    assert rows["of which the coders disagree"] == 2
    assert rows["of which coded by one coder only"] == 1
    assert rows["units coded by no coder (not listed)"] == 0
    assert "u3" not in rows                          # listed for review, not left out
    assert rows["option level"] == "nominal"
    assert rows["made with"].startswith("agree ")
    assert "made at" in rows
    # inputs given explicitly are hashed too
    other = tmp_path / "notes.txt"
    other.write_bytes(b"synthetic")
    write_review(data, tmp_path / "review2.xlsx", inputs=[source, other])
    ws = openpyxl.load_workbook(tmp_path / "review2.xlsx")[ABOUT_SHEET]
    rows = {r[0]: r[1] for r in ws.iter_rows(values_only=True) if r[0]}
    assert rows[str(other)] == hashlib.sha256(b"synthetic").hexdigest()


def test_changed_data_file_is_noted(tmp_path):
    from agree.io.readers import read

    source = tmp_path / "coding.csv"
    source.write_text("unit,ann,bo\nu1,pos,neg\nu2,pos,pos\n", encoding="utf-8")
    write_review(read(source), tmp_path / "review.xlsx")
    fill(tmp_path / "review.xlsx", {"u1": "pos"})
    source.write_text("unit,ann,bo\nu1,pos,neg\nu2,pos,pos\n\n", encoding="utf-8")
    consensus = reconcile(read(source), tmp_path / "review.xlsx")
    assert any("changed since the review" in n for n in consensus.notes)


# -- ordering, pairs, lists ----------------------------------------------------------------
def test_ordinal_worst_first():
    rows = [[2, 3], [1, 5], [3, 3], [3, 5], [4, 5], [1, 5]]
    data = from_table(rows, unit_ids=list("abcdef"), categories=[1, 2, 3, 4, 5], level="ordinal")
    # spread: a 1, b 4, d 2, e 1, f 4 -> b, f (ties in unit order), d, a, e
    assert list(review_table(data)["unit"]) == ["b", "f", "d", "a", "e"]
    three = from_table([[1, 2, None], [1, 5, None], [1, 2, 3]], unit_ids=["x", "y", "z"],
                       categories=[1, 2, 3, 4, 5], level="ordinal")
    assert list(review_table(three)["unit"]) == ["z", "y", "x"]  # distinct codes first
    nominal = data.with_level("nominal")
    assert list(review_table(nominal)["unit"]) == ["a", "b", "d", "e", "f"]  # unit order


def test_include_agreed_lists_agreed_units_after_disagreements():
    data = from_table([["a", "a"], ["a", "b"], ["b", "b"]], unit_ids=["1", "2", "3"])
    table = review_table(data, include_agreed=True)
    assert list(table["unit"]) == ["2", "1", "3"]
    assert list(table["status"]) == ["disagreement", "agreed", "agreed"]
    assert list(review_table(data)["status"]) == ["disagreement"]
    table.loc[table["unit"] == "2", "decision"] = "a"
    table.loc[table["unit"] == "3", "decision"] = "a"  # a decision overrides an agreed code
    consensus = reconcile(data, table)
    assert list(consensus.table["source"]) == ["agreed", "decided", "decided"]
    assert list(consensus.table["final code"]) == ["a", "a", "a"]


def test_confused_pairs_match_crosstab():
    rng = np.random.default_rng(7)
    cats = ["a", "b", "c", "d"]
    x = rng.choice(cats, 200)
    y = np.where(rng.random(200) < 0.6, x, rng.choice(cats, 200))
    data = from_table(np.stack([x, y], axis=1), coders=["ann", "bo"], categories=cats)
    pairs = _confused_pairs(data)
    cross = pd.crosstab(pd.Series(x, name="ann"), pd.Series(y, name="bo"))
    for row in pairs.itertuples(index=False):
        k, l = row[0], row[1]
        assert row[3] == cross.loc[k, l] and row[4] == cross.loc[l, k]
        assert row[2] == cross.loc[k, l] + cross.loc[l, k]
    assert pairs[PAIR_UNITS].sum() == int((x != y).sum())
    assert list(pairs[PAIR_UNITS]) == sorted(pairs[PAIR_UNITS], reverse=True)


def test_confused_pairs_count_whole_units_with_three_coders():
    # The coincidences would give unit 1 the weight 1 * 2 / 2 = 1 and unit 4 the weight 1/2 per
    # pair (Krippendorff 2011); the sheet counts whole units instead: a-b in units 1, 2 and 4.
    data = from_table([["a", "b", "b"], ["a", "b", None], ["a", "a", "a"], ["a", "b", "c"]])
    pairs = _confused_pairs(data).set_index(["code 1", "code 2"])
    got = pairs[PAIR_UNITS].to_dict()
    assert got == {("a", "b"): 3, ("a", "c"): 1, ("b", "c"): 1}
    assert all(isinstance(v, int) for v in got.values())


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.sampled_from(["a", "b", "c", None]), min_size=3, max_size=3),
                min_size=1, max_size=25))
def test_confused_pairs_equal_a_per_unit_count(rows):
    # Property: the count for (c, k) is the number of units with at least two values in which
    # both c and k were given, counted one unit at a time.
    data = from_table(rows, categories=["a", "b", "c"])
    pairs = _confused_pairs(data)
    got = {(r[0], r[1]): r[2] for r in pairs.itertuples(index=False)}
    want = {}
    for row in rows:
        given = {v for v in row if v is not None}
        if sum(v is not None for v in row) < 2:
            continue
        for c, k in (("a", "b"), ("a", "c"), ("b", "c")):
            if c in given and k in given:
                want[(c, k)] = want.get((c, k), 0) + 1
    assert {tuple(sorted(k, key="abc".index)): v for k, v in got.items()} == want


def test_confused_pairs_set_valued_count_units():
    # unit 1: ann {a}, bo {b}      -> a/b confused
    # unit 2: ann {a, b}, bo {b}   -> a applied by ann only, nothing by bo only: no pair
    # unit 3: ann {a, c}, bo {b}   -> a/b and c/b
    data = from_table([[{"a"}, {"b"}], [{"a", "b"}, {"b"}], [{"a", "c"}, {"b"}]],
                      categories=["a", "b", "c"])
    pairs = _confused_pairs(data).set_index(["code 1", "code 2"])
    assert pairs[PAIR_UNITS].to_dict() == {("a", "b"): 2, ("b", "c"): 1}


def test_pairs_sheet_explains_the_count(tmp_path):
    path = write_review(tricky_data(), tmp_path / "r.xlsx").path
    ws = openpyxl.load_workbook(path)[PAIRS_SHEET]
    header = [c.value for c in ws[1]]
    col = header.index(PAIR_UNITS) + 1
    assert ws.cell(1, col).comment is not None and "one coder gave code 1" in ws.cell(1, col).comment.text
    values = [ws.cell(r, col).value for r in range(2, ws.max_row + 1)]
    counts = [v for v in values if v is not None]
    assert counts and all(isinstance(v, int) for v in counts)
    notes = [ws.cell(r, 1).value for r in range(2, ws.max_row + 1)]
    assert any(isinstance(v, str) and v.startswith("note:") for v in notes)


def test_review_and_consensus_carry_kept_columns(tmp_path):
    data = from_table([["a", "b"], ["a", "a"], ["b", "a"]], coders=["ann", "bo"],
                      unit_ids=["u1", "u2", "u3"])
    data = replace(data, columns={"interview": np.array(["i1", "i1", "i2"], dtype=object),
                                  "notes": np.array(["x", "y", "z"], dtype=object)})
    table = review_table(data)
    assert list(table.columns[:3]) == ["unit", "interview", "notes (data)"]
    assert list(table["interview"]) == ["i1", "i2"]
    path = write_review(data, tmp_path / "r.xlsx").path
    ws = openpyxl.load_workbook(path)[REVIEW_SHEET]
    assert [c.value for c in ws[1]][:2] == ["unit", "interview"]
    fill(path, {"u1": "a", "u3": "b"})
    consensus = reconcile(data, path)
    assert list(consensus.table["interview"]) == ["i1", "i1", "i2"]
    assert list(consensus.table["final code"]) == ["a", "a", "b"]


def test_long_codebook_uses_a_hidden_list_sheet(tmp_path):
    cats = [f"category number {i:02d}, long name" for i in range(40)]
    data = from_table([[cats[0], cats[1]], [cats[2], cats[2]]], categories=cats)
    write_review(data, tmp_path / "review.xlsx")
    wb = openpyxl.load_workbook(tmp_path / "review.xlsx")
    assert wb[LISTS_SHEET].sheet_state == "hidden"
    ws = wb[REVIEW_SHEET]
    formulas = [dv.formula1 for dv in ws.data_validations.dataValidation]
    assert f"'{LISTS_SHEET}'!$A$2:$A$42" in formulas
    assert [wb[LISTS_SHEET].cell(r, 1).value for r in range(2, 43)] == cats + ["(none)"]
    fill(tmp_path / "review.xlsx", {"1": cats[1]})
    assert reconcile(data, tmp_path / "review.xlsx").table.loc[0, "final code"] == cats[1]


# -- other formats -------------------------------------------------------------------------
def test_csv_review_is_protected_and_reads_back(tmp_path):
    data = tricky_data()
    path = tmp_path / "review.csv"
    summary = write_review(data, path)
    assert summary.format == "csv"
    raw = path.read_text(encoding="utf-8")
    for text in ("'=SUM(A1)", "'@here", "'=odd"):
        assert text in raw
    assert "\n+1," in raw and "\n'quoted," in raw     # a plain number and a plain quote stay as they are
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    units = frame["unit"].map(unprotect_text)
    assert set(units) == {"=SUM(A1)", "@here", "+1", "\tpad", "'quoted", "Zürich"}
    # decisions typed in as a spreadsheet keeps them; "'=odd" protected by hand
    frame["decision"] = units.map(
        {"=SUM(A1)": "mixed", "@here": "'=odd", "+1": "neg", "\tpad": "pos", "'quoted": "pos",
         "Zürich": "mixed"})
    frame.to_csv(path, index=False)
    consensus = reconcile(data, path)
    final = dict(zip(consensus.table["unit"], consensus.table["final code"]))
    assert final["@here"] == "=odd" and final["=SUM(A1)"] == "mixed"


@pytest.mark.parametrize("text", TRICKY + ["a|b", "line\nbreak", "", "plain"])
def test_protection_round_trips(text):
    assert unprotect_text(protect_text(text)) == text
    assert protect_text(text)[:1] not in ("=", "+", "-", "@", "\t", "\r") or text in ("+1",)


def test_parquet_review_keeps_text_and_reads_back(tmp_path):
    import pyarrow.parquet as pq

    data = tricky_data()
    path = tmp_path / "review.parquet"
    summary = write_review(data, path)
    assert summary.format == "parquet" and summary.rows_written == 6
    frame = pq.read_table(path).to_pandas()
    # no spreadsheet runs a Parquet cell: text is kept exactly, without the CSV's quote
    assert set(frame["unit"]) == {"=SUM(A1)", "@here", "+1", "\tpad", "'quoted", "Zürich"}
    assert (frame["decision"] == "").all()
    frame["decision"] = frame["unit"].map(
        {"=SUM(A1)": "mixed", "@here": "=odd", "+1": "neg", "\tpad": "pos", "'quoted": "pos",
         "Zürich": "mixed"})
    frame.to_parquet(path, index=False)
    final = dict(zip(*reconcile(data, path).table[["unit", "final code"]].T.to_numpy()))
    assert final["@here"] == "=odd" and final["=SUM(A1)"] == "mixed"


def test_xlsx_past_the_sheet_row_limit_is_refused_before_writing(tmp_path, monkeypatch):
    import agree.output.reconciliation as rec

    data = tricky_data()     # 6 units need review (5 disagreements, 1 coded by one coder), 2 agreed
    monkeypatch.setattr(rec, "SHEET_ROW_LIMIT", 7)
    assert write_review(data, tmp_path / "fits.xlsx").rows_written == 6       # 6 rows + header = 7
    with pytest.raises(AgreeError) as err:
        write_review(data, tmp_path / "review.xlsx", include_agreed=True)
    assert err.value.code == "sheet-rows"
    assert "9 rows (the header included)" in err.value.message and "(7)" in err.value.message
    for alternative in ("-o review.csv", "-o review.parquet", "--include-agreed", "--accept-single"):
        assert alternative in err.value.hint
    assert not (tmp_path / "review.xlsx").exists()
    monkeypatch.setattr(rec, "SHEET_ROW_LIMIT", 5)              # 5 disagreements + header = 6
    with pytest.raises(AgreeError) as err:
        write_review(data, tmp_path / "review.xlsx", accept_single=True)
    assert "--include-agreed" not in err.value.hint and "--accept-single" not in err.value.hint
    assert write_review(data, tmp_path / "review.csv", include_agreed=True).rows_written == 8


def test_markdown_review_escapes_pipes(tmp_path):
    data = tricky_data()
    path = tmp_path / "review.md"
    write_review(data, path)
    lines = path.read_text(encoding="utf-8").splitlines()
    table = [ln for ln in lines if ln.startswith("|")]
    n_columns = len(review_table(data).columns)
    for line in table:
        # unescaped pipes separate exactly n_columns cells
        assert len(line.replace("\\|", "").split("|")) == n_columns + 2
    assert "text of =SUM(A1) \\| with a pipe" in path.read_text(encoding="utf-8")
    assert len(table) == 2 + 6
    with pytest.raises(AgreeError) as err:
        reconcile(data, path)
    assert err.value.code == "format"


# -- set-valued data -----------------------------------------------------------------------
def test_set_valued_round_trip(tmp_path):
    rows = [[{"a", "b"}, {"a"}], [{"c"}, {"c"}], [set(), {"b"}], [{"a", "c"}, {"c", "a"}]]
    data = from_table(rows, coders=["ann", "bo"], unit_ids=["s1", "s2", "s3", "s4"],
                      categories=["c", "b", "a"])
    table = review_table(data)
    assert list(table["unit"]) == ["s1", "s3"]
    assert list(table["ann"]) == ["b; a", "(none)"]  # codebook order, empty set shown
    assert list(table["codes involved"]) == ["b", "b"]
    path = tmp_path / "review.xlsx"
    assert decision_choices(data, path) == '"c,b,a,(none)"'
    fill(path, {"s1": "a;  b", "s3": "(none)"})
    consensus = reconcile(data, path)
    final = dict(zip(consensus.table["unit"], consensus.table["final code"]))
    assert final == {"s1": frozenset({"a", "b"}), "s2": frozenset({"c"}), "s3": frozenset(),
                     "s4": frozenset({"a", "c"})}
    out = write_consensus(consensus, tmp_path / "consensus.csv", data=data)
    back = pd.read_csv(out, dtype=str, keep_default_na=False)
    # the decision "(none)" is the empty set: no final code, in the table and in every file format
    assert list(back["final code"]) == ["b; a", "c", "", "c; a"]
    assert list(back["source"]) == ["decided", "agreed", "decided", "agreed"]
    assert list(back["ann"]) == ["b; a", "c", "(none)", "c; a"]   # a coder's empty set stays visible
    xlsx = write_consensus(consensus, tmp_path / "consensus.xlsx", data=data)
    ws = openpyxl.load_workbook(xlsx).active
    header = [c.value for c in ws[1]]
    column = header.index("final code") + 1
    assert [ws.cell(r, column).value for r in range(2, 6)] == ["b; a", "c", None, "c; a"]

    fill(path, {"s1": "a; x"})
    with pytest.raises(AgreeError) as err:
        reconcile(data, path)
    assert err.value.code == "unknown-code" and "row 2" in err.value.where


# -- majority and unresolved ---------------------------------------------------------------
def test_majority_only_when_strict(tmp_path):
    data = from_table([["a", "a", "b"], ["a", "b", "c"], ["a", "b", None]],
                      unit_ids=["maj", "none", "tie"])
    table = review_table(data)
    consensus = reconcile(data, table, majority=True, allow_unresolved=True)
    final = dict(zip(consensus.table["unit"], consensus.table["final code"]))
    source = dict(zip(consensus.table["unit"], consensus.table["source"]))
    assert final == {"maj": "a", "none": None, "tie": None}
    assert source == {"maj": "majority", "none": "unresolved", "tie": "unresolved"}
    summary = consensus.to_dict()
    assert summary["majority"] == 1 and summary["unresolved"] == 2
    assert summary["unresolved_units"] == ["none", "tie"]


def test_unresolved_raises_and_lists_units():
    data = from_table([["a", "b"]] * 25, unit_ids=[f"u{i:02d}" for i in range(25)])
    with pytest.raises(AgreeError) as err:
        reconcile(data, review_table(data))
    assert err.value.code == "unresolved"
    assert "25 units still need a decision" in err.value.message and "u19" in err.value.message
    assert "u20" not in err.value.message and "and 5 more" in err.value.message
    # review-table rows count as a spreadsheet does: header row 1, first unit row 2
    assert "'u00' (row 2)" in err.value.message and "'u19' (row 21)" in err.value.message


def test_one_unresolved_unit_is_singular_and_names_its_row(tmp_path):
    data = from_table([["a", "b"], ["b", "a"], ["a", "a"]], unit_ids=["u1", "u2", "u3"])
    path = write_review(data, tmp_path / "r.xlsx").path
    units = review_units(path)
    fill(path, {"u1": "a"})
    with pytest.raises(AgreeError) as err:
        reconcile(data, path)
    row = units.index("u2") + 2
    assert err.value.message == f"1 unit still needs a decision: 'u2' (row {row})"
    assert "sheet 'Review'" in err.value.where
    assert "--allow-unresolved (allow_unresolved=True)" in err.value.hint
    consensus = reconcile(data, path, allow_unresolved=True)
    assert consensus.unresolved == ("u2",) and consensus.unresolved_rows == (row,)
    assert consensus.to_dict()["unresolved_review_rows"] == [row]


def test_allow_unresolved_writes_empty_final_code(tmp_path):
    data = from_table([["a", "b"], ["a", "a"]], unit_ids=["u1", "u2"])
    consensus = reconcile(data, review_table(data), allow_unresolved=True)
    out = write_consensus(consensus, tmp_path / "c.csv")
    back = pd.read_csv(out, dtype=str, keep_default_na=False)
    assert list(back["source"]) == ["unresolved", "agreed"]
    assert list(back["final code"]) == ["", "a"]


def test_summary_accounts_for_every_unit():
    data = tricky_data()
    consensus = reconcile(data, review_table(data), allow_unresolved=True)
    d = consensus.to_dict()
    assert (d["agreed"] + d["decided"] + d["majority"] + d["single_coder"] + d["unresolved"]
            + d["not_coded"]) == d["units_read"]
    kept = reconcile(data, review_table(data), allow_unresolved=True, accept_single=True).to_dict()
    assert kept["single_coder"] == 1 and kept["unresolved"] == d["unresolved"] - 1
    assert (kept["agreed"] + kept["decided"] + kept["majority"] + kept["single_coder"] + kept["unresolved"]
            + kept["not_coded"]) == kept["units_read"]
    assert d["written"] == d["units_read"] == 9
    assert isinstance(consensus, Consensus)


# -- hand edits that break the file --------------------------------------------------------
def test_unknown_decision_names_file_sheet_row_column_and_closest_code(tmp_path):
    data = tricky_data()
    path = tmp_path / "review.xlsx"
    write_review(data, path)
    units = review_units(path)
    row = units.index("+1") + 2
    fill(path, {"+1": "Mixd"})
    with pytest.raises(AgreeError) as err:
        reconcile(data, path, allow_unresolved=True)
    e = err.value
    assert e.code == "unknown-code"
    assert e.where == f"{path}, sheet 'Review', row {row}, column 'decision'"
    assert "'mixed'" in e.hint


def test_unknown_how_decided_is_reported():
    data = from_table([["a", "b"]], unit_ids=["u1"])
    table = review_table(data)
    table.loc[0, "decision"] = "a"
    table.loc[0, "how decided"] = "coin toss"
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    assert err.value.code == "unknown-method" and "row 2" in err.value.where


def test_deleted_changed_and_duplicated_ids_in_one_error(tmp_path):
    data = tricky_data()
    path = tmp_path / "review.xlsx"
    write_review(data, path)
    wb = openpyxl.load_workbook(path)
    ws = wb[REVIEW_SHEET]
    units = [ws.cell(r, 1).value for r in range(2, ws.max_row + 1)]
    # delete the row of '@here', change '+1' to a typo, duplicate '=SUM(A1)' at the end
    changed_row = units.index("+1") + 2
    ws.cell(changed_row, 1).value = "+2"
    ws.cell(changed_row, 1).data_type = "s"
    first_row = units.index("=SUM(A1)") + 2
    ws.delete_rows(units.index("@here") + 2)
    end = ws.max_row + 1
    for c in range(1, ws.max_column + 1):
        ws.cell(end, c).value = ws.cell(first_row, c).value
        ws.cell(end, c).data_type = ws.cell(first_row, c).data_type
    wb.save(path)
    shift = 1 if changed_row > units.index("@here") + 2 else 0
    first_after = first_row - (1 if first_row > units.index("@here") + 2 else 0)
    with pytest.raises(AgreeError) as err:
        reconcile(data, path, allow_unresolved=True)
    e = err.value
    assert e.code == "review-mismatch"
    assert f"'+2' (row {changed_row - shift})" in e.message
    assert f"'=SUM(A1)' (rows {first_after}, {end})" in e.message
    assert "'@here'" in e.message and "'+1'" in e.message
    assert str(path) in e.where


def test_mismatch_and_unknown_decisions_collected_together():
    data = from_table([["a", "b"], ["a", "c"]], unit_ids=["u1", "u2"])
    table = review_table(data)
    table.loc[0, "decision"] = "zzz"
    table.loc[1, "unit"] = "u9"
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    codes = [p.code for p in err.value.problems]
    assert codes == ["review-mismatch", "unknown-code"]


def test_missing_columns_named():
    data = from_table([["a", "b"]], unit_ids=["u1"])
    table = review_table(data).rename(columns={"decision": "verdict"})
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    assert err.value.code == "review-columns" and "'decision'" in err.value.message


def test_columns_found_by_header_name(tmp_path):
    data = from_table([["a", "b"], ["b", "b"]], unit_ids=["u1", "u2"])
    path = tmp_path / "review.xlsx"
    write_review(data, path)
    wb = openpyxl.load_workbook(path)
    ws = wb[REVIEW_SHEET]
    ws.move_range("A1:A2", cols=ws.max_column)  # unit column moved to the far right
    ws.cell(2, header_index(ws)["decision"]).value = "b"
    wb.move_sheet(REVIEW_SHEET, offset=2)
    wb.save(path)
    assert list(reconcile(data, path).table["final code"]) == ["b", "b"]


# -- writing safely ------------------------------------------------------------------------
def test_refuses_to_overwrite_inputs_even_with_force(tmp_path):
    from agree.io.readers import read

    source = tmp_path / "coding.csv"
    source.write_text("unit,ann,bo\nu1,pos,neg\nu2,pos,pos\n", encoding="utf-8")
    before = source.read_bytes()
    data = read(source)
    for force in (False, True):
        with pytest.raises(AgreeError) as err:
            write_review(data, source, format="csv", force=force)
        assert err.value.code == "overwrite-input"
    assert source.read_bytes() == before
    review = tmp_path / "review.xlsx"
    write_review(data, review)
    fill(review, {"u1": "pos"})
    consensus = reconcile(data, review)
    for target in (review, source):
        with pytest.raises(AgreeError) as err:
            write_consensus(consensus, target.with_suffix(target.suffix), format="csv",
                            inputs=[source], force=True)
        assert err.value.code == "overwrite-input"
    assert source.read_bytes() == before


def test_existing_output_needs_force(tmp_path):
    data = from_table([["a", "b"]], unit_ids=["u1"])
    path = tmp_path / "review.xlsx"
    path.write_bytes(b"keep me")
    with pytest.raises(AgreeError) as err:
        write_review(data, path)
    assert err.value.code == "output-exists" and path.read_bytes() == b"keep me"
    write_review(data, path, force=True)
    assert review_units(path) == ["u1"]
    assert no_temp_files(tmp_path)


def test_atomic_write_leaves_nothing_after_a_crash(tmp_path, monkeypatch):
    module = importlib.import_module("agree.output.reconciliation")  # the module, not the function agree.reconcile

    data = from_table([["a", "b"]], unit_ids=["u1"])

    def crash(tmp, *args):
        Path(tmp).write_bytes(b"half a workbook")
        raise RuntimeError("disk full")

    monkeypatch.setattr(module, "_write_review_xlsx", crash)
    with pytest.raises(RuntimeError):
        write_review(data, tmp_path / "review.xlsx")
    assert os.listdir(tmp_path) == []

    old = tmp_path / "review.xlsx"
    old.write_bytes(b"previous")
    with pytest.raises(RuntimeError):
        write_review(data, old, force=True)
    assert old.read_bytes() == b"previous"  # the old file is untouched
    assert os.listdir(tmp_path) == ["review.xlsx"]


def test_format_inferred_and_checked(tmp_path):
    data = from_table([["a", "b"]], unit_ids=["u1"])
    assert write_review(data, tmp_path / "r.md").format == "md"
    with pytest.raises(AgreeError) as err:
        write_review(data, tmp_path / "r.docx")
    assert err.value.code == "format"


def test_numeric_codes_decided_as_numbers_or_text(tmp_path):
    data = from_table([[1, 3], [2, 2], [-1, 3]], unit_ids=["a", "b", "c"], categories=[-1, 1, 2, 3],
                      level="ordinal")
    path = tmp_path / "review.xlsx"
    write_review(data, path)
    fill(path, {"a": 2, "c": "-1"})
    final = reconcile(data, path).table["final code"].tolist()
    assert final == [2, 2, -1]
    csv = tmp_path / "review.csv"
    write_review(data, csv)
    assert "'-1" in csv.read_text(encoding="utf-8")


def test_consensus_from_a_dataframe_names_it_review_table_and_displays_in_a_notebook():
    data = from_table([["a", "a"], ["<i>b</i>", "a"], ["b", None]], coders=["ann", "bo"])
    review = review_table(data)
    review["decision"] = "a"
    cons = reconcile(data, review)
    assert cons.review == "review table"           # as the docstring says
    assert Consensus.__dataclass_fields__["review"].default == "review table"
    page = cons._repr_html_()
    assert "Consensus: " in page and "(decisions from review table)" in page and "<table" in page
    assert "&lt;i&gt;b&lt;/i&gt;" in page and "<i>b</i>" not in page
    assert "–" in page and "None" not in page      # missing codes shown as an en dash


# -- review files in every format the loaders read ------------------------------------------------
def review_data():
    return from_table([["praise", "complaint"], ["idée", "idée"], ["complaint", "idée"]],
                      coders=["ana", "ben"], unit_ids=["b1", "b2", "b3"])


@pytest.mark.parametrize("fmt", FORMATS)
def test_review_decisions_in_every_format(tmp_path, fmt):
    # before: a review CSV saved by a spreadsheet with ';' as separator or in a legacy encoding
    # failed (an internal error for the encoding); TSV, Parquet and other suffixes were refused
    data = review_data()
    table = review_table(data)
    table["decision"] = ["praise", "idée"]
    table["how decided"] = ["discussion", "adjudicator"]
    path = write_table(table, tmp_path, fmt, stem="review")
    final = reconcile(data, path)
    assert final.table["final code"].tolist() == ["praise", "idée", "idée"]
    assert final.table["source"].tolist() == ["decided", "agreed", "decided"]


def test_review_csv_with_semicolons_from_a_spreadsheet(tmp_path):
    data = review_data()
    path = tmp_path / "review.csv"
    path.write_bytes("unit;status;decision;how decided\nb1;needs review;praise;discussion\n"
                     "b3;needs review;idée;discussion\n".encode("cp1252"))
    assert reconcile(data, path).table["final code"].tolist() == ["praise", "idée", "idée"]


def test_review_found_below_a_title_row(tmp_path):
    data = review_data()
    path = tmp_path / "review.xlsx"
    table = review_table(data)
    table["decision"] = ["praise", "idée"]
    with pd.ExcelWriter(path) as xl:
        pd.DataFrame([["Review of the library comments"]]).to_excel(xl, sheet_name="Review", index=False,
                                                                    header=False)
        table.to_excel(xl, sheet_name="Review", index=False, startrow=2)
    assert reconcile(data, path).table["final code"].tolist() == ["praise", "idée", "idée"]


def test_review_file_errors(tmp_path):
    data = review_data()
    empty = tmp_path / "review.csv"
    empty.write_bytes(b"")
    with pytest.raises(AgreeError) as err:       # before: an internal pandas error
        reconcile(data, empty)
    assert err.value.code == "empty-file" and "review.csv" in str(err.value)
    other = tmp_path / "other.csv"
    other.write_text("unit,verdict\nb1,praise\n")
    with pytest.raises(AgreeError) as err:
        reconcile(data, other)
    assert err.value.code == "review-columns" and "'decision'" in err.value.message


# -- units one coder coded: listed, or kept as coded only when asked -------------------------
def single_data():
    """Two coders; 's1' coded by ann only, 's2' by bo only, 'none' by nobody."""
    return from_table([["a", "b"], ["a", "a"], ["b", None], [None, "c"], [None, None], ["c", "c"]],
                      coders=["ann", "bo"], unit_ids=["d1", "ok1", "s1", "s2", "none", "ok2"],
                      categories=["a", "b", "c"])


@pytest.mark.parametrize("suffix", ["xlsx", "csv", "md"])
def test_units_one_coder_coded_are_listed_for_review_in_every_format(tmp_path, suffix):
    """Before: a unit one coder coded went into the consensus with that coder's code, never
    listed. Now it is a row of the review list (after the disagreements), with its reason."""
    data = single_data()
    table = review_table(data)
    assert list(table["unit"]) == ["d1", "s1", "s2"]
    assert list(table["status"]) == ["disagreement", "coded by one coder only", "coded by one coder only"]
    assert list(table["codes involved"]) == ["a; b", "b", "c"]
    summary = write_review(data, tmp_path / f"review.{suffix}")
    assert (summary.needing_review, summary.disagreements, summary.single_coder) == (3, 1, 2)
    assert summary.left_out == (("none", "coded by no coder"),)
    assert summary.units_read == summary.agreed + summary.needing_review + len(summary.left_out)
    text = (tmp_path / f"review.{suffix}").read_bytes()
    if suffix == "xlsx":
        ws = openpyxl.load_workbook(tmp_path / "review.xlsx")[REVIEW_SHEET]
        rows = [[c.value for c in r] for r in ws.iter_rows(min_row=2)]
        assert [r[0] for r in rows] == ["d1", "s1", "s2"] and rows[1][1] == "coded by one coder only"
        about = {r[0]: r[1] for r in openpyxl.load_workbook(tmp_path / "review.xlsx")[ABOUT_SHEET]
                 .iter_rows(values_only=True) if r[0]}
        assert about["of which coded by one coder only"] == 2 and about["none"] == "coded by no coder"
    else:
        assert text.decode("utf-8").count("coded by one coder only") >= 2


def test_a_unit_one_coder_coded_needs_a_decision_unless_accepted(tmp_path):
    data = single_data()
    path = tmp_path / "review.xlsx"
    write_review(data, path)
    fill(path, {"d1": "a"})
    with pytest.raises(AgreeError) as err:
        reconcile(data, path)
    assert err.value.code == "unresolved"
    assert err.value.message.startswith("2 units still need a decision (all coded by one coder only)")
    assert "--accept-single (accept_single=True)" in err.value.hint
    assert "--majority" not in err.value.hint            # a majority never settles them
    # one coder is no majority
    open_ = reconcile(data, path, majority=True, allow_unresolved=True)
    assert open_.unresolved == ("s1", "s2") and open_.majority == 0
    # decided in the review like any other unit
    fill(path, {"s1": "a", "s2": "c"})
    done = reconcile(data, path)
    source = dict(zip(done.table["unit"], done.table["source"]))
    assert source == {"d1": "decided", "ok1": "agreed", "s1": "decided", "s2": "decided",
                      "none": "not coded", "ok2": "agreed"}
    assert dict(zip(done.table["unit"], done.table["final code"]))["s1"] == "a"


def test_accept_single_keeps_the_code_and_says_so_everywhere(tmp_path):
    data = single_data()
    path = tmp_path / "review.xlsx"
    summary = write_review(data, path, accept_single=True)
    assert review_units(path) == ["d1"]
    assert dict(summary.left_out) == {
        "s1": "coded by one coder only; kept as coded, without review (accept single)",
        "s2": "coded by one coder only; kept as coded, without review (accept single)",
        "none": "coded by no coder"}
    assert summary.to_dict()["single_coder_listed"] is False
    about = {r[0]: r[1] for r in openpyxl.load_workbook(path)[ABOUT_SHEET].iter_rows(values_only=True) if r[0]}
    assert about["units coded by one coder only, not listed (kept as coded: accept single)"] == 2

    fill(path, {"d1": "b"})
    consensus = reconcile(data, path, accept_single=True)
    row = consensus.table.set_index("unit")
    assert row.loc["s1", "final code"] == "b" and row.loc["s1", "source"] == "single coder"
    assert row.loc["s2", "final code"] == "c" and "without review" in row.loc["s2", "notes"]
    assert consensus.single_coder == ("s1", "s2") and consensus.not_coded == ("none",)
    assert any("2 units coded by one coder only kept that coder's code without review" in n
               for n in consensus.notes)
    d = consensus.to_dict()
    assert d["single_coder"] == 2 and d["accept_single"] is True
    assert "2 kept from a single coder" in repr(consensus) and "2 kept from a single coder" in consensus._repr_html_()
    out = write_consensus(consensus, tmp_path / "consensus.csv", data=data)
    back = pd.read_csv(out, dtype=str, keep_default_na=False).set_index("unit")
    assert back.loc["s1", "source"] == "single coder" and "accept single" in back.loc["s1", "notes"]

    # the report's consensus summary and methods sentence say how those units were settled
    from agree.output.report import build_report

    report = build_report(data, n_resamples=0, seed=1, consensus=consensus)
    assert report.to_dict()["consensus"]["by_source"]["single coder"] == 2
    assert "were coded by one coder only and kept that coder's code without review" in report.methods

    # a review list made with accept_single, reconciled without it: the units still need a decision
    with pytest.raises(AgreeError) as err:
        reconcile(data, path)
    assert "'s1', 's2'" in err.value.message and "--accept-single" in err.value.hint


# -- the decision "(none)" and codes joined the wrong way --------------------------------------
def test_none_decision_means_no_code_for_single_code_data(tmp_path):
    data = from_table([["a", "b"], ["b", "c"], ["a", "a"]], unit_ids=["u1", "u2", "u3"],
                      categories=["a", "b", "c"])
    path = tmp_path / "review.xlsx"
    assert decision_choices(data, path) == '"a,b,c,(none)"'
    fill(path, {"u1": "(none)", "u2": " (None) "})
    consensus = reconcile(data, path)
    assert consensus.table["final code"].tolist() == [None, None, "a"]
    assert consensus.table["source"].tolist() == ["decided", "decided", "agreed"]
    for suffix in ("csv", "xlsx"):
        out = write_consensus(consensus, tmp_path / f"consensus.{suffix}", data=data)
        back = (pd.read_csv(out, dtype=str, keep_default_na=False) if suffix == "csv"
                else pd.read_excel(out, dtype=str).fillna(""))
        assert back["final code"].tolist() == ["", "", "a"], suffix
    # a code named "(none)" in the codebook stays that code
    named = from_table([["(none)", "b"]], unit_ids=["u1"], categories=["(none)", "b"])
    table = review_table(named)
    table["decision"] = "(none)"
    assert reconcile(named, table).table["final code"].tolist() == ["(none)"]


@pytest.mark.parametrize("typed, written", [
    ("a, b", "a; b"), ("a,b", "a; b"), ("a | b", "a; b"), ("a/b", "a; b"), ("a and b", "a; b"),
    ("A AND c", "a; c"), ("a; b, c", "a; b; c")])
def test_codes_joined_by_another_separator_get_the_right_one(typed, written):
    """Before: 'a, b' got 'did you mean ...?' with some code; now the hint names the separator."""
    data = from_table([[{"a"}, {"b"}]], unit_ids=["u1"], categories=["a", "b", "c"])
    table = review_table(data)
    table["decision"] = typed
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    assert err.value.code == "unknown-code"
    assert err.value.hint.startswith(f"separate codes with '; ': write '{written}'")
    assert "did you mean" not in err.value.hint
    table["decision"] = written
    assert reconcile(data, table).table["final code"].tolist() == [frozenset(written.split("; "))]


def test_separator_hints_for_single_code_data_and_real_codes():
    data = from_table([["yes", "no"], ["no", "yes"]], unit_ids=["u1", "u2"],
                      categories=["yes", "no", "yes, partly"])
    table = review_table(data)
    table["decision"] = ["yes, partly", "yes / no"]        # the first is a code with a comma in it
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    assert "'yes / no'" in err.value.message and "u2" in err.value.message
    assert err.value.hint == "this variable takes one code per unit, and the cell holds 2 ('yes' and 'no'): choose one"
    table["decision"] = ["yes, partly", "maybe, perhaps"]   # parts that are not codes: the usual hint
    with pytest.raises(AgreeError) as err:
        reconcile(data, table)
    assert err.value.hint.startswith(("did you mean", "the codes are"))
    set_data = from_table([[{"a"}, {"b"}]], unit_ids=["u1"], categories=["a", "b"])
    table = review_table(set_data)
    table["decision"] = "(none); a"
    with pytest.raises(AgreeError) as err:
        reconcile(set_data, table)
    assert "no code applies" in err.value.hint
