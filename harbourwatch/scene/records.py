"""What the local-scene step hands to the filter: radars and scans in the local frame (SI units)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["SensorModel", "MeasurementScan", "BirthRegion"]


@dataclass(frozen=True, kw_only=True)
class SensorModel:
    """One radar as the filter sees it (local frame, SI units)."""

    index: int
    site: tuple[float, float]  # antenna east/north, m
    detection_probability: float
    clutter_intensity: float  # false plots per m^2 per scan
    max_range_m: float
    scan_period_s: float


@dataclass(frozen=True, kw_only=True, eq=False)
class MeasurementScan:
    """One scan's plots in the local frame.

    ``time`` is the reference time (latest plot time); each plot keeps its
    own time in ``plot_time``. ``plot_ids`` index the run's plot table.
    """

    sensor: int
    time: float
    plot_ids: NDArray[np.int64]
    plot_time: NDArray[np.float64]
    z: NDArray[np.float64]  # (m, 2) east/north, m
    R: NDArray[np.float64]  # (m, 2, 2) m^2


@dataclass(frozen=True, kw_only=True, eq=False)
class BirthRegion:
    """Extra birth weight in a polygon (e.g. a harbour entrance), local frame.

    ``polygon`` is a shapely geometry in local metres; ``arrivals_per_hour``
    is added on top of the uniform arrivals over the covers.
    """

    polygon: Any
    arrivals_per_hour: float
