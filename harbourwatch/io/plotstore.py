"""The plot table's bulky columns kept on disk for the rest of a run, read back by index.

After the feeds are read, checked and grouped into scans, a run needs the
plots' positions, ``sigma_m``, scan numbers and file lines only a block of
scans at a time (the filter), for a few rows (a refused plot, an incident
page) or once over all rows (the plausibility checks). Keeping them in
memory would make a run's memory grow with the feed's length (48 bytes a
plot: 1 GB for a busy week). :func:`store_plot_columns` writes them once to
an unlinked temporary file (gone with the process, whatever ends it) and
puts a :class:`StoredColumn` in their place: it reads what is indexed with
explicit positional reads, so nothing stays resident. The time and sensor
columns, which whole-feed steps use again and again, stay in memory.
"""

from __future__ import annotations

import os
import tempfile
import threading
from collections.abc import Iterator, Sequence
from dataclasses import replace
from typing import Any, cast, overload

import numpy as np
from numpy.typing import DTypeLike, NDArray

from harbourwatch.errors import OutputError
from harbourwatch.io.feeds import PlotTable, Scan, ScanArrays

__all__ = ["StoredColumn", "ScanTable", "store_plot_columns", "STORED"]

#: The plot-table columns kept on disk by :func:`store_plot_columns`.
STORED = ("lat_deg", "lon_deg", "scan", "sigma_m", "source", "line")
#: An index spread over fewer rows than this many times its length is read as one range.
_RANGE_FACTOR = 8


class _File:
    """An unlinked temporary file shared by the columns written to it."""

    def __init__(self, folder: str | None = None) -> None:
        self.folder = folder if folder is not None else tempfile.gettempdir()
        try:
            self.handle = tempfile.TemporaryFile(prefix="harbourwatch-plots-", dir=folder)
        except OSError as exc:
            raise self.error(exc) from None
        self.fd = self.handle.fileno()
        self.size = 0
        self.lock = threading.Lock()

    def error(self, exc: OSError) -> OutputError:
        why = exc.strerror or str(exc)
        return OutputError(f"{why} in the temporary folder {self.folder} (set TMPDIR to a folder "
                           "with room; a run keeps 48 bytes there per plot)",
                           path=os.path.join(self.folder, "harbourwatch-plots-* (unlinked)"))

    def append(self, data: NDArray[Any]) -> int:
        view = memoryview(np.ascontiguousarray(data).view(np.uint8).data)  # type: ignore[arg-type]
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
        buf = np.empty(nbytes, np.uint8)
        view = memoryview(buf.data)  # type: ignore[arg-type]
        got = 0
        while got < nbytes:
            n = os.preadv(self.fd, [view[got:]], offset + got)
            if n <= 0:
                raise OSError(f"plot file ended at byte {offset + got} of {offset + nbytes}")
            got += n
        return buf


class StoredColumn:
    """One 1-D column in a temporary file; indexing reads only what is asked for.

    Supports what a run does with a plot column: an integer, a slice, an
    integer or boolean index array (the result is a new in-memory array),
    and ``np.asarray`` for the whole column (read in one go, for the steps
    that look at every plot once).
    """

    def __init__(self, file: _File, offset: int, dtype: DTypeLike, size: int) -> None:
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


#: Scans read together when a :class:`ScanTable` is walked through.
_SCAN_BLOCK = 4096


class ScanTable(Sequence[Scan]):
    """The scans of a run as a sequence of :class:`~harbourwatch.io.feeds.Scan`, made when read.

    Holds a few numbers per scan (:class:`~harbourwatch.io.feeds.ScanArrays`);
    the plot rows of every scan may be a :class:`StoredColumn`, read a block
    of scans at a time. Indexing, slicing and iteration give the same
    records :func:`~harbourwatch.io.feeds.group_scans` gives.
    """

    def __init__(self, arrays: ScanArrays) -> None:
        self.arrays = arrays

    def __len__(self) -> int:
        return len(self.arrays)

    def _make(self, a: int, b: int) -> list[Scan]:
        s = self.arrays
        lo, hi = int(s.offsets[a]), int(s.offsets[b])
        rows = np.asarray(s.rows[lo:hi]) if hi > lo else np.empty(0, np.int64)
        return [Scan(sensor=int(s.sensor[k]), number=int(s.number[k]), time=float(s.time[k]),
                     plots=rows[int(s.offsets[k]) - lo:int(s.offsets[k + 1]) - lo])
                for k in range(a, b)]

    @overload
    def __getitem__(self, i: int) -> Scan: ...

    @overload
    def __getitem__(self, i: slice) -> list[Scan]: ...

    def __getitem__(self, i: int | slice) -> Scan | list[Scan]:
        if isinstance(i, slice):
            start, stop, step = i.indices(len(self))
            if step == 1:
                return self._make(start, max(start, stop))
            return [self[k] for k in range(start, stop, step)]
        k = int(i) + (len(self) if i < 0 else 0)
        if not 0 <= k < len(self):
            raise IndexError(i)
        return self._make(k, k + 1)[0]

    def __iter__(self) -> Iterator[Scan]:
        for a in range(0, len(self), _SCAN_BLOCK):
            yield from self._make(a, min(len(self), a + _SCAN_BLOCK))


def store_plot_columns(plots: PlotTable, *, folder: str | None = None,
                       scans: ScanArrays | None = None) -> tuple[PlotTable, ScanTable | None]:
    """The same table with its :data:`STORED` columns moved to a temporary file.

    With ``scans``, their plot rows go to the same file and come back as a
    :class:`ScanTable`.

    Raises
    ------
    OutputError
        When the temporary folder (``TMPDIR``) is full or not writable.
    """
    if len(plots) == 0:
        return plots, (ScanTable(scans) if scans is not None else None)
    file = _File(folder)
    moved: dict[str, Any] = {}
    for name in STORED:
        col = np.ascontiguousarray(getattr(plots, name))
        moved[name] = StoredColumn(file, file.append(col), col.dtype, col.size)
    table = None
    if scans is not None:
        rows = np.ascontiguousarray(scans.rows)
        stored = StoredColumn(file, file.append(rows), rows.dtype, rows.size)
        table = ScanTable(replace(scans, rows=cast(Any, stored)))
    return cast(PlotTable, replace(plots, **moved)), table
