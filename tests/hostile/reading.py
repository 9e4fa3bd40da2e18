"""The reading-side hostile cases: files that claim huge sizes, formula cells without results,
very wide CSVs, nested Parquet types, non-finite numbers, encodings and separators, empty sheets,
the columns people really name. Run by `test_cases.py` like the cases of `cases.py`: exit code,
message, no traceback, no input changed. All files are generated here; all data synthetic."""

from __future__ import annotations

import io
import json

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from tests.hostile.cases import Case, Outcome, csv_bytes
from tests.io.xlsx import STYLED_EMPTY, Formula, raw_xlsx, sheet_xml, table_rows

HEADER = ["unit", "ann", "bo"]
RECORDS = [[f"u{i}", "alpha" if i % 3 else "beta", "alpha" if i % 4 else "beta"] for i in range(12)]


def _xlsx(rows, dimension=None, **sheets) -> bytes:
    return raw_xlsx({"coding": sheet_xml(rows, dimension), **sheets})


def _parquet(columns: dict) -> bytes:
    buffer = io.BytesIO()
    pq.write_table(pa.table(columns), buffer)
    return buffer.getvalue()


def far_row() -> bytes:
    """A few KB declaring twenty million rows, with a stray code in the last."""
    return _xlsx(table_rows(HEADER, RECORDS) + [(20_000_000, [(2, "alpha")])], dimension="A1:C20000000")


def last_column() -> bytes:
    """Every row carries a styled empty cell in the last column (XFD) and the sheet declares all of it."""
    return _xlsx([(r, cells + [(16384, STYLED_EMPTY)]) for r, cells in table_rows(HEADER, RECORDS)],
                 dimension="A1:XFD1048576")


def formulas() -> bytes:
    records = [list(r) for r in RECORDS]
    records[0][2] = Formula("B2")                   # no stored result
    records[1][1] = Formula("C3", "alpha")          # a stored result: read
    return _xlsx(table_rows(HEADER, records))


def wide_csv() -> bytes:
    rng = np.random.default_rng(5)
    names = [f"coder_{i:05d}_long_column_name" for i in range(6000)]   # a header line of ~170 KB
    rows = [[f"u{u}", *rng.choice(["alpha", "beta"], len(names))] for u in range(5)]
    return csv_bytes(["unit", *names], rows)


def _detected(words: str):
    def check(o: Outcome) -> None:
        assert words in o.err, o.err
    return check


def _json_units(n: int):
    def check(o: Outcome) -> None:
        assert json.loads(o.out)["units"]["read"] == n, o.out
    return check


CHATS = csv_bytes(["round", "msg_id", "coder", "code"],
                  [(r, f"m{m}", c, "help" if (m + (c == "bo")) % 3 else "thanks")
                   for r in (1, 2) for m in range(4 * r - 4, 4 * r) for c in ("ann", "bo")])
CORPUS = csv_bytes(["round", "msg_id", "message"],
                   [(1, f"m{i}", f"message {i}: my order arrived late and the box was open") for i in range(10)])


def review_legacy() -> bytes:
    """A review file as a spreadsheet saves it: Windows-1252, ';' between fields, CRLF."""
    lines = ["unit;status;ann;bo;codes involved;decision;how decided;decided by;notes",
             'café;disagreement;süß;bitter;"bitter; süß";süß;discussion;;']
    return ("\r\n".join(lines) + "\r\n").encode("cp1252")


READING_CASES: list[Case] = [
    # -- sizes a sheet declares, not what it holds ------------------------------------------------
    Case("score: a few KB declaring twenty million rows", ("score", "far.xlsx", "--boot", "0"), 2,
         r"far\.xlsx, sheet 'coding', row 20000000.*no unit id", files={"far.xlsx": far_row}),
    Case("score: styled empty cells up to column XFD on every row",
         ("score", "wide.xlsx", "--boot", "0", "--format", "json"), 0, files={"wide.xlsx": last_column},
         check=_json_units(12)),
    Case("score: a sheet past --max-cells", ("score", "coding.xlsx", "--boot", "0", "--max-cells", "30"), 2,
         r"coding\.xlsx, sheet 'coding': the sheet is too large to read.*--max-cells",
         files={"coding.xlsx": lambda: _xlsx(table_rows(HEADER, RECORDS))}),
    Case("score: formula cells without a stored result are named",
         ("score", "formulas.xlsx", "--boot", "0"), 0, files={"formulas.xlsx": formulas},
         check=_detected("1 formula cell without a stored result read as empty (C2)")),
    Case("disagreements: a workbook with nothing in it", ("disagreements", "empty.xlsx", "-o", "review.xlsx"), 2,
         r"empty\.xlsx, sheet 'coding': the sheet is empty", files={"empty.xlsx": lambda: _xlsx([])}),
    Case("disagreements: a coding sheet nobody filled in",
         ("disagreements", "blank.xlsx", "-o", "review.xlsx"), 2, r"blank\.xlsx: no codes were read",
         files={"blank.xlsx": lambda: _xlsx(table_rows(HEADER, [[f"u{i}"] for i in range(5)]))}),
    Case("score: a disguised and a truncated workbook", ("score", "fake.xlsx", "--boot", "0"), 2,
         r"fake\.xlsx: the file is not an Excel workbook", files={"fake.xlsx": b"unit,ann,bo\nu1,a,b\n"}),
    Case("score: a truncated workbook", ("score", "cut.xlsx", "--boot", "0"), 2,
         r"cut\.xlsx: the workbook is damaged", files={"cut.xlsx": lambda: _xlsx(table_rows(HEADER, RECORDS))[:600]}),
    # -- text files -------------------------------------------------------------------------------
    Case("score: a CSV with six thousand columns", ("score", "wide.csv", "--boot", "0", "--format", "json"), 0,
         files={"wide.csv": wide_csv}, check=_json_units(5)),
    Case("score: control characters inside cells",
         ("score", "ctrl.csv", "--boot", "0", "--format", "json"), 0,
         files={"ctrl.csv": lambda: csv_bytes(HEADER, [(f"u{i}\x07", "a\x1fb", "a\x1fb" if i % 2 else "c")
                                                        for i in range(8)])}, check=_json_units(8)),
    Case("reconcile: a review CSV in Windows-1252 with ';' separators",
         ("reconcile", "review.csv", "--data", "coding.csv", "-o", "consensus.csv"), 0,
         files={"coding.csv": "unit,ann,bo\ncafé,süß,bitter\nthé,süß,süß\n".encode("utf-8"),
                "review.csv": review_legacy},
         check=lambda o: (o.folder / "consensus.csv").read_text(encoding="utf-8").count("süß") >= 3),
    # -- Parquet ----------------------------------------------------------------------------------
    Case("score: Parquet lists of codes are sets", ("score", "sets.parquet", "--boot", "0"), 0,
         files={"sets.parquet": lambda: _parquet({"unit": ["u1", "u2", "u3"], "ann": [["a", "b"], ["a"], []],
                                                  "bo": [["b", "a"], ["b"], []]})},
         check=_detected("read as sets of codes")),
    Case("score: a Parquet struct column", ("score", "struct.parquet", "--boot", "0"), 2,
         r"struct\.parquet, row 1, column 'ann': column 'ann' holds structs",
         files={"struct.parquet": lambda: _parquet({"unit": ["u1", "u2"], "ann": [{"x": 1}, {"x": 2}],
                                                    "bo": ["a", "b"]})}),
    Case("score: a Parquet binary column", ("score", "bin.parquet", "--boot", "0"), 2,
         r"bin\.parquet, row 1, column 'bo': column 'bo' holds binary values",
         files={"bin.parquet": lambda: _parquet({"unit": ["u1", "u2"], "ann": ["a", "b"], "bo": [b"\x00", b"\x01"]})}),
    # -- numbers ----------------------------------------------------------------------------------
    Case("score: a number that overflows", ("score", "big.csv", "--boot", "0", "--level", "interval"), 2,
         r"big\.csv, row 3, column 'bo': '1e309' is not a finite number",
         files={"big.csv": lambda: csv_bytes(HEADER, [("u1", "1", "2"), ("u2", "2", "1e309"), ("u3", "3", "3")])}),
    Case("score: a numeric infinity in Parquet", ("score", "inf.parquet", "--boot", "0"), 2,
         r"inf\.parquet, row 2, column 'ann': 'inf' is not a finite number",
         files={"inf.parquet": lambda: _parquet({"unit": ["u1", "u2"], "ann": [float("inf"), 1.0], "bo": [1.0, 1.0]})}),
    Case("score: a huge number at the interval level", ("score", "huge.csv", "--boot", "0", "--level", "interval"), 2,
         r"huge\.csv, row 2, column 'ann': '1e300' is too large for the interval metric",
         files={"huge.csv": lambda: csv_bytes(HEADER, [("u1", "1e300", "1"), ("u2", "2", "2"), ("u3", "3", "1")])}),
    # -- the columns people name -------------------------------------------------------------------
    Case("score: round, msg_id, coder, code", ("score", "chats.csv", "--boot", "0"), 0, files={"chats.csv": CHATS},
         check=_detected("unit column 'msg_id'")),
    Case("sample: msg_id and message", ("sample", "corpus.csv", "-n", "4", "--coders", "ann,bo", "-o", "sheets"), 0,
         files={"corpus.csv": CORPUS}, check=_detected("")),
    Case("sample: no text column stops before writing",
         ("sample", "ids.csv", "-n", "2", "--coders", "ann,bo", "-o", "sheets"), 2,
         r"could not find the column with the units' text.*--text-col",
         files={"ids.csv": csv_bytes(["msg_id", "channel"], [("m1", "mail"), ("m2", "chat"), ("m3", "mail")])}),
    Case("rounds: two complete multi-coder sheets", ("rounds", "r1.csv", "r2.csv", "--boot", "0"), 0,
         files={f"r{i}.csv": csv_bytes(HEADER, [(f"r{i}u{k}", *r[1:]) for k, r in enumerate(RECORDS)]) for i in (1, 2)},
         check=_detected("the files are read as rounds")),
]
