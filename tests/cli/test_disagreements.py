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
        code, _, err = run_main(capsys, "disagreements", path, "-o", tmp_path / "review.xlsx")
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
