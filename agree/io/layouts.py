"""Layouts: how the coding was laid out in the tables, and one builder per layout.

`LAYOUTS` is the table of layouts (add a layout here: one entry). Each entry says which
``layout=`` option chooses it, when it fits tables that were not given a layout, and how to
turn one table into `Piece`s: columns of values with the coder of each row. `choose_layout`
picks the entry, `Build` assigns each column its role (`agree.io.columns`), runs the entry's
builder on every table and describes what it found; `agree.io.assemble` makes the units x
coders matrix from the pieces.

wide
    one row per unit: a unit-id column, one column per coder, optionally a column with the
    unit's text and other per-unit columns (a round, a cluster, a document).
long
    one row per (unit, coder): a unit column, a coder column and a code column. The path large
    files take (`_add_long`).
per-coder
    one file (or one worksheet) per coder, each with a unit column and a code column; the
    coder is named after the file stem or the sheet name; files are merged on the unit id.
presence (presence-long, presence-per-coder)
    one 0/1 column per code, per coder: long rows ``unit, coder, code_A, code_B, ...`` or one
    file/sheet per coder with ``unit, code_A, code_B, ...``. Each coder's value is the set of
    codes marked 1. A long or per-coder table whose code columns are all 0/1 is read this way.

Several codes in one cell (``a; b``) are not a layout: any layout's cells may hold them, and
`agree.io.values` reads them as sets.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from agree.core.model import (
    CONSENSUS_FINAL,
    CONSENSUS_SOURCE,
    CONSENSUS_SOURCES,
    MISSING,
    AgreeError,
    cell_location,
    normalise_value,
)
from agree.io.cells import Encoder, factorize_columns, quoted, rows_text
from agree.io.columns import (
    CODER_NAMES,
    NOTE_NAMES,
    Roles,
    assign_roles,
    column_key,
    columns_hint,
    find_column,
    require,
    unit_column,
)
from agree.io.loaders import Table

__all__ = ["LAYOUTS", "LAYOUT_OPTIONS", "Layout", "Piece", "Build", "choose_layout", "refuse_consensus"]


@dataclass(frozen=True, eq=False)
class Piece:
    """Values from one source column: one coder (or a coder column), rows of one table."""

    table: int  # index of the table
    coder: np.ndarray  # global coder index per row
    value: np.ndarray  # vocab index, or (presence) set index; -1 missing
    source: int  # index into the provenance sources
    keep_mask: np.ndarray  # rows that are not entirely blank


class Build:
    """Reads the tables under one layout into pieces, registering coders and unit ids."""

    def __init__(self, tables: list[Table], names: list[str], layout: "Layout", *, unit, coder, code, text,
                 keep, sep, trim, casefold):
        self.tables = tables
        self.names = names  # the coder each table holds, when one table holds one coder's coding
        self.layout = layout
        self.opts = dict(unit=unit, coder=coder, code=code, text=text, keep=list(keep))
        self.sep = sep
        self.enc = Encoder(trim=trim, casefold=casefold)
        self.sources: list[tuple] = []
        self.coders: list[str] = []
        self._coder_at: dict[str, int] = {}
        self.pieces: list[Piece] = []
        self.units: list[tuple[np.ndarray, np.ndarray]] = []  # per table: (unit idx per row, ids)
        self.roles: list[Roles] = []
        self.extra: dict[str, list[tuple[int, pd.Series]]] = {}
        self.text_entries: list[tuple[int, pd.Series]] = []
        self.notes: list[str] = []
        self.left_out: list[str] = []
        self.detected = ""

    def run(self) -> "Build":
        single = len(self.tables) == 1
        try:
            roles = [assign_roles(t, self.layout.name, single_table=single, **self.opts) for t in self.tables]
        except AgreeError as exc:
            if self.layout.per_coder and not single and exc.code == "no-column" and self.opts["code"] is None \
                    and all(_several_coders(t, self.opts) for t in self.tables):
                raise AgreeError(
                    f"each of the {len(self.tables)} files or sheets has several coder columns, so they are not "
                    "one coder each: they look like rounds (or batches) of the same coding",
                    where=exc.where, code="files-are-rounds",
                    hint="compare them with 'agree rounds FILE1 FILE2 --round-files', or read one at a time; "
                         "for one coder per file name the code column with --code-col (code=...)") from None
            raise
        if self.layout.as_presence:
            kinds = {bool(r.presence) for r in roles}
            if len(kinds) > 1:
                raise AgreeError("some files have one code column and others 0/1 code columns",
                                 code="bad-layout", hint="give files of one kind")
            if roles[0].presence:
                self.layout = layout_named(self.layout.as_presence)
        self.roles = roles
        self._check_kept(roles)
        for ti, (t, r) in enumerate(zip(self.tables, roles)):
            self.layout.add(self, ti, t, r)
        self._report_unused(roles)
        if self.layout.per_coder:
            self._check_coder_names()
        self.detected = self.layout.describe(self, roles[0])
        return self

    # ---- helpers of the layout builders --------------------------------------------------
    def unit_rows(self, ti: int, t: Table, r: Roles, factorized=None) -> tuple[np.ndarray, np.ndarray]:
        """Encode the table's unit ids and note its text and kept columns: (unit index of each
        row, -1 when blank; rows blank in the unit, text and kept columns)."""
        frame = t.frame
        unit_idx, ids = self.enc.ids(frame[r.unit], r.unit, factorized)
        blank = unit_idx < 0
        if r.text:
            self.text_entries.append((ti, frame[r.text]))
        for c in r.keep:
            self.extra.setdefault(c, []).append((ti, frame[c]))
        for c in ([r.text] if r.text else []) + r.keep:
            blank &= frame[c].isna().to_numpy() if frame[c].dtype != object else \
                frame[c].map(lambda v: normalise_value(v) is None).to_numpy()
        self.units.append((unit_idx, ids))
        return unit_idx, blank

    def coder_column(self, t: Table, r: Roles, factorized=None) -> np.ndarray:
        """The global coder index of each row from the table's coder column (-1 when blank)."""
        cidx, names = self.enc.ids(t.frame[r.coder], r.coder, factorized)
        g = np.array([self.coder_index(str(n)) for n in names] + [MISSING], dtype=np.int64)
        return g[cidx]

    def coder_index(self, name: str) -> int:
        if name not in self._coder_at:
            self._coder_at[name] = len(self.coders)
            self.coders.append(name)
        return self._coder_at[name]

    def piece(self, ti: int, coder_idx: np.ndarray, values: np.ndarray, column: str | None,
              blank: np.ndarray) -> None:
        t = self.tables[ti]
        self.sources.append((t.file, t.sheet, column))
        keep_mask = ~(blank & (values < 0))
        self.pieces.append(Piece(table=ti, coder=coder_idx, value=values, source=len(self.sources) - 1,
                                 keep_mask=keep_mask))

    def check_blank_coder(self, t: Table, r: Roles, coder_idx, values, unit_idx) -> None:
        bad = np.flatnonzero((coder_idx < 0) & ((values >= 0) | (unit_idx >= 0)))
        if bad.size:
            rows = t.rows[bad]
            raise AgreeError(f"{bad.size} row(s) have no coder name (rows {rows_text(rows)})",
                             where=t.where(int(rows[0]), r.coder), code="missing-coder",
                             hint="fill in the coder of every row")

    # ---- checks and notes ----------------------------------------------------------------
    def _check_kept(self, roles: list[Roles]) -> None:
        """A column asked for with `keep` must be in at least one table (one table: checked in
        `assign_roles`); the error lists the columns there are."""
        for k in self.opts["keep"]:
            if any(k in r.keep for r in roles):
                continue
            if len(self.tables) == 1:
                require(self.tables[0], k, "kept")
            t = self.tables[0]
            raise AgreeError(f"there is no kept column '{k}' in any of the {len(self.tables)} tables read",
                             where=t.where(1), code="no-column",
                             hint=columns_hint(k, t.frame.columns, f"columns of {t.where()}"))

    def _report_unused(self, roles: list[Roles]) -> None:
        """Columns not used, once per table; with one file or sheet per coder, a column that no
        table uses is reported once (per-coder notes, or a per-unit column that could be kept)."""
        per_coder = self.layout.per_coder and len(self.tables) > 1
        everywhere: list[str] = []
        if per_coder:
            everywhere = [c for c in roles[0].unused if all(c in r.unused for r in roles[1:])]
        for t, r in zip(self.tables, roles):
            rest = [c for c in r.unused if c not in everywhere]
            if rest:
                self.left_out.append(f"{cell_location(t.file, t.sheet)}: column(s) not used: "
                                     f"{', '.join(repr(c) for c in rest)}")
        if everywhere:
            where = "sheet" if len({t.file for t in self.tables}) == 1 else "file"
            described = []
            for c in everywhere:
                if column_key(c) in NOTE_NAMES:
                    described.append(f"'{c}' (per-coder notes)")
                else:
                    described.append(f"'{c}' (to keep it as a per-unit column: --keep {quoted(c)} "
                                     f"(keep=[{c!r}]))")
            self.left_out.append(f"column(s) not used, in every coder's {where} ({len(self.tables)} {where}s): "
                                 + ", ".join(described))

    def _check_coder_names(self) -> None:
        names = self.names
        if len(set(names)) < len(names):
            dup = sorted({n for n in names if names.count(n) > 1})
            raise AgreeError(f"two files or sheets give the same coder name '{dup[0]}'", code="duplicate-coder",
                             hint="coders are named after the file name (or sheet name): rename one")


def _several_coders(t: Table, opts: dict) -> bool:
    """Whether the table alone reads as a wide table of two or more coders."""
    try:
        roles = assign_roles(t, "wide", single_table=True, **{**opts, "coder": None, "code": None})
    except AgreeError:
        return False
    return len(roles.coders) >= 2


# -- one builder per layout ---------------------------------------------------------------------
def _add_wide(b: Build, ti: int, t: Table, r: Roles) -> None:
    _, blank = b.unit_rows(ti, t, r)
    for c in r.coders:
        b.piece(ti, np.full(len(t.frame), b.coder_index(str(c)), dtype=np.int64), b.enc.codes(t.frame[c], c),
                c, blank)


def _add_long(b: Build, ti: int, t: Table, r: Roles) -> None:
    """One row per (unit, coder): the hot path of large files. The three columns are
    factorized together (on several threads when they are large), then mapped through."""
    frame = t.frame
    f_unit, f_coder, f_code = factorize_columns([frame[r.unit], frame[r.coder], frame[r.code]])
    unit_idx, blank = b.unit_rows(ti, t, r, f_unit)
    coder_idx = b.coder_column(t, r, f_coder)
    values = b.enc.codes(frame[r.code], r.code, f_code)
    b.check_blank_coder(t, r, coder_idx, values, unit_idx)
    b.piece(ti, coder_idx, values, r.code, blank & (coder_idx < 0))


def _add_per_coder(b: Build, ti: int, t: Table, r: Roles) -> None:
    _, blank = b.unit_rows(ti, t, r)
    b.piece(ti, np.full(len(t.frame), b.coder_index(b.names[ti]), dtype=np.int64),
            b.enc.codes(t.frame[r.code], r.code), r.code, blank)


def _add_presence_long(b: Build, ti: int, t: Table, r: Roles) -> None:
    unit_idx, blank = b.unit_rows(ti, t, r)
    coder_idx = b.coder_column(t, r)
    values = b.enc.presence(t, r.presence)
    b.check_blank_coder(t, r, coder_idx, values, unit_idx)
    b.piece(ti, coder_idx, values, None, blank & (coder_idx < 0))


def _add_presence_per_coder(b: Build, ti: int, t: Table, r: Roles) -> None:
    _, blank = b.unit_rows(ti, t, r)
    coder_idx = np.full(len(t.frame), b.coder_index(b.names[ti]), dtype=np.int64)
    b.piece(ti, coder_idx, b.enc.presence(t, r.presence), None, blank)


# -- descriptions --------------------------------------------------------------------------------
def _common(b: Build, r: Roles) -> tuple[str, str, str, int]:
    """(unit column text, extra columns text, coder names, number of coders)."""
    extra = ""
    if r.text:
        extra += f", text column '{r.text}'"
    if r.keep:
        extra += f", kept column(s) {', '.join(repr(k) for k in r.keep)}"
    names = ", ".join(b.coders[:8]) + (", ..." if len(b.coders) > 8 else "")
    unit_txt = f"unit column '{r.unit}'" + (f" ({r.unit_how})" if r.unit_how else "")
    return unit_txt, extra, names, len(b.coders)


def _sheets_or_files(b: Build) -> str:
    return "sheet" if all(t.sheet for t in b.tables) and len({t.file for t in b.tables}) == 1 else "file"


def _code_columns(r: Roles) -> tuple[int, str]:
    k = len(r.presence)
    return k, ", ".join(r.presence[:8]) + (", ..." if k > 8 else "")


def _describe_wide(b: Build, r: Roles) -> str:
    unit_txt, extra, names, n = _common(b, r)
    return f"wide layout: {unit_txt}, {n} coder column{'s' * (n != 1)} ({names}){extra}"


def _describe_long(b: Build, r: Roles) -> str:
    unit_txt, extra, names, n = _common(b, r)
    return (f"long layout: {unit_txt}, coder column '{r.coder}' ({n} coder{'s' * (n != 1)}: {names}), "
            f"code column '{r.code}'{extra}")


def _describe_per_coder(b: Build, r: Roles) -> str:
    unit_txt, extra, names, n = _common(b, r)
    where = _sheets_or_files(b)
    return f"one {where} per coder: {n} {where}s ({names}), {unit_txt}, code column '{r.code}'{extra}"


def _describe_presence_long(b: Build, r: Roles) -> str:
    unit_txt, extra, names, n = _common(b, r)
    k, cols = _code_columns(r)
    return (f"presence/absence layout: {unit_txt}, coder column '{r.coder}' ({n} coders: {names}), "
            f"{k} 0/1 code columns ({cols}){extra}")


def _describe_presence_per_coder(b: Build, r: Roles) -> str:
    unit_txt, extra, names, n = _common(b, r)
    where = _sheets_or_files(b)
    k, cols = _code_columns(r)
    return (f"presence/absence layout, one {where} per coder: {n} {where}s ({names}), {unit_txt}, "
            f"{k} 0/1 code columns ({cols}){extra}")


# -- the table of layouts -------------------------------------------------------------------------
@dataclass(frozen=True)
class Situation:
    """What layout detection looks at."""

    several: bool  # more than one table
    all_coder: bool  # every table has a coder column
    coder_list: bool  # coder columns were named (a list: wide)


@dataclass(frozen=True)
class Layout:
    """One layout.

    name : as used in `Build` and the provenance ("presence-long", ...).
    option : the ``layout=`` value that chooses it ("presence" chooses either presence layout).
    fits : whether it fits the tables; among the entries of one option, the first that fits is
        chosen (else the last); without an option, the first entry by `auto` rank that fits.
    auto : rank in automatic detection (lowest tried first); None: chosen only by its option.
    add : the builder, ``add(build, table index, table, roles)``: adds the table's pieces.
    describe : the one-line description in ``data.report.detected``.
    per_coder : one table per coder (coders named after the file or sheet).
    presence : values are sets of codes from 0/1 columns.
    as_presence : the layout to use instead when the code columns turn out to be 0/1 columns.
    single : reads one table only.
    """

    name: str
    option: str
    fits: Callable[[Situation], bool]
    add: Callable[[Build, int, Table, Roles], None]
    describe: Callable[[Build, Roles], str]
    auto: int | None = None
    per_coder: bool = False
    presence: bool = False
    as_presence: str | None = None
    single: bool = False


# Add a layout here: one entry (a builder and a description above). Automatic detection tries
# the entries with an `auto` rank, lowest first.
LAYOUTS: tuple[Layout, ...] = (
    Layout("wide", "wide", fits=lambda s: True, add=_add_wide, describe=_describe_wide, auto=3, single=True),
    Layout("long", "long", fits=lambda s: s.all_coder and not s.coder_list, add=_add_long,
           describe=_describe_long, auto=1, as_presence="presence-long"),
    Layout("per-coder", "per-coder", fits=lambda s: s.several, add=_add_per_coder,
           describe=_describe_per_coder, auto=2, per_coder=True, as_presence="presence-per-coder"),
    Layout("presence-long", "presence", fits=lambda s: s.all_coder, add=_add_presence_long,
           describe=_describe_presence_long, presence=True),
    Layout("presence-per-coder", "presence", fits=lambda s: True, add=_add_presence_per_coder,
           describe=_describe_presence_per_coder, per_coder=True, presence=True),
)
LAYOUT_OPTIONS = tuple(dict.fromkeys(layout.option for layout in LAYOUTS))


def layout_named(name: str) -> Layout:
    return next(layout for layout in LAYOUTS if layout.name == name)


def choose_layout(tables: list[Table], layout: str | None, *, coder, code, unit) -> Layout:
    """The layout named by `layout` (an option value), or detected from the tables."""
    def has_coder(t):
        if isinstance(coder, str):
            return coder in t.frame.columns
        unit_col = unit_column(t, unit)[0]
        return find_column(list(t.frame.columns), CODER_NAMES, {unit_col}) is not None

    several = len(tables) > 1
    if layout is None and code is not None and not isinstance(code, str):
        layout = "presence"
    if layout is not None:
        named = [x for x in LAYOUTS if x.option == layout]
        if named[0].single and several:
            raise AgreeError(f"the {layout} layout reads one table; got {len(tables)}", code="bad-layout",
                             hint="give one file (and one sheet), or choose --layout per-coder "
                                  "(layout='per-coder')")
        if len(named) == 1:
            return named[0]
    else:
        named = sorted((x for x in LAYOUTS if x.auto is not None), key=lambda x: x.auto)
    s = Situation(several=several, all_coder=all(has_coder(t) for t in tables),
                  coder_list=coder is not None and not isinstance(coder, str))
    return next((x for x in named if x.fits(s)), named[-1])


def refuse_consensus(table: Table) -> None:
    """Refuse a consensus file written by `agree reconcile`: its final code is not a coder.

    Recognised by a 'final code' column, or by a 'source' column whose values are all among
    the consensus sources (agreed, decided, majority, ...). Checks distinct values only.
    """
    by_key = {column_key(c): c for c in table.frame.columns}
    final = by_key.get(column_key(CONSENSUS_FINAL))
    source = by_key.get(column_key(CONSENSUS_SOURCE))
    sign = None
    if final is not None:
        sign = f"it has a '{final}' column"
    elif source is not None:
        col = table.frame[source].dropna()
        found = {str(v).strip().lower() for v in pd.unique(col)} - {""}
        if found and found <= set(CONSENSUS_SOURCES):
            sign = f"its '{source}' column holds consensus sources ({', '.join(sorted(found))})"
    if sign is None:
        return
    raise AgreeError(
        f"this looks like a consensus file written by 'agree reconcile' ({sign}): agreement must be "
        "computed on the coders' independent codes, not on the reconciled final code",
        where=table.where(), code="consensus-file",
        hint="score the original coding files; if you really mean to compare some of these columns, "
             "name them with --coder-col (coder=[...])")

