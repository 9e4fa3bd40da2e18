"""`agree rounds`: compare agreement across coding rounds."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Optional

import typer
from rich.table import Table

from agree.cli.app import app, note, percent, print_json, progress_bar, stdout
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
    load_data,
    reading_options,
)
from agree.core.constants import DEFAULT_MINIMUM
from agree.core.errors import AgreeError


def parse_codebooks(spec: str | None) -> dict[str, Path] | None:
    """'r1=cb1.csv,r2=cb2.csv' -> {'r1': Path('cb1.csv'), 'r2': Path('cb2.csv')}."""
    if not spec:
        return None
    out = {}
    for part in spec.split(","):
        if not part.strip():
            continue
        name, sep, file = part.partition("=")
        if not sep or not name.strip() or not file.strip():
            raise AgreeError(f"--codebooks: '{part}' is not ROUND=FILE", hint="e.g. --codebooks r1=cb1.csv,r2=cb2.csv",
                             code="bad-option")
        out[name.strip()] = Path(file.strip())
    return out


def read_rounds(files: list[Path], *, round_files: bool, round_column: str | None, reading: dict,
                 required: bool, cluster: str | None = None) -> tuple[Any, dict[str, Any] | None, str | None]:
    """The data and, when there are rounds, {round: data} (for --round-files) or the column name."""
    keep = list(reading.pop("keep") or ())
    if cluster and cluster not in keep:
        keep.append(cluster)
    if round_files:
        if len(files) < 2:
            raise AgreeError("--round-files needs one file per round (at least two)", code="bad-option")
        stems = [f.stem for f in files]
        if len(set(stems)) != len(stems):
            raise AgreeError("--round-files: two files have the same name; rounds are named by file name",
                             code="bad-option")
        parts = {}
        for f in files:
            note(f"round {f.stem}:")
            parts[f.stem] = load_data([f], keep=keep, **reading)
        return None, parts, None
    if len(files) >= 2 and round_column is None:
        try:
            return load_data(files, keep=keep, **reading), None, None
        except AgreeError as exc:
            if exc.code != "files-are-rounds":
                raise
            note("note: each file has several coder columns: the files are read as rounds, one a file "
                 "(--round-files)")
            return read_rounds(files, round_files=True, round_column=None, reading={**reading, "keep": keep},
                               required=required, cluster=None)
    column = round_column or "round"
    if round_column or required:
        try:
            data = load_data(files, keep=keep + [column], **reading)
        except AgreeError as exc:
            if round_column is None and exc.code == "no-column" and f"'{column}'" in exc.message:
                raise AgreeError("the data have no 'round' column to tell the rounds apart",
                                 where=exc.where,
                                 hint="name the column that holds the round with --round-column NAME, or give "
                                      "one file per round with --round-files (e.g. agree rounds "
                                      "samples/round1.csv samples/round2.csv --round-files)",
                                 code="round-column") from exc
            raise
        return data, None, column
    try:
        data = load_data(files, keep=keep + [column], **reading)
        return data, None, column
    except AgreeError as exc:
        if exc.code != "no-column" or f"'{column}'" not in exc.message:
            raise
    return load_data(files, keep=keep, **reading), None, None


@app.command()
@reading_options
def rounds(
    files: Files,
    round_column: RoundColumnOption = None,
    round_files: RoundFilesOption = False,
    codebooks: CodebooksOption = None,
    drift_round: DriftOption = None,
    minimum: MinOption = DEFAULT_MINIMUM,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    ci: CIOption = 0.95,
    plot: Annotated[Optional[Path], typer.Option(
        "--plot", help="Write the trend plot (per code, with the minimum line) to this .png, .svg or .pdf.")] = None,
    cluster: ClusterOption = None,
    output_format: ResultFormatOption = SummaryFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
):
    """Compare agreement across coding rounds: per round, per code, changes, drift.

    Example: agree rounds samples/round1.csv samples/round2.csv --round-files --cluster interview

    Example: agree rounds samples/rounds_long.csv --round-column round --codebook samples/codebook.csv
    """
    from agree.analysis.rounds import compare_rounds
    from agree.core.files import check_output

    books = parse_codebooks(codebooks)
    if plot is not None:
        if plot.suffix.lower() not in (".png", ".svg", ".pdf"):
            raise AgreeError(f"cannot tell the plot format from '{plot.name}'", hint="use .png, .svg or .pdf",
                             code="plot-format")
        check_output(plot, list(files) + list((books or {}).values()))
    reading = {**reading, "codebook": codebook, "level": level}
    data, parts, column = read_rounds(list(files), round_files=round_files, round_column=round_column,
                                       reading=reading, required=True, cluster=cluster)
    options = dict(level=level.value if level is not None else None, minimum=minimum, n_resamples=boot,
                   seed=seed, confidence_level=ci, codebooks=books, drift_round=drift_round, cluster=cluster)
    with progress_bar("rounds") as tick:
        if parts is not None:
            result = compare_rounds(parts, progress=tick, **options)
        else:
            result = compare_rounds(data, round_column=column, progress=tick, **options)
    for w in result.warnings:
        note(f"note: {w.message}")
    if result.cluster is not None and result.n_resamples:
        groups = ", ".join(f"{k}: {v}" for k, v in (result.n_clusters or {}).items())
        note(f"intervals: whole {result.cluster} groups resampled within each round ({groups} groups)")
    if plot is not None:
        from agree.output.plots import rounds_trend_figure, save_figure

        save_figure(rounds_trend_figure(result), plot)
        note(f"wrote {plot}")
    if output_format is SummaryFormat.json:
        print_json(result.to_dict())
        return
    _print_rounds(result)


def _print_rounds(result: Any) -> None:
    from agree.core.format import format_interval, format_value, p_min_label, p_min_note

    minimum = format_value(result.minimum, "threshold")
    table = Table(title=f"Agreement per round (Krippendorff's α, {result.level})", title_justify="left",
                  caption=p_min_note(result.minimum, result.confidence_level, resampled=bool(result.n_resamples)),
                  caption_justify="left")
    for header in ("Round", "Units", "α", f"{percent(result.confidence_level, None)} CI", p_min_label(result.minimum),
                   f"Codes below {minimum}"):
        table.add_column(header, justify="left" if header in ("Round", f"Codes below {minimum}") else "right")
    for r in result.rounds:
        below = r.codes_below(result.minimum) + [f"{c} (too rare)" for c in r.too_rare]
        table.add_row(r.round + (" (drift)" if r.drift else ""), format_value(r.n_units, "count"),
                      format_value(r.overall.estimate), format_interval(r.overall.ci_low, r.overall.ci_high),
                      format_value(r.overall.p_value_min, "probability"), ", ".join(below) or "none")
    stdout.print(table)
    codes = Table(title="Per code (presence/absence α)", title_justify="left")
    codes.add_column("Code")
    for r in result.rounds:
        codes.add_column(r.round, justify="right")
    for code in result.codes:
        cells = []
        for r in result.rounds:
            res = r.per_code.get(code)
            cells.append("–" if res is None else f"{format_value(res.estimate)} {format_interval(res.ci_low, res.ci_high)}"
                         + (" (too rare)" if code in r.too_rare else "")
                         + (" *" if code in r.changed_codes else ""))
        codes.add_row(code, *cells)
    stdout.print(codes)
    if str(result.level).split()[0] in ("ordinal", "interval", "ratio"):
        note("caution: on a rating scale each point is not a code; the per-point presence/absence α above is of "
             "limited use: judge the scale by the overall α")
    if result.definition_changes:
        stdout.print("* definition changed since the code was last measured", highlight=False, markup=False)
    for line in result.summary:
        stdout.print(line, highlight=False, markup=False)
