"""Every other table the commands read: lists of units (a corpus), unit-id lists (``--exclude``),
consensus files and review files. All go through the loaders, so each accepts every format
`agree.read` accepts (CSV/TSV in any of the encodings and separators the loaders detect, XLSX,
Parquet, and text files with other suffixes by their content), and errors name the file, sheet,
row and column.

A plain list (``done.txt`` with one unit id a line) is a text file not named .csv or .tsv whose
first line (blank lines and, in id lists, ``#`` comment lines skipped) is one field that is not a
usual column name: each line is then one entry.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import pandas as pd

from agree.core.model import AgreeError, cell_location, normalise_value
from agree.io.columns import LIST_ID_NAMES, column_key, id_column_by_name
from agree.io.loaders import load, load_tables, loader_for, read_lines

__all__ = ["read_corpus", "read_unit_ids", "read_consensus", "find_records", "Records", "plain_list",
           "id_key"]

_TABLE_SUFFIXES = (".csv", ".tsv")  # text files that are always tables, never plain lists
_DELIMITERS = (",", ";", "\t")


def plain_list(path: str | os.PathLike, *, names: Sequence[str], name: str | None = None,
               comments: bool = False) -> list[tuple[int, str]] | None:
    """The entries of a plain list as (line number, text), or None when the file is a table.

    A plain list is a text file (by content) not named .csv or .tsv whose first line is one field
    (no comma, semicolon or tab) whose name is not in `names`. Blank lines are skipped, and with
    `comments` lines starting with ``#`` too.
    """
    path = Path(path)
    name = str(path) if name is None else name
    if path.suffix.lower() in _TABLE_SUFFIXES or loader_for(path, name=name).kind != "text":
        return None
    lines, _ = read_lines(path, name=name)
    entries = [(r, text) for r, text in lines
               if text.strip() and not (comments and text.lstrip().startswith("#"))]
    if not entries:
        return None
    first = entries[0][1]
    if any(d in first for d in _DELIMITERS) or column_key(first) in names:
        return None
    return entries


def id_key(value: Any) -> str | None:
    """A unit id as compared across files: trimmed, 1 and 1.0 alike; None when blank."""
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return None if v is None else str(v)


# -- lists of units -----------------------------------------------------------------------------
def read_corpus(path: str | os.PathLike, *, sheet: str | int | None = None) -> pd.DataFrame:
    """Read the full list of units (all columns, nothing dropped).

    Cells of text files are text ('' when empty); workbook and Parquet cells keep their types
    (None when empty). The first sheet with data of a workbook is read unless `sheet` names one.
    The file's path, sheet and SHA-256 are kept in ``frame.attrs`` ("source", "sheet",
    "checksum") so the manifest can name them.
    """
    path = Path(path)
    tables, loaded = load_tables(path, sheet=sheet, name=str(path), sheet_option="--sheet")
    table = tables[0]
    frame = table.frame.astype(object)
    frame = frame.where(frame.notna(), "" if table.kind == "text" else None)
    frame.attrs["source"] = str(path)
    frame.attrs["sheet"] = None if sheet is None else str(sheet)
    frame.attrs["checksum"] = loaded.checksums[str(path)]
    return frame


def read_unit_ids(paths: str | os.PathLike | Sequence[str | os.PathLike], *,
                  id_col: str | None = None) -> tuple[str, ...]:
    """The unit ids found in files, e.g. the coding files of earlier rounds, to exclude them.

    Parameters
    ----------
    paths : one file or several. A plain list gives one id a line (blank lines and lines
        starting with # skipped). A table (every sheet of a workbook) gives the ids in its unit
        column: `id_col` when the file has that column, else the first column with a usual id
        name (unit_id, unit, id, excerpt_id, ...). Long files, with one row per unit and coder,
        give each id once.
    id_col : the unit-id column's name, when it is not a usual one.

    Returns
    -------
    tuple of str
        The distinct ids, in order of first appearance.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    seen: dict[str, None] = {}
    for raw in paths:
        path = Path(raw)
        lines = plain_list(path, names=LIST_ID_NAMES + ((column_key(id_col),) if id_col else ()),
                           comments=True)
        if lines is not None:
            for _, line in lines:
                key = id_key(line)
                if key is not None:
                    seen.setdefault(key, None)
            continue
        tables, _ = load_tables(path, name=str(path))
        found = False
        for table in tables:
            columns = [str(c) for c in table.frame.columns]
            column = id_col if id_col in columns else id_column_by_name(columns)
            if column is None:
                continue
            found = True
            for value in table.frame[column].tolist():
                key = id_key(value)
                if key is not None:
                    seen.setdefault(key, None)
        if not found:
            columns = [str(c) for t in tables for c in t.frame.columns]
            raise AgreeError(f"could not find the unit-id column in {path.name}", where=str(path),
                             hint="name it unit_id (or excerpt_id, msg_id, id, ...), pass --unit-col, or give "
                                  f"a .txt list of ids (columns: {', '.join(repr(c) for c in dict.fromkeys(columns))})",
                             code="no-id-column")
    return tuple(seen)


# -- files agree wrote: consensus and review files --------------------------------------------------
def read_consensus(path: str | os.PathLike) -> pd.DataFrame:
    """The table of a consensus file (its first table), None for empty cells."""
    tables, _ = load_tables(Path(path), name=str(path))
    frame = tables[0].frame.astype(object)
    return frame.where(frame.notna(), None)


@dataclass(frozen=True, eq=False)
class Records:
    """The records below a header found by its column names.

    file, sheet : where the header was found.
    header : the header row's cells.
    records : each record below it as a list of cells (None when empty).
    rows : the spreadsheet row of each record.
    kind : the loader's kind ("text": every cell is text as written).
    sheets : every record (header row included) of each sheet of the file, by sheet name.
    notes : warnings about the sheet the records come from (formula cells read as empty).
    """

    file: str
    sheet: str | None
    header: list
    records: list[list]
    rows: list[int]
    kind: str
    sheets: Mapping[str, list[list]]
    notes: tuple[str, ...] = ()  # warnings about the file (formula cells without a stored result)


def find_records(path: str | os.PathLike, *, columns: Sequence[str], prefer: str | None = None,
                 search: int = 10, code: str = "bad-input", hint: str | None = None) -> Records:
    """Find the header holding all `columns` (case and surrounding spaces ignored) in the first
    `search` rows of each sheet (the sheet named `prefer` first) and return the records below it.

    Raises an `AgreeError` with `code` and `hint` naming the columns not found.
    """
    name = str(path)
    loaded = load(Path(path), name=name)
    wanted = [c.strip().lower() for c in columns]
    grids = sorted(loaded.grids, key=lambda g: g.sheet != prefer)
    records = {id(g): g.records() for g in grids}
    sheets = {g.sheet: [list(g.header)] + records[id(g)] for g in loaded.grids if g.sheet is not None}
    for grid in grids:
        below = records[id(grid)]
        for k, cells in enumerate([grid.header] + below[: search - 1]):
            if all(w in {_cell_key(v) for v in cells} for w in wanted):
                here = cell_location(name, grid.sheet)
                notes = tuple(n for n in loaded.notes if f" {here}:" in n or n.startswith(f"{here}:"))
                return Records(name, grid.sheet, list(cells), below[k:], [int(r) for r in grid.rows[k:]],
                               loaded.kind, sheets, notes)
    if len(grids) == 1 and grids[0].sheet is None:
        keys = {_cell_key(v) for v in grids[0].header}
        missing = [c for c, w in zip(columns, wanted) if w not in keys]
        raise AgreeError(f"no column named {' or '.join(repr(c) for c in missing)}",
                         where=cell_location(name, None, 1), hint=hint, code=code)
    raise AgreeError(f"no sheet of {name} has the columns {' and '.join(repr(c) for c in columns)}",
                     where=name, hint=hint, code=code)


def _cell_key(value: Any) -> str:
    return str(value).strip().lower() if value is not None else ""

