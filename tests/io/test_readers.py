"""Readers: every layout and format gives the same CodingData; detection, options and errors.

All fixtures are synthetic, written into tmp_path by the tests: a made-up study in which three
coders (ana, ben, chloe) code short comments from a staff survey about a canteen.
"""

from __future__ import annotations

import hashlib
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest

from agree.cli import options as r
from agree.core.model import AgreeError
from agree.io.codebook import Codebook
from agree.io.readers import read

CODERS = ["ana", "ben", "chloe"]
UNITS = ["c1", "c2", "c3", "c4"]
TEXTS = [
    "The soup was cold again and nobody at the counter seemed to care",
    "Great new salad bar, I go there every day now with my team",
    "Queue at noon is far too long for a thirty minute break",
    "Prices went up but the portions are smaller than last year",
]
# units x coders; None = the coder did not code the unit
CODES = [
    ["complaint", "complaint", "complaint"],
    ["praise", "praise", "suggestion"],
    ["complaint", None, "complaint"],
    ["complaint", "suggestion", "complaint"],
]


def wide_frame() -> pd.DataFrame:
    frame = pd.DataFrame(CODES, columns=CODERS)
    frame.insert(0, "excerpt", TEXTS)
    frame.insert(0, "excerpt_id", UNITS)
    return frame


def long_frame() -> pd.DataFrame:
    rows = [(u, c, CODES[i][j]) for i, u in enumerate(UNITS) for j, c in enumerate(CODERS)
            if CODES[i][j] is not None]
    return pd.DataFrame(rows, columns=["unit_id", "coder", "code"])


def write(frame: pd.DataFrame, path, sheet: str = "Sheet1"):
    suffix = path.suffix
    if suffix == ".csv":
        frame.to_csv(path, index=False)
    elif suffix == ".tsv":
        frame.to_csv(path, index=False, sep="\t")
    elif suffix == ".xlsx":
        frame.to_excel(path, index=False, sheet_name=sheet)
    elif suffix == ".parquet":
        frame.to_parquet(path, index=False)
    return path


def write_sheets(path, frames: dict[str, pd.DataFrame]):
    with pd.ExcelWriter(path) as xl:
        for name, f in frames.items():
            f.to_excel(xl, sheet_name=name, index=False)
    return path


def expected_labels() -> pd.DataFrame:
    return pd.DataFrame(CODES, index=pd.Index(UNITS, name="unit"), columns=CODERS)


def assert_same_coding(data):
    assert list(data.coders) == CODERS
    assert list(data.unit_ids) == UNITS
    assert data.values == ("complaint", "praise", "suggestion")
    def as_none(frame):
        frame = frame.astype(object)
        return frame.where(frame.notna(), None)

    pd.testing.assert_frame_equal(as_none(data.labels()), as_none(expected_labels()), check_names=False)
    assert data.report.units_read == 4
    assert data.report.values_read == 11
    assert data.report.values_missing == 1


FORMATS = [".csv", ".tsv", ".xlsx", ".parquet"]


# -- layouts x formats ----------------------------------------------------------------------
@pytest.mark.parametrize("suffix", FORMATS)
def test_wide_round_trip(tmp_path, suffix):
    data = read(write(wide_frame(), tmp_path / f"wide{suffix}"))
    assert_same_coding(data)
    assert data.report.detected.startswith("wide layout: unit column 'excerpt_id', 3 coder columns "
                                           "(ana, ben, chloe), text column 'excerpt'")
    assert list(data.text) == TEXTS
    assert not data.set_valued and data.level == "nominal"


@pytest.mark.parametrize("suffix", FORMATS)
def test_long_round_trip(tmp_path, suffix):
    data = read(write(long_frame(), tmp_path / f"long{suffix}"))
    assert_same_coding(data)
    assert data.report.detected.startswith("long layout: unit column 'unit_id', coder column 'coder'")


@pytest.mark.parametrize("suffix", [".csv", ".xlsx", ".parquet"])
def test_one_file_per_coder(tmp_path, suffix):
    paths = []
    for j, c in enumerate(CODERS):
        f = pd.DataFrame({"id": UNITS, "label": [row[j] for row in CODES]})
        paths.append(write(f, tmp_path / f"{c}{suffix}"))
    data = read(paths)
    assert_same_coding(data)
    assert data.report.detected.startswith("one file per coder: 3 files (ana, ben, chloe)")
    assert len(data.report.checksums) == 3


def test_one_sheet_per_coder(tmp_path):
    frames = {c: pd.DataFrame({"unit": UNITS, "code": [row[j] for row in CODES]}) for j, c in enumerate(CODERS)}
    data = read(write_sheets(tmp_path / "coders.xlsx", frames))
    assert_same_coding(data)
    assert data.report.detected.startswith("one sheet per coder: 3 sheets (ana, ben, chloe)")
    assert data.provenance.where(0, 1) == f"{tmp_path / 'coders.xlsx'}, sheet 'ben', row 2, column 'code'"


def test_per_coder_files_merge_on_unit_id_in_any_order(tmp_path):
    a = pd.DataFrame({"unit": ["u1", "u2", "u3"], "code": ["x", "y", "x"]})
    b = pd.DataFrame({"unit": ["u3", "u4", "u1"], "code": ["x", "x", "y"]})
    data = read([write(a, tmp_path / "a.csv"), write(b, tmp_path / "b.csv")])
    assert list(data.unit_ids) == ["u1", "u2", "u3", "u4"]
    lab = data.labels()
    assert lab.loc["u1"].tolist() == ["x", "y"]
    assert lab.loc["u2", "a"] == "y" and pd.isna(lab.loc["u2", "b"])
    assert pd.isna(lab.loc["u4", "a"]) and lab.loc["u4", "b"] == "x"
    assert data.provenance.where(0, 1).endswith("b.csv, row 4, column 'code'")


def test_provenance_rows_and_sources(tmp_path):
    data = read(write(long_frame(), tmp_path / "long.xlsx"))
    # c2 by chloe is the 6th data row -> spreadsheet row 7
    assert data.provenance.where(1, 2).endswith("long.xlsx, sheet 'Sheet1', row 7, column 'code'")
    assert data.provenance.row[2, 1] == -1  # ben did not code c3


def test_checksums_and_files(tmp_path):
    path = write(wide_frame(), tmp_path / "w.csv")
    data = read(path)
    assert data.report.files == (str(path),)
    assert data.report.checksums[str(path)] == hashlib.sha256(path.read_bytes()).hexdigest()


# -- detection and overrides ----------------------------------------------------------------
def test_semicolon_delimited_csv_detected(tmp_path):
    path = tmp_path / "semi.csv"
    wide_frame().to_csv(path, sep=";", index=False)
    data = read(path)
    assert_same_coding(data)
    assert any("';'" in n for n in data.report.notes)


def test_overrides_of_column_names(tmp_path):
    frame = long_frame().rename(columns={"unit_id": "passage_no", "coder": "who", "code": "theme"})
    path = write(frame, tmp_path / "odd.csv")
    with pytest.raises(AgreeError):  # 'who' and 'theme' are not recognisable headers
        read(path, layout="long")
    data = read(path, unit="passage_no", coder="who", code="theme")
    assert_same_coding(data)
    assert "coder column 'who'" in data.report.detected


def test_wide_coder_list_and_keep(tmp_path):
    frame = wide_frame()
    frame["wave"] = ["1", "1", "2", "2"]
    frame["remarks"] = ["", "checked", "", ""]
    path = write(frame, tmp_path / "w.csv")
    data = read(path, coder=CODERS, keep=["wave"])
    assert_same_coding(data)
    assert list(data.columns["wave"]) == ["1", "1", "2", "2"]
    assert any("remarks" in x for x in data.report.left_out)


def test_round_and_cluster_columns_are_not_coders(tmp_path):
    frame = wide_frame()
    frame["round"] = [1, 1, 2, 2]
    data = read(write(frame, tmp_path / "w.xlsx"))
    assert list(data.coders) == CODERS
    assert list(data.columns["round"]) == [1, 1, 2, 2]
    assert "kept column(s) 'round'" in data.report.detected


def test_keep_in_long_layout_takes_one_value_per_unit(tmp_path):
    frame = long_frame()
    frame["document"] = frame["unit_id"].map({"c1": "d1", "c2": "d1", "c3": "d2", "c4": "d2"})
    data = read(write(frame, tmp_path / "l.csv"), keep=["document"])
    assert list(data.columns["document"]) == ["d1", "d1", "d2", "d2"]


def test_unit_with_no_coder_is_kept(tmp_path):
    frame = wide_frame()
    frame.loc[len(frame)] = ["c5", "Nobody coded this one in the end, it was skipped", None, None, None]
    data = read(write(frame, tmp_path / "w.csv"))
    assert list(data.unit_ids)[-1] == "c5"
    assert (data.codes[-1] == -1).all()
    assert data.report.units_read == 5


def test_blank_rows_in_a_sheet_are_skipped_but_rows_counted(tmp_path):
    path = tmp_path / "gaps.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["unit", "ana", "ben"])
    ws.append(["u1", "x", "x"])
    ws.append([None, None, None])
    ws.append(["u2", "y", "x"])
    wb.save(path)
    data = read(path)
    assert list(data.unit_ids) == ["u1", "u2"]
    assert data.provenance.row[1, 0] == 4


# -- values ----------------------------------------------------------------------------------
def test_set_valued_cells(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2", "u3"], "ana": ["joy; anger", "joy", None],
                          "ben": ["anger;joy", "fear;", "joy"]})
    data = read(write(frame, tmp_path / "s.csv"))
    assert data.set_valued
    assert data.categories == ("anger", "fear", "joy")
    lab = data.labels()
    assert lab.loc["u1", "ana"] == frozenset({"joy", "anger"}) == lab.loc["u1", "ben"]
    assert lab.loc["u2", "ana"] == frozenset({"joy"})
    assert lab.loc["u2", "ben"] == frozenset({"fear"})
    assert lab.loc["u3", "ana"] is None  # empty cell = missing, not the empty set
    assert any("sets of codes" in n for n in data.report.notes)


def test_other_separator_and_no_split(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2"], "ana": ["a|b", "a"], "ben": ["a", "b;c"]})
    path = write(frame, tmp_path / "p.csv")
    data = read(path, sep="|")
    assert data.labels().loc["u1", "ana"] == frozenset({"a", "b"})
    assert data.labels().loc["u2", "ben"] == frozenset({"b;c"})
    plain = read(path, sep=None)
    assert not plain.set_valued and "a|b" in plain.values


def test_presence_matrix_long_rows(tmp_path):
    frame = pd.DataFrame({
        "unit": ["u1", "u1", "u2", "u2", "u3", "u3"],
        "coder": ["ana", "ben"] * 3,
        "praise": [1, 1, 0, 0, None, 0],
        "complaint": [0, 1, 0, 0, None, 1],
        "idea": [0, 0, 0, 0, None, None],
    })
    data = read(write(frame, tmp_path / "pres.xlsx"))
    assert data.report.detected.startswith("presence/absence layout")
    assert data.set_valued
    assert data.categories == ("praise", "complaint", "idea")  # column order, unused 'idea' kept
    lab = data.labels()
    assert lab.loc["u1", "ana"] == frozenset({"praise"})
    assert lab.loc["u1", "ben"] == frozenset({"praise", "complaint"})
    assert lab.loc["u2", "ana"] == frozenset()  # all zero: coded, no code applied
    assert lab.loc["u3", "ana"] is None  # all blank: not coded
    assert lab.loc["u3", "ben"] == frozenset({"complaint"})  # blank beside 0/1 counts as 0


def test_presence_per_coder_sheets(tmp_path):
    frames = {
        "ana": pd.DataFrame({"unit": ["u1", "u2"], "A": [1, 0], "B": [1, 0]}),
        "ben": pd.DataFrame({"unit": ["u1", "u2"], "A": [1, 0], "B": [0, 1]}),
    }
    data = read(write_sheets(tmp_path / "p.xlsx", frames))
    assert data.report.detected.startswith("presence/absence layout, one sheet per coder")
    assert data.labels().loc["u1", "ana"] == frozenset({"A", "B"})
    assert data.labels().loc["u2", "ben"] == frozenset({"B"})


def test_presence_value_not_binary(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2"], "coder": ["a", "b"], "A": ["1", "x"], "B": ["0", "1"]})
    with pytest.raises(AgreeError, match=r"row 3, column 'A': 'x' is not 0 or 1") as e:
        read(write(frame, tmp_path / "p.csv"), layout="presence")
    assert e.value.code == "not-binary"


def test_one_and_one_point_zero_are_one_code(tmp_path):
    path = tmp_path / "n.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["unit", "ana", "ben"])
    ws.append(["u1", 1, 1.0])
    ws.append(["u2", 2, "2"])
    ws.append(["u3", 3.5, "3.50"])
    wb.save(path)
    data = read(path, level="interval")
    assert data.values == (1, 2, 3.5)
    assert (data.codes[:, 0] == data.codes[:, 1]).all()
    assert data.level == "interval" and data.is_numeric


def test_numbers_sorted_numerically(tmp_path):
    frame = pd.DataFrame({"unit": ["a", "b", "c"], "x": ["10", "9", "1.0"], "y": ["2", "10", "9"]})
    data = read(write(frame, tmp_path / "n.csv"))
    assert data.values == (1, 2, 9, 10)
    assert any("level: nominal" in n for n in data.report.notes)


def test_text_at_interval_level_names_the_cell(tmp_path):
    frame = pd.DataFrame({"unit": ["a", "b"], "x": ["1", "2,5"], "y": ["2", "n/a"]})
    with pytest.raises(AgreeError) as e:
        read(write(frame, tmp_path / "t.csv"), level="interval")
    assert e.value.code == "text-at-interval"
    msgs = [p.one_line() for p in e.value.problems]
    assert any("row 3, column 'x': text at interval level: '2,5'" in m and "point" in m for m in msgs)
    assert any("row 3, column 'y'" in m and "'n/a'" in m for m in msgs)


def test_trim_and_casefold_notes(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2 ", "u3"], "ana": ["Joy ", "anger", "joy"],
                          "ben": [" joy", "Anger", "JOY"]})
    path = write(frame, tmp_path / "t.csv")
    raw = read(path)
    assert len(raw.values) == 6
    spaces = [n for n in raw.report.notes if "spaces before or after" in n]
    case = [n for n in raw.report.notes if "upper/lower case" in n]
    assert len(spaces) == 1 and len(case) == 1
    # warnings that name the cells and the CLI flag (Python keyword in parentheses)
    assert spaces[0].startswith("warning:") and "--trim (trim=True)" in spaces[0]
    assert "'joy' (" in spaces[0] and "t.csv, row 4, column 'ana')" in spaces[0]
    assert "' joy' (" in spaces[0] and "t.csv, row 2, column 'ben')" in spaces[0]
    assert case[0].startswith("warning:") and "--casefold (casefold=True)" in case[0]
    assert "'Joy ' (" in case[0] and "t.csv, row 2, column 'ana')" in case[0]
    data = read(path, trim=True, casefold=True)
    assert data.values == ("anger", "joy")
    assert list(data.unit_ids) == ["u1", "u2", "u3"]
    assert "trim: changed 3 values in 3 columns" in data.report.notes
    assert "casefold: changed 3 values in 2 columns" in data.report.notes


def test_cells_with_only_spaces_are_missing(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2"], "ana": ["x", "  "], "ben": ["x", "y"]})
    data = read(write(frame, tmp_path / "s.csv"))
    assert data.codes[1, 0] == -1
    assert any("only spaces" in n for n in data.report.notes)


# -- codebook --------------------------------------------------------------------------------
def test_codebook_order_unused_codes_and_descriptions(tmp_path):
    cb = pd.DataFrame({"code": ["suggestion", "praise", "complaint", "other"],
                       "description": ["an idea", "something good", "something bad", ""]})
    cbp = write(cb, tmp_path / "codebook.csv")
    data = read(write(wide_frame(), tmp_path / "w.csv"), codebook=cbp)
    assert data.values == ("suggestion", "praise", "complaint", "other")
    assert data.categories == data.values
    assert data.codebook["praise"] == "something good"
    assert data.codebook["other"] == ""
    assert data.labels().loc["c2", "chloe"] == "suggestion"
    assert data.level == "nominal"


def test_ordered_codebook_sets_ordinal_level(tmp_path):
    cb = pd.DataFrame({"code": ["high", "low", "mid"], "order": [3, 1, 2]})
    frame = pd.DataFrame({"unit": ["u1", "u2"], "a": ["low", "high"], "b": ["mid", "high"]})
    data = read(write(frame, tmp_path / "d.xlsx"), codebook=write(cb, tmp_path / "cb.xlsx"))
    assert data.values == ("low", "mid", "high")
    assert data.level == "ordinal"
    assert any("level: ordinal" in n for n in data.report.notes)


def test_codebook_object_and_casefold(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2"], "a": ["PRAISE", "complaint"], "b": ["praise", "Complaint"]})
    data = read(write(frame, tmp_path / "d.csv"), codebook=Codebook(("Praise", "Complaint")), casefold=True)
    assert data.values == ("Praise", "Complaint")
    assert (data.codes[:, 0] == data.codes[:, 1]).all()


def test_unknown_codes_are_collected_with_location_and_hint(tmp_path):
    cb = write(pd.DataFrame({"code": ["complaint", "praise", "suggestion"]}), tmp_path / "cb.csv")
    frame = wide_frame()
    frame.loc[1, "ben"] = "praize"
    frame.loc[3, "chloe"] = "complain"
    frame.loc[2, "ana"] = "praize"
    path = write(frame, tmp_path / "coding.xlsx", sheet="Round 1")
    with pytest.raises(AgreeError) as e:
        read(path, codebook=cb)
    err = e.value
    assert err.code == "unknown-code"
    assert err.message.startswith("2 codes are not in the codebook")
    assert len(err.problems) == 2
    first = err.problems[0].one_line()
    assert "coding.xlsx, sheet 'Round 1', row 3, column 'ben'" in first
    assert "code 'praize' is not in the codebook (and 1 more cell)" in first
    assert "closest codebook entry: 'praise'" in first
    second = err.problems[1].one_line()
    assert "row 5, column 'chloe'" in second and "'complaint'" in second


def test_presence_columns_checked_against_codebook(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u1"], "coder": ["a", "b"], "praise": [1, 1], "complain": [0, 0]})
    with pytest.raises(AgreeError, match="code column 'complain' is not in the codebook.*'complaint'"):
        read(write(frame, tmp_path / "p.csv"), layout="presence",
             codebook=Codebook(("praise", "complaint")))


# -- encodings --------------------------------------------------------------------------------
def test_windows_1252_csv_read_with_note(tmp_path):
    path = tmp_path / "legacy.csv"
    path.write_bytes("unit,ana,ben\nu1,café,café\nu2,thé,café\n".encode("cp1252"))
    data = read(path)
    assert data.values == ("café", "thé")
    assert any("read as Windows-1252 (not valid UTF-8)" in n for n in data.report.notes)


def test_utf8_bom_and_utf16(tmp_path):
    text = "unit,ana,ben\nu1,café,café\nu2,thé,café\n"
    a = tmp_path / "bom.csv"
    a.write_bytes(text.encode("utf-8-sig"))
    b = tmp_path / "u16.csv"
    b.write_bytes(text.encode("utf-16"))
    for p in (a, b):
        data = read(p)
        assert data.coders == ("ana", "ben") and data.values == ("café", "thé")


def test_undecidable_encoding_refused(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_bytes(b"unit,ana,ben\nu1,caf\xe9,x\x81y\n")
    with pytest.raises(AgreeError, match="cannot tell the text encoding") as e:
        read(path)
    assert e.value.code == "encoding"


# -- errors -------------------------------------------------------------------------------------
def test_missing_file(tmp_path):
    with pytest.raises(AgreeError, match="file not found") as e:
        read(tmp_path / "nope.csv")
    assert e.value.code == "file-not-found" and "nope.csv" in str(e.value)


def test_empty_file_and_header_only(tmp_path):
    (tmp_path / "empty.csv").write_bytes(b"")
    with pytest.raises(AgreeError, match="the file is empty"):
        read(tmp_path / "empty.csv")
    (tmp_path / "head.csv").write_text("unit,ana,ben\n")
    with pytest.raises(AgreeError, match="no data rows"):
        read(tmp_path / "head.csv")


def test_empty_sheet(tmp_path):
    path = tmp_path / "e.xlsx"
    wb = openpyxl.Workbook()
    wb.active.title = "Blank"
    wb.save(path)
    with pytest.raises(AgreeError, match="sheet 'Blank': the sheet is empty") as e:
        read(path)
    assert e.value.code == "empty-sheet"


def test_empty_extra_sheets_are_skipped_with_a_note(tmp_path):
    path = tmp_path / "w.xlsx"
    with pd.ExcelWriter(path) as xl:
        wide_frame().to_excel(xl, sheet_name="data", index=False)
        pd.DataFrame().to_excel(xl, sheet_name="spare", index=False)
    data = read(path)
    assert_same_coding(data)
    assert any("'spare'" in x for x in data.report.left_out)


def test_named_sheet_and_unknown_sheet(tmp_path):
    path = write_sheets(tmp_path / "two.xlsx", {"R1": wide_frame(), "R2": wide_frame().iloc[:2]})
    assert read(path, sheet="R2").n_units == 2
    with pytest.raises(AgreeError, match="there is no sheet 'R3'"):
        read(path, sheet="R3")


def test_only_one_coder(tmp_path):
    frame = pd.DataFrame({"unit": ["u1", "u2"], "ana": ["x", "y"]})
    with pytest.raises(AgreeError, match="only one coder found \\(ana\\)") as e:
        read(write(frame, tmp_path / "one.csv"))
    assert e.value.code == "one-coder"


def test_same_unit_coded_twice_long(tmp_path):
    frame = pd.concat([long_frame(), long_frame().iloc[[4]]], ignore_index=True)
    with pytest.raises(AgreeError) as e:
        read(write(frame, tmp_path / "d.csv"))
    assert e.value.code == "duplicate-coding"
    assert "coder 'ben' coded unit 'c2' more than once (rows 6, 13)" in str(e.value)


def test_same_unit_twice_wide(tmp_path):
    frame = pd.concat([wide_frame(), wide_frame().iloc[[0]]], ignore_index=True)
    with pytest.raises(AgreeError, match=r"unit 'c1' is in more than one row \(rows 2, 6\)"):
        read(write(frame, tmp_path / "d.csv"))


def test_empty_unit_id_names_the_row(tmp_path):
    frame = wide_frame()
    frame.loc[2, "excerpt_id"] = None
    with pytest.raises(AgreeError, match=r"row 4, column 'excerpt_id': 1 row\(s\) have values but no unit id") as e:
        read(write(frame, tmp_path / "u.csv"))
    assert e.value.code == "missing-unit-id"


def test_encrypted_workbook(tmp_path):
    path = tmp_path / "locked.xlsx"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 600)
    with pytest.raises(AgreeError, match="password-protected") as e:
        read(path)
    assert e.value.code == "encrypted-workbook"


def test_corrupt_workbook(tmp_path):
    path = tmp_path / "broken.xlsx"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("hello.txt", "not a workbook")
    with pytest.raises(AgreeError, match="damaged") as e:
        read(path)
    assert e.value.code == "corrupt-workbook"
    trunc = tmp_path / "trunc.xlsx"
    good = write(wide_frame(), tmp_path / "good.xlsx").read_bytes()
    trunc.write_bytes(good[: len(good) // 2])
    with pytest.raises(AgreeError, match="damaged"):
        read(trunc)


@pytest.mark.parametrize("real,named,expect", [
    (".csv", ".xlsx", "not an Excel workbook: its content is plain text"),
    (".xlsx", ".csv", "its content is an Excel workbook"),
    (".parquet", ".csv", "its content is a Parquet file"),
    (".csv", ".parquet", "not a Parquet file"),
])
def test_content_does_not_match_extension(tmp_path, real, named, expect):
    src = write(wide_frame(), tmp_path / f"real{real}")
    path = tmp_path / f"fake{named}"
    path.write_bytes(src.read_bytes())
    with pytest.raises(AgreeError, match=expect) as e:
        read(path)
    assert e.value.code == "wrong-extension"


def test_blank_and_duplicated_headers(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("unit,ana,,ben\nu1,x,y,x\n")
    with pytest.raises(AgreeError, match="row 1: column 3 has a blank header") as e:
        read(path)
    assert e.value.code == "blank-header"
    path.write_text("unit,ana,ana\nu1,x,y\n")
    with pytest.raises(AgreeError, match="column 3 repeats the header 'ana' of column 2") as e:
        read(path)
    assert e.value.code == "duplicate-header"
    xl = tmp_path / "h.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["unit", "ana", None, "ben"])
    wb.active.append(["u1", "x", "z", "x"])
    wb.save(xl)
    with pytest.raises(AgreeError, match=r"column 3 \(C\) has a blank header"):
        read(xl)


def test_blank_header_over_an_empty_column_is_ignored(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("unit,ana,ben,\nu1,x,y,\nu2,x,x,\n")
    assert read(path).coders == ("ana", "ben")


@pytest.mark.parametrize("name,expect", [("data.xls", "old .xls format"), ("data.json", "unsupported file type")])
def test_unsupported_extension(tmp_path, name, expect):
    path = tmp_path / name
    path.write_text("{}")
    with pytest.raises(AgreeError, match=expect) as e:
        read(path)
    assert e.value.code == "unsupported-format"


def test_ragged_csv(tmp_path):
    path = tmp_path / "r.csv"
    path.write_text("unit,ana,ben\nu1,x,y\nu2,x,y,z\n")
    with pytest.raises(AgreeError, match="fields where the header has 3"):
        read(path)


def test_bad_options(tmp_path):
    path = write(wide_frame(), tmp_path / "w.csv")
    with pytest.raises(AgreeError, match="layout must be one of"):
        read(path, layout="diagonal")
    with pytest.raises(AgreeError, match="level must be one of"):
        read(path, level="cardinal")
    with pytest.raises(AgreeError, match="no unit column 'unti'.*'unit'|did you mean"):
        read(path, unit="excerpt_idd")


def test_errors_are_one_line(tmp_path):
    frame = pd.concat([long_frame(), long_frame()], ignore_index=True)
    with pytest.raises(AgreeError) as e:
        read(write(frame, tmp_path / "d.csv"))
    assert "\n" not in str(e.value)
    assert e.value.message.startswith("11 (unit, coder) pairs are coded more than once")


def test_big_long_table_is_vectorised(tmp_path):
    # a modest size, to check that the vectorised paths give the same answer as the small cases
    rng = np.random.default_rng(7)
    n = 20_000
    codes = rng.choice(["a", "b", "c"], size=(n, 3))
    frame = pd.DataFrame({"unit": np.repeat([f"u{i}" for i in range(n)], 3),
                          "coder": np.tile(CODERS, n), "code": codes.ravel()})
    data = read(write(frame, tmp_path / "big.csv"))
    assert data.codes.shape == (n, 3)
    np.testing.assert_array_equal(np.array(data.values)[data.codes], codes)


# -- user review: reading pitfalls ----------------------------------------------------------------
def test_consensus_file_is_refused_unless_coder_columns_are_named(tmp_path):
    from agree.output.reconciliation import reconcile, write_consensus, write_review

    data = read(write(wide_frame(), tmp_path / "coding.csv"))
    write_review(data, tmp_path / "review.csv")
    consensus = reconcile(data, tmp_path / "review.csv", allow_unresolved=True)
    out = write_consensus(consensus, tmp_path / "consensus.csv", data=data)
    with pytest.raises(AgreeError) as e:
        read(out)
    assert e.value.code == "consensus-file"
    assert "independent codes" in e.value.message and "final code" in e.value.message
    assert "original coding files" in e.value.hint and "--coder-col" in e.value.hint
    # naming the coder columns means the user wants exactly those: no refusal
    again = read(out, coder=CODERS)
    assert again.coders == tuple(CODERS)
    np.testing.assert_array_equal(again.codes, data.codes)


def test_consensus_recognised_by_its_source_column(tmp_path):
    from agree.output.reconciliation import SOURCES

    frame = wide_frame().drop(columns=["excerpt"])
    frame["agreed code"] = ["complaint", "praise", "complaint", "complaint"]
    frame["source"] = [SOURCES[0], SOURCES[1], SOURCES[4], " Majority "]
    with pytest.raises(AgreeError) as e:
        read(write(frame, tmp_path / "c.xlsx"))
    assert e.value.code == "consensus-file" and "'source' column" in e.value.message
    # a 'source' column with other values is an ordinary per-unit column
    frame["source"] = ["web", "phone", "web", "paper"]
    data = read(write(frame, tmp_path / "ok.xlsx"))
    assert "source" in data.columns


@pytest.mark.parametrize("suffix", [".csv", ".tsv", ".parquet"])
def test_sheet_option_for_a_file_without_sheets_is_an_error(tmp_path, suffix):
    path = write(wide_frame(), tmp_path / f"w{suffix}")
    with pytest.raises(AgreeError) as e:
        read(path, sheet="coding")
    assert e.value.code == "bad-option"
    assert e.value.where == str(path) and "--sheet" in e.value.message


def _multi_frame(n_multi: int, n: int = 40) -> pd.DataFrame:
    frame = pd.DataFrame({"unit": [f"u{i}" for i in range(n)], "ana": ["Burnout"] * n,
                          "ben": ["Support"] * n})
    frame.loc[3, "ana"] = "Burnout; Time pressure"
    frame.loc[:n_multi - 2, "ben"] = "Support;Burnout"
    return frame


def test_few_cells_with_several_codes_are_a_warning_naming_the_cells(tmp_path, capsys):
    path = write(_multi_frame(1), tmp_path / "m.csv")
    data = read(path)
    assert data.set_valued  # still split, as the spec says
    [line] = [n for n in data.report.notes if "several codes" in n]
    assert line.startswith("warning:")
    assert "1 of 80 coded cells (1.2%) holds several codes" in line
    assert "m.csv, row 5, column 'ana': 'Burnout; Time pressure'" in line
    assert "sets of codes" in line and "--sep ''" in line
    r.report_reading(data)
    err = capsys.readouterr().err
    assert "\nwarning: only 1 of 80" in err and "note: warning" not in err
    assert not read(path, sep=None).set_valued


def test_many_cells_with_several_codes_are_a_note(tmp_path):
    data = read(write(_multi_frame(12), tmp_path / "m.csv"))
    [line] = [n for n in data.report.notes if "several codes" in n]
    assert line.startswith("several codes in one cell: 12 of 80 coded cells (15.0%)")
    assert line.count("row ") == 3 and ", ...)" in line  # the first three cells, then '...'
    assert "--sep '' (sep=None)" in line


def test_text_among_numbers_at_ordinal_level_is_an_error(tmp_path):
    frame = pd.DataFrame({"unit": list("abcd"), "x": ["1", "2", "NA", "5"], "y": ["2", "low", "3", "4"]})
    path = write(frame, tmp_path / "o.csv")
    with pytest.raises(AgreeError) as e:
        read(path, level="ordinal")
    assert e.value.code == "text-at-ordinal"
    msgs = {p.message: p for p in e.value.problems}
    na = msgs["text among numbers at ordinal level: 'NA'"]
    assert "row 4, column 'x'" in na.where and "looks like a missing value" in na.hint
    low = msgs["text among numbers at ordinal level: 'low'"]
    assert "row 3, column 'y'" in low.where
    assert "numbers only at this level" in low.hint and "codebook with an order column" in low.hint
    # with a codebook order the text codes have a place on the scale
    book = Codebook(categories=(1, 2, "low", 3, 4, 5, "NA"), ordered=True)
    assert read(path, level="ordinal", codebook=book).values == book.categories
    # text-only codes at ordinal level without a codebook still read (ordered by name, with a note)
    words = pd.DataFrame({"unit": ["a", "b"], "x": ["low", "high"], "y": ["low", "low"]})
    assert read(write(words, tmp_path / "w.csv"), level="ordinal").values == ("high", "low")


def test_missing_lookalike_among_numbers(tmp_path):
    frame = pd.DataFrame({"unit": list("abc"), "x": ["1", "n/a", "3"], "y": ["2", "n/a", "3"]})
    path = write(frame, tmp_path / "n.csv")
    data = read(path)  # nominal: read as a code of its own, with a warning
    warn = [n for n in data.report.notes if "n/a" in n]
    assert len(warn) == 1 and warn[0].startswith("warning: 'n/a' among numeric codes looks like a missing")
    assert "2 cells" in warn[0] and "row 3, column 'x'" in warn[0] and "leave those cells empty" in warn[0]
    with pytest.raises(AgreeError) as e:
        read(path, level="interval")
    assert "looks like a missing value" in e.value.hint
    with pytest.raises(AgreeError) as e:
        read(path, codebook=Codebook(categories=(1, 2, 3)))
    assert e.value.code == "unknown-code" and "looks like a missing value" in e.value.hint


def test_hints_name_cli_flags(tmp_path):
    path = write(long_frame().rename(columns={"coder": "who"}), tmp_path / "l.csv")
    with pytest.raises(AgreeError) as e:
        read(path, layout="long")
    assert "--coder-col (coder=...)" in e.value.hint
    frame = pd.DataFrame({"unit": ["a", "b"], "x": ["1", "2"], "y": ["2", "2"]})
    data = read(write(frame, tmp_path / "n.csv"))
    assert any("--level ordinal" in n for n in data.report.notes)
    with pytest.raises(AgreeError) as e:
        read(write(_multi_frame(1), tmp_path / "m.csv"), level="ordinal")
    assert "--level nominal (level='nominal')" in e.value.hint
    from pathlib import Path

    import agree.io

    source = "".join(p.read_text(encoding="utf-8") for p in Path(agree.io.__file__).parent.glob("*.py"))
    for bare in ('"name it with coder=', "set it with level=", "; trim=True would", "; casefold=True would"):
        assert bare not in source


def _coder_workbook(path, units, interviews, codes, notes=None):
    frame = pd.DataFrame({"unit_id": units, "interview": interviews,
                          "text": [f"synthetic excerpt {u}" for u in units], "code": codes,
                          "notes": notes or [None] * len(units)})
    frame.to_excel(path, index=False, sheet_name="coding")
    return path


def test_per_coder_files_keep_a_grouping_column(tmp_path):
    units = ["u1", "u2", "u3", "u4"]
    a = _coder_workbook(tmp_path / "ana.xlsx", units, ["i1", "i1", "i2", "i2"], ["x", "y", "x", "x"],
                        notes=["unsure", None, None, None])
    # ben got the units in another order (a shuffled coding workbook)
    b = _coder_workbook(tmp_path / "ben.xlsx", units[::-1], ["i2", "i2", "i1", "i1"], ["x", "y", "y", "x"])
    data = read([a, b], keep=["interview"])
    assert list(data.columns["interview"]) == ["i1", "i1", "i2", "i2"]
    # notes are each coder's own: reported once, not once per file
    assert data.report.left_out == ("column(s) not used, in every coder's file (2 files): "
                                    "'notes' (per-coder notes)",)
    plain = read([a, b])
    [line] = plain.report.left_out
    assert "--keep interview (keep=['interview'])" in line and "'notes' (per-coder notes)" in line
    # the CLI keeps the cluster column too
    assert list(r.load_data([a, b], cluster="interview").columns["interview"]) == ["i1", "i1", "i2", "i2"]


def test_per_coder_grouping_values_must_agree(tmp_path):
    units = ["u1", "u2", "u3"]
    a = _coder_workbook(tmp_path / "ana.xlsx", units, ["i1", "i1", "i2"], ["x", "y", "x"])
    b = _coder_workbook(tmp_path / "ben.xlsx", units, ["i1", "i9", "i2"], ["x", "y", "y"])
    with pytest.raises(AgreeError) as e:
        read([a, b], keep=["interview"])
    err = e.value
    assert err.code == "kept-conflict"
    assert "unit 'u2'" in err.message and "'i1'" in err.message and "'i9'" in err.message
    assert "ana.xlsx, sheet 'coding', row 3, column 'interview'" in err.message
    assert err.where.endswith("ben.xlsx, sheet 'coding', row 3, column 'interview'")


def test_missing_kept_column_lists_the_columns(tmp_path):
    path = write(wide_frame(), tmp_path / "w.csv")
    with pytest.raises(AgreeError) as e:
        read(path, keep=["round"])
    assert e.value.code == "no-column" and "kept column 'round'" in e.value.message
    assert "columns: 'excerpt_id', 'excerpt', 'ana', 'ben', 'chloe'" in e.value.hint
    with pytest.raises(AgreeError) as e:
        read(path, keep=["excerpts"])
    assert "did you mean 'excerpt'?" in e.value.hint and "'chloe'" in e.value.hint
    # one file per coder: absent from every file
    units = ["u1", "u2"]
    a = _coder_workbook(tmp_path / "ana.xlsx", units, ["i1", "i2"], ["x", "y"])
    b = _coder_workbook(tmp_path / "ben.xlsx", units, ["i1", "i2"], ["x", "x"])
    with pytest.raises(AgreeError) as e:
        r.load_data([a, b], keep=["round"])
    assert "no kept column 'round' in any of the 2 tables" in e.value.message
    assert "'unit_id', 'interview', 'text', 'code', 'notes'" in e.value.hint


def test_parallel_factorizing_of_a_large_long_table_changes_nothing(tmp_path, monkeypatch):
    # 40,000 units x 3 coders = 120,000 rows: above the size where columns are factorized in parallel
    import agree.io.cells as cells
    import agree.io.readers as readers

    rng = np.random.default_rng(5)
    n = 40_000
    frame = pd.DataFrame({
        "unit": np.repeat([f"u{i}" for i in range(n)], 3),
        "coder": np.tile(["ana", "ben", "cy"], n),
        "code": rng.choice(["a", "b", "c", "d"], 3 * n),
    }).sample(frac=1.0, random_state=1)
    path = tmp_path / "long.csv"
    frame.to_csv(path, index=False)
    fast = readers.read(path)
    monkeypatch.setattr(cells, "_PARALLEL_ROWS", 10 ** 12)    # every column on one thread
    plain = readers.read(path)
    assert list(fast.unit_ids) == list(plain.unit_ids) and fast.values == plain.values
    np.testing.assert_array_equal(fast.codes, plain.codes)


def test_arrow_encoding_of_text_columns_matches_pandas_factorize():
    # text read by Arrow is dictionary-encoded by Arrow; pandas' factorize of the same cells as
    # Python objects is the reference (codes in order of first appearance, -1 for missing)
    import pyarrow as pa

    from agree.io.cells import factorize, factorize_columns

    rng = np.random.default_rng(7)
    cells = [None if x == 0 else (" " if x == 1 else "") + f"id{x}" for x in rng.integers(0, 40, 3000)] + ["", "  "]
    chunked = pa.chunked_array([pa.array(cells[:1000]), pa.array(cells[1000:])])
    col = pd.Series(pd.arrays.ArrowStringArray(chunked)).iloc[7:]     # several chunks, sliced
    ref_codes, ref_uniques = pd.factorize(np.array(cells[7:], dtype=object), use_na_sentinel=True)
    codes, uniques = factorize(col)
    np.testing.assert_array_equal(codes, ref_codes)
    assert list(uniques) == list(ref_uniques)
    (codes, arrow_uniques), = factorize_columns([col])
    np.testing.assert_array_equal(codes, ref_codes)
    assert arrow_uniques.to_pylist() == list(ref_uniques)


def test_unit_ids_with_spaces_in_a_large_long_table(tmp_path):
    # the check for unit ids that differ only in spaces runs when any id has spaces around it
    n = 40_000
    units = [f"u{i}" for i in range(n)]
    units[5] = "u4 "                                   # 'u4' and 'u4 ': twins
    frame = pd.DataFrame({"unit": np.repeat(units, 3), "coder": np.tile(["ana", "ben", "cy"], n),
                          "code": np.tile(["a", "b", "a"], n)})
    path = tmp_path / "long.csv"
    frame.to_csv(path, index=False)
    data = read(path)
    assert any("differs only in spaces" in note and "'u4 '" in note for note in data.report.notes)
    assert data.n_units == n


def test_reading_reports_its_steps(tmp_path):
    path = tmp_path / "long.csv"
    path.write_text("unit,coder,code\nu1,ana,a\nu1,ben,a\nu2,ana,b\nu2,ben,a\n")
    steps = []
    read(path, progress=lambda step, done: steps.append((step, done)))
    assert [s for s, _ in steps] == ["reading long.csv", "matching unit ids", "checking the codes", "read"]
    assert [d for _, d in steps] == sorted(d for _, d in steps) and steps[-1][1] == 1.0
