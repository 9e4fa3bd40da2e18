"""CLI tests for `agree codes` (synthetic data)."""

from __future__ import annotations

import io
import json
import re
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from agree.analysis.diagnostics import diagnose_codes
from agree.core.format import format_value
from tests.cli.conftest import ROWS, SAMPLES, expected_data, run

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


def test_codes_table_shows_worst_first_and_notes(coding_csv, monkeypatch):
    monkeypatch.setenv("COLUMNS", "200")
    result = run(["codes", str(coding_csv), "--boot", "100", "--seed", "1"])
    assert result.exit_code == 0, result.output
    first = diagnose_codes(expected_data(), n_resamples=0).to_frame().code[0]
    out = result.stdout
    assert "worst first" in out and "reason" in out
    assert out.index(first) < out.index("Most confused pairs")
    assert "read 15 units" in result.stderr          # the reading note goes to stderr
    assert "least-favourable pseudo-unit, 100 draws over units, seed 1" in result.stderr


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


# -- review fixes ----------------------------------------------------------------------------

def test_codes_overall_alpha_agrees_with_score_and_names_the_distance():
    score = run(["score", str(SAMPLES / "multicode.xlsx"), "--format", "json", "--boot", "0"])
    assert score.exit_code == 0, score.output
    alpha = json.loads(score.stdout)["coefficients"]["krippendorff_alpha"]["estimate"]
    codes = run(["codes", str(SAMPLES / "multicode.xlsx"), "--format", "json", "--boot", "0"])
    assert codes.exit_code == 0, codes.output
    printed = json.loads(codes.stdout)
    assert printed["alpha"] == pytest.approx(alpha)
    assert printed["distance"] == "masi"
    table = run(["codes", str(SAMPLES / "multicode.xlsx"), "--boot", "0"])
    assert "masi distance" in table.stdout
    assert format_value(alpha, "coefficient", 3) in table.stdout
    jaccard = run(["codes", str(SAMPLES / "multicode.xlsx"), "--format", "json", "--boot", "0",
                   "--distance", "jaccard"])
    assert json.loads(jaccard.stdout)["distance"] == "jaccard"
    assert json.loads(jaccard.stdout)["alpha"] != pytest.approx(alpha)


def test_codes_status_follows_the_interval_on_the_sample():
    result = run(["codes", str(SAMPLES / "multicode.xlsx"), "--format", "json", "--boot", "1000"])
    codes = {c["code"]: c for c in json.loads(result.stdout)["codes"]}
    conflict = codes["Conflict"]
    assert conflict["alpha"] >= 0.8 > conflict["ci_low"]
    assert conflict["status"] == "uncertain"
    table = run(["codes", str(SAMPLES / "multicode.xlsx"), "--boot", "1000"])
    assert "meets the minimum" not in table.stdout
    assert "uncertain" in table.stdout


def test_codes_table_is_apa_style_with_display_labels_and_coincidence_note(monkeypatch):
    monkeypatch.setenv("COLUMNS", "200")                   # headers on one line (80 columns wrap them)
    result = run(["codes", str(SAMPLES / "round1.csv"), "--codebook", str(SAMPLES / "codebook.csv"),
                  "--boot", "200"])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert not re.search(r"(?<![\d.])0\.\d{3}", out)      # no leading zero (APA, as in score)
    assert re.search(r"(?<![\d.])\.\d{3}\b", out)          # three decimals, as in score's tables
    assert "krippendorff_alpha" not in out and "p_s" not in out
    assert "specific agreement" in out and "Fleiss' κ" in out
    assert "coincidences" in out
    assert "¹ coincidences" in result.stderr and "1/(m − 1)" in result.stderr
    coders = run(["coders", str(SAMPLES / "round1.csv"), "--boot", "200"])
    assert coders.exit_code == 0, coders.output
    assert not re.search(r"(?<![\d.])0\.\d{3}", coders.stdout)
    assert "Krippendorff's α" in coders.stdout and "Cohen's κ" in coders.stdout


def test_codes_and_coders_resample_clusters():
    for command in ("codes", "coders"):
        result = run([command, str(SAMPLES / "round1.csv"), "--cluster", "interview", "--boot", "200",
                      "--format", "json"])
        assert result.exit_code == 0, result.output
        printed = json.loads(result.stdout)
        assert printed["bootstrap"]["unit"] == "cluster:interview"
        assert printed["n_clusters"] == 12
        assert "12 clusters (interview)" in result.stderr      # fewer than 20: a warning
        table = run([command, str(SAMPLES / "round1.csv"), "--cluster", "interview", "--boot", "200"])
        assert "whole interview groups (12 groups)" in table.stderr
    bad = run(["codes", str(SAMPLES / "round1.csv"), "--cluster", "nope", "--boot", "10"])
    assert bad.exit_code != 0 and "nope" in str(bad.exception)


def test_codes_on_a_rating_scale_prints_a_caution():
    result = run(["codes", str(SAMPLES / "ratings.csv"), "--codebook", str(SAMPLES / "ratings_codebook.csv"),
                  "--boot", "0"])
    assert result.exit_code == 0, result.output
    assert "of limited use" in result.stderr and "rating scale" in result.stderr


def test_codes_notes_name_the_code_and_paradox_is_filtered(tmp_path):
    path = tmp_path / "rare.csv"
    rows = [("u0", "rare", "x")] + [(f"u{i}", a, b) for i, (a, b) in
                                    enumerate([("x", "x"), ("y", "y"), ("x", "y")] * 10, start=1)]
    pd.DataFrame(rows, columns=["unit", "a", "b"]).to_csv(path, index=False)
    result = run(["codes", str(path), "--boot", "300", "--min-units", "1"])
    assert result.exit_code == 0, result.output
    lines = [ln for ln in result.stderr.splitlines() if "show any disagreement" in ln]
    assert lines and all("code '" in ln for ln in lines)
    assert any("code 'rare', α: Only 1 of 31 units show any disagreement" in ln for ln in lines)


def test_codes_table_shows_the_one_sided_bound_and_says_so():
    result = run(["codes", str(SAMPLES / "multicode.xlsx"), "--boot", "500", "--seed", "3"])
    assert result.exit_code == 0, result.output
    assert "bound†" in result.stdout
    assert "one-sided 95% lower bound" in result.stderr
    assert "rounded down where rounding would reach the minimum" in result.stderr
    assert "interval's lower end" not in result.stderr
    data = json.loads(run(["codes", str(SAMPLES / "multicode.xlsx"), "--boot", "500", "--seed", "3",
                           "--format", "json"]).stdout)
    for c in data["codes"]:
        assert "lower_bound" in c
        if c["status"] == "ok":
            assert c["lower_bound"] >= 0.8
        elif c["status"] == "uncertain":
            assert c["alpha"] >= 0.8 > c["lower_bound"]


def test_codes_fit_an_80_column_terminal_without_cutting_a_code(tmp_path, monkeypatch):
    """Before: at 80 columns the table kept its natural width (118 columns) and code names were
    cut ('Coordin…'). Now every table line fits, names wrap at spaces and the reasons move below
    the table, numbered as its rows."""
    names = ["Coordination of volunteers", "Recognition", "Time pressure", "Materialresourcesandtools"]
    rows = [(str(u), names[u % 4], names[(u + (u % 3 == 0)) % 4], names[u % 4]) for u in range(40)]
    path = tmp_path / "long.csv"
    pd.DataFrame(rows, columns=["unit", "amara", "ben", "chen"]).to_csv(path, index=False)
    monkeypatch.setenv("COLUMNS", "80")
    result = run(["codes", str(path), "--boot", "50", "--seed", "1"])
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    # every table line fits; lines of text (the reasons, the overall alpha) soft-wrap, to copy
    assert [line for line in lines if len(line) > 80 and not line.startswith(("#", "Krippendorff"))] == []
    assert "…" not in result.stdout
    joined = " ".join(" ".join(line.split()) for line in lines)
    frame = diagnose_codes(pd.DataFrame(rows).set_index(0).to_numpy(), n_resamples=0).to_frame()
    for rank, code in zip(frame["rank"], frame["code"]):
        assert f"#{rank} {code}: " in result.stdout           # the reasons, below the table
    assert "Materialresourcesandtools"[:20] in joined             # a long word folded, not cut
