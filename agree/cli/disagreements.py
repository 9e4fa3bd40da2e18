"""`agree disagreements`: the units the coders disagree on, in a review file to fill in."""

from __future__ import annotations

from enum import Enum
from typing import Annotated, Any, Optional

import typer

from agree.cli.app import app, note, print_json, print_summary, progress_bar, scaled
from agree.cli.options import (
    CodebookOption,
    Files,
    ForceOption,
    LevelOption,
    OldSummaryOption,
    OutputOption,
    SummaryOption,
    load_data,
    option_values,
    reading_options,
    summary_and_file_format,
)
from agree.cli.spans import load_spans, span_options


class ReviewFormat(str, Enum):
    xlsx = "xlsx"
    csv = "csv"
    parquet = "parquet"
    md = "md"


def _recorded(options: dict[str, Any]) -> dict[str, Any]:
    """The options to note in the file: those given (not left at None/empty/False)."""
    return {k: v for k, v in options.items() if v not in (None, False, [], ())}



@app.command()
@reading_options
@span_options
def disagreements(
    files: Files,
    output: OutputOption,
    file_format: Annotated[Optional[ReviewFormat], typer.Option(
        "--file-format", help="Format of the file written: xlsx (default), csv, parquet or md; taken "
                              "from the suffix of -o when not given. A worksheet holds 1,048,576 rows: "
                              "larger reviews go to csv or parquet.")] = None,
    include_agreed: Annotated[bool, typer.Option(
        "--include-agreed", help="Also list the units the coders agree on (after the disagreements).")
    ] = False,
    accept_single: Annotated[bool, typer.Option(
        "--accept-single", help="Do not list the units coded by one coder only (they are listed by "
                                "default); `agree reconcile --accept-single` then keeps their one code.")
    ] = False,
    force: ForceOption = False,
    output_format: SummaryOption = None,
    summary_format: OldSummaryOption = None,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
    span_reading: dict,
):
    """Write the units the coders disagree on to a review workbook, worst first.

    One row per unit needing a decision: the units the coders disagree on, worst
    first, then the units coded by one coder only (nobody checked their code;
    --accept-single leaves them out). Each row has the unit, its text, why it is
    listed, each coder's code, the codes involved with their codebook
    definitions, and empty columns to fill in: the decision (a drop-down of the
    codebook's codes; "(none)" when no code applies), how it was decided
    (discussion, adjudicator, majority), who decided, and notes.

    A second sheet lists the confused pairs of codes; a third records the inputs
    with their sha256 checksums, the date, the agree version, the options, and
    how many units were read, agreed, need review and were not listed, naming
    those. Fill it in, then run `agree reconcile`.

    Example: agree disagreements samples/round1.csv --codebook samples/codebook.csv -o review.xlsx

    Other per-unit columns kept with --keep (e.g. --keep interview) are shown beside the unit.

    Highlighted passages (a .qdpx/.qde project or a span table): one row per disputed passage
    (paragraphs, or --segments sentence|turn|FILE), with its document, the passage in context,
    each coder's spans marked ⟦code⟧...⟦/code⟧ and each coder's codes.
    """
    shown, file_format = summary_and_file_format(output_format, summary_format, file_format,
                                                 [f.value for f in ReviewFormat])
    spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
    if spans is not None:
        return _passages(spans, files, output, file_format, shown, include_agreed, force, span_reading)
    reading = {**reading, **option_values(codebook=codebook, level=level)}
    options = _recorded({**reading, "include_agreed": include_agreed, "accept_single": accept_single})
    options["sep"] = reading["sep"]
    inputs = list(files) + ([codebook] if codebook else [])
    from agree.output.reconciliation import write_review

    with progress_bar("disagreements") as tick:
        tick("reading", 0.0)
        data = load_data(files, progress=scaled(tick, 0.0, 0.5), **reading)
        summary = write_review(data, output, format=file_format, inputs=inputs, options=options,
                               include_agreed=include_agreed, accept_single=accept_single, force=force,
                               progress=scaled(tick, 0.5, 1.0))
    single = (f", {summary.single_coder} coded by one coder only" if not accept_single else "")
    note(f"wrote {output}: {summary.needing_review} units need review ({summary.disagreements} with a "
         f"disagreement{single}; {summary.units_read} read, {summary.agreed} agreed, "
         f"{len(summary.left_out)} not listed)")
    from agree.output.reconciliation import review_counts

    by_reason: dict[str, list[str]] = {}
    for unit, reason in summary.left_out:
        by_reason.setdefault(reason, []).append(unit)
    for reason, ids in by_reason.items():
        shown_ids = ", ".join(ids[:20]) + (f" and {len(ids) - 20} more" if len(ids) > 20 else "")
        note(f"not listed ({reason}): {shown_ids}")
    if shown == "json":
        print_json(summary.to_dict())
    else:
        print_summary("Review list", [*review_counts(summary), ("rows written", summary.rows_written)])


def _passages(spans, files, output, file_format, shown, include_agreed, force, span_reading) -> None:
    """The review of disputed passages (segments as units)."""
    from agree.cli.spans import segment_arguments, view_choice
    from agree.output.passages import write_passage_review
    from agree.output.reconciliation import review_counts

    view_choice({**span_reading, "view": span_reading.get("view") or "segments"}, ("segments",), "disagreements")
    segments = segment_arguments(span_reading)
    options = {"view": "segments", **_recorded({k: v for k, v in span_reading.items() if v is not None}),
               "include_agreed": include_agreed}
    summary = write_passage_review(spans, output, format=file_format, inputs=list(files), options=options,
                                   include_agreed=include_agreed, force=force, **segments)
    note(f"wrote {output}: {summary.needing_review} disputed passages to review ({summary.units_read} passages "
         f"read, {summary.agreed} agreed, {len(summary.left_out)} not listed; segments: "
         f"{segments['by'] if segments['segments'] is None else 'listed'})")
    if shown == "json":
        print_json(summary.to_dict())
    else:
        rows = [(label.replace("units", "passages"), n) for label, n in review_counts(summary)]
        print_summary("Review list (passages)", [*rows, ("rows written", summary.rows_written)])
