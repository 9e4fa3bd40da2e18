"""Pattern-count tables: a data set reduced to how many units carry each pattern of codes.

Every coefficient depends on the data only through such counts (`agree.stats.patterns`), so a
table of pattern counts is as good as the units themselves, however many there were: it is
read into weighted `CodingData` (a row stands for `count` identical units) and scored as usual.
Label logs of 1e8 rows are reduced to such a table out of core by DuckDB
(`agree.io.duckdb_engine`), by Dask (`agree.io.dask_engine`) or by a warehouse running
`pattern_count_sql` (`agree.io.sql`), and `read_counts` reads the result.

The counts table
----------------
One row per pattern (or per cluster and pattern), in any file the readers take (CSV, TSV,
XLSX, Parquet) or a pandas DataFrame, in one of two layouts:

coder columns
    one column per coder holding that coder's code (blank: the coder did not code these units),
    and a ``count`` column: how many units have exactly these codes. Every coefficient is
    available. Example::

        ann,bea,cyd,count
        pos,pos,pos,5120
        pos,neg,,311

multiset
    a ``values`` column holding the codes the unit received, whoever gave them, joined by ``|``
    (``pos|pos|neg``; order does not matter; a Parquet list column also works), and a ``count``
    column. Coder identity is lost, so Cohen's kappa, the weighted kappas and Conger's kappa
    (the coefficients that pair each coder's code with the same coder's on every unit) are not
    available; percent agreement, Scott's pi, Fleiss' kappa, Brennan–Prediger, Gwet's AC1/AC2
    and Krippendorff's alpha are. The number of coders is taken as the largest multiset.

Optional columns, in both layouts:

cluster (or any per-unit column to keep)
    a column such as ``document`` (the names the readers keep: round, cluster, document, ...,
    or any column named with `cluster=` / `keep=`): the rows are then counts per (cluster,
    pattern), and ``score --cluster document`` resamples whole documents.
duplicate_rows, rows_without_coder, rows_without_unit
    checks written by `pattern_count_sql` (a warehouse cannot raise an error): rows in the log
    that coded a unit a second time by the same coder, that had a code but no coder, or a code
    but no unit. Any non-zero value is refused, as the ordinary reader refuses such rows.

Counts must be whole numbers of zero or more; rows with count 0 are left out (and reported).
Codes are read like any cell (numbers ``1`` and ``1.0`` are one code, ``--trim``/``--casefold``
apply, ``;`` separates several codes in one cell unless ``sep=None``) and checked against a
codebook when one is given. Columns named like unit ids (unit, item, id, ...) are refused: a
counts table has no units, and such a column is most likely a per-unit table read by mistake.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd

from agree.core.model import (
    LEVELS,
    MISSING,
    AgreeError,
    CodingData,
    ReadReport,
    cell_location,
)
from agree.io.cells import Encoder
from agree.io.codebook import Codebook, as_codebook
from agree.io.columns import KEEP_NAMES, UNIT_NAMES, find_column
from agree.io.loaders import load_tables
from agree.io.values import CellFinder, Values

__all__ = ["read_counts", "pattern_count_table", "COUNT_NAMES", "MULTISET_NAMES", "CHECK_COLUMNS",
           "MULTISET_SEP", "Atoms", "resolve_values", "multiset_coders"]

COUNT_NAMES = ("count", "n", "units", "n_units", "frequency", "freq")
MULTISET_NAMES = ("values", "multiset", "value_multiset", "codes_given")
MULTISET_SEP = "|"
# check columns written by `pattern_count_sql`: what the ordinary reader would refuse
CHECK_COLUMNS = {
    "duplicate_rows": "rows coded a unit a second time by the same coder",
    "rows_without_coder": "rows have a code but no coder",
    "rows_without_unit": "rows have a code but no unit id",
}
MULTISET_CODER = "value {}"  # names of the positions of a multiset (not coders)


# -- values: from distinct raw codes to the values of CodingData --------------------------------
@dataclass
class Atoms:
    """The distinct raw codes of a table: each with how many cells hold it and where the first is.

    `raw` (K,) the values as read; `cells` (K,) int64 how many cells (units, for weighted tables)
    hold each; `rows` (K,) and `source` (K,) the row and the index into `sources` ((file, sheet,
    column) triples) of the first such cell, as errors name it."""

    raw: list
    cells: np.ndarray
    rows: np.ndarray
    source: np.ndarray
    sources: list[tuple]


@dataclass
class Resolved:
    values: tuple
    categories: tuple
    level: str
    set_valued: bool
    remap: np.ndarray      # (K,) int32: index into `values` of each raw code, MISSING for blanks
    order: str
    notes: list[str]
    blank_cells: int        # cells whose code was blank or only spaces


def resolve_values(atoms: Atoms, *, book: Codebook | None, level: str | None, sep: str | None,
                   trim: bool, casefold: bool, label: str = "codes") -> Resolved:
    """The values, categories and level of data whose distinct raw codes are `atoms`, decided by the
    ordinary reader's own rules (`agree.io.values.Values`: canonical codes, several codes in one cell,
    the codebook, text at the interval level, look-alike and case/space warnings), with every count in
    its messages a count of cells. `label` names the code column(s) in the notes on trimming."""
    enc = Encoder(trim=trim, casefold=casefold)
    value = enc.codes(pd.Series(atoms.raw, dtype=object), label, weights=atoms.cells)
    cell_of = CellFinder(value, atoms.rows, atoms.source, atoms.sources, weights=atoms.cells)
    notes: list[str] = []
    values, categories, remap, set_valued, data_level = Values(enc, sep=sep, presence=False,
                                                               notes=notes).resolve(book, level, cell_of)
    order = (("given" if book.ordered else "codebook rows") if book is not None else
             "numeric" if all(isinstance(v, (int, float)) for v in values) else "alphabetical")
    return Resolved(tuple(values), tuple(categories), data_level, set_valued, remap[value].astype(np.int32),
                    order, enc.stats.notes() + notes, int(atoms.cells[value < 0].sum()))


def as_book(codebook: Any, *, trim: bool) -> Codebook | None:
    """A Codebook from a file, a Codebook, a list or a mapping (`as_codebook`); None stays None."""
    return None if codebook is None else as_codebook(codebook, trim=trim)


def multiset_coders(k: int) -> tuple[str, ...]:
    """Names of the k positions of a multiset: not coders, since coder identity is unknown."""
    return tuple(MULTISET_CODER.format(i + 1) for i in range(k))


# -- reading a counts table ------------------------------------------------------------------
@dataclass
class _Part:
    """One counts table: a file, a sheet or a DataFrame."""

    frame: pd.DataFrame
    rows: np.ndarray          # row number of each frame row, as errors name it
    file: str | None
    sheet: str | None

    def where(self, row: int | None = None, column: str | None = None) -> str:
        return cell_location(self.file, self.sheet, row, column)


def read_counts(source: Any, *, count: str | None = None, coders: Sequence[str] | None = None,
                values: str | None = None, cluster: str | None = None, keep: Sequence[str] = (),
                sheet: str | None = None, codebook: Any = None, level: str | None = None, sep: str | None = ";",
                trim: bool = False, casefold: bool = False, multiset_sep: str = MULTISET_SEP,
                progress: Callable[[str, float], None] | None = None) -> CodingData:
    """Read a pattern-count table into weighted `CodingData` (a row stands for `count` units).

    Parameters
    ----------
    source : a file (.csv, .tsv, .xlsx, .parquet), a list of files (their rows are added
        together; a coder column missing from a file means not coded there) or a DataFrame.
    count : the count column (default: the column named count, n, units, frequency or freq).
    coders : the coder columns (default: every column that is not the count, a kept or a check
        column).
    values : the multiset column (default: a column named values or multiset); when present the
        table is in the multiset layout.
    cluster, keep : per-row columns to keep (``data.columns``), e.g. the cluster column the rows
        are counted per; columns named round, cluster, document, ... are kept without asking.
    sheet, codebook, level, sep, trim, casefold : as in `agree.read`.
    multiset_sep : the separator between the codes of a multiset written as text.
    progress : called as progress(step, fraction_done).

    Returns
    -------
    CodingData
        with ``weights`` (the counts), one row per pattern (per cluster and pattern), ``unit_ids``
        the row numbers of the table, and a ``report`` saying what was read, used and left out.

    Raises
    ------
    AgreeError
        naming the file, row and column of a count that is not a whole number of zero or more,
        of a code not in the codebook, of a non-zero check column, or a missing column.

    Notes
    -----
    The layout is described in the module `agree.io.counts`. In the multiset layout coder
    identity is lost: the data are marked so (``coder_identity=False``) and the coefficients
    that need it refuse them.
    """
    book = as_book(codebook, trim=trim)
    if level is not None and level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="bad-option")
    if sep == "":
        sep = None
    tick = progress or (lambda step, done: None)
    tick("reading the counts table", 0.0)
    parts, files, notes = _load_parts(source, sheet)
    tick("checking the counts", 0.5)
    roles = [_roles(p, count=count, coders=coders, values=values, cluster=cluster, keep=keep) for p in parts]
    multiset = {r.values is not None for r in roles}
    if len(multiset) > 1:
        raise AgreeError("some counts tables have a multiset column and others coder columns", code="bad-layout",
                         hint="give tables of one layout")
    counts = [_counts(p, r.count) for p, r in zip(parts, roles)]
    for p, r in zip(parts, roles):
        _check_columns(p, r.checks)
    left_out: list[str] = []
    zero = sum(int((c == 0).sum()) for c in counts)
    if zero:
        left_out.append(f"{zero} row(s) with count 0 (they stand for no unit)")
    keep_rows = [c > 0 for c in counts]
    for p, r in zip(parts, roles):
        if r.unused:
            left_out.append(f"{p.where()}: column(s) not used: {', '.join(repr(c) for c in r.unused)}")
    if multiset.pop():
        cells, coder_names = _multiset_cells(parts, roles, keep_rows, multiset_sep)
        layout = f"multiset layout: column '{roles[0].values}' (codes of a unit, whoever gave them)"
    else:
        cells, coder_names = _coder_cells(parts, roles, keep_rows)
        layout = f"coder columns: {len(coder_names)} coders ({_names(coder_names)})"
    row_part, row_pos, cell_row, cell_col, raw_index, atoms = cells
    weights = np.concatenate([c[k] for c, k in zip(counts, keep_rows)]) if counts else np.zeros(0, np.int64)
    atoms.cells = np.bincount(raw_index, weights=weights[cell_row], minlength=len(atoms.raw)).astype(np.int64)
    res = resolve_values(atoms, book=book, level=level, sep=sep, trim=trim, casefold=casefold,
                         label=roles[0].values or "coder columns")
    n, m = len(weights), len(coder_names)
    codes = np.full((n, m), MISSING, dtype=np.int32)
    coded = res.remap[raw_index]
    codes[cell_row, cell_col] = coded
    if roles[0].values is not None:  # a multiset: its codes in value order, blanks last
        codes = np.sort(np.where(codes < 0, np.iinfo(np.int32).max, codes), axis=1)
        codes[codes == np.iinfo(np.int32).max] = MISSING
    kept_names = list(dict.fromkeys(c for r in roles for c in r.keep))
    columns = {}
    for name in kept_names:
        col = [p.frame[name].to_numpy(dtype=object)[k] if name in p.frame.columns else
               np.full(int(k.sum()), None, dtype=object) for p, k in zip(parts, keep_rows)]
        columns[name] = np.concatenate(col) if col else np.zeros(0, dtype=object)
    if m < 2 and roles[0].values is None:
        raise AgreeError(f"only {m} coder column found ({_names(coder_names) or 'none'})", where=parts[0].where(1),
                         code="one-coder", hint="agreement needs two or more coders: give the coder columns "
                                                "(coders=[...]) or a multiset column")
    unit_ids = np.concatenate([p.rows[k] for p, k in zip(parts, keep_rows)]) if parts else np.zeros(0, np.int64)
    codebook_map = {c: book.descriptions.get(c, "") for c in res.categories} if book is not None else None
    data = CodingData(codes=codes, values=res.values, unit_ids=unit_ids, coders=tuple(coder_names),
                      categories=res.categories, level=res.level, set_valued=res.set_valued, columns=columns,
                      codebook=codebook_map, order=res.order, weights=weights,
                      coder_identity=roles[0].values is None)
    observed = int(weights @ (codes >= 0).sum(axis=1)) if n else 0
    kept = f", kept column(s) {', '.join(repr(k) for k in kept_names)}" if kept_names else ""
    detected = (f"pattern counts, {layout}, count column '{roles[0].count}'{kept}: {n:,} rows stand for "
                f"{data.units_represented:,} units")
    if roles[0].values is not None:
        notes.append("multiset layout: coder identity is not known, so Cohen's kappa, the weighted kappas and "
                     "Conger's kappa are not available")
    data = _with_report(data, ReadReport(
        detected=detected, files=tuple(files), units_read=data.units_represented, values_read=observed,
        values_missing=int(weights.sum()) * m - observed, notes=tuple(notes + res.notes), left_out=tuple(left_out)))
    tick("read", 1.0)
    return data


def _with_report(data: CodingData, report: ReadReport) -> CodingData:
    object.__setattr__(data, "report", report)
    return data


def _names(names: Sequence[str]) -> str:
    return ", ".join(names[:8]) + (", ..." if len(names) > 8 else "")


def _load_parts(source: Any, sheet: Any) -> tuple[list[_Part], list[str], list[str]]:
    if isinstance(source, pd.DataFrame):
        frame = source.reset_index(drop=True)
        frame.columns = [str(c) for c in frame.columns]
        return [_Part(frame, np.arange(len(frame), dtype=np.int64), "DataFrame", None)], [], []
    paths = [source] if isinstance(source, (str, Path)) else list(source)
    if not paths:
        raise AgreeError("no counts table given", hint="name one or more files", code="no-input")
    parts, notes = [], []
    for f in paths:
        tables, loaded = load_tables(Path(f), sheet=sheet, name=str(f))
        notes += loaded.notes
        parts += [_Part(t.frame, t.rows, t.file, t.sheet) for t in tables]
    return parts, [str(f) for f in paths], notes


@dataclass
class _CountRoles:
    count: str
    coders: list[str]
    values: str | None
    keep: list[str]
    checks: list[str]
    unused: list[str]


def _roles(p: _Part, *, count, coders, values, cluster, keep) -> _CountRoles:
    columns = [str(c) for c in p.frame.columns]

    def need(name: str, what: str) -> str:
        if name not in columns:
            close = difflib.get_close_matches(name, columns, n=1)
            listed = ", ".join(repr(c) for c in columns)
            raise AgreeError(f"there is no {what} column '{name}'", where=p.where(1), code="no-column",
                             hint=(f"did you mean '{close[0]}'? " if close else "") + f"(columns: {listed})")
        return name

    count_col = need(count, "count") if count else find_column(columns, COUNT_NAMES)
    if count_col is None:
        raise AgreeError("no count column: a counts table needs a column saying how many units have each pattern",
                         where=p.where(1), code="no-column",
                         hint=f"name it 'count' or give it with count=...; columns: {', '.join(map(repr, columns))}")
    checks = [c for c in columns if c in CHECK_COLUMNS]
    values_col = need(values, "multiset") if values else find_column(columns, MULTISET_NAMES, {count_col})
    kept = [need(k, "kept") for k in dict.fromkeys([*([cluster] if cluster else []), *keep])]
    taken = {count_col, values_col, *checks, *kept}
    if coders is not None:
        coder_cols = [need(c, "coder") for c in coders]
        for c in columns:
            if c not in taken and c not in coder_cols and find_column([c], KEEP_NAMES):
                kept.append(c)
    else:
        kept += [c for c in columns if c not in taken and find_column([c], KEEP_NAMES)]
        coder_cols = [] if values_col else [c for c in columns if c not in taken and c not in kept]
        ids = [c for c in coder_cols if find_column([c], UNIT_NAMES)]
        if ids:
            raise AgreeError(f"column '{ids[0]}' looks like unit ids, but a counts table has one row per pattern, "
                             "not per unit", where=p.where(1, ids[0]), code="bad-layout",
                             hint="read a per-unit table without --counts, or name the coder columns (coders=[...])")
    if values_col is not None and coder_cols and coders is not None:
        raise AgreeError("a counts table has either coder columns or a multiset column, not both",
                         where=p.where(1, values_col), code="bad-layout", hint="give one of coders= and values=")
    unused = [c for c in columns if c not in taken and c not in coder_cols and c not in kept]
    return _CountRoles(count_col, coder_cols, values_col, kept, checks, unused)


def _whole_numbers(p: _Part, column: str, what: str) -> np.ndarray:
    """A column of whole numbers >= 0 (int64), or an error naming the first bad cells."""
    col = p.frame[column]
    num = pd.to_numeric(col.map(lambda v: v.strip() if isinstance(v, str) else v), errors="coerce")
    num = num.to_numpy(dtype=float, na_value=np.nan)
    bad = ~np.isfinite(num) | (num < 0) | (num != np.round(num))
    if bad.any():
        idx = np.flatnonzero(bad)
        shown = col.iloc[idx[0]]
        more = f" ({len(idx)} such rows: {_rows(p.rows[idx])})" if len(idx) > 1 else ""
        what_is = "empty" if pd.isna(shown) or str(shown).strip() == "" else f"'{shown}'"
        raise AgreeError(f"{what} must be a whole number of zero or more; got {what_is}{more}",
                         where=p.where(int(p.rows[idx[0]]), column), code="bad-count",
                         hint="write how many units (a count such as 12) on every row")
    return num.astype(np.int64)


def _rows(rows: np.ndarray, limit: int = 10) -> str:
    shown = ", ".join(str(int(r)) for r in rows[:limit])
    return shown + (f", ... ({len(rows)} rows)" if len(rows) > limit else "")


def _counts(p: _Part, column: str) -> np.ndarray:
    return _whole_numbers(p, column, "the count")


def _check_columns(p: _Part, checks: list[str]) -> None:
    for c in checks:
        n = _whole_numbers(p, c, f"'{c}'")
        if n.any():
            idx = np.flatnonzero(n)
            raise AgreeError(f"{int(n.sum())} {CHECK_COLUMNS[c]} in the log this table was counted from "
                             f"(table rows {_rows(p.rows[idx])})", where=p.where(int(p.rows[idx[0]]), c),
                             code="duplicate-coding" if c == "duplicate_rows" else "missing-coder"
                             if c == "rows_without_coder" else "missing-unit-id",
                             hint="find and correct those rows in the source table, then count again")


def _factorize_cells(raw: np.ndarray) -> tuple[np.ndarray, list]:
    """Index of each raw cell among the distinct raw values (blank cells included as values)."""
    try:
        index, uniques = pd.factorize(raw, use_na_sentinel=False)
    except TypeError:  # unhashable cells (lists): as tuples
        raw = np.array([tuple(v) if isinstance(v, (list, np.ndarray)) else v for v in raw], dtype=object)
        index, uniques = pd.factorize(raw, use_na_sentinel=False)
    return np.asarray(index, dtype=np.int64), list(uniques)


def _coder_cells(parts: list[_Part], roles: list[_CountRoles], keep_rows: list[np.ndarray]):
    coder_names = list(dict.fromkeys(c for r in roles for c in r.coders))
    raw, row_idx, col_idx, where_row, where_part, row_part, row_pos = [], [], [], [], [], [], []
    start = 0
    for pi, (p, r, k) in enumerate(zip(parts, roles, keep_rows)):
        pos = np.flatnonzero(k)
        for c in r.coders:
            raw.append(p.frame[c].to_numpy(dtype=object)[pos])
            row_idx.append(start + np.arange(len(pos)))
            col_idx.append(np.full(len(pos), coder_names.index(c)))
            where_row.append(p.rows[pos])
            where_part.append(np.full(len(pos), pi))
        row_part.append(np.full(len(pos), pi))
        row_pos.append(pos)
        start += len(pos)
    return _cells(parts, raw, row_idx, col_idx, where_row, where_part, row_part, row_pos,
                  coder_names), coder_names


def _multiset_cells(parts, roles, keep_rows, msep):
    raw, row_idx, col_idx, where_row, where_part, row_part, row_pos = [], [], [], [], [], [], []
    start, width = 0, 0
    for pi, (p, r, k) in enumerate(zip(parts, roles, keep_rows)):
        pos = np.flatnonzero(k)
        col = p.frame[r.values].to_numpy(dtype=object)[pos]
        items = [_multiset_items(v, msep) for v in col]
        lengths = np.array([len(x) for x in items], dtype=np.int64)
        width = max(width, int(lengths.max(initial=0)))
        flat = np.array([x for xs in items for x in xs], dtype=object)
        rows = np.repeat(np.arange(len(pos)), lengths)
        raw.append(flat)
        row_idx.append(start + rows)
        col_idx.append(np.arange(len(flat)) - np.repeat(np.cumsum(lengths) - lengths, lengths))
        where_row.append(p.rows[pos][rows])
        where_part.append(np.full(len(flat), pi))
        row_part.append(np.full(len(pos), pi))
        row_pos.append(pos)
        start += len(pos)
    names = multiset_coders(width)
    return _cells(parts, raw, row_idx, col_idx, where_row, where_part, row_part, row_pos, None), list(names)


def _multiset_items(v: Any, msep: str) -> list:
    if v is None or (isinstance(v, float) and np.isnan(v)):
        return []
    if isinstance(v, str):
        return [x for x in v.split(msep) if x.strip() != ""]
    if isinstance(v, (list, tuple, np.ndarray)):
        return [x for x in list(v) if x is not None and not (isinstance(x, float) and np.isnan(x))]
    return [v]


def _cells(parts, raw, row_idx, col_idx, where_row, where_part, row_part, row_pos, coder_cols):
    cat = (lambda xs, dt: np.concatenate(xs) if xs else np.zeros(0, dt))
    raw_all = cat(raw, object)
    cell_row = cat(row_idx, np.int64).astype(np.int64)
    cell_col = cat(col_idx, np.int64).astype(np.int64)
    wrow = cat(where_row, np.int64)
    wpart = cat(where_part, np.int64)
    raw_index, uniques = _factorize_cells(raw_all)
    first = np.full(len(uniques), -1, dtype=np.int64)
    order = np.arange(len(raw_index))[::-1]
    first[raw_index[order]] = order  # the first cell of each distinct value
    sources: list[tuple] = []
    source = np.empty(len(first), dtype=np.int64)
    for k, i in enumerate(first):
        p = parts[int(wpart[i])]
        column = coder_cols[int(cell_col[i])] if coder_cols else _multiset_column(p)
        key = (p.file, p.sheet, column)
        if key not in sources:
            sources.append(key)
        source[k] = sources.index(key)
    atoms = Atoms(raw=uniques, cells=np.zeros(len(uniques), np.int64), rows=wrow[first], source=source,
                  sources=sources)
    return cat(row_part, np.int64), cat(row_pos, np.int64), cell_row, cell_col, raw_index, atoms


def _multiset_column(p: _Part) -> str | None:
    return find_column([str(c) for c in p.frame.columns], MULTISET_NAMES)


# -- writing one ------------------------------------------------------------------------------
def pattern_count_table(data: CodingData, *, keep: Sequence[str] | None = None, sep: str = ";") -> pd.DataFrame:
    """The counts table of `data` (weighted or not) in the coder-column layout: one column per
    coder (the value's label; None where not coded), the kept columns (all of ``data.columns``
    by default) and ``count``, one row per distinct (kept values, pattern), in first-seen order.

    Sets of codes are written joined by `sep`; an empty set cannot be written in one cell (it
    would read as not coded), so data holding one are refused.
    """
    keep = list(data.columns) if keep is None else list(keep)
    for k in keep:
        if k not in data.columns:
            raise AgreeError(f"no kept column '{k}' in these data (kept: {', '.join(data.columns) or 'none'})",
                             code="no-column")
    if data.set_valued and any(len(v) == 0 for v in data.values):
        raise AgreeError("the data hold an empty set of codes (coded, no code applied), which one cell of a "
                         "counts table cannot hold", code="set-valued",
                         hint="write the counts of each code's presence (data.presence(code)) instead")
    frame = pd.DataFrame({f"_c{i}": data.codes[:, i] for i in range(data.n_coders)})
    for j, k in enumerate(keep):
        frame[f"_k{j}"] = np.asarray(data.columns[k], dtype=object)
    frame["_w"] = data.unit_weights()
    keys = [c for c in frame.columns if c != "_w"]
    grouped = frame.groupby(keys, sort=False, dropna=False)["_w"].sum().reset_index()
    if data.set_valued:
        labels = [sep.join(sorted(map(str, v))) for v in data.values]
    else:
        labels = list(data.values)
    lookup = np.array(labels + [None], dtype=object)
    out = pd.DataFrame({c: lookup[grouped[f"_c{i}"].to_numpy()] for i, c in enumerate(data.coders)})
    for j, k in enumerate(keep):
        out[k] = grouped[f"_k{j}"].to_numpy(dtype=object)
    out["count"] = grouped["_w"].to_numpy(dtype=np.int64)
    return out

