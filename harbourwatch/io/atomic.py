"""Atomic file writing: a temporary file in the same folder, then rename.

A reader (or a crash) never sees a half-written output, and an earlier
complete file stays in place until its replacement is complete.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import os
import tempfile
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import IO

from harbourwatch.errors import OutputError

__all__ = ["atomic_open", "atomic_write_text", "atomic_write_chunks", "atomic_write_bytes",
           "sha256_file", "mount_point", "output_error"]


def mount_point(path: str | os.PathLike[str]) -> Path:
    """The mount point of the filesystem that holds ``path`` (or would, once created)."""
    p = Path(os.path.abspath(path))
    while not p.exists() and p != p.parent:
        p = p.parent
    while not os.path.ismount(p) and p != p.parent:
        p = p.parent
    return p


def output_error(exc: OSError, path: str | os.PathLike[str]) -> OutputError:
    """The :class:`OutputError` for an ``OSError`` met while writing ``path``."""
    if isinstance(exc, OutputError):
        return exc
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        reason = f"no space left on {mount_point(path)}"
    else:
        reason = (exc.strerror or str(exc)).lower()
    return OutputError(reason, path=path)


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike[str], mode: str = "w", **kwargs: object) -> Iterator[IO]:  # type: ignore[type-arg]
    """Open a temporary sibling of ``path`` for writing; rename it over ``path`` on success.

    An ``OSError`` while creating, writing or moving the file (a full disk)
    comes out as an :class:`~harbourwatch.errors.OutputError` naming ``path``;
    the temporary file is removed and an earlier ``path`` is left as it was.
    """
    target = Path(path)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
        os.close(fd)
    except OSError as exc:
        raise output_error(exc, target) from exc
    try:
        with open(tmp, mode, **kwargs) as fh:  # type: ignore[call-overload]
            yield fh
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)  # mkstemp makes 0600; give the usual file mode
        os.replace(tmp, target)
    except BaseException as exc:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise output_error(exc, target) from exc
        raise


def atomic_write_text(path: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` (UTF-8, ``\\n`` line ends) to ``path`` atomically."""
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


def atomic_write_chunks(path: str | os.PathLike[str], chunks: Iterable[str]) -> None:
    """Write the concatenation of text ``chunks`` (UTF-8, ``\\n`` line ends) to ``path`` atomically.

    Each chunk is written as it comes, so the whole text never exists in
    memory; the file appears under ``path`` only once every chunk is written
    (an error while producing a chunk leaves ``path`` as it was).
    """
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as fh:
        for chunk in chunks:
            fh.write(chunk)


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> None:
    """Write ``data`` to ``path`` atomically."""
    with atomic_open(path, "wb") as fh:
        fh.write(data)


def sha256_file(path: str | os.PathLike[str]) -> str:
    """Hex SHA-256 of a file's bytes."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
