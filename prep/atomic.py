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
    final.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".part", dir=final.parent)
    try:
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
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.", suffix=".part", dir=final.parent))
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
