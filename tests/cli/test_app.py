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

