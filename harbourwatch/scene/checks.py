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

__all__ = ["InputChecks", "input_warnings", "clutter_warnings", "SIGMA_FACTOR", "CLUTTER_FACTOR"]

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


class InputChecks:
    """Plots outside the covers and ``sigma_m`` far from the sensor model, gathered block by block.

    :meth:`add` takes the plots of consecutive rows with their positions in
    the frame; :meth:`warnings` gives the lines :func:`input_warnings` gives
    for all of them at once. Only counts, the nearest range of each sensor
    and the far ``sigma_m`` values are kept, so a long feed is checked in
    blocks of its rows.
    """

    def __init__(self, sensors: Sequence[SensorConfig], models: Sequence[SensorModel]) -> None:
        self.sensors = tuple(sensors)
        self.sites = np.array([m.site for m in models], float).reshape(-1, 2)
        self.ranges = np.array([m.max_range_m for m in models], float)
        k = len(models)
        self.n = 0
        self.in_any = 0
        self.count = np.zeros(k, np.int64)
        self.in_own = np.zeros(k, np.int64)
        self.nearest = np.full(k, np.inf)
        self.given = np.zeros(k, np.int64)
        self.far: list[dict[str, list[NDArray[np.float64]]]] = [
            {"low": [], "low_model": [], "high": [], "high_model": []} for _ in range(k)]

    def add(self, sensor: NDArray[np.int64], sigma: NDArray[np.float64],
            xy: NDArray[np.float64]) -> None:
        """One block of rows: their sensor indices, ``sigma_m`` and ``(n, 2)`` frame positions."""
        if sensor.size == 0:
            return
        self.n += int(sensor.size)
        sites, ranges = self.sites, self.ranges
        rho = np.hypot(xy[:, 0] - sites[sensor, 0], xy[:, 1] - sites[sensor, 1])
        in_any = np.zeros(sensor.size, bool)
        for k in range(len(ranges)):
            in_any |= np.hypot(xy[:, 0] - sites[k, 0], xy[:, 1] - sites[k, 1]) <= ranges[k] * _RANGE_SLACK
        self.in_any += int(np.count_nonzero(in_any))
        in_own = rho <= ranges[sensor] * _RANGE_SLACK
        for k, s in enumerate(self.sensors):
            mine = sensor == k
            if not mine.any():
                continue
            self.count[k] += int(np.count_nonzero(mine))
            self.in_own[k] += int(np.count_nonzero(in_own & mine))
            self.nearest[k] = min(self.nearest[k], float(rho[mine].min()))
            self._sigma(k, s, sigma[mine], rho[mine])

    def _sigma(self, k: int, s: SensorConfig, sigma: NDArray[np.float64],
               rho: NDArray[np.float64]) -> None:
        given = np.isfinite(sigma)
        if not given.any():
            return
        sig, r = sigma[given], rho[given]
        self.given[k] += int(sig.size)
        cross = r * math.radians(s.bearing_sigma_deg)
        lo = np.minimum(s.range_sigma_m, cross)
        hi = np.maximum(s.range_sigma_m, cross)
        low = sig < lo / SIGMA_FACTOR
        high = sig > hi * SIGMA_FACTOR
        far = self.far[k]
        far["low"].append(sig[low])
        far["low_model"].append(lo[low])
        far["high"].append(sig[high])
        far["high_model"].append(hi[high])

    def warnings(self) -> list[str]:
        """The warnings of every row added so far."""
        out: list[str] = []
        if self.n == 0:
            return out
        outside = 1.0 - self.in_any / self.n
        if outside > 0.5:
            out.append(f"{_pct(outside)} of the {self.n} plots lie outside every radar's cover: are "
                       "the sensor positions (lat, lon) and max_range_m right?")
        for k, s in enumerate(self.sensors):
            count = int(self.count[k])
            if count == 0:
                continue
            share = int(self.in_own[k]) / count
            if share < 0.01:
                out.append(f"sensor {s.id!r}: {'none' if share == 0 else _pct(share)} of its "
                           f"{count} plots lie within its cover ({s.max_range_m / 1000:g} km); the "
                           f"nearest is {float(self.nearest[k]) / 1000:,.1f} km from it: a wrong "
                           "sign in its longitude or latitude?")
            out.extend(self._sigma_lines(k, s))
        return out

    def _sigma_lines(self, k: int, s: SensorConfig) -> list[str]:
        size = int(self.given[k])
        if size == 0:
            return []
        far = {key: np.concatenate(v) if v else np.empty(0) for key, v in self.far[k].items()}
        out = []
        for key, word in (("low", "below a third of"), ("high", "above three times")):
            sig, model = far[key], far[f"{key}_model"]
            n = int(sig.size)
            if n and n >= _SIGMA_SHARE * size:
                out.append(
                    f"sensor {s.id!r}: {n} of {size} plots give sigma_m {word} its range/"
                    f"bearing model at their range (median {float(np.median(sig)):.3g} m "
                    f"against {float(np.median(model)):.3g} m): the filter weighs these plots "
                    "by sigma_m; check the feed's sigma_m column and its unit")
        return out


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
    checks = InputChecks(sensors, models)
    checks.add(np.asarray(plots.sensor), np.asarray(plots.sigma_m), xy)
    return checks.warnings()


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
