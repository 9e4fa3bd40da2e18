"""The data model for highlighted passages: coded spans of text, as coders mark them in analysis
software, before any units exist.

`SpanData` is to spans what `CodingData` is to a units x coders table: the one validated object
between the importers (span tables, REFI-QDA projects) and the views that turn spans into
agreement data (segments as units, positions as units, unitizing alpha).

Positions are zero-based offsets into each document's plain text, the end exclusive
(``text[start:end]``), counted in Unicode code points (or in tokens when `unit` is "token").
Readers convert other conventions (an inclusive end) on the way in and say so in the report.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.model import AgreeError, ReadReport

UNITS = ("character", "token")
CODE_PATH_SEPARATOR = "/"


def token_bounds(text: str) -> tuple[np.ndarray, np.ndarray]:
    """Character offsets (start, end exclusive) of the tokens of `text`: maximal runs of
    characters that are not whitespace (``str.isspace``), so punctuation sticks to its word.
    Token offsets (`unit` "token") count these tokens from 0."""
    codepoints = np.frombuffer(text.encode("utf-32-le"), dtype=np.uint32)
    space = np.concatenate(([True], np.isin(codepoints, _SPACES), [True])).astype(np.int8)
    edges = np.diff(space)
    return np.flatnonzero(edges == -1).astype(np.int64), np.flatnonzero(edges == 1).astype(np.int64)


# every code point for which str.isspace() is true (the last is U+3000, ideographic space)
_SPACES = np.array([c for c in range(0x3001) if chr(c).isspace()], dtype=np.uint32)


def _pick(values: tuple[str, ...] | None, index: Any) -> tuple[str, ...] | None:
    return None if values is None else tuple(values[int(i)] for i in index)


def _frozen(a: Any, dtype: Any) -> np.ndarray:
    out = np.array(a, dtype=dtype, copy=True)
    out.setflags(write=False)
    return out


@dataclass(frozen=True, eq=False)
class SpanData:
    """Coded spans of several coders over a set of documents, validated.

    Attributes
    ----------
    documents : document names (ids), one per document.
    texts : the plain text of each document, or None where it is not available (spans can then
        still be compared position by position, but no passage can be shown).
    lengths : (D,) int64, the length of each document in `unit`s: the text's length where the
        text is known, else the largest span end.
    coders : coder names.
    codes : code names, as shown (for nested codes the path from the top, joined by "/").
    parents : (C,) int64, the index of each code's parent code, -1 for a top-level code.
    doc, coder, code : (S,) int32 arrays, one entry per coded span (a span with two codes is two
        entries).
    start, end : (S,) int64 offsets, end exclusive, 0 <= start < end <= lengths[doc].
    coded : (D, m) bool, True where the coder coded the document (opened it and coded it in full,
        or at least coded something in it; see `coverage`).
    coverage : how `coded` was set: "declared" (the input said which documents each coder coded)
        or "inferred" (a coder counts as having coded a document where they marked a span in it).
    unit : "character" or "token".
    source_rows : optional (S,) int64, the row (span table) or -1, for messages.
    span_ids : optional (S,) object array of identifiers from the input (selection GUIDs).
    document_guids, coder_guids, code_guids : optional identifiers of the documents, coders and
        codes in the input (REFI-QDA source, user and code GUIDs, normalised), one per document,
        coder and code; a writer uses them to put spans back where they came from.
    report : what the reader detected and did.
    """

    documents: tuple[str, ...]
    texts: tuple[str | None, ...]
    lengths: np.ndarray
    coders: tuple[str, ...]
    codes: tuple[str, ...]
    parents: np.ndarray
    doc: np.ndarray
    coder: np.ndarray
    code: np.ndarray
    start: np.ndarray
    end: np.ndarray
    coded: np.ndarray
    coverage: str = "inferred"
    unit: str = "character"
    source_rows: np.ndarray | None = None
    span_ids: np.ndarray | None = None
    report: ReadReport | None = None
    notes: tuple[str, ...] = field(default=())
    document_guids: tuple[str, ...] | None = None
    coder_guids: tuple[str, ...] | None = None
    code_guids: tuple[str, ...] | None = None

    def __post_init__(self):
        D, m, C = len(self.documents), len(self.coders), len(self.codes)
        for name, dtype in (("doc", np.int32), ("coder", np.int32), ("code", np.int32),
                            ("start", np.int64), ("end", np.int64), ("lengths", np.int64),
                            ("parents", np.int64), ("coded", bool)):
            object.__setattr__(self, name, _frozen(getattr(self, name), dtype))
        S = len(self.doc)
        if not all(len(getattr(self, n)) == S for n in ("coder", "code", "start", "end")):
            raise AgreeError("span arrays must have one entry per span", code="shape")
        if len(self.texts) != D or len(self.lengths) != D:
            raise AgreeError("one text and one length are needed per document", code="shape")
        if len(self.parents) != C:
            raise AgreeError("one parent is needed per code", code="shape")
        if self.coded.shape != (D, m):
            raise AgreeError("`coded` must be documents x coders", code="shape")
        if self.unit not in UNITS:
            raise AgreeError(f"unit must be one of {', '.join(UNITS)}; got '{self.unit}'", code="shape")
        if S:
            if self.doc.min() < 0 or self.doc.max() >= D or self.coder.min() < 0 or self.coder.max() >= m \
                    or self.code.min() < 0 or self.code.max() >= C:
                raise AgreeError("a span refers to no document, coder or code", code="shape")
            if (self.start < 0).any() or (self.end <= self.start).any() or (self.end > self.lengths[self.doc]).any():
                raise AgreeError("a span lies outside its document or is empty", code="shape")
        if len(self.parents) and ((self.parents < -1).any() or (self.parents >= C).any()):
            raise AgreeError("a code's parent refers to no code", code="shape")
        if self.source_rows is not None:
            object.__setattr__(self, "source_rows", _frozen(self.source_rows, np.int64))
        for name, n in (("document_guids", D), ("coder_guids", m), ("code_guids", C)):
            guids = getattr(self, name)
            if guids is not None:
                object.__setattr__(self, name, tuple(guids))
                if len(guids) != n:
                    raise AgreeError(f"`{name}` needs one identifier per {name.split('_')[0]}", code="shape")

    # -- shape -------------------------------------------------------------------------
    @property
    def n_spans(self) -> int:
        return int(len(self.doc))

    @property
    def n_documents(self) -> int:
        return len(self.documents)

    @property
    def n_coders(self) -> int:
        return len(self.coders)

    def depth(self) -> np.ndarray:
        """(C,) depth of each code: 1 for a top-level code, 2 for its children, ..."""
        depth = np.ones(len(self.codes), dtype=np.int64)
        parent = self.parents.copy()
        while (parent >= 0).any():
            has = parent >= 0
            depth[has] += 1
            parent = np.where(has, self.parents[np.maximum(parent, 0)], -1)
        return depth

    # -- derived data ------------------------------------------------------------------
    def roll_up(self, depth: int) -> "SpanData":
        """Codes deeper than `depth` become their ancestor at that depth (1: top-level codes).
        Spans that then repeat (same document, coder, code, start and end) are kept once."""
        if depth < 1:
            raise AgreeError(f"the code depth must be 1 or more; got {depth}", code="code-depth")
        ancestor = np.arange(len(self.codes))
        d = self.depth()
        for _ in range(int(d.max(initial=1)) - depth):
            deep = d[ancestor] > depth
            ancestor = np.where(deep, self.parents[ancestor], ancestor)
        keep_codes = np.unique(ancestor)
        new_index = np.full(len(self.codes), -1, dtype=np.int64)
        new_index[keep_codes] = np.arange(len(keep_codes))
        parents = np.array([new_index[p] if p >= 0 else -1 for p in self.parents[keep_codes]], dtype=np.int64)
        code = new_index[ancestor[self.code]]
        return self._with_spans(code=code, codes=tuple(self.codes[i] for i in keep_codes), parents=parents,
                                code_guids=_pick(self.code_guids, keep_codes))

    def subset_documents(self, keep: np.ndarray | Sequence[bool]) -> "SpanData":
        """Only the documents where `keep` is True (a (D,) bool mask)."""
        keep = np.asarray(keep, dtype=bool)
        new_index = np.cumsum(keep) - 1
        on = keep[self.doc]
        return replace(
            self, documents=tuple(d for d, k in zip(self.documents, keep) if k),
            texts=tuple(t for t, k in zip(self.texts, keep) if k), lengths=self.lengths[keep],
            document_guids=_pick(self.document_guids, np.flatnonzero(keep)),
            coded=self.coded[keep], doc=new_index[self.doc[on]], coder=self.coder[on], code=self.code[on],
            start=self.start[on], end=self.end[on],
            source_rows=None if self.source_rows is None else self.source_rows[on],
            span_ids=None if self.span_ids is None else self.span_ids[on])

    def subset_coders(self, coders: Sequence[int | str]) -> "SpanData":
        """Only the given coders (names or indices), in that order."""
        index = [self.coders.index(c) if isinstance(c, str) else int(c) for c in coders]
        new_index = np.full(self.n_coders, -1, dtype=np.int64)
        new_index[index] = np.arange(len(index))
        on = new_index[self.coder] >= 0
        return replace(
            self, coders=tuple(self.coders[i] for i in index), coded=self.coded[:, index],
            coder_guids=_pick(self.coder_guids, index),
            doc=self.doc[on], coder=new_index[self.coder[on]], code=self.code[on], start=self.start[on],
            end=self.end[on], source_rows=None if self.source_rows is None else self.source_rows[on],
            span_ids=None if self.span_ids is None else self.span_ids[on])

    def _with_spans(self, *, code: np.ndarray, codes: tuple[str, ...], parents: np.ndarray,
                    code_guids: tuple[str, ...] | None) -> "SpanData":
        key = np.stack([self.doc, self.coder, code, self.start, self.end], axis=1)
        _, first = np.unique(key, axis=0, return_index=True)
        first = np.sort(first)
        return replace(
            self, codes=codes, parents=parents, code_guids=code_guids, doc=self.doc[first], coder=self.coder[first], code=code[first],
            start=self.start[first], end=self.end[first],
            source_rows=None if self.source_rows is None else self.source_rows[first],
            span_ids=None if self.span_ids is None else self.span_ids[first])

    def table(self) -> pd.DataFrame:
        """One row per coded span: document, coder, code (its path), start, end (end exclusive,
        in `unit`s), sorted by document, coder, start, end and code."""
        frame = pd.DataFrame({
            "document": pd.Categorical.from_codes(self.doc, categories=pd.Index(self.documents, dtype=object)),
            "coder": pd.Categorical.from_codes(self.coder, categories=pd.Index(self.coders, dtype=object)),
            "code": pd.Categorical.from_codes(self.code, categories=pd.Index(self.codes, dtype=object)),
            "start": self.start, "end": self.end})
        order = np.lexsort((self.code, self.end, self.start, self.coder, self.doc))
        frame = frame.iloc[order].reset_index(drop=True)
        return frame.astype({"document": object, "coder": object, "code": object})

    def summary(self) -> str:
        return (f"{self.n_spans:,} coded spans by {self.n_coders} coders over {self.n_documents} documents, "
                f"{len(self.codes)} codes, positions in {self.unit}s")

    def __repr__(self) -> str:
        return f"SpanData({self.summary()})"
