"""CLI tests for `agree plan`: JSON equals the library, the table and plot, one-line errors."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from agree.analysis.planning import plan_sample
from tests.analysis.test_planning import FAST


def test_cli_plan_json_equals_library():
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    args = ["plan", "--coders", "2", "--shares", "0.6,0.4", "--expected", "0.9", "--min", "0.8",
            "--seed", "4", "--replicates", "100", "--boot", "100", "--format", "json"]
    out = CliRunner().invoke(app, args)
    assert out.exit_code == 0, out.output
    got = json.loads(out.stdout)
    want = plan_sample(coders=2, shares=[0.6, 0.4], expected=0.9, minimum=0.8, seed=4, **FAST).to_dict()
    assert "units_needed" in got
    assert got == json.loads(json.dumps(want))


def test_cli_plan_table_and_plot(tmp_path):
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    png = tmp_path / "a.png"
    out = CliRunner().invoke(app, ["plan", "--coders", "2", "--categories", "2", "--expected", "0.9",
                                   "--replicates", "100", "--boot", "100", "--plot", str(png)])
    assert out.exit_code == 0, out.output
    assert "Units needed" in out.stdout and "Krippendorff (2004; 2013)" in out.stdout
    assert "memory" not in out.stdout and "METHODS" not in out.stdout and "\\[" not in out.stdout
    assert png.exists()


def test_closed_form_says_it_assumes_two_coders_when_more_are_planned():
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    p = plan_sample(coders=3, categories=4, expected=0.9, minimum=0.8, seed=1, **FAST)
    krippendorff_form = p.closed_forms[0]
    assert krippendorff_form.assumptions.startswith("Assumes two coders, while 3 are planned here")
    assert "fewer units usually suffice" in krippendorff_form.assumptions
    assert len(p.closed_forms) == 1                       # Donner-Eliasziw is for two coders only
    out = CliRunner().invoke(app, ["plan", "--coders", "3", "--categories", "4", "--expected", "0.9",
                                   "--replicates", "60", "--boot", "60"], terminal_width=300)
    assert out.exit_code == 0, out.output
    assert "Assumes two" in out.stdout and "3 are planned" in out.stdout   # cells wrap in the table


def test_cli_plan_bad_input_exit_code_2():
    import subprocess
    import sys
    from pathlib import Path

    agree_bin = Path(sys.executable).with_name("agree")
    res = subprocess.run([str(agree_bin), "plan", "--coders", "2", "--shares", "0.5,0.4",
                          "--expected", "0.9"], capture_output=True, text=True)
    assert res.returncode == 2
    assert res.stderr.startswith("error:") and "sum to 0.9" in res.stderr
    assert "Traceback" not in res.stderr


def test_cli_plan_without_options_says_what_it_needs(capsys):
    """`agree plan` alone is a question, not a mistake: it prints what a plan needs and an example
    that runs, with exit code 0; a plan started without --coders or --expected is an error (2)."""
    from tests.cli.conftest import run_main

    code, out, err = run_main(capsys, "plan")
    assert code == 0 and err == ""
    for option in ("--coders", "--expected", "--shares", "--categories"):
        assert option in out
    example = next(line for line in out.splitlines() if line.startswith("Example: "))
    args = example.removeprefix("Example: agree ").split()
    assert args[0] == "plan"
    import agree.cli.commands  # noqa: F401
    from agree.cli.app import app

    ran = CliRunner().invoke(app, args + ["--replicates", "60", "--boot", "60", "--max-units", "200"])
    assert ran.exit_code == 0, ran.output          # the example is a working command

    code, out, err = run_main(capsys, "plan", "--coders", "2", "--categories", "4")
    assert code == 2 and err.startswith("error: a plan needs --expected") and "Traceback" not in err
    code, out, err = run_main(capsys, "plan", "--format", "json")
    assert code == 2 and "--coders and --expected" in err


def test_readme_plan_wording_matches_the_command():
    """The README's timing row names a command that runs as written (no 'default plan' exists:
    `agree plan` alone only says what it needs)."""
    import re
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    rows = [line for line in readme.splitlines() if line.startswith("| `agree plan")]
    assert rows and all("`agree plan`," not in line for line in rows)
    command = re.search(r"`(agree plan [^`]+)`", rows[0]).group(1)
    assert "--coders" in command and "--expected" in command
    text = " ".join(readme.split())
    assert "`agree plan` with no options prints what it needs" in text
    # what the planner simulates: score's decision, its resamples, and a Monte Carlo range
    from agree.core.constants import DEFAULT_RESAMPLES

    assert f"{DEFAULT_RESAMPLES:,} resamples per study" in text and "Monte Carlo range" in text
    assert "× 500 resamples" not in text and f"× {DEFAULT_RESAMPLES:,} resamples" in rows[0]


def test_cli_plan_from_a_pilot_equals_the_library(tmp_path):
    import agree
    import agree.cli.commands  # noqa: F401
    from agree.analysis.planning import plan_from_pilot
    from agree.cli.app import app

    samples = __import__("pathlib").Path(__file__).resolve().parents[2] / "samples"
    args = ["plan", "--pilot", str(samples / "round2.csv"), "--codebook", str(samples / "codebook.csv"),
            "--min", "0.667", "--seed", "2", "--replicates", "60", "--boot", "60", "--tolerance", "0.5",
            "--format", "json"]
    out = CliRunner().invoke(app, args)
    assert out.exit_code == 0, out.output
    got = json.loads(out.stdout)
    data = agree.read(samples / "round2.csv", codebook=samples / "codebook.csv")
    want = plan_from_pilot(data, minimum=0.667, seed=2, replicates=60, n_resamples=60, tolerance=0.5).to_dict()
    assert got == json.loads(json.dumps(want))
    assert got["pilot"]["units"] == 150 and got["pilot"]["coders"] == 3
    table = CliRunner().invoke(app, args[:-2])
    assert "Pilot: 150 units, 3 coders" in table.stdout and "pilot's units are not counted" in " ".join(
        table.stdout.split())
    both = CliRunner().invoke(app, args + ["--expected", "0.9"])   # main() turns this into exit code 2
    assert getattr(both.exception, "code", None) == "plan-inputs" and "--pilot estimates" in str(both.exception)
