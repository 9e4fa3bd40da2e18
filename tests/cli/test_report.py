"""CLI tests for `agree report`: JSON equals the library, outputs never overwrite, one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

from typer.testing import CliRunner

from agree.core.model import AgreeError
from agree.output.report import build_report
from tests.cli.conftest import SAMPLES
from tests.output.test_report import _sample_round2


def _cli():
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    return app


def test_cli_report_json_equals_library(tmp_path):
    out = tmp_path / "r.md"
    args = ["report", str(SAMPLES / "round2.csv"), "--codebook", str(SAMPLES / "codebook.csv"), "--keep",
            "interview", "-o", str(out), "--boot", "200", "--seed", "5", "--corpus-size", "600",
            "--format", "json"]
    result = CliRunner().invoke(_cli(), args)
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    expected = build_report(_sample_round2(), n_resamples=200, seed=5, corpus_size=600).to_dict()
    printed["sample"].pop("files"), expected["sample"].pop("files")
    printed["sample"].pop("checksums"), expected["sample"].pop("checksums")
    assert printed == expected
    assert out.exists()


def test_cli_report_refuses_to_overwrite_input(tmp_path):
    src = tmp_path / "data.csv"
    src.write_text("unit,a,b\n1,x,y\n2,x,x\n3,y,y\n")
    result = CliRunner().invoke(_cli(), ["report", str(src), "-o", str(src), "--boot", "0"])
    assert result.exit_code != 0
    assert isinstance(result.exception, AgreeError) and result.exception.code == "report-format"
    html_in = tmp_path / "data.html"
    html_in.write_text("unit,a,b\n")
    result = CliRunner().invoke(_cli(), ["report", str(html_in), "-o", str(html_in)])
    assert isinstance(result.exception, AgreeError) and result.exception.code == "overwrite-input"
    assert html_in.read_text() == "unit,a,b\n"


def test_cli_report_exit_code_and_one_line_error(tmp_path):
    import subprocess
    import sys

    exe = Path(sys.executable).parent / "agree"
    src = tmp_path / "data.csv"
    src.write_text("unit,a,b\n1,x,y\n2,x,x\n3,y,y\n")
    proc = subprocess.run([str(exe), "report", str(src), "-o", str(tmp_path / "r.pdf")], capture_output=True,
                          text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip().startswith("error: cannot tell the report format")
    assert "Traceback" not in proc.stderr


def test_cli_report_refuses_to_overwrite_without_force(tmp_path):
    out = tmp_path / "r.md"
    args = ["report", str(SAMPLES / "round2.csv"), "-o", str(out), "--boot", "0"]
    first = CliRunner().invoke(_cli(), args)
    assert first.exit_code == 0, first.output
    out.write_text("my edits")
    again = CliRunner().invoke(_cli(), args)
    assert isinstance(again.exception, AgreeError) and again.exception.code == "output-exists"
    assert out.read_text() == "my edits"
    # the figures folder alone also counts
    out.unlink()
    again = CliRunner().invoke(_cli(), args)
    assert isinstance(again.exception, AgreeError) and "r-figures" in again.exception.message
    forced = CliRunner().invoke(_cli(), args + ["--force"])
    assert forced.exit_code == 0, forced.output
    assert out.read_text() != "my edits"


def test_cli_report_cluster(tmp_path):
    out = tmp_path / "r.html"
    result = CliRunner().invoke(_cli(), ["report", str(SAMPLES / "round2.csv"), "--cluster", "interview",
                                         "-o", str(out), "--boot", "200", "--format", "json"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert "whole interview groups (n = 12 groups)" in printed["methods"]
    assert "12 interview groups were resampled" in result.stderr


def test_cli_report_rounds_from_a_column_or_from_files_equal_the_library(tmp_path):
    # the command line turns both ways of giving rounds into the one mapping the library takes
    from agree.analysis.rounds import split_rounds
    from agree.io.readers import read

    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    expected = build_report(None, rounds=split_rounds(data), n_resamples=100, seed=5).to_dict()
    args = ["report", str(SAMPLES / "rounds_long.csv"), "--codebook", str(SAMPLES / "codebook.csv"),
            "-o", str(tmp_path / "r.html"), "--boot", "100", "--seed", "5", "--format", "json"]
    result = CliRunner().invoke(_cli(), args)
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    for side in (printed, expected):
        side["sample"].pop("files"), side["sample"].pop("checksums")
    assert printed == expected
    files = CliRunner().invoke(_cli(), ["report", str(SAMPLES / "round1.csv"), str(SAMPLES / "round2.csv"),
                                        "--round-files", "--codebook", str(SAMPLES / "codebook.csv"), "-o",
                                        str(tmp_path / "f.html"), "--boot", "0", "--format", "json"])
    assert files.exit_code == 0, files.output
    assert json.loads(files.stdout)["analysed_round"] == "round2"
