"""Agreement on highlighted passages (coded spans): the views that turn spans into units.

Coders mark spans ``[start, end)`` with codes on shared documents (`agree.core.spans.SpanData`).
Nothing is a unit until a view says what the units are (METHODS 9):

1. **Segments as units** (`segment_units`, `segment_agreement`): the units come from the text
   itself (paragraphs, sentences, speaker turns) or from a list of segments; each segment gets, per
   coder, the set of codes that cover it (see `segment_units` for the rule). The result is
   set-valued `CodingData`, so every coefficient, diagnostic, review and report applies.
2. **Positions as units** (`position_units`, `position_agreement`; the default view): every
   character (or token) of the compared documents is a unit with, per code, a present/absent value
   per coder. Built run-length compressed: between two span boundaries nothing changes, so each
   run of positions is one row with a weight (its length). Neighbouring positions are not
   independent: intervals resample whole documents and standard errors that assume independent
   units are not shown.
3. **Krippendorff's alpha for unitizing**: `agree.stats.unitizing` (experimental).

Which documents are compared (`restrict_documents`): by default only documents every compared
coder coded (METHODS 9.1, step 2: the continuum is fixed before computing; a document one coder
never opened is not a disagreement); ``documents="pairable"`` keeps every document at least two
compared coders coded, and the others' values there are missing. Every result names its view (a
field and a note) and lists the documents left out and why.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_RESAMPLES
from agree.core.model import AgreeError, CodingData, ReadReport, value_sort_key
from agree.core.results import AgreementResult, Note, display_name, json_safe
from agree.core.seeds import draw_seed
from agree.core.spans import SpanData
from agree.stats import coefficients as coef
from agree.stats.intervals import expand_ranges, overlap_pairs
from agree.stats.unitizing import EXPERIMENTAL, unitizing_alpha

SEGMENT_KINDS = ("paragraph", "sentence", "turn", "segment")
DOCUMENT_RULES = ("all", "pairable")
DEFAULT_MIN_COVER = 0.5
MATCH_JACCARD = 0.5
POSITION_CAUTION = ("Neighbouring positions are not independent (a span is a run of positions): intervals "
                    "resample whole documents, and standard errors, z and p-values that assume independent "
                    "units are not shown for this view.")


# =========================================================================================
# Which documents are compared
# =========================================================================================

def restrict_documents(spans: SpanData, *, coders: Sequence[int | str] | None = None,
                       documents: str = "all") -> SpanData:
    """The spans of the compared coders on the documents to compare, with notes saying which
    documents were left out and why.

    Parameters
    ----------
    spans : SpanData
    coders : the coders to compare (names or indices); all by default.
    documents : "all" (default) keeps the documents every compared coder coded; "pairable" keeps
        those at least two of them coded (a coder who did not code a kept document is missing
        there, never a disagreement). Documents fewer than two compared coders coded are always
        left out: there is nothing to compare in them.

    Returns
    -------
    SpanData restricted to those coders and documents; its `notes` gain one line naming the
    documents left out (with the coders who did not code each) and, when which coder coded which
    document was only inferred from the spans, a caution that an empty coding looks the same as a
    document never opened.
    """
    if documents not in DOCUMENT_RULES:
        raise AgreeError(f"documents must be one of {', '.join(DOCUMENT_RULES)}; got '{documents}'",
                         hint="'all': documents every compared coder coded; 'pairable': at least two",
                         code="documents")
    if coders is not None:
        spans = spans.subset_coders(coders)
    if spans.n_coders < 2:
        raise AgreeError(f"agreement needs at least two coders; the spans have {spans.n_coders}",
                         hint="check the coder column, or the coders selected", code="one-coder")
    coded = spans.coded
    count = coded.sum(axis=1)
    keep = count == spans.n_coders if documents == "all" else count >= 2
    notes = list(spans.notes)
    if not keep.all():
        reasons = []
        for d in np.flatnonzero(~keep):  # a loop over documents
            absent = [spans.coders[i] for i in np.flatnonzero(~coded[d])]
            reasons.append(f"{spans.documents[d]} (not coded by {', '.join(absent)})")
        rule = ("every compared coder" if documents == "all" else "at least two compared coders")
        notes.append(f"{int((~keep).sum())} of {spans.n_documents} documents left out, as only documents "
                     f"{rule} coded are compared: {'; '.join(reasons)}.")
    if spans.coverage == "inferred":
        notes.append("Which coder coded which document was inferred from the spans: a coder who read a "
                     "document and marked nothing in it counts as not having coded it. Declare the coded "
                     "documents to count such a document as coded with no code.")
    if not keep.any():
        raise AgreeError(f"no document was coded by {'every compared coder' if documents == 'all' else 'two or more coders'}"
                         f" ({', '.join(spans.coders)})",
                         hint="compare fewer coders, or use documents='pairable'", code="no-documents")
    out = spans.subset_documents(keep)
    return replace(out, notes=tuple(dict.fromkeys(notes)))


def _left_out(spans: SpanData) -> tuple[str, ...]:
    return tuple(n for n in spans.notes if "documents left out" in n)


# =========================================================================================
# Interval arithmetic on the concatenated continuum (vectorised over spans)
# =========================================================================================

def _offsets(spans: SpanData) -> np.ndarray:
    """(D + 1,) start of each document on the concatenated continuum, then its total length."""
    return np.concatenate([[0], np.cumsum(spans.lengths)]).astype(np.int64)


def _merge(key: np.ndarray, start: np.ndarray, end: np.ndarray, total: int):
    """Union of the intervals of each key: returns (key, start, end) of disjoint merged intervals,
    sorted by key then start. Intervals that touch are merged. `start`/`end` are global positions
    below `total`."""
    if len(key) == 0:
        return key.astype(np.int64), start.astype(np.int64), end.astype(np.int64)
    span = np.int64(total + 1)
    s = key.astype(np.int64) * span + start
    e = key.astype(np.int64) * span + end
    order = np.argsort(s, kind="stable")
    s, e = s[order], e[order]
    reach = np.maximum.accumulate(e)
    new = np.ones(len(s), dtype=bool)
    new[1:] = s[1:] > reach[:-1]
    group = np.cumsum(new) - 1
    ms = s[new]
    me = np.zeros(len(ms), dtype=np.int64)
    np.maximum.at(me, group, e)
    k = ms // span
    return k, ms - k * span, me - k * span


# =========================================================================================
# View 1: segments as units
# =========================================================================================

_LINE = re.compile(r"[^\r\n]*(?:\r\n|\r|\n|$)")
_SENTENCE = re.compile(r"\S.*?(?:[.!?\u2026]+[\"'\u201d\u2019\u00bb)\]]*(?=\s|$)|$)", re.S)
_SPEAKER = re.compile(r"[ \t]*([^\W\d_][^:\r\n]{0,39}):")


def _trimmed(text: str, start: int, end: int) -> tuple[int, int] | None:
    piece = text[start:end]
    stripped = piece.strip()
    if not stripped:
        return None
    lead = len(piece) - len(piece.lstrip())
    return start + lead, start + lead + len(stripped)


def _lines(text: str) -> list[tuple[int, int]]:
    out = []
    for m in _LINE.finditer(text):
        if m.start() == len(text) and m.end() == m.start():
            break
        out.append((m.start(), m.end()))
    return out


def paragraphs(text: str) -> list[tuple[int, int]]:
    """Paragraphs of a text as [start, end) offsets: stretches of text separated by one or more
    blank lines (lines holding only whitespace), leading and trailing whitespace excluded.
    Line ends may be LF, CRLF or CR."""
    out, begin, last = [], None, None
    for s, e in _lines(text):
        if text[s:e].strip():
            begin = s if begin is None else begin
            last = e
        elif begin is not None:
            out.append(_trimmed(text, begin, last))
            begin = None
    if begin is not None:
        out.append(_trimmed(text, begin, last))
    return [p for p in out if p is not None]


def sentences(text: str) -> list[tuple[int, int]]:
    """Sentences as [start, end) offsets, by a simple documented rule: within each paragraph, a
    sentence ends after a run of '.', '!', '?' or '…' (with any closing quotes or brackets after
    it) that is followed by whitespace or the end of the paragraph; the rest of a paragraph
    without such a mark is a sentence too. Abbreviations ("e.g. this") and decimal points followed
    by a space end a sentence under this rule: give segments in a table when that matters."""
    out = []
    for ps, pe in paragraphs(text):
        for m in _SENTENCE.finditer(text, ps, pe):
            t = _trimmed(text, m.start(), m.end())
            if t is not None:
                out.append(t)
    return out


def speaker_turns(text: str) -> list[tuple[int, int, str]]:
    """Speaker turns as [start, end, speaker]: a turn starts at a line that begins (after optional
    spaces or tabs) with a name of 1 to 40 characters that starts with a letter and holds no colon,
    followed by ':' ("Interviewer:", "P3 Maria:"); it runs to the next such line. Text before the
    first turn, if any, is a segment of its own with speaker "". A line such as "Note: ..." also
    starts a turn under this rule; times ("10:30") do not, as a name starts with a letter."""
    starts, names = [], []
    for s, _ in _lines(text):
        m = _SPEAKER.match(text, s)
        if m:
            starts.append(s)
            names.append(m.group(1).strip())
    bounds = starts + [len(text)]
    out = []
    first = _trimmed(text, 0, starts[0] if starts else len(text))
    if first is not None:
        out.append((first[0], first[1], ""))
    for k, name in enumerate(names):
        t = _trimmed(text, bounds[k], bounds[k + 1])
        if t is not None:
            out.append((t[0], t[1], name))
    return out


def _segments_from_text(spans: SpanData, by: str) -> pd.DataFrame:
    if spans.unit != "character":
        raise AgreeError(f"{by}s are found in the text by character offsets, but these spans count "
                         f"{spans.unit}s", hint="give the segments as a table (document, start, end) in the same "
                         "units as the spans", code="segments")
    rows = []
    for d, (name, text) in enumerate(zip(spans.documents, spans.texts)):  # a loop over documents
        if text is None:
            raise AgreeError(f"document '{name}' has no text, so its {by}s cannot be found",
                             hint="give the documents' texts, or the segments as a table (document, start, end)",
                             code="no-text")
        if by == "paragraph":
            found = [(s, e, "") for s, e in paragraphs(text)]
        elif by == "sentence":
            found = [(s, e, "") for s, e in sentences(text)]
        else:
            found = speaker_turns(text)
        label = {"paragraph": "para", "sentence": "sentence", "turn": "turn"}[by]
        first_turn = 1
        for k, (s, e, who) in enumerate(found):
            if by == "turn" and k == 0 and who == "":
                rows.append((d, s, e, f"{name}:before turn 1", who))
                first_turn = 0
                continue
            rows.append((d, s, e, f"{name}:{label} {k + first_turn}", who))
    return pd.DataFrame(rows, columns=["doc", "start", "end", "id", "speaker"])


def _segments_from_table(spans: SpanData, table: Any) -> pd.DataFrame:
    if isinstance(table, pd.DataFrame):
        frame = table
    else:
        rows = [tuple(r) for r in table]
        width = len(rows[0]) if rows else 3
        if width not in (3, 4) or any(len(r) != width for r in rows):
            raise AgreeError("segments: give a table with columns document, start, end (and optionally id), "
                             "or rows of (document, start, end[, id])", code="segments")
        frame = pd.DataFrame(rows, columns=["document", "start", "end", "id"][:width])
    cols = {c.lower(): c for c in map(str, frame.columns)}
    need = [c for c in ("document", "start", "end") if c not in cols]
    if need:
        raise AgreeError(f"the segment table needs the columns document, start and end; missing: {', '.join(need)}",
                         hint="one row per segment: document name, start offset, end offset (end exclusive)",
                         code="segments")
    docs = frame[cols["document"]].astype(str).to_numpy()
    index = {d: i for i, d in enumerate(spans.documents)}
    unknown = sorted(set(docs) - set(index))
    if unknown:
        raise AgreeError(f"the segment table names documents that are not compared: {', '.join(unknown[:5])}",
                         hint="check the names, or whether these documents were left out", code="segments")
    try:
        start = frame[cols["start"]].to_numpy(dtype=np.int64)
        end = frame[cols["end"]].to_numpy(dtype=np.int64)
    except (TypeError, ValueError):
        raise AgreeError("the segment table's start and end must be whole numbers", code="segments") from None
    doc = np.array([index[d] for d in docs], dtype=np.int64)
    bad = np.flatnonzero((start < 0) | (end <= start) | (end > spans.lengths[doc]))
    if len(bad):
        r = int(bad[0])
        raise AgreeError(f"segment table, row {r + 2}: segment [{start[r]}, {end[r]}) lies outside document "
                         f"'{docs[r]}' (length {spans.lengths[doc[r]]}) or is empty", code="segments")
    ids = (frame[cols["id"]].astype(str).to_numpy() if "id" in cols else None)
    order = np.lexsort((start, doc))
    doc, start, end = doc[order], start[order], end[order]
    clash = np.flatnonzero((doc[1:] == doc[:-1]) & (start[1:] < end[:-1]))
    if len(clash):
        k = int(clash[0])
        raise AgreeError(f"segments [{start[k]}, {end[k]}) and [{start[k + 1]}, {end[k + 1]}) of document "
                         f"'{spans.documents[doc[k]]}' overlap; units must not overlap", code="segments")
    if ids is None:
        rank = np.arange(len(doc)) - np.searchsorted(doc, doc, side="left") + 1
        ids = np.array([f"{spans.documents[d]}:segment {k}" for d, k in zip(doc, rank)], dtype=object)
    else:
        ids = ids[order]
    return pd.DataFrame({"doc": doc, "start": start, "end": end, "id": ids, "speaker": ""})


def _view_name(kind: str, spans: SpanData, *, n_docs: int, resampled: bool, extra: str = "") -> str:
    unit = f"{spans.unit}s"
    if kind == "positions":
        name = f"positions as units ({unit})"
    elif kind == "unitizing":
        name = f"Krippendorff's alpha for unitizing ({unit}; EXPERIMENTAL)"
    elif kind == "segment":
        name = "segments as units (segments listed in a table)"
    else:
        name = f"segments as units ({kind}s{extra})"
    docs = f"{n_docs} document{'s' if n_docs != 1 else ''}"
    return f"{name}, {docs} resampled" if resampled else f"{name}, {docs}"


def segment_units(spans: SpanData, *, by: str = "paragraph", segments: Any = None,
                  min_cover: float = DEFAULT_MIN_COVER, cover: str = "either",
                  coders: Sequence[int | str] | None = None, documents: str = "all") -> CodingData:
    """View 1: segments of the text as units, each with the set of codes each coder gave it.

    Parameters
    ----------
    spans : SpanData
    by : "paragraph" (blank-line separated, `paragraphs`), "sentence" (`sentences`), "turn"
        (speaker turns, `speaker_turns`) or "segment" (the segments given in `segments`).
    segments : a table (DataFrame or rows) with columns document, start, end and optionally id, in
        the spans' units, end exclusive; segments of a document must not overlap. Needed for
        ``by="segment"``; giving it implies it.
    min_cover : the share that decides whether a coder's code applies to a segment (default 0.5).
        0 means any overlap at all.
    cover : "either" (default): the code applies when the coder's spans of that code cover at least
        `min_cover` of the segment, or when at least `min_cover` of one of those spans lies inside
        the segment; "segment": only the first condition.
    coders, documents : which coders and documents are compared (`restrict_documents`).

    Returns
    -------
    Set-valued CodingData: one unit per segment (ids such as "interview 3:para 4", the segment's
    text, columns "document", "start", "end" and, for turns, "speaker"). A coder who did not code
    the document is missing; one who coded it but marked nothing in the segment gives the empty
    set. `report.detected` names the view; `report.notes` gives the rule and the documents left out.

    Notes
    -----
    Why "either" and 0.5: a segment's share alone would not give a code to a paragraph where the
    coder highlighted only its key phrase, so a difference in highlighting style (a phrase against
    the whole paragraph) would count as a disagreement about the code; any overlap at all would give
    the code to the next segment whenever a span runs a few characters past a boundary, so boundary
    jitter would count as disagreement. "Half of the segment, or half of a span" avoids both: a
    phrase counts for the segment that holds most of it, a stray tail does not. Report the rule.
    """
    if not 0 <= min_cover <= 1:
        raise AgreeError(f"min_cover is a share between 0 and 1; got {min_cover!r}", code="min-cover")
    if cover not in ("either", "segment"):
        raise AgreeError(f"cover must be 'either' or 'segment'; got '{cover}'", code="min-cover")
    if segments is not None:
        by = "segment"
    if by not in SEGMENT_KINDS:
        raise AgreeError(f"segments by must be one of {', '.join(SEGMENT_KINDS)}; got '{by}'", code="segments")
    sp = restrict_documents(spans, coders=coders, documents=documents)
    if by == "segment":
        if segments is None:
            raise AgreeError("segments by 'segment' needs the table of segments (document, start, end)",
                             code="segments")
        seg = _segments_from_table(sp, segments)
    else:
        seg = _segments_from_text(sp, by)
    if seg.empty:
        raise AgreeError(f"no {by}s found in the compared documents", code="segments")
    off = _offsets(sp)
    doc = seg["doc"].to_numpy(np.int64)
    g_start = off[doc] + seg["start"].to_numpy(np.int64)
    g_end = off[doc] + seg["end"].to_numpy(np.int64)
    N, m, C = len(seg), sp.n_coders, len(sp.codes)
    # spans of each (coder, code) merged into disjoint intervals: the share of each segment covered
    s_start, s_end = off[sp.doc] + sp.start, off[sp.doc] + sp.end
    key = sp.coder.astype(np.int64) * C + sp.code
    mk, ms, me = _merge(key, s_start, s_end, int(off[-1]))
    covered = np.zeros((N, m * C))
    si, ii, ov = overlap_pairs(g_start, g_end, ms, me)
    np.add.at(covered, (si, mk[ii]), ov)
    share_segment = covered / (g_end - g_start)[:, None]
    applies = (covered > 0) & (share_segment >= min_cover - 1e-12)
    if cover == "either":
        si, ii, ov = overlap_pairs(g_start, g_end, s_start, s_end)
        inside = np.zeros((N, m * C))
        np.maximum.at(inside, (si, key[ii]), ov / (s_end - s_start)[ii])
        applies |= (inside > 0) & (inside >= min_cover - 1e-12)
    applies = applies.reshape(N, m, C)
    coded = sp.coded[doc]                                          # (N, m)
    codes, values = _sets_to_codes(applies, coded, sp.codes)
    texts = np.array([None if sp.texts[d] is None else sp.texts[d][s:e]
                      for d, s, e in zip(doc, seg["start"], seg["end"])], dtype=object)
    columns = {"document": np.array(sp.documents, dtype=object)[doc],
               "start": seg["start"].to_numpy(np.int64), "end": seg["end"].to_numpy(np.int64)}
    if by == "turn":
        columns["speaker"] = seg["speaker"].to_numpy(object)
    rule = (f"a code applies to a segment when the coder's spans of it cover at least {min_cover:g} of the "
            "segment" + (f", or at least {min_cover:g} of one such span lies inside it" if cover == "either" else "")
            + (" (any overlap)" if min_cover == 0 else ""))
    view = _view_name(by, sp, n_docs=sp.n_documents, resampled=False)
    notes = (f"View: {view}.", f"Rule: {rule}.", *sp.notes)
    report = ReadReport(detected=view, units_read=N, values_read=int(coded.sum()),
                        values_missing=int((~coded).sum()), notes=notes, left_out=_left_out(sp))
    return CodingData(codes=codes, values=values, unit_ids=seg["id"].to_numpy(object), coders=sp.coders,
                      categories=tuple(sp.codes), set_valued=True, text=texts, columns=columns, report=report)


def _sets_to_codes(applies: np.ndarray, coded: np.ndarray, names: Sequence[str]):
    """(N, m, C) bool code sets and (N, m) coded -> (N, m) value indices into sorted frozensets."""
    N, m, C = applies.shape
    flat = applies.reshape(N * m, C)
    if C <= 62:  # each set as one integer (bit k = code k): a 1-d unique, much faster than rows
        key = flat.astype(np.int64) @ (np.int64(1) << np.arange(C, dtype=np.int64))
        keys, inverse = np.unique(key, return_inverse=True)
        rows = ((keys[:, None] >> np.arange(C, dtype=np.int64)[None, :]) & 1).astype(bool)
    else:
        rows, inverse = np.unique(flat, axis=0, return_inverse=True)
    sets = [frozenset(names[k] for k in np.flatnonzero(r)) for r in rows]  # one per distinct set
    order = sorted(range(len(sets)), key=lambda i: value_sort_key(sets[i]))
    rank = np.empty(len(sets), dtype=np.int64)
    rank[order] = np.arange(len(sets))
    codes = rank[inverse.ravel()].reshape(N, m)
    codes = np.where(coded, codes, -1).astype(np.int32)
    return codes, tuple(sets[i] for i in order)


# =========================================================================================
# View 2: positions as units, run-length compressed
# =========================================================================================

@dataclass(frozen=True)
class Runs:
    """The compared continuum cut into runs of positions with constant presence.

    doc : (R,) document index; start, end : (R,) offsets within the document; presence : (R, m, C)
    bool, coder i marked code k on the run; coded : (R, m) bool, coder i coded the run's document.
    """

    spans: SpanData
    doc: np.ndarray
    start: np.ndarray
    end: np.ndarray
    presence: np.ndarray
    coded: np.ndarray

    @property
    def length(self) -> np.ndarray:
        return self.end - self.start

    @cached_property
    def ids(self) -> np.ndarray:
        """Unit ids "document@start-end", made once (vectorised string operations)."""
        names = np.array(self.spans.documents, dtype=str)[self.doc]
        out = np.char.add(np.char.add(names, "@"), self.start.astype(str))
        return np.char.add(np.char.add(out, "-"), self.end.astype(str)).astype(object)


def position_runs(spans: SpanData) -> Runs:
    """Cut every document at every span boundary: within a run, no coder's marking of any code
    changes. Vectorised over spans; the number of runs is at most 2 x spans + documents."""
    off = _offsets(spans)
    g_start, g_end = off[spans.doc] + spans.start, off[spans.doc] + spans.end
    bounds = np.unique(np.concatenate([off, g_start, g_end]))
    r_start, r_end = bounds[:-1], bounds[1:]
    doc = np.searchsorted(off, r_start, side="right") - 1
    R, m, C = len(r_start), spans.n_coders, len(spans.codes)
    key = spans.coder.astype(np.int64) * C + spans.code
    mk, ms, me = _merge(key, g_start, g_end, int(off[-1]))
    lo = np.searchsorted(r_start, ms)
    hi = np.searchsorted(r_start, me)
    diff = np.zeros((R + 1, m * C), dtype=np.int32)
    np.add.at(diff, (lo, mk), 1)
    np.add.at(diff, (hi, mk), -1)
    presence = (np.cumsum(diff[:-1], axis=0) > 0).reshape(R, m, C)
    return Runs(spans=spans, doc=doc, start=r_start - off[doc], end=r_end - off[doc], presence=presence,
                coded=spans.coded[doc])


def position_units(spans: SpanData, *, code: str | None = None, coders: Sequence[int | str] | None = None,
                   documents: str = "all", runs: Runs | None = None) -> CodingData:
    """View 2 as CodingData: every position of the compared documents is a unit, stored as runs
    of identical positions with `weights` = run length and the document as the "document" column.

    With `code`, the values are 0 (not marked) / 1 (marked) for that code; without, each coder's
    value is the set of codes marking the position (set-valued). A coder who did not code the
    document is missing there; 0 (or the empty set) is never missing. Unit ids are
    "document@start-end". Score it with ``cluster="document"`` (positions are not independent).
    """
    if runs is None:
        runs = position_runs(restrict_documents(spans, coders=coders, documents=documents))
    sp = runs.spans
    if code is not None:
        if code not in sp.codes:
            raise AgreeError(f"'{code}' is not a code of these spans (codes: {', '.join(sp.codes[:8])})",
                             code="unknown-code")
        k = sp.codes.index(code)
        codes = np.where(runs.coded, runs.presence[:, :, k].astype(np.int32), -1)
        values: tuple = (0, 1)
        set_valued = False
        cats: tuple = (0, 1)
    else:
        codes, values = _sets_to_codes(runs.presence, runs.coded, sp.codes)
        set_valued, cats = True, tuple(sp.codes)
    view = _view_name("positions", sp, n_docs=sp.n_documents, resampled=False)
    what = f"code '{code}' marked (1) or not (0)" if code is not None else "the set of codes marking each position"
    total = int(runs.length.sum())
    report = ReadReport(detected=view, units_read=total, values_read=int(runs.length @ runs.coded.sum(axis=1)),
                        values_missing=int(runs.length @ (~runs.coded).sum(axis=1)),
                        notes=(f"View: {view}; values: {what}; {len(runs.doc):,} runs of identical positions "
                               f"stand for {total:,} positions.", POSITION_CAUTION, *sp.notes),
                        left_out=_left_out(sp))
    return CodingData(codes=codes, values=values, unit_ids=runs.ids, coders=sp.coders, categories=cats,
                      set_valued=set_valued, columns={"document": np.array(sp.documents, dtype=object)[runs.doc]},
                      report=report, weights=runs.length, level="nominal")


def positional_specific_agreement(spans: SpanData | Runs, *, coders: Sequence[int | str] | None = None,
                                  documents: str = "all") -> pd.DataFrame:
    """Positional specific agreement (Dice): for each code and pair of coders,
    2 |A ∩ B| / (|A| + |B|), A and B the positions each coder marked with the code in the
    documents both coded. Descriptive, not chance-corrected (METHODS 9.1, step 5).

    Columns: code, coder_a, coder_b, positions_a, positions_b, positions_both, dice (NaN when
    neither marked the code)."""
    runs = spans if isinstance(spans, Runs) else position_runs(
        restrict_documents(spans, coders=coders, documents=documents))
    sp = runs.spans
    w = runs.length.astype(float)
    rows = []
    for a in range(sp.n_coders):
        for b in range(a + 1, sp.n_coders):
            both = runs.coded[:, a] & runs.coded[:, b]
            wa = w * both
            xa, xb = runs.presence[:, a, :], runs.presence[:, b, :]
            na, nb, nab = wa @ xa, wa @ xb, wa @ (xa & xb)
            for k, name in enumerate(sp.codes):
                denom = na[k] + nb[k]
                rows.append({"code": name, "coder_a": sp.coders[a], "coder_b": sp.coders[b],
                             "positions_a": int(na[k]), "positions_b": int(nb[k]), "positions_both": int(nab[k]),
                             "dice": 2 * nab[k] / denom if denom > 0 else float("nan")})
    return pd.DataFrame(rows, columns=["code", "coder_a", "coder_b", "positions_a", "positions_b",
                                       "positions_both", "dice"])


def span_matching(spans: SpanData, *, min_jaccard: float = MATCH_JACCARD,
                  coders: Sequence[int | str] | None = None, documents: str = "all") -> pd.DataFrame:
    """Span matching: a span is *found* by another coder when a span of the same code by that coder,
    in the same document, overlaps it with Jaccard |a ∩ b| / |a ∪ b| >= `min_jaccard` (0.5).

    For each code and pair of coders (a, b), with a as the reference: recall = share of a's spans
    found by b, precision = share of b's spans found by a, F1 = 2PR / (P + R) (METHODS 9.1, step 5).
    Only documents both coders coded count. Several spans can match the same span (found is not a
    one-to-one matching). Descriptive, not chance-corrected; it shows the short spans that
    positional measures weigh lightly.

    Columns: code, coder_a, coder_b, spans_a, spans_b, found_a (a's spans b found), found_b, recall,
    precision, f1 (NaN where undefined).
    """
    _check_jaccard(min_jaccard)
    return _span_matching(restrict_documents(spans, coders=coders, documents=documents), min_jaccard)


def _span_matching(sp: SpanData, min_jaccard: float) -> pd.DataFrame:
    off = _offsets(sp)
    C = len(sp.codes)
    g_start = off[sp.doc] + sp.start
    g_end = off[sp.doc] + sp.end
    rows = []
    for a in range(sp.n_coders):
        for b in range(a + 1, sp.n_coders):
            both = sp.coded[:, a] & sp.coded[:, b]
            ia = np.flatnonzero((sp.coder == a) & both[sp.doc])
            ib = np.flatnonzero((sp.coder == b) & both[sp.doc])
            found_a = _found(sp.code[ia], g_start[ia], g_end[ia], sp.code[ib], g_start[ib], g_end[ib],
                             min_jaccard, int(off[-1]))
            found_b = _found(sp.code[ib], g_start[ib], g_end[ib], sp.code[ia], g_start[ia], g_end[ia],
                             min_jaccard, int(off[-1]))
            n_a = np.bincount(sp.code[ia], minlength=C)
            n_b = np.bincount(sp.code[ib], minlength=C)
            f_a = np.bincount(sp.code[ia], weights=found_a, minlength=C)
            f_b = np.bincount(sp.code[ib], weights=found_b, minlength=C)
            for k, name in enumerate(sp.codes):
                recall = f_a[k] / n_a[k] if n_a[k] else float("nan")
                precision = f_b[k] / n_b[k] if n_b[k] else float("nan")
                f1 = (2 * precision * recall / (precision + recall)
                      if np.isfinite(recall) and np.isfinite(precision) and precision + recall > 0 else
                      (0.0 if np.isfinite(recall) and np.isfinite(precision) else float("nan")))
                rows.append({"code": name, "coder_a": sp.coders[a], "coder_b": sp.coders[b],
                             "spans_a": int(n_a[k]), "spans_b": int(n_b[k]), "found_a": int(f_a[k]),
                             "found_b": int(f_b[k]), "recall": recall, "precision": precision, "f1": f1})
    return pd.DataFrame(rows, columns=["code", "coder_a", "coder_b", "spans_a", "spans_b", "found_a", "found_b",
                                       "recall", "precision", "f1"])


def _check_jaccard(min_jaccard: float) -> None:
    if not 0 < min_jaccard <= 1:
        raise AgreeError(f"min_jaccard must be above 0 and at most 1; got {min_jaccard!r}", code="jaccard")


def _found(code_a, start_a, end_a, code_b, start_b, end_b, threshold: float, total: int) -> np.ndarray:
    """For each span a, whether some span b of the same code has Jaccard >= threshold with it.

    Jaccard >= t > 0 needs |b| <= |a| / t and an overlap, so b starts in (a.start - |a| / t, a.end):
    a contiguous range once b is sorted by (code, start)."""
    found = np.zeros(len(code_a), dtype=bool)
    if len(code_a) == 0 or len(code_b) == 0:
        return found
    span = np.int64(total + 1)
    kb = code_b.astype(np.int64) * span + start_b
    order = np.argsort(kb, kind="stable")
    kb, eb, sb = kb[order], end_b[order], start_b[order]
    base = code_a.astype(np.int64) * span
    la = end_a - start_a
    reach = np.ceil(la / threshold).astype(np.int64)
    lo = np.searchsorted(kb, base + np.maximum(start_a - reach, 0), side="left")
    hi = np.searchsorted(kb, base + end_a, side="left")
    ia, ib = expand_ranges(lo, hi)
    inter = np.minimum(end_a[ia], eb[ib]) - np.maximum(start_a[ia], sb[ib])
    union = np.maximum(end_a[ia], eb[ib]) - np.minimum(start_a[ia], sb[ib])
    ok = (inter > 0) & (inter >= threshold * union - 1e-9)
    found[ia[ok]] = True
    return found


# =========================================================================================
# Results
# =========================================================================================

@dataclass(frozen=True)
class PassageAgreement:
    """Agreement on coded passages through one view.

    view : the view, named for people, e.g. "positions as units (characters), 4 documents resampled".
    kind : "positions", "segments" or "unitizing".
    overall : all codes together: set-valued Krippendorff's alpha (positions, segments) or the summed
        unitizing alpha (None if not computed).
    per_code : {code: {coefficient name: AgreementResult}}.
    specific : positional specific agreement (Dice) per code and coder pair (positions view).
    matching : span matching per code and coder pair (positions view).
    documents : the documents compared; left_out : notes naming the documents left out and why.
    notes : cautions and the choices made (view, rule, resampling).
    data : the set-valued CodingData the overall alpha was computed on.
    """

    view: str
    kind: str
    overall: AgreementResult | None
    per_code: Mapping[str, Mapping[str, AgreementResult]]
    specific: pd.DataFrame | None = None
    matching: pd.DataFrame | None = None
    documents: tuple[str, ...] = ()
    left_out: tuple[str, ...] = ()
    units: str = ""
    notes: tuple[Note, ...] = ()
    data: CodingData | None = field(default=None, repr=False)

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        return notebook_text("PassageAgreement", self.view,
                             self.to_frame(), notes=[n.message for n in self.notes],
                             columns=["code", "coefficient", "estimate", "ci_low", "ci_high", "n_units"])

    def to_frame(self) -> pd.DataFrame:
        """One row per code and coefficient (the overall set-valued alpha first), with the view."""
        rows = []
        items = ([("(all codes)", {self.overall.name: self.overall})] if self.overall is not None else [])
        for code, results in [*items, *self.per_code.items()]:
            for name, r in results.items():
                rows.append({"view": self.view, "code": code, "coefficient": display_name(name),
                             "estimate": r.estimate, "se": r.se, "ci_low": r.ci_low, "ci_high": r.ci_high,
                             "ci_method": r.ci_method, "n_units": r.n_units})
        return pd.DataFrame(rows, columns=["view", "code", "coefficient", "estimate", "se", "ci_low", "ci_high",
                                           "ci_method", "n_units"])

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "view": self.view, "kind": self.kind, "units": self.units,
            "documents": list(self.documents), "left_out": list(self.left_out),
            "overall": None if self.overall is None else self.overall.to_dict(),
            "per_code": {c: {k: r.to_dict() for k, r in v.items()} for c, v in self.per_code.items()},
            "specific_agreement": None if self.specific is None else self.specific.to_dict("records"),
            "span_matching": None if self.matching is None else self.matching.to_dict("records"),
            "notes": [n.to_dict() for n in self.notes],
        })


def _view_note(view: str) -> Note:
    return Note("view", f"View: {view}.")


def _with_view(r: AgreementResult, view: str, extra: Sequence[Note] = ()) -> AgreementResult:
    return replace(r, details={**r.details, "view": view}, warnings=(_view_note(view), *extra, *r.warnings))


def _no_independent_se(r: AgreementResult) -> AgreementResult:
    """Drop what assumes independent positions: analytic SEs, z and p-values, normal intervals."""
    details = {k: v for k, v in r.details.items() if k not in ("se_independent_units", "se0", "z_method")}
    boot = r.bootstrap is not None
    return replace(r, se=r.se if boot else None, se_method=r.se_method if boot else None,
                   ci_low=r.ci_low if boot else None, ci_high=r.ci_high if boot else None,
                   lower_bound=r.lower_bound if boot else None, ci_method=r.ci_method if boot else None,
                   p_value_min=r.p_value_min if boot else None, z=None, p_value=None, p_value_one_sided=None,
                   details=details)


def _options(kw: Mapping[str, Any]) -> dict[str, Any]:
    return {k: kw[k] for k in ("confidence_level", "n_resamples", "ci_method", "seed", "minimum")}


def _kappa(d: CodingData):
    return coef.cohen_kappa if d.n_coders == 2 else coef.fleiss_kappa


def position_agreement(spans: SpanData, *, coders: Sequence[int | str] | None = None, documents: str = "all",
                       distance: str = "masi", min_jaccard: float = MATCH_JACCARD, confidence_level: float = DEFAULT_CONFIDENCE,
                       n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                       minimum: float | None = None) -> PassageAgreement:
    """View 2 (the default view): agreement with every position (character or token) as a unit.

    Per code: Krippendorff's alpha (binary, nominal) and kappa (Cohen's for two coders, Fleiss' for
    more) over positions, 0 meaning "not marked". All codes together: set-valued alpha (MASI or
    Jaccard distance) on the set of codes marking each position. Descriptive: positional specific
    agreement (Dice) and span matching per code and coder pair. Intervals come from a cluster
    bootstrap over documents (every coefficient from the same document resamples: same seed, same
    number of documents); standard errors, z and p-values that assume independent positions are not
    shown (METHODS 9.1 caveats).

    Returns
    -------
    PassageAgreement (kind "positions"): `view` reads e.g. "positions as units (characters),
    4 documents resampled"; every AgreementResult carries a "view" note and details["view"].
    """
    _check_jaccard(min_jaccard)
    sp = restrict_documents(spans, coders=coders, documents=documents)
    runs = position_runs(sp)
    resampled = bool(n_resamples)
    view = _view_name("positions", sp, n_docs=sp.n_documents, resampled=resampled)
    opts = dict(_options(locals()), cluster="document")
    if seed is None and n_resamples:
        opts["seed"] = draw_seed()
    caution = Note("positions-not-independent", POSITION_CAUTION)
    notes = [_view_note(view), caution, *(Note("documents", n) for n in sp.notes)]
    per_code: dict[str, dict[str, AgreementResult]] = {}
    for code in sp.codes:  # a loop over codes
        d = position_units(sp, code=code, runs=runs)
        results = {}
        for name, fn in (("krippendorff_alpha", coef.krippendorff_alpha), (None, _kappa(d))):
            r = fn(d, **opts)
            results[name or r.name] = _with_view(_no_independent_se(r), view, (caution,))
        per_code[code] = results
    data = position_units(sp, runs=runs)
    overall = coef.krippendorff_alpha(data, distance=distance, **opts)
    overall = _with_view(_no_independent_se(overall), view, (caution,))
    units = f"{int(runs.length.sum()):,} positions ({sp.unit}s) in {sp.n_documents} documents"
    return PassageAgreement(view=view, kind="positions", overall=overall, per_code=per_code,
                            specific=positional_specific_agreement(runs),
                            matching=_span_matching(sp, min_jaccard),
                            documents=sp.documents, left_out=_left_out(sp), units=units, notes=tuple(notes),
                            data=data)


def segment_agreement(spans: SpanData, *, by: str = "paragraph", segments: Any = None,
                      min_cover: float = DEFAULT_MIN_COVER, cover: str = "either",
                      coders: Sequence[int | str] | None = None, documents: str = "all", distance: str = "masi",
                      resample: str = "documents", confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES,
                      ci_method: str = DEFAULT_CI_METHOD, seed: Any = None, minimum: float | None = None) -> PassageAgreement:
    """View 1: agreement with segments of the text as units (`segment_units`).

    All codes together: set-valued Krippendorff's alpha (MASI or Jaccard). Per code: alpha and kappa
    (Cohen's for two coders, Fleiss' for more) on whether each coder's set holds the code. Segments of
    one document are related, so by default intervals resample whole documents (``resample="documents"``);
    ``resample="units"`` resamples segments as independent units.
    """
    if resample not in ("documents", "units"):
        raise AgreeError(f"resample must be 'documents' or 'units'; got '{resample}'", code="resample")
    d = segment_units(spans, by=by, segments=segments, min_cover=min_cover, cover=cover, coders=coders,
                      documents=documents)
    n_docs = len(np.unique(d.columns["document"].astype(str)))
    view = _view_name(by if segments is None else "segment", spans, n_docs=n_docs,
                      resampled=bool(n_resamples) and resample == "documents")
    if resample == "units" and n_resamples:
        view += ", segments resampled"
    opts = dict(_options(locals()), cluster="document" if resample == "documents" else None)
    if seed is None and n_resamples:
        opts["seed"] = draw_seed()
    overall = _with_view(coef.krippendorff_alpha(d, distance=distance, **opts), view)
    per_code: dict[str, dict[str, AgreementResult]] = {}
    for code in d.categories:  # a loop over codes
        p = d.presence(code)
        results = {}
        for name, fn in (("krippendorff_alpha", coef.krippendorff_alpha), (None, _kappa(p))):
            try:
                r = fn(p, **opts)
            except AgreeError as exc:
                if exc.code in {"q", "rotating"}:
                    continue
                raise
            results[name or r.name] = _with_view(r, view)
        per_code[str(code)] = results
    notes = [_view_note(view), *(Note("rule" if n.startswith("Rule") else "documents", n)
                                 for n in d.report.notes if not n.startswith("View"))]
    docs = tuple(dict.fromkeys(d.columns["document"].astype(str).tolist()))
    return PassageAgreement(view=view, kind="segments", overall=overall, per_code=per_code, documents=docs,
                            left_out=d.report.left_out, units=f"{d.n_units:,} {by}s in {n_docs} documents",
                            notes=tuple(notes), data=d)


def unitizing_agreement(spans: SpanData, *, coders: Sequence[int | str] | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                        n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                        minimum: float | None = None) -> PassageAgreement:
    """View 3: Krippendorff's alpha for unitizing, per code and all codes together -- EXPERIMENTAL
    (`agree.stats.unitizing`: partly from memory, not checked against a published worked example).
    Only documents every compared coder coded are used (the coefficient needs one shared continuum);
    intervals resample whole documents. Prefer `position_agreement` (the default view) for reporting.
    """
    sp = restrict_documents(spans, coders=coders, documents="all")
    results = unitizing_alpha(sp, confidence_level=confidence_level, n_resamples=n_resamples, ci_method=ci_method,
                              seed=seed, minimum=minimum)
    view = _view_name("unitizing", sp, n_docs=sp.n_documents, resampled=bool(n_resamples))
    overall = results.pop("(all codes)", None)
    if overall is None and len(results) == 1:
        overall = next(iter(results.values()))
    per_code = {code: {r.name: _with_view(r, view)} for code, r in results.items()}
    notes = [_view_note(view), EXPERIMENTAL, *(Note("documents", n) for n in sp.notes)]
    return PassageAgreement(view=view, kind="unitizing", overall=None if overall is None else _with_view(overall, view),
                            per_code=per_code, documents=sp.documents, left_out=_left_out(sp),
                            units=f"{int(sp.lengths.sum()):,} {sp.unit}s in {sp.n_documents} documents",
                            notes=tuple(notes))


# =========================================================================================
# Reconciliation on spans (library side; the review workbook and the CLI use these tables)
# =========================================================================================

PASSAGE_MARK = ("\u27e6", "\u27e7")  # ⟦code⟧ ... ⟦/code⟧ around a coder's span in the marked text


def _marked(text: str, begin: int, stop: int, marks: Sequence[tuple[int, int, str]]) -> str:
    """text[begin:stop] with each (start, end, label) wrapped as ⟦label⟧...⟦/label⟧ (marks may nest or cross)."""
    events = []
    for s, e, label in marks:  # a loop over one coder's few spans in one passage
        s, e = max(s, begin), min(e, stop)
        if e > s:
            events.append((s, 1, f"{PASSAGE_MARK[0]}{label}{PASSAGE_MARK[1]}"))
            events.append((e, 0, f"{PASSAGE_MARK[0]}/{label}{PASSAGE_MARK[1]}"))
    events.sort(key=lambda x: (x[0], x[1]))
    out, at = [], begin
    for pos, _, piece in events:
        out.append(text[at:pos])
        out.append(piece)
        at = pos
    out.append(text[at:stop])
    return "".join(out)


def disputed_passages(spans: SpanData, *, by: str = "paragraph", segments: Any = None,
                      min_cover: float = DEFAULT_MIN_COVER, cover: str = "either", context: int = 80,
                      include_agreed: bool = False, coders: Sequence[int | str] | None = None,
                      documents: str = "all") -> pd.DataFrame:
    """The passages the coders disagree on, as a table a review workbook can show.

    Passages are the segments of view 1 (`segment_units`: paragraphs, sentences, turns or listed
    segments, with the same cover rule); a passage is disputed when the coders' sets of codes
    differ (coders who did not code the document are not counted).

    Columns: passage (unit id), document, start, end, text (the passage with up to `context`
    characters before and after, the passage itself between "»" and "«"), then per coder
    "codes: <coder>" (the codes, "; "-joined, "(none)" for none, "" where not coded) and
    "marked: <coder>" (the same text with that coder's spans marked ⟦code⟧...⟦/code⟧), and
    "codes involved" (codes some but not all of the coders gave). One row per passage, in
    document order; with `include_agreed`, agreed passages too (column "status").
    """
    d = segment_units(spans, by=by, segments=segments, min_cover=min_cover, cover=cover, coders=coders,
                      documents=documents)
    sp = restrict_documents(spans, coders=coders, documents=documents)
    lab = d.labels()
    observed = d.codes >= 0
    first = np.where(observed.any(axis=1), d.codes.max(axis=1), -1)
    same = np.all((d.codes == first[:, None]) | ~observed, axis=1)
    disputed = ~same & (observed.sum(axis=1) >= 2)
    keep = np.flatnonzero(disputed | include_agreed)
    doc_index = {name: i for i, name in enumerate(sp.documents)}
    rows = []
    for u in keep:  # a loop over the passages shown to people (a review list)
        doc = doc_index[d.columns["document"][u]]
        text = sp.texts[doc] or ""
        s, e = int(d.columns["start"][u]), int(d.columns["end"][u])
        lo, hi = max(0, s - context), min(len(text), e + context)
        row = {"passage": d.unit_ids[u], "document": sp.documents[doc], "start": s, "end": e,
               "text": text[lo:s] + "»" + text[s:e] + "«" + text[e:hi]}
        if include_agreed:
            row["status"] = "disputed" if disputed[u] else "agreed"
        sets = []
        for i, coder in enumerate(sp.coders):  # a loop over coders
            value = lab.iloc[u, i]
            row[f"codes: {coder}"] = "" if value is None else ("; ".join(sorted(value)) or "(none)")
            on = np.flatnonzero((sp.doc == doc) & (sp.coder == i) & (sp.start < hi) & (sp.end > lo))
            row[f"marked: {coder}"] = _marked(text, lo, hi, [(int(sp.start[k]), int(sp.end[k]), sp.codes[sp.code[k]])
                                                             for k in on])
            if value is not None:
                sets.append(value)
        union = frozenset().union(*sets) if sets else frozenset()
        common = frozenset.intersection(*sets) if sets else frozenset()
        row["codes involved"] = "; ".join(sorted(union - common))
        rows.append(row)
    columns = ["passage", "document", "start", "end", "text"] + (["status"] if include_agreed else [])
    columns += [f"{kind}: {c}" for c in sp.coders for kind in ("codes", "marked")] + ["codes involved"]
    return pd.DataFrame(rows, columns=columns)


def consensus_spans(units: CodingData, decisions: Mapping[str, Any] | pd.DataFrame, *,
                    coder: str = "consensus", allow_undecided: bool = False) -> pd.DataFrame:
    """Consensus spans from decisions on passages: per passage, the chosen codes become spans over
    the passage.

    Parameters
    ----------
    units : the view-1 CodingData the passages came from (`segment_units`), with its "document",
        "start" and "end" columns.
    decisions : {passage id: codes} (a set, list, or text "a; b"; empty or "(none)" for no code),
        or a table with columns "passage" and "decision". Passages the coders agreed on keep their
        agreed codes without a decision.
    coder : the name of the consensus coder in the output.
    allow_undecided : leave disputed passages without a decision out (listed in the "source"
        column as nothing) instead of refusing.

    Returns
    -------
    DataFrame with columns document, coder, code, start, end, passage, source ("agreed" or
    "decided"), one row per passage and code, in document order: the table a span writer turns
    into a span table or an added user of an exchange-format project.
    """
    if not units.set_valued or not {"document", "start", "end"} <= set(units.columns):
        raise AgreeError("consensus spans need the passages of segments as units (segment_units)",
                         code="consensus")
    if isinstance(decisions, pd.DataFrame):
        cols = {c.lower(): c for c in map(str, decisions.columns)}
        if "passage" not in cols or "decision" not in cols:
            raise AgreeError("the decision table needs the columns passage and decision", code="consensus")
        decisions = dict(zip(decisions[cols["passage"]].astype(str), decisions[cols["decision"]]))
    ids = [str(u) for u in units.unit_ids]
    unknown = sorted(set(map(str, decisions)) - set(ids))
    if unknown:
        raise AgreeError(f"decisions for unknown passages: {', '.join(unknown[:5])}", code="consensus")
    known = set(units.categories)

    def parse(value: Any, passage: str) -> frozenset:
        if value is None or (isinstance(value, float) and np.isnan(value)):
            items: list = []
        elif isinstance(value, str):
            items = [] if value.strip() in ("", "(none)") else [x.strip() for x in value.split(";") if x.strip()]
        else:
            items = list(value)
        bad = [x for x in items if x not in known]
        if bad:
            raise AgreeError(f"passage '{passage}': unknown code(s) {', '.join(map(str, bad))}",
                             hint=f"codes: {', '.join(map(str, units.categories[:10]))}", code="unknown-code")
        return frozenset(items)

    rows, undecided = [], []
    observed = units.codes >= 0
    for u, passage in enumerate(ids):  # a loop over passages, to turn decisions into spans
        given = {units.values[c] for c in units.codes[u][observed[u]]}
        if passage in decisions:
            chosen, source = parse(decisions[passage], passage), "decided"
        elif len(given) == 1 and observed[u].sum() >= 2:
            chosen, source = next(iter(given)), "agreed"
        else:
            undecided.append(passage)
            continue
        for code in sorted(chosen, key=str):
            rows.append({"document": units.columns["document"][u], "coder": coder, "code": code,
                         "start": int(units.columns["start"][u]), "end": int(units.columns["end"][u]),
                         "passage": passage, "source": source})
    position = {p: u for u, p in enumerate(ids)}
    disputed_left = [p for p in undecided if observed[position[p]].sum() >= 2]
    if disputed_left and not allow_undecided:
        raise AgreeError(f"{len(disputed_left)} disputed passages have no decision: "
                         f"{', '.join(disputed_left[:5])}{' ...' if len(disputed_left) > 5 else ''}",
                         hint="decide them, or pass allow_undecided=True to leave them out", code="unresolved")
    return pd.DataFrame(rows, columns=["document", "coder", "code", "start", "end", "passage", "source"])
