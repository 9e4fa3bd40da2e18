"""CLI tests of what every command shares: the help of each command."""

from __future__ import annotations

import re

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
