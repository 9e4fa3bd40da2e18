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
