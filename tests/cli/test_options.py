"""The shared reading options: `load_data` reports what it detected, and the options parse with Typer."""

from __future__ import annotations

from agree.cli import options as r
from tests.io.test_readers import long_frame, write


def test_load_data_reports_detection_on_stderr(tmp_path, capsys):
    path = tmp_path / "legacy.csv"
    path.write_bytes("unit;ana;ben;document\nu1;café;café;d1\nu2;thé;café;d2\n".encode("cp1252"))
    data = r.load_data([path], layout=r.Layout.wide, cluster="document")
    err = capsys.readouterr().err
    assert "read 2 units, 2 coders, 4 values (0 missing): wide layout" in err
    assert "note: " in err and "Windows-1252" in err
    assert list(data.columns["document"]) == ["d1", "d2"]


def test_reading_options_parse_with_typer(tmp_path):
    import typer
    from typer.testing import CliRunner

    app = typer.Typer()

    @app.command()
    def show(files: r.Files, layout: r.LayoutOption = None, unit_col: r.UnitOption = None,
             coder_col: r.CoderOption = None, code_col: r.CodeOption = None, text_col: r.TextOption = None,
             sheet: r.SheetOption = None, sep: r.SepOption = ";", codebook: r.CodebookOption = None,
             trim: r.TrimOption = False, casefold: r.CasefoldOption = False, level: r.LevelOption = None,
             keep: r.KeepOption = None):
        data = r.load_data(files, layout=layout, unit=unit_col, coder=coder_col, code=code_col, text=text_col,
                           sheet=sheet, sep=sep, codebook=codebook, trim=trim, casefold=casefold, level=level,
                           keep=keep)
        print(data.level, ",".join(data.coders), len(data.values))

    path = write(long_frame().rename(columns={"coder": "who"}), tmp_path / "l.csv")
    result = CliRunner().invoke(app, [str(path), "--coder-col", "who", "--level", "ordinal", "--trim"])
    assert result.exit_code == 0, result.output
    assert "ordinal ana,ben,chloe 3" in result.stdout


def test_counts_and_engine_flags_score_as_the_library(tmp_path, capsys):
    import json

    import agree
    from tests.cli.conftest import run_main
    from tests.io.logs import long_log

    log = long_log(4, units=150)
    for i, part in enumerate((log.iloc[:200], log.iloc[200:])):
        part.to_parquet(tmp_path / f"log-{i}.parquet", index=False)
    glob = str(tmp_path / "log-*.parquet")
    code, out, err = run_main(capsys, "score", glob, "--engine", "duckdb", "--cluster", "queue", "--boot", "100",
                              "--format", "json")
    assert code == 0 and "reduced by DuckDB out of core" in err
    lib = agree.score(agree.read_duckdb(glob, cluster="queue"), n_resamples=100, seed=1, cluster="queue")
    assert json.loads(out) == json.loads(json.dumps(lib.to_dict()))

    counts = tmp_path / "counts.csv"
    agree.pattern_count_table(agree.read_duckdb(glob, cluster="queue")).to_csv(counts, index=False)
    code, out, err = run_main(capsys, "score", counts, "--counts", "--cluster", "queue", "--boot", "100",
                              "--format", "json")
    assert code == 0 and "pattern counts, coder columns" in err
    lib = agree.score(agree.read_counts(counts, cluster="queue"), n_resamples=100, seed=1, cluster="queue")
    assert json.loads(out) == json.loads(json.dumps(lib.to_dict()))

    # auto: DuckDB above the threshold, for the commands that accept pattern counts
    code, out, err = run_main(capsys, "score", tmp_path / "log-0.parquet", "--boot", "0")
    assert code == 0 and "DuckDB" not in err
    import os
    os.environ["AGREE_DUCKDB_ROWS"] = "10"
    try:
        code, out, err = run_main(capsys, "score", tmp_path / "log-0.parquet", "--boot", "0")
        assert code == 0 and "reduced to pattern counts with DuckDB" in err
        code, out, err = run_main(capsys, "disagreements", tmp_path / "log-0.parquet", "-o", tmp_path / "r.csv")
        assert code == 0 and "DuckDB" not in err
    finally:
        del os.environ["AGREE_DUCKDB_ROWS"]

    counts.write_text("ann,bob,count\nx,x,3\nx,y,2.5\n")
    code, out, err = run_main(capsys, "score", counts, "--counts")
    assert code == 2 and err.count("\n") == 1 and "row 3, column 'count'" in err
    code, out, err = run_main(capsys, "disagreements", tmp_path / "log-0.parquet", "--engine", "duckdb",
                              "-o", tmp_path / "r.csv")
    assert code == 2 and "one row per unit" in err


def test_max_cells_applies_to_every_workbook_a_command_reads(tmp_path, capsys):
    from tests.cli.conftest import run_main
    from tests.io.xlsx import raw_xlsx, sheet_xml, table_rows

    path = tmp_path / "coding.xlsx"
    records = [[f"u{i}", "a" if i % 2 else "b", "a"] for i in range(10)]
    path.write_bytes(raw_xlsx(sheet_xml(table_rows(["unit", "ann", "bo"], records))))
    code, _, err = run_main(capsys, "score", path, "--boot", "0", "--max-cells", "20")
    assert code == 2 and "Traceback" not in err
    assert "coding.xlsx, sheet 'coding': the sheet is too large to read" in err and "--max-cells" in err
    code, out, err = run_main(capsys, "score", path, "--boot", "0", "--max-cells", "33")
    assert code == 0, err
    corpus = tmp_path / "corpus.xlsx"
    corpus.write_bytes(raw_xlsx(sheet_xml(table_rows(["unit_id", "text"], [[f"u{i}", f"t {i}"] for i in range(9)]))))
    code, _, err = run_main(capsys, "sample", corpus, "-n", "3", "--coders", "a,b", "-o", tmp_path / "s",
                            "--max-cells", "10")
    assert code == 2 and "corpus.xlsx, sheet 'coding': the sheet is too large" in err
