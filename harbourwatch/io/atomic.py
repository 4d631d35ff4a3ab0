"""Atomic file writing: a temporary file in the same folder, then rename.

A reader (or a crash) never sees a half-written output, and an earlier
complete file stays in place until its replacement is complete.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO

__all__ = ["atomic_open", "atomic_write_text", "atomic_write_bytes", "sha256_file"]


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike[str], mode: str = "w", **kwargs: object) -> Iterator[IO]:  # type: ignore[type-arg]
    """Open a temporary sibling of ``path`` for writing; rename it over ``path`` on success."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    os.close(fd)
    try:
        with open(tmp, mode, **kwargs) as fh:  # type: ignore[call-overload]
            yield fh
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)  # mkstemp makes 0600; give the usual file mode
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def atomic_write_text(path: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` (UTF-8, ``\\n`` line ends) to ``path`` atomically."""
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


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
