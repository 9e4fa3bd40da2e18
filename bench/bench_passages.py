"""Speed of the passages views on a large synthetic span set.

Run: `.venv/bin/python bench/bench_passages.py` (`--quick` for a smoke run).

Scenario (synthetic, invented): 100 interview transcripts of 50,000 characters, 3 coders, 10 codes,
about 20 spans per code, coder and document (60,000 spans); the second and third coders shift
their span boundaries by a few characters and miss or add some spans. That is 5e6 positions per
code. Target: positions as units (view 2), with every per-code alpha and kappa, the set-valued
alpha, Dice and span matching and a 2,000-replicate cluster bootstrap over documents, in seconds
(target: under 10 s on the shared 2-core machine; 3.5 s measured). Also times the run-length construction alone and
view 3 (experimental unitizing alpha) with its bootstrap.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

from agree.analysis.passages import position_agreement, position_runs, unitizing_agreement
from agree.core.spans import SpanData


def synthetic(n_docs: int, length: int, n_coders: int, n_codes: int, per: int, seed: int = 1) -> SpanData:
    rng = np.random.default_rng(seed)
    D, m, C = n_docs, n_coders, n_codes
    base_doc = np.repeat(np.arange(D), C * per)
    base_code = np.tile(np.repeat(np.arange(C), per), D)
    base_len = rng.integers(20, 800, size=len(base_doc))
    base_start = rng.integers(0, length - 800, size=len(base_doc))
    docs, coders, codes, starts, ends = [], [], [], [], []
    for i in range(m):  # a loop over coders
        keep = rng.random(len(base_doc)) < (1.0 if i == 0 else 0.85)
        jitter_s = 0 if i == 0 else rng.integers(-15, 16, size=len(base_doc))
        jitter_e = 0 if i == 0 else rng.integers(-15, 16, size=len(base_doc))
        s = np.clip(base_start + jitter_s, 0, length - 1)
        e = np.clip(base_start + base_len + jitter_e, s + 1, length)
        docs.append(base_doc[keep]); coders.append(np.full(int(keep.sum()), i)); codes.append(base_code[keep])
        starts.append(s[keep]); ends.append(e[keep])
    return SpanData(documents=tuple(f"interview {d + 1:03d}" for d in range(D)), texts=(None,) * D,
                    lengths=np.full(D, length), coders=tuple(f"coder {i + 1}" for i in range(m)),
                    codes=tuple(f"code {k + 1}" for k in range(C)), parents=np.full(C, -1),
                    doc=np.concatenate(docs), coder=np.concatenate(coders), code=np.concatenate(codes),
                    start=np.concatenate(starts), end=np.concatenate(ends), coded=np.ones((D, m), bool),
                    coverage="declared")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--out", default=None)
    args = ap.parse_args()
    n_docs, length = (10, 5_000) if args.quick else (100, 50_000)
    sp = synthetic(n_docs, length, 3, 10, 20)
    out = {"documents": n_docs, "characters_per_document": length, "coders": 3, "codes": 10, "spans": sp.n_spans,
           "positions_per_code": n_docs * length}
    t = time.perf_counter()
    runs = position_runs(sp)
    out["runs_seconds"] = round(time.perf_counter() - t, 3)
    out["runs"] = int(len(runs.doc))
    t = time.perf_counter()
    res = position_agreement(sp, n_resamples=2000, seed=1)
    out["positions_view_seconds"] = round(time.perf_counter() - t, 2)
    out["positions_view_alpha_all_codes"] = round(res.overall.estimate, 4)
    t = time.perf_counter()
    unitizing_agreement(sp, n_resamples=2000, seed=1)
    out["unitizing_view_seconds"] = round(time.perf_counter() - t, 2)
    out["target"] = "positions view under 10 s"
    out["meets_target"] = out["positions_view_seconds"] < 10
    text = json.dumps(out, indent=2)
    print(text)
    if args.out:
        with open(args.out, "w", encoding="utf-8") as fh:
            fh.write(text)


if __name__ == "__main__":
    main()
