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
