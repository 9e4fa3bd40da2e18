"""Planning the reliability sample: how many units should several coders code independently?

`plan_sample` answers by Monte Carlo simulation (METHODS 8.2): simulate studies whose coders reach
the expected agreement, score each exactly as `agree score` would (Krippendorff's alpha at the
planned level, its one-sided lower bound made by `agree.stats.resampling.resample` with the same
method, draws and confidence level, and the same decision rule, `reaches_minimum`), and find the
smallest number of units for which the bound clears the minimum with the wanted probability (the
*assurance*). The answer's Monte Carlo uncertainty is measured (a jackknife over independent
blocks of simulated studies) and the simulation grows until it is within a stated tolerance.
`plan_from_pilot` takes the category shares and the expected alpha from a pilot round instead,
drawing them for each simulated study from the pilot's posterior, so their uncertainty enters the
plan. Closed-form answers (METHODS 8.1, 8.3) and rules of thumb (METHODS 8.4) are shown beside it.

The module follows its seams: the simulation model; simulated studies (pattern counts per block);
one sample size scored; the search over sizes; smoothing and the Monte Carlo uncertainty of the
answer; closed forms; the public planners.

For speed nothing here calls the public coefficient functions. Each unit's multiset of values is
a *pattern*; a study of N units is a vector of counts over patterns (the first N units of a long
simulated study), so alpha and its resampled draws for R studies are a few array products.

`decision_sentence` turns a computed `AgreementResult` into the sentence a report states about a
minimum.

References
----------
Krippendorff, K. (2004; 2013). Content Analysis: An Introduction to Its Methodology. Sage.
Donner, A., & Eliasziw, M. (1992). A goodness-of-fit approach to inference procedures for the
    kappa statistic. Statistics in Medicine, 11(11), 1511-1519.
Lombard, M., Snyder-Duch, J., & Bracken, C. C. (2002). Content analysis in mass communication.
    Human Communication Research, 28(4), 587-604.
O'Connor, C., & Joffe, H. (2020). Intercoder reliability in qualitative research.
    International Journal of Qualitative Methods, 19, 1-13.
O'Hagan, A., Stevens, J. W., & Campbell, M. J. (2005). Assurance in clinical trial design.
    Pharmaceutical Statistics, 4(3), 187-201.
Efron, B., & Stein, C. (1981). The jackknife estimate of variance. The Annals of Statistics,
    9(3), 586-596.
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

from agree.core.constants import CI_METHODS, DEFAULT_CI_METHOD, DEFAULT_CONFIDENCE, DEFAULT_MINIMUM, DEFAULT_RESAMPLES
from agree.core.format import decision_sentence, format_value, percent_label  # noqa: F401 (decision_sentence: part of the planning API)
from agree.core.model import AgreeError, as_coding_data, value_label
from agree.core.results import Note, json_safe, reaches_minimum
from agree.core.seeds import resolve_seed
from agree.stats.coefficients import alpha_statistic, disagreeing_patterns, pseudo_units
from agree.stats.kernels import delta_for, ordinal_delta
from agree.stats.patterns import Patterns, compress
from agree.stats.resampling import check_settings, pseudo_unit_sums, resample

PLAN_LEVELS = ("nominal", "ordinal", "interval")

#: Blocks the first simulated studies are split into: blocks have their own random streams,
#: and the Monte Carlo uncertainty of the answer is a jackknife over blocks.
BLOCKS = 10
#: The answer is stable when its 95% Monte Carlo interval is within this share of it (default).
DEFAULT_TOLERANCE = 0.05


# ---------------------------------------------------------------------------------------
# Result types
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class AssurancePoint:
    """Assurance at one sample size: the share of simulated studies whose lower bound cleared
    the minimum (`assurance`) out of `studies`, its Monte Carlo error sqrt(P(1-P)/R), the smoothed
    value, and the share of studies with no disagreement at all."""

    units: int
    assurance: float
    mc_error: float
    smoothed: float
    studies: int = 0
    no_disagreement: float = float("nan")

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"units": self.units, "assurance": self.assurance, "mc_error": self.mc_error,
                          "smoothed": self.smoothed, "studies": self.studies,
                          "no_disagreement": self.no_disagreement})


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
class PilotEstimate:
    """What a pilot round gave the plan: its size, the estimated alpha and category shares, and
    how uncertain they are (the posterior the simulated studies draw from)."""

    units: int
    coders: int
    level: str
    categories: tuple[str, ...]
    alpha: float
    alpha_interval: tuple[float, float]
    p_value_min: float
    shares: tuple[float, ...]
    missing: float
    draws: int
    method: str

    def to_dict(self) -> dict[str, Any]:
        return json_safe({"units": self.units, "coders": self.coders, "level": self.level,
                          "categories": list(self.categories), "alpha": self.alpha,
                          "alpha_interval": list(self.alpha_interval), "p_value_min": self.p_value_min,
                          "shares": list(self.shares), "missing": self.missing, "draws": self.draws,
                          "method": self.method})


@dataclass(frozen=True)
class Plan:
    """How many units to double-code, and why.

    Attributes
    ----------
    units_needed : smallest number of units whose smoothed assurance reaches the wanted
        assurance; None when even `max_units` does not (see warnings).
    units_range : the 95% Monte Carlo interval of `units_needed` (jackknife over blocks of
        simulated studies): how far another seed could move the answer.
    curve : assurance at each simulated sample size.
    inputs : the inputs as given and as resolved (shares, level, ...).
    model : one sentence stating the simulation model.
    interval : one sentence stating the interval and decision simulated (those of `score`).
    smoothing : how the curve was smoothed to find `units_needed`.
    population_alpha : alpha of the simulation model over an infinite number of units
        (exact, from the model's pair probabilities; with a pilot, the mean over its draws).
    closed_forms, rules_of_thumb : context beside the simulation.
    warnings : cautions, as Notes.
    seed, replicates, n_resamples : what makes the plan repeatable (replicates: simulated
        studies at the sizes near the answer, after growing).
    pilot : what was estimated from a pilot round (None without one).
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
    units_range: tuple[int, int] | None = None
    ci_method: str = DEFAULT_CI_METHOD
    pilot: PilotEstimate | None = None

    def to_frame(self) -> pd.DataFrame:
        """The assurance curve, one row per simulated sample size: ``units``, ``assurance``
        (share of simulated studies whose lower bound cleared the minimum), ``mc_error`` (its
        Monte Carlo error), ``smoothed`` (the fitted curve used for `units_needed`), ``studies``
        (simulated at that size) and ``no_disagreement`` (share of studies without any)."""
        return pd.DataFrame([(p.units, p.assurance, p.mc_error, p.smoothed, p.studies, p.no_disagreement)
                             for p in self.curve],
                            columns=["units", "assurance", "mc_error", "smoothed", "studies", "no_disagreement"])

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
        target = (f"the lower bound of α clears {format_value(minimum, 'threshold')}"
                  if minimum is not None else "the lower bound clears the minimum")
        if wanted is not None:
            target += f" with probability {format_value(wanted, 'probability')}"
        if self.units_needed is None:
            head = f"Plan: no simulated sample size was enough for {target}."
        else:
            at = ("" if self.assurance_at_units_needed is None else
                  f" (assurance there {format_value(self.assurance_at_units_needed, 'probability')})")
            span = ("" if self.units_range is None else
                    f"; Monte Carlo range {self.units_range[0]:,} to {self.units_range[1]:,}")
            head = f"Plan: {self.units_needed:,} units coded by every coder so that {target}{at}{span}."
        return (f"{head} {self.replicates:,} simulated studies per size near the answer, {self.n_resamples:,} "
                f"draws each, seed {self.seed}.")

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "units_needed": self.units_needed,
            "units_range": None if self.units_range is None else list(self.units_range),
            "assurance_at_units_needed": self.assurance_at_units_needed,
            "curve": [p.to_dict() for p in self.curve],
            "inputs": dict(self.inputs),
            "model": self.model,
            "interval": self.interval,
            "ci_method": self.ci_method,
            "smoothing": self.smoothing,
            "population_alpha": self.population_alpha,
            "closed_forms": [c.to_dict() for c in self.closed_forms],
            "rules_of_thumb": [r.to_dict() for r in self.rules_of_thumb],
            "warnings": [w.to_dict() for w in self.warnings],
            "seed": self.seed,
            "replicates": self.replicates,
            "n_resamples": self.n_resamples,
            "pilot": None if self.pilot is None else self.pilot.to_dict(),
            "details": dict(self.details),
        })


# ---------------------------------------------------------------------------------------
# The simulation model (METHODS 8.2)
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SimulationModel:
    """Coders who reach a given population alpha, with one set of parameters or several (D
    draws from a pilot's posterior; study i uses draw i mod D).

    nominal: each unit's true category T ~ shares; each coder reports T with probability
    theta, otherwise a category drawn from the shares. Population alpha = theta² for every
    number of coders (METHODS 8.2; and for any metric: when one coder guesses, the pair is an
    independent draw from the margins).
    ordinal/interval: a latent normal X_ui = sqrt(rho) Z_u + sqrt(1 - rho) E_ui (Z, E
    standard normal), cut at the normal quantiles of the cumulative shares. rho is chosen so
    that the alpha of the categories (at the planned level, scores 1..q) equals the target.
    """

    level: str
    shares: np.ndarray               # (D, q)
    n_coders: int
    missing: float
    theta: np.ndarray                # (D,) nominal (NaN otherwise)
    rho: np.ndarray                  # (D,) latent intraclass correlation (NaN for nominal)

    @property
    def q(self) -> int:
        return self.shares.shape[1]

    def simulate(self, rng: np.random.Generator, n_sets: int, n_units: int, first: int = 0) -> np.ndarray:
        """(n_sets, n_units, n_coders) int8 codes, -1 missing; study i uses draw (first + i) mod D."""
        shape = (n_sets, n_units, self.n_coders)
        draw = (first + np.arange(n_sets)) % len(self.shares)
        cum = np.cumsum(self.shares, axis=1)[draw]                  # (n_sets, q)
        cum[:, -1] = 1.0
        q = self.q
        if self.level == "nominal":
            def category(u: np.ndarray) -> np.ndarray:              # u (n_sets, ...) uniform
                edges = cum[(slice(None),) + (None,) * (u.ndim - 1) + (slice(0, q - 1),)]
                return (u[..., None] >= edges).sum(axis=-1)
            truth = category(rng.random(shape[:2]))
            guesses = category(rng.random(shape))
            knows = rng.random(shape) < self.theta[draw][:, None, None]
            codes = np.where(knows, truth[..., None], guesses)
        else:
            rho = self.rho[draw][:, None, None]
            latent = np.sqrt(rho[..., 0]) * rng.standard_normal(shape[:2])
            x = latent[..., None] + np.sqrt(1.0 - rho) * rng.standard_normal(shape)
            cuts = stats.norm.ppf(np.clip(cum[:, :-1], 0, 1))[:, None, None, :]
            codes = (x[..., None] > cuts).sum(axis=-1)
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


def _latent_rho(level: str, shares: np.ndarray, expected: float) -> float:
    """The latent correlation whose categories reach `expected` alpha at `level`."""
    def gap(rho: float) -> float:
        return _population_alpha(_latent_pair_probabilities(shares, rho), level) - expected

    return float(optimize.brentq(gap, 1e-6, 1 - 1e-9, xtol=1e-10))


def build_model(level: str, shares: np.ndarray, n_coders: int, expected: float | np.ndarray,
                missing: float) -> tuple[SimulationModel, float]:
    """The simulation model reaching `expected` (one value, or one per row of `shares` (D, q)),
    and its population alpha (the mean over the draws)."""
    shares = np.atleast_2d(np.asarray(shares, dtype=float))
    expected = np.broadcast_to(np.asarray(expected, dtype=float), (len(shares),))
    if level == "nominal":
        theta = np.sqrt(np.clip(expected, 0.0, 1.0))
        pops = [_population_alpha(_nominal_pair_probabilities(s, t), level) for s, t in zip(shares, theta)]
        model = SimulationModel(level, shares, n_coders, missing, theta=theta, rho=np.full(len(theta), np.nan))
        return model, float(np.mean(pops))
    rho = np.array([_latent_rho(level, s, e) for s, e in zip(shares, expected)])  # a loop over draws
    pops = [_population_alpha(_latent_pair_probabilities(s, r), level) for s, r in zip(shares, rho)]
    model = SimulationModel(level, shares, n_coders, missing, theta=np.full(len(rho), np.nan), rho=rho)
    return model, float(np.mean(pops))


# ---------------------------------------------------------------------------------------
# Simulated studies
# ---------------------------------------------------------------------------------------

def _pattern_ids(codes: np.ndarray, q: int) -> tuple[np.ndarray, Patterns]:
    """Map each unit's multiset of values to a pattern (`agree.stats.patterns.compress`).

    codes : (..., m) int array of category indices 0..q-1, -1 for missing.
    Returns the pattern of each unit (codes.shape[:-1]) and the patterns (unordered rows; counts
    over all units given). Patterns are numbered by decreasing frequency (ties by their sorted
    values); every unit with fewer than two values (no contribution to alpha) shares one pattern.
    """
    m = codes.shape[-1]
    flat = codes.reshape(-1, m)
    unpairable = (flat >= 0).sum(axis=1) < 2
    pat = compress(np.where(unpairable[:, None], -1, flat), q, ordered=False, keep_inverse=True)
    rows = np.sort(np.where(pat.codes < 0, q, pat.codes), axis=1)
    order = np.lexsort((*rows.T, -pat.counts))
    rank = np.empty_like(order)
    rank[order] = np.arange(len(order))
    ordered = Patterns(pat.codes[order], pat.counts[order], None, q)
    return rank[pat.inverse].reshape(codes.shape[:-1]), ordered


def _pattern_counts(ids: np.ndarray, n_units: int, n_patterns: int) -> np.ndarray:
    """(R, P) pattern counts of the first `n_units` units of each of R simulated studies."""
    R = ids.shape[0]
    offset = (np.arange(R, dtype=np.int64) * n_patterns)[:, None]
    flat = np.bincount((ids[:, :n_units] + offset).ravel(), minlength=R * n_patterns)
    return flat.reshape(R, n_patterns)


@dataclass(frozen=True)
class _Block:
    """One block of simulated studies: each unit's pattern (R_b, max_units), the patterns, their
    alpha features, which of them hold a disagreement, and the block's resampling seed."""

    ids: np.ndarray
    patterns: Patterns
    features: np.ndarray
    disagree: np.ndarray
    seed: tuple[int, ...]


@dataclass
class _Studies:
    """Simulated studies and how each is scored: alpha at the planned level with the interval and
    decision of `score` (`resample` with the same method, draws, level and pseudo-units)."""

    model: SimulationModel
    max_units: int
    seed: int
    stat: Any
    method: str
    n_resamples: int
    confidence_level: float
    minimum: float
    block_size: int = 50
    blocks: list[_Block] = field(default_factory=list)
    # (block, N) -> studies whose bound cleared the minimum, studies, studies without disagreement,
    # share of undefined draws
    hits: dict[tuple[int, int], tuple[int, int, int, float]] = field(default_factory=dict)

    def add_blocks(self, n_blocks: int) -> None:
        """Simulate `n_blocks` more blocks of studies, each from its own random stream."""
        q = self.model.q
        for _ in range(n_blocks):  # a loop over blocks of studies
            b = len(self.blocks)
            codes = self.model.simulate(np.random.default_rng([self.seed, 0, b]), self.block_size, self.max_units,
                                        first=b * self.block_size)
            ids, pat = _pattern_ids(codes, q)
            self.blocks.append(_Block(ids, pat, self.stat.features(pat), disagreeing_patterns(pat, self.stat),
                                      (self.seed, 1, b)))

    def evaluate(self, n_units: int, blocks: Sequence[int] | None = None) -> None:
        """Score the first `n_units` units of every study of the given blocks (all by default).
        Blocks run in threads; each has its own random stream, so the result does not depend on
        how many run at once."""
        todo = [b for b in (range(len(self.blocks)) if blocks is None else blocks) if (b, n_units) not in self.hits]
        with ThreadPoolExecutor(max_workers=max(1, min(len(todo), os.cpu_count() or 1, 4))) as pool:
            for b, result in zip(todo, pool.map(lambda b: self._score(self.blocks[b], n_units), todo)):
                self.hits[(b, n_units)] = result

    def _score(self, block: _Block, n_units: int) -> tuple[int, int, int, float]:
        counts = _pattern_counts(block.ids, n_units, len(block.patterns.counts))
        space = pseudo_units(self.stat, block.patterns) if self.method == "pseudo-unit" else None
        bounds = resample(block.features, counts, self.stat.finish, method=self.method,
                          n_resamples=self.n_resamples, confidence_level=self.confidence_level,
                          rng=np.random.default_rng(list(block.seed)), pseudo=space, two_sided=False)
        lower = bounds.lower[:, 0]
        cleared = reaches_minimum(lower, self.minimum)
        none = int(((counts[:, block.disagree]).sum(axis=1) == 0).sum())
        undefined = float(bounds.n_undefined.sum()) / (len(lower) * self.n_resamples)
        return int(cleared.sum()), len(lower), none, undefined

    def table(self, leave_out: int | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Sizes simulated, with hits, studies and studies without disagreement summed over the
        blocks (leaving one out for the jackknife)."""
        sums: dict[int, list[int]] = {}
        for (b, n), (h, r, none, _) in self.hits.items():
            if b == leave_out:
                continue
            s = sums.setdefault(n, [0, 0, 0])
            s[0] += h
            s[1] += r
            s[2] += none
        units = np.array(sorted(sums), dtype=int)
        arr = np.array([sums[n] for n in units], dtype=float).reshape(-1, 3)
        return units, arr[:, 0], arr[:, 1], arr[:, 2]


# ---------------------------------------------------------------------------------------
# Smoothing the assurance curve and where it crosses the wanted assurance
# ---------------------------------------------------------------------------------------

def _probit_fit(units: np.ndarray, hits: np.ndarray, totals: np.ndarray | float) -> tuple[float, float] | None:
    """Binomial maximum-likelihood fit of assurance = Φ(a + b sqrt(N)) (`totals` studies at each N).

    Why this form: the lower bound is about α̂ - z se with se ∝ 1/sqrt(N), so
    P(lower bound > min) ≈ Φ((α - min) sqrt(N)/s - z): a probit line in sqrt(N).
    """
    x = np.sqrt(units.astype(float))
    totals = np.broadcast_to(np.asarray(totals, dtype=float), x.shape)

    def nll(par: np.ndarray) -> float:
        p = np.clip(stats.norm.cdf(par[0] + par[1] * x), 1e-12, 1 - 1e-12)
        return -float(np.sum(hits * np.log(p) + (totals - hits) * np.log1p(-p)))

    res = optimize.minimize(nll, x0=np.array([-1.645, 0.1]), method="Nelder-Mead",
                            options={"xatol": 1e-8, "fatol": 1e-10, "maxiter": 4000})
    if not res.success or res.x[1] <= 0:
        return None
    return float(res.x[0]), float(res.x[1])


def _isotonic(values: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Pool-adjacent-violators: the closest non-decreasing sequence (weighted least squares)."""
    w_in = np.ones(len(values)) if weights is None else np.asarray(weights, dtype=float)
    blocks: list[list[float]] = []
    for v, w in zip(values, w_in):
        blocks.append([float(v), float(w), 1])
        while len(blocks) > 1 and blocks[-2][0] > blocks[-1][0]:
            v2, w2, n2 = blocks.pop()
            v1, w1, n1 = blocks.pop()
            blocks.append([(v1 * w1 + v2 * w2) / (w1 + w2), w1 + w2, n1 + n2])
    return np.concatenate([np.full(int(n), v) for v, _, n in blocks])


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


@dataclass(frozen=True)
class _Crossing:
    """The smoothed curve at the simulated sizes and where it reaches the wanted assurance."""

    at: float | None                  # N* (None: not within the sizes searched)
    smoothed: np.ndarray
    fit: tuple[float, float] | None   # probit (a, b), or None when isotonic
    fitted: bool


def _crossing(units: np.ndarray, hits: np.ndarray, totals: np.ndarray, assurance: float,
              max_units: int) -> _Crossing:
    """Smooth the assurance (probit in sqrt N; isotonic where the probit does not fit) and find N*."""
    raw = hits / totals
    fit = _probit_fit(units, hits, totals) if len(units) >= 2 else None
    if fit is not None:
        smoothed = stats.norm.cdf(fit[0] + fit[1] * np.sqrt(units))
        pearson = np.sum((hits - smoothed * totals) ** 2 / np.maximum(totals * smoothed * (1 - smoothed), 1e-9))
        if stats.chi2.sf(pearson, max(len(units) - 2, 1)) < 0.001:
            fit = None
    if fit is not None:
        n_star = ((stats.norm.ppf(assurance) - fit[0]) / fit[1]) ** 2
        return _Crossing(n_star if n_star <= max_units else None, smoothed, fit, True)
    smoothed = _isotonic(raw, totals)
    return _Crossing(_first_crossing(units, smoothed, assurance), smoothed, None, False)


def _jackknife(studies: _Studies, assurance: float, max_units: int, at: float) -> float | None:
    """Jackknife standard error of N* over the blocks of simulated studies (Efron & Stein 1981):
    sqrt((G - 1)/G Σ (N*_(g) - mean)²), each N*_(g) from the studies of the other blocks. The
    blocks are independent (the sizes within a block share their studies), so this measures how
    much another seed would move the answer. None when some leave-one-out curve does not cross."""
    values = []
    for g in range(len(studies.blocks)):  # a loop over blocks
        units, hits, totals, _ = studies.table(leave_out=g)
        cross = _crossing(units, hits, totals, assurance, max_units)
        if cross.at is None:
            return None
        values.append(cross.at)
    G = len(values)
    values = np.array(values)
    return float(math.sqrt((G - 1) / G * np.sum((values - values.mean()) ** 2)))


# ---------------------------------------------------------------------------------------
# The search over sample sizes
# ---------------------------------------------------------------------------------------

def _search(studies: _Studies, assurance: float, min_units: int, max_units: int, refine_steps: int,
            progress: Any) -> None:
    """Simulate sizes on a log grid from `min_units` (stopping once one is clearly past the
    target), then bisect on log N between the last size below and the first at or above it."""
    steps = 9 + refine_steps

    def evaluate(n: int) -> float:
        studies.evaluate(n)
        units, hits, totals, _ = studies.table()
        if progress is not None:
            progress(f"{n} units", min(1.0, len(units) / steps))
        return float(hits[units == n][0] / totals[units == n][0])

    grid = np.unique(np.round(np.geomspace(min_units, max_units, 9)).astype(int))
    raw = []
    for n in grid:
        raw.append(evaluate(int(n)))
        if raw[-1] >= max(0.99, assurance):
            break
    grid = grid[:len(raw)]
    mono = _isotonic(np.array(raw))
    above = np.flatnonzero(mono >= assurance)
    if len(above) and above[0] > 0:
        lo, hi = int(grid[above[0] - 1]), int(grid[above[0]])
        for _ in range(refine_steps):
            if hi - lo <= 1:
                break
            mid = min(max(int(round(math.sqrt(lo * hi))), lo + 1), hi - 1)
            if evaluate(mid) >= assurance:
                hi = mid
            else:
                lo = mid


def _grow(studies: _Studies, assurance: float, max_units: int, tolerance: float, max_blocks: int,
          step_blocks: int, progress: Any) -> tuple[_Crossing, float | None]:
    """Add blocks of studies, simulated at the sizes around the answer, until the 95% Monte Carlo
    interval of N* (± 1.96 jackknife SE) is within `tolerance` of N* (at least ± 2 units), or the
    number of blocks reaches `max_blocks`. Returns the final crossing and its jackknife SE."""
    while True:
        units, hits, totals, _ = studies.table()
        cross = _crossing(units, hits, totals, assurance, max_units)
        if cross.at is None:
            return cross, None
        se = _jackknife(studies, assurance, max_units, cross.at)
        stable = se is not None and 1.96 * se <= max(tolerance * cross.at, 2.0)
        if stable or len(studies.blocks) >= max_blocks:
            return cross, se
        near = [int(n) for n in units if cross.at / 1.6 <= n <= cross.at * 1.6]
        near = sorted(set(near) | {int(math.ceil(cross.at))})
        first = len(studies.blocks)
        studies.add_blocks(min(step_blocks, max_blocks - first))
        new = range(first, len(studies.blocks))
        for n in near:  # the sizes that decide the crossing
            studies.evaluate(n, blocks=new)
        if progress is not None:
            progress(f"{len(studies.blocks) * studies.block_size} studies near {int(math.ceil(cross.at))} units",
                     1.0)


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
                     f"{format_value(shares.min(), 'probability')}); one-sided significance {format_value(eps, 'probability')}; implicit true alpha "
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
            assumptions=(f"Assumes two coders; intraclass kappa, common prevalence {format_value(shares[0], 'probability')}; "
                         f"goodness-of-fit test of kappa = {format_value(minimum, 'threshold')} against {format_value(expected)}, "
                         f"one-sided at {format_value(eps, 'probability')} with power {format_value(assurance, 'probability')} (power stands in for "
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


# ---------------------------------------------------------------------------------------
# Validation and the public planners
# ---------------------------------------------------------------------------------------

def _validate(coders, expected, minimum, level, confidence_level, assurance, missing,
              replicates, n_resamples, min_units, max_units, corpus_size, ci_method=DEFAULT_CI_METHOD,
              tolerance=DEFAULT_TOLERANCE) -> None:
    problems: list[AgreeError] = []

    def bad(message: str, code: str, hint: str | None = None) -> None:
        problems.append(AgreeError(message, hint=hint, code=code))

    if not isinstance(coders, (int, np.integer)) or coders < 2 or coders > 30:
        bad(f"the number of coders must be a whole number from 2 to 30; got {coders}", "plan-coders")
    if level not in PLAN_LEVELS:
        bad(f"level must be one of {', '.join(PLAN_LEVELS)}; got '{level}'", "plan-level")
    if expected is not None and not (0 < expected < 1):
        bad(f"the expected alpha must be between 0 and 1; got {expected}", "plan-expected",
            hint="alpha = 1 needs no plan; at or below 0 there is no agreement to plan for")
    if not (-1 < minimum < 1):
        bad(f"the minimum must be between -1 and 1; got {minimum}", "plan-minimum")
    elif expected is not None and 0 < expected < 1 and expected <= minimum:
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
        bad(f"at least 50 simulated studies are needed; got {replicates}", "plan-replicates",
            hint="--replicates 500 (replicates=500)")
    if n_resamples < 50:
        bad(f"at least 50 draws per simulated study are needed; got {n_resamples}", "plan-resamples",
            hint=f"--boot {DEFAULT_RESAMPLES} (n_resamples={DEFAULT_RESAMPLES}), as agree score uses")
    if not (5 <= min_units < max_units <= 100_000):
        bad(f"the sizes searched must run from at least 5 units up to at most 100000, the largest "
            f"above the smallest; got {min_units} to {max_units}", "plan-range",
            hint="set the largest size with --max-units (max_units=...); the smallest is "
                 "min_units=... in Python")
    if corpus_size is not None and corpus_size < 1:
        bad(f"the corpus size must be positive; got {corpus_size}", "plan-corpus-size")
    if ci_method not in CI_METHODS:
        bad(f"the interval method must be one of {', '.join(CI_METHODS)}; got '{ci_method}'", "plan-ci")
    if not (0 < tolerance < 1):
        bad(f"the tolerance must be a share between 0 and 1 (e.g. 0.05); got {tolerance}", "plan-tolerance")
    if problems:
        if len(problems) == 1:
            raise problems[0]
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)


def plan_sample(*, coders: int, expected: float, minimum: float = DEFAULT_MINIMUM,
                categories: int | None = None, shares: Sequence[float] | None = None,
                rarest: float | None = None, level: str = "nominal",
                confidence_level: float = DEFAULT_CONFIDENCE, assurance: float = 0.80, missing: float = 0.0,
                seed: int | None = None, replicates: int = 500, n_resamples: int = DEFAULT_RESAMPLES,
                ci_method: str = DEFAULT_CI_METHOD, min_units: int = 20, max_units: int = 2000,
                corpus_size: int | None = None, refine_steps: int = 3, tolerance: float = DEFAULT_TOLERANCE,
                max_replicates: int | None = None, progress: Any = None) -> Plan:
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
    replicates : R, simulated studies per sample size at first (split into blocks).
    n_resamples, ci_method : the draws per study and the interval method: by default those of
        `agree score` (2,000; the Bayesian bootstrap with a least-favourable pseudo-unit), so the
        plan simulates exactly the decision the study will make.
    min_units, max_units : the search range.
    corpus_size : number of units in the whole study, for the percentage rules of thumb.
    refine_steps : bisection steps after the log grid.
    tolerance : the answer is grown until its 95% Monte Carlo interval is within this share of
        it (default 0.05: ± 5%; at least ± 2 units).
    max_replicates : the most simulated studies per size (default 8 x `replicates`).

    Returns
    -------
    Plan

    Notes
    -----
    For each N on a log grid from `min_units` to `max_units` (then refined by bisection on log N
    near the crossing), R studies of N units are simulated from the model (METHODS 8.2) and each
    is scored as `score` scores data: alpha at `level` and its one-sided lower bound L at
    `confidence_level` by `agree.stats.resampling.resample` (same method, draws and pseudo-units);
    the assurance is P(L > minimum) (`reaches_minimum`), with Monte Carlo error sqrt(P(1-P)/R)
    (O'Hagan, Stevens & Campbell 2005 for assurance). Common random numbers: the study at N is
    the first N units of one long simulated study, and every N reuses the same random streams.
    The curve is smoothed with a binomial probit fit Φ(a + b sqrt(N)) (isotonic regression when
    that fit is poor), and `units_needed` is the smallest N whose smoothed assurance reaches
    `assurance`. The studies come in independent blocks; a jackknife over blocks gives the
    Monte Carlo standard error of N*, and blocks simulated at the sizes near N* are added until
    N* ± 1.96 SE is within `tolerance` of N* (`units_range`).

    References
    ----------
    Krippendorff, K. (2004). Content Analysis (2nd ed.). Sage.
    Donner, A., & Eliasziw, M. (1992). Statistics in Medicine, 11(11), 1511-1519.
    """
    _validate(coders, expected, minimum, level, confidence_level, assurance, missing,
              replicates, n_resamples, min_units, max_units, corpus_size, ci_method, tolerance)
    shares_arr = resolve_shares(categories=categories, shares=shares, rarest=rarest)
    model, population_alpha = build_model(level, shares_arr, int(coders), expected, missing)
    notes = []
    if expected - minimum < 0.05:
        notes.append(Note("plan-close-to-minimum",
                          f"The expected alpha ({format_value(expected)}) is close to the minimum ({format_value(minimum, 'threshold')}): "
                          "the sample size is very sensitive to the expected value; plan for a "
                          "slightly lower expectation too."))
    return _plan(model, population_alpha, expected=expected, minimum=minimum, level=level,
                 confidence_level=confidence_level, assurance=assurance, seed=seed, replicates=replicates,
                 n_resamples=n_resamples, ci_method=ci_method, min_units=min_units, max_units=max_units,
                 corpus_size=corpus_size, refine_steps=refine_steps, tolerance=tolerance,
                 max_replicates=max_replicates, progress=progress, notes=notes)


def _plan(model: SimulationModel, population_alpha: float, *, expected: float, minimum: float, level: str,
          confidence_level: float, assurance: float, seed: int | None, replicates: int, n_resamples: int,
          ci_method: str, min_units: int, max_units: int, corpus_size: int | None, refine_steps: int,
          tolerance: float, max_replicates: int | None, progress: Any, notes: list[Note],
          pilot: PilotEstimate | None = None) -> Plan:
    """Simulate, search, grow until stable, and assemble the `Plan` (both planners)."""
    seed = resolve_seed(seed)
    q = model.q
    block_size = max(10, int(math.ceil(replicates / BLOCKS)))
    first_blocks = int(math.ceil(replicates / block_size))
    max_blocks = int(math.ceil((max_replicates or 8 * replicates) / block_size))
    delta = delta_for(level, scores=np.arange(1, q + 1))
    studies = _Studies(model, max_units, seed, alpha_statistic(delta), ci_method, int(n_resamples),
                       confidence_level, minimum, block_size=block_size)
    studies.add_blocks(first_blocks)
    _search(studies, assurance, min_units, max_units, refine_steps, progress)
    cross, se = _grow(studies, assurance, max_units, tolerance, max(max_blocks, first_blocks), first_blocks,
                      progress)
    units, hits, totals, none = studies.table()
    raw = hits / totals
    if cross.fitted:
        smoothing = ("binomial probit fit of the assurance against sqrt(units), Φ(a + b·sqrt(N)), over all "
                     "simulated sample sizes (sizes beyond the first with assurance of .990 or more were not "
                     "simulated)")
    else:
        smoothing = ("isotonic (non-decreasing) regression of the assurance, interpolated in log N "
                     "(the probit fit did not fit the simulated points)")
        notes.append(Note("plan-smoothing", "The smooth assurance curve did not fit the simulated "
                          "points; the units needed come from the monotone raw curve instead."))
    units_needed: int | None = None
    units_range = None
    if cross.at is None or (raw[-1] < assurance and cross.at >= units[-1]):
        best = float(np.max(raw))
        notes.append(Note("plan-beyond-range",
                          f"Even {max_units:,} units do not reach the wanted assurance (simulated assurance "
                          f"{format_value(best, 'probability')} at most). Raise the expected agreement (codebook, training), reconsider "
                          "the minimum, or search further with --max-units (max_units=...)."))
    else:
        units_needed = int(max(min_units, math.ceil(cross.at - 1e-9)))
        if units_needed == min_units and raw[0] >= assurance:
            notes.append(Note("plan-at-lower-end",
                              f"The assurance is already reached at {min_units} units, the smallest "
                              "size searched; alpha from fewer units is too unstable to recommend."))
        if se is not None:
            units_range = (max(min_units, int(math.floor(cross.at - 1.96 * se))),
                           int(math.ceil(cross.at + 1.96 * se)))
        half = None if se is None else 1.96 * se
        if half is None or half > max(tolerance * cross.at, 2.0):
            notes.append(Note("plan-monte-carlo",
                              "The simulation did not settle the answer to "
                              f"± {percent_label(tolerance, 0)}"
                              + ("" if half is None else f" (95% Monte Carlo range ± {half:.0f} units)")
                              + f" within {len(studies.blocks) * block_size} simulated studies; take the upper "
                              "end of the range, or run again with more --replicates."))
    at_needed = None
    if units_needed is not None:
        at_needed = float(stats.norm.cdf(cross.fit[0] + cross.fit[1] * math.sqrt(units_needed))
                          if cross.fit is not None else np.interp(np.log(units_needed), np.log(units), cross.smoothed))
        share_none = float(np.interp(np.log(units_needed), np.log(units), none / totals))
        if share_none >= 0.05:
            notes.append(Note("plan-no-disagreement",
                              f"At {units_needed} units about {percent_label(share_none, 0)} of the simulated studies "
                              "have no disagreement at all. Their bound rests on the number of units alone (the "
                              "pseudo-unit), as it will in the study; the plan counts them as they would be decided."))
    rarest = float(np.mean(model.shares, axis=0).min())
    if rarest < 0.05:
        notes.append(Note("plan-rare-category",
                          f"The rarest category has a share of {format_value(rarest, 'probability')}: rare codes need "
                          "many units, and bounds for them rest on few disagreeing units."))
    undefined = max((u for *_, u in studies.hits.values()), default=0.0)
    if undefined > 0.01:
        notes.append(Note("plan-undefined-replicates",
                          f"Up to {percent_label(undefined, 1)} of the draws had undefined alpha (no variation) at "
                          "the smaller sample sizes; they were left out, as in the study."))
    notes.append(Note("plan-model-assumption",
                      "The plan assumes coders who agree as in the simulation model (no systematic "
                      "coder bias) and units drawn at random; biased coders need more units."))
    grown = len(studies.blocks) * block_size
    interval_sentence = (
        f"Lower bound: what agree score computes, the one-sided {percent_label(confidence_level)} lower bound of "
        f"{level} Krippendorff's alpha by the {CI_METHODS[ci_method]} (B = {n_resamples:,} draws per study), "
        f"which clears the minimum when strictly above it; assurance = share of simulated studies whose bound "
        f"clears {format_value(minimum, 'threshold')}. R = {first_blocks * block_size:,} studies per size"
        + (f", grown to {grown:,} at the sizes near the answer" if grown > first_blocks * block_size else "")
        + ("" if units_needed is None else
           f"; the answer's 95% Monte Carlo range (jackknife over {len(studies.blocks)} independent blocks of "
           f"studies) was to be within ± {percent_label(tolerance, 0)} of it")
        + ".")
    curve = tuple(AssurancePoint(int(n), float(p), float(math.sqrt(p * (1 - p) / t)), float(s), int(t),
                                 float(z / t))
                  for n, p, t, s, z in zip(units, raw, totals, cross.smoothed, none))
    inputs = {"coders": model.n_coders, "categories": q, "shares": np.mean(model.shares, axis=0).tolist(),
              "level": level, "expected": expected, "minimum": minimum, "confidence_level": confidence_level,
              "assurance": assurance, "missing": model.missing, "min_units": min_units, "max_units": max_units,
              "corpus_size": corpus_size, "ci_method": ci_method, "tolerance": tolerance}
    details: dict[str, Any] = {"fit": None if cross.fit is None else {"intercept": cross.fit[0],
                                                                     "slope_sqrt_units": cross.fit[1]},
                               "patterns": max(len(b.patterns.counts) for b in studies.blocks),
                               "monte_carlo_se": se, "blocks": len(studies.blocks), "block_size": block_size}
    if level != "nominal":
        details["latent_correlation"] = float(np.mean(model.rho))
    else:
        details["theta"] = float(np.mean(model.theta))
    return Plan(units_needed=units_needed, curve=curve, inputs=inputs,
                model=_model_sentence(model, expected, population_alpha, pilot), interval=interval_sentence,
                smoothing=smoothing, population_alpha=population_alpha,
                closed_forms=_closed_forms(np.mean(model.shares, axis=0), model.n_coders, level, expected,
                                           minimum, confidence_level, assurance),
                rules_of_thumb=_rules_of_thumb(corpus_size), warnings=tuple(notes), seed=seed,
                replicates=grown, n_resamples=int(n_resamples), assurance_at_units_needed=at_needed,
                details=details, units_range=units_range, ci_method=ci_method, pilot=pilot)


def _model_sentence(model: SimulationModel, expected: float, population_alpha: float,
                    pilot: PilotEstimate | None) -> str:
    shares = ", ".join(format_value(s, "probability") for s in np.mean(model.shares, axis=0))
    m = model.n_coders
    q = model.q
    if pilot is not None:
        head = (f"Simulated coders: for each study the category shares and alpha are one of {pilot.draws} draws "
                f"from the pilot's posterior (mean shares {shares}; mean alpha {format_value(expected)})")
        if model.level == "nominal":
            text = (head + f"; each unit has a true category drawn with the study's shares, and each of the {m} "
                    "coders reports it with probability θ = sqrt(alpha) and otherwise a category drawn from "
                    "the same shares")
        else:
            text = (head + f"; each of the {m} coders sees a latent normal score, cut into the {q} ordered categories "
                    "at the study's shares, with the intraclass correlation that gives the study's alpha")
    elif model.level == "nominal":
        text = (f"Simulated coders: each unit has a true category drawn with shares ({shares}); each of "
                f"the {m} coders independently reports it with probability θ = sqrt({format_value(expected)}) = "
                f"{format_value(model.theta[0], 'probability')} and otherwise a category drawn from the same shares")
    else:
        text = (f"Simulated coders: each of the {m} coders sees a latent normal score with intraclass "
                f"correlation {format_value(model.rho[0])} between coders, cut into the {q} ordered "
                f"categories at thresholds matching the shares ({shares}); the correlation was chosen "
                f"so that {model.level} alpha of the categories (scored 1..{q}) "
                f"equals the expected value")
    if model.missing > 0:
        text += f"; each value is missing completely at random with probability {format_value(model.missing, 'probability')}"
    return text + f". Population alpha of this model: {format_value(population_alpha)}."


# ---------------------------------------------------------------------------------------
# Plans from a pilot round
# ---------------------------------------------------------------------------------------

def pilot_estimate(pilot: Any, *, level: str | None = None, minimum: float = DEFAULT_MINIMUM,
                   confidence_level: float = DEFAULT_CONFIDENCE, draws: int = 200,
                   seed: int | None = None) -> tuple[PilotEstimate, np.ndarray, np.ndarray]:
    """What a pilot round says about the next one: alpha and the category shares, with `draws`
    joint draws of both from its posterior — the draws the pilot's own bound is made from (the
    Bayesian bootstrap of its units with a least-favourable unit, `pseudo_unit_sums`), so the
    plan is as cautious about a small pilot as the decision is. Returns the estimate, the alpha
    draws (D,) and the share draws (D, q)."""
    d = as_coding_data(pilot)
    if d.set_valued:
        raise AgreeError("a plan is made for one code per unit and coder; this pilot has sets of codes",
                         hint="plan each code as present/absent (two categories) with --shares", code="plan-pilot")
    level = level or (d.level if d.level in PLAN_LEVELS else "nominal")
    if level not in PLAN_LEVELS:
        raise AgreeError(f"level must be one of {', '.join(PLAN_LEVELS)}; got '{level}'", code="plan-level")
    q = len(d.values)
    if q < 2:
        raise AgreeError(f"the pilot has {q} category; a plan needs at least two", code="plan-pilot",
                         hint="give the codebook (--codebook) so that unused categories count")
    delta = delta_for(level, scores=np.arange(1, q + 1))
    stat = alpha_statistic(delta)
    pat = compress(d.codes, q, ordered=False, weights=d.weights)
    F = stat.features(pat)
    pairable = (pat.codes >= 0).sum(axis=1) >= 2
    n_units = int(pat.counts[pairable].sum())
    if n_units < 2:
        raise AgreeError(f"the pilot has {n_units} unit coded by two or more coders; a plan needs more",
                         code="plan-pilot", hint="check the layout detected (--layout)")
    estimate = float(stat.finish((pat.counts @ F)[None, :])[0])
    rng = np.random.default_rng([resolve_seed(seed), 7])
    sums = pseudo_unit_sums(F, pat.counts, stat.finish, pseudo_units(stat, pat), draws, rng)
    alphas = np.asarray(stat.finish(sums), dtype=float)
    margins = sums[:, :q] if delta is not None else sums.reshape(len(sums), q, q).sum(axis=2)
    shares = np.clip(margins / margins.sum(axis=1, keepdims=True), 1e-4, None)
    shares /= shares.sum(axis=1, keepdims=True)
    ok = np.isfinite(alphas)
    alphas, shares = alphas[ok], shares[ok]
    eps = 1 - confidence_level
    observed = d.codes >= 0
    coded = observed.any(axis=1)
    uw = d.unit_weights()
    missing = float(uw[coded] @ (~observed[coded]).sum(axis=1)) / max(float(uw[coded].sum()) * d.n_coders, 1.0)
    est = PilotEstimate(units=n_units, coders=d.n_coders, level=level,
                        categories=tuple(value_label(v) for v in d.values), alpha=estimate,
                        alpha_interval=(float(np.quantile(alphas, eps / 2)), float(np.quantile(alphas, 1 - eps / 2))),
                        p_value_min=float(np.mean(alphas <= minimum)),
                        shares=tuple(float(s) for s in np.mean(shares, axis=0)), missing=missing, draws=int(len(alphas)),
                        method=CI_METHODS["pseudo-unit"])
    return est, alphas, shares


def plan_from_pilot(pilot: Any, *, minimum: float = DEFAULT_MINIMUM, level: str | None = None,
                    coders: int | None = None, missing: float | None = None,
                    confidence_level: float = DEFAULT_CONFIDENCE, assurance: float = 0.80,
                    seed: int | None = None, replicates: int = 500, n_resamples: int = DEFAULT_RESAMPLES,
                    ci_method: str = DEFAULT_CI_METHOD, min_units: int = 20, max_units: int = 2000,
                    corpus_size: int | None = None, refine_steps: int = 3, tolerance: float = DEFAULT_TOLERANCE,
                    max_replicates: int | None = None, draws: int = 200, progress: Any = None) -> Plan:
    """How many units the next round needs, with the category shares and the expected alpha
    estimated from a pilot round (CodingData, or anything `as_coding_data` takes).

    Each simulated study takes its shares and alpha from one of `draws` joint draws of the pilot's
    posterior (`pilot_estimate`), so the plan's assurance is averaged over what the pilot leaves
    uncertain (O'Hagan, Stevens & Campbell 2005): when the pilot leaves a real chance that alpha
    is at or below the minimum, no number of units reaches an assurance above the chance that it
    is not, and the plan says so. The pilot's coders and share of missing values are used unless
    `coders` or `missing` are given. The pilot's own units are not counted: the plan is for a
    new round. Everything else is as in `plan_sample`.
    """
    est, alphas, share_draws = pilot_estimate(pilot, level=level, minimum=minimum,
                                              confidence_level=confidence_level, draws=draws, seed=seed)
    coders = est.coders if coders is None else coders
    missing = min(est.missing, 0.85) if missing is None else missing
    _validate(coders, None, minimum, est.level, confidence_level, assurance, missing, replicates, n_resamples,
              min_units, max_units, corpus_size, ci_method, tolerance)
    model, population_alpha = build_model(est.level, share_draws, int(coders), np.clip(alphas, 0.01, 0.995),
                                          missing)
    notes = [Note("plan-pilot", f"Estimated from the pilot ({est.units} units, {est.coders} coders): {est.level} "
                  f"alpha {format_value(est.alpha)} ({percent_label(confidence_level)} interval "
                  f"{format_value(est.alpha_interval[0])} to {format_value(est.alpha_interval[1])}), category shares "
                  + ", ".join(f"{c} {format_value(s, 'probability')}" for c, s in zip(est.categories, est.shares))
                  + f", missing {percent_label(est.missing, 1)}. Each simulated study draws its shares and alpha "
                  f"from the pilot's posterior ({est.method}, {est.draws} draws).")]
    ceiling = 1 - est.p_value_min
    if ceiling < assurance + 0.02:
        notes.append(Note("plan-pilot-ceiling",
                          f"The pilot leaves a {percent_label(est.p_value_min, 0)} chance that alpha is at or below "
                          f"the minimum {format_value(minimum, 'threshold')}; however many units are coded, the assurance "
                          f"cannot exceed about {format_value(ceiling, 'probability')}. Improve the codebook or training and run another pilot first."))
    if ci_method != "pseudo-unit":
        notes.append(Note("plan-pilot-method", "The pilot's posterior draws come from the Bayesian bootstrap with a "
                          "least-favourable pseudo-unit, whatever the interval method simulated."))
    return _plan(model, population_alpha, expected=float(np.mean(alphas)), minimum=minimum, level=est.level,
                 confidence_level=confidence_level, assurance=assurance, seed=seed, replicates=replicates,
                 n_resamples=n_resamples, ci_method=ci_method, min_units=min_units, max_units=max_units,
                 corpus_size=corpus_size, refine_steps=refine_steps, tolerance=tolerance,
                 max_replicates=max_replicates, progress=progress, notes=notes, pilot=est)
