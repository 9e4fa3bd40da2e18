"""Write a synthetic label log: long (unit, coder, code, document) rows over several Parquet files.

The scenario is invented: an annotation team labels short product reviews with one of five
sentiment codes; each review is labelled by three of four annotators, a share of reviews only by
one (left out of the coefficients), and reviews come in documents of about 100 (the cluster
column). Files are written in chunks, so memory stays small whatever the size.

Usage: python bench/make_logs.py OUT_DIR --rows 1e7 [--files 8] [--csv] [--seed 1]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

CODES = np.array(["very negative", "negative", "neutral", "positive", "very positive"], dtype=object)
CODERS = np.array(["ann", "bea", "cyd", "dov"], dtype=object)
CHUNK_UNITS = 1_000_000


def make_chunk(rng: np.random.Generator, first_unit: int, n_units: int) -> dict:
    """Rows for units first_unit .. first_unit + n_units - 1, in an order like a log's (unit by unit)."""
    truth = rng.choice(5, size=n_units, p=[0.1, 0.2, 0.35, 0.25, 0.1])
    k = np.where(rng.random(n_units) < 0.1, 1, 3)  # 10% of reviews labelled once
    # which annotators: three of four (a rotating design), the first k of a random rotation
    start = rng.integers(0, 4, size=n_units)
    unit = np.repeat(np.arange(first_unit, first_unit + n_units, dtype=np.int64), k)
    pos = np.arange(len(unit)) - np.repeat(np.cumsum(k) - k, k)
    coder = (np.repeat(start, k) + pos) % 4
    noise = rng.random(len(unit)) < 0.25
    shift = rng.choice([-1, 1], size=len(unit))
    code = np.where(noise, np.clip(np.repeat(truth, k) + shift, 0, 4), np.repeat(truth, k))
    return {"unit_id": unit, "annotator": coder.astype(np.int8), "label": code.astype(np.int8),
            "document": unit // 100}


def write(out: Path, rows: float, files: int, csv: bool, seed: int) -> list[Path]:
    import pyarrow as pa
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    out.mkdir(parents=True, exist_ok=True)
    n_units = int(rows / 2.8)  # 2.8 rows per unit on average (10% once, 90% three times)
    per_file = -(-n_units // files)
    rng = np.random.default_rng(seed)
    written = []
    coder_dict = pa.array(CODERS.tolist())
    code_dict = pa.array(CODES.tolist())
    for f in range(files):
        lo, hi = f * per_file, min(n_units, (f + 1) * per_file)
        if lo >= hi:
            break
        path = out / f"labels-{f:03d}.{'csv' if csv else 'parquet'}"
        writer = None
        for start in range(lo, hi, CHUNK_UNITS):
            c = make_chunk(rng, start, min(CHUNK_UNITS, hi - start))
            table = pa.table({
                "unit_id": pa.array(np.char.add("r", c["unit_id"].astype(str)).astype(object)),
                "annotator": pa.DictionaryArray.from_arrays(pa.array(c["annotator"]), coder_dict),
                "label": pa.DictionaryArray.from_arrays(pa.array(c["label"]), code_dict),
                "document": pa.array(c["document"]),
            })
            if csv:
                table = table.cast(pa.schema([("unit_id", pa.string()), ("annotator", pa.string()),
                                              ("label", pa.string()), ("document", pa.int64())]))
                if writer is None:
                    writer = pacsv.CSVWriter(str(path), table.schema)
                writer.write_table(table)
            else:
                if writer is None:
                    writer = pq.ParquetWriter(str(path), table.schema)
                writer.write_table(table, row_group_size=1 << 20)
        writer.close()
        written.append(path)
    return written


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("out", type=Path)
    p.add_argument("--rows", type=float, default=1e7, help="about this many rows in all")
    p.add_argument("--files", type=int, default=8)
    p.add_argument("--csv", action="store_true", help="write CSV instead of Parquet")
    p.add_argument("--seed", type=int, default=1)
    a = p.parse_args()
    t = time.perf_counter()
    paths = write(a.out, a.rows, a.files, a.csv, a.seed)
    size = sum(x.stat().st_size for x in paths)
    print(f"wrote {len(paths)} files, {size / 1e6:.0f} MB, in {time.perf_counter() - t:.1f} s to {a.out}")


if __name__ == "__main__":
    main()
