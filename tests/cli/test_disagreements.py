"""`agree disagreements` end to end, through the console entry point (exit codes and stderr as a
user sees them). All data are synthetic."""

from __future__ import annotations

import json
import os

import pytest

from tests.cli.conftest import run_main as run


@pytest.mark.parametrize("suffix", ["csv", "parquet", "md"])
def test_disagreements_other_formats(tmp_path, data_file, capsys, suffix):
    out = tmp_path / f"review.{suffix}"
    code, _, err = run(capsys, "disagreements", data_file, "-o", out)
    assert code == 0, err
    if suffix == "parquet":
        import pyarrow.parquet as pq

        assert "=SUM(A1)" in pq.read_table(out).column("unit").to_pylist()
    elif suffix == "csv":
        text = out.read_text(encoding="utf-8")
        assert "'=SUM(A1)" in text and "'@here" in text
    else:
        assert "x\\|y" in out.read_text(encoding="utf-8")
    forced = tmp_path / "plain.txt"
    assert run(capsys, "disagreements", data_file, "-o", forced, "--format", suffix)[0] == 0


def test_existing_output_needs_force(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    assert run(capsys, "disagreements", data_file, "-o", review)[0] == 0
    code, _, err = run(capsys, "disagreements", data_file, "-o", review)
    assert code == 2 and "--force" in err
    assert run(capsys, "disagreements", data_file, "-o", review, "--force")[0] == 0
    assert not [f for f in os.listdir(tmp_path) if f.endswith(".tmp")]


def test_format_prints_the_summary_and_file_format_writes_the_file(tmp_path, data_file, capsys):
    out = tmp_path / "review.txt"
    code, printed, err = run(capsys, "disagreements", data_file, "-o", out, "--file-format", "csv",
                             "--format", "json")
    assert code == 0, err
    assert json.loads(printed)["needing_review"] == 3 and "deprecated" not in err
    assert out.read_text(encoding="utf-8").startswith("unit,")


def test_old_format_flags_still_work_with_a_one_line_note(tmp_path, data_file, capsys):
    # earlier versions: --summary-format for the printed summary, --format for the file
    code, printed, err = run(capsys, "disagreements", data_file, "-o", tmp_path / "a.csv",
                             "--summary-format", "json")
    assert code == 0, err
    assert json.loads(printed)["needing_review"] == 3
    assert [line for line in err.splitlines() if "deprecated" in line] == [
        "note: --summary-format is deprecated; use --format json"]
    code, printed, err = run(capsys, "disagreements", data_file, "-o", tmp_path / "b.txt", "--format", "md")
    assert code == 0, err
    assert "--file-format md" in err and "deprecated" in err
    assert (tmp_path / "b.txt").read_text(encoding="utf-8").startswith("# Units to reconcile")
    assert "needing review" in printed                       # the table, as before


def test_unknown_format_is_one_line_before_reading(tmp_path, capsys):
    code, _, err = run(capsys, "disagreements", tmp_path / "missing.csv", "-o", tmp_path / "r.xlsx",
                       "--format", "yaml")
    assert code == 2
    assert err.count("\n") == 1 and "table or json" in err and "--file-format" in err



def test_blank_or_empty_sheets_stop_naming_the_file(tmp_path, capsys):
    """A coding sheet nobody filled in (or a workbook with nothing in it) is an error naming the
    file, never an empty review with exit code 0."""
    import openpyxl

    from tests.cli.conftest import run_main

    blank = tmp_path / "blank.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["unit_id", "text", "ann", "bo"])
    for i in range(3):
        wb.active.append([f"u{i}", f"text {i}", None, None])
    wb.save(blank)
    empty = tmp_path / "empty.xlsx"
    openpyxl.Workbook().save(empty)
    for path, words in ((blank, "no codes were read"), (empty, "the sheet is empty")):
        code, _, err = run(capsys, "disagreements", path, "-o", tmp_path / "review.xlsx")
        assert code == 2 and words in err and path.name in err and "Traceback" not in err
        assert not (tmp_path / "review.xlsx").exists()


def test_xlsx_past_the_sheet_row_limit_is_one_line_with_the_alternatives(tmp_path, data_file, capsys,
                                                                       monkeypatch):
    import agree.output.reconciliation as rec

    monkeypatch.setattr(rec, "SHEET_ROW_LIMIT", 2)
    code, _, err = run(capsys, "disagreements", data_file, "-o", tmp_path / "review.xlsx")
    assert code == 2 and "Traceback" not in err
    assert "rows (the header included)" in err and "-o review.csv" in err and "-o review.parquet" in err
    assert not (tmp_path / "review.xlsx").exists()


def test_disputed_passages_of_the_sample_project(tmp_path, capsys):
    """Highlighted passages: one row per disputed speaker turn, with the document, each coder's
    spans marked and codes, and the decision columns of the unit review."""
    import openpyxl

    from tests.cli.conftest import SAMPLES

    review = tmp_path / "review.xlsx"
    code, out, err = run(capsys, "disagreements", SAMPLES / "passages.qdpx", "--segments", "turn",
                              "-o", review, "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["units_read"] == summary["agreed"] + summary["needing_review"] + summary["left_out"]
    assert "disputed passages to review" in err
    ws = openpyxl.load_workbook(review)["Review"]
    header = [c.value for c in ws[1]]
    for column in ("unit", "document", "start", "end", "text", "marked: amara", "marked: bastien", "marked: chen",
                   "amara", "bastien", "chen", "codes involved", "decision", "how decided", "decided by", "notes"):
        assert column in header
    rows = [dict(zip(header, r)) for r in ws.iter_rows(min_row=2, values_only=True)]
    assert len(rows) == summary["rows_written"] > 0
    assert all("»" in r["text"] and "«" in r["text"] for r in rows)
    # every listed passage has coders whose sets of codes differ
    assert all(len({r["amara"], r["bastien"], r["chen"]}) > 1 for r in rows)
    # a span option that makes no sense for the review is refused in one line
    code, _, err = run(capsys, "disagreements", SAMPLES / "passages.qdpx", "--view", "positions",
                            "-o", tmp_path / "r2.xlsx")
    assert code == 2 and "Traceback" not in err and "--view positions" in err
