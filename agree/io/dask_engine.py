"""Beyond one machine: the reduction to pattern counts as a computation on a Dask DataFrame.

Dask (``pip install agree[dask]``) runs the same two group-bys as the DuckDB engine on a
cluster: rows are numbered by (coder, code), grouped by unit into one integer key per unit (the
pattern written in base K + 1, K distinct codes) and a sum of 2^coder (a coder who coded the unit
twice makes a carry, so the sum has fewer one-bits than the unit has rows), then grouped by
key (and cluster) and counted. Only the distinct coders and codes and the final counts come
back to the client. The result is the counts table of `agree.io.counts` (coder-column layout,
the codes as they are in the data), which `read_counts` reads and checks like any other.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.model import AgreeError

__all__ = ["pattern_counts_dask"]

SHOWN = 10


def pattern_counts_dask(frame: Any, *, unit: str, coder: str, code: str, cluster: str | None = None,
                        coders: Sequence[Any] | None = None, count: str = "count") -> pd.DataFrame:
    """The counts table of a long Dask DataFrame (one row per unit, coder and code).

    Parameters
    ----------
    frame : a ``dask.dataframe.DataFrame`` (or anything with the same API).
    unit, coder, code : its columns.
    cluster : optional column grouping the units; the counts are then per (cluster, pattern), the
        smallest value kept where a unit's rows differ.
    coders : the coders in the order wanted (default: order of first appearance, partition by
        partition, as the ordinary reader orders them).
    count : the name of the count column.

    Returns
    -------
    pandas.DataFrame
        one column per coder (the code, None where not coded), the cluster column, `count`; read
        it with `agree.read_counts` (``read_counts(table, cluster=...)``).

    Raises
    ------
    AgreeError
        for a unit coded twice by one coder, rows with a code but no coder, or no unit id, with
        how many and the first (unit, coder) pairs.
    """
    for name, column in (("unit", unit), ("coder", coder), ("code", code), ("cluster", cluster)):
        if column is not None and column not in frame.columns:
            raise AgreeError(f"there is no {name} column '{column}'", code="no-column",
                             hint=f"columns: {', '.join(map(repr, frame.columns))}")
    cols = [unit, coder, code] + ([cluster] if cluster else [])
    frame = frame[cols]
    # rows with a code but no coder or no unit id: refused as the ordinary reader refuses them
    bad = frame[(frame[coder].isna() & ~frame[code].isna()) | (frame[unit].isna() & ~frame[code].isna())]
    n_bad = int(bad.shape[0].compute())
    if n_bad:
        first = bad.head(SHOWN, npartitions=-1)
        raise AgreeError(f"{n_bad} row(s) have a code but no coder or no unit id (first: "
                         + "; ".join(f"unit {u!r}, coder {c!r}" for u, c in zip(first[unit], first[coder])) + ")",
                         code="missing-coder", hint="fill in the unit and coder of every row")
    if coders is None:
        seen = frame[coder].dropna().map_partitions(lambda s: s.drop_duplicates(), meta=frame[coder]._meta)
        coders = list(pd.unique(seen.compute()))
    coders = list(coders)
    if len(coders) < 2:
        raise AgreeError(f"agreement needs two or more coders; found {len(coders)}", code="one-coder")
    codes = list(pd.unique(frame[code].dropna().unique().compute()))
    base = len(codes) + 1
    per_chunk = 62
    while per_chunk > 1 and base ** per_chunk >= 2 ** 62:
        per_chunk -= 1
    chunks = -(-len(coders) // per_chunk)
    coder_index = {c: i for i, c in enumerate(coders)}
    code_index = {v: i + 1 for i, v in enumerate(codes)}

    def keys(part: pd.DataFrame) -> pd.DataFrame:
        ci = part[coder].map(coder_index)
        part = part[ci.notna()]
        ci = ci[ci.notna()].to_numpy(dtype=np.int64)
        vi = part[code].map(code_index).fillna(0).to_numpy(dtype=np.int64)
        out = pd.DataFrame({"u": part[unit].to_numpy()}, index=part.index)
        chunk, pos = np.divmod(ci, per_chunk)
        for j in range(chunks):
            here = chunk == j
            out[f"k{j}"] = np.where(here, vi * base ** pos, 0)
            out[f"b{j}"] = np.where(here, np.int64(1) << pos, 0)
        out["n"] = 1
        if cluster:
            out["c"] = part[cluster].to_numpy()
        return out

    meta = pd.DataFrame({"u": frame[unit]._meta.to_numpy(),
                         **{f"{x}{j}": pd.Series([], dtype=np.int64) for j in range(chunks) for x in "kb"},
                         "n": pd.Series([], dtype=np.int64),
                         **({"c": frame[cluster]._meta.to_numpy()} if cluster else {})})
    rows = frame.map_partitions(keys, meta=meta)
    agg = {**{f"{x}{j}": "sum" for j in range(chunks) for x in "kb"}, "n": "sum"}
    if cluster:
        agg.update({"c": ["min", "max"]})
    units = rows.groupby("u").agg(agg, split_out=max(1, frame.npartitions // 2))
    units.columns = ["_".join(c) if isinstance(c, tuple) and c[1] in ("min", "max") else
                     (c[0] if isinstance(c, tuple) else c) for c in units.columns]
    seen_bits = sum(units[f"b{j}"].map_partitions(_popcount, meta=("b", "int64")) for j in range(chunks))
    units = units.assign(dup=units["n"] != seen_bits)
    n_dup = int(units["dup"].sum().compute())
    if n_dup:
        first = units[units["dup"]].head(SHOWN, npartitions=-1)
        raise AgreeError(f"{n_dup} unit(s) are coded more than once by one coder (first: "
                         + ", ".join(repr(u) for u in first.index) + ")", code="duplicate-coding",
                         hint="keep one row per unit and coder; for several codes put them in one cell "
                              "separated by ';'")
    group = [f"k{j}" for j in range(chunks)] + (["c_min"] if cluster else [])
    counted = units.groupby(group, dropna=False).size().compute().reset_index(name="_count")
    table = pd.DataFrame(index=range(len(counted)))
    lookup = np.array([None] + codes, dtype=object)
    for i, c in enumerate(coders):  # a loop over coders, not units
        j, pos = divmod(i, per_chunk)
        table[str(c)] = lookup[(counted[f"k{j}"].to_numpy(dtype=np.int64) // base ** pos) % base]
    if cluster:
        table[cluster] = counted["c_min"].to_numpy(dtype=object)
    table[count] = counted["_count"].to_numpy(dtype=np.int64)
    return table


def _popcount(s: pd.Series) -> pd.Series:
    return pd.Series(np.bitwise_count(s.to_numpy(dtype=np.int64)).astype(np.int64), index=s.index)
