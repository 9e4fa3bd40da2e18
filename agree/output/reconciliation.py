"""The reconciliation loop: list the disagreements, read the decisions back, write a consensus.

Three steps, each a plain function:

1. `review_table` / `write_review` list every unit the coders disagree on, worst first, as a
   workbook (or CSV / Parquet / Markdown) with empty decision columns to fill in.
2. The team fills in the decision, how it was decided, who decided and why.
3. `reconcile` reads the decisions back, checks them against the codebook and the data, and
   returns a `Consensus`: one final code per unit of the input, each with its source. The
   coders' independent codes are carried beside the final code and never changed;
   agreement is always computed on the independent codes, never on reconciled ones.

How units are classified (the same everywhere):

- **disagreement**: at least two coders coded the unit and they gave at least two different
  values; listed for review, worst first;
- **coded by one coder only**: one coder coded the unit, so nobody checked that code. Listed
  for review after the disagreements (status "coded by one coder only"), unless the team
  accepts such codes as they are (``accept_single=True``, ``--accept-single``): then they are
  not listed and the consensus keeps the one code with source ``"single coder"``, saying so in
  its notes. Without a decision and without ``accept_single`` such a unit is unresolved, like
  an undecided disagreement; the majority rule never settles it (one coder is no majority);
- **agreed**: at least two coders coded the unit and all who did gave the same value (coders
  who did not code the unit do not count against agreement);
- **coded by no coder**: not listed (there is nothing to review); the workbook's "About this
  file" sheet names such units, and in the consensus their final code is empty with source
  ``"not coded"``.

Set-valued codes are written ``"a; b"``. In the review list and in the coders' columns of the
consensus, the empty set (a coder who coded the unit and applied no code) is written
``"(none)"``, while a coder who did not code the unit gets an empty cell. A decision of
``"(none)"`` means *no code applies*: the final code is the empty set for set-valued data and
no code otherwise, written as an empty final-code cell in every consensus format (the source
column, ``"decided"``, tells it from a unit nobody coded).

Spreadsheet safety: text that a spreadsheet would run as a formula (starting with ``=``,
``+``, ``-``, ``@``, a tab or a carriage return) stays text, by the rules every output of agree
follows (`agree.core.cells`): in xlsx files such cells are typed as strings (with Excel's
quote-prefix flag) and keep their text exactly; in CSV files they get one leading ``'``, which
reading back removes.
Parquet files keep every cell's text exactly (no spreadsheet runs them).
"""

from __future__ import annotations

import datetime as _dt
import difflib
import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.core.constants import VERSION
from agree.core.format import notebook_html, notebook_text
from agree.core.cells import frame_csv, protect_text, put_cell, unprotect_text, xml_safe  # noqa: F401 (re-exported)
from agree.core.files import atomic_write, check_output, sha256_file, through_memory  # noqa: F401
from agree.core.model import CONSENSUS_FINAL as FINAL
from agree.core.model import CONSENSUS_SOURCE as SOURCE
from agree.core.model import CONSENSUS_SOURCES as SOURCES
from agree.core.model import (
    AgreeError,
    CodingData,
    as_coding_data,
    cell_location,
    normalise_value,
    require_unit_rows,
    value_sort_key,
)
from agree.io.lists import find_records
from agree.stats.kernels import pair_units, presence
from agree.stats.patterns import compress

# Column headers of the review file. The workbook is read back by these names, so a team
# can move or add columns freely.
UNIT = "unit"
TEXT = "text"
STATUS = "status"
CODES_INVOLVED = "codes involved"
DEFINITIONS = "definitions"
DECISION = "decision"
HOW = "how decided"
WHO = "decided by"
NOTES = "notes"

HOW_CHOICES = ("discussion", "adjudicator", "majority")
SET_SEPARATOR = "; "
NONE_LABEL = "(none)"
REVIEW_SHEET = "Review"
PAIRS_SHEET = "Confused pairs"
ABOUT_SHEET = "About this file"
LISTS_SHEET = "Lists"
REVIEW_FORMATS = ("xlsx", "csv", "parquet", "md")
#: Rows a worksheet holds, the header row included.
SHEET_ROW_LIMIT = 1_048_576
CONSENSUS_FORMATS = ("csv", "xlsx")

_LIST_LITERAL_LIMIT = 255  # Excel's limit on an inline list in a data-validation formula
_UNRESOLVED_SHOWN = 20
DISAGREEMENT = "disagreement"
SINGLE = "coded by one coder only"
AGREED = "agreed"
NOT_CODED = "coded by no coder"
SINGLE_KEPT = "coded by one coder only; kept as coded, without review (accept single)"
#: Separators people type between codes instead of SET_SEPARATOR (checked in this order).
WRONG_SEPARATORS = (",", "|", "/", " and ")
_INDEPENDENCE_NOTE = ("Agreement is computed on the coders' independent codes, never on "
                      "reconciled ones.")


# -- results -------------------------------------------------------------------------------
@dataclass(frozen=True)
class ReviewSummary:
    """What `write_review` wrote: counts that account for every unit read.

    ``units_read = agreed + needing_review + len(left_out)``: `needing_review` counts the units
    listed for a decision (`disagreements`, plus the `single_coder` units unless
    `accept_single`); `left_out` names the units not listed and why (coded by no coder, and
    with `accept_single` the units coded by one coder only)."""

    path: str
    format: str
    units_read: int
    agreed: int
    needing_review: int
    left_out: tuple[tuple[str, str], ...]  # (unit id, why)
    rows_written: int
    checksums: Mapping[str, str] = field(default_factory=dict)
    disagreements: int = 0
    single_coder: int = 0                   # units coded by one coder only (listed unless accept_single)
    accept_single: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {
            "path": self.path,
            "format": self.format,
            "units_read": self.units_read,
            "agreed": self.agreed,
            "needing_review": self.needing_review,
            "disagreements": self.disagreements,
            "single_coder": self.single_coder,
            "single_coder_listed": not self.accept_single,
            "left_out": len(self.left_out),
            "left_out_units": [{"unit": u, "reason": r} for u, r in self.left_out],
            "rows_written": self.rows_written,
            "inputs": dict(self.checksums),
        }


@dataclass(frozen=True, eq=False)
class Consensus:
    """One final code per unit, with where it came from.

    Attributes
    ----------
    table : one row per unit of the input, in input order: ``unit``, the data's other
        per-unit columns (e.g. ``interview``), ``text`` (when the data
        have it), ``final code`` (the value itself, a frozenset for set-valued data, None when
        there is none), ``source`` (one of ``SOURCES``), ``how decided``, ``decided by``,
        ``notes``, then one column per coder with the coder's independent code.
    units_read, agreed, decided, majority : unit counts by source.
    unresolved : ids of units that still need a decision (written with an empty final code).
    unresolved_rows : their rows in the review sheet, as the spreadsheet counts them (None
        for a unit the review file does not list).
    single_coder : ids of the units coded by one coder only whose code was kept as coded,
        without review (``accept_single=True``; source "single coder").
    not_coded : ids of the units no coder coded and nobody decided (source "not coded").
    accept_single : whether codes of units coded by one coder only were accepted as coded.
    review : the review file read (or "review table" when the decisions came as a DataFrame).
    notes : anything the user should know (e.g. a data file changed since the review, units
        kept from a single coder).

    ``units_read = agreed + decided + majority + len(single_coder) + len(unresolved) +
    len(not_coded)``.
    """

    table: pd.DataFrame
    units_read: int
    agreed: int
    decided: int
    majority: int
    unresolved: tuple[str, ...]
    single_coder: tuple[str, ...] = ()
    not_coded: tuple[str, ...] = ()
    accept_single: bool = False
    review: str = "review table"
    notes: tuple[str, ...] = ()
    unresolved_rows: tuple[int | None, ...] = ()

    def summary(self) -> str:
        """One line: the units read and how each got its final code."""
        return (f"{self.units_read} units read; {self.agreed} agreed, {self.decided} decided, "
                f"{self.majority} by majority, {len(self.single_coder)} kept from a single coder, "
                f"{len(self.unresolved)} unresolved, {len(self.not_coded)} coded by no coder "
                f"(decisions from {self.review}).")

    def __repr__(self) -> str:
        return notebook_text("Consensus", self.summary(), consensus_frame(self), notes=self.notes,
                             columns=[UNIT, FINAL, SOURCE, HOW])

    def _repr_html_(self) -> str:
        return notebook_html("Consensus: " + self.summary(), consensus_frame(self), notes=self.notes)

    def to_dict(self) -> dict[str, Any]:
        return {
            "review": self.review,
            "units_read": self.units_read,
            "agreed": self.agreed,
            "decided": self.decided,
            "majority": self.majority,
            "single_coder": len(self.single_coder),
            "single_coder_units": list(self.single_coder),
            "accept_single": self.accept_single,
            "unresolved": len(self.unresolved),
            "unresolved_units": list(self.unresolved),
            "unresolved_review_rows": list(self.unresolved_rows),
            "not_coded": len(self.not_coded),
            "not_coded_units": list(self.not_coded),
            "written": int(len(self.table)),
            "notes": list(self.notes),
        }


# -- classifying units ---------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class _Status:
    n_values: np.ndarray     # values per unit
    distinct: np.ndarray     # distinct values per unit
    spread: np.ndarray       # range of scores on ordinal and numeric scales, else 0

    @property
    def single(self) -> np.ndarray:
        return self.n_values == 1

    @property
    def not_coded(self) -> np.ndarray:
        return self.n_values == 0

    @property
    def agreed(self) -> np.ndarray:
        return (self.n_values >= 2) & (self.distinct == 1)

    @property
    def needs_review(self) -> np.ndarray:
        return (self.n_values >= 2) & (self.distinct > 1)

    def worst_first(self, mask: np.ndarray) -> np.ndarray:
        """Indices of the units in `mask`, most distinct codes first, then widest spread,
        ties in unit order."""
        idx = np.nonzero(mask)[0]
        order = np.lexsort((idx, -self.spread[idx], -self.distinct[idx]))
        return idx[order]


def _status(data: CodingData) -> _Status:
    codes = data.codes
    observed = codes >= 0
    absent = len(data.values)
    ordered = np.sort(np.where(observed, codes, absent), axis=1)
    changes = (ordered[:, 1:] != ordered[:, :-1]) & (ordered[:, 1:] != absent)
    distinct = (ordered[:, 0] != absent).astype(np.int64) + changes.sum(axis=1)
    spread = np.zeros(data.n_units)
    if data.level != "nominal" and not data.set_valued and data.n_units and data.values:
        scores = np.where(observed, data.scores[np.where(observed, codes, 0)], np.nan)
        with np.errstate(invalid="ignore"):
            has = observed.any(axis=1)
            spread[has] = np.nanmax(scores[has], axis=1) - np.nanmin(scores[has], axis=1)
    return _Status(observed.sum(axis=1), distinct, spread)


def _left_out(data: CodingData, status: _Status, accept_single: bool) -> tuple[tuple[str, str], ...]:
    """(unit id, why) for the units the review list leaves out: no coder coded them, or (with
    `accept_single`) one coder did and the team accepts that code as it is."""
    idx = np.nonzero(status.not_coded | (status.single & accept_single))[0]
    return tuple((str(data.unit_ids[i]), SINGLE_KEPT if status.single[i] else NOT_CODED) for i in idx)


# -- labels --------------------------------------------------------------------------------
def _category_order(data: CodingData) -> dict[Any, int]:
    return {c: i for i, c in enumerate(data.categories)}


def _label(value: Any, order: Mapping[Any, int] | None = None) -> str:
    """How a value is shown in a cell: sets as "a; b" in codebook order, "" for missing."""
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return ""
    if isinstance(value, frozenset):
        if not value:
            return NONE_LABEL
        order = order or {}
        items = sorted(value, key=lambda c: (order.get(c, len(order)), value_sort_key(c)))
        return SET_SEPARATOR.join(_label(c) for c in items)
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _value_labels(data: CodingData) -> np.ndarray:
    """Label of every value, with "" appended so that code -1 (missing) maps to ""."""
    order = _category_order(data)
    return np.array([_label(v, order) for v in data.values] + [""], dtype=object)


def _coder_headers(coders: Sequence[str], reserved: Sequence[str]) -> list[str]:
    """One column per coder, named after the coder unless that clashes with a fixed column."""
    taken = {r.lower() for r in reserved}
    headers = []
    for coder in coders:
        name = coder if coder.lower() not in taken else f"coder {coder}"
        while name.lower() in taken:
            name = f"coder {name}"
        taken.add(name.lower())
        headers.append(name)
    return headers


# -- the review table ----------------------------------------------------------------------
def review_table(data: Any, *, include_agreed: bool = False, accept_single: bool = False) -> pd.DataFrame:
    """The units that need reconciliation, worst first, as a table of text.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders).
    include_agreed : also list the agreed units (last), for teams that want to check every unit.
    accept_single : do not list the units coded by one coder only (`reconcile` with
        ``accept_single=True`` then keeps their one code as it is).

    Returns
    -------
    DataFrame with columns ``unit``, the data's other per-unit columns for context (e.g.
    ``interview``; renamed "<name> (data)" if the name clashes), ``text`` (when the data have
    unit text), ``status`` (why the unit is listed: "disagreement", "coded by one coder only"
    or "agreed"), one column per coder (the coder's code; empty when the coder did not code
    the unit), ``codes involved``, ``definitions`` (when the codebook has definitions), and
    the empty ``decision``, ``how decided``, ``decided by`` and ``notes`` columns to fill in.
    Every cell is text.

    Notes
    -----
    Disagreements come first, ordered by the number of distinct codes given to the unit
    (descending), then, on ordinal and numeric scales, the range of the scores given
    (max - min, descending), then unit order; then the units coded by one coder only, in unit
    order; then (with `include_agreed`) the agreed units. Units no coder coded are never listed
    (see the module notes). For set-valued data "codes involved" are the codes some but not
    all of the unit's coders applied (a single coder's: the codes it applied); otherwise the
    distinct codes given.
    """
    data = as_coding_data(data)
    require_unit_rows(data, "the review table")
    status = _status(data)
    rows = _review_rows(status, include_agreed=include_agreed, accept_single=accept_single)
    labels = _value_labels(data)
    reserved = [UNIT, TEXT, STATUS, CODES_INVOLVED, DEFINITIONS, DECISION, HOW, WHO, NOTES]
    columns: dict[str, Any] = {UNIT: _texts(data.unit_ids[rows], ids=True)}
    kept = _kept_headers(data, reserved)
    for name, header in kept.items():
        columns[header] = _texts(np.asarray(data.columns[name], dtype=object)[rows])
    if data.text is not None:
        columns[TEXT] = _texts(np.asarray(data.text, dtype=object)[rows])
    columns[STATUS] = np.select([status.needs_review[rows], status.single[rows]],
                                [DISAGREEMENT, SINGLE], AGREED).astype(object)
    codes = data.codes[rows]
    for header, j in zip(_coder_headers(data.coders, reserved + list(kept.values())),
                         range(data.n_coders)):
        columns[header] = labels[codes[:, j]]
    # what a row says about its codes depends on its codes only: worked out once per distinct
    # row of codes (a few hundred), then spread to the rows
    patterns = compress(codes, len(data.values), ordered=True, keep_inverse=True)
    order = _category_order(data)
    involved = [_codes_involved(data, p, single=int((p >= 0).sum()) == 1) for p in patterns.codes]
    inverse = patterns.inverse if patterns.inverse is not None else np.zeros(0, dtype=np.int64)
    columns[CODES_INVOLVED] = np.array([SET_SEPARATOR.join(_label(c, order) for c in inv) for inv in involved]
                                       + [""], dtype=object)[inverse]
    if data.codebook:
        columns[DEFINITIONS] = np.array([_definitions(data.codebook, inv, order) for inv in involved] + [""],
                                        dtype=object)[inverse]
    blank = np.full(len(rows), "", dtype=object)
    for name in (DECISION, HOW, WHO, NOTES):
        columns[name] = blank
    return pd.DataFrame(columns, dtype=object, copy=True)


def _review_rows(status: _Status, *, include_agreed: bool, accept_single: bool) -> np.ndarray:
    """The units the review lists, in its order: disagreements worst first, then the units coded
    by one coder only (unless `accept_single`), then (with `include_agreed`) the agreed units."""
    return np.concatenate([status.worst_first(status.needs_review),
                           np.nonzero(status.single & (not accept_single))[0],
                           np.nonzero(status.agreed & include_agreed)[0]]).astype(np.int64)


def _texts(values: np.ndarray, *, ids: bool = False) -> np.ndarray:
    """Cells copied from the data as text (object array): text as it is, other values by `_text`
    (unit ids by `str`), each distinct value converted once."""
    values = np.asarray(values, dtype=object)
    if pd.api.types.infer_dtype(values, skipna=False) in ("string", "empty"):
        return values.copy()
    inverse, uniques = pd.factorize(pd.Series(values, dtype=object), use_na_sentinel=False)
    convert = str if ids else _text
    return np.array([convert(v) for v in np.asarray(uniques, dtype=object)] + [""], dtype=object)[inverse]


def _kept_headers(data: CodingData, reserved: Sequence[str]) -> dict[str, str]:
    """Headers for the data's other per-unit columns (e.g. an interview or round column),
    shown for context. A name that clashes with a fixed column or a coder gets " (data)"."""
    taken = {r.lower() for r in reserved} | {str(c).lower() for c in data.coders}
    headers = {}
    for name in data.columns or {}:
        header = str(name)
        while header.lower() in taken:
            header = f"{header} (data)"
        taken.add(header.lower())
        headers[name] = header
    return headers


def _text(value: Any) -> str:
    value = normalise_value(value) if not isinstance(value, str) else value
    return "" if value is None else str(value)


def _codes_involved(data: CodingData, unit_codes: np.ndarray, *, single: bool = False) -> list[Any]:
    given = [data.values[c] for c in np.unique(unit_codes[unit_codes >= 0])]
    if not data.set_valued:
        return given
    if not given:
        return []
    disputed = frozenset().union(*given) - (frozenset() if single else frozenset.intersection(*given))
    order = _category_order(data)
    return sorted(disputed, key=lambda c: (order.get(c, len(order)), value_sort_key(c)))


def _definitions(codebook: Mapping[Any, str], involved: Sequence[Any],
                 order: Mapping[Any, int]) -> str:
    lines = [f"{_label(c, order)}: {codebook[c]}" for c in involved if codebook.get(c)]
    return "\n".join(lines)


# -- confused pairs ------------------------------------------------------------------------
PAIR_UNITS = "units (one coder code 1, another code 2)"
PAIRS_NOTE = ("The units column counts the units in which one coder gave code 1 and another coder gave "
              "code 2 (for set-valued codes: one applied code 1 and not code 2, another code 2 "
              "and not code 1). A unit counts once per pair, however many coders it had, so a "
              "unit with three different codes counts for three pairs.")


def _pair_units(data: CodingData) -> np.ndarray:
    """(V, V) integer counts: units (with two or more values) in which one coder gave value c
    and another value k; for set-valued data, codes (`agree.stats.kernels.pair_units`)."""
    pairable = (data.codes >= 0).sum(axis=1) >= 2
    return pair_units(presence(data)[pairable])


def _confused_pairs(data: CodingData) -> pd.DataFrame:
    """The pairs of codes the coders confused, most often first.

    The `PAIR_UNITS` column is the number of units in which one coder gave code 1 and another
    code 2 (a whole number; see `_pair_units`). With exactly two coders the two directions are shown
    as well, from `agree.analysis.diagnostics.confusion_table` (they add up to ``units``). Set-valued
    data are compared code by code.
    """
    from agree.analysis.diagnostics import confusion_table

    order = _category_order(data)
    labels = [_label(c, order) for c in (data.categories if data.set_valued else data.values)]
    counts = _pair_units(data)
    k, l = np.triu_indices(len(labels), 1)
    units = counts[k, l]
    keep = units > 0
    k, l, units = k[keep], l[keep], units[keep]
    rank = np.lexsort((l, k, -units))
    k, l, units = k[rank], l[rank], units[rank]
    names = np.array(labels, dtype=object)
    frame = pd.DataFrame({"code 1": names[k].tolist(), "code 2": names[l].tolist(),
                          PAIR_UNITS: [int(u) for u in units]})
    if data.n_coders == 2:
        a, b = data.coders
        directed = confusion_table(data, directed=True).to_numpy()
        frame[f"{a} says code 1, {b} says code 2"] = [int(round(v)) for v in directed[k, l]]
        frame[f"{a} says code 2, {b} says code 1"] = [int(round(v)) for v in directed[l, k]]
    return frame


# -- writing files -------------------------------------------------------------------------
def _infer_format(path: Path, fmt: str | None, allowed: Sequence[str]) -> str:
    if fmt is None:
        fmt = path.suffix.lower().lstrip(".") or allowed[0]
        if fmt == "markdown":
            fmt = "md"
        elif fmt == "pq":
            fmt = "parquet"
    if fmt not in allowed:
        raise AgreeError(f"cannot write '{fmt}' files here; choose one of {', '.join(allowed)}",
                         hint="set the format explicitly or use a matching file suffix",
                         code="format")
    return fmt


def _input_checksums(data: CodingData, inputs: Sequence[str | os.PathLike] | None) -> dict[str, str]:
    known = dict(data.report.checksums) if data.report is not None else {}
    files = list(inputs) if inputs is not None else list(data.report.files if data.report else ())
    files += [f for f in known if f not in {str(x) for x in files}]
    out = {}
    for f in files:
        key = str(f)
        out[key] = known.get(key) or sha256_file(f)
    return out




def _now() -> str:
    return _dt.datetime.now().astimezone().isoformat(timespec="seconds")


def write_review(data: Any, path: str | os.PathLike, *, format: str | None = None,
                 inputs: Sequence[str | os.PathLike] | None = None,
                 options: Mapping[str, Any] | None = None, include_agreed: bool = False,
                 accept_single: bool = False, force: bool = False,
                 progress: Callable[[str, float], None] | None = None) -> ReviewSummary:
    """Write the review list as a workbook (or CSV / Parquet / Markdown) to fill in.

    Parameters
    ----------
    data : the coding data (CodingData, DataFrame or array).
    path : the file to write. Written atomically; never an input file; an existing file only
        with `force`.
    format : "xlsx", "csv", "parquet" or "md"; by default from the suffix of `path`.
    inputs : the input files to record with their sha256 checksums (by default the files the
        data were read from; checksums from ``data.report.checksums`` when present).
    options : the options used, recorded in the workbook so the review can be traced.
    include_agreed : also list agreed units (see `review_table`).
    accept_single : do not list the units coded by one coder only (see `review_table`); the
        "About this file" sheet names them.
    force : replace an existing output file.
    progress : called with (step, fraction done) as the steps go.

    Returns
    -------
    ReviewSummary

    Raises
    ------
    AgreeError
        "sheet-rows" before any work when an xlsx review would need more rows than a worksheet
        holds (`SHEET_ROW_LIMIT`, the header included), with the number of rows it would need.

    Notes
    -----
    CSV and Parquet files hold the "Review" list only; every cell is text (CSV cells by the
    formula rule of `agree.core.cells`; Parquet cells exactly as they are, since no spreadsheet
    runs them). The xlsx workbook has three sheets: "Review" (the list, with a drop-down of the
    codebook's codes on the decision column and of discussion / adjudicator / majority on
    "how decided"; frozen header and unit column; wrapped text), "Confused pairs" (which
    codes were given to the same unit, with whole-unit counts and a note saying what they
    count) and "About this file" (inputs with
    checksums, date and time, agree version, options, and the number of units read, agreed,
    needing review and left out, with the left-out units named).
    """
    tick = progress or (lambda step, done: None)
    data = as_coding_data(data)
    require_unit_rows(data, "the review workbook")
    out = Path(path)
    fmt = _infer_format(out, format, REVIEW_FORMATS)
    status = _status(data)
    disagreements, single = int(status.needs_review.sum()), int(status.single.sum())
    if fmt == "xlsx":
        _check_sheet_rows(status, out, include_agreed=include_agreed, accept_single=accept_single)
    checksums = _input_checksums(data, inputs)
    protected = set(checksums) | set(data.report.files if data.report else ())
    check_output(out, sorted(protected), force=force)
    tick("review table", 0.1)
    table = review_table(data, include_agreed=include_agreed, accept_single=accept_single)
    tick(f"writing {out.name}", 0.4)
    summary = ReviewSummary(path=str(out), format=fmt, units_read=data.n_units,
                            agreed=int(status.agreed.sum()),
                            needing_review=disagreements + (0 if accept_single else single),
                            left_out=_left_out(data, status, accept_single),
                            rows_written=len(table), checksums=checksums,
                            disagreements=disagreements, single_coder=single,
                            accept_single=accept_single)
    if fmt == "xlsx":
        about = _about_rows(data, summary, options)
        writer = lambda tmp: _write_review_xlsx(tmp, data, table, _confused_pairs(data), about)  # noqa: E731
    elif fmt == "csv":
        writer = lambda tmp: _write_csv(tmp, table)  # noqa: E731
    elif fmt == "parquet":
        writer = lambda tmp: _write_parquet(tmp, table)  # noqa: E731
    else:
        writer = lambda tmp: _write_markdown(tmp, table, summary)  # noqa: E731
    atomic_write(out, writer)
    tick("written", 1.0)
    return summary


def _check_sheet_rows(status: _Status, out: Path, *, include_agreed: bool, accept_single: bool) -> None:
    """Refuse an xlsx review that a worksheet cannot hold, saying how many rows it would need
    and what to write instead."""
    single = int(status.single.sum())
    agreed = int(status.agreed.sum())
    rows = int(status.needs_review.sum()) + (0 if accept_single else single) + (agreed if include_agreed else 0)
    if rows + 1 <= SHEET_ROW_LIMIT:
        return
    narrower = []
    if include_agreed:
        narrower.append(f"leave out --include-agreed (include_agreed=False; {agreed:,} agreed units)")
    if not accept_single and single:
        narrower.append(f"--accept-single (accept_single=True) to leave out the {single:,} units coded "
                        "by one coder only")
    stem = out.with_suffix("").name
    raise AgreeError(f"the review would need {rows + 1:,} rows (the header included), more than a "
                     f"worksheet holds ({SHEET_ROW_LIMIT:,})", where=str(out), code="sheet-rows",
                     hint=f"write it as CSV or Parquet: -o {stem}.csv or -o {stem}.parquet"
                          + "".join(f", or {n}" for n in narrower))


def _about_rows(data: CodingData, summary: ReviewSummary,
                options: Mapping[str, Any] | None) -> list[tuple[Any, Any]]:
    rows: list[tuple[Any, Any]] = [
        ("what", "Review list for reconciling disagreements between coders. " + _INDEPENDENCE_NOTE),
        ("made with", f"agree {VERSION}"),
        ("made at", _now()),
        ("coders", SET_SEPARATOR.join(data.coders)),
        ("level", data.level),
        ("set-valued", "yes" if data.set_valued else "no"),
        *review_counts(summary),
        ("rows in the review sheet", summary.rows_written),
    ]
    for key, value in (options or {}).items():
        if isinstance(value, os.PathLike):
            value = os.fspath(value)
        elif not (value is None or isinstance(value, (int, float, str))):
            value = json.dumps(value, default=str, ensure_ascii=False)
        rows.append((f"option {key}", value))
    rows.append(("", ""))
    rows.append(("input file", "sha256"))
    rows.extend(summary.checksums.items())
    if summary.left_out:
        rows.append(("", ""))
        rows.append(("unit not listed", "why"))
        rows.extend(summary.left_out)
    report = data.report
    if report is not None and (report.left_out or report.notes):
        rows.append(("", ""))
        rows.append(("while reading", ""))
        rows.extend(("left out", line) for line in report.left_out)
        rows.extend(("note", line) for line in report.notes)
    return rows


def review_counts(summary: ReviewSummary) -> list[tuple[str, int]]:
    """How the units read divide up, as (label, count); the same words in every review format."""
    not_coded = len(summary.left_out) - (summary.single_coder if summary.accept_single else 0)
    rows = [("units read", summary.units_read), ("units agreed", summary.agreed),
            ("units needing review", summary.needing_review),
            ("of which the coders disagree", summary.disagreements)]
    if summary.accept_single:
        rows.append(("units coded by one coder only, not listed (kept as coded: accept single)",
                     summary.single_coder))
    else:
        rows.append(("of which coded by one coder only", summary.single_coder))
    rows.append(("units coded by no coder (not listed)", not_coded))
    return rows


def _write_csv(tmp: str, table: pd.DataFrame) -> None:
    Path(tmp).write_bytes(frame_csv(table).encode("utf-8"))


def _write_parquet(tmp: str, table: pd.DataFrame) -> None:
    """Every column as text (an empty cell as an empty string), no index."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    arrays = [pa.array(table.iloc[:, j].to_numpy(), type=pa.string(), from_pandas=True).fill_null("")
              for j in range(table.shape[1])]
    pq.write_table(pa.table(arrays, names=[str(c) for c in table.columns]), tmp)


def _md_cell(value: Any) -> str:
    text = "" if value is None else str(value)
    text = text.replace("\\", "\\\\").replace("|", "\\|")
    return text.replace("\r\n", "<br>").replace("\n", "<br>").replace("\r", "<br>")


def _write_markdown(tmp: str, table: pd.DataFrame, summary: ReviewSummary) -> None:
    lines = [
        "# Units to reconcile",
        "",
        "; ".join(f"{label}: {n}" for label, n in review_counts(summary)) + ". " + _INDEPENDENCE_NOTE,
        "",
        "| " + " | ".join(_md_cell(c) for c in table.columns) + " |",
        "|" + "---|" * len(table.columns),
    ]
    for row in table.itertuples(index=False):
        lines.append("| " + " | ".join(_md_cell(v) for v in row) + " |")
    Path(tmp).write_text("\n".join(lines) + "\n", encoding="utf-8")


# -- xlsx ----------------------------------------------------------------------------------
def _fill_sheet(ws: Any, header: Sequence[Any], rows: Sequence[Sequence[Any]], *,
                max_width: int = 60, header_bold: bool = True) -> None:
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    wrap = Alignment(wrap_text=True, vertical="top")
    bold = Font(bold=True)
    widths = [len(str(h)) for h in header]
    for j, h in enumerate(header, start=1):
        cell = ws.cell(row=1, column=j)
        put_cell(cell, h)
        cell.alignment = wrap
        if header_bold:
            cell.font = bold
    for i, row in enumerate(rows, start=2):
        for j, value in enumerate(row, start=1):
            cell = ws.cell(row=i, column=j)
            put_cell(cell, value)
            cell.alignment = wrap
            text = "" if value is None else str(value)
            longest = max((len(line) for line in text.split("\n")), default=0)
            widths[j - 1] = max(widths[j - 1], longest)
    for j, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(j)].width = min(max(width + 2, 10), max_width)


def _list_source(wb: Any, name: str, labels: Sequence[str], column: int) -> str:
    """A data-validation list formula: inline when short and plain, else a hidden sheet range."""
    from openpyxl.utils import get_column_letter

    inline = '"' + ",".join(labels) + '"'
    if len(inline) <= _LIST_LITERAL_LIMIT and not any("," in x or '"' in x or xml_safe(x) != x for x in labels):
        return inline
    if LISTS_SHEET in wb.sheetnames:
        ws = wb[LISTS_SHEET]
    else:
        ws = wb.create_sheet(LISTS_SHEET)
        ws.sheet_state = "hidden"
    put_cell(ws.cell(row=1, column=column), name)
    for i, label in enumerate(labels, start=2):
        put_cell(ws.cell(row=i, column=column), label)
    letter = get_column_letter(column)
    return f"'{LISTS_SHEET}'!${letter}$2:${letter}${len(labels) + 1}"


def _write_review_xlsx(tmp: str, data: CodingData, table: pd.DataFrame, pairs: pd.DataFrame,
                       about: list[tuple[Any, Any]]) -> None:
    from openpyxl import Workbook
    from openpyxl.comments import Comment
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation

    wb = Workbook()
    ws = wb.active
    ws.title = REVIEW_SHEET
    header = list(table.columns)
    _fill_sheet(ws, header, table.itertuples(index=False))
    ws.freeze_panes = "B2"
    last = max(len(table) + 1, 2)
    if len(table):
        ws.auto_filter.ref = f"A1:{get_column_letter(len(header))}{len(table) + 1}"

    order = _category_order(data)
    codes = [_label(c, order) for c in data.categories]
    if NONE_LABEL not in codes:
        codes.append(NONE_LABEL)
    decision = get_column_letter(header.index(DECISION) + 1)
    how = get_column_letter(header.index(HOW) + 1)
    dv_codes = DataValidation(
        type="list", formula1=_list_source(wb, "codes", codes, 1), allow_blank=True,
        showDropDown=False, showErrorMessage=not data.set_valued, errorStyle="stop",
        errorTitle="Not a code", error="Choose a code from the codebook.",
        promptTitle="Decision", showInputMessage=True,
        prompt=(f"Several codes: separate them with '{SET_SEPARATOR}'. {NONE_LABEL}: no code applies."
                if data.set_valued else f"Choose the final code; {NONE_LABEL}: no code applies."))
    dv_codes.add(f"{decision}2:{decision}{last}")
    dv_how = DataValidation(type="list", formula1=_list_source(wb, "how", list(HOW_CHOICES), 2),
                            allow_blank=True, showErrorMessage=True, errorTitle="How decided",
                            error="Choose discussion, adjudicator or majority.")
    dv_how.add(f"{how}2:{how}{last}")
    ws.add_data_validation(dv_codes)
    ws.add_data_validation(dv_how)
    for column in (DECISION, HOW, WHO, NOTES):
        letter = get_column_letter(header.index(column) + 1)
        ws.column_dimensions[letter].width = max(ws.column_dimensions[letter].width or 0,
                                                 30 if column == NOTES else 16)

    pairs_ws = wb.create_sheet(PAIRS_SHEET, 1)
    _fill_sheet(pairs_ws, list(pairs.columns), pairs.itertuples(index=False))
    pairs_ws.freeze_panes = "A2"
    units_header = pairs_ws.cell(row=1, column=list(pairs.columns).index(PAIR_UNITS) + 1)
    units_header.comment = Comment(PAIRS_NOTE, "agree", width=320, height=120)
    note_row = len(pairs) + 3
    put_cell(pairs_ws.cell(row=note_row, column=1), "note: " + PAIRS_NOTE)
    pairs_ws.cell(row=note_row, column=1).font = Font(italic=True)

    about_ws = wb.create_sheet(ABOUT_SHEET, 2)
    _fill_sheet(about_ws, ["item", "value"], about, max_width=90)
    about_ws.freeze_panes = "A2"
    through_memory(wb.save, tmp)


# -- reading decisions back ----------------------------------------------------------------
@dataclass(frozen=True)
class _ReviewRow:
    row: int                 # as a spreadsheet counts it (header row 1)
    unit: str | None
    decision: Any
    how: str
    who: str
    notes: str


@dataclass(frozen=True)
class _ReviewFile:
    name: str
    sheet: str | None
    rows: tuple[_ReviewRow, ...]
    checksums: Mapping[str, str]
    notes: tuple[str, ...] = ()  # the reader's warnings (formula cells without a stored result)


def _header_key(value: Any) -> str:
    return str(value).strip().lower() if value is not None else ""


def _cell_text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, float) and np.isnan(value):
        return ""
    return str(value).strip()


def _unit_text(value: Any) -> str | None:
    if value is None or (isinstance(value, str) and value == ""):
        return None
    if isinstance(value, float):
        if np.isnan(value):
            return None
        if value.is_integer():
            return str(int(value))
    return str(value)


def _rows_from_records(records: Sequence[Sequence[Any]], header: Sequence[Any], rows: Sequence[int],
                       name: str, sheet: str | None) -> tuple[_ReviewRow, ...]:
    keys = [_header_key(h) for h in header]
    if UNIT not in keys or DECISION not in keys:
        missing = [c for c in (UNIT, DECISION) if c not in keys]
        raise AgreeError(f"no column named {' or '.join(repr(c) for c in missing)}",
                         where=cell_location(name, sheet, 1),
                         hint="the review file is read by its header names; restore them",
                         code="review-columns")
    pos = {k: keys.index(k) for k in (UNIT, DECISION, HOW, WHO, NOTES) if k in keys}

    def get(record: Sequence[Any], key: str) -> Any:
        return record[pos[key]] if key in pos and pos[key] < len(record) else None

    out = []
    for row, record in zip(rows, records):
        values = [get(record, k) for k in (UNIT, DECISION, HOW, WHO, NOTES)]
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            continue
        decision = values[1]
        if isinstance(decision, str):
            decision = decision.strip() or None
        out.append(_ReviewRow(row=row, unit=_unit_text(values[0]), decision=decision,
                              how=_cell_text(values[2]), who=_cell_text(values[3]),
                              notes=_cell_text(values[4])))
    return tuple(out)


def _read_review(review: Any) -> _ReviewFile:
    """The decisions of a review file (any format the loaders read, found by its header names)
    or of a DataFrame like `review_table` returns."""
    if isinstance(review, pd.DataFrame):
        records = review.astype(object).where(review.notna(), None).to_numpy().tolist()
        rows = range(2, len(records) + 2)
        return _ReviewFile("review table", None,
                           _rows_from_records(records, list(review.columns), rows, "review table", None),
                           {})
    path = Path(review)
    if path.suffix.lower() in (".md", ".markdown"):
        raise AgreeError(f"cannot read decisions from {path.name}",
                         hint="fill in the xlsx (or csv) review file; Markdown is for reading only",
                         code="format")
    found = find_records(path, columns=(UNIT, DECISION), prefer=REVIEW_SHEET, code="review-columns",
                         hint="the review file is read by its header names; restore them")
    rows = _rows_from_records(found.records, found.header, found.rows, found.file, found.sheet)
    return _ReviewFile(found.file, found.sheet, rows, _recorded_checksums(found.sheets.get(ABOUT_SHEET, [])),
                       found.notes)


def _recorded_checksums(about: Sequence[Sequence[Any]]) -> dict[str, str]:
    """The input checksums recorded on the "About this file" sheet (its records)."""
    out, inside = {}, False
    for record in about:
        item, value = (list(record) + [None, None])[:2]
        if item == "input file" and value == "sha256":
            inside = True
        elif inside and item:
            out[str(item)] = str(value)
        elif inside:
            break
    return out


class _DecisionParser:
    """Turns a decision cell into a value of the data, or says why it cannot.

    "(none)" (any case) is the decision *no code applies*: the empty set for set-valued data,
    None (no code) otherwise, unless the codebook has a code written exactly so."""

    def __init__(self, data: CodingData):
        self.data = data
        self.order = _category_order(data)
        singles = list(data.categories) if data.set_valued else list(data.values) + [
            c for c in data.categories if c not in set(data.values)]
        self.by_label = {_label(c, self.order): c for c in singles}

    def known(self) -> list[str]:
        return list(self.by_label) + ([NONE_LABEL] if NONE_LABEL not in self.by_label else [])

    def one(self, raw: Any) -> Any:
        if not isinstance(raw, str):
            value = normalise_value(raw)
            if value in self.by_label.values():
                return value
            raw = _label(value)
        text = raw.strip()
        if text in self.by_label:
            return self.by_label[text]
        number = _as_number(text)
        if number is not None and number in self.by_label.values():
            return number
        raise KeyError(text)

    def _no_code(self, raw: Any) -> bool:
        return (isinstance(raw, str) and raw.strip().casefold() == NONE_LABEL
                and raw.strip() not in self.by_label)

    def parse(self, raw: Any) -> Any:
        """The decided value: a value of the data, frozenset() or None for "(none)"."""
        if self._no_code(raw):
            return frozenset() if self.data.set_valued else None
        if not self.data.set_valued:
            return self.one(raw)
        parts = [p for p in str(raw).split(";") if p.strip()] if isinstance(raw, str) else [raw]
        return frozenset(self.one(p) for p in parts)

    def _as_codes(self, text: str) -> list[str] | None:
        """The labels of the codes `text` names, if it is two or more known codes joined by
        one of `WRONG_SEPARATORS` (with or without "; " between some of them)."""
        folded = {k.casefold(): k for k in self.by_label}
        for sep in WRONG_SEPARATORS:
            pattern = r"\s+and\s+" if sep.strip() == "and" else re.escape(sep)
            if not re.search(pattern, text, flags=re.IGNORECASE):
                continue
            parts = [p.strip() for chunk in text.split(";")
                     for p in re.split(pattern, chunk, flags=re.IGNORECASE) if p.strip()]
            labels = [folded.get(p.casefold()) for p in parts]
            if len(labels) >= 2 and all(labels):
                return labels
        return None

    def hint(self, text: str, decision: Any = None) -> str:
        """What to write instead of `text` (the part of the `decision` cell that is not a code)."""
        whole = decision.strip() if isinstance(decision, str) else text
        known = self.known()
        shown = ", ".join(known[:12]) + (", ..." if len(known) > 12 else "")
        codes = self._as_codes(whole)
        if codes is not None:
            listed = " and ".join(f"'{c}'" for c in codes)
            if self.data.set_valued:
                return (f"separate codes with '{SET_SEPARATOR}': write '{SET_SEPARATOR.join(codes)}' "
                        f"(one cell holds {listed})")
            return (f"this variable takes one code per unit, and the cell holds {len(codes)} ({listed}): "
                    "choose one")
        if text.casefold() == NONE_LABEL:
            return f"'{NONE_LABEL}' means no code applies; it cannot stand beside codes"
        folded = [k for k in known if k.casefold() == text.casefold()]
        close = folded or difflib.get_close_matches(text, known, n=1, cutoff=0.0)
        if close:
            return f"did you mean '{close[0]}'? The codes are: {shown}"
        return f"the codes are: {shown}"


def _as_number(text: str) -> Any:
    try:
        return normalise_value(float(text))
    except ValueError:
        return None


def _listed(items: Sequence[str], limit: int = _UNRESOLVED_SHOWN) -> str:
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def unresolved_listing(units: Sequence[str], rows: Sequence[int | None],
                       limit: int = _UNRESOLVED_SHOWN) -> str:
    """Unit ids with their review-sheet rows (as the spreadsheet counts them), in sheet order:
    "'u4' (row 3), 'u9' (row 7) and 12 more"."""
    pairs = sorted(zip(units, rows), key=lambda p: (p[1] is None, p[1] or 0))   # down the sheet
    items = [f"'{u}'" + (f" (row {r})" if r is not None else "") for u, r in pairs]
    return _listed(items, limit)


def _rows_text(rows: Sequence[int]) -> str:
    return ("row " if len(rows) == 1 else "rows ") + ", ".join(str(r) for r in rows)


def reconcile(data: Any, review: Any, *, allow_unresolved: bool = False,
              majority: bool = False, accept_single: bool = False) -> Consensus:
    """Read the decisions back and give every unit one final code.

    Parameters
    ----------
    data : the same coding data the review list was made from.
    review : the filled-in review file (xlsx or csv, or any table format `agree.read` reads;
        found by header names) or a DataFrame like `review_table` returns.
    allow_unresolved : keep units that still need a decision, with source "unresolved" and
        an empty final code, instead of raising.
    majority : give an undecided unit the value a strict majority (more than half) of its
        coders gave, with source "majority", where one exists (at least two coders: one coder
        is no majority).
    accept_single : keep the code of a unit coded by one coder only, without review, when the
        review file gives no decision for it (source "single coder", and a note saying so).
        Without it such units need a decision like any disagreement.

    Returns
    -------
    Consensus
        Every unit of `data` exactly once, in input order. Agreed units keep their code,
        decided units take the decision (a decision also overrides an agreed code, when the
        review list included agreed units; "(none)" decides that no code applies), then
        (with `accept_single`) units coded by one coder only keep that code ("single coder"),
        then the majority rule (if asked), then "unresolved"; units no coder coded get no
        code ("not coded"). The coders' independent codes are carried beside the final code
        and never changed. Compute agreement on `data`, never on the consensus.

    Raises
    ------
    AgreeError
        "review-mismatch" when the review file does not match the data (a unit needing
        review missing, an id not in the data, a duplicated row), "unknown-code" for a
        decision that is not a code (with the file, sheet, row and column), "unknown-method"
        for a "how decided" outside discussion/adjudicator/majority, "unresolved" when units
        still need a decision and `allow_unresolved` is False. All problems are collected
        into one error. A decision naming several codes joined by ",", "|", "/" or "and" gets a
        hint to use "; " (set-valued data) or to choose one code.
    """
    data = as_coding_data(data)
    require_unit_rows(data, "reconciliation")
    source = _read_review(review)
    status = _status(data)
    index = {str(u): i for i, u in enumerate(data.unit_ids)}
    parser = _DecisionParser(data)

    problems: list[AgreeError] = []
    seen: dict[str, list[int]] = {}
    unknown_ids: list[tuple[str, int]] = []
    empty_ids: list[int] = []
    decided: dict[int, tuple[Any, _ReviewRow]] = {}
    annotations: dict[int, _ReviewRow] = {}
    for row in source.rows:
        if row.unit is None:
            empty_ids.append(row.row)
            continue
        seen.setdefault(row.unit, []).append(row.row)
        if row.unit not in index:
            unknown_ids.append((row.unit, row.row))
            continue
        where = lambda column: cell_location(source.name, source.sheet, row.row, column)  # noqa: E731
        if row.how and row.how.lower() not in HOW_CHOICES:
            problems.append(AgreeError(f"'{row.how}' is not a way of deciding", where=where(HOW),
                                       hint="use discussion, adjudicator or majority",
                                       code="unknown-method"))
        u = index[row.unit]
        annotations[u] = row
        if row.decision is None:
            continue
        try:
            decided[u] = (parser.parse(row.decision), row)
        except KeyError as exc:
            text = str(exc.args[0])
            problems.append(AgreeError(f"the decision '{text}' for unit '{row.unit}' is not a code",
                                       where=where(DECISION), hint=parser.hint(text, row.decision),
                                       code="unknown-code"))

    mismatch = _mismatch(data, status, seen, unknown_ids, empty_ids, source)
    if mismatch is not None:
        problems.insert(0, mismatch)
    if problems:
        first = problems[0]
        if len(problems) == 1:
            raise first
        raise AgreeError(first.message + f" (and {len(problems) - 1} more problems)",
                         hint=first.hint, where=first.where, code=first.code, problems=problems)
    return _build_consensus(data, status, decided, annotations, source, allow_unresolved, majority,
                            accept_single)


def _mismatch(data: CodingData, status: _Status, seen: Mapping[str, list[int]],
              unknown_ids: Sequence[tuple[str, int]], empty_ids: Sequence[int],
              source: _ReviewFile) -> AgreeError | None:
    parts = []
    if unknown_ids:
        parts.append("ids not in the data: " + "; ".join(f"'{u}' (row {r})" for u, r in unknown_ids))
    duplicated = [(u, rows) for u, rows in seen.items() if len(rows) > 1]
    if duplicated:
        parts.append("ids listed more than once: "
                     + "; ".join(f"'{u}' ({_rows_text(rows)})" for u, rows in duplicated))
    if empty_ids:
        parts.append(f"rows without a unit id: {_rows_text(list(empty_ids))}")
    needed = [str(data.unit_ids[i]) for i in np.nonzero(status.needs_review)[0]
              if str(data.unit_ids[i]) not in seen]
    if needed:
        parts.append("units needing review missing from the file: "
                     + ", ".join(f"'{u}'" for u in needed))
    if not parts:
        return None
    return AgreeError("the review file does not match the data: " + "; ".join(parts),
                      where=cell_location(source.name, source.sheet),
                      hint="restore the unit ids as written (one row per unit), or make a new "
                           "review file from these data",
                      code="review-mismatch")


def _build_consensus(data: CodingData, status: _Status, decided: Mapping[int, tuple[Any, _ReviewRow]],
                     annotations: Mapping[int, _ReviewRow], source: _ReviewFile,
                     allow_unresolved: bool, majority: bool, accept_single: bool) -> Consensus:
    n = data.n_units
    values = np.array(list(data.values) + [None], dtype=object)
    first_value = values[np.where(data.codes >= 0, data.codes, -1).max(axis=1, initial=-1)]
    kept_single = status.single & accept_single
    final = np.where(status.agreed | kept_single, first_value, None)
    origin = np.full(n, "unresolved", dtype=object)
    origin[status.agreed] = "agreed"
    origin[kept_single] = "single coder"
    origin[status.not_coded] = "not coded"

    if decided:
        rows = np.fromiter(decided, dtype=np.int64)
        final[rows] = [decided[i][0] for i in decided]
        origin[rows] = "decided"
    how = np.full(n, "", dtype=object)
    who = np.full(n, "", dtype=object)
    notes = np.full(n, "", dtype=object)
    for u, row in annotations.items():
        how[u], who[u], notes[u] = row.how.lower(), row.who, row.notes
    notes[(origin == "single coder") & (notes == "")] = SINGLE_KEPT

    if majority:
        undecided = np.nonzero(origin == "unresolved")[0]
        winner = _strict_majority(data, undecided)
        has = winner >= 0
        final[undecided[has]] = values[winner[has]]
        origin[undecided[has]] = "majority"
        how[undecided[has]] = "majority"

    open_units = np.nonzero(origin == "unresolved")[0]
    unresolved = tuple(str(u) for u in data.unit_ids[open_units])
    unresolved_rows = tuple(annotations[u].row if u in annotations else None for u in open_units)
    if unresolved and not allow_unresolved:
        n_open = len(unresolved)
        verb = "unit still needs" if n_open == 1 else "units still need"
        where = cell_location(source.name, source.sheet) if source.sheet else source.name
        n_single = int(status.single[open_units].sum())
        singles = ("" if not n_single else " (coded by one coder only)" if n_single == n_open == 1 else
                   f" ({'all' if n_single == n_open else n_single} coded by one coder only)")
        raise AgreeError(f"{n_open} {verb} a decision{singles}: "
                         f"{unresolved_listing(unresolved, unresolved_rows)}",
                         where=where, code="unresolved",
                         hint="fill in the decision column, or use --allow-unresolved "
                              "(allow_unresolved=True) to write them with an empty final code"
                              + ("" if majority or n_single == n_open else
                                 ", or --majority to take a strict majority")
                              + ("" if not n_single else
                                 ", or --accept-single (accept_single=True) to keep the code of "
                                 "the one coder who coded a unit")
                              + "".join(f"; {n.removeprefix('warning: ')}" for n in source.notes))

    table: dict[str, Any] = {UNIT: [str(u) for u in data.unit_ids]}
    for name, header in _kept_headers(data, [UNIT, TEXT, FINAL, SOURCE, HOW, WHO, NOTES]).items():
        table[header] = [_text(v) for v in np.asarray(data.columns[name], dtype=object)]
    if data.text is not None:
        table[TEXT] = [_text(t) for t in data.text]
    table.update({FINAL: final.tolist(), SOURCE: origin.tolist(), HOW: how.tolist(),
                  WHO: who.tolist(), NOTES: notes.tolist()})
    for j, header in enumerate(_coder_headers(data.coders, list(table))):
        table[header] = values[data.codes[:, j]].tolist()
    counts = {s: int((origin == s).sum()) for s in SOURCES}
    ids = lambda kind: tuple(str(u) for u in data.unit_ids[origin == kind])  # noqa: E731
    kept = ids("single coder")
    notes = source.notes + _changed_inputs(data, source)
    if kept:
        notes += (f"{len(kept)} unit{'s' if len(kept) != 1 else ''} coded by one coder only "
                  f"kept that coder's code without review (accept single): {_listed(list(kept))}",)
    return Consensus(table=pd.DataFrame(table, dtype=object), units_read=n,
                     agreed=counts["agreed"], decided=counts["decided"],
                     majority=counts["majority"], unresolved=unresolved, single_coder=kept,
                     not_coded=ids("not coded"), accept_single=accept_single,
                     review=source.name, notes=notes, unresolved_rows=unresolved_rows)


def _strict_majority(data: CodingData, units: np.ndarray) -> np.ndarray:
    """For each unit, the value index more than half of its coders gave, and at least two
    coders (one coder is no majority), else -1."""
    if not len(units):
        return np.zeros(0, dtype=np.int64)
    codes = data.codes[units]
    counts = np.zeros((len(units), len(data.values)), dtype=np.int64)
    rows, cols = np.nonzero(codes >= 0)
    np.add.at(counts, (rows, codes[rows, cols]), 1)
    best = counts.argmax(axis=1)
    n = (codes >= 0).sum(axis=1)
    top = counts[np.arange(len(units)), best]
    return np.where((2 * top > n) & (top >= 2), best, -1)


def _changed_inputs(data: CodingData, source: _ReviewFile) -> tuple[str, ...]:
    if not source.checksums or data.report is None or not data.report.checksums:
        return ()
    now = {Path(f).name: s for f, s in data.report.checksums.items()}
    notes = []
    for f, recorded in source.checksums.items():
        current = now.get(Path(f).name)
        if current is not None and current != recorded:
            notes.append(f"{f} has changed since the review file was made (sha256 differs)")
    return tuple(notes)


# -- writing the consensus -----------------------------------------------------------------
def consensus_frame(consensus: Consensus, data: CodingData | None = None) -> pd.DataFrame:
    """The consensus table as text, the way it is written in every format: sets as "a; b";
    in the final code, no code (the empty set, None) as an empty cell; in the coders'
    columns the empty set as "(none)" and a unit the coder did not code as an empty cell."""
    order = _category_order(data) if data is not None else None
    frame = consensus.table.map(lambda v: _label(v, order) if not isinstance(v, str) else v)
    if FINAL in frame.columns:
        frame[FINAL] = ["" if isinstance(v, frozenset) and not v else v if isinstance(v, str)
                        else _label(v, order) for v in consensus.table[FINAL]]
    return frame


def write_consensus(consensus: Consensus, path: str | os.PathLike, *, format: str | None = None,
                    inputs: Sequence[str | os.PathLike] = (), force: bool = False,
                    data: CodingData | None = None) -> Path:
    """Write the consensus as CSV or xlsx, atomically.

    Parameters
    ----------
    consensus : what `reconcile` returned.
    path : the output file; never one of `inputs` (give the review file and the data files);
        an existing file is replaced only with `force`.
    format : "csv" or "xlsx"; by default from the suffix.
    data : the coding data, used to write set-valued codes in codebook order.

    Notes
    -----
    CSV cells that a spreadsheet would run as a formula get one leading ``'`` (see the
    module notes); xlsx cells are typed as text instead.
    """
    out = Path(path)
    fmt = _infer_format(out, format, CONSENSUS_FORMATS)
    protected = list(inputs)
    if consensus.review and Path(consensus.review).exists():
        protected.append(consensus.review)
    check_output(out, protected, force=force)
    frame = consensus_frame(consensus, data)
    if fmt == "csv":
        atomic_write(out, lambda tmp: _write_csv(tmp, frame))
    else:
        atomic_write(out, lambda tmp: write_table_xlsx(tmp, frame, title="Consensus"))
    return out


def write_table_xlsx(tmp: str, frame: pd.DataFrame, *, title: str, freeze: str = "B2") -> None:
    """A one-sheet workbook of `frame`: text stays text (never a formula), columns sized to fit."""
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = title
    _fill_sheet(ws, list(frame.columns), frame.itertuples(index=False))
    ws.freeze_panes = freeze
    through_memory(wb.save, tmp)
