"""Codebooks: the list of categories coders choose from, their order and their descriptions.

The one codebook reader, used by every command. A codebook file is any table the loaders read
(CSV, TSV, XLSX, Parquet, ...) with a header row and the columns

code
    the category as coders write it (also recognised: category, label, name, value, codes;
    else the first column);
order
    optional; numbers giving the scale order of an ordinal scale (also: rank, position);
description
    optional; what the category means (also: definition, meaning, desc).

A plain list is a codebook too: a text file not named .csv or .tsv whose first line is one
field that is not one of these column names gives one category a line (blank lines skipped).

Without an order column the categories keep the file's order and the codebook is not
ordered. Numeric codes are numbers (``1`` and ``1.0`` are the same code).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from agree.core.model import AgreeError, cell_location, normalise_value
from agree.io.cells import canonical_code
from agree.io.columns import CODEBOOK_CODE_NAMES, DESCRIPTION_NAMES, ORDER_NAMES, find_column
from agree.io.lists import plain_list
from agree.io.loaders import load_tables

__all__ = ["Codebook", "read_codebook", "as_codebook", "codebook_from"]


@dataclass(frozen=True)
class Codebook:
    """Categories in codebook order, their descriptions, and whether the order is a scale.

    Attributes
    ----------
    categories : the categories, in scale order when `ordered`, else in file order.
    descriptions : category -> description (only categories that have one).
    ordered : True when the codebook gives an order (an ordinal scale).
    source : the file the codebook was read from, if any.
    """

    categories: tuple
    descriptions: Mapping[Any, str] = field(default_factory=dict)
    ordered: bool = False
    source: str | None = None

    def __post_init__(self):
        cats = tuple(normalise_value(c) for c in self.categories)
        if any(c is None for c in cats):
            raise AgreeError("a codebook category is empty", code="bad-codebook")
        if len(set(cats)) != len(cats):
            dup = sorted({str(c) for c in cats if cats.count(c) > 1})
            raise AgreeError(f"the codebook lists '{dup[0]}' more than once", code="bad-codebook")
        object.__setattr__(self, "categories", cats)
        object.__setattr__(self, "descriptions",
                           {normalise_value(k): str(v) for k, v in dict(self.descriptions).items()})

    def definitions(self) -> dict[str, str]:
        """Each category as text, in codebook order, with its description ('' when none)."""
        return {str(c): self.descriptions.get(c, "") for c in self.categories}

    def to_dict(self) -> dict[str, Any]:
        return {
            "categories": list(self.categories),
            "descriptions": {str(k): v for k, v in self.descriptions.items()},
            "ordered": self.ordered,
            "source": self.source,
        }


def read_codebook(path: str | Path, *, sheet: str | int | None = None, trim: bool = False) -> Codebook:
    """Read a codebook from a file (a table, or a plain list of categories).

    Parameters
    ----------
    path : the codebook file (.csv, .tsv, .txt, .xlsx, .parquet, ...: any format `agree.read`
        reads).
    sheet : the sheet of a workbook (default: the first sheet with data).
    trim : strip spaces around the codes.

    Returns
    -------
    Codebook

    Raises
    ------
    AgreeError
        naming the file, sheet, row and column of an empty or repeated code or a
        non-numeric or repeated order value.
    """
    name = str(path)
    lines = None if sheet is not None else plain_list(path, names=_NAMES, name=name)
    if lines is not None:
        rows = np.array([r for r, _ in lines], dtype=np.int64)
        codes = [canonical_code(text.strip(), trim=trim, casefold=False) for _, text in lines]
        return _codebook(codes, [None] * len(codes), None, rows, name=name, sheet=None,
                         columns=(None, None, None))
    tables, _ = load_tables(Path(path), sheet=sheet, name=name, sheet_option="a codebook sheet (sheet=...)")
    table = tables[0]
    frame = table.frame
    columns = list(frame.columns)
    code_col = find_column(columns, CODEBOOK_CODE_NAMES) or columns[0]
    order_col = find_column(columns, ORDER_NAMES, {code_col})
    desc_col = find_column(columns, DESCRIPTION_NAMES, {code_col, order_col} - {None})
    codes = [canonical_code(v, trim=trim, casefold=False) for v in frame[code_col].to_numpy(dtype=object)]
    descriptions = (frame[desc_col].to_numpy(dtype=object) if desc_col is not None
                    else np.full(len(frame), None, dtype=object))
    orders = frame[order_col].to_numpy(dtype=object) if order_col is not None else None
    return _codebook(codes, descriptions, orders, table.rows, name=name, sheet=table.sheet,
                     columns=(code_col, order_col, desc_col))


_NAMES = CODEBOOK_CODE_NAMES + ORDER_NAMES + DESCRIPTION_NAMES


def _codebook(codes: list, descriptions: Sequence[Any], orders: Sequence[Any] | None, rows: np.ndarray, *,
              name: str, sheet: str | None, columns: tuple) -> Codebook:
    """Check the entries (empty, repeated codes; missing, repeated orders) and make the Codebook.
    Each code is its text as written, a plain number (1, 2.0) a number (`canonical_code`)."""
    code_col, order_col, _ = columns
    problems: list[AgreeError] = []
    keep: list[int] = []
    first_row: dict[Any, int] = {}
    for i, c in enumerate(codes):
        other = [descriptions[i]] + ([orders[i]] if orders is not None else [])
        if c is None:
            if any(normalise_value(v) is not None and str(v).strip() for v in other):
                problems.append(AgreeError("the code is empty on a row that has a description or order",
                                           where=cell_location(name, sheet, int(rows[i]), code_col),
                                           hint="fill in the code or delete the row", code="bad-codebook"))
            continue
        if c in first_row:
            problems.append(AgreeError(f"code '{c}' is listed twice (rows {first_row[c]} and {int(rows[i])})",
                                       where=cell_location(name, sheet, int(rows[i]), code_col),
                                       hint="each code once", code="bad-codebook"))
            continue
        first_row[c] = int(rows[i])
        keep.append(i)

    order_values: dict[int, float] = {}
    if orders is not None:
        seen: dict[float, int] = {}
        for i in keep:
            v = normalise_value(orders[i])
            if isinstance(v, str):
                try:
                    v = normalise_value(float(v.strip()))
                except ValueError:
                    v = "bad"
            if v is None or isinstance(v, str):
                problems.append(AgreeError(f"the order of code '{codes[i]}' is not a number: '{orders[i]}'"
                                           if v is not None else f"code '{codes[i]}' has no order",
                                           where=cell_location(name, sheet, int(rows[i]), order_col),
                                           hint="give every code a number in the order column",
                                           code="bad-codebook"))
                continue
            if v in seen:
                problems.append(AgreeError(f"order {v} is given to two codes (rows {seen[v]} and {int(rows[i])})",
                                           where=cell_location(name, sheet, int(rows[i]), order_col),
                                           hint="give each code its own place in the order",
                                           code="bad-codebook"))
                continue
            seen[v] = int(rows[i])
            order_values[i] = float(v)
    if problems:
        first = problems[0]
        if len(problems) == 1:
            raise first
        raise AgreeError(f"{len(problems)} problems in the codebook; first: {first.message}",
                         where=first.where, hint=first.hint, code="bad-codebook", problems=problems)
    if not keep:
        raise AgreeError("the codebook lists no codes", where=cell_location(name, sheet),
                         hint=f"put the codes in column '{code_col}'" if code_col else "one code a line",
                         code="empty-file")
    if orders is not None:
        keep.sort(key=lambda i: order_values[i])
    described = {}
    for i in keep:
        d = descriptions[i]
        if normalise_value(d) is not None and str(d).strip():
            described[codes[i]] = str(d).strip()
    return Codebook(categories=tuple(codes[i] for i in keep), descriptions=described,
                    ordered=orders is not None, source=name)


def as_codebook(spec: Any, *, trim: bool = False) -> Codebook:
    """A Codebook from a codebook file, a Codebook, a list of categories or a
    {category: description} mapping."""
    if isinstance(spec, Codebook):
        return spec
    if isinstance(spec, (str, os.PathLike)):
        return read_codebook(spec, trim=trim)
    if isinstance(spec, Mapping):
        return Codebook(categories=tuple(spec), descriptions={k: v for k, v in spec.items()
                                                              if normalise_value(v) is not None})
    if isinstance(spec, (list, tuple)):
        return Codebook(categories=tuple(spec))
    raise AgreeError(f"a codebook must be a file, a Codebook, a list of categories or a "
                     f"{{category: description}} mapping; got {type(spec).__name__}", code="codebook")


def codebook_from(categories: Sequence[Any] | Codebook, *, ordered: bool = False) -> Codebook:
    """A Codebook from a plain list of categories (or the Codebook itself)."""
    if isinstance(categories, Codebook):
        return categories
    return Codebook(categories=tuple(categories), ordered=ordered)


