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
           "unit_column", "is_free_text", "is_binary", "ROUND_NAMES", "CLUSTER_NAMES", "TEXT_NAMES_IF_LONG",
           "pick_unit_column", "unit_candidates", "id_column_by_name", "text_column", "text_candidates",
           "list_unit_column", "list_text_column"]

# coding tables
UNIT_NAMES = ("unit", "unit_id", "unitid", "item", "item_id", "excerpt_id", "segment_id", "id",
              "segment", "case_id", "answer_id", "response_id", "message_id", "msg_id", "post_id",
              "comment_id", "ticket_id", "utterance_id", "turn_id", "sentence_id", "quote_id",
              "passage_id", "record_id", "tweet_id", "statement_id", "observation_id", "obs_id")
CODER_NAMES = ("coder", "coder_id", "coder_name", "rater", "rater_id", "annotator", "annotator_id",
               "judge", "judge_id")
CODE_NAMES = ("code", "codes", "label", "labels", "category", "value", "rating")
TEXT_NAMES = ("text", "excerpt", "segment", "quote", "content", "unit_text", "excerpt_text",
              "segment_text", "answer", "passage", "statement", "message", "msg", "message_text",
              "utterance", "post", "post_text", "tweet", "transcript", "sentence", "body")
# Text column names that also name other things (a response code, a coder's comment): taken as
# the text only when the column holds long, mostly distinct sentences.
TEXT_NAMES_IF_LONG = ("response", "responses", "comment", "comments", "ticket", "description", "reply",
                      "open_answer", "verbatim")
# Per-unit columns that group units or name a coding round: never the unit id while a better
# candidate exists; kept in `CodingData.columns` in wide and long tables.
ROUND_NAMES = ("round", "coding_round", "round_id", "wave", "wave_id", "phase", "session", "iteration", "batch")
CLUSTER_NAMES = ("cluster", "cluster_id", "document", "document_id", "doc", "doc_id", "group", "group_id",
                 "interview", "interview_id", "participant", "participant_id", "respondent",
                 "respondent_id", "speaker", "speaker_id", "thread", "thread_id", "conversation",
                 "conversation_id", "site", "site_id", "source", "file", "author", "author_id",
                 "user", "user_id", "channel", "channel_id")
# Per-unit columns that are never coders in a wide table: kept in `CodingData.columns`.
KEEP_NAMES = ROUND_NAMES + CLUSTER_NAMES + ("notes", "note", "comment", "comments", "memo")
# Free-text columns written beside the codes: per-coder notes in one file per coder.
NOTE_NAMES = ("notes", "note", "comment", "comments", "memo", "memos", "remarks")
# lists of units (a corpus, unit-id lists): the coding tables' names, unit_id first; "response"
# is a text column in a list of units but too ambiguous in coding data
LIST_ID_NAMES = ("unit_id",) + tuple(n for n in UNIT_NAMES if n != "unit_id")
LIST_TEXT_NAMES = TEXT_NAMES + ("response",)
# id-like names beyond the list: msg_id, id_message, post_no, ... (column keys)
_ID_PATTERN = re.compile(r"^(id_.+|.+_id|.+_(no|nr|num|number|key|ref))$")
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
    unit_how: str = ""  # how a unit column that is not a usual name was chosen


def _unique(frame: pd.DataFrame, column: str, coder: str | None) -> bool:
    """Whether the column's non-empty values are unique per row (per coder when `coder` names
    the coder column): what a unit id does and a round or group column does not."""
    values = frame[column]
    keep = values.notna().to_numpy()
    if not keep.any():
        return False
    if coder is None:
        return not values[keep].duplicated().any()
    return not frame.loc[keep, [column, coder]].duplicated().any()


def _unit_like(key: str) -> bool:
    return bool(_ID_PATTERN.match(key)) and key not in CODER_NAMES and key not in KEEP_NAMES


def pick_unit_column(frame: pd.DataFrame, coder: str | None = None) -> tuple[str, str]:
    """The unit-id column of a table and how it was found ("" for a usual name).

    In this order: a usual unit-id name (unit, unit_id, id, excerpt_id, msg_id, ...); a name
    shaped like an id (``*_id``, ``id_*``, ``*_no``, ...) that is not a coder, round or group
    column, preferring one whose values are unique (per coder, when `coder` names the coder
    column); the first column when its values are unique and it is not a round or group column;
    the first other column with unique values ("unique values"); else the first column
    ("first column"). Free-text columns are never the unit id.
    """
    cols = [c for c in frame.columns if c != coder]
    if not cols:
        return frame.columns[0], "first column"
    for name in UNIT_NAMES:
        found = find_column(cols, (name,))
        if found is not None and not is_free_text(frame[found]):
            return found, ""
    shaped = [c for c in cols if _unit_like(column_key(c)) and not is_free_text(frame[c])]
    if len(shaped) == 1:
        return shaped[0], ""
    if shaped:
        return next((c for c in shaped if _unique(frame, c, coder)), shaped[0]), ""
    named = set(KEEP_NAMES) | set(CODER_NAMES) | set(CODE_NAMES) | set(TEXT_NAMES) | set(TEXT_NAMES_IF_LONG)
    first = cols[0]
    if column_key(first) not in named and not is_free_text(frame[first]) and _unique(frame, first, coder):
        return first, "first column"
    for c in cols[1:]:
        if column_key(c) not in named and not is_free_text(frame[c]) and _unique(frame, c, coder):
            return c, "unique values"
    return frame.columns[0], "first column"


def unit_candidates(columns: Iterable[str]) -> list[str]:
    """Columns a person might mean as the unit id (id-like names first), for hints."""
    cols = [str(c) for c in columns]
    named = [c for c in cols if column_key(c) in UNIT_NAMES or _unit_like(column_key(c))]
    return named + [c for c in cols if c not in named and column_key(c) not in KEEP_NAMES + CODER_NAMES + CODE_NAMES]


def unit_column(table: Table, unit: str | None, coder: str | None = None) -> tuple[str, str]:
    """The unit-id column (given, or found by `pick_unit_column`) and how it was found ("" when
    given or by a usual name; else "first column" or "unique values"). `coder` is the coder
    column of a long table, when known (found by name when None)."""
    if unit is not None:
        return require(table, unit, "unit"), ""
    cols = list(table.frame.columns)
    if coder is None or coder not in cols:
        coder = find_column(cols, CODER_NAMES)
    return pick_unit_column(table.frame, coder)


def id_column_by_name(columns: Sequence[str], exclude: Iterable[str] = ()) -> str | None:
    """A unit-id column found by its name alone: a usual name (`LIST_ID_NAMES`), else the first
    id-shaped name that is not a coder, round or group column; None if none."""
    found = find_column(columns, LIST_ID_NAMES, exclude)
    if found is not None:
        return found
    excluded = set(exclude)
    return next((c for c in columns if c not in excluded and _unit_like(column_key(c))), None)


def text_column(frame: pd.DataFrame, names: Sequence[str] = TEXT_NAMES, taken: Iterable[str] = ()) -> str | None:
    """The column holding each unit's text: a usual text name (message, answer, excerpt,
    utterance, ...; ``*_text``) that is not a 0/1 column; a name that may mean other things
    (response, comment, ticket, ...) when it holds long sentences; else the first column of long,
    mostly distinct sentences; None if none."""
    cols = [c for c in frame.columns if c not in set(taken)]
    found = find_column(cols, names)
    if found is None:
        found = next((c for c in cols if column_key(c).endswith("_text")), None)
    if found is not None and not is_binary(frame[found]):
        return found
    for c in cols:
        if column_key(c) in TEXT_NAMES_IF_LONG and is_free_text(frame[c]):
            return c
    for c in cols:
        if is_free_text(frame[c]):
            return c
    return None


def list_unit_column(frame: pd.DataFrame, given: str | None = None, *, where: str | None = None) -> str:
    """The unit-id column of a list of units (a corpus): `given`, a usual or id-shaped name, else
    the first column of unique values that is not a round or group column; an error listing the
    candidates (and the flag) when there is none."""
    if given is not None:
        return given
    columns = [str(c) for c in frame.columns]
    found = id_column_by_name(columns)
    if found is not None:
        return found
    column, how = pick_unit_column(frame)
    if how != "first column" or (column_key(column) not in KEEP_NAMES and _unique(frame, column, None)):
        return column
    raise AgreeError("could not find the unit-id column", where=where, code="no-id-column",
                     hint=f"name it with --unit-col (id_col=...); columns: {', '.join(repr(c) for c in columns)}")


def list_text_column(frame: pd.DataFrame, given: str | None = None, *, taken: Iterable[str] = (),
                     where: str | None = None) -> str:
    """The text column of a list of units: `given`, or found by `text_column` (list names:
    response too); an error listing the candidates (and the flag) when there is none, so that no
    coder is handed a sheet with an empty text column."""
    if given is not None:
        return given
    found = text_column(frame, LIST_TEXT_NAMES, taken)
    if found is not None:
        return found
    candidates = text_candidates(frame, taken)
    listed = (f"columns holding text, longest first: {', '.join(repr(c) for c in candidates[:5])}" if candidates
              else f"columns: {', '.join(repr(str(c)) for c in frame.columns)}")
    raise AgreeError("could not find the column with the units' text", where=where, code="no-text-column",
                     hint=f"name it with --text-col (text_col=...); {listed}")


def text_candidates(frame: pd.DataFrame, taken: Iterable[str] = ()) -> list[str]:
    """Columns that might hold the units' text, longest average text first (for hints)."""
    out = []
    for c in frame.columns:
        if c in set(taken):
            continue
        head = [v for v in frame[c].iloc[:500].tolist() if isinstance(v, str) and v.strip()]
        if head:
            out.append((-sum(map(len, head)) / len(head), str(c)))
    return [c for _, c in sorted(out)]


def _text_column(table: Table, text: str | None, taken: set[str]) -> str | None:
    if text is not None:
        return require(table, text, "text")
    return text_column(table.frame, TEXT_NAMES, taken)


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
    long = layout in ("long", "presence-long")
    coder_col = None
    if long:
        coder_col = require(table, coder, "coder") if isinstance(coder, str) else \
            find_column(cols, CODER_NAMES, {unit} if unit else ())
    unit_col, how = unit_column(table, unit, coder_col)
    kept = _keep_columns(table, keep, required=single_table)
    taken = {unit_col, *kept}
    r = Roles(unit=unit_col, unit_guessed=bool(how), unit_how=how)
    if long:
        r.coder = coder_col if coder_col != unit_col else find_column(cols, CODER_NAMES, taken)
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
    if long:  # a round or group column beside the codes of a long table is a per-unit column
        given = set(as_list(code))
        grouping = [c for c in rest if column_key(c) in ROUND_NAMES + CLUSTER_NAMES and c not in given]
        r.keep = kept + grouping
        rest = [c for c in rest if c not in grouping]
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
