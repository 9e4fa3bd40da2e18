"""Highlighted passages (span files) in the commands that read data: the span options, shared
by every such command, and reading span data.

A command takes the options with `@span_options` (beside `@reading_options`) and receives them
as one dict, ``span_reading``; `load_spans` reads the files when they hold span data (a REFI-QDA
project, .qdpx or .qde, or a span table with document, start and end columns, told by content
through `agree.io.spans.span_input`) and returns None for a coding sheet, e.g.::

    @app.command()
    @reading_options
    @span_options
    def score(files: Files, codebook: CodebookOption = None, *, reading: dict, span_reading: dict):
        spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
        if spans is None:
            data = load_data(files, codebook=codebook, **reading)

Every span option defaults to None ("not given"), so that a span option given for a coding
sheet is an error rather than silently ignored; `view_choice` and `segment_arguments` fill in
the defaults (positions as units; paragraphs; a share of .5; documents every compared coder
coded in full).
"""

from __future__ import annotations

import functools
import inspect
from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, Optional, Sequence

import typer

from agree.cli.app import note
from agree.core.errors import AgreeError

if TYPE_CHECKING:
    from agree.core.spans import SpanData


class View(str, Enum):
    positions = "positions"
    segments = "segments"
    unitizing = "unitizing"


class Documents(str, Enum):
    complete = "complete"
    pairable = "pairable"


class SpanEnd(str, Enum):
    exclusive = "exclusive"
    inclusive = "inclusive"


class Offsets(str, Enum):
    character = "character"
    token = "token"


SEGMENT_KINDS = ("paragraph", "sentence", "turn")
DEFAULT_VIEW = "positions"
DEFAULT_SEGMENTS = "paragraph"
#: the library's word for each --documents choice (agree.analysis.passages.restrict_documents)
DOCUMENT_RULES = {"complete": "all", "pairable": "pairable"}

ViewOption = Annotated[Optional[View], typer.Option(
    "--view", show_default=False,
    help="Highlighted passages: what the units are. positions (the default): every character (or token) "
         "of the compared documents, per code marked or not; segments: paragraphs, sentences, speaker turns "
         "or listed segments (--segments), each with the set of codes covering it; unitizing: Krippendorff's "
         "alpha for unitizing (EXPERIMENTAL).")]
SegmentsOption = Annotated[Optional[str], typer.Option(
    "--segments", metavar="paragraph|sentence|turn|FILE", show_default=False,
    help="Segments view: the units are paragraphs (blank-line separated; the default), sentences, speaker "
         "turns ('Name:' at the start of a line), or the segments listed in FILE (columns document, start, end, "
         "optional id; same offsets as the spans).")]
MinShareOption = Annotated[Optional[float], typer.Option(
    "--min-share", min=0.0, max=1.0, show_default=False,
    help="Segments view: a code applies to a segment when the coder's spans of it cover at least this share "
         "of the segment, or this share of one such span lies inside it (default 0.5; 0: any overlap).")]
SpanEndOption = Annotated[Optional[SpanEnd], typer.Option(
    "--span-end", show_default=False,
    help="Span files: whether the end offset is the first position after the span (exclusive, the default: "
         "text[start:end]) or its last position (inclusive).")]
OffsetsOption = Annotated[Optional[Offsets], typer.Option(
    "--offsets", show_default=False,
    help="Span tables: what start and end count, characters (Unicode code points, the default) or tokens "
         "(runs of non-space characters).")]
TextsOption = Annotated[Optional[Path], typer.Option(
    "--texts", metavar="FOLDER", show_default=False,
    help="Span tables: the folder of the documents' plain texts, one UTF-8 file per document named by the "
         "document (T01.txt). Needed for paragraphs, sentences and turns, and to check the offsets.")]
DocumentsOption = Annotated[Optional[Documents], typer.Option(
    "--documents", show_default=False,
    help="Span files: which documents are compared. complete (the default): those every compared coder "
         "coded (a document one coder never opened is not a disagreement); pairable: those at least two "
         "coded, the others missing there. The documents left out are named.")]
AllCodedOption = Annotated[Optional[bool], typer.Option(
    "--all-coded", show_default=False,
    help="Span files: every coder coded every document in full, so a document in which a coder marked "
         "nothing counts as coded with no code (by default it counts as not coded by that coder).")]
CodeDepthOption = Annotated[Optional[int], typer.Option(
    "--code-depth", min=1, show_default=False,
    help="Span files with nested codes: roll codes up to this level (1: top-level codes). By default every "
         "span keeps the code it was given.")]
CompareOption = Annotated[Optional[list[str]], typer.Option(
    "--coder", metavar="NAME", show_default=False,
    help="Span files: compare only these coders (repeat the option; at least two). Default: every coder.")]

# (name of the command parameter, its type, the key in span_reading, the flag)
_SPANS = (
    ("view", ViewOption, "view", "--view"),
    ("segments", SegmentsOption, "segments", "--segments"),
    ("min_share", MinShareOption, "min_share", "--min-share"),
    ("span_end", SpanEndOption, "span_end", "--span-end"),
    ("offsets", OffsetsOption, "offsets", "--offsets"),
    ("texts", TextsOption, "texts", "--texts"),
    ("documents", DocumentsOption, "documents", "--documents"),
    ("all_coded", AllCodedOption, "all_coded", "--all-coded"),
    ("code_depth", CodeDepthOption, "code_depth", "--code-depth"),
    ("coder", CompareOption, "coders", "--coder"),
)
FLAGS = {key: flag for _, _, key, flag in _SPANS}


def span_options(command):
    """Add the span options to a command; it receives them as ``span_reading``, a dict of
    `load_spans` keywords (every value None when not given)."""
    signature = inspect.signature(command, eval_str=True)
    own = [p for p in signature.parameters.values() if p.name != "span_reading"]
    extra = [inspect.Parameter(name, inspect.Parameter.KEYWORD_ONLY, default=None, annotation=kind)
             for name, kind, _, _ in _SPANS]

    @functools.wraps(command)
    def wrapper(*args, **kwargs):
        span_reading = {key: _value(kwargs.pop(name)) for name, _, key, _ in _SPANS}
        return command(*args, span_reading=span_reading, **kwargs)

    wrapper.__signature__ = signature.replace(parameters=own + extra)
    return wrapper


def _value(x: Any) -> Any:
    if isinstance(x, Enum):
        return x.value
    if isinstance(x, list):
        return list(x) or None
    return x


def given(span_reading: dict) -> list[str]:
    """The span options given (their flags), in the order of the help."""
    return [FLAGS[key] for key in FLAGS if span_reading.get(key) not in (None, False)]


# reading options of coding sheets (agree.cli.options) that mean nothing for span data: their flags
_SHEET_ONLY = {"layout": "--layout", "unit": "--unit-col", "keep": "--keep", "counts": "--counts"}


def load_spans(files: Sequence[Path], *, codebook: Path | None = None, reading: dict | None = None,
               **span_reading: Any) -> "SpanData | None":
    """The span data in `files` (`SpanData`), or None when the files are not span data.

    Span data: one REFI-QDA project (.qdpx package, or .qde with its sources folder) or one span
    table (CSV, TSV, XLSX, Parquet with document, coder, code, start and end columns), told by
    content (`agree.io.spans.span_input`). `reading` holds the command's sheet-reading options
    (`reading_options`): --coder-col, --code-col, --text-col and --sheet name a span table's
    columns and worksheet; --layout, --unit-col, --keep and --counts are refused for span data.
    `span_reading` is the dict of `span_options`. Nested codes are rolled up with --code-depth;
    a codebook must list every code. What was read is reported on stderr like `report_reading`.

    Raises AgreeError for span options given with a coding sheet, several files of span data,
    or options the input cannot take.
    """
    from agree.io.spans import span_input

    reading = dict(reading or {})
    files = list(files)
    sheet = _one(reading.get("sheet"))
    kinds = [span_input(f, sheet=sheet) for f in files]
    if not any(kinds):
        flags = given(span_reading)
        if flags:
            raise AgreeError(f"{', '.join(flags)} appl{'ies' if len(flags) == 1 else 'y'} to highlighted passages, "
                             f"but this is not span data", where=str(files[0]) if files else None,
                             hint="span data are a .qdpx/.qde project or a span table with document, coder, code, "
                                  "start and end columns; leave the span options out for a coding sheet",
                             code="not-spans")
        return None
    if len(files) > 1:
        which = [str(f) for f, k in zip(files, kinds) if k]
        raise AgreeError(f"span data are read from one file at a time; got {len(files)} files", where=which[0],
                         hint="give one project or one span table (all coders' spans in one table)",
                         code="several-span-files")
    path, kind = files[0], kinds[0]
    refused = [flag for key, flag in _SHEET_ONLY.items() if reading.get(key)]
    if reading.get("engine") not in (None, "auto"):
        refused.append("--engine")
    if refused:
        raise AgreeError(f"{', '.join(refused)} appl{'ies' if len(refused) == 1 else 'y'} to coding sheets, not to "
                         f"span data ({'a project' if kind == 'project' else 'a span table'})", where=str(path),
                         hint="leave it out; the span options (--view, --segments, ...) say how spans are compared",
                         code="bad-option")
    span_end = span_reading.get("span_end") or "exclusive"
    coverage = "declared" if span_reading.get("all_coded") else "inferred"
    depth = span_reading.get("code_depth")
    if kind == "project":
        from agree.io.refi import read_project

        for key, flag in (("texts", "--texts"), ("offsets", "--offsets")):
            if span_reading.get(key) is not None:
                raise AgreeError(f"{flag} applies to span tables; a project holds its own texts and counts "
                                 f"positions in characters", where=str(path), code="bad-option",
                                 hint=f"leave {flag} out for a .qdpx/.qde project")
        columns = [flag for key, flag in (("coder", "--coder-col"), ("code", "--code-col"), ("text", "--text-col"),
                                          ("sheet", "--sheet")) if reading.get(key)]
        if columns:
            raise AgreeError(f"{', '.join(columns)} name columns of a table; a project has none", where=str(path),
                             code="bad-option", hint="leave them out for a .qdpx/.qde project")
        spans = read_project(path, span_end=span_end, code_depth=depth, coverage=coverage)
    else:
        from agree.io.spans import read_spans

        spans = read_spans(path, documents_dir=span_reading.get("texts"), coder=_one(reading.get("coder")),
                           code=_one(reading.get("code")), text=reading.get("text"), sheet=sheet,
                           span_end=span_end, unit=span_reading.get("offsets") or "character", coverage=coverage)
        if depth is not None:
            spans = _rolled_up(spans, depth)
    if codebook is not None:
        _check_codebook(spans, codebook)
    coders = span_reading.get("coders")
    if coders:
        unknown = [c for c in coders if c not in spans.coders]
        if unknown:
            raise AgreeError(f"--coder {unknown[0]}: no such coder in the spans", where=str(path), code="unknown-coder",
                             hint="coders: " + ", ".join(spans.coders))
    report_spans(spans)
    return spans


def _one(x: Any) -> Any:
    if x is None or isinstance(x, str):
        return x
    x = list(x)
    if len(x) > 1:
        raise AgreeError(f"a span table has one such column; got {', '.join(map(repr, x))}", code="bad-option",
                         hint="give the option once")
    return x[0] if x else None


def _rolled_up(spans: "SpanData", depth: int) -> "SpanData":
    from dataclasses import replace

    before = len(spans.codes)
    out = spans.roll_up(depth)
    line = (f"codes rolled up to level {depth} (--code-depth): {before} codes became {len(out.codes)}"
            if len(out.codes) < before else f"--code-depth {depth}: no code is nested deeper")
    return replace(out, report=replace(out.report, notes=(*out.report.notes, line)) if out.report else None)


def _check_codebook(spans: "SpanData", codebook: Path) -> None:
    from agree.io.codebook import read_codebook

    book = read_codebook(codebook)
    listed = {str(c) for c in book.categories}
    used = sorted({spans.codes[k] for k in set(spans.code.tolist())})
    unknown = [c for c in used if c not in listed]
    if unknown:
        shown = ", ".join(f"'{c}'" for c in unknown[:5]) + (f" and {len(unknown) - 5} more" if len(unknown) > 5 else "")
        raise AgreeError(f"{len(unknown)} code(s) of the spans are not in the codebook: {shown}", where=str(codebook),
                         code="unknown-code",
                         hint="add them to the codebook, or roll nested codes up with --code-depth")


def report_spans(spans: "SpanData") -> None:
    """What was read (one line), the reading notes and what was left out, on stderr."""
    report = spans.report
    if report is None:
        return
    note(f"read {spans.n_spans:,} spans, {spans.n_coders} coders, {spans.n_documents} documents, "
         f"{len(spans.codes)} codes: {report.detected}")
    for line in report.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    for line in report.left_out:
        note(f"left out: {line}")


# -- the views ----------------------------------------------------------------------------------
def view_choice(span_reading: dict, allowed: Sequence[str] = ("positions", "segments", "unitizing"),
                command: str = "", default: str = DEFAULT_VIEW) -> str:
    """The view asked for (`default`, positions unless the command says; segments when only
    --segments or --min-share is given), refused with a hint when the command cannot give it."""
    view = span_reading.get("view")
    if view is None:
        view = "segments" if span_reading.get("segments") or span_reading.get("min_share") is not None \
            else default
    if view not in allowed:
        raise AgreeError(f"--view {view} cannot be used{f' with agree {command}' if command else ''}",
                         hint=f"use --view {' or --view '.join(allowed)}", code="bad-option")
    if view != "segments":
        extra = [flag for key, flag in (("segments", "--segments"), ("min_share", "--min-share"))
                 if span_reading.get(key) is not None]
        if extra:
            raise AgreeError(f"{', '.join(extra)} applies to the segments view, not to --view {view}",
                             hint="add --view segments, or leave it out", code="bad-option")
    return view


def compared(span_reading: dict) -> dict[str, Any]:
    """The library's `coders` and `documents` keywords (`restrict_documents`)."""
    return {"coders": span_reading.get("coders"),
            "documents": DOCUMENT_RULES[span_reading.get("documents") or "complete"]}


def segment_arguments(span_reading: dict) -> dict[str, Any]:
    """The library's keywords for the segments view (`segment_units`, `disputed_passages`):
    by, segments (a listed-segments file read into a table), min_cover, coders, documents."""
    from agree.analysis.passages import DEFAULT_MIN_COVER

    segments = span_reading.get("segments") or DEFAULT_SEGMENTS
    out: dict[str, Any] = {"by": segments, "segments": None}
    if segments not in SEGMENT_KINDS:
        out = {"by": "segment", "segments": read_segments(Path(segments))}
    share = span_reading.get("min_share")
    out["min_cover"] = DEFAULT_MIN_COVER if share is None else share
    return {**out, **compared(span_reading)}


def read_segments(path: Path):
    """A segments file (document, start, end, optional id) as a table, through the one reading path."""
    from agree.io.loaders import load_tables

    if not path.exists():
        raise AgreeError(f"--segments {path}: neither paragraph, sentence, turn nor a file", where=str(path),
                         code="file-not-found",
                         hint="give paragraph, sentence or turn, or the file listing the segments "
                              "(columns document, start, end, optional id)")
    tables, _ = load_tables(path, sheet_option="--segments (a segments file)")
    return tables[0].frame


def segment_data(spans: "SpanData", span_reading: dict):
    """The segments view as set-valued CodingData (`segment_units`), reported on stderr like a
    sheet; a problem with a listed-segments file names the file."""
    from agree.analysis.passages import segment_units
    from agree.cli.options import report_reading

    arguments = segment_arguments(span_reading)
    try:
        data = segment_units(spans, **arguments)
    except AgreeError as exc:
        if arguments["by"] != "segment" or exc.code != "segments" or exc.where:
            raise
        raise AgreeError(exc.message, where=span_reading["segments"], code=exc.code,
                         hint=exc.hint or "list segments of the compared documents: document, start, end "
                                          "(end exclusive), in the spans' offsets, not overlapping") from None
    report_reading(data)
    return data


def view_data(spans: "SpanData", span_reading: dict, *, command: str, cluster: str | None = None,
              level: Any = None, allowed: Sequence[str] = ("positions", "segments"),
              default: str = DEFAULT_VIEW) -> tuple[Any, str, str]:
    """The units of view 1 (segments) or 2 (positions) as CodingData for the commands that take
    coding data (codes, coders, report), with the column whose groups every bootstrap resamples
    whole ("document" unless --cluster names another column of the view's units) and the view's
    name, which the command prints with its output."""
    from agree.analysis.passages import position_units
    from agree.cli.options import report_reading

    view = view_choice(span_reading, allowed, command, default)
    if level is not None and _value(level) != "nominal":
        raise AgreeError(f"--level {_value(level)}: codes of highlighted passages are nominal", code="bad-option",
                         hint="leave --level out for span data")
    if view == "segments":
        data = segment_data(spans, span_reading)
    else:
        data = position_units(spans, **compared(span_reading))
        report_reading(data)
    group = cluster or "document"
    if group not in data.columns:
        raise AgreeError(f"--cluster {group}: the {view} view's units have the column(s) {', '.join(data.columns)}",
                         hint="leave --cluster out: whole documents are resampled", code="bad-option")
    return data, group, data.report.detected


def with_view(frame, view: str):
    """A table of results with the view as its first column (for --format csv)."""
    out = frame.copy()
    out.insert(0, "view", view)
    return out


def coding_or_spans(files: Sequence[Path], *, command: str, codebook: Path | None, level: Any, cluster: str | None,
                    reading: dict, span_reading: dict, **load: Any) -> tuple[Any, str | None, Any, str | None]:
    """For the commands that take coding data (codes, coders): the sheets through `load_data`, or
    highlighted passages through view 1 or 2 (`view_data`). Returns (data, cluster, level, view):
    for span data the resampled column is the view's, the level None (codes are nominal) and
    `view` its name, None for sheets."""
    spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
    if spans is None:
        from agree.cli.options import load_data

        return load_data(files, codebook=codebook, level=level, cluster=cluster, **load, **reading), cluster, level, None
    data, group, view = view_data(spans, span_reading, command=command, cluster=cluster, level=level)
    return data, group, None, view
