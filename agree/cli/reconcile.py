"""`agree reconcile`: read the decisions back and write one final code per unit."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import Annotated, Optional

import typer

from agree.cli.app import app, note, print_json, print_summary
from agree.cli.options import (
    CodebookOption,
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
from agree.core.errors import AgreeError


class ConsensusFormat(str, Enum):
    csv = "csv"
    xlsx = "xlsx"


INDEPENDENT = ("Agreement is always computed on the coders' independent codes, never on "
               "reconciled ones: run `agree score` on the original data, not on the consensus.")


@app.command("reconcile")
@reading_options
@span_options
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
                           "(source 'majority'), where one exists; never to a unit one coder coded.")
    ] = False,
    accept_single: Annotated[bool, typer.Option(
        "--accept-single", help="Keep the code of a unit coded by one coder only, without review, when "
                                "the review file has no decision for it (source 'single coder'); "
                                "without it such units need a decision.")] = False,
    file_format: Annotated[Optional[ConsensusFormat], typer.Option(
        "--file-format", help="Format of the file written: csv or xlsx, from the suffix of -o when "
                              "not given.")] = None,
    force: ForceOption = False,
    output_format: SummaryOption = None,
    summary_format: OldSummaryOption = None,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
    span_reading: dict,
):
    """Read the decisions back and write one final code per unit.

    Every unit of the data is written exactly once: agreed units keep their
    code, decided units take the decision ("(none)": no code applies, an empty
    final code), and each row says where its code came from (agreed, decided,
    majority, unresolved, single coder, not coded), how it was decided, by whom
    and why. A unit coded by one coder only needs a decision like a
    disagreement, unless --accept-single keeps that coder's code (source
    'single coder', said in its notes). The coders' independent codes are
    written beside the final code, unchanged.

    Agreement is always computed on the coders' independent codes, never on
    reconciled ones.

    Stops (exit code 2, nothing written) when a decision is not a code, when the
    review file no longer matches the data, or when units still need a decision
    (unless --allow-unresolved). Never overwrites the review file or the data.

    Highlighted passages (the review of `agree disagreements` on a project or a span table;
    give the same span options): each passage takes its decided codes, as one span per code over
    the passage. -o consensus.qdpx writes the project back with the original users' codings
    untouched and one added user, "consensus", holding the consensus codings (from a span table:
    a new project with every coder and the consensus user); -o .csv, .xlsx or .parquet writes the
    consensus spans as a span table.

    Example: agree reconcile review.xlsx --data samples/round1.csv --codebook samples/codebook.csv -o consensus.csv
    """
    review_file, *extra = review
    files = list(data_files or []) + extra
    if not files:
        raise AgreeError("no coding data given", hint="name the files the review was made from "
                         "with --data", code="no-input")
    shown, file_format = summary_and_file_format(output_format, summary_format, file_format,
                                                 [f.value for f in ConsensusFormat])
    spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
    if spans is not None:
        return _passages(spans, review_file, files, output, shown, allow_unresolved, majority, force,
                         span_reading)
    reading = {**reading, **option_values(codebook=codebook, level=level)}
    data = load_data(files, **reading)
    from agree.output.reconciliation import reconcile, unresolved_listing, write_consensus

    consensus = reconcile(data, review_file, allow_unresolved=allow_unresolved, majority=majority,
                          accept_single=accept_single)
    inputs = [review_file, *files] + ([codebook] if codebook else [])
    write_consensus(consensus, output, format=file_format, inputs=inputs, force=force, data=data)
    for line in consensus.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
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
        print_summary("Consensus", [
            ("units read", summary["units_read"]), ("agreed", summary["agreed"]),
            ("decided", summary["decided"]), ("majority", summary["majority"]),
            ("coded by one coder only, kept as coded", summary["single_coder"]),
            ("unresolved", summary["unresolved"]),
            ("coded by no coder", summary["not_coded"]),
            ("written", summary["written"])])


def _passages(spans, review_file, files, output, shown, allow_unresolved, majority, force, span_reading) -> None:
    """Consensus spans from a review of disputed passages."""
    from agree.cli.spans import segment_arguments, view_choice
    from agree.io.spans import span_input
    from agree.output.passages import passage_units, reconcile_passages, write_consensus_spans
    from agree.output.reconciliation import unresolved_listing

    view_choice({**span_reading, "view": span_reading.get("view") or "segments"}, ("segments",), "reconcile")
    units = passage_units(spans, **segment_arguments(span_reading))
    result = reconcile_passages(units, review_file, allow_unresolved=allow_unresolved, majority=majority)
    consensus = result.consensus
    project = files[0] if span_input(files[0]) == "project" else None
    write_consensus_spans(result, output, spans=spans, project=project, inputs=[review_file, *files],
                          span_end=span_reading.get("span_end") or "exclusive", force=force)
    for line in consensus.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    if consensus.unresolved:
        n = len(consensus.unresolved)
        note(f"{n} passage{'s' if n != 1 else ''} left out of the consensus (unresolved): "
             + unresolved_listing(consensus.unresolved, consensus.unresolved_rows or [None] * n))
    where = ("the project's users untouched, one user 'consensus' added" if project is not None
             and Path(output).suffix.lower() == ".qdpx" else "a span table" if Path(output).suffix.lower() != ".qdpx"
             else "a new project: every coder, and the user 'consensus'")
    note(f"wrote {output}: {len(result.spans)} consensus spans over {consensus.units_read} passages ({where}). "
         + INDEPENDENT)
    summary = result.to_dict()
    if shown == "json":
        print_json(summary)
    else:
        print_summary("Consensus (passages)", [
            ("passages read", summary["units_read"]), ("agreed", summary["agreed"]),
            ("decided", summary["decided"]), ("majority", summary["majority"]),
            ("unresolved (left out)", summary["unresolved"]),
            ("coded by no coder", summary["not_coded"]),
            ("consensus spans written", summary["consensus_spans"])])
