"""The oracle a review run is measured against: the same filter given the true association.

For each simulated vessel, the filter is run on that vessel's own plots only
(the simulator knows which plot came from which vessel), scan by scan with the
real feed's scans so missed detections count as they do in the real run, and
with a negligible clutter intensity: the same motion model, the same
per-plot covariances and the same smoother, but no clutter and no
association to get wrong. The best a tracker can do with these plots under
this model.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from harbourwatch import FilterSettings, Trajectory, run_filter
from harbourwatch.scene import MeasurementScan, SensorModel


def oracle_trajectories(
    mscans: Sequence[MeasurementScan],
    sensors: Sequence[SensorModel],
    plot_vessel: np.ndarray,
    settings: FilterSettings | None = None,
) -> list[Trajectory]:
    """One smoothed trajectory per true vessel from its own plots.

    ``plot_vessel`` maps each plot-table row to its true vessel (``-1`` for clutter).
    """
    settings = settings or FilterSettings()
    quiet = [replace(s, clutter_intensity=1e-14) for s in sensors]
    out: list[Trajectory] = []
    for v in np.unique(plot_vessel[plot_vessel >= 0]):
        own = []
        for sc in mscans:
            keep = plot_vessel[sc.plot_ids] == v
            own.append(
                MeasurementScan(sensor=sc.sensor, time=sc.time, plot_ids=sc.plot_ids[keep],
                                plot_time=sc.plot_time[keep], z=sc.z[keep], R=sc.R[keep])
            )
        res = run_filter(own, quiet, settings)
        out.extend(replace(t, id=f"O{int(v) + 1}.{t.id}") for t in res.trajectories)
    return out
