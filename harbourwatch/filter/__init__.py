"""The trajectory Poisson multi-Bernoulli mixture filter for the set of all trajectories.

Inputs are measurement scans already in the local frame; the output is the
estimated set of all trajectories (smoothed with the whole feed) and the
estimates as they could be known scan by scan.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

from harbourwatch.filter._kernels import warm_up
from harbourwatch.filter.output import FilterOutput
from harbourwatch.filter.tpmbm import run_tpmbm
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.spill import SpillStore
from harbourwatch.scene.records import BirthRegion, MeasurementScan, SensorModel

__all__ = ["FilterOutput", "run_filter", "warm_up"]


def run_filter(
    scans: Sequence[MeasurementScan],
    sensors: Sequence[SensorModel],
    settings: FilterSettings,
    *,
    birth_regions: Sequence[BirthRegion] = (),
    progress: Callable[[int, int], None] | None = None,
    spill: SpillStore | None = None,
) -> FilterOutput:
    """Run the TPMBM filter over all scans (ordered by reference time).

    Trajectory ids are ``"T1"``, ``"T2"``, ... in order of start time (ties by
    east coordinate), so that the same inputs give the same ids. With
    ``spill``, each trajectory finished long before the end of the feed has
    its arrays written to that store as soon as it is estimated and comes
    back as a :class:`~harbourwatch.trajectories.SpilledTrajectory` (same
    values; memory no longer grows with the feed's length); the store must
    stay open while the output is used.
    """
    return run_tpmbm(scans, sensors, settings, birth_regions=birth_regions, progress=progress,
                     spill=spill)
