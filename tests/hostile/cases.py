"""The hostile-input cases: generated files, the command line run on them, and the expected outcome.

Every case is one row of `CASES`: the files to generate (nothing large is stored in the
repository; files are made here at test time by writers outside agree: Python's csv module and
openpyxl), links and other preparation, the command line (run in the case's folder), and what
must happen: the exit code, a pattern the message must match (an error must name the file),
and for a correct result a check of the outputs. `test_cases.py` runs every case and also
asserts that no traceback was printed and that no input changed (checksums of every file and
the target of every link, before and after).

Add a case by appending a `Case` to `CASES` (reading-side cases too: disguised, truncated or
oversized files, encodings, separators, control characters, nested Parquet types, ...).
All data here are synthetic.
"""

from __future__ import annotations

import csv
import io
import os
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import openpyxl
import pandas as pd

from agree.core.cells import unprotect_text

# Text a spreadsheet or a CSV reader trips on: formulas, quotes, separators, line breaks of every
# kind, non-ASCII. Used as unit ids, texts, codes and column names.
AWKWARD = ["=SUM(A1)", "+cmd", "-fine", "@here", "'=already", "''=twice", "'tis", "-1", "+0.5",
           "line\nbreak", "cr\ronly", "crlf\r\nend", 'say "hi"', "a,b", "tab\tin", "café", "日本語",
           "emoji 🙂", "plain"]


# -- writers outside agree -------------------------------------------------------------------
def csv_bytes(header: Sequence[str], rows: Sequence[Sequence[Any]]) -> bytes:
    """A CSV as a careful spreadsheet writes it: every field quoted, CRLF row ends."""
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, quoting=csv.QUOTE_ALL, lineterminator="\r\n")
    writer.writerow(header)
    writer.writerows(["" if v is None else v for v in row] for row in rows)
    return buffer.getvalue().encode("utf-8")


def xlsx_bytes(header: Sequence[str], rows: Sequence[Sequence[Any]], *, title: str = "Sheet1") -> bytes:
    """A workbook with every cell typed as text (None left blank)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = title
    for i, row in enumerate([list(header), *rows], start=1):
        for j, value in enumerate(row, start=1):
            if value is not None:
                cell = ws.cell(row=i, column=j)
                cell.value = value
                cell.data_type = "s"
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue()


SAMPLES = Path(__file__).resolve().parents[2] / "samples"

# -- the data the cases share ------------------------------------------------------------------
CODES = ["=pos", "-neg", "@mixed", "+x", "a,b", 'q"uote', "plain"]

# unit id, text, three coders (None: not coded). Every unit but "agreed 1" is listed for review.
CODING = [
    (unit, f"text of {unit}", CODES[i % 7], CODES[(i + 1) % 7], None if i % 5 == 4 else CODES[(i + 2) % 7])
    for i, unit in enumerate(AWKWARD)
] + [("agreed 1", "same\r\nsame", "plain", "plain", "plain"), ("one coder", "x", "plain", None, None)]
CODERS = ["ann", "bo", "cy"]
# Workbook inputs are read exactly; CSV inputs with one "'" less before a formula character (the
# documented CSV rule: such a cell is what a protecting CSV writer makes of the text).
# Listed for review: the coders disagree, or only one coder coded the unit.
IN_WORKBOOK = [u for u, _, *codes in CODING
               if len({c for c in codes if c is not None}) > 1 or sum(c is not None for c in codes) == 1]
NEEDS_REVIEW = [unprotect_text(u) for u in IN_WORKBOOK]
UNITS = [unprotect_text(u) for u, *_ in CODING]


def coding_csv() -> bytes:
    return csv_bytes(["unit", "text", *CODERS], CODING)


def coding_xlsx() -> bytes:
    return xlsx_bytes(["unit", "text", *CODERS], CODING)


def codebook_csv() -> bytes:
    return csv_bytes(["code", "description"], [(c, f"meaning of {c}") for c in CODES])


def corpus_rows(n: int = 24) -> list[tuple[str, str, str]]:
    ids = AWKWARD + [f"u{i}" for i in range(n - len(AWKWARD))]
    return [(uid, f"answer {i}: {AWKWARD[i % len(AWKWARD)]}", f"g{i % 3}") for i, uid in enumerate(ids)]


def corpus_csv() -> bytes:
    return csv_bytes(["unit_id", "text", "group"], corpus_rows())


def corpus_xlsx() -> bytes:
    return xlsx_bytes(["unit_id", "text", "group"], corpus_rows())


def earlier_sheet() -> bytes:
    """A coding sheet of an earlier round (unit_id, text, code)."""
    return xlsx_bytes(["unit_id", "text", "code"], [(u, t, "plain") for u, t, _ in corpus_rows()[:5]])


def rounds_csv(shift: int) -> bytes:
    rows = [(f"u{i}", "x", CODES[i % 3], CODES[(i + shift) % 3]) for i in range(12)]
    return csv_bytes(["unit", "text", "ann", "bo"], rows)


def consensus_csv() -> bytes:
    return csv_bytes(["unit", "final code", "source"], [(u, "plain", "agreed") for u, *_ in CODING])


# -- preparation helpers -----------------------------------------------------------------------
def symlink(link: str, target: str) -> Callable[[Path], None]:
    def make(folder: Path) -> None:
        (folder / link).parent.mkdir(parents=True, exist_ok=True)
        os.symlink(target, folder / link)
    return make


def hardlink(link: str, target: str) -> Callable[[Path], None]:
    def make(folder: Path) -> None:
        os.link(folder / target, folder / link)
    return make


def mkdir(name: str) -> Callable[[Path], None]:
    return lambda folder: (folder / name).mkdir(parents=True, exist_ok=True)


def dead_pid() -> int:
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True, check=True)
    return int(done.stdout)


def stale_temp(output: str) -> Callable[[Path], None]:
    """A temporary file left by a run that was killed an hour ago while writing `output`."""
    def make(folder: Path) -> None:
        path = folder / f".{output}.agree-{dead_pid()}-k1ll3d00.tmp"
        path.write_bytes(b"half a workbook")
        old = time.time() - 3600
        os.utime(path, (old, old))
    return make


_KILLED_WRITER = """
import sys, time
from agree.core.files import atomic_write
def slow(tmp):
    open(tmp, "wb").write(b"half")
    print("writing", flush=True)
    time.sleep(120)
atomic_write(sys.argv[1], slow)
"""


def killed_write(output: str) -> Callable[[Path], None]:
    """Start writing `output` in another process and kill it (-9) in the middle of the write."""
    def make(folder: Path) -> None:
        proc = subprocess.Popen([sys.executable, "-c", _KILLED_WRITER, str(folder / output)],
                                stdout=subprocess.PIPE, text=True)
        assert proc.stdout.readline().strip() == "writing"
        proc.kill()
        proc.wait()
        proc.stdout.close()
        assert [p for p in os.listdir(folder) if p.startswith(f".{output}.") and p.endswith(".tmp")]
        time.sleep(0.05)      # the next run starts after the leftover was last touched
    return make


def review_of(data_file: str, review: str) -> Callable[[Path], None]:
    """An earlier output: the review file of `data_file`, made by the library."""
    def make(folder: Path) -> None:
        import agree

        agree.write_review(agree.read(folder / data_file), folder / review)
    return make


def case_insensitive(folder: Path) -> bool:
    probe = folder / ".Case-Probe"
    probe.write_text("x")
    try:
        return (folder / ".cASE-pROBE").exists()
    finally:
        probe.unlink()


# -- checks of correct results -----------------------------------------------------------------
def read_csv_back(path: Path) -> pd.DataFrame:
    """A CSV agree wrote, read by pandas and by Python's csv module (which must agree), with
    agree's formula rule undone."""
    frame = pd.read_csv(path, dtype=str, keep_default_na=False).map(unprotect_text)
    frame.columns = [unprotect_text(c) for c in frame.columns]
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert [[unprotect_text(c) for c in r] for r in rows[1:]] == frame.to_numpy().tolist()
    return frame


def no_temporary_files(folder: Path) -> None:
    left = [p for p in folder.rglob(".*.tmp")]
    assert not left, f"temporary files left: {left}"


@dataclass(frozen=True)
class Outcome:
    folder: Path
    code: int
    out: str
    err: str
    run: Callable[..., "Outcome"]      # run another command in the same folder


def check_review_csv(o: Outcome) -> None:
    frame = read_csv_back(o.folder / "review.csv")
    assert sorted(frame["unit"]) == sorted(NEEDS_REVIEW)
    texts = dict(zip(frame["unit"], frame["text"]))
    assert all(texts[unprotect_text(u)] == t for u, t, *_ in CODING if unprotect_text(u) in texts)
    coded = {unprotect_text(u): codes for u, _, *codes in CODING}
    for coder_index, coder in enumerate(CODERS):
        assert all(frame.loc[i, coder] == (coded[u][coder_index] or "") for i, u in enumerate(frame["unit"]))
    # agree's own reader: the consensus made from it has every unit once, ids exact
    again = o.run("reconcile", "review.csv", "--data", "coding.csv", "--allow-unresolved", "-o", "consensus.csv")
    assert again.code == 0, again.err
    consensus = read_csv_back(o.folder / "consensus.csv")
    assert list(consensus["unit"]) == UNITS
    no_temporary_files(o.folder)


def check_review_xlsx(o: Outcome) -> None:
    ws = openpyxl.load_workbook(o.folder / "review.xlsx")["Review"]
    header = [c.value for c in ws[1]]
    units = [row[header.index("unit")] for row in ws.iter_rows(min_row=2, values_only=True)]
    assert sorted(units) == sorted(IN_WORKBOOK)
    assert all(c.data_type == "s" for row in ws.iter_rows(min_row=2) for c in row if c.value is not None)
    again = o.run("reconcile", "review.xlsx", "--data", "coding.xlsx", "--allow-unresolved", "-o", "consensus.xlsx")
    assert again.code == 0, again.err
    wb = openpyxl.load_workbook(o.folder / "consensus.xlsx")
    ws = wb.active
    assert [r[0] for r in ws.iter_rows(min_row=2, values_only=True)] == [u for u, *_ in CODING]   # exact
    assert all(c.data_type == "s" for c in next(ws.iter_cols(min_col=1, max_col=1, min_row=2)))


def check_review_md(o: Outcome) -> None:
    lines = (o.folder / "review.md").read_text(encoding="utf-8").split("\n")
    table = [line for line in lines if line.startswith("| ")]
    assert len(table) == 1 + len(NEEDS_REVIEW)          # header + one line per unit: no stray breaks
    assert "\r" not in (o.folder / "review.md").read_text(encoding="utf-8")


def check_codes_csv(o: Outcome) -> None:
    frame = pd.read_csv(io.StringIO(o.out), dtype=str, keep_default_na=False).map(unprotect_text)
    assert set(frame["code"]) == set(CODES)


def check_score_csv(o: Outcome) -> None:
    frame = pd.read_csv(io.StringIO(o.out), dtype=str, keep_default_na=False)
    assert "krippendorff_alpha" in set(frame["coefficient"]) and len(frame) >= 5


def check_sheets(o: Outcome) -> None:
    """Every copied cell is text, the texts and ids are exactly the corpus's, and the sheets, once
    filled in, read back through agree with the same unit ids."""
    import agree
    from agree.analysis.sampling import read_unit_ids

    corpus = {u: (t, g) for u, t, g in corpus_rows()}
    files = []
    for coder in ("ann", "bo"):
        path = o.folder / "sheets" / f"{coder}.xlsx"
        wb = openpyxl.load_workbook(path)
        ws = wb["coding"]
        header = [c.value for c in ws[1]]
        assert header == ["unit_id", "=group", "text", "code", "notes"]
        assert ws.cell(row=1, column=2).data_type == "s"
        for row in ws.iter_rows(min_row=2):
            uid, group, text = (c.value for c in row[:3])
            assert all(c.data_type == "s" for c in row[:3])
            assert corpus[uid] == (text, group)
            row[3].value = "plain"
        wb.save(path)
        files.append(path)
    data = agree.read(files)
    manifest = read_unit_ids(o.folder / "sheets" / "manifest.csv")
    assert sorted(map(str, data.unit_ids)) == sorted(manifest)
    assert set(manifest) <= set(corpus) and len(manifest) == 12
    assert set(AWKWARD) & set(manifest)           # the awkward ids were drawn too
    no_temporary_files(o.folder)


# -- the cases ----------------------------------------------------------------------------------
Maker = bytes | str | Callable[[], bytes]


@dataclass(frozen=True)
class Case:
    """One hostile input and what must happen.

    files : relative path -> content (bytes, text, or a function making the bytes).
    prepare : functions called with the case folder after the files are written (links, ...).
    args : the command line after `agree`, run in the case folder.
    exit : the expected exit code (0: a correct result; 2: a clear error).
    message : a regular expression stderr must match (errors: naming the file).
    check : for correct results, a function of the `Outcome` checking the outputs.
    isolation : "" (in-process), "read-only" (a subprocess that cannot write into read-only
        folders, even as root) or "file-size" (a subprocess whose files may not exceed
        `limit` bytes, as on a full disk).
    replaced : files the run may replace or remove (earlier outputs, leftovers of killed runs;
        glob patterns); every other file must keep its checksum, every link its target.
    xfail : why the case is known to fail still (the issue it waits for); it then must fail.
    slow : runs with the slow suite only (`make test-slow`).
    """

    name: str
    args: tuple[str, ...]
    exit: int
    message: str = ""
    files: Mapping[str, Maker] = field(default_factory=dict)
    prepare: tuple[Callable[[Path], None], ...] = ()
    check: Callable[[Outcome], None] | None = None
    isolation: str = ""
    limit: int = 0
    replaced: tuple[str, ...] = ()
    xfail: str = ""
    slow: bool = False


LEFTOVERS = ("*.agree-*.tmp",)
REFUSED = r"refusing to (overwrite the input file|write) "
SAMPLE = ("sample", "corpus.csv", "-n", "12", "--coders", "ann,bo", "--seed", "3")
DATA = {"coding.csv": coding_csv}

CASES: list[Case] = [
    # -- outputs that alias an input of the same run ------------------------------------------
    Case("sample: manifest over the codebook it read",
         (*SAMPLE, "-o", "out", "--codebook", "out/manifest.csv", "--force"), 2,
         REFUSED + r"out/manifest\.csv",
         files={"corpus.csv": corpus_csv, "out/manifest.csv": codebook_csv}),
    Case("sample: a coder workbook over the --exclude file",
         (*SAMPLE, "-o", "out", "--exclude", "out/ann.xlsx", "--force"), 2, REFUSED + r"out/ann\.xlsx",
         files={"corpus.csv": corpus_csv, "out/ann.xlsx": earlier_sheet}),
    Case("sample: a coder workbook over the list of units",
         ("sample", "out/bo.xlsx", "-n", "5", "--coders", "ann,bo", "-o", "out", "--force"), 2,
         REFUSED + r"out/bo\.xlsx", files={"out/bo.xlsx": corpus_xlsx}),
    Case("sample: a coder workbook that is a link to the --exclude file",
         (*SAMPLE, "-o", "out", "--exclude", "earlier.xlsx", "--force"), 2, REFUSED + r"out/ann\.xlsx.*earlier\.xlsx",
         files={"corpus.csv": corpus_csv, "earlier.xlsx": earlier_sheet}, prepare=(symlink("out/ann.xlsx", "../earlier.xlsx"),)),
    Case("sample: the output folder spelled with ..",
         (*SAMPLE, "-o", "sub/../out", "--codebook", "out/manifest.csv", "--force"), 2,
         REFUSED + r"sub/\.\./out/manifest\.csv.*out/manifest\.csv",
         files={"corpus.csv": corpus_csv, "out/manifest.csv": codebook_csv}, prepare=(mkdir("sub"),)),
    Case("sample: an earlier output is replaced with --force",
         (*SAMPLE, "-o", "out", "--force"), 0, files={"corpus.csv": corpus_csv, "out/manifest.csv": "old"},
         replaced=("out/manifest.csv",)),
    Case("disagreements: -o the data file", ("disagreements", "coding.csv", "-o", "coding.csv", "--force"), 2,
         REFUSED + r"coding\.csv", files=DATA),
    Case("disagreements: -o the data file through ..",
         ("disagreements", "coding.csv", "-o", "sub/../coding.csv", "--force"), 2, REFUSED + r"sub/\.\./coding\.csv",
         files=DATA, prepare=(mkdir("sub"),)),
    Case("disagreements: -o a symbolic link to the data file",
         ("disagreements", "coding.csv", "-o", "link.csv", "--force"), 2, REFUSED + r"link\.csv.*coding\.csv",
         files=DATA, prepare=(symlink("link.csv", "coding.csv"),)),
    Case("disagreements: -o a hard link to the data file",
         ("disagreements", "coding.csv", "-o", "hard.csv", "--force"), 2, REFUSED + r"hard\.csv.*coding\.csv",
         files=DATA, prepare=(hardlink("hard.csv", "coding.csv"),)),
    Case("disagreements: -o the data file through a linked folder",
         ("disagreements", "data/coding.csv", "-o", "alias/coding.csv", "--force"), 2, REFUSED + r"alias/coding\.csv",
         files={"data/coding.csv": coding_csv}, prepare=(symlink("alias", "data"),)),
    Case("disagreements: -o the codebook",
         ("disagreements", "coding.csv", "--codebook", "codebook.csv", "-o", "codebook.csv", "--force"), 2,
         REFUSED + r"codebook\.csv", files={**DATA, "codebook.csv": codebook_csv}),
    Case("reconcile: -o the review file it reads",
         ("reconcile", "review.xlsx", "--data", "coding.csv", "--allow-unresolved", "-o", "review.xlsx", "--force"),
         2, REFUSED + r"review\.xlsx", files=DATA,
         prepare=(review_of("coding.csv", "review.xlsx"),)),
    Case("reconcile: -o a link to the data",
         ("reconcile", "review.xlsx", "--data", "coding.csv", "--allow-unresolved", "-o", "c.csv", "--force"), 2,
         REFUSED + r"c\.csv.*coding\.csv", files=DATA,
         prepare=(review_of("coding.csv", "review.xlsx"), symlink("c.csv", "coding.csv"))),
    Case("report: -o a link to the data", ("report", "coding.csv", "--boot", "20", "-o", "report.html", "--force"), 2,
         REFUSED + r"report\.html.*coding\.csv", files=DATA, prepare=(symlink("report.html", "coding.csv"),)),
    Case("report: -o a hard link to the consensus it reads",
         ("report", "coding.csv", "--consensus", "consensus.csv", "--boot", "20", "-o", "report.md", "--force"), 2,
         REFUSED + r"report\.md.*consensus\.csv", files={**DATA, "consensus.csv": consensus_csv},
         prepare=(hardlink("report.md", "consensus.csv"),)),
    Case("rounds: --plot a link to a round's file",
         ("rounds", "r1.csv", "r2.csv", "--round-files", "--boot", "20", "--plot", "trend.png"), 2,
         REFUSED + r"trend\.png.*r1\.csv", files={"r1.csv": lambda: rounds_csv(1), "r2.csv": lambda: rounds_csv(0)},
         prepare=(symlink("trend.png", "r1.csv"),)),
    Case("demo: an output that is a link to a sample file it reads",
         ("demo", "--samples", "samples", "--out", "out", "--boot", "20", "--format", "json"), 2,
         REFUSED + r"out/report\.html.*samples/round1\.csv",
         files={f"samples/{p.name}": p.read_bytes() for p in sorted(SAMPLES.glob("*.csv"))},
         prepare=(symlink("out/report.html", "../samples/round1.csv"),), slow=True),
    # -- folders that cannot be written ----------------------------------------------------------
    Case("disagreements: read-only output folder",
         ("disagreements", "coding.csv", "-o", "ro/review.xlsx"), 2,
         r"cannot write ro/review\.xlsx: no permission to write in the folder ro", files=DATA,
         prepare=(mkdir("ro"), lambda d: os.chmod(d / "ro", 0o555)), isolation="read-only"),
    Case("reconcile: read-only output folder",
         ("reconcile", "review.xlsx", "--data", "coding.csv", "--allow-unresolved", "-o", "ro/c.csv"), 2,
         r"cannot write ro/c\.csv: no permission", files=DATA,
         prepare=(review_of("coding.csv", "review.xlsx"), mkdir("ro"),
                  lambda d: os.chmod(d / "ro", 0o555)), isolation="read-only"),
    Case("sample: output folder inside a read-only folder",
         (*SAMPLE, "-o", "ro/sheets"), 2, r"cannot create the folder ro/sheets: no permission to write in the folder ro",
         files={"corpus.csv": corpus_csv}, prepare=(mkdir("ro"), lambda d: os.chmod(d / "ro", 0o555)),
         isolation="read-only"),
    Case("disagreements: the output's parent is a file",
         ("disagreements", "coding.csv", "-o", "notes.txt/review.xlsx"), 2, r"notes\.txt is a file, not a folder",
         files={**DATA, "notes.txt": "my notes"}),
    Case("sample: the output folder's parent is a file",
         (*SAMPLE, "-o", "notes.txt/sheets"), 2, r"notes\.txt is a file, not a folder",
         files={"corpus.csv": corpus_csv, "notes.txt": "my notes"}),
    Case("disagreements: the disk fills up while writing",
         ("disagreements", "coding.csv", "-o", "review.xlsx", "--force"), 2,
         r"cannot write review\.xlsx: the file is larger than the system allows",
         files={**DATA, "review.xlsx": b"an earlier review"}, isolation="file-size", limit=4096),
    # -- interrupted writes ----------------------------------------------------------------------
    Case("disagreements: a write killed with -9 is cleaned up by the next run",
         ("disagreements", "coding.csv", "-o", "review.csv"), 0, files=DATA,
         prepare=(killed_write("review.csv"),), check=lambda o: no_temporary_files(o.folder), replaced=LEFTOVERS),
    Case("sample: leftovers of a killed run are cleaned",
         (*SAMPLE, "-o", "sheets", "--force"), 0, files={"corpus.csv": corpus_csv},
         prepare=(mkdir("sheets"), lambda d: stale_temp("ann.xlsx")(d / "sheets")),
         check=lambda o: no_temporary_files(o.folder), replaced=("sheets/" + LEFTOVERS[0],)),
    # -- formula-like text, separators and line breaks round-trip through every output ---------
    Case("sample: formula-like ids, texts and column names stay text",
         (*SAMPLE, "--keep", "=group", "-o", "sheets"), 0,
         files={"corpus.csv": lambda: csv_bytes(["unit_id", "text", "=group"], corpus_rows())}, check=check_sheets),
    Case("disagreements + reconcile: CSV with CR, LF, CRLF, quotes, commas and formulas",
         ("disagreements", "coding.csv", "-o", "review.csv"), 0, files=DATA, check=check_review_csv),
    Case("disagreements + reconcile: xlsx with the same text",
         ("disagreements", "coding.xlsx", "-o", "review.xlsx"), 0, files={"coding.xlsx": coding_xlsx},
         check=check_review_xlsx),
    Case("disagreements: Markdown keeps one line per unit",
         ("disagreements", "coding.csv", "-o", "review.md"), 0, files=DATA, check=check_review_md),
    Case("codes --format csv: awkward code names read back",
         ("codes", "coding.csv", "--boot", "0", "--format", "csv"), 0, files=DATA, check=check_codes_csv),
    Case("score --format csv reads back", ("score", "coding.csv", "--boot", "0", "--format", "csv"), 0,
         files=DATA, check=check_score_csv),
    Case("disagreements: codes that look like numbers keep their text (+1, 1.50, 007)",
         ("disagreements", "numbers.csv", "-o", "review.csv"), 0,
         files={"numbers.csv": lambda: csv_bytes(["unit", "ann", "bo"], [("u1", "+1", "1.50"), ("u2", "007", "+1")])},
         check=lambda o: _same_codes(o, {"u1": ("+1", "1.50"), "u2": ("007", "+1")})),
]


def _same_codes(o: Outcome, expected: dict[str, tuple[str, ...]]) -> None:
    frame = read_csv_back(o.folder / "review.csv")
    assert {u: (a, b) for u, a, b in zip(frame["unit"], frame["ann"], frame["bo"])} == expected
