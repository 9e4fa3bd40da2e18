"""`agree report`: write an agreement report (methods paragraph, tables, interpretation, plots)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Optional

import typer
from rich.table import Table

from agree.cli.app import app, note, percent, print_json, progress_bar, scaled, stdout
from agree.cli.options import (
    DEFAULT_BOOT,
    DEFAULT_SEED,
    BootOption,
    CIOption,
    ClusterOption,
    CodebookOption,
    CodebooksOption,
    DriftOption,
    Files,
    LevelOption,
    MinOption,
    RoundColumnOption,
    RoundFilesOption,
    SeedOption,
    SummaryFormat,
    ResultFormatOption,
    reading_options,
)
from agree.cli.rounds import parse_codebooks, read_rounds
from agree.core.errors import AgreeError


@app.command()
@reading_options
def report(
    files: Files,
    output: Annotated[Path, typer.Option("--output", "-o", help="Report file: .html, .md, .docx or .tex "
                                                                "(the format follows the suffix).")],
    minimum: MinOption = None,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    ci: CIOption = 0.95,
    corpus_size: Annotated[Optional[int], typer.Option(
        "--corpus-size", help="Units in the whole corpus, to state the share that was double-coded.")] = None,
    consensus: Annotated[Optional[Path], typer.Option(
        "--consensus", help="Consensus file from `agree reconcile` (columns: unit id, final code, source): "
                            "how disagreements were resolved.")] = None,
    round_column: RoundColumnOption = None,
    round_files: RoundFilesOption = False,
    codebooks: CodebooksOption = None,
    drift_round: DriftOption = None,
    title: Annotated[str, typer.Option("--title", help="Title of the report.")] = "Intercoder agreement",
    digits: Annotated[int, typer.Option("--digits", help="Decimals shown for coefficients.")] = 2,
    cluster: ClusterOption = None,
    force: Annotated[bool, typer.Option("--force", help="Replace an existing report (and its figures "
                                                        "folder).")] = False,
    output_format: ResultFormatOption = SummaryFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
):
    """Write an agreement report: methods paragraph, tables, interpretation and plots.

    Without --min the report uses .800, Krippendorff's convention, and says it is the default.

    Example: agree report samples/round2.csv --codebook samples/codebook.csv --corpus-size 600 --cluster interview -o report.html

    Example: agree report samples/round1.csv samples/round2.csv --round-files --codebook samples/codebook.csv -o report.md
    """
    from agree.analysis.rounds import split_rounds
    from agree.core.files import check_output
    from agree.output.report import build_report, write_report

    if output.suffix.lower() not in (".html", ".htm", ".md", ".markdown", ".docx", ".tex"):
        raise AgreeError(f"cannot tell the report format from '{output.name}'",
                         hint="end the file name in .html, .md, .docx or .tex", code="report-format")
    inputs = list(files) + [p for p in (consensus, codebook) if p is not None]
    books = parse_codebooks(codebooks)
    inputs += list((books or {}).values())
    check_output(output, inputs, force=force)
    if output.suffix.lower() in (".md", ".markdown", ".tex"):
        figures = output.parent / f"{output.stem}-figures"
        if figures.exists() and not force:
            raise AgreeError(f"{figures} already exists", hint="use --force to replace it, or choose another "
                             "report name", code="output-exists")
    reading = {**reading, "codebook": codebook, "level": level}
    data, parts, column = read_rounds(list(files), round_files=round_files, round_column=round_column,
                                       reading=reading, required=False, cluster=cluster)
    level_name = level.value if level is not None else None
    options = dict(level=level_name, minimum=minimum, n_resamples=boot, seed=seed, confidence_level=ci,
                   cluster=cluster)
    if column is not None:
        parts = split_rounds(data, column)
    if parts is None and (books or drift_round):
        raise AgreeError("--codebooks and --drift-round need rounds",
                         hint="give a round column (--round-column) or one file per round (--round-files)",
                         code="bad-option")
    with progress_bar("report") as tick:
        result = build_report(None if parts is not None else data, rounds=parts, codebooks=books,
                              drift_round=drift_round, corpus_size=corpus_size, consensus=consensus,
                              title=title, digits=digits, progress=scaled(tick, 0.0, 0.6), **options)
        tick("writing", 0.6)
        written = write_report(result, output)
        tick("done", 1.0)
    for path in written:
        note(f"wrote {path}")
    for w in result.warnings:
        if w.code == "few-clusters":
            note(f"note: {w.message}")
    if output_format is SummaryFormat.json:
        print_json(result.to_dict())
    else:
        _print_coefficients(result)


def _print_coefficients(result: Any) -> None:
    from agree.core.format import format_interval, format_value, plain
    from agree.output.report import result_label

    table = Table(title=result.title, title_justify="left")
    for header in ("Coefficient", "Estimate", "SE", f"{percent(result.confidence_level, None)} CI",
                   f"P(below {format_value(result.minimum, 'threshold')})", "n units"):
        table.add_column(header, justify="left" if header == "Coefficient" else "right")
    dg = result.digits
    for r in result.coefficients:
        table.add_row(plain(result_label(r, result.level)), format_value(r.estimate, "coefficient", dg),
                      format_value(r.se, "se", dg), format_interval(r.ci_low, r.ci_high, dg),
                      format_value(r.p_below_min, "probability"), format_value(r.n_units, "count"))
    stdout.print(table)
    for paragraph in result.interpretation[1:]:
        stdout.print(plain(paragraph), highlight=False, markup=False)
