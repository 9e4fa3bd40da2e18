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
    assert isinstance(again.exception, AgreeError) and "r-md-figures" in again.exception.message
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


# -- several variables, figure folders, consensus of other units, no bootstrap ----------------------

def test_cli_report_several_variables_equal_the_library(tmp_path):
    from agree.io.readers import read
    from agree.output.report import Variable, build_study_report

    out = tmp_path / "study.html"
    args = ["report", "--variable", f"topics={SAMPLES / 'multicode.xlsx'}",
            "--variable", f"commitment={SAMPLES / 'ratings.csv'},level=ordinal,"
                          f"codebook={SAMPLES / 'ratings_codebook.csv'}",
            "-o", str(out), "--boot", "100", "--seed", "5", "--format", "json"]
    result = CliRunner().invoke(_cli(), args)
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    expected = build_study_report({
        "topics": read(SAMPLES / "multicode.xlsx"),
        "commitment": Variable(read(SAMPLES / "ratings.csv", codebook=SAMPLES / "ratings_codebook.csv"),
                               level="ordinal")}, n_resamples=100, seed=5).to_dict()
    for side in (printed, expected):
        for section in side["sections"]:
            section["sample"].pop("files"), section["sample"].pop("checksums")
    assert printed == expected
    assert "Variable: topics" in out.read_text() and "Variable: commitment" in out.read_text()


def test_cli_report_variables_from_columns_of_one_sheet(tmp_path):
    sheet = tmp_path / "study.csv"
    rows = ["unit,coder,topic,severity"]
    for u in range(30):
        for coder, shift in (("ann", 0), ("ben", u % 3 == 0)):
            rows.append(f"u{u},{coder},{'ab'[(u + shift) % 2]},{1 + (u + shift) % 5}")
    sheet.write_text("\n".join(rows) + "\n")
    result = CliRunner().invoke(_cli(), ["report", str(sheet), "--variable", "topic=column=topic",
                                         "--variable", "severity=column=severity,level=ordinal",
                                         "-o", str(tmp_path / "s.md"), "--boot", "0", "--format", "json"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed["variables"] == ["topic", "severity"]
    assert [s["settings"]["level"] for s in printed["sections"]] == ["nominal", "ordinal"]


def test_cli_report_variable_errors(tmp_path):
    from agree.cli.report import parse_variable

    assert parse_variable("sev=a.csv,b.csv,level=ordinal,coders=x+y") == {
        "name": "sev", "files": [Path("a.csv"), Path("b.csv")], "level": "ordinal", "coders": ["x", "y"]}
    out = str(tmp_path / "r.html")
    for spec, words in (("nameonly", "expected NAME=FILE"), ("x=a.csv,colour=red", "unknown key 'colour'"),
                        ("x=a.csv,level=loud", "level 'loud'"), ("x=a.csv,level=", "has no value")):
        result = CliRunner().invoke(_cli(), ["report", "--variable", spec, "-o", out])
        assert isinstance(result.exception, AgreeError) and words in result.exception.message, spec
    twice = CliRunner().invoke(_cli(), ["report", "--variable", f"a={SAMPLES / 'round1.csv'}",
                                        "--variable", f"a={SAMPLES / 'round2.csv'}", "-o", out])
    assert "given twice" in twice.exception.message
    rounds = CliRunner().invoke(_cli(), ["report", "--variable", f"a={SAMPLES / 'round1.csv'}", "--round-files",
                                         "-o", out])
    assert rounds.exception.code == "bad-option" and "--round-files" in rounds.exception.message
    nothing = CliRunner().invoke(_cli(), ["report", "-o", out])
    assert nothing.exception.code == "no-input"


def test_cli_report_md_then_tex_of_the_same_name(tmp_path):
    base = ["report", str(SAMPLES / "round2.csv"), "--boot", "0"]
    for name in ("r.md", "r.tex"):
        result = CliRunner().invoke(_cli(), base + ["-o", str(tmp_path / name)])
        assert result.exit_code == 0, result.output       # before: r.tex failed, r-figures existed
    assert (tmp_path / "r-md-figures" / "forest.png").exists()
    assert (tmp_path / "r-tex-figures" / "forest.png").exists()


def test_cli_report_refuses_a_consensus_of_another_round(tmp_path):
    import subprocess
    import sys

    from agree.io.readers import read

    round1 = read(SAMPLES / "round1.csv")
    consensus = tmp_path / "consensus-round1.csv"
    consensus.write_text("unit,final code,source\n" + "".join(f"{u},Belonging,agreed\n" for u in round1.unit_ids))
    exe = Path(sys.executable).parent / "agree"
    proc = subprocess.run([str(exe), "report", str(SAMPLES / "round2.csv"), "--consensus", str(consensus),
                           "--boot", "0", "-o", str(tmp_path / "r.html")], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    line = proc.stderr.strip().splitlines()[-1]                 # after the reading notes: one line
    assert line.startswith("error: the consensus file")
    assert str(consensus) in line and "round2.csv" in line and "120 of its 120 units are not in the data" in line
    assert not (tmp_path / "r.html").exists()


def test_cli_report_says_when_the_p_value_is_a_normal_approximation(tmp_path):
    src = tmp_path / "two.csv"
    src.write_text("unit,a,b\n" + "".join(f"{i},{'xy'[i % 2]},{'xy'[(i // 3) % 2]}\n" for i in range(40)))
    result = CliRunner().invoke(_cli(), ["report", str(src), "--boot", "0", "--min", "0.6", "-o",
                                         str(tmp_path / "r.html")])
    assert result.exit_code == 0, result.output
    assert "from the normal or t approximation with the analytic SE" in " ".join(result.stdout.split())
