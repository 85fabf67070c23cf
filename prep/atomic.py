"""Atomic writes and checksums: nothing half-written ever sits under a final name."""
from __future__ import annotations

import contextlib
import hashlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

from .errors import UsageError

CHUNK = 1 << 20


def sha256_file(path: str | os.PathLike[str]) -> str:
    """Hex sha256 of a file's bytes, read in 1 MiB chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(CHUNK):
            h.update(chunk)
    return h.hexdigest()


def sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _umask() -> int:
    """The process's file-creation mask, read without changing it where the OS allows."""
    with contextlib.suppress(OSError, ValueError):
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _unwritable(path: Path, exc: OSError) -> UsageError:
    """One-line exit-2 error for an output location that cannot be written."""
    why = exc.strerror or type(exc).__name__
    if isinstance(exc, (FileExistsError, NotADirectoryError)):
        why = "a file stands where a folder is needed"
    return UsageError(f"{path}: cannot write here ({why})")


def make_dirs(path: str | os.PathLike[str]) -> Path:
    """``mkdir -p path``; a location that cannot hold a folder is a :class:`UsageError` (exit 2)."""
    folder = Path(path)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _unwritable(folder, exc) from None
    if not folder.is_dir():
        raise _unwritable(folder, NotADirectoryError())
    return folder


def check_writable(path: str | os.PathLike[str]) -> None:
    """Refuse early (:class:`UsageError`, exit 2) when ``path`` could not be created; creates nothing.

    Walks up to the nearest existing ancestor, which must be a folder we may write into.
    """
    target = Path(path)
    ancestor = target.absolute().parent
    while not ancestor.exists() and ancestor != ancestor.parent:
        ancestor = ancestor.parent
    if not ancestor.is_dir():
        raise _unwritable(target, NotADirectoryError())
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise UsageError(f"{target}: cannot write here (no write permission on {ancestor})")


def staging_dir(final: str | os.PathLike[str], suffix: str = ".part") -> Path:
    """A new hidden temporary folder beside ``final`` (its parents created), readable as the umask allows.

    An unusable location is a :class:`UsageError` naming ``final`` (exit 2).
    """
    final = Path(final)
    make_dirs(final.parent)
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.", suffix=suffix, dir=final.parent))
    except OSError as exc:
        raise _unwritable(final, exc) from None
    tmp.chmod(0o777 & ~_umask())  # mkdtemp's 0700 would hide the folder from the rest of the lab
    return tmp


def _fsync_dir(path: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


@contextlib.contextmanager
def atomic_file(path: str | os.PathLike[str], mode: str = "wb") -> Iterator:
    """Open a temporary sibling of ``path``; on success rename it over ``path``.

    On any exception the temporary file is removed and ``path`` is untouched.
    """
    final = Path(path)
    make_dirs(final.parent)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".part", dir=final.parent)
    except OSError as exc:
        raise _unwritable(final, exc) from None
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # mkstemp's 0600 would hide outputs from the rest of the lab
        with os.fdopen(fd, mode) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, final)
        _fsync_dir(final.parent)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> None:
    with atomic_file(path, "wb") as fh:
        fh.write(data)


def write_text_atomic(path: str | os.PathLike[str], text: str) -> None:
    write_bytes_atomic(path, text.encode("utf-8"))


@contextlib.contextmanager
def atomic_dir(path: str | os.PathLike[str], *, force: bool = False) -> Iterator[Path]:
    """Yield a temporary sibling directory; on success it replaces ``path``.

    Refuses (UsageError) if ``path`` exists and ``force`` is false. With
    ``force`` the old directory is moved aside first and deleted only after the
    new one is in place.
    """
    final = Path(path)
    if final.exists() and not force:
        raise UsageError(f"{final}: already exists; use --force to replace it")
    tmp = staging_dir(final)
    try:
        yield tmp
        if final.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{final.name}.", suffix=".old", dir=final.parent))
            old.rmdir()
            os.replace(final, old)
            os.replace(tmp, final)
            if old.is_dir():
                shutil.rmtree(old, ignore_errors=True)
            else:
                old.unlink(missing_ok=True)
        else:
            os.replace(tmp, final)
        _fsync_dir(final.parent)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
