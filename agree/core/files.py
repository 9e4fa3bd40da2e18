"""Writing files safely: never a half-written output, never over an input, checksums for the record.

Every file agree writes goes through `atomic_write` (or `atomic_write_bytes`): the content is
written to a hidden temporary file beside the output, ``.<name>.agree-<pid>-<random>.tmp``, which
then replaces the output in one step, so after a crash there is the old file or the new one,
never half of one. A temporary file left behind by a run that was killed is removed by the
next write into the same folder (only files of that pattern whose process has ended and that
are older than the current run).

The files a run reads are its inputs (`record_input`; the readers record every file they
open), and no output of the same run may replace one of them, even with ``--force``:
`atomic_write` refuses any output that is the same file as an input of the run, compared by
file identity (device and inode, so symbolic and hard links, ``..`` and, on case-insensitive
file systems, upper/lower case all count as the same file) and by resolved path. A run is
`run_scope()`: the command line opens one per command; library code may open its own, and
passes explicit ``inputs`` to `check_output` as well.

Failures to write (a read-only folder, a full disk, a parent that is a file) are one-line
`AgreeError`s naming the output and the cause, never the temporary file.
"""

from __future__ import annotations

import contextlib
import contextvars
import errno
import gc
import hashlib
import io
import os
import re
import sys
import tempfile
import time
from pathlib import Path
from typing import Callable, Iterator, Sequence

from agree.core.errors import AgreeError

_STARTED = time.time()      # when this process started writing: the default start of a run
_TEMP = re.compile(r"\.(?P<name>.+)\.agree-(?P<pid>[0-9]+)-[A-Za-z0-9_]+\.tmp\Z")


def sha256_file(path: str | os.PathLike) -> str:
    """The sha256 checksum of a file, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    """Whether two paths name the same file: by identity when both exist, else by resolved path."""
    try:
        return os.path.samefile(a, b)
    except OSError:
        return Path(a).resolve() == Path(b).resolve()


# -- the inputs of a run ---------------------------------------------------------------------
class RunInputs:
    """The files a run has read, by identity (device, inode) and by resolved path."""

    def __init__(self) -> None:
        self.started = time.time()
        self._by_identity: dict[tuple[int, int], str] = {}
        self._by_path: dict[str, str] = {}

    def add(self, path: str | os.PathLike) -> None:
        name = os.fspath(path)
        try:
            st = os.stat(name)
        except OSError:
            return
        self._by_identity.setdefault((st.st_dev, st.st_ino), name)
        self._by_path.setdefault(_resolved(name), name)

    def files(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(self._by_identity.values()))

    def input_at(self, path: str | os.PathLike) -> str | None:
        """The input (as the run named it) that writing `path` would replace, or None."""
        try:
            st = os.stat(path)
        except OSError:
            st = None
        if st is not None and (st.st_dev, st.st_ino) in self._by_identity:
            return self._by_identity[(st.st_dev, st.st_ino)]
        return self._by_path.get(_resolved(path))


def _resolved(path: str | os.PathLike) -> str:
    try:
        return str(Path(path).resolve())
    except (OSError, RuntimeError):   # a symlink loop
        return os.path.abspath(path)


_RUN: contextvars.ContextVar[RunInputs | None] = contextvars.ContextVar("agree_run_inputs", default=None)


@contextlib.contextmanager
def run_scope() -> Iterator[RunInputs]:
    """One run (one command): the files read inside it are protected from its outputs."""
    token = _RUN.set(RunInputs())
    try:
        yield _RUN.get()
    finally:
        _RUN.reset(token)


def current_run() -> RunInputs | None:
    """The run in progress, or None outside `run_scope`."""
    return _RUN.get()


def record_input(path: str | os.PathLike) -> None:
    """Note that the current run reads `path` (a no-op outside `run_scope`)."""
    run = _RUN.get()
    if run is not None:
        run.add(path)


def _refuse_input(out: Path, source: str) -> AgreeError:
    if os.fspath(source) == str(out):
        message = f"refusing to overwrite the input file {out}"
    else:
        message = f"refusing to write {out}: it is the input file {source} under another name"
    return AgreeError(message, hint="an output may replace an earlier output, never a file the same run "
                                    "reads; choose another output name", code="overwrite-input")


def check_output(path: str | os.PathLike, inputs: Sequence[str | os.PathLike | None] = (), *,
                 force: bool = True) -> Path:
    """Refuse an output that is one of the `inputs` or an input of the current run, a folder, in a
    folder that does not exist, or (unless `force`) an existing file."""
    out = Path(path)
    for source in inputs:
        if source is not None and Path(source).exists() and same_file(out, source):
            raise _refuse_input(out, os.fspath(source))
    run = _RUN.get()
    source = run.input_at(out) if run is not None else None
    if source is not None:
        raise _refuse_input(out, source)
    if out.is_dir():
        raise AgreeError(f"{out} is a folder", hint="give a file name for the output", code="output-is-folder")
    if out.exists() and not force:
        raise AgreeError(f"{out} already exists", hint="use --force (force=True) to replace it, or choose "
                         "another name", code="output-exists")
    _check_folder(out.parent, out)
    return out


def _check_folder(folder: Path, out: Path) -> None:
    if folder.is_dir():
        return
    blocker = next((p for p in [folder, *folder.parents] if p.exists() or p.is_symlink()), None)
    if blocker is not None and not blocker.is_dir():
        raise AgreeError(f"cannot write {out}: {blocker} is a file, not a folder",
                         hint="choose another output path", code="no-folder")
    raise AgreeError(f"cannot write {out}: the folder {folder} does not exist", hint="create it first",
                     code="no-folder")


def make_folder(folder: str | os.PathLike) -> Path:
    """Create a folder for outputs (and its parents), with the causes of failure in one line."""
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise AgreeError(f"'{folder}' exists and is not a folder", hint="choose another output folder",
                         code="output-exists")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise write_error(folder, exc, what="create the folder") from exc
    return folder


def write_error(path: str | os.PathLike, exc: OSError, *, what: str = "write") -> AgreeError:
    """The one-line error for an OSError while writing `path` (never naming a temporary file)."""
    path = Path(path)
    folder = path.parent
    if what != "write":         # creating a folder: the cause is in the nearest existing parent
        folder = next((p for p in path.parents if p.exists()), folder)
    code = exc.errno
    if code in (errno.EACCES, errno.EPERM):
        cause = f"no permission to write in the folder {folder}"
        hint = "choose a folder you can write to, or change its permissions"
    elif code == errno.EROFS:
        cause = f"the folder {folder} is on a read-only file system"
        hint = "choose a folder on a writable disk"
    elif code in (errno.ENOSPC, getattr(errno, "EDQUOT", -1)):
        cause = "the disk is full (or your disk quota is used up)"
        hint = "free some space or write to another disk; nothing was replaced"
    elif code == errno.EFBIG:
        cause = "the file is larger than the system allows here"
        hint = "write to another disk; nothing was replaced"
    elif code == errno.ENOTDIR:
        blocker = next((p for p in [folder, *folder.parents] if p.exists() and not p.is_dir()), folder)
        cause = f"{blocker} is a file, not a folder"
        hint = "choose another output path"
    elif code == errno.ENOENT:
        cause = f"the folder {folder} does not exist"
        hint = "create it first"
    elif code == errno.ENAMETOOLONG:
        cause = "the file name is too long"
        hint = "choose a shorter name"
    elif code == errno.EISDIR:
        cause = f"{path} is a folder"
        hint = "give a file name for the output"
    else:
        cause = exc.strerror or type(exc).__name__
        hint = "check the output path"
    return AgreeError(f"cannot {what} {path}: {cause}", hint=hint, code="cannot-write")


# -- temporary files -----------------------------------------------------------------------
def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:           # exists, owned by someone else
        return True
    return True


def stale_temporary_files(folder: str | os.PathLike, name: str | None = None) -> list[Path]:
    """Temporary files agree left in `folder` when a run was killed: our pattern, a process that
    has ended, and older than the current run. With `name`, also those of earlier versions of
    agree for that output (``.<name>.<random>.tmp``, which do not record the process)."""
    run = _RUN.get()
    started = run.started if run is not None else _STARTED
    legacy = re.compile(rf"\.{re.escape(name)}\.[a-z0-9_]{{8}}\.tmp\Z") if name else None
    found = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return []
    for entry in entries:
        match = _TEMP.match(entry.name)
        if match:
            if _alive(int(match.group("pid"))):
                continue
        elif legacy is None or not legacy.match(entry.name):
            continue
        try:
            if entry.is_file(follow_symlinks=False) and entry.stat(follow_symlinks=False).st_mtime < started:
                found.append(Path(entry.path))
        except OSError:
            continue
    return found


def clean_temporary_files(folder: str | os.PathLike, name: str | None = None) -> list[Path]:
    """Remove `stale_temporary_files(folder, name)`; returns those removed."""
    removed = []
    for path in stale_temporary_files(folder, name):
        with contextlib.suppress(OSError):
            path.unlink()
            removed.append(path)
    return removed


# -- writing -------------------------------------------------------------------------------
def atomic_write(path: str | os.PathLike, write: Callable[[str], None]) -> Path:
    """Call ``write(temp_path)`` on a temporary file in the target's folder, then move it over
    the target in one step: after a crash there is the old file or the new one, never half.

    Refuses to replace an input of the current run; cleans temporary files left by killed runs;
    turns a failure to write into a one-line `AgreeError` naming `path`."""
    path = Path(path)
    run = _RUN.get()
    source = run.input_at(path) if run is not None else None
    if source is not None:
        raise _refuse_input(path, source)
    if path.is_dir():
        raise AgreeError(f"{path} is a folder", hint="give a file name for the output", code="output-is-folder")
    clean_temporary_files(path.parent, path.name)
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.agree-{os.getpid()}-",
                                   suffix=".tmp")
    except OSError as exc:
        raise write_error(path, exc) from exc
    os.close(fd)
    try:
        write(tmp)
        with open(tmp, "rb+") as handle:
            os.fsync(handle.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise write_error(path, exc) from exc
        cause = _io_error(exc)
        if cause is None:
            raise
        _let_go(exc)
        raise write_error(path, cause) from None
    return path


_LIBXML_IO = re.compile(r"\bIO_(E[A-Z]+)\b")


def _io_error(exc: BaseException) -> OSError | None:
    """The disk error behind a library's own exception: an OSError it was raised from, or
    libxml2's IO_<errno> (openpyxl writes through lxml, into temporary files of its own)."""
    seen = exc
    while seen is not None:
        if isinstance(seen, OSError):
            return seen
        seen = seen.__cause__ or seen.__context__
    match = _LIBXML_IO.search(str(exc))
    if match and isinstance(getattr(errno, match.group(1), None), int):
        code = getattr(errno, match.group(1))
        return OSError(code, os.strerror(code))
    return None


def _let_go(exc: BaseException) -> None:
    """Free the failed writer's frames now, quietly: a half-closed XML stream would otherwise
    print "Exception ignored ..." with a traceback when it is collected, after the clear error."""
    hook = sys.unraisablehook
    sys.unraisablehook = lambda unraisable: None
    try:
        while exc is not None:
            exc.__traceback__ = None
            exc = exc.__context__
        gc.collect()
    finally:
        sys.unraisablehook = hook


def through_memory(save: Callable[[io.BytesIO], None], tmp: str | os.PathLike) -> None:
    """Let a library save into memory, then write the bytes to `tmp` in one call. Libraries that
    write files themselves (openpyxl through lxml, matplotlib) report a full disk with their own
    exception types and half-closed streams; this way the disk sees one write, whose OSError
    `atomic_write` turns into a clear error."""
    buffer = io.BytesIO()
    save(buffer)
    Path(tmp).write_bytes(buffer.getvalue())


def atomic_write_bytes(path: str | os.PathLike, payload: bytes) -> Path:
    """`atomic_write` for content already in memory."""
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(payload))


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """`atomic_write` for text, as UTF-8 with the line ends as given."""
    return atomic_write_bytes(path, text.encode("utf-8"))
