"""The one writing path (agree.core.files): outputs never replace an input of the same run, temporary
files of killed runs are cleaned, failures to write are one-line errors naming the output."""

import errno
import os
import signal
import subprocess
import sys
import textwrap
import time

import pytest

from agree.core.files import (
    atomic_write,
    atomic_write_bytes,
    check_output,
    make_folder,
    record_input,
    run_scope,
    stale_temporary_files,
)
from agree.core.model import AgreeError

IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


def _inputs(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    data = folder / "data.csv"
    data.write_text("unit,a,b\n1,x,y\n")
    return folder, data


# -- never over an input of the run ---------------------------------------------------------
def _aliases(tmp_path, folder, data):
    """Other names of the same file: a symbolic link, a path through '..', a hard link (two names of
    one file, as upper/lower case are on a case-insensitive file system) and a link to the folder."""
    (tmp_path / "link.csv").symlink_to(data)
    (tmp_path / "hard.csv").hardlink_to(data)
    (tmp_path / "dirlink").symlink_to(folder, target_is_directory=True)
    return {"same path": data, "symlink": tmp_path / "link.csv", "dotdot": folder / ".." / "in" / "data.csv",
            "hard link": tmp_path / "hard.csv", "folder link": tmp_path / "dirlink" / "data.csv"}


def test_no_output_of_a_run_replaces_one_of_its_inputs(tmp_path):
    folder, data = _inputs(tmp_path)
    before = data.read_bytes()
    for how, alias in _aliases(tmp_path, folder, data).items():
        with run_scope():
            record_input(data)
            with pytest.raises(AgreeError) as err:
                atomic_write_bytes(alias, b"overwritten")
            assert err.value.code == "overwrite-input", how
            assert "data.csv" in str(err.value), how
            with pytest.raises(AgreeError):
                check_output(alias, force=True)
        assert data.read_bytes() == before, how
    assert not [p for p in os.listdir(folder) if p.endswith(".tmp")]


def test_explicit_inputs_are_refused_by_identity(tmp_path):
    folder, data = _inputs(tmp_path)
    for how, alias in _aliases(tmp_path, folder, data).items():
        with pytest.raises(AgreeError) as err:
            check_output(alias, [data], force=True)
        assert err.value.code == "overwrite-input", how


def test_an_earlier_output_may_be_replaced(tmp_path):
    out = tmp_path / "out.csv"
    out.write_text("old")
    with run_scope():
        record_input(tmp_path / "other.csv")          # not a file: nothing recorded
        check_output(out, force=True)
        atomic_write_bytes(out, b"new")
    assert out.read_bytes() == b"new"
    with pytest.raises(AgreeError) as err:
        check_output(out, force=False)
    assert err.value.code == "output-exists"


def test_inputs_are_only_protected_within_their_run(tmp_path):
    _, data = _inputs(tmp_path)
    with run_scope():
        record_input(data)
    atomic_write_bytes(data, b"a later run may write here")   # the run is over
    assert data.read_bytes() == b"a later run may write here"


# -- temporary files of killed runs ---------------------------------------------------------
_WRITER = textwrap.dedent("""
    import sys, time
    from agree.core.files import atomic_write
    def slow(tmp):
        open(tmp, "w").write("half")
        print("writing", flush=True)
        time.sleep(60)
    atomic_write(sys.argv[1], slow)
""")


def test_a_write_killed_midway_leaves_the_old_file_and_the_next_write_cleans_up(tmp_path):
    out = tmp_path / "out.csv"
    out.write_text("old")
    proc = subprocess.Popen([sys.executable, "-c", _WRITER, str(out)], stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "writing"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    left = [p for p in os.listdir(tmp_path) if p.endswith(".tmp")]
    assert len(left) == 1 and left[0].startswith(".out.csv.agree-")
    assert out.read_text() == "old"
    unrelated = tmp_path / ".notes.tmp"
    unrelated.write_text("not ours")
    time.sleep(0.05)
    with run_scope():
        atomic_write_bytes(tmp_path / "another.csv", b"new")   # any write into the folder cleans up
    assert sorted(os.listdir(tmp_path)) == [".notes.tmp", "another.csv", "out.csv"]


def test_only_stale_temporary_files_of_ended_runs_are_cleaned(tmp_path):
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    dead = int(done.stdout)
    old = time.time() - 3600
    stale = tmp_path / f".out.csv.agree-{dead}-abcd1234.tmp"
    legacy = tmp_path / ".out.csv.ab_cd123.tmp"                 # written by an earlier version
    running = tmp_path / f".out.csv.agree-{os.getppid()}-abcd1234.tmp"   # a process still running
    other = tmp_path / ".report.html.ab_cd123.tmp"              # legacy, but of another output
    for path in (stale, legacy, running, other):
        path.write_text("x")
        os.utime(path, (old, old))
    with run_scope():
        assert sorted(p.name for p in stale_temporary_files(tmp_path, "out.csv")) == sorted([stale.name, legacy.name])
        new = tmp_path / f".x.agree-{dead}-abcd1234.tmp"
        new.write_text("x")                                       # newer than the run: not touched
        atomic_write_bytes(tmp_path / "out.csv", b"1")
    assert sorted(os.listdir(tmp_path)) == sorted([running.name, other.name, new.name, "out.csv"])


# -- failures to write ------------------------------------------------------------------------
def _no_temp(folder):
    return not [p for p in os.listdir(folder) if p.endswith(".tmp")]


@pytest.mark.parametrize("code,words", [(errno.ENOSPC, "disk is full"), (errno.EACCES, "no permission"),
                                        (errno.EROFS, "read-only"), (errno.EFBIG, "larger")])
def test_errors_while_writing_name_the_output_and_the_cause(tmp_path, code, words):
    out = tmp_path / "out.csv"
    out.write_text("old")

    def fail(tmp):
        open(tmp, "w").write("partial")
        raise OSError(code, os.strerror(code), tmp)

    with pytest.raises(AgreeError) as err:
        atomic_write(out, fail)
    message = str(err.value)
    assert str(out) in message and words in message and ".tmp" not in message
    assert "\n" not in message and err.value.code == "cannot-write"
    assert out.read_text() == "old" and _no_temp(tmp_path)


def _read_only(folder):
    """Make `folder` read-only for this process, or skip (root writes anywhere)."""
    os.chmod(folder, 0o555)
    probe = folder / ".probe"
    try:
        probe.write_text("x")
    except OSError:
        return
    probe.unlink()
    os.chmod(folder, 0o755)
    pytest.skip("this user writes into read-only folders (root); tests/hostile runs this case in a process "
                "without that power")


def test_a_read_only_folder_names_the_output(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    _read_only(folder)
    try:
        with pytest.raises(AgreeError) as err:
            atomic_write_bytes(folder / "out.csv", b"x")
        assert f"cannot write {folder / 'out.csv'}: no permission to write in the folder {folder}" in str(err.value)
    finally:
        os.chmod(folder, 0o755)


def test_a_parent_that_is_a_file(tmp_path):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("x")
    for out in (blocker / "out.csv", blocker / "sub" / "out.csv"):
        with pytest.raises(AgreeError) as err:
            check_output(out)
        assert f"{blocker} is a file, not a folder" in str(err.value)
        with pytest.raises(AgreeError) as err:
            atomic_write_bytes(out, b"x")
        assert f"{blocker} is a file, not a folder" in str(err.value) and ".tmp" not in str(err.value)
    with pytest.raises(AgreeError) as err:
        make_folder(blocker / "sub")
    assert "is a file, not a folder" in str(err.value)
    with pytest.raises(AgreeError) as err:
        check_output(tmp_path / "missing" / "out.csv")
    assert "does not exist" in str(err.value)


def test_an_output_that_is_a_folder(tmp_path):
    with pytest.raises(AgreeError) as err:
        atomic_write_bytes(tmp_path, b"x")
    assert err.value.code == "output-is-folder"


# -- structure: every reader records its inputs --------------------------------------------------
_READS = ("read_csv(", "read_excel(", "load_workbook(", "read_parquet(", "read_table(", "read_bytes(",
          "read_text(", "ParquetFile(", 'open(f, "rb")', "open(path", "ZipFile(")


def test_every_module_that_reads_files_records_them_as_inputs():
    """The protection of inputs is only as good as the readers' `record_input` calls: a module that
    opens files must call it (the writers' own modules excepted)."""
    from pathlib import Path

    import agree

    root = Path(agree.__file__).parent
    writers = {"core/files.py", "output/refi.py"}   # they open what they write
    missing = []
    for module in sorted(root.rglob("*.py")):
        rel = str(module.relative_to(root))
        source = module.read_text(encoding="utf-8")
        if rel not in writers and any(token in source for token in _READS) and "record_input(" not in source:
            missing.append(rel)
    assert not missing, f"these modules read files without record_input: {missing}"
