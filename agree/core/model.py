"""The data model: one validated object between the importers and the maths.

`CodingData` holds a units x coders table of integer codes. Each code is an index into
`values` (the distinct values a coder can give: codebook categories, numbers, or sets of
codes); -1 means the coder did not code the unit. Everything a reader knows about where a
value came from (file, sheet, row, column) is kept in `provenance`, so an error or a
reconciliation row can point at the cell.

Missing means "this coder did not code this unit". A coder who coded a unit and applied no
code gives the empty set in set-valued data, and 0 in a presence/absence recoding.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.core.errors import AgreeError, cell_location  # noqa: F401  (re-exported: agree.core.model.AgreeError)
from agree.core.format import notebook_html, percent_label

LEVELS = ("nominal", "ordinal", "interval", "ratio")
MISSING = -1

# Columns of the consensus file `agree reconcile` writes (readers refuse to score it as coding data).
CONSENSUS_FINAL = "final code"
CONSENSUS_SOURCE = "source"
CONSENSUS_SOURCES = ("agreed", "decided", "majority", "unresolved", "single coder", "not coded")


@dataclass(frozen=True)
class Provenance:
    """Where each value came from.

    `sources` lists (file, sheet, column) triples; `source` and `row` are (N, m) int arrays:
    the index into `sources` and the spreadsheet row (1-based, as a spreadsheet counts it,
    header included) of each value, -1 where unknown or missing.
    """

    sources: tuple[tuple[str | None, str | None, str | None], ...]
    source: np.ndarray
    row: np.ndarray

    def where(self, unit: int, coder: int) -> str:
        s = int(self.source[unit, coder])
        if s < 0:
            return ""
        file, sheet, column = self.sources[s]
        return cell_location(file, sheet, int(self.row[unit, coder]), column)


@dataclass(frozen=True)
class ReadReport:
    """What a reader detected and did: shown to the user as one line plus notes."""

    detected: str = ""
    files: tuple[str, ...] = ()
    units_read: int = 0
    values_read: int = 0
    values_missing: int = 0
    notes: tuple[str, ...] = ()
    left_out: tuple[str, ...] = ()
    checksums: Mapping[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {
            "detected": self.detected,
            "files": list(self.files),
            "units_read": self.units_read,
            "values_read": self.values_read,
            "values_missing": self.values_missing,
            "notes": list(self.notes),
            "left_out": list(self.left_out),
            "checksums": dict(self.checksums),
        }


@dataclass(frozen=True, eq=False)
class CodingData:
    """Units x coders codes, validated.

    Attributes
    ----------
    codes : (N, m) int32 array; -1 for missing, otherwise an index into `values`.
    values : the distinct values codes refer to, in scale order. For categorical data these
        are the codebook categories (unused ones included, since q matters for some
        coefficients); for numeric data the sorted numbers; for set-valued data frozensets of
        categories.
    unit_ids : (N,) array of unit identifiers: text as read, or the row numbers 1..N (int) where
        the input named no units.
    coders : coder names, one per column of `codes`.
    categories : the codebook's categories (for set-valued data, the single codes).
    level : the level of measurement the data were declared or detected as.
    set_valued : True when a unit can carry several codes from one coder.
    text : optional (N,) array of unit text.
    columns : other per-unit columns kept from the input (e.g. a round or a cluster column).
    codebook : optional mapping category -> description.
    provenance : optional map from each value back to its cell.
    report : what the reader detected and did.
    weights : optional (N,) int64 unit multiplicities: row u stands for `weights[u]` identical
        units (same values, same cluster). None means one unit per row. The coefficients and
        their bootstrap treat a row of weight w exactly as w identical rows; functions that need
        one row per unit refuse weighted data (`require_unit_rows`).
    coder_identity : False when the columns are not coders but positions of the values a unit
        received, whoever gave them (a counts table in the multiset layout); coefficients that pair
        each coder's values across units (Cohen's, the weighted and Conger's kappa) refuse such data.
    """

    codes: np.ndarray
    values: tuple
    unit_ids: np.ndarray
    coders: tuple[str, ...]
    categories: tuple = ()
    level: str = "nominal"
    set_valued: bool = False
    text: np.ndarray | None = None
    columns: Mapping[str, np.ndarray] = field(default_factory=dict)
    codebook: Mapping[Any, str] | None = None
    provenance: Provenance | None = None
    report: ReadReport | None = None
    order: str = "given"  # how `values` were ordered: "given" (codebook, categories), "numeric", "alphabetical"
    weights: np.ndarray | None = None
    coder_identity: bool = True

    def __post_init__(self):
        codes = np.asarray(self.codes)
        if codes.ndim != 2:
            raise AgreeError("coding data must be a units x coders table", code="shape")
        if codes.dtype != np.int32 or codes.flags.writeable:
            # a private read-only copy: the data cannot change under a computed result
            codes = codes.astype(np.int32, copy=True)
            codes.setflags(write=False)
            object.__setattr__(self, "codes", codes)
        if len(self.coders) != codes.shape[1]:
            raise AgreeError("one coder name is needed per column", code="shape")
        if len(self.unit_ids) != codes.shape[0]:
            raise AgreeError("one unit id is needed per row", code="shape")
        if codes.size and (codes.max(initial=-1) >= len(self.values) or codes.min(initial=0) < -1):
            raise AgreeError("a code refers to no value", code="shape")
        if self.weights is not None:
            object.__setattr__(self, "weights", _unit_weights(self.weights, codes.shape[0]))
        if not self.categories:
            cats = self.values
            if self.set_valued:
                cats = tuple(sorted({c for s in self.values for c in s}, key=value_sort_key))
            object.__setattr__(self, "categories", tuple(cats))

    # -- shape -------------------------------------------------------------------------
    @property
    def n_units(self) -> int:
        return int(self.codes.shape[0])

    @property
    def n_coders(self) -> int:
        return int(self.codes.shape[1])

    @property
    def units_represented(self) -> int:
        """How many units the rows stand for: the sum of `weights` (the number of rows when unweighted)."""
        return self.n_units if self.weights is None else int(self.weights.sum())

    def unit_weights(self) -> np.ndarray:
        """(N,) int64 multiplicity of each row (ones when unweighted)."""
        return np.ones(self.n_units, dtype=np.int64) if self.weights is None else self.weights

    @property
    def observed(self) -> np.ndarray:
        """(N, m) bool: True where the coder coded the unit."""
        return self.codes >= 0

    @property
    def values_per_unit(self) -> np.ndarray:
        return self.observed.sum(axis=1)

    @property
    def scores(self) -> np.ndarray:
        """Numeric score of each value: the number itself for numeric values, else its rank 1..V."""
        try:
            return np.array([float(v) for v in self.values], dtype=float)
        except (TypeError, ValueError):
            return np.arange(1, len(self.values) + 1, dtype=float)

    @property
    def is_numeric(self) -> bool:
        if self.set_valued:
            return False
        try:
            [float(v) for v in self.values]
        except (TypeError, ValueError):
            return False
        return True

    # -- how it prints -----------------------------------------------------------------
    def summary(self) -> str:
        """One line: units, coders, level and categories (and weights, when rows stand for
        several units)."""
        rows = (f"{self.n_units:,} units" if self.weights is None else
                f"{self.n_units:,} rows standing for {self.units_represented:,} units")
        kind = "sets of codes from " if self.set_valued else ""
        return (f"{rows} × {self.n_coders} coders, level {self.level}, {kind}"
                f"{len(self.categories)} categor{'y' if len(self.categories) == 1 else 'ies'}")

    def _details(self) -> list[tuple[str, str]]:
        """(item, value) lines of the repr: short, whatever the size of the data."""
        cells = self.codes.size
        missing = int((self.codes < 0).sum())
        out = [("coders", _shown(self.coders, 6, "coders")),
               ("categories", _shown([value_label(c) for c in self.categories], 8, "categories")),
               ("missing", f"{missing:,} of {cells:,} cells ({percent_label(missing / cells if cells else 0, 1)}): "
                           "the coder did not code the unit")]
        if self.set_valued:
            empty = [i for i, v in enumerate(self.values) if not v]
            n_empty = int(np.isin(self.codes, empty).sum()) if empty else 0
            out.append(("set-valued", f"several codes per cell; {n_empty:,} empty set{'' if n_empty == 1 else 's'} "
                                          "(coded, no code applied)"))
        if self.weights is not None:
            out.append(("weights", f"{int(self.weights.min()):,} to {int(self.weights.max()):,} units per row"))
        other = list(self.columns) + (["unit text"] if self.text is not None else [])
        if other:
            out.append(("columns", _shown(other, 6, "columns")))
        if self.codebook:
            out.append(("codebook", f"{len(self.codebook)} definitions"))
        if not self.coder_identity:
            out.append(("coders", "positions of values, not coder identities"))
        if self.report is not None and self.report.files:
            files = _shown([str(f) for f in self.report.files], 3, "files")
            layout = self.report.detected.split(":")[0] if self.report.detected else ""
            out.append(("read from", files + (f" ({layout})" if layout and len(layout) < 40 else "")))
        return out

    def __repr__(self) -> str:
        details = self._details()
        width = max(len(k) for k, _ in details)
        return "\n".join([f"CodingData: {self.summary()}"] + [f"  {k:<{width}}  {v}" for k, v in details])

    def _repr_html_(self) -> str:
        return notebook_html(f"CodingData: {self.summary()}",
                             pd.DataFrame(self._details(), columns=["", "value"]))

    # -- derived data ------------------------------------------------------------------
    def labels(self) -> pd.DataFrame:
        """The codes as a units x coders DataFrame of values (None for missing)."""
        lookup = np.array(list(self.values) + [None], dtype=object)
        return pd.DataFrame(lookup[self.codes], index=pd.Index(self.unit_ids, name="unit"),
                            columns=list(self.coders), dtype=object)

    def subset(self, units: np.ndarray | slice | None = None,
               coders: Sequence[int] | None = None) -> "CodingData":
        """A new CodingData with some units (bool mask or indices) and/or coders."""
        u = slice(None) if units is None else units
        c = list(range(self.n_coders)) if coders is None else [
            self.coders.index(x) if isinstance(x, str) else int(x) for x in coders]
        prov = None
        if self.provenance is not None:
            prov = replace(self.provenance, source=self.provenance.source[u][:, c],
                           row=self.provenance.row[u][:, c])
        return replace(
            self,
            codes=self.codes[u][:, c],
            unit_ids=self.unit_ids[u],
            coders=tuple(self.coders[i] for i in c),
            text=None if self.text is None else self.text[u],
            columns={k: v[u] for k, v in self.columns.items()},
            provenance=prov,
            weights=None if self.weights is None else self.weights[u],
        )

    def presence(self, category: Any) -> "CodingData":
        """Binary recoding for one category: 1 if the coder applied it, 0 if they coded the
        unit without it, missing if they did not code the unit."""
        if category not in self.categories:
            raise AgreeError(f"'{category}' is not a category of these data", code="unknown-code")
        if self.set_valued:
            has = np.array([category in s for s in self.values] + [False])
        else:
            has = np.array([v == category for v in self.values] + [False])
        binary = has[self.codes].astype(np.int32)
        binary[self.codes < 0] = MISSING
        return replace(self, codes=binary, values=(0, 1), categories=(0, 1), set_valued=False,
                       level="nominal")

    def merge(self, groups: Mapping[Any, Any]) -> "CodingData":
        """Relabel categories (e.g. merge two confused codes): `groups` maps old -> new label."""
        if self.set_valued:
            raise AgreeError("merging categories applies to single-code data", code="set-valued")
        new_labels = [groups.get(v, v) for v in self.values]
        new_values = tuple(dict.fromkeys(new_labels))
        index = np.array([new_values.index(x) for x in new_labels] + [MISSING], dtype=np.int32)
        return replace(self, codes=index[self.codes], values=new_values, categories=new_values)

    def with_level(self, level: str) -> "CodingData":
        return replace(self, level=level)


def _shown(items: Sequence[str], limit: int, what: str, width: int = 30) -> str:
    """'a, b, c' or 'a, b, ... (40 coders)': at most `limit` items, each at most `width` characters."""
    cut = [x if len(x) <= width else x[:width - 1] + "…" for x in map(str, items[:limit])]
    return ", ".join(cut) + (f", … ({len(items):,} {what})" if len(items) > limit else "")


def _unit_weights(weights: Any, n: int) -> np.ndarray:
    """Validated read-only (N,) int64 multiplicities: whole numbers of 1 or more."""
    w = np.asarray(weights)
    if w.shape != (n,):
        raise AgreeError(f"unit weights: one per row is needed ({n}); got an array of shape {w.shape}",
                         code="shape")
    if w.dtype.kind == "f":
        if not np.isfinite(w).all() or (w != np.round(w)).any():
            raise AgreeError("unit weights must be whole numbers (how many identical units a row stands for)",
                             code="shape")
    elif w.dtype.kind not in "iu":
        raise AgreeError("unit weights must be whole numbers (how many identical units a row stands for)",
                         code="shape")
    if n and w.min() < 1:
        raise AgreeError("unit weights must be 1 or more (a row stands for at least one unit)", code="shape")
    if w.dtype != np.int64 or w.flags.writeable:
        w = w.astype(np.int64, copy=True)
        w.setflags(write=False)
    return w


def expand_weights(data: CodingData, what: str, *, max_units: int = 200_000) -> CodingData:
    """One row per unit: weighted rows repeated (ids "id#1", "id#2", ... for rows standing for
    several units), for functions that need unit rows; refused above `max_units` units."""
    if data.weights is None:
        return data
    total = data.units_represented
    if total > max_units:
        raise AgreeError(f"{what} needs one row per unit, and these data stand for {total:,} units (more than "
                         f"{max_units:,}; e.g. every position of the compared text)",
                         hint="compare fewer documents, or use segments (paragraphs, sentences, turns) as units",
                         code="weighted")
    w = data.weights
    rep = np.repeat(np.arange(data.n_units), w)
    rank = np.arange(total) - np.repeat(np.cumsum(w) - w, w) + 1
    ids = np.asarray(data.unit_ids).astype(str)[rep]
    ids = np.where(w[rep] > 1, np.char.add(np.char.add(ids, "#"), rank.astype(str)), ids).astype(object)
    prov = None
    if data.provenance is not None:
        prov = replace(data.provenance, source=data.provenance.source[rep], row=data.provenance.row[rep])
    return replace(data, codes=data.codes[rep], unit_ids=ids, text=None if data.text is None else data.text[rep],
                   columns={k: np.asarray(v)[rep] for k, v in data.columns.items()}, provenance=prov, weights=None)


def require_unit_rows(data: CodingData, what: str) -> None:
    """Refuse weighted data (rows standing for several units) where `what` needs one row per unit."""
    if data.weights is not None:
        raise AgreeError(f"{what} needs one row per unit, but these data are weighted: {data.n_units:,} rows "
                         f"stand for {data.units_represented:,} units (e.g. positions of text compressed into "
                         "runs)", hint="use the coefficients (score, krippendorff_alpha, ...), which accept "
                         "weighted data, or build the data with one row per unit", code="weighted")


def require_coder_identity(data: CodingData, what: str) -> None:
    """Refuse data whose columns are not coders (multiset counts) where `what` pairs each coder's values."""
    if not data.coder_identity:
        raise AgreeError(f"{what} needs to know which coder gave which value, but these data list only the values "
                         "each unit received (a counts table in the multiset layout)",
                         hint="count the patterns with one column per coder, or use a coefficient that ignores "
                              "coder identity (alpha, Fleiss' kappa, AC1)", code="no-coder-identity")


def value_sort_key(v: Any):
    if isinstance(v, frozenset):
        return (2, len(v), tuple(sorted(map(str, v))))
    if isinstance(v, (int, float, np.integer, np.floating)):
        return (0, float(v), "")
    return (1, 0.0, str(v))


def value_label(v: Any) -> str:
    """A value as text for tables and messages: a set of codes joined with '; ' ("(none)" when empty)."""
    if isinstance(v, frozenset):
        return "; ".join(sorted(map(str, v))) or "(none)"
    return str(v)


def normalise_value(v: Any) -> Any:
    """One canonical form per value: numbers that are whole become int (so 1 and 1.0 are
    the same code) up to 2**53 (larger floats are not exact whole numbers and stay float, never
    a 309-digit integer), other numbers float, text stripped of nothing (readers trim on
    request). Returns None for missing."""
    if v is None:
        return None
    if isinstance(v, float) and np.isnan(v):
        return None
    if isinstance(v, (bool, np.bool_)):
        return int(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return int(f) if f.is_integer() and abs(f) < 2 ** 53 else f
    if isinstance(v, (set, frozenset, list, tuple)):  # several codes (lists come from str.split)
        return frozenset(x for x in (normalise_value(x) for x in v) if x is not None)
    if isinstance(v, str):
        if v == "":
            return None
        return v
    if v is pd.NA or v is pd.NaT:
        return None
    return v


def from_table(table: Any, *, coders: Sequence[str] | None = None,
               unit_ids: Sequence[Any] | None = None, categories: Sequence[Any] | None = None,
               level: str | None = None) -> CodingData:
    """Build CodingData from a units x coders array, list of rows or DataFrame.

    Missing values are None, NaN or empty strings. Values that are sets (or frozensets) make
    set-valued data. `categories` fixes the category list and order (unused categories
    included); by default the sorted observed values.
    """
    if isinstance(table, CodingData):
        return table
    if isinstance(table, pd.DataFrame):
        frame = table
        coders = list(coders) if coders is not None else [str(c) for c in frame.columns]
        if unit_ids is not None:
            unit_ids = list(unit_ids)
        else:  # the index names the units: whole numbers stay numbers (cheap), other labels become text
            index = frame.index.to_numpy()
            unit_ids = index if index.dtype.kind in "iu" else [str(i) for i in index]
        numeric = frame.shape[1] > 0 and all(pd.api.types.is_numeric_dtype(t) for t in frame.dtypes)
        raw = frame.to_numpy(dtype=float, na_value=np.nan) if numeric else frame.to_numpy(dtype=object)
    else:
        raw = _as_cells(table)
        if raw.ndim != 2:
            raise AgreeError("coding data must be two-dimensional: units in rows, coders in columns",
                             code="shape")
        coders = list(coders) if coders is not None else [f"coder_{i + 1}" for i in range(raw.shape[1])]
        unit_ids = list(unit_ids) if unit_ids is not None else np.arange(1, raw.shape[0] + 1)
    codes, observed = _encode_cells(raw, unit_ids, coders)
    set_valued = any(isinstance(v, frozenset) for v in observed)
    if set_valued:
        as_set = [v if isinstance(v, frozenset) else frozenset([v]) for v in observed]
        merged = tuple(dict.fromkeys(as_set))
        position = {v: i for i, v in enumerate(merged)}
        remap = np.array([position[v] for v in as_set] + [MISSING], dtype=np.int32)
        codes, observed = remap[codes], merged
    if categories is not None:
        cats = tuple(normalise_value(c) for c in categories)
        if len(set(cats)) != len(cats):
            twice = sorted({str(c) for c in cats if cats.count(c) > 1})
            raise AgreeError(f"categories listed twice: {', '.join(twice)}", code="categories")
        known = set(cats)
        unknown = ({c for s in observed for c in s} if set_valued else set(observed)) - known
        if unknown:
            bad = sorted(map(str, unknown))[:5]
            raise AgreeError(f"values not among the categories: {', '.join(bad)}",
                             hint="add them to the category list or fix the data", code="unknown-code")
        values = tuple(sorted(observed, key=value_sort_key)) if set_valued else cats
    else:
        values = tuple(sorted(observed, key=value_sort_key))
        cats = None
    index = {v: i for i, v in enumerate(values)}
    lookup = np.array([index[v] for v in observed] + [MISSING], dtype=np.int32)
    codes = lookup[codes]
    numeric = all(isinstance(v, (int, float)) for v in values)
    unit_ids = unit_ids if isinstance(unit_ids, np.ndarray) else np.array(unit_ids, dtype=object)
    data = CodingData(codes=codes, values=values, unit_ids=unit_ids,
                      coders=tuple(str(c) for c in coders), categories=tuple(cats or ()),
                      set_valued=set_valued, level=level or ("nominal"),
                      order="given" if categories is not None else "numeric" if numeric else "alphabetical")
    if level is not None and level not in LEVELS and not set_valued:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)}; got '{level}'", code="level")
    return data


def _as_cells(table: Any) -> np.ndarray:
    """A table as an array of cells: numeric arrays keep their dtype (the fast path), anything
    else becomes an object array so that numbers and text keep their types."""
    try:
        cells = np.asarray(table)
    except ValueError:  # ragged rows
        cells = None
    if cells is None or cells.dtype.kind not in "biuf":
        cells = np.asarray(table, dtype=object)
    return cells


def _encode_cells(raw: np.ndarray, unit_ids: Sequence[Any], coders: Sequence[Any]) -> tuple[np.ndarray, tuple]:
    """Each cell as an index into the distinct canonical values (`normalise_value`), MISSING (-1)
    where empty: `(codes, values)` with codes shaped like `raw` and values in first-seen order.

    Numeric arrays are encoded with `np.unique` and object arrays with `pd.factorize`, so only
    the distinct values pass through Python, never every cell; cells whose values cannot be
    hashed (lists of codes) are made hashable first. Non-finite numbers are refused, naming the
    first cell that holds one."""
    flat = raw.ravel()
    if flat.dtype.kind in "biuf":
        bad = np.isinf(flat) if flat.dtype.kind == "f" else np.zeros(flat.shape, dtype=bool)
        cell_codes, uniques = pd.factorize(flat, use_na_sentinel=True)
    else:
        try:
            cell_codes, uniques = pd.factorize(flat, use_na_sentinel=True)
        except TypeError:  # unhashable cells (lists of codes): make them hashable, then factorize
            flat = np.array([frozenset(v) if isinstance(v, (list, set)) else v for v in flat], dtype=object)
            cell_codes, uniques = pd.factorize(flat, use_na_sentinel=True)
        uniques = np.asarray(uniques, dtype=object)
        bad_unique = np.array([isinstance(u, (float, np.floating)) and np.isinf(u) for u in uniques] + [False])
        bad = bad_unique[cell_codes]
    if bad.any():
        row, col = divmod(int(np.flatnonzero(bad)[0]), raw.shape[1])
        raise AgreeError(f"unit '{unit_ids[row]}', coder '{coders[col]}': {str(raw[row, col])!r} is not a finite "
                         f"number ({int(bad.sum())} such cell(s))",
                         hint="codes must be finite; use a blank for 'not coded'", code="non-finite")
    canonical = [normalise_value(u) for u in uniques]
    values = tuple(dict.fromkeys(v for v in canonical if v is not None))
    position = {v: i for i, v in enumerate(values)}
    remap = np.array([MISSING if v is None else position[v] for v in canonical] + [MISSING], dtype=np.int32)
    return remap[cell_codes].reshape(raw.shape), values


def as_coding_data(data: Any, *, categories: Sequence[Any] | None = None) -> CodingData:
    """Accept CodingData, a DataFrame or an array; with `categories` re-index CodingData."""
    if isinstance(data, CodingData):
        if categories is None:
            return data
        return reindex_categories(data, categories)
    return from_table(data, categories=categories)


def reindex_categories(data: CodingData, categories: Iterable[Any]) -> CodingData:
    """Re-express codes over a given category list (which must contain every observed value)."""
    cats = tuple(normalise_value(c) for c in categories)
    if data.set_valued:
        return replace(data, categories=cats, order="given")
    pos = {v: i for i, v in enumerate(cats)}
    used = set(np.unique(data.codes[data.codes >= 0]).tolist())
    missing = [data.values[i] for i in used if data.values[i] not in pos]
    if missing:
        raise AgreeError(f"values not among the categories: {', '.join(map(str, missing[:5]))}",
                         code="unknown-code")
    mapping = np.array([pos.get(v, 0) for v in data.values] + [MISSING], dtype=np.int32)
    return replace(data, codes=mapping[data.codes], values=cats, categories=cats, order="given")
