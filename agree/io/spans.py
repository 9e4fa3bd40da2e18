"""Read a span table (CSV, TSV, XLSX, Parquet) into `SpanData`: highlighted passages, one row per
coded span.

Columns
-------
document, coder, code, start, end: found by their usual names (``document``/``doc``/``source``...,
``coder``/``rater``..., ``code``/``label``..., ``start``/``begin``..., ``end``/``stop``...) or named
with the options of :func:`read_spans`. Optional: the document's text (``document_text``; a column
``text`` counts when it holds the same value on every row of a document) and the span's excerpt
(``excerpt``, ``quote``, ``span_text``...; a column ``text`` that varies within a document), used
to check the offsets.

Offsets
-------
`start` and `end` are zero-based. With ``unit="character"`` (the default) they count Unicode code
points of the document's text, the end exclusive: the span is ``text[start:end]``, as Python
slices. ``span_end="inclusive"`` reads tables whose end is the last character of the span
(``text[start:end + 1]``). With ``unit="token"`` they count tokens, the maximal runs of
non-whitespace characters (so "well," is one token), end exclusive in the same way.

Texts
-----
From a folder of text files (`documents_dir`), one per document, named by the document id
(``interview 3.txt`` or exactly ``interview 3``), or from a document-text column. Files are decoded
as UTF-8 from their bytes, without newline translation: a Windows line end (CRLF) counts as two
characters, as it does in the file. A UTF-8 byte-order mark is removed (and reported), so
position 0 is the first character after it. Without texts, spans can still be compared position
by position; each document's length is then its largest span end, and nothing can be checked
against the text.

What is refused and what is left out
------------------------------------
Every problem with a row is an error naming file, sheet, row and column, collected into one
error: a blank document, coder or code, a start or end that is not a whole number, a negative
start, an end before the start, an end past the text, a document without a text file. Empty
spans (start equal to an exclusive end) are left out and counted; a span repeated with the same
coder, code, document, start and end is kept once and counted.

Nested codes
------------
A code written as a path (``emotion/joy``) is a child of ``emotion``: `code_separator` ("/")
splits paths into levels, and every level becomes a code (``SpanData.parents``), so spans can be
rolled up to a parent (``SpanData.roll_up``). ``code_separator=None`` keeps each code flat.
"""

from __future__ import annotations

import os
import zipfile
from dataclasses import replace
from pathlib import Path
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.errors import AgreeError, cell_location
from agree.core.files import record_input
from agree.core.model import ReadReport, normalise_value
from agree.core.spans import CODE_PATH_SEPARATOR, UNITS, SpanData, token_bounds
from agree.io.columns import CODER_NAMES, find_column
from agree.io.loaders import header_rows, load_tables

__all__ = ["read_spans", "span_input", "spans_from_table", "assemble_spans", "decode_text", "code_tree", "has_astral", "SPAN_ENDS", "COVERAGES"]

SPAN_ENDS = ("exclusive", "inclusive")
COVERAGES = ("inferred", "declared")

DOCUMENT_NAMES = ("document", "document_id", "doc", "doc_id", "document_name", "source", "source_id",
                  "file", "filename", "file_name", "interview", "interview_id", "transcript")
SPAN_CODE_NAMES = ("code", "code_path", "code_name", "label", "category", "tag", "codes")
START_NAMES = ("start", "start_offset", "begin", "start_position", "startposition", "start_char",
               "offset_start", "from")
END_NAMES = ("end", "end_offset", "stop", "end_position", "endposition", "end_char", "offset_end", "to")
DOCUMENT_TEXT_NAMES = ("document_text", "doc_text", "full_text", "document_content", "source_text")
EXCERPT_NAMES = ("excerpt", "quote", "span_text", "selected_text", "selection", "coded_text", "highlight",
                 "passage", "segment_text")
SHOWN = 5  # examples named in a note
MAX_PROBLEMS = 20  # problems kept in one collected error


# -- shared by the span readers --------------------------------------------------------------
def decode_text(raw: bytes, where: str) -> tuple[str, bool]:
    """Plain text from the bytes of a text file: UTF-8, no newline translation (CRLF stays two
    characters). Returns the text and whether a byte-order mark was removed."""
    bom = raw.startswith(b"\xef\xbb\xbf")
    try:
        return raw[3 if bom else 0:].decode("utf-8"), bom
    except UnicodeDecodeError as exc:
        raise AgreeError(f"the text is not UTF-8 (byte {exc.start} cannot be decoded)", where=where,
                         hint="save the text as UTF-8; positions count the characters of the UTF-8 text",
                         code="encoding") from None


def text_notes(documents: Sequence[str], texts: Sequence[str | None], boms: Sequence[bool]) -> list[str]:
    """What the reader chose about line ends, byte-order marks and characters outside the BMP."""
    notes = []
    crlf = [d for d, t in zip(documents, texts) if t is not None and "\r\n" in t]
    if crlf:
        notes.append(f"{len(crlf)} text(s) have Windows line ends (CRLF), each counted as two characters as in "
                     f"the file ({_names(crlf)})")
    bom = [d for d, b in zip(documents, boms) if b]
    if bom:
        notes.append(f"{len(bom)} text file(s) begin with a byte-order mark, removed: position 0 is the first "
                     f"character after it ({_names(bom)})")
    wide = [d for d, t in zip(documents, texts) if t is not None and has_astral(t)]
    if wide:
        notes.append(f"{len(wide)} text(s) hold characters outside the Basic Multilingual Plane (emoji, rare "
                     f"scripts), each counted as one position (one code point); software that counts UTF-16 "
                     f"units counts them as two ({_names(wide)})")
    return notes


def has_astral(text: str) -> bool:
    """Whether the text holds characters outside the Basic Multilingual Plane (two UTF-16 units)."""
    return not text.isascii() and len(text.encode("utf-16-le")) != 2 * len(text)


def _names(items: Sequence[str], shown: int = SHOWN) -> str:
    out = ", ".join(f"'{x}'" for x in items[:shown])
    return out + (f" and {len(items) - shown} more" if len(items) > shown else "")


def code_tree(names: Sequence[str], separator: str | None = CODE_PATH_SEPARATOR
              ) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    """Codes and their parents from code names written as paths ("emotion/joy").

    Returns the codes (every level of every path, parents before children, sorted level by level),
    the parent index of each code (-1 at the top) and the index of each name in the codes."""
    if separator is None:
        codes = tuple(sorted(set(names)))
        lookup = {c: i for i, c in enumerate(codes)}
        return codes, np.full(len(codes), -1, np.int64), np.array([lookup[n] for n in names], np.int64)
    paths = {}
    for name in set(names):
        parts = tuple(p.strip() for p in name.split(separator))
        if any(not p for p in parts):
            raise AgreeError(f"the code '{name}' has an empty level between '{separator}' separators",
                             hint="write nested codes as 'parent/child', or set code_separator=None to keep "
                                  "codes flat", code="bad-code")
        paths[name] = parts
    every = sorted({parts[:k] for parts in paths.values() for k in range(1, len(parts) + 1)})
    index = {p: i for i, p in enumerate(every)}
    codes = tuple(separator.join(p) for p in every)
    parents = np.array([index[p[:-1]] if len(p) > 1 else -1 for p in every], np.int64)
    return codes, parents, np.array([index[paths[n]] for n in names], np.int64)


def first_occurrences(*keys: np.ndarray) -> np.ndarray:
    """Bool mask: True at the first row of each distinct combination of `keys`."""
    keep = np.ones(len(keys[0]), dtype=bool)
    if len(keep) < 2:
        return keep
    order = np.lexsort(keys[::-1])  # stable: among equal keys the earliest row comes first
    same = np.ones(len(order) - 1, dtype=bool)
    for k in keys:
        ks = k[order]
        same &= ks[1:] == ks[:-1]
    keep[order[1:][same]] = False
    return keep


def assemble_spans(*, documents: Sequence[str], texts: Sequence[str | None], lengths: np.ndarray,
                   coders: Sequence[str], codes: Sequence[str], parents: np.ndarray, doc: np.ndarray,
                   coder: np.ndarray, code: np.ndarray, start: np.ndarray, end: np.ndarray, unit: str,
                   coverage: str = "inferred", coded: np.ndarray | None = None,
                   source_rows: np.ndarray | None = None, span_ids: np.ndarray | None = None,
                   **guids: Any) -> tuple[SpanData, np.ndarray]:
    """`SpanData` from valid span arrays: repeated spans (same document, coder, code, start and
    end) kept once; `coded` inferred from the spans unless given (or "declared": every coder
    coded every document). Returns the data and the indices of the repeats left out."""
    doc, coder, code = (np.asarray(a, np.int64) for a in (doc, coder, code))
    start, end = np.asarray(start, np.int64), np.asarray(end, np.int64)
    keep = first_occurrences(doc, coder, code, start, end)
    repeats = np.flatnonzero(~keep)
    D, m = len(documents), len(coders)
    if coded is None:
        coded = np.zeros((D, m), dtype=bool)
        if coverage == "declared":
            coded[:] = True
        else:
            coded[doc[keep], coder[keep]] = True
    data = SpanData(
        documents=tuple(documents), texts=tuple(texts), lengths=lengths, coders=tuple(coders),
        codes=tuple(codes), parents=parents, doc=doc[keep], coder=coder[keep], code=code[keep],
        start=start[keep], end=end[keep], coded=coded, coverage=coverage, unit=unit,
        source_rows=None if source_rows is None else np.asarray(source_rows)[keep],
        span_ids=None if span_ids is None else np.asarray(span_ids, dtype=object)[keep], **guids)
    return data, repeats


def check_choice(value: Any, allowed: Sequence[str], option: str) -> str:
    if value not in allowed:
        raise AgreeError(f"{option} must be one of {', '.join(repr(a) for a in allowed)}; got {value!r}",
                         code="bad-option")
    return value


class Problems:
    """Problems with rows, collected so that the user sees them all at once."""

    def __init__(self, what: str):
        self.what = what
        self.items: list[AgreeError] = []
        self.count = 0

    def add(self, message: str, *, where: str, hint: str, code: str) -> None:
        self.count += 1
        if len(self.items) < MAX_PROBLEMS:
            self.items.append(AgreeError(message, where=where, hint=hint, code=code))

    def raise_any(self) -> None:
        if not self.count:
            return
        if self.count == 1:
            raise self.items[0]
        first = self.items[0]
        raise AgreeError(f"{self.count} problems in the {self.what}; first: {first.message}", hint=first.hint,
                         where=first.where, code=first.code, problems=self.items)


# -- the span table ----------------------------------------------------------------------------
def _ids(col: pd.Series) -> tuple[np.ndarray, np.ndarray, int]:
    """Cell values as stripped text: (index per cell, -1 for blank; distinct values; cells changed
    by stripping)."""
    fcodes, uniques = pd.factorize(col, use_na_sentinel=True)
    fcodes = np.asarray(fcodes, np.int64)
    texts = []
    for u in uniques:
        v = normalise_value(u)
        texts.append(None if v is None else (v.isoformat() if hasattr(v, "isoformat") else str(v)))
    stripped = [None if t is None or not t.strip() else t.strip() for t in texts]
    counts = np.bincount(fcodes[fcodes >= 0], minlength=len(uniques))
    changed = int(sum(c for t, s, c in zip(texts, stripped, counts) if s is not None and s != t))
    distinct = list(dict.fromkeys(s for s in stripped if s is not None))
    lookup = {s: i for i, s in enumerate(distinct)}
    local = np.array([lookup[s] if s is not None else -1 for s in stripped] + [-1], np.int64)
    return local[fcodes], np.array(distinct, dtype=object), changed


def _whole_numbers(col: pd.Series) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, blank mask, not-a-whole-number mask)."""
    raw = col.map(lambda v: v.strip() if isinstance(v, str) else v)
    blank = raw.map(lambda v: normalise_value(v) is None).to_numpy(dtype=bool)
    numbers = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
    bad = ~blank & (~np.isfinite(numbers) | (np.round(numbers) != numbers))
    values = np.where(blank | bad, 0, numbers).astype(np.int64)
    return values, blank, bad


def _find(table_columns: list[str], given: str | None, names: Sequence[str], what: str, where: str,
          taken: set[str], option: str) -> str:
    if given is not None:
        if given not in table_columns:
            raise AgreeError(f"there is no {what} column '{given}'", where=where, code="no-column",
                             hint="columns: " + ", ".join(repr(c) for c in table_columns))
        return given
    found = find_column(table_columns, names, taken)
    if found is None:
        raise AgreeError(f"no {what} column found", where=where, code="no-column",
                         hint=f"name it with {option} (columns: {', '.join(repr(c) for c in table_columns)})")
    return found


PROJECT_SUFFIXES = (".qdpx", ".qde")
_PROJECT_XML = (b"<Project", b"urn:QDA-XML:project")


def span_input(path: str | os.PathLike, *, sheet: Any = None) -> str | None:
    """What a file holds, told by its content: "project" (a REFI-QDA project: a zip archive
    holding a ``.qde`` entry, or project XML; a ``.qdpx`` or ``.qde`` name counts too, so that
    `agree.io.refi.read_project` explains a damaged one), "span table" (a table whose header has
    a document, a start and an end column by their usual names, see the module docstring), or
    None: anything else (a coding sheet), including files the ordinary readers will refuse with
    their own message. Reads the header only, where the format allows (`header_rows`)."""
    p = Path(path)
    if not p.is_file():
        return None
    if p.suffix.lower() in PROJECT_SUFFIXES:
        return "project"
    with open(p, "rb") as fh:
        head = fh.read(4096)
    if head.startswith(b"PK"):
        try:
            with zipfile.ZipFile(p) as zf:
                if any(n.lower().endswith(".qde") for n in zf.namelist()):
                    return "project"
        except (zipfile.BadZipFile, OSError, ValueError, EOFError):
            return None
    elif head.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"<"):
        return "project" if any(mark in head for mark in _PROJECT_XML) else None
    try:
        headers = header_rows(p, sheet=sheet)
    except AgreeError:
        return None
    for names in headers:
        columns = [c for c in names if c]
        if all(find_column(columns, names_) is not None for names_ in (DOCUMENT_NAMES, START_NAMES, END_NAMES)):
            return "span table"
    return None


def read_spans(path: str | os.PathLike, *, documents_dir: str | os.PathLike | None = None,
               document: str | None = None, coder: str | None = None, code: str | None = None,
               start: str | None = None, end: str | None = None, text: str | None = None,
               excerpt: str | None = None, sheet: str | int | None = None, span_end: str = "exclusive",
               unit: str = "character", coverage: str = "inferred",
               code_separator: str | None = CODE_PATH_SEPARATOR) -> SpanData:
    """Read a table of coded spans (one row per span and code) into `SpanData`.

    Parameters
    ----------
    path : a .csv, .tsv, .txt, .xlsx or .parquet file.
    documents_dir : a folder with one plain-text file per document, named by the document id
        (``<id>.txt`` or exactly ``<id>``). Files in it that no span refers to are read too: they
        are documents nobody marked.
    document, coder, code, start, end : column names overriding detection.
    text : a column holding each document's whole text (the same on every row of a document,
        or blank on all but one), used when there is no `documents_dir`.
    excerpt : a column with each span's text, checked against the document text.
    sheet : the worksheet of a workbook (by default every sheet with data, all with the same columns).
    span_end : "exclusive" (the end is the first position after the span, ``text[start:end]``)
        or "inclusive" (the end is the span's last position).
    unit : "character" (Unicode code points) or "token" (maximal runs of non-whitespace).
    coverage : "inferred" (a coder coded a document where they marked a span in it) or
        "declared" (every coder coded every document read, in full).
    code_separator : splits code paths into nested levels ("/"); None keeps codes flat.

    Returns
    -------
    SpanData
        with ``report`` (what was detected, read, used and left out, and why) and ``source_rows``
        (the spreadsheet row of each span).

    Raises
    ------
    AgreeError
        naming file, sheet, row and column for every bad row, collected into one error.
    """
    check_choice(span_end, SPAN_ENDS, "span_end")
    check_choice(unit, UNITS, "unit")
    check_choice(coverage, COVERAGES, "coverage")
    name = str(path)
    tables, loaded = load_tables(Path(path), sheet=sheet, name=name)
    first = tables[0]
    where = first.where(1)
    columns = list(first.frame.columns)
    taken: set[str] = set()
    roles = {}
    for role, given, names, option in (
            ("document", document, DOCUMENT_NAMES, "document="), ("coder", coder, CODER_NAMES, "coder="),
            ("code", code, SPAN_CODE_NAMES, "code="), ("start", start, START_NAMES, "start="),
            ("end", end, END_NAMES, "end=")):
        roles[role] = _find(columns, given, names, role, where, taken, option)
        taken.add(roles[role])
    text_col = _find(columns, text, (), "document text", where, taken, "text=") if text else \
        find_column(columns, DOCUMENT_TEXT_NAMES, taken)
    excerpt_col = _find(columns, excerpt, (), "excerpt", where, taken, "excerpt=") if excerpt else \
        find_column(columns, EXCERPT_NAMES, taken | {text_col})
    plain = find_column(columns, ("text",), taken | {text_col, excerpt_col})
    for t in tables[1:]:
        missing = [c for c in [*roles.values(), text_col, excerpt_col] if c is not None and c not in t.frame.columns]
        if missing:
            raise AgreeError(f"the sheet has no column '{missing[0]}' (the first sheet has it)", where=t.where(1),
                             hint="every sheet must have the same columns, or choose one with sheet=",
                             code="no-column")

    problems = Problems("span table")
    frames = [t.frame for t in tables]
    rows = np.concatenate([t.rows for t in tables])
    table_of = np.concatenate([np.full(len(t.frame), i) for i, t in enumerate(tables)])

    def place(i: int, column: str) -> str:
        t = tables[int(table_of[i])]
        return cell_location(t.file, t.sheet, int(rows[i]), column)

    def col(c: str) -> pd.Series:
        return pd.concat([f[c] for f in frames], ignore_index=True) if len(frames) > 1 else frames[0][c]

    ids = {}
    stripped = 0
    for role in ("document", "coder", "code"):
        idx, values, changed = _ids(col(roles[role]))
        stripped += changed
        ids[role] = (idx, values)
        for i in np.flatnonzero(idx < 0):
            problems.add(f"the {role} is blank", where=place(i, roles[role]), code=f"blank-{role}",
                         hint=f"every span needs a {role}; fill the cell or delete the row")
    numbers = {}
    for role in ("start", "end"):
        values, blank, bad = _whole_numbers(col(roles[role]))
        numbers[role] = values
        for i in np.flatnonzero(blank | bad):
            problems.add(f"the {role} is {'blank' if blank[i] else 'not a whole number'}",
                         where=place(i, roles[role]), code="bad-offset",
                         hint="offsets are zero-based whole numbers of characters (or tokens with unit='token')")
    s, e = numbers["start"], numbers["end"].copy()
    if span_end == "inclusive":
        e = e + 1
    valid = np.ones(len(s), dtype=bool)
    for role in ("document", "coder", "code"):
        valid &= ids[role][0] >= 0
    for i in np.flatnonzero(valid & (s < 0)):
        problems.add(f"the start {s[i]} is negative", where=place(i, roles["start"]), code="bad-offset",
                     hint="offsets count from 0, the first character of the document")
    for i in np.flatnonzero(valid & (s >= 0) & (e < s)):
        problems.add(f"the end {numbers['end'][i]} is before the start {s[i]}", where=place(i, roles["end"]),
                     code="bad-offset", hint="check that the start and end columns are not swapped")

    # documents and their texts
    doc_idx, doc_names = ids["document"]
    documents = [str(d) for d in doc_names]
    texts: list[str | None] = [None] * len(documents)
    boms = [False] * len(documents)
    notes: list[str] = list(loaded.notes)
    left_out: list[str] = list(loaded.left_out)
    source = "no texts"
    if documents_dir is not None:
        folder = Path(documents_dir)
        if not folder.is_dir():
            raise AgreeError("the documents folder does not exist", where=str(folder), code="file-not-found",
                             hint="give the folder that holds one text file per document")
        files = {p.name: p for p in sorted(folder.iterdir()) if p.is_file() and not p.name.startswith(".")}
        by_lower: dict[str, Path] = {}
        for n, p in files.items():
            by_lower.setdefault(n.lower(), p)
        used: set[str] = set()
        for d, doc_name in enumerate(documents):
            p = files.get(doc_name) or files.get(doc_name + ".txt") or by_lower.get(doc_name.lower()) \
                or by_lower.get(doc_name.lower() + ".txt")
            if p is None:
                i = int(np.flatnonzero(doc_idx == d)[0])
                problems.add(f"unknown document '{doc_name}': no text file for it in {folder}",
                             where=place(i, roles["document"]), code="unknown-document",
                             hint=f"name the file '{doc_name}.txt' (files there: {_names(sorted(files), 3)})")
                continue
            used.add(p.name)
            record_input(p)
            texts[d], boms[d] = decode_text(p.read_bytes(), str(p))
        extra = [n for n in files if n not in used and n.lower().endswith(".txt")]
        for n in extra:
            documents.append(n[:-4])
            record_input(files[n])
            texts.append(decode_text(files[n].read_bytes(), str(files[n]))[0])
            boms.append(False)
        if extra:
            notes.append(f"{len(extra)} text file(s) in the documents folder have no spans: read as documents "
                         f"nobody marked ({_names(extra)})")
        other = [n for n in files if n not in used and not n.lower().endswith(".txt")]
        if other:
            left_out.append(f"{len(other)} file(s) in the documents folder are not .txt files and match no "
                            f"document: not read ({_names(other)})")
        source = f"texts from the folder {folder} ({len(used) + len(extra)} files)"
    if text_col is None and plain is not None:
        text_col, excerpt_col = _text_or_excerpt(col(plain), doc_idx, e, plain, excerpt_col)
    if documents_dir is not None and text_col is not None:
        left_out.append(f"the document-text column '{text_col}' is not used: the texts come from the folder")
    elif text_col is not None:
        source = f"texts from the column '{text_col}'"
        _texts_from_column(col(text_col), doc_idx, texts, problems, place, text_col)
    problems.raise_any()

    # offsets against the texts
    if unit == "token":
        lengths = np.array([len(token_bounds(t)[0]) if t is not None else -1 for t in texts], np.int64)
    else:
        lengths = np.array([len(t) if t is not None else -1 for t in texts], np.int64)
    dlen = lengths[doc_idx]
    for i in np.flatnonzero((dlen >= 0) & (e > dlen)):
        shown = numbers["end"][i]
        problems.add(f"the end {shown} is past the end of document '{documents[doc_idx[i]]}' "
                     f"({dlen[i]} {unit}s)", where=place(i, roles["end"]), code="bad-offset",
                     hint=("ends are exclusive by default; with inclusive ends use span_end='inclusive'"
                           if span_end == "exclusive" else "check the end, and that this is the right text"))
    problems.raise_any()
    empty = e == s
    if empty.any():
        left_out.append(f"{int(empty.sum())} empty span(s) (start equal to the exclusive end) left out, rows "
                        f"{_rows(rows[empty])}")
    keep = ~empty
    if (lengths < 0).any():
        longest = np.zeros(len(documents), np.int64)
        np.maximum.at(longest, doc_idx[keep], e[keep])
        lengths = np.where(lengths < 0, longest, lengths)
        if source == "no texts":
            notes.append("no document texts (no documents_dir, no text column): each document's length is taken "
                         "as its largest span end; passages cannot be shown and offsets cannot be checked")
    if excerpt_col is not None and unit == "character":
        notes += _check_excerpts(col(excerpt_col), texts, doc_idx, s, e, keep, rows, excerpt_col, span_end)
    notes += text_notes(documents, texts, boms)

    coder_names = [str(c) for c in ids["coder"][1]]
    code_names = [str(c) for c in ids["code"][1]]
    codes, parents, code_index = code_tree(code_names, code_separator)
    data, repeats = assemble_spans(
        documents=documents, texts=texts, lengths=lengths, coders=coder_names, codes=codes, parents=parents,
        doc=doc_idx[keep], coder=ids["coder"][0][keep], code=code_index[ids["code"][0][keep]], start=s[keep],
        end=e[keep], unit=unit, coverage=coverage, source_rows=rows[keep])
    if len(repeats):
        left_out.append(f"{len(repeats)} repeated span(s) (same document, coder, code, start and end) counted "
                        f"once, rows {_rows(rows[keep][repeats])}")
    if stripped:
        notes.append(f"spaces around {stripped} document, coder or code name(s) removed")
    nested = int((parents >= 0).sum())
    if nested:
        notes.append(f"codes nested by '{code_separator}' in their names: {len(codes)} codes, {nested} of them "
                     f"below a parent")
    if coverage == "declared":
        notes.append("coverage declared: every coder coded every document in full")
    else:
        notes.append("which coder coded which document is inferred from the spans (coverage='inferred')")
    offsets = (f"zero-based {unit} offsets, end {span_end}" +
               (", read as exclusive (end + 1)" if span_end == "inclusive" else ""))
    n_codes = len(set(data.code.tolist()))
    detected = (f"span table: {data.n_spans:,} span{'s' * (data.n_spans != 1)} by {data.n_coders} "
                f"coder{'s' * (data.n_coders != 1)} over {data.n_documents} document"
                f"{'s' * (data.n_documents != 1)} with {n_codes} code{'s' * (n_codes != 1)}; columns "
                f"'{roles['document']}', '{roles['coder']}', '{roles['code']}', '{roles['start']}', "
                f"'{roles['end']}'; {offsets}; {source}")
    if excerpt_col is not None:
        detected += f"; excerpts in '{excerpt_col}' checked"
    report = ReadReport(detected=detected, files=(name,), units_read=len(documents),
                        values_read=int(len(s)), values_missing=0, notes=tuple(notes),
                        left_out=tuple(left_out), checksums=dict(loaded.checksums))
    return replace(data, report=report)


def _rows(rows: np.ndarray, shown: int = 10) -> str:
    listed = ", ".join(str(int(r)) for r in rows[:shown])
    return listed + (f" and {len(rows) - shown} more" if len(rows) > shown else "")


def _text_or_excerpt(values: pd.Series, doc_idx: np.ndarray, end: np.ndarray, column: str,
                     excerpt_col: str | None) -> tuple[str | None, str | None]:
    """A column named 'text': the document's text when it never varies within a document and
    reaches every span's end, else each span's excerpt."""
    frame = pd.DataFrame({"doc": doc_idx, "end": end, "text": values.where(values.notna(), None)})
    frame = frame[(frame["doc"] >= 0) & frame["text"].map(lambda v: isinstance(v, str) and v != "")]
    if len(frame) and frame.groupby("doc")["text"].nunique().max() == 1 \
            and (frame["text"].str.len() >= frame["end"]).all():
        return column, excerpt_col
    return None, excerpt_col or column


def _texts_from_column(values: pd.Series, doc_idx: np.ndarray, texts: list, problems: Problems, place,
                       column: str) -> None:
    for i, (d, v) in enumerate(zip(doc_idx, values)):
        if d < 0 or not isinstance(v, str) or v == "":
            continue
        if texts[d] is None:
            texts[d] = v
        elif texts[d] != v:
            problems.add("the document text differs from the one given on an earlier row of this document",
                         where=place(i, column), code="conflicting-text",
                         hint="give each document's whole text, the same on every row (or on one row only)")


def _check_excerpts(values: pd.Series, texts: list, doc_idx: np.ndarray, s: np.ndarray, e: np.ndarray,
                    keep: np.ndarray, rows: np.ndarray, column: str, span_end: str) -> list[str]:
    checked, wrong, fits_other = 0, [], 0
    for i, v in enumerate(values):
        t = texts[doc_idx[i]]
        if not keep[i] or t is None or not isinstance(v, str) or v == "":
            continue
        checked += 1
        piece = t[s[i]:e[i]]
        if piece == v or piece == (v[1:] if v.startswith("'") else v):
            continue
        wrong.append(rows[i])
        other = t[s[i]:e[i] - 1] if span_end == "inclusive" else t[s[i]:e[i] + 1]
        fits_other += other == v
    if not wrong:
        return [f"excerpts in '{column}' match the text at the offsets ({checked} checked)"] if checked else []
    note = (f"warning: {len(wrong)} of {checked} excerpts in '{column}' differ from the text at their offsets "
            f"(rows {_rows(np.array(wrong))})")
    if fits_other > len(wrong) / 2:
        other = "inclusive" if span_end == "exclusive" else "exclusive"
        note += f"; {fits_other} of them match with {other} ends (span_end='{other}')"
    return [note]



def spans_from_table(table: pd.DataFrame, *, like: SpanData) -> SpanData:
    """`SpanData` from a table of spans (columns document, coder, code, start, end; end exclusive,
    in `like`'s unit) over the documents and codes of `like` (their texts, nesting and GUIDs), for
    example the consensus spans of a reconciliation, to be written back with `write_project`.
    Coders come from the table, in order of appearance; repeated rows count once."""
    missing = [c for c in ("document", "coder", "code", "start", "end") if c not in table.columns]
    if missing:
        raise AgreeError(f"the span table has no column {missing[0]!r}", code="no-column",
                         hint="columns: document, coder, code, start, end")
    doc_index = {d: i for i, d in enumerate(like.documents)}
    code_index = {c: i for i, c in enumerate(like.codes)}
    for column, lookup, what in (("document", doc_index, "document"), ("code", code_index, "code")):
        unknown = sorted(set(map(str, table[column])) - set(lookup))
        if unknown:
            raise AgreeError(f"unknown {what}(s) in the span table: {_names(unknown)}", code=f"unknown-{what}",
                             hint=f"the spans must use the {what}s of the data they came from")
    coders = list(dict.fromkeys(map(str, table["coder"])))
    coder_index = {c: i for i, c in enumerate(coders)}
    start = table["start"].to_numpy(np.int64)
    end = table["end"].to_numpy(np.int64)
    data, _ = assemble_spans(
        documents=like.documents, texts=like.texts, lengths=like.lengths, coders=coders, codes=like.codes,
        parents=like.parents, doc=[doc_index[str(d)] for d in table["document"]],
        coder=[coder_index[str(c)] for c in table["coder"]], code=[code_index[str(c)] for c in table["code"]],
        start=start, end=end, unit=like.unit, document_guids=like.document_guids, code_guids=like.code_guids)
    return data
