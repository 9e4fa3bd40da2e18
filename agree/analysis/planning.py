"""Planning the reliability sample: how many units should several coders code independently?

`plan_sample` answers by Monte Carlo simulation (METHODS 8.2): simulate coders who reach the
expected agreement, compute Krippendorff's alpha and its one-sided percentile bootstrap lower
bound on each simulated data set, and find the smallest number of units for which the lower
bound clears the minimum with the wanted probability (the *assurance*). Closed-form answers
(METHODS 8.1, 8.3) and rules of thumb (METHODS 8.4) are shown beside it for context.

For speed nothing here calls the public coefficient functions. Each unit's multiset of values
is a *pattern*; a data set is a vector of counts over patterns; the coincidence matrix is
linear in those counts, and a unit-bootstrap replicate is a multinomial draw over them
(METHODS 7.5). Alpha for R data sets x B replicates is then a few array products.

`decision_sentence` turns a computed `AgreementResult` into the sentence a report states
about a minimum ("... the one-sided 95% lower bound .80 clears the minimum .80").

References
----------
Krippendorff, K. (2004; 2013). Content Analysis: An Introduction to Its Methodology. Sage.
Donner, A., & Eliasziw, M. (1992). A goodness-of-fit approach to inference procedures for the
    kappa statistic. Statistics in Medicine, 11(11), 1511-1519.
Lombard, M., Snyder-Duch, J., & Bracken, C. C. (2002). Content analysis in mass communication.
    Human Communication Research, 28(4), 587-604.
O'Connor, C., & Joffe, H. (2020). Intercoder reliability in qualitative research.
    International Journal of Qualitative Methods, 19, 1-13.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
import pandas as pd
from scipy import optimize, stats

from agree.core.constants import DEFAULT_CONFIDENCE, DEFAULT_MINIMUM
from agree.core.format import decision_sentence, percent_label  # noqa: F401 (decision_sentence: part of the planning API)
from agree.core.model import AgreeError
from agree.core.results import Note, json_safe
from agree.core.seeds import resolve_seed
from agree.stats.kernels import alpha_finish, coincidence_contributions, coincidence_features, delta_for, ordinal_delta
from agree.stats.patterns import compress

PLAN_LEVELS = ("nominal", "ordinal", "interval")

# Largest number of (replicate x data set x pattern) cells drawn at once.
_CHUNK_CELLS = 2_000_000
# Independent random streams (and thread jobs) the simulated data sets are split into.
_BLOCKS = 4


# ---------------------------------------------------------------------------------------
# Result types
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class AssurancePoint:
    """Assurance at one sample size: the share of simulated studies whose lower bound cleared
    the minimum (`assurance`), its Monte Carlo error sqrt(P(1-P)/R), and the smoothed value."""

    units: int
    assurance: float
    mc_error: float
    smoothed: float

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"units": self.units, "assurance": self.assurance,
                       "mc_error": self.mc_error, "smoothed": self.smoothed})


@dataclass(frozen=True)
class ClosedForm:
    """A closed-form sample size, with where it comes from and what it assumes."""

    name: str
    units: int | None
    source: str
    assumptions: str

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"name": self.name, "units": self.units, "source": self.source,
                       "assumptions": self.assumptions})


@dataclass(frozen=True)
class RuleOfThumb:
    """A conventional rule, shown for context only (rules of thumb ignore prevalence)."""

    name: str
    rule: str
    units: int | None
    units_high: int | None
    source: str
    note: str

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"name": self.name, "rule": self.rule, "units": self.units,
                       "units_high": self.units_high, "source": self.source, "note": self.note})


@dataclass(frozen=True)
class Plan:
    """How many units to double-code, and why.

    Attributes
    ----------
    units_needed : smallest number of units whose smoothed assurance reaches the wanted
        assurance; None when even `max_units` does not (see warnings).
    curve : assurance at each simulated sample size.
    inputs : the inputs as given and as resolved (shares, level, ...).
    model : one sentence stating the simulation model.
    interval : one sentence stating the interval used in the simulation.
    smoothing : how the curve was smoothed to find `units_needed`.
    population_alpha : alpha of the simulation model over an infinite number of units
        (exact, from the model's pair probabilities).
    closed_forms, rules_of_thumb : context beside the simulation.
    warnings : cautions, as Notes.
    seed, replicates, n_resamples : what makes the plan repeatable.
    """

    units_needed: int | None
    curve: tuple[AssurancePoint, ...]
    inputs: dict[str, Any]
    model: str
    interval: str
    smoothing: str
    population_alpha: float
    closed_forms: tuple[ClosedForm, ...]
    rules_of_thumb: tuple[RuleOfThumb, ...]
    warnings: tuple[Note, ...]
    seed: int
    replicates: int
    n_resamples: int
    assurance_at_units_needed: float | None = None
    details: dict[str, Any] = field(default_factory=dict)

    def to_frame(self) -> pd.DataFrame:
        """The assurance curve, one row per simulated sample size: ``units``, ``assurance``
        (share of simulated studies whose lower bound cleared the minimum), ``mc_error``
        (its Monte Carlo error) and ``smoothed`` (the fitted curve used for `units_needed`)."""
        return pd.DataFrame([(p.units, p.assurance, p.mc_error, p.smoothed) for p in self.curve],
                            columns=["units", "assurance", "mc_error", "smoothed"])

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        return notebook_text("Plan", self._summary(), self.to_frame(), notes=[w.message for w in self.warnings])

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        return notebook_html(self._summary(), self.to_frame(), notes=[w.message for w in self.warnings])

    def _summary(self) -> str:
        from agree.core.format import format_value

        wanted = self.inputs.get("assurance")
        minimum = self.inputs.get("minimum")
        target = (f"the lower bound of α clears {format_value(minimum, 'number', 3)}"
                  if minimum is not None else "the lower bound clears the minimum")
        if wanted is not None:
            target += f" with probability {format_value(wanted, 'number', 2)}"
        if self.units_needed is None:
            head = f"Plan: no simulated sample size was enough for {target}."
        else:
            at = ("" if self.assurance_at_units_needed is None else
                  f" (assurance there {format_value(self.assurance_at_units_needed, 'number', 3)})")
            head = f"Plan: {self.units_needed} units coded by every coder so that {target}{at}."
        return (f"{head} {self.replicates} simulated studies per size, {self.n_resamples} "
                f"bootstrap resamples each, seed {self.seed}.")

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "units_needed": self.units_needed,
            "assurance_at_units_needed": self.assurance_at_units_needed,
            "curve": [p.to_dict() for p in self.curve],
            "inputs": dict(self.inputs),
            "model": self.model,
            "interval": self.interval,
            "smoothing": self.smoothing,
            "population_alpha": self.population_alpha,
            "closed_forms": [c.to_dict() for c in self.closed_forms],
            "rules_of_thumb": [r.to_dict() for r in self.rules_of_thumb],
            "warnings": [w.to_dict() for w in self.warnings],
            "seed": self.seed,
            "replicates": self.replicates,
            "n_resamples": self.n_resamples,
            "details": dict(self.details),
        })


# ---------------------------------------------------------------------------------------
# Vectorised alpha from pattern counts (METHODS 4.1-4.3, 7.5)
# ---------------------------------------------------------------------------------------

def _pattern_ids(codes: np.ndarray, q: int) -> tuple[np.ndarray, np.ndarray]:
    """Map each unit's multiset of values to a pattern (`agree.stats.patterns.compress`).

    Parameters
    ----------
    codes : (..., m) int array of category indices 0..q-1, -1 for missing.
    q : number of categories.

    Returns
    -------
    ids : codes.shape[:-1] int array, the pattern of each unit. Patterns are numbered by
        decreasing frequency (so multinomial draws stop early; ties by their sorted values, the
        last most significant, missing last); every unit with fewer than two values
        (unpairable, no contribution to alpha) shares one pattern.
    r : (P, q) value counts r_pc of each pattern.
    """
    m = codes.shape[-1]
    flat = codes.reshape(-1, m)
    unpairable = (flat >= 0).sum(axis=1) < 2
    pat = compress(np.where(unpairable[:, None], -1, flat), q, ordered=False, keep_inverse=True)
    rows = np.sort(np.where(pat.codes < 0, q, pat.codes), axis=1)
    order = np.lexsort((*rows.T, -pat.counts))
    rank = np.empty_like(order)
    rank[order] = np.arange(len(order))
    return rank[pat.inverse].reshape(codes.shape[:-1]), pat.value_counts()[order]


def _alpha_from_counts(counts: np.ndarray, coincidences: np.ndarray, level: str) -> np.ndarray:
    """Alpha for many data sets at once from their pattern counts.

    counts : (..., P) pattern counts; coincidences : (P, q, q), each pattern's contribution
    (`agree.stats.kernels.coincidence_contributions`); interval scores are 1..q.

    Notes
    -----
    o = counts @ O (linear in the counts). With a fixed δ (nominal, interval) only
    sum o δ and the margins n_c are needed, so each pattern is reduced to q + 1 numbers
    first. The ordinal δ is recomputed from each data set's own margins (METHODS 4.3, 7.2).
    """
    delta = delta_for(level, scores=np.arange(1, coincidences.shape[-1] + 1))
    return alpha_finish(np.asarray(counts, dtype=float) @ coincidence_features(coincidences, delta), delta)


def _lower_quantile(values: np.ndarray, prob: float) -> np.ndarray:
    """Quantile along axis 0 of the non-NaN values (linear interpolation, as np.quantile);
    NaN for columns with no defined value. Vectorised, unlike np.nanquantile."""
    ordered = np.sort(values, axis=0)                       # NaN sorts last
    defined = np.sum(~np.isnan(values), axis=0)
    h = prob * np.maximum(defined - 1, 0)
    lo = np.floor(h).astype(np.int64)
    hi = np.minimum(lo + 1, np.maximum(defined - 1, 0))
    v_lo = np.take_along_axis(ordered, lo[None, :], axis=0)[0]
    v_hi = np.take_along_axis(ordered, hi[None, :], axis=0)[0]
    out = v_lo + (h - lo) * (v_hi - v_lo)
    return np.where(defined > 0, out, np.nan)


def _pattern_counts(ids: np.ndarray, n_units: int, n_patterns: int) -> np.ndarray:
    """(R, P) pattern counts of the first `n_units` units of each of R simulated data sets."""
    R = ids.shape[0]
    offset = (np.arange(R, dtype=np.int64) * n_patterns)[:, None]
    flat = np.bincount((ids[:, :n_units] + offset).ravel(), minlength=R * n_patterns)
    return flat.reshape(R, n_patterns)


def _bootstrap_lower_bounds(seed: int, ids: np.ndarray, n_units: int, coincidences: np.ndarray,
                            level: str, n_resamples: int,
                            confidence_level: float) -> tuple[np.ndarray, np.ndarray, float]:
    """Alpha and its one-sided percentile lower bound for each of R simulated data sets.

    Parameters
    ----------
    seed : the bootstrap stream; the same seed at every size gives common random numbers.
    ids : (R, >= n_units) pattern of each unit; a data set is the first `n_units` units.

    Notes
    -----
    A unit-bootstrap replicate of a data set with pattern counts c and N units is
    c* ~ Multinomial(N; c / N) (METHODS 7.5). When N is small compared with the number of
    patterns it is cheaper to draw the N unit indices directly and count their patterns:
    the same distribution. The lower bound is the (1 - confidence_level) quantile of the
    defined replicates; undefined replicates are left out (METHODS 7.2). The data sets are
    split into a fixed number of blocks, each with its own random stream, so the result does
    not depend on how many threads run them.

    Returns (estimates (R,), lower bounds (R,) NaN when no replicate is defined, share of
    undefined replicates).
    """
    R = ids.shape[0]
    P = len(coincidences)
    counts = _pattern_counts(ids, n_units, P)
    estimates = _alpha_from_counts(counts, coincidences, level)
    active = np.flatnonzero(counts.any(axis=0))       # patterns seen at this size
    A = len(active)
    coinc = coincidences[active]
    remap = np.zeros(P, dtype=np.int64)
    remap[active] = np.arange(A)
    by_index = n_units < 5 * A
    cells = n_resamples * (n_units if by_index else A)
    chunk = max(1, _CHUNK_CELLS // max(1, cells))

    def run_block(block: int, start: int, stop: int) -> tuple[np.ndarray, int]:
        rng = np.random.default_rng([seed, block])
        lower = np.empty(stop - start)
        undefined = 0
        for s0 in range(start, stop, chunk):
            s1 = min(stop, s0 + chunk)
            r = s1 - s0
            if by_index:
                units = remap[ids[s0:s1, :n_units]].ravel()                     # (r * N,)
                pick = rng.integers(0, n_units, size=(n_resamples, r, n_units))
                pick += (np.arange(r, dtype=np.int64) * n_units)[None, :, None]
                key = units[pick] + (np.arange(n_resamples * r, dtype=np.int64) * A).reshape(
                    n_resamples, r, 1)
                draws = np.bincount(key.ravel(), minlength=n_resamples * r * A).reshape(
                    n_resamples, r, A)
            else:
                draws = rng.multinomial(n_units, counts[s0:s1][:, active] / n_units,
                                        size=(n_resamples, r))
            alphas = _alpha_from_counts(draws, coinc, level)
            undefined += int(np.isnan(alphas).sum())
            lower[s0 - start:s1 - start] = _lower_quantile(alphas, 1.0 - confidence_level)
        return lower, undefined

    edges = np.linspace(0, R, _BLOCKS + 1).astype(int)
    jobs = [(i, int(edges[i]), int(edges[i + 1])) for i in range(_BLOCKS) if edges[i + 1] > edges[i]]
    with ThreadPoolExecutor(max_workers=min(len(jobs), os.cpu_count() or 1)) as pool:
        parts = list(pool.map(lambda job: run_block(*job), jobs))
    lower = np.concatenate([p[0] for p in parts])
    undefined = sum(p[1] for p in parts)
    return estimates, lower, undefined / (R * n_resamples)


# ---------------------------------------------------------------------------------------
# The simulation model (METHODS 8.2)
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Model:
    """Coders who reach a given population alpha.

    nominal: each unit's true category T ~ shares; each coder reports T with probability
    theta, otherwise a category drawn from the shares. Population alpha = theta².
    ordinal/interval: a latent normal X_ui = sqrt(rho) Z_u + sqrt(1 - rho) E_ui (Z, E
    standard normal), cut at the normal quantiles of the cumulative shares. rho is chosen so
    that the alpha of the categories (at the planned level, scores 1..q) equals the target.
    """

    level: str
    shares: np.ndarray
    n_coders: int
    missing: float
    theta: float = float("nan")      # nominal
    rho: float = float("nan")        # latent intraclass correlation (ordinal/interval)

    @property
    def thresholds(self) -> np.ndarray:
        return stats.norm.ppf(np.cumsum(self.shares)[:-1])

    def simulate(self, rng: np.random.Generator, n_sets: int, n_units: int) -> np.ndarray:
        """(n_sets, n_units, n_coders) int8 codes, -1 missing."""
        shape = (n_sets, n_units, self.n_coders)
        q = len(self.shares)
        cum = np.cumsum(self.shares)
        cum[-1] = 1.0
        if self.level == "nominal":
            truth = np.searchsorted(cum, rng.random(shape[:2]), side="right")
            guesses = np.searchsorted(cum, rng.random(shape), side="right")
            knows = rng.random(shape) < self.theta
            codes = np.where(knows, truth[..., None], guesses)
        else:
            latent = math.sqrt(self.rho) * rng.standard_normal(shape[:2])
            x = latent[..., None] + math.sqrt(1.0 - self.rho) * rng.standard_normal(shape)
            codes = np.searchsorted(self.thresholds, x, side="right")
        codes = np.minimum(codes, q - 1).astype(np.int8)
        if self.missing > 0:
            codes[rng.random(shape) < self.missing] = -1
        return codes


def _latent_pair_probabilities(shares: np.ndarray, rho: float) -> np.ndarray:
    """P(coder i in c, coder j in k) for two coders of the latent normal model.

    Notes
    -----
    Given Z = z the coders are independent with p_c(z) = Φ((t_c+1 - sqrt(rho) z)/sqrt(1-rho))
    - Φ((t_c - sqrt(rho) z)/sqrt(1-rho)), so P_ck = ∫ φ(z) p_c(z) p_k(z) dz, computed on a fine
    grid over z in [-9, 9] (the integrand is negligible beyond).
    """
    t = np.concatenate([[-np.inf], stats.norm.ppf(np.cumsum(shares)[:-1]), [np.inf]])
    z = np.linspace(-9.0, 9.0, 6001)
    w = stats.norm.pdf(z) * (z[1] - z[0])
    cdf = stats.norm.cdf((t[None, :] - math.sqrt(rho) * z[:, None]) / math.sqrt(1.0 - rho))
    p = np.diff(cdf, axis=1)                      # (grid, q)
    return (p * w[:, None]).T @ p


def _population_alpha(pair_probs: np.ndarray, level: str) -> float:
    """Alpha over infinitely many units from the pair probabilities P_ck of two coders.

    α = 1 - sum P_ck δ_ck / sum π_c π_k δ_ck with π the margins (n → ∞ in METHODS 4.2).
    """
    margins = pair_probs.sum(axis=1)
    delta = delta_for(level, scores=np.arange(1, len(margins) + 1))
    if delta is None:
        delta = ordinal_delta(margins)
    return float(1.0 - (pair_probs * delta).sum() / (np.outer(margins, margins) * delta).sum())


def _nominal_pair_probabilities(shares: np.ndarray, theta: float) -> np.ndarray:
    """Pair probabilities of the nominal model: P_ck = θ² π_c [c = k] + (1 - θ²) π_c π_k."""
    return theta ** 2 * np.diag(shares) + (1 - theta ** 2) * np.outer(shares, shares)


def _build_model(level: str, shares: np.ndarray, n_coders: int, expected: float,
                 missing: float) -> tuple[_Model, float]:
    """The simulation model reaching `expected`, and its exact population alpha."""
    if level == "nominal":
        theta = math.sqrt(expected)
        model = _Model(level, shares, n_coders, missing, theta=theta)
        return model, _population_alpha(_nominal_pair_probabilities(shares, theta), level)

    def gap(rho: float) -> float:
        return _population_alpha(_latent_pair_probabilities(shares, rho), level) - expected

    rho = optimize.brentq(gap, 1e-6, 1 - 1e-9, xtol=1e-10)
    model = _Model(level, shares, n_coders, missing, rho=rho)
    return model, _population_alpha(_latent_pair_probabilities(shares, rho), level)


# ---------------------------------------------------------------------------------------
# Closed forms and rules of thumb (METHODS 8.1, 8.3, 8.4)
# ---------------------------------------------------------------------------------------

def krippendorff_minimum_units(minimum: float, rarest_share: float, *,
                               significance: float = 0.05) -> float:
    """Krippendorff's minimum sample size from the share of the rarest category (unrounded).

    Notes
    -----
    As recalled [from memory] from Krippendorff (2004 and later editions; METHODS 8.1):

        N = 2 z_{1-p}² [ (1 + α_min)(3 - α_min) / (4 (1 - α_min) p_c (1 - p_c)) - α_min ]

    with p the one-sided significance level and p_c the share of the rarest category. The text
    may count values (two coders per unit) rather than units; `agree` treats N as units, which
    is conservative.

    References
    ----------
    Krippendorff, K. (2004). Content Analysis (2nd ed.). Sage.
    """
    z = stats.norm.ppf(1.0 - significance)
    pc = rarest_share
    return float(2 * z ** 2 * ((1 + minimum) * (3 - minimum)
                               / (4 * (1 - minimum) * pc * (1 - pc)) - minimum))


def donner_eliasziw_units(kappa0: float, kappa1: float, prevalence: float, *,
                          significance: float = 0.05, power: float = 0.8,
                          two_sided: bool = False) -> float:
    """Units for a goodness-of-fit test of H0: κ = κ0 against κ1 (unrounded).

    Two coders, two categories, common prevalence π, intraclass kappa.

    Notes
    -----
    Donner & Eliasziw (1992) [from memory; METHODS 8.3]. Cell probabilities at κ:

        P1 = π² + π(1-π)κ    P2 = 2π(1-π)(1-κ)    P3 = (1-π)² + π(1-π)κ
        N = (z_{1-ε} + z_{1-β})² / sum_l (P_l(κ1) - P_l(κ0))² / P_l(κ0)

    with z_{1-ε/2} for a two-sided test.

    References
    ----------
    Donner, A., & Eliasziw, M. (1992). Statistics in Medicine, 11(11), 1511-1519.
    """
    def cells(k: float) -> np.ndarray:
        pq = prevalence * (1 - prevalence)
        return np.array([prevalence ** 2 + pq * k, 2 * pq * (1 - k), (1 - prevalence) ** 2 + pq * k])

    p0, p1 = cells(kappa0), cells(kappa1)
    if np.any(p0 <= 0) or np.any(p1 < 0):
        return float("nan")
    z_e = stats.norm.ppf(1 - significance / 2 if two_sided else 1 - significance)
    z_b = stats.norm.ppf(power)
    return float((z_e + z_b) ** 2 / np.sum((p1 - p0) ** 2 / p0))


def _coders_caveat(n_coders: int) -> str:
    """What a two-coder closed form means when more coders are planned."""
    if n_coders == 2:
        return "Assumes two coders"
    return (f"Assumes two coders, while {n_coders} are planned here: more coders give each unit "
            "more pairable values, so fewer units usually suffice (the simulation above counts "
            "the coders)")


def _closed_forms(shares: np.ndarray, n_coders: int, level: str, expected: float, minimum: float,
                  confidence_level: float, assurance: float) -> tuple[ClosedForm, ...]:
    # The formulas below are recalled from memory (METHODS 8.1, 8.3); the user-facing text
    # cites the published sources and states the open assumption plainly instead.
    eps = 1.0 - confidence_level
    forms = []
    nk = krippendorff_minimum_units(minimum, float(shares.min()), significance=eps)
    forms.append(ClosedForm(
        name="Krippendorff's minimum sample (rarest category)",
        units=int(math.ceil(nk)) if math.isfinite(nk) and nk > 0 else None,
        source="Krippendorff (2004; 2013), Content Analysis: An Introduction to Its Methodology, "
               "Sage; formula as given in Krippendorff (2004)",
        assumptions=(f"{_coders_caveat(n_coders)}; binary view of the rarest category (share "
                     f"{shares.min():.3f}); one-sided significance {eps:.3g}; implicit true alpha "
                     "(1 + min)/2; ignores the expected alpha and the assurance. Whether N counts "
                     "units or values is not settled here: it is treated as units, which is "
                     "conservative.")))
    if n_coders == 2 and len(shares) == 2:
        nd = donner_eliasziw_units(minimum, expected, float(shares[0]), significance=eps,
                                   power=assurance)
        forms.append(ClosedForm(
            name="Donner-Eliasziw (kappa, 2 coders, 2 categories)",
            units=int(math.ceil(nd)) if math.isfinite(nd) else None,
            source="Donner & Eliasziw (1992), Statistics in Medicine 11, 1511-1519",
            assumptions=(f"Assumes two coders; intraclass kappa, common prevalence {shares[0]:.3f}; "
                         f"goodness-of-fit test of kappa = {minimum:.3f} against {expected:.3f}, "
                         f"one-sided at {eps:.3g} with power {assurance:.2f} (power stands in for "
                         "the assurance); no missing values.")))
    return tuple(forms)


def _rules_of_thumb(corpus_size: int | None) -> tuple[RuleOfThumb, ...]:
    # Both rules are cited from memory (METHODS 8.4).
    note = "Common practice; ignores the prevalence of the codes and the expected agreement."
    lombard_units = 50 if corpus_size is None else max(50, math.ceil(0.10 * corpus_size))
    low = high = None
    if corpus_size is not None:
        low, high = math.ceil(0.10 * corpus_size), math.ceil(0.25 * corpus_size)
    return (
        RuleOfThumb("Lombard et al. (2002)",
                    "at least 50 units or 10% of all units, rarely more than 300",
                    lombard_units, None,
                    "Lombard, Snyder-Duch & Bracken (2002), Human Communication Research 28, "
                    "587-604", note),
        RuleOfThumb("O'Connor & Joffe (2020)", "10% to 25% of the data units", low, high,
                    "O'Connor & Joffe (2020), International Journal of Qualitative Methods 19",
                    note),
    )


# ---------------------------------------------------------------------------------------
# Smoothing the assurance curve
# ---------------------------------------------------------------------------------------

def _probit_fit(units: np.ndarray, hits: np.ndarray, R: int) -> tuple[float, float] | None:
    """Binomial maximum-likelihood fit of assurance = Φ(a + b sqrt(N)).

    Why this form: the lower bound is about α̂ - z se with se ∝ 1/sqrt(N), so
    P(lower bound > min) ≈ Φ((α - min) sqrt(N)/s - z): a probit line in sqrt(N).
    """
    x = np.sqrt(units.astype(float))

    def nll(par: np.ndarray) -> float:
        p = np.clip(stats.norm.cdf(par[0] + par[1] * x), 1e-12, 1 - 1e-12)
        return -float(np.sum(hits * np.log(p) + (R - hits) * np.log1p(-p)))

    res = optimize.minimize(nll, x0=np.array([-1.645, 0.1]), method="Nelder-Mead",
                            options={"xatol": 1e-8, "fatol": 1e-10, "maxiter": 4000})
    if not res.success or res.x[1] <= 0:
        return None
    return float(res.x[0]), float(res.x[1])


def _isotonic(values: np.ndarray) -> np.ndarray:
    """Pool-adjacent-violators: the closest non-decreasing sequence (equal weights)."""
    blocks: list[list[float]] = []
    for v in values:
        blocks.append([float(v), 1.0])
        while len(blocks) > 1 and blocks[-2][0] > blocks[-1][0]:
            v2, w2 = blocks.pop()
            v1, w1 = blocks.pop()
            blocks.append([(v1 * w1 + v2 * w2) / (w1 + w2), w1 + w2])
    return np.concatenate([np.full(int(w), v) for v, w in blocks])


def _first_crossing(units: np.ndarray, curve: np.ndarray, target: float) -> float | None:
    """Smallest N (interpolated in log N) where a non-decreasing curve reaches `target`."""
    above = np.flatnonzero(curve >= target)
    if len(above) == 0:
        return None
    i = above[0]
    if i == 0:
        return float(units[0])
    x0, x1 = np.log(units[i - 1]), np.log(units[i])
    y0, y1 = curve[i - 1], curve[i]
    return float(np.exp(x0 + (target - y0) / (y1 - y0) * (x1 - x0)))


# ---------------------------------------------------------------------------------------
# Validation and the public planner
# ---------------------------------------------------------------------------------------

def resolve_shares(*, categories: int | None = None, shares: Sequence[float] | None = None,
                   rarest: float | None = None) -> np.ndarray:
    """Expected category shares from one of: explicit shares; a number of categories (equal
    shares); a number of categories and the share of the rarest (the rest equal)."""
    problems: list[AgreeError] = []
    if shares is not None:
        arr = np.asarray(list(shares), dtype=float)
        if rarest is not None:
            problems.append(AgreeError("give either the shares or the rarest share, not both",
                                       code="plan-shares"))
        if arr.ndim != 1 or len(arr) < 2:
            problems.append(AgreeError("at least two category shares are needed", code="plan-shares"))
        elif np.any(~np.isfinite(arr)) or np.any(arr <= 0):
            problems.append(AgreeError("every category share must be a positive number",
                                       hint="leave out categories you expect nobody to use",
                                       code="plan-shares"))
        elif abs(arr.sum() - 1.0) > 1e-6:
            problems.append(AgreeError(f"the category shares sum to {arr.sum():.6g}, not 1",
                                       hint="give shares such as 0.4,0.3,0.2,0.1", code="plan-shares"))
        if categories is not None and arr.ndim == 1 and len(arr) != categories:
            problems.append(AgreeError(f"{len(arr)} shares given for {categories} categories",
                                       code="plan-shares"))
        if problems:
            raise problems[0] if len(problems) == 1 else AgreeError(
                problems[0].message, code=problems[0].code, problems=problems)
        return arr
    if categories is None:
        raise AgreeError("say how many categories the code has, or give their expected shares",
                         hint="--categories 4 or --shares 0.4,0.3,0.2,0.1", code="plan-shares")
    if int(categories) != categories or categories < 2:
        raise AgreeError(f"the number of categories must be a whole number of at least 2; got {categories}",
                         code="plan-shares")
    q = int(categories)
    if rarest is None:
        return np.full(q, 1.0 / q)
    if not (0 < rarest <= 1.0 / q):
        raise AgreeError(f"the rarest share must be above 0 and at most 1/{q} = {1 / q:.4g}; got {rarest}",
                         code="plan-shares")
    return np.concatenate([[rarest], np.full(q - 1, (1.0 - rarest) / (q - 1))])


def _validate(coders, expected, minimum, level, confidence_level, assurance, missing,
              replicates, n_resamples, min_units, max_units, corpus_size) -> None:
    problems: list[AgreeError] = []

    def bad(message: str, code: str, hint: str | None = None) -> None:
        problems.append(AgreeError(message, hint=hint, code=code))

    if not isinstance(coders, (int, np.integer)) or coders < 2 or coders > 30:
        bad(f"the number of coders must be a whole number from 2 to 30; got {coders}", "plan-coders")
    if level not in PLAN_LEVELS:
        bad(f"level must be one of {', '.join(PLAN_LEVELS)}; got '{level}'", "plan-level")
    if not (0 < expected < 1):
        bad(f"the expected alpha must be between 0 and 1; got {expected}", "plan-expected",
            hint="alpha = 1 needs no plan; at or below 0 there is no agreement to plan for")
    if not (-1 < minimum < 1):
        bad(f"the minimum must be between -1 and 1; got {minimum}", "plan-minimum")
    elif 0 < expected < 1 and expected <= minimum:
        bad(f"the expected alpha ({expected}) must be above the minimum ({minimum}): a lower bound "
            "cannot be expected to clear a minimum the coders are not expected to reach",
            "plan-expected-below-minimum",
            hint="improve the codebook or training first, or reconsider the minimum")
    if not (0.5 < confidence_level < 1):
        bad(f"the confidence level must be between 0.5 and 1; got {confidence_level}", "plan-ci")
    if not (0 < assurance < 1):
        bad(f"the assurance must be between 0 and 1; got {assurance}", "plan-assurance")
    if not (0 <= missing < 0.9):
        bad(f"the missing share must be at least 0 and below 0.9; got {missing}", "plan-missing")
    if replicates < 50:
        bad(f"at least 50 simulated data sets are needed; got {replicates}", "plan-replicates",
            hint="--replicates 500 (replicates=500)")
    if n_resamples < 50:
        bad(f"at least 50 bootstrap resamples are needed; got {n_resamples}", "plan-resamples",
            hint="--boot 500 (n_resamples=500)")
    if not (5 <= min_units < max_units <= 100_000):
        bad(f"the sizes searched must run from at least 5 units up to at most 100000, the largest "
            f"above the smallest; got {min_units} to {max_units}", "plan-range",
            hint="set the largest size with --max-units (max_units=...); the smallest is "
                 "min_units=... in Python")
    if corpus_size is not None and corpus_size < 1:
        bad(f"the corpus size must be positive; got {corpus_size}", "plan-corpus-size")
    if problems:
        if len(problems) == 1:
            raise problems[0]
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)


def plan_sample(*, coders: int, expected: float, minimum: float = DEFAULT_MINIMUM,
                categories: int | None = None, shares: Sequence[float] | None = None,
                rarest: float | None = None, level: str = "nominal",
                confidence_level: float = DEFAULT_CONFIDENCE, assurance: float = 0.80, missing: float = 0.0,
                seed: int | None = None, replicates: int = 500, n_resamples: int = 500,
                min_units: int = 20, max_units: int = 2000, corpus_size: int | None = None,
                refine_steps: int = 3, progress: Any = None) -> Plan:
    """How many units must be coded by every coder so that alpha's lower bound clears a minimum.

    Parameters
    ----------
    coders : number of coders who each code every unit of the reliability sample.
    expected : the alpha the coders are expected to reach.
    minimum : the smallest acceptable alpha (Krippendorff: .800 to rely on a variable).
    categories, shares, rarest : the code's categories: their expected shares, or their number
        (equal shares), or their number and the share of the rarest (the rest equal).
    level : "nominal", "ordinal" or "interval" (categories scored 1..q).
    confidence_level : level of the one-sided lower bound.
    assurance : wanted probability that the lower bound clears the minimum.
    missing : expected share of missing values, completely at random.
    seed : makes the plan repeatable; drawn and recorded when None.
    replicates : R, simulated data sets per sample size.
    n_resamples : B, bootstrap resamples per simulated data set.
    min_units, max_units : the search range.
    corpus_size : number of units in the whole study, for the percentage rules of thumb.
    refine_steps : bisection steps after the log grid.

    Returns
    -------
    Plan

    Notes
    -----
    For each N on a log grid from `min_units` to `max_units` (then refined by bisection on
    log N near the crossing), R data sets of N units are simulated from the model (METHODS
    8.2), each with its percentile bootstrap lower bound L at `confidence_level` (B unit
    resamples, as pattern-count multinomials). The assurance is P(L > minimum), with Monte Carlo
    error sqrt(P(1-P)/R). Common random numbers: the data set at N is the first N units of one
    long simulated data set, and every N reuses the same bootstrap random stream. The curve is
    smoothed with a binomial probit fit Φ(a + b sqrt(N)) (isotonic regression when that fit is
    poor), and `units_needed` is the smallest N whose smoothed assurance reaches `assurance`.

    References
    ----------
    Krippendorff, K. (2004). Content Analysis (2nd ed.). Sage.
    Donner, A., & Eliasziw, M. (1992). Statistics in Medicine, 11(11), 1511-1519.
    """
    _validate(coders, expected, minimum, level, confidence_level, assurance, missing,
              replicates, n_resamples, min_units, max_units, corpus_size)
    shares_arr = resolve_shares(categories=categories, shares=shares, rarest=rarest)
    q = len(shares_arr)
    seed = resolve_seed(seed)
    notes: list[Note] = []

    model, population_alpha = _build_model(level, shares_arr, int(coders), expected, missing)
    sim_rng = np.random.default_rng([seed, 0])
    codes = model.simulate(sim_rng, replicates, max_units)
    ids, r = _pattern_ids(codes, q)
    del codes
    coincidences = coincidence_contributions(r)
    P = len(r)

    results: dict[int, tuple[int, float]] = {}

    def evaluate(n_units: int) -> float:
        if n_units not in results:
            _, lower, undefined = _bootstrap_lower_bounds(seed + 1, ids, n_units, coincidences,
                                                          level, n_resamples, confidence_level)
            hits = int(np.sum(lower > minimum))
            results[n_units] = (hits, undefined)
            if progress is not None:
                progress(f"{n_units} units", min(1.0, len(results) / (9 + refine_steps)))
        return results[n_units][0] / replicates

    # Larger sizes are not simulated once one size is clearly past the target.
    grid = np.unique(np.round(np.geomspace(min_units, max_units, 9)).astype(int))
    raw_list = []
    for n in grid:
        raw_list.append(evaluate(int(n)))
        if raw_list[-1] >= max(0.99, assurance):
            break
    grid = grid[:len(raw_list)]
    raw = np.array(raw_list)
    mono = _isotonic(raw)
    above = np.flatnonzero(mono >= assurance)
    if len(above) and above[0] > 0:
        lo, hi = int(grid[above[0] - 1]), int(grid[above[0]])
        for _ in range(refine_steps):
            if hi - lo <= 1:
                break
            mid = int(round(math.sqrt(lo * hi)))
            mid = min(max(mid, lo + 1), hi - 1)
            if evaluate(mid) >= assurance:
                hi = mid
            else:
                lo = mid

    units = np.array(sorted(results))
    hits = np.array([results[n][0] for n in units])
    p_raw = hits / replicates
    fit = _probit_fit(units, hits, replicates)
    smoothing = ("binomial probit fit of the assurance against sqrt(units), "
                 "Φ(a + b·sqrt(N)), over all simulated sample sizes (sizes beyond the first "
                 "with assurance of .99 or more were not simulated)")
    smoothed = None
    if fit is not None:
        smoothed = stats.norm.cdf(fit[0] + fit[1] * np.sqrt(units))
        expected_hits = smoothed * replicates
        pearson = np.sum((hits - expected_hits) ** 2
                         / np.maximum(expected_hits * (1 - smoothed), 1e-9))
        if stats.chi2.sf(pearson, max(len(units) - 2, 1)) < 0.001:
            smoothed = None
    if smoothed is None:
        fit = None
        smoothed = _isotonic(p_raw)
        smoothing = ("isotonic (non-decreasing) regression of the assurance, interpolated in log N "
                     "(the probit fit did not fit the simulated points)")
        notes.append(Note("plan-smoothing", "The smooth assurance curve did not fit the simulated "
                          "points; the units needed come from the monotone raw curve instead."))

    if fit is not None:
        n_star = ((stats.norm.ppf(assurance) - fit[0]) / fit[1]) ** 2
        crossing = n_star if n_star <= max_units else None
    else:
        crossing = _first_crossing(units, smoothed, assurance)

    units_needed: int | None
    if crossing is None or (p_raw[-1] < assurance and crossing >= units[-1]):
        units_needed = None
        notes.append(Note("plan-beyond-range",
                          f"Even {max_units} units do not reach the wanted assurance "
                          f"(simulated assurance {p_raw[-1]:.3f} at {max_units} units). Raise the "
                          "expected agreement (codebook, training), reconsider the minimum, or search "
                          "further with --max-units (max_units=...)."))
    else:
        units_needed = int(max(min_units, math.ceil(crossing - 1e-9)))
        if units_needed == min_units and p_raw[0] >= assurance:
            notes.append(Note("plan-at-lower-end",
                              f"The assurance is already reached at {min_units} units, the smallest "
                              "size searched; alpha from fewer units is too unstable to recommend."))
    at_needed = None
    if units_needed is not None:
        at_needed = float(stats.norm.cdf(fit[0] + fit[1] * math.sqrt(units_needed))
                          if fit is not None else np.interp(np.log(units_needed), np.log(units), smoothed))

    if expected - minimum < 0.05:
        notes.append(Note("plan-close-to-minimum",
                          f"The expected alpha ({expected:.3f}) is close to the minimum ({minimum:.3f}): "
                          "the sample size is very sensitive to the expected value; plan for a "
                          "slightly lower expectation too."))
    if shares_arr.min() < 0.05:
        notes.append(Note("plan-rare-category",
                          f"The rarest category has a share of {shares_arr.min():.3f}: rare codes need "
                          "many units, and bootstrap bounds for them are unstable."))
    worst_undefined = max(u for _, u in results.values())
    if worst_undefined > 0.01:
        notes.append(Note("plan-undefined-replicates",
                          f"Up to {percent_label(worst_undefined, 1)} of bootstrap replicates had undefined alpha "
                          "(no variation) at the smaller sample sizes; they were left out."))
    notes.append(Note("plan-model-assumption",
                      "The plan assumes coders who agree as in the simulation model (no systematic "
                      "coder bias) and units drawn at random; biased coders need more units."))

    model_sentence = _model_sentence(model, expected, population_alpha)
    interval_sentence = (
        f"Lower bound: the one-sided {percent_label(confidence_level)} percentile bound of a unit bootstrap "
        f"(B = {n_resamples} resamples of units, drawn as multinomial pattern counts) of "
        f"{level} Krippendorff's alpha, computed for each of R = {replicates} simulated data sets per "
        f"sample size; assurance = share of data sets whose bound exceeds {minimum:.3f}.")

    curve = tuple(AssurancePoint(int(n), float(p), float(math.sqrt(p * (1 - p) / replicates)),
                                 float(s)) for n, p, s in zip(units, p_raw, smoothed))
    inputs = {"coders": int(coders), "categories": q, "shares": shares_arr.tolist(), "level": level,
              "expected": expected, "minimum": minimum, "confidence_level": confidence_level,
              "assurance": assurance, "missing": missing, "min_units": min_units,
              "max_units": max_units, "corpus_size": corpus_size}
    details = {"fit": None if fit is None else {"intercept": fit[0], "slope_sqrt_units": fit[1]},
               "patterns": P}
    if level != "nominal":
        details["latent_correlation"] = model.rho
    else:
        details["theta"] = model.theta
    return Plan(units_needed=units_needed, curve=curve, inputs=inputs, model=model_sentence,
                interval=interval_sentence, smoothing=smoothing, population_alpha=population_alpha,
                closed_forms=_closed_forms(shares_arr, int(coders), level, expected, minimum,
                                           confidence_level, assurance),
                rules_of_thumb=_rules_of_thumb(corpus_size), warnings=tuple(notes), seed=seed,
                replicates=replicates, n_resamples=n_resamples,
                assurance_at_units_needed=at_needed, details=details)


def _model_sentence(model: _Model, expected: float, population_alpha: float) -> str:
    shares = ", ".join(f"{s:.3g}" for s in model.shares)
    m = model.n_coders
    if model.level == "nominal":
        text = (f"Simulated coders: each unit has a true category drawn with shares ({shares}); each of "
                f"the {m} coders independently reports it with probability θ = sqrt({expected:.3f}) = "
                f"{model.theta:.3f} and otherwise a category drawn from the same shares")
    else:
        text = (f"Simulated coders: each of the {m} coders sees a latent normal score with intraclass "
                f"correlation {model.rho:.3f} between coders, cut into the {len(model.shares)} ordered "
                f"categories at thresholds matching the shares ({shares}); the correlation was chosen "
                f"so that {model.level} alpha of the categories (scored 1..{len(model.shares)}) "
                f"equals the expected value")
    if model.missing > 0:
        text += f"; each value is missing completely at random with probability {model.missing:.3g}"
    return text + f". Population alpha of this model: {population_alpha:.3f}."
