"""Radar health of one chunk, per station: plot rate, clutter, outages, detection probability.

Computed on the worker from what the chunk's review already holds (the
plots, the scans and the estimated trajectories), so no feed is read twice.

* **plots per scan**: the station's plots over its scans.
* **clutter share**: share of its plots used by no estimated trajectory;
  ``false_plots_per_scan`` is the same count per scan, to compare with the
  configured value.
* **outages**: stretches of more than :data:`OUTAGE_PERIODS` scan periods
  without any scan of the station (the same threshold the reports shade),
  inside the span of the chunk's plots: count, total and longest, minutes.
* **estimated detection probability**: over the states of trajectories
  with existence above 0.5 that lie inside the station's instrumented range
  and come from the station's scans, the share that used a plot. The first
  state of every trajectory is a detection by construction, so the estimate
  leans slightly high on short trajectories.

A value is flagged when it drifts from the configuration: ``pd-drift`` when
the estimate differs from the configured detection probability by more than
:data:`PD_TOLERANCE` (with at least :data:`PD_MIN_STATES` states behind it),
``clutter-drift`` when the false plots per scan differ from the configured
rate by more than half of it (and by more than one plot), ``outage`` when
there is any outage, ``silent`` when the station gave no scan at all.
These thresholds are common practice, no source.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.records import SensorConfig
from harbourwatch.trajectories import TrajectorySet

__all__ = ["radar_health", "OUTAGE_PERIODS", "PD_TOLERANCE", "PD_MIN_STATES"]

#: A gap longer than this many scan periods is an outage.
OUTAGE_PERIODS = 3.0
#: Largest accepted difference between estimated and configured detection probability.
PD_TOLERANCE = 0.1
#: Fewest states behind a detection-probability estimate that can raise a flag.
PD_MIN_STATES = 100


def radar_health(plots: PlotTable, scans: Sequence[Scan], sensors: Sequence[SensorConfig],
                 tset: TrajectorySet) -> list[dict[str, Any]]:
    """One record per station (in sensor-file order) of the chunk's radar health."""
    used = np.zeros(len(plots), dtype=bool)
    for tr in tset:
        ids = tr.plot_ids[tr.plot_ids >= 0]
        used[ids[ids < len(plots)]] = True
    span = (float(plots.time.min()), float(plots.time.max())) if len(plots) else (0.0, 0.0)
    scan_sensor = np.array([sc.sensor for sc in scans], dtype=np.int64)
    scan_time = np.array([sc.time for sc in scans], dtype=np.float64)
    e_site, n_site = tset.frame.to_local([s.lat_deg for s in sensors], [s.lon_deg for s in sensors])
    out = []
    for i, cfg in enumerate(sensors):
        mine = plots.sensor == i
        n_plots = int(np.count_nonzero(mine))
        times = np.sort(scan_time[scan_sensor == i])
        n_scans = int(times.size)
        unused = int(np.count_nonzero(mine & ~used))
        outages = _outages(times, span, OUTAGE_PERIODS * cfg.scan_period_s)
        det, total = _detections(tset, i, float(e_site[i]), float(n_site[i]), cfg.max_range_m)
        pd = det / total if total else float("nan")
        fpps = unused / n_scans if n_scans else float("nan")
        flags = []
        if n_scans == 0:
            flags.append("silent")
        if outages:
            flags.append("outage")
        if total >= PD_MIN_STATES and abs(pd - cfg.detection_probability) > PD_TOLERANCE:
            flags.append("pd-drift")
        if n_scans and abs(fpps - cfg.false_plots_per_scan) > max(0.5 * cfg.false_plots_per_scan, 1.0):
            flags.append("clutter-drift")
        out.append({
            "sensor": cfg.id,
            "scans": n_scans,
            "plots": n_plots,
            "plots_per_scan": n_plots / n_scans if n_scans else float("nan"),
            "clutter_share": unused / n_plots if n_plots else float("nan"),
            "false_plots_per_scan": fpps,
            "false_plots_per_scan_configured": cfg.false_plots_per_scan,
            "outages": len(outages),
            "outage_min": sum(outages) / 60.0,
            "longest_outage_min": max(outages, default=0.0) / 60.0,
            "pd_estimated": pd,
            "pd_configured": cfg.detection_probability,
            "pd_states": total,
            "flags": ",".join(flags),
        })
    return out


def _outages(times: np.ndarray, span: tuple[float, float], limit_s: float) -> list[float]:
    """Lengths (s) of the gaps longer than ``limit_s`` between scans, span edges included."""
    if span[1] <= span[0]:
        return []
    edges = np.concatenate(([span[0]], times, [span[1]]))
    gaps = np.diff(edges)
    return [float(g) for g in gaps if g > limit_s]


def _detections(tset: TrajectorySet, sensor: int, e: float, n: float, max_range_m: float
                ) -> tuple[int, int]:
    det = total = 0
    for tr in tset:
        if tr.existence <= 0.5 or tr.sensor_ids.size != tr.time.size:
            continue
        r = np.hypot(tr.mean[:, 0] - e, tr.mean[:, 2] - n)
        sel = (tr.sensor_ids == sensor) & (r <= max_range_m)
        total += int(np.count_nonzero(sel))
        det += int(np.count_nonzero(sel & (tr.plot_ids >= 0)))
    return det, total
