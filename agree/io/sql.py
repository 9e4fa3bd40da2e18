"""SQL for a warehouse: the query that reduces a long label table to the counts table.

`pattern_count_sql` writes one SELECT that a warehouse runs where the data are; its result, saved
as CSV or Parquet, is read with ``agree score counts.parquet --counts`` (`agree.io.counts`). The
query uses only GROUP BY, CASE, MIN/MAX and COUNT (standard SQL) for the coder-column layout; the
multiset layout (no coder list needed) uses ``STRING_AGG(x, sep ORDER BY x)`` as PostgreSQL,
DuckDB and BigQuery write it.

A warehouse cannot raise the errors the readers raise, so the query counts what they would
refuse into check columns (`agree.io.counts.CHECK_COLUMNS`): rows coding a unit a second time by
the same coder, rows with a code but no coder, rows with a code but no unit; `read_counts`
refuses a table where any is non-zero.
"""

from __future__ import annotations

from typing import Sequence

from agree.core.model import AgreeError
from agree.io.counts import MULTISET_SEP

__all__ = ["pattern_count_sql"]


def pattern_count_sql(table: str, *, unit: str, coder: str, code: str, cluster: str | None = None,
                      coders: Sequence[str] | None = None, count: str = "count", multiset_sep: str = MULTISET_SEP,
                      quote: str = '"', text_type: str = "VARCHAR") -> str:
    """A query counting the patterns of codes in a long table (one row per unit, coder and code).

    Parameters
    ----------
    table : the table or view, inserted as written (e.g. ``labels.log_2024`` or a subquery in
        parentheses).
    unit, coder, code : its columns.
    cluster : optional column grouping the units (e.g. a document); the counts are then per
        (cluster, pattern), the smallest value kept where a unit's rows differ.
    coders : the coders, in the order of the columns wanted: the coder-column layout, where every
        coefficient is available. Rows of other coders are not counted (the units they coded
        alone count as not coded). None: the multiset layout (the codes each unit received,
        sorted as text and joined by `multiset_sep`), where coefficients that need coder
        identity (Cohen's, the weighted and Conger's kappa) are not available.
    count : the name of the count column.
    quote : the character that quotes identifiers (``"``; a backtick for BigQuery or MySQL).
    text_type : the SQL type codes are cast to in the multiset layout (``STRING`` for BigQuery).

    Returns
    -------
    str
        one SELECT statement. Its columns: one per coder (or ``values``), the cluster, `count`
        and the check columns ``duplicate_rows``, ``rows_without_coder`` and ``rows_without_unit``.

    Notes
    -----
    Blank codes must be NULL in the table (an empty string is read as blank too, but counts in
    the multiset as an empty piece, which is skipped). Coder names are compared as written.
    """
    for name, value in (("unit", unit), ("coder", coder), ("code", code)):
        if not value:
            raise AgreeError(f"pattern_count_sql needs the {name} column", code="bad-option")
    if not quote or len(quote) != 1:
        raise AgreeError("quote must be one character, such as '\"' or '`'", code="bad-option")
    q = (lambda name: quote + str(name).replace(quote, quote * 2) + quote)
    U, C, V = q(unit), q(coder), q(code)
    if coders is not None:
        coders = list(coders)
        if len(set(coders)) != len(coders) or not coders:
            raise AgreeError("coders must name each coder once", code="bad-option")
        pattern = [f"MAX(CASE WHEN {C} = {_literal(c)} THEN {V} END) AS {q(c)}" for c in coders]
        names = [q(c) for c in coders]
    else:
        pattern = [f"STRING_AGG(CAST({V} AS {text_type}), {_literal(multiset_sep)} "
                   f"ORDER BY CAST({V} AS {text_type})) AS {q('values')}"]
        names = [q("values")]
    keep = [f"MIN({q(cluster)}) AS {q(cluster)}"] if cluster else []
    group = names + ([q(cluster)] if cluster else [])
    inner = ",\n         ".join(
        [f"{U} AS agree_unit", *pattern, *keep,
         f"COUNT({C}) - COUNT(DISTINCT {C}) AS duplicate_rows",
         f"COUNT(CASE WHEN {C} IS NULL AND {V} IS NOT NULL THEN 1 END) AS rows_without_coder",
         f"COUNT({V}) AS coded_rows"])
    outer = ",\n       ".join(
        [*group,
         f"SUM(CASE WHEN agree_unit IS NULL THEN 0 ELSE 1 END) AS {q(count)}",
         "SUM(CASE WHEN agree_unit IS NULL THEN 0 ELSE duplicate_rows END) AS duplicate_rows",
         "SUM(rows_without_coder) AS rows_without_coder",
         "SUM(CASE WHEN agree_unit IS NULL THEN coded_rows ELSE 0 END) AS rows_without_unit"])
    return (f"WITH agree_units AS (\n  SELECT {inner}\n  FROM {table}\n  GROUP BY {U}\n)\n"
            f"SELECT {outer}\nFROM agree_units\nGROUP BY {', '.join(group)}")


def _literal(text: str) -> str:
    return "'" + str(text).replace("'", "''") + "'"
