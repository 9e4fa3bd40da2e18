"""Column names and roles: the one vocabulary of the names people give columns, and which
column of a table holds the unit ids, the coders, the codes, the text and the kept columns.

Every reader finds columns by these names (case, spaces and hyphens ignored): coding tables,
codebooks, lists of units and unit-id lists.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence

import pandas as pd

from agree.core.model import AgreeError, normalise_value
from agree.io.cells import binary, factorize
from agree.io.loaders import Table

__all__ = ["UNIT_NAMES", "CODER_NAMES", "CODE_NAMES", "TEXT_NAMES", "KEEP_NAMES", "NOTE_NAMES",
           "LIST_ID_NAMES", "LIST_TEXT_NAMES", "CODEBOOK_CODE_NAMES", "ORDER_NAMES", "DESCRIPTION_NAMES",
           "column_key", "find_column", "columns_hint", "require", "as_list", "Roles", "assign_roles",
           "unit_column", "is_free_text", "is_binary"]

# coding tables
UNIT_NAMES = ("unit", "unit_id", "unitid", "item", "item_id", "excerpt_id", "segment_id", "id",
              "segment", "case_id", "answer_id", "response_id")
CODER_NAMES = ("coder", "coder_id", "coder_name", "rater", "rater_id", "annotator", "judge")
CODE_NAMES = ("code", "codes", "label", "labels", "category", "value", "rating")
TEXT_NAMES = ("text", "excerpt", "segment", "quote", "content", "unit_text", "excerpt_text",
              "segment_text", "answer", "passage", "statement")
# Per-unit columns that are never coders in a wide table: kept in `CodingData.columns`.
KEEP_NAMES = ("round", "cluster", "document", "document_id", "doc", "doc_id", "group", "notes",
              "note", "comment", "comments", "memo", "interview", "interview_id", "participant",
              "participant_id", "respondent", "respondent_id", "speaker", "thread", "thread_id",
              "wave", "session", "site", "source", "file")
# Free-text columns written beside the codes: per-coder notes in one file per coder.
NOTE_NAMES = ("notes", "note", "comment", "comments", "memo", "memos", "remarks")
# lists of units (a corpus, unit-id lists): the coding tables' names, unit_id first; "response"
# is a text column in a list of units but too ambiguous in coding data
LIST_ID_NAMES = ("unit_id",) + tuple(n for n in UNIT_NAMES if n != "unit_id")
LIST_TEXT_NAMES = TEXT_NAMES + ("response",)
# codebooks
CODEBOOK_CODE_NAMES = ("code", "category", "label", "name", "value", "codes")
ORDER_NAMES = ("order", "rank", "position", "scale_order")
DESCRIPTION_NAMES = ("description", "definition", "meaning", "desc", "descriptions")


def column_key(name: Any) -> str:
    """A column name as compared with the vocabulary: lower case, spaces and hyphens as '_'."""
    return re.sub(r"[\s\-]+", "_", str(name).strip().lower())


def find_column(columns: Sequence[str], names: Sequence[str], exclude: Iterable[str] = ()) -> str | None:
    """The first column (in the order of `names`) whose key is one of `names`; None if none."""
    excluded = set(exclude)
    by_key = {}
    for c in columns:
        if c not in excluded:
            by_key.setdefault(column_key(c), c)
    for n in names:
        if n in by_key:
            return by_key[n]
    return None


def columns_hint(column: str, columns: Iterable, label: str = "columns") -> str:
    """'did you mean ...? (columns: a, b, c)': always says which columns there are."""
    names = [str(c) for c in columns]
    close = difflib.get_close_matches(column, names, n=1)
    listed = f"{label}: {', '.join(repr(c) for c in names)}"
    return f"did you mean '{close[0]}'? ({listed})" if close else listed


def require(table: Table, column: str, what: str) -> str:
    """`column` if the table has it, else an error listing the columns there are."""
    if column in table.frame.columns:
        return column
    raise AgreeError(f"there is no {what} column '{column}'", where=table.where(1),
                     hint=columns_hint(column, table.frame.columns), code="no-column")


def as_list(x: Any) -> list:
    """A name or a list of names as a list (None: empty)."""
    if x is None:
        return []
    return [x] if isinstance(x, str) else list(x)


def is_free_text(col: pd.Series) -> bool:
    """Long, mostly distinct sentences: unit text rather than codes (judged on the first 500
    non-empty cells; plain Python, as a wide table asks this of thousands of short columns)."""
    head = col.iloc[:2000].tolist()
    sample = [v for v in head if normalise_value(v) is not None][:500]
    if not sample:
        return False
    s = [v if isinstance(v, str) else "" for v in sample]
    if sum(map(len, s)) < 25 * len(s):
        return False
    spaced = sum(1 for v in s if " " in v.strip())
    distinct = len(set(s)) / len(s)
    return bool(spaced >= 0.5 * len(s) and (len(s) < 4 or distinct >= 0.8))


def is_binary(col: pd.Series) -> bool:
    """True when every non-empty cell is 0 or 1 (or TRUE/FALSE) and at least one is not empty."""
    _, uniques = factorize(col)
    seen = False
    for u in uniques:
        b = binary(u)
        if b is None:
            if normalise_value(u) is None or (isinstance(u, str) and u.strip() == ""):
                continue
            return False
        seen = True
    return seen


# -- roles of the columns of one table --------------------------------------------------------
@dataclass
class Roles:
    unit: str
    coder: str | None = None
    code: str | None = None
    presence: list[str] = field(default_factory=list)
    coders: list[str] = field(default_factory=list)  # wide
    text: str | None = None
    keep: list[str] = field(default_factory=list)
    unused: list[str] = field(default_factory=list)
    unit_guessed: bool = False


def unit_column(table: Table, unit: str | None) -> tuple[str, bool]:
    """The unit-id column (given, or the first usual name that is not free text, or the first
    column) and whether it was guessed as the first column."""
    if unit is not None:
        return require(table, unit, "unit"), False
    cols = list(table.frame.columns)
    for name in UNIT_NAMES:
        found = find_column(cols, (name,))
        if found is not None and not is_free_text(table.frame[found]):
            return found, False
    return cols[0], True


def _text_column(table: Table, text: str | None, taken: set[str]) -> str | None:
    if text is not None:
        return require(table, text, "text")
    cols = [c for c in table.frame.columns if c not in taken]
    found = find_column(cols, TEXT_NAMES)
    if found is not None and not is_binary(table.frame[found]):
        return found
    for c in cols:
        if is_free_text(table.frame[c]):
            return c
    return None


def _keep_columns(table: Table, keep: Sequence[str], required: bool) -> list[str]:
    out = []
    for k in keep:
        if k in table.frame.columns:
            out.append(k)
        elif required:
            require(table, k, "kept")
    return out


def _foreign_columns(table: Table, candidates: list) -> list:
    """Wide layout: candidate coder columns whose values share none with the other candidates'
    (e.g. an interview or participant column) are per-unit columns, not coders. Needs at least
    three candidates, so that two coders who never agree are still read as coders."""
    if len(candidates) < 3:
        return []
    values = {c: set(pd.unique(table.frame[c].dropna().astype(str).str.strip())) - {""} for c in candidates}
    holders: dict[str, int] = {}  # value -> how many candidate columns hold it
    for vs in values.values():
        for v in vs:
            holders[v] = holders.get(v, 0) + 1
    foreign = [c for c in candidates if values[c] and all(holders[v] == 1 for v in values[c])]
    if len(foreign) == len(candidates):  # nothing shared anywhere: coders who never agree
        return []
    return foreign if len(candidates) - len(foreign) >= 2 else []


def assign_roles(table: Table, layout: str, *, unit, coder, code, text, keep, single_table: bool) -> Roles:
    """Assign each column of one table a role under the given layout."""
    cols = list(table.frame.columns)
    unit_col, guessed = unit_column(table, unit)
    kept = _keep_columns(table, keep, required=single_table)
    taken = {unit_col, *kept}
    r = Roles(unit=unit_col, unit_guessed=guessed)
    if layout in ("long", "presence-long"):
        r.coder = require(table, coder, "coder") if isinstance(coder, str) else find_column(cols, CODER_NAMES, taken)
        if r.coder is None:
            raise AgreeError("no coder column found", where=table.where(1), code="no-column",
                             hint=f"name it with --coder-col (coder=...) (columns: {', '.join(cols)})")
        taken.add(r.coder)
    r.text = _text_column(table, text, taken | set(as_list(code)))
    if r.text is not None:
        taken.add(r.text)
    rest = [c for c in cols if c not in taken]
    if layout == "wide":
        if coder is not None and not isinstance(coder, str):
            r.coders = [require(table, c, "coder") for c in coder]
            r.unused = [c for c in rest if c not in r.coders]
        else:
            auto_keep = [c for c in rest if column_key(c) in KEEP_NAMES]
            auto_keep += _foreign_columns(table, [c for c in rest if c not in auto_keep])
            r.keep = kept + auto_keep
            r.coders = [c for c in rest if c not in auto_keep]
        r.keep = r.keep or kept
        return r
    r.keep = kept
    presence = layout.startswith("presence")
    if isinstance(code, str) and not presence:
        r.code = require(table, code, "code")
    elif code is not None and not isinstance(code, str):
        r.presence = [require(table, c, "code") for c in code]
    elif not presence:
        r.code = find_column(rest, CODE_NAMES)
        if r.code is None and len(rest) == 1:
            r.code = rest[0]
        if r.code is None:
            if len(rest) >= 2 and all(is_binary(table.frame[c]) for c in rest):
                r.presence = rest
            elif not rest:
                raise AgreeError("no code column found", where=table.where(1), code="no-column",
                                 hint="the table needs a column with the codes")
            else:
                raise AgreeError(f"cannot tell which column holds the codes: {', '.join(rest)}",
                                 where=table.where(1), code="no-column",
                                 hint="name it with --code-col (code=...), or choose the layout with "
                                      "--layout (layout=...)")
    else:
        r.presence = rest
    used = {r.code, *r.presence}
    r.unused = [c for c in rest if c not in used]
    if presence and not r.presence:
        raise AgreeError("no 0/1 code columns found for the presence layout", where=table.where(1),
                         code="no-column", hint="each code needs its own 0/1 column")
    return r
