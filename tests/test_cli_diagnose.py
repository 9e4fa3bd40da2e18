"""CLI tests for `agree codes` and `agree coders` (synthetic data)."""

from __future__ import annotations

import io
import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

import agree.cli.commands  # noqa: F401  (registers the commands)
from agree.cli.app import app
from agree.diagnostics import diagnose_codes, diagnose_coders
from agree.model import from_table

ROWS = [
    ("1", "care", "care", "care"), ("2", "care", "blame", "care"), ("3", "blame", "blame", ""),
    ("4", "anger", "care", "anger"), ("5", "care", "care", "care"), ("6", "blame", "blame", "blame"),
    ("7", "anger", "anger", "care"), ("8", "care", "care", "blame"), ("9", "blame", "blame", "blame"),
    ("10", "anger", "anger", "anger"), ("11", "care", "care", "care"), ("12", "blame", "care", "blame"),
    ("13", "care", "care", "care"), ("14", "anger", "anger", "anger"), ("15", "blame", "care", "care"),
]


@pytest.fixture
def coding_csv(tmp_path: Path) -> Path:
    path = tmp_path / "coding.csv"
    frame = pd.DataFrame(ROWS, columns=["unit", "amara", "ben", "chen"])
    frame.to_csv(path, index=False)
    return path


def expected_data():
    frame = pd.DataFrame(ROWS, columns=["unit", "amara", "ben", "chen"]).set_index("unit")
    return from_table(frame)


def run(args):
    return CliRunner().invoke(app, args)


def test_codes_json_equals_to_dict(coding_csv):
    result = run(["codes", str(coding_csv), "--format", "json", "--boot", "200", "--seed", "3"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    library = diagnose_codes(expected_data(), n_resamples=200, seed=3).to_dict()
    assert printed == json.loads(json.dumps(library))
    assert printed["codes"][0]["rank"] == 1


def test_codes_min_and_csv(coding_csv):
    result = run(["codes", str(coding_csv), "--format", "csv", "--boot", "0", "--min", "0.5",
                  "--min-units", "2"])
    assert result.exit_code == 0, result.output
    frame = pd.read_csv(io.StringIO(result.stdout))
    library = diagnose_codes(expected_data(), n_resamples=0, minimum=0.5, min_units_per_code=2)
    assert list(frame.code) == list(library.to_frame().code)
    assert list(frame.status) == list(library.to_frame().status)
    assert "uses_amara" in frame.columns


def test_codes_table_shows_worst_first_and_notes(coding_csv):
    result = run(["codes", str(coding_csv), "--boot", "100", "--seed", "1"])
    assert result.exit_code == 0, result.output
    first = diagnose_codes(expected_data(), n_resamples=0).to_frame().code[0]
    out = result.stdout
    assert "worst first" in out and "reason" in out
    assert out.index(first) < out.index("Most confused pairs")
    assert "read 15 units" in result.stderr          # the reading note goes to stderr
    assert "unit resamples, seed 1" in result.stderr


def test_coders_json_equals_to_dict(coding_csv):
    result = run(["coders", str(coding_csv), "--format", "json", "--boot", "150", "--seed", "4"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    library = diagnose_coders(expected_data(), n_resamples=150, seed=4).to_dict()
    assert printed == json.loads(json.dumps(library))


def test_coders_table(coding_csv):
    result = run(["coders", str(coding_csv), "--boot", "50", "--seed", "1"])
    assert result.exit_code == 0, result.output
    assert "left out" in result.stdout and "Pairs of coders" in result.stdout
    assert "amara" in result.stdout


def test_two_coders_show_directed_counts_and_stuart_maxwell(tmp_path):
    path = tmp_path / "two.csv"
    pd.DataFrame([r[:3] for r in ROWS], columns=["unit", "amara", "ben"]).to_csv(path, index=False)
    result = run(["codes", str(path), "--boot", "0"])
    assert result.exit_code == 0, result.output
    assert "amara→ben" in result.stdout
    assert "Stuart–Maxwell" in result.stdout


def test_missing_file_is_one_line_and_exit_code_2(tmp_path):
    agree_exe = Path(sys.executable).with_name("agree")
    proc = subprocess.run([str(agree_exe), "codes", str(tmp_path / "none.csv")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.startswith("error:") and "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1


def test_help_has_examples():
    for command in ("codes", "coders"):
        result = run([command, "--help"])
        assert result.exit_code == 0
        assert "Example" in result.stdout and "--format" in result.stdout
