"""The units x coders matrix: from the pieces a layout builder made to the fields of `CodingData`.

Unit ids are merged across tables in order of first appearance; rows with values but no unit
id, a single coder, and a unit coded twice by one coder (or in two rows of a wide table) are
errors naming the rows. Per-unit columns (text, kept columns) take each unit's first non-empty
value; with one file per coder a kept column must give a unit the same value in every file.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from agree.core.model import MISSING, AgreeError, Provenance, cell_location, normalise_value
from agree.io.cells import factorize, rows_text
from agree.io.columns import ROUND_NAMES, column_key, unit_candidates
from agree.io.layouts import Build
from agree.io.loaders import raise_all
from agree.io.values import CellFinder, Values

__all__ = ["assemble"]


def assemble(b: Build, *, book, level) -> dict[str, Any]:
    """The keyword arguments of `CodingData` (all but `report`) from a finished `Build`;
    notes go to ``b.notes``."""
    # global unit ids, in order of first appearance (one table: its own, no mapping)
    if len(b.units) == 1:
        unit_ids = b.units[0][1]
        table_maps = None
    else:
        allids = np.concatenate([ids for _, ids in b.units])
        g, unit_ids = pd.factorize(allids)
        unit_ids = np.asarray(unit_ids, dtype=object)
        table_maps, start = [], 0
        for _, ids in b.units:
            table_maps.append(np.asarray(g[start:start + len(ids)], dtype=np.int64))
            start += len(ids)
    n, m = len(unit_ids), len(b.coders)
    _check_unit_ids(b)
    if not b.enc.trim and b.enc.spaced:  # (no id read had spaces around it: no twins)
        _space_twins(b, unit_ids)
    if m < 2:
        names = ", ".join(b.coders) or "none"
        raise AgreeError(f"only one coder found ({names})" if m == 1 else "no coder found",
                         where=", ".join(dict.fromkeys(t.file for t in b.tables)), code="one-coder",
                         hint="agreement needs two or more coders; for one file per coder give all the files "
                              "(or check the detected layout and set it with --layout (layout=...))")
    units, coders, value, rows, source = _cells(b, table_maps)
    key = units * m + coders  # flat cell index
    del coders
    _check_duplicates(b, key, units, rows, source, unit_ids, n, m)

    cell_of = CellFinder(value, rows, source, b.sources)
    values, categories, remap, set_valued, data_level = Values(
        b.enc, sep=b.sep, presence=b.layout.presence, notes=b.notes).resolve(book, level, cell_of)
    codes = np.full((n, m), MISSING, dtype=np.int32)
    row = np.full((n, m), -1, dtype=np.int32)
    src = np.full((n, m), -1, dtype=np.int32)
    codes.reshape(-1)[key] = remap[value]
    row.reshape(-1)[key] = rows
    src.reshape(-1)[key] = source
    codes.setflags(write=False)  # CodingData keeps this array as it is (no private copy needed)
    # a cell a coder left empty still has a known location
    text = _per_unit(b, "text", b.text_entries, unit_ids, table_maps) if b.text_entries else None
    columns = {name: _per_unit(b, name, entries, unit_ids, table_maps) for name, entries in b.extra.items()}
    codebook_map = None
    if book is not None:
        codebook_map = {c: book.descriptions.get(c, "") for c in categories}
    return dict(codes=codes, values=tuple(values), unit_ids=np.asarray(unit_ids, dtype=object),
                coders=tuple(b.coders), categories=tuple(categories), level=data_level,
                set_valued=set_valued, text=text, columns=columns, codebook=codebook_map,
                provenance=Provenance(sources=tuple(b.sources), source=src, row=row),
                order=("given" if book.ordered else "codebook rows") if book is not None else
                "numeric" if all(isinstance(v, (int, float)) for v in values) else "alphabetical")


def _cells(b: Build, table_maps) -> tuple[np.ndarray, ...]:
    """Unit, coder, value, row and source of every cell kept, over all pieces (a piece of one
    table whose rows are all kept, as a long table has, is used as it is: no copies)."""
    parts = []
    for p in b.pieces:
        local_units, _ = b.units[p.table]
        mask = p.keep_mask & (local_units >= 0)
        rows = b.tables[p.table].rows
        if not mask.all():
            local_units, coder, value, rows = local_units[mask], p.coder[mask], p.value[mask], rows[mask]
        else:
            coder, value = p.coder, p.value
        if not coder.ndim:
            coder = np.full(len(local_units), coder)
        units = local_units if table_maps is None else table_maps[p.table][local_units]
        parts.append((units, coder, value, rows, np.full(len(units), p.source, dtype=np.int32)))
    if len(parts) == 1:
        return parts[0]
    return tuple(np.concatenate(column) for column in zip(*parts))


def _space_twins(b: Build, unit_ids: np.ndarray) -> None:
    """Warn about unit ids that differ only in spaces before or after them: they are read as
    different units (as codes that differ so are different codes); --trim merges them."""
    ids = pd.Series(unit_ids, dtype=object).map(str)
    stripped = ids.str.strip()
    twins = stripped.duplicated(keep=False).to_numpy()
    if not twins.any():
        return
    groups = pd.Series(np.flatnonzero(twins)).groupby(stripped[twins].to_numpy()).agg(list)
    first = [repr(unit_ids[i]) for i in groups.iloc[0][:3]]
    n = len(groups)
    b.notes.append(f"warning: {n} unit id{'s' * (n != 1)} differ{'s' * (n == 1)} only in spaces before or after "
                   f"{'it' if n == 1 else 'them'} and count as different units: {' / '.join(first)}"
                   f"{' ...' if n > 1 else ''} (column '{b.roles[0].unit}'); use --trim (trim=True) to merge them")


def _check_unit_ids(b: Build) -> None:
    problems = []
    for p in b.pieces:
        local_units = b.units[p.table][0]
        bad = np.flatnonzero((local_units < 0) & p.keep_mask)
        if bad.size:
            t = b.tables[p.table]
            rows = t.rows[bad]
            problems.append(AgreeError(
                f"{bad.size} row(s) have values but no unit id (rows {rows_text(rows)})",
                where=t.where(int(rows[0]), b.roles[p.table].unit), code="missing-unit-id",
                hint="fill in the unit id of every row (or delete the row)"))
    # one message per table
    seen, uniq = set(), []
    for p in problems:
        if p.where not in seen:
            seen.add(p.where)
            uniq.append(p)
    raise_all(uniq, "tables have rows without a unit id")


def _check_duplicates(b: Build, key, units, rows, source, unit_ids, n, m) -> None:
    counts = np.bincount(key, minlength=n * m) if key.size else np.zeros(0, dtype=np.int64)
    dup_keys = np.flatnonzero(counts > 1)
    if not dup_keys.size:
        return
    problems = []
    unit_col = b.roles[0].unit
    others = [c for c in unit_candidates(b.tables[0].frame.columns) if c != unit_col][:4]
    choose = (f"; if '{unit_col}' does not name the units, choose the unit column with --unit-col (unit=...)"
              + (f": perhaps {', '.join(repr(c) for c in others)}" if others else ""))
    if b.layout.name == "wide":
        dup_units = np.unique(dup_keys // m)
        for u in dup_units[:20]:
            sel = units == u
            r = np.unique(rows[sel])
            s = b.sources[int(source[sel][0])]
            problems.append(AgreeError(
                f"unit '{unit_ids[u]}' is in more than one row (rows {rows_text(r)})",
                where=cell_location(s[0], s[1], int(r[0]), b.roles[0].unit),
                code="duplicate-unit", hint="each unit must have one row; merge or rename the rows" + choose))
        total = len(dup_units)
        what = "units are in more than one row"
    else:
        for k in dup_keys[:20]:
            sel = np.flatnonzero(key == k)
            s = b.sources[int(source[sel[0]])]
            u, c = divmod(int(k), m)
            problems.append(AgreeError(
                f"coder '{b.coders[c]}' coded unit '{unit_ids[u]}' more than once "
                f"(rows {rows_text(rows[sel])})",
                where=cell_location(s[0], s[1], int(rows[sel[0]]), s[2]), code="duplicate-coding",
                hint="keep one row per unit and coder; for several codes put them in one cell "
                     f"separated by '{b.sep or ';'}', or use 0/1 code columns" + choose + _rounds_hint(b)))
        total = len(dup_keys)
        what = "(unit, coder) pairs are coded more than once"
    if total > len(problems):
        problems.append(AgreeError(f"... and {total - len(problems)} more", code=problems[0].code))
    if len(problems) == 1:
        raise problems[0]
    first = problems[0]
    raise AgreeError(f"{total} {what}; first: {first.message}", hint=first.hint, where=first.where,
                     code=first.code, problems=problems)


def _rounds_hint(b: Build) -> str:
    """When the table has a round column, the units may repeat across rounds: say how to analyse them."""
    rounds = [c for c in b.tables[0].frame.columns if column_key(c) in ROUND_NAMES]
    if not rounds:
        return ""
    return (f"; if units were coded again in another round of '{rounds[0]}', give each round its own file "
            "and compare them with 'agree rounds FILE1 FILE2 --round-files'")


def _per_unit(b: Build, name, entries, unit_ids, table_maps) -> np.ndarray:
    """The first non-empty value of each unit. In one file per coder a kept column must give a
    unit the same value in every coder's file (an error naming the cells otherwise); elsewhere
    differing values are counted in a note. Works on distinct values, not row by row."""
    n = len(unit_ids)
    arr = np.full(n, None, dtype=object)
    canon = np.full(n, None, dtype=object)  # the value as text, for comparisons
    first_entry = np.full(n, -1, dtype=np.int64)
    first_row = np.zeros(n, dtype=np.int64)
    conflicts = 0
    clashes: list[tuple[int, int, int, int, int, str, str]] = []  # (unit, entry, row, entry, row, v1, v2)
    for e, (ti, col) in enumerate(entries):
        t = b.tables[ti]
        local = b.units[ti][0]
        ok = local >= 0
        series = col[ok].reset_index(drop=True)
        fcodes, uniques = factorize(series)
        keep_u = np.array([normalise_value(v) is not None for v in uniques] + [False], dtype=bool)
        text_u = np.array([str(normalise_value(v)).strip() for v in uniques] + [""], dtype=object)
        present = keep_u[fcodes]
        g = (local[ok] if table_maps is None else table_maps[ti][local[ok]])[present]
        vals = series.to_numpy(dtype=object)[present]
        txt = text_u[fcodes[present]]
        rws = t.rows[ok][present]
        first_g, first_pos = np.unique(g, return_index=True)
        if len(g) > len(first_g):
            frame = pd.DataFrame({"g": g, "v": txt})
            conflicts += int((frame.groupby("g")["v"].nunique() > 1).sum())
        new = first_entry[first_g] < 0
        old_g, old_pos = first_g[~new], first_pos[~new]
        differ = canon[old_g] != txt[old_pos]
        for u, pos in zip(old_g[differ][:20], old_pos[differ][:20]):
            clashes.append((int(u), int(first_entry[u]), int(first_row[u]), e, int(rws[pos]),
                            str(canon[u]), str(txt[pos])))
        conflicts += int(differ.sum())
        ng, npos = first_g[new], first_pos[new]
        arr[ng], canon[ng] = vals[npos], txt[npos]
        first_entry[ng], first_row[ng] = e, rws[npos]
    if clashes and b.layout.per_coder and name != "text":
        problems = []
        for u, e1, r1, e2, r2, v1, v2 in clashes[:20]:
            t1, t2 = b.tables[entries[e1][0]], b.tables[entries[e2][0]]
            problems.append(AgreeError(
                f"column '{name}' gives unit '{unit_ids[u]}' different values in the coders' files: "
                f"'{v1}' ({t1.where(r1, name)}) and '{v2}' ({t2.where(r2, name)})",
                where=t2.where(r2, name), code="kept-conflict",
                hint=f"a kept per-unit column must give each unit the same value in every coder's file; "
                     f"correct the cells, or do not keep '{name}'"))
        if len(problems) == 1 and conflicts == 1:
            raise problems[0]
        if conflicts > len(problems):
            problems.append(AgreeError(f"... and {conflicts - len(problems)} more", code="kept-conflict"))
        first = problems[0]
        raise AgreeError(f"{conflicts} values of '{name}' differ between the coders' files; first: "
                         f"{first.message}", hint=first.hint, where=first.where, code=first.code,
                         problems=problems)
    if conflicts:
        b.notes.append(f"column '{name}': {conflicts} unit(s) have different values on different "
                       "rows; the first was kept")
    return arr
