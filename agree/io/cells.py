"""Cells to codes: the canonical form of a cell's value, and columns encoded as indices.

Shared by every layout builder. A column is factorized once (its distinct values found with
their positions), each distinct value is made canonical once (numbers written ``1`` and
``1.0`` are the same code; text is trimmed or case-folded on request) and the positions are
mapped through, so the work per row is vectorised whatever the table's size.
"""

from __future__ import annotations

import os
import re
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.model import MISSING, AgreeError, normalise_value
from agree.io.loaders import Table, raise_all

__all__ = ["canonical_code", "as_number", "number_text", "Encoder", "Stats", "factorize", "factorize_columns", "binary",
           "looks_missing", "rows_text", "quoted", "NUMBER", "DECIMAL_COMMA", "MISSING_LOOKALIKES"]

MISSING_LOOKALIKES = {"na", "n/a", "nan", "null", "none", "-", "missing"}
NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_PARALLEL_ROWS = 100_000  # text columns at least this long are factorized on several threads

Factorized = tuple[np.ndarray, Any]  # codes per cell (-1 for missing), distinct values (see factorize_columns)


def as_number(v: Any) -> int | float | None:
    """The number a cell holds: a number, or text written as one (``007``, ``+1``, ``1.50``,
    ``1e300``), as `normalise_value` makes numbers (int when whole, up to 2**53); None for other
    text. Non-finite numbers (``1e309`` overflows to infinity) are returned as they are, to be
    refused by the caller with the cell named."""
    if isinstance(v, str):
        s = v.strip()
        if not NUMBER.match(s):
            return None
        return normalise_value(float(s))
    if isinstance(v, (bool, np.bool_, int, np.integer, float, np.floating)):
        return normalise_value(v)
    return None


def number_text(x: int | float) -> str:
    """How a number is written when it is a code's canonical spelling: 1, 1.5, -3, 1e+300."""
    return str(x) if isinstance(x, int) else repr(x)


def canonical_code(v: Any, *, trim: bool, casefold: bool) -> Any:
    """Canonical code from a raw cell: a number, text as written (stripped or case-folded on
    request), or None for empty.

    Text is the code exactly as written unless it is a number in its plain spelling (``1``,
    ``1.5``, ``-3``, and ``2.0`` as programs write whole numbers): ``007``, ``+1``, ``1.50`` and ``1e300`` stay text here, and
    `agree.io.values` decides what they are (numbers at a numeric level; at the nominal level the
    same code as a plain number of equal value, else the text as read). Numbers in cells
    (workbooks, Parquet) are numbers; whole numbers are int (1 and 1.0 are the same code) up to
    2**53, larger ones stay float.
    """
    v = normalise_value(v)
    if isinstance(v, str):
        if trim:
            v = v.strip()
        s = v.strip()
        if s == "":
            return None
        number = as_number(s)
        if number is not None:
            if s in (number_text(number), number_text(number) + ".0"):   # 2 and 2.0, as programs write them
                v = number
        elif casefold:
            v = v.casefold()
    elif hasattr(v, "isoformat"):
        v = v.isoformat()
    return v


def looks_missing(v: Any) -> bool:
    """Text that people write for a missing value (NA, n/a, null, -, missing, ...)."""
    return isinstance(v, str) and v.strip().lower() in MISSING_LOOKALIKES


def binary(v: Any) -> int | None:
    """0 or 1 from a presence cell (0/1, TRUE/FALSE, as text or number); None otherwise."""
    if isinstance(v, str):
        s = v.strip().lower()
        v = {"true": 1, "false": 0}.get(s, s)
        if isinstance(v, str):
            v = float(v) if NUMBER.match(v) else v
    v = normalise_value(v)
    return v if v in (0, 1) and not isinstance(v, str) else None


def rows_text(rows: np.ndarray, limit: int = 10) -> str:
    rows = [int(r) for r in rows]
    text = ", ".join(map(str, rows[:limit]))
    return text + (f", ... ({len(rows)} rows)" if len(rows) > limit else "")


def quoted(name: str) -> str:
    """A column name as typed on a command line (quoted when it holds spaces or quotes)."""
    return name if re.fullmatch(r"[\w.\-]+", name) else repr(name)


def factorize(col: pd.Series) -> Factorized:
    """Codes (-1 for missing) and the distinct values as an object array, in order of first
    appearance. Text read by Arrow (the text and Parquet loaders) is dictionary-encoded by Arrow."""
    encoded = _arrow_factorize(col)
    if encoded is not None:
        return encoded[0], encoded[1].to_numpy(zero_copy_only=False)
    codes, uniques = pd.factorize(col, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64), np.asarray(uniques, dtype=object)


def _arrow_factorize(col: pd.Series):
    """An Arrow-backed text column dictionary-encoded by Arrow (hashing in C++, about twice as fast
    as pandas' factorize of the same strings): (codes, -1 for missing; distinct values as an Arrow
    string array); None for any other column."""
    if not isinstance(col.dtype, pd.StringDtype) or col.dtype.storage != "pyarrow":
        return None
    import pyarrow as pa
    import pyarrow.compute as pc

    encoded = pc.dictionary_encode(pa.chunked_array(col.array.__arrow_array__()))  # every chunk: the final dictionary
    if encoded.num_chunks == 0:
        return np.full(len(col), MISSING, dtype=np.int64), pa.array([], type=pa.string())
    dictionary = encoded.chunk(encoded.num_chunks - 1).dictionary
    indices = pa.chunked_array([c.indices for c in encoded.chunks], type=encoded.type.index_type)
    codes = pc.fill_null(indices, MISSING).to_numpy().astype(np.int64)
    return codes, dictionary


def factorize_columns(columns: Sequence[pd.Series]) -> list[Factorized]:
    """`factorize` of each column, large text columns on several threads at once (the hashing
    releases the GIL). The distinct values of Arrow-backed text stay an Arrow string array
    (`Encoder.codes` and `Encoder.ids` take either), so a million distinct unit ids are checked
    in Arrow and turned into Python strings once."""
    def one(c):
        encoded = _arrow_factorize(c)
        return encoded if encoded is not None else factorize(c)

    big = [i for i, c in enumerate(columns) if len(c) >= _PARALLEL_ROWS and isinstance(c.dtype, pd.StringDtype)]
    out: list[Factorized | None] = [None] * len(columns)
    if len(big) >= 2:
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=min(len(big), os.cpu_count() or 1)) as pool:
            for i, done in zip(big, pool.map(lambda i: one(columns[i]), big)):
                out[i] = done
    return [done if done is not None else one(c) for done, c in zip(out, columns)]


class Stats:
    """What trimming and case folding changed, per source column."""

    def __init__(self):
        self.trim: dict[str, int] = {}
        self.casefold: dict[str, int] = {}
        self.spaces_only = 0
        self.lookalikes: dict[str, int] = {}

    def add(self, kind: str, column: str, n: int) -> None:
        if n:
            d = getattr(self, kind)
            d[column] = d.get(column, 0) + n

    def notes(self) -> list[str]:
        out = []
        for kind, label in (("trim", "trim"), ("casefold", "casefold")):
            d = getattr(self, kind)
            if d:
                total = sum(d.values())
                out.append(f"{label}: changed {total} value{'s' * (total != 1)} in {len(d)} "
                           f"column{'s' * (len(d) != 1)}")
        if self.spaces_only:
            out.append(f"{self.spaces_only} cell(s) holding only spaces read as empty (missing)")
        for text, n in self.lookalikes.items():
            out.append(f"'{text}' read as a code in {n} cell(s); if it means 'not coded', leave those "
                       "cells empty")
        return out


class Encoder:
    """Encodes columns into indices of one vocabulary shared by every table read together:
    codes (`vocab`), unit ids and coder names, and presence/absence rows (`presence_sets`),
    counting in `stats` what trimming and case folding changed."""

    def __init__(self, *, trim: bool, casefold: bool):
        self.trim, self.casefold = trim, casefold
        self.stats = Stats()
        self.vocab: dict = {}
        self.presence_sets: list[frozenset] = []
        self.presence_columns: list[tuple[Table, Any, str]] = []  # (table, category, column)
        self.spaced = False  # some id read (unit id or coder name) had spaces before or after it

    def codes(self, col: pd.Series, label: str, factorized: Factorized | None = None,
              weights: np.ndarray | None = None) -> np.ndarray:
        """Index of each cell's canonical value in `vocab` (grown in place); -1 for empty. `weights`:
        how many cells each entry of `col` stands for (distinct codes with their counts), for the stats."""
        fcodes, uniques = factorize(col) if factorized is None else factorized
        if not len(uniques):
            return np.full(len(col), MISSING, dtype=np.int64)
        if not isinstance(uniques, np.ndarray):
            uniques = uniques.to_numpy(zero_copy_only=False)  # an Arrow array of the distinct codes
        stats, vocab, trim, casefold = self.stats, self.vocab, self.trim, self.casefold
        ok = fcodes >= 0
        counts = np.bincount(fcodes[ok], weights=None if weights is None else np.asarray(weights, float)[ok],
                             minlength=len(uniques)).astype(np.int64)
        local = np.empty(len(uniques), dtype=np.int64)
        for j, u in enumerate(uniques):
            a = canonical_code(u, trim=trim, casefold=casefold)
            if isinstance(u, str):
                s = u.strip()
                if trim and s != u and s:
                    stats.add("trim", label, int(counts[j]))
                if s == "":
                    stats.spaces_only += int(counts[j])
                elif casefold and isinstance(a, str) and a != s:
                    stats.add("casefold", label, int(counts[j]))
                if s.lower() in MISSING_LOOKALIKES:
                    stats.lookalikes[s] = stats.lookalikes.get(s, 0) + int(counts[j])
            local[j] = MISSING if a is None else vocab.setdefault(a, len(vocab))
        return np.append(local, MISSING)[fcodes]

    def ids(self, col: pd.Series, label: str, factorized: Factorized | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Unit ids (or coder names) as text: (index per cell, -1 for empty; unique ids)."""
        fcodes, uniques = factorize(col) if factorized is None else factorized
        if not len(uniques):
            return np.full(len(col), MISSING, dtype=np.int64), np.array([], dtype=object)
        if not isinstance(uniques, np.ndarray):
            # distinct text from Arrow: checked there; ids without spaces around them (and not
            # blank) are the ids as they are, with no second pass
            import pyarrow.compute as pc

            stripped = pc.utf8_trim_whitespace(uniques)
            if not pc.any(pc.not_equal(stripped, uniques)).as_py() and not pc.any(pc.equal(stripped, "")).as_py():
                return fcodes, uniques.to_numpy(zero_copy_only=False)
            uniques = uniques.to_numpy(zero_copy_only=False)
        converted = not isinstance(col.dtype, pd.StringDtype)
        if not converted:
            text = pd.Series(uniques, dtype="str")
        else:
            text = pd.Series([None if normalise_value(v) is None else str(normalise_value(v)) for v in uniques],
                             dtype="str")
        stripped = text.str.strip()
        blank = (stripped.fillna("") == "").to_numpy()
        changed = (stripped != text).to_numpy() & ~blank
        self.spaced = self.spaced or bool(changed.any())
        if self.trim and changed.any():
            counts = np.bincount(fcodes[fcodes >= 0], minlength=len(uniques))
            self.stats.add("trim", label, int(counts[changed].sum()))
        if self.trim:
            text = stripped
        if not converted and not blank.any() and not (self.trim and changed.any()):
            # distinct already: no second pass over the ids
            return fcodes, text.to_numpy(dtype=object)
        text = text.where(~blank, None)
        codes2, ids = pd.factorize(text, use_na_sentinel=True)
        local = np.append(np.asarray(codes2, dtype=np.int64), MISSING)
        return local[fcodes], np.asarray(ids, dtype=object)

    def presence(self, t: Table, cols: Sequence[str]) -> np.ndarray:
        """Index into `presence_sets` of each row's set of codes marked 1; -1 for a row with no
        0 or 1 (not coded). Cells that are not 0/1 are collected into one error."""
        mat = np.empty((len(t.frame), len(cols)), dtype=np.int8)
        problems = []
        for j, c in enumerate(cols):
            fcodes, uniques = factorize(t.frame[c])
            look = np.empty(len(uniques) + 1, dtype=np.int8)
            look[-1] = -1
            for k, u in enumerate(uniques):
                b = binary(u)
                if b is None and not (isinstance(u, str) and u.strip() == ""):
                    rows = t.rows[fcodes == k]
                    problems.append(AgreeError(
                        f"'{u}' is not 0 or 1 in a presence/absence column" +
                        (f" (also rows {rows_text(rows[1:])})" if rows.size > 1 else ""),
                        where=t.where(int(rows[0]), c), code="not-binary",
                        hint="mark each code 1 (applied) or 0 (not applied); leave the whole row empty "
                             "for a unit the coder did not code"))
                look[k] = -1 if b is None else b
            mat[:, j] = look[fcodes]
        raise_all(problems, "cells are not 0 or 1")
        category = [canonical_code(c, trim=True, casefold=self.casefold) for c in cols]
        coded = (mat >= 0).any(axis=1)
        bits = (mat == 1)
        uniq, inverse = np.unique(bits, axis=0, return_inverse=True)
        ids = np.empty(len(uniq), dtype=np.int64)
        for k, row in enumerate(uniq):
            s = frozenset(category[j] for j in np.flatnonzero(row))
            if s not in self.presence_sets:
                self.presence_sets.append(s)
            ids[k] = self.presence_sets.index(s)
        out = ids[np.asarray(inverse).ravel()] if len(uniq) else np.zeros(len(mat), dtype=np.int64)
        out[~coded] = MISSING
        for c, cat in zip(cols, category):
            if cat not in [x for _, x, _ in self.presence_columns]:
                self.presence_columns.append((t, cat, c))
        return out
