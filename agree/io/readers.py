"""Read coding tables (CSV, TSV, XLSX, Parquet) into `CodingData`.

One entry point, :func:`read`, takes one or more files and works out how the coding was laid
out; arguments override every guess. The reading path, module by module:

1. `agree.io.loaders`: each file to raw tables (``LOADERS``: one entry per file format), with
   the spreadsheet row of every record;
2. `agree.io.layouts`: the layout chosen (``LAYOUTS``: one entry per layout: wide, long,
   per-coder, presence) and each column given its role (`agree.io.columns`);
3. the layout's builder turns each table into columns of codes (`agree.io.cells`);
4. `agree.io.assemble` makes the units x coders matrix, `agree.io.values` the values,
   categories and level (codebook, several codes per cell), and `read` adds the `ReadReport`.

Missing values
--------------
An empty cell means *the coder did not code the unit* (missing). In a presence/absence
matrix, a row with at least one 0 or 1 means the coder coded the unit; codes left blank on
such a row count as not applied (0); a row of zeros is the empty set (coded, no code applied);
an all-blank row is missing. In the other layouts there is no way to write "coded, but no
code applied" in a single cell: an empty cell is missing. Use the presence layout when that
distinction matters. Cells holding only spaces count as empty.

Several codes in one cell
-------------------------
When a text cell contains the separator (``sep``, ``;`` by default) every value becomes a set
of codes (``CodingData.set_valued``); see `agree.io.values`. ``sep=None`` (``--sep ''``) never
splits.

Refused and checked
-------------------
A consensus file written by ``agree reconcile`` (a ``final code`` column, or a ``source``
column of consensus sources) is refused unless the coder columns are named: agreement is
computed on the coders' independent codes. At the ordinal level without a codebook, text among
numbers (``NA`` among 1..5) is an error, as at the interval and ratio levels; at the nominal
level text such as ``NA`` among numbers is read as a code, with a warning. With one file per
coder, a kept per-unit column must give a unit the same value in every coder's file.

Rows
----
Row numbers are counted the way a spreadsheet counts them: the header is row 1, the first data
row is row 2 (see `agree.io.loaders`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Callable, Sequence

from agree.core.model import LEVELS, AgreeError, CodingData, ReadReport
from agree.io.assemble import assemble
from agree.io.codebook import Codebook, as_codebook, read_codebook
from agree.io.layouts import LAYOUT_OPTIONS, Build, choose_layout, refuse_consensus
from agree.io.loaders import cell_limit, load_tables

__all__ = ["read", "read_codebook", "Codebook", "LAYOUTS"]
# Exported by the package as `agree.read`, `agree.read_codebook` and `agree.Codebook`.

LAYOUTS = LAYOUT_OPTIONS  # the values of layout=
_LOADING, _BUILDING = 0.4, 0.8  # where on the progress bar matching the ids and checking start (their share of the time)


def read(paths: str | Path | Sequence[str | Path], *, layout: str | None = None,
         unit: str | None = None, coder: str | Sequence[str] | None = None,
         code: str | Sequence[str] | None = None, text: str | None = None,
         sheet: str | int | Sequence[str] | None = None, sep: str | None = ";",
         codebook: Any = None, trim: bool = False, casefold: bool = False,
         level: str | None = None, keep: Sequence[str] = (), max_cells: int | None = None,
         progress: Callable[[str, float], None] | None = None) -> CodingData:
    """Read one or more coding tables into `CodingData`.

    Parameters
    ----------
    paths : a file or a list of files (.csv, .tsv, .txt, .xlsx, .xlsm, .parquet; a file with
        another suffix is read by its content).
    layout : "wide", "long", "per-coder" or "presence"; detected when None (the detected
        layout is described in ``data.report.detected``).
    unit, coder, code, text : column names overriding detection. In the wide layout `coder`
        may be a list of coder columns; in the presence layout `code` may be a list of the
        0/1 code columns.
    sheet : a sheet name (or 1-based number, or a list of names) for workbooks. By default
        every non-empty sheet is read; several sheets are one sheet per coder.
    sep : separator between several codes in one cell (None: never split).
    codebook : a codebook file, a :class:`~agree.io.codebook.Codebook`, a list of categories or
        a {category: description} mapping. Values follow its order, unused codes included; a
        code not in it is an error.
    trim : strip spaces around codes and unit ids (what changed is reported in the notes).
    casefold : compare codes ignoring case (with a codebook, the codebook's spelling is kept).
    level : "nominal", "ordinal", "interval" or "ratio". When None: "ordinal" if the codebook
        has an order column, else "nominal" (reported in the notes).
    keep : other per-unit columns to keep in ``data.columns`` (e.g. a round or cluster column).
    max_cells : the largest worksheet read, in cells (the rows holding values times the columns
        holding values); larger sheets are refused before they are built. Default
        ``agree.core.constants.MAX_SHEET_CELLS`` (20 million). Memory follows the cells that hold
        values, never the size a sheet declares.
    progress : called as progress(step, fraction_done) as each step of reading starts (reading
        a file, matching unit ids, checking the codes).

    Returns
    -------
    CodingData
        with ``provenance`` (file, sheet, row and column of every value) and ``report``.

    Raises
    ------
    AgreeError
        for unreadable files and bad data, naming the file, sheet, row and column.

    Notes
    -----
    An empty cell is missing: the coder did not code the unit. Units that no coder coded are
    kept (all missing). Numbers written ``1`` and ``1.0`` are the same code.
    """
    with cell_limit(max_cells):
        return _read(paths, layout=layout, unit=unit, coder=coder, code=code, text=text, sheet=sheet, sep=sep,
                     codebook=codebook, trim=trim, casefold=casefold, level=level, keep=keep,
                     progress=progress or (lambda step, done: None))


def _read(paths, *, layout, unit, coder, code, text, sheet, sep, codebook, trim, casefold, level, keep,
          progress) -> CodingData:
    files = [paths] if isinstance(paths, (str, Path)) else list(paths)
    if not files:
        raise AgreeError("no input files given", hint="name one or more files", code="no-input")
    if layout is not None and layout not in LAYOUTS:
        raise AgreeError(f"layout must be one of {', '.join(LAYOUTS)}; got '{layout}'", code="bad-option")
    if level is not None and level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="bad-option")
    if sep == "":
        sep = None
    book = None if codebook is None else as_codebook(codebook, trim=trim)

    tables, notes, left_out, checksums = [], [], [], {}
    for i, f in enumerate(files):
        progress(f"reading {Path(f).name}", _LOADING * i / len(files))
        part, loaded = load_tables(Path(f), sheet=sheet, name=str(f))
        if len(files) > 1 and len(part) > 1:
            raise AgreeError(f"the workbook has {len(part)} sheets with data; with several files "
                             "each file must give one table", where=str(f), code="several-sheets",
                             hint="choose the sheet with --sheet (sheet=...)")
        tables += part
        notes += loaded.notes
        left_out += loaded.left_out
        checksums.update(loaded.checksums)
    one_file = len(files) == 1
    # the coder a table holds when each table holds one coder's coding
    names = [t.sheet if one_file and t.sheet is not None else Path(t.file).stem for t in tables]

    if coder is None:
        for t in tables:
            refuse_consensus(t)
    chosen = choose_layout(tables, layout, coder=coder, code=code, unit=unit)
    progress("matching unit ids", _LOADING)
    build = Build(tables, names, chosen, unit=unit, coder=coder, code=code, text=text, keep=keep,
                  sep=sep, trim=trim, casefold=casefold).run()
    progress("checking the codes", _BUILDING)
    fields = assemble(build, book=book, level=level)
    codes = fields["codes"]
    observed = int((codes >= 0).sum())
    if observed == 0:
        raise AgreeError(f"no codes were read: every code cell of the {len(build.coders)} coders is empty "
                         f"({codes.shape[0]} units)", where=", ".join(str(f) for f in files), code="no-values",
                         hint=f"fill in the coding sheets; read as {build.detected}")
    report = ReadReport(
        detected=build.detected,
        files=tuple(str(f) for f in files),
        units_read=int(codes.shape[0]),
        values_read=observed,
        values_missing=int(codes.size - observed),
        notes=tuple(notes + build.enc.stats.notes() + build.notes),
        left_out=tuple(left_out + build.left_out),
        checksums=dict(checksums),
    )
    progress("read", 1.0)
    return CodingData(**fields, report=report)
