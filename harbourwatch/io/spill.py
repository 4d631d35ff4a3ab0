"""Arrays spilled to an anonymous temporary file as they are finished, read back on demand.

A long run finishes trajectories all along the feed; keeping every finished
one's arrays in memory makes the run's memory grow with the feed's length.
A :class:`SpillStore` writes each group of arrays once, as raw bytes at the
end of one temporary file, and reads a group back with one explicit
positional read when it is needed (no memory map: nothing stays resident
but a small cache of the groups read last). The file is unlinked as soon as
it is created, so it disappears with the store or the process, whatever
ends it (an error, a kill); it lives in the system's temporary folder
(``TMPDIR``).

Reads and writes may come from several threads (the tables are written on
a second thread while the rules run).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.io.columns import ScratchFile

__all__ = ["SpillStore", "CACHE_BYTES"]

#: Bytes of recently read groups kept in memory (a trajectory read again soon costs nothing).
#: Its readers go through the trajectories one at a time, each reading a few arrays of the
#: trajectory at hand several times: room for the largest trajectory's few arrays is enough
#: (all nine arrays of a day-long trajectory are about 12 MB).
CACHE_BYTES = 32 << 20


class SpillStore:
    """Append-only store of array groups in an unlinked temporary file.

    >>> store = SpillStore()
    >>> key = store.put([np.arange(3.0), np.array([[1, 2]], np.int64)])
    >>> a, b = store.get(key)
    >>> a.tolist(), b.tolist(), store.bytes_written
    ([0.0, 1.0, 2.0], [[1, 2]], 40)
    >>> store.close()
    """

    def __init__(self, *, cache_bytes: int = CACHE_BYTES, folder: str | None = None) -> None:
        self._file = ScratchFile(folder, prefix="harbourwatch-spill-",
                                 room="a run needs about 65 MB there per busy feed hour")
        self._lock = threading.Lock()
        self._index: list[tuple[int, tuple[tuple[str, tuple[int, ...]], ...], int]] = []
        self._cache: OrderedDict[int, tuple[NDArray[Any], ...]] = OrderedDict()
        self._cache_room = cache_bytes
        self._cached = 0
        self.bytes_written = 0

    def put(self, arrays: Sequence[NDArray[Any]]) -> int:
        """Write a group of arrays; return its key for :meth:`get`."""
        with self._lock:
            return self._put(arrays)

    def _put(self, arrays: Sequence[NDArray[Any]]) -> int:  # the caller holds the lock
        parts = [np.ascontiguousarray(a) for a in arrays]
        layout = tuple((a.dtype.str, a.shape) for a in parts)
        data = b"".join(a.tobytes() for a in parts)
        offset = self._file.append(data)  # a full or read-only folder: an OutputError
        self.bytes_written += len(data)
        self._index.append((offset, layout, len(data)))
        return len(self._index) - 1

    def put_each(self, arrays: Sequence[NDArray[Any]]) -> int:
        """Write each array as a group of its own, under consecutive keys; return the first.

        Array ``k`` is then ``get(first + k)[0]``: a reader that needs one
        array reads only that one.
        """
        with self._lock:  # no other put in between: the keys are consecutive
            keys = [self._put([a]) for a in arrays]
        return keys[0] if keys else len(self._index)

    def get(self, key: int) -> tuple[NDArray[Any], ...]:
        """The arrays of group ``key``, as they were put (read-only: they may be shared)."""
        with self._lock:
            if self._file.closed:
                raise ValueError("the spill store is closed")
            hit = self._cache.get(key)
            if hit is not None:
                self._cache.move_to_end(key)
                return hit
            offset, layout, size = self._index[key]
        buf = self._file.read(offset, size)
        out: list[NDArray[Any]] = []
        pos = 0
        for dtype, shape in layout:
            dt = np.dtype(dtype)
            count = int(np.prod(shape, dtype=np.int64))
            a = buf[pos : pos + count * dt.itemsize].view(dt).reshape(shape)
            a.flags.writeable = False
            out.append(a)
            pos += count * dt.itemsize
        arrays = tuple(out)
        with self._lock:
            if size <= self._cache_room and key not in self._cache:
                self._cache[key] = arrays
                self._cached += size
                while self._cached > self._cache_room:
                    _, old = self._cache.popitem(last=False)
                    self._cached -= sum(a.nbytes for a in old)
        return arrays

    def __len__(self) -> int:
        return len(self._index)

    def close(self) -> None:
        """Drop the cache and the file (its space is freed at once)."""
        with self._lock:
            self._cache.clear()
            self._cached = 0
            self._file.close()

    def __enter__(self) -> SpillStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
