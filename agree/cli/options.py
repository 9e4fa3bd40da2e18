"""Options shared by several commands, in one place: one flag name and one help text each.

Reading options (how the sheets are laid out) are added to a command by `@reading_options` and
applied by `load_data`, e.g.::

    @app.command()
    @reading_options
    def score(files: Files, level: LevelOption = None, codebook: CodebookOption = None, *, reading: dict):
        data = load_data(files, codebook=codebook, level=level, **reading)

Analysis options (`--min`, `--boot`, `--seed`, `--ci`) have the same defaults everywhere: 2000
bootstrap replicates and seed 1, so every command repeats exactly unless told otherwise (the seed
is printed with the results).

`--format` means one thing in every command: how the result is printed on stdout (table, json,
and csv where the result is a table of rows). A file a command writes takes its format from the
suffix of `-o` (`--file-format` where the suffix may not say).
"""

from __future__ import annotations

import contextlib
import functools
import inspect
from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, Optional, Sequence

import typer

from agree.cli.app import note, progress_bar
from agree.core.constants import DEFAULT_RESAMPLES as DEFAULT_BOOT  # noqa: F401 (the commands' defaults)
from agree.core.constants import DEFAULT_SEED  # noqa: F401
from agree.core.errors import AgreeError

if TYPE_CHECKING:
    from agree.core.model import CodingData


class TableFormat(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"


class SummaryFormat(str, Enum):
    table = "table"
    json = "json"


class SetDistance(str, Enum):
    masi = "masi"
    jaccard = "jaccard"


MinOption = Annotated[Optional[float], typer.Option(
    "--min", min=-1.0, max=1.0, help="Minimum acceptable value (e.g. 0.8): adds whether the one-sided lower bound "
                  "clears it (is above it) and the p-value of the coefficient at or below it. A convention, "
                  "not a law.")]
BootOption = Annotated[int, typer.Option(
    "--boot", min=0, help="Bootstrap replicates (units resampled with all their values); 0 for none.")]
SeedOption = Annotated[int, typer.Option("--seed", help="Seed of the bootstrap; the same seed repeats the run.")]
CIOption = Annotated[float, typer.Option("--ci", min=0.5, max=0.9999,
                                         help="Confidence level of the two-sided interval (e.g. 0.95).")]
FormatOption = Annotated[TableFormat, typer.Option(
    "--format", help="How to print the result: table (readable), json (the library's to_dict()) or csv.")]
ResultFormatOption = Annotated[SummaryFormat, typer.Option(
    "--format", help="How to print the result: table (readable) or json (the library's to_dict()).")]
DistanceOption = Annotated[SetDistance, typer.Option(
    "--distance", help="Sets of codes per unit: distance between two coders' sets for the overall alpha "
                       "(masi, the default as in `agree score`, or jaccard).")]

# Rounds (agree rounds, agree report)
RoundColumnOption = Annotated[Optional[str], typer.Option(
    "--round-column", help="Per-unit column naming the round (default: 'round' when the data have one).")]
RoundFilesOption = Annotated[bool, typer.Option(
    "--round-files", help="Each file is one round, named by the file's stem, in the order given.")]
CodebooksOption = Annotated[Optional[str], typer.Option(
    "--codebooks", help="Codebook version per round, e.g. 'r1=cb1.csv,r2=cb2.csv': codes whose "
                        "definition changed since they were last measured are flagged.")]
DriftOption = Annotated[Optional[str], typer.Option(
    "--drift-round", help="The round in which only a share of units is still double-coded: compared "
                          "with the last full round (drift check).")]

# Files written (agree disagreements, agree reconcile)
OutputOption = Annotated[Path, typer.Option("--output", "-o", help="The file to write.",
                                            show_default=False)]
ForceOption = Annotated[bool, typer.Option("--force", help="Replace the output file if it exists "
                                                            "(input files are never overwritten).")]
SummaryOption = Annotated[Optional[str], typer.Option(
    "--format", metavar="<table|json>", show_default=False,
    help="How to print the summary: table (readable) or json (the library's to_dict()).  [default: table]")]
OldSummaryOption = Annotated[Optional[SummaryFormat], typer.Option(
    "--summary-format", hidden=True, help="Deprecated: --format.")]


# -- reading ----------------------------------------------------------------------------------


class Layout(str, Enum):
    wide = "wide"
    long = "long"
    per_coder = "per-coder"
    presence = "presence"


class Level(str, Enum):
    nominal = "nominal"
    ordinal = "ordinal"
    interval = "interval"
    ratio = "ratio"


Files = Annotated[list[Path], typer.Argument(
    help="Coding files (.csv, .tsv, .xlsx, .parquet). Several files: one per coder.",
    show_default=False, metavar="FILE")]
LayoutOption = Annotated[Optional[Layout], typer.Option(
    "--layout", help="How the coding is laid out (detected when not given): wide = one column per "
                     "coder; long = unit, coder, code columns; per-coder = one file or sheet per coder; "
                     "presence = one 0/1 column per code.")]
UnitOption = Annotated[Optional[str], typer.Option("--unit-col", help="Column with the unit ids.")]
CoderOption = Annotated[Optional[list[str]], typer.Option(
    "--coder-col", help="Long layout: the column with coder names. Wide layout: a coder column "
                        "(repeat the option for each coder).")]
CodeOption = Annotated[Optional[list[str]], typer.Option(
    "--code-col", help="Column with the codes (presence layout: repeat for each 0/1 code column).")]
TextOption = Annotated[Optional[str], typer.Option("--text-col", help="Column with the unit's text.")]
SheetOption = Annotated[Optional[list[str]], typer.Option(
    "--sheet", help="Worksheet to read (repeat for one sheet per coder). Default: every sheet with data.")]
SepOption = Annotated[str, typer.Option(
    "--sep", help="Separator between several codes in one cell (any such cell makes the whole data set "
                  "sets of codes); '' never splits: each cell is one code.")]
CodebookOption = Annotated[Optional[Path], typer.Option(
    "--codebook", help="Codebook file (CSV/XLSX: code, optional order, optional description). "
                       "Fixes the category order and keeps unused codes; unknown codes are errors.")]
TrimOption = Annotated[bool, typer.Option("--trim", help="Strip spaces around codes and unit ids.")]
CasefoldOption = Annotated[bool, typer.Option("--casefold", help="Compare codes ignoring upper/lower case.")]
LevelOption = Annotated[Optional[Level], typer.Option(
    "--level", help="Level of measurement. Default: ordinal if the codebook has an order, else nominal.")]
KeepOption = Annotated[Optional[list[str]], typer.Option(
    "--keep", help="Other per-unit column to keep (e.g. a round or document column); repeatable.")]
MaxCellsOption = Annotated[Optional[int], typer.Option(
    "--max-cells", min=1, show_default=False,
    help="Largest worksheet read, in cells (rows x columns that hold values; default 20,000,000): a larger "
         "sheet is refused before it is read into memory. Applies to every workbook the command reads.")]


class Engine(str, Enum):
    auto = "auto"
    pandas = "pandas"
    duckdb = "duckdb"


EngineOption = Annotated[Engine, typer.Option(
    "--engine", help="How to read: pandas (in memory, every layout), duckdb (long CSV/Parquet files or globs such "
                     "as 'logs/*.parquet' reduced to pattern counts out of core), or auto: duckdb for long files of "
                     "5 million rows or more (AGREE_DUCKDB_ROWS) in the commands that accept pattern counts (score, codes, "
                     "coders).")]
CountsOption = Annotated[bool, typer.Option(
    "--counts", help="The file is a pattern-count table: one column per coder (or a 'values' column of the codes "
                     "each unit received, joined by '|') and a 'count' column; see the README.")]
ClusterOption = Annotated[Optional[str], typer.Option(
    "--cluster", help="Column grouping the units (e.g. document); resampling keeps each group whole.")]


# How to read the sheets: the options every command shares, added by `reading_options`.
# (name of the command parameter, its type, its default, the `load_data` keyword)
_READING = (
    ("layout", LayoutOption, None, "layout"),
    ("unit_col", UnitOption, None, "unit"),
    ("coder_col", CoderOption, None, "coder"),
    ("code_col", CodeOption, None, "code"),
    ("text_col", TextOption, None, "text"),
    ("sheet", SheetOption, None, "sheet"),
    ("sep", SepOption, ";", "sep"),
    ("trim", TrimOption, False, "trim"),
    ("casefold", CasefoldOption, False, "casefold"),
    ("keep", KeepOption, None, "keep"),
    ("engine", EngineOption, Engine.auto, "engine"),
    ("counts", CountsOption, False, "counts"),
    ("max_cells", MaxCellsOption, None, "max_cells"),
)


def reading_options(command):
    """Add the shared reading options to a command; it receives them as ``reading``, a dict
    of `load_data` keywords (``load_data(files, codebook=..., level=..., **reading)``)."""
    signature = inspect.signature(command, eval_str=True)
    own = [p for p in signature.parameters.values() if p.name != "reading"]
    extra = [inspect.Parameter(name, inspect.Parameter.KEYWORD_ONLY, default=default, annotation=kind)
             for name, kind, default, _ in _READING]

    @functools.wraps(command)
    def wrapper(*args, **kwargs):
        reading = {key: _value(kwargs.pop(name)) for name, _, _, key in _READING}
        with worksheet_limit(reading.pop("max_cells")):   # every workbook the command reads
            return command(*args, reading=reading, **kwargs)

    wrapper.__signature__ = signature.replace(parameters=own + extra)
    return wrapper


@contextlib.contextmanager
def worksheet_limit(max_cells: int | None):
    """--max-cells for everything read inside the block (`agree.io.loaders.cell_limit`)."""
    if max_cells is None:
        yield
        return
    from agree.io.loaders import cell_limit

    with cell_limit(max_cells):
        yield


def _value(x: Any) -> Any:
    return x.value if isinstance(x, Enum) else x


def option_values(**options: Any) -> dict[str, Any]:
    """The options as plain values (an Enum choice becomes its string)."""
    return {k: _value(v) for k, v in options.items()}


def summary_and_file_format(printed: str | None, old_summary: SummaryFormat | None, file_format: Enum | None,
                            file_formats: Sequence[str]) -> tuple[str, str | None]:
    """How to print the summary ('table' or 'json') and the format of the file written (None: from
    the suffix of -o), for the commands that write a file and print a summary.

    Earlier versions printed by `--summary-format` and took the file's format from `--format`;
    both still work, each with a one-line note."""
    shown = "table"
    file = None if file_format is None else file_format.value
    if old_summary is not None:
        note(f"note: --summary-format is deprecated; use --format {old_summary.value}")
        shown = old_summary.value
    if printed is None or printed in ("table", "json"):
        return printed or shown, file
    if printed in file_formats and file is None:
        note(f"note: --format {printed} for the file is deprecated; use --file-format {printed} "
             f"(--format now says how the summary is printed: table or json)")
        return shown, printed
    raise AgreeError(f"--format is how the summary is printed, table or json; got '{printed}'",
                     hint=f"the file's format follows the suffix of -o, or --file-format {'|'.join(file_formats)}",
                     code="bad-option")


def _one_or_many(x: Sequence[str] | str | None) -> Any:
    if x is None or isinstance(x, str):
        return x
    x = list(x)
    if not x:
        return None
    return x[0] if len(x) == 1 else x


def load_data(files: Sequence[Path], *, layout: Layout | str | None = None, unit: str | None = None,
              coder: Sequence[str] | str | None = None, code: Sequence[str] | str | None = None,
              text: str | None = None, sheet: Sequence[str] | str | None = None, sep: str = ";",
              codebook: Path | None = None, trim: bool = False, casefold: bool = False,
              level: Level | str | None = None, keep: Sequence[str] | None = (),
              cluster: str | None = None, engine: Engine | str = "auto", counts: bool = False,
              weighted_ok: bool = False, progress: Any = None) -> CodingData:
    """Read the files and tell the user (stderr) what was detected: `agree.read` (the pandas engine),
    `agree.read_duckdb` (the duckdb engine) or, with `counts`, `agree.read_counts`.

    `cluster`, when given, is kept as a per-unit column like those in `keep`. `engine` 'auto' takes
    DuckDB only where the command accepts pattern counts (`weighted_ok`) and the files are large.
    `progress` is the library's progress callback (the steps of reading, or the DuckDB reduction,
    report through it); without one, reading shows its own progress bar on stderr.
    """
    keep_cols = list(keep or ())
    if cluster and cluster not in keep_cols:
        keep_cols.append(cluster)
    opts = dict(codebook=codebook, level=_value(level), sep=sep or None, trim=trim, casefold=casefold)
    engine = _value(engine)
    # a command without its own bar shows one for reading (silent off a terminal, or with --quiet)
    with (progress_bar("reading") if progress is None else contextlib.nullcontext(progress)) as progress:
        if counts:
            from agree.io.counts import read_counts

            data = read_counts([str(f) for f in files], coders=_as_names(coder), values=_one_or_many(code),
                               keep=tuple(keep_cols), sheet=_one_or_many(sheet), progress=progress, **opts)
        else:
            from agree.io.duckdb_engine import choose_engine, expand_paths

            names = [str(f) for f in files]
            chosen = choose_engine(names, engine if weighted_ok or engine != "auto" else "pandas", layout=_value(layout))
            if chosen == "duckdb":
                from agree.io.duckdb_engine import read_duckdb

                if _value(layout) not in (None, "long") or sheet or text:
                    raise AgreeError("the duckdb engine reads the long layout (unit, coder, code columns) of CSV and "
                                     "Parquet files", code="bad-option",
                                     hint="leave out --layout, --sheet and --text-col, or use --engine pandas")
                if engine == "auto":
                    note("note: large files: reduced to pattern counts with DuckDB (--engine pandas reads them "
                         "into memory)")
                data = read_duckdb(names, unit=unit, coder=_one(coder, "--coder-col"), code=_one(code, "--code-col"),
                                   keep=tuple(keep_cols), progress=progress, **opts)
            else:
                from agree.io.readers import read

                data = read(expand_paths(names), layout=_value(layout), unit=unit, coder=_one_or_many(coder),
                            code=_one_or_many(code), text=text, sheet=_one_or_many(sheet), keep=tuple(keep_cols),
                            progress=progress, **opts)
    report_reading(data)
    return data


def _one(x: Sequence[str] | str | None, flag: str) -> str | None:
    x = _one_or_many(x)
    if x is not None and not isinstance(x, str):
        raise AgreeError(f"{flag} takes one column with the duckdb engine", code="bad-option",
                         hint="the long layout has one coder column and one code column")
    return x


def _as_names(x: Sequence[str] | str | None) -> list[str] | None:
    if x is None:
        return None
    return [x] if isinstance(x, str) else list(x) or None


def report_reading(data: CodingData) -> None:
    """The one-line detection report, the reading notes and what was left out, on stderr."""
    report = data.report
    if report is None:
        return
    coders = "value positions (coders unknown)" if not data.coder_identity else f"{len(data.coders)} coders"
    note(f"read {report.units_read} units, {coders}, {report.values_read} values "
         f"({report.values_missing} missing): {report.detected}")
    for line in report.notes:
        # warning-level notes start with "warning:" and are shown as they are, so they stand out
        note(line if line.startswith("warning:") else f"note: {line}")
    for line in report.left_out:
        note(f"left out: {line}")
