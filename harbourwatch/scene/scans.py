"""The scans in the local frame, made block by block as the filter reaches them.

The filter reads the scans once, in time order. Converting every plot of a
long feed into the frame up front (positions and a 2x2 covariance each, in
per-scan arrays) costs memory in proportion to the feed's length; a
:class:`ScanStream` converts one block of consecutive scans at a time and
keeps only that block. The values are those of the up-front conversion,
bit for bit: every step is element-wise (the projection, the covariance).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from typing import overload

import numpy as np
from numpy.typing import NDArray

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.records import SensorConfig
from harbourwatch.models.cv import converted_covariance
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scene.records import MeasurementScan, SensorModel

__all__ = ["ScanStream", "BLOCK_SCANS"]

#: Scans converted together (about 13,000 plots on the bench's two radars).
BLOCK_SCANS = 256


class ScanStream(Sequence[MeasurementScan]):
    """The run's scans in the local frame, as a sequence made one block at a time.

    Parameters
    ----------
    plots, scans
        The run's plot table and its scans (:func:`~harbourwatch.io.feeds.group_scans`).
    models, sensors
        The radars in the frame and as configured (same order).
    frame
        The run's local frame.
    block
        Scans converted together; only the latest block is kept.
    """

    def __init__(self, plots: PlotTable, scans: Sequence[Scan], models: Sequence[SensorModel],
                 sensors: Sequence[SensorConfig], frame: LocalFrame, *,
                 block: int = BLOCK_SCANS) -> None:
        self._plots = plots
        self._scans = scans
        self._models = tuple(models)
        self._sensors = tuple(sensors)
        self._frame = frame
        self._block = max(1, int(block))
        self._cached: tuple[int, list[MeasurementScan]] | None = None

    def __len__(self) -> int:
        return len(self._scans)

    def order_keys(self) -> list[tuple[float, int]]:
        """(reference time, sensor) of every scan, without converting any plot."""
        return [(float(sc.time), int(sc.sensor)) for sc in self._scans]

    @overload
    def __getitem__(self, i: int) -> MeasurementScan: ...

    @overload
    def __getitem__(self, i: slice) -> list[MeasurementScan]: ...

    def __getitem__(self, i: int | slice) -> MeasurementScan | list[MeasurementScan]:
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        k = int(i)
        if k < 0:
            k += len(self)
        if not 0 <= k < len(self):
            raise IndexError(i)
        b = k // self._block
        if self._cached is None or self._cached[0] != b:
            self._cached = None  # the previous block goes before the next one is made
            self._cached = (b, self._convert(b * self._block,
                                             min(len(self), (b + 1) * self._block)))
        return self._cached[1][k - b * self._block]

    def __iter__(self) -> Iterator[MeasurementScan]:
        for k in range(len(self)):
            yield self[k]

    def _convert(self, a: int, b: int) -> list[MeasurementScan]:
        chunk = self._scans[a:b]
        rows = (np.concatenate([sc.plots for sc in chunk]) if chunk
                else np.empty(0, np.int64))
        z, R = local_plots(self._plots, rows, self._models, self._sensors, self._frame)
        tj = self._plots.time[rows]
        out = []
        at = 0
        for sc in chunk:
            m = int(sc.plots.size)
            out.append(MeasurementScan(sensor=sc.sensor, time=sc.time, plot_ids=sc.plots,
                                       plot_time=tj[at:at + m], z=z[at:at + m], R=R[at:at + m]))
            at += m
        return out


def local_plots(plots: PlotTable, rows: NDArray[np.int64], models: Sequence[SensorModel],
                sensors: Sequence[SensorConfig], frame: LocalFrame,
                ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Positions ``(n, 2)`` and covariances ``(n, 2, 2)`` of the plot rows ``rows`` in the frame."""
    e, n = frame.to_local(plots.lat_deg[rows], plots.lon_deg[rows])
    z = np.column_stack([e, n])
    R = np.empty((rows.size, 2, 2))
    sensor = plots.sensor[rows]
    for s, cfg in zip(models, sensors, strict=True):
        idx = np.flatnonzero(sensor == s.index)
        if idx.size:
            R[idx] = converted_covariance(
                e[idx] - s.site[0],
                n[idx] - s.site[1],
                cfg.range_sigma_m,
                np.radians(cfg.bearing_sigma_deg),
                plots.sigma_m[rows[idx]],
            )
    return z, R
