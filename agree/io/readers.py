"""Read coding tables (CSV, TSV, XLSX, Parquet) into `CodingData`.

One entry point, :func:`read`, takes one or more files and works out how the coding was laid
out; arguments override every guess. Four layouts are understood:

wide
    one row per unit: a unit-id column, one column per coder, optionally a column with the
    unit's text and other per-unit columns (a round, a cluster, a document).
long
    one row per (unit, coder): a unit column, a coder column and a code column.
per-coder
    one file (or one worksheet) per coder, each with a unit column and a code column; the
    coder is named after the file stem or the sheet name; files are merged on the unit id.
presence
    one 0/1 column per code, per coder: long rows ``unit, coder, code_A, code_B, ...`` or one
    file/sheet per coder with ``unit, code_A, code_B, ...``. Each coder's value is the set of
    codes marked 1.

Missing values
--------------
An empty cell means *the coder did not code the unit* (missing). In a presence/absence
matrix, a row with at least one 0 or 1 means the coder coded the unit; codes left blank on
such a row count as not applied (0); a row of zeros is the empty set (coded, no code applied);
an all-blank row is missing. In the other layouts there is no way to write "coded, but no
code applied" in a single cell: an empty cell is missing. Use the presence layout when that
distinction matters. Cells holding only spaces count as empty.

Several codes in one cell
-------------------------
When a text cell contains the separator (``sep``, ``;`` by default) every value becomes a set
of codes (``CodingData.set_valued``). Spaces around each code are removed and empty pieces
(``"a;;b"``, a trailing ``;``) are ignored. The notes say how many cells held several codes and
where the first are; when they are under 5% of the coded cells the note is a warning (a slip
in a few cells changes every coefficient). ``sep=None`` (``--sep ''``) never splits.

Refused and checked
-------------------
A consensus file written by ``agree reconcile`` (a ``final code`` column, or a ``source``
column of consensus sources) is refused unless the coder columns are named: agreement is
computed on the coders' independent codes. At the ordinal level without a codebook, text among
numbers (``NA`` among 1..5) is an error, as at the interval and ratio levels; at the nominal
level text such as ``NA`` among numbers is read as a code, with a warning. With one file per
coder, a kept per-unit column must give a unit the same value in every coder's file.

Rows
----
Row numbers are counted the way a spreadsheet counts them: the header is row 1, the first data
row is row 2. Blank lines inside a CSV file are skipped by the CSV parser, so row numbers after
a blank line are one lower than the line number; a blank row inside a worksheet is counted.
For Parquet the numbering is the same as if the table were saved as a spreadsheet.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
import os
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd

from agree.core.cells import PROTECTED_PATTERN
from agree.core.files import record_input, sha256_file
from agree.core.model import (
    LEVELS,
    MISSING,
    AgreeError,
    CodingData,
    Provenance,
    ReadReport,
    cell_location,
    normalise_value,
    value_sort_key,
)
from agree.io.codebook import Codebook, codebook_from, read_codebook

__all__ = ["read", "read_codebook", "Codebook", "LAYOUTS"]
# Exported by the package as `agree.read`, `agree.read_codebook` and `agree.Codebook`.

LAYOUTS = ("wide", "long", "per-coder", "presence")

TEXT_EXTENSIONS = {".csv": None, ".tsv": "\t", ".txt": None}
WORKBOOK_EXTENSIONS = {".xlsx", ".xlsm"}
PARQUET_EXTENSIONS = {".parquet", ".pq"}

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
MULTI_SHOWN = 3  # cells with several codes named in the note
MULTI_WARNING_SHARE = 0.05  # below this share of coded cells, several codes per cell is a warning
# Free-text columns written beside the codes: per-coder notes in one file per coder.
NOTE_NAMES = ("notes", "note", "comment", "comments", "memo", "memos", "remarks")
MISSING_LOOKALIKES = {"na", "n/a", "nan", "null", "none", "-", "missing"}

_MAGIC_ZIP = b"PK\x03\x04"
_MAGIC_OLE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_MAGIC_PARQUET = b"PAR1"
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


# -- tables: what a file holds, before any layout is applied ------------------------------
@dataclass(eq=False)
class _Table:
    """One header + rows block: a CSV/Parquet file or one worksheet."""

    file: str
    sheet: str | None
    frame: pd.DataFrame  # columns are the (stripped) header names, values raw
    rows: np.ndarray  # spreadsheet row number of each frame row
    letters: bool = False  # spreadsheet column letters exist (workbooks)
    name: str = ""  # the coder's name when the table holds one coder's coding

    def where(self, row: int | None = None, column: str | None = None) -> str:
        return cell_location(self.file, self.sheet, row, column)


@dataclass
class _Loaded:
    tables: list[_Table]
    notes: list[str] = field(default_factory=list)
    left_out: list[str] = field(default_factory=list)
    checksums: dict[str, str] = field(default_factory=dict)


def _column_label(position: int, letters: bool) -> str:
    """'column 3 (C)' for workbooks, 'column 3' otherwise (1-based position)."""
    if not letters:
        return f"column {position}"
    n, name = position, ""
    while n:
        n, r = divmod(n - 1, 26)
        name = chr(65 + r) + name
    return f"column {position} ({name})"


def _sniff(head: bytes) -> str:
    if head.startswith(_MAGIC_ZIP):
        return "zip"
    if head.startswith(_MAGIC_OLE):
        return "ole"
    if head.startswith(_MAGIC_PARQUET):
        return "parquet"
    return "text" if _looks_like_text(head) else "binary"


def _looks_like_text(head: bytes) -> bool:
    """Whether the first bytes read as delimited text: few control or undecodable characters,
    and a delimiter or a line break somewhere."""
    encodings = ("utf-16",) if head[:2] in (b"\xff\xfe", b"\xfe\xff") else ("utf-8", "cp1252")
    for encoding in encodings:
        text = head.decode(encoding, errors="replace")
        bad = sum(1 for ch in text if ch == "\ufffd" or (ord(ch) < 32 and ch not in "\t\n\r\f"))
        if text and bad <= 0.05 * len(text) and any(mark in text for mark in (",", ";", "\t", "\n")):
            return True
    return False


_CONTENT_NAMES = {
    "zip": ("an Excel workbook (zip container)", "rename it to .xlsx"),
    "ole": ("an old-format or password-protected Excel file", "save it as a plain .xlsx workbook"),
    "parquet": ("a Parquet file", "rename it to .parquet"),
    "text": ("plain text (CSV-like)", "rename it to .csv"),
    "binary": ("binary data, neither a workbook nor delimited text", "check that this is the file you meant"),
}


def _wrong_content(file: str, expected: str, kind: str) -> AgreeError:
    what, hint = _CONTENT_NAMES[kind]
    return AgreeError(f"the file is not {expected}: its content is {what}", hint=hint, where=file,
                      code="wrong-extension")


def load_file(path: Path, *, sheet: Any, name: str, sheet_option: str = "--sheet (sheet=...)") -> _Loaded:
    ext = path.suffix.lower()
    if ext == ".xls":
        raise AgreeError("the old .xls format is not supported", where=name,
                         hint="save the workbook as .xlsx (or export a CSV)", code="unsupported-format")
    if ext not in TEXT_EXTENSIONS and ext not in WORKBOOK_EXTENSIONS and ext not in PARQUET_EXTENSIONS:
        known = ", ".join(sorted({*TEXT_EXTENSIONS, *WORKBOOK_EXTENSIONS, *PARQUET_EXTENSIONS}))
        raise AgreeError(f"unsupported file type '{ext or '(none)'}'", where=name,
                         hint=f"use one of {known}", code="unsupported-format")
    if not path.exists():
        raise AgreeError("file not found", where=name, hint="check the path and the file name",
                         code="file-not-found")
    if path.is_dir():
        raise AgreeError("this is a folder, not a file", where=name, hint="name the files inside it",
                         code="file-not-found")
    record_input(path)       # an input of this run: no output of the run may replace it
    if path.stat().st_size == 0:
        raise AgreeError("the file is empty", where=name, hint="check that the file was saved",
                         code="empty-file")
    with open(path, "rb") as fh:
        head = fh.read(4096)
    kind = _sniff(head)
    if ext in WORKBOOK_EXTENSIONS:
        if kind == "ole":
            raise AgreeError("the workbook is password-protected (encrypted) or in an old format",
                             where=name, code="encrypted-workbook",
                             hint="open it, remove the password and save it again as .xlsx")
        if kind != "zip":
            raise _wrong_content(name, "an Excel workbook", kind)
        return _load_workbook(path, sheet=sheet, name=name)
    if sheet is not None:
        what = "a Parquet file" if ext in PARQUET_EXTENSIONS else "a text (CSV/TSV) file"
        raise AgreeError(f"{sheet_option} was given, but this is {what}: it has no worksheets",
                         where=name, code="bad-option",
                         hint="--sheet applies to .xlsx workbooks only; leave it out for CSV, TSV and "
                              "Parquet files")
    if ext in PARQUET_EXTENSIONS:
        if kind != "parquet":
            raise _wrong_content(name, "a Parquet file", kind)
        return _load_parquet(path, name=name)
    if kind != "text":
        raise _wrong_content(name, "a text (CSV/TSV) file", kind)
    return _load_text(path, delimiter=TEXT_EXTENSIONS[ext], name=name)


# -- text files ---------------------------------------------------------------------------
def _decode(raw: bytes, name: str) -> tuple[bytes, str | None]:
    """Return UTF-8 bytes (no BOM) and a note when the file was not UTF-8."""
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    elif raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return raw.decode("utf-16").encode("utf-8"), "read as UTF-16"
        except UnicodeDecodeError as exc:
            raise AgreeError(f"the file starts like UTF-16 but byte {exc.start} is not valid UTF-16",
                             where=name, hint="save it again as CSV UTF-8", code="encoding") from None
    try:
        raw.decode("utf-8")
        return raw, None
    except UnicodeDecodeError as exc:
        first_bad = exc.start
    if b"\x00" in raw[:4096]:
        raise AgreeError("the file is not text in a known encoding (it contains zero bytes)",
                         where=name, hint="save it as CSV UTF-8", code="encoding")
    try:
        text = raw.decode("cp1252")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        raise AgreeError(
            f"cannot tell the text encoding: line {line} is neither UTF-8 (byte {first_bad}) "
            f"nor Windows-1252 (byte 0x{raw[exc.start]:02X} at {exc.start})",
            where=name, hint="save the file again as 'CSV UTF-8'", code="encoding") from None
    return text.encode("utf-8"), "read as Windows-1252 (not valid UTF-8)"


def _first_record(text: str, delimiter: str) -> list[str]:
    try:
        return next(csv.reader(io.StringIO(text), delimiter=delimiter), [])
    except csv.Error:
        return text.splitlines()[0].split(delimiter) if text else []


def _sniff_delimiter(head: str) -> str:
    """The delimiter that splits the header into the most fields (comma on ties)."""
    best, best_n = ",", 1
    for d in (",", ";", "\t"):
        n = len(_first_record(head, d))
        if n > best_n:
            best, best_n = d, n
    return best


def _load_text(path: Path, *, delimiter: str | None, name: str) -> _Loaded:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    raw = path.read_bytes()
    checksum = hashlib.sha256(raw).hexdigest()
    data, note = _decode(raw, name)
    del raw
    if not data[: 1 << 16].strip() and not data.strip():
        raise AgreeError("the file is empty", where=name, hint="check that the file was saved",
                         code="empty-file")
    head = data[: 1 << 16].decode("utf-8", errors="ignore")
    notes = [f"{name}: {note}"] if note else []
    if delimiter is None:
        delimiter = _sniff_delimiter(head)
        if delimiter != ",":
            notes.append(f"{name}: columns separated by {'tab' if delimiter == chr(9) else repr(delimiter)}")
    n_columns = len(_first_record(head, delimiter))
    names = [f"c{i}" for i in range(n_columns)]
    try:
        table = pacsv.read_csv(
            io.BytesIO(data),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            # quoted cells may hold line breaks (multi-line excerpts); without quotes they cannot
            parse_options=pacsv.ParseOptions(delimiter=delimiter, newlines_in_values=b'"' in data),
            convert_options=pacsv.ConvertOptions(column_types={c: pa.string() for c in names},
                                                 strings_can_be_null=True, null_values=[""],
                                                 quoted_strings_can_be_null=True),
        )
    except pa.ArrowInvalid as exc:
        msg = str(exc).split("\n")[0]
        match = re.search(r"Expected (\d+) columns, got (\d+)", msg)
        if match:
            msg = (f"a row has {match.group(2)} fields where the header has {match.group(1)}")
        raise AgreeError(f"cannot read the CSV: {msg}", where=name, code="bad-csv",
                         hint="check the delimiter and quoting (a text cell with the delimiter must "
                              "be quoted)") from None
    if b"'" in data:
        table = _unprotect(table)
    del data
    frame = table.to_pandas()
    del table
    header = [None if pd.isna(v) else str(v) for v in frame.iloc[0].tolist()] if len(frame) else []
    frame = frame.iloc[1:].reset_index(drop=True)
    rows = np.arange(2, len(frame) + 2, dtype=np.int64)
    t = _finish_table(frame, header, rows, file=name, sheet=None, letters=False)
    return _Loaded([t], notes=notes, checksums={name: checksum})


def _unprotect(table):
    """Undo the formula protection of agree's CSV files (`agree.core.cells`): one ``'`` less in
    cells that are ``'``s followed by ``= + - @``, a tab or a carriage return."""
    import pyarrow as pa
    import pyarrow.compute as pc

    return pa.table({name: pc.replace_substring_regex(table[name], pattern=PROTECTED_PATTERN,
                                                      replacement=r"\1", max_replacements=1)
                     for name in table.column_names})


def _finish_table(frame: pd.DataFrame, header: list, rows: np.ndarray, *, file: str,
                  sheet: str | None, letters: bool) -> _Table:
    """Check the header (blank, duplicated) and name the columns after it."""
    where = cell_location(file, sheet)
    if not header or all(h is None or str(h).strip() == "" for h in header):
        raise AgreeError("the sheet is empty" if sheet else "the file has no header row", where=where,
                         hint="the first row must name the columns", code="empty-sheet" if sheet else "empty-file")
    names: list[str | None] = [None if h is None or str(h).strip() == "" else str(h).strip()
                               for h in _header_strings(header)]
    keep, seen, problems = [], {}, []
    for i, h in enumerate(names):
        col = frame.iloc[:, i]
        if h is None:
            if _has_values(col):
                problems.append(AgreeError(f"{_column_label(i + 1, letters)} has a blank header but holds data",
                                           where=cell_location(file, sheet, 1), code="blank-header",
                                           hint="give every column a name in the first row"))
            continue
        if h in seen:
            problems.append(AgreeError(
                f"{_column_label(i + 1, letters)} repeats the header '{h}' of {_column_label(seen[h] + 1, letters)}",
                where=cell_location(file, sheet, 1), code="duplicate-header",
                hint="give every column a different name"))
            continue
        seen[h] = i
        keep.append(i)
    _raise_all(problems, "header problems")
    out = frame.iloc[:, keep].copy()
    out.columns = [names[i] for i in keep]
    if len(out) == 0:
        raise AgreeError("the sheet has a header but no data rows" if sheet else
                         "the file has a header but no data rows", where=where,
                         code="empty-sheet" if sheet else "empty-file", hint="check that the data were saved")
    return _Table(file=file, sheet=sheet, frame=out, rows=rows, letters=letters)


def _header_strings(header: list) -> list:
    out = []
    for h in header:
        v = normalise_value(h) if not isinstance(h, str) else h
        out.append(v if v is None or isinstance(v, str) else str(v))
    return out


def _has_values(col: pd.Series) -> bool:
    if col.dtype == object:
        return bool(col.map(lambda v: normalise_value(v) is not None and str(v).strip() != "").any())
    return bool(col.notna().any())


def _raise_all(problems: list[AgreeError], what: str) -> None:
    if not problems:
        return
    if len(problems) == 1:
        raise problems[0]
    first = problems[0]
    raise AgreeError(f"{len(problems)} {what}; first: {first.message}", hint=first.hint,
                     where=first.where, code=first.code, problems=problems)


# -- workbooks and parquet ----------------------------------------------------------------
def _load_workbook(path: Path, *, sheet: Any, name: str) -> _Loaded:
    import openpyxl

    loaded = _Loaded([], checksums={name: sha256_file(path)})
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError) as exc:
        raise AgreeError(f"the workbook is damaged and cannot be opened ({type(exc).__name__})",
                         where=name, hint="open it in a spreadsheet program and save it again",
                         code="corrupt-workbook") from None
    except Exception as exc:  # openpyxl raises assorted errors on broken XML
        raise AgreeError(f"the workbook is damaged and cannot be opened ({type(exc).__name__})",
                         where=name, hint="open it in a spreadsheet program and save it again",
                         code="corrupt-workbook") from None
    try:
        sheets = [ws for ws in wb.worksheets if hasattr(ws, "iter_rows")]
        titles = [ws.title for ws in sheets]
        wanted = _select_sheets(sheet, titles, name)
        hidden = [ws.title for ws in sheets if ws.sheet_state != "visible"]
        if sheet is None and hidden and len(hidden) < len(sheets):
            # hidden sheets hold lists for drop-downs and the like, not a coder's work
            wanted = [t for t in wanted if t not in hidden]
            loaded.left_out.append(f"{name}: hidden sheet(s) not read: {', '.join(repr(h) for h in hidden)} "
                                   "(name them with --sheet to read them)")
        empty = []
        for ws in sheets:
            if ws.title not in wanted:
                continue
            try:
                ws.reset_dimensions()
                raw_rows = [list(r) for r in ws.iter_rows(values_only=True)]
            except Exception as exc:
                raise AgreeError(f"the worksheet cannot be read ({type(exc).__name__})",
                                 where=cell_location(name, ws.title), code="corrupt-workbook",
                                 hint="open it in a spreadsheet program and save it again") from None
            table = _rows_to_table(raw_rows, file=name, sheet=ws.title)
            if table is None:
                empty.append(ws.title)
            else:
                loaded.tables.append(table)
    finally:
        wb.close()
    if empty and (sheet is not None and not loaded.tables or not loaded.tables):
        raise AgreeError("the sheet is empty", where=cell_location(name, empty[0]), code="empty-sheet",
                         hint="choose a sheet with data" + (f" (sheets: {', '.join(titles)})" if len(titles) > 1 else ""))
    if empty:
        loaded.left_out.append(f"{name}: empty sheet(s) skipped: {', '.join(repr(e) for e in empty)}")
    return loaded


def _select_sheets(sheet: Any, titles: list[str], name: str) -> list[str]:
    if sheet is None:
        return titles
    wanted = [sheet] if isinstance(sheet, (str, int)) else list(sheet)
    out = []
    for s in wanted:
        if isinstance(s, int) and not isinstance(s, bool):
            if not 1 <= s <= len(titles):
                raise AgreeError(f"there is no sheet number {s}", where=name, code="no-sheet",
                                 hint=f"the workbook has {len(titles)} sheet(s): {', '.join(titles)}")
            out.append(titles[s - 1])
        elif s in titles:
            out.append(s)
        else:
            close = difflib.get_close_matches(str(s), titles, n=1)
            hint = f"did you mean '{close[0]}'?" if close else f"sheets: {', '.join(titles)}"
            raise AgreeError(f"there is no sheet '{s}'", where=name, hint=hint, code="no-sheet")
    return out


def _rows_to_table(raw_rows: list[list], *, file: str, sheet: str) -> _Table | None:
    def blank(row):
        return all(v is None or (isinstance(v, str) and v.strip() == "") for v in row)

    start = next((i for i, r in enumerate(raw_rows) if not blank(r)), None)
    if start is None:
        return None
    end = len(raw_rows)
    while end > start and blank(raw_rows[end - 1]):
        end -= 1
    body = raw_rows[start:end]
    width = max(len(r) for r in body)
    body = [r + [None] * (width - len(r)) for r in body]
    frame = pd.DataFrame(body[1:], columns=range(width), dtype=object) if len(body) > 1 else \
        pd.DataFrame(columns=range(width), dtype=object)
    rows = np.arange(start + 2, end + 1, dtype=np.int64)
    return _finish_table(frame, body[0], rows, file=file, sheet=sheet, letters=True)


def _load_parquet(path: Path, *, name: str) -> _Loaded:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        frame = pq.read_table(path).to_pandas()
    except (pa.ArrowException, OSError) as exc:
        raise AgreeError(f"the Parquet file is damaged and cannot be read ({str(exc).splitlines()[0]})",
                         where=name, hint="write the file again", code="corrupt-parquet") from None
    if frame.shape[1] == 0:
        raise AgreeError("the file has no columns", where=name, code="empty-file",
                         hint="check that the data were saved")
    frame = frame.reset_index(drop=True)
    header = [str(c) for c in frame.columns]
    frame.columns = range(frame.shape[1])
    rows = np.arange(2, len(frame) + 2, dtype=np.int64)
    t = _finish_table(frame, header, rows, file=name, sheet=None, letters=False)
    return _Loaded([t], checksums={name: sha256_file(path)})


# -- encoding values ----------------------------------------------------------------------
class _Stats:
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


def _quoted(name: str) -> str:
    """A column name as typed on a command line (quoted when it holds spaces or quotes)."""
    return name if re.fullmatch(r"[\w.\-]+", name) else repr(name)


def _looks_missing(v: Any) -> bool:
    """Text that people write for a missing value (NA, n/a, null, -, missing, ...)."""
    return isinstance(v, str) and v.strip().lower() in MISSING_LOOKALIKES


# Factorized columns computed ahead, in parallel (see `_prefetch_factorize`), by column array.
_PREFETCHED: dict[int, tuple[np.ndarray, np.ndarray]] = {}


def _factorize(col: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Codes (-1 for missing) and the distinct values as an object array."""
    done = _PREFETCHED.pop(id(col.array), None)
    if done is not None:
        return done
    codes, uniques = pd.factorize(col, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64), np.asarray(uniques, dtype=object)


def _prefetch_factorize(columns: list[pd.Series]) -> None:
    """Factorize large text columns on several threads at once (the hashing releases the GIL)."""
    big = [c for c in columns if len(c) >= 100_000 and isinstance(c.dtype, pd.StringDtype)]
    if len(big) < 2:
        return
    from concurrent.futures import ThreadPoolExecutor

    def work(col: pd.Series):
        codes, uniques = pd.factorize(col, use_na_sentinel=True)
        return id(col.array), (np.asarray(codes, dtype=np.int64), np.asarray(uniques, dtype=object))

    with ThreadPoolExecutor(max_workers=min(len(big), os.cpu_count() or 1)) as pool:
        _PREFETCHED.update(pool.map(work, big))


def canonical_code(v: Any, *, trim: bool, casefold: bool) -> Any:
    """Canonical code from a raw cell: number, stripped/casefolded text, or None."""
    v = normalise_value(v)
    if isinstance(v, str):
        if trim:
            v = v.strip()
        if v.strip() == "":
            return None
        if _NUMBER.match(v.strip()):
            v = normalise_value(float(v))
        elif casefold:
            v = v.casefold()
    elif hasattr(v, "isoformat"):
        v = v.isoformat()
    return v


def _encode_column(col: pd.Series, label: str, stats: _Stats, vocab: dict, *, trim: bool,
                   casefold: bool) -> np.ndarray:
    """Index of each cell's canonical value in `vocab` (grown in place); -1 for empty."""
    fcodes, uniques = _factorize(col)
    if not len(uniques):
        return np.full(len(col), MISSING, dtype=np.int64)
    counts = np.bincount(fcodes[fcodes >= 0], minlength=len(uniques))
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


def _encode_ids(col: pd.Series, label: str, stats: _Stats, *, trim: bool) -> tuple[np.ndarray, np.ndarray]:
    """Unit ids (or coder names) as text: (index per cell, -1 for empty; unique ids)."""
    fcodes, uniques = _factorize(col)
    if not len(uniques):
        return np.full(len(col), MISSING, dtype=np.int64), np.array([], dtype=object)
    converted = not isinstance(col.dtype, pd.StringDtype)
    if not converted:
        text = pd.Series(uniques, dtype="str")
    else:
        text = pd.Series([None if normalise_value(v) is None else str(normalise_value(v)) for v in uniques],
                         dtype="str")
    stripped = text.str.strip()
    blank = (stripped.fillna("") == "").to_numpy()
    changed = (stripped != text).to_numpy() & ~blank
    if trim and changed.any():
        counts = np.bincount(fcodes[fcodes >= 0], minlength=len(uniques))
        stats.add("trim", label, int(counts[changed].sum()))
    if trim:
        text = stripped
    if not converted and not blank.any() and not (trim and changed.any()):
        # distinct already: no second pass over the ids
        return fcodes, text.to_numpy(dtype=object)
    text = text.where(~blank, None)
    codes2, ids = pd.factorize(text, use_na_sentinel=True)
    local = np.append(np.asarray(codes2, dtype=np.int64), MISSING)
    return local[fcodes], np.asarray(ids, dtype=object)


def _is_free_text(col: pd.Series) -> bool:
    """Long, mostly distinct sentences: unit text rather than codes."""
    sample = col.dropna().iloc[:500]
    if len(sample) == 0:
        return False
    s = sample.map(lambda v: v if isinstance(v, str) else "").astype(object)
    lengths = s.str.len()
    spaced = s.str.strip().str.contains(" ", regex=False)
    distinct = s.nunique() / len(s)
    return bool(spaced.mean() >= 0.5 and lengths.mean() >= 25 and (len(s) < 4 or distinct >= 0.8))


def _is_binary(col: pd.Series) -> bool:
    """True when every non-empty cell is 0 or 1 (or TRUE/FALSE) and at least one is not empty."""
    _, uniques = _factorize(col)
    seen = False
    for u in uniques:
        b = _binary(u)
        if b is None:
            if normalise_value(u) is None or (isinstance(u, str) and u.strip() == ""):
                continue
            return False
        seen = True
    return seen


def _binary(v: Any) -> int | None:
    if isinstance(v, str):
        s = v.strip().lower()
        v = {"true": 1, "false": 0}.get(s, s)
        if isinstance(v, str):
            v = float(v) if _NUMBER.match(v) else v
    v = normalise_value(v)
    return v if v in (0, 1) and not isinstance(v, str) else None


# -- columns --------------------------------------------------------------------------------
def _key(name: str) -> str:
    return re.sub(r"[\s\-]+", "_", str(name).strip().lower())


def find_column(columns: Sequence[str], names: Sequence[str], exclude: Iterable[str] = ()) -> str | None:
    excluded = set(exclude)
    by_key = {}
    for c in columns:
        if c not in excluded:
            by_key.setdefault(_key(c), c)
    for n in names:
        if n in by_key:
            return by_key[n]
    return None


def _require(table: _Table, column: str, what: str) -> str:
    if column in table.frame.columns:
        return column
    raise AgreeError(f"there is no {what} column '{column}'", where=table.where(1),
                     hint=_columns_hint(column, table.frame.columns), code="no-column")


def _columns_hint(column: str, columns: Iterable, label: str = "columns") -> str:
    """'did you mean ...? (columns: a, b, c)': always says which columns there are."""
    names = [str(c) for c in columns]
    close = difflib.get_close_matches(column, names, n=1)
    listed = f"{label}: {', '.join(repr(c) for c in names)}"
    return f"did you mean '{close[0]}'? ({listed})" if close else listed


@dataclass
class _Roles:
    unit: str
    coder: str | None = None
    code: str | None = None
    presence: list[str] = field(default_factory=list)
    coders: list[str] = field(default_factory=list)  # wide
    text: str | None = None
    keep: list[str] = field(default_factory=list)
    unused: list[str] = field(default_factory=list)
    unit_guessed: bool = False


def _unit_column(table: _Table, unit: str | None) -> tuple[str, bool]:
    if unit is not None:
        return _require(table, unit, "unit"), False
    cols = list(table.frame.columns)
    for name in UNIT_NAMES:
        found = find_column(cols, (name,))
        if found is not None and not _is_free_text(table.frame[found]):
            return found, False
    return cols[0], True


def _text_column(table: _Table, text: str | None, taken: set[str]) -> str | None:
    if text is not None:
        return _require(table, text, "text")
    cols = [c for c in table.frame.columns if c not in taken]
    found = find_column(cols, TEXT_NAMES)
    if found is not None and not _is_binary(table.frame[found]):
        return found
    for c in cols:
        if _is_free_text(table.frame[c]):
            return c
    return None


def _keep_columns(table: _Table, keep: Sequence[str], required: bool) -> list[str]:
    out = []
    for k in keep:
        if k in table.frame.columns:
            out.append(k)
        elif required:
            _require(table, k, "kept")
    return out


def _roles(table: _Table, layout: str, *, unit, coder, code, text, keep, single_table: bool) -> _Roles:
    """Assign each column of one table a role under the given layout."""
    cols = list(table.frame.columns)
    unit_col, guessed = _unit_column(table, unit)
    kept = _keep_columns(table, keep, required=single_table)
    taken = {unit_col, *kept}
    r = _Roles(unit=unit_col, unit_guessed=guessed)
    if layout in ("long", "presence-long"):
        r.coder = _require(table, coder, "coder") if isinstance(coder, str) else find_column(cols, CODER_NAMES, taken)
        if r.coder is None:
            raise AgreeError("no coder column found", where=table.where(1), code="no-column",
                             hint=f"name it with --coder-col (coder=...) (columns: {', '.join(cols)})")
        taken.add(r.coder)
    r.text = _text_column(table, text, taken | set(_as_list(code)))
    if r.text is not None:
        taken.add(r.text)
    rest = [c for c in cols if c not in taken]
    if layout == "wide":
        if coder is not None and not isinstance(coder, str):
            r.coders = [_require(table, c, "coder") for c in coder]
            r.unused = [c for c in rest if c not in r.coders]
        else:
            auto_keep = [c for c in rest if _key(c) in KEEP_NAMES]
            auto_keep += _foreign_columns(table, [c for c in rest if c not in auto_keep])
            r.keep = kept + auto_keep
            r.coders = [c for c in rest if c not in auto_keep]
        r.keep = r.keep or kept
        return r
    r.keep = kept
    presence = layout.startswith("presence")
    if isinstance(code, str) and not presence:
        r.code = _require(table, code, "code")
    elif code is not None and not isinstance(code, str):
        r.presence = [_require(table, c, "code") for c in code]
    elif not presence:
        r.code = find_column(rest, CODE_NAMES)
        if r.code is None and len(rest) == 1:
            r.code = rest[0]
        if r.code is None:
            if len(rest) >= 2 and all(_is_binary(table.frame[c]) for c in rest):
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


def _foreign_columns(table: _Table, candidates: list) -> list:
    """Wide layout: candidate coder columns whose values share none with the other candidates'
    (e.g. an interview or participant column) are per-unit columns, not coders. Needs at least
    three candidates, so that two coders who never agree are still read as coders."""
    if len(candidates) < 3:
        return []
    values = {c: set(pd.unique(table.frame[c].dropna().astype(str).str.strip())) - {""} for c in candidates}
    foreign = []
    for c in candidates:
        others = set().union(*(values[o] for o in candidates if o != c and o not in foreign))
        if values[c] and others and not (values[c] & others):
            foreign.append(c)
    return foreign if len(candidates) - len(foreign) >= 2 else []


def _as_list(x) -> list:
    if x is None:
        return []
    return [x] if isinstance(x, str) else list(x)


# -- assembling -----------------------------------------------------------------------------
@dataclass
class _Piece:
    """Values from one source column: one coder (or a coder column), rows of one table."""

    table: _Table
    coder: np.ndarray  # global coder index per cell
    value: np.ndarray  # vocab index, or (presence) set index; -1 missing
    source: int  # index into the provenance sources
    keep_mask: np.ndarray  # rows that are not entirely blank


def read(paths: str | Path | Sequence[str | Path], *, layout: str | None = None,
         unit: str | None = None, coder: str | Sequence[str] | None = None,
         code: str | Sequence[str] | None = None, text: str | None = None,
         sheet: str | int | Sequence[str] | None = None, sep: str | None = ";",
         codebook: Any = None, trim: bool = False, casefold: bool = False,
         level: str | None = None, keep: Sequence[str] = ()) -> CodingData:
    """Read one or more coding tables into `CodingData`.

    Parameters
    ----------
    paths : a file or a list of files (.csv, .tsv, .txt, .xlsx, .xlsm, .parquet).
    layout : "wide", "long", "per-coder" or "presence"; detected when None (the detected
        layout is described in ``data.report.detected``).
    unit, coder, code, text : column names overriding detection. In the wide layout `coder`
        may be a list of coder columns; in the presence layout `code` may be a list of the
        0/1 code columns.
    sheet : a sheet name (or 1-based number, or a list of names) for workbooks. By default
        every non-empty sheet is read; several sheets are one sheet per coder.
    sep : separator between several codes in one cell (None: never split).
    codebook : a codebook file or a :class:`~agree.io.codebook.Codebook`. Values follow its order,
        unused codes included; a code not in it is an error.
    trim : strip spaces around codes and unit ids (what changed is reported in the notes).
    casefold : compare codes ignoring case (with a codebook, the codebook's spelling is kept).
    level : "nominal", "ordinal", "interval" or "ratio". When None: "ordinal" if the codebook
        has an order column, else "nominal" (reported in the notes).
    keep : other per-unit columns to keep in ``data.columns`` (e.g. a round or cluster column).

    Returns
    -------
    CodingData
        with ``provenance`` (file, sheet, row and column of every value) and ``report``.

    Raises
    ------
    AgreeError
        for unreadable files and bad data, naming the file, sheet, row and column.

    Notes
    -----
    An empty cell is missing: the coder did not code the unit. Units that no coder coded are
    kept (all missing). Numbers written ``1`` and ``1.0`` are the same code.
    """
    files = [paths] if isinstance(paths, (str, Path)) else list(paths)
    if not files:
        raise AgreeError("no input files given", hint="name one or more files", code="no-input")
    if layout is not None and layout not in LAYOUTS:
        raise AgreeError(f"layout must be one of {', '.join(LAYOUTS)}; got '{layout}'", code="bad-option")
    if level is not None and level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="bad-option")
    if sep == "":
        sep = None
    book = None
    if codebook is not None:
        if isinstance(codebook, (Codebook, list, tuple)):
            book = codebook_from(codebook)
        else:
            book = read_codebook(codebook, trim=trim)

    loaded = _Loaded([])
    for f in files:
        part = load_file(Path(f), sheet=sheet, name=str(f))
        if len(files) > 1 and len(part.tables) > 1:
            raise AgreeError(f"the workbook has {len(part.tables)} sheets with data; with several files "
                             "each file must give one table", where=str(f), code="several-sheets",
                             hint="choose the sheet with --sheet (sheet=...)")
        loaded.tables += part.tables
        loaded.notes += part.notes
        loaded.left_out += part.left_out
        loaded.checksums.update(part.checksums)
    tables = loaded.tables
    one_file = len(files) == 1
    for t in tables:
        t.name = t.sheet if one_file and t.sheet is not None else Path(t.file).stem

    if coder is None:
        for t in tables:
            _refuse_consensus(t)
    layout_kind = _choose_layout(tables, layout, coder=coder, code=code, unit=unit)
    builder = _Builder(tables, layout_kind, unit=unit, coder=coder, code=code, text=text, keep=keep,
                       sep=sep, trim=trim, casefold=casefold)
    data = builder.build(book=book, level=level)
    notes = loaded.notes + builder.stats.notes() + builder.notes
    report = ReadReport(
        detected=builder.detected,
        files=tuple(str(f) for f in files),
        units_read=data.n_units,
        values_read=int(data.observed.sum()),
        values_missing=int(data.codes.size - data.observed.sum()),
        notes=tuple(notes),
        left_out=tuple(loaded.left_out + builder.left_out),
        checksums=dict(loaded.checksums),
    )
    object.__setattr__(data, "report", report)
    return data


def _refuse_consensus(table: _Table) -> None:
    """Refuse a consensus file written by `agree reconcile`: its final code is not a coder.

    Recognised by a 'final code' column, or by a 'source' column whose values are all among
    the consensus sources (agreed, decided, majority, ...). Checks distinct values only.
    """
    from agree.core.model import CONSENSUS_FINAL as FINAL
    from agree.core.model import CONSENSUS_SOURCE as SOURCE
    from agree.core.model import CONSENSUS_SOURCES as SOURCES

    by_key = {_key(c): c for c in table.frame.columns}
    final = by_key.get(_key(FINAL))
    source = by_key.get(_key(SOURCE))
    sign = None
    if final is not None:
        sign = f"it has a '{final}' column"
    elif source is not None:
        col = table.frame[source].dropna()
        found = {str(v).strip().lower() for v in pd.unique(col)} - {""}
        if found and found <= set(SOURCES):
            sign = f"its '{source}' column holds consensus sources ({', '.join(sorted(found))})"
    if sign is None:
        return
    raise AgreeError(
        f"this looks like a consensus file written by 'agree reconcile' ({sign}): agreement must be "
        "computed on the coders' independent codes, not on the reconciled final code",
        where=table.where(), code="consensus-file",
        hint="score the original coding files; if you really mean to compare some of these columns, "
             "name them with --coder-col (coder=[...])")


def _choose_layout(tables: list[_Table], layout: str | None, *, coder, code, unit) -> str:
    """One of wide, long, per-coder, presence-long, presence-per-coder."""
    def has_coder(t):
        if isinstance(coder, str):
            return coder in t.frame.columns
        unit_col = _unit_column(t, unit)[0]
        return find_column(list(t.frame.columns), CODER_NAMES, {unit_col}) is not None

    several = len(tables) > 1
    if layout is None and code is not None and not isinstance(code, str):
        layout = "presence"
    if layout == "wide":
        if several:
            raise AgreeError(f"the wide layout reads one table; got {len(tables)}", code="bad-layout",
                             hint="give one file (and one sheet), or choose --layout per-coder "
                                  "(layout='per-coder')")
        return "wide"
    if layout == "long":
        return "long"
    if layout == "per-coder":
        return "per-coder"
    if layout == "presence":
        if all(has_coder(t) for t in tables):
            return "presence-long"
        return "presence-per-coder"
    if all(has_coder(t) for t in tables) and (isinstance(coder, str) or coder is None):
        return "long"
    return "per-coder" if several else "wide"


class _Builder:
    def __init__(self, tables, layout, *, unit, coder, code, text, keep, sep, trim, casefold):
        self.tables = tables
        self.layout = layout
        self.opts = dict(unit=unit, coder=coder, code=code, text=text, keep=list(keep))
        self.sep, self.trim, self.casefold = sep, trim, casefold
        self.stats = _Stats()
        self.vocab: dict = {}
        self.presence_sets: list[frozenset] = []
        self.sources: list[tuple] = []
        self.coders: list[str] = []
        self.pieces: list[_Piece] = []
        self.table_units: list[tuple[np.ndarray, np.ndarray]] = []  # per table: (unit idx per row, ids)
        self.extra: dict[str, list[tuple[_Table, pd.Series]]] = {}
        self.text_entries: list[tuple[_Table, pd.Series]] = []
        self.roles: dict[int, _Roles] = {}
        self.presence_columns: list[tuple[_Table, Any, str]] = []
        self.notes: list[str] = []
        self.left_out: list[str] = []
        self.detected = ""

    # ---- per layout ----------------------------------------------------------------------
    def build(self, *, book, level) -> CodingData:
        single = len(self.tables) == 1
        roles = [_roles(t, self.layout, single_table=single, **self.opts) for t in self.tables]
        if self.layout in ("per-coder", "long"):
            kinds = {bool(r.presence) for r in roles}
            if len(kinds) > 1:
                raise AgreeError("some files have one code column and others 0/1 code columns",
                                 code="bad-layout", hint="give files of one kind")
            if roles[0].presence:
                self.layout = "presence-" + self.layout
        self._check_kept(roles)
        for t, r in zip(self.tables, roles):
            self._add_table(t, r)
        self._report_unused(roles)
        if self.layout in ("per-coder", "presence-per-coder"):
            self._check_coder_names()
        self.detected = self._describe(roles)
        return self._assemble(book=book, level=level)

    def _add_table(self, t: _Table, r: _Roles) -> None:
        if self.layout == "long":
            _prefetch_factorize([t.frame[c] for c in (r.unit, r.coder, r.code)])
        try:
            self._add_columns(t, r)
        finally:
            _PREFETCHED.clear()  # keyed by object id: never let an entry outlive its column

    def _add_columns(self, t: _Table, r: _Roles) -> None:
        frame = t.frame
        unit_idx, ids = _encode_ids(frame[r.unit], r.unit, self.stats, trim=self.trim)
        blank = unit_idx < 0
        self.roles[id(t)] = r
        if r.text:
            self.text_entries.append((t, frame[r.text]))
        for c in r.keep:
            self.extra.setdefault(c, []).append((t, frame[c]))
        for c in ([r.text] if r.text else []) + r.keep:
            blank &= frame[c].isna().to_numpy() if frame[c].dtype != object else \
                frame[c].map(lambda v: normalise_value(v) is None).to_numpy()
        ti = len(self.table_units)
        self.table_units.append((unit_idx, ids))
        if self.layout == "wide":
            for c in r.coders:
                self._piece(t, ti, np.full(len(frame), self._coder_index(str(c)), dtype=np.int64),
                            self._values(frame[c], c), c, blank)
        elif self.layout == "long":
            cidx, names = _encode_ids(frame[r.coder], r.coder, self.stats, trim=self.trim)
            g = np.array([self._coder_index(str(n)) for n in names] + [MISSING], dtype=np.int64)
            coder_idx = g[cidx]
            values = self._values(frame[r.code], r.code)
            self._check_blank_coder(t, r, coder_idx, values, unit_idx)
            self._piece(t, ti, coder_idx, values, r.code, blank & (coder_idx < 0))
        elif self.layout == "per-coder":
            self._piece(t, ti, np.full(len(frame), self._coder_index(t.name), dtype=np.int64),
                        self._values(frame[r.code], r.code), r.code, blank)
        else:  # presence
            if self.layout == "presence-long":
                cidx, names = _encode_ids(frame[r.coder], r.coder, self.stats, trim=self.trim)
                g = np.array([self._coder_index(str(n)) for n in names] + [MISSING], dtype=np.int64)
                coder_idx = g[cidx]
            else:
                coder_idx = np.full(len(frame), self._coder_index(t.name), dtype=np.int64)
            values = self._presence_values(t, r)
            if self.layout == "presence-long":
                self._check_blank_coder(t, r, coder_idx, values, unit_idx)
                blank = blank & (coder_idx < 0)
            self._piece(t, ti, coder_idx, values, None, blank)

    def _check_kept(self, roles: list[_Roles]) -> None:
        """A column asked for with `keep` must be in at least one table (one table: checked in
        `_roles`); the error lists the columns there are."""
        for k in self.opts["keep"]:
            if any(k in r.keep for r in roles):
                continue
            if len(self.tables) == 1:
                _require(self.tables[0], k, "kept")
            t = self.tables[0]
            raise AgreeError(f"there is no kept column '{k}' in any of the {len(self.tables)} tables read",
                             where=t.where(1), code="no-column",
                             hint=_columns_hint(k, t.frame.columns, f"columns of {t.where()}"))

    def _report_unused(self, roles: list[_Roles]) -> None:
        """Columns not used, once per table; with one file or sheet per coder, a column that no
        table uses is reported once (per-coder notes, or a per-unit column that could be kept)."""
        per_coder = self.layout in ("per-coder", "presence-per-coder") and len(self.tables) > 1
        everywhere: list[str] = []
        if per_coder:
            everywhere = [c for c in roles[0].unused if all(c in r.unused for r in roles[1:])]
        for t, r in zip(self.tables, roles):
            rest = [c for c in r.unused if c not in everywhere]
            if rest:
                self.left_out.append(f"{cell_location(t.file, t.sheet)}: column(s) not used: "
                                     f"{', '.join(repr(c) for c in rest)}")
        if everywhere:
            where = "sheet" if len({t.file for t in self.tables}) == 1 else "file"
            described = []
            for c in everywhere:
                if _key(c) in NOTE_NAMES:
                    described.append(f"'{c}' (per-coder notes)")
                else:
                    described.append(f"'{c}' (to keep it as a per-unit column: --keep {_quoted(c)} "
                                     f"(keep=[{c!r}]))")
            self.left_out.append(f"column(s) not used, in every coder's {where} ({len(self.tables)} {where}s): "
                                 + ", ".join(described))

    def _coder_index(self, name: str) -> int:
        if name not in self.coders:
            self.coders.append(name)
        return self.coders.index(name)

    def _check_coder_names(self):
        names = [t.name for t in self.tables]
        if len(set(names)) < len(names):
            dup = sorted({n for n in names if names.count(n) > 1})
            raise AgreeError(f"two files or sheets give the same coder name '{dup[0]}'", code="duplicate-coder",
                             hint="coders are named after the file name (or sheet name): rename one")

    def _check_blank_coder(self, t, r, coder_idx, values, unit_idx):
        bad = np.flatnonzero((coder_idx < 0) & ((values >= 0) | (unit_idx >= 0)))
        if bad.size:
            rows = t.rows[bad]
            raise AgreeError(f"{bad.size} row(s) have no coder name (rows {_rows_text(rows)})",
                             where=t.where(int(rows[0]), r.coder), code="missing-coder",
                             hint="fill in the coder of every row")

    def _values(self, col: pd.Series, label: str) -> np.ndarray:
        return _encode_column(col, label, self.stats, self.vocab, trim=self.trim, casefold=self.casefold)

    def _presence_values(self, t: _Table, r: _Roles) -> np.ndarray:
        cols = r.presence
        mat = np.empty((len(t.frame), len(cols)), dtype=np.int8)
        problems = []
        for j, c in enumerate(cols):
            fcodes, uniques = _factorize(t.frame[c])
            look = np.empty(len(uniques) + 1, dtype=np.int8)
            look[-1] = -1
            for k, u in enumerate(uniques):
                b = _binary(u)
                if b is None and not (isinstance(u, str) and u.strip() == ""):
                    rows = t.rows[fcodes == k]
                    problems.append(AgreeError(
                        f"'{u}' is not 0 or 1 in a presence/absence column" +
                        (f" (also rows {_rows_text(rows[1:])})" if rows.size > 1 else ""),
                        where=t.where(int(rows[0]), c), code="not-binary",
                        hint="mark each code 1 (applied) or 0 (not applied); leave the whole row empty "
                             "for a unit the coder did not code"))
                look[k] = -1 if b is None else b
            mat[:, j] = look[fcodes]
        _raise_all(problems, "cells are not 0 or 1")
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

    def _piece(self, t: _Table, ti: int, coder_idx, values, column, blank):
        self.sources.append((t.file, t.sheet, column))
        keep_mask = ~(blank & (values < 0))
        self.pieces.append(_Piece(table=t, coder=coder_idx,
                                  value=values, source=len(self.sources) - 1, keep_mask=keep_mask))

    # ---- description ---------------------------------------------------------------------
    def _describe(self, roles: list[_Roles]) -> str:
        r = roles[0]
        extra = ""
        if r.text:
            extra += f", text column '{r.text}'"
        if r.keep:
            extra += f", kept column(s) {', '.join(repr(k) for k in r.keep)}"
        names = ", ".join(self.coders[:8]) + (", ..." if len(self.coders) > 8 else "")
        unit_txt = f"unit column '{r.unit}'" + (" (first column)" if r.unit_guessed else "")
        n = len(self.coders)
        if self.layout == "wide":
            return f"wide layout: {unit_txt}, {n} coder column{'s' * (n != 1)} ({names}){extra}"
        if self.layout == "long":
            return (f"long layout: {unit_txt}, coder column '{r.coder}' ({n} coder{'s' * (n != 1)}: {names}), "
                    f"code column '{r.code}'{extra}")
        where = "sheet" if all(t.sheet for t in self.tables) and len({t.file for t in self.tables}) == 1 else "file"
        if self.layout == "per-coder":
            return (f"one {where} per coder: {n} {where}s ({names}), {unit_txt}, code column "
                    f"'{r.code}'{extra}")
        k = len(r.presence)
        cols = ", ".join(r.presence[:8]) + (", ..." if k > 8 else "")
        if self.layout == "presence-long":
            return (f"presence/absence layout: {unit_txt}, coder column '{r.coder}' ({n} coders: {names}), "
                    f"{k} 0/1 code columns ({cols}){extra}")
        return (f"presence/absence layout, one {where} per coder: {n} {where}s ({names}), {unit_txt}, "
                f"{k} 0/1 code columns ({cols}){extra}")

    # ---- the matrix ----------------------------------------------------------------------
    def _assemble(self, *, book, level) -> CodingData:
        # global unit ids, in order of first appearance
        if len(self.table_units) == 1:
            unit_ids = self.table_units[0][1]
            table_maps = [np.arange(len(unit_ids), dtype=np.int64)]
        else:
            allids = np.concatenate([ids for _, ids in self.table_units])
            g, unit_ids = pd.factorize(allids)
            unit_ids = np.asarray(unit_ids, dtype=object)
            table_maps, start = [], 0
            for _, ids in self.table_units:
                table_maps.append(np.asarray(g[start:start + len(ids)], dtype=np.int64))
                start += len(ids)
        n, m = len(unit_ids), len(self.coders)
        table_index = {id(t): i for i, t in enumerate(self.tables)}
        self._check_unit_ids()
        if m < 2:
            names = ", ".join(self.coders) or "none"
            raise AgreeError(f"only one coder found ({names})" if m == 1 else "no coder found",
                             where=", ".join(dict.fromkeys(t.file for t in self.tables)), code="one-coder",
                             hint="agreement needs two or more coders; for one file per coder give all the files "
                                  "(or check the detected layout and set it with --layout (layout=...))")
        # per cell arrays (concatenated over pieces)
        parts_unit, parts_coder, parts_value, parts_row, parts_source = [], [], [], [], []
        for p in self.pieces:
            ti = table_index[id(p.table)]
            local_units, _ = self.table_units[ti]
            mask = p.keep_mask & (local_units >= 0)
            parts_unit.append(table_maps[ti][local_units[mask]])
            parts_coder.append(p.coder[mask] if p.coder.ndim else np.full(mask.sum(), p.coder))
            parts_value.append(p.value[mask])
            parts_row.append(p.table.rows[mask])
            parts_source.append(np.full(int(mask.sum()), p.source, dtype=np.int32))
        units = np.concatenate(parts_unit)
        coders = np.concatenate(parts_coder)
        value = np.concatenate(parts_value)
        rows = np.concatenate(parts_row)
        source = np.concatenate(parts_source)
        del parts_unit, parts_coder, parts_value, parts_row, parts_source
        key = units * m + coders  # flat cell index
        del coders
        self._check_duplicates(key, units, rows, source, unit_ids, n, m)

        values, categories, remap, set_valued, data_level = self._values_and_categories(
            book, level, value, rows, source)
        codes = np.full((n, m), MISSING, dtype=np.int32)
        row = np.full((n, m), -1, dtype=np.int32)
        src = np.full((n, m), -1, dtype=np.int32)
        codes.reshape(-1)[key] = remap[value]
        row.reshape(-1)[key] = rows
        src.reshape(-1)[key] = source
        # a cell a coder left empty still has a known location
        text, columns = self._extras(unit_ids, table_maps)
        codebook_map = None
        if book is not None:
            codebook_map = {c: book.descriptions.get(c, "") for c in categories}
        return CodingData(codes=codes, values=tuple(values), unit_ids=np.asarray(unit_ids, dtype=object),
                          coders=tuple(self.coders), categories=tuple(categories), level=data_level,
                          set_valued=set_valued, text=text, columns=columns, codebook=codebook_map,
                          provenance=Provenance(sources=tuple(self.sources), source=src, row=row),
                          order=("given" if book.ordered else "codebook rows") if book is not None else
                          "numeric" if all(isinstance(v, (int, float)) for v in values) else "alphabetical")

    def _check_unit_ids(self):
        problems = []
        for p in self.pieces:
            ti = [i for i, t in enumerate(self.tables) if t is p.table][0]
            local_units = self.table_units[ti][0]
            bad = np.flatnonzero((local_units < 0) & p.keep_mask)
            if bad.size:
                t = p.table
                col = _unit_col_name(self, t)
                rows = t.rows[bad]
                problems.append(AgreeError(
                    f"{bad.size} row(s) have values but no unit id (rows {_rows_text(rows)})",
                    where=t.where(int(rows[0]), col), code="missing-unit-id",
                    hint="fill in the unit id of every row (or delete the row)"))
        # one message per table
        seen, uniq = set(), []
        for p in problems:
            if p.where not in seen:
                seen.add(p.where)
                uniq.append(p)
        _raise_all(uniq, "tables have rows without a unit id")

    def _check_duplicates(self, key, units, rows, source, unit_ids, n, m):
        counts = np.bincount(key, minlength=n * m) if key.size else np.zeros(0, dtype=np.int64)
        dup_keys = np.flatnonzero(counts > 1)
        if not dup_keys.size:
            return
        problems = []
        if self.layout == "wide":
            dup_units = np.unique(dup_keys // m)
            for u in dup_units[:20]:
                sel = units == u
                r = np.unique(rows[sel])
                s = self.sources[int(source[sel][0])]
                problems.append(AgreeError(
                    f"unit '{unit_ids[u]}' is in more than one row (rows {_rows_text(r)})",
                    where=cell_location(s[0], s[1], int(r[0]), _unit_col_name(self, self.tables[0])),
                    code="duplicate-unit", hint="each unit must have one row; merge or rename the rows"))
            total = len(dup_units)
            what = "units are in more than one row"
        else:
            for k in dup_keys[:20]:
                sel = np.flatnonzero(key == k)
                s = self.sources[int(source[sel[0]])]
                u, c = divmod(int(k), m)
                problems.append(AgreeError(
                    f"coder '{self.coders[c]}' coded unit '{unit_ids[u]}' more than once "
                    f"(rows {_rows_text(rows[sel])})",
                    where=cell_location(s[0], s[1], int(rows[sel[0]]), s[2]), code="duplicate-coding",
                    hint="keep one row per unit and coder; for several codes put them in one cell "
                         f"separated by '{self.sep or ';'}', or use 0/1 code columns"))
            total = len(dup_keys)
            what = "(unit, coder) pairs are coded more than once"
        if total > len(problems):
            problems.append(AgreeError(f"... and {total - len(problems)} more", code=problems[0].code))
        if len(problems) == 1:
            raise problems[0]
        first = problems[0]
        raise AgreeError(f"{total} {what}; first: {first.message}", hint=first.hint, where=first.where,
                         code=first.code, problems=problems)

    def _values_and_categories(self, book, level, value, rows, source):
        """Final values, categories, vocab->value remap, set_valued, level."""
        presence = self.layout.startswith("presence")
        if presence:
            atoms_sets = list(self.presence_sets)
            set_valued = True
            book_atoms = self._presence_codebook_check(book)
        else:
            atoms = list(self.vocab)
            set_valued = self.sep is not None and any(isinstance(a, str) and self.sep in a for a in atoms)
            if set_valued:
                atoms_sets = [self._split(a) for a in atoms]
        cell_of = _CellFinder(value, rows, source, self.sources)
        if set_valued:
            parts = list(dict.fromkeys(x for s in atoms_sets for x in s))
            if level in ("interval", "ratio", "ordinal"):
                raise AgreeError(f"several codes per cell (set-valued data) cannot be read at the {level} level",
                                 where=cell_of.first(self._first_multi(atoms_sets)), code="set-at-level",
                                 hint="use --level nominal (level='nominal'), or one code per cell")
            if book is not None and not presence:
                mapping = self._codebook_map(book, parts, lambda a: [i for i, s in enumerate(atoms_sets) if a in s],
                                             cell_of)
                atoms_sets = [frozenset(mapping[x] for x in s) for s in atoms_sets]
                categories = list(book.categories)
            elif book is not None:
                atoms_sets = [frozenset(book_atoms[x] for x in s) for s in atoms_sets]
                categories = list(book.categories)
            elif presence:
                categories = [cat for _, cat, _ in self.presence_columns]
            else:
                categories = sorted(parts, key=value_sort_key)
            if not presence:
                self.notes.append(self._multi_note(atoms, atoms_sets, value, cell_of))
            values = sorted(set(atoms_sets), key=value_sort_key)
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[s] for s in atoms_sets] + [MISSING], dtype=np.int32)
            self._case_space_hints(parts, lambda a: cell_of.first_of_many(
                [i for i, s in enumerate(atoms_sets) if a in s])[0])
            return values, categories, remap, True, "nominal"

        data_level = level
        text_atoms = [i for i, a in enumerate(atoms) if isinstance(a, str)]
        has_numbers = len(text_atoms) < len(atoms)
        # ordinal without a codebook orders values by sorting them: text among numbers would land
        # above the highest scale point (e.g. "NA" among 1..5), so refuse it
        mixed_ordinal = level == "ordinal" and book is None and has_numbers
        if text_atoms and (level in ("interval", "ratio") or mixed_ordinal):
            problems = []
            for i in text_atoms[:50]:
                a = atoms[i]
                if _looks_missing(a):
                    hint = (f"'{a}' looks like a missing value: leave such cells empty (an empty cell "
                            "is missing)")
                elif _DECIMAL_COMMA.match(a):
                    hint = "write decimals with a point (1.5), not a comma"
                elif level == "ordinal":
                    hint = ("numbers only at this level (leave a cell empty for missing), or give a "
                            "codebook with an order column (--codebook) that places every code on the scale")
                else:
                    hint = "numbers only at this level; leave a cell empty for missing"
                where, count = cell_of.first_of_many([i])
                more = f" (and {count - 1} more cell{'s' * (count != 2)})" if count > 1 else ""
                what = "text among numbers at ordinal level" if level == "ordinal" else f"text at {level} level"
                problems.append(AgreeError(f"{what}: '{a}'{more}", where=where, hint=hint,
                                           code="text-at-ordinal" if level == "ordinal" else "text-at-interval"))
            _raise_all(problems, "text values among numbers at ordinal level" if level == "ordinal"
                       else f"text values at {level} level")
        if book is None and has_numbers:
            self._lookalike_warnings(atoms, text_atoms, cell_of)
        if book is not None:
            mapping = self._codebook_map(book, atoms, lambda a: [atoms.index(a)], cell_of)
            values = list(book.categories)
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[mapping[a]] for a in atoms] + [MISSING], dtype=np.int32)
            if data_level is None:
                data_level = "ordinal" if book.ordered else "nominal"
                self.notes.append(f"level: {data_level} (from the codebook{' order' if book.ordered else ''}; "
                                  "set it with --level (level=...))")
        else:
            values = sorted(atoms, key=value_sort_key)
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[a] for a in atoms] + [MISSING], dtype=np.int32)
            if data_level is None:
                data_level = "nominal"
                if values and not text_atoms:
                    self.notes.append("level: nominal (numbers read as categories; set --level ordinal, "
                                      "interval or ratio (level=...) if the numbers are a scale)")
            elif data_level == "ordinal" and text_atoms:
                self.notes.append("ordinal level without a codebook: categories ordered by sorting their "
                                  "names; give a codebook with an order column to set the order")
        self._case_space_hints(atoms, lambda a: cell_of.first(atoms.index(a)))
        return values, values, remap, False, data_level

    def _multi_note(self, atoms, atoms_sets, value, cell_of) -> str:
        """Where the cells with several codes are, and what splitting them does to the analysis.
        A warning when they are few (under 5% of the coded cells): likely a slip, not a design."""
        multi = [i for i, s in enumerate(atoms_sets) if len(s) > 1]
        n_multi = int(np.isin(value, multi).sum()) if multi else 0
        n_coded = int((value >= 0).sum())
        share = n_multi / n_coded if n_coded else 0.0
        shown = cell_of.firsts(multi, MULTI_SHOWN)
        places = "; ".join(f"{where}: {atoms[int(cell_of.value[pos])]!r}" for where, pos in shown)
        more = ", ..." if n_multi > len(shown) else ""
        verb = "holds" if n_multi == 1 else "hold"
        what = (f"{n_multi} of {n_coded} coded cells ({share:.1%}) {verb} several codes separated by "
                f"'{self.sep}' (first: {places}{more})")
        stop = "--sep '' (sep=None) keeps each cell as one code"
        if n_multi and share < MULTI_WARNING_SHARE:
            return (f"warning: only {what}; because of {'it' if n_multi == 1 else 'them'} all the data are "
                    "analysed as sets of codes (set-valued), which changes every coefficient. Check "
                    f"{'that cell' if n_multi == 1 else 'those cells'}; {stop}")
        return f"several codes in one cell: {what}; the data are analysed as sets of codes (set-valued); {stop}"

    def _lookalike_warnings(self, atoms, text_atoms, cell_of) -> None:
        """Text such as 'NA' among numeric codes: read as a code of its own, most likely meant as
        missing. One warning per value (replacing the general note on such values)."""
        for i in text_atoms:
            a = atoms[i]
            if not _looks_missing(a):
                continue
            for raw in [k for k in self.stats.lookalikes if k.strip().lower() == a.strip().lower()]:
                del self.stats.lookalikes[raw]
            where, count = cell_of.first_of_many([i])
            self.notes.append(
                f"warning: '{a}' among numeric codes looks like a missing value but is read as a code of "
                f"its own ({count} cell{'s' * (count != 1)}; first: {where}); if it means 'not coded', "
                "leave those cells empty")

    def _first_multi(self, atoms_sets):
        for i, s in enumerate(atoms_sets):
            if len(s) > 1:
                return i
        return 0

    def _split(self, a):
        if not isinstance(a, str):
            return frozenset([a])
        parts = (canonical_code(p, trim=True, casefold=self.casefold) for p in a.split(self.sep))
        return frozenset(p for p in parts if p is not None)

    def _codebook_map(self, book, atoms, owners, cell_of) -> dict:
        """Map each data atom to its codebook entry; collect unknown codes into one error."""
        if self.casefold:
            lookup = {}
            for c in book.categories:
                lookup.setdefault(c.casefold() if isinstance(c, str) else c, c)
        else:
            lookup = {c: c for c in book.categories}
        mapping, problems = {}, []
        for a in atoms:
            if a in lookup:
                mapping[a] = lookup[a]
                continue
            where, count = cell_of.first_of_many(owners(a))
            names = [str(c) for c in book.categories]
            close = difflib.get_close_matches(str(a), names, n=1, cutoff=0.5)
            if not close and isinstance(a, str):
                close = difflib.get_close_matches(a.casefold(), [x.casefold() for x in names], n=1, cutoff=0.5)
                close = [names[[x.casefold() for x in names].index(close[0])]] if close else []
            hint = f"closest codebook entry: '{close[0]}'" if close else "add it to the codebook or fix the cell"
            if _looks_missing(a):
                hint = (f"'{a}' looks like a missing value: leave such cells empty (an empty cell is "
                        "missing), or add it to the codebook if it is a code")
            more = f" (and {count - 1} more cell{'s' * (count != 2)})" if count > 1 else ""
            problems.append(AgreeError(f"code '{a}' is not in the codebook{more}", where=where,
                                       hint=hint, code="unknown-code"))
        if problems:
            first = problems[0]
            n = len(problems)
            src = f" ({book.source})" if getattr(book, "source", None) else ""
            summary = first.message if n == 1 else f"{n} codes are not in the codebook{src}; first: {first.message}"
            raise AgreeError(summary, where=first.where, hint=first.hint, code="unknown-code", problems=problems)
        return mapping

    def _presence_codebook_check(self, book) -> dict:
        if book is None:
            return {}
        lookup = {(c.casefold() if self.casefold and isinstance(c, str) else c): c for c in book.categories}
        problems, mapping = [], {}
        for t, cat, col in self.presence_columns:
            key = cat
            if key in lookup:
                mapping[cat] = lookup[key]
                continue
            close = difflib.get_close_matches(str(cat), [str(c) for c in book.categories], n=1, cutoff=0.5)
            problems.append(AgreeError(f"code column '{col}' is not in the codebook",
                                       where=t.where(1, col), code="unknown-code",
                                       hint=f"closest codebook entry: '{close[0]}'" if close else
                                       "add it to the codebook or rename the column"))
        _raise_all(problems, "code columns are not in the codebook")
        return mapping

    def _case_space_hints(self, atoms, locate):
        """Warn about codes that differ only in surrounding spaces or in case (they count as
        different codes), naming the first cells; `locate(atom)` gives a cell holding it."""
        texts = [a for a in atoms if isinstance(a, str)]

        def shown(group):
            return " / ".join(f"{x!r} ({locate(x)})" for x in group[:3])

        if not self.trim:
            groups: dict[str, list[str]] = {}
            for a in texts:
                groups.setdefault(a.strip(), []).append(a)
            clash = [g for g in groups.values() if len(g) > 1]
            if clash:
                self.notes.append(
                    f"warning: {len(clash)} code(s) differ only in spaces before or after them and count as "
                    f"different codes: {shown(clash[0])}{' ...' if len(clash) > 1 else ''}; "
                    "use --trim (trim=True) to merge them")
        if not self.casefold:
            groups = {}
            for a in texts:
                groups.setdefault(a.strip().casefold(), []).append(a)
            clash = [g for g in groups.values() if len(set(x.strip() for x in g)) > 1]
            if clash:
                self.notes.append(
                    f"warning: {len(clash)} code(s) differ only in upper/lower case and count as different "
                    f"codes: {shown(clash[0])}{' ...' if len(clash) > 1 else ''}; "
                    "use --casefold (casefold=True) to merge them")

    def _extras(self, unit_ids, table_maps):
        """Per-unit text and kept columns: the first non-empty value of each unit."""
        text = None
        if self.text_entries:
            text = self._per_unit("text", self.text_entries, unit_ids, table_maps)
        columns = {name: self._per_unit(name, entries, unit_ids, table_maps)
                   for name, entries in self.extra.items()}
        return text, columns

    def _per_unit(self, name, entries, unit_ids, table_maps) -> np.ndarray:
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
        for e, (t, col) in enumerate(entries):
            ti = self.tables.index(t)
            local = self.table_units[ti][0]
            ok = local >= 0
            series = col[ok].reset_index(drop=True)
            fcodes, uniques = _factorize(series)
            keep_u = np.array([normalise_value(v) is not None for v in uniques] + [False], dtype=bool)
            text_u = np.array([str(normalise_value(v)).strip() for v in uniques] + [""], dtype=object)
            present = keep_u[fcodes]
            g = table_maps[ti][local[ok]][present]
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
        if clashes and self.layout in ("per-coder", "presence-per-coder") and name != "text":
            problems = []
            for u, e1, r1, e2, r2, v1, v2 in clashes[:20]:
                (t1, _), (t2, _) = entries[e1], entries[e2]
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
            self.notes.append(f"column '{name}': {conflicts} unit(s) have different values on different "
                              "rows; the first was kept")
        return arr


def _unit_col_name(builder: "_Builder", t: _Table) -> str | None:
    r = builder.roles.get(id(t))
    return r.unit if r is not None else None


def _rows_text(rows: np.ndarray, limit: int = 10) -> str:
    rows = [int(r) for r in rows]
    text = ", ".join(map(str, rows[:limit]))
    return text + (f", ... ({len(rows)} rows)" if len(rows) > limit else "")


class _CellFinder:
    """Find the cells holding a given vocab entry (for error messages), vectorised."""

    def __init__(self, value, rows, source, sources):
        self.value, self.rows, self.source, self.sources = value, rows, source, sources

    def _where(self, pos: int) -> str:
        s = self.sources[int(self.source[pos])]
        return cell_location(s[0], s[1], int(self.rows[pos]), s[2])

    def first(self, index: int) -> str:
        hit = np.flatnonzero(self.value == index)
        return self._where(int(hit[0])) if hit.size else ""

    def firsts(self, indices: list[int], k: int) -> list[tuple[str, int]]:
        """The first `k` cells (by source, then row) holding any of `indices`: (where, position)."""
        hit = np.flatnonzero(np.isin(self.value, indices))
        if not hit.size:
            return []
        order = np.lexsort((self.rows[hit], self.source[hit]))[:k]
        return [(self._where(int(hit[o])), int(hit[o])) for o in order]

    def first_of_many(self, indices: list[int]) -> tuple[str, int]:
        hit = np.flatnonzero(np.isin(self.value, indices))
        if not hit.size:
            return "", 0
        # earliest by source then row, as a reader would look for it
        order = np.lexsort((self.source[hit], self.rows[hit]))
        return self._where(int(hit[order[0]])), int(hit.size)
