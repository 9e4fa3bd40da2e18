"""Codebooks: the list of categories coders choose from, their order and their descriptions.

A codebook file is a CSV or XLSX table with a header row and the columns

code
    the category as coders write it (also recognised: category, label, name, value);
order
    optional; numbers giving the scale order of an ordinal scale (also: rank, position);
description
    optional; what the category means (also: definition, meaning, desc).

Without an order column the categories keep the file's order and the codebook is not
ordered. Numeric codes are numbers (``1`` and ``1.0`` are the same code).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from agree.core.model import AgreeError, cell_location, normalise_value

__all__ = ["Codebook", "read_codebook"]

CODE_NAMES = ("code", "category", "label", "name", "value", "codes")
ORDER_NAMES = ("order", "rank", "position", "scale_order")
DESCRIPTION_NAMES = ("description", "definition", "meaning", "desc", "descriptions")


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

    def to_dict(self) -> dict[str, Any]:
        return {
            "categories": list(self.categories),
            "descriptions": {str(k): v for k, v in self.descriptions.items()},
            "ordered": self.ordered,
            "source": self.source,
        }


def read_codebook(path: str | Path, *, sheet: str | int | None = None, trim: bool = False) -> Codebook:
    """Read a codebook from a CSV or XLSX file.

    Parameters
    ----------
    path : the codebook file (.csv, .tsv, .txt or .xlsx).
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
    from agree.io.readers import find_column, load_file

    name = str(path)
    loaded = load_file(Path(path), sheet=sheet, name=name, sheet_option="a codebook sheet (sheet=...)")
    table = loaded.tables[0]
    frame = table.frame
    columns = list(frame.columns)
    code_col = find_column(columns, CODE_NAMES) or columns[0]
    order_col = find_column(columns, ORDER_NAMES, {code_col})
    desc_col = find_column(columns, DESCRIPTION_NAMES, {code_col, order_col} - {None})
    rows = table.rows

    problems: list[AgreeError] = []
    codes = [normalise_value(v) for v in frame[code_col].to_numpy(dtype=object)]
    codes = [_code(v, trim) for v in codes]
    descriptions = (frame[desc_col].to_numpy(dtype=object) if desc_col is not None
                    else np.full(len(frame), None, dtype=object))
    orders = frame[order_col].to_numpy(dtype=object) if order_col is not None else None

    keep: list[int] = []
    first_row: dict[Any, int] = {}
    for i, c in enumerate(codes):
        other = [descriptions[i]] + ([orders[i]] if orders is not None else [])
        if c is None:
            if any(normalise_value(v) is not None and str(v).strip() for v in other):
                problems.append(AgreeError("the code is empty on a row that has a description or order",
                                           where=cell_location(name, table.sheet, int(rows[i]), code_col),
                                           hint="fill in the code or delete the row", code="bad-codebook"))
            continue
        if c in first_row:
            problems.append(AgreeError(f"code '{c}' is listed twice (rows {first_row[c]} and {int(rows[i])})",
                                       where=cell_location(name, table.sheet, int(rows[i]), code_col),
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
                                           where=cell_location(name, table.sheet, int(rows[i]), order_col),
                                           hint="give every code a number in the order column",
                                           code="bad-codebook"))
                continue
            if v in seen:
                problems.append(AgreeError(f"order {v} is given to two codes (rows {seen[v]} and {int(rows[i])})",
                                           where=cell_location(name, table.sheet, int(rows[i]), order_col),
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
        raise AgreeError("the codebook lists no codes", where=cell_location(name, table.sheet),
                         hint=f"put the codes in column '{code_col}'", code="empty-file")
    if orders is not None:
        keep.sort(key=lambda i: order_values[i])
    described = {}
    for i in keep:
        d = descriptions[i]
        if normalise_value(d) is not None and str(d).strip():
            described[codes[i]] = str(d).strip()
    return Codebook(categories=tuple(codes[i] for i in keep), descriptions=described,
                    ordered=orders is not None, source=name)


def _code(v: Any, trim: bool) -> Any:
    from agree.io.readers import canonical_code

    return canonical_code(v, trim=trim, casefold=False)


def codebook_from(categories: Sequence[Any] | Codebook, *, ordered: bool = False) -> Codebook:
    """A Codebook from a plain list of categories (or the Codebook itself)."""
    if isinstance(categories, Codebook):
        return categories
    return Codebook(categories=tuple(categories), ordered=ordered)
