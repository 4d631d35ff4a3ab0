"""The trajectory Poisson multi-Bernoulli mixture filter for the set of all trajectories.

Inputs are measurement scans already in the local frame; the output is the
estimated set of all trajectories (smoothed with the whole feed) and the
estimates as they could be known scan by scan.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from ..config import FilterSettings

if TYPE_CHECKING:  # trajectories imports the Gaussian toolkit from this package
    from ..trajectories import AsSeenTable, Trajectory

__all__ = ["SensorModel", "MeasurementScan", "FilterOutput", "BirthRegion", "run_filter"]


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


@dataclass(frozen=True, kw_only=True, eq=False)
class FilterOutput:
    """What the filter returns.

    ``stats`` holds figures for run.json and the summary (at least
    ``plots_total``, ``plots_in_trajectories``, ``scans``,
    ``caps_bitten`` (dict name -> count), ``max_bernoullis``,
    ``max_global_hypotheses``). ``log`` holds human-readable notes, one per
    event worth telling (e.g. each kind of cap the first time it bites).
    """

    trajectories: list[Trajectory]
    as_seen: AsSeenTable
    stats: dict[str, Any] = field(default_factory=dict)
    log: list[str] = field(default_factory=list)


def run_filter(
    scans: Sequence[MeasurementScan],
    sensors: Sequence[SensorModel],
    settings: FilterSettings,
    *,
    birth_regions: Sequence[BirthRegion] = (),
    progress: Callable[[int, int], None] | None = None,
) -> FilterOutput:
    """Run the TPMBM filter over all scans (ordered by reference time).

    Trajectory ids are ``"T1"``, ``"T2"``, ... in order of start time (ties by
    east coordinate), so that the same inputs give the same ids.
    """
    from .tpmbm import run_tpmbm  # implementation module

    return run_tpmbm(scans, sensors, settings, birth_regions=birth_regions, progress=progress)
