"""Shared by the CLI tests: small synthetic coding sheets and two runners (Typer's test runner, and
the console entry point in-process, with exit codes and stderr as a user sees them)."""

from __future__ import annotations

import sys
from pathlib import Path

import openpyxl

import pandas as pd
import pytest
from typer.testing import CliRunner

import agree.cli.commands  # noqa: F401  (registers the commands)
from agree.cli.app import app
from agree.core.model import from_table
from agree.output.reconciliation import REVIEW_SHEET

SAMPLES = Path(__file__).resolve().parents[2] / "samples"

ROWS = [
    ("1", "care", "care", "care"), ("2", "care", "blame", "care"), ("3", "blame", "blame", ""),
    ("4", "anger", "care", "anger"), ("5", "care", "care", "care"), ("6", "blame", "blame", "blame"),
    ("7", "anger", "anger", "care"), ("8", "care", "care", "blame"), ("9", "blame", "blame", "blame"),
    ("10", "anger", "anger", "anger"), ("11", "care", "care", "care"), ("12", "blame", "care", "blame"),
    ("13", "care", "care", "care"), ("14", "anger", "anger", "anger"), ("15", "blame", "care", "care"),
]


@pytest.fixture
def coding_csv(tmp_path: Path) -> Path:
    path = tmp_path / "coding.csv"
    frame = pd.DataFrame(ROWS, columns=["unit", "amara", "ben", "chen"])
    frame.to_csv(path, index=False)
    return path


def expected_data():
    frame = pd.DataFrame(ROWS, columns=["unit", "amara", "ben", "chen"]).set_index("unit")
    return from_table(frame)


def run(args):
    return CliRunner().invoke(app, args)


DATA = ("unit,text,ann,bo,cy\n"
        "=SUM(A1),café,pos,neg,neg\n"
        "u2,Zürich,pos,pos,\n"
        "u3,日本,neg,,\n"
        "@here,x|y,pos,mixed,neg\n"
        "-fine,+1,mixed,mixed,mixed\n")


def run_main(capsys, *args):
    """Run the console entry point in-process; return (exit code, stdout, stderr)."""
    from agree.cli import main

    argv = sys.argv
    sys.argv = ["agree", *map(str, args)]
    try:
        main()
        code = 0
    except SystemExit as exc:
        code = exc.code or 0
    finally:
        sys.argv = argv
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def data_file(tmp_path):
    path = tmp_path / "coding.csv"
    path.write_text(DATA, encoding="utf-8")
    return path


def fill(path, decisions):
    wb = openpyxl.load_workbook(path)
    ws = wb[REVIEW_SHEET]
    cols = {c.value: c.column for c in ws[1]}
    for r in range(2, ws.max_row + 1):
        unit = ws.cell(r, cols["unit"]).value
        if unit in decisions:
            ws.cell(r, cols["decision"]).value = decisions[unit]
            ws.cell(r, cols["how decided"]).value = "discussion"
    wb.save(path)
