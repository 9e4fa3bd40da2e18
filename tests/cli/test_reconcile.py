"""`agree reconcile` (after `agree disagreements`) end to end, through the console entry point
(exit codes and stderr as a user sees them). All data are synthetic."""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

import openpyxl
import pandas as pd

from agree.io.readers import read
from agree.output.reconciliation import ABOUT_SHEET, REVIEW_SHEET, reconcile, unprotect_text
from tests.cli.conftest import fill
from tests.cli.conftest import run_main as run

def test_disagreements_then_reconcile(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    code, out, err = run(capsys, "disagreements", data_file, "-o", review, "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    # u3 was coded by one coder only: listed for review after the two disagreements
    assert summary == {**summary, "units_read": 5, "agreed": 2, "needing_review": 3, "disagreements": 2,
                       "single_coder": 1, "single_coder_listed": True, "left_out": 0, "rows_written": 3}
    assert summary["inputs"] == {str(data_file): hashlib.sha256(data_file.read_bytes()).hexdigest()}
    assert "3 units need review (2 with a disagreement, 1 coded by one coder only" in err
    about = {r[0]: r[1] for r in openpyxl.load_workbook(review)[ABOUT_SHEET].iter_rows(values_only=True)}
    assert about[str(data_file)] == summary["inputs"][str(data_file)]

    fill(review, {"=SUM(A1)": "neg", "@here": "mixed", "u3": "neg"})
    consensus = tmp_path / "consensus.csv"
    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus,
                         "--summary-format", "json")
    assert code == 0, err
    # --format json prints exactly the library's to_dict()
    expected = reconcile(read(data_file), review).to_dict()
    assert json.loads(out) == expected
    assert "independent codes" in err
    back = pd.read_csv(consensus, dtype=str, keep_default_na=False).map(unprotect_text)
    assert list(back["unit"]) == ["=SUM(A1)", "u2", "u3", "@here", "-fine"]
    assert list(back["final code"]) == ["neg", "pos", "neg", "mixed", "mixed"]
    assert list(back["source"]) == ["decided", "agreed", "decided", "decided", "agreed"]
    assert list(back["ann"]) == ["pos", "pos", "neg", "pos", "mixed"]


def test_table_summary_and_data_after_review(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    assert run(capsys, "disagreements", data_file, "-o", review)[0] == 0
    fill(review, {"=SUM(A1)": "neg", "@here": "mixed", "u3": "neg"})
    code, out, err = run(capsys, "reconcile", review, data_file, "-o", tmp_path / "c.xlsx")
    assert code == 0, err
    assert "decided" in out and "written" in out
    assert (tmp_path / "c.xlsx").exists()


def test_unresolved_exits_2_and_writes_nothing(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    fill(review, {"=SUM(A1)": "neg", "u3": "neg"})
    consensus = tmp_path / "consensus.csv"
    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus)
    assert code == 2
    assert err.count("error:") == 1 and "@here" in err and "Traceback" not in err
    assert not consensus.exists()
    assert sorted(os.listdir(tmp_path)) == ["coding.csv", "review.xlsx"]

    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus,
                         "--allow-unresolved", "--format", "json")
    assert code == 0, err
    assert json.loads(out)["unresolved_units"] == ["@here"]
    back = pd.read_csv(consensus, dtype=str, keep_default_na=False).map(unprotect_text)
    assert back.set_index("unit").loc["@here", "source"] == "unresolved"
    assert back.set_index("unit").loc["@here", "final code"] == ""


def test_unknown_decision_names_the_row(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    fill(review, {"=SUM(A1)": "negative", "@here": "mixed"})
    code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", tmp_path / "c.csv")
    assert code == 2
    # '@here' (three different codes) comes first, so '=SUM(A1)' is on row 3
    assert "sheet 'Review', row 3, column 'decision'" in err and "did you mean 'neg'" in err


def test_refuses_to_overwrite_inputs(tmp_path, data_file, capsys):
    before = data_file.read_bytes()
    code, _, err = run(capsys, "disagreements", data_file, "-o", data_file, "--format", "csv",
                       "--force")
    assert code == 2 and "refusing to overwrite the input file" in err
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    fill(review, {"=SUM(A1)": "neg", "@here": "mixed", "u3": "neg"})
    review_bytes = review.read_bytes()
    for target in (review, data_file):
        code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", target,
                           "--format", "csv", "--force")
        assert code == 2 and "refusing to overwrite" in err
    assert data_file.read_bytes() == before and review.read_bytes() == review_bytes


def test_reconcile_needs_data(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    code, _, err = run(capsys, "reconcile", review, "-o", tmp_path / "c.csv")
    assert code == 2 and "--data" in err


def test_help_says_agreement_uses_independent_codes(capsys):
    code, out, _ = run(capsys, "reconcile", "--help")
    assert code == 0
    flat = " ".join(out.split())
    assert "computed on the coders' independent codes" in flat
    assert "Example: agree reconcile review.xlsx" in flat
    code, out, _ = run(capsys, "disagreements", "--help")
    assert code == 0 and "Example: agree disagreements" in " ".join(out.split())


def test_one_unresolved_unit_reads_as_one_and_names_its_row(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    units = [c.value for c in openpyxl.load_workbook(review)[REVIEW_SHEET]["A"]][1:]
    fill(review, {"=SUM(A1)": "neg", "u3": "neg"})
    code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", tmp_path / "c.csv")
    assert code == 2
    row = units.index("@here") + 2          # as the spreadsheet counts rows (header = row 1)
    assert f"1 unit still needs a decision: '@here' (row {row})" in err
    assert "units still need" not in err
    assert "--allow-unresolved (allow_unresolved=True)" in err
    code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", tmp_path / "c.csv",
                       "--allow-unresolved")
    assert code == 0 and f"1 unit written without a final code (unresolved): '@here' (row {row})" in err


def _example(capsys, command):
    code, out, _ = run(capsys, command, "--help")
    assert code == 0
    flat = " ".join(out.split())
    return flat.split("Example: ", 1)[1].split(" Other ")[0].split(" ╭")[0].split()


def test_help_examples_run_on_the_bundled_samples(tmp_path, capsys):
    root = Path(__file__).resolve().parents[2]
    made = []
    for command in ("disagreements", "reconcile"):
        words = _example(capsys, command)
        assert words[:2] == ["agree", command]
        for w in words:
            if w.startswith("samples/"):
                assert (root / w).is_file(), w
        args = [str(root / w) if w.startswith("samples/") else
                (str(tmp_path / w) if w.endswith((".xlsx", ".csv")) else w) for w in words[2:]]
        if command == "reconcile":
            args += ["--majority", "--allow-unresolved"]
        code, _, err = run(capsys, command, *args)
        assert code == 0, err
        made.append(tmp_path / words[-1])
    assert all(p.exists() for p in made)
    # the bundled round-1 file has an interview column: the review list shows it beside the unit
    ws = openpyxl.load_workbook(made[0])[REVIEW_SHEET]
    assert [c.value for c in ws[1]][:2] == ["unit", "interview"]


def test_file_format_and_printed_format_are_two_options(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    run(capsys, "disagreements", data_file, "-o", review)
    fill(review, {"=SUM(A1)": "neg", "@here": "mixed", "u3": "neg"})
    out = tmp_path / "consensus.txt"
    code, printed, err = run(capsys, "reconcile", review, "--data", data_file, "-o", out,
                             "--file-format", "csv", "--format", "json")
    assert code == 0, err
    assert json.loads(printed)["decided"] == 3 and "deprecated" not in err
    assert out.read_text(encoding="utf-8").startswith("unit,")


def test_accept_single_in_both_commands(tmp_path, data_file, capsys):
    """u3 was coded by one coder only: `disagreements --accept-single` does not list it and
    `reconcile --accept-single` keeps its code, saying so; the JSON is the library's."""
    review = tmp_path / "review.xlsx"
    code, out, err = run(capsys, "disagreements", data_file, "-o", review, "--accept-single",
                         "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["needing_review"] == 2 and summary["single_coder"] == 1
    assert summary["single_coder_listed"] is False
    assert "not listed (coded by one coder only; kept as coded, without review (accept single)): u3" in err
    assert [c.value for c in openpyxl.load_workbook(review)[REVIEW_SHEET]["A"]][1:] == ["@here", "=SUM(A1)"]
    fill(review, {"=SUM(A1)": "neg", "@here": "mixed"})
    consensus = tmp_path / "consensus.csv"
    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus)
    assert code == 2 and "'u3'" in err and "--accept-single" in err        # not accepted silently
    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus,
                         "--accept-single", "--format", "json")
    assert code == 0, err
    assert json.loads(out) == reconcile(read(data_file), review, accept_single=True).to_dict()
    assert "1 unit coded by one coder only kept that coder's code without review" in err
    back = pd.read_csv(consensus, dtype=str, keep_default_na=False).map(unprotect_text).set_index("unit")
    assert back.loc["u3", "source"] == "single coder" and back.loc["u3", "final code"] == "neg"
    code, out, err = run(capsys, "reconcile", review, "--data", data_file, "-o", consensus, "--force",
                         "--accept-single")
    assert code == 0 and "coded by one coder only, kept as coded" in " ".join(out.split())


def test_formula_decisions_without_a_stored_result_are_named(tmp_path, data_file, capsys):
    review = tmp_path / "review.xlsx"
    assert run(capsys, "disagreements", data_file, "-o", review)[0] == 0
    fill(review, {"=SUM(A1)": "=C2", "@here": "pos", "u3": "neg"})   # a formula written without its result
    code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", tmp_path / "c.csv")
    assert code == 2 and "1 unit still needs a decision" in err
    assert "1 formula cell without a stored result read as empty (H3)" in err
    code, _, err = run(capsys, "reconcile", review, "--data", data_file, "-o", tmp_path / "c.csv",
                       "--allow-unresolved")
    assert code == 0 and "warning: " in err and "formula cell without a stored result" in err


def test_a_review_csv_saved_by_a_spreadsheet_in_a_legacy_encoding_with_semicolons(tmp_path, capsys):
    data = tmp_path / "coding.csv"
    data.write_text("unit,ann,bo\ncafé,süß,bitter\nthé,süß,süß\nu3,bitter,süß\n", encoding="utf-8")
    review = tmp_path / "review.csv"
    assert run(capsys, "disagreements", data, "-o", review)[0] == 0
    frame = pd.read_csv(review, dtype=str, keep_default_na=False)
    frame.loc[frame["unit"] == "café", "decision"] = "süß"
    frame.loc[frame["unit"] == "u3", "decision"] = "bitter"
    frame.to_csv(review, sep=";", index=False, encoding="cp1252", lineterminator="\r\n")   # as a spreadsheet saves it
    before = review.read_bytes()
    code, _, err = run(capsys, "reconcile", review, "--data", data, "-o", tmp_path / "consensus.csv")
    assert code == 0, err
    consensus = pd.read_csv(tmp_path / "consensus.csv", dtype=str)
    assert dict(zip(consensus["unit"], consensus["final code"])) == {"café": "süß", "thé": "süß", "u3": "bitter"}
    assert review.read_bytes() == before


def test_passages_review_then_consensus_project_and_span_table(tmp_path, capsys):
    """The sample project: review of disputed turns -> decisions filled in with openpyxl (each
    disputed turn takes amara's codes) -> reconcile -> a .qdpx whose original users are untouched
    and whose added user 'consensus' holds one span per turn and code; the same as a span table."""
    from agree.analysis.passages import segment_units
    from agree.io.refi import read_project
    from agree.io.spans import read_spans
    from tests.cli.conftest import SAMPLES
    from tests.output.test_passages import SCHEMA, qde

    sample = SAMPLES / "passages.qdpx"
    review = tmp_path / "review.xlsx"
    code, _, err = run(capsys, "disagreements", sample, "--segments", "turn", "-o", review)
    assert code == 0, err
    wb = openpyxl.load_workbook(review)
    ws = wb[REVIEW_SHEET]
    cols = {c.value: c.column for c in ws[1]}
    expected = set()
    for r in range(2, ws.max_row + 1):
        get = lambda name: ws.cell(r, cols[name]).value  # noqa: E731
        ws.cell(r, cols["decision"]).value = get("amara")
        ws.cell(r, cols["how decided"]).value = "discussion"
        codes = [] if get("amara") == "(none)" else get("amara").split("; ")
        expected |= {(get("document"), c, int(get("start")), int(get("end"))) for c in codes}
    filled = tmp_path / "filled.xlsx"
    wb.save(filled)
    # the agreed turns keep their agreed codes
    units = segment_units(read_project(sample), by="turn")
    for u in range(units.n_units):
        given = {units.values[c] for c in units.codes[u] if c >= 0}
        if len(given) == 1:
            expected |= {(units.columns["document"][u], c, int(units.columns["start"][u]),
                          int(units.columns["end"][u])) for c in next(iter(given))}

    out = tmp_path / "consensus.qdpx"
    code, printed, err = run(capsys, "reconcile", filled, "--data", sample, "--segments", "turn", "-o", out,
                             "--format", "json")
    assert code == 0, err
    assert json.loads(printed)["consensus_spans"] == len(expected)
    SCHEMA.validate(qde(out))
    original, back = read_project(sample), read_project(out)
    assert back.coders == (*original.coders, "consensus")
    assert sorted(map(tuple, back.subset_coders(list(original.coders)).table().itertuples(index=False))) == \
        sorted(map(tuple, original.table().itertuples(index=False)))
    mine = back.subset_coders(["consensus"]).table()
    assert set(zip(mine["document"], mine["code"], mine["start"], mine["end"])) == expected

    table = tmp_path / "consensus.csv"
    code, _, err = run(capsys, "reconcile", filled, "--data", sample, "--segments", "turn", "-o", table)
    assert code == 0, err
    spans = read_spans(table, documents_dir=SAMPLES / "passages").table()
    assert set(zip(spans["document"], spans["code"], spans["start"], spans["end"])) == expected

    # undecided passages stop the run (exit 2, one line) unless --allow-unresolved; inputs never replaced
    code, _, err = run(capsys, "reconcile", review, "--data", sample, "--segments", "turn", "-o",
                       tmp_path / "c2.qdpx")
    assert code == 2 and "need a decision" in err and "Traceback" not in err
    code, _, err = run(capsys, "reconcile", review, "--data", sample, "--segments", "turn", "-o",
                       tmp_path / "c3.qdpx", "--allow-unresolved")
    assert code == 0, err
    assert read_project(tmp_path / "c3.qdpx").coders[-1] == "consensus"
    code, _, err = run(capsys, "reconcile", filled, "--data", sample, "--segments", "turn", "-o", filled,
                       "--force")
    assert code == 2 and "Traceback" not in err
