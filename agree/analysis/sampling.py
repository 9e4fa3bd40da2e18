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
import os
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd

from agree.core.model import AgreeError, cell_location, normalise_value
from agree.core.seeds import resolve_seed
from agree.io.codebook import read_codebook
from agree.io.columns import LIST_ID_NAMES, LIST_TEXT_NAMES, list_text_column, list_unit_column
from agree.io.lists import id_key as _id_key
from agree.io.lists import read_corpus, read_unit_ids  # noqa: F401 (the sample command's readers, re-exported)

# The readers' names for the unit-id and text columns, so a corpus and its coding sheets agree.
ID_COLUMN_NAMES = LIST_ID_NAMES
TEXT_COLUMN_NAMES = LIST_TEXT_NAMES


# ---------------------------------------------------------------------------------------
# Columns of the list of units
# ---------------------------------------------------------------------------------------

def detect_id_column(corpus: pd.DataFrame, id_col: str | None = None) -> str:
    """The unit-id column: `id_col` if given, else found as every reader finds it
    (`agree.io.columns.list_unit_column`: usual and id-shaped names, then unique values)."""
    _given(corpus, id_col, code="no-id-column")
    return list_unit_column(corpus, id_col, where=corpus.attrs.get("source"))


def detect_text_column(corpus: pd.DataFrame, text_col: str | None = None) -> str:
    """The text column: `text_col` if given, else found as every reader finds it
    (`agree.io.columns.list_text_column`); an error listing the candidates when there is none."""
    _given(corpus, text_col, code="no-text-column")
    return list_text_column(corpus, text_col, where=corpus.attrs.get("source"))


def _given(corpus: pd.DataFrame, given: str | None, *, code: str) -> None:
    columns = [str(c) for c in corpus.columns]
    if given is not None and given not in columns:
        raise AgreeError(f"no column '{given}' in the list of units",
                         hint=f"columns are: {', '.join(columns)}", code=code)


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
    seed = resolve_seed(seed)
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


def stratum_label(value: Any) -> str:
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return "(blank)" if v is None else str(v)


def load_codebook_categories(path: str | os.PathLike) -> dict[str, str]:
    """Categories (and descriptions, '' where none) from a codebook file, read by
    `agree.io.codebook.read_codebook` (spaces around the codes trimmed)."""
    return read_codebook(path, trim=True).definitions()
