"""Which codes are confused with which: the coincidence matrix (or two coders' table), and the
ranked confused pairs with what merging them would do to alpha (METHODS 6.3, 6.4)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd

from agree.core.constants import DEFAULT_SET_DISTANCE
from agree.core.model import AgreeError, CodingData
from agree.stats.kernels import (
    alpha_from_coincidence,
    coincidences,
    contingency,
    delta_for,
    pair_units,
    presence,
    value_counts,
)

from agree.analysis.diagnostics.common import check_data

#: Columns of the confused-pairs table.
PAIR_COLUMNS = ["code_a", "code_b", "count", "units", "share", "expected", "o_over_e", "a_to_b",
                "b_to_a", "alpha_if_merged", "delta_alpha"]


def set_confusion(x: np.ndarray, m_u: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Set-valued confusions (q, q): Σ_u |c¬k|_u |k¬c|_u / (m_u - 1) over pairable units,
    where |c¬k|_u counts the coders of unit u who applied c and not k. On the diagonal,
    the presence coincidences o_kk = Σ_u r_uk (r_uk - 1) / (m_u - 1). Rows of `x` stand for
    `weights` units each (default 1)."""
    ok = m_u >= 2
    xs = x[ok]
    r = xs.sum(axis=1)
    both = np.einsum("uic,uik->uck", xs, xs)
    only = r[:, :, None] - both                              # coders with c and not k
    weight = 1.0 / (m_u[ok] - 1.0)
    if weights is not None:
        weight = weight * np.asarray(weights, dtype=float)[ok]
    conf = np.einsum("u,uck,ukc->ck", weight, only, only)
    np.fill_diagonal(conf, (weight[:, None] * r * (r - 1)).sum(axis=0))
    return conf


def directed_table(data: CodingData, a: int, b: int) -> np.ndarray:
    """Two coders' table over the units both coded: rows coder a, columns coder b. For
    set-valued data over codes: [c, k] counts units where a applied c and not k and b
    applied k and not c; the diagonal counts units where both applied k."""
    if data.set_valued:
        both = (data.codes[:, a] >= 0) & (data.codes[:, b] >= 0)
        x = presence(data)[both]
        xa, xb = x[:, a, :], x[:, b, :]
        only_a = xa[:, :, None] * (1 - xa[:, None, :])      # a applied c and not k
        only_b = xb[:, None, :] * (1 - xb[:, :, None])      # b applied k and not c
        out = (only_a * only_b).sum(axis=0)
        np.fill_diagonal(out, (xa * xb).sum(axis=0))
        return out
    return contingency(data.codes[:, a], data.codes[:, b], len(data.values))


def coder_index(data: CodingData, name: Any) -> int:
    """The column of a coder given by name (or by position when no coder has that name)."""
    if isinstance(name, (int, np.integer)) and not isinstance(name, bool) and name not in data.coders:
        return int(name)
    if name not in data.coders:
        raise AgreeError(f"no coder named '{name}'", hint=f"coders are {', '.join(data.coders)}",
                         code="unknown-coder")
    return data.coders.index(name)


def confusion_table(data: Any, *, directed: bool = False,
                    coders: Sequence[str] | None = None) -> pd.DataFrame:
    """The coincidence matrix of the codes, or two coders' directed contingency table.

    Parameters
    ----------
    data : CodingData, DataFrame or array (units x coders).
    directed : False (default) gives Krippendorff's coincidence matrix o over all coders,
        values x values, symmetric. True gives the contingency table of two coders (rows the
        first, columns the second), over the units both coded.
    coders : the two coders for ``directed=True`` (default: the only two coders).

    Returns
    -------
    DataFrame with the values (codes) as index and columns. For set-valued data both tables
    are over the single codes: off the diagonal the confusions (one coder applied c and not
    k, the other k and not c), on the diagonal agreements on a code's presence.

    Notes
    -----
    o_ck = Σ_{u: m_u >= 2} r_uc (r_uk - [c = k]) / (m_u - 1) (METHODS 4.1). For set-valued
    data o_ck = Σ_u |c¬k|_u |k¬c|_u / (m_u - 1) for c ≠ k, which is the coincidence matrix
    again when every set has one code.

    References
    ----------
    Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability.
    """
    data = check_data(data, allow_empty=True)
    labels = list(data.categories) if data.set_valued else list(data.values)
    if not directed:
        if coders is not None:
            data = data.subset(coders=[coder_index(data, c) for c in coders])
        if data.set_valued:
            table = set_confusion(presence(data), data.values_per_unit.astype(float))
        else:
            table = coincidences(value_counts(data.codes, len(data.values)))
        return pd.DataFrame(table, index=pd.Index(labels, name="code"),
                            columns=pd.Index(labels, name="code"))
    if coders is None:
        if data.n_coders != 2:
            raise AgreeError("a directed table needs exactly two coders", code="two-coders",
                             hint="name the two coders with coders=[a, b]")
        pair = (0, 1)
    else:
        if len(coders) != 2:
            raise AgreeError("name exactly two coders for a directed table", code="two-coders")
        pair = tuple(coder_index(data, c) for c in coders)
    table = directed_table(data, *pair)
    return pd.DataFrame(table, index=pd.Index(labels, name=data.coders[pair[0]]),
                        columns=pd.Index(labels, name=data.coders[pair[1]]))


@dataclass(frozen=True)
class Confusions:
    """The codes' confusions: the ranked confused pairs, the overall alpha they are measured
    against and the (q, q) confusion matrix (the coincidences; for sets of codes the
    confusions of `set_confusion`)."""

    pairs: pd.DataFrame
    alpha: float
    matrix: np.ndarray


def confused_pairs(data: CodingData, x: np.ndarray, m_u: np.ndarray, r: np.ndarray,
                   distance: str | None = None, weights: np.ndarray | None = None) -> Confusions:
    """The confusions between codes, from presence X (N, m, q), values per unit m_u and
    presence counts r (N, q), rows standing for `weights` units each (default: one unit each)."""
    distance = distance or DEFAULT_SET_DISTANCE
    cats = list(data.categories)
    pairable = m_u >= 2
    w = np.ones(len(m_u)) if weights is None else np.asarray(weights, dtype=float)
    if data.set_valued:
        conf = set_confusion(x, m_u, w)
        values = list(data.values)
        o_values = coincidences(value_counts(data.codes, len(values)))
        overall = float(alpha_from_coincidence(o_values, delta_for(distance, values=values)))
        both = np.einsum("uic,uik->uck", x[pairable], x[pairable])
        n_only = np.tensordot(w[pairable], r[pairable][:, :, None] - both, axes=(0, 0))  # values with c and not k
        n = float(w[pairable] @ m_u[pairable])
        total = np.triu(conf, 1).sum()
        share = conf / total if total > 0 else np.full(conf.shape, np.nan)
        expected = n_only * n_only.T / (n - 1) if n > 1 else np.full(conf.shape, np.nan)
    else:
        conf = coincidences(value_counts(data.codes, len(data.values)))
        o_values = None
        overall = float(alpha_from_coincidence(conf, delta_for("nominal", n_values=len(conf))))
        n_c = conf.sum(axis=1)
        n = float(n_c.sum())
        total = conf.sum() - np.trace(conf)
        share = 2 * conf / total if total > 0 else np.full(conf.shape, np.nan)
        expected = np.outer(n_c, n_c) / (n - 1) if n > 1 else np.full(conf.shape, np.nan)
    directed = directed_table(data, 0, 1) if data.n_coders == 2 else None
    pair_c, pair_k = np.nonzero(np.triu(conf, 1) > 0)
    units = pair_units(x[pairable], weights=None if weights is None else weights[pairable])[pair_c, pair_k]
    rows = []
    for c, k, n_units in zip(pair_c, pair_k, units.tolist()):  # a loop over confused pairs of codes
        e = expected[c, k]
        merged = merged_alpha(data, conf if not data.set_valued else None, c, k, o_values, distance)
        rows.append({"code_a": cats[c], "code_b": cats[k], "count": conf[c, k], "units": n_units,
                     "share": share[c, k], "expected": e,
                     "o_over_e": conf[c, k] / e if e and e > 0 else np.nan,
                     "a_to_b": directed[c, k] if directed is not None else np.nan,
                     "b_to_a": directed[k, c] if directed is not None else np.nan,
                     "alpha_if_merged": merged, "delta_alpha": merged - overall})
    pairs = pd.DataFrame(rows, columns=PAIR_COLUMNS)
    if len(pairs):
        pairs = pairs.sort_values(["share", "delta_alpha"], ascending=[False, False],
                                  kind="stable").reset_index(drop=True)
    return Confusions(pairs, overall, conf)


def merged_alpha(data: CodingData, o: np.ndarray | None, c: int, k: int,
                 o_values: np.ndarray | None = None, distance: str = DEFAULT_SET_DISTANCE) -> float:
    """Alpha after merging categories c and k (k becomes c).

    The coincidences after relabelling are Pᵀ o P, with P the 0/1 map from old values to new
    ones, so nothing is recounted per unit. For set-valued data the values are the sets and
    k is replaced by c in each before alpha is recomputed with the set distance."""
    if o is not None:
        keep = [j for j in range(o.shape[0]) if j != k]
        merged = o.copy()
        merged[c, :] += merged[k, :]
        merged[:, c] += merged[:, k]
        merged = merged[np.ix_(keep, keep)]
        return float(alpha_from_coincidence(merged, delta_for("nominal", n_values=len(merged))))
    cats = data.categories
    relabel = {cats[k]: cats[c]}
    new_values = [frozenset(relabel.get(v, v) for v in s) for s in data.values]
    distinct = list(dict.fromkeys(new_values))
    P = np.zeros((len(new_values), len(distinct)))
    P[np.arange(len(new_values)), [distinct.index(v) for v in new_values]] = 1.0
    return float(alpha_from_coincidence(P.T @ o_values @ P, delta_for(distance, values=distinct)))
