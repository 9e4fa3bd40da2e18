"""CLI tests for `agree demo` (the report and the plan stubbed: they are tested on their own)."""

from __future__ import annotations

import pandas as pd
from typer.testing import CliRunner

from tests.output.test_sheets import _read_sheet


def _stub_report_and_plan(monkeypatch):
    """The demo with the report stubbed and a small plan (both are tested on their own)."""
    from pathlib import Path

    import agree
    import agree.output.report

    class FakeReport:
        methods = "Methods paragraph."

    monkeypatch.setattr(agree.output.report, "build_report", lambda *a, **k: FakeReport())
    monkeypatch.setattr(agree.output.report, "write_report", lambda report, path: [Path(path)])
    real_plan = agree.plan_sample
    monkeypatch.setattr(agree, "plan_sample",
                        lambda **k: real_plan(**{**k, "replicates": 60, "n_resamples": 60}))


def test_demo_numbers_its_steps_and_excludes_coded_units(tmp_path, monkeypatch):
    """The demo's sections are numbered 1, 2, 3, ... once each, and its next sample leaves out
    the units of rounds 1 and 2. The report and the plan are stubbed (tested elsewhere)."""
    import re
    from pathlib import Path

    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    _stub_report_and_plan(monkeypatch)
    res = CliRunner().invoke(app, ["demo", "--out", str(tmp_path / "demo"), "--boot", "50"],
                             terminal_width=200)
    assert res.exit_code == 0, res.output
    numbers = [int(m) for m in re.findall(r"^(\d+)\. ", res.stdout, flags=re.M)]
    assert numbers == list(range(1, len(numbers) + 1)) and len(numbers) >= 7
    root = Path(__file__).resolve().parents[2] / "samples"
    coded = set(pd.read_csv(root / "round1.csv")["excerpt_id"]) | set(pd.read_csv(root / "round2.csv")["excerpt_id"])
    manifest = pd.read_csv(tmp_path / "demo" / "sheets" / "manifest.csv", dtype=str)
    assert len(manifest) > 0 and not set(manifest["unit_id"]) & coded
    assert f"{len(coded)} units coded in rounds 1 and 2 were excluded" in " ".join(res.stdout.split())
    _, rows = _read_sheet(tmp_path / "demo" / "sheets" / "amara.xlsx")
    assert rows[0][:2] == ("unit_id", "interview")


def test_demo_json_prints_only_a_summary_of_its_outputs(tmp_path, monkeypatch):
    import json
    from pathlib import Path

    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    _stub_report_and_plan(monkeypatch)
    res = CliRunner().invoke(app, ["demo", "--out", str(tmp_path / "demo"), "--boot", "50", "--format", "json"])
    assert res.exit_code == 0, res.output
    summary = json.loads(res.stdout)
    assert set(summary["rounds"]) == {"round1", "round2"}
    assert Path(summary["outputs"]["review"]).exists() and summary["drawn"] > 0
    assert summary["rounds"]["round2"]["estimate"] > summary["rounds"]["round1"]["estimate"]


def test_demo_at_80_columns_cuts_nothing_and_shows_one_interval_per_coefficient(tmp_path, monkeypatch):
    """Before: section headers and code names were cut at 80 columns, the code diagnostics used
    1,000 resamples where the other steps used 2,000 (so round 1's alpha printed two intervals),
    and the last line named neither the figure folder nor what was really written."""
    import inspect
    import re
    from pathlib import Path

    import agree.cli.commands  # noqa: F401
    import agree.output.report
    from agree.cli.app import app
    from agree.cli.demo import demo
    from agree.core.constants import DEFAULT_RESAMPLES, DEFAULT_SEED

    assert inspect.signature(demo).parameters["boot"].default == DEFAULT_RESAMPLES
    assert inspect.signature(demo).parameters["seed"].default == DEFAULT_SEED
    _stub_report_and_plan(monkeypatch)

    def write_report(report, path):                 # a report file and a figure in its own folder
        path = Path(path)
        figure = path.parent / f"{path.stem}-{path.suffix[1:]}-figures" / "forest.png"
        figure.parent.mkdir(exist_ok=True)
        figure.write_bytes(b"png")
        path.write_text("report")
        return [path, figure]

    monkeypatch.setattr(agree.output.report, "write_report", write_report)
    monkeypatch.setenv("COLUMNS", "80")
    out = tmp_path / "demo"
    res = CliRunner().invoke(app, ["demo", "--out", str(out), "--boot", "60"])
    assert res.exit_code == 0, res.output
    lines = res.stdout.splitlines()
    assert "…" not in res.stdout
    # the section titles are whole, each with the command it stands for on the next line
    headers = [i for i, line in enumerate(lines) if re.match(r"^\d+\. ", line)]
    assert len(headers) >= 8
    assert all(lines[i + 1].startswith("$ agree ") for i in headers)
    assert "Which codes drive disagreement in round 1" in res.stdout
    # every table line fits in 80 columns (lines of text soft-wrap, so they can be copied whole)
    table_lines = [line for line in lines if re.search("[│┃━─]", line) and not line.startswith("$")]
    assert table_lines and max(len(line) for line in table_lines) <= 80
    # one resample count, so round 1's alpha has one interval in score and in codes
    alpha_rows = [line for line in lines if line.startswith("│ Krippendorff's alpha")]
    score_interval = re.search(r"\[[.\d]+, [.\d]+\]", alpha_rows[0]).group(0)
    codes_line = next(line for line in lines if line.startswith("Krippendorff's α (nominal), all codes:"))
    assert codes_line.endswith(score_interval)
    assert "60 draws over units" in res.stderr and "2,000" not in res.stdout + res.stderr
    # the last line names every file and folder written, the figure folders included
    final = lines[lines.index(next(line for line in lines if line.startswith("Done"))) + 1]
    for entry in out.iterdir():
        assert entry.name + ("/" if entry.is_dir() else "") in final, entry
    assert "report-html-figures/" in final and "sheets/" in final
