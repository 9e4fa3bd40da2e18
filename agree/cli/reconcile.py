"""`agree disagreements` and `agree reconcile`: the reconciliation loop on the command line."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import Annotated, Any, Optional

import typer
from rich.table import Table

from agree.cli.app import app, note, print_json, stdout
from agree.cli.reading import CodebookOption, Files, LevelOption, load_data, reading_options
from agree.core.model import AgreeError


class ReviewFormat(str, Enum):
    xlsx = "xlsx"
    csv = "csv"
    md = "md"
    json = "json"


class ConsensusFormat(str, Enum):
    csv = "csv"
    xlsx = "xlsx"
    json = "json"


class SummaryFormat(str, Enum):
    table = "table"
    json = "json"


INDEPENDENT = ("Agreement is always computed on the coders' independent codes, never on "
               "reconciled ones: run `agree score` on the original data, not on the consensus.")

OutputOption = Annotated[Path, typer.Option("--output", "-o", help="The file to write.",
                                            show_default=False)]
ForceOption = Annotated[bool, typer.Option("--force", help="Replace the output file if it exists "
                                                            "(input files are never overwritten).")]
SummaryOption = Annotated[SummaryFormat, typer.Option(
    "--summary-format", help="How to print the summary on stdout: a table or JSON.")]


def _reading(**options: Any) -> dict[str, Any]:
    return {k: (v.value if isinstance(v, Enum) else v) for k, v in options.items()}


def _recorded(options: dict[str, Any]) -> dict[str, Any]:
    """The options to note in the file: those given (not left at None/empty/False)."""
    return {k: v for k, v in options.items() if v not in (None, False, [], ())}


def _print_summary(title: str, rows: list[tuple[str, Any]]) -> None:
    table = Table(title=title, show_header=False)
    table.add_column("what")
    table.add_column("count", justify="right")
    for label, value in rows:
        table.add_row(label, str(value))
    stdout.print(table)


def _split_format(fmt: Enum | None, summary: SummaryFormat) -> tuple[str | None, str]:
    """`--format json` asks for the JSON summary; any other value is the file format."""
    if fmt is not None and fmt.value == "json":
        return None, "json"
    return (fmt.value if fmt is not None else None), summary.value


@app.command()
@reading_options
def disagreements(
    files: Files,
    output: OutputOption,
    format: Annotated[Optional[ReviewFormat], typer.Option(
        "--format", help="File format: xlsx (default), csv or md; taken from the suffix of -o when "
                         "not given. 'json' prints the summary as JSON instead of a table.")] = None,
    include_agreed: Annotated[bool, typer.Option(
        "--include-agreed", help="Also list the units the coders agree on (after the disagreements).")
    ] = False,
    force: ForceOption = False,
    summary_format: SummaryOption = SummaryFormat.table,
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
    reading = {**reading, **_reading(codebook=codebook, level=level)}
    data = load_data(files, **reading)
    file_format, shown = _split_format(format, summary_format)
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
        _print_summary("Review list", [
            ("units read", summary.units_read), ("agreed", summary.agreed),
            ("needing review", summary.needing_review), ("left out (fewer than two coders)",
                                                         len(summary.left_out)),
            ("rows written", summary.rows_written)])


@app.command("reconcile")
@reading_options
def reconcile_command(
    review: Annotated[list[Path], typer.Argument(
        help="The filled-in review file (xlsx or csv). Data files may follow it.",
        show_default=False)],
    output: OutputOption,
    data_files: Annotated[Optional[list[Path]], typer.Option(
        "--data", help="The coding files the review file was made from (repeatable; further "
                       "files may follow the review file).")] = None,
    allow_unresolved: Annotated[bool, typer.Option(
        "--allow-unresolved", help="Write units still without a decision, with source "
                                   "'unresolved' and an empty final code, instead of stopping.")
    ] = False,
    majority: Annotated[bool, typer.Option(
        "--majority", help="Give an undecided unit the code a strict majority of its coders gave "
                           "(source 'majority'), where one exists.")] = False,
    format: Annotated[Optional[ConsensusFormat], typer.Option(
        "--format", help="File format: csv or xlsx, from the suffix of -o when not given. "
                         "'json' prints the summary as JSON instead of a table.")] = None,
    force: ForceOption = False,
    summary_format: SummaryOption = SummaryFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
):
    """Read the decisions back and write one final code per unit.

    Every unit of the data is written exactly once: agreed units keep their
    code, decided units take the decision, and each row says where its code
    came from (agreed, decided, majority, unresolved, single coder, not coded),
    how it was decided, by whom and why. The coders' independent codes are
    written beside the final code, unchanged.

    Agreement is always computed on the coders' independent codes, never on
    reconciled ones.

    Stops (exit code 2, nothing written) when a decision is not a code, when the
    review file no longer matches the data, or when units still need a decision
    (unless --allow-unresolved). Never overwrites the review file or the data.

    Example: agree reconcile review.xlsx --data samples/round1.csv --codebook samples/codebook.csv -o consensus.csv
    """
    review_file, *extra = review
    files = list(data_files or []) + extra
    if not files:
        raise AgreeError("no coding data given", hint="name the files the review was made from "
                         "with --data", code="no-input")
    reading = {**reading, **_reading(codebook=codebook, level=level)}
    data = load_data(files, **reading)
    file_format, shown = _split_format(format, summary_format)
    from agree.output.reconciliation import reconcile, unresolved_listing, write_consensus

    consensus = reconcile(data, review_file, allow_unresolved=allow_unresolved, majority=majority)
    inputs = [review_file, *files] + ([codebook] if codebook else [])
    write_consensus(consensus, output, format=file_format, inputs=inputs, force=force, data=data)
    for line in consensus.notes:
        note(f"note: {line}")
    if consensus.unresolved:
        n = len(consensus.unresolved)
        note(f"{n} unit{'s' if n != 1 else ''} written without a final code (unresolved): "
             + unresolved_listing(consensus.unresolved, consensus.unresolved_rows or
                                  [None] * n))
    note(f"wrote {output}: {len(consensus.table)} units. {INDEPENDENT}")
    summary = consensus.to_dict()
    if shown == "json":
        print_json(summary)
    else:
        _print_summary("Consensus", [
            ("units read", summary["units_read"]), ("agreed", summary["agreed"]),
            ("decided", summary["decided"]), ("majority", summary["majority"]),
            ("unresolved", summary["unresolved"]),
            ("left out (fewer than two coders)", summary["left_out"]),
            ("written", summary["written"])])
