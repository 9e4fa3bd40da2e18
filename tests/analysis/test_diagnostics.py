"""Tests for agree.analysis.diagnostics: per-code and per-coder diagnostics, confusion tables.

Checks are against hand computations written out here, published definitions (cited beside
each check), and reference libraries (statsmodels, scikit-learn, krippendorff). All data are
synthetic.
"""

from __future__ import annotations

import itertools
import json

import krippendorff
import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.contingency_tables import SquareTable, cochrans_q, mcnemar
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa
from statsmodels.stats.multitest import multipletests

import agree
from agree.analysis.diagnostics import confusion_table, diagnose_coders, diagnose_codes, stuart_maxwell
from agree.analysis.diagnostics.homogeneity import holm as _holm
from agree.core.model import AgreeError, from_table
from tests.conftest import as_float, as_labels, expand_table, simulate_codes


def table_data(table, labels, coders=("amara", "ben")):
    """Two coders' q x q table -> CodingData (rows the first coder)."""
    pairs = expand_table(np.asarray(table))
    return from_table(as_labels(pairs, labels), coders=list(coders), categories=labels)


def row(diag, code):
    frame = diag.per_code.set_index("code")
    return frame.loc[code]


# -----------------------------------------------------------------------------------------
# Hand-computed small tables and published definitions
# -----------------------------------------------------------------------------------------

# Two coders, three codes. Rows amara, columns ben.
THREE = np.array([[10, 2, 3],
                  [1, 8, 0],
                  [4, 1, 6]])
LABELS = ["anger", "blame", "care"]


def test_confusion_table_and_shares_by_hand():
    d = table_data(THREE, LABELS)
    # Coincidences o_ck = n_ck + n_kc for c != k, o_cc = 2 n_cc (Krippendorff 2004, two coders).
    o = confusion_table(d).to_numpy()
    assert np.allclose(o, [[20, 3, 7], [3, 16, 1], [7, 1, 12]])
    directed = confusion_table(d, directed=True)
    assert directed.index.name == "amara" and directed.columns.name == "ben"
    assert np.array_equal(directed.to_numpy(), THREE)

    diag = diagnose_codes(d, n_resamples=0)
    pairs = diag.confused_pairs.set_index(["code_a", "code_b"])
    # Total observed disagreement sum_{g!=h} o_gh = 2 (3 + 7 + 1) = 22.
    assert pairs.loc[("anger", "care"), "share"] == pytest.approx(14 / 22)
    assert pairs.loc[("anger", "blame"), "share"] == pytest.approx(6 / 22)
    assert pairs.loc[("blame", "care"), "share"] == pytest.approx(2 / 22)
    assert list(diag.confused_pairs.code_b[:1]) == ["care"]          # ranked by share
    # Margins n_anger = 30, n_blame = 20, n_care = 20, n = 70; e_ck = n_c n_k / (n - 1).
    assert pairs.loc[("anger", "care"), "expected"] == pytest.approx(30 * 20 / 69)
    assert pairs.loc[("anger", "care"), "o_over_e"] == pytest.approx(7 / (30 * 20 / 69))
    # Directed counts: amara anger / ben care = 3, amara care / ben anger = 4.
    assert pairs.loc[("anger", "care"), "a_to_b"] == 3
    assert pairs.loc[("anger", "care"), "b_to_a"] == 4
    assert pairs.loc[("anger", "care"), "units"] == 7
    # Specific agreement p_s(k) = 2 n_kk / (n_k. + n_.k) (Spitzer & Fleiss 1974).
    assert row(diag, "anger").specific_agreement == pytest.approx(20 / (15 + 15))
    assert row(diag, "blame").specific_agreement == pytest.approx(16 / (9 + 11))
    assert row(diag, "care").specific_agreement == pytest.approx(12 / (11 + 9))
    # anger's disagreements: 3 with blame, 7 with care -> 70% care.
    assert row(diag, "anger").top_confusion == "care"
    assert row(diag, "anger").top_confusion_share == pytest.approx(0.7)


def test_byrt_indices_and_specific_agreement_two_by_two():
    # 2x2 table: a = both "yes", b = amara only, c = ben only, d = both "no".
    a, b, c, d_ = 40, 9, 6, 45
    d = table_data([[a, b], [c, d_]], ["yes", "no"])
    diag = diagnose_codes(d, n_resamples=0)
    yes = row(diag, "yes")
    n = a + b + c + d_
    # Cicchetti & Feinstein (1990): p_pos = 2a/(2a+b+c), p_neg = 2d/(2d+b+c).
    assert yes.specific_agreement == pytest.approx(2 * a / (2 * a + b + c))
    assert row(diag, "no").specific_agreement == pytest.approx(2 * d_ / (2 * d_ + b + c))
    # Byrt, Bishop & Carlin (1993): PI = (a - d)/N, BI = (b - c)/N.
    assert yes.prevalence_index == pytest.approx((a - d_) / n)
    assert yes.bias_index == pytest.approx((b - c) / n)
    # ... and their identity kappa = (PABAK - PI² + BI²) / (1 - PI² + BI²).
    pabak = 2 * (a + d_) / n - 1
    pi, bi = (a - d_) / n, (b - c) / n
    assert yes.kappa == pytest.approx((pabak - pi ** 2 + bi ** 2) / (1 - pi ** 2 + bi ** 2))
    # Hand: p_o = 0.85, p_e = (49*46 + 51*54)/100² = 0.5008.
    assert yes.kappa == pytest.approx((0.85 - 0.5008) / (1 - 0.5008))
    assert yes.percent_agreement == pytest.approx(0.85)
    assert not yes.paradox


def test_kappa_paradox_is_explained():
    # Feinstein & Cicchetti (1990), high agreement but low kappa (from memory): p_o = 0.85 in
    # both tables, kappa 0.70 for (40, 9, 6, 45) and 0.32 for (80, 10, 5, 5).
    d = table_data([[80, 10], [5, 5]], ["present", "absent"])
    diag = diagnose_codes(d, n_resamples=0, minimum=0.8)
    present = row(diag, "present")
    assert present.kappa == pytest.approx(0.07 / 0.22)   # p_e = (90*85 + 10*15)/100² = 0.78
    assert present.percent_agreement == pytest.approx(0.85)
    assert present.prevalence_index == pytest.approx(0.75)
    assert present.paradox
    assert "kappa paradox" in present.explanation
    assert "presence" in present.explanation and "prevalence index" in present.explanation
    assert present.status == "below minimum"


def test_set_valued_confusions_by_hand():
    # Three coders, set-valued. Unit 1: amara {x}, ben {y}, chen {x, y}.
    # Unit 2: amara {x}, ben {x}, chen missing. Unit 3: {y}, {y}, {} (chen coded, no code).
    t = [[{"x"}, {"y"}, {"x", "y"}],
         [{"x"}, {"x"}, None],
         [{"y"}, {"y"}, set()]]
    d = from_table(t, coders=["amara", "ben", "chen"])
    assert d.set_valued
    conf = confusion_table(d)
    # Confusion x/y: only unit 1, amara has x not y (1 coder), ben has y not x (1 coder):
    # 1 * 1 / (m_u - 1) = 1/2.
    assert conf.loc["x", "y"] == pytest.approx(0.5)
    assert conf.loc["y", "x"] == pytest.approx(0.5)
    # Diagonal: presence coincidences r(r-1)/(m-1): x: unit 1 2*1/2 + unit 2 2*1/1 = 3;
    # y: unit 1 2*1/2 + unit 3 2*1/2 = 2.
    assert conf.loc["x", "x"] == pytest.approx(3.0)
    assert conf.loc["y", "y"] == pytest.approx(2.0)

    diag = diagnose_codes(d, n_resamples=0, min_units_per_code=1)
    pairs = diag.confused_pairs
    assert len(pairs) == 1 and pairs.share[0] == pytest.approx(1.0)
    # Presence of x: values over pairable units: unit1 (1,0,1), unit2 (1,1), unit3 (0,0,0).
    presence = np.array([[1, 0, 1], [1, 1, np.nan], [0, 0, 0]], float).T
    assert row(diag, "x").alpha == pytest.approx(
        krippendorff.alpha(presence, level_of_measurement="nominal"))
    # x's disagreements (presence vs absence): unit 1: 2*1/2 = 1 -> n_x - o_xx = 4 - 3 = 1;
    # the confusion with y is 1/2 of it, the rest (chen has both x and y, pairs with ben's y
    # are an "x without an alternative") is omission.
    assert row(diag, "x").top_confusion == "y"
    assert row(diag, "x").top_confusion_share == pytest.approx(0.5)
    assert row(diag, "x").omission_share == pytest.approx(0.5)


def test_set_valued_directed_by_hand():
    t = [[{"x"}, {"y"}], [{"x", "y"}, {"y"}], [{"x"}, {"x"}], [set(), {"x"}]]
    d = from_table(t, coders=["amara", "ben"])
    directed = confusion_table(d, directed=True)
    # amara x not y & ben y not x: unit 1 only (unit 2: amara has y too).
    assert directed.loc["x", "y"] == 1
    assert directed.loc["y", "x"] == 0
    # both applied x: unit 3; both applied y: unit 2.
    assert directed.loc["x", "x"] == 1 and directed.loc["y", "y"] == 1


def _jaccard(a, b):
    u = a | b
    return 0.0 if not u else 1 - len(a & b) / len(u)


def _masi(a, b):
    """MASI distance 1 - J * M, M = 1 (equal), 2/3 (one a subset of the other), 1/3 (overlap),
    0 (disjoint) (Passonneau 2006, written out here from the definition)."""
    if a == b:
        return 0.0
    if not (a & b):
        return 1.0
    m = 2 / 3 if (a <= b or b <= a) else 1 / 3
    return 1 - (len(a & b) / len(a | b)) * m


def _jaccard_alpha(sets_by_unit, dist=_jaccard):
    """Independent pairwise Krippendorff alpha with a set distance (METHODS 4.3)."""
    units = [[s for s in u if s is not None] for u in sets_by_unit]
    units = [u for u in units if len(u) >= 2]
    values = [s for u in units for s in u]
    n = len(values)
    d_o = sum(dist(a, b) / (len(u) - 1) for u in units for a, b in itertools.permutations(u, 2)) / n
    d_e = sum(dist(a, b) for a, b in itertools.permutations(values, 2)) / (n * (n - 1))
    return 1 - d_o / d_e


def test_set_valued_merged_alpha_against_pairwise_computation(rng):
    cats = ["p", "q", "r", "s"]
    rows = []
    for _ in range(40):
        truth = set(rng.choice(cats, size=rng.integers(0, 3), replace=False))
        unit = []
        for _ in range(3):
            if rng.random() < 0.15:
                unit.append(None)
                continue
            s = set(truth)
            if rng.random() < 0.4:
                s ^= {rng.choice(cats)}
            if "q" in s and rng.random() < 0.5:
                s = (s - {"q"}) | {"r"}
            unit.append(s)
        rows.append(unit)
    d = from_table(rows, coders=["a", "b", "c"])
    diag = diagnose_codes(d, n_resamples=0, distance="jaccard")
    assert diag.distance == "jaccard"
    as_sets = [[None if v is None else frozenset(v) for v in u] for u in rows]
    assert diag.alpha == pytest.approx(_jaccard_alpha(as_sets))
    pairs = diag.confused_pairs.set_index(["code_a", "code_b"])
    merged = [[None if v is None else frozenset("q" if c == "r" else c for c in v) for v in u]
              for u in rows]
    assert pairs.loc[("q", "r"), "alpha_if_merged"] == pytest.approx(_jaccard_alpha(merged))
    # the default is MASI, as in agree.score, for the overall alpha and the merged alpha
    masi = diagnose_codes(d, n_resamples=0)
    assert masi.distance == "masi" and masi.alpha_label == "sets of codes, masi distance"
    assert masi.alpha == pytest.approx(_jaccard_alpha(as_sets, _masi))
    pairs = masi.confused_pairs.set_index(["code_a", "code_b"])
    assert pairs.loc[("q", "r"), "alpha_if_merged"] == pytest.approx(_jaccard_alpha(merged, _masi))
    # Presence alpha of each code against krippendorff on the 0/1 recoding.
    for code in cats:
        binary = np.array([[np.nan if v is None else float(code in v) for v in u] for u in rows]).T
        assert row(diag, code).alpha == pytest.approx(
            krippendorff.alpha(binary, level_of_measurement="nominal"))


# -----------------------------------------------------------------------------------------
# Tests of equal use: statsmodels as the reference
# -----------------------------------------------------------------------------------------

def _random_table(rng, q, n):
    p = rng.dirichlet(np.ones(q * q) * 0.7)
    return rng.multinomial(n, p).reshape(q, q) + np.eye(q, dtype=int) * rng.integers(1, 10, size=q)


@pytest.mark.parametrize("seed", range(8))
def test_stuart_maxwell_matches_statsmodels(seed):
    rng = np.random.default_rng(seed)
    q = int(rng.integers(2, 7))
    table = _random_table(rng, q, int(rng.integers(30, 300))) + 1   # every cell > 0: full rank
    ours = stuart_maxwell(table)
    ref = SquareTable(table, shift_zeros=False).homogeneity()
    assert ours["statistic"] == pytest.approx(ref.statistic, rel=1e-9)
    assert ours["df"] == ref.df
    assert ours["p_value"] == pytest.approx(ref.pvalue, rel=1e-7, abs=1e-12)
    assert ours["dropped"] == []
    bhapkar = SquareTable(table, shift_zeros=False).homogeneity(method="bhapkar")
    assert ours["bhapkar_statistic"] == pytest.approx(bhapkar.statistic, rel=1e-9)


def test_stuart_maxwell_drops_singular_categories():
    table = np.array([[12, 3, 0, 4],
                      [0, 9, 0, 0],
                      [0, 0, 7, 0],
                      [2, 5, 0, 11]])
    # "c" (index 2) was never involved in a disagreement: S_cc = 0 -> dropped, df reduced.
    ours = stuart_maxwell(table, ["a", "b", "c", "d"])
    keep = [0, 1, 3]
    ref = SquareTable(table[np.ix_(keep, keep)], shift_zeros=False).homogeneity()
    assert ours["dropped"] == ["c"]
    assert ours["df"] == ref.df == 2
    assert ours["statistic"] == pytest.approx(ref.statistic)


def test_stuart_maxwell_separate_groups_add_up():
    # {a, b} and {c, d} are never confused with each other: two blocks, statistics add.
    block1 = np.array([[10, 6], [1, 8]])
    block2 = np.array([[5, 2], [7, 9]])
    table = np.zeros((4, 4), int)
    table[:2, :2] = block1
    table[2:, 2:] = block2
    ours = stuart_maxwell(table, list("abcd"))
    r1 = SquareTable(block1, shift_zeros=False).homogeneity()
    r2 = SquareTable(block2, shift_zeros=False).homogeneity()
    assert ours["statistic"] == pytest.approx(r1.statistic + r2.statistic)
    assert ours["df"] == 2
    assert ours["groups"] == [["a", "b"], ["c", "d"]]


def test_marginal_homogeneity_in_diagnose_codes():
    d = table_data(THREE, LABELS)
    diag = diagnose_codes(d, n_resamples=0)
    ref = SquareTable(THREE, shift_zeros=False).homogeneity()
    mh = diag.marginal_homogeneity
    assert mh["test"] == "stuart-maxwell"
    assert mh["statistic"] == pytest.approx(ref.statistic)
    assert mh["df"] == ref.df


@pytest.mark.parametrize("b,c", [(3, 9), (0, 5), (10, 11), (20, 8), (40, 19), (0, 0)])
def test_mcnemar_matches_statsmodels(b, c):
    # k/not-k table: a = 20 both, b amara only, c ben only, d = 30 neither.
    d = table_data([[20, b], [c, 30]], ["k", "other"])
    diag = diagnose_codes(d, n_resamples=0)
    k = row(diag, "k")
    if b + c == 0:
        assert k.usage_p == 1.0
        return
    exact = b + c < 25   # METHODS 6.5: exact binomial below 25 discordant units (common practice)
    ref = mcnemar(np.array([[20, b], [c, 30]]), exact=exact, correction=False)
    assert k.usage_p == pytest.approx(ref.pvalue)
    assert k.usage_test == ("mcnemar exact" if exact else "mcnemar chi-square")


def test_holm_matches_statsmodels(rng):
    for _ in range(5):
        p = rng.random(int(rng.integers(1, 12))) ** 2
        ref = multipletests(p, method="holm")[1]
        assert np.allclose(_holm(p), ref)
    p = np.array([0.01, np.nan, 0.04, 0.03])
    out = _holm(p)
    assert np.isnan(out[1])
    assert np.allclose(out[[0, 2, 3]], multipletests(p[[0, 2, 3]], method="holm")[1])


def test_mcnemar_holm_over_codes():
    d = table_data(THREE, LABELS)
    diag = diagnose_codes(d, n_resamples=0)
    frame = diag.per_code.set_index("code").loc[LABELS]
    assert np.allclose(frame.mcnemar_p_holm, multipletests(frame.usage_p, method="holm")[1])


@pytest.mark.parametrize("seed", range(4))
def test_cochran_q_matches_statsmodels(seed):
    rng = np.random.default_rng(seed)
    m = int(rng.integers(3, 6))
    q = 3
    codes = simulate_codes(rng, 80, m, q, alpha=0.4, coder_bias=0.6)
    d = from_table(as_labels(codes, ["u", "v", "w"]), categories=["u", "v", "w"])
    diag = diagnose_codes(d, n_resamples=0)
    frame = diag.per_code.set_index("code")
    ps = []
    for k, label in enumerate(["u", "v", "w"]):
        ref = cochrans_q((codes == k).astype(int))
        assert frame.loc[label, "usage_statistic"] == pytest.approx(ref.statistic)
        assert frame.loc[label, "usage_p"] == pytest.approx(ref.pvalue)
        assert frame.loc[label, "usage_df"] == m - 1
        ps.append(ref.pvalue)
    assert np.allclose(frame.loc[["u", "v", "w"], "cochran_p_holm"], multipletests(ps, method="holm")[1])


def test_usage_flag_two_coders():
    # amara applies "k" to 30 units, ben to 10 of them: b = 20, c = 0, exact p tiny.
    d = table_data([[10, 20], [0, 70]], ["k", "other"])
    diag = diagnose_codes(d, n_resamples=0)
    k = row(diag, "k")
    assert "amara more" in k.usage_flag and "ben less" in k.usage_flag
    assert "used by amara 3.0x as often as ben" in k.reason
    usage = diag.usage.set_index(["code", "coder"])
    assert usage.loc[("k", "amara"), "share"] == pytest.approx(0.3)
    assert usage.loc[("k", "amara"), "ratio"] == pytest.approx(3.0)


def test_usage_several_coders_pairwise_mcnemar_with_holm(rng):
    """More than two coders: each pair of coders compared by McNemar's test on the units both
    coded (statsmodels, exact below 25 discordant units), Holm over all pairs and codes
    (statsmodels multipletests); a coder's p is the one at which they differ from a strict
    majority of the others, and flags follow it."""
    n = 200
    codes = np.zeros((n, 3), int)
    codes[:, 0] = rng.random(n) < 0.6       # amara uses "k" (1) far more often
    codes[:, 1] = rng.random(n) < 0.1
    codes[:, 2] = rng.random(n) < 0.1
    codes[rng.random((n, 3)) < 0.1] = -1     # and some units not coded by everyone
    d = from_table(as_labels(codes, ["other", "k"]), coders=["amara", "ben", "chen"])
    diag = diagnose_codes(d, n_resamples=0)
    usage = diag.usage.set_index(["code", "coder"])
    raw, tests = {}, []
    for code, value in (("other", 0), ("k", 1)):
        for i, j in itertools.combinations(range(3), 2):
            both = (codes[:, i] >= 0) & (codes[:, j] >= 0)
            xi, xj = codes[both, i] == value, codes[both, j] == value
            b, c = int((xi & ~xj).sum()), int((~xi & xj).sum())
            ref = mcnemar(np.array([[0, b], [c, 0]]), exact=b + c < 25, correction=False)
            raw[(code, i, j)] = (ref.pvalue, b - c)
            tests.append((code, i, j))
    adjusted = dict(zip(tests, multipletests([raw[t][0] for t in tests], method="holm")[1]))
    coders = ["amara", "ben", "chen"]
    for code in ("other", "k"):
        for i in range(3):
            more = sorted(adjusted[(code, min(i, j), max(i, j))] for j in range(3) if j != i
                          and (raw[(code, min(i, j), max(i, j))][1] * (1 if i < j else -1)) > 0)
            less = sorted(adjusted[(code, min(i, j), max(i, j))] for j in range(3) if j != i
                          and (raw[(code, min(i, j), max(i, j))][1] * (1 if i < j else -1)) < 0)
            # a strict majority of the 2 others is both of them: the larger p of the two
            p_more = more[1] if len(more) == 2 else 1.0
            p_less = less[1] if len(less) == 2 else 1.0
            assert usage.loc[(code, coders[i]), "p_holm"] == pytest.approx(min(p_more, p_less))
            flag = "more" if p_more < 0.05 else "less" if p_less < 0.05 else ""
            assert usage.loc[(code, coders[i]), "flag"] == flag
    assert usage.loc[("k", "amara"), "flag"] == "more"
    assert usage.loc[("k", "ben"), "flag"] == "" and usage.loc[("k", "chen"), "flag"] == ""
    assert "used by amara" in row(diag, "k").reason


def _one_over_user():
    """Planted: 300 units, four coders. Three code 'k' exactly where it belongs (on every
    tenth unit, 10%); dana also applies it to every odd-numbered unit (60% in all)."""
    n = 300
    truth = (np.arange(n) % 10 == 0).astype(int)
    codes = np.column_stack([truth, truth, truth, truth | (np.arange(n) % 2)])
    return from_table(as_labels(codes, ["other", "k"]), coders=["amara", "ben", "chen", "dana"],
                      categories=["other", "k"])


def test_the_coder_who_over_uses_a_code_is_named_and_nobody_else():
    diag = diagnose_codes(_one_over_user(), n_resamples=0)
    usage = diag.usage.set_index(["code", "coder"])
    k = row(diag, "k")
    assert usage.loc[("k", "dana"), "flag"] == "more"
    assert [usage.loc[("k", c), "flag"] for c in ("amara", "ben", "chen")] == ["", "", ""]
    assert k.usage_flag == "dana more"
    assert "used by dana" in k.reason
    assert not any(name in k.reason for name in ("amara", "ben", "chen"))
    # the reference is the median of the others: 10% for dana (6x), 10% for amara (1x)
    assert usage.loc[("k", "dana"), "share_median_others"] == pytest.approx(0.1)
    assert usage.loc[("k", "dana"), "ratio"] == pytest.approx(6.0)
    assert usage.loc[("k", "amara"), "ratio"] == pytest.approx(1.0)
    # the pooled reference is what blamed accurate coders: amara's 10% against the others'
    # pooled (10 + 10 + 60)/3 = 26.7% looks like under-use (0.38x)
    assert usage.loc[("k", "amara"), "share_others"] == pytest.approx(0.8 / 3)


def test_clustered_mcnemar_is_mcnemar_for_groups_of_one_unit():
    """Durkalski et al. (2003): (Σ_g (b_g - c_g))² / Σ_g (b_g - c_g)²; with one unit per group
    it is McNemar's (b - c)²/(b + c) (statsmodels, chi-square without correction)."""
    from agree.analysis.diagnostics.homogeneity import clustered_mcnemar

    rng = np.random.default_rng(1)
    first = (rng.random((80, 3)) < 0.3).astype(float)
    second = (rng.random((80, 3)) < 0.2).astype(float)
    first, second = first * (1 - second), second * (1 - first)     # discordant only
    stat, p, _ = clustered_mcnemar(first, second, np.arange(80))
    for k in range(3):
        b, c = int(first[:, k].sum()), int(second[:, k].sum())
        ref = mcnemar(np.array([[0, b], [c, 0]]), exact=False, correction=False)
        assert stat[k] == pytest.approx(ref.statistic) and p[k] == pytest.approx(ref.pvalue)
    # in groups: by hand, groups of 4 units, differences per group summed then squared
    groups = np.repeat(np.arange(20), 4)
    stat, p, _ = clustered_mcnemar(first, second, groups)
    per = (first - second).reshape(20, 4, 3).sum(axis=1)
    np.testing.assert_allclose(stat, per.sum(0) ** 2 / (per ** 2).sum(0))
    # no discordant unit anywhere: p = 1
    assert clustered_mcnemar(np.zeros((5, 1)), np.zeros((5, 1)), np.arange(5))[1][0] == 1.0


def test_clustered_design_uses_clustered_tests_of_equal_use():
    data = _one_over_user()
    groups = np.repeat([f"doc{g}" for g in range(30)], 10)
    diag = diagnose_codes(data, n_resamples=0, cluster=groups)
    usage = diag.usage.set_index(["code", "coder"])
    assert usage.loc[("k", "dana"), "test"].startswith("clustered mcnemar")
    assert usage.loc[("k", "dana"), "flag"] == "more"
    k = row(diag, "k")
    assert k.usage_test is None and np.isnan(k.usage_p)     # Cochran's Q assumes independent units
    assert any(n.code == "cochran-clustered" for n in diag.notes)
    two = table_data([[10, 20], [0, 70]], ["k", "other"])
    diag2 = diagnose_codes(two, n_resamples=0, cluster=np.repeat(np.arange(25), 4))
    assert row(diag2, "k").usage_test == "clustered mcnemar"
    assert diag2.marginal_homogeneity["test"] is None
    assert "independent units" in diag2.marginal_homogeneity["reason"]


# -----------------------------------------------------------------------------------------
# Agreement on each code: krippendorff, sklearn and statsmodels as references
# -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("seed,m,missing", [(1, 2, 0.0), (2, 2, 0.2), (3, 3, 0.0), (4, 4, 0.3),
                                            (5, 5, 0.1)])
def test_presence_alpha_and_specific_agreement_against_references(seed, m, missing):
    rng = np.random.default_rng(seed)
    q = 4
    codes = simulate_codes(rng, 120, m, q, alpha=0.5, missing=missing,
                           prevalence=[0.5, 0.3, 0.15, 0.05])
    labels = ["w", "x", "y", "z"]
    d = from_table(as_labels(codes, labels), categories=labels)
    diag = diagnose_codes(d, n_resamples=0, min_units_per_code=1)
    for k, label in enumerate(labels):
        binary = as_float(np.where(codes < 0, -1, (codes == k).astype(int)))
        expect = krippendorff.alpha(binary.T, level_of_measurement="nominal")
        assert row(diag, label).alpha == pytest.approx(expect)
        assert row(diag, label).alpha == pytest.approx(
            krippendorff.alpha(as_float(d.presence(label).codes).T, level_of_measurement="nominal"))
        # p_s(k) = sum r(r-1) / sum r(m_u - 1), by direct counting of ordered pairs of coders.
        agree = total = 0
        for unit in codes:
            vals = unit[unit >= 0]
            for i, j in itertools.permutations(range(len(vals)), 2):
                if vals[i] == k:
                    total += 1
                    agree += vals[j] == k
        assert row(diag, label).specific_agreement == pytest.approx(agree / total)
    assert diag.alpha == pytest.approx(krippendorff.alpha(as_float(codes).T,
                                                          level_of_measurement="nominal"))


def test_one_vs_rest_kappa_two_coders_against_sklearn(rng):
    codes = simulate_codes(rng, 150, 2, 3, alpha=0.5, missing=0.1, coder_bias=0.5)
    labels = ["a", "b", "c"]
    d = from_table(as_labels(codes, labels), categories=labels)
    diag = diagnose_codes(d, n_resamples=0)
    both = (codes >= 0).all(axis=1)
    for k, label in enumerate(labels):
        expect = cohen_kappa_score(codes[both, 0] == k, codes[both, 1] == k)
        assert row(diag, label).kappa == pytest.approx(expect)
        assert row(diag, label).kappa_method == "cohen"


def test_one_vs_rest_kappa_several_coders_against_statsmodels_fleiss(rng):
    codes = simulate_codes(rng, 100, 4, 3, alpha=0.5)
    labels = ["a", "b", "c"]
    d = from_table(as_labels(codes, labels), categories=labels)
    diag = diagnose_codes(d, n_resamples=0)
    for k, label in enumerate(labels):
        yes = (codes == k).sum(axis=1)
        expect = sm_fleiss_kappa(np.column_stack([yes, 4 - yes]))
        assert row(diag, label).kappa == pytest.approx(expect)
        assert row(diag, label).kappa_method == "fleiss"


@pytest.mark.parametrize("seed,m,missing", [(11, 2, 0.0), (12, 3, 0.2), (13, 4, 0.0)])
def test_merged_alpha_against_krippendorff_on_relabelled_data(seed, m, missing):
    rng = np.random.default_rng(seed)
    codes = simulate_codes(rng, 100, m, 4, alpha=0.5, missing=missing)
    labels = ["a", "b", "c", "d"]
    d = from_table(as_labels(codes, labels), categories=labels)
    diag = diagnose_codes(d, n_resamples=0)
    base = krippendorff.alpha(as_float(codes).T, level_of_measurement="nominal")
    assert diag.alpha == pytest.approx(base)
    for pair in diag.confused_pairs.itertuples():
        merged = d.merge({pair.code_b: pair.code_a})
        expect = krippendorff.alpha(as_float(merged.codes).T, level_of_measurement="nominal")
        assert pair.alpha_if_merged == pytest.approx(expect)
        assert pair.delta_alpha == pytest.approx(expect - base)


def test_prevalence_and_bias_index_several_coders_by_definition(rng):
    codes = simulate_codes(rng, 90, 3, 2, alpha=0.5, missing=0.1, coder_bias=0.5)
    d = from_table(as_labels(codes, ["no", "yes"]), categories=["no", "yes"])
    diag = diagnose_codes(d, n_resamples=0)
    # PI = 2 n_k / n - 1 over pairable values; BI = mean over coder pairs of |b - c| / N_pair.
    pairable = (codes >= 0).sum(axis=1) >= 2
    vals = codes[pairable]
    n = (vals >= 0).sum()
    n_yes = (vals == 1).sum()
    assert row(diag, "yes").prevalence_index == pytest.approx(2 * n_yes / n - 1)
    bis = []
    for i, j in itertools.combinations(range(3), 2):
        both = (codes[:, i] >= 0) & (codes[:, j] >= 0)
        b = ((codes[both, i] == 1) & (codes[both, j] == 0)).sum()
        c = ((codes[both, i] == 0) & (codes[both, j] == 1)).sum()
        bis.append(abs(b - c) / both.sum())
    assert row(diag, "yes").bias_index == pytest.approx(np.mean(bis))


# -----------------------------------------------------------------------------------------
# Status, ranking, reasons, bootstrap, output
# -----------------------------------------------------------------------------------------

def test_status_rules_and_ranking():
    # Codes: "main" common and reliable, "vague" confused with "main", "rare" used on 2
    # units, "solo" used by amara only, "unused" in the codebook but never applied.
    t = ([["main", "main"]] * 30 + [["vague", "vague"]] * 6 + [["vague", "main"]] * 6
         + [["main", "vague"]] * 2 + [["rare", "rare"], ["rare", "main"]]
         + [["solo", "main"]] * 6)
    d = from_table(t, coders=["amara", "ben"], categories=["main", "vague", "rare", "solo", "unused"])
    diag = diagnose_codes(d, n_resamples=0, minimum=0.8)
    frame = diag.to_frame()
    status = dict(zip(frame.code, frame.status))
    assert status["rare"] == "too rare"
    assert status["unused"] == "undefined"
    assert status["vague"] == "below minimum"
    assert status["solo"] == "below minimum"
    assert "used by amara only" in row(diag, "solo").reason
    assert "confused with main in 100% of its disagreements" in row(diag, "vague").reason
    assert "not used by any coder" in row(diag, "unused").reason
    # Worst first: below minimum (lowest alpha first), then too rare, undefined, ok.
    assert list(frame.status) == sorted(frame.status, key=["below minimum", "too rare",
                                                           "undefined", "ok"].index)
    below = frame[frame.status == "below minimum"]
    assert list(below.alpha) == sorted(below.alpha)
    assert list(frame["rank"]) == list(range(1, 6))
    assert np.isnan(row(diag, "unused").alpha)
    for col in ["code", "status", "reason", "rank", "alpha", "ci_low", "ci_high",
                "specific_agreement", "kappa", "prevalence_index", "bias_index", "mcnemar_p_holm",
                "n_pairable", "uses_amara", "uses_ben"]:
        assert col in frame.columns


def test_min_units_per_code_is_a_parameter():
    t = [["a", "a"]] * 3 + [["b", "b"]] * 10 + [["a", "b"]]
    d = from_table(t)
    assert row(diagnose_codes(d, n_resamples=0), "a").status == "too rare"
    assert row(diagnose_codes(d, n_resamples=0, min_units_per_code=2), "a").status != "too rare"


def test_bootstrap_interval_seeded_and_shared(rng):
    codes = simulate_codes(rng, 80, 3, 3, alpha=0.6, missing=0.1)
    d = from_table(as_labels(codes, ["a", "b", "c"]))
    one = diagnose_codes(d, n_resamples=300, seed=7)
    two = diagnose_codes(d, n_resamples=300, seed=7)
    pd.testing.assert_frame_equal(one.per_code, two.per_code)
    frame = one.per_code
    assert (frame.ci_low <= frame.alpha).all() and (frame.alpha <= frame.ci_high).all()
    assert one.bootstrap.replicates == 300 and one.bootstrap.seed == 7
    none = diagnose_codes(d, n_resamples=0)
    assert none.per_code.ci_low.isna().all() and none.bootstrap is None


def test_percentile_interval_matches_direct_resampling():
    # The per-code percentile interval equals resampling units directly with the same counts:
    # checked through its definition (all codes from one multinomial draw per replicate).
    rng = np.random.default_rng(3)
    codes = simulate_codes(rng, 60, 2, 2, alpha=0.6)
    d = from_table(as_labels(codes, ["n", "y"]))
    diag = diagnose_codes(d, n_resamples=2000, seed=1, ci_method="percentile")
    boot = []
    g = np.random.default_rng(99)
    for _ in range(2000):
        idx = g.integers(0, 60, 60)
        boot.append(krippendorff.alpha(as_float(codes[idx]).T, level_of_measurement="nominal"))
    low, high = np.nanquantile(boot, [0.025, 0.975])
    y = row(diag, "y")
    assert y.ci_low == pytest.approx(low, abs=0.05)
    assert y.ci_high == pytest.approx(high, abs=0.05)


def test_to_dict_is_json_and_matches_frame(rng):
    codes = simulate_codes(rng, 50, 3, 3, alpha=0.5, missing=0.2)
    d = from_table(as_labels(codes, ["a", "b", "c"]), coders=["amara", "ben", "chen"])
    diag = diagnose_codes(d, n_resamples=100, seed=2)
    out = diag.to_dict()
    text = json.dumps(out, allow_nan=False)
    back = json.loads(text)
    assert [c["code"] for c in back["codes"]] == list(diag.to_frame().code)
    assert set(back) >= {"codes", "confused_pairs", "usage", "marginal_homogeneity", "alpha", "notes"}
    assert back["marginal_homogeneity"]["test"] is None          # three coders
    assert back["bootstrap"]["seed"] == 2


def test_missing_units_are_counted_in_notes():
    t = [["a", "a"], ["b", None], [None, "a"], ["a", "b"], ["b", "b"]] * 3
    diag = diagnose_codes(from_table(t), n_resamples=0, min_units_per_code=1)
    assert diag.n_pairable_units == 9
    assert any(n.code == "units-left-out" and "6 of 15" in n.message for n in diag.notes)


def test_bad_input_raises_agree_error():
    with pytest.raises(AgreeError):
        diagnose_codes(from_table([["a"], ["b"]]))
    with pytest.raises(AgreeError):
        diagnose_codes(from_table([["a", "b"]]), minimum=3)
    with pytest.raises(AgreeError):
        confusion_table(from_table([["a", "b", "a"]]), directed=True)
    with pytest.raises(AgreeError):
        confusion_table(from_table([["a", "b", "a"]]), directed=True, coders=["coder_1", "nobody"])
    with pytest.raises(AgreeError):
        diagnose_coders(from_table([["a", "b"]]), level="interval")


# -----------------------------------------------------------------------------------------
# diagnose_coders
# -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval"])
def test_leave_one_out_and_pairwise_against_krippendorff(rng, level):
    codes = simulate_codes(rng, 70, 4, 5, alpha=0.5, missing=0.15)
    values = [1, 2, 3, 4, 5]
    data = from_table(as_labels(codes, values), coders=["amara", "ben", "chen", "dara"],
                      categories=values)
    diag = diagnose_coders(data, level=level, n_resamples=200, seed=5)
    reliability = as_float(codes, values).T
    full = krippendorff.alpha(reliability, level_of_measurement=level, value_domain=values)
    assert diag.alpha == pytest.approx(full)
    loo = diag.leave_one_out.set_index("coder")
    for i, name in enumerate(data.coders):
        rest = np.delete(reliability, i, axis=0)
        expect = krippendorff.alpha(rest, level_of_measurement=level, value_domain=values)
        assert loo.loc[name, "alpha_without"] == pytest.approx(expect)
        assert loo.loc[name, "delta"] == pytest.approx(expect - full)
        assert loo.loc[name, "delta_ci_low"] <= loo.loc[name, "delta"] <= loo.loc[name, "delta_ci_high"]
    for pair in diag.pairwise.itertuples():
        i, j = data.coders.index(pair.coder_a), data.coders.index(pair.coder_b)
        both = (codes[:, i] >= 0) & (codes[:, j] >= 0)
        assert pair.n_units == both.sum()
        assert pair.kappa == pytest.approx(cohen_kappa_score(codes[both, i], codes[both, j]))
        assert pair.percent_agreement == pytest.approx(np.mean(codes[both, i] == codes[both, j]))
        assert pair.alpha == pytest.approx(krippendorff.alpha(
            reliability[[i, j]], level_of_measurement=level, value_domain=values))
    matrix = diag.pairwise_matrix("kappa")
    assert matrix.shape == (4, 4) and np.isnan(matrix.loc["amara", "amara"])
    assert matrix.loc["ben", "amara"] == matrix.loc["amara", "ben"]


def test_code_use_table_by_hand():
    t = [["a", "a", "b"], ["a", "b", "b"], ["b", None, "b"], ["a", "a", "a"]]
    diag = diagnose_coders(from_table(t, coders=["amara", "ben", "chen"]), n_resamples=0)
    table = diag.code_use_table()
    assert table.loc["amara", "a"] == pytest.approx(3 / 4)
    assert table.loc["ben", "a"] == pytest.approx(2 / 3)
    assert table.loc["chen", "b"] == pytest.approx(3 / 4)
    use = diag.code_use.set_index(["coder", "code"])
    # Others of amara: ben 2 of 3 + chen 1 of 4 -> 3 / 7 pooled; median of 2/3 and 1/4 = 11/24.
    assert use.loc[("amara", "a"), "share_others"] == pytest.approx(3 / 7)
    assert use.loc[("amara", "a"), "share_median_others"] == pytest.approx((2 / 3 + 1 / 4) / 2)
    assert use.loc[("amara", "a"), "ratio"] == pytest.approx(0.75 / ((2 / 3 + 1 / 4) / 2))
    frame = diag.to_frame()
    assert list(frame.coder) == ["amara", "ben", "chen"]
    json.dumps(diag.to_dict(), allow_nan=False)


def test_two_coders_leave_one_out_is_undefined():
    diag = diagnose_coders(from_table([["a", "a"], ["a", "b"], ["b", "b"]]), n_resamples=0)
    assert diag.leave_one_out.alpha_without.isna().all()
    assert any(n.code == "leave-one-out-needs-three" for n in diag.notes)


def test_set_valued_coders():
    t = [[{"x"}, {"x"}, {"x", "y"}], [{"y"}, {"y"}, set()], [{"x"}, {"y"}, {"y"}],
         [{"x", "y"}, {"x", "y"}, {"x"}]]
    diag = diagnose_coders(from_table(t, coders=["a", "b", "c"]), n_resamples=0, distance="jaccard")
    assert diag.level == "jaccard"
    as_sets = [[frozenset(v) for v in u] for u in t]
    assert diag.alpha == pytest.approx(_jaccard_alpha(as_sets))
    loo = diag.leave_one_out.set_index("coder")
    assert loo.loc["c", "alpha_without"] == pytest.approx(_jaccard_alpha([u[:2] for u in as_sets]))
    masi = diagnose_coders(from_table(t, coders=["a", "b", "c"]), n_resamples=0)
    assert masi.level == "masi"
    assert masi.alpha == pytest.approx(_jaccard_alpha(as_sets, _masi))
    assert set(diag.code_use.code) == {"x", "y"}


# -----------------------------------------------------------------------------------------
# Properties (hypothesis)
# -----------------------------------------------------------------------------------------

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), m=st.integers(2, 4), q=st.integers(2, 5),
       n=st.integers(5, 60), missing=st.sampled_from([0.0, 0.2]))
def test_per_code_results_do_not_depend_on_coder_order(seed, m, q, n, missing):
    rng = np.random.default_rng(seed)
    codes = simulate_codes(rng, n, m, q, alpha=0.4, missing=missing)
    labels = [f"k{i}" for i in range(q)]
    d = from_table(as_labels(codes, labels), categories=labels)
    flipped = from_table(as_labels(codes[:, ::-1], labels), categories=labels)
    a = diagnose_codes(d, n_resamples=0).per_code
    b = diagnose_codes(flipped, n_resamples=0).per_code
    for col in ["alpha", "specific_agreement", "prevalence_index", "percent_agreement",
                "n_pairable", "top_confusion_share"]:
        assert np.allclose(a[col].astype(float), b[col].astype(float), equal_nan=True)
    # Shares of all disagreement add up to 1 over the confused pairs.
    pairs = diagnose_codes(d, n_resamples=0).confused_pairs
    if len(pairs):
        assert pairs.share.sum() == pytest.approx(1.0)
        assert (pairs.alpha_if_merged.notna() | pairs.delta_alpha.isna()).all()


# -----------------------------------------------------------------------------------------
# Status by the interval, not the estimate (Krippendorff 2004: judge by the lower end)

SAMPLES = __import__("pathlib").Path(__file__).resolve().parents[2] / "samples"


def _multicode():
    from agree.io.readers import read
    return read(SAMPLES / "multicode.xlsx")


@pytest.fixture(scope="module")
def multicode_diag():
    return diagnose_codes(_multicode(), n_resamples=1000, seed=5)


def test_status_compares_the_one_sided_lower_bound_with_the_minimum(multicode_diag):
    frame = multicode_diag.to_frame()
    assert set(frame.status) <= {"below minimum", "uncertain", "too rare", "undefined", "ok"}
    assert "lower_bound" in frame.columns
    for r in frame.itertuples():
        if r.status in ("too rare", "undefined"):
            continue
        assert r.judged_on == "interval"
        # the one-sided bound lies inside the two-sided interval
        assert r.ci_low <= r.lower_bound <= r.ci_high
        if r.alpha < 0.8:
            assert r.status == "below minimum"
        elif r.lower_bound > 0.8:        # strictly above: the one rule (agree.core.results.reaches_minimum)
            assert r.status == "ok"
            assert "one-sided 95% lower bound is above" in r.reason
        else:
            assert r.status == "uncertain"
            assert "one-sided 95% lower bound does not" in r.reason
    # the review's case: Conflict .84 with an interval reaching far below .8 is not "ok"
    conflict = frame.set_index("code").loc["Conflict"]
    assert conflict.alpha >= 0.8 and conflict.lower_bound < 0.8
    assert conflict.status == "uncertain"
    # ranked in order of concern
    order = ["below minimum", "uncertain", "too rare", "undefined", "ok"]
    assert list(frame.status) == sorted(frame.status, key=order.index)


def test_without_bootstrap_the_estimate_is_judged_and_the_reason_says_so():
    diag = diagnose_codes(_multicode(), n_resamples=0)
    frame = diag.to_frame().set_index("code")
    assert frame.loc["Conflict", "status"] == "ok"          # .84 >= .8 on the estimate
    assert frame.loc["Conflict", "judged_on"] == "estimate"
    assert "no bootstrap" in frame.loc["Conflict", "reason"]
    assert "estimate alone" in frame.loc["Coordination", "reason"]
    assert any("no bootstrap" in n.message for n in diag.notes if n.code == "minimum")


def test_overall_alpha_uses_the_same_set_distance_as_score():
    from agree import krippendorff_alpha, score
    d = _multicode()
    masi = diagnose_codes(d, n_resamples=0)
    scored = score(d, n_resamples=0).coefficients["krippendorff_alpha"].estimate
    assert masi.alpha == pytest.approx(scored)
    assert masi.to_dict()["alpha_level"] == "sets of codes, masi distance"
    jac = diagnose_codes(d, n_resamples=0, distance="jaccard")
    assert jac.alpha == pytest.approx(krippendorff_alpha(d, distance="jaccard", n_resamples=0).estimate)
    assert jac.alpha != pytest.approx(masi.alpha)
    assert diagnose_coders(d, n_resamples=0).alpha == pytest.approx(scored)
    with pytest.raises(AgreeError) as err:
        diagnose_codes(d, n_resamples=0, distance="cosine")
    assert err.value.code == "bad-option"
    # single codes: no distance
    assert diagnose_codes(from_table([["a", "a"], ["a", "b"], ["b", "b"]]), n_resamples=0).distance is None


def test_kappa_paradox_needs_high_specific_agreement():
    # Two coders, 100 units: both yes 88, yes/no 5, no/yes 5, both no 2. Percent agreement .90
    # and kappa .23 (Feinstein & Cicchetti 1990's first paradox; hand computation: p_e =
    # .93² + .07² = .8698). Specific agreement for "yes" 176/186 = .946 (a paradox: the coders
    # agree on the code), for "no" 4/14 = .286 (no paradox: they rarely agree on "no").
    d = table_data([[88, 5], [5, 2]], ["yes", "no"])
    diag = diagnose_codes(d, n_resamples=0, min_units_per_code=1)
    yes, no = row(diag, "yes"), row(diag, "no")
    assert yes.percent_agreement == pytest.approx(0.90) and no.percent_agreement == pytest.approx(0.90)
    assert yes.kappa == pytest.approx((0.90 - 0.8698) / (1 - 0.8698))
    assert yes.specific_agreement == pytest.approx(176 / 186)
    assert no.specific_agreement == pytest.approx(4 / 14)
    assert bool(yes.paradox) and "paradox" in yes.explanation
    assert not bool(no.paradox)


def test_bootstrap_notes_name_the_code():
    # "rare" appears once: most replicates have no "rare" at all (undefined alpha)
    t = [["rare", "x"]] + [["x", "x"], ["y", "y"], ["x", "y"]] * 10
    # (the ordinary bootstrap: with the pseudo-unit every draw has the code once more, so none is undefined)
    diag = diagnose_codes(from_table(t), n_resamples=300, seed=1, min_units_per_code=1, ci_method="percentile")
    undefined = [n.message for n in diag.notes if n.code == "undefined-replicates"]
    assert undefined and all(m.startswith("code '") for m in undefined)
    assert any("code 'rare'" in m for m in undefined)


def test_rating_scale_gets_a_caution():
    d = from_table([[1, 2], [2, 2], [3, 4], [4, 4], [5, 5]], level="ordinal")
    diag = diagnose_codes(d, n_resamples=0, min_units_per_code=1)
    assert any(n.code == "rating-scale" and "limited use" in n.message for n in diag.notes)


# -----------------------------------------------------------------------------------------
# Cluster resampling (Efron & Tibshirani 1993: resample the independent units, here groups)

def _replicated(rng, n=60, copies=5):
    codes = simulate_codes(rng, n, 2, 3, alpha=0.6)
    labels = as_labels(codes, ["a", "b", "c"])
    base = from_table(labels)
    big = from_table(np.repeat(np.asarray(labels, dtype=object), copies, axis=0))
    groups = np.repeat(np.arange(n), copies)
    return base, big, groups


def _width(frame, code):
    r = frame.set_index("code").loc[code]
    return r.ci_high - r.ci_low


def test_cluster_bootstrap_resamples_whole_groups(rng):
    # Each unit copied five times: resampling the copies as if independent gives intervals
    # about sqrt(5) times too narrow; resampling the groups whole gives the width of the
    # original data (the copies add no information).
    base, big, groups = _replicated(rng)
    kw = dict(n_resamples=1500, seed=3, ci_method="percentile", minimum=None)
    w_base = _width(diagnose_codes(base, **kw).per_code, "a")
    w_units = _width(diagnose_codes(big, **kw).per_code, "a")
    clustered = diagnose_codes(big, cluster=groups, **kw)
    w_groups = _width(clustered.per_code, "a")
    assert w_groups == pytest.approx(w_base, rel=0.2)
    assert w_units < 0.7 * w_groups
    assert clustered.bootstrap.unit == "cluster:cluster" and clustered.n_clusters == 60
    assert clustered.to_dict()["n_clusters"] == 60
    assert not any(n.code == "few-clusters" for n in clustered.notes)
    # the point estimates do not depend on the resampling
    assert row(clustered, "a").alpha == pytest.approx(row(diagnose_codes(big, **kw), "a").alpha)


def test_cluster_column_and_few_clusters_note(rng):
    t = simulate_codes(rng, 40, 3, 3, alpha=0.6)
    labels = as_labels(t, ["a", "b", "c"])
    d = from_table(labels)
    from dataclasses import replace
    d = replace(d, columns={"doc": np.repeat([f"d{i}" for i in range(8)], 5)})
    diag = diagnose_codes(d, cluster="doc", n_resamples=200, seed=1)
    assert diag.cluster == "doc" and diag.n_clusters == 8
    assert diag.bootstrap.unit == "cluster:doc"
    assert any(n.code == "few-clusters" and "8 clusters (doc)" in n.message for n in diag.notes)
    coders = diagnose_coders(d, cluster="doc", n_resamples=200, seed=1)
    assert coders.bootstrap.unit == "cluster:doc" and coders.n_clusters == 8
    assert coders.leave_one_out.delta_ci_low.notna().all()
    with pytest.raises(AgreeError) as err:
        diagnose_codes(d, cluster="nope", n_resamples=10)
    assert err.value.code == "cluster"
    with pytest.raises(AgreeError):
        diagnose_codes(d, cluster=np.arange(3), n_resamples=10)


# -- API review: settings, empty data, notebook display, pair units ----------------------------

@pytest.mark.parametrize("kwargs, code", [
    ({"confidence_level": 95}, "ci"),
    ({"confidence_level": 0}, "ci"),
    ({"n_resamples": -5}, "boot"),
    ({"n_resamples": 2.5}, "boot"),
    ({"ci_method": "normal"}, "ci"),
])
def test_bad_settings_raise_agree_error(kwargs, code):
    # the codes agree.score uses for the same settings
    x = np.array([[0, 0, 1], [1, 1, 1], [0, 1, 0], [1, 1, 1], [0, 0, 0]])
    for diagnose in (diagnose_codes, diagnose_coders):
        with pytest.raises(AgreeError) as err:
            diagnose(x, **kwargs)
        assert err.value.code == code


@pytest.mark.parametrize("minimum, ok", [(-1.0, True), (-0.2, True), (1.0, True), (1.5, False), (80, False)])
def test_minimum_between_minus_one_and_one(minimum, ok):
    # a coefficient's minimum lives on its own scale, [-1, 1], as in agree.score
    x = np.array([[0, 0], [1, 1], [0, 1], [1, 1], [0, 0]])
    if ok:
        assert diagnose_codes(x, minimum=minimum, n_resamples=0).minimum == minimum
    else:
        with pytest.raises(AgreeError) as err:
            diagnose_codes(x, minimum=minimum, n_resamples=0)
        assert err.value.code == "minimum"


@pytest.mark.parametrize("table", [np.empty((0, 2)), np.full((3, 2), np.nan)])
def test_no_units_raises_empty(table):
    for diagnose in (diagnose_codes, diagnose_coders):
        with pytest.raises(AgreeError) as err:
            diagnose(table, n_resamples=0)
        assert err.value.code == "empty"


def test_pair_units_match_a_count_unit_by_unit():
    # the vectorised count of units with a c/k confusion against the definition, unit by unit
    rng = np.random.default_rng(3)
    codes = rng.integers(0, 6, size=(80, 3)).astype(float)
    codes[rng.random(codes.shape) < 0.15] = np.nan
    d = from_table(codes)
    pairs = diagnose_codes(d, n_resamples=0).confused_pairs
    labels = d.labels().to_numpy()
    for row in pairs.itertuples(index=False):
        expected = 0
        for unit in labels:
            given = [v for v in unit if v is not None and not (isinstance(v, float) and np.isnan(v))]
            if len(given) >= 2 and row.code_a in given and row.code_b in given:
                expected += 1
        assert row.units == expected


def test_notebook_display_escapes_text_and_shows_nan_as_dash():
    x = pd.DataFrame({"ann": ["<b>x</b>", "y", "y", "x"], "bo": ["<b>x</b>", "y", "<b>x</b>", "y"],
                      "cy": ["<b>x</b>", "y", "y", None]})
    codes = diagnose_codes(x, n_resamples=0)
    page = codes._repr_html_()
    assert "<table" in page and "Code diagnostics" in page
    assert "&lt;b&gt;x&lt;/b&gt;" in page and "<b>x</b>" not in page
    assert "<td>–</td>" in page and ">nan<" not in page.lower()   # no interval: en dashes
    coders = diagnose_coders(x, n_resamples=0)._repr_html_()
    assert "Coder diagnostics" in coders and "<table" in coders and ">nan<" not in coders.lower()


def _binary_code(n_units: int, n_disagree: int) -> "pd.DataFrame":
    """Two coders, one code 'k' against 'other': half the units 'k' by both, n_disagree split."""
    a = ["k"] * (n_units // 2) + ["other"] * (n_units - n_units // 2)
    b = list(a)
    for i in range(n_disagree):
        j = i if i % 2 == 0 else n_units - 1 - i
        b[j] = "other" if a[j] == "k" else "k"
    return pd.DataFrame({"A": a, "B": b})


def test_status_uses_the_same_one_sided_rule_as_score_min():
    # A code whose two-sided lower end is below the minimum while its one-sided bound (the rule
    # of `agree score --min`) is above it must be "ok", not "uncertain"; and the bound is the
    # same quantile score computes for alpha on the code's presence/absence recoding.
    from agree import krippendorff_alpha
    from agree.core.model import as_coding_data

    found = False
    for n, d in ((200, 13), (300, 22), (400, 30), (200, 6)):
        data = as_coding_data(_binary_code(n, d))
        diag = diagnose_codes(data, minimum=0.8, n_resamples=2000, seed=11, ci_method="percentile",
                              min_units_per_code=1)
        row = diag.per_code.set_index("code").loc["k"]
        # one-sided 95% bound = 5% quantile of the same replicates; two-sided lower = 2.5%
        assert row.ci_low <= row.lower_bound
        if row.alpha >= 0.8:
            assert row.status == ("ok" if row.lower_bound >= 0.8 else "uncertain")
        if row.ci_low < 0.8 <= row.lower_bound:
            found = True
            assert row.status == "ok"
        # score's decision on the same recoding, with percentile intervals, agrees on the side
        res = krippendorff_alpha(data.presence("k"), n_resamples=2000, seed=11, ci_method="percentile",
                                 minimum=0.8)
        assert res.estimate == pytest.approx(row.alpha)
        assert abs(res.lower_bound - row.lower_bound) < 0.03      # different resamples, same quantile
    assert found, "no case between the two bounds: adjust the sizes"


def test_lower_bound_is_the_quantile_at_one_minus_the_level():
    # property: with percentile intervals the bound is the (1 - level) quantile of the
    # replicates, between the two-sided lower end and the estimate for a symmetric bootstrap
    data = _binary_code(120, 10)
    for level in (0.9, 0.95):
        diag = diagnose_codes(data, n_resamples=1500, seed=2, ci_method="percentile",
                              confidence_level=level, min_units_per_code=1)
        row = diag.per_code.set_index("code").loc["k"]
        assert row.ci_low < row.lower_bound < row.ci_high
        assert f"one-sided {100 * level:g}% lower bound" in row.reason


def test_bounds_below_the_minimum_are_never_shown_as_reaching_it():
    from agree.core.format import format_bound

    assert format_bound(0.79977, 0.8) == ".799"        # two decimals would print ".80"
    assert format_bound(0.7999999, 0.8) == ".799"
    assert format_bound(0.8, 0.8) == ".800"
    assert format_bound(0.8056, 0.8) == ".806"         # away from the minimum: nearest
    assert format_bound(0.5726, 0.8) == ".573"
    assert format_bound(0.79977) == ".799"             # no minimum given: always down
    assert format_bound(-0.0123) == "−.013"            # down, towards -inf
    assert format_bound(float("nan")) == "–" and format_bound(None) == "–"
    # property: never shown at or above a minimum the bound does not reach
    rng = np.random.default_rng(0)
    for v in rng.uniform(0.79, 0.81, 2000):
        shown = float(format_bound(v, 0.8))
        assert (shown >= 0.8) == (v >= 0.8) and abs(shown - v) < 0.001


def test_overall_alpha_comes_with_the_same_interval_as_krippendorff_alpha():
    from pathlib import Path

    samples = Path(__file__).resolve().parents[2] / "samples"
    data = agree.read(samples / "round1.csv", codebook=samples / "codebook.csv")
    codes = agree.diagnose_codes(data, seed=3, n_resamples=400)
    alpha = agree.krippendorff_alpha(data, seed=3, n_resamples=400)
    assert (codes.alpha, codes.alpha_ci_low, codes.alpha_ci_high) == pytest.approx(
        (alpha.estimate, alpha.ci_low, alpha.ci_high), abs=1e-12)
    assert codes.to_dict()["alpha_ci_low"] == pytest.approx(alpha.ci_low)
    assert agree.diagnose_codes(data, seed=3, n_resamples=0).alpha_ci_low is None
