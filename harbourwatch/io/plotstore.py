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

from collections.abc import Iterator, Sequence
from dataclasses import replace
from typing import Any, cast, overload

import numpy as np

from harbourwatch.io.columns import ScratchFile, StoredColumn
from harbourwatch.io.feeds import PlotTable, Scan, ScanArrays

__all__ = ["ScanTable", "store_plot_columns", "STORED"]

#: The plot-table columns kept on disk by :func:`store_plot_columns`.
STORED = ("lat_deg", "lon_deg", "scan", "sigma_m", "source", "line")
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
    file = ScratchFile(folder)
    moved: dict[str, Any] = {}
    for name in STORED:
        col = getattr(plots, name)
        if isinstance(col, StoredColumn):  # on disk already (read so by ``read_feeds``)
            continue
        col = np.ascontiguousarray(col)
        moved[name] = StoredColumn(file, file.append(col), col.dtype, col.size)
    table = None
    if scans is not None:
        rows = np.ascontiguousarray(scans.rows)
        stored = StoredColumn(file, file.append(rows), rows.dtype, rows.size)
        table = ScanTable(replace(scans, rows=cast(Any, stored)))
    return cast(PlotTable, replace(plots, **moved)), table
