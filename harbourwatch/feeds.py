"""Reading plot feeds into columnar arrays and grouping them into scans.

(Interface fixed; implementation in progress.)
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from os import PathLike

import numpy as np
from numpy.typing import NDArray

from .config import SensorConfig

__all__ = ["PlotTable", "Scan", "read_feeds", "group_scans"]


@dataclass(frozen=True, kw_only=True, eq=False)
class PlotTable:
    """All plots of a run, merged, sorted by time, exact duplicates dropped.

    Attributes
    ----------
    time
        ``(N,)`` float64 epoch seconds (UTC).
    sensor
        ``(N,)`` int64 index into the run's sensor tuple.
    lat_deg, lon_deg
        ``(N,)`` WGS84 degrees.
    scan
        ``(N,)`` int64 scan number from the feed, ``-1`` where absent.
    sigma_m
        ``(N,)`` float64 per-plot 1-sigma, NaN where absent.
    source, line
        ``(N,)`` index into ``files`` and 1-based line number of each row.
    files
        The feed paths as given.
    duplicates_dropped
        Count of exact duplicate rows removed.
    """

    time: NDArray[np.float64]
    sensor: NDArray[np.int64]
    lat_deg: NDArray[np.float64]
    lon_deg: NDArray[np.float64]
    scan: NDArray[np.int64]
    sigma_m: NDArray[np.float64]
    source: NDArray[np.int64]
    line: NDArray[np.int64]
    files: tuple[str, ...]
    duplicates_dropped: int = 0

    def __len__(self) -> int:
        return int(self.time.size)


@dataclass(frozen=True, kw_only=True, eq=False)
class Scan:
    """One antenna revolution of one sensor: a measurement set.

    ``time`` is the reference time of the scan (its latest plot's time, or
    the nominal end of the revolution for an empty scan); ``plots`` are row
    indices into the :class:`PlotTable`, sorted by plot time.
    """

    sensor: int
    number: int
    time: float
    plots: NDArray[np.int64]


def read_feeds(paths: Sequence[str | PathLike[str]], sensors: Sequence[SensorConfig]) -> PlotTable:
    """Read and merge plot feeds (CSV, ``.csv.gz``, Parquet)."""
    raise NotImplementedError


def group_scans(plots: PlotTable, sensors: Sequence[SensorConfig]) -> list[Scan]:
    """Group plots into scans per sensor, ordered by reference time."""
    raise NotImplementedError
