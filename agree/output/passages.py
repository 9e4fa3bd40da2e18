"""Reconciling highlighted passages: the review workbook of disputed passages, and the consensus
spans written back as a span table or as an exchange-format project.

The passages are the segments of view 1 (`agree.analysis.passages.segment_units`: paragraphs,
sentences, speaker turns or listed segments, each with the set of codes each coder gave it). The
review is the unit review of `agree.output.reconciliation` run on those passages, so it follows the
same conventions (drop-down of codes, "(none)", several codes separated by "; ", how / who / notes
columns, the "About this file" sheet with checksums, text cells that never run as formulas, CSV and
Markdown): `passage_units` adds, for each passage that needs a decision, the surrounding text with
the passage between "»" and "«" (as the unit's text) and one column per coder with that coder's
spans marked ⟦code⟧...⟦/code⟧.

`reconcile_passages` reads the decisions back with `agree.output.reconciliation.reconcile` and turns
the final codes into spans over their passages (`agree.analysis.passages.consensus_spans`);
`write_consensus_spans` writes them as a span table, or as a ``.qdpx`` that keeps the original
project (or the coders of a span table) untouched and adds one user holding the consensus.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.analysis.passages import consensus_spans, disputed_passages, segment_units
from agree.core.errors import AgreeError
from agree.core.model import CodingData
from agree.core.spans import SpanData
from agree.io.spans import spans_from_table
from agree.output.reconciliation import Consensus, reconcile, write_review
from agree.output.refi import CONSENSUS_USER, write_project
from agree.output.spans import SPAN_TABLE_FORMATS, write_spans

__all__ = ["passage_units", "write_passage_review", "reconcile_passages", "PassageConsensus",
           "write_consensus_spans", "MARKED"]

MARKED = "marked: "  # header prefix of the columns with one coder's spans marked
# how a reconciled passage got its codes (agree.output.reconciliation's sources) -> a decision
_DECIDED = ("decided", "majority", "single coder")


def passage_units(spans: SpanData, *, by: str = "paragraph", segments: Any = None, min_cover: float = 0.5,
                  cover: str = "either", context: int = 80, coders: Sequence[int | str] | None = None,
                  documents: str = "all") -> CodingData:
    """The passages as units to review: `segment_units` with, for the disputed passages, the text in
    context (the passage between "»" and "«", up to `context` characters around it) and one column
    "marked: <coder>" per coder (that coder's spans in the same stretch, marked ⟦code⟧...⟦/code⟧).

    The other passages keep their own text and empty marked columns. Columns "document", "start"
    and "end" (the passage's offsets, end exclusive) come first. Give the same options to read the
    decisions back (`reconcile_passages`)."""
    units = segment_units(spans, by=by, segments=segments, min_cover=min_cover, cover=cover, coders=coders,
                          documents=documents)
    shown = disputed_passages(spans, by=by, segments=segments, min_cover=min_cover, cover=cover, context=context,
                              coders=coders, documents=documents)
    row = pd.Index([str(u) for u in units.unit_ids]).get_indexer(shown["passage"].astype(str))
    text = np.array(["" if t is None else t for t in units.text], dtype=object)
    text[row] = shown["text"].to_numpy(object)
    columns = dict(units.columns)
    for coder in units.coders:
        marked = np.full(units.n_units, "", dtype=object)
        marked[row] = shown[f"marked: {coder}"].to_numpy(object)
        columns[MARKED + coder] = marked
    return replace(units, text=text, columns=columns)


def write_passage_review(spans: SpanData, path: str | os.PathLike, *, by: str = "paragraph", segments: Any = None,
                         min_cover: float = 0.5, cover: str = "either", context: int = 80,
                         coders: Sequence[int | str] | None = None, documents: str = "all",
                         format: str | None = None, inputs: Sequence[str | os.PathLike] | None = None,
                         options: dict[str, Any] | None = None, include_agreed: bool = False, force: bool = False):
    """Write the disputed passages as a review workbook (or CSV / Markdown) to fill in.

    The unit review (`agree.output.reconciliation.write_review`) of `passage_units`: one row per
    disputed passage with its document, offsets, each coder's marked text, the passage in context,
    each coder's codes, the codes involved and the decision columns. Returns its `ReviewSummary`
    (counts of passages)."""
    units = passage_units(spans, by=by, segments=segments, min_cover=min_cover, cover=cover, context=context,
                          coders=coders, documents=documents)
    if inputs is None and spans.report is not None:
        inputs = list(spans.report.files)
    return write_review(units, path, format=format, inputs=inputs, options=options,
                        include_agreed=include_agreed, force=force)


@dataclass(frozen=True, eq=False)
class PassageConsensus:
    """The reconciled passages: `consensus` (one final set of codes per passage, with its source,
    as `reconcile` gives it) and `spans` (the consensus spans: document, coder, code, start, end,
    passage, source; one row per passage and code, `consensus_spans`)."""

    consensus: Consensus
    spans: pd.DataFrame
    units: CodingData

    def to_dict(self) -> dict[str, Any]:
        return {**self.consensus.to_dict(), "passages": self.consensus.units_read,
                "consensus_spans": int(len(self.spans))}


def reconcile_passages(units: CodingData, review: Any, *, coder: str = CONSENSUS_USER,
                       allow_unresolved: bool = False, majority: bool = False) -> PassageConsensus:
    """Read the decisions on passages back and build the consensus spans.

    Parameters
    ----------
    units : the passages the review was made from (`passage_units` with the same options).
    review : the filled-in review file (or a DataFrame like `review_table` gives).
    coder : the name of the consensus coder.
    allow_unresolved : leave the disputed passages without a decision out of the consensus
        instead of refusing (they are listed in `consensus.unresolved`).
    majority : give an undecided passage the set of codes a strict majority of its coders gave.

    Every passage's final codes come from `reconcile` (agreed passages keep the agreed codes; a
    decision, "(none)" or "a; b", settles a disputed one), then become one span per code over the
    passage. Agreement is computed on the coders' own spans, never on the consensus."""
    consensus = reconcile(units, review, allow_unresolved=allow_unresolved, majority=majority)
    table = consensus.table
    settled = table["source"].isin(_DECIDED).to_numpy()
    decisions = dict(zip(table["unit"][settled], table["final code"][settled]))
    out = consensus_spans(units, decisions, coder=coder, allow_undecided=allow_unresolved)
    return PassageConsensus(consensus=consensus, spans=out, units=units)


CONSENSUS_FORMATS = ("qdpx", *SPAN_TABLE_FORMATS)


def write_consensus_spans(result: PassageConsensus | pd.DataFrame, path: str | os.PathLike, *, spans: SpanData,
                          project: str | os.PathLike | None = None, coder: str = CONSENSUS_USER,
                          span_end: str = "exclusive", inputs: Sequence[str | os.PathLike] = (),
                          force: bool = False) -> Path:
    """Write the consensus spans, by the suffix of `path`.

    - ``.qdpx``: with `project` (the project the spans were read from), that project untouched
      plus one user named `coder` holding the consensus codings (`write_project`); without it (the
      spans came from a span table) a new project holding every coder's spans and the consensus
      user's.
    - ``.csv``, ``.xlsx``, ``.parquet``: a span table of the consensus spans (`write_spans`).

    `spans` are the coders' spans the passages came from (their documents, texts and codes).
    Written atomically, never over one of `inputs`, `project` or the files `spans` were read from."""
    inputs = [*inputs, *(spans.report.files if spans.report is not None else ())]
    table = result.spans if isinstance(result, PassageConsensus) else result
    table = table[["document", "coder", "code", "start", "end"]]
    out = Path(path)
    fmt = out.suffix.lower().lstrip(".")
    if fmt not in CONSENSUS_FORMATS:
        raise AgreeError(f"cannot write consensus spans as '{out.suffix or '(none)'}'", where=str(out),
                         hint=f"name the output <name>.{' / .'.join(CONSENSUS_FORMATS)}", code="format")
    if fmt == "qdpx" and project is not None:
        return write_project(table, out, project=project, coder=coder, span_end=span_end, inputs=inputs,
                             force=force)
    if fmt == "qdpx":
        if coder in spans.coders:
            raise AgreeError(f"the spans already have a coder named '{coder}'", code="user-exists",
                             hint="name the consensus coder otherwise")
        both = pd.concat([spans.table(), table], ignore_index=True)
        return write_project(spans_from_table(both, like=spans), out, span_end=span_end, inputs=inputs, force=force)
    return write_spans(spans_from_table(table, like=spans), out, span_end=span_end, inputs=inputs, force=force)
