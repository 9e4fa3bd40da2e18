"""`agree disagreements` end to end, through the console entry point (exit codes and stderr as a
user sees them). All data are synthetic."""

from __future__ import annotations

import os

import pytest

from tests.cli.conftest import run_main as run


@pytest.mark.parametrize("suffix", ["csv", "md"])
def test_disagreements_other_formats(tmp_path, data_file, capsys, suffix):
    out = tmp_path / f"review.{suffix}"
    code, _, err = run(capsys, "disagreements", data_file, "-o", out)
    assert code == 0, err
    text = out.read_text(encoding="utf-8")
    if suffix == "csv":
        assert "'=SUM(A1)" in text and "'@here" in text
    else:
        assert "x\\|y" in text
    forced = tmp_path / "plain.txt"
    assert run(capsys, "disagreements", data_file, "-o", forced, "--format", suffix)[0] == 0


def test_existing_output_needs_force(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    assert run(capsys, "disagreements", data_file, "-o", review)[0] == 0
    code, _, err = run(capsys, "disagreements", data_file, "-o", review)
    assert code == 2 and "--force" in err
    assert run(capsys, "disagreements", data_file, "-o", review, "--force")[0] == 0
    assert not [f for f in os.listdir(tmp_path) if f.endswith(".tmp")]
