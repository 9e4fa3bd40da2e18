"""Result types. One frozen type for every coefficient; nothing here prints or rounds."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

from agree.core.registry import display_name


@dataclass(frozen=True)
class Note:
    """A machine-readable warning: a stable `code` and one plain sentence."""

    code: str
    message: str

    def to_dict(self) -> dict[str, str]:
        return {"code": self.code, "message": self.message}


def reaches_minimum(bound: float | None, minimum: float) -> bool | None:
    """The one rule for deciding against a minimum, used by every output: a lower confidence
    bound *reaches* (clears) the minimum when it is strictly above it. A bound equal to the
    minimum leaves the minimum inside the one-sided interval, so the data do not exclude a
    coefficient at the minimum. None when there is no bound (None or NaN); for an array of
    bounds an array of booleans (False where there is none).

    The point estimate is compared as Krippendorff's convention writes it (α ≥ .800) only to
    label where an estimate stands; decisions rest on the bound."""
    if hasattr(bound, "__len__"):  # an array of bounds (simulated studies): no bound does not reach it
        import numpy as np

        with np.errstate(invalid="ignore"):
            return np.asarray(bound, dtype=float) > float(minimum)
    if bound is None or not math.isfinite(float(bound)):
        return None
    return bool(float(bound) > float(minimum))


@dataclass(frozen=True)
class BootstrapInfo:
    """How an interval was resampled, recorded so it can be reported and repeated."""

    replicates: int
    seed: int | None
    method: str              # "pseudo-unit", "bca" or "percentile" (agree.core.constants.CI_METHODS)
    unit: str = "unit"       # "unit", or "cluster:<column>" when whole groups were resampled
    n_undefined: int = 0     # replicates where the coefficient was undefined (left out)

    def to_dict(self) -> dict[str, Any]:
        return {"replicates": self.replicates, "seed": self.seed, "method": self.method,
                "unit": self.unit, "n_undefined": self.n_undefined}


def json_safe(x: Any) -> Any:
    """JSON-safe: NaN and inf become None, numpy scalars become Python numbers."""
    if x is None:
        return None
    if hasattr(x, "item") and not isinstance(x, (list, dict, str)):
        try:
            x = x.item()
        except (ValueError, AttributeError):
            pass
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, dict):
        return {str(k): json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [json_safe(v) for v in x]
    return x


@dataclass(frozen=True)
class AgreementResult:
    """The result of every agreement coefficient.

    `estimate` is NaN (with a warning saying why) when the coefficient is undefined.
    `se` is the analytic standard error where a published estimator exists (`se_method`
    names it), otherwise the bootstrap standard deviation, otherwise None.
    `ci_low`/`ci_high` is a two-sided interval at `confidence_level`, made by `ci_method`.
    `lower_bound` is the one-sided lower confidence bound at the same level; it decides
    against `minimum` (`reaches_minimum`: strictly above).
    `p_value_min` is the one-sided p-value for H0: θ ≤ `minimum`, read off the same draws as
    the bound (the level at which the bound equals the minimum), so the bound clears the
    minimum exactly when `p_value_min` < 1 - `confidence_level`. With the pseudo-unit method it
    is the Bayesian-bootstrap posterior probability P(θ ≤ minimum); without a bootstrap, where
    an analytic SE exists, the normal (or t) approximation Φ((minimum - θ̂)/SE); with the
    Wilson interval the score test. (It replaces `p_below_min`, the raw share of resamples
    below the minimum, which could contradict the bound.)
    Kappa-type results carry `z`, `p_value` (two-sided) and `p_value_one_sided` for
    H0: no agreement beyond chance; not when units are nested in groups (`cluster=`): those
    tests assume independent units, so they are None and a note says why.
    `replicates` holds the bootstrap values the interval was made from (not in `to_dict()`),
    e.g. for intervals of differences computed from independent resamples.
    """

    name: str
    estimate: float
    se: float | None = None
    ci_low: float | None = None
    ci_high: float | None = None
    confidence_level: float = 0.95
    ci_method: str | None = None
    se_method: str | None = None
    n_units: int = 0
    n_coders: int = 0
    n_values: int = 0
    n_categories: int = 0
    level: str | None = None
    weights: str | None = None
    z: float | None = None
    p_value: float | None = None
    p_value_one_sided: float | None = None
    minimum: float | None = None
    p_value_min: float | None = None
    lower_bound: float | None = None
    bootstrap: BootstrapInfo | None = None
    details: Mapping[str, Any] = field(default_factory=dict)
    warnings: tuple[Note, ...] = ()
    replicates: Any = field(default=None, repr=False, compare=False)  # the bootstrap θ* (B,), NaN if undefined

    @property
    def defined(self) -> bool:
        return math.isfinite(self.estimate)

    def to_dict(self) -> dict[str, Any]:
        return json_safe({
            "name": self.name,
            "estimate": self.estimate,
            "se": self.se,
            "se_method": self.se_method,
            "ci_low": self.ci_low,
            "ci_high": self.ci_high,
            "confidence_level": self.confidence_level,
            "ci_method": self.ci_method,
            "n_units": self.n_units,
            "n_coders": self.n_coders,
            "n_values": self.n_values,
            "n_categories": self.n_categories,
            "level": self.level,
            "weights": self.weights,
            "z": self.z,
            "p_value": self.p_value,
            "p_value_one_sided": self.p_value_one_sided,
            "minimum": self.minimum,
            "p_value_min": self.p_value_min,
            "lower_bound": self.lower_bound,
            "bootstrap": None if self.bootstrap is None else self.bootstrap.to_dict(),
            "details": dict(self.details),
            "warnings": [w.to_dict() for w in self.warnings],
        })

    def _view(self) -> tuple[str, Any, list[str]]:
        """Summary line, one-row table and notes, for the notebook and the repr."""
        import pandas as pd

        from agree.core.format import percent_label

        row = {"estimate": self.estimate, "se": self.se, "ci_low": self.ci_low, "ci_high": self.ci_high,
               "n_units": self.n_units, "n_coders": self.n_coders}
        if self.minimum is not None:
            row.update(minimum=self.minimum, lower_bound=self.lower_bound, p_value_min=self.p_value_min)
        how = [f"level {self.level}" if self.level else "", f"{self.weights} weights" if self.weights else "",
               f"SE: {self.se_method}" if self.se_method else "",
               f"{percent_label(self.confidence_level)} CI: {self.ci_method}" if self.ci_method else ""]
        summary = display_name(self.name) + ": " + "; ".join(h for h in how if h)
        return summary, pd.DataFrame([row]), [w.message for w in self.warnings]

    def __repr__(self) -> str:
        from agree.core.format import notebook_text

        summary, frame, notes = self._view()
        return notebook_text("AgreementResult", summary, frame, notes=notes)

    def _repr_html_(self) -> str:
        from agree.core.format import notebook_html

        summary, frame, notes = self._view()
        return notebook_html(summary, frame, notes=notes)
