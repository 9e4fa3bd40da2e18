"""`agree sample`: draw the reliability sample and write one blank coding workbook per coder."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.table import Table
from rich.text import Text

from agree.cli.app import app, note, print_json, stdout
from agree.cli.options import MaxCellsOption, ResultFormatOption, SummaryFormat, worksheet_limit


@app.command()
def sample(
    corpus: Annotated[Path, typer.Argument(help="The full list of units (.csv or .xlsx), one row per unit.",
                                           show_default=False)],
    n: Annotated[int, typer.Option("-n", "--units", help="Number of units to draw.")],
    coders: Annotated[str, typer.Option("--coders", help="Coder names, comma-separated: one workbook each.")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Folder for the coding workbooks and the manifest.")],
    stratify: Annotated[Optional[str], typer.Option(
        "--stratify", help="Column to stratify by (e.g. interview): each group in proportion. The column "
                           "is copied into every coder's sheet. Strata are not clusters: the sheets are "
                           "scored resampling units, as for a simple random sample.")] = None,
    cluster: Annotated[Optional[str], typer.Option(
        "--cluster", help="Column grouping units that are not independent (e.g. the document of each "
                          "excerpt, when agreement should carry over to other documents): copied into "
                          "every sheet and suggested as --cluster for scoring them.")] = None,
    keep: Annotated[Optional[list[str]], typer.Option(
        "--keep", "--keep-col", help="Another column of the list of units to copy into every coder's "
                                     "sheet, after the unit id, for context; repeatable.")] = None,
    exclude: Annotated[Optional[list[Path]], typer.Option(
        "--exclude", help="A file of units already double-coded (a coding file with a unit column, "
                          "or a .txt list, one id a line): those units are not drawn again; "
                          "repeat for several files.")] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the draw; the same seed draws the same units.")] = 1,
    codebook: Annotated[Optional[Path], typer.Option(
        "--codebook", help="Codebook (.txt one code a line, or .csv/.xlsx with a code column): "
                           "becomes the drop-down list.")] = None,
    shuffle: Annotated[bool, typer.Option("--shuffle", help="Give each coder the units in their own order.")] = False,
    unit_col: Annotated[Optional[str], typer.Option("--unit-col", help="The unit-id column, if not detected.")] = None,
    text_col: Annotated[Optional[str], typer.Option("--text-col", help="The text column, if not detected.")] = None,
    sheet: Annotated[Optional[str], typer.Option("--sheet", help="Worksheet of an .xlsx list of units.")] = None,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that is not empty.")] = False,
    output_format: ResultFormatOption = SummaryFormat.table,
    max_cells: MaxCellsOption = None,
):
    """Draw the reliability sample and write one blank coding workbook per coder.

    Example: agree sample samples/corpus.csv -n 120 --stratify interview --coders amara,bastien --codebook samples/codebook.csv --exclude samples/round1.csv --exclude samples/round2.csv -o sheets/
    """
    from agree.analysis.sampling import (
        draw_sample,
        load_codebook_categories,
        read_corpus,
        read_unit_ids,
    )
    from agree.output.sheets import write_coding_sheets

    with worksheet_limit(max_cells):
        frame = read_corpus(corpus, sheet=sheet)
        exclude_files = list(exclude or [])
        already = read_unit_ids(exclude_files, id_col=unit_col) if exclude_files else ()
    drawn = draw_sample(frame, n, stratify=stratify, seed=seed, id_col=unit_col, exclude=already)
    categories = load_codebook_categories(codebook) if codebook is not None else None
    names = [c.strip() for c in coders.split(",") if c.strip()]
    written = write_coding_sheets(drawn, out, coders=names, codebook=categories, shuffle=shuffle,
                                  text_col=text_col, force=force, corpus_path=corpus,
                                  keep=([cluster] if cluster else []) + list(keep or []))
    if exclude_files:
        note(sample_exclusion_note(drawn, [str(f) for f in exclude_files]))
    if output_format is SummaryFormat.json:
        print_json(written.to_dict())
        return
    available = drawn.attrs["corpus_size"] - drawn.attrs.get("excluded", 0)
    pool = (f"{available} units not yet coded in {corpus}" if drawn.attrs.get("excluded")
            else f"{drawn.attrs['corpus_size']} units from {corpus}")
    stdout.print(f"Drew {written.n} of {pool} "
                 f"(seed {drawn.attrs['seed']}{', stratified by ' + stratify if stratify else ', simple random'}).",
                 highlight=False)
    allocation = drawn.attrs.get("allocation")
    if allocation:
        excluded = drawn.attrs.get("strata_excluded") or {}
        table = Table(title=f"Units drawn per {stratify}", title_justify="left")
        table.add_column(str(stratify))
        if any(excluded.values()):
            table.add_column("Already coded", justify="right")
        table.add_column("Units available", justify="right")
        table.add_column("Drawn", justify="right")
        for name, k in allocation.items():
            cells = [Text(name)]
            if any(excluded.values()):
                cells.append(str(excluded.get(name, 0)))
            table.add_row(*cells, str(drawn.attrs["strata_sizes"][name]), str(k))
        stdout.print(table)
    for f in written.files:
        stdout.print(f"wrote {f}", highlight=False)
    stdout.print(f"wrote {written.manifest_csv} and {written.manifest_json}", highlight=False)
    if categories is not None and written.drop_down is None:
        note("the codebook is too long for a drop-down list (Excel allows 255 characters); "
             "the code column is left free")
    if written.context_columns:
        note(f"column(s) {', '.join(repr(c) for c in written.context_columns)} copied into every sheet "
             "for context (shaded; leave them as they are)")
    note(f"read them back with: {score_command(written, stratify, codebook, cluster)}")
    if stratify and stratify != cluster:
        note(strata_note(stratify))


def sample_exclusion_note(drawn, files: list[str]) -> str:
    """How many units were left out of the draw as already coded, and any ids not found."""
    a = drawn.attrs
    text = (f"excluded {a['excluded']} unit{'s' if a['excluded'] != 1 else ''} already coded "
            f"({a['exclude_given']} distinct id{'s' if a['exclude_given'] != 1 else ''} in "
            f"{', '.join(files)})")
    if a.get("exclude_not_in_corpus"):
        text += f"; {a['exclude_not_in_corpus']} of those ids are not in the list of units"
    return text


def score_command(written, stratify: Optional[str], codebook: Optional[Path] = None,
                  cluster: Optional[str] = None) -> str:
    """The command that scores the filled-in sheets: units resampled as a simple random sample
    (strata are not clusters), or whole groups of the column the user named as --cluster."""
    command = f"agree score {' '.join(written.files)}"
    if codebook is not None:
        command += f" --codebook {codebook}"  # keeps unused codes and the scale order
    if stratify and stratify != cluster:
        command += f" --keep {stratify}"      # the column is in every sheet; kept, not resampled
    if cluster:
        command += f" --cluster {cluster}"
    return command


def strata_note(stratify: str) -> str:
    """Why the read-back command does not resample the strata."""
    return (f"note: strata are not clusters. Every {stratify} was sampled, in proportion to its size, and "
            f"the units within it at random, so the interval resamples units as for a simple random sample. "
            f"Resampling whole strata (--cluster {stratify}) gives intervals that are too narrow or too "
            "wide; use --cluster only for a column whose units hang together beyond this sample.")
