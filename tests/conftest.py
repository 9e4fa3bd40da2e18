"""Shared helpers for the agreement-engine tests: synthetic coding data and small converters.

All data here are synthetic, drawn from the generative model of METHODS.md section 8.2: each
unit has a true category T ~ prevalences; each coder reports T with probability theta and
otherwise guesses a category from the prevalences. The population alpha (and Scott's pi) is
theta², so ``theta = sqrt(alpha)``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest


def simulate_codes(rng: np.random.Generator, n_units: int, n_coders: int, n_categories: int, *,
                   alpha: float = 0.6, missing: float = 0.0, prevalence=None,
                   coder_bias: float = 0.0) -> np.ndarray:
    """Integer codes (units x coders) in 0..q-1, -1 where the coder did not code the unit.

    `coder_bias` > 0 gives each coder their own guessing distribution (so coder margins differ,
    which is what separates Cohen/Conger from Scott/Fleiss).
    """
    q = n_categories
    p = np.full(q, 1.0 / q) if prevalence is None else np.asarray(prevalence, dtype=float)
    theta = math.sqrt(alpha)
    truth = rng.choice(q, size=n_units, p=p)
    knows = rng.random((n_units, n_coders)) < theta
    guesses = np.empty((n_units, n_coders), dtype=np.int64)
    for i in range(n_coders):
        pi = p
        if coder_bias > 0:
            pi = (1 - coder_bias) * p + coder_bias * rng.dirichlet(np.ones(q))
        guesses[:, i] = rng.choice(q, size=n_units, p=pi)
    codes = np.where(knows, truth[:, None], guesses)
    if missing > 0:
        codes[rng.random(codes.shape) < missing] = -1
    return codes


def as_float(codes: np.ndarray, values=None) -> np.ndarray:
    """Codes -> float matrix with NaN for missing; `values[k]` replaces code k if given."""
    out = np.asarray(codes, dtype=float).copy()
    if values is not None:
        lookup = np.asarray(values, dtype=float)
        out[codes >= 0] = lookup[codes[codes >= 0]]
    out[codes < 0] = np.nan
    return out


def as_labels(codes: np.ndarray, labels) -> np.ndarray:
    """Codes -> object matrix of labels with None for missing."""
    lookup = np.array(list(labels) + [None], dtype=object)
    return lookup[np.where(codes < 0, len(labels), codes)]


def counts_matrix(codes: np.ndarray, q: int) -> np.ndarray:
    """r_uk: how many coders gave unit u category k (N x q)."""
    n = codes.shape[0]
    r = np.zeros((n, q), dtype=np.int64)
    for j in range(codes.shape[1]):
        ok = codes[:, j] >= 0
        np.add.at(r, (np.nonzero(ok)[0], codes[ok, j]), 1)
    return r


def cross_table(a: np.ndarray, b: np.ndarray, q: int) -> np.ndarray:
    """Two coders' q x q table over the units both coded."""
    ok = (a >= 0) & (b >= 0)
    t = np.zeros((q, q), dtype=np.int64)
    np.add.at(t, (a[ok], b[ok]), 1)
    return t


def expand_table(table: np.ndarray) -> np.ndarray:
    """A q x q cross table -> units x 2 codes (one row per counted unit)."""
    table = np.asarray(table, dtype=np.int64)
    rows = [(k, l) for k in range(table.shape[0]) for l in range(table.shape[1])
            for _ in range(table[k, l])]
    return np.array(rows, dtype=np.int64).reshape(-1, 2)


def warning_codes(result) -> set[str]:
    return {w.code for w in result.warnings}


def shape_cases(n_cases: int, seed: int, *, missing: bool, m_range=(2, 6), q_range=(2, 8),
                n_range=(10, 300)):
    """Random (seed, m, q, N, missing rate) shapes as pytest params, ids readable."""
    rng = np.random.default_rng(seed)
    cases = []
    for i in range(n_cases):
        m = int(rng.integers(m_range[0], m_range[1] + 1))
        q = int(rng.integers(q_range[0], q_range[1] + 1))
        n = int(rng.integers(n_range[0], n_range[1] + 1))
        rate = float(rng.choice([0.1, 0.25, 0.4])) if missing else 0.0
        s = int(rng.integers(0, 2**31))
        cases.append(pytest.param(s, m, q, n, rate, id=f"m{m}-q{q}-N{n}-miss{rate}"))
    return cases


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)
