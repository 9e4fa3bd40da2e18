"""Run every hostile case of `cases.py` through the command line and hold it to its expected outcome:
exit code, message, no traceback, and no input changed."""

from __future__ import annotations

import ctypes
import fnmatch
import hashlib
import os
import resource
import shutil
import signal
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

from tests.cli.conftest import run_main
from tests.hostile.cases import CASES, DATA, REFUSED, Case, Outcome, case_insensitive
from tests.hostile.reading import READING_CASES

AGREE = Path(sys.executable).with_name("agree")


@pytest.fixture
def case_dir():
    folder = Path(tempfile.mkdtemp(prefix="agree-hostile-"))
    yield folder
    for path in [folder, *folder.rglob("*")]:          # read-only folders must be removable
        if path.is_dir() and not path.is_symlink():
            os.chmod(path, 0o755)
    shutil.rmtree(folder)


def materialise(case: Case, folder: Path) -> None:
    for name, content in case.files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if callable(content):
            content = content()
        path.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
    for step in case.prepare:
        step(folder)


def snapshot(folder: Path) -> dict[str, str]:
    """Checksum of every file and target of every link (not following links)."""
    state = {}
    for path in sorted(folder.rglob("*")):
        rel = str(path.relative_to(folder))
        if path.is_symlink():
            state[rel] = "link -> " + os.readlink(path)
        elif path.is_file():
            state[rel] = hashlib.sha256(path.read_bytes()).hexdigest()
    return state


def _drop_root_powers() -> None:
    """In the child: as root, give up overriding file permissions, so a read-only folder is
    read-only (CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH, CAP_FOWNER leave the bounding set)."""
    if os.geteuid() == 0:
        libc = ctypes.CDLL(None, use_errno=True)
        for cap in (1, 2, 3):
            if libc.prctl(24, cap, 0, 0, 0) != 0:      # PR_CAPBSET_DROP
                os._exit(97)


def _limit_file_size(limit: int):
    def limit_it() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)   # a too-large write fails with EFBIG instead
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return limit_it


def run_cli(folder: Path, args, capsys, *, isolation: str = "", limit: int = 0) -> Outcome:
    def again(*more: str) -> Outcome:
        return run_cli(folder, more, capsys)

    if isolation:
        preexec = _drop_root_powers if isolation == "read-only" else _limit_file_size(limit)
        done = subprocess.run([str(AGREE), *args], cwd=folder, capture_output=True, text=True,
                              preexec_fn=preexec, env={**os.environ, "MPLCONFIGDIR": str(folder)})
        if done.returncode == 97:
            pytest.skip("cannot drop the power to write into read-only folders here")
        return Outcome(folder, done.returncode, done.stdout, done.stderr, again)
    cwd = os.getcwd()
    os.chdir(folder)
    try:
        code, out, err = run_main(capsys, *args)
    finally:
        os.chdir(cwd)
    return Outcome(folder, code, out, err, again)


def held_to(case: Case, outcome: Outcome, before: dict[str, str]) -> None:
    assert "Traceback" not in outcome.err and "run with --debug" not in outcome.err, outcome.err
    assert outcome.code == case.exit, f"exit {outcome.code}, expected {case.exit}: {outcome.err}"
    if case.exit == 2:
        errors = [line for line in outcome.err.splitlines() if line.startswith("error: ")]
        assert errors, outcome.err
    if case.message:
        import re

        assert re.search(case.message, outcome.err), outcome.err
    after = snapshot(outcome.folder)
    changed = [name for name, state in before.items()
               if after.get(name) != state and not any(fnmatch.fnmatch(name, p) for p in case.replaced)]
    assert not changed, f"inputs changed: {changed}"


def _marks(case: Case) -> list:
    marks = [pytest.mark.xfail(reason=case.xfail, strict=True)] if case.xfail else []
    return marks + ([pytest.mark.slow] if case.slow else [])


@pytest.mark.parametrize("case", [pytest.param(c, marks=_marks(c), id=c.name) for c in CASES + READING_CASES])
def test_case(case: Case, case_dir: Path, capsys):
    materialise(case, case_dir)
    before = snapshot(case_dir)
    outcome = run_cli(case_dir, case.args, capsys, isolation=case.isolation, limit=case.limit)
    held_to(case, outcome, before)
    if case.check is not None:
        case.check(outcome)


def test_other_letter_case(case_dir: Path, capsys):
    """-o CODING.CSV names the input itself on a case-insensitive file system (refused there);
    elsewhere it is another file, and the input is left alone either way."""
    insensitive = case_insensitive(case_dir)
    case = Case("other letter case", ("disagreements", "coding.csv", "-o", "CODING.CSV", "--file-format", "csv",
                                      "--force"), 2 if insensitive else 0,
                REFUSED + r"CODING\.CSV" if insensitive else "", files=DATA)
    materialise(case, case_dir)
    before = snapshot(case_dir)
    held_to(case, run_cli(case_dir, case.args, capsys), before)
