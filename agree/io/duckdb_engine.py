"""Long label logs past one machine's memory: reduced to pattern counts inside DuckDB.

A long table (one row per unit, coder and code) of 1e8 rows does not fit in memory as a
units x coders table, but every coefficient needs only how many units carry each pattern of
codes (`agree.stats.patterns`). `read_duckdb` has DuckDB (an embedded database, a Python
wheel, no server) pivot the rows to one pattern per unit and count the patterns (per cluster
when a cluster column is kept), out of core: DuckDB spills to a temporary folder past its
memory limit. The result is weighted `CodingData` (`agree.io.counts`), scored as usual.

Two passes over the files:

1. a small group-by over (file, coder, code): the coders (in order of first appearance, as the
   ordinary reader), the distinct codes with how many rows hold each and where the first is
   (checked against the codebook and the level exactly as `agree.io.counts.resolve_values`
   does), rows without a coder or a unit id, and entirely blank rows;
2. the reduction: rows joined with the (coder, code) numbering, grouped by unit into one
   integer key per unit (the pattern written in base V + 1, as `agree.stats.patterns` does),
   a bit mask of the coders seen and the row count (more rows than coders: a coder coded the
   unit twice), then grouped by key and kept columns with COUNT.

The same checks as the ordinary reader, reported with counts and the first offending rows
(file and row: Parquet rows are counted like a spreadsheet's, header = row 1; CSV rows too,
by DuckDB's own order of reading): a unit coded twice by one coder, codes not in the codebook,
rows with a code but no coder or no unit id, text at the interval level. Cells that are
blank mean "not coded". Text columns are not kept (patterns hold no text); a kept column
(e.g. a cluster) that gives a unit different values on different rows keeps the smallest,
with a note.

Settings: `memory_limit` (default 1 GB, or the environment variable AGREE_DUCKDB_MEMORY),
`threads` (DuckDB's default: every core), `temp_directory` (a fresh folder under the system's
temporary folder, removed afterwards).
"""

from __future__ import annotations

import glob
import os
import shutil
import tempfile
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from agree.core.files import record_input
from agree.core.model import LEVELS, AgreeError, CodingData, ReadReport, cell_location, normalise_value
from agree.io.counts import Atoms, as_book, resolve_values
from agree.io.columns import CODE_NAMES, CODER_NAMES, TEXT_NAMES, UNIT_NAMES, find_column

__all__ = ["read_duckdb", "choose_engine", "expand_paths", "ENGINES", "DEFAULT_ROWS", "DEFAULT_MEMORY"]

ENGINES = ("auto", "pandas", "duckdb")
DEFAULT_ROWS = 5_000_000     # `auto` reduces files of about this many rows or more with DuckDB
DEFAULT_MEMORY = "1GB"
PARQUET = {".parquet", ".pq"}
TEXT = {".csv": ",", ".txt": None, ".tsv": "\t"}
SHOWN = 10                   # offending rows named in an error
_FILE = "agree_file"         # the column DuckDB adds with the file name
_ROW = "agree_row"


def expand_paths(paths: str | Path | Sequence[str | Path]) -> list[str]:
    """Files named, with globs ('logs/*.parquet') expanded in sorted order; each must exist."""
    items = [paths] if isinstance(paths, (str, Path)) else list(paths)
    if not items:
        raise AgreeError("no input files given", hint="name one or more files", code="no-input")
    out: list[str] = []
    for item in items:
        text = str(item)
        if glob.has_magic(text) and not os.path.exists(text):
            found = sorted(f for f in glob.glob(text) if os.path.isfile(f))
            if not found:
                raise AgreeError("no file matches this pattern", where=text, code="file-not-found",
                                 hint="check the folder and the pattern (quote it so the shell leaves it to agree)")
            out += found
        else:
            if not os.path.exists(text):
                raise AgreeError("file not found", where=text, hint="check the path and the file name",
                                 code="file-not-found")
            out.append(text)
    return out


def _kind(files: list[str]) -> str:
    kinds = set()
    for f in files:
        ext = Path(f).suffix.lower()
        if ext in PARQUET:
            kinds.add("parquet")
        elif ext in TEXT:
            kinds.add("tsv" if ext == ".tsv" else "csv")
        else:
            raise AgreeError(f"the DuckDB engine reads CSV, TSV and Parquet files, not '{ext or '(none)'}'",
                             where=f, code="unsupported-format", hint="use --engine pandas for workbooks")
    if len(kinds) > 1:
        raise AgreeError(f"the files mix formats ({', '.join(sorted(kinds))}); the DuckDB engine reads one at a time",
                         where=files[0], code="unsupported-format", hint="convert them to one format")
    return kinds.pop()


def estimated_rows(files: list[str]) -> int:
    """Rows in the files: exact for Parquet (its metadata), estimated for text from the size and
    the length of the first lines."""
    total = 0
    for f in files:
        ext = Path(f).suffix.lower()
        if ext in PARQUET:
            import pyarrow.parquet as pq

            try:
                total += pq.read_metadata(f).num_rows
            except Exception:  # a damaged file: the reader will say so
                continue
        elif ext in TEXT:
            with open(f, "rb") as fh:
                head = fh.read(1 << 16)
            if head:
                total += int(os.path.getsize(f) * max(head.count(b"\n"), 1) / len(head))
    return total


def choose_engine(paths: Any, engine: str = "auto", *, layout: str | None = None,
                  rows: int | None = None) -> str:
    """'pandas' or 'duckdb' for these files: `engine` itself unless 'auto', which takes DuckDB for
    CSV/TSV/Parquet files (or globs) of about `rows` rows or more (default DEFAULT_ROWS, or the
    environment variable AGREE_DUCKDB_ROWS) whose layout is long or not given."""
    if engine not in ENGINES:
        raise AgreeError(f"engine must be one of {', '.join(ENGINES)}; got '{engine}'", code="bad-option")
    if engine != "auto":
        return engine
    if layout not in (None, "long"):
        return "pandas"
    items = [paths] if isinstance(paths, (str, Path)) else list(paths)
    if not items or not all(Path(str(p)).suffix.lower() in PARQUET | set(TEXT) for p in items):
        return "pandas"
    if any(glob.has_magic(str(p)) for p in items):
        return "duckdb"
    if not all(os.path.isfile(str(p)) for p in items):
        return "pandas"  # the ordinary reader names the missing file
    limit = rows if rows is not None else int(float(os.environ.get("AGREE_DUCKDB_ROWS", DEFAULT_ROWS)))
    return "duckdb" if estimated_rows([str(p) for p in items]) >= limit else "pandas"


# -- the engine --------------------------------------------------------------------------------
@dataclass
class _Source:
    files: list[str]
    kind: str
    reader: str                   # the table function reading every file (with the file name column)
    columns: list[str]
    types: dict[str, str]
    roles: dict[str, str] | None = None   # internal name -> column

    def select(self, *, row: bool) -> str:
        """A FROM item with the columns of the roles under internal names (agree_u, agree_c, agree_v,
        agree_k0, ...), the file name and, with `row`, the row number as a spreadsheet counts it."""
        cols = ", ".join(f"{_quote(c)} AS {name}" for name, c in (self.roles or {}).items())
        cols = (cols + ", " if cols else "") + _FILE
        if not row:
            return f"(SELECT {cols} FROM {self.reader})"
        if self.kind == "parquet":
            return f"(SELECT {cols}, file_row_number + 2 AS {_ROW} FROM {self.reader})"
        # CSV: DuckDB's order of reading is the files' order; made per file by `_row_offsets`
        return f"(SELECT {cols}, row_number() OVER () AS {_ROW} FROM {self.reader})"


def _quote(name: str) -> str:
    return '"' + str(name).replace('"', '""') + '"'


def _literal(text: str) -> str:
    return "'" + str(text).replace("'", "''") + "'"


def _connect(memory_limit: str | None, threads: int | None, temp: str, progress: bool):
    import duckdb

    config: dict[str, Any] = {"memory_limit": memory_limit or os.environ.get("AGREE_DUCKDB_MEMORY", DEFAULT_MEMORY),
                              "temp_directory": temp}
    if threads:
        config["threads"] = int(threads)
    try:
        con = duckdb.connect(config=config)
    except duckdb.Error as exc:
        raise AgreeError(f"cannot start DuckDB: {str(exc).splitlines()[0]}", code="bad-option",
                         hint="check the memory limit (e.g. 2GB) and the thread count") from None
    con.execute(f"SET enable_progress_bar={'true' if progress else 'false'}")
    con.execute("SET enable_progress_bar_print=false")
    if progress:
        con.execute("SET progress_bar_time=0")
    return con


def _open(con, files: list[str]) -> _Source:
    import duckdb

    kind = _kind(files)
    listed = "[" + ", ".join(_literal(f) for f in files) + "]"
    if kind == "parquet":
        reader = f"read_parquet({listed}, filename={_literal(_FILE)}, file_row_number=true, union_by_name=true)"
    else:  # every cell as text, as the ordinary reader reads CSV
        delim = ", delim='\\t'" if kind == "tsv" else ""
        reader = (f"read_csv({listed}, filename={_literal(_FILE)}, header=true, all_varchar=true, "
                  f"union_by_name=true{delim})")
    try:
        described = con.execute(f"DESCRIBE SELECT * FROM {reader}").fetchall()
    except duckdb.Error as exc:
        raise AgreeError(f"cannot read the files: {str(exc).splitlines()[0]}", where=files[0], code="bad-file",
                         hint="check that every file is a readable " + ("Parquet" if kind == "parquet" else "CSV")
                              + " file with the same columns; --engine pandas reads other encodings") from None
    # CSV row numbers come from DuckDB's order of reading, which must then be the files' order
    con.execute(f"SET preserve_insertion_order={'false' if kind == 'parquet' else 'true'}")
    types = {str(r[0]): str(r[1]) for r in described}
    columns = [c for c in types if c not in (_FILE, "file_row_number")]
    return _Source(files, kind, reader, columns, types)


class _Progress:
    """Polls DuckDB's progress of the running query from a second thread, mapped onto low..high."""

    def __init__(self, con, tick: Callable[[str, float], None] | None):
        self.con, self.tick = con, tick

    def run(self, sql: str, step: str, low: float, high: float, params: Any = None, columns: bool = False) -> Any:
        """Rows as tuples, or with `columns` a dict of numpy arrays (large results, fetched in batches so
        that DuckDB never holds them whole)."""
        def fetch():
            if columns:
                return _fetch_columns(self.con, sql)
            return self.con.execute(sql, params).fetchall()

        if self.tick is None:
            return fetch()
        self.tick(step, low)
        done = threading.Event()

        def poll():
            while not done.wait(0.25):
                try:
                    p = self.con.query_progress()
                except Exception:  # noqa: BLE001  (no query running between statements)
                    continue
                if p is not None and p >= 0:
                    self.tick(step, low + (high - low) * min(p, 100.0) / 100.0)

        watcher = threading.Thread(target=poll, daemon=True)
        watcher.start()
        try:
            return fetch()
        finally:
            done.set()
            watcher.join()
            self.tick(step, high)


def read_duckdb(paths: str | Path | Sequence[str | Path], *, unit: str | None = None, coder: str | None = None,
                code: str | None = None, cluster: str | None = None, keep: Sequence[str] = (),
                codebook: Any = None, level: str | None = None, sep: str | None = ";", trim: bool = False,
                casefold: bool = False, memory_limit: str | None = None, threads: int | None = None,
                temp_directory: str | None = None,
                progress: Callable[[str, float], None] | None = None) -> CodingData:
    """Reduce long CSV/TSV/Parquet files (or globs of them) to pattern counts inside DuckDB.

    Parameters
    ----------
    paths : a file, a glob such as ``'logs/*.parquet'`` or a list of them; all of one format.
    unit, coder, code : the columns (found by the names the ordinary reader knows when not given).
    cluster, keep : per-unit columns to keep (the counts are then per kept value and pattern).
    codebook, level, sep, trim, casefold : as in `agree.read`.
    memory_limit : DuckDB's memory limit, e.g. "2GB" (default 1GB or AGREE_DUCKDB_MEMORY); past it
        DuckDB spills to `temp_directory`.
    threads : DuckDB's threads (default: every core).
    progress : called as progress(step, fraction_done) while DuckDB works.

    Returns
    -------
    CodingData
        weighted: one row per (kept values, pattern), ``weights`` the number of units, ``unit_ids``
        the row numbers 1..P; its ``report`` says what was read, used and left out.

    Raises
    ------
    AgreeError
        as the ordinary reader: duplicates, unknown codes, rows without coder or unit id, with
        how many and the first offending rows (file and row).
    """
    try:
        import duckdb
    except ImportError:  # pragma: no cover - a dependency
        raise AgreeError("the DuckDB engine needs the duckdb package", code="missing-dependency",
                         hint="pip install duckdb, or use --engine pandas") from None
    files = expand_paths(paths)
    for f in files:
        record_input(f)          # an input of this run: no output of the run may replace it
    if level is not None and level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="bad-option")
    book = as_book(codebook, trim=trim)
    sep = sep or None
    temp = tempfile.mkdtemp(prefix="agree-duckdb-", dir=temp_directory)
    con = _connect(memory_limit, threads, temp, progress is not None)
    try:
        src = _open(con, files)
        return _reduce(con, src, _Progress(con, progress), unit=unit, coder=coder, code=code,
                       keep=list(dict.fromkeys([*([cluster] if cluster else []), *keep])), book=book, level=level,
                       sep=sep, trim=trim, casefold=casefold)
    except duckdb.OutOfMemoryException as exc:
        limit = memory_limit or os.environ.get("AGREE_DUCKDB_MEMORY", DEFAULT_MEMORY)
        raise AgreeError(f"DuckDB ran out of its memory limit ({limit}) while reducing the files "
                         f"({str(exc).splitlines()[0]})", where=files[0], code="out-of-memory",
                         hint="raise the limit (AGREE_DUCKDB_MEMORY=2GB, or memory_limit='2GB'): counts per cluster "
                              "of 1e8 rows need about 1.5 GB; fewer threads also help") from None
    finally:
        con.close()
        shutil.rmtree(temp, ignore_errors=True)


def _roles(src: _Source, unit, coder, code, keep) -> tuple[str, str, str, list[str], list[str]]:
    cols = src.columns

    def need(name: str, what: str) -> str:
        if name not in cols:
            import difflib

            close = difflib.get_close_matches(name, cols, n=1)
            raise AgreeError(f"there is no {what} column '{name}'", where=cell_location(src.files[0], None, 1),
                             code="no-column", hint=(f"did you mean '{close[0]}'? " if close else "")
                             + f"(columns: {', '.join(map(repr, cols))})")
        return name

    unit_col = need(unit, "unit") if unit else (find_column(cols, UNIT_NAMES) or cols[0])
    kept = [need(k, "kept") for k in keep]
    taken = {unit_col, *kept}
    coder_col = need(coder, "coder") if coder else find_column(cols, CODER_NAMES, taken)
    if coder_col is None:
        raise AgreeError("no coder column found: the DuckDB engine reads the long layout (unit, coder, code)",
                         where=cell_location(src.files[0], None, 1), code="not-long",
                         hint=f"name it with --coder-col, or use --engine pandas (columns: {', '.join(cols)})")
    taken.add(coder_col)
    rest = [c for c in cols if c not in taken]
    code_col = need(code, "code") if code else find_column(rest, CODE_NAMES)
    if code_col is None:
        others = [c for c in rest if find_column([c], TEXT_NAMES) is None]
        if len(others) != 1:
            raise AgreeError(f"cannot tell which column holds the codes: {', '.join(rest) or 'none left'}",
                             where=cell_location(src.files[0], None, 1), code="no-column",
                             hint="name it with --code-col (code=...)")
        code_col = others[0]
    unused = [c for c in rest if c != code_col]
    return unit_col, coder_col, code_col, kept, unused


def _reduce(con, src: _Source, run: _Progress, *, unit, coder, code, keep, book, level, sep, trim, casefold):
    unit_col, coder_col, code_col, kept, unused = _roles(src, unit, coder, code, keep)
    src.roles = {"agree_u": unit_col, "agree_c": coder_col, "agree_v": code_col,
                 **{f"agree_k{i}": k for i, k in enumerate(kept)}}
    text_unit = src.types[unit_col] == "VARCHAR"
    unit_expr = "trim(agree_u)" if trim and text_unit else "agree_u"
    blank_unit = "(agree_u IS NULL" + (" OR trim(agree_u) = ''" if text_unit else "") + ")"
    blank_code = "(agree_v IS NULL OR trim(CAST(agree_v AS VARCHAR)) = '')"
    blank_coder = "(agree_c IS NULL OR trim(CAST(agree_c AS VARCHAR)) = '')"

    # pass 1: coders, codes, rows without coder or unit, first rows
    # (a unit id of spaces only is found per unit in pass 2: a trim on every row costs a scan; and
    # where the Parquet statistics say the unit column has no nulls, it is not read at all here)
    nu = "false" if _never_null(src, unit_col) else "agree_u IS NULL"
    scan = run.run(f"SELECT {_FILE}, agree_c, agree_v, {nu} AS nu, count(*) AS n, min({_ROW}) AS first "
                   f"FROM {src.select(row=True)} GROUP BY ALL", "scanning coders and codes", 0.0, 0.25)
    file_index = {f: i for i, f in enumerate(src.files)}
    offsets = _row_offsets(scan, src)
    rows_total = sum(r[4] for r in scan)
    coder_names: dict[Any, str | None] = {}
    for raw in {r[1] for r in scan}:
        name = normalise_value(raw)
        name = None if name is None else str(name)
        if name is not None and (name.strip() == "" or trim):
            name = name.strip() or None
        coder_names[raw] = name
    blank_rows = sum(r[4] for r in scan if coder_names[r[1]] is None and r[3] and _blank(r[2]))
    blank_rows += _refuse_rows(
        con, src, sum(r[4] for r in scan if coder_names[r[1]] is None and not (r[3] and _blank(r[2]))),
        f"{blank_coder} AND NOT ({blank_unit} AND {blank_code})", coder_col, offsets,
        "row(s) have no coder name", "missing-coder", "fill in the coder of every row")
    _refuse_rows(con, src, sum(r[4] for r in scan if coder_names[r[1]] is not None and r[3]),
                 f"{blank_unit} AND NOT {blank_coder}", unit_col, offsets,
                 "row(s) have values but no unit id", "missing-unit-id",
                 "fill in the unit id of every row (or delete the row)")

    # the coders, in order of first appearance (file, then row)
    first_seen: dict[str, tuple[int, int]] = {}
    for f, raw, _, nu, n, first in scan:
        name = coder_names[raw]
        if name is None or nu:
            continue
        at = (file_index[f], int(first))
        if name not in first_seen or at < first_seen[name]:
            first_seen[name] = at
    coders = sorted(first_seen, key=first_seen.get)
    m = len(coders)
    if m < 2:
        raise AgreeError(f"only one coder found ({', '.join(coders)})" if m == 1 else "no coder found",
                         where=", ".join(src.files[:3]), code="one-coder",
                         hint="agreement needs two or more coders; check the coder column (--coder-col)")

    # the codes: distinct raw values, how many rows hold each, the first row of each
    per_code: dict[Any, list] = {}
    for f, raw_coder, raw, nu, n, first in scan:
        if coder_names[raw_coder] is None or nu or raw is None:
            continue
        entry = per_code.setdefault(raw, [0, None])
        entry[0] += n
        at = (file_index[f], int(first), f)
        if entry[1] is None or at < entry[1]:
            entry[1] = at
    raw_codes = sorted(per_code, key=lambda r: per_code[r][1][:2])  # in order of first appearance
    atoms = Atoms(raw=raw_codes, cells=np.array([per_code[r][0] for r in raw_codes], dtype=np.int64),
                  rows=np.array([per_code[r][1][1] - offsets.get(per_code[r][1][2], 0) for r in raw_codes],
                                dtype=np.int64),
                  source=np.array([per_code[r][1][0] for r in raw_codes], dtype=np.int64),
                  sources=[(f, None, code_col) for f in src.files])
    res = resolve_values(atoms, book=book, level=level, sep=sep, trim=trim, casefold=casefold, label=code_col)

    # numbering tables: coder -> (chunk, position, weight), raw code -> value index + 1 (0: blank)
    base = len(res.values) + 1
    per_chunk = 62
    while per_chunk > 1 and base ** per_chunk >= 2 ** 62:
        per_chunk -= 1
    chunks = -(-m // per_chunk)
    con.execute(f"CREATE TEMP TABLE agree_coders (raw {src.types[coder_col]}, chunk INTEGER, pos INTEGER, w BIGINT)")
    con.executemany("INSERT INTO agree_coders VALUES (?, ?, ?, ?)",
                    [(raw, coders.index(name) // per_chunk, coders.index(name) % per_chunk,
                      base ** (coders.index(name) % per_chunk))
                     for raw, name in coder_names.items() if name is not None and raw is not None])
    con.execute(f"CREATE TEMP TABLE agree_codes (raw {src.types[code_col]}, vi INTEGER)")
    codes_rows = [(raw, int(res.remap[i]) + 1) for i, raw in enumerate(raw_codes) if res.remap[i] >= 0]
    if codes_rows:
        con.executemany("INSERT INTO agree_codes VALUES (?, ?)", codes_rows)

    # pass 2: one key per unit (per chunk of coders), then the counts of (kept values, key)
    keys = ", ".join(f"sum(coalesce(vc.vi, 0) * cc.w) FILTER (WHERE cc.chunk = {j}) AS k{j}, "
                     f"bit_or(1::UBIGINT << cc.pos) FILTER (WHERE cc.chunk = {j}) AS m{j}" for j in range(chunks))
    seen = " + ".join(f"coalesce(bit_count(m{j}), 0)" for j in range(chunks))
    kept_aggs = "".join(f", min(agree_k{i}) AS kmin{i}, max(agree_k{i}) AS kmax{i}" for i in range(len(kept)))
    kept_cols = "".join(f", kmin{i}" for i in range(len(kept)))
    conflicts = "".join(f", count(*) FILTER (WHERE kmin{i} IS DISTINCT FROM kmax{i})::INTEGER AS conflict{i}"
                        for i in range(len(kept)))
    # ids of spaces only, per unit (cheap: the first character is looked at before any trim)
    blank_id = "(u = '' OR (ascii(u) IN (9, 10, 13, 32) AND trim(u) = ''))" if text_unit else "false"
    # a unit coded twice by a coder gets key -1, a blank unit id -2: few columns come back, however many rows
    # (the sums are HUGEINT; a key fits in BIGINT, so the cast is exact, and it never sees a duplicate's sum)
    key_cols = ", ".join((f"(CASE WHEN n > {seen} THEN -1 WHEN {blank_id} THEN -2 ELSE coalesce(k0, 0) END)::BIGINT AS k0"
                          if j == 0 else f"(CASE WHEN n > {seen} THEN 0 ELSE coalesce(k{j}, 0) END)::BIGINT AS k{j}")
                         for j in range(chunks))
    sql = (f"WITH units AS (SELECT {unit_expr} AS u, count(*) AS n, {keys}{kept_aggs} "
           f"FROM {src.select(row=False)} JOIN agree_coders cc ON agree_c = cc.raw "
           f"LEFT JOIN agree_codes vc ON agree_v = vc.raw WHERE agree_u IS NOT NULL GROUP BY 1) "
           f"SELECT {key_cols}{kept_cols}, count(*) AS units{conflicts} FROM units GROUP BY ALL")
    con.execute("SET preserve_insertion_order=false")  # the order of the counts does not matter; memory does
    out = run.run(sql, "reducing to pattern counts", 0.25, 1.0, columns=True)
    con.execute(f"SET preserve_insertion_order={'true' if src.kind != 'parquet' else 'false'}")
    units = out["units"]
    flag = out["k0"]
    if (flag == -2).any():
        _refuse_rows(con, src, -1, f"{blank_unit} AND NOT {blank_coder}", unit_col, offsets,
                     "row(s) have values but no unit id", "missing-unit-id",
                     "fill in the unit id of every row (or delete the row)")
    if (flag == -1).any():
        _refuse_duplicates(con, src, unit_expr, blank_unit, coder_names, code_col, offsets, int(units[flag == -1].sum()))
    P = len(units)
    codes = np.empty((P, m), dtype=np.int32)
    for i in range(m):  # a loop over coders, not units
        j, pos = divmod(i, per_chunk)
        codes[:, i] = (out[f"k{j}"] // (base ** pos)) % base - 1
    weights = units
    columns = {k: out[f"kmin{i}"] for i, k in enumerate(kept)}
    notes = list(res.notes)
    for i, k in enumerate(kept):
        n_conflict = int(np.asarray(out[f"conflict{i}"]).sum())
        if n_conflict:
            notes.append(f"column '{k}': {n_conflict} unit(s) have different values on different rows; the "
                         "smallest was kept")
    if res.blank_cells:
        notes.append(f"{res.blank_cells} row(s) with a blank code read as not coded")
    codebook_map = {c: book.descriptions.get(c, "") for c in res.categories} if book is not None else None
    data = CodingData(codes=codes, values=res.values, unit_ids=np.arange(1, P + 1), coders=tuple(coders),
                      categories=res.categories, level=res.level, set_valued=res.set_valued, columns=columns,
                      codebook=codebook_map, order=res.order, weights=weights)
    observed = int(weights @ (codes >= 0).sum(axis=1)) if P else 0
    n_units = int(weights.sum())
    left_out = []
    if unused:
        text = any(find_column([c], TEXT_NAMES) for c in unused)
        left_out.append(f"column(s) not used: {', '.join(repr(c) for c in unused)}"
                        + (" (pattern counts keep no unit text)" if text else ""))
    if blank_rows:
        left_out.append(f"{blank_rows} entirely blank row(s)")
    names = ", ".join(coders[:8]) + (", ..." if m > 8 else "")
    kept_txt = f", kept column(s) {', '.join(repr(k) for k in kept)}" if kept else ""
    detected = (f"long layout, reduced by DuckDB out of core: unit column '{unit_col}', coder column "
                f"'{coder_col}' ({m} coders: {names}), code column '{code_col}'{kept_txt}; {rows_total:,} rows in "
                f"{len(src.files)} file{'s' * (len(src.files) != 1)} -> {n_units:,} units -> {P:,} "
                f"{'(kept values, pattern)' if kept else 'pattern'} rows")
    report = ReadReport(detected=detected, files=tuple(src.files), units_read=n_units, values_read=observed,
                        values_missing=n_units * m - observed, notes=tuple(notes), left_out=tuple(left_out))
    object.__setattr__(data, "report", report)
    return data


def _never_null(src: _Source, column: str) -> bool:
    """Whether the Parquet statistics of every file say `column` holds no null (False when unknown)."""
    if src.kind != "parquet":
        return False
    import pyarrow.parquet as pq

    try:
        for f in src.files:
            meta = pq.read_metadata(f)
            names = [meta.schema.column(i).name for i in range(meta.num_columns)]
            if column not in names:
                return False
            i = names.index(column)
            for g in range(meta.num_row_groups):
                stats = meta.row_group(g).column(i).statistics
                if stats is None or not stats.has_null_count or stats.null_count:
                    return False
    except Exception:  # noqa: BLE001  (no usable statistics: check every row)
        return False
    return True


def _fetch_columns(con, sql: str, batch: int = 1 << 20) -> dict[str, np.ndarray]:
    """The result of `sql` as numpy arrays, streamed batch by batch (kept values through `_labels`)."""
    relation = con.sql(sql)
    if hasattr(relation, "to_arrow_reader"):  # DuckDB 2
        reader = relation.to_arrow_reader(batch)
    else:  # DuckDB 1.x
        reader = con.execute(sql).fetch_record_batch(batch)
    parts: dict[str, list] = {name: [] for name in reader.schema.names}
    for b in reader:
        for name, column in zip(b.schema.names, b.columns):
            parts[name].append(column.to_numpy(zero_copy_only=False) if column.null_count == 0 else
                               np.array(column.to_pylist(), dtype=object))
    return {name: _labels(np.concatenate(chunks) if chunks else np.zeros(0, np.int64))
            for name, chunks in parts.items()}


def _labels(column: Any) -> np.ndarray:
    """A fetched column of kept values: numbers stay a numeric array (a cluster column of millions of
    (cluster, pattern) rows), text and columns with NULLs become objects (None where NULL)."""
    if isinstance(column, np.ma.MaskedArray):
        if not np.ma.getmaskarray(column).any():
            return _labels(column.data)
        out = column.data.astype(object)
        out[np.ma.getmaskarray(column)] = None
        return out
    column = np.asarray(column)
    return column if column.dtype.kind in "iub" else column.astype(object)


def _blank(v: Any) -> bool:
    return v is None or (isinstance(v, str) and v.strip() == "")


def _row_offsets(scan: list[tuple], src: _Source) -> dict[str, int]:
    """What to subtract from DuckDB's row number to get the spreadsheet row of each file: nothing for
    Parquet (numbered per file), the rows of the files before for CSV (numbered across files)."""
    if src.kind == "parquet":
        return {}
    firsts: dict[str, int] = {}
    for r in scan:
        firsts[r[0]] = min(firsts.get(r[0], r[5]), r[5])
    return {f: first - 2 for f, first in firsts.items()}


def _refuse_rows(con, src: _Source, suspected: int, condition: str, column: str, offsets: dict[str, int],
                 what: str, code: str, hint: str) -> int:
    """An error naming how many rows match `condition` and the first of them (file and row), when
    the scan `suspected` some (-1: unknown how many); returns how many suspected rows did not match
    (entirely blank rows)."""
    if not suspected:
        return 0
    total = con.execute(f"SELECT count(*) FROM {src.select(row=False)} WHERE {condition}").fetchone()[0]
    if not total:
        return max(suspected, 0)
    first = con.execute(f"SELECT {_FILE}, {_ROW} FROM {src.select(row=True)} WHERE {condition} "
                        f"ORDER BY list_position(?, {_FILE}), {_ROW} LIMIT {SHOWN}", [src.files]).fetchall()
    rows = ", ".join(f"{Path(f).name} row {r - offsets.get(f, 0)}" for f, r in first)
    more = f", ... ({total} rows)" if total > len(first) else ""
    where = cell_location(first[0][0], None, first[0][1] - offsets.get(first[0][0], 0), column) if first else None
    raise AgreeError(f"{total} {what} ({rows}{more})", where=where, code=code, hint=hint)


def _refuse_duplicates(con, src: _Source, unit_expr: str, blank_unit: str, coder_names: dict, code_col: str,
                       offsets: dict[str, int], dup_units: int) -> None:
    """The first (unit, coder) pairs coded more than once, with their rows: one error."""
    table = src.select(row=True)
    twice = (f"SELECT {unit_expr} AS u, agree_c, min(list_position(?, {_FILE}) * 1e12 + {_ROW}) AS first_at "
             f"FROM {table} WHERE NOT {blank_unit} AND agree_c IS NOT NULL GROUP BY ALL HAVING count(*) > 1")
    total = con.execute(f"SELECT count(*) FROM ({twice})", [src.files]).fetchone()[0]
    pairs = con.execute(f"{twice} ORDER BY first_at LIMIT {SHOWN}", [src.files]).fetchall()
    problems = []
    for u, c, _ in pairs:
        hits = con.execute(f"SELECT {_FILE}, {_ROW} FROM {table} WHERE {unit_expr} = ? AND agree_c = ? "
                           f"ORDER BY list_position(?, {_FILE}), {_ROW}", [u, c, src.files]).fetchall()
        rows = ", ".join(str(r - offsets.get(f, 0)) for f, r in hits[:SHOWN])
        f, r = hits[0]
        problems.append(AgreeError(f"coder '{coder_names.get(c, c)}' coded unit '{u}' more than once (rows {rows})",
                                   where=cell_location(f, None, r - offsets.get(f, 0), code_col),
                                   code="duplicate-coding",
                                   hint="keep one row per unit and coder; for several codes put them in one cell "
                                        "separated by ';'"))
    if total > len(problems):
        problems.append(AgreeError(f"... and {total - len(problems)} more", code="duplicate-coding"))
    if len(problems) == 1:
        raise problems[0]
    first = problems[0]
    raise AgreeError(f"{total} (unit, coder) pairs are coded more than once ({dup_units} units); first: "
                     f"{first.message}", where=first.where, hint=first.hint, code="duplicate-coding", problems=problems)
