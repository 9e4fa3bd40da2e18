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
from array import array
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator

import numpy as np
import pandas as pd

from agree.core.cells import PROTECTED_PATTERN
from agree.core.constants import MAX_SHEET_CELLS
from agree.core.files import record_input, sha256_file
from agree.core.model import AgreeError, cell_location, normalise_value

__all__ = ["LOADERS", "Loader", "Grid", "Table", "Loaded", "load", "load_tables", "loader_for",
           "read_lines", "raise_all", "column_label", "known_suffixes", "cell_limit", "header_rows"]

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
    positions: tuple[int, ...] | None = None  # 1-based column of each frame column (None: 1, 2, ...)

    def where(self, row: int | None = None, column: str | None = None) -> str:
        return cell_location(self.file, self.sheet, row, column)

    def column(self, i: int) -> str:
        """'column 3 (C)' for the frame's column `i` (0-based)."""
        return column_label(self.positions[i] if self.positions is not None else i + 1, self.letters)

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
                    problems.append(AgreeError(f"{self.column(i)} has a blank header but holds data",
                                               where=cell_location(file, sheet, 1), code="blank-header",
                                               hint="give every column a name in the first row"))
                continue
            if h in seen:
                problems.append(AgreeError(
                    f"{self.column(i)} repeats the header '{h}' of {self.column(seen[h])}",
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
    """Whether the first bytes read as delimited text: no zero bytes (outside UTF-16), few
    undecodable characters, not mostly control characters (a few inside cells are text: a bell,
    a unit separator pasted from another program), and a delimiter or a line break somewhere."""
    encodings = ("utf-16",) if head[:2] in (b"\xff\xfe", b"\xfe\xff") else ("utf-8", "cp1252")
    for encoding in encodings:
        text = head.decode(encoding, errors="replace")
        if not text or "\x00" in text:
            continue
        undecodable = text.count("\ufffd")
        control = sum(1 for ch in text if ord(ch) < 32 and ch not in "\t\n\r\f")
        if undecodable <= 0.05 * len(text) and control <= 0.3 * len(text) and \
                any(mark in text for mark in (",", ";", "\t", "\n")):
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


def _first_record(data: bytes, delimiter: str) -> list[str]:
    """The first record of UTF-8 text, however long (a header of many thousand columns), read
    lazily: only as much of the text is decoded as the record needs."""
    stream = io.TextIOWrapper(io.BytesIO(data), encoding="utf-8", errors="replace", newline="")
    try:
        return next(csv.reader(stream, delimiter=delimiter), [])
    except csv.Error:
        stream.seek(0)
        return stream.readline().rstrip("\r\n").split(delimiter)
    finally:
        stream.detach()


def _sniff_delimiter(data: bytes) -> str:
    """The delimiter that splits the header into the most fields (comma on ties), from the first
    megabyte."""
    best, best_n = ",", 1
    sample = data[: 1 << 20]
    for d in (",", ";", "\t"):
        n = len(_first_record(sample, d))
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
    notes = [f"{name}: {note}"] if note else []
    if delimiter is None:
        delimiter = _sniff_delimiter(data)
        if delimiter != ",":
            notes.append(f"{name}: columns separated by {'tab' if delimiter == chr(9) else repr(delimiter)}")
    n_columns = len(_first_record(data, delimiter))
    names = [f"c{i}" for i in range(n_columns)]
    def parse(block_size: int):
        return pacsv.read_csv(
            io.BytesIO(data),
            read_options=pacsv.ReadOptions(column_names=names, block_size=block_size),
            # quoted cells may hold line breaks (multi-line excerpts); without quotes they cannot
            parse_options=pacsv.ParseOptions(delimiter=delimiter, newlines_in_values=b'"' in data),
            # large_string: what pandas' text columns hold, so the frame takes the columns as they are
            convert_options=pacsv.ConvertOptions(column_types={c: pa.large_string() for c in names},
                                                 strings_can_be_null=True, null_values=[""],
                                                 quoted_strings_can_be_null=True),
        )

    try:
        try:
            table = parse(1 << 24)
        except pa.ArrowInvalid as exc:
            if "straddl" not in str(exc):
                raise
            table = parse(len(data) + 1)  # a record longer than a block (very many or long cells)
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
# A worksheet is streamed: openpyxl's parser of one sheet's XML (the one openpyxl's read-only
# mode uses, so numbers, dates, shared and inline strings read as openpyxl reads them), with
# only the cells that hold a value kept, as (row, column, value). Nothing is sized by what the
# sheet declares (its dimension, a row numbered twenty million, styled empty cells up to the
# last column): memory follows the cells that hold values, and the table is the block of rows
# and columns that hold them. A block larger than the cell limit (`MAX_SHEET_CELLS`, or
# `max_cells=`, `--max-cells`) stops with an error before it is built.
_MAX_CELLS: ContextVar[int] = ContextVar("agree_max_cells", default=MAX_SHEET_CELLS)
FORMULAS_SHOWN = 5  # formula cells without a stored result named in the note


@contextmanager
def cell_limit(max_cells: int | None) -> Iterator[int]:
    """Within the block, worksheets of more than `max_cells` cells (rows x columns that hold
    values) are refused; None keeps the limit in force (by default `MAX_SHEET_CELLS`)."""
    if max_cells is None:
        yield _MAX_CELLS.get()
        return
    if isinstance(max_cells, bool) or not isinstance(max_cells, (int, np.integer)) or max_cells < 1:
        raise AgreeError(f"the cell limit must be a whole number of cells, 1 or more; got {max_cells!r}",
                         code="bad-option", hint="e.g. --max-cells 50000000 (max_cells=50_000_000)")
    token = _MAX_CELLS.set(int(max_cells))
    try:
        yield int(max_cells)
    finally:
        _MAX_CELLS.reset(token)


@dataclass
class _SheetCells:
    """The cells of one worksheet that hold a value, and its formula cells without a result."""

    rows: np.ndarray
    columns: np.ndarray
    values: np.ndarray  # object
    blank: np.ndarray  # bool: the value is text of spaces only
    formulas: int = 0  # formula cells with no stored result (read as empty)
    formula_cells: tuple[str, ...] = ()  # the first few, as A1 references


def _too_large(where: str, n_rows: int, n_columns: int, limit: int, last: str) -> AgreeError:
    return AgreeError(
        f"the sheet is too large to read: its values span at least {n_rows:,} rows and {n_columns:,} columns "
        f"({n_rows * n_columns:,} cells), more than the limit of {limit:,} cells",
        where=where, code="sheet-too-large",
        hint=f"delete stray cells far from the table (values reach {last}), or raise the limit "
             "with --max-cells (max_cells=...)")


def _stream_sheet(book, target: str, *, where: str, limit: int) -> _SheetCells:
    """The cells of one worksheet (its part `target` in the workbook `book`, an openpyxl
    `ExcelReader`) that hold a value, streamed (see above)."""
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet._reader import CELL_TAG, DATA_TAG, FORMULA_TAG, ROW_TAG, WorkSheetParser
    from openpyxl.xml.functions import iterparse

    wb = book.wb
    rows, columns, values, blank = array("q"), array("q"), [], array("b")
    columns_seen: set[int] = set()
    n_rows = 0
    formulas, formula_cells = 0, []
    with book.archive.open(target) as source:
        parser = WorkSheetParser(source, book.shared_strings, data_only=True, epoch=wb.epoch,
                                 date_formats=wb._date_formats, timedelta_formats=wb._timedelta_formats)
        data = None
        for event, element in iterparse(source, events=("start", "end")):
            tag = element.tag
            if event == "start":
                if tag == DATA_TAG:
                    data = element
                continue
            if tag == DATA_TAG:
                break  # the cells are read; what follows is formatting
            if tag != ROW_TAG:
                continue
            r = element.get("r")
            parser.row_counter = int(float(r)) if r else parser.row_counter + 1
            parser.col_counter = 0
            held = False
            for c in element:
                if c.tag != CELL_TAG:
                    continue
                cell = parser.parse_cell(c)
                value = cell["value"]
                if value is None:
                    if c.find(FORMULA_TAG) is not None:
                        formulas += 1
                        if len(formula_cells) < FORMULAS_SHOWN:
                            formula_cells.append(f"{get_column_letter(cell['column'])}{cell['row']}")
                    continue
                held = True
                rows.append(cell["row"])
                columns.append(cell["column"])
                columns_seen.add(cell["column"])
                values.append(value)
                blank.append(isinstance(value, str) and not value.strip())
            if data is not None:
                data.clear()  # rows already read are not kept
            if held:
                n_rows += 1
                if n_rows * len(columns_seen) > limit:
                    raise _too_large(where, n_rows, len(columns_seen), limit,
                                     f"column {get_column_letter(max(columns_seen))} and row {parser.row_counter:,}")
    cells = np.empty(len(values), dtype=object)
    cells[:] = values
    return _SheetCells(np.frombuffer(rows, dtype=np.int64) if rows else np.zeros(0, np.int64),
                       np.frombuffer(columns, dtype=np.int64) if columns else np.zeros(0, np.int64),
                       cells, np.frombuffer(blank, dtype=np.int8).astype(bool) if blank else np.zeros(0, bool),
                       formulas, tuple(formula_cells))


def _cells_to_grid(cells: _SheetCells, *, file: str, sheet: str) -> Grid | None:
    """The block from the first to the last row holding a non-blank value, in the columns that
    hold values; rows without any value are left out (their numbers are kept in `rows`). None
    when the sheet holds nothing but blanks."""
    solid = ~cells.blank
    if not solid.any():
        return None
    first, last = cells.rows[solid].min(), cells.rows[solid].max()
    inside = (cells.rows >= first) & (cells.rows <= last)
    rows_at, columns_at, values = cells.rows[inside], cells.columns[inside], cells.values[inside]
    row_numbers, r = np.unique(rows_at, return_inverse=True)
    positions, c = np.unique(columns_at, return_inverse=True)
    block = np.full((len(row_numbers), len(positions)), None, dtype=object)
    block[r, c] = values
    header = block[0].tolist()
    frame = pd.DataFrame(block[1:], columns=range(len(positions)), dtype=object)
    return Grid(file, sheet, header, frame, row_numbers[1:].astype(np.int64), letters=True, kind="workbook",
                positions=tuple(int(p) for p in positions))


def _open_workbook(path: Path, name: str):
    """The workbook's parts as openpyxl reads them (manifest, shared strings, sheets, styles for
    dates), without openpyxl's read-only worksheets: those measure every sheet when opened, at a
    cost that follows the rows a sheet declares."""
    from openpyxl.reader.excel import ExcelReader
    from openpyxl.styles.stylesheet import apply_stylesheet

    try:
        book = ExcelReader(path, read_only=True, data_only=True)
        book.read_manifest()
        book.read_strings()
        book.read_workbook()
        apply_stylesheet(book.archive, book.wb)
        sheets = [(sheet.name, sheet.state or "visible", rel.target) for sheet, rel in book.parser.find_sheets()
                  if rel.target in book.valid_files and "chartsheet" not in rel.Type]
    except Exception as exc:  # zip and XML errors of a damaged file, of assorted types
        raise AgreeError(f"the workbook is damaged and cannot be opened ({type(exc).__name__})",
                         where=name, hint="open it in a spreadsheet program and save it again",
                         code="corrupt-workbook") from None
    return book, sheets


def _load_workbook(path: Path, *, name: str, sheet: Any = None, suffix: str = "") -> Loaded:
    head = _head(path)
    if head.startswith(_MAGIC_OLE):
        raise AgreeError("the workbook is password-protected (encrypted) or in an old format",
                         where=name, code="encrypted-workbook",
                         hint="open it, remove the password and save it again as .xlsx")
    checksums = {name: sha256_file(path)}
    left_out: list[str] = []
    notes: list[str] = []
    grids: list[Grid] = []
    limit = _MAX_CELLS.get()
    book, sheets = _open_workbook(path, name)
    try:
        titles = [title for title, _, _ in sheets]
        wanted = _select_sheets(sheet, titles, name)
        hidden = [title for title, state, _ in sheets if state != "visible"]
        if sheet is None and hidden and len(hidden) < len(sheets):
            # hidden sheets hold lists for drop-downs and the like, not a coder's work
            wanted = [t for t in wanted if t not in hidden]
            left_out.append(f"{name}: hidden sheet(s) not read: {', '.join(repr(h) for h in hidden)} "
                            "(name them with --sheet to read them)")
        empty = []
        for title, _, target in sheets:
            if title not in wanted:
                continue
            where = cell_location(name, title)
            try:
                cells = _stream_sheet(book, target, where=where, limit=limit)
            except AgreeError:
                raise
            except Exception as exc:
                raise AgreeError(f"the worksheet cannot be read ({type(exc).__name__})",
                                 where=where, code="corrupt-workbook",
                                 hint="open it in a spreadsheet program and save it again") from None
            if cells.formulas:
                n = cells.formulas
                shown = ", ".join(cells.formula_cells) + (", ..." if n > len(cells.formula_cells) else "")
                notes.append(f"warning: {where}: {n} formula cell{'s' * (n != 1)} without a stored result "
                             f"read as empty ({shown}); open the workbook in a spreadsheet program and save "
                             "it, so that the results are stored, or type the values in")
            grid = _cells_to_grid(cells, file=name, sheet=title)
            if grid is None:
                empty.append(title)
            else:
                grids.append(grid)
    finally:
        book.archive.close()
    if empty and not grids:
        raise AgreeError("the sheet is empty" if len(empty) == 1 else "every sheet is empty",
                         where=cell_location(name, empty[0]) if len(empty) == 1 else name, code="empty-sheet",
                         hint="choose a sheet with data" + (f" (sheets: {', '.join(titles)})" if len(titles) > 1 else ""))
    if empty:
        left_out.append(f"{name}: empty sheet(s) skipped: {', '.join(repr(e) for e in empty)}")
    return Loaded(tuple(grids), notes=tuple(notes), left_out=tuple(left_out), checksums=checksums, kind="workbook")


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


# -- parquet ----------------------------------------------------------------------------------
def _nested(kind) -> str | None:
    """How a sentence names an Arrow type agree cannot read as a cell (None: it can; lists of
    plain values can: they are read as sets of codes)."""
    import pyarrow.types as pat

    if pat.is_dictionary(kind):
        kind = kind.value_type
    if pat.is_list(kind) or pat.is_large_list(kind) or pat.is_fixed_size_list(kind):
        inner = _nested(kind.value_type)
        return None if inner is None else f"lists of {inner}" if not inner.startswith("lists") else inner
    if pat.is_struct(kind):
        return "structs (records of named fields)"
    if pat.is_map(kind):
        return "maps (key-value pairs)"
    if pat.is_union(kind):
        return "unions of types"
    if pat.is_binary(kind) or pat.is_large_binary(kind) or pat.is_fixed_size_binary(kind):
        return "binary values"
    return None


def _as_tuples(values: np.ndarray) -> np.ndarray:
    """A column of lists as tuples (hashable, order and repeats kept; None for a missing list):
    the readers take a tuple of codes as a set of codes (`normalise_value`), an empty one as the
    empty set; a multiset of a pattern-count table keeps its repeats."""
    out = np.empty(len(values), dtype=object)
    out[:] = [None if v is None else tuple(v) for v in values]
    return out


def _load_parquet(path: Path, *, name: str, sheet: Any = None, suffix: str = "") -> Loaded:
    import pyarrow as pa
    import pyarrow.parquet as pq
    import pyarrow.types as pat

    try:
        table = pq.read_table(path)
    except (pa.ArrowException, OSError) as exc:
        raise AgreeError(f"the Parquet file is damaged and cannot be read ({str(exc).splitlines()[0]})",
                         where=name, hint="write the file again", code="corrupt-parquet") from None
    if table.num_columns == 0:
        raise AgreeError("the file has no columns", where=name, code="empty-file",
                         hint="check that the data were saved")
    problems = []
    for column, field_ in zip(table.column_names, table.schema):
        what = _nested(field_.type)
        if what is not None:
            problems.append(AgreeError(
                f"column '{column}' holds {what} ({field_.type}), which cannot be read as codes, unit ids or text",
                where=cell_location(name, None, 1, column), code="nested-column",
                hint="write that column as text or numbers (several codes per unit as a list of codes, or as "
                     "text separated by ';'), or leave it out of the file"))
    raise_all(problems, "columns hold values that cannot be read")
    lists = [c for c, f in zip(table.column_names, table.schema)
             if pat.is_list(f.type) or pat.is_large_list(f.type) or pat.is_fixed_size_list(f.type)]
    frame = table.to_pandas()
    del table
    for c in lists:  # several codes per unit: sets, as the readers make of "a; b"
        frame[c] = _as_tuples(frame[c].to_numpy(dtype=object))
    frame = frame.reset_index(drop=True)
    header = [str(c) for c in frame.columns]
    frame.columns = range(frame.shape[1])
    rows = np.arange(2, len(frame) + 2, dtype=np.int64)
    notes = ((f"{name}: list column(s) {', '.join(repr(c) for c in lists)} read as sets of codes (the data are "
              "analysed as sets; an empty list is a unit coded with no code applied)",) if lists else ())
    grid = Grid(name, None, header, frame, rows, letters=False, kind="parquet")
    return Loaded((grid,), notes=notes, checksums={name: sha256_file(path)}, kind="parquet")


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


def header_rows(path: str | Path, *, sheet: Any = None, name: str | None = None) -> list[list[str | None]]:
    """The header row of each table of a file, reading as little as the format allows: a text
    file's first record (from its first megabyte), a Parquet file's column names (its schema),
    each worksheet's first row with values (workbooks are read in full). For telling what a file
    holds before reading it; the errors are those of `load`, and a text head that cannot be
    decoded gives no header (the full read explains why)."""
    path = Path(path)
    name = str(path) if name is None else name
    loader = loader_for(path, name=name)
    if loader.kind == "text":
        with open(path, "rb") as fh:
            raw = fh.read(1 << 20)
        try:
            data, _ = _decode(raw, name)
        except AgreeError:
            return [[]]
        delimiter = _TEXT_DELIMITERS.get(path.suffix.lower()) or _sniff_delimiter(data)
        return [[cell.strip() or None for cell in _first_record(data, delimiter)]]
    if loader.kind == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        try:
            return [list(pq.read_schema(path).names)]
        except (pa.ArrowException, OSError):
            return [[]]
    return [_header_strings(list(g.header)) for g in load(path, sheet=sheet, name=name).grids]
