"""Synthetic label logs for the reduction engines (DuckDB, Dask, SQL, counts tables).

An invented scenario: annotators label support tickets with a label (a priority: low, medium, high,
urgent); tickets come in queues of about ten (the cluster column). Some tickets are labelled by
one annotator only, some labels are blank (the annotator opened the ticket and gave no label).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from tests.conftest import simulate_codes

PRIORITIES = np.array(["low", "medium", "high", "urgent"], dtype=object)


def long_log(seed: int = 0, *, units: int = 400, coders: int = 3, missing: float = 0.15,
             blank: float = 0.02) -> pd.DataFrame:
    """Rows (ticket, annotator, priority, queue) in log order; tickets coded by fewer than two
    annotators and blank labels included; coders appear first in a shuffled order."""
    rng = np.random.default_rng(seed)
    codes = simulate_codes(rng, units, coders, 4, alpha=0.55, missing=missing, coder_bias=0.3)
    names = np.array([f"annotator_{c}" for c in "abcdefgh"[:coders]] if coders <= 8 else
                     [f"annotator_{i:02d}" for i in range(coders)], dtype=object)
    order = rng.permutation(coders)
    u, c = np.nonzero(codes[:, order] >= 0)
    c = order[c]
    label = PRIORITIES[codes[u, c]].astype(object)
    label[rng.random(len(label)) < blank] = None
    return pd.DataFrame({"ticket": np.char.add("t", u.astype(str)).astype(object), "annotator": names[c],
                         "label": label, "queue": (u // 10).astype(np.int64)})


def same_scores(a, b) -> None:
    """Two ScoreResult dicts equal apart from the reading summary and the ids of units left out
    (weighted data have no unit ids: their rows are patterns)."""
    a, b = a.to_dict(), b.to_dict()
    for d in (a, b):
        d.pop("read")
        d["units"].pop("left_out_ids")
    assert a == b
