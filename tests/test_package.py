"""The package root: every export loads on first use, and `import agree` loads no numerical library."""

from __future__ import annotations

import subprocess
import sys

import agree

HEAVY = ("numpy", "pandas", "pyarrow", "scipy")


def _loaded_after(statement: str) -> list[str]:
    script = f"import sys\n{statement}\nprint(sorted({{m.split('.')[0] for m in sys.modules}} & set({HEAVY!r})))"
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    return eval(proc.stdout.strip().splitlines()[-1])


def test_import_agree_and_its_error_load_no_numerical_library():
    assert _loaded_after("import agree") == []
    assert _loaded_after("from agree import AgreeError; from agree.core.errors import AgreeError as E") == []
    assert _loaded_after("import agree; agree.krippendorff_alpha") != []        # asked for: loaded


def test_every_export_resolves_and_is_listed():
    assert len(agree.__all__) == len(set(agree.__all__))
    for name in agree.__all__:
        assert getattr(agree, name) is not None, name
        assert name in dir(agree), name
    from agree import score
    from agree.stats.scoring import score as engine_score
    assert score is engine_score
    from agree.core.model import AgreeError as from_model
    assert agree.AgreeError is from_model                      # one class, re-exported by the model
    assert agree.__version__


def test_unknown_attribute_is_an_attribute_error():
    try:
        agree.no_such_thing
    except AttributeError as exc:
        assert "no_such_thing" in str(exc)
    else:
        raise AssertionError("no AttributeError")


def test_every_public_result_prints_a_short_summary():
    """Printing a result shows its summary and main table in a screenful (as pandas and scipy
    objects do), never every array and nested record it holds (before: 3,000 to 30,000
    characters for 120 units)."""
    from pathlib import Path

    from agree.analysis.rounds import split_rounds
    from agree.io.spans import read_spans

    samples = Path(__file__).resolve().parents[1] / "samples"
    data = agree.read(samples / "round1.csv", codebook=samples / "codebook.csv")
    long = agree.read(samples / "rounds_long.csv", codebook=samples / "codebook.csv", keep=["round"])
    review = agree.review_table(data)
    review["decision"] = [c.split("; ")[0] for c in review["codes involved"]]
    fast = {"n_resamples": 100, "seed": 1}
    results = {
        "AgreementResult": agree.krippendorff_alpha(data, **fast),
        "ScoreResult": agree.score(data, **fast),
        "CodeDiagnostics": agree.diagnose_codes(data, **fast),
        "CoderDiagnostics": agree.diagnose_coders(data, **fast),
        "RoundsResult": agree.compare_rounds(long, **fast),
        "Plan": agree.plan_sample(coders=2, categories=3, expected=0.9, replicates=60, n_resamples=60, seed=1),
        "Consensus": agree.reconcile(data, review),
        "Report": agree.build_report(data, **fast),
        "PassageAgreement": agree.position_agreement(
            read_spans(samples / "passages_spans.csv", documents_dir=samples / "passages"), **fast),
        "StudyReport": agree.build_study_report({f"round {k}": v for k, v in split_rounds(long).items()}, **fast),
    }
    for name, result in results.items():
        text = repr(result)
        assert text.startswith(f"{name}: "), (name, text[:80])
        assert len(text) < 2500 and len(text.splitlines()) <= 20, (name, len(text))
        assert "array(" not in text and "AgreementResult(" not in text, name
    assert ".585" in repr(results["AgreementResult"]) and "Krippendorff's alpha" in repr(results["ScoreResult"])
