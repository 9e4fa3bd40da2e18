"""Which codes of the codebook drive disagreement, and why (`diagnose_codes`).

The work is done in the sections below, each a small function passing a frozen record:

1. `_Presence`: each code present or absent, per distinct pattern of codes (or per unit, when
   groups are resampled) and coder, with how many units each row stands for;
2. `_agreement`: alpha and specific agreement per code, with intervals from the same resamples;
3. `_chance`: kappa, percent agreement, prevalence and bias per code;
4. `_usage`: each coder's use of each code, and the tests of equal use;
5. `confused_pairs` (confusion.py): confusions and alpha after merging two codes;
6. `_judge`: status, reason and explanation of one code from its `_CodeFacts`.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from agree.analysis.diagnostics.common import CoderShares, bootstrap_intervals, check_data, cluster_labels, set_distance
from agree.analysis.diagnostics.confusion import Confusions, confused_pairs, directed_table
from agree.analysis.diagnostics.homogeneity import clustered_mcnemar, cochran_q, holm, mcnemar, stuart_maxwell
from agree.analysis.diagnostics.results import STATUSES, CodeDiagnostics
from agree.core.constants import (
    DEFAULT_CI_METHOD,
    DEFAULT_CONFIDENCE,
    DEFAULT_MINIMUM,
    DEFAULT_RESAMPLES,
    MIN_UNITS_PER_CODE,
)
from agree.core.format import format_value, percent_label, signed
from agree.core.model import CodingData
from agree.core.results import BootstrapInfo, Note, json_safe, reaches_minimum
from agree.stats.coefficients import krippendorff_alpha
from agree.stats.kernels import alpha_from_sums, delta_for, membership
from agree.stats.patterns import compress
from agree.stats.resampling import PseudoUnits, check_settings

SIGNIFICANCE = 0.05          # Holm-adjusted p below this flags unequal use
CONFUSION_REASON = 0.25      # name the main confusion in a reason from this share upward
PARADOX_PREVALENCE = 0.5     # |PI| from which prevalence explains high p_o with low kappa
PARADOX_BIAS = 0.1           # |BI| from which bias is named as a cause


# =========================================================================================
# 1. presence of each code
# =========================================================================================

@dataclass(frozen=True)
class _Presence:
    """Each code present or absent, on rows that stand for `w` units each: X (P, m, q) 1 where
    coder i applied code k, r (P, q) how many coders applied it, m_u (P,) how many coders coded
    the row's units.

    The rows are the distinct ordered patterns of codes (every statistic here depends on a
    unit's codes only, and a million units have a few hundred patterns); with groups to resample
    they are the units themselves (w = 1), since a group is a set of units."""

    x: np.ndarray
    r: np.ndarray
    m_u: np.ndarray
    observed: np.ndarray
    w: np.ndarray

    @classmethod
    def of(cls, data: CodingData, *, by_unit: bool = False) -> "_Presence":
        if by_unit:
            codes, w = data.codes, np.ones(data.n_units, dtype=np.int64)
        else:
            patterns = compress(data.codes, len(data.values), ordered=True)
            codes, w = patterns.codes, patterns.counts
        x = membership(data)[np.where(codes < 0, len(data.values), codes)]
        observed = codes >= 0
        return cls(x, x.sum(axis=1), observed.sum(axis=1).astype(float), observed, w)

    @property
    def pairable(self) -> np.ndarray:
        return self.m_u >= 2

    def total(self, values: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Σ over units of per-row `values` (rows first), each row counted w times; with
        `rows` (a mask), `values` are of those rows only."""
        w = self.w if rows is None else self.w[rows]
        return np.tensordot(w.astype(float), values, axes=(0, 0))

    def two_by_two(self, a: int, b: int) -> tuple[np.ndarray, ...]:
        """Coders a and b on the units both coded, per code: (both, a only, b only, neither)."""
        both = self.observed[:, a] & self.observed[:, b]
        xa, xb = self.x[both, a, :], self.x[both, b, :]
        return (self.total(xa * xb, both), self.total(xa * (1 - xb), both), self.total((1 - xa) * xb, both),
                self.total((1 - xa) * (1 - xb), both))

    def unit_agreement(self) -> np.ndarray:
        """(q,) mean over pairable units of the share of agreeing pairs of coders on each
        code's presence."""
        mm = self.m_u[self.pairable, None]
        rr = self.r[self.pairable]
        with np.errstate(divide="ignore", invalid="ignore"):
            per_row = (rr * (rr - 1) + (mm - rr) * (mm - rr - 1)) / (mm * (mm - 1))
        return self.total(per_row, self.pairable) / self.w[self.pairable].sum()


# =========================================================================================
# 2. agreement on each code: alpha and specific agreement with intervals
# =========================================================================================

def _code_features(r: np.ndarray, m_u: np.ndarray) -> np.ndarray:
    """Features per unit: [m_u, r_uk (q), r_uk(r_uk-1)/(m_u-1) (q), r_uk(r_uk-1) (q),
    r_uk(m_u-1) (q)], zero for units with fewer than two values."""
    ok = (m_u >= 2)[:, None]
    m = m_u[:, None].astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        o_kk = np.where(ok, r * (r - 1) / (m - 1), 0.0)
    return np.hstack([np.where(ok, m, 0.0), np.where(ok, r, 0.0), o_kk,
                      np.where(ok, r * (r - 1), 0.0), np.where(ok, r * (m - 1), 0.0)])


def _code_finish(q: int):
    """Summed `_code_features` (..., 1 + 4q) -> (alpha_k, p_s(k)) for every code (..., 2q).

    alpha_k is nominal alpha on the k / not-k coincidence matrix, whose margins are n_k and
    n - n_k and whose off-diagonal cell is n_k - o_kk (METHODS 6.3)."""
    binary = delta_for("nominal", n_values=2)

    def finish(sums: np.ndarray) -> np.ndarray:
        n = sums[..., :1]
        n_k = sums[..., 1:1 + q]
        o_kk = sums[..., 1 + q:1 + 2 * q]
        agree_pairs = sums[..., 1 + 2 * q:1 + 3 * q]
        all_pairs = sums[..., 1 + 3 * q:1 + 4 * q]
        alpha = alpha_from_sums(2.0 * (n_k - o_kk), np.stack([n_k, n - n_k], axis=-1), binary)
        with np.errstate(divide="ignore", invalid="ignore"):
            ps = np.where(all_pairs > 0, agree_pairs / all_pairs, np.nan)
        return np.concatenate([alpha, ps], axis=-1)
    return finish


@dataclass(frozen=True)
class _Agreement:
    """Alpha and specific agreement of each code (arrays over codes) with their intervals."""

    alpha: np.ndarray
    alpha_low: np.ndarray
    alpha_high: np.ndarray
    lower_bound: np.ndarray
    p_value_min: np.ndarray
    specific: np.ndarray
    specific_low: np.ndarray
    specific_high: np.ndarray
    bootstrap: BootstrapInfo | None
    notes: tuple[Note, ...]


def _pseudo_units(q: int, m_u: np.ndarray) -> PseudoUnits:
    """The units a pseudo-unit may be, as far as the per-code statistics see them: s coders
    (2 up to the most any unit has), t of whom (0..s) apply code k. Each code's statistics
    depend on its own r_uk and m_u only, so these cover every possible unit."""
    width = max(2, int(m_u.max(initial=2)))
    sizes = [(s, t) for s in range(2, width + 1) for t in range(s + 1)]
    r = np.zeros((q * len(sizes), q))
    m = np.zeros(q * len(sizes))
    for i, (k, (s, t)) in enumerate(itertools.product(range(q), sizes)):  # candidates, not units
        r[i, k] = t
        m[i] = s
    return PseudoUnits(features=None, n_values=0, width=0, fixed=_code_features(r, m))


def _agreement(pres: _Presence, cats: list, *, clusters, cluster_name, **boot) -> _Agreement:
    q = len(cats)
    features = _code_features(pres.r, pres.m_u)
    finish = _code_finish(q)
    point = finish(pres.total(features))
    names = [f"code '{c}', α" for c in cats] + [f"code '{c}', specific agreement" for c in cats]
    # units where the coders split on the code: what each code's interval rests on
    split = pres.total(((pres.r > 0) & (pres.r < pres.m_u[:, None]))[pres.pairable], pres.pairable)
    iv = bootstrap_intervals(point, features, finish, clusters=clusters, cluster_name=cluster_name,
                             labels=names, pseudo=_pseudo_units(q, pres.m_u), disagreeing=np.tile(split, 2),
                             n_units=float(pres.w[pres.pairable].sum()), weights=pres.w, **boot)
    return _Agreement(alpha=point[:q], alpha_low=iv.low[:q], alpha_high=iv.high[:q],
                      lower_bound=iv.lower_bound[:q], p_value_min=iv.p_value_min[:q],
                      specific=point[q:], specific_low=iv.low[q:], specific_high=iv.high[q:],
                      bootstrap=iv.bootstrap, notes=iv.notes)


# =========================================================================================
# 3. kappa, percent agreement, prevalence and bias of each code
# =========================================================================================

def _cohen_2x2(a, b, c, d):
    n = a + b + c + d
    with np.errstate(divide="ignore", invalid="ignore"):
        po = (a + d) / n
        pe = ((a + b) * (a + c) + (c + d) * (b + d)) / n ** 2
        return np.where((n > 0) & (pe < 1), (po - pe) / (1 - pe), np.nan)


def _fleiss_binary(pres: _Presence) -> np.ndarray:
    """Fleiss' kappa for each code against the rest, for unequal numbers of coders: P_bar over
    units with m_u >= 2, pi_k over units with m_u >= 1 (METHODS 3.2). With complete data this
    is Fleiss' per-category kappa_j."""
    r, m_u = pres.r, pres.m_u
    any_ = m_u >= 1
    q = r.shape[1]
    with np.errstate(divide="ignore", invalid="ignore"):
        p_bar = pres.unit_agreement() if pres.pairable.any() else np.full(q, np.nan)
        pi = pres.total(r[any_] / m_u[any_, None], any_) / pres.w[any_].sum() if any_.any() else np.full(q, np.nan)
        p_e = pi ** 2 + (1 - pi) ** 2
        return np.where(p_e < 1, (p_bar - p_e) / (1 - p_e), np.nan)


@dataclass(frozen=True)
class _Chance:
    """What chance-corrected agreement on each code rests on (arrays over codes)."""

    kappa: np.ndarray
    kappa_method: str                # "cohen" (two coders) or "fleiss"
    percent: np.ndarray              # presence/absence agreement, mean over pairable units
    prevalence: np.ndarray           # PI
    bias: np.ndarray                 # BI (several coders: mean |b - c| / N over pairs)
    n_k: np.ndarray                  # pairable values that are, or contain, the code
    n: float                         # all pairable values
    units_with: np.ndarray           # pairable units where someone used the code
    n_pairable_units: int
    one_only: np.ndarray | None      # two coders: units only the first coder gave the code (b)
    other_only: np.ndarray | None    # ... only the second (c)


def _chance(pres: _Presence, m: int) -> _Chance:
    pairable = pres.pairable
    q = pres.r.shape[1]
    n = float(pres.total(pres.m_u[pairable], pairable))
    n_k = pres.total(pres.r[pairable], pairable)
    n_pairable_units = int(pres.w[pairable].sum())
    b = c = None
    if m == 2:
        a, b, c, d = pres.two_by_two(0, 1)
        kappa, method = _cohen_2x2(a, b, c, d), "cohen"
        n2 = a + b + c + d
        with np.errstate(divide="ignore", invalid="ignore"):
            bias = np.where(n2 > 0, (b - c) / n2, np.nan)
    else:
        kappa, method = _fleiss_binary(pres), "fleiss"
        parts = []
        for i, j in itertools.combinations(range(m), 2):  # a loop over pairs of coders
            a_, b_, c_, d_ = pres.two_by_two(i, j)
            tot = a_ + b_ + c_ + d_
            if tot.sum() > 0:
                parts.append(np.abs(b_ - c_) / np.where(tot > 0, tot, np.nan))
        bias = np.nanmean(np.vstack(parts), axis=0) if parts else np.full(q, np.nan)
    return _Chance(kappa=kappa, kappa_method=method,
                   percent=pres.unit_agreement() if n_pairable_units else np.full(q, np.nan),
                   prevalence=2.0 * n_k / n - 1.0 if n > 0 else np.full(q, np.nan), bias=bias,
                   n_k=n_k, n=n, units_with=pres.w[pairable] @ (pres.r[pairable] > 0),
                   n_pairable_units=n_pairable_units, one_only=b, other_only=c)


# =========================================================================================
# 4. each coder's use of each code, and tests of equal use
# =========================================================================================

USAGE_COLUMNS = ["code", "coder", "uses", "units_coded", "share", "share_others", "share_median_others", "ratio",
                 "test", "p_value", "p_holm", "flag"]


@dataclass(frozen=True)
class _Usage:
    """Each coder's use of each code ((m, q) arrays) and the per-code test of equal use."""

    shares: CoderShares
    flags: np.ndarray                # (m, q) "more", "less" or ""
    coder_test: np.ndarray           # (m, q) the test behind each coder's p
    coder_p: np.ndarray
    coder_p_holm: np.ndarray
    code_test: list                  # (q,) the per-code test
    code_stat: np.ndarray
    code_df: np.ndarray
    code_p: np.ndarray
    code_p_holm: np.ndarray
    notes: tuple[Note, ...]

    def frame(self, cats: list, coders: tuple) -> pd.DataFrame:
        s = self.shares
        rows = [{"code": cats[k], "coder": coders[i], "uses": s.uses[i, k], "units_coded": s.units_coded[i],
                 "share": s.share[i, k], "share_others": s.share_others[i, k],
                 "share_median_others": s.share_median_others[i, k], "ratio": s.ratio[i, k],
                 "test": self.coder_test[i, k], "p_value": self.coder_p[i, k], "p_holm": self.coder_p_holm[i, k],
                 "flag": self.flags[i, k]} for k in range(len(cats)) for i in range(len(coders))]
        return pd.DataFrame(rows, columns=USAGE_COLUMNS)


@dataclass(frozen=True)
class _PairTests:
    """McNemar's test of each pair of coders on each code: (m, m, q) arrays, symmetric p,
    `more[i, j, k]` True where coder i applied k to more of the units both coded than j."""

    stat: np.ndarray
    p: np.ndarray
    p_holm: np.ndarray
    more: np.ndarray
    less: np.ndarray
    test: np.ndarray                 # (m, m, q) object: the test of each pair


def _pair_tests(pres: _Presence, clusters: np.ndarray | None) -> _PairTests:
    """Every pair of coders on every code, on the units both coded: McNemar (exact below 25
    discordant units), or with `clusters` McNemar for units nested in groups (Durkalski et
    al. 2003). Holm over all pairs and codes."""
    m, q = pres.x.shape[1], pres.x.shape[2]
    stat, p = np.full((m, m, q), np.nan), np.full((m, m, q), np.nan)
    diff = np.zeros((m, m, q))
    test = np.full((m, m, q), None, dtype=object)
    pairs = list(itertools.combinations(range(m), 2))
    for i, j in pairs:  # a loop over pairs of coders
        both = pres.observed[:, i] & pres.observed[:, j]
        xi, xj = pres.x[both, i, :], pres.x[both, j, :]
        first, second = xi * (1 - xj), (1 - xi) * xj
        if clusters is None:
            st, pv, tt = mcnemar(pres.total(first, both), pres.total(second, both))
        else:   # rows are units here
            st, pv, tt = clustered_mcnemar(first, second, clusters[both])
        stat[i, j] = stat[j, i] = st
        p[i, j] = p[j, i] = pv
        test[i, j] = test[j, i] = np.array(tt, dtype=object)
        diff[i, j] = pres.total(first, both) - pres.total(second, both)
        diff[j, i] = -diff[i, j]
    upper = np.array([p[i, j] for i, j in pairs]) if pairs else np.zeros((0, q))
    adjusted = holm(upper.ravel()).reshape(upper.shape)
    p_holm = np.full((m, m, q), np.nan)
    for n, (i, j) in enumerate(pairs):
        p_holm[i, j] = p_holm[j, i] = adjusted[n]
    return _PairTests(stat, p, p_holm, diff > 0, diff < 0, test)


def _majority_p(p: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """(m, q): for each coder and code, the p-value at which the coder differs in `direction`
    from a strict majority of the other coders: the k-th smallest p over the others in that
    direction, k = floor((m - 1) / 2) + 1 (1 where fewer than k others lie that way)."""
    m = p.shape[0]
    need = (m - 1) // 2 + 1
    masked = np.where(direction & np.isfinite(p), p, np.inf)
    kth = np.sort(masked, axis=1)[:, need - 1, :]
    return np.where(np.isfinite(kth), kth, 1.0)


def _usage(pres: _Presence, chance: _Chance, n_units: int, clusters: np.ndarray | None = None) -> _Usage:
    """Each coder's use of each code, judged against the other coders.

    A coder is flagged "more" (or "less") on a code when McNemar's test against each other
    coder, Holm-adjusted over all pairs and codes, shows them using it more (less) than a
    strict majority of the others. One coder who over-uses a code is then named, and the
    accurate coders, who differ only from that one, are not. With two coders this is the
    per-code McNemar test. Per code, the omnibus test is McNemar (two coders) or Cochran's Q
    on the units every coder coded (more), Holm over codes; with units nested in groups the
    pairwise tests are McNemar's for clustered pairs (Durkalski et al. 2003) and Cochran's Q
    is not run (it assumes independent units)."""
    shares = CoderShares.of(pres.x, pres.observed, weights=pres.w)
    m, q = shares.uses.shape
    notes: list[Note] = []
    pairs = _pair_tests(pres, clusters)
    raw_more, raw_less = _majority_p(pairs.p, pairs.more), _majority_p(pairs.p, pairs.less)
    adj_more, adj_less = _majority_p(pairs.p_holm, pairs.more), _majority_p(pairs.p_holm, pairs.less)
    coder_p = np.minimum(raw_more, raw_less)
    coder_p_holm = np.minimum(adj_more, adj_less)
    untested = ~np.isfinite(shares.share)
    coder_p[untested] = np.nan
    coder_p_holm[untested] = np.nan
    flags = np.where(adj_more < SIGNIFICANCE, "more", np.where(adj_less < SIGNIFICANCE, "less", "")).astype(object)
    flags[untested] = ""
    if m == 2:
        code_stat, code_p = pairs.stat[0, 1], pairs.p[0, 1]
        code_test = list(pairs.test[0, 1])
        code_df = np.where([t in ("mcnemar chi-square", "clustered mcnemar") for t in code_test], 1.0, np.nan)
        coder_test = np.array([code_test, code_test], dtype=object)
    else:
        code_test, code_stat = [None] * q, np.full(q, np.nan)
        code_df, code_p = np.full(q, np.nan), np.full(q, np.nan)
        complete = pres.observed.all(axis=1)
        n_complete = int(pres.w[complete].sum())
        if clusters is not None:
            notes.append(Note("cochran-clustered", "Cochran's Q assumes independent units and the units are "
                              "nested in groups, so it was not run; each coder is compared with every other "
                              "by McNemar's test for clustered pairs (Durkalski et al. 2003)."))
        elif n_complete >= 2:
            code_stat, code_p = cochran_q(pres.x[complete], weights=pres.w[complete])
            code_test = ["cochran q"] * q
            code_df = np.full(q, float(m - 1))
            if n_complete < n_units:
                notes.append(Note("cochran-complete-units", f"Cochran's Q uses the {n_complete} "
                                  f"units every coder coded ({n_units - n_complete} left out)."))
        else:
            notes.append(Note("cochran-not-run", "Cochran's Q needs units coded by every coder; "
                              "there are fewer than two."))
        name = "clustered mcnemar" if clusters is not None else "mcnemar"
        coder_test = np.full((m, q), f"{name} against each other coder (majority)", dtype=object)
    code_p_holm = holm(code_p)
    return _Usage(shares=shares, flags=flags, coder_test=coder_test, coder_p=coder_p,
                  coder_p_holm=coder_p_holm, code_test=list(code_test), code_stat=code_stat,
                  code_df=code_df, code_p=code_p, code_p_holm=code_p_holm, notes=tuple(notes))


# =========================================================================================
# 5. the main confusion of each code
# =========================================================================================

@dataclass(frozen=True)
class _TopConfusion:
    """For each code (arrays over codes): the code it is most confused with and that share of
    its disagreements, and the share of its disagreements that are omissions (set-valued)."""

    index: np.ndarray
    share: np.ndarray
    has: np.ndarray
    omission: np.ndarray


def _top_confusion(conf: Confusions, n_k: np.ndarray, set_valued: bool) -> _TopConfusion:
    q = len(n_k)
    disagreements = n_k - np.diag(conf.matrix)
    off = conf.matrix.copy()
    np.fill_diagonal(off, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = off / disagreements[:, None]
    top = np.argmax(np.where(np.isfinite(share), share, -1), axis=1)
    top_share = share[np.arange(q), top]
    if set_valued:
        omission = np.where(disagreements > 0, 1.0 - np.nansum(share, axis=1), np.nan)
    else:
        omission = np.where(disagreements > 0, 0.0, np.nan)
    return _TopConfusion(top, top_share, np.isfinite(top_share) & (top_share > 0), omission)


def _homogeneity(data: CodingData, clusters: np.ndarray | None = None) -> dict[str, Any]:
    """The Stuart–Maxwell test for two coders with single codes, else why there is none."""
    if data.n_coders == 2 and not data.set_valued and clusters is None:
        return stuart_maxwell(directed_table(data, 0, 1), list(data.values))
    reason = ("the units are nested in groups and the Stuart–Maxwell test assumes independent units; see the "
              "per-code McNemar tests for clustered pairs" if clusters is not None and data.n_coders == 2
              and not data.set_valued else
              "set-valued data have no single category table; see the per-code McNemar tests"
              if data.n_coders == 2 else
              "the Stuart–Maxwell test compares two coders; see the per-code tests of equal use")
    return {"test": None, "statistic": None, "df": None, "p_value": None, "dropped": [], "reason": reason}


# =========================================================================================
# 6. status, reason and explanation of one code
# =========================================================================================

@dataclass(frozen=True)
class _Rules:
    """What every code is judged against."""

    minimum: float | None
    min_units: int
    confidence_level: float
    bootstrapped: bool
    set_valued: bool
    coders: tuple[str, ...]
    n_codes: int


@dataclass(frozen=True)
class _CodeFacts:
    """What is known about one code, for judging it."""

    alpha: float
    lower_bound: float
    kappa: float
    percent: float
    specific: float
    prevalence: float
    bias: float
    n_k: float                       # pairable values with the code
    n: float                         # all pairable values
    units_with: int
    uses: tuple[float, ...]          # per coder
    flags: tuple[str, ...]           # per coder: "more", "less" or ""
    ratios: tuple[float, ...]        # per coder: share / median share of the other coders
    shares: tuple[float, ...]        # per coder: share of the units they coded given the code
    top_confusion: str | None
    top_share: float
    omission: float


@dataclass(frozen=True)
class _Verdict:
    status: str
    reasons: tuple[str, ...]
    paradox: bool = False
    explanation: str = ""
    judged_on: str = ""              # "interval", "estimate" or ""


def _ratio_text(ratio: float) -> str:
    return f"{ratio:.1f}x" if ratio >= 1 else f"{ratio:.2f}x"


def _status(f: _CodeFacts, rules: _Rules) -> _Verdict:
    """The status against the minimum, and why, before usage, confusions and the paradox."""
    if f.n_k == 0:
        used = any(u > 0 for u in f.uses)
        return _Verdict("undefined", ("never used on a unit that two or more coders coded" if used
                                      else "not used by any coder",),
                        explanation="Agreement on a code nobody applied to a shared unit is undefined (0/0).")
    if f.n_k == f.n:
        return _Verdict("undefined", ("applied to every value: no variation to agree on",),
                        explanation=("When every coder applies the code to every unit, expected disagreement "
                                     "is zero and chance-corrected agreement is undefined."))
    if f.units_with < rules.min_units:
        return _Verdict("too rare", (f"used on only {int(f.units_with)} shared unit{'s' if f.units_with != 1 else ''} "
                                     f"(fewer than {rules.min_units}): too rare to judge",))
    if not np.isfinite(f.alpha):
        return _Verdict("undefined", ("alpha is undefined",))
    minimum = rules.minimum
    if minimum is None:
        return _Verdict("ok", ())
    if np.isfinite(f.lower_bound):
        level = percent_label(rules.confidence_level)
        if f.alpha < minimum:
            return _Verdict("below minimum", (), judged_on="interval")
        if reaches_minimum(f.lower_bound, minimum):
            return _Verdict("ok", (f"the one-sided {level} lower bound is above the minimum",),
                            judged_on="interval")
        return _Verdict("uncertain", (f"the estimate reaches the minimum but its one-sided {level} lower bound "
                                      "does not (it is not above the minimum)",), judged_on="interval")
    why = "no bootstrap" if not rules.bootstrapped else "no interval could be formed"
    if f.alpha < minimum:
        return _Verdict("below minimum", (f"estimate below the minimum ({why}: judged on the estimate alone)",),
                        judged_on="estimate")
    return _Verdict("ok", (f"estimate at or above the minimum ({why}: judged on the estimate alone, "
                           "not on an interval)",), judged_on="estimate")


def _use_reasons(f: _CodeFacts, coders: tuple[str, ...]) -> list[str]:
    """Who used the code unusually often or rarely: the coders flagged by the tests of equal
    use (each against a strict majority of the others), with their share against the median
    share of the other coders. With two coders only the one who used it more is named."""
    users = [c for c, u in zip(coders, f.uses) if u > 0]
    if len(users) == 1 and len(coders) > 1:
        return [f"used by {users[0]} only"]
    parts = []
    for i, (flag, ratio) in enumerate(zip(f.flags, f.ratios)):
        if not flag or (flag == "less" and len(coders) == 2):
            continue
        against = "the other coders (median)" if len(coders) > 2 else coders[1 - i]
        if np.isfinite(ratio) and ratio > 0:
            parts.append(f"used by {coders[i]} {_ratio_text(ratio)} as often as {against}")
        elif flag == "more":
            share = percent_label(f.shares[i], 0) if f.shares else "some"
            parts.append(f"used by {coders[i]} on {share} of their units, by {against} on none")
        else:
            parts.append(f"never used by {coders[i]}, though {against} used it")
    return parts


def _confusion_reasons(f: _CodeFacts, status: str, rules: _Rules) -> list[str]:
    """The main confusion, and omissions (set-valued), of a code that is not ok."""
    parts = []
    if (f.top_confusion is not None and f.top_share >= CONFUSION_REASON and status != "ok"
            and (rules.set_valued or rules.n_codes > 2)):
        parts.append(f"confused with {f.top_confusion} in {percent_label(f.top_share, 0)} of its disagreements")
    if rules.set_valued and np.isfinite(f.omission) and f.omission >= 0.5 and status != "ok":
        parts.append(f"{percent_label(f.omission, 0)} of its disagreements are omissions (applied by one "
                     "coder, no alternative by the other)")
    return parts


def _paradox(f: _CodeFacts, status: str, minimum: float | None) -> tuple[str, str | None]:
    """The kappa paradox (Feinstein & Cicchetti 1990): its explanation ("" when there is none)
    and a reason fragment for a code below the minimum (or None)."""
    chance = np.nanmin([f.alpha, f.kappa]) if np.isfinite(f.alpha) or np.isfinite(f.kappa) else np.nan
    causes = []
    if np.isfinite(f.prevalence) and abs(f.prevalence) >= PARADOX_PREVALENCE:
        side = "absence" if f.prevalence < 0 else "presence"
        causes.append(f"the coders mostly agree on the code's {side} (prevalence index "
                      f"{signed(f.prevalence)}), so high agreement is expected by chance alone")
    if np.isfinite(f.bias) and abs(f.bias) >= PARADOX_BIAS:
        causes.append(f"the coders apply it at different rates (bias index {signed(f.bias)})")
    if not (minimum is not None and np.isfinite(f.percent) and np.isfinite(chance) and np.isfinite(f.specific)
            and f.percent >= minimum and f.specific >= minimum and chance < minimum and causes):
        return "", None
    percent = percent_label(f.percent, 0)
    explanation = (f"Percent agreement is {percent} but chance-corrected agreement is "
                   f"{format_value(chance, 'coefficient')}: {'; '.join(causes)}. When one coder applied the "
                   f"code, another applied it too in {percent_label(f.specific, 0)} of the pairs (specific "
                   "agreement). This is the kappa paradox (Feinstein & Cicchetti 1990): report "
                   "specific agreement beside the coefficient.")
    reason = None
    if status in ("below minimum", "uncertain"):
        reason = (f"{percent} raw agreement, mostly on absence" if np.isfinite(f.prevalence) and f.prevalence <= -0.5
                  else f"{percent} raw agreement but low chance-corrected agreement")
    return explanation, reason


def _judge(f: _CodeFacts, rules: _Rules) -> _Verdict:
    """Status, reason fragments, paradox and explanation, and what was judged, for one code."""
    verdict = _status(f, rules)
    if verdict.status == "undefined" and f.n_k == 0:
        return verdict
    parts = list(verdict.reasons) + _use_reasons(f, rules.coders) + _confusion_reasons(f, verdict.status, rules)
    explanation, reason = _paradox(f, verdict.status, rules.minimum)
    if reason:
        parts.append(reason)
    if verdict.status == "below minimum" and not parts:
        parts.append("disagreement spread over several codes")
    if verdict.status == "ok" and not parts:
        parts.append("defined (no minimum given)")
    return _Verdict(verdict.status, tuple(parts), bool(explanation), explanation or verdict.explanation,
                    verdict.judged_on)


# =========================================================================================
# the table of codes
# =========================================================================================

def _per_code(cats: list, coders: tuple, agree: _Agreement, chance: _Chance, use: _Usage,
              top: _TopConfusion, verdicts: list[_Verdict]) -> pd.DataFrame:
    """One row per code in codebook order, ranked by status (worst first), then alpha."""
    m = len(coders)
    rows = []
    for k, v in enumerate(verdicts):
        row = {"code": cats[k], "status": v.status, "judged_on": v.judged_on,
               "reason": "; ".join(v.reasons), "rank": 0,
               "alpha": agree.alpha[k], "ci_low": agree.alpha_low[k], "ci_high": agree.alpha_high[k],
               "lower_bound": agree.lower_bound[k], "p_value_min": agree.p_value_min[k],
               "specific_agreement": agree.specific[k], "specific_ci_low": agree.specific_low[k],
               "specific_ci_high": agree.specific_high[k], "kappa": chance.kappa[k],
               "kappa_method": chance.kappa_method, "percent_agreement": chance.percent[k],
               "prevalence_index": chance.prevalence[k], "bias_index": chance.bias[k],
               "paradox": v.paradox, "explanation": v.explanation,
               "n_pairable": chance.n_k[k], "n_values": chance.n, "units_with_code": chance.units_with[k],
               "n_pairable_units": chance.n_pairable_units,
               "top_confusion": cats[top.index[k]] if top.has[k] else None,
               "top_confusion_share": top.share[k] if top.has[k] else np.nan,
               "omission_share": top.omission[k],
               "usage_test": use.code_test[k], "usage_statistic": use.code_stat[k], "usage_df": use.code_df[k],
               "usage_p": use.code_p[k], "usage_p_holm": use.code_p_holm[k],
               "mcnemar_p_holm": use.code_p_holm[k] if m == 2 else np.nan,
               "cochran_p_holm": use.code_p_holm[k] if m > 2 else np.nan,
               "usage_flag": ", ".join(f"{coders[i]} {use.flags[i, k]}" for i in range(m) if use.flags[i, k])}
        for i in range(m):
            row[f"uses_{coders[i]}"] = use.shares.uses[i, k]
        for i in range(m):
            row[f"share_{coders[i]}"] = use.shares.share[i, k]
        rows.append(row)
    per_code = pd.DataFrame(rows)
    alpha = agree.alpha
    order = sorted(range(len(cats)), key=lambda k: (STATUSES.index(verdicts[k].status),
                                                    alpha[k] if np.isfinite(alpha[k]) else np.inf, k))
    per_code.loc[order, "rank"] = np.arange(1, len(cats) + 1)
    per_code["rank"] = per_code["rank"].astype(int)
    return per_code


def _data_notes(data: CodingData, n_pairable_units: int) -> list[Note]:
    notes = []
    if n_pairable_units < data.n_units:
        notes.append(Note("units-left-out", f"{data.n_units - n_pairable_units} of {data.n_units} "
                          "units were coded by fewer than two coders and do not enter agreement."))
    if data.level != "nominal" and not data.set_valued:
        notes.append(Note("nominal-diagnostics", f"The data are declared {data.level}; code "
                          "diagnostics treat each value as a nominal category (applied or not)."))
        notes.append(Note("rating-scale", "For a rating scale, presence/absence diagnostics per scale "
                          "point are of limited use: a near miss (e.g. 3 against 4) counts as a full "
                          "disagreement on both points. Judge the scale by the overall alpha at its "
                          f"level ({data.level})."))
    return notes


def diagnose_codes(data: Any, *, minimum: float | None = DEFAULT_MINIMUM, n_resamples: int = DEFAULT_RESAMPLES,
                   seed: int | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                   min_units_per_code: int = MIN_UNITS_PER_CODE, ci_method: str = DEFAULT_CI_METHOD,
                   distance: str | None = None, cluster: Any = None) -> CodeDiagnostics:
    """Which codes of the codebook drive disagreement, and why.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders; None/NaN missing; sets for
        set-valued coding).
    minimum : the alpha a code should reach (default 0.8, a common benchmark); None for none.
    n_resamples : unit bootstrap replicates for the intervals (0: no intervals; default 2000,
        as everywhere). Every code is computed from the same resamples.
    seed : seed of the bootstrap (recorded in the result; drawn and recorded if None).
    confidence_level : of the intervals.
    min_units_per_code : a code used on fewer pairable units than this is "too rare" to judge
        (default 5: common practice, not a published threshold).
    ci_method : "pseudo-unit" (default: Bayesian bootstrap with a least-favourable unit, the rule
        of every coefficient), "bca" or "percentile".
    distance : set-valued data: the distance between sets of codes for the overall alpha and
        the alpha after merging two codes, "masi" (default, as in :func:`agree.score`, so
        the overall alpha is the same figure) or "jaccard". Ignored for single codes.
    cluster : per-unit group labels, or the name of a kept per-unit column (e.g. the
        document): the bootstrap resamples whole groups (every code from the same
        resamples). A note warns when there are fewer than 20 groups.

    Returns
    -------
    CodeDiagnostics ; ``.to_frame()`` gives one row per code, worst first.

    Notes
    -----
    For code k, with r_uk the number of coders who applied k to unit u, m_u the number of
    coders who coded u, over the pairable units (m_u >= 2):

    - alpha_k = 1 - (n - 1)(n_k - o_kk) / (n_k (n - n_k)), n_k = Σ r_uk, n = Σ m_u,
      o_kk = Σ r_uk (r_uk - 1)/(m_u - 1): nominal alpha on the present/absent recoding
      (METHODS 6.3). Undefined if nobody or everybody used k.
    - p_s(k) = Σ r_uk (r_uk - 1) / Σ r_uk (m_u - 1), the share of agreeing pairs among the
      pairs of values that involve k; with two coders 2 n_kk / (n_k. + n_.k) (Spitzer &
      Fleiss 1974; p_pos of Cicchetti & Feinstein 1990).
    - kappa: Cohen's kappa on the k / not-k table (two coders, units both coded); Fleiss'
      kappa_j otherwise (with missing values, P_bar over pairable units and pi_k over coded
      units, METHODS 3.2).
    - prevalence index PI = 2 n_k / n - 1; with two coders this is Byrt et al.'s (a - d)/N.
      Bias index: with two coders Byrt et al.'s BI = (b - c)/N (positive: the first coder
      uses k more); with more coders the mean over pairs of coders of |b - c|/N, each pair
      on the units both coded (so it is never negative).
    - kappa paradox: flagged when the present/absent percent agreement and the specific
      agreement p_s both reach the minimum, alpha or kappa does not, and prevalence
      (|PI| >= 0.5) or bias (|BI| >= 0.1) explains the gap; the explanation names the cause
      (Feinstein & Cicchetti 1990). When p_s is low too, the coders really disagree on the
      code's presence and there is no paradox to explain. These cut-offs are our own choice
      for wording, not published thresholds.
    - unequal use: with two coders the per-code McNemar test (exact binomial when
      b + c < 25, else chi-square without continuity correction), Holm over the codes; a
      significant test flags the coder who uses k more and the one who uses it less. With
      more coders, Cochran's Q per code on the units every coder coded (Holm over codes); and
      each pair of coders is compared by McNemar's test on the units both coded (Holm over all
      pairs and codes). A coder is flagged "more" ("less") when they use k significantly more
      (less) than a strict majority of the other coders (p_holm < 0.05; the coder's p is the
      one at which that holds). The reference is thus the bulk of the coders, not their
      pooled share, which one over-user would inflate until the accurate coders looked like
      under-users; ``ratio`` is the coder's share over the median share of the others.
      With `cluster` the pairwise tests are McNemar's for clustered pairs (Durkalski et al.
      2003), and Cochran's Q and the Stuart–Maxwell test, which assume independent units, are
      not run.
    - confusions: share_ck = 2 o_ck / Σ_{g≠h} o_gh, expected e_ck = n_c n_k / (n - 1), and
      alpha after merging c and k (METHODS 6.3, 6.4). For set-valued data o_ck counts pairs of
      coders where one applied c and not k and the other k and not c; shares are of all such
      confusions, e_ck uses the numbers of values with c and not k, and alpha (with
      `distance`, MASI by default) is recomputed after replacing k by c in every set.
    - status: "undefined" (nobody, or every value, has the code, or alpha is undefined),
      "too rare" (used on fewer than `min_units_per_code` pairable units), "below minimum"
      (alpha < minimum), "uncertain" (alpha at or above the minimum, but its one-sided lower
      confidence bound at `confidence_level` not above it), "ok" (the one-sided lower bound
      strictly above the minimum: `agree.core.results.reaches_minimum`, the rule of every
      output). The one-sided bound (column ``lower_bound``) is made by the method of every
      coefficient (`agree.stats.resampling.resample`; by default the Bayesian bootstrap with a
      least-favourable unit, one such unit per code), the same rule as the overall decision of
      ``agree score --min``; it lies above the lower end of the two-sided interval. This follows the advice to judge a coefficient by its interval, not its
      estimate (Krippendorff 2004). Without an interval (``n_resamples=0``, or too few defined
      replicates) the estimate is compared with the minimum and the reason says so
      (``judged_on`` = "estimate"). Codes are ranked by status in the order of concern —
      below minimum, uncertain, too rare, undefined, ok — and by alpha within a status,
      lowest first.

    References
    ----------
    Byrt, Bishop & Carlin (1993); Cicchetti & Feinstein (1990); Feinstein & Cicchetti (1990);
    Spitzer & Fleiss (1974); Krippendorff (2004); McNemar (1947); Cochran (1950); Holm (1979);
    Stuart (1955); Maxwell (1970); Durkalski, Palesch, Lipsitz & Rust (2003).
    """
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum,
                   ci_method=ci_method)
    data = check_data(data)
    distance = set_distance(data, distance)
    clusters, cluster_name = cluster_labels(data, cluster)
    cats = list(data.categories)
    coders = tuple(data.coders)
    pres = _Presence.of(data, by_unit=clusters is not None)

    agree = _agreement(pres, cats, clusters=clusters, cluster_name=cluster_name, n_resamples=n_resamples,
                       seed=seed, confidence_level=confidence_level, ci_method=ci_method, minimum=minimum)
    chance = _chance(pres, data.n_coders)
    use = _usage(pres, chance, data.n_units, clusters)
    conf = confused_pairs(data, pres.x, pres.m_u, pres.r, distance, weights=pres.w)
    top = _top_confusion(conf, chance.n_k, data.set_valued)

    rules = _Rules(minimum=minimum, min_units=min_units_per_code, confidence_level=confidence_level,
                   bootstrapped=agree.bootstrap is not None, set_valued=data.set_valued, coders=coders,
                   n_codes=len(cats))
    verdicts = [_judge(_CodeFacts(
        alpha=agree.alpha[k], lower_bound=agree.lower_bound[k], kappa=chance.kappa[k], percent=chance.percent[k],
        specific=agree.specific[k], prevalence=chance.prevalence[k], bias=chance.bias[k], n_k=chance.n_k[k],
        n=chance.n, units_with=chance.units_with[k], uses=tuple(use.shares.uses[:, k]),
        flags=tuple(use.flags[:, k]), ratios=tuple(use.shares.ratio[:, k]), shares=tuple(use.shares.share[:, k]),
        top_confusion=cats[top.index[k]] if top.has[k] else None, top_share=top.share[k],
        omission=top.omission[k]), rules) for k in range(len(cats))]

    notes = _data_notes(data, chance.n_pairable_units) + list(agree.notes) + list(use.notes)
    if minimum is not None:
        judged = (f"each code's one-sided {percent_label(confidence_level)} lower bound" if agree.bootstrap is not None
                  else "each code's estimate (no bootstrap, so no interval)")
        notes.append(Note("minimum", f"Codes are judged against a minimum alpha of {format_value(minimum, 'threshold')}, comparing "
                          f"{judged} with it (a convention; choose it before looking at the data)."))
    overall_ci = (None, None)
    if n_resamples:  # the same figure and interval as krippendorff_alpha / agree score with this seed
        overall = krippendorff_alpha(data, level="nominal", distance=distance if data.set_valued else None,
                                     n_resamples=n_resamples, seed=agree.bootstrap.seed if agree.bootstrap else seed,
                                     confidence_level=confidence_level, ci_method=ci_method, cluster=clusters)
        overall_ci = (overall.ci_low, overall.ci_high)
    return CodeDiagnostics(per_code=_per_code(cats, coders, agree, chance, use, top, verdicts),
                           confused_pairs=conf.pairs, usage=use.frame(cats, coders),
                           marginal_homogeneity=json_safe(_homogeneity(data, clusters)), alpha=conf.alpha,
                           alpha_ci_low=overall_ci[0], alpha_ci_high=overall_ci[1],
                           coders=coders, n_units=data.n_units,
                           n_pairable_units=chance.n_pairable_units, set_valued=data.set_valued,
                           minimum=None if minimum is None else float(minimum),
                           confidence_level=confidence_level, min_units_per_code=min_units_per_code,
                           bootstrap=agree.bootstrap, notes=tuple(notes), distance=distance,
                           cluster=cluster_name,
                           n_clusters=None if clusters is None else int(len(np.unique(clusters))),
                           level=data.level)
