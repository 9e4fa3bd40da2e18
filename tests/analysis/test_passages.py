"""Views of coded passages: segments as units, positions as units (synthetic texts and spans only).

External checks: small continua worked by hand (arithmetic in each docstring); binary nominal
alpha over positions from the `krippendorff` package (reference library) on the expanded
per-position arrays; Dice and span matching by brute force over positions and span pairs;
identities (identical codings give 1, translating text and spans together changes nothing,
splitting a document where no span crosses changes no point estimate of view 2).
"""

from __future__ import annotations

from dataclasses import replace

import krippendorff
import numpy as np
import pandas as pd
import pytest

from agree.core.model import AgreeError
from agree.core.spans import SpanData
from agree.analysis import passages as P
from agree.stats import coefficients as coef


def make(texts, spans, *, coders=("A", "B"), codes=("x", "y"), coded=None, lengths=None, unit="character"):
    """spans: list of (doc, coder, code, start, end) with indices."""
    rows = np.array(spans, dtype=np.int64).reshape(-1, 5)
    D = len(texts)
    lengths = [len(t) for t in texts] if lengths is None else lengths
    coded = np.ones((D, len(coders)), bool) if coded is None else np.asarray(coded, bool)
    return SpanData(documents=tuple(f"doc{d + 1}" for d in range(D)), texts=tuple(texts), lengths=lengths,
                    coders=tuple(coders), codes=tuple(codes), parents=[-1] * len(codes), doc=rows[:, 0],
                    coder=rows[:, 1], code=rows[:, 2], start=rows[:, 3], end=rows[:, 4], coded=coded,
                    coverage="declared", unit=unit)


def random_spans(rng, *, n_docs=3, m=2, C=2, length=(40, 90), per=3):
    lengths = rng.integers(*length, size=n_docs)
    rows = []
    for d, L in enumerate(lengths):
        for i in range(m):
            for k in range(C):
                for _ in range(int(rng.integers(0, per + 1))):
                    s = int(rng.integers(0, L - 1))
                    rows.append((d, i, k, s, int(min(L, s + rng.integers(1, 15)))))
    texts = [None] * n_docs
    return make(texts, rows, coders=tuple("ABCD"[:m]), codes=tuple("xyzw"[:C]), lengths=lengths)


def expanded_positions(sp: SpanData, k: int) -> np.ndarray:
    """(m, total positions) 1/0 for code k, NaN where the coder did not code the document: by brute force."""
    cols = []
    for d in range(sp.n_documents):
        x = np.zeros((sp.n_coders, sp.lengths[d]))
        for s in np.flatnonzero((sp.doc == d) & (sp.code == k)):
            x[sp.coder[s], sp.start[s]:sp.end[s]] = 1
        x[~sp.coded[d]] = np.nan
        cols.append(x)
    return np.concatenate(cols, axis=1)


def table_rows(frame: pd.DataFrame, sp: SpanData):
    """Each row of a per code and coder pair table with the coder and code indices."""
    for _, row in frame.iterrows():
        yield row, sp.coders.index(row.coder_a), sp.coders.index(row.coder_b), sp.codes.index(row.code)


# ---------------------------------------------------------------------------------------------
# segmentation


def test_paragraphs_sentences_and_turns_with_crlf_and_characters_outside_the_bmp():
    text = "Ann: I like 🌳 trees. It is calm!\r\n\r\n  \r\nBob: The rent? Too high.\r\nAnn: Yes."
    paras = P.paragraphs(text)
    assert [text[s:e] for s, e in paras] == ["Ann: I like 🌳 trees. It is calm!", "Bob: The rent? Too high.\r\nAnn: Yes."]
    assert [text[s:e] for s, e in P.sentences(text)] == ["Ann: I like 🌳 trees.", "It is calm!", "Bob: The rent?",
                                                        "Too high.", "Ann: Yes."]
    turns = P.speaker_turns(text)
    assert [(text[s:e], who) for s, e, who in turns] == [("Ann: I like 🌳 trees. It is calm!", "Ann"),
                                                         ("Bob: The rent? Too high.", "Bob"), ("Ann: Yes.", "Ann")]
    assert P.speaker_turns("Intro line\n10:30 start\nMo: hi") == [(0, 22, ""), (23, 29, "Mo")]


# ---------------------------------------------------------------------------------------------
# view 1: segments as units


SEG_TEXT = "One two three four. Five six seven eight. Nine ten. Eleven twelve."
#           0         1         2         3         4         5         6
# sentences: [0, 19) [20, 41) [42, 51) [52, 66)


def seg_spans(**kw):
    return make([SEG_TEXT], [
        (0, 0, 0, 0, 19),    # A: x on sentence 1
        (0, 1, 0, 0, 19),    # B: x on sentence 1
        (0, 1, 0, 24, 28),   # B: x on "six" (a phrase of sentence 2: all of the span inside it)
        (0, 0, 1, 40, 45),   # A: y on ". Nine" (1 char in sentence 2, 3 in sentence 3: 3/5 of the span, 3/9 of it)
        (0, 1, 1, 15, 20),   # B: y runs from "four." into the gap: 4/19 of sentence 1, 4/5 of the span
    ], **kw)


def test_segments_sets_by_the_cover_rule_and_hand_computed_alpha():
    """Sentences [0,19) [20,41) [42,51) [52,66); min_cover 0.5, rule "either".

    A: x covers sentence 1 fully -> {x}; y [40,45) has 1 position in sentence 2 (1/21 of it, 1/5 of the
       span) and 3 in sentence 3 (3/9 of it, 3/5 of the span >= 0.5) -> y on sentence 3 only.
    B: x on sentence 1; x [24,28) lies wholly in sentence 2 (4/4 of the span) -> x on sentence 2;
       y [15,20) has 4 positions in sentence 1 (4/19 of it, 4/5 of the span) -> y on sentence 1.
    Sets: s1 A {x}, B {x, y}; s2 A {}, B {x}; s3 A {y}, B {}; s4 both {}.
    Code x as present/absent: A 1,0,0,0; B 1,1,0,0. Coincidences: o11 = 2, o01 = o10 = 1, o00 = 4;
    n = 8, n1 = 3, n0 = 5. D_o = 2/8, D_e = 2·5·3/(8·7) = 30/56, alpha = 1 - (2/8)(56/30) = 16/30.
    """
    d = P.segment_units(seg_spans(), by="sentence")
    assert list(d.unit_ids) == ["doc1:sentence 1", "doc1:sentence 2", "doc1:sentence 3", "doc1:sentence 4"]
    lab = d.labels()
    assert lab["A"].tolist() == [frozenset("x"), frozenset(), frozenset("y"), frozenset()]
    assert lab["B"].tolist() == [frozenset("xy"), frozenset("x"), frozenset(), frozenset()]
    assert d.text[1] == "Five six seven eight." and d.columns["start"].tolist() == [0, 20, 42, 52]
    assert coef.krippendorff_alpha(d.presence("x"), n_resamples=0).estimate == pytest.approx(16 / 30)
    assert d.report.detected.startswith("segments as units (sentences)")
    assert any(n.startswith("Rule: a code applies") for n in d.report.notes)


def test_segment_cover_rule_variants():
    """cover="segment": B's x phrase (4/21 of sentence 2), B's y tail (4/19 of sentence 1) and A's y
    (3/9 of sentence 3) no longer count. min_cover=0 (any overlap): A's y [40, 45) also touches
    sentence 2 (position 40), so A gains y there; B's y [15, 20) ends before sentence 2 starts."""
    strict = P.segment_units(seg_spans(), by="sentence", cover="segment").labels()
    assert strict["B"].tolist() == [frozenset("x"), frozenset(), frozenset(), frozenset()]
    assert strict["A"].tolist() == [frozenset("x"), frozenset(), frozenset(), frozenset()]
    anything = P.segment_units(seg_spans(), by="sentence", min_cover=0).labels()
    assert anything["A"].tolist() == [frozenset("x"), frozenset("y"), frozenset("y"), frozenset()]
    assert anything["B"].tolist() == [frozenset("xy"), frozenset("x"), frozenset(), frozenset()]


def test_segments_from_a_table_missing_coder_and_empty_set():
    sp = make([SEG_TEXT, "abc def"], [(0, 0, 0, 0, 19), (0, 1, 0, 0, 19), (1, 0, 1, 0, 3)],
              coders=("A", "B", "C"), coded=[[True, True, False], [True, True, True]])
    table = pd.DataFrame({"document": ["doc1", "doc1", "doc2"], "start": [0, 20, 0], "end": [19, 41, 7]})
    d = P.segment_units(sp, segments=table, documents="pairable")
    lab = d.labels()
    assert lab["C"].tolist() == [None, None, frozenset()]          # C did not code doc1: missing
    assert lab["B"].tolist() == [frozenset("x"), frozenset(), frozenset()]
    assert list(d.unit_ids) == ["doc1:segment 1", "doc1:segment 2", "doc2:segment 1"]
    only_all = P.segment_units(sp, segments=table.iloc[2:])
    assert only_all.n_units == 1 and any("doc1 (not coded by C)" in n for n in only_all.report.notes)
    with pytest.raises(AgreeError, match="overlap"):
        P.segment_units(sp, segments=[("doc2", 0, 5), ("doc2", 4, 7)])
    with pytest.raises(AgreeError, match="outside"):
        P.segment_units(sp, segments=[("doc2", 0, 50)])


def test_segments_by_text_refuse_token_positions_and_missing_text():
    sp = make([SEG_TEXT], [(0, 0, 0, 0, 3), (0, 1, 0, 0, 3)], unit="token", lengths=[12])
    with pytest.raises(AgreeError, match="tokens"):
        P.segment_units(sp, by="sentence")
    assert P.segment_units(sp, segments=[("doc1", 0, 4), ("doc1", 4, 12)]).n_units == 2
    no_text = make([None], [(0, 0, 0, 0, 3), (0, 1, 0, 0, 3)], lengths=[12])
    with pytest.raises(AgreeError, match="no text"):
        P.segment_units(no_text, by="paragraph")


def test_segments_translation_by_blank_lines_changes_nothing():
    base = seg_spans()
    pad = "\n \n\n"
    moved = make([pad + SEG_TEXT], [(d, c, k, s + len(pad), e + len(pad)) for d, c, k, s, e in zip(
        base.doc, base.coder, base.code, base.start, base.end)])
    a = P.segment_agreement(base, by="sentence", n_resamples=0)
    b = P.segment_agreement(moved, by="sentence", n_resamples=0)
    assert a.overall.estimate == pytest.approx(b.overall.estimate, abs=1e-15)
    assert a.data.labels().values.tolist() == b.data.labels().values.tolist()


def test_segment_agreement_identical_codings_and_view_names():
    sp = make([SEG_TEXT + "\n\n" + SEG_TEXT], [(0, i, k, s, e) for i in range(2)
                                              for k, s, e in ((0, 0, 19), (1, 20, 41), (0, 70, 90))])
    res = P.segment_agreement(sp, by="sentence", n_resamples=0)
    assert res.overall.estimate == 1.0
    assert res.per_code["x"]["krippendorff_alpha"].estimate == 1.0
    assert res.view == "segments as units (sentences), 1 document"
    for r in [res.overall, *(x for v in res.per_code.values() for x in v.values())]:
        assert r.warnings[0].code == "view" and r.details["view"] == res.view
    assert res.to_dict()["view"] == res.view and set(res.to_frame()["view"]) == {res.view}


# ---------------------------------------------------------------------------------------------
# view 2: positions as units


def test_positions_hand_computed_alpha_kappa_dice_and_matching():
    """One document of 10 positions; A marks x on [2, 6), B on [3, 7).

    Positions 0..9: A 0011110000, B 0001111000: both 0 at 5 positions, both 1 at 3, A only at 2,
    B only at 6. Alpha: n = 20, o00 = 10, o11 = 6, o01 = o10 = 2, n0 = 12, n1 = 8;
    D_o = 4/20, D_e = 2·12·8/(20·19) = 192/380, alpha = 1 - (4/20)(380/192) = 29/48.
    Cohen: p_o = 8/10, p_e = 0.4·0.4 + 0.6·0.6 = 0.52, kappa = 0.28/0.48 = 7/12.
    Dice = 2·3/(4 + 4) = 0.75. Span matching: Jaccard = 3/5 >= 0.5, so each finds the other:
    recall = precision = F1 = 1.
    """
    sp = make(["abcdefghij"], [(0, 0, 0, 2, 6), (0, 1, 0, 3, 7)])
    res = P.position_agreement(sp, n_resamples=0)
    assert res.per_code["x"]["krippendorff_alpha"].estimate == pytest.approx(29 / 48)
    assert res.per_code["x"]["cohen_kappa"].estimate == pytest.approx(7 / 12)
    dice = res.specific.set_index("code").loc["x"]
    assert (dice.positions_a, dice.positions_b, dice.positions_both, dice.dice) == (4, 4, 3, 0.75)
    match = res.matching.set_index("code").loc["x"]
    assert (match.recall, match.precision, match.f1) == (1.0, 1.0, 1.0)
    # y is marked by nobody: alpha undefined (NaN with a reason), Dice NaN
    assert np.isnan(res.per_code["y"]["krippendorff_alpha"].estimate)
    assert np.isnan(res.specific.set_index("code").loc["y", "dice"])


def test_span_matching_hand_example():
    """A: x [0, 10), x [20, 24), y [30, 40); B: x [2, 12) (Jaccard with [0,10) = 8/12 >= 0.5: found),
    x [21, 30) (with [20, 24): 3/10 < 0.5: not found), y [30, 34) (with [30, 40): 4/10: not found).
    x: A's 2 spans, 1 found by B: recall 1/2; B's 2 spans, 1 found by A: precision 1/2; F1 1/2.
    y: recall 0/1, precision 0/1, F1 0."""
    sp = make(["." * 50], [(0, 0, 0, 0, 10), (0, 0, 0, 20, 24), (0, 0, 1, 30, 40),
                           (0, 1, 0, 2, 12), (0, 1, 0, 21, 30), (0, 1, 1, 30, 34)])
    m = P.span_matching(sp).set_index("code")
    assert m.loc["x", ["spans_a", "spans_b", "found_a", "found_b"]].tolist() == [2, 2, 1, 1]
    assert m.loc["x", ["recall", "precision", "f1"]].tolist() == [0.5, 0.5, 0.5]
    assert m.loc["y", ["recall", "precision", "f1"]].tolist() == [0.0, 0.0, 0.0]
    assert P.span_matching(sp, min_jaccard=0.3).set_index("code").loc["x", "found_a"] == 2


@pytest.mark.parametrize("seed", range(4))
def test_span_matching_equals_brute_force(seed):
    rng = np.random.default_rng(seed)
    sp = random_spans(rng, m=3, per=5)
    for row, a, b, k in table_rows(P.span_matching(sp), sp):
        def found(x, y):
            n = 0
            for s in np.flatnonzero((sp.coder == x) & (sp.code == k)):
                for t in np.flatnonzero((sp.coder == y) & (sp.code == k) & (sp.doc == sp.doc[s])):
                    inter = min(sp.end[s], sp.end[t]) - max(sp.start[s], sp.start[t])
                    union = max(sp.end[s], sp.end[t]) - min(sp.start[s], sp.start[t])
                    if inter > 0 and inter / union >= 0.5:
                        n += 1
                        break
            return n
        assert (row.found_a, row.found_b) == (found(a, b), found(b, a))


@pytest.mark.parametrize("seed", range(6))
def test_per_code_alpha_equals_krippendorff_package_on_expanded_positions(seed):
    rng = np.random.default_rng(seed)
    m = int(rng.integers(2, 4))
    sp = random_spans(rng, m=m, C=2)
    if m == 3:   # one coder did not code one document: missing there, the document kept ("pairable")
        sp = replace(sp, coded=np.array([[True, True, True], [True, False, True], [True, True, True]]))
    res = P.position_agreement(sp, n_resamples=0, documents="pairable")
    for k, code in enumerate(sp.codes):
        x = expanded_positions(sp, k)
        expected = krippendorff.alpha(reliability_data=x, level_of_measurement="nominal")
        assert res.per_code[code]["krippendorff_alpha"].estimate == pytest.approx(expected, abs=1e-10)


@pytest.mark.parametrize("seed", range(4))
def test_dice_equals_brute_force(seed):
    rng = np.random.default_rng(seed)
    sp = random_spans(rng, m=3, C=3)
    for row, i, j, k in table_rows(P.positional_specific_agreement(sp), sp):
        x = expanded_positions(sp, k)
        a, b = x[i], x[j]
        inter, total = np.sum((a == 1) & (b == 1)), np.sum(a == 1) + np.sum(b == 1)
        assert row.dice == pytest.approx(2 * inter / total) if total else np.isnan(row.dice)


def test_positions_identical_codings_give_one():
    rows = [(d, i, k, s, e) for d in range(2) for i in range(3) for k, s, e in ((0, 2, 9), (1, 5, 20), (0, 30, 33))]
    sp = make([None, None], rows, coders=("A", "B", "C"), lengths=[40, 50])
    res = P.position_agreement(sp, n_resamples=0)
    assert res.overall.estimate == 1.0
    assert all(r.estimate == 1.0 for v in res.per_code.values() for r in v.values())
    assert (res.specific.dice == 1.0).all() and (res.matching.f1 == 1.0).all()


def test_positions_translation_with_the_text_changes_nothing():
    """Moving the text and every span right by s, the s uncoded characters from the end now at the
    front (same length, same marked stretches), leaves every figure unchanged."""
    rng = np.random.default_rng(5)
    sp = random_spans(rng, n_docs=1, m=2, per=4, length=(60, 61))
    used = int(sp.end.max())
    s = int(sp.lengths[0]) - used
    assert s > 0
    moved = make([None], np.column_stack([sp.doc, sp.coder, sp.code, sp.start + s, sp.end + s]),
                 codes=sp.codes, lengths=sp.lengths)
    a = P.position_agreement(sp, n_resamples=0)
    b = P.position_agreement(moved, n_resamples=0)
    assert a.overall.estimate == b.overall.estimate
    for code in sp.codes:
        for name in a.per_code[code]:
            assert a.per_code[code][name].estimate == pytest.approx(b.per_code[code][name].estimate, abs=1e-15,
                                                                    nan_ok=True)
    pd.testing.assert_frame_equal(a.specific, b.specific)
    pd.testing.assert_frame_equal(a.matching, b.matching)


def test_splitting_a_document_where_no_span_crosses_changes_no_point_estimate():
    """Point estimates are sums over positions, so cutting a document in two at a point no span
    crosses changes none of them. The cluster bootstrap does change: it now resamples one more
    document (the halves of the old document are drawn separately), so its intervals differ."""
    rng = np.random.default_rng(2)
    sp = random_spans(rng, n_docs=2, m=2, per=3, length=(50, 51))
    cut = 25
    crosses = (sp.doc == 0) & (sp.start < cut) & (sp.end > cut)
    keep = ~crosses
    rows = np.column_stack([sp.doc, sp.coder, sp.code, sp.start, sp.end])[keep]
    whole = make([None, None], rows, codes=sp.codes, lengths=sp.lengths)
    split_rows = rows.copy()
    right = (rows[:, 0] == 0) & (rows[:, 3] >= cut)
    split_rows[rows[:, 0] == 1, 0] = 2
    split_rows[right, 0] = 1
    split_rows[right, 3:] -= cut
    split = make([None] * 3, split_rows, codes=sp.codes, lengths=[cut, 50 - cut, 50])
    a = P.position_agreement(whole, n_resamples=200, seed=1)
    b = P.position_agreement(split, n_resamples=200, seed=1)
    assert a.overall.estimate == pytest.approx(b.overall.estimate, abs=1e-14)
    for code in sp.codes:
        for name in a.per_code[code]:
            assert a.per_code[code][name].estimate == pytest.approx(b.per_code[code][name].estimate, abs=1e-14,
                                                                    nan_ok=True)
    assert a.specific.dice.tolist() == pytest.approx(b.specific.dice.tolist(), nan_ok=True)
    assert "2 documents resampled" in a.view and "3 documents resampled" in b.view


def test_positions_resample_documents_and_show_no_independent_unit_se():
    rng = np.random.default_rng(9)
    sp = random_spans(rng, n_docs=5, m=2, per=4)
    res = P.position_agreement(sp, n_resamples=200, seed=3, ci_method="percentile")
    assert res.view == "positions as units (characters), 5 documents resampled"
    for r in [res.overall, *(x for v in res.per_code.values() for x in v.values())]:
        assert r.bootstrap.unit == "cluster:document"
        assert "se_independent_units" not in r.details and r.z is None and r.p_value is None
        assert {"view", "positions-not-independent"} <= {n.code for n in r.warnings}
    none = P.position_agreement(sp, n_resamples=0)
    r = none.per_code["x"]["cohen_kappa"]
    assert r.se is None and r.ci_low is None and r.z is None
    # every code is scored from the same document resamples (same seed, same number of documents)
    reps = [v["krippendorff_alpha"].replicates for v in res.per_code.values()]
    assert all(len(x) == 200 for x in reps)


def test_position_units_are_weighted_runs_clustered_by_document():
    sp = make(["abcdefghij", "klmnopqrst"], [(0, 0, 0, 2, 6), (0, 1, 0, 3, 7), (1, 1, 1, 0, 4)])
    d = P.position_units(sp, code="x")
    assert d.units_represented == 20 and d.weights.sum() == 20 and d.n_units < 20
    assert d.unit_ids[0] == "doc1@0-2" and set(d.columns["document"]) == {"doc1", "doc2"}
    assert d.report.detected == "positions as units (characters), 2 documents"
    both = P.position_units(sp)
    assert both.set_valued and both.categories == ("x", "y")


def test_restrict_documents_names_what_is_left_out():
    sp = make([None, None, None], [(0, 0, 0, 1, 3), (0, 1, 0, 1, 3), (1, 0, 0, 1, 3), (2, 2, 0, 1, 2)],
              coders=("A", "B", "C"), lengths=[10, 10, 10],
              coded=[[True, True, True], [True, False, True], [False, False, True]])
    kept = P.restrict_documents(sp)
    assert kept.documents == ("doc1",)
    note = next(n for n in kept.notes if "left out" in n)
    assert "doc2 (not coded by B)" in note and "doc3 (not coded by A, B)" in note
    pairable = P.restrict_documents(sp, documents="pairable")
    assert pairable.documents == ("doc1", "doc2")
    assert P.restrict_documents(sp, coders=["A", "C"]).documents == ("doc1", "doc2")
    with pytest.raises(AgreeError):
        P.restrict_documents(sp, documents="some")
    res = P.position_agreement(sp, n_resamples=0)
    assert res.left_out and "doc2 (not coded by B)" in res.left_out[0]
    assert any(n.code == "documents" for n in res.notes)


def test_unitizing_view_is_labelled_experimental():
    sp = make([None, None], [(d, i, 0, 2 + i, 9) for d in range(2) for i in range(2)], lengths=[20, 20])
    res = P.unitizing_agreement(sp, n_resamples=0)
    assert "EXPERIMENTAL" in res.view and res.kind == "unitizing"
    assert {"view", "experimental"} <= {n.code for n in res.overall.warnings}
    assert "experimental" in {n.code for n in res.notes}


# ---------------------------------------------------------------------------------------------
# reconciliation on spans


def test_disputed_passages_list_each_coders_codes_and_marked_text():
    table = P.disputed_passages(seg_spans(), by="sentence", context=5)
    assert table["passage"].tolist() == ["doc1:sentence 1", "doc1:sentence 2", "doc1:sentence 3"]
    first = table.iloc[0]
    assert (first["codes: A"], first["codes: B"], first["codes involved"]) == ("x", "x; y", "y")
    assert first["text"] == "»One two three four.« Five"
    assert first["marked: A"] == "⟦x⟧One two three four.⟦/x⟧ Five"
    assert first["marked: B"] == "⟦x⟧One two three f⟦y⟧our.⟦/x⟧ ⟦/y⟧Five"   # B's y is [15, 20)
    assert table.iloc[1]["codes: A"] == "(none)"
    full = P.disputed_passages(seg_spans(), by="sentence", include_agreed=True)
    assert full["status"].tolist() == ["disputed", "disputed", "disputed", "agreed"]


def test_consensus_spans_from_decisions():
    units = P.segment_units(seg_spans(), by="sentence")
    decisions = pd.DataFrame({"passage": ["doc1:sentence 1", "doc1:sentence 2", "doc1:sentence 3"],
                              "decision": ["x", "x; y", "(none)"]})
    out = P.consensus_spans(units, decisions)
    assert out[["code", "start", "end", "source"]].values.tolist() == [
        ["x", 0, 19, "decided"], ["x", 20, 41, "decided"], ["y", 20, 41, "decided"]]
    assert set(out["coder"]) == {"consensus"}
    with pytest.raises(AgreeError) as err:
        P.consensus_spans(units, {"doc1:sentence 1": {"x"}})
    assert err.value.code == "unresolved" and "2 disputed passages" in str(err.value)
    partial = P.consensus_spans(units, {"doc1:sentence 1": {"x"}}, allow_undecided=True)
    assert partial["passage"].tolist() == ["doc1:sentence 1"]
    with pytest.raises(AgreeError, match="unknown code"):
        P.consensus_spans(units, {"doc1:sentence 1": "zzz"}, allow_undecided=True)


def test_position_units_feed_the_diagnostics_when_small():
    from agree.analysis.diagnostics import diagnose_codes

    sp = make(["abcdefghij", "klmnopqrst"], [(0, 0, 0, 2, 6), (0, 1, 0, 3, 7), (1, 1, 1, 0, 4), (1, 0, 1, 0, 3)])
    d = P.position_units(sp)
    diag = diagnose_codes(d, n_resamples=0)
    assert set(diag.to_frame()["code"]) >= {"x", "y"}


def test_spans_read_from_a_table_give_the_same_figures(tmp_path):
    """The reader's SpanData and the same spans built directly give the same view-2 figures."""
    import agree

    text = "Ann: I like the garden. It is calm.\n\nBob: The rent is too high! We moved.\n"
    (tmp_path / "docs").mkdir()
    (tmp_path / "docs" / "d1.txt").write_text(text, encoding="utf-8")
    (tmp_path / "spans.csv").write_text("document,coder,code,start,end\nd1,A,x,5,23\nd1,B,x,5,35\nd1,B,y,42,60\n",
                                        encoding="utf-8")
    read = agree.read_spans(tmp_path / "spans.csv", documents_dir=tmp_path / "docs")
    direct = make([text], [(0, 0, 0, 5, 23), (0, 1, 0, 5, 35), (0, 1, 1, 42, 60)])
    a, b = P.position_agreement(read, n_resamples=0), P.position_agreement(direct, n_resamples=0)
    assert a.overall.estimate == pytest.approx(b.overall.estimate)
    for code in ("x", "y"):
        assert a.per_code[code]["krippendorff_alpha"].estimate == pytest.approx(
            b.per_code[code]["krippendorff_alpha"].estimate, nan_ok=True)
