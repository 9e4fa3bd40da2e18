"""Reviewing and reconciling highlighted passages (agree.output.passages): the review workbook of
disputed passages, decisions read back into consensus spans, and the consensus written back as a
span table and as exchange-format projects valid against the standard's Project schema. All data
are synthetic."""

from __future__ import annotations

import zipfile
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
import xmlschema

from agree.core.errors import AgreeError
from agree.io.refi import read_project
from agree.io.spans import read_spans
from agree.output.passages import (
    MARKED,
    passage_units,
    reconcile_passages,
    write_consensus_spans,
    write_passage_review,
)
from agree.output.reconciliation import ABOUT_SHEET, REVIEW_SHEET
from agree.output.refi import write_project
from tests.cli.conftest import fill

SCHEMA = xmlschema.XMLSchema10(str(Path(__file__).resolve().parents[1] / "io" / "schemas" / "Project-mrt2019.xsd"))

LINES = ["Ann: We fix bikes here.", "Bo: Spare parts are =scarce.", "Ann: We share tools with neighbours."]
TEXT = "\n".join(LINES)


def turn(k: int) -> tuple[int, int]:
    start = TEXT.index(LINES[k])
    return start, start + len(LINES[k])


def phrase(p: str) -> tuple[int, int]:
    start = TEXT.index(p)
    return start, start + len(p)


SPANS = [("x", "repair", "We fix bikes"), ("y", "repair", "fix bikes"),
         ("x", "scarcity", "Spare parts are =scarce"),
         ("x", "sharing", "We share tools"), ("y", "repair", "share tools with neighbours")]


@pytest.fixture
def spans(tmp_path):
    folder = tmp_path / "texts"
    folder.mkdir()
    (folder / "d1.txt").write_text(TEXT, encoding="utf-8", newline="")
    rows = [{"document": "d1", "coder": c, "code": k, "start": phrase(p)[0], "end": phrase(p)[1]}
            for c, k, p in SPANS]
    table = tmp_path / "spans.csv"
    pd.DataFrame(rows).to_csv(table, index=False)
    return read_spans(table, documents_dir=folder)


def qde(path: Path) -> str:
    with zipfile.ZipFile(path) as z:
        return z.read(next(n for n in z.namelist() if n.lower().endswith(".qde"))).decode("utf-8")


def consensus_rows(data) -> list[tuple[str, str, int, int]]:
    one = data.subset_coders(["consensus"]).table()
    return sorted(zip(one["document"], one["code"], one["start"], one["end"]))


def test_hand_worked_review_and_consensus(tmp_path, spans):
    """Three speaker turns of one document, coders x and y; a code applies to a turn when the
    coder's spans of it cover half the turn or half of one such span lies inside it:

    turn 1 "Ann: We fix bikes here."        x {repair} (span inside: share 1)   y {repair}  agreed
    turn 2 "Bo: Spare parts are =scarce."   x {scarcity}                        y {}        disputed
    turn 3 "Ann: We share tools with ..."   x {sharing}                         y {repair}  disputed

    The review lists turns 2 and 3 (two rows, worst first: 3 has two distinct sets as 2 does, so
    unit order). Decided: turn 2 "scarcity", turn 3 "repair; sharing". The consensus is one span
    per passage and code: repair over turn 1 (agreed), scarcity over turn 2, repair and sharing
    over turn 3 (decided): four spans, each the whole turn.
    """
    review = tmp_path / "review.xlsx"
    summary = write_passage_review(spans, review, by="turn", options={"segments": "turn"})
    assert (summary.units_read, summary.agreed, summary.needing_review, summary.rows_written) == (3, 1, 2, 2)
    wb = openpyxl.load_workbook(review)
    ws = wb[REVIEW_SHEET]
    header = [c.value for c in ws[1]]
    rows = [dict(zip(header, r)) for r in ws.iter_rows(min_row=2, values_only=True)]
    assert [r["unit"] for r in rows] == ["d1:turn 2", "d1:turn 3"]
    second = rows[0]
    assert (second["document"], int(second["start"]), int(second["end"])) == ("d1", *turn(1))
    assert (second["x"], second["y"], second["codes involved"]) == ("scarcity", "(none)", "scarcity")
    assert "»" + LINES[1] + "«" in second["text"]
    # the whole text is within 80 characters of the passage, so every span of x is marked in it
    assert second[MARKED + "x"] == ("Ann: ⟦repair⟧We fix bikes⟦/repair⟧ here.\n"
                                    "Bo: ⟦scarcity⟧Spare parts are =scarce⟦/scarcity⟧.\n"
                                    "Ann: ⟦sharing⟧We share tools⟦/sharing⟧ with neighbours.")
    assert "⟦" not in second[MARKED + "y"].split("\n")[1]
    assert rows[1]["x"] == "sharing" and rows[1]["y"] == "repair"
    # a span text beginning with "=" stays text, never a formula
    assert ws.cell(2, header.index(MARKED + "x") + 1).data_type == "s"
    # the unit review's conventions: drop-down of codes with "(none)", how-decided list, provenance
    lists = [dv.formula1 for dv in ws.data_validations.dataValidation]
    assert any("(none)" in f and "scarcity" in f for f in lists)
    about = {r[0]: r[1] for r in wb[ABOUT_SHEET].iter_rows(values_only=True)}
    assert about["option segments"] == "turn"
    assert len(about[str(spans.report.files[0])]) == 64  # sha256 of the span table

    fill(review, {"d1:turn 2": "scarcity", "d1:turn 3": "repair; sharing"})
    units = passage_units(spans, by="turn")
    result = reconcile_passages(units, review)
    assert (result.consensus.agreed, result.consensus.decided) == (1, 2)
    expected = sorted([("d1", "repair", *turn(0)), ("d1", "scarcity", *turn(1)),
                       ("d1", "repair", *turn(2)), ("d1", "sharing", *turn(2))])
    got = sorted(zip(result.spans["document"], result.spans["code"], result.spans["start"], result.spans["end"]))
    assert got == expected

    # as a span table, read back
    table = write_consensus_spans(result, tmp_path / "consensus.csv", spans=spans)
    back = read_spans(table, documents_dir=tmp_path / "texts")
    assert consensus_rows(back) == expected

    # as a new project (the spans came from a table): both coders and the consensus user
    new = write_consensus_spans(result, tmp_path / "consensus.qdpx", spans=spans)
    SCHEMA.validate(qde(new))
    back = read_project(new)
    assert back.coders == ("x", "y", "consensus")
    assert sorted(map(tuple, back.subset_coders(["x", "y"]).table().itertuples(index=False))) == \
        sorted(map(tuple, spans.table().itertuples(index=False)))
    assert consensus_rows(back) == expected

    # into an existing project: its users' codings untouched, one user added
    original = write_project(spans, tmp_path / "original.qdpx")
    before = qde(original)
    added = write_consensus_spans(result, tmp_path / "settled.qdpx", spans=read_project(original),
                                  project=original, inputs=[review])
    SCHEMA.validate(qde(added))
    assert qde(original) == before
    back = read_project(added)
    assert back.coders == ("x", "y", "consensus")
    assert sorted(map(tuple, back.subset_coders(["x", "y"]).table().itertuples(index=False))) == \
        sorted(map(tuple, read_project(original).table().itertuples(index=False)))
    assert consensus_rows(back) == expected


def test_undecided_passages_are_refused_unless_allowed(tmp_path, spans):
    review = tmp_path / "review.xlsx"
    write_passage_review(spans, review, by="turn")
    fill(review, {"d1:turn 2": "(none)"})
    units = passage_units(spans, by="turn")
    with pytest.raises(AgreeError) as err:
        reconcile_passages(units, review)
    assert err.value.code == "unresolved" and "d1:turn 3" in err.value.message
    result = reconcile_passages(units, review, allow_unresolved=True)
    assert result.consensus.unresolved == ("d1:turn 3",)
    # "(none)" decides that no code applies: only the agreed turn 1 keeps a span
    assert list(zip(result.spans["code"], result.spans["start"])) == [("repair", turn(0)[0])]


def test_inputs_are_never_overwritten(tmp_path, spans):
    review = tmp_path / "review.xlsx"
    write_passage_review(spans, review, by="turn")
    fill(review, {"d1:turn 2": "scarcity", "d1:turn 3": "sharing"})
    result = reconcile_passages(passage_units(spans, by="turn"), review)
    original = write_project(spans, tmp_path / "original.qdpx")
    before = original.read_bytes()
    with pytest.raises(AgreeError):
        write_consensus_spans(result, original, spans=read_project(original), project=original, force=True)
    assert original.read_bytes() == before
    table = Path(spans.report.files[0])  # the span table the spans were read from
    before = table.read_bytes()
    with pytest.raises(AgreeError):
        write_consensus_spans(result, table, spans=spans, force=True)
    assert table.read_bytes() == before
    with pytest.raises(AgreeError) as err:
        write_consensus_spans(result, tmp_path / "consensus.txt", spans=spans)
    assert err.value.code == "format"
