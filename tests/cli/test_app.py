"""CLI tests of what every command shares: the help of each command, and that it comes without
loading the numerical libraries."""

from __future__ import annotations

import re
import subprocess
import sys

from tests.cli.conftest import SAMPLES, run


def test_help_has_examples():
    for command in ("codes", "coders"):
        result = run([command, "--help"])
        assert result.exit_code == 0
        assert "Example" in result.stdout and "--format" in result.stdout


def test_help_examples_use_bundled_samples():
    for command in ("codes", "coders", "report", "rounds"):
        text = run([command, "--help"]).stdout
        examples = re.findall(r"Example: agree (.+)", text)
        assert examples, command
        for example in examples:
            for token in example.split():
                if token.startswith("samples/"):
                    assert (SAMPLES.parent / token).exists(), (command, token)


HEAVY = ("numpy", "pandas", "pyarrow", "scipy", "matplotlib", "openpyxl")


def test_help_loads_no_numerical_library():
    # in a fresh process: the app, every command and every help, through the console entry point
    script = f"""
import sys
import agree.cli.commands
from agree.cli.app import app, main
commands = [c.name or c.callback.__name__ for c in app.registered_commands]
assert len(commands) == 10, commands
for args in [["--help"]] + [[c, "--help"] for c in commands]:
    sys.argv = ["agree", *args]
    try:
        main()
    except SystemExit as exc:
        assert exc.code == 0, (args, exc.code)
print(sorted({{m.split(".")[0] for m in sys.modules}} & set({HEAVY!r})))
"""
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip().splitlines()[-1] == "[]"
    assert "Usage: agree score" in proc.stdout and "Usage: agree demo" in proc.stdout


def test_format_is_one_word_in_every_command():
    # --format says how the result is printed, in every command; the old --summary-format is hidden
    from agree.cli.app import app

    for command in [c.name or c.callback.__name__ for c in app.registered_commands]:
        text = run([command, "--help"]).stdout
        assert "--format" in text and "--summary-format" not in text, command
        assert re.search(r"--format\s+<table\|json(\|csv)?>", text), command



# A number on the scale of a coefficient or probability printed with a leading zero ("0.585"), or
# with two decimals (".59"; ratios such as observed/expected keep "0.84", kind "number").
LEADING_ZERO = re.compile(r"(?<![\d.,\w])−?0\.\d{3}(?![\d%])|(?<![\d.,\w])−?\.\d{2}(?![\d%])")


def test_one_number_style_in_every_summary(tmp_path):
    """Issue 13: every command's printed summary, every result's repr and notebook table follow
    agree.core.format (three decimals, no leading zero for quantities bounded by 1)."""
    import agree
    from agree.analysis.planning import plan_sample

    r1, r2, book = SAMPLES / "round1.csv", SAMPLES / "round2.csv", SAMPLES / "codebook.csv"
    small = ["--boot", "100", "--seed", "3"]
    runs = {
        "plan": ["plan", "--coders", "3", "--shares", "0.5,0.3,0.2", "--expected", "0.85", "--replicates", "60",
                 "--boot", "60", "--tolerance", "0.5", "--max-units", "300"],
        "pilot": ["plan", "--pilot", str(r1), "--codebook", str(book), "--replicates", "60", "--boot", "60",
                  "--tolerance", "0.5", "--max-units", "300"],
        "rounds": ["rounds", str(r1), str(r2), "--codebook", str(book), *small],
        "score": ["score", str(r1), "--codebook", str(book), *small],
        "codes": ["codes", str(r1), "--codebook", str(book), *small],
        "coders": ["coders", str(r1), "--codebook", str(book), *small],
    }
    for name, args in runs.items():
        out = run(args)
        assert out.exit_code == 0, (name, out.output)
        assert not LEADING_ZERO.findall(out.output), (name, LEADING_ZERO.findall(out.output))
    data = agree.read(r1, codebook=book)
    results = [agree.krippendorff_alpha(data, n_resamples=100), agree.score(data, n_resamples=100),
               agree.diagnose_codes(data, n_resamples=100), agree.diagnose_coders(data, n_resamples=100),
               agree.compare_rounds({"r1": data, "r2": agree.read(r2, codebook=book)}, n_resamples=100),
               plan_sample(coders=2, shares=[0.6, 0.4], expected=0.9, replicates=60, n_resamples=60,
                           tolerance=0.5, max_units=300)]
    for result in results:
        for shown in (repr(result), result._repr_html_()):
            assert not LEADING_ZERO.findall(shown), (type(result).__name__, LEADING_ZERO.findall(shown))
