"""CLI tests for `agree score` (synthetic data: samples/ and small files written here).

The printed JSON is checked against the library's `ScoreResult.to_dict()`; bad input is checked
through `agree.cli.app.main()` (which turns errors into one stderr line and exit code 2) and,
for a few cases, through the installed `agree` executable.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from typer.testing import CliRunner

import agree
import agree.cli.commands  # noqa: F401  (registers the commands)
from agree.cli.app import app, main
from agree.stats import coefficients as coef

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "samples"
ROUND1 = SAMPLES / "round1.csv"
CODEBOOK = SAMPLES / "codebook.csv"
RATINGS = SAMPLES / "ratings.csv"
RATINGS_BOOK = SAMPLES / "ratings_codebook.csv"
AGREE_EXE = ROOT / ".venv" / "bin" / "agree"

OLE2_MAGIC = bytes.fromhex("D0CF11E0A1B11AE1")


def run(args):
    return CliRunner().invoke(app, [str(a) for a in args])


def run_main(monkeypatch, capsys, args):
    """Run the console entry point in-process; return (exit code, stdout, stderr)."""
    monkeypatch.setattr(sys, "argv", ["agree", *map(str, args)])
    with pytest.raises(SystemExit) as exc:
        main()
    out = capsys.readouterr()
    code = exc.value.code
    return (0 if code is None else code), out.out, out.err


def library(path, *, codebook=None, boot=200, seed=1, minimum=None, keep=(), cluster=None, **read):
    data = agree.read(path, codebook=codebook, keep=keep, **read)
    return agree.score(data, minimum=minimum, n_resamples=boot, seed=seed, cluster=cluster)


def json_roundtrip(obj):
    return json.loads(json.dumps(obj, allow_nan=False))


# -- JSON, CSV and table output --------------------------------------------------------------
def test_json_equals_library_to_dict():
    result = run(["score", ROUND1, "--codebook", CODEBOOK, "--format", "json", "--boot", "200", "--seed", "1"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed == json_roundtrip(library(ROUND1, codebook=CODEBOOK).to_dict())
    # the keys the command promises
    assert {"read", "used", "left_out"} <= set(printed["units"])
    assert {"read", "missing"} <= set(printed["values"])
    assert printed["coders"] == ["amara", "bastien", "chen"] and printed["level"] == "nominal"
    assert {"replicates", "seed", "method"} <= set(printed["bootstrap"])
    assert printed["bootstrap"]["replicates"] == 200 and printed["bootstrap"]["seed"] == 1
    assert isinstance(printed["warnings"], list)
    assert set(printed["coefficients"]) == {"percent_agreement", "scott_pi", "fleiss_kappa", "conger_kappa",
                                            "brennan_prediger", "gwet_ac1", "krippendorff_alpha"}
    for name, entry in printed["coefficients"].items():
        assert {"estimate", "se", "ci_low", "ci_high", "lower_bound", "p_value_min"} <= set(entry), name
        assert "p_below_min" not in entry      # renamed: it was the raw share of resamples below the minimum
    assert "read 120 units" in result.stderr      # the reading report goes to stderr, not into the JSON


def test_json_with_minimum_equals_library_and_has_decision():
    result = run(["score", ROUND1, "--codebook", CODEBOOK, "--format", "json", "--boot", "200", "--min", "0.5"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed == json_roundtrip(library(ROUND1, codebook=CODEBOOK, minimum=0.5).to_dict())
    assert printed["decision"]["coefficient"] == "krippendorff_alpha"
    assert printed["coefficients"]["krippendorff_alpha"]["p_value_min"] is not None
    assert printed["decision"]["clears_minimum"] is (printed["decision"]["p_value_min"] < 0.05)


def test_csv_has_one_row_per_coefficient():
    result = run(["score", ROUND1, "--codebook", CODEBOOK, "--format", "csv", "--boot", "200", "--seed", "1"])
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    lib = library(ROUND1, codebook=CODEBOOK)
    assert [r["coefficient"] for r in rows] == list(lib.coefficients)
    for r in rows:
        res = lib.coefficients[r["coefficient"]]
        assert float(r["estimate"]) == pytest.approx(res.estimate, rel=1e-12)
        assert float(r["ci_low"]) == pytest.approx(res.ci_low, rel=1e-12)
        assert float(r["ci_high"]) == pytest.approx(res.ci_high, rel=1e-12)
        assert r["ci_method"] == "pseudo-unit" and r["n_coders"] == "3"


@pytest.fixture
def with_left_out(tmp_path):
    """Two coders, 12 units; u03 and u07 have one value only, u11 none."""
    path = tmp_path / "pairs.csv"
    rows = ["unit,ines,jonas"] + [f"u{i:02d},{'yes' if i % 3 else 'no'},{'yes' if i % 4 else 'no'}"
                                  for i in range(1, 13)]
    rows[3] = "u03,yes,"
    rows[7] = "u07,,no"
    rows[11] = "u11,,"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_table_names_units_method_seed_and_decision(with_left_out):
    result = run(["score", with_left_out, "--boot", "150", "--seed", "7", "--min", "0.2"])
    assert result.exit_code == 0, result.output
    out = result.stdout
    lib = library(with_left_out, boot=150, seed=7, minimum=0.2)
    assert lib.units_left_out == ("u03", "u07", "u11")
    assert "12 read, 9 used, 3 left out" in out
    assert "Left out: u03, u07, u11" in out
    assert "least-favourable pseudo-unit, 150 draws over units" in out and "seed 7" in out
    assert "p(≤ .200): one-sided p-value" in out and "The decision rests on the bound." in out
    assert "Cohen's kappa" in out and "Krippendorff's alpha" in out
    decision = next(line for line in out.splitlines() if line.startswith("Decision:"))
    assert "one-sided" in decision and decision == f"Decision: {lib.decision()['sentence']}."
    assert "few-units" in result.stderr            # 9 units: the warning goes to stderr


def test_table_without_minimum_has_no_decision():
    result = run(["score", ROUND1, "--boot", "0"])
    assert result.exit_code == 0, result.output
    assert "Decision:" not in result.stdout
    assert "Not computed" in result.stdout and "Cohen's kappa compares exactly two coders" in result.stdout


# -- ordinal ratings ---------------------------------------------------------------------------
def test_ordinal_ratings_three_coders():
    result = run(["score", RATINGS, "--codebook", RATINGS_BOOK, "--format", "json", "--boot", "0"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed["level"] == "ordinal"                       # from the codebook's order column
    assert printed["coefficients"]["krippendorff_alpha"]["level"] == "ordinal"
    assert "gwet_ac2" in printed["coefficients"]
    assert not any(k.startswith("weighted_kappa") for k in printed["coefficients"])
    assert "cohen_kappa" in printed["skipped"]
    assert printed == json_roundtrip(library(RATINGS, codebook=RATINGS_BOOK, boot=0).to_dict())


def test_ordinal_ratings_two_coders_weighted_kappas():
    result = run(["score", RATINGS, "--codebook", RATINGS_BOOK, "--coder-col", "amara", "--coder-col", "bastien",
                  "--format", "json", "--boot", "0"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    assert printed["coders"] == ["amara", "bastien"]
    data = agree.read(RATINGS, codebook=RATINGS_BOOK, coder=["amara", "bastien"])
    for name, weights in (("weighted_kappa_linear", "linear"), ("weighted_kappa_quadratic", "quadratic")):
        expected = coef.cohen_kappa(data, weights=weights, n_resamples=0, seed=1).to_dict()
        assert printed["coefficients"][name] == json_roundtrip(expected)


# -- clusters ----------------------------------------------------------------------------------
def test_cluster_by_interview():
    result = run(["score", ROUND1, "--cluster", "interview", "--format", "json", "--boot", "150"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    for name, entry in printed["coefficients"].items():
        assert entry["bootstrap"]["unit"] == "cluster:interview", name
    lib = library(ROUND1, boot=150, keep=("interview",), cluster="interview")
    assert printed == json_roundtrip(lib.to_dict())


def test_cluster_named_in_table():
    result = run(["score", ROUND1, "--cluster", "interview", "--boot", "100"])
    assert result.exit_code == 0, result.output
    line = next(x for x in result.stdout.splitlines() if x.startswith("Intervals:"))
    assert "interview" in line and "over units" not in line


def test_cluster_named_in_json_summary():
    result = run(["score", ROUND1, "--cluster", "interview", "--format", "json", "--boot", "100"])
    assert result.exit_code == 0, result.output
    assert "interview" in json.dumps(json.loads(result.stdout)["bootstrap"])


def test_unknown_cluster_column(monkeypatch, capsys):
    code, out, err = run_main(monkeypatch, capsys, ["score", ROUND1, "--cluster", "household", "--boot", "10"])
    assert code == 2 and out == ""
    errors = [x for x in err.splitlines() if x.startswith("error:")]
    assert len(errors) == 1 and "household" in errors[0] and "Traceback" not in err


# -- bad input -----------------------------------------------------------------------------------
def write_long_duplicate(p):
    p.write_text("unit,coder,code\nu1,ann,x\nu1,bob,x\nu2,ann,y\nu2,ann,z\nu2,bob,y\n")


def write_workbook_text_at_interval(p):
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Round 1"
    for row in (("unit", "amara", "bastien"), ("u1", 1, 2), ("u2", 3, "high"), ("u3", 2, 2)):
        ws.append(row)
    wb.save(p)


def write_zip_as_csv(p):
    with zipfile.ZipFile(p, "w") as z:
        z.writestr("sheet.txt", "unit,a,b\nu1,x,y\n")


BAD_INPUT = [
    # id, file name, how to write it (None: no file), extra options, fragments of the error line
    ("missing-file", "absent.csv", None, [], ["absent.csv", "file not found"]),
    ("empty-file", "empty.csv", lambda p: p.write_bytes(b""), [], ["empty.csv", "empty"]),
    ("header-only", "header.csv", lambda p: p.write_text("unit,a,b\n"), [], ["header.csv", "no data rows"]),
    ("one-coder", "one.csv", lambda p: p.write_text("unit,a\nu1,x\nu2,y\n"), [], ["one.csv", "one coder"]),
    ("long-duplicate", "long.csv", write_long_duplicate, [],
     ["long.csv", "row 4", "column 'code'", "'ann'", "'u2'", "more than once", "rows 4, 5"]),
    ("unknown-code", "unk.csv", lambda p: p.write_text("unit,a,b\nu1,Belonging,Belongin\nu2,Burnout,Burnout\n"),
     ["--codebook", CODEBOOK], ["unk.csv", "row 2", "column 'b'", "'Belongin'", "closest codebook entry: 'Belonging'"]),
    ("text-at-interval", "txt.csv", lambda p: p.write_text("unit,a,b\nu1,1,2\nu2,3,high\n"),
     ["--level", "interval"], ["txt.csv", "row 3", "column 'b'", "'high'", "interval"]),
    ("text-at-interval-workbook", "sheet.xlsx", write_workbook_text_at_interval, ["--level", "interval"],
     ["sheet.xlsx", "sheet 'Round 1'", "row 3", "column 'bastien'", "'high'"]),
    ("encrypted-workbook", "locked.xlsx", lambda p: p.write_bytes(OLE2_MAGIC + bytes(504)), [],
     ["locked.xlsx", "password"]),
    ("corrupt-zip-workbook", "broken.xlsx", lambda p: p.write_bytes(b"PK\x03\x04" + bytes(range(256)) * 4), [],
     ["broken.xlsx", "damaged"]),
    ("random-bytes-workbook", "noise.xlsx", lambda p: p.write_bytes(bytes(range(256))[::-1] * 4), [],
     ["noise.xlsx", "not an Excel workbook"]),
    ("csv-text-as-xlsx", "text.xlsx", lambda p: p.write_text("unit,a,b\nu1,x,x\nu2,y,x\n"), [],
     ["text.xlsx", "not an Excel workbook", "rename it to .csv"]),
    ("zip-as-csv", "packed.csv", write_zip_as_csv, [], ["packed.csv", "zip", ".xlsx"]),
    ("blank-header", "blank.csv", lambda p: p.write_text("unit,,b\nu1,x,y\nu2,x,y\n"), [],
     ["blank.csv", "row 1", "column 2", "blank header"]),
    ("duplicate-header", "dup.csv", lambda p: p.write_text("unit,a,a\nu1,x,y\nu2,x,y\n"), [],
     ["dup.csv", "row 1", "column 3", "repeats the header 'a'"]),
]


@pytest.mark.parametrize("name, write, options, fragments",
                         [pytest.param(n, w, o, f, id=i) for i, n, w, o, f in BAD_INPUT])
def test_bad_input_one_error_line_exit_2(tmp_path, monkeypatch, capsys, name, write, options, fragments):
    path = tmp_path / name
    if write is not None:
        write(path)
    code, out, err = run_main(monkeypatch, capsys, ["score", path, "--boot", "0", *options])
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])


def test_several_problems_one_line_each(tmp_path, monkeypatch, capsys):
    path = tmp_path / "two_unknown.csv"
    path.write_text("unit,a,b\nu1,Belonging,Belongin\nu2,Burnot,Burnout\n")
    code, out, err = run_main(monkeypatch, capsys, ["score", path, "--codebook", CODEBOOK, "--boot", "0"])
    assert code == 2 and out == "" and "Traceback" not in err
    lines = err.strip().splitlines()
    assert all(x.startswith("error: ") for x in lines)
    assert len(lines) == 2                        # the summary naming the first problem, then the other one
    assert "2 codes are not in the codebook" in lines[0]
    belongin = next(x for x in lines if "'Belongin'" in x)
    burnot = next(x for x in lines if "'Burnot'" in x)
    assert belongin != burnot
    assert "row 2, column 'b'" in belongin and "closest codebook entry: 'Belonging'" in belongin
    assert "row 3, column 'a'" in burnot and "closest codebook entry: 'Burnout'" in burnot


def test_random_bytes_workbook_not_called_text(tmp_path, monkeypatch, capsys):
    path = tmp_path / "noise.xlsx"
    path.write_bytes(bytes(range(256))[::-1] * 4)
    code, _, err = run_main(monkeypatch, capsys, ["score", path, "--boot", "0"])
    assert code == 2
    assert "plain text" not in err and "rename it to .csv" not in err


def test_windows_1252_csv_read_with_a_note(tmp_path, monkeypatch, capsys):
    path = tmp_path / "cafe.csv"
    path.write_bytes("unit,a,b\nu1,café,café\nu2,thé,café\nu3,thé,thé\n".encode("cp1252"))
    code, out, err = run_main(monkeypatch, capsys, ["score", path, "--boot", "0", "--format", "json"])
    assert code == 0, err
    printed = json.loads(out)
    assert printed["categories"] == ["café", "thé"]
    assert printed["coefficients"]["percent_agreement"]["estimate"] == pytest.approx(2 / 3)
    assert "Windows-1252" in err and "error" not in err


def test_unknown_option_is_a_usage_error(monkeypatch, capsys):
    code, out, err = run_main(monkeypatch, capsys, ["score", ROUND1, "--bogus"])
    assert code == 2 and "No such option" in err and "Traceback" not in err
    assert run(["score", ROUND1, "--bogus"]).exit_code == 2


def test_executable_reports_errors_in_one_line(tmp_path):
    # one run of the installed entry point (start-up is slow); the other cases run main() in-process
    (tmp_path / "locked.xlsx").write_bytes(OLE2_MAGIC + bytes(504))
    fragment = "locked.xlsx: the workbook is password-protected"
    proc = subprocess.run([str(AGREE_EXE), "score", "locked.xlsx", "--boot", "0"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert proc.stderr.splitlines() == [proc.stderr.strip()] and proc.stderr.startswith("error: ")
    assert fragment in proc.stderr and "Traceback" not in proc.stderr


# -- the command writes nothing ----------------------------------------------------------------
def snapshot(folder: Path):
    return {str(p.relative_to(folder)): (p.stat().st_mtime_ns, hashlib.sha256(p.read_bytes()).hexdigest())
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_score_writes_no_files(tmp_path, monkeypatch):
    for src in (ROUND1, CODEBOOK):
        (tmp_path / src.name).write_bytes(src.read_bytes())
    before = snapshot(tmp_path)
    samples_before = snapshot(SAMPLES)
    monkeypatch.chdir(tmp_path)
    for fmt in ("table", "json", "csv"):
        result = run(["score", "round1.csv", "--codebook", "codebook.csv", "--boot", "50", "--min", "0.6",
                      "--cluster", "interview", "--format", fmt])
        assert result.exit_code == 0, result.output
    assert snapshot(tmp_path) == before
    assert snapshot(SAMPLES) == samples_before


def test_quiet_works_before_or_after_the_command(monkeypatch, capsys):
    from agree.cli.app import STATE

    for args in (["-q", "score", ROUND1, "--boot", "0"], ["score", ROUND1, "--boot", "0", "--quiet"]):
        code, out, err = run_main(monkeypatch, capsys, args)
        assert code == 0 and "Agreement:" in out and "read 120 units" not in err
        STATE["quiet"] = False
    code, out, err = run_main(monkeypatch, capsys, ["score", ROUND1, "--boot", "0"])
    assert code == 0 and "read 120 units" in err


# -- one name per result ------------------------------------------------------------------------
def test_score_table_and_report_name_each_coefficient_with_the_same_words(monkeypatch):
    """`agree score` prints the words of the report's label (which writes κ for kappa, ...),
    qualifiers included: metric, weights, "(unweighted)"."""
    import numpy as np
    from rich.console import Console

    import agree.cli.score as score_command
    from agree.output.report import result_label
    from tests.core.test_registry import in_words

    rng = np.random.default_rng(4)
    ordinal_two = agree.from_table(rng.integers(1, 5, size=(40, 2)).astype(float), level="ordinal")
    sets = agree.from_table([[{"a"}, {"a", "b"}], [{"b"}, {"b"}], [{"a", "c"}, {"c"}], [{"a"}, {"b"}]] * 6)
    for data in (agree.read(ROUND1), agree.read(RATINGS, codebook=RATINGS_BOOK), ordinal_two, sets):
        result = agree.score(data, n_resamples=0, seed=1)
        console = Console(width=250, file=io.StringIO(), record=True)
        monkeypatch.setattr(score_command, "stdout", console)
        score_command.print_score(result)
        cells = {line.split("│")[1].strip() for line in console.export_text().splitlines() if line.count("│") > 2}
        for r in result.coefficients.values():
            assert in_words(result_label(r, result.level)) in cells, (r.name, cells)
