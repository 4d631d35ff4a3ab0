"""Columns of numbers kept in unlinked temporary files, read back by index.

A long feed's plots are too many to keep every column in memory (48 bytes a
plot for the positions, ``sigma_m``, scan numbers and lines: 1 GB for a
busy week). A :class:`ScratchFile` is an unlinked temporary file (gone with
the process, whatever ends it) in the system's temporary folder
(``TMPDIR``); :class:`StoredColumn` is a 1-D column in one, read with
explicit positional reads so nothing stays resident;
:class:`ColumnWriter` appends a column block by block as a feed is read.
"""

from __future__ import annotations

import os
import tempfile
from typing import Any

import numpy as np
from numpy.typing import DTypeLike, NDArray

from harbourwatch.errors import OutputError

__all__ = ["ScratchFile", "StoredColumn", "ColumnWriter"]

#: An index spread over fewer rows than this many times its length is read as one range.
_RANGE_FACTOR = 8


class ScratchFile:
    """An unlinked temporary file: appended to, read back with positional reads.

    Unlinked as soon as it is created, so it is gone with the process
    whatever ends it; it lives in the system's temporary folder (``TMPDIR``)
    unless ``folder`` is given. A write that fails (a full or read-only
    folder) is an :class:`~harbourwatch.errors.OutputError` naming the folder
    and ``TMPDIR``, with ``room`` saying how much a run needs there.
    """

    def __init__(self, folder: str | None = None, *, prefix: str = "harbourwatch-plots-",
                 room: str = "a run keeps 48 bytes there per plot") -> None:
        self.folder = folder if folder is not None else tempfile.gettempdir()
        self.prefix, self.room = prefix, room
        try:
            self.handle = tempfile.TemporaryFile(prefix=prefix, dir=folder)
        except OSError as exc:
            raise self.error(exc) from None
        self.fd = self.handle.fileno()
        self.size = 0

    def error(self, exc: OSError) -> OutputError:
        """The user-facing error of a temporary file that cannot be written."""
        why = exc.strerror or str(exc)
        return OutputError(f"{why} in the temporary folder {self.folder} (set TMPDIR to a folder "
                           f"with room; {self.room})",
                           path=os.path.join(self.folder, f"{self.prefix}* (unlinked)"))

    def append(self, data: NDArray[Any] | bytes) -> int:
        """Write ``data``'s bytes at the end; return the offset they start at."""
        raw = data if isinstance(data, bytes) else np.ascontiguousarray(data).view(np.uint8).data
        view = memoryview(raw)  # type: ignore[arg-type]
        offset = self.size
        try:
            while view:  # pwrite may write less than asked
                done = os.pwrite(self.fd, view, self.size)
                view = view[done:]
                self.size += done
        except OSError as exc:  # a full or read-only temporary folder: the user can fix that
            raise self.error(exc) from None
        return offset

    def read(self, offset: int, nbytes: int) -> NDArray[np.uint8]:
        """``nbytes`` bytes from ``offset``, into a new array."""
        buf = np.empty(nbytes, np.uint8)  # not zero-filled: every byte is read into it
        view = memoryview(buf.data)  # type: ignore[arg-type]
        got = 0
        while got < nbytes:
            n = os.preadv(self.fd, [view[got:]], offset + got)
            if n <= 0:
                raise OSError(f"temporary file ended at byte {offset + got} of {offset + nbytes}")
            got += n
        return buf

    @property
    def closed(self) -> bool:
        return bool(self.handle.closed)

    def close(self) -> None:
        """Close the file (its space is freed at once)."""
        self.handle.close()


class StoredColumn:
    """One 1-D column in a temporary file; indexing reads only what is asked for.

    Supports what a run does with a plot column: an integer, a slice, an
    integer or boolean index array (the result is a new in-memory array),
    and ``np.asarray`` for the whole column (read in one go, for the steps
    that look at every plot once).
    """

    def __init__(self, file: ScratchFile, offset: int, dtype: DTypeLike, size: int) -> None:
        self._file = file
        self._offset = offset
        self.dtype = np.dtype(dtype)
        self.size = int(size)
        self.shape = (self.size,)
        self.ndim = 1

    def __len__(self) -> int:
        return self.size

    @property
    def nbytes(self) -> int:
        return self.size * self.dtype.itemsize

    def _range(self, lo: int, hi: int) -> NDArray[Any]:
        item = self.dtype.itemsize
        if hi <= lo:
            return np.empty(0, self.dtype)
        return self._file.read(self._offset + lo * item, (hi - lo) * item).view(self.dtype)

    def __array__(self, dtype: DTypeLike | None = None, copy: bool | None = None) -> NDArray[Any]:
        out = self._range(0, self.size)
        return out if dtype is None else out.astype(dtype, copy=False)

    def __getitem__(self, key: Any) -> Any:
        if isinstance(key, (int, np.integer)):
            k = int(key) + (self.size if key < 0 else 0)
            if not 0 <= k < self.size:
                raise IndexError(f"index {int(key)} is out of bounds for size {self.size}")
            return self._range(k, k + 1)[0]
        if isinstance(key, slice):
            start, stop, step = key.indices(self.size)
            if step == 1:
                return self._range(start, max(start, stop))
            return self._range(0, self.size)[key]
        idx = np.asarray(key)
        if idx.dtype == bool:
            if idx.shape != self.shape:
                raise IndexError("boolean index does not match the column's length")
            idx = np.flatnonzero(idx)
        if idx.size == 0:
            return np.empty(idx.shape, self.dtype)
        idx = np.where(idx < 0, idx + self.size, idx)
        lo, hi = int(idx.min()), int(idx.max()) + 1
        if lo < 0 or hi > self.size:
            raise IndexError(f"index out of bounds for size {self.size}")
        if hi - lo <= _RANGE_FACTOR * idx.size + 4096:
            return self._range(lo, hi)[idx - lo]
        # sparse rows over a long span: a map of the file only while they are gathered
        mapped = np.memmap(self._file.handle, dtype=self.dtype, mode="r", offset=self._offset,
                           shape=self.shape)
        out = np.array(mapped[idx])
        del mapped  # unmapped now: nothing stays resident
        return out


class ColumnWriter:
    """A column appended block by block to a file of its own; :meth:`finish` gives it back."""

    def __init__(self, dtype: DTypeLike, folder: str | None = None) -> None:
        self.file = ScratchFile(folder)
        self.dtype = np.dtype(dtype)
        self.size = 0

    def append(self, values: NDArray[Any]) -> None:
        self.file.append(np.ascontiguousarray(values, dtype=self.dtype))
        self.size += int(values.size)

    def finish(self) -> StoredColumn:
        return StoredColumn(self.file, 0, self.dtype, self.size)
