"""Krippendorff's alpha for unitizing (uα) -- EXPERIMENTAL.

What this implements: the single-value uα of Krippendorff (1995; Content Analysis 2004, ch. 12),
applied to each code separately (code k's spans are the units, everything else is gap), and the
sum over codes of its observed and expected disagreement (the 2004 form sums over values).
Status, stated in every result (Note "experimental", "EXPERIMENTAL" in the name): **not checked
against a published worked example**. METHODS 9.2 lists what is known; in detail:

- Sections [M, fairly confident]: each coder's continuum of length L is cut into units (their
  spans of the code; spans of one coder that overlap are merged, spans that only touch stay two
  units) and gaps (maximal stretches with no unit). Documents are stretches of one continuum: a
  gap never runs across a document boundary, and L is the total length.
- Difference between section g of coder i and h of coder j != i [M, fairly confident; METHODS 9.2]:
  (b_g - b_h)² + (e_g - e_h)² for overlapping units; l_g² for a unit inside a gap of the other
  coder (and l_h² the other way round); 0 otherwise.
- D_o = Σ_{i≠j} Σ_g Σ_h δ²(g, h) / (m (m - 1) L) [D, reconstructed]: the normaliser is the one
  under which uα equals ordinary binary nominal α over positions when every unit is one position
  long (the identity tested against the `krippendorff` package).
- D_e [M, from memory; METHODS 9.2 says it is not reliably recalled]:
      D_e = 2 Σ_i Σ_g w_ig [ (N - 1)/3 (2 l³ - 3 l² + l) + l² Σ_j Σ_h (1 - w_jh)(l_jh - l + 1)[l_jh >= l] ]
            / ( m L (m L - 1) - Σ_i Σ_g w_ig l_ig (l_ig - 1) )
  with w = 1 for units, 0 for gaps, l = l_ig, N the number of units of all coders, and j running
  over all coders (coder i included). The second term (every placement of a unit inside every gap
  long enough to hold it) and the normaliser reproduce nominal α's expected disagreement in the
  one-position limit [D, tested]; the first term (units against units, which vanishes in that
  limit) is recalled, not derived, and is untested.
- Not implemented: the revised family of Krippendorff, Mathet, Bouvry & Widlöcher (2016) and the
  4th edition (|uα, uα with a metric on values, cuα, (k)uα), whose definitions are not recalled
  reliably; the pairing of several values within one coder's sectioning (our codes may overlap).

Intervals: a cluster bootstrap over documents (every sum above is a sum over documents, or, for
the gap term, a sum over pairs of documents, so a replicate is exact for the resampled
documents), percentile or BCa with the leave-one-document-out jackknife.

References
----------
Krippendorff, K. (1995). On the reliability of unitizing continuous data. Sociological
    Methodology, 25, 47-76.
Krippendorff, K. (2004). Content Analysis: An Introduction to Its Methodology (2nd ed.), ch. 12.
Krippendorff, K., Mathet, Y., Bouvry, S., & Widlöcher, A. (2016). On the reliability of
    unitizing textual continua: Further developments. Quality & Quantity, 50, 2347-2364.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_RESAMPLES
from agree.core.model import AgreeError
from agree.core.registry import references_for
from agree.core.results import AgreementResult, BootstrapInfo, Note
from agree.core.seeds import draw_seed, make_rng
from agree.core.spans import SpanData
from agree.stats.intervals import overlap_pairs
from agree.stats.resampling import bootstrap_interval, check_settings

NAME = "unitizing_alpha_experimental"
METHOD = "Krippendorff's alpha for unitizing, 1995/2004 form (EXPERIMENTAL: not checked against a published example)"
EXPERIMENTAL = Note("experimental", "EXPERIMENTAL: Krippendorff's alpha for unitizing is reconstructed partly from "
                    "memory (the expected disagreement's unit-against-unit term) and has not been checked against a "
                    "published worked example; report the positions view (positions as units) as the main figure.")


@dataclass(frozen=True)
class _Sums:
    """Per-document sums for one code (see the module notes): O observed δ² over ordered coder
    pairs, L length, N units, F Σ (2l³ - 3l² + l)/3, Q Σ l(l - 1); T (D, D) the gap term."""

    O: np.ndarray
    L: np.ndarray
    N: np.ndarray
    F: np.ndarray
    Q: np.ndarray
    T: np.ndarray


def _units(doc, coder, start, end, n_docs: int, m: int):
    """One coder's units per document: overlapping spans merged, touching spans kept apart.
    Returns (doc, coder, start, end) sorted by (coder, doc, start)."""
    order = np.lexsort((start, doc, coder))
    doc, coder, start, end = doc[order], coder[order], start[order], end[order]
    if len(doc) == 0:
        return doc, coder, start, end
    group = coder.astype(np.int64) * n_docs + doc
    big = np.int64(end.max() + 1)
    s = group * big + start
    e = group * big + end
    reach = np.maximum.accumulate(e)
    new = np.ones(len(s), dtype=bool)
    new[1:] = s[1:] >= reach[:-1]          # strictly overlapping spans merge; touching ones do not
    label = np.cumsum(new) - 1
    me = np.zeros(int(label[-1]) + 1, dtype=np.int64)
    np.maximum.at(me, label, e)
    ms = s[new]
    g = ms // big
    return (g % n_docs).astype(np.int64), (g // n_docs).astype(np.int64), ms - g * big, me - g * big


def _gaps(u_doc, u_coder, u_start, u_end, lengths: np.ndarray, m: int):
    """The gaps of every coder in every document: (doc, length) of the maximal stretches without a unit."""
    D = len(lengths)
    docs_all = np.repeat(np.arange(D), m)
    coders_all = np.tile(np.arange(m), D)
    # boundaries per (coder, doc): document start, unit starts/ends, document end
    key_u = u_coder * D + u_doc
    key_all = coders_all * D + docs_all
    starts = np.concatenate([np.zeros(D * m, np.int64), u_end])                  # a gap may start here
    ends = np.concatenate([u_start, lengths[docs_all]])                           # ... and end at the next one
    kstart = np.concatenate([key_all, key_u])
    kend = np.concatenate([key_u, key_all])
    o1 = np.lexsort((starts, kstart))
    o2 = np.lexsort((ends, kend))
    glen = ends[o2] - starts[o1]
    gdoc = (kstart[o1] % D).astype(np.int64)
    keep = glen > 0
    return gdoc[keep], glen[keep]


def _code_sums(doc, coder, start, end, lengths: np.ndarray, m: int) -> _Sums:
    D = len(lengths)
    ud, uc, us, ue = _units(np.asarray(doc, np.int64), np.asarray(coder, np.int64), np.asarray(start, np.int64),
                            np.asarray(end, np.int64), D, m)
    ul = ue - us
    O = np.zeros(D)
    for i in range(m):          # loops over coders, not units
        for j in range(m):
            if i == j:
                continue
            a = uc == i
            b = np.flatnonzero(uc == j)
            span = np.int64(lengths.max() + 1)
            ga_s, ga_e = ud[a] * span + us[a], ud[a] * span + ue[a]
            gb_s, gb_e = ud[b] * span + us[b], ud[b] * span + ue[b]
            ib, ia, _ = overlap_pairs(gb_s, gb_e, ga_s, ga_e)
            # units of i and j that overlap: (b_g - b_h)² + (e_g - e_h)², once for the ordered pair (i, j)
            d2 = (ga_s[ia] - gb_s[ib]) ** 2 + (ga_e[ia] - gb_e[ib]) ** 2
            O += np.bincount(ud[a][ia], weights=d2.astype(float), minlength=D)
            # a unit of i overlapping no unit of j lies inside a gap of j: its l² counts for (i, j) as
            # "unit inside a gap" and for (j, i) as "gap containing a unit", hence 2 l²
            lone = np.bincount(ia, minlength=len(ga_s)) == 0
            O += 2 * np.bincount(ud[a][lone], weights=(ul[a][lone] ** 2).astype(float), minlength=D)
    gd, gl = _gaps(ud, uc, us, ue, lengths, m)
    T = np.zeros((D, D))
    for d in range(D):          # a loop over documents: the gaps of document d against every unit
        g = np.sort(gl[gd == d]).astype(float)
        if len(g) == 0 or len(ul) == 0:
            continue
        suffix = np.concatenate([np.cumsum(g[::-1])[::-1], [0.0]])
        k = np.searchsorted(g, ul, side="left")
        cnt = len(g) - k
        placements = suffix[k] - (ul - 1) * cnt
        T[:, d] = np.bincount(ud, weights=(ul.astype(float) ** 2) * placements, minlength=D)
    F = np.bincount(ud, weights=(2.0 * ul ** 3 - 3.0 * ul ** 2 + ul) / 3.0, minlength=D)
    Q = np.bincount(ud, weights=(ul * (ul - 1)).astype(float), minlength=D)
    N = np.bincount(ud, minlength=D).astype(float)
    return _Sums(O=O, L=lengths.astype(float), N=N, F=F, Q=Q, T=T)


def _alpha(sums: Sequence[_Sums], c: np.ndarray, m: int) -> np.ndarray:
    """uα for document multiplicities c (B, D), pooling the given codes (one code: its uα)."""
    L = c @ sums[0].L
    num_o = sum(c @ s.O for s in sums)
    num_e = sum((c @ s.N - 1.0) * (c @ s.F) + np.einsum("bd,de,be->b", c, s.T, c) for s in sums)
    Q = sum(c @ s.Q for s in sums)
    with np.errstate(divide="ignore", invalid="ignore"):
        d_o = num_o / (m * (m - 1) * L)
        d_e = 2.0 * num_e / (m * L * (m * L - 1.0) - Q)
        out = 1.0 - d_o / d_e
    return np.where((d_e > 0) & np.isfinite(d_e) & (L > 0), out, np.nan)


def u_alpha(units: Sequence[Sequence[tuple[int, int]]], *, continuum: tuple[int, int]) -> float:
    """uα (EXPERIMENTAL) for one code on one continuum [begin, end): `units[i]` lists coder i's
    units as (start, end) pairs, end exclusive, in the same coordinates as the continuum."""
    begin, stop = int(continuum[0]), int(continuum[1])
    if stop <= begin:
        raise AgreeError("the continuum must have a positive length", code="continuum")
    m = len(units)
    if m < 2:
        raise AgreeError(f"agreement needs at least two coders; got {m}", code="one-coder")
    rows = [(i, int(s) - begin, int(e) - begin) for i, us in enumerate(units) for s, e in us]
    coder = np.array([r[0] for r in rows], dtype=np.int64)
    start = np.array([r[1] for r in rows], dtype=np.int64)
    end = np.array([r[2] for r in rows], dtype=np.int64)
    if len(rows) and ((start < 0).any() or (end > stop - begin).any() or (end <= start).any()):
        raise AgreeError("a unit lies outside the continuum or is empty", code="continuum")
    sums = _code_sums(np.zeros(len(rows), np.int64), coder, start, end, np.array([stop - begin]), m)
    return float(_alpha([sums], np.ones((1, 1)), m)[0])


def unitizing_alpha(spans: SpanData, *, codes: Sequence[str] | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                    n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                    minimum: float | None = None) -> dict[str, AgreementResult]:
    """Krippendorff's alpha for unitizing (EXPERIMENTAL), per code and for all codes together.

    Every coder must have coded every document (restrict the documents first). Returns
    {code: result} plus "(all codes)" for the sum over codes. Each result is named
    "unitizing_alpha_experimental", carries the Note "experimental" and the method in
    details["method"]; intervals resample whole documents. See the module notes for what is
    reconstructed, what is recalled from memory and what is not implemented.

    Parameters
    ----------
    spans : SpanData, every coder on every document.
    codes : the codes to score (all by default).
    confidence_level, n_resamples, ci_method, seed, minimum : as for every coefficient; the
        bootstrap resamples whole documents.

    Returns
    -------
    {code: AgreementResult}, and "(all codes)" when there are several codes.
    """
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum,
                   ci_method=ci_method, seed=seed)
    m, D = spans.n_coders, spans.n_documents
    if m < 2:
        raise AgreeError(f"agreement needs at least two coders; the spans have {m}", code="one-coder")
    if not spans.coded.all():
        raise AgreeError("Krippendorff's alpha for unitizing needs every coder on every document (one shared "
                         "continuum)", hint="restrict to the documents every coder coded", code="documents")
    chosen = list(spans.codes) if codes is None else list(codes)
    unknown = [c for c in chosen if c not in spans.codes]
    if unknown:
        raise AgreeError(f"not codes of these spans: {', '.join(unknown[:5])}", code="unknown-code")
    per = {}
    for name in chosen:  # a loop over codes
        k = spans.codes.index(name)
        on = spans.code == k
        per[name] = _code_sums(spans.doc[on], spans.coder[on], spans.start[on], spans.end[on], spans.lengths, m)
    groups = {name: [s] for name, s in per.items()}
    if len(chosen) > 1:
        groups["(all codes)"] = list(per.values())
    rng_seed = seed if seed is not None or not n_resamples else draw_seed()
    one = np.ones((1, D))
    draws = jack = None
    if n_resamples:
        rng, used_seed = make_rng(rng_seed)
        draws = rng.multinomial(D, np.full(D, 1.0 / D), size=int(n_resamples)).astype(float)
        jack = 1.0 - np.eye(D)
    out = {}
    total_units = int(sum(s.N.sum() for s in per.values()))
    for name, sums in groups.items():
        est = float(_alpha(sums, one, m)[0])
        notes = [EXPERIMENTAL]
        if not np.isfinite(est):
            notes.append(Note("undefined", "Krippendorff's alpha for unitizing is undefined: no unit of this code "
                              "(no expected disagreement)."))
        low = high = lower = p_min = se = None
        method = boot = None
        reps = None
        if draws is not None and np.isfinite(est):
            reps = _alpha(sums, draws, m)
            # no pseudo-unit here: a document has no least favourable content to add
            boot_method = "bca" if ci_method == "pseudo-unit" else ci_method
            iv = bootstrap_interval(est, reps, confidence_level=confidence_level, method=boot_method,
                                    jack=_alpha(sums, jack, m) if boot_method == "bca" else None,
                                    jack_weights=np.ones(D), minimum=minimum)
            low, high, lower, p_min, method, se = iv.low, iv.high, iv.lower_bound, iv.p_value_min, iv.method, iv.se
            notes.extend(iv.notes)
            if boot_method != ci_method:
                notes.append(Note("no-pseudo-unit", "Unitizing alpha has no least-favourable pseudo-unit (a "
                                  "document has no worst content to add), so its interval is the BCa bootstrap "
                                  "of whole documents, which can fall short of its level with few documents."))
            boot = BootstrapInfo(replicates=int(n_resamples), seed=used_seed, method=iv.method,
                                 unit="cluster:document", n_undefined=iv.n_undefined)
            if D < 20:
                notes.append(Note("few-clusters", f"Only {D} documents were resampled; bootstrap intervals from "
                                  "fewer than 20 groups are rough."))
        n_units = int(sum(s.N.sum() for s in sums))
        out[name] = AgreementResult(
            name=NAME, estimate=est, se=se, se_method="bootstrap standard deviation (whole documents resampled)"
            if se is not None else None, ci_low=low, ci_high=high, confidence_level=confidence_level,
            ci_method=method, n_units=n_units, n_coders=m, n_values=total_units, n_categories=len(sums),
            level="unitizing", minimum=minimum, p_value_min=p_min, lower_bound=lower, bootstrap=boot,
            details={"method": METHOD, "experimental": True, "continuum_length": int(spans.lengths.sum()),
                     "documents": D, "units": n_units}, warnings=tuple(notes), replicates=reps)
    return out


unitizing_alpha.__doc__ += "\n    References\n    ----------\n" + "".join(
    f"    {r}\n" for r in references_for("unitizing_alpha"))
