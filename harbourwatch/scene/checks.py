"""Plausibility of the inputs against each other: one-line warnings, no silent wrong answer.

A run whose inputs disagree (radars placed where their plots are not, per
plot ``sigma_m`` far from the radar's own model, far more or far fewer
unexplained plots than the configured clutter rate) still finishes, but says
so: each check gives at most one line per sensor, shown in the terminal,
kept in ``run.json`` under ``"warnings"`` and shown in the report. The
thresholds are deliberately wide (factors of 3, half of the plots): they
flag inputs that are wrong, not a radar having a bad day.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from harbourwatch.io.feeds import PlotTable
from harbourwatch.io.records import SensorConfig
from harbourwatch.scene.records import SensorModel

__all__ = ["input_warnings", "clutter_warnings", "SIGMA_FACTOR", "CLUTTER_FACTOR"]

#: sigma_m more than this factor below or above the sensor model at the plot's range is far.
SIGMA_FACTOR = 3.0
#: Share of a sensor's plots that must be far before a warning.
_SIGMA_SHARE = 0.01
#: Unused plots more than this factor away from the configured clutter (and beyond three
#: Poisson standard deviations) give a warning.
CLUTTER_FACTOR = 3.0
#: Cover tolerance: a plot up to this much beyond the stated range still counts as in it.
_RANGE_SLACK = 1.05


def _pct(x: float) -> str:
    return f"{100.0 * x:.0f} %"


def input_warnings(plots: PlotTable, sensors: Sequence[SensorConfig],
                   models: Sequence[SensorModel], xy: NDArray[np.float64]) -> list[str]:
    """Warnings about plots outside the covers and ``sigma_m`` far from the sensor model.

    Parameters
    ----------
    plots
        The run's plots; ``xy`` their ``(N, 2)`` positions in the local frame.
    sensors, models
        The radars as configured and in the frame (same order).
    """
    out: list[str] = []
    n = len(plots)
    if n == 0:
        return out
    sites = np.array([m.site for m in models], float)
    ranges = np.array([m.max_range_m for m in models], float)
    own = plots.sensor
    rho = np.hypot(xy[:, 0] - sites[own, 0], xy[:, 1] - sites[own, 1])
    in_any = np.zeros(n, bool)
    for k in range(len(models)):
        in_any |= np.hypot(xy[:, 0] - sites[k, 0], xy[:, 1] - sites[k, 1]) <= ranges[k] * _RANGE_SLACK
    outside = 1.0 - np.count_nonzero(in_any) / n
    if outside > 0.5:
        out.append(f"{_pct(outside)} of the {n} plots lie outside every radar's cover: are the "
                   "sensor positions (lat, lon) and max_range_m right?")
    in_own = rho <= ranges[own] * _RANGE_SLACK
    for k, s in enumerate(sensors):
        mine = own == k
        count = int(np.count_nonzero(mine))
        if count == 0:
            continue
        share = np.count_nonzero(in_own & mine) / count
        if share < 0.01:
            nearest = float(rho[mine].min())
            out.append(f"sensor {s.id!r}: {'none' if share == 0 else _pct(share)} of its "
                       f"{count} plots lie within its cover ({s.max_range_m / 1000:g} km); the "
                       f"nearest is {nearest / 1000:,.1f} km from it: a wrong sign in its "
                       "longitude or latitude?")
        out.extend(_sigma_warning(s, plots.sigma_m[mine], rho[mine]))
    return out


def _sigma_warning(s: SensorConfig, sigma: NDArray[np.float64],
                   rho: NDArray[np.float64]) -> list[str]:
    given = np.isfinite(sigma)
    if not given.any():
        return []
    sig, r = sigma[given], rho[given]
    cross = r * math.radians(s.bearing_sigma_deg)
    lo = np.minimum(s.range_sigma_m, cross)
    hi = np.maximum(s.range_sigma_m, cross)
    low = sig < lo / SIGMA_FACTOR
    high = sig > hi * SIGMA_FACTOR
    out = []
    for mask, word, model in ((low, "below a third of", lo), (high, "above three times", hi)):
        k = int(np.count_nonzero(mask))
        if k and k >= _SIGMA_SHARE * sig.size:
            out.append(
                f"sensor {s.id!r}: {k} of {sig.size} plots give sigma_m {word} its range/"
                f"bearing model at their range (median {float(np.median(sig[mask])):.3g} m "
                f"against {float(np.median(model[mask])):.3g} m): the filter weighs these plots "
                "by sigma_m; check the feed's sigma_m column and its unit")
    return out


def clutter_warnings(plots: PlotTable, sensors: Sequence[SensorConfig],
                     scans_per_sensor: Sequence[int], used: NDArray[np.bool_]) -> list[str]:
    """Warnings where the plots no trajectory used differ far from the configured clutter.

    ``used`` marks the plots (rows of ``plots``) that some estimated
    trajectory used; the rest are taken as clutter and compared with
    ``false_plots_per_scan`` times the sensor's scans (a Poisson count).
    """
    out = []
    for k, s in enumerate(sensors):
        mine = plots.sensor == k
        total = int(np.count_nonzero(mine))
        if total == 0:
            continue
        unused = int(np.count_nonzero(mine & ~used))
        expected = s.false_plots_per_scan * scans_per_sensor[k]
        spread = 3.0 * math.sqrt(max(expected, 1.0))
        far_above = unused > CLUTTER_FACTOR * expected and unused - expected > spread
        far_below = unused < expected / CLUTTER_FACTOR and expected - unused > spread
        if far_above or far_below:
            out.append(
                f"sensor {s.id!r}: {unused} of its {total} plots were used by no trajectory "
                f"({_pct(unused / total)}), where its false_plots_per_scan of "
                f"{s.false_plots_per_scan:g} over {scans_per_sensor[k]} scans gives about "
                f"{expected:.0f}: is the configured clutter rate (or detection_probability) "
                "right?")
    return out
