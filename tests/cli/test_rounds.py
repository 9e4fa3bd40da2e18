"""CLI tests for `agree rounds`: JSON equals the library, round files, clusters, errors."""

from __future__ import annotations

import json
from pathlib import Path

from typer.testing import CliRunner

from agree.analysis.rounds import compare_rounds
from agree.core.model import AgreeError
from agree.io.readers import read
from tests.analysis.test_rounds import sample_rounds  # noqa: F401  (fixture)
from tests.cli.conftest import SAMPLES


def _cli():
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    return app


def test_cli_rounds_json_equals_library(tmp_path, sample_rounds):
    _, _ = sample_rounds
    plot = tmp_path / "trend.png"
    args = ["rounds", str(SAMPLES / "rounds_long.csv"), "--codebook", str(SAMPLES / "codebook.csv"),
            "--boot", "500", "--seed", "11", "--format", "json", "--plot", str(plot)]
    result = CliRunner().invoke(_cli(), args)
    assert result.exit_code == 0, result.output
    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    assert json.loads(result.stdout) == compare_rounds(data, n_resamples=500, seed=11).to_dict()
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_cli_rounds_round_files_and_table(tmp_path):
    args = ["rounds", str(SAMPLES / "round1.csv"), str(SAMPLES / "round2.csv"), "--round-files", "--keep",
            "interview", "--codebook", str(SAMPLES / "codebook.csv"), "--boot", "200", "--seed", "1",
            "--codebooks", f"round1={SAMPLES / 'codebook.csv'},round2={SAMPLES / 'codebook.csv'}"]
    result = CliRunner().invoke(_cli(), args)
    assert result.exit_code == 0, result.output
    assert "Agreement per round" in result.stdout and "round2" in result.stdout
    bad = CliRunner().invoke(_cli(), ["rounds", str(SAMPLES / "round1.csv"), "--codebooks", "nonsense"])
    assert isinstance(bad.exception, AgreeError)


def test_cli_rounds_without_a_round_column_points_to_the_options():
    import subprocess
    import sys

    exe = Path(sys.executable).parent / "agree"
    proc = subprocess.run([str(exe), "rounds", str(SAMPLES / "round1.csv"), "--boot", "0"],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert "--round-column NAME" in proc.stderr and "--round-files" in proc.stderr
    assert "no kept column" not in proc.stderr


def test_cli_rounds_cluster():
    result = CliRunner().invoke(_cli(), ["rounds", str(SAMPLES / "round1.csv"), str(SAMPLES / "round2.csv"),
                                         "--round-files", "--cluster", "interview", "--boot", "100",
                                         "--format", "json"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed["settings"]["cluster"] == "interview"
    assert printed["settings"]["n_clusters"] == {"round1": 12, "round2": 12}
    assert "12 interview groups" in result.stderr


def test_two_complete_multi_coder_files_are_rounds(tmp_path, capsys):
    import pandas as pd

    from tests.cli.conftest import run_main

    for i in (1, 2):
        pd.DataFrame({"unit": [f"u{i}{k}" for k in range(6)], "ann": list("abab" + "aa"),
                      "bo": list("abba" + "aa")}).to_csv(tmp_path / f"r{i}.csv", index=False)
    code, out, err = run_main(capsys, "rounds", tmp_path / "r1.csv", tmp_path / "r2.csv", "--boot", "0",
                              "--format", "json")
    assert code == 0, err
    assert "the files are read as rounds" in err and "--round-files" in err
    import json

    assert [r["round"] for r in json.loads(out)["rounds"]] == ["r1", "r2"]
