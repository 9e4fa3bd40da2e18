"""How agree writes a cell, in every CSV and workbook it writes: text stays text, every row reads back.

Workbooks (xlsx)
    Every cell agree did not compute (unit ids, texts, codes, names of columns copied from an
    input) is stored as a text cell (`put_cell`), never as a formula or a number, so ``=SUM(A1)``
    or ``007`` keeps its exact text. Cells starting like a formula also get the spreadsheet's
    quote-prefix flag, so editing them does not turn them into formulas. Numbers agree computed
    (counts, coefficients) are numbers. XML cannot hold the control characters U+0000-U+0008,
    U+000B, U+000C, U+000E-U+001F, U+FFFE and U+FFFF; they are written as U+FFFD (the
    replacement character). Tabs, line feeds and carriage returns are kept.

CSV: one writer (`csv_text`, `frame_csv`)
    Comma-separated, UTF-8, each row ended by ``\\n``. A field is quoted (``"..."``, inner quotes
    doubled) when it holds a comma, a double quote, a line feed or a carriage return, so a cell
    with ``\\r``, ``\\n`` or ``\\r\\n`` stays one cell. Missing values are empty fields; numbers
    are written in Python's shortest round-trip form.

CSV: one rule for formula-like text (`protect_text`, undone by `unprotect_text`)
    A spreadsheet opening a CSV runs a cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a
    carriage return as a formula. Such text gets one leading ``'`` in every CSV agree writes:
    ``=SUM(A1)`` is written ``'=SUM(A1)``. Plain numbers (``-1``, ``+0.5``, ``-2e3``) are not
    formulas and are written as they are. So that reading back is exact, text that is already
    one or more ``'`` followed by one of those characters gets one more ``'`` (``'=x`` is written
    ``''=x``). Reading a CSV, agree's readers remove one ``'`` from any cell that starts with
    one or more ``'`` followed by ``=``, ``+``, ``-``, ``@``, a tab or a carriage return, and
    leave every other cell exactly as it is (``'tis`` stays ``'tis``). A round trip through
    agree's writers and readers returns the same text.
"""

from __future__ import annotations

import math
import re
from typing import Any, Iterable, Sequence

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?\Z")
_FORMULA_LIKE = re.compile(r"'*[=+\-@\t\r]")
_PROTECTED = re.compile(r"'+[=+\-@\t\r]")
# The same test as `_PROTECTED`, for vectorised readers (RE2 / pandas): group 1 is the kept text.
PROTECTED_PATTERN = r"^'('*[=+\-@\t\r])"
_ILLEGAL_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")
_QUOTE_IF = re.compile(r'[,"\r\n]')


# -- formula-like text -----------------------------------------------------------------------
def formula_like(text: str) -> bool:
    """Whether a spreadsheet would read `text` as a formula (not a plain number)."""
    return text[:1] in FORMULA_START and not _NUMBER.match(text)


def protect_text(text: str) -> str:
    """Text as written to a CSV cell (see the module notes): one more leading ``'`` when the text
    is formula-like, or is ``'``s followed by a formula character; else unchanged."""
    if _FORMULA_LIKE.match(text) and not _NUMBER.match(text):
        return "'" + text
    return text


def unprotect_text(text: str) -> str:
    """Undo `protect_text`: remove one ``'`` when the text is ``'``s followed by a formula character."""
    return text[1:] if _PROTECTED.match(text) else text


# -- CSV -----------------------------------------------------------------------------------
def csv_field(value: Any) -> str:
    """One field of a CSV row: text protected and quoted where needed, numbers as numbers."""
    if value is None:
        return ""
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):   # numpy scalars
        value = value.item()
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    if isinstance(value, (bool, int)):
        return str(value)
    if not isinstance(value, str):
        if _is_missing(value):
            return ""
        value = str(value)
    text = protect_text(value)
    if _QUOTE_IF.search(text):
        return '"' + text.replace('"', '""') + '"'
    return text


def _is_missing(value: Any) -> bool:
    try:
        import pandas as pd

        return value is pd.NA or value is pd.NaT
    except ImportError:  # pragma: no cover
        return False


def csv_text(header: Sequence[Any], rows: Iterable[Sequence[Any]]) -> str:
    """The CSV text of a header and rows, by the rules in the module notes."""
    lines = [",".join(csv_field(v) for v in header)]
    lines.extend(",".join(csv_field(v) for v in row) for row in rows)
    return "\n".join(lines) + "\n"


def frame_csv(frame: Any) -> str:
    """The CSV text of a DataFrame (its columns as the header, no index).

    The same text as `csv_text` of its rows, made column by column: a column of text (and
    missing values) is protected and quoted by Arrow's vectorised string functions, any other
    column cell by cell by `csv_field`."""
    header = ",".join(csv_field(str(c)) for c in frame.columns)
    if frame.shape[1] == 0 or len(frame) == 0:
        return header + "\n" * (1 + len(frame))
    import pyarrow as pa
    import pyarrow.compute as pc

    fields = [_csv_column(frame.iloc[:, j].to_numpy()) for j in range(frame.shape[1])]
    lines = pc.binary_join_element_wise(*fields, ",") if len(fields) > 1 else fields[0]
    body = "\n".join(lines.to_numpy(zero_copy_only=False).tolist())
    return header + "\n" + body + "\n"


# The rules of `protect_text` and `csv_field` in RE2 syntax (Arrow's regular expressions)
_FORMULA_LIKE_RE2 = r"^'*[=+\-@\t\r]"
_NUMBER_RE2 = r"^[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?\z"
_QUOTE_IF_RE2 = r'[,"\r\n]'


def _csv_column(values: Any) -> Any:
    """The CSV fields of one column, as an Arrow string array (see `frame_csv`)."""
    import pandas as pd
    import pyarrow as pa
    import pyarrow.compute as pc

    text = None
    if values.dtype.kind in "OU" and pd.api.types.infer_dtype(values, skipna=True) in ("string", "empty"):
        try:
            text = pa.array(values, type=pa.string(), from_pandas=True)
        except (pa.ArrowException, UnicodeError):
            text = None
    if text is None:
        return pa.array([csv_field(v) for v in values], type=pa.string())
    text = pc.fill_null(text, "")
    formula = pc.and_(pc.match_substring_regex(text, _FORMULA_LIKE_RE2),
                      pc.invert(pc.match_substring_regex(text, _NUMBER_RE2)))
    text = pc.if_else(formula, pc.binary_join_element_wise("'", text, ""), text)
    quoted = pc.binary_join_element_wise('"', pc.replace_substring(text, '"', '""'), '"', "")
    return pc.if_else(pc.match_substring_regex(text, _QUOTE_IF_RE2), quoted, text)


# -- workbooks -----------------------------------------------------------------------------
def xml_safe(text: str) -> str:
    """Text a workbook can hold: characters XML forbids become U+FFFD."""
    return _ILLEGAL_XML.sub("\ufffd", text)


def put_cell(cell: Any, value: Any) -> None:
    """Set an openpyxl cell: text always stays text (never a formula), numbers stay numbers,
    None is blank; anything else is written as its text."""
    if isinstance(value, str):
        value = xml_safe(value)
        cell.value = value
        cell.data_type = "s"            # text, even when it starts with "=" (no formula)
        if value[:1] in FORMULA_START:
            cell.quotePrefix = True     # and it stays text when someone edits it
        return
    if value is None:
        cell.value = None
        return
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):   # numpy scalars
        value = value.item()
    if isinstance(value, bool):
        cell.value = value
    elif isinstance(value, float) and math.isnan(value):
        cell.value = None
    elif isinstance(value, (int, float)):
        cell.value = value
    elif _is_missing(value):
        cell.value = None
    else:
        put_cell(cell, str(value))


def cell_text(value: Any) -> str | None:
    """A value copied from an input, as the text a workbook stores: whole numbers without ".0"
    (17.0 -> "17"), other values as their text, missing as None."""
    if value is None:
        return None
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return None
        return str(int(value)) if value.is_integer() and abs(value) < 1e16 else repr(value)
    if _is_missing(value):
        return None
    return str(value)
