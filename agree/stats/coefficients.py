"""Agreement coefficients.

Each public function takes the data first (CodingData, a units x coders DataFrame or
array with None/NaN for missing) and keyword options after, and returns an
`AgreementResult`. Internally each coefficient is a `_Statistic`: per-pattern feature
rows whose sums determine the coefficient (see `agree.stats.resampling`), so the point estimate,
the bootstrap and the jackknife share one vectorised computation.

Notation follows METHODS.md: r_uk coders giving unit u value k, r_u values in unit u,
n' pairable units (r_u >= 2), n1 units with at least one value, q categories (codebook
categories, unused ones included), w agreement weights.

References
----------
Cohen, J. (1960). A coefficient of agreement for nominal scales. EPM, 20(1), 37-46.
Cohen, J. (1968). Weighted kappa. Psychological Bulletin, 70(4), 213-220.
Fleiss, J. L., Cohen, J., & Everitt, B. S. (1969). Large sample standard errors of kappa and
    weighted kappa. Psychological Bulletin, 72(5), 323-327.
Scott, W. A. (1955). Reliability of content analysis. Public Opinion Quarterly, 19(3), 321-325.
Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psych. Bull., 76(5).
Fleiss, J. L., Nee, J. C. M., & Landis, J. R. (1979). Large sample variance of kappa in the case
    of different sets of raters. Psychological Bulletin, 86(5), 974-977.
Conger, A. J. (1980). Integration and generalization of kappas for multiple raters. Psych. Bull., 88(2).
Brennan, R. L., & Prediger, D. J. (1981). Coefficient kappa: Some uses, misuses, and alternatives. EPM, 41(3).
Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. J. Clin. Epidemiol., 46(5).
Gwet, K. L. (2008). Computing inter-rater reliability and its variance in the presence of high
    agreement. BJMSP, 61, 29-48.  Gwet, K. L. (2014). Handbook of Inter-Rater Reliability (4th ed.).
Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School for Communication.
Passonneau, R. (2006). Measuring agreement on set-valued items (MASI). LREC 2006.
Wilson, E. B. (1927). Probable inference. JASA, 22(158), 209-212.
"""

from __future__ import annotations

from dataclasses import dataclass
from dataclasses import replace as _replace
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.constants import DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_RESAMPLES, FEW_CLUSTERS
from agree.core.model import LEVELS, AgreeError, CodingData, as_coding_data, require_coder_identity, value_label
from agree.core.registry import references_for
from agree.core.results import AgreementResult, BootstrapInfo, Note, display_name
from agree.core.seeds import make_rng
from agree.stats.kernels import alpha_features, alpha_finish, coincidences, level_delta, set_delta
from agree.stats.patterns import Patterns, cluster_sums, compress
from agree.stats.resampling import (
    PseudoUnits,
    check_settings,
    interval_of,
    norm_cdf,
    norm_ppf,
    resample,
    resolve_clusters,
)

# ----------------------------------------------------------------------------------------
# weights and distances


def agreement_weights(data: CodingData, weights: Any) -> tuple[np.ndarray, str | None]:
    """q x q agreement weights w (w_kk = 1) and a label for reports.

    "linear": w = 1 - |s_k - s_l| / (s_max - s_min) (Cicchetti & Allison 1971);
    "quadratic": w = 1 - (s_k - s_l)^2 / (s_max - s_min)^2 (Fleiss & Cohen 1973), with
    s the category scores (the numbers themselves for numeric codes, else ranks 1..q in
    codebook order). A matrix is validated and used as given.
    """
    q = len(data.values)
    if weights is None:
        return np.eye(q), None
    if isinstance(weights, str):
        if data.set_valued:
            raise AgreeError("weights apply to single-code data, not to sets of codes", code="weights")
        s = data.scores
        span = s.max() - s.min() if q > 1 else 1.0
        span = span if span > 0 else 1.0
        diff = np.abs(s[:, None] - s[None, :]) / span
        if weights == "linear":
            return 1.0 - diff, "linear"
        if weights == "quadratic":
            return 1.0 - diff ** 2, "quadratic"
        raise AgreeError(f"weights must be None, 'linear', 'quadratic' or a matrix; got '{weights}'",
                         code="weights")
    try:
        w = np.asarray(weights, dtype=float)
    except (TypeError, ValueError):
        raise AgreeError("a weight matrix must hold numbers between 0 and 1", code="weights") from None
    if w.shape != (q, q):
        raise AgreeError(f"a weight matrix must be {q} x {q} (one row and column per category); "
                         f"got {w.shape[0]} x {w.shape[1] if w.ndim > 1 else 1}", code="weights")
    if not np.isfinite(w).all() or not np.allclose(np.diag(w), 1.0) or (w < 0).any() or (w > 1).any():
        raise AgreeError("a weight matrix needs 1 on the diagonal and entries between 0 and 1",
                         code="weights")
    return w, "custom"


def _order_notes(data: CodingData, what: str) -> list[Note]:
    """The scale order matters for `what` but was only inferred by sorting text labels."""
    if data.order not in ("alphabetical", "codebook rows") or data.set_valued or data.is_numeric:
        return []
    shown = " < ".join(str(v) for v in data.values[:6]) + (" < ..." if len(data.values) > 6 else "")
    how = ("only inferred by sorting the labels alphabetically" if data.order == "alphabetical" else
           "taken from the order of the codebook's rows (it has no order column)")
    return [Note("alphabetical-order" if data.order == "alphabetical" else "codebook-row-order",
                 f"{what} uses the order of the categories, which was {how} ({shown}); pass them in scale "
                 "order (categories=[...]) or give the codebook an order column (--codebook).")]


def _weight_notes(w: np.ndarray) -> list[Note]:
    if np.allclose(w, w.T):
        return []
    return [Note("asymmetric-weights", "The weight matrix is not symmetric: disagreeing as (k, l) is "
                 "weighted differently from (l, k). Check that this is intended and report the matrix.")]


def distance_matrix(data: CodingData, level: Any, distance: str | None = None) -> tuple[np.ndarray | None, str]:
    """δ (V x V) for Krippendorff's alpha, or None for ordinal (it depends on the margins).

    Returns the matrix and a label for the metric used.
    """
    values = data.values
    V = len(values)
    if data.set_valued:
        name = distance or "masi"
        return set_delta(name, values), name
    if callable(level):
        try:
            d = np.array([[float(level(a, b)) for b in values] for a in values], dtype=float).reshape(V, V)
        except (TypeError, ValueError) as exc:
            raise AgreeError(f"the distance function must return a number for every pair of values ({exc})",
                             code="level") from None
        if not np.isfinite(d).all() or (d < 0).any() or not np.allclose(np.diag(d), 0):
            raise AgreeError("a distance function must give 0 for equal values and no negative values",
                             code="level")
        return d, getattr(level, "__name__", "custom")
    if level not in LEVELS:
        raise AgreeError(f"level must be one of {', '.join(LEVELS)} or a function; got '{level}'", code="level")
    if level == "ordinal":
        return None, "ordinal"
    if level != "nominal" and not data.is_numeric:
        bad = next((v for v in values if not _is_number(v)), None)
        raise AgreeError(f"{level} level needs numeric codes, but the data contain the text '{bad}'",
                         hint="use --level nominal or ordinal for text codes", code="text-at-interval")
    scores = data.scores if level != "nominal" else np.zeros(V)
    return level_delta(level, scores), level


def _is_number(v: Any) -> bool:
    try:
        float(v)
        return True
    except (TypeError, ValueError):
        return False


# ----------------------------------------------------------------------------------------
# statistics on pattern sums


def _nan_div(a, b):
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(b != 0, a / np.where(b == 0, 1.0, b), np.nan)


@dataclass
class _Statistic:
    """A coefficient as features per pattern and a vectorised `finish` on their sums."""

    name: str
    ordered: bool = False
    undefined_reason: str = "the coefficient is undefined for these data"

    def features(self, pat: Patterns) -> np.ndarray:
        raise NotImplementedError

    def finish(self, sums: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def analytic(self, pat: Patterns, estimate: float) -> dict[str, Any]:
        return {}


def _unit_agreement(R: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Within-unit agreement a_u = sum_k r_uk (r*_uk - 1) / (r_u (r_u - 1)) and pairable mask."""
    r = R.sum(axis=1)
    pair = r >= 2
    Rw = R @ w.T
    a = _nan_div(np.sum(R * (Rw - 1.0), axis=1), r * (r - 1))
    return np.where(pair, a, 0.0), pair.astype(float)


@dataclass
class _Alpha(_Statistic):
    delta: np.ndarray | None = None  # None -> ordinal

    def features(self, pat):
        return alpha_features(pat.value_counts(), self.delta, codes=pat.codes)

    def finish(self, S):
        return alpha_finish(S, self.delta)


@dataclass
class _PercentAgreement(_Statistic):
    w: np.ndarray | None = None

    def features(self, pat):
        a, pair = _unit_agreement(pat.value_counts(), self.w)
        return np.column_stack([pair, a])

    def finish(self, S):
        return _nan_div(S[:, 1], S[:, 0])

    def analytic(self, pat, estimate):
        a, pair = _unit_agreement(pat.value_counts(), self.w)
        c = pat.counts * pair
        n = c.sum()
        if n < 2:
            return {}
        if pat.codes.shape[1] == 2 and self.w is not None and np.allclose(self.w, np.eye(len(self.w))):
            return {"wilson": True, "n": n}
        var = np.sum(c * (a - estimate) ** 2) / (n - 1) / n
        return {"se": float(np.sqrt(var)), "se_method": "unit-level standard error of the mean (Fleiss 1971)"}


@dataclass
class _ChanceCorrected(_Statistic):
    """pi-type, AC1/AC2 and Brennan-Prediger: P_bar against a chance term from pi_k
    (the mean over units of r_uk / r_u) - Gwet (2014) for missing data."""

    kind: str = "pi"  # "pi", "ac", "bp"
    w: np.ndarray | None = None

    def features(self, pat):
        R = pat.value_counts()
        r = R.sum(axis=1)
        coded = (r >= 1).astype(float)
        share = np.where(r[:, None] >= 1, _nan_div(R, np.maximum(r, 1)[:, None]), 0.0)
        a, pair = _unit_agreement(R, self.w)
        return np.column_stack([coded, share, pair, a])

    def _chance(self, pi):
        q = pi.shape[1]
        tw = self.w.sum()
        if self.kind == "pi":
            return np.einsum("bk,kl,bl->b", pi, self.w, pi)
        if self.kind == "ac":
            return tw / (q * (q - 1)) * np.sum(pi * (1 - pi), axis=1)
        return np.full(pi.shape[0], tw / q ** 2)

    def finish(self, S):
        q = self.w.shape[0]
        pi = _nan_div(S[:, 1:1 + q], S[:, [0]])
        pe = self._chance(pi)
        pa = _nan_div(S[:, -1], S[:, -2])
        return _nan_div(pa - pe, 1.0 - pe)

    def parts(self, S):
        q = self.w.shape[0]
        pi = _nan_div(S[:, 1:1 + q], S[:, [0]])
        return pi, self._chance(pi), _nan_div(S[:, -1], S[:, -2])

    def analytic(self, pat, estimate):
        if not np.isfinite(estimate):
            return {}
        F = self.features(pat)
        c = pat.counts.astype(float)
        S = (c @ F)[None, :]
        pi, pe, pa = (x[0] for x in self.parts(S))
        q = self.w.shape[0]
        share = F[:, 1:1 + q]
        coded = F[:, 0] > 0
        pair = F[:, -2] > 0
        # influence of unit u on p_e: the chance term is quadratic in pi and
        # IF_u(pi_k) = r_uk / r_u - pi_k, so IF_u(p_e) = 2 (p_e|u - p_e) (METHODS 5.2)
        if self.kind == "pi":
            pe_u = share @ (0.5 * (self.w + self.w.T) @ pi)  # symmetric part: exact for any w
            pe_if = 2.0 * (pe_u - pe)
        elif self.kind == "ac":
            pe_u = self.w.sum() / (q * (q - 1)) * (share @ (1 - pi))
            pe_if = 2.0 * (pe_u - pe)
        else:
            pe_if = np.zeros(len(F))  # Brennan-Prediger: p_e is fixed
        out = _linearised(c, coded, pair, F[:, -1], pa, pe, pe_if, estimate)
        return {**out, "p_o": float(pa), "p_e": float(pe)} if out else out


SE_LINEARISED = "linearisation (Gwet 2008; 2014)"
SE_LINEARISED_PA = ("linearisation (delta method of the ratio estimator, unit terms centred at p_a; "
                    "Gwet's 2014 formula centres them at p_e: details se_handbook)")
SE_HANDBOOK = "linearisation as in Gwet (2014), unit terms centred at p_e"


def _linearised(c, coded, pair, a, pa, pe, pe_if, gamma) -> dict[str, Any]:
    """Linearisation (delta-method) SE of γ = (p_a - p_e) / (1 - p_e), units sampled, coders fixed.

    Over the n1 units with a value (n' of them with two or more), each unit's influence is

        e_u = (n1/n') [r_u >= 2] (p_a|u - p_a) / (1 - p_e)  -  (1 - γ) IF_u(p_e) / (1 - p_e)

    and Var = Σ_u e_u² / (n1 (n1 - 1)) (METHODS 5.2). `pe_if` is IF_u(p_e), unit u's influence
    on the chance term (zero for Brennan-Prediger). p_a is a ratio estimator (a mean over the
    pairable units, whose number is itself random when some units have a single value), and
    its influence is centred at p_a. Gwet (2014) centres the unit term at p_e instead,
    γ_u = (n1/n') [r_u >= 2] (p_a|u - p_e)/(1 - p_e), which adds γ ((n1/n') [r_u >= 2] - 1) to
    e_u; the two coincide when every unit has two or more values. The handbook form is
    returned beside the default as ``se_handbook``. The default is the delta method of the
    estimator as computed (tests/stats/test_coefficients_reference.py checks it against
    numerical differentiation). By simulation (bench/se_checks.py: 3 coders, 4 categories, 150
    units, 30% of them coded once, 2,000 data sets; ± one Monte Carlo error) AC1's SD was
    .0450 ± .0007, the mean p_a-centred SE .0445 and the p_e-centred .0561, and the 95% t
    intervals covered .950 ± .005 and .988 ± .002; for Fleiss' kappa SD .0501 ± .0008, SEs .0487
    and .0584, coverage .938 ± .005 and .975 ± .004. The handbook form overstates the SD by
    about a fifth there (DEVELOPERS.md, "Standard errors checked by simulation").
    """
    n1 = c[coded].sum()
    n_pair = c[pair].sum()
    if n1 < 2 or n_pair < 1 or pe >= 1:
        return {}
    weight = (n1 / n_pair) * pair
    e = weight * (a - pa) / (1 - pe) - (1 - gamma) * pe_if / (1 - pe)
    e_handbook = e + gamma * (weight - 1.0)
    var = np.sum(c[coded] * e[coded] ** 2) / (n1 * (n1 - 1))
    var_handbook = np.sum(c[coded] * e_handbook[coded] ** 2) / (n1 * (n1 - 1))
    return {"se": float(np.sqrt(var)), "se_method": SE_LINEARISED if n1 == n_pair else SE_LINEARISED_PA,
            "df": n1 - 1, "se_handbook": float(np.sqrt(var_handbook)), "se_handbook_method": SE_HANDBOOK}


@dataclass
class _Conger(_Statistic):
    m: int = 2
    V: int = 0

    def features(self, pat):
        X = pat.coder_onehot().reshape(len(pat.counts), -1)
        coded = (pat.codes >= 0).astype(float)
        a, pair = _unit_agreement(pat.value_counts(), np.eye(self.V))
        return np.column_stack([X, coded, pair, a])

    def parts(self, S):
        m, V = self.m, self.V
        X = S[:, :m * V].reshape(-1, m, V)
        coded = S[:, m * V:m * V + m]
        p = _nan_div(X, coded[:, :, None])
        pe = (np.sum(p.sum(axis=1) ** 2, axis=1) - np.sum(p ** 2, axis=(1, 2))) / (m * (m - 1))
        pa = _nan_div(S[:, -1], S[:, -2])
        return p, pe, pa

    def finish(self, S):
        _, pe, pa = self.parts(S)
        return _nan_div(pa - pe, 1.0 - pe)

    def analytic(self, pat, estimate):
        if not np.isfinite(estimate):
            return {}
        F = self.features(pat)
        c = pat.counts.astype(float)
        p, pe, pa = (x[0] for x in self.parts((c @ F)[None, :]))
        m = self.m
        X = pat.coder_onehot()                              # (P, m, V)
        seen = (pat.codes >= 0).astype(float)               # (P, m)
        coded = seen.any(axis=1)
        n1 = c[coded].sum()
        n_i = c @ seen                                      # units each coder coded
        # p_ik = Σ_u x_uik / n_i is a ratio with its own denominator per coder:
        # IF_u(p_ik) = (n1 / n_i)(x_uik - p_ik [i coded u]); p_e = Σ_{i≠j} Σ_k p_ik p_jk / (m(m-1))
        # so IF_u(p_e) = 2 / (m(m-1)) Σ_i Σ_k IF_u(p_ik) (Σ_{j≠i} p_jk)
        others = p.sum(axis=0)[None, :] - p                 # (m, V): Σ_{j≠i} p_jk
        scale = _nan_div(n1, n_i)                           # (m,)
        infl = (X - p[None, :, :] * seen[:, :, None]) * np.nan_to_num(scale)[None, :, None]
        pe_if = 2.0 / (m * (m - 1)) * np.einsum("pik,ik->p", infl, others)
        pair = F[:, -2] > 0
        out = _linearised(c, coded, pair, F[:, -1], pa, pe, pe_if, estimate)
        return {**out, "p_o": float(pa), "p_e": float(pe)} if out else out


@dataclass
class _Cohen(_Statistic):
    w: np.ndarray | None = None
    V: int = 0

    def features(self, pat):
        both = (pat.codes >= 0).all(axis=1)
        cell = np.where(both, pat.codes[:, 0] * self.V + pat.codes[:, 1], 0)
        F = np.zeros((len(cell), self.V * self.V))
        F[np.arange(len(cell)), cell] = both
        return F

    def finish(self, S):
        V = self.V
        table = S.reshape(-1, V, V)
        n = table.sum(axis=(1, 2))
        p = table / np.where(n == 0, 1, n)[:, None, None]
        rows, cols = p.sum(axis=2), p.sum(axis=1)
        po = np.einsum("bkl,kl->b", p, self.w)
        pe = np.einsum("bk,kl,bl->b", rows, self.w, cols)
        out = _nan_div(po - pe, 1.0 - pe)
        return np.where(n > 0, out, np.nan)

    def analytic(self, pat, estimate):
        F = self.features(pat)
        table = (pat.counts.astype(float) @ F).reshape(self.V, self.V)
        return cohen_variances(table, self.w, estimate)


def cohen_variances(table: np.ndarray, w: np.ndarray, kappa: float) -> dict[str, Any]:
    """Fleiss, Cohen & Everitt (1969) large-sample variances of (weighted) kappa, and the
    maximum kappa attainable given the margins (Cohen 1960; a linear programme when weighted)."""
    n = table.sum()
    if n == 0:
        return {}
    p = table / n
    rows, cols = p.sum(axis=1), p.sum(axis=0)
    pe = rows @ w @ cols
    if pe >= 1:
        return {}
    wr = w @ cols            # wbar_k.
    wc = rows @ w            # wbar_.l
    out: dict[str, Any] = {}
    if np.isfinite(kappa):
        var1 = (np.sum(p * (w - (wr[:, None] + wc[None, :]) * (1 - kappa)) ** 2)
                - (kappa - pe * (1 - kappa)) ** 2) / (n * (1 - pe) ** 2)
        out["se"] = float(np.sqrt(max(var1, 0.0)))
        out["se_method"] = "large-sample (Fleiss, Cohen & Everitt 1969)"
    var0 = (np.sum(np.outer(rows, cols) * (w - (wr[:, None] + wc[None, :])) ** 2) - pe ** 2) / (n * (1 - pe) ** 2)
    out["se0"] = float(np.sqrt(max(var0, 0.0)))
    if np.allclose(w, np.eye(len(w))):
        best = np.minimum(rows, cols).sum()
    else:
        q = len(w)
        A_eq = np.vstack([np.kron(np.eye(q), np.ones(q)), np.kron(np.ones(q), np.eye(q))])
        from scipy import optimize  # only weighted kappa needs the linear programme

        res = optimize.linprog(-w.ravel(), A_eq=A_eq, b_eq=np.concatenate([rows, cols]),
                               bounds=(0, None), method="highs")
        best = -res.fun if res.success else np.nan
    out["kappa_max"] = float((best - pe) / (1 - pe))
    out["p_o"] = float(np.sum(p * w))
    out["p_e"] = float(pe)
    return out


# ----------------------------------------------------------------------------------------
# running a statistic


def _resolve_clusters(data: CodingData, cluster: Any) -> tuple[np.ndarray | None, str]:
    """Cluster labels and the record's name of what was resampled ("unit", "cluster:<column>", "cluster")."""
    labels, name = resolve_clusters(data, cluster)
    if labels is None:
        return None, "unit"
    return labels, f"cluster:{name}" if isinstance(cluster, str) else "cluster"


def _run(stat: _Statistic, data: CodingData, *, confidence_level: float, n_resamples: int,
         ci_method: str, seed: Any, minimum: float | None, cluster: Any, level: str | None,
         weights: str | None, notes: Sequence[Note] = (), n_categories: int | None = None,
         mask: np.ndarray | None = None, details: dict | None = None) -> AgreementResult:
    """Point estimate, analytic SE where published, bootstrap interval and the record."""
    check_settings(n_resamples=n_resamples, confidence_level=confidence_level, minimum=minimum,
                   ci_method=ci_method, seed=seed)
    codes = data.codes if mask is None else data.codes[mask]
    unit_w = data.weights if mask is None or data.weights is None else data.weights[mask]
    clusters, unit_label = _resolve_clusters(data, cluster)
    if clusters is not None and mask is not None:
        clusters = clusters[mask]
    pat = compress(codes, len(data.values), ordered=stat.ordered, keep_inverse=clusters is not None,
                   weights=unit_w)
    F = stat.features(pat)
    counts = pat.counts
    estimate = float(stat.finish((counts.astype(float) @ F)[None, :])[0]) if len(counts) else float("nan")
    warnings = list(notes)
    if not np.isfinite(estimate):
        warnings.append(Note("undefined", f"{display_name(stat.name)} is undefined: {stat.undefined_reason}."))
    extra = stat.analytic(pat, estimate) if len(counts) else {}
    details = dict(details or {})
    if clusters is not None:
        extra = _independent_only(extra, details, warnings, stat.name,
                                  bootstrapped=bool(n_resamples) and np.isfinite(estimate))
    for key in ("se0", "kappa_max", "p_o", "p_e", "se_handbook", "se_handbook_method"):
        if key in extra:
            details[key] = extra[key]
    se = extra.get("se")
    se_method = extra.get("se_method")
    ci_low = ci_high = lower = p_min = None
    method = None
    boot = None
    reps = None
    n_used = int(counts[_used_patterns(pat, stat)].sum()) if len(counts) else 0
    disagreeing = disagreeing_units(pat, stat) if len(counts) else 0
    details["disagreeing_units"] = disagreeing
    if n_resamples and n_resamples > 0 and len(counts) and np.isfinite(estimate):
        rng, used_seed = make_rng(seed)
        scale = 1.0
        if clusters is not None:
            items, n_items = cluster_sums(F, pat.inverse, clusters, unit_w)
            item_counts = np.ones(n_items, dtype=np.int64)
            scale = float(counts.sum()) / n_items    # a pseudo-cluster of the mean cluster size
        else:
            items, item_counts = F, counts
        space = pseudo_units(stat, pat, scale=scale) if ci_method == "pseudo-unit" else None
        bounds = resample(items, item_counts, stat.finish, method=ci_method, n_resamples=int(n_resamples),
                          confidence_level=confidence_level, rng=rng, minimum=minimum, pseudo=space,
                          keep_replicates=True)
        iv = interval_of(bounds, minimum=minimum, disagreeing=disagreeing, n_items=n_used)
        reps = bounds.replicates[:, 0, 0]
        ci_low, ci_high, lower, p_min, method = iv.low, iv.high, iv.lower_bound, iv.p_value_min, iv.method
        warnings.extend(iv.notes)
        if iv.pseudo_unit is not None:
            details["pseudo_unit"] = _describe_unit(iv.pseudo_unit, data, stat.ordered)
            if scale != 1.0:
                details["pseudo_cluster_units"] = scale
        how = "bootstrap standard deviation"
        if clusters is not None:
            # published SEs assume independent units; with groups resampled the bootstrap SD is the SE
            if se is not None:
                details["se_independent_units"] = se
            se, se_method = iv.se, f"{how} (whole groups resampled)"
        elif se is None:
            se, se_method = iv.se, how
        boot = BootstrapInfo(replicates=int(n_resamples), seed=used_seed, method=iv.method,
                             unit=unit_label, n_undefined=iv.n_undefined)
        if clusters is not None and n_items < FEW_CLUSTERS:
            warnings.append(Note("few-clusters", f"Only {n_items} groups ({unit_label.partition(':')[2] or 'clusters'}) "
                                 f"were resampled; bootstrap intervals from fewer than {FEW_CLUSTERS} groups are rough."))
    elif extra.get("wilson"):
        n = extra["n"]
        ci_low, ci_high = _wilson(estimate, n, confidence_level)
        lower = _wilson(estimate, n, 1 - 2 * (1 - confidence_level))[0]
        se, se_method, method = float(np.sqrt(estimate * (1 - estimate) / n)), "binomial", "wilson"
        if minimum is not None:
            p_min = _score_test(estimate, n, minimum, lower)
    elif se is not None and np.isfinite(estimate):
        eps = 1 - confidence_level
        df = extra.get("df")
        from scipy import special  # Student's t, only for intervals without a bootstrap

        crit = special.stdtrit(df, 1 - eps / 2) if df else norm_ppf(1 - eps / 2)
        crit1 = special.stdtrit(df, 1 - eps) if df else norm_ppf(1 - eps)
        ci_low, ci_high, lower = (float(estimate - crit * se), float(estimate + crit * se),
                                  float(estimate - crit1 * se))
        if ci_low < -1 or ci_high > 1:
            ci_low, ci_high, lower = max(ci_low, -1.0), min(ci_high, 1.0), max(lower, -1.0)
            warnings.append(Note("interval-clipped", f"The {'t' if df else 'normal'}-approximation interval of "
                                 f"{display_name(stat.name)} ran past the coefficient's range and was cut at "
                                 "[-1, 1]: with so few units or agreement this close to 1 the approximation is "
                                 "poor; use the bootstrap (--boot) instead."))
        method = "t" if df else "wald"
        if minimum is not None and se > 0:
            t = (minimum - estimate) / se
            p_min = float(special.stdtr(df, t) if df else norm_cdf(t))
    test = _null_test(estimate, details.get("se0"), "kappa / SE under H0 (Fleiss, Cohen & Everitt 1969)")
    details.update(test.pop("details"))
    return AgreementResult(
        name=stat.name, estimate=estimate, se=se, se_method=se_method, ci_low=ci_low, ci_high=ci_high,
        confidence_level=confidence_level, ci_method=method, n_units=n_used, n_coders=data.n_coders,
        n_values=_n_values(pat, stat),
        n_categories=n_categories if n_categories is not None else len(data.values),
        level=level, weights=weights, **test, minimum=minimum,
        p_value_min=p_min, lower_bound=lower, bootstrap=boot, details=details, warnings=tuple(warnings),
        replicates=reps)


def alpha_statistic(delta: np.ndarray | None) -> _Statistic:
    """Krippendorff's alpha as features per pattern and a vectorised finish (the statistic
    `krippendorff_alpha` runs), for a fixed δ (V, V) or, with None, the ordinal metric. The
    planner simulates with it, so that its studies are scored exactly as `score` scores data."""
    return _Alpha(name="krippendorff_alpha", delta=delta,
                  undefined_reason="no pairable unit, or no expected disagreement (all pairable values alike)")


def pseudo_units(stat: _Statistic, pat: Patterns, *, scale: float = 1.0) -> PseudoUnits:
    """The units a pseudo-unit of `stat` may be: every tuple of values of the coders (ordered
    statistics), or every multiset of 1 up to the most values any unit has (the others); each
    turned into features by the statistic itself. `scale` > 1 makes it a pseudo-cluster."""
    V = pat.n_values
    m = pat.codes.shape[1]
    width = m if stat.ordered else max(2, int((pat.codes >= 0).sum(axis=1).max(initial=2)))

    def features(rows: np.ndarray) -> np.ndarray:
        return stat.features(Patterns(np.asarray(rows, np.int32), np.ones(len(rows), np.int64), None, V))

    return PseudoUnits(features=features, n_values=V, width=width, ordered=stat.ordered, scale=scale)


def disagreeing_patterns(pat: Patterns, stat: _Statistic) -> np.ndarray:
    """(P,) which patterns (of those the statistic uses) hold values that are not all alike."""
    seen = pat.codes >= 0
    high = np.where(seen, pat.codes, -1).max(axis=1, initial=-1)
    low = np.where(seen, pat.codes, np.iinfo(np.int32).max).min(axis=1, initial=np.iinfo(np.int32).max)
    return _used_patterns(pat, stat) & (high != low)


def disagreeing_units(pat: Patterns, stat: _Statistic) -> int:
    """Units (of those the statistic uses) whose values are not all alike."""
    return int(pat.counts[disagreeing_patterns(pat, stat)].sum())


def _describe_unit(row: Sequence[int], data: CodingData, ordered: bool) -> Any:
    """The pseudo-unit for the record: the coders' values (ordered) or the list of values."""
    if ordered:
        return {c: value_label(data.values[v]) if v >= 0 else None for c, v in zip(data.coders, row)}
    return [value_label(data.values[v]) for v in row if v >= 0]


def _score_test(estimate: float, n: float, minimum: float, lower: float) -> float:
    """One-sided p-value of the score test of H0: p <= minimum, the test the Wilson bound
    inverts (so the bound clears the minimum exactly when this is below 1 - level)."""
    if 0 < minimum < 1:
        return float(norm_cdf(-(estimate - minimum) / np.sqrt(minimum * (1 - minimum) / n)))
    return 0.0 if lower > minimum else 1.0


def _null_test(estimate: float, se0: float | None, method: str) -> dict[str, Any]:
    """z and the two- and one-sided p-values of H0: no agreement beyond chance, from a null SE
    (all None without one)."""
    if not se0 or not np.isfinite(estimate) or se0 <= 0:
        return {"z": None, "p_value": None, "p_value_one_sided": None, "details": {}}
    z = float(estimate / se0)
    return {"z": z, "p_value": float(2 * norm_cdf(-abs(z))), "p_value_one_sided": float(norm_cdf(-z)),
            "details": {"z_method": method}}


def _clustered_test_note(name: str) -> Note:
    return Note("no-test-clustered", f"No z or p-value is given for {display_name(name)}: the test of no "
                "agreement beyond chance uses a standard error for independent units, and here the units are "
                "nested in groups, so it would overstate the evidence. The cluster-bootstrap interval is the "
                "inference (a lower bound above 0 rejects no agreement beyond chance at its level).")


def _independent_only(extra: dict[str, Any], details: dict, warnings: list[Note], name: str, *,
                      bootstrapped: bool) -> dict[str, Any]:
    """With units nested in groups, the published SEs (and the null SEs behind z and the
    p-values) assume independent units: keep them only as details["se_independent_units"] /
    details["se0_independent_units"], and give no test (see `_clustered_test_note`). Without a
    bootstrap there is then no SE and no interval."""
    extra = dict(extra)
    if extra.get("se0") is not None:
        details["se0_independent_units"] = extra.pop("se0")
        warnings.append(_clustered_test_note(name))
    extra.pop("se_handbook", None)
    extra.pop("se_handbook_method", None)
    if not bootstrapped and (extra.get("se") is not None or extra.get("wilson")):
        if extra.get("se") is not None:
            details["se_independent_units"] = extra["se"]
        for key in ("se", "se_method", "df", "wilson", "n"):
            extra.pop(key, None)
        warnings.append(Note("clustered-no-bootstrap", f"The units are nested in groups: the published "
                             f"standard errors of {display_name(name)} assume independent units, so without a "
                             "bootstrap no SE or interval is given; resample the groups (n_resamples > 0, "
                             "--boot)."))
    return extra


def _used_patterns(pat: Patterns, stat: _Statistic) -> np.ndarray:
    observed = pat.codes >= 0
    if isinstance(stat, _Cohen):
        return observed.all(axis=1)
    return observed.sum(axis=1) >= 2


def _n_values(pat: Patterns, stat: _Statistic) -> int:
    used = _used_patterns(pat, stat)
    return int(((pat.codes >= 0).sum(axis=1) * pat.counts)[used].sum())


def _wilson(p: float, n: float, level: float) -> tuple[float, float]:
    z = norm_ppf(1 - (1 - level) / 2)
    centre = (p + z ** 2 / (2 * n)) / (1 + z ** 2 / n)
    half = z * np.sqrt(p * (1 - p) / n + z ** 2 / (4 * n ** 2)) / (1 + z ** 2 / n)
    return float(centre - half), float(centre + half)


# ----------------------------------------------------------------------------------------
# public coefficients

_COMMON_PARAMETERS = """
    Parameters
    ----------
    data : CodingData, DataFrame or array
        Units in rows, coders in columns; None, NaN or "" where a coder did not code a unit.
    {specific}categories : sequence, optional
        The full category list in scale order, unused categories included (they matter for
        AC1 and Brennan-Prediger). By default the data's own values; a codebook read with the
        data fixes them.
    confidence_level : float
        Level of the two-sided interval and of the one-sided lower bound (default 0.95).
    n_resamples : int
        Resamples (units drawn with all their values); 0 for none, in which case the interval
        is analytic where a published SE exists.
    ci_method : {{"pseudo-unit", "bca", "percentile"}}
        How the interval and the bound are made (`agree.stats.resampling`). "pseudo-unit"
        (default): Rubin's Bayesian bootstrap with one least-favourable unit added, which
        keeps its level with few units and high agreement; "bca" and "percentile": the
        ordinary unit bootstrap, for comparison.
    seed : int, optional
        Seed of the resampling; None draws one and records it in the result.
    minimum : float, optional
        A minimum acceptable value: the result gives the one-sided lower bound that decides
        against it (it reaches the minimum when strictly above) and the p-value of
        θ ≤ minimum from the same draws.
    cluster : array or str, optional
        Per-unit group labels, or the name of a kept column: whole groups are resampled (the
        pseudo-unit is then a group of the mean size).

    Returns
    -------
    AgreementResult
        Estimate (NaN with a warning when undefined), SE and how it was obtained, interval,
        one-sided lower bound, p-value against the minimum, counts, bootstrap record and
        warnings; details["disagreeing_units"] counts the units whose values differ and
        details["pseudo_unit"] records the least-favourable unit.
"""

_SPECIFIC = {
    "weights": ("weights : None, \"linear\", \"quadratic\" or q x q array\n"
                "        Agreement weights on the category scores (the numbers for numeric codes,\n"
                "        else ranks in category order); None for unweighted.\n    "),
    "positive": ("positive : category, optional\n"
                 "        The category counted as positive (a, both coders chose it) in the prevalence\n"
                 "        and bias indices; by default 1 for a 0/1 code, else the first category.\n    "),
    "level": ("level : {\"nominal\", \"ordinal\", \"interval\", \"ratio\"} or callable\n"
              "        Level of measurement, which sets the metric; a function f(c, k) >= 0 with\n"
              "        f(c, c) = 0 gives a custom metric. By default the data's own level (read\n"
              "        from the codebook or given to `read`; nominal for plain arrays).\n"
              "    distance : {\"masi\", \"jaccard\"}, optional\n"
              "        For sets of codes (several codes per unit and coder); MASI by default.\n    "),
}


def _documented(*specific: str):
    """Complete a coefficient's docstring with the parameters every coefficient shares (placed
    before its Notes), the return value, and the References of every result it computes (from
    the registry, `agree.core.registry`)."""
    def decorate(func):
        params = _COMMON_PARAMETERS.format(specific="".join(_SPECIFIC[k] for k in specific))
        doc = func.__doc__ or ""
        head, sep, notes = doc.partition("\n    Notes\n")
        refs = "".join(f"    {r}\n" for r in references_for(func.__name__))
        refs = f"\n    References\n    ----------\n{refs}" if refs else ""
        func.__doc__ = head.rstrip() + "\n" + params + (sep + notes.rstrip() + "\n" if sep else "") + refs
        return func
    return decorate


def _prepare(data: Any, categories: Any, *, single: bool = True) -> CodingData:
    d = as_coding_data(data, categories=categories)
    if d.n_coders < 2:
        raise AgreeError(f"agreement needs at least two coders; the data have {d.n_coders}",
                         hint="check the coder columns, or the layout detected", code="one-coder")
    if single and d.set_valued:
        raise AgreeError("this coefficient needs one code per unit and coder; these data have sets of codes",
                         hint="use krippendorff_alpha (set distances) or analyse each code as present/absent",
                         code="set-valued")
    return d


def _options(kw: dict) -> dict:
    return {"confidence_level": kw.get("confidence_level", DEFAULT_CONFIDENCE),
            "n_resamples": kw.get("n_resamples", DEFAULT_RESAMPLES),
            "ci_method": kw.get("ci_method", DEFAULT_CI_METHOD), "seed": kw.get("seed"),
            "minimum": kw.get("minimum"), "cluster": kw.get("cluster")}


def _check_q(d: CodingData, name: str) -> None:
    if len(d.values) < 2:
        raise AgreeError(f"{name} needs at least two categories; the data have {len(d.values)}",
                         hint="pass the codebook's full category list with categories=", code="q")


@_documented("level")
def krippendorff_alpha(data: Any, *, level: Any = None, distance: str | None = None,
                       categories: Sequence[Any] | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                       n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                       minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Krippendorff's alpha for any number of coders, missing values and any metric.

    Notes
    -----
    α = 1 - (n - 1) Σ o_ck δ_ck / Σ n_c n_k δ_ck, with the coincidence matrix
    o_ck = Σ_u r_uc (r_uk - [c=k]) / (m_u - 1) over units with m_u >= 2 values and its
    margins n_c. δ is the metric of the level: nominal, ordinal (from the margins),
    interval (c - k)², ratio ((c - k)/(c + k))², a function, or for sets of codes the
    Jaccard or MASI distance. Undefined (NaN) when there is no pairable unit or no
    expected disagreement. No analytic standard error is standard; the interval is the
    unit bootstrap (Hughes 2022 on why not the pair-resampling bootstrap).
    """
    d = _prepare(data, categories, single=False)
    delta, label = distance_matrix(d, d.level if level is None else level, distance)
    stat = alpha_statistic(delta)
    notes = _order_notes(d, "The ordinal metric") if label == "ordinal" else []
    res = _run(stat, d, level=label, weights=None, notes=notes, **_options(locals()))
    return _replace(res, details={**res.details, "pairable_values": float(res.n_values)})


def coincidence_matrix(data: Any, *, categories: Sequence[Any] | None = None) -> pd.DataFrame:
    """Krippendorff's coincidence matrix o_ck (values x values) over pairable units."""
    d = as_coding_data(data, categories=categories)
    pat = compress(d.codes, len(d.values), ordered=False, weights=d.weights)
    o = coincidences(pat.value_counts(), pat.counts)
    labels = [value_label(v) for v in d.values]
    return pd.DataFrame(o, index=labels, columns=labels)


@_documented("weights")
def percent_agreement(data: Any, *, weights: Any = None, categories: Sequence[Any] | None = None,
                      confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD,
                      seed: Any = None, minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Observed agreement: the mean over pairable units of the share of agreeing coder pairs.

    Notes
    -----
    a_u = Σ_k r_uk (r*_uk - 1) / (r_u (r_u - 1)), r*_uk = Σ_l w_kl r_ul; P = mean of a_u over
    units with two or more values (Fleiss 1971). With two coders this is the share of units
    coded alike (Wilson interval when no bootstrap is asked). Not chance-corrected: never
    report it alone (Lombard, Snyder-Duch & Bracken 2002). Sets of codes agree when equal.
    """
    d = _prepare(data, categories, single=False)
    w, label = agreement_weights(d, weights)
    stat = _PercentAgreement(name="percent_agreement", w=w, undefined_reason="no unit has two or more values")
    return _run(stat, d, level=None, weights=label, **_options(locals()))


@_documented("weights")
def cohen_kappa(data: Any, *, weights: Any = None, categories: Sequence[Any] | None = None,
                confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD,
                seed: Any = None, minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Cohen's kappa (weighted when `weights` is given) for exactly two coders.

    Notes
    -----
    κ = (p_o - p_e) / (1 - p_e), p_o = Σ w_kl p_kl, p_e = Σ w_kl p_k. p_.l over the units
    both coders coded (complete cases; the others are counted as left out). `se` is the
    large-sample SE of Fleiss, Cohen & Everitt (1969); details["se0"] the SE under
    H0: κ = 0, which gives z and the p-values; details["kappa_max"] the largest κ the
    coders' margins allow. Weights: "linear", "quadratic" (on the category scores) or a
    q x q matrix.
    """
    d = _prepare(data, categories)
    require_coder_identity(d, "Cohen's kappa")
    if d.n_coders != 2:
        raise AgreeError(f"Cohen's kappa compares exactly two coders; the data have {d.n_coders} "
                         f"({', '.join(d.coders)})",
                         hint="use fleiss_kappa, conger_kappa or krippendorff_alpha for more coders, "
                              "or select two coders", code="two-coders")
    _check_q(d, "Cohen's kappa")
    w, label = agreement_weights(d, weights)
    stat = _Cohen(name="cohen_kappa" if label is None else f"weighted_kappa_{label}", ordered=True,
                  w=w, V=len(d.values),
                  undefined_reason="no unit coded by both coders, or no expected disagreement (p_e = 1)")
    notes = _weight_notes(w) + (_order_notes(d, f"{label.capitalize()} weighting") if isinstance(weights, str) else [])
    both = (d.codes >= 0).all(axis=1)
    dropped = int(d.unit_weights()[~both & ((d.codes >= 0).sum(axis=1) >= 1)].sum())
    if dropped:
        notes.append(Note("complete-cases", f"{dropped} units coded by only one of the two coders were left "
                          "out (Cohen's kappa uses units both coded)."))
    return _run(stat, d, level=None, weights=label, notes=notes, **_options(locals()))


def _pi_type(d: CodingData, name: str, kind: str, weights: Any, opts: dict, doc_notes=()) -> AgreementResult:
    _check_q(d, display_name(name))
    w, label = agreement_weights(d, weights)
    stat = _ChanceCorrected(name=name, kind=kind, w=w,
                            undefined_reason="no pairable unit, or no expected disagreement (chance agreement is 1)")
    notes = list(doc_notes) + _weight_notes(w)
    if isinstance(weights, str):
        notes += _order_notes(d, f"{label.capitalize()} weighting")
    return _run(stat, d, level=None, weights=label, notes=notes, **opts)


@_documented("weights")
def scott_pi(data: Any, *, weights: Any = None, categories: Sequence[Any] | None = None,
             confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD,
             seed: Any = None, minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Scott's pi: chance agreement from the coders' pooled category shares.

    Notes
    -----
    π = (p_o - p_e) / (1 - p_e), p_e = Σ_kl w_kl π_k π_l, π_k the mean over coded units of
    r_uk / r_u (Scott 1955; Gwet 2014 for missing values and weights). With more than two
    coders this is Fleiss' kappa. `se` by linearisation (Gwet 2008).
    """
    d = _prepare(data, categories)
    res = _pi_type(d, "scott_pi", "pi", weights, _options(locals()))
    return _add_fleiss_null(res, d, weights, cluster)


@_documented()
def fleiss_kappa(data: Any, *, categories: Sequence[Any] | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                 n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                 minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Fleiss' kappa for several coders, who need not be the same people for every unit.

    Notes
    -----
    κ = (P̄ - P_e) / (1 - P_e), P̄ the mean within-unit agreement, P_e = Σ_j p_j²
    (Fleiss 1971). With unequal numbers of values per unit, p_j is the mean of r_uj / r_u
    (Gwet 2014). With the same number of coders for every unit, details["per_category"]
    gives Fleiss' κ_j with the null SE of Fleiss, Nee & Landis (1979), which also gives
    z and the p-values for H0: no agreement beyond chance. `se` by linearisation (Gwet 2008).
    """
    d = _prepare(data, categories)
    res = _pi_type(d, "fleiss_kappa", "pi", None, _options(locals()))
    return _add_fleiss_null(res, d, None, cluster)


def _add_fleiss_null(res: AgreementResult, d: CodingData, weights: Any, cluster: Any = None) -> AgreementResult:
    """Per-category kappa and the Fleiss-Nee-Landis null variance (constant raters only).
    With `cluster` the null SEs assume independent units, so no z or p-value is given."""
    if weights is not None or not np.isfinite(res.estimate):
        return res
    r = (d.codes >= 0).sum(axis=1)
    used = r >= 1
    if not used.any():
        return res
    n = int(r[used][0])
    details = dict(res.details)
    notes = list(res.warnings)
    if (r[used] != n).any() or n < 2:
        details["per_category"] = None
        notes.append(Note("varying-coders", "Units have different numbers of values, so the per-category "
                          "kappas and the null test of Fleiss, Nee & Landis (1979) are not given; the "
                          "estimate uses Gwet's (2014) generalisation."))
        return _replace(res, details=details, warnings=tuple(notes))
    pat = compress(d.codes if used.all() else d.codes[used], len(d.values), ordered=False,
                   weights=d.weights if d.weights is None or used.all() else d.weights[used])
    R = pat.value_counts()
    c = pat.counts.astype(float)
    N = c.sum()
    p = (c @ R) / (N * n)
    q = 1 - p
    pq = p * q
    with np.errstate(invalid="ignore", divide="ignore"):
        kj = 1 - (c @ (R * (n - R))) / (N * n * (n - 1) * pq)
    se0_j = np.sqrt(2 / (N * n * (n - 1)))
    spq = pq.sum()
    var0 = 2 / (N * n * (n - 1)) * (spq ** 2 - np.sum(pq * (q - p))) / spq ** 2 if spq > 0 else np.nan
    clustered = cluster is not None
    per = {}
    for j, v in enumerate(d.values):
        k = float(kj[j]) if pq[j] > 0 else float("nan")
        t = _null_test(k, None if clustered else float(se0_j), "")
        per[value_label(v)] = {"kappa": k, "se0": None if clustered else float(se0_j), "z": t["z"],
                               "p_value": t["p_value"], "share": float(p[j])}
    details["per_category"] = per
    se0 = float(np.sqrt(var0)) if np.isfinite(var0) and var0 > 0 else None
    if clustered:
        details["se0_independent_units"] = se0
        if se0 and not any(n.code == "no-test-clustered" for n in notes):
            notes.append(_clustered_test_note(res.name))
        se0 = None
    details["se0"] = se0
    test = _null_test(res.estimate, se0, "kappa / SE under H0 (Fleiss, Nee & Landis 1979)")
    details.update(test.pop("details"))
    return _replace(res, details=details, **test, warnings=tuple(notes))


@_documented()
def conger_kappa(data: Any, *, categories: Sequence[Any] | None = None, confidence_level: float = DEFAULT_CONFIDENCE,
                 n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD, seed: Any = None,
                 minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Conger's kappa: Cohen's kappa generalised to m identified coders.

    Notes
    -----
    κ = (P̄ - p_e) / (1 - p_e), p_e = Σ_{i≠j} Σ_k p_ik p_jk / (m (m - 1)), p_ik the share of
    coder i's coded units in category k (Conger 1980; Gwet 2014 for missing values). Equals
    Cohen's kappa for two coders with no missing values. `se` by linearisation (Gwet 2014);
    z is the Wald statistic κ / se.
    """
    d = _prepare(data, categories)
    require_coder_identity(d, "Conger's kappa")
    _check_q(d, "Conger's kappa")
    observed = d.codes >= 0
    uw = d.unit_weights()
    pairable = int(uw[observed.sum(axis=1) >= 2].sum())
    complete = int(uw[observed.all(axis=1)].sum())
    if d.n_coders > 2 and complete < 0.5 * max(pairable, 1):
        raise AgreeError(f"Conger's kappa needs the same coders on (nearly) every unit; here only "
                         f"{complete} of {pairable} pairable units were coded by all "
                         f"{d.n_coders} coders, so the coders rotate",
                         hint="use krippendorff_alpha, fleiss_kappa or gwet_ac1, which allow rotating coders",
                         code="rotating")
    stat = _Conger(name="conger_kappa", ordered=True, m=d.n_coders, V=len(d.values),
                   undefined_reason="no pairable unit, or no expected disagreement (p_e = 1)")
    res = _run(stat, d, level=None, weights=None, **_options(locals()))
    if cluster is not None:
        if res.defined:
            res = _replace(res, warnings=res.warnings + (_clustered_test_note(res.name),))
    elif res.defined and res.se_method and res.se_method.startswith("linearisation") and res.se > 0:
        test = _null_test(res.estimate, res.se, "Wald: kappa / linearised SE (no published null SE)")
        res = _replace(res, details={**res.details, **test.pop("details")}, **test)
    return res


@_documented("weights")
def brennan_prediger(data: Any, *, weights: Any = None, categories: Sequence[Any] | None = None,
                     confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD,
                     seed: Any = None, minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Brennan & Prediger's (1981) kappa: chance agreement 1/q (T_w / q² when weighted).

    Notes
    -----
    κ_n = (p_o - 1/q) / (1 - 1/q), q the number of categories (unused codebook categories
    count, so pass the codebook's list). It is Bennett, Alpert & Goldstein's S.
    `se` = SE(p_o) / (1 - p_e) by linearisation.
    """
    d = _prepare(data, categories)
    return _pi_type(d, "brennan_prediger", "bp", weights, _options(locals()))


@_documented("weights")
def gwet_ac1(data: Any, *, weights: Any = None, categories: Sequence[Any] | None = None,
             confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES, ci_method: str = DEFAULT_CI_METHOD,
             seed: Any = None, minimum: float | None = None, cluster: Any = None) -> AgreementResult:
    """Gwet's AC1 (AC2 when `weights` is given).

    Notes
    -----
    γ = (p_a - p_e) / (1 - p_e), p_e = T_w / (q (q - 1)) Σ_k π_k (1 - π_k), T_w = Σ w_kl,
    π_k the mean over coded units of r_uk / r_u (Gwet 2008; 2014). `se` by Gwet's
    linearisation; the interval without bootstrap uses t with n - 1 df.
    """
    d = _prepare(data, categories)
    name = "gwet_ac1" if weights is None else "gwet_ac2"
    res = _pi_type(d, name, "ac", weights, _options(locals()))
    if res.defined and len(np.unique(d.codes[d.codes >= 0])) == 1:
        res = _replace(res, warnings=res.warnings + (Note("no-variation", "Every value is the same category: "
                       "AC1 is defined here but kappa and alpha are not; the data show no variation."),))
    return res


@_documented("positive")
def pabak(data: Any, *, positive: Any = None, categories: Sequence[Any] | None = None,
          confidence_level: float = DEFAULT_CONFIDENCE, n_resamples: int = DEFAULT_RESAMPLES,
          ci_method: str = DEFAULT_CI_METHOD, seed: Any = None, minimum: float | None = None,
          cluster: Any = None) -> AgreementResult:
    """Prevalence- and bias-adjusted kappa for a binary code: PABAK = 2 p_o - 1.

    Notes
    -----
    Byrt, Bishop & Carlin (1993). With two coders details gives the prevalence index
    PI = (a - d)/N and the bias index BI = (b - c)/N of the 2 x 2 table of the units both
    coded, where a counts the units both coders put in the *positive* category, d those both
    put in the other, b those only the first coder (the first coder column) put in the
    positive category and c those only the second did. PI > 0: the positive category is the
    more common one; BI > 0: the first coder uses it more often. The positive category is
    `positive`, by default 1 (or True) for a 0/1 code, and otherwise the first category in
    codebook order; details["positive"] names it and details["first_coder"] the first coder.
    κ = (PABAK - PI² + BI²)/(1 - PI² + BI²) whichever is positive. Report PI and BI beside
    kappa, not instead of it.
    """
    d = _prepare(data, categories)
    if len(d.values) != 2:
        raise AgreeError(f"PABAK is for a binary code (two categories); the data have {len(d.values)}",
                         hint="use brennan_prediger for more categories, or analyse one code as present/absent",
                         code="binary")
    pos, chosen = _positive_category(d.values, positive)
    res = _pi_type(d, "pabak", "bp", None, _options(locals()))
    details = dict(res.details)
    notes = list(res.warnings)
    if d.n_coders == 2:
        both = (d.codes >= 0).all(axis=1)
        yes = d.codes[both] == pos
        uw = d.unit_weights()[both]
        n = float(uw.sum())
        if n:
            a = np.sum(uw * (yes[:, 0] & yes[:, 1]))
            dd = np.sum(uw * (~yes[:, 0] & ~yes[:, 1]))
            b = np.sum(uw * (yes[:, 0] & ~yes[:, 1]))
            cc = np.sum(uw * (~yes[:, 0] & yes[:, 1]))
            details["prevalence_index"] = float((a - dd) / n)
            details["bias_index"] = float((b - cc) / n)
            details["categories"] = [value_label(v) for v in d.values]
            details["positive"] = value_label(d.values[pos])
            details["first_coder"] = str(d.coders[0])
            if chosen == "first":
                notes.append(Note("pabak-positive", f"The prevalence and bias indices count "
                                  f"'{value_label(d.values[pos])}' (the first category) as positive: a = both "
                                  f"coders chose it; BI > 0 means {d.coders[0]} chose it more often. Pass "
                                  "positive= to count the other category."))
    return _replace(res, details=details, warnings=tuple(notes))


def _positive_category(values: Sequence[Any], positive: Any) -> tuple[int, str]:
    """Index of PABAK's positive category among the two `values`, and how it was chosen
    ("given", "one" for the 1 of a 0/1 code, "first")."""
    labels = [value_label(v) for v in values]
    if positive is not None:
        for i, (v, label) in enumerate(zip(values, labels)):
            if v == positive or label == value_label(positive):
                return i, "given"
        raise AgreeError(f"positive='{positive}' is not one of the code's two categories "
                         f"({', '.join(labels)})", code="positive")
    if sorted(labels) == ["0", "1"] or sorted(labels) == ["False", "True"]:
        return labels.index("1" if "1" in labels else "True"), "one"
    return 0, "first"
