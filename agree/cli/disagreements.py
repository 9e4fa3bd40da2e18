"""`agree disagreements`: the units the coders disagree on, in a review file to fill in."""

from __future__ import annotations

from enum import Enum
from typing import Annotated, Any, Optional

import typer

from agree.cli.app import app, note, print_json, print_summary
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


class ReviewFormat(str, Enum):
    xlsx = "xlsx"
    csv = "csv"
    md = "md"


def _recorded(options: dict[str, Any]) -> dict[str, Any]:
    """The options to note in the file: those given (not left at None/empty/False)."""
    return {k: v for k, v in options.items() if v not in (None, False, [], ())}



@app.command()
@reading_options
def disagreements(
    files: Files,
    output: OutputOption,
    file_format: Annotated[Optional[ReviewFormat], typer.Option(
        "--file-format", help="Format of the file written: xlsx (default), csv or md; taken from the "
                              "suffix of -o when not given.")] = None,
    include_agreed: Annotated[bool, typer.Option(
        "--include-agreed", help="Also list the units the coders agree on (after the disagreements).")
    ] = False,
    force: ForceOption = False,
    output_format: SummaryOption = None,
    summary_format: OldSummaryOption = None,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
):
    """Write the units the coders disagree on to a review workbook, worst first.

    One row per unit needing reconciliation: the unit, its text, each coder's
    code, the codes involved with their codebook definitions, and empty columns
    to fill in: the decision (a drop-down of the codebook's codes), how it was
    decided (discussion, adjudicator, majority), who decided, and notes.

    A second sheet lists the confused pairs of codes; a third records the inputs
    with their sha256 checksums, the date, the agree version, the options, and
    how many units were read, agreed, need review and were left out (fewer than
    two coders). Fill it in, then run `agree reconcile`.

    Example: agree disagreements samples/round1.csv --codebook samples/codebook.csv -o review.xlsx

    Other per-unit columns kept with --keep (e.g. --keep interview) are shown beside the unit.
    """
    shown, file_format = summary_and_file_format(output_format, summary_format, file_format,
                                                 [f.value for f in ReviewFormat])
    reading = {**reading, **option_values(codebook=codebook, level=level)}
    data = load_data(files, **reading)
    options = _recorded({**reading, "include_agreed": include_agreed})
    options["sep"] = reading["sep"]
    inputs = list(files) + ([codebook] if codebook else [])
    from agree.output.reconciliation import write_review

    summary = write_review(data, output, format=file_format, inputs=inputs, options=options,
                           include_agreed=include_agreed, force=force)
    note(f"wrote {output}: {summary.needing_review} units need review "
         f"({summary.units_read} read, {summary.agreed} agreed, {len(summary.left_out)} left out)")
    if summary.left_out:
        ids = [unit for unit, _ in summary.left_out]
        shown_ids = ", ".join(ids[:20]) + (f" and {len(ids) - 20} more" if len(ids) > 20 else "")
        note(f"left out (fewer than two coders): {shown_ids}")
    if shown == "json":
        print_json(summary.to_dict())
    else:
        print_summary("Review list", [
            ("units read", summary.units_read), ("agreed", summary.agreed),
            ("needing review", summary.needing_review), ("left out (fewer than two coders)",
                                                         len(summary.left_out)),
            ("rows written", summary.rows_written)])
