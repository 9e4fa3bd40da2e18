"""Highlighted passages in the commands that read data: the span options (`agree.cli.spans`) and
reading span files (samples/passages.qdpx and samples/passages_spans.csv, the same invented
coding of four synthetic interviews written both ways by samples/make_samples.py)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

from agree.analysis import passages
from agree.cli import spans as S
from agree.core.errors import AgreeError
from agree.io.refi import read_project
from agree.stats.scoring import score as library_score
from tests.cli.test_score import run, run_main

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
PROJECT = SAMPLES / "passages.qdpx"
TABLE = SAMPLES / "passages_spans.csv"
TEXTS = SAMPLES / "passages"
NOTHING = {key: None for key in S.FLAGS}


def test_span_options_reach_the_command_as_one_dict():
    app = typer.Typer()
    seen = {}

    @app.command()
    @S.span_options
    def show(files: list[Path], *, span_reading: dict):
        seen.update(span_reading)

    result = CliRunner().invoke(app, ["x.csv", "--view", "segments", "--segments", "sentence", "--min-share", "0.3",
                                      "--span-end", "inclusive", "--offsets", "token", "--texts", "folder",
                                      "--documents", "pairable", "--all-coded", "--code-depth", "1",
                                      "--coder", "amara", "--coder", "chen"])
    assert result.exit_code == 0, result.output
    assert seen == {"view": "segments", "segments": "sentence", "min_share": 0.3, "span_end": "inclusive",
                    "offsets": "token", "texts": Path("folder"), "documents": "pairable", "all_coded": True,
                    "code_depth": 1, "coders": ["amara", "chen"]}
    CliRunner().invoke(app, ["x.csv"])
    assert seen == NOTHING
    assert S.given(seen) == []


def test_a_project_is_read_and_reported(capsys):
    spans = S.load_spans([PROJECT], **NOTHING)
    assert spans.coders == ("amara", "bastien", "chen") and spans.n_documents == 4
    err = capsys.readouterr().err
    assert err.startswith("read 84 spans, 3 coders, 4 documents, 9 codes: REFI-QDA project")
    assert "note: which coder coded which source is inferred" in err


def test_the_span_table_gives_the_projects_spans():
    """The sample's table and project hold the same coding: the same spans, document by document."""
    table = S.load_spans([TABLE], **{**NOTHING, "texts": TEXTS})
    project = read_project(PROJECT)

    def spans(data):
        return sorted(map(tuple, data.table().itertuples(index=False, name=None)))

    assert spans(table) == spans(project)
    assert table.texts == project.texts


def test_code_depth_rolls_nested_codes_up(capsys):
    table = S.load_spans([TABLE], **{**NOTHING, "code_depth": 1})
    assert table.codes == ("Motivation", "Organisation", "Strain")
    assert "codes rolled up to level 1 (--code-depth): 9 codes became 3" in capsys.readouterr().err
    project = S.load_spans([PROJECT], **{**NOTHING, "code_depth": 1})
    assert sorted(project.codes) == ["Motivation", "Organisation", "Strain"]


def test_a_coding_sheet_is_not_span_data():
    assert S.load_spans([SAMPLES / "round1.csv"], **NOTHING) is None
    with pytest.raises(AgreeError) as exc:
        S.load_spans([SAMPLES / "round1.csv"], **{**NOTHING, "view": "segments", "texts": TEXTS})
    assert exc.value.code == "not-spans"
    assert "--view, --texts apply to highlighted passages, but this is not span data" in exc.value.one_line()
    assert "round1.csv" in exc.value.one_line()


@pytest.mark.parametrize("files, options, reading, words", [
    ([PROJECT, TABLE], {}, {}, "span data are read from one file at a time"),
    ([PROJECT], {"texts": TEXTS}, {}, "--texts applies to span tables"),
    ([PROJECT], {"offsets": "token"}, {}, "--offsets applies to span tables"),
    ([PROJECT], {}, {"code": ["code"]}, "--code-col name columns of a table"),
    ([TABLE], {}, {"layout": "long"}, "--layout applies to coding sheets, not to span data (a span table)"),
    ([TABLE], {}, {"engine": "duckdb"}, "--engine applies to coding sheets"),
    ([TABLE], {"coders": ["amara", "zed"]}, {}, "--coder zed: no such coder in the spans"),
])
def test_what_span_data_cannot_take_is_refused(files, options, reading, words):
    with pytest.raises(AgreeError) as exc:
        S.load_spans(files, reading=reading, **{**NOTHING, **options})
    assert words in exc.value.one_line()


def test_a_codebook_must_list_every_code(tmp_path):
    book = tmp_path / "codebook.csv"
    book.write_text("code\nMotivation\nStrain\nOrganisation\n", encoding="utf-8")
    with pytest.raises(AgreeError, match="6 code.s. of the spans are not in the codebook") as exc:
        S.load_spans([TABLE], codebook=book, **NOTHING)
    assert "--code-depth" in exc.value.hint
    assert S.load_spans([TABLE], codebook=book, **{**NOTHING, "code_depth": 1}) is not None


def test_view_choice_and_segment_arguments(tmp_path):
    assert S.view_choice(NOTHING) == "positions"
    assert S.view_choice({**NOTHING, "segments": "turn"}) == "segments"
    with pytest.raises(AgreeError, match="--view unitizing cannot be used with agree codes"):
        S.view_choice({**NOTHING, "view": "unitizing"}, ("positions", "segments"), "codes")
    with pytest.raises(AgreeError, match="--min-share applies to the segments view"):
        S.view_choice({**NOTHING, "view": "positions", "min_share": 0.2})
    assert S.segment_arguments(NOTHING) == {"by": "paragraph", "segments": None, "min_cover": 0.5,
                                            "coders": None, "documents": "all"}
    listed = tmp_path / "segments.csv"
    listed.write_text("document,start,end\nT01,0,40\n", encoding="utf-8")
    args = S.segment_arguments({**NOTHING, "segments": str(listed), "documents": "pairable", "min_share": 0.0})
    assert args["by"] == "segment" and list(args["segments"]["end"]) == ["40"]
    assert (args["min_cover"], args["documents"]) == (0.0, "pairable")
    with pytest.raises(AgreeError, match="neither paragraph, sentence, turn nor a file"):
        S.segment_arguments({**NOTHING, "segments": "paragraphs"})


# -- agree score on span data -----------------------------------------------------------------------


def printed_json(result):
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


@pytest.fixture
def continuum(tmp_path):
    """One document of ten characters, 'abcdefghij'; coder A marks [0, 4) with x, coder B [2, 6).

    Positions as units (10 units, 2 coders, 1 = marked): A 1111000000, B 0011110000.
    Pairs: (1,1) at 2 positions, (1,0) at 2, (0,1) at 2, (0,0) at 4.
    Krippendorff's alpha (nominal): coincidences o11 = 4, o00 = 8, o01 = o10 = 4; n1 = 8, n0 = 12,
    n = 20; alpha = 1 - (n - 1)(o01 + o10) / (2 n0 n1) = 1 - 19 * 8 / 192 = 5/24.
    Cohen's kappa: po = 6/10, pe = .4 * .4 + .6 * .6 = .52, kappa = .08 / .48 = 1/6.
    All codes as sets (one code): MASI distance 1 between {x} and {}, 0 between equal sets: 5/24.
    Dice: 2 * 2 / (4 + 4) = 1/2. Span matching: Jaccard 2/6 < .5, so neither span is found:
    recall = precision = 0, F1 = 0.
    """
    texts = tmp_path / "texts"
    texts.mkdir()
    (texts / "d1.txt").write_text("abcdefghij", encoding="utf-8")
    table = tmp_path / "spans.csv"
    table.write_text("document,coder,code,start,end\nd1,A,x,0,4\nd1,B,x,2,6\n", encoding="utf-8")
    return table, texts


def test_positions_of_a_hand_computed_continuum(continuum):
    table, texts = continuum
    out = printed_json(run(["score", table, "--texts", texts, "--boot", 0, "--format", "json"]))
    assert out["view"] == "positions as units (characters), 1 document"
    assert out["overall"]["estimate"] == pytest.approx(5 / 24, abs=1e-12)
    assert out["per_code"]["x"]["krippendorff_alpha"]["estimate"] == pytest.approx(5 / 24, abs=1e-12)
    assert out["per_code"]["x"]["cohen_kappa"]["estimate"] == pytest.approx(1 / 6, abs=1e-12)
    assert out["specific_agreement"][0]["dice"] == pytest.approx(0.5)
    assert [out["span_matching"][0][k] for k in ("recall", "precision", "f1")] == [0, 0, 0]
    assert out["overall"]["se"] is None and out["overall"]["z"] is None   # no independent-unit SEs


def test_positions_json_is_the_librarys(capsys):
    out = printed_json(run(["score", PROJECT, "--boot", 200, "--seed", 3, "--min", 0.6, "--format", "json"]))
    expected = passages.position_agreement(read_project(PROJECT), n_resamples=200, seed=3, minimum=0.6)
    assert out == json.loads(json.dumps(expected.to_dict()))
    assert "4 documents resampled" in out["view"]
    assert any("intervals resample whole documents" in n["message"] for n in out["notes"])


def test_the_span_table_and_the_project_give_the_same_numbers():
    """The same coding read from the span table and from the .qdpx: every estimate, Dice and the
    span matching agree (coders appear in another order, so pairs are compared unordered)."""
    a = printed_json(run(["score", PROJECT, "--boot", 0, "--format", "json"]))
    b = printed_json(run(["score", TABLE, "--texts", TEXTS, "--boot", 0, "--format", "json"]))
    assert a["overall"]["estimate"] == pytest.approx(b["overall"]["estimate"], abs=1e-12)
    for code, results in a["per_code"].items():
        for name, r in results.items():
            assert r["estimate"] == pytest.approx(b["per_code"][code][name]["estimate"], abs=1e-12), (code, name)

    def number(x):   # NaN is null in JSON
        return float("nan") if x is None else x

    def dice(out):
        return {(r["code"], frozenset((r["coder_a"], r["coder_b"]))): number(r["dice"])
                for r in out["specific_agreement"]}

    def matching(out):
        rows = {}
        for r in out["span_matching"]:
            recall, precision = number(r["recall"]), number(r["precision"])
            rows[(r["code"], r["coder_a"], r["coder_b"], "recall")] = recall
            rows[(r["code"], r["coder_a"], r["coder_b"], "precision")] = precision
            rows[(r["code"], r["coder_b"], r["coder_a"], "recall")] = precision
            rows[(r["code"], r["coder_b"], r["coder_a"], "precision")] = recall
        return rows

    assert dice(a) == pytest.approx(dice(b), nan_ok=True)
    assert matching(a) == pytest.approx(matching(b), nan_ok=True)


def test_positions_table_names_the_view_and_the_cautions():
    result = run(["score", PROJECT, "--boot", 100, "--min", 0.6])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert out.startswith("View: positions as units (characters), 4 documents resampled.")
    for words in ("Per code", "Positional specific agreement (Dice", "Span matching", "intervals resample whole "
                  "documents", "Decision (all codes):", "does not clear the minimum .600"):
        assert words in out, words


def test_segments_go_through_the_usual_score():
    out = printed_json(run(["score", TABLE, "--texts", TEXTS, "--view", "segments", "--segments", "turn",
                            "--boot", 200, "--min", 0.6, "--format", "json"]))
    data = passages.segment_units(S.load_spans([TABLE], **{**NOTHING, "texts": TEXTS}), by="turn")
    expected = library_score(data, cluster="document", n_resamples=200, seed=1, minimum=0.6).to_dict()
    view = out.pop("view")
    assert view == "segments as units (turns), 4 documents, whole document groups resampled"
    assert out == json.loads(json.dumps(expected))
    assert out["decision"]["clears_minimum"] is False
    table = run(["score", TABLE, "--texts", TEXTS, "--segments", "turn", "--boot", 50])
    assert table.stdout.startswith("View: segments as units (turns)")
    csv_out = run(["score", TABLE, "--texts", TEXTS, "--segments", "turn", "--boot", 0, "--format", "csv"]).stdout
    assert csv_out.splitlines()[0].startswith("view,coefficient,")


def test_unitizing_is_labelled_experimental():
    result = run(["score", PROJECT, "--view", "unitizing", "--boot", 50])
    assert result.exit_code == 0, result.output
    assert "EXPERIMENTAL" in result.stdout.splitlines()[0]
    assert "EXPERIMENTAL: Krippendorff's alpha for unitizing" in result.stdout
    out = printed_json(run(["score", PROJECT, "--view", "unitizing", "--boot", 0, "--format", "json"]))
    assert out["kind"] == "unitizing" and "EXPERIMENTAL" in out["view"]


@pytest.mark.parametrize("args, words", [
    ([SAMPLES / "round1.csv", "--view", "segments"], "--view applies to highlighted passages, but this is not span "
                                                     "data"),
    ([PROJECT, "--view", "unitizing", "--documents", "pairable"], "unitizing compares only documents every"),
    ([PROJECT, "--cluster", "interview"], "--cluster interview: the positions view resamples whole documents"),
    ([PROJECT, "--view", "positions", "--segments", "turn"], "--segments applies to the segments view"),
    ([TABLE, "--view", "segments"], "document 'T01' has no text, so its paragraphs cannot be found"),
    ([PROJECT, "--level", "ordinal"], "--level ordinal: codes of highlighted passages are nominal"),
])
def test_span_errors_are_one_line_with_exit_code_2(monkeypatch, capsys, args, words):
    code, out, err = run_main(monkeypatch, capsys, ["score", *args, "--boot", 0])
    assert code == 2 and out == ""
    errors = [line for line in err.splitlines() if line.startswith("error:")]
    assert len(errors) == 1 and words in errors[0], err
    assert "Traceback" not in err


def test_a_segments_file_that_does_not_match_names_the_file(monkeypatch, capsys, tmp_path):
    listed = tmp_path / "segments.csv"
    listed.write_text("document,start,end\nT09,0,5\n", encoding="utf-8")
    code, _, err = run_main(monkeypatch, capsys, ["score", TABLE, "--texts", TEXTS, "--segments", listed, "--boot", 0])
    assert code == 2
    assert f"error: {listed}: the segment table names documents that are not compared: T09" in err


# -- agree codes, coders and report on span data ------------------------------------------------------
@pytest.mark.parametrize("command", ["codes", "coders"])
def test_codes_and_coders_through_the_positions_view(command):
    from agree.analysis.diagnostics import diagnose_codes, diagnose_coders

    out = printed_json(run([command, PROJECT, "--boot", 100, "--format", "json"]))
    data = passages.position_units(read_project(PROJECT))
    diagnose = diagnose_codes if command == "codes" else diagnose_coders
    expected = diagnose(data, n_resamples=100, seed=1, cluster="document")
    assert out.pop("view") == "positions as units (characters), 4 documents"
    assert out == json.loads(json.dumps(expected.to_dict()))
    table = run([command, PROJECT, "--boot", 0])
    assert table.stdout.startswith("View: positions as units (characters), 4 documents.")
    csv_out = run([command, PROJECT, "--boot", 0, "--format", "csv"]).stdout
    assert csv_out.startswith("view,") and "positions as units" in csv_out.splitlines()[1]


def test_codes_through_the_segments_view_from_the_table_and_the_project():
    """Turns found in the same texts give the same per-code alphas from the span table and the project."""
    a = printed_json(run(["codes", PROJECT, "--segments", "turn", "--boot", 0, "--format", "json"]))
    b = printed_json(run(["codes", TABLE, "--texts", TEXTS, "--segments", "turn", "--boot", 0, "--format", "json"]))
    assert a["view"] == b["view"] == "segments as units (turns), 4 documents"

    def alphas(out):
        return {"(all codes)": out["alpha"], **{r["code"]: r["alpha"] for r in out["codes"]}}

    assert len(alphas(a)) == 10
    assert alphas(a) == pytest.approx(alphas(b), nan_ok=True)


def test_codes_refuse_the_unitizing_view(monkeypatch, capsys):
    code, _, err = run_main(monkeypatch, capsys, ["codes", PROJECT, "--view", "unitizing"])
    assert code == 2 and "error: --view unitizing cannot be used with agree codes" in err


def test_report_names_the_view_in_the_methods_and_the_table(tmp_path):
    output = tmp_path / "passages.md"
    result = run(["report", PROJECT, "--segments", "turn", "--boot", 100, "-o", output, "--format", "json"])
    out = printed_json(result)
    data = passages.segment_units(read_project(PROJECT), by="turn")
    expected = library_score(data, cluster="document", n_resamples=100, seed=1)
    assert out["coefficients"][0]["estimate"] == pytest.approx(expected.coefficients["krippendorff_alpha"].estimate)
    unit = ("segments as units (turns), 4 documents; a code applies to a segment when the coder's spans of it cover "
            "at least 0.5 of the segment, or at least 0.5 of one such span lies inside it")
    assert out["settings"]["unit"] == unit and out["settings"]["cluster"] == "document"
    text = output.read_text(encoding="utf-8")
    assert f"*N* = 41 units ({unit})" in text
    assert f"Units: {unit}." in text


def test_report_takes_segments_only(monkeypatch, capsys, tmp_path):
    code, _, err = run_main(monkeypatch, capsys, ["report", PROJECT, "--view", "positions", "-o", tmp_path / "r.md"])
    assert code == 2 and "error: --view positions cannot be used with agree report" in err


def test_report_variables_refuse_span_data(monkeypatch, capsys, tmp_path):
    code, _, err = run_main(monkeypatch, capsys, ["report", "--variable", f"passages={TABLE}", "-o", tmp_path / "r.md"])
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert "--variable passages: this is span data (a span table), and --variable reads coding sheets" in err
