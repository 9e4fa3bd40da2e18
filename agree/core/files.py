"""Writing files safely: never a half-written output, never over an input, checksums for the record."""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
from pathlib import Path
from typing import Callable, Sequence

from agree.core.model import AgreeError


def sha256_file(path: str | os.PathLike) -> str:
    """The sha256 checksum of a file, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return Path(a).resolve() == Path(b).resolve()


def check_output(path: str | os.PathLike, inputs: Sequence[str | os.PathLike | None] = (), *,
                 force: bool = True) -> Path:
    """Refuse an output that is one of the inputs, a folder, in a missing folder, or (unless
    `force`) an existing file."""
    out = Path(path)
    for source in inputs:
        if source is not None and Path(source).exists() and same_file(out, source):
            raise AgreeError(f"refusing to overwrite the input file {source}",
                             hint="choose another output name", code="overwrite-input")
    if out.is_dir():
        raise AgreeError(f"{out} is a folder", hint="give a file name for the output", code="output-is-folder")
    if out.exists() and not force:
        raise AgreeError(f"{out} already exists", hint="use --force (force=True) to replace it, or choose "
                         "another name", code="output-exists")
    if not out.parent.is_dir():
        raise AgreeError(f"the folder of {out} does not exist", hint="create it first", code="no-folder")
    return out


def atomic_write(path: str | os.PathLike, write: Callable[[str], None]) -> Path:
    """Call ``write(temp_path)`` on a temporary file in the target's folder, then move it over
    the target in one step: after a crash there is the old file or the new one, never half."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    try:
        write(tmp)
        with open(tmp, "rb+") as handle:
            os.fsync(handle.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return path


def atomic_write_bytes(path: str | os.PathLike, payload: bytes) -> Path:
    """`atomic_write` for content already in memory."""
    return atomic_write(path, lambda tmp: Path(tmp).write_bytes(payload))
