"""Write spans as a span table (CSV, XLSX or Parquet) that `agree.read_spans` reads back.

Columns: document, coder, code (its path for nested codes), start, end (zero-based, in the data's
unit, end exclusive unless ``span_end="inclusive"``) and, where the texts are known and positions
count characters, excerpt (the span's text). Cells follow `agree.core.cells`: text that a
spreadsheet would run as a formula stays text (a text cell in xlsx, one leading ``'`` in CSV).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Sequence

import pandas as pd

from agree.core.errors import AgreeError
from agree.core.cells import frame_csv
from agree.core.files import atomic_write, atomic_write_text, check_output
from agree.core.spans import SpanData
from agree.io.spans import SPAN_ENDS, check_choice
from agree.output.reconciliation import write_table_xlsx

__all__ = ["write_spans", "span_table", "SPAN_TABLE_FORMATS"]

SPAN_TABLE_FORMATS = ("csv", "xlsx", "parquet")


def span_table(spans: SpanData, *, span_end: str = "exclusive", excerpts: bool = True) -> pd.DataFrame:
    """The spans as a table: document, coder, code, start, end (and excerpt)."""
    check_choice(span_end, SPAN_ENDS, "span_end")
    frame = spans.table()
    if excerpts and spans.unit == "character" and any(t is not None for t in spans.texts):
        index = {d: i for i, d in enumerate(spans.documents)}
        frame["excerpt"] = [None if spans.texts[index[d]] is None else spans.texts[index[d]][s:e]
                            for d, s, e in zip(frame["document"], frame["start"], frame["end"])]
    if span_end == "inclusive":
        frame["end"] = frame["end"] - 1
    return frame


def write_spans(spans: SpanData, path: str | os.PathLike, *, format: str | None = None,
                span_end: str = "exclusive", excerpts: bool = True, force: bool = False,
                inputs: Sequence[str | os.PathLike] = ()) -> Path:
    """Write spans as a span table, atomically and never over an input.

    Parameters
    ----------
    spans : the spans (for a consensus, one coder's).
    path : the output file; its suffix gives the format unless `format` is given.
    format : "csv", "xlsx" or "parquet".
    span_end : "exclusive" (the default, ``text[start:end]``) or "inclusive" ends.
    excerpts : add each span's text (when the texts are known and positions count characters).
    inputs : files the output must not replace; an existing file is replaced only with `force`.

    Returns
    -------
    Path
        the file written.
    """
    out = Path(path)
    fmt = (format or out.suffix.lower().lstrip(".") or "csv").lower()
    if fmt not in SPAN_TABLE_FORMATS:
        raise AgreeError(f"cannot write a span table as '{fmt}'; choose one of {', '.join(SPAN_TABLE_FORMATS)}",
                         hint="set format= or use a matching file suffix", code="format")
    check_output(out, list(inputs), force=force)
    frame = span_table(spans, span_end=span_end, excerpts=excerpts)
    if fmt == "csv":
        atomic_write_text(out, frame_csv(frame))
    elif fmt == "parquet":
        atomic_write(out, lambda tmp: frame.to_parquet(tmp, index=False))
    else:
        atomic_write(out, lambda tmp: write_table_xlsx(tmp, frame, title="Spans", freeze="A2"))
    return out
