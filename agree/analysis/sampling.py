"""Drawing the reliability subsample.

`draw_sample` draws n units from the full list of units, simply at random or stratified by a
grouping column (largest-remainder allocation: every stratum gets its proportional share
rounded down, and the units left over go to the strata with the largest remainders, so each
stratum's count is within one unit of proportional). The draw is reproducible from the seed
and never takes a unit twice.

`draw_sample(..., exclude=ids)` leaves out units already double-coded (`read_unit_ids` reads
their ids from earlier coding files or a plain list).

The coding workbooks and the manifest are written by `agree.output.sheets.write_coding_sheets`.
"""

from __future__ import annotations

import hashlib
import io
import os
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd

from agree.core.cells import unprotect_text
from agree.core.files import record_input
from agree.core.model import AgreeError, cell_location, normalise_value
from agree.io.readers import TEXT_NAMES, UNIT_NAMES

# The readers' names for the unit-id and text columns, so a corpus and its coding sheets agree;
# "response" is a text column in a list of units but too ambiguous in coding data.
ID_COLUMN_NAMES = ("unit_id",) + tuple(n for n in UNIT_NAMES if n != "unit_id")
TEXT_COLUMN_NAMES = TEXT_NAMES + ("response",)


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
    record_input(path)
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


def unit_keys(corpus: pd.DataFrame, id_col: str) -> list[str]:
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
    keys = unit_keys(corpus, id_col)
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
        strata_labels = np.array([stratum_label(v) for v in corpus[stratify].tolist()], dtype=object)
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
        record_input(path)
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
                                             encoding="utf-8-sig").map(unprotect_text))]
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


def stratum_label(value: Any) -> str:
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return "(blank)" if v is None else str(v)


def load_codebook_categories(path: str | os.PathLike) -> dict[str, str]:
    """Categories (and descriptions where given) from a codebook file.

    .txt: one category per line. .csv/.xlsx: the column named code/category/label (else the
    first column), and description/definition (else none).
    """
    path = Path(path)
    if not path.is_file():
        raise AgreeError(f"no such file: {path}", code="no-file")
    record_input(path)
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
