"""Coding workbooks and the manifest (agree.output.sheets): layout, drop-down, shuffles, safety,
and the round trip sample -> fill in -> read -> alpha (checked against the krippendorff package)."""

import hashlib
import json

import krippendorff
import numpy as np
import openpyxl
import pandas as pd
import pytest

from agree.analysis.sampling import draw_sample, read_corpus
from agree.core.model import AgreeError
from agree.output.sheets import write_coding_sheets
from tests.analysis.test_sampling import CODES, make_corpus


def _read_sheet(path):
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["coding"]
    ws = wb["coding"]
    rows = list(ws.iter_rows(values_only=True))
    return ws, rows


def test_workbooks_and_manifest(tmp_path):
    corpus_file = tmp_path / "units.csv"
    make_corpus().to_csv(corpus_file, index=False)
    corpus = read_corpus(corpus_file)
    sample = draw_sample(corpus, 25, stratify="participant", seed=5)
    out = tmp_path / "sheets"
    written = write_coding_sheets(sample, out, coders=["ana", "ben"], codebook=CODES)
    assert sorted(p.name for p in out.iterdir()) == ["ana.xlsx", "ben.xlsx", "manifest.csv", "manifest.json"]
    ws, rows = _read_sheet(out / "ana.xlsx")
    # the stratify column follows the unit id, so the sheets can be scored by participant
    assert rows[0] == ("unit_id", "participant", "text", "code", "notes")
    assert len(rows) == 26 and all(r[3] is None and r[4] is None for r in rows[1:])
    by_id = dict(zip(corpus["unit_id"], corpus["participant"]))
    assert all(by_id[r[0]] == r[1] for r in rows[1:])
    assert ws["B2"].fill.start_color.rgb.endswith("EDEDED") and ws["B1"].comment is not None
    assert written.context_columns == ("participant",)
    # not shuffled: corpus order, the same for every coder
    _, rows_b = _read_sheet(out / "ben.xlsx")
    assert [r[0] for r in rows[1:]] == [r[0] for r in rows_b[1:]] == sorted(r[0] for r in rows[1:])
    dvs = ws.data_validations.dataValidation
    assert len(dvs) == 1 and dvs[0].type == "list"
    assert dvs[0].formula1 == '"praise,complaint,question"'
    assert str(dvs[0].sqref) == "D2:D26"
    assert written.drop_down == "inline list"

    manifest = pd.read_csv(out / "manifest.csv", dtype=str)
    assert list(manifest.columns) == ["unit_id", "stratum", "draw_order", "corpus_row"]
    assert list(manifest["draw_order"].astype(int)) == list(range(1, 26))
    assert set(manifest["unit_id"]) == set(sample["unit_id"])
    meta = json.loads((out / "manifest.json").read_text())
    assert meta["seed"] == 5 and meta["n"] == 25 and meta["stratify"] == "participant"
    assert meta["corpus_checksum"] == hashlib.sha256(corpus_file.read_bytes()).hexdigest()
    assert meta["date"] and meta["coders"] == ["ana", "ben"]


def test_shuffle_gives_each_coder_an_order(tmp_path):
    sample = draw_sample(make_corpus(), 40, seed=2)
    write_coding_sheets(sample, tmp_path / "s", coders=["ana", "ben", "cai"], shuffle=True)
    orders = [[r[0] for r in _read_sheet(tmp_path / "s" / f"{c}.xlsx")[1][1:]] for c in ("ana", "ben", "cai")]
    assert all(sorted(o) == sorted(orders[0]) for o in orders)
    assert orders[0] != orders[1] != orders[2]
    write_coding_sheets(sample, tmp_path / "t", coders=["ana", "ben", "cai"], shuffle=True)
    again = [r[0] for r in _read_sheet(tmp_path / "t" / "ana.xlsx")[1][1:]]
    assert again == orders[0]                                  # reproducible from the seed


def test_refuses_non_empty_folder_unless_forced(tmp_path):
    sample = draw_sample(make_corpus(), 10, seed=2)
    (tmp_path / "keep.txt").write_text("someone's notes")
    with pytest.raises(AgreeError) as err:
        write_coding_sheets(sample, tmp_path, coders=["ana", "ben"])
    assert err.value.code == "output-exists"
    write_coding_sheets(sample, tmp_path, coders=["ana", "ben"], force=True)
    assert (tmp_path / "keep.txt").read_text() == "someone's notes"
    assert (tmp_path / "ana.xlsx").exists()


def test_never_overwrites_the_corpus(tmp_path):
    corpus_file = tmp_path / "ana.xlsx"
    make_corpus(20).to_excel(corpus_file, index=False)
    before = corpus_file.read_bytes()
    sample = draw_sample(read_corpus(corpus_file), 5, seed=1)
    with pytest.raises(AgreeError) as err:
        write_coding_sheets(sample, tmp_path, coders=["ana", "ben"], force=True)
    assert err.value.code == "overwrite-input"
    assert corpus_file.read_bytes() == before


@pytest.mark.parametrize("coders,code", [(["ana"], "too-few-coders"), (["ana", "ANA"], "duplicate-coder"),
                                         (["ana", "b/c"], "bad-coder-name"), (["ana", "manifest"], "bad-coder-name")])
def test_bad_coder_names(tmp_path, coders, code):
    sample = draw_sample(make_corpus(), 5, seed=1)
    with pytest.raises(AgreeError) as err:
        write_coding_sheets(sample, tmp_path / "x", coders=coders)
    assert code in {err.value.code} | {p.code for p in err.value.problems}


def test_long_codebook_leaves_the_column_free(tmp_path):
    sample = draw_sample(make_corpus(), 5, seed=1)
    codebook = [f"category number {i} with a long name" for i in range(20)]
    written = write_coding_sheets(sample, tmp_path / "x", coders=["ana", "ben"], codebook=codebook)
    assert written.drop_down is None
    ws, _ = _read_sheet(tmp_path / "x" / "ana.xlsx")
    assert not ws.data_validations.dataValidation

# -- round trip: sample -> fill in -> read -> alpha ---------------------------------------------------

def test_sample_to_score_round_trip(tmp_path):
    import agree
    from agree.io.readers import read as readers_read

    read = getattr(agree, "read", readers_read)     # agree.read once agree/__init__.py exports it
    sample = draw_sample(make_corpus(), 30, seed=8)
    out = tmp_path / "sheets"
    write_coding_sheets(sample, out, coders=["ana", "ben", "cai"], codebook=CODES, shuffle=True)
    rng = np.random.default_rng(8)
    truth = {uid: CODES[rng.integers(3)] for uid in sample["unit_id"]}
    filled = {}
    for coder in ("ana", "ben", "cai"):
        wb = openpyxl.load_workbook(out / f"{coder}.xlsx")
        ws = wb["coding"]
        filled[coder] = {}
        code_at = [c.value for c in ws[1]].index("code")
        for row in ws.iter_rows(min_row=2):
            uid = row[0].value
            code = truth[uid] if rng.random() < 0.8 else CODES[rng.integers(3)]
            if coder == "cai" and rng.random() < 0.1:
                code = None                                      # cai skipped a few units
            row[code_at].value = code
            filled[coder][uid] = code
        wb.save(out / f"{coder}.xlsx")

    data = read([out / "ana.xlsx", out / "ben.xlsx", out / "cai.xlsx"])
    assert sorted(data.coders) == ["ana", "ben", "cai"]
    assert data.n_units == 30
    result = agree.krippendorff_alpha(data, n_resamples=0)
    units = sorted(truth)
    table = np.array([[np.nan if filled[c][u] is None else CODES.index(filled[c][u]) for u in units]
                      for c in ("ana", "ben", "cai")], dtype=float)
    want = krippendorff.alpha(reliability_data=table, level_of_measurement="nominal")
    assert result.estimate == pytest.approx(want, abs=1e-12)

# -- context columns in the sheets --------------------------------------------------------------

def test_keep_columns_follow_the_unit_id(tmp_path):
    corpus = make_corpus(30)
    corpus["site"] = ["north", "south", "east"] * 10
    sample = draw_sample(corpus, 9, stratify="participant", seed=1)
    written = write_coding_sheets(sample, tmp_path / "s", coders=["ana", "ben"], keep=["site", "participant"])
    _, rows = _read_sheet(tmp_path / "s" / "ana.xlsx")
    assert rows[0] == ("unit_id", "participant", "site", "text", "code", "notes")
    assert written.context_columns == ("participant", "site")
    meta = json.loads((tmp_path / "s" / "manifest.json").read_text())
    assert meta["context_columns"] == ["participant", "site"]


@pytest.mark.parametrize("keep,code", [(["nope"], "no-keep-column"), (["Code"], "column-clash")])
def test_bad_keep_columns(tmp_path, keep, code):
    corpus = make_corpus(10)
    corpus["Code"] = "x"
    sample = draw_sample(corpus, 3, seed=1)
    with pytest.raises(AgreeError) as err:
        write_coding_sheets(sample, tmp_path / "s", coders=["ana", "ben"], keep=keep)
    assert err.value.code == code


def test_filled_sheets_score_by_the_stratify_column(tmp_path):
    """`agree score sheets/*.xlsx --keep participant --cluster participant` on the filled sheets."""
    import subprocess
    import sys
    from pathlib import Path

    corpus = make_corpus(200, seed=2)
    sample = draw_sample(corpus, 60, stratify="participant", seed=2)
    out = tmp_path / "sheets"
    write_coding_sheets(sample, out, coders=["ana", "ben"], codebook=CODES, shuffle=True)
    rng = np.random.default_rng(2)
    for coder in ("ana", "ben"):
        wb = openpyxl.load_workbook(out / f"{coder}.xlsx")
        ws = wb["coding"]
        code_at = [c.value for c in ws[1]].index("code")
        for row in ws.iter_rows(min_row=2):
            row[code_at].value = CODES[(int(row[0].value[1:]) + (rng.random() < 0.2)) % 3]
        wb.save(out / f"{coder}.xlsx")
    agree_bin = Path(sys.executable).with_name("agree")
    res = subprocess.run([str(agree_bin), "score", str(out / "ana.xlsx"), str(out / "ben.xlsx"),
                          "--keep", "participant", "--cluster", "participant", "--boot", "200",
                          "--format", "json"], capture_output=True, text=True)
    assert res.returncode == 0, res.stderr
    assert "participant" in res.stdout

    import agree
    from agree.io.readers import read as readers_read

    data = getattr(agree, "read", readers_read)([out / "ana.xlsx", out / "ben.xlsx"], keep=["participant"])
    groups = dict(zip(corpus["unit_id"], corpus["participant"]))
    assert [str(g) for g in data.columns["participant"]] == [groups[u] for u in data.unit_ids]


def test_several_codes_in_a_cell_are_allowed_and_read_back_as_sets(tmp_path):
    from agree.io.readers import read

    sample = draw_sample(make_corpus(), 6, seed=3)
    write_coding_sheets(sample, tmp_path / "sets", coders=["ana", "ben"], codebook=CODES)
    for coder, cell in (("ana", "praise; question"), ("ben", "question;praise")):
        wb = openpyxl.load_workbook(tmp_path / "sets" / f"{coder}.xlsx")
        ws = wb["coding"]
        (dv,) = ws.data_validations.dataValidation
        assert dv.errorStyle == "warning" and "separated by '; '" in dv.error   # a set may be kept
        code_at = [c.value for c in ws[1]].index("code")
        for i, row in enumerate(ws.iter_rows(min_row=2)):
            row[code_at].value = cell if i == 0 else CODES[i % 3]
        wb.save(tmp_path / "sets" / f"{coder}.xlsx")
    data = read([tmp_path / "sets" / "ana.xlsx", tmp_path / "sets" / "ben.xlsx"], codebook=CODES)
    assert data.set_valued and frozenset({"praise", "question"}) in data.values
    write_coding_sheets(sample, tmp_path / "one", coders=["ana", "ben"], codebook=CODES, several_codes=False)
    (dv,) = openpyxl.load_workbook(tmp_path / "one" / "ana.xlsx")["coding"].data_validations.dataValidation
    assert dv.errorStyle in (None, "stop")
