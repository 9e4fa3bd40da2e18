"""`agree report`: write an agreement report (methods paragraph, tables, interpretation, plots),
for one coded variable or for several (`--variable`), each with its own level and codebook."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Optional

import typer
from rich.table import Table

from agree.cli.app import app, note, print_json, progress_bar, scaled, stdout
from agree.cli.options import (
    DEFAULT_BOOT,
    DEFAULT_SEED,
    BootOption,
    CIOption,
    ClusterOption,
    CodebookOption,
    CodebooksOption,
    DriftOption,
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
from agree.cli.rounds import parse_codebooks, read_rounds
from agree.cli.spans import span_options
from agree.core.errors import AgreeError

REPORT_SUFFIXES = (".html", ".htm", ".md", ".markdown", ".docx", ".tex")
#: What a --variable may say besides its files: key -> what it sets.
VARIABLE_KEYS = {
    "level": "level of measurement (nominal, ordinal, interval, ratio)",
    "codebook": "codebook file",
    "column": "the column with this variable's codes (long layout: unit, coder, code columns)",
    "coders": "the coder columns of this variable, joined by '+' (wide layout)",
    "sheet": "the worksheet to read",
    "sep": "separator between several codes in one cell",
    "layout": "wide, long, per-coder or presence",
    "consensus": "consensus file from `agree reconcile` for this variable",
}
LEVELS = ("nominal", "ordinal", "interval", "ratio")

FilesArgument = Annotated[Optional[list[Path]], typer.Argument(
    help="Coding files (.csv, .tsv, .xlsx, .parquet). Several files: one per coder. With --variable, "
         "the files of every variable that names none.", show_default=False, metavar="FILE")]
VariableOption = Annotated[Optional[list[str]], typer.Option(
    "--variable", metavar="NAME=SPEC",
    help="One coded variable of the study, for one report covering them all (repeat for each): "
         "NAME=FILE[,FILE...][,key=value...] with keys level, codebook, column, coders, sheet, sep, "
         "layout, consensus; e.g. 'severity=ratings.csv,level=ordinal,codebook=scale.csv'. Without "
         "files it reads the FILE arguments (e.g. 'topic=column=topic' for one column of a shared sheet).",
    show_default=False)]


@app.command()
@reading_options
@span_options
def report(
    files: FilesArgument = None,
    output: Annotated[Optional[Path], typer.Option(
        "--output", "-o", help="Report file: .html, .md, .docx or .tex (the format follows the suffix).",
        show_default=False)] = None,
    variable: VariableOption = None,
    minimum: MinOption = None,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    ci: CIOption = 0.95,
    corpus_size: Annotated[Optional[int], typer.Option(
        "--corpus-size", help="Units in the whole corpus, to state the share that was double-coded.")] = None,
    consensus: Annotated[Optional[Path], typer.Option(
        "--consensus", help="Consensus file from `agree reconcile` (columns: unit id, final code, source) for "
                            "the units analysed: how disagreements were resolved.")] = None,
    round_column: RoundColumnOption = None,
    round_files: RoundFilesOption = False,
    codebooks: CodebooksOption = None,
    drift_round: DriftOption = None,
    title: Annotated[Optional[str], typer.Option(
        "--title", help="Title of the report.  [default: Reliability of the coding]", show_default=False)] = None,
    digits: Annotated[Optional[int], typer.Option(
        "--digits", min=1, max=6, help="Decimals of coefficients, SEs and intervals, in every format.  "
                                       "[default: 3]", show_default=False)] = None,
    cluster: ClusterOption = None,
    force: Annotated[bool, typer.Option("--force", help="Replace an existing report (and the figures in its "
                                                        "figures folder).")] = False,
    output_format: ResultFormatOption = SummaryFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
    span_reading: dict,
):
    """Write an agreement report: methods paragraph, tables, interpretation and plots.

    Highlighted passages (a span table or a .qdpx/.qde project) are reported with segments as
    units (paragraphs unless --segments says otherwise), the view named in the methods paragraph
    and the tables; `agree score` gives the positions view.

    Without --min the report uses .800, Krippendorff's convention, and says it is the default.
    With --variable (repeated) it covers several coded variables: one section per variable and one
    methods paragraph for them all.

    Example: agree report samples/round2.csv --codebook samples/codebook.csv --corpus-size 600 --cluster interview -o report.html

    Example: agree report samples/round1.csv samples/round2.csv --round-files --codebook samples/codebook.csv -o report.md

    Example: agree report samples/passages.qdpx --segments turn -o passages.html

    Example: agree report --variable topics=samples/multicode.xlsx --variable commitment=samples/ratings.csv,codebook=samples/ratings_codebook.csv -o study.html
    """
    from agree.core.files import check_output
    from agree.output.report import figure_folder

    files = list(files or [])
    if output is None:
        raise AgreeError("no report file given", hint="name it with -o, e.g. -o report.html", code="no-output")
    if output.suffix.lower() not in REPORT_SUFFIXES:
        raise AgreeError(f"cannot tell the report format from '{output.name}'",
                         hint="end the file name in .html, .md, .docx or .tex", code="report-format")
    specs = [parse_variable(v) for v in variable or []]
    _check_names(specs)
    books = parse_codebooks(codebooks)
    inputs = files + [p for p in (consensus, codebook) if p is not None] + list((books or {}).values())
    for spec in specs:
        inputs += spec["files"] + [Path(spec[k]) for k in ("codebook", "consensus") if spec.get(k)]
    check_output(output, inputs, force=force)
    if output.suffix.lower() in (".md", ".markdown", ".tex"):
        figures = figure_folder(output)
        if figures.exists() and not force:
            raise AgreeError(f"{figures} already exists", hint="use --force to replace its figures, or choose "
                             "another report name", code="output-exists")
    options = dict(minimum=minimum, n_resamples=boot, seed=seed, confidence_level=ci, cluster=cluster,
                   corpus_size=corpus_size, **({"title": title} if title is not None else {}),
                   **({"digits": digits} if digits is not None else {}))
    spans = None
    if files and not specs:
        from agree.cli.spans import load_spans

        spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
    elif specs:
        from agree.cli.spans import given

        if given(span_reading):
            raise AgreeError(f"{', '.join(given(span_reading))} cannot be used with --variable", code="bad-option",
                             hint="report highlighted passages on their own: agree report FILE --segments ...")
    if spans is not None:
        result = _spans(spans, span_reading, output, options, level=level, consensus=consensus,
                        rounds=dict(round_column=round_column, round_files=round_files, codebooks=codebooks,
                                    drift_round=drift_round))
    elif specs:
        result = _study(specs, files, output, options, reading=reading, codebook=codebook, level=level,
                        round_column=round_column, refused=dict(round_files=round_files, codebooks=codebooks,
                                                                drift_round=drift_round, consensus=consensus))
    else:
        if not files:
            raise AgreeError("no coding files given", hint="give the files to report on, or one --variable per "
                             "coded variable", code="no-input")
        result = _one(files, output, options, reading=reading, codebook=codebook, level=level,
                      round_column=round_column, round_files=round_files, books=books, drift_round=drift_round,
                      consensus=consensus)
    if output_format is SummaryFormat.json:
        print_json(result.to_dict())
    else:
        for part in getattr(result, "sections", (result,)):
            _print_coefficients(part)


def _one(files: list[Path], output: Path, options: dict, *, reading: dict, codebook: Path | None, level: Any,
         round_column: str | None, round_files: bool, books: dict | None, drift_round: str | None,
         consensus: Path | None) -> Any:
    """One variable: read, split the rounds, build, write."""
    from agree.analysis.rounds import split_rounds
    from agree.output.report import build_report

    reading = {**reading, "codebook": codebook, "level": level}
    data, parts, column = read_rounds(files, round_files=round_files, round_column=round_column,
                                      reading=reading, required=False, cluster=options["cluster"])
    if column is not None:
        parts = split_rounds(data, column)
    if parts is None and (books or drift_round):
        raise AgreeError("--codebooks and --drift-round need rounds",
                         hint="give a round column (--round-column) or one file per round (--round-files)",
                         code="bad-option")
    with progress_bar("report") as tick:
        result = build_report(None if parts is not None else data, rounds=parts, codebooks=books,
                              drift_round=drift_round, consensus=consensus, progress=scaled(tick, 0.0, 0.6),
                              level=None if level is None else level.value, **options)
        _write(result, output, tick)
    return result


def _spans(spans: Any, span_reading: dict, output: Path, options: dict, *, level: Any, consensus: Path | None,
           rounds: dict) -> Any:
    """Highlighted passages: the segments view's units, named in the methods paragraph and tables."""
    from agree.cli.spans import view_data
    from agree.output.report import build_report

    given = [f"--{k.replace('_', '-')}" for k, v in rounds.items() if v]
    if given:
        raise AgreeError(f"{', '.join(given)} cannot be used with span data", code="bad-option",
                         hint="report each coding round's span file on its own")
    if span_reading.get("view") is None:
        note("note: the report's units are segments (--view segments; paragraphs unless --segments says "
             "otherwise); agree score gives the positions view")
    data, group, view = view_data(spans, span_reading, command="report", cluster=options["cluster"], level=level,
                                  allowed=("segments",), default="segments")
    rule = next((n[len("Rule: "):].rstrip(".") for n in data.report.notes if n.startswith("Rule: ")), None)
    unit = view if rule is None else f"{view}; {rule}"
    with progress_bar("report") as tick:
        result = build_report(data, consensus=consensus, progress=scaled(tick, 0.0, 0.6), unit=unit,
                              **{**options, "cluster": group})
        _write(result, output, tick)
    return result


def _study(specs: list[dict], files: list[Path], output: Path, options: dict, *, reading: dict,
           codebook: Path | None, level: Any, round_column: str | None, refused: dict) -> Any:
    """Several variables: read each with its own level and codebook, build one study report, write."""
    from agree.analysis.rounds import split_rounds
    from agree.output.report import Variable, build_study_report

    given = [f"--{k.replace('_', '-')}" for k, v in refused.items() if v]
    if given:
        raise AgreeError(f"{', '.join(given)} cannot be used with --variable",
                         hint="give a consensus file per variable (consensus=FILE in its --variable); rounds "
                              "of several variables come from a round column (--round-column)", code="bad-option")
    variables = {}
    for spec in specs:
        name = spec["name"]
        sources = spec["files"] or files
        if not sources:
            raise AgreeError(f"--variable {name}: no files", hint=f"name them, e.g. --variable '{name}=coding.csv', "
                             "or give the files as arguments", code="no-input")
        _no_spans(name, sources, spec.get("sheet") or reading.get("sheet"))
        keep = list(reading.get("keep") or ())
        if round_column and round_column not in keep:
            keep.append(round_column)
        var_level = spec.get("level") or (None if level is None else level.value)
        note(f"variable {name}:")
        own = {k: v for k, v in (("code", spec.get("column")), ("coder", spec.get("coders")),
                                 ("sheet", spec.get("sheet")), ("sep", spec.get("sep")),
                                 ("layout", spec.get("layout"))) if v is not None}
        data = load_data(sources, **{**reading, "keep": keep, **own},
                         codebook=Path(spec["codebook"]) if spec.get("codebook") else codebook,
                         level=var_level, cluster=options["cluster"])
        rounds = split_rounds(data, round_column) if round_column else None
        variables[name] = Variable(data=None if rounds else data, level=var_level, rounds=rounds,
                                   consensus=Path(spec["consensus"]) if spec.get("consensus") else None)
    with progress_bar("report") as tick:
        result = build_study_report(variables, progress=scaled(tick, 0.0, 0.6), **options)
        _write(result, output, tick)
    return result


def _no_spans(name: str, sources: list[Path], sheet: Any) -> None:
    """A variable's files are coding sheets: span data (told by content) are reported on their own."""
    from agree.io.spans import span_input

    for path in sources:
        kind = span_input(path, sheet=sheet if isinstance(sheet, (str, type(None))) else None)
        if kind is not None:
            raise AgreeError(f"--variable {name}: this is span data (a {kind}), and --variable reads coding sheets",
                             where=str(path), code="bad-option",
                             hint=f"report highlighted passages on their own: agree report {path} --segments ... -o FILE")


def _write(result: Any, output: Path, tick: Any) -> None:
    from agree.output.report import write_report

    tick("writing", 0.6)
    written = write_report(result, output)
    tick("done", 1.0)
    for path in written:
        note(f"wrote {path}")
    for part in getattr(result, "sections", (result,)):
        for w in part.warnings:
            if w.code == "few-clusters":
                note(f"note: {w.message}")


def parse_variable(text: str) -> dict:
    """``NAME=FILE[,FILE...][,key=value...]`` → {"name", "files", key: value}; the keys are
    `VARIABLE_KEYS` (an item whose text before '=' is not a key is a file name)."""
    name, sep, rest = text.partition("=")
    name = name.strip()
    if not sep or not name:
        raise AgreeError(f"--variable '{text}': expected NAME=FILE or NAME=key=value,...",
                         hint="e.g. --variable 'severity=ratings.csv,level=ordinal'", code="bad-option")
    spec: dict = {"name": name, "files": []}
    for item in filter(None, (x.strip() for x in rest.split(","))):
        key, eq, value = item.partition("=")
        key = key.strip().lower()
        if eq and key in VARIABLE_KEYS:
            if not value.strip():
                raise AgreeError(f"--variable {name}: '{key}' has no value", code="bad-option")
            if key in spec:
                raise AgreeError(f"--variable {name}: '{key}' is given twice", code="bad-option")
            spec[key] = value.strip()
        elif eq and "/" not in key and "\\" not in key and "." not in key:
            raise AgreeError(f"--variable {name}: unknown key '{key}'",
                             hint="keys: " + ", ".join(VARIABLE_KEYS), code="bad-option")
        else:
            spec["files"].append(Path(item))
    if spec.get("level") and spec["level"] not in LEVELS:
        raise AgreeError(f"--variable {name}: level '{spec['level']}' is not one of {', '.join(LEVELS)}",
                         code="bad-option")
    if spec.get("coders"):
        spec["coders"] = [c.strip() for c in spec["coders"].split("+") if c.strip()]
    return spec


def _check_names(specs: list[dict]) -> None:
    seen: set[str] = set()
    for spec in specs:
        if spec["name"] in seen:
            raise AgreeError(f"--variable {spec['name']} is given twice", hint="give each variable its own name",
                             code="bad-option")
        seen.add(spec["name"])


def _print_coefficients(result: Any) -> None:
    """The report's coefficient table as the report shows it (the same cells, in plain text)."""
    from agree.core.format import plain
    from agree.output.report import report_tables

    table = report_tables(result)[0]
    title = result.title if result.variable is None else f"Variable: {result.variable}"
    shown = Table(title=title, title_justify="left")
    width = len(table.header) - 1           # the interval method's words stay in the report
    for i, header in enumerate(table.header[:width]):
        shown.add_column(plain(header), justify="left" if i == 0 else "right")
    for row in table.rows:
        shown.add_row(*[plain(c.text) for c in row[:width]])
    stdout.print(shown)
    stdout.print(plain(table.note), highlight=False, markup=False)
    for paragraph in result.interpretation[1:]:
        stdout.print(plain(paragraph), highlight=False, markup=False)
