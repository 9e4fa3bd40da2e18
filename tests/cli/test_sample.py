"""CLI tests for `agree sample`: the drawn sheets, exclusions, the help's example."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from agree.core.model import AgreeError
from tests.analysis.test_sampling import CODES, make_corpus
from tests.output.test_sheets import _read_sheet


def test_cli_sample(tmp_path):
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    corpus_file = tmp_path / "units.xlsx"
    make_corpus(60).to_excel(corpus_file, index=False)
    before = corpus_file.read_bytes()
    (tmp_path / "codes.txt").write_text("\n".join(CODES))
    args = ["sample", str(corpus_file), "-n", "12", "--stratify", "participant", "--coders", "ana,ben",
            "--codebook", str(tmp_path / "codes.txt"), "-o", str(tmp_path / "sheets"), "--seed", "4",
            "--format", "json"]
    res = CliRunner().invoke(app, args)
    assert res.exit_code == 0, res.output
    got = json.loads(res.stdout)
    assert got["n"] == 12 and got["seed"] == 4 and len(got["files"]) == 2
    assert got["drop_down"] == "inline list"
    assert corpus_file.read_bytes() == before
    again = CliRunner().invoke(app, args)
    assert again.exit_code != 0                               # folder not empty
    assert isinstance(again.exception, AgreeError) and again.exception.code == "output-exists"


def test_cli_sample_excludes_and_keeps(tmp_path):
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    corpus_file = tmp_path / "units.csv"
    make_corpus(60).to_csv(corpus_file, index=False)
    (tmp_path / "round1.csv").write_text("unit_id,ana,ben\n" + "".join(f"u{i:04d},a,b\n" for i in range(20)))
    (tmp_path / "more.txt").write_text("u0020\nu0021\nzzz\n")
    args = ["sample", str(corpus_file), "-n", "30", "--stratify", "participant", "--coders", "ana,ben",
            "-o", str(tmp_path / "sheets"), "--exclude", str(tmp_path / "round1.csv"),
            "--exclude", str(tmp_path / "more.txt"), "--keep-col", "text", "--format", "json"]
    res = CliRunner().invoke(app, args)
    assert res.exit_code == 0, res.output
    got = json.loads(res.stdout)
    assert got["excluded"] == 22 and got["exclude_not_in_corpus"] == 1
    assert got["context_columns"] == ["participant"]          # the text column is there already
    assert "excluded 22 units already coded" in res.stderr and "1 of those ids" in res.stderr
    _, rows = _read_sheet(tmp_path / "sheets" / "ana.xlsx")
    assert not {r[0] for r in rows[1:]} & {f"u{i:04d}" for i in range(22)}

    table = CliRunner().invoke(app, args[:-2] + ["--force"])
    assert table.exit_code == 0, table.output
    assert "Already coded" in table.stdout and "--keep participant" in table.stderr
    assert "--cluster" not in table.stderr.split("read them back with:")[1].split("\n")[0]


def test_cli_sample_help_example_uses_bundled_files(tmp_path):
    import shlex
    from pathlib import Path

    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    root = Path(__file__).resolve().parents[2]
    res = CliRunner().invoke(app, ["sample", "--help"], terminal_width=400)
    flat = " ".join(res.stdout.split())
    words = shlex.split(flat.split("Example: ", 1)[1].split(" ╭")[0])
    assert words[:2] == ["agree", "sample"] and "--exclude" in words
    for w in words:
        if w.startswith("samples/"):
            assert (root / w).is_file(), w
    args = [str(root / w) if w.startswith("samples/") else w for w in words[1:]]
    args[args.index("-o") + 1] = str(tmp_path / "sheets")
    run = CliRunner().invoke(app, args)
    assert run.exit_code == 0, run.output


def test_cli_sample_reads_its_lists_like_every_other_table(tmp_path):
    # before: a codebook or --exclude list saved in Windows-1252 ended in an internal error, and a
    # Parquet list of units was refused
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    corpus_file = tmp_path / "units.parquet"
    make_corpus(40).to_parquet(corpus_file, index=False)
    (tmp_path / "codes.txt").write_bytes("praise\ncomplaint\nidée\n".encode("cp1252"))
    (tmp_path / "done.txt").write_bytes("# déjà codés\nu0000\nu0001\n".encode("cp1252"))
    args = ["sample", str(corpus_file), "-n", "10", "--coders", "ana,ben", "--codebook", str(tmp_path / "codes.txt"),
            "--exclude", str(tmp_path / "done.txt"), "-o", str(tmp_path / "sheets"), "--seed", "2",
            "--format", "json"]
    res = CliRunner().invoke(app, args)
    assert res.exit_code == 0, res.output
    got = json.loads(res.stdout)
    assert got["excluded"] == 2 and got["drop_down"] == "inline list"
    _, rows = _read_sheet(tmp_path / "sheets" / "ana.xlsx")
    assert len(rows) == 11 and not {r[0] for r in rows[1:]} & {"u0000", "u0001"}


def _fill_sheets(folder, rng):
    """Fill every coder's sheet as a coder would: a code in each row (mostly the same code)."""
    import openpyxl

    truth = None
    for path in sorted(folder.glob("*.xlsx")):
        wb = openpyxl.load_workbook(path)
        ws = wb["coding"]
        header = [c.value for c in ws[1]]
        code_col = header.index("code") + 1
        ids = [ws.cell(r, 1).value for r in range(2, ws.max_row + 1)]
        if truth is None:
            truth = {u: CODES[rng.integers(len(CODES))] for u in ids}
        for r, unit in enumerate(ids, start=2):
            ws.cell(r, code_col).value = truth[unit] if rng.random() < 0.8 else CODES[rng.integers(len(CODES))]
        wb.save(path)


def _read_back_command(stderr: str) -> list[str]:
    import shlex

    line = next(x for x in stderr.splitlines() if x.startswith("read them back with: "))
    return shlex.split(line.removeprefix("read them back with: agree "))


def test_cli_sample_read_back_resamples_units_not_strata(tmp_path):
    """Before: the read-back command resampled the strata (--cluster STRATUM). Strata are not
    clusters: the command keeps the stratum column and resamples units (see the slow simulation
    in tests/analysis/test_sampling.py), and a note says why; a --cluster column the user names
    is the one suggested."""
    import numpy as np

    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    corpus_file = tmp_path / "units.csv"
    make_corpus(120).to_csv(corpus_file, index=False)
    res = CliRunner().invoke(app, ["sample", str(corpus_file), "-n", "40", "--stratify", "participant",
                                   "--coders", "ana,ben", "-o", str(tmp_path / "sheets")])
    assert res.exit_code == 0, res.output
    words = _read_back_command(res.stderr)
    assert "--cluster" not in words and words[words.index("--keep") + 1] == "participant"
    flat = " ".join(res.stderr.split())
    assert "note: strata are not clusters" in flat and "as for a simple random sample" in flat
    _fill_sheets(tmp_path / "sheets", np.random.default_rng(3))
    scored = CliRunner().invoke(app, words + ["--format", "json", "--boot", "200"])
    assert scored.exit_code == 0, scored.output
    assert json.loads(scored.stdout)["bootstrap"]["unit"] == "unit"

    corpus = make_corpus(120)
    corpus["school"] = [f"s{i % 9}" for i in range(120)]
    corpus.to_csv(corpus_file, index=False)
    res = CliRunner().invoke(app, ["sample", str(corpus_file), "-n", "40", "--stratify", "participant",
                                   "--cluster", "school", "--coders", "ana,ben", "-o", str(tmp_path / "s2")])
    assert res.exit_code == 0, res.output
    words = _read_back_command(res.stderr)
    assert words[words.index("--cluster") + 1] == "school" and "participant" in words
    _, rows = _read_sheet(tmp_path / "s2" / "ana.xlsx")
    assert rows[0][:3] == ("unit_id", "participant", "school")
    _fill_sheets(tmp_path / "s2", np.random.default_rng(4))
    scored = CliRunner().invoke(app, words + ["--format", "json", "--boot", "200"])
    assert scored.exit_code == 0, scored.output
    assert json.loads(scored.stdout)["bootstrap"]["unit"] == "cluster:school"


def test_sample_finds_msg_id_and_message_and_stops_without_text(tmp_path, capsys):
    import openpyxl
    import pandas as pd

    from tests.cli.conftest import run_main

    corpus = tmp_path / "chats.csv"
    pd.DataFrame({"round": [1] * 6, "msg_id": [f"m{i}" for i in range(6)],
                  "message": [f"message number {i} about a late delivery" for i in range(6)]}).to_csv(corpus, index=False)
    code, out, err = run_main(capsys, "sample", corpus, "-n", "3", "--coders", "ann,bo", "-o", tmp_path / "s")
    assert code == 0, err
    ws = openpyxl.load_workbook(tmp_path / "s" / "ann.xlsx").active
    rows = list(ws.iter_rows(values_only=True))
    assert rows[0][0] == "unit_id" and all(r[0].startswith("m") for r in rows[1:])
    assert all(r[rows[0].index("text")].startswith("message number") for r in rows[1:])
    bare = tmp_path / "bare.csv"
    pd.DataFrame({"msg_id": ["m1", "m2", "m3"], "channel": ["mail", "chat", "mail"]}).to_csv(bare, index=False)
    code, _, err = run_main(capsys, "sample", bare, "-n", "2", "--coders", "ann,bo", "-o", tmp_path / "t")
    assert code == 2 and "could not find the column with the units' text" in err and "--text-col" in err
    assert not (tmp_path / "t").exists()
