"""Random seeds: one way to draw, record and derive them, so that every run can be repeated."""

from __future__ import annotations

import numpy as np


def draw_seed() -> int:
    """A fresh seed from the operating system's entropy, small enough to record and retype."""
    return int(np.random.SeedSequence().generate_state(1)[0])


def resolve_seed(seed: int | None) -> int:
    """`seed` as an int, or a freshly drawn one when None (record what this returns)."""
    return draw_seed() if seed is None else int(seed)


def make_rng(seed: int | np.random.Generator | None) -> tuple[np.random.Generator, int | None]:
    """A generator and the seed to record. With seed=None a fresh seed is drawn and recorded,
    so every interval can be repeated; a Generator is used as given (nothing to record)."""
    if isinstance(seed, np.random.Generator):
        return seed, None
    seed = resolve_seed(seed)
    return np.random.default_rng(seed), seed


def child_seed(master: int, *keys: int) -> int:
    """A seed derived from `master` and `keys` (independent streams for the parts of one run)."""
    return int(np.random.SeedSequence([master, *keys]).generate_state(1)[0])
