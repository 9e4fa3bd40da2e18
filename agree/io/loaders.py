"""File loaders: a file in, raw tables out. Every module that reads a table goes through here.

`LOADERS` is the one table of file formats (add a file format here: one `Loader` entry). Each
entry knows its suffixes, how its content starts (so a file is checked against its suffix, and
a file with an unknown suffix is read by what it holds) and how to load it. A loader returns
`Grid`s: one per table (a text or Parquet file, or one worksheet), with the header cells, the
raw cell values and the spreadsheet row of each record. `Grid.table()` checks the header
(blank, repeated names) and gives a `Table` with named columns; `load_tables` does both.

Rows are counted the way a spreadsheet counts them: the header is row 1, the first data row is
row 2. Blank lines inside a CSV file are skipped by the CSV parser, so row numbers after a blank
line are one lower than the line number; a blank row inside a worksheet is counted. For Parquet
the numbering is the same as if the table were saved as a spreadsheet.

Text files are decoded from UTF-8 (with or without a byte-order mark), UTF-16 (with one) or
Windows-1252 (with a note), and their separator (comma, semicolon or tab) is detected from the
header unless the suffix says (.tsv). Every cell of a text file is text as written, with the
formula protection of agree's own CSV files undone (`agree.core.cells`); workbook and Parquet
cells keep their types (numbers, dates). Every file opened is recorded as an input of the run
(`agree.core.files.record_input`), so no output of the run may replace it.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd

from agree.core.cells import PROTECTED_PATTERN
from agree.core.files import record_input, sha256_file
from agree.core.model import AgreeError, cell_location, normalise_value

__all__ = ["LOADERS", "Loader", "Grid", "Table", "Loaded", "load", "load_tables", "loader_for",
           "read_lines", "raise_all", "column_label", "known_suffixes"]

_MAGIC_ZIP = b"PK\x03\x04"
_MAGIC_OLE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_MAGIC_PARQUET = b"PAR1"
_HEAD = 4096  # bytes read to tell what a file holds


# -- what loaders return ---------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Table:
    """One header + rows block with named columns: a text or Parquet file, or one worksheet."""

    file: str
    sheet: str | None
    frame: pd.DataFrame  # columns are the (stripped) header names, values raw
    rows: np.ndarray  # spreadsheet row number of each frame row
    letters: bool = False  # spreadsheet column letters exist (workbooks)
    kind: str = "text"  # the loader's kind ("text": every cell is text)

    def where(self, row: int | None = None, column: str | None = None) -> str:
        return cell_location(self.file, self.sheet, row, column)


@dataclass(frozen=True, eq=False)
class Grid:
    """One block of records before its header is checked: `header` holds the header row's raw
    cells, `frame` the records below it (columns 0..width-1), `rows` their spreadsheet rows."""

    file: str
    sheet: str | None
    header: list
    frame: pd.DataFrame
    rows: np.ndarray
    letters: bool = False
    kind: str = "text"

    def where(self, row: int | None = None, column: str | None = None) -> str:
        return cell_location(self.file, self.sheet, row, column)

    def records(self) -> list[list]:
        """Every record below the header as a list of cells (None for an empty cell)."""
        frame = self.frame.astype(object)
        return frame.where(frame.notna(), None).to_numpy().tolist()

    def table(self) -> Table:
        """Check the header (blank, repeated) and name the columns after it."""
        file, sheet, letters = self.file, self.sheet, self.letters
        where = cell_location(file, sheet)
        header = self.header
        if not header or all(h is None or str(h).strip() == "" for h in header):
            raise AgreeError("the sheet is empty" if sheet else "the file has no header row", where=where,
                             hint="the first row must name the columns",
                             code="empty-sheet" if sheet else "empty-file")
        names: list[str | None] = [None if h is None or str(h).strip() == "" else str(h).strip()
                                   for h in _header_strings(header)]
        frame = self.frame
        keep, seen, problems = [], {}, []
        for i, h in enumerate(names):
            if h is None:
                if _has_values(frame.iloc[:, i]):
                    problems.append(AgreeError(f"{column_label(i + 1, letters)} has a blank header but holds data",
                                               where=cell_location(file, sheet, 1), code="blank-header",
                                               hint="give every column a name in the first row"))
                continue
            if h in seen:
                problems.append(AgreeError(
                    f"{column_label(i + 1, letters)} repeats the header '{h}' of {column_label(seen[h] + 1, letters)}",
                    where=cell_location(file, sheet, 1), code="duplicate-header",
                    hint="give every column a different name"))
                continue
            seen[h] = i
            keep.append(i)
        raise_all(problems, "header problems")
        out = frame.iloc[:, keep].copy()
        out.columns = [names[i] for i in keep]
        if len(out) == 0:
            raise AgreeError("the sheet has a header but no data rows" if sheet else
                             "the file has a header but no data rows", where=where,
                             code="empty-sheet" if sheet else "empty-file", hint="check that the data were saved")
        return Table(file=file, sheet=sheet, frame=out, rows=self.rows, letters=letters, kind=self.kind)


@dataclass(frozen=True)
class Loaded:
    """What one file gave: its grids, notes on how it was read, what was left out, its checksum."""

    grids: tuple[Grid, ...]
    notes: tuple[str, ...] = ()
    left_out: tuple[str, ...] = ()
    checksums: dict[str, str] = field(default_factory=dict)
    kind: str = "text"


@dataclass(frozen=True)
class Loader:
    """One file format.

    kind : the name of the format ("text", "workbook", "parquet").
    what : the format as a sentence names it ("a text (CSV/TSV) file").
    content : the format as sniffed content is described ("plain text (CSV-like)").
    suffixes : the file suffixes it reads; the first is suggested when a file is misnamed.
    magic : whether the first bytes of a file look like this format.
    load : ``load(path, name=..., sheet=..., suffix=...) -> Loaded``.
    sheets : the format has worksheets (``sheet=`` applies).
    explains : content that is not this format but that `load` refuses with a clearer message
        than "wrong content" (an encrypted workbook).
    """

    kind: str
    what: str
    content: str
    suffixes: tuple[str, ...]
    magic: Callable[[bytes], bool]
    load: Callable[..., Loaded]
    sheets: bool = False
    explains: Callable[[bytes], bool] | None = None


def raise_all(problems: list[AgreeError], what: str) -> None:
    """Raise the problems as one error (the first named, all kept in `problems`), if any."""
    if not problems:
        return
    if len(problems) == 1:
        raise problems[0]
    first = problems[0]
    raise AgreeError(f"{len(problems)} {what}; first: {first.message}", hint=first.hint,
                     where=first.where, code=first.code, problems=problems)


def column_label(position: int, letters: bool) -> str:
    """'column 3 (C)' for workbooks, 'column 3' otherwise (1-based position)."""
    if not letters:
        return f"column {position}"
    n, name = position, ""
    while n:
        n, r = divmod(n - 1, 26)
        name = chr(65 + r) + name
    return f"column {position} ({name})"


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


# -- text files -------------------------------------------------------------------------------
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


_TEXT_DELIMITERS = {".tsv": "\t"}  # suffixes that fix the delimiter; others are detected


def _load_text(path: Path, *, name: str, sheet: Any = None, suffix: str = "") -> Loaded:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    delimiter = _TEXT_DELIMITERS.get(suffix)
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
    grid = Grid(name, None, header, frame, rows, letters=False, kind="text")
    return Loaded((grid,), notes=tuple(notes), checksums={name: checksum}, kind="text")


def _unprotect(table):
    """Undo the formula protection of agree's CSV files (`agree.core.cells`): one ``'`` less in
    cells that are ``'``s followed by ``= + - @``, a tab or a carriage return."""
    import pyarrow as pa
    import pyarrow.compute as pc

    return pa.table({name: pc.replace_substring_regex(table[name], pattern=PROTECTED_PATTERN,
                                                      replacement=r"\1", max_replacements=1)
                     for name in table.column_names})


def read_lines(path: str | Path, *, name: str | None = None) -> tuple[list[tuple[int, str]], tuple[str, ...]]:
    """The lines of a text file as (line number, text), decoded like a CSV file (UTF-8, UTF-16
    or Windows-1252), with the notes on how it was decoded. For plain lists, one entry a line."""
    path = Path(path)
    name = str(path) if name is None else name
    _check_file(path, name)
    data, note = _decode(path.read_bytes(), name)
    lines = data.decode("utf-8").splitlines()
    return [(i, line) for i, line in enumerate(lines, start=1)], ((f"{name}: {note}",) if note else ())


# -- workbooks ----------------------------------------------------------------------------------
def _load_workbook(path: Path, *, name: str, sheet: Any = None, suffix: str = "") -> Loaded:
    import openpyxl

    head = _head(path)
    if head.startswith(_MAGIC_OLE):
        raise AgreeError("the workbook is password-protected (encrypted) or in an old format",
                         where=name, code="encrypted-workbook",
                         hint="open it, remove the password and save it again as .xlsx")
    checksums = {name: sha256_file(path)}
    left_out: list[str] = []
    grids: list[Grid] = []
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # zip and XML errors of a damaged file, of assorted types
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
            left_out.append(f"{name}: hidden sheet(s) not read: {', '.join(repr(h) for h in hidden)} "
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
            grid = _rows_to_grid(raw_rows, file=name, sheet=ws.title)
            if grid is None:
                empty.append(ws.title)
            else:
                grids.append(grid)
    finally:
        wb.close()
    if empty and not grids:
        raise AgreeError("the sheet is empty", where=cell_location(name, empty[0]), code="empty-sheet",
                         hint="choose a sheet with data" + (f" (sheets: {', '.join(titles)})" if len(titles) > 1 else ""))
    if empty:
        left_out.append(f"{name}: empty sheet(s) skipped: {', '.join(repr(e) for e in empty)}")
    return Loaded(tuple(grids), left_out=tuple(left_out), checksums=checksums, kind="workbook")


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


def _rows_to_grid(raw_rows: list[list], *, file: str, sheet: str) -> Grid | None:
    """The block from the first to the last non-blank row; None when the sheet is blank."""
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
    return Grid(file, sheet, body[0], frame, rows, letters=True, kind="workbook")


# -- parquet ----------------------------------------------------------------------------------
def _load_parquet(path: Path, *, name: str, sheet: Any = None, suffix: str = "") -> Loaded:
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
    grid = Grid(name, None, header, frame, rows, letters=False, kind="parquet")
    return Loaded((grid,), checksums={name: sha256_file(path)}, kind="parquet")


# -- the table of formats ---------------------------------------------------------------------
# Add a file format here: one entry. Order matters when sniffing a file with an unknown suffix:
# the first loader whose `magic` accepts the content reads it, so plain text comes last.
LOADERS: tuple[Loader, ...] = (
    Loader("workbook", "an Excel workbook", "an Excel workbook (zip container)", (".xlsx", ".xlsm"),
           magic=lambda head: head.startswith(_MAGIC_ZIP), load=_load_workbook, sheets=True,
           explains=lambda head: head.startswith(_MAGIC_OLE)),
    Loader("parquet", "a Parquet file", "a Parquet file", (".parquet", ".pq"),
           magic=lambda head: head.startswith(_MAGIC_PARQUET), load=_load_parquet),
    Loader("text", "a text (CSV/TSV) file", "plain text (CSV-like)", (".csv", ".tsv", ".txt"),
           magic=_looks_like_text, load=_load_text),
)

# Content that no loader reads, with what to tell the user: (test, description, hint).
_REFUSED_CONTENT = (
    (lambda head: head.startswith(_MAGIC_OLE), "an old-format or password-protected Excel file",
     "save it as a plain .xlsx workbook"),
)
_BINARY = ("binary data, neither a workbook nor delimited text", "check that this is the file you meant")


def known_suffixes() -> list[str]:
    return sorted({s for loader in LOADERS for s in loader.suffixes})


def _head(path: Path) -> bytes:
    with open(path, "rb") as fh:
        return fh.read(_HEAD)


def _content(head: bytes) -> tuple[Loader | None, str, str]:
    """The loader whose magic accepts the content (or None), and how the content is described
    with a hint for a misnamed file."""
    for loader in LOADERS:
        if loader.magic(head):
            return loader, loader.content, f"rename it to {loader.suffixes[0]}"
    for test, what, hint in _REFUSED_CONTENT:
        if test(head):
            return None, what, hint
    return None, *_BINARY


def _check_file(path: Path, name: str) -> None:
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


def loader_for(path: str | Path, *, name: str | None = None) -> Loader:
    """The loader of a file: by its suffix, checked against its content; by its content when
    the suffix is not one of the known ones. Raises a clear error for missing, empty, misnamed
    or unreadable files."""
    path = Path(path)
    name = str(path) if name is None else name
    ext = path.suffix.lower()
    if ext == ".xls":
        raise AgreeError("the old .xls format is not supported", where=name,
                         hint="save the workbook as .xlsx (or export a CSV)", code="unsupported-format")
    by_suffix = next((loader for loader in LOADERS if ext in loader.suffixes), None)
    _check_file(path, name)
    head = _head(path)
    found, what, hint = _content(head)
    if by_suffix is None:
        if found is None:
            raise AgreeError(f"unsupported file type '{ext or '(none)'}': its content is {what}", where=name,
                             hint=f"use one of {', '.join(known_suffixes())}", code="unsupported-format")
        return found
    if found is not by_suffix and not (by_suffix.explains is not None and by_suffix.explains(head)):
        raise AgreeError(f"the file is not {by_suffix.what}: its content is {what}", hint=hint, where=name,
                         code="wrong-extension")
    return by_suffix


def load(path: str | Path, *, sheet: Any = None, name: str | None = None,
         sheet_option: str = "--sheet (sheet=...)") -> Loaded:
    """Load a file into grids (one per table: the file, or each worksheet read).

    `sheet` (a name, a 1-based number or a list of names) applies to workbooks; by default every
    visible sheet with data is read. `sheet_option` names the option in the error given when a
    sheet is asked of a file without worksheets.
    """
    path = Path(path)
    name = str(path) if name is None else name
    loader = loader_for(path, name=name)
    if sheet is not None and not loader.sheets:
        raise AgreeError(f"{sheet_option} was given, but this is {loader.what}: it has no worksheets",
                         where=name, code="bad-option",
                         hint="--sheet applies to .xlsx workbooks only; leave it out for CSV, TSV and "
                              "Parquet files")
    return loader.load(path, name=name, sheet=sheet, suffix=path.suffix.lower())


def load_tables(path: str | Path, *, sheet: Any = None, name: str | None = None,
                sheet_option: str = "--sheet (sheet=...)") -> tuple[list[Table], Loaded]:
    """`load`, then each grid's header checked and its columns named: (tables, what was loaded)."""
    loaded = load(path, sheet=sheet, name=name, sheet_option=sheet_option)
    return [g.table() for g in loaded.grids], loaded
