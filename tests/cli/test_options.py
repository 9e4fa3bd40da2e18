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
