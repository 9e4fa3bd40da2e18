"""`agree demo`: the whole loop on the bundled synthetic samples.

Score two coding rounds, find what drives disagreement, write the review workbook, compare the
rounds, write the report, plan the next reliability sample and draw it. Every output goes to one
folder; the last line names each file and folder written there. Every step resamples with the
same number of replicates and the same seed, so one coefficient shows one interval throughout.
"""

from __future__ import annotations

import contextlib
from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.rule import Rule

from agree.cli.app import app, note, print_json, stdout
from agree.cli.codes import print_codes
from agree.cli.options import SummaryFormat, report_reading
from agree.cli.plan import print_plan
from agree.cli.score import print_score
from agree.core.constants import DEFAULT_RESAMPLES, DEFAULT_SEED
from agree.core.errors import AgreeError
from agree.core.files import make_folder, record_input


def _samples_folder(given: Path | None) -> Path:
    if given is not None:
        folder = given
    else:
        folder = Path(__file__).resolve().parents[2] / "samples"
    needed = ["round1.csv", "round2.csv", "rounds_long.csv", "codebook.csv", "corpus.csv", "passages.qdpx"]
    missing = [n for n in needed if not (folder / n).exists()]
    if missing:
        raise AgreeError(f"the sample files are not in {folder} (missing: {', '.join(missing)})",
                         hint="run from a checkout of agree, or pass --samples DIR", code="no-samples")
    return folder


class _Steps:
    """Numbers the demo's sections 1, 2, 3, ... in the order they are printed."""

    def __init__(self) -> None:
        self.count = 0

    def __call__(self, title: str, command: str | None = None) -> None:
        self.count += 1
        _section(f"{self.count}. {title}", command)


def _section(title: str, command: str | None = None) -> None:
    """A section header: the title on a rule when it fits the terminal, else the title on its own
    line above a plain rule (a rule would cut it); the equivalent command below, never cut."""
    if len(title) + 6 <= stdout.width:
        stdout.print(Rule(title, align="left"))
    else:
        stdout.print(title, highlight=False)
        stdout.print(Rule())
    if command:
        stdout.print(f"$ {command}", highlight=False)


def _outputs_line(out: Path, written: list[Path]) -> str:
    """'All outputs are in DIR: a, b, figures/, sheets/.': every file and folder the demo wrote,
    named as they are in `out` (a file inside a folder is named by the folder, once)."""
    root = out.resolve()
    names: list[str] = []
    for path in written:
        rel = Path(path).resolve().relative_to(root)
        name = rel.parts[0] + ("/" if len(rel.parts) > 1 or (root / rel).is_dir() else "")
        if name not in names:
            names.append(name)
    shown = [n + (" (open it in a browser)" if n.endswith(".html") else "") for n in names]
    return f"All outputs are in {root}: {', '.join(shown)}."


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the demo's outputs.")] = Path("agree-demo"),
    samples: Annotated[Optional[Path], typer.Option("--samples", help="Folder with the sample files.")] = None,
    boot: Annotated[int, typer.Option(
        "--boot", help="Bootstrap replicates, the same in every step.")] = DEFAULT_RESAMPLES,
    seed: Annotated[int, typer.Option("--seed", help="Seed for every random step.")] = DEFAULT_SEED,
    output_format: Annotated[SummaryFormat, typer.Option(
        "--format", help="table: the tour as it runs; json: only a summary of the outputs at the end.")
    ] = SummaryFormat.table,
):
    """Run the whole loop on the bundled synthetic samples and write the outputs to a folder.

    Example: agree demo --out agree-demo
    """
    folder = _samples_folder(samples)
    make_folder(out)
    quiet_tour = output_format is SummaryFormat.json
    summary_json: dict = {"outputs": {}, "rounds": {}}
    written: list[Path] = []
    with contextlib.ExitStack() as stack:
        if quiet_tour:
            stack.enter_context(stdout.capture())  # the tour is not printed; the summary is
        _tour(folder, out, boot, seed, summary_json, written)
    if quiet_tour:
        print_json(summary_json)
        return
    _section("Done")
    stdout.print(_outputs_line(out, written), highlight=False)
    note("The sample data are synthetic (samples/make_samples.py).")


def _tour(folder: Path, out: Path, boot: int, seed: int, summary_json: dict, written: list[Path]) -> None:
    """The steps of the demo, printed as they run; headline results go into `summary_json`."""
    from agree.analysis.diagnostics import diagnose_codes
    from agree.analysis.planning import plan_sample
    from agree.analysis.rounds import compare_rounds, split_rounds
    from agree.analysis.sampling import draw_sample, load_codebook_categories, read_corpus, read_unit_ids
    from agree.core.format import format_interval, plain
    from agree.io.readers import read
    from agree.output.reconciliation import write_review
    from agree.output.report import build_report, write_report
    from agree.output.sheets import write_coding_sheets
    from agree.stats.coefficients import krippendorff_alpha
    from agree.stats.scoring import score

    codebook = folder / "codebook.csv"
    stdout.print("agree demo: synthetic interviews with volunteers of a neighbourhood repair café; "
                 "8-code codebook, three coders (amara, bastien, chen), two coding rounds. See samples/README.md. "
                 f"Every interval: {boot:,} bootstrap replicates, seed {seed}.", highlight=False)

    step = _Steps()
    rounds = {}
    for name in ("round1", "round2"):
        step(f"Agreement, {name}", f"agree score samples/{name}.csv --codebook samples/codebook.csv --min 0.8")
        data = read(folder / f"{name}.csv", codebook=codebook)
        report_reading(data)
        rounds[name] = data
        scored = score(data, minimum=0.8, n_resamples=boot, seed=seed)
        print_score(scored)
        summary_json["rounds"][name] = scored.coefficients["krippendorff_alpha"].to_dict()
        if name == "round2":
            nested = krippendorff_alpha(data, n_resamples=boot, seed=seed, cluster="interview")
            alpha = scored.coefficients["krippendorff_alpha"]
            stdout.print(f"The excerpts are nested in {len(set(data.columns['interview']))} interviews: with "
                         f"--cluster interview whole interviews are resampled and alpha's interval is "
                         f"{format_interval(nested.ci_low, nested.ci_high, 3)} instead of "
                         f"{format_interval(alpha.ci_low, alpha.ci_high, 3)} (the report below resamples units, "
                         "as rounds_long.csv has no interview column).", highlight=False)

    step("Which codes drive disagreement in round 1",
         "agree codes samples/round1.csv --codebook samples/codebook.csv --min 0.8")
    codes = diagnose_codes(rounds["round1"], minimum=0.8, n_resamples=boot, seed=seed)
    print_codes(codes, top=8)

    step("Review workbook for round 1",
         "agree disagreements samples/round1.csv --codebook samples/codebook.csv -o review-round1.xlsx")
    review_path = out / "review-round1.xlsx"
    summary = write_review(rounds["round1"], review_path, format="xlsx",
                                 inputs=[folder / "round1.csv", codebook], options={"source": "agree demo"},
                                 force=True)
    written.append(review_path)
    stdout.print(f"{summary.needing_review} units to reconcile, worst first: {review_path}", highlight=False)
    summary_json["outputs"]["review"] = str(review_path)
    summary_json["worst_codes"] = [str(c) for c in codes.to_frame()["code"].head(3)]

    step("Did round 2 beat round 1?", "agree rounds samples/rounds_long.csv --codebook samples/codebook.csv")
    long = read(folder / "rounds_long.csv", codebook=codebook, keep=["round"])
    report_reading(long)
    compared = compare_rounds(long, minimum=0.8, n_resamples=boot, seed=seed)
    for line in compared.summary_markup():
        stdout.print(plain(line), highlight=False)

    step("Report for the methods section",
         "agree report samples/rounds_long.csv --codebook samples/codebook.csv --corpus-size 600 -o report.html")
    report = build_report(None, rounds=split_rounds(long), minimum=0.8, n_resamples=boot, seed=seed,
                          corpus_size=600)
    reports = []
    for suffix in (".html", ".md", ".docx", ".tex"):
        reports += write_report(report, out / f"report{suffix}")
    written.extend(reports)
    stdout.print("Methods paragraph (edit the bracketed parts):", highlight=False)
    stdout.print(plain(report.methods), highlight=False)
    figures = sorted({str(Path(p).parent) for p in reports if Path(p).suffix == ".png"})
    stdout.print("Written: " + ", ".join(str(p) for p in reports if Path(p).suffix != ".png")
                 + (f"; figures in {', '.join(figures)}" if figures else ""), highlight=False)
    summary_json["outputs"]["report"] = [str(p) for p in reports if Path(p).suffix != ".png"]
    summary_json["outputs"]["figures"] = figures

    step("How many units to double-code next time",
         "agree plan --coders 3 --shares 0.25,0.2,0.15,0.12,0.1,0.08,0.06,0.04 --expected 0.85 --min 0.8")
    plan = plan_sample(coders=3, shares=[0.25, 0.2, 0.15, 0.12, 0.1, 0.08, 0.06, 0.04],
                             expected=0.85, minimum=0.8, seed=seed, n_resamples=boot)
    print_plan(plan)

    corpus = read_corpus(folder / "corpus.csv")
    already = read_unit_ids([folder / "round1.csv", folder / "round2.csv"])
    available = len(corpus) - int(corpus["unit_id"].astype(str).isin(already).sum())
    n = int(plan.units_needed or 100)
    step("Draw the next reliability sample, leaving out the units already coded",
         f"agree sample samples/corpus.csv -n {min(n, available)} --stratify interview --coders amara,bastien,chen "
         "--codebook samples/codebook.csv --shuffle --exclude samples/round1.csv --exclude samples/round2.csv "
         f"--seed {seed} -o sheets/")
    if n > available:
        note(f"the plan asks for {n} units but only {available} are not yet coded; drawing all {available}")
    drawn = draw_sample(corpus, min(n, available), stratify="interview", seed=seed, exclude=already)
    sheets = write_coding_sheets(drawn, out / "sheets", coders=["amara", "bastien", "chen"],
                                       codebook=load_codebook_categories(codebook), shuffle=True, seed=seed,
                                       force=True)
    stdout.print(f"{len(drawn)} units drawn (stratified by interview) from the {available} not yet coded; "
                 f"{drawn.attrs['excluded']} units coded in rounds 1 and 2 were excluded. One workbook per "
                 f"coder in {sheets.folder}, with the interview column beside the unit id.", highlight=False)

    written.append(Path(sheets.folder))
    summary_json["units_needed"] = plan.units_needed
    summary_json["outputs"]["sheets"] = sheets.folder
    summary_json["drawn"] = len(drawn)
    _passages_tour(folder, out, boot, seed, summary_json, written, step)


PASSAGE_CODERS_NEEDED = 2  # the demo's invented decision: a code stays when this many coders gave it


def _invent_decisions(review: Path, decided: Path, coders: tuple[str, ...]) -> int:
    """Fill in the review of passages as a team might (invented): each disputed passage keeps the
    codes at least two coders gave it, "(none)" when there are none; returns the rows filled."""
    import openpyxl

    from agree.output.reconciliation import NONE_LABEL, REVIEW_SHEET, SET_SEPARATOR

    record_input(review)  # the decided copy is written beside it, never over it
    wb = openpyxl.load_workbook(review)
    ws = wb[REVIEW_SHEET]
    cols = {c.value: c.column for c in ws[1]}
    for r in range(2, ws.max_row + 1):  # a loop over the few rows of a review list
        counts: dict[str, int] = {}
        for coder in coders:
            cell = ws.cell(r, cols[coder]).value or ""
            for code in ("" if cell == NONE_LABEL else cell).split(SET_SEPARATOR):
                if code:
                    counts[code] = counts.get(code, 0) + 1
        kept = [c for c, n in counts.items() if n >= PASSAGE_CODERS_NEEDED]
        ws.cell(r, cols["decision"]).value = SET_SEPARATOR.join(sorted(kept)) or NONE_LABEL
        ws.cell(r, cols["how decided"]).value = "discussion"
        ws.cell(r, cols["decided by"]).value = "agree demo (invented)"
        ws.cell(r, cols["notes"]).value = "invented decision: the codes two or more coders gave"
    wb.save(decided)
    return ws.max_row - 1


def _passages_tour(folder: Path, out: Path, boot: int, seed: int, summary_json: dict, written: list[Path],
                   step: _Steps) -> None:
    """The span workflow on the sample project: score, review the disputed passages, decide
    (invented decisions), reconcile back into a project."""
    from dataclasses import replace

    from agree.analysis.passages import position_agreement
    from agree.cli.score import print_passages
    from agree.cli.spans import report_spans
    from agree.io.refi import read_project
    from agree.output.passages import passage_units, reconcile_passages, write_consensus_spans, write_passage_review

    project = folder / "passages.qdpx"
    step("Highlighted passages: agreement", "agree score samples/passages.qdpx --min 0.8")
    spans = read_project(project)
    report_spans(spans)
    scored = position_agreement(spans, minimum=0.8, n_resamples=boot, seed=seed)
    # the Dice and span-matching tables (per code and pair of coders) are left to `agree score`
    print_passages(replace(scored, specific=None, matching=None), 0.8)
    stdout.print("Dice and span matching per code and pair of coders: agree score samples/passages.qdpx.",
                 highlight=False)

    step("Review of the disputed passages (speaker turns)",
         "agree disagreements samples/passages.qdpx --segments turn -o review-passages.xlsx")
    review = out / "review-passages.xlsx"
    summary = write_passage_review(spans, review, by="turn", inputs=[project],
                                   options={"source": "agree demo", "segments": "turn"}, force=True)
    written.append(review)
    stdout.print(f"{summary.needing_review} of {summary.units_read} turns are disputed: {review.name} shows "
                 "each coder's spans marked in the text around the turn.", highlight=False)

    decided = out / "review-passages-decided.xlsx"
    n = _invent_decisions(review, decided, spans.coders)
    written.append(decided)
    step("Settle them and write the consensus back",
         "agree reconcile review-passages-decided.xlsx --data samples/passages.qdpx --segments turn "
         "-o consensus-passages.qdpx")
    stdout.print(f"The demo filled in the {n} decisions itself (INVENTED, for the demo only: a code stays "
                 f"where {PASSAGE_CODERS_NEEDED} or more coders gave it): {decided.name}.", highlight=False)
    result = reconcile_passages(passage_units(spans, by="turn"), decided)
    consensus = out / "consensus-passages.qdpx"
    write_consensus_spans(result, consensus, spans=spans, project=project, inputs=[decided], force=True)
    written.append(consensus)
    stdout.print(f"{len(result.spans)} consensus spans over {result.consensus.units_read} turns "
                 f"({result.consensus.agreed} agreed, {result.consensus.decided} decided), written to "
                 f"{consensus.name}: the project's {len(spans.coders)} coders untouched, one user "
                 "'consensus' added, to open in your analysis software.", highlight=False)
    summary_json["outputs"]["passages"] = {"review": str(review), "decided": str(decided),
                                           "consensus": str(consensus)}
