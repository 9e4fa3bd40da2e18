"""CLI tests for `agree coders` (synthetic data)."""

from __future__ import annotations

import json

from agree.analysis.diagnostics import diagnose_coders
from tests.cli.conftest import expected_data, run


def test_coders_json_equals_to_dict(coding_csv):
    result = run(["coders", str(coding_csv), "--format", "json", "--boot", "150", "--seed", "4"])
    assert result.exit_code == 0, result.output
    printed = json.loads(result.stdout)
    library = diagnose_coders(expected_data(), n_resamples=150, seed=4).to_dict()
    assert printed == json.loads(json.dumps(library))


def test_coders_table(coding_csv):
    result = run(["coders", str(coding_csv), "--boot", "50", "--seed", "1"])
    assert result.exit_code == 0, result.output
    assert "left out" in result.stdout and "Pairs of coders" in result.stdout
    assert "amara" in result.stdout
