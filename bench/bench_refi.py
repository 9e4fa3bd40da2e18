"""How long importing a REFI-QDA project takes (run: `.venv/bin/python bench/bench_refi.py`).

Target: a project of 1,000 text documents and 100,000 codings (three coders, a nested code book of
20 codes, documents of about 3,000 characters with Windows line ends) reads in a few seconds with
`read_project`. The XML parse (C, expat) and one pass over the selections building flat lists take
most of it; everything after is array work. The
project is generated here (synthetic words, seeded) into bench/data/ (not committed). Also timed:
reading the same spans from a span table with `read_spans` (texts from a folder), and writing one
coder's spans back into the package as an added user with `write_project`.

Options: --repeat N (median of N runs), --quick (100 documents, 10,000 codings), --out FILE (JSON).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import time
import uuid
import zipfile
from pathlib import Path

import numpy as np

from agree.io.refi import read_project
from agree.io.spans import read_spans
from agree.output.refi import write_project

HERE = Path(__file__).resolve().parent
DATA = HERE / "data"
WORDS = ("flour", "oven", "shift", "crust", "dough", "night", "café", "naïve", "rye", "proof", "knead",
         "Zoë", "tired", "proud", "the", "and", "we", "late", "early", "bread")


def _guid(rng: np.random.Generator) -> str:
    return str(uuid.UUID(bytes=rng.bytes(16), version=4))


def make_project(folder: Path, n_docs: int, n_codings: int, seed: int = 7) -> tuple[Path, Path, Path]:
    """A .qdpx, the same spans as a CSV span table, and the folder of texts."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    coders = {c: _guid(rng) for c in ("ana", "ben", "cleo")}
    themes = [f"theme {t}" for t in range(4)]
    codes = {t: _guid(rng) for t in themes}
    codes.update({f"{t}/code {k}": _guid(rng) for t in themes for k in range(4)})
    texts, docs = [], []
    for d in range(n_docs):
        words = rng.choice(len(WORDS), size=450)
        lines = [" ".join(WORDS[w] for w in words[i:i + 15]) + "." for i in range(0, 450, 15)]
        texts.append("\r\n".join(lines))
        docs.append(_guid(rng))
    per_doc = n_codings // n_docs
    xml = ['<?xml version="1.0" encoding="utf-8"?>\n<Project xmlns="urn:QDA-XML:project:1.0" name="bench">',
           "<Users>" + "".join(f'<User guid="{g}" name="{c}"/>' for c, g in coders.items()) + "</Users>",
           "<CodeBook><Codes>"]
    for t in themes:
        xml.append(f'<Code guid="{codes[t]}" name="{t}" isCodable="true">' + "".join(
            f'<Code guid="{codes[f"{t}/code {k}"]}" name="code {k}" isCodable="true"/>' for k in range(4)) + "</Code>")
    xml.append("</Codes></CodeBook><Sources>")
    code_names = list(codes)
    rows = ["document,coder,code,start,end"]
    users = list(coders)
    for d, text in enumerate(texts):
        xml.append(f'<TextSource guid="{docs[d]}" name="doc{d:05d}" plainTextPath="internal://{docs[d]}.txt">')
        starts = rng.integers(0, len(text) - 200, size=per_doc)
        lengths = rng.integers(10, 200, size=per_doc)
        who = rng.integers(0, 3, size=per_doc)
        which = rng.integers(0, len(code_names), size=per_doc)
        for s, n, u, k in zip(starts, lengths, who, which):
            xml.append(f'<PlainTextSelection guid="{_guid(rng)}" startPosition="{s}" endPosition="{s + n}" '
                       f'creatingUser="{coders[users[u]]}"><Coding guid="{_guid(rng)}" '
                       f'creatingUser="{coders[users[u]]}"><CodeRef targetGUID="{codes[code_names[k]]}"/></Coding>'
                       "</PlainTextSelection>")
            rows.append(f"doc{d:05d},{users[u]},{code_names[k]},{s},{s + n}")
        xml.append("</TextSource>")
    xml.append("</Sources></Project>")
    qdpx = folder / "bench.qdpx"
    with zipfile.ZipFile(qdpx, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("project.qde", "".join(xml).encode("utf-8"))
        for g, text in zip(docs, texts):
            z.writestr(f"sources/{g}.txt", text.encode("utf-8"))
    texts_dir = folder / "texts"
    texts_dir.mkdir(exist_ok=True)
    for d, text in enumerate(texts):
        (texts_dir / f"doc{d:05d}.txt").write_bytes(text.encode("utf-8"))
    table = folder / "bench_spans.csv"
    table.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return qdpx, table, texts_dir


def _median(fn, repeat: int):
    times, value = [], None
    for _ in range(repeat):
        t = time.perf_counter()
        value = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), value


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--out", type=Path, default=HERE / "results" / "refi.json")
    a = parser.parse_args()
    n_docs, n_codings = (100, 10_000) if a.quick else (1_000, 100_000)
    t0 = time.perf_counter()
    qdpx, table, texts = make_project(DATA / f"refi-{n_docs}", n_docs, n_codings)
    print(f"generated {n_docs:,} documents, {n_codings:,} codings in {time.perf_counter() - t0:.1f}s "
          f"({qdpx.stat().st_size / 1e6:.1f} MB package)", flush=True)
    t_read, data = _median(lambda: read_project(qdpx), a.repeat)
    print(f"read_project: {t_read:.2f}s  ({data.n_spans:,} spans, {data.n_documents:,} documents)", flush=True)
    t_table, table_data = _median(lambda: read_spans(table, documents_dir=texts), a.repeat)
    print(f"read_spans (CSV + text folder): {t_table:.2f}s  ({table_data.n_spans:,} spans)", flush=True)
    consensus = data.subset_coders(["ana"])
    out = DATA / f"refi-{n_docs}" / "consensus.qdpx"
    t_write, _ = _median(lambda: write_project(consensus, out, project=qdpx, force=True), a.repeat)
    print(f"write_project (adds {consensus.n_spans:,} spans as one user): {t_write:.2f}s", flush=True)
    result = {"machine": {"python": platform.python_version(), "cpus": os.cpu_count(),
                          "platform": platform.platform()},
              "documents": n_docs, "codings": n_codings, "spans": data.n_spans,
              "read_project_s": t_read, "read_spans_s": t_table, "write_project_s": t_write}
    a.out.parent.mkdir(parents=True, exist_ok=True)
    a.out.write_text(json.dumps(result, indent=2))
    print(f"written {a.out}")


if __name__ == "__main__":
    main()
