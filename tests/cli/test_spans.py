"""Highlighted passages in the commands that read data: the span options (`agree.cli.spans`) and
reading span files (samples/passages.qdpx and samples/passages_spans.csv, the same invented
coding of four synthetic interviews written both ways by samples/make_samples.py)."""

from __future__ import annotations

from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

from agree.cli import spans as S
from agree.core.errors import AgreeError
from agree.io.refi import read_project

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
