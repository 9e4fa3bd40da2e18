"""Drawing the reliability subsample and writing one blank coding workbook per coder.

`draw_sample` draws n units from the full list of units, simply at random or stratified by a
grouping column (largest-remainder allocation: every stratum gets its proportional share
rounded down, and the units left over go to the strata with the largest remainders, so each
stratum's count is within one unit of proportional). The draw is reproducible from the seed
and never takes a unit twice.

`draw_sample(..., exclude=ids)` leaves out units already double-coded (`read_unit_ids` reads
their ids from earlier coding files or a plain list).

`write_coding_sheets` writes `<coder>.xlsx` for every coder, a single sheet with the header
``unit_id, [stratify and kept columns], text, code, notes`` (the context columns shaded, the
codebook as a drop-down list on `code`), plus
`manifest.csv` (unit id, stratum, draw order, corpus row) and `manifest.json` (seed, n, corpus
checksum, date). The per-coder files read straight back with `agree.read([...])`: the coder
name is the file stem.
"""

from __future__ import annotations

import csv
import datetime as _dt
import hashlib
import io
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.core.files import atomic_write_bytes
from agree.core.model import AgreeError, cell_location, normalise_value
from agree.io.readers import TEXT_NAMES, UNIT_NAMES

# The readers' names for the unit-id and text columns, so a corpus and its coding sheets agree;
# "response" is a text column in a list of units but too ambiguous in coding data.
ID_COLUMN_NAMES = ("unit_id",) + tuple(n for n in UNIT_NAMES if n != "unit_id")
TEXT_COLUMN_NAMES = TEXT_NAMES + ("response",)
SHEET_COLUMNS = ("unit_id", "text", "code", "notes")
_BAD_NAME = re.compile(r'[\\/:*?"<>|\x00-\x1f]')


# ---------------------------------------------------------------------------------------
# Reading the corpus
# ---------------------------------------------------------------------------------------

def read_corpus(path: str | os.PathLike, *, sheet: str | int | None = None) -> pd.DataFrame:
    """Read the full list of units from CSV or XLSX (all columns as text, nothing dropped).

    The file's path and SHA-256 are kept in ``frame.attrs`` ("source", "checksum") so the
    manifest can name them.
    """
    path = Path(path)
    if not path.is_file():
        raise AgreeError(f"no such file: {path}", code="no-file")
    data = path.read_bytes()
    suffix = path.suffix.lower()
    try:
        if suffix in (".xlsx", ".xlsm"):
            frame = pd.read_excel(io.BytesIO(data), sheet_name=0 if sheet is None else sheet,
                                  dtype=object, engine="openpyxl")
        elif suffix in (".csv", ".txt", ".tsv"):
            frame = pd.read_csv(io.BytesIO(data), dtype=str, keep_default_na=False,
                                sep="\t" if suffix == ".tsv" else None, engine="python",
                                encoding="utf-8-sig")
        else:
            raise AgreeError(f"cannot read '{path.name}': the list of units must be CSV or XLSX",
                             code="corpus-format")
    except AgreeError:
        raise
    except Exception as exc:  # pandas/openpyxl parse errors become one line
        raise AgreeError(f"could not read {path.name}: {exc}", code="corpus-unreadable") from exc
    frame.attrs["source"] = str(path)
    frame.attrs["sheet"] = None if sheet is None else str(sheet)
    frame.attrs["checksum"] = hashlib.sha256(data).hexdigest()
    return frame


def detect_id_column(corpus: pd.DataFrame, id_col: str | None = None) -> str:
    """The unit-id column: `id_col` if given, else the first column whose name is a usual id
    name (unit_id, unit, id, ...; case and spaces ignored)."""
    found = _find_column(corpus, id_col, ID_COLUMN_NAMES, code="no-id-column")
    if found is None:
        columns = ", ".join(str(c) for c in corpus.columns)
        raise AgreeError("could not find the unit-id column",
                         hint=f"name it unit_id or pass --unit-col; columns are: {columns}", code="no-id-column")
    return found


def detect_text_column(corpus: pd.DataFrame, text_col: str | None = None) -> str | None:
    """The text column: `text_col` if given, else the first usual text name; None if none."""
    return _find_column(corpus, text_col, TEXT_COLUMN_NAMES, code="no-text-column")


def _find_column(corpus: pd.DataFrame, given: str | None, names: Sequence[str], *, code: str) -> str | None:
    """`given` if it is a column (else an error), or the first column named like one of `names`
    (case and spaces ignored), or None."""
    columns = [str(c) for c in corpus.columns]
    if given is not None:
        if given not in columns:
            raise AgreeError(f"no column '{given}' in the list of units",
                             hint=f"columns are: {', '.join(columns)}", code=code)
        return given
    norm = {c.strip().lower().replace(" ", "_"): c for c in columns}
    return next((norm[n.replace(" ", "_")] for n in names if n.replace(" ", "_") in norm), None)


def _row_where(corpus: pd.DataFrame, position: int, column: str) -> str:
    """Cell location of a corpus row as a spreadsheet counts it (header = row 1)."""
    return cell_location(corpus.attrs.get("source"), corpus.attrs.get("sheet"), position + 2, column)


def _unit_keys(corpus: pd.DataFrame, id_col: str) -> list[str]:
    """Normalised unit ids (1 and 1.0 are the same id); errors for blank and duplicate ids."""
    problems: list[AgreeError] = []
    keys: list[str] = []
    first_seen: dict[str, int] = {}
    for pos, raw in enumerate(corpus[id_col].tolist()):
        value = normalise_value(raw.strip() if isinstance(raw, str) else raw)
        if value is None:
            problems.append(AgreeError("blank unit id", where=_row_where(corpus, pos, id_col),
                                       hint="every unit needs an id", code="blank-unit-id"))
            keys.append("")
            continue
        key = str(value)
        if key in first_seen:
            problems.append(AgreeError(
                f"duplicate unit id '{key}' (first at row {first_seen[key] + 2})",
                where=_row_where(corpus, pos, id_col), hint="unit ids must be unique",
                code="duplicate-unit-id"))
        else:
            first_seen[key] = pos
        keys.append(key)
    if problems:
        first = problems[0]
        raise AgreeError(first.message, where=first.where, hint=first.hint, code=first.code,
                         problems=problems)
    return keys


# ---------------------------------------------------------------------------------------
# Drawing the sample
# ---------------------------------------------------------------------------------------

def largest_remainder_allocation(sizes: Sequence[int], n: int) -> np.ndarray:
    """Split n draws over strata of the given sizes in proportion (largest remainder).

    Notes
    -----
    quota_s = n N_s / N; each stratum gets floor(quota_s), and the n - sum floor(quota_s) units
    left over go one each to the strata with the largest fractional parts (ties to the
    earlier stratum). So |n_s - quota_s| < 1 for every stratum, and n_s <= N_s.
    """
    sizes = np.asarray(sizes, dtype=np.int64)
    total = int(sizes.sum())
    quota = n * sizes / total
    alloc = np.floor(quota).astype(np.int64)
    left = n - int(alloc.sum())
    order = np.lexsort((np.arange(len(sizes)), -(quota - alloc)))
    alloc[order[:left]] += 1
    return alloc


def draw_sample(corpus: pd.DataFrame, n: int, *, stratify: str | None = None,
                seed: int | None = None, id_col: str | None = None,
                exclude: Iterable[Any] | None = None) -> pd.DataFrame:
    """Draw the reliability subsample from the full list of units.

    Parameters
    ----------
    corpus : one row per unit, with a unit-id column (detected by name, or `id_col`) and any
        other columns (text, document, participant, ...).
    n : number of units to draw (at most the number of units not excluded).
    stratify : a grouping column; each group then gets its proportional share (within one
        unit; blank group values form their own group "(blank)") of the units not excluded.
    seed : makes the draw reproducible; drawn and recorded when None.
    id_col : the unit-id column, when its name is not a usual one.
    exclude : ids of units not to draw, e.g. units already double-coded in earlier rounds
        (see `read_unit_ids`). Ids are compared as the corpus ids are (1 and 1.0 alike);
        ids not in the corpus are counted, not silently dropped.

    Returns
    -------
    DataFrame
        The drawn rows (all corpus columns) in draw order, with two added columns:
        ``draw_order`` (1..n) and ``corpus_row`` (the row in the corpus sheet, header = 1).
        ``attrs`` records seed, id column, stratify column, allocation, stratum sizes (units
        available after exclusion), corpus size, checksum, ``excluded`` (corpus units left
        out because they were in `exclude`), ``exclude_given`` (distinct ids given) and
        ``exclude_not_in_corpus`` (given ids the corpus does not have).
    """
    if not isinstance(corpus, pd.DataFrame):
        raise AgreeError("the list of units must be a table (DataFrame)", code="corpus-format")
    id_col = detect_id_column(corpus, id_col)
    for added in ("draw_order", "corpus_row"):
        if added in corpus.columns:
            raise AgreeError(f"the list of units already has a column '{added}'",
                             hint="rename it; the sample adds this column", code="column-clash")
    keys = _unit_keys(corpus, id_col)
    total = len(corpus)
    excluded_ids = {_id_key(v) for v in (exclude if exclude is not None else ())} - {None}
    eligible_mask = np.array([k not in excluded_ids for k in keys], dtype=bool)
    eligible = np.flatnonzero(eligible_mask)
    n_excluded = total - len(eligible)
    not_in_corpus = len(excluded_ids - set(keys))
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise AgreeError(f"the number of units to draw must be a positive whole number; got {n}",
                         code="sample-size")
    if n > len(eligible):
        if n_excluded:
            raise AgreeError(f"cannot draw {n} units: {len(eligible)} of the {total} units are left "
                             f"after excluding {n_excluded} already coded", code="sample-too-large",
                             hint=f"draw at most {len(eligible)}")
        raise AgreeError(f"cannot draw {n} units from a list of {total}", code="sample-too-large",
                         hint=f"draw at most {total}")
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    seed = int(seed)
    rng = np.random.default_rng(seed)

    allocation: dict[str, int] | None = None
    strata_sizes: dict[str, int] | None = None
    strata_excluded: dict[str, int] | None = None
    if stratify is None:
        chosen = eligible[rng.choice(len(eligible), size=n, replace=False)]
    else:
        if stratify not in corpus.columns:
            raise AgreeError(f"no column '{stratify}' to stratify by",
                             hint=f"columns are: {', '.join(map(str, corpus.columns))}",
                             code="no-stratify-column")
        strata_labels = np.array([_stratum_label(v) for v in corpus[stratify].tolist()], dtype=object)
        names = list(dict.fromkeys(strata_labels.tolist()))     # first-appearance order
        members = [np.flatnonzero((strata_labels == s) & eligible_mask) for s in names]
        alloc = largest_remainder_allocation([len(m) for m in members], n)
        parts = [rng.choice(m, size=k, replace=False) for m, k in zip(members, alloc)]
        chosen = rng.permutation(np.concatenate(parts))
        allocation = {s: int(k) for s, k in zip(names, alloc)}
        strata_sizes = {s: int(len(m)) for s, m in zip(names, members)}
        strata_excluded = {s: int(np.sum((strata_labels == s) & ~eligible_mask)) for s in names}

    sample = corpus.iloc[chosen].copy()
    sample["draw_order"] = np.arange(1, n + 1)
    sample["corpus_row"] = chosen + 2
    sample = sample.reset_index(drop=True)
    checksum = corpus.attrs.get("checksum")
    checksum_of = "file"
    if checksum is None:
        checksum = hashlib.sha256(corpus.to_csv(index=False).encode("utf-8")).hexdigest()
        checksum_of = "table (CSV form)"
    sample.attrs = {
        "seed": seed, "n": int(n), "id_col": id_col, "stratify": stratify,
        "allocation": allocation, "strata_sizes": strata_sizes, "strata_excluded": strata_excluded,
        "corpus_size": total, "corpus_checksum": checksum, "checksum_of": checksum_of,
        "source": corpus.attrs.get("source"),
        "excluded": int(n_excluded), "exclude_given": len(excluded_ids),
        "exclude_not_in_corpus": int(not_in_corpus),
    }
    return sample


def _id_key(value: Any) -> str | None:
    """A unit id as compared across files: trimmed, 1 and 1.0 alike; None when blank."""
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return None if v is None else str(v)


def read_unit_ids(paths: str | os.PathLike | Sequence[str | os.PathLike], *,
                  id_col: str | None = None) -> tuple[str, ...]:
    """The unit ids found in files, e.g. the coding files of earlier rounds, to exclude them.

    Parameters
    ----------
    paths : one file or several. A .txt file is a plain list, one id a line (blank lines and
        lines starting with # skipped). A CSV or XLSX file (every sheet of a workbook) gives the
        ids in its unit column: `id_col` when the file has that column, else the first column
        with a usual id name (unit_id, unit, id, excerpt_id, ...). Long files, with one row
        per unit and coder, give each id once.
    id_col : the unit-id column's name, when it is not a usual one.

    Returns
    -------
    tuple of str
        The distinct ids, in order of first appearance.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    seen: dict[str, None] = {}
    for raw in paths:
        path = Path(raw)
        if not path.is_file():
            raise AgreeError(f"no such file: {path}", code="no-file")
        suffix = path.suffix.lower()
        if suffix in (".txt", ".lst"):
            for line in path.read_text(encoding="utf-8-sig").splitlines():
                key = _id_key(line)
                if key is not None and not key.startswith("#"):
                    seen.setdefault(key, None)
            continue
        if suffix in (".xlsx", ".xlsm"):
            try:
                frames = list(pd.read_excel(path, sheet_name=None, dtype=object, engine="openpyxl").items())
            except Exception as exc:
                raise AgreeError(f"could not read {path.name}: {exc}", code="exclude-unreadable") from exc
        elif suffix in (".csv", ".tsv"):
            try:
                frames = [(None, pd.read_csv(path, dtype=str, keep_default_na=False,
                                             sep="\t" if suffix == ".tsv" else None, engine="python",
                                             encoding="utf-8-sig"))]
            except Exception as exc:
                raise AgreeError(f"could not read {path.name}: {exc}", code="exclude-unreadable") from exc
        else:
            raise AgreeError(f"cannot read unit ids from '{path.name}'",
                             hint="give a coding file (CSV or XLSX) or a .txt list, one id a line",
                             code="exclude-format")
        found = False
        for sheet, frame in frames:
            columns = [str(c) for c in frame.columns]
            try:
                column = detect_id_column(frame, id_col if id_col in columns else None)
            except AgreeError:
                continue
            found = True
            for value in frame[column].tolist():
                key = _id_key(value)
                if key is not None:
                    seen.setdefault(key, None)
        if not found:
            raise AgreeError(f"could not find the unit-id column in {path.name}",
                             hint="name it unit_id (or excerpt_id, id, ...), pass --unit-col, or give "
                                  "a .txt list of ids", code="no-id-column")
    return tuple(seen)


def _stratum_label(value: Any) -> str:
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return "(blank)" if v is None else str(v)


# ---------------------------------------------------------------------------------------
# Writing the coding workbooks
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class CodingSheets:
    """What `write_coding_sheets` wrote."""

    folder: str
    files: tuple[str, ...]
    manifest_csv: str
    manifest_json: str
    coders: tuple[str, ...]
    n: int
    seed: int
    shuffled: bool
    drop_down: str | None       # "inline list", or None (no codebook, or too long for one)
    context_columns: tuple[str, ...] = ()   # corpus columns copied into the sheets
    excluded: int = 0                        # corpus units not drawn: already coded
    exclude_not_in_corpus: int = 0           # ids to exclude that the corpus does not have

    def to_dict(self) -> dict[str, Any]:
        return {"folder": self.folder, "files": list(self.files), "manifest_csv": self.manifest_csv,
                "manifest_json": self.manifest_json, "coders": list(self.coders), "n": self.n,
                "seed": self.seed, "shuffled": self.shuffled, "drop_down": self.drop_down,
                "context_columns": list(self.context_columns), "excluded": self.excluded,
                "exclude_not_in_corpus": self.exclude_not_in_corpus}


def load_codebook_categories(path: str | os.PathLike) -> dict[str, str]:
    """Categories (and descriptions where given) from a codebook file.

    .txt: one category per line. .csv/.xlsx: the column named code/category/label (else the
    first column), and description/definition (else none).
    """
    path = Path(path)
    if not path.is_file():
        raise AgreeError(f"no such file: {path}", code="no-file")
    suffix = path.suffix.lower()
    if suffix in (".txt", ".md"):
        lines = [ln.strip() for ln in path.read_text(encoding="utf-8-sig").splitlines()]
        return {ln: "" for ln in lines if ln}
    if suffix in (".csv", ".tsv"):
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, sep=None, engine="python",
                            encoding="utf-8-sig")
    elif suffix in (".xlsx", ".xlsm"):
        frame = pd.read_excel(path, dtype=object, engine="openpyxl")
    else:
        raise AgreeError(f"cannot read the codebook '{path.name}': use TXT, CSV or XLSX",
                         code="codebook-format")
    lower = {str(c).strip().lower(): c for c in frame.columns}
    code_col = next((lower[k] for k in ("code", "category", "label", "name") if k in lower),
                    frame.columns[0])
    desc_col = next((lower[k] for k in ("description", "definition", "meaning") if k in lower), None)
    out: dict[str, str] = {}
    for i, row in frame.iterrows():
        value = normalise_value(row[code_col])
        if value is None:
            continue
        out[str(value).strip()] = "" if desc_col is None or row[desc_col] is None else str(row[desc_col])
    if not out:
        raise AgreeError(f"the codebook '{path.name}' lists no categories", code="codebook-empty")
    return out


def _check_coders(coders: Sequence[str]) -> tuple[str, ...]:
    names = tuple(str(c).strip() for c in coders)
    problems = []
    if len(names) < 2:
        problems.append(AgreeError("at least two coders are needed", hint="--coders A,B",
                                   code="too-few-coders"))
    for name in names:
        if not name or _BAD_NAME.search(name) or name.startswith(".") or \
                name.lower() in ("manifest", "con", "nul", "prn", "aux"):
            problems.append(AgreeError(f"'{name}' cannot be used as a coder name and file name",
                                       hint="use letters, digits, spaces, - or _",
                                       code="bad-coder-name"))
    folded = [n.casefold() for n in names]
    if len(set(folded)) != len(folded):
        problems.append(AgreeError("coder names must differ (ignoring case)", code="duplicate-coder"))
    if problems:
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)
    return names


def _cell(value: Any) -> Any:
    """A value openpyxl can store: numpy scalars become Python, missing becomes blank."""
    if value is None:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and np.isnan(value):
        return None
    return value


def _workbook_bytes(ids: Sequence[Any], context: Mapping[str, Sequence[Any]], texts: Sequence[Any],
                    categories: Sequence[str] | None, coder: str) -> tuple[bytes, str | None]:
    """One coder's workbook: unit_id, the context columns (shaded: to read, not to edit),
    text, code, notes."""
    from openpyxl import Workbook
    from openpyxl.comments import Comment
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation

    wb = Workbook()
    ws = wb.active
    ws.title = "coding"
    header = ["unit_id", *context, "text", "code", "notes"]
    ws.append(header)
    for cell in ws[1]:
        cell.font = Font(bold=True)
    columns = [ids, *context.values(), texts]
    for values in zip(*columns):
        ws.append([_cell(v) for v in values] + [None, None])
    last = len(ids) + 1
    shade = PatternFill("solid", start_color="EDEDED", end_color="EDEDED")
    muted = Font(color="595959")
    n_fixed = 1 + len(context)                  # unit_id and context: to read, not to edit
    for row in ws.iter_rows(min_row=2, max_row=last, min_col=1, max_col=n_fixed):
        for cell in row:
            cell.fill = shade
            cell.font = muted
    for j in range(1, n_fixed + 1):
        ws.cell(row=1, column=j).fill = shade
    for j, name in enumerate(context, start=2):
        ws.cell(row=1, column=j).comment = Comment(
            f"'{name}' from the list of units, for context (and for scoring with --keep {name}). "
            "Leave it as it is.", "agree", width=260, height=80)
        ws.column_dimensions[get_column_letter(j)].width = max(12, min(30, len(str(name)) + 4))
    text_col = get_column_letter(n_fixed + 1)
    code_col = get_column_letter(n_fixed + 2)
    notes_col = get_column_letter(n_fixed + 3)
    ws.column_dimensions["A"].width = 14
    ws.column_dimensions[text_col].width = 80
    ws.column_dimensions[code_col].width = 18
    ws.column_dimensions[notes_col].width = 30
    for row in ws.iter_rows(min_row=2, max_row=last, min_col=n_fixed + 1, max_col=n_fixed + 1):
        row[0].alignment = Alignment(wrap_text=True, vertical="top")
    ws.freeze_panes = ws.cell(row=2, column=n_fixed + 1).coordinate
    mode = None
    inline = ",".join(categories or ())
    # Excel caps an inline list at 255 characters and splits it on commas. A longer list would
    # need a second sheet, which would stop the sheet reading back as a plain per-coder file.
    if categories and len(inline) <= 250 and not any(("," in c) or ('"' in c) for c in categories):
        dv = DataValidation(type="list", formula1=f'"{inline}"', allow_blank=True)
        dv.error = "Pick a code from the codebook list."
        dv.errorTitle = "Not a codebook code"
        dv.showErrorMessage = True
        ws.add_data_validation(dv)
        dv.add(f"{code_col}2:{code_col}{max(last, 2)}")
        mode = "inline list"
    wb.properties.title = f"Coding sheet for {coder}"
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue(), mode


def _context_columns(sample: pd.DataFrame, keep: Sequence[str], id_col: str,
                     text_col: str | None) -> list[str]:
    """The corpus columns copied into every coder's sheet: the stratify column, then `keep`."""
    stratify = sample.attrs.get("stratify")
    wanted = ([stratify] if stratify else []) + [str(k) for k in keep]
    columns = [str(c) for c in sample.columns]
    out: list[str] = []
    problems = []
    for name in wanted:
        if name in (id_col, text_col) or name in out:
            continue
        if name not in columns:
            problems.append(AgreeError(f"no column '{name}' in the list of units to copy into the sheets",
                                       hint=f"columns are: {', '.join(columns)}", code="no-keep-column"))
        elif name.strip().lower() in SHEET_COLUMNS or name in ("draw_order", "corpus_row"):
            problems.append(AgreeError(f"the column '{name}' cannot be copied into the sheets: the "
                                       "sheets have a column of that name",
                                       hint="rename it in the list of units", code="column-clash"))
        else:
            out.append(name)
    if problems:
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)
    return out


def write_coding_sheets(sample: pd.DataFrame, outdir: str | os.PathLike, *, coders: Sequence[str],
                        codebook: Sequence[Any] | Mapping[Any, str] | None = None,
                        shuffle: bool = False, seed: int | None = None, id_col: str | None = None,
                        text_col: str | None = None, force: bool = False,
                        corpus_path: str | os.PathLike | None = None,
                        keep: Sequence[str] = ()) -> CodingSheets:
    """Write one blank coding workbook per coder, and the manifest.

    Parameters
    ----------
    sample : the output of `draw_sample` (or any table of units with an id column).
    outdir : folder to write into; created if missing. An existing non-empty folder is refused
        unless `force`.
    coders : coder names; each gets ``<coder>.xlsx``.
    codebook : categories (or {category: description}); they become the drop-down list of the
        `code` column.
    shuffle : give each coder the units in their own random order (seeded); otherwise every
        coder gets the corpus order.
    seed : seed for the shuffles; defaults to the sample's seed.
    id_col, text_col : columns of `sample`; detected by name when None.
    force : write into a non-empty folder (files of the same name are replaced; the corpus
        never is).
    corpus_path : the corpus file, protected from being overwritten (defaults to the
        sample's recorded source).
    keep : other corpus columns to copy into every sheet, after the unit id, for context.
        The stratify column of a stratified draw is always copied, so the filled sheets can
        be scored with ``--keep <column> --cluster <column>``.

    Returns
    -------
    CodingSheets
    """
    names = _check_coders(coders)
    id_col = detect_id_column(sample, id_col or sample.attrs.get("id_col"))
    text_col = detect_text_column(sample, text_col)
    _unit_keys(sample, id_col)
    context_cols = _context_columns(sample, keep, id_col, text_col)
    if len(sample) == 0:
        raise AgreeError("the sample has no units", code="sample-size")
    categories = None
    if codebook is not None:
        items = list(codebook.keys()) if isinstance(codebook, Mapping) else list(codebook)
        categories = [str(normalise_value(c)) for c in items if normalise_value(c) is not None]
        if len(categories) != len(set(categories)):
            raise AgreeError("the codebook lists a category twice", code="codebook-duplicate")
        if not categories:
            raise AgreeError("the codebook lists no categories", code="codebook-empty")

    folder = Path(outdir)
    if folder.exists() and not folder.is_dir():
        raise AgreeError(f"'{folder}' exists and is not a folder", code="output-exists")
    if folder.is_dir() and any(folder.iterdir()) and not force:
        raise AgreeError(f"the folder '{folder}' is not empty",
                         hint="choose a new folder, or use --force to write into it",
                         code="output-exists")
    folder.mkdir(parents=True, exist_ok=True)
    targets = [folder / f"{name}.xlsx" for name in names] + [folder / "manifest.csv",
                                                             folder / "manifest.json"]
    protected = corpus_path or sample.attrs.get("source")
    if protected is not None:
        corpus_real = Path(protected).resolve()
        for target in targets:
            if target.resolve() == corpus_real:
                raise AgreeError(f"writing '{target.name}' would overwrite the list of units",
                                 hint="write the sheets to another folder", code="would-overwrite-corpus")

    seed = sample.attrs.get("seed") if seed is None else seed
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    seed = int(seed)
    if "corpus_row" in sample.columns:
        base_order = np.argsort(sample["corpus_row"].to_numpy(), kind="stable")
    else:
        base_order = np.arange(len(sample))
    ids = sample[id_col].to_numpy(dtype=object)
    texts = sample[text_col].to_numpy(dtype=object) if text_col else np.full(len(sample), None, object)

    drop_down = None
    for i, (name, target) in enumerate(zip(names, targets)):
        order = np.random.default_rng([seed, 101, i]).permutation(len(sample)) if shuffle else base_order
        context = {c: sample[c].to_numpy(dtype=object)[order] for c in context_cols}
        data, drop_down = _workbook_bytes(ids[order], context, texts[order], categories, name)
        atomic_write_bytes(target, data)

    stratify = sample.attrs.get("stratify")
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["unit_id", "stratum", "draw_order", "corpus_row"])
    draw = sample["draw_order"].tolist() if "draw_order" in sample.columns else list(range(1, len(sample) + 1))
    rows = sample["corpus_row"].tolist() if "corpus_row" in sample.columns else [""] * len(sample)
    strata = ([_stratum_label(v) for v in sample[stratify].tolist()]
              if stratify and stratify in sample.columns else [""] * len(sample))
    for uid, stratum, d, r in sorted(zip(ids.tolist(), strata, draw, rows), key=lambda t: t[2]):
        writer.writerow([_cell(uid), stratum, d, r])
    atomic_write_bytes(targets[-2], buffer.getvalue().encode("utf-8"))

    meta = {
        "seed": seed,
        "sample_seed": sample.attrs.get("seed"),
        "n": int(len(sample)),
        "corpus": sample.attrs.get("source"),
        "corpus_size": sample.attrs.get("corpus_size"),
        "corpus_checksum": sample.attrs.get("corpus_checksum"),
        "checksum_of": sample.attrs.get("checksum_of"),
        "checksum_algorithm": "sha256",
        "date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "id_column": id_col,
        "text_column": text_col,
        "stratify": stratify,
        "context_columns": context_cols,
        "excluded": sample.attrs.get("excluded", 0),
        "exclude_not_in_corpus": sample.attrs.get("exclude_not_in_corpus", 0),
        "allocation": sample.attrs.get("allocation"),
        "strata_sizes": sample.attrs.get("strata_sizes"),
        "coders": list(names),
        "shuffled": bool(shuffle),
        "codebook": categories,
        "files": [t.name for t in targets[:-2]],
    }
    atomic_write_bytes(targets[-1], (json.dumps(meta, indent=2, ensure_ascii=False) + "\n").encode("utf-8"))
    return CodingSheets(folder=str(folder), files=tuple(str(t) for t in targets[:-2]),
                        manifest_csv=str(targets[-2]), manifest_json=str(targets[-1]), coders=names,
                        n=int(len(sample)), seed=seed, shuffled=bool(shuffle), drop_down=drop_down,
                        context_columns=tuple(context_cols),
                        excluded=int(sample.attrs.get("excluded", 0) or 0),
                        exclude_not_in_corpus=int(sample.attrs.get("exclude_not_in_corpus", 0) or 0))
