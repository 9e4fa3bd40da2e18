"""Shared kernels: the maths that coefficients, diagnostics, planning and reconciliation share,
written once.

- value counts r_uv (how many coders gave value v to unit u), which codes each value holds
  (presence of a code, for sets of codes), two coders' contingency table;
- Krippendorff's coincidences o_ck, per unit and summed (METHODS 4.1);
- the distance δ_ck of a level or a set distance (METHODS 4.3);
- alpha from coincidences, from their sums, or as features per unit with a vectorised finish
  (METHODS 4.2, 7.5), so that point estimates, bootstrap replicates and simulated data sets
  use the same code;
- the units in which two codes are confused (whole units, unlike the coincidences).

Everything is vectorised over units (or patterns) and over leading axes (replicates); nothing
loops over units or values in Python.

References
----------
Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School for Communication.
Passonneau, R. (2006). Measuring agreement on set-valued items (MASI). LREC 2006.
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from agree.core.model import AgreeError, CodingData

# Largest number of cells of a temporary array built per chunk of units.
_CHUNK_CELLS = 4_000_000


# ----------------------------------------------------------------------------------------
# counts


def value_counts(codes: np.ndarray, n_values: int) -> np.ndarray:
    """r (N, V) float: how many coders gave each value to each unit; `codes` (N, m), -1 missing."""
    codes = np.asarray(codes)
    N = codes.shape[0]
    ok = codes >= 0
    rows = np.broadcast_to(np.arange(N)[:, None], codes.shape)[ok]
    flat = np.bincount(rows * n_values + codes[ok], minlength=N * n_values)
    return flat.reshape(N, n_values).astype(float)


def contingency(first: np.ndarray, second: np.ndarray, n_values: int) -> np.ndarray:
    """Two coders' (V, V) table over the units both coded: rows the first coder's value,
    columns the second's; `first` and `second` (N,) codes, -1 missing."""
    first, second = np.asarray(first), np.asarray(second)
    both = (first >= 0) & (second >= 0)
    flat = np.bincount(first[both] * n_values + second[both], minlength=n_values * n_values)
    return flat.reshape(n_values, n_values).astype(float)


def membership(data: CodingData) -> np.ndarray:
    """(V + 1, C) 0/1: which categories each value holds (a set of codes holds its codes, a
    single code itself); the last row, for missing (-1), holds none."""
    position = {c: k for k, c in enumerate(data.categories)}
    member = np.zeros((len(data.values) + 1, len(position)))
    for v, value in enumerate(data.values):  # a loop over the codebook's values, not units
        for c in (value if data.set_valued else (value,)):
            if c not in position:
                raise AgreeError(f"value '{c}' is not among the categories", code="unknown-code")
            member[v, position[c]] = 1.0
    return member


def presence(data: CodingData) -> np.ndarray:
    """X (N, m, C) float: 1 where coder i applied category k to unit u (0 if they did not code it)."""
    return membership(data)[np.where(data.codes < 0, len(data.values), data.codes)]


# ----------------------------------------------------------------------------------------
# coincidences (METHODS 4.1)


def _pair_scale(r: np.ndarray) -> np.ndarray:
    """1 / (m_u - 1) for rows with m_u >= 2 values, else 0 (they have no pairs)."""
    m = r.sum(axis=-1)
    return np.where(m >= 2, 1.0 / np.maximum(m - 1.0, 1.0), 0.0)


def coincidence_contributions(r: np.ndarray) -> np.ndarray:
    """Each row's contribution (..., V, V) to the coincidence matrix, from value counts r (..., V).

    Notes
    -----
    A unit with value counts r_u and m_u = Σ r_u >= 2 values adds (r_u r_uᵀ - diag(r_u)) / (m_u - 1)
    to o; units with m_u < 2 add nothing. So o is linear in the counts of units (or patterns).
    """
    r = np.asarray(r, dtype=float)
    outer = r[..., :, None] * r[..., None, :] - r[..., :, None] * np.eye(r.shape[-1])
    return outer * _pair_scale(r)[..., None, None]


def coincidences(r: np.ndarray, counts: np.ndarray | None = None) -> np.ndarray:
    """Krippendorff's coincidence matrix o (V, V) from value counts r (N, V) of units (or of
    patterns occurring `counts` times): o_ck = Σ_u r_uc (r_uk - [c = k]) / (m_u - 1) over
    units with m_u >= 2."""
    r = np.asarray(r, dtype=float)
    scale = _pair_scale(r)
    if counts is not None:
        scale = scale * np.asarray(counts, dtype=float)
    scaled = r * scale[:, None]
    return scaled.T @ r - np.diag(scaled.sum(axis=0))


# ----------------------------------------------------------------------------------------
# distances (METHODS 4.3)


def _jaccard(a: frozenset, b: frozenset) -> float:
    if not a and not b:
        return 0.0
    return 1.0 - len(a & b) / len(a | b)


def _masi(a: frozenset, b: frozenset) -> float:
    if not a and not b:
        return 0.0
    union = a | b
    jac = len(a & b) / len(union) if union else 1.0
    if a == b:
        mono = 1.0
    elif a <= b or b <= a:
        mono = 2 / 3
    elif a & b:
        mono = 1 / 3
    else:
        mono = 0.0
    return 1.0 - jac * mono


#: Distances between sets of codes, by name.
SET_DISTANCES: dict[str, Callable[[frozenset, frozenset], float]] = {"jaccard": _jaccard, "masi": _masi}


def level_delta(level: str, scores: np.ndarray) -> np.ndarray:
    """δ (V x V) for the nominal, interval or ratio metric on values with these scores."""
    s = np.asarray(scores, dtype=float)
    if level == "nominal":
        return 1.0 - np.eye(len(s))
    if level == "interval":
        return (s[:, None] - s[None, :]) ** 2
    if level == "ratio":
        if (s < 0).any():
            raise AgreeError("ratio level needs values of zero or more", code="level")
        total = s[:, None] + s[None, :]
        safe = np.where(total == 0, 1.0, total)
        return np.where(total == 0, 0.0, ((s[:, None] - s[None, :]) / safe) ** 2)
    raise AgreeError(f"no fixed metric for level '{level}'", code="level")


def set_delta(name: str, values: Sequence[frozenset]) -> np.ndarray:
    """δ (V x V) between sets of codes: Jaccard or MASI distance."""
    if name not in SET_DISTANCES:
        raise AgreeError(f"distance for sets of codes must be 'jaccard' or 'masi'; got '{name}'", code="level")
    # vectorised over pairs of sets (same values as SET_DISTANCES): sets as rows of a membership matrix
    members = sorted({c for v in values for c in v}, key=str)
    where = {c: k for k, c in enumerate(members)}
    M = np.zeros((len(values), len(members)))
    for i, v in enumerate(values):  # a loop over the distinct sets
        M[i, [where[c] for c in v]] = 1.0
    size = M.sum(axis=1)
    inter = M @ M.T
    union = size[:, None] + size[None, :] - inter
    jac = np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)
    if name == "jaccard":
        return 1.0 - jac
    equal = (inter == size[:, None]) & (inter == size[None, :])
    nested = (inter == np.minimum(size[:, None], size[None, :]))
    mono = np.where(equal, 1.0, np.where(nested, 2 / 3, np.where(inter > 0, 1 / 3, 0.0)))
    return 1.0 - jac * mono


def ordinal_delta(margins: np.ndarray) -> np.ndarray:
    """Krippendorff's ordinal metric from coincidence margins n_g, shape (..., V) -> (..., V, V):
    δ_ck = (sum_{g=c..k} n_g - (n_c + n_k)/2)^2."""
    cum = np.cumsum(margins, axis=-1)
    V = margins.shape[-1]
    lo = np.minimum.outer(np.arange(V), np.arange(V))
    hi = np.maximum.outer(np.arange(V), np.arange(V))
    span = cum[..., hi] - cum[..., lo] + margins[..., lo]
    return (span - (margins[..., :, None] + margins[..., None, :]) / 2.0) ** 2


def delta_for(kind: str, *, scores: np.ndarray | None = None, values: Sequence[Any] | None = None,
              n_values: int | None = None) -> np.ndarray | None:
    """δ (V, V) for a level ("nominal", "interval", "ratio": on `scores`) or a set distance
    ("masi", "jaccard": between the sets `values`); None for "ordinal", whose δ depends on the
    margins of each coincidence matrix. The number of values comes from `scores`, `values` or
    `n_values`."""
    if kind == "ordinal":
        return None
    if kind in SET_DISTANCES:
        return set_delta(kind, values)
    if kind == "nominal":
        V = n_values if n_values is not None else len(scores if scores is not None else values)
        return 1.0 - np.eye(V)
    return level_delta(kind, scores)


# ----------------------------------------------------------------------------------------
# alpha (METHODS 4.2)


def alpha_from_sums(observed: np.ndarray, margins: np.ndarray, delta: np.ndarray) -> np.ndarray:
    """α from the observed-disagreement sum Σ o_ck δ_ck (...) and the coincidence margins
    n_c (..., V) for a fixed δ (V, V): α = 1 - (n - 1) Σ o δ / Σ n_c n_k δ. NaN where
    undefined (no pairable values, or no expected disagreement)."""
    n = margins.sum(axis=-1)
    expected = ((margins @ delta) * margins).sum(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = 1.0 - (n - 1.0) * observed / expected
    return np.where((expected > 0) & (n > 1), alpha, np.nan)


def alpha_from_coincidence(o: np.ndarray, delta: np.ndarray | None) -> np.ndarray:
    """α for coincidence matrices o of shape (..., V, V); `delta` is (V, V), or None for the
    ordinal metric, which depends on the margins of each o.

    Notes
    -----
    With mid-rank scores u_c = Σ_{g<c} n_g + n_c / 2 the ordinal δ_ck equals (u_c - u_k)²
    (`ordinal_delta`), so ordinal α is interval α on u and needs no V x V metric:
    Σ o δ = 2 Σ_c n_c u_c² - 2 uᵀ o u and Σ n_c n_k δ = 2 n Σ_c n_c u_c² - 2 (Σ_c n_c u_c)².
    """
    if delta is not None:
        return alpha_from_sums((o * delta).sum(axis=(-2, -1)), o.sum(axis=-1), delta)
    margins = o.sum(axis=-1)
    n = margins.sum(axis=-1)
    u = np.cumsum(margins, axis=-1) - margins / 2.0
    square = (margins * u * u).sum(axis=-1)
    observed = 2.0 * square - 2.0 * (np.matmul(o, u[..., None])[..., 0] * u).sum(axis=-1)
    expected = 2.0 * n * square - 2.0 * (margins * u).sum(axis=-1) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = 1.0 - (n - 1.0) * observed / expected
    return np.where((expected > 1e-9 * np.maximum(n, 1) ** 4) & (n > 1), alpha, np.nan)


def alpha_features(r: np.ndarray, delta: np.ndarray | None, codes: np.ndarray | None = None) -> np.ndarray:
    """Alpha's sufficient sums per unit (or pattern) from value counts r (N, V), for
    `alpha_finish`: with a fixed δ the coincidence margins and Σ o δ (N, V + 1); with the
    ordinal metric (delta None) the whole coincidence contribution (N, V * V).

    Given the rows' `codes` (N, m) too, Σ_ck r_c δ_ck r_k is summed over the row's pairs of
    values, O(N m²) instead of O(N V²) (many values, as with sets of codes)."""
    r = np.asarray(r, dtype=float)
    if delta is None:
        return coincidence_contributions(r).reshape(len(r), -1)
    scale = _pair_scale(r)
    if codes is None:
        pairs = np.einsum("pc,ck,pk->p", r, delta, r)
    else:
        seen = codes >= 0
        c = np.where(seen, codes, 0)
        both = seen[:, :, None] & seen[:, None, :]
        pairs = np.where(both, delta[c[:, :, None], c[:, None, :]], 0.0).sum(axis=(1, 2))
    # δ_cc = 0, so Σ r_c δ_ck r_k = (m_u - 1) Σ o δ
    return np.column_stack([r * (scale > 0)[:, None], pairs * scale])


def coincidence_features(contributions: np.ndarray, delta: np.ndarray | None) -> np.ndarray:
    """The features of `alpha_features` from per-unit coincidence contributions (N, V, V)."""
    O = np.asarray(contributions, dtype=float)
    if delta is None:
        return O.reshape(len(O), -1)
    return np.column_stack([O.sum(axis=2), (O * delta).sum(axis=(1, 2))])


def alpha_finish(sums: np.ndarray, delta: np.ndarray | None) -> np.ndarray:
    """α from summed `alpha_features` (..., K), vectorised over the leading axes."""
    sums = np.asarray(sums, dtype=float)
    if delta is None:
        V = int(round(np.sqrt(sums.shape[-1])))
        return alpha_from_coincidence(sums.reshape(sums.shape[:-1] + (V, V)), None)
    V = delta.shape[0]
    return alpha_from_sums(sums[..., V], sums[..., :V], delta)


# ----------------------------------------------------------------------------------------
# confusions in whole units


def pair_units(x: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """(C, C) integer counts of the units in which one coder applied code c and not k and
    another coder k and not c; `x` (N, m, C) is the presence of each code (see `presence`),
    of the units to count, each row standing for `weights` units (whole numbers; default 1).
    The diagonal is 0.

    Notes
    -----
    count_ck = Σ_u [∃i: X_uic ¬X_uik] [∃j: X_ujk ¬X_ujc]. When no coder applied more than one
    code to a unit (single codes), "c and not k" is "c", and the counts are Gᵀ G with
    G_uc = [some coder of u applied c]. Unlike the coincidences o_ck, which weigh each unit's
    pairs by 1 / (m_u - 1), these are whole units.
    """
    x = np.asarray(x) > 0
    N, m, C = x.shape
    if not N or not C:
        return np.zeros((C, C), dtype=np.int64)
    w = np.ones(N, dtype=np.int64) if weights is None else np.asarray(weights).astype(np.int64)
    if (x.sum(axis=2) <= 1).all():
        given = x.any(axis=1).astype(np.int64)
        out = given.T @ (given * w[:, None])
    else:
        out = np.zeros((C, C), dtype=np.int64)
        step = max(1, _CHUNK_CELLS // max(1, m * C * C))
        for start in range(0, N, step):  # chunks of units, so that memory stays bounded
            xs = x[start:start + step]
            some = (xs[:, :, :, None] & ~xs[:, :, None, :]).any(axis=1)     # (n, C, C): c and not k
            out += np.tensordot(w[start:start + step], (some & np.swapaxes(some, 1, 2)).astype(np.int64),
                                axes=(0, 0))
    np.fill_diagonal(out, 0)
    return out
