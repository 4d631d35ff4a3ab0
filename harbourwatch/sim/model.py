"""Invented scenarios with ground truth: vessels on the ellipsoid, rotating radars, clutter.

A scenario is declarative: :class:`VesselPlan` records (a start, then
:class:`Leg` records: straight, turn, speed change, stop, go-to-waypoint)
and :class:`SimSensor` records (a :class:`~harbourwatch.io.records.SensorConfig`
plus simulation-only extras such as outages). :func:`simulate` turns a
:class:`Scenario` and a seed into plots and truth held in columnar arrays;
:func:`simulate_to_dir` writes the contract's files.

Vessel motion is computed on the WGS84 ellipsoid with pyproj's geodesics:
straight legs follow a geodesic (``Geod.fwd`` from the leg's start, distance
integrated from a constant or linearly changing speed), turns are integrated
with chained ``Geod.fwd`` steps of at most 0.5 s. Truth is sampled every
second (plus the exact start and end of each vessel) and interpolated
linearly to plot times; over one second the chord differs from the arc by
less than 0.1 m even in a 3 deg/s turn at 10 m/s.

Radar model (the plot contract's sensor model): the antenna turns clockwise
from north at a constant rate, ``scan_period_s`` per revolution, with a
random phase per sensor; revolution ``k`` points north at ``T_k`` and a
vessel at bearing ``b`` is plotted at ``T_k + (b / 360) * scan_period_s``.
A vessel inside ``max_range_m`` gives a plot with ``detection_probability``;
the measured range and bearing carry independent Gaussian errors and the
plot is placed with ``Geod.fwd`` from the antenna site along the noisy
bearing at the noisy (geodesic) range. A vessel with a hull
(``VesselPlan.length_m > 0``) is plotted with the hull-scatter model of
:mod:`._simengine` (several plots per scan, spread over the hull); a vessel
of length 0 is point-like (at most one plot per scan). Clutter: a Poisson number of false
plots per revolution, uniform over the cover disc.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import ParameterError
from harbourwatch.io.records import SensorConfig

__all__ = [
    "Leg",
    "VesselPlan",
    "SimSensor",
    "Scenario",
    "ScenarioSpec",
    "PlotArrays",
    "VesselTruth",
    "SimulationResult",
]

Array = NDArray[np.float64]

_LEG_KINDS = ("straight", "turn", "speed", "stop", "goto")

# --------------------------------------------------------------------------- plans


@dataclass(frozen=True, kw_only=True)
class Leg:
    """One leg of a vessel's plan. Build with the class methods.

    ``kind`` is one of ``straight`` (keep course and speed for
    ``duration_s``), ``turn`` (turn at ``rate_deg_s``, positive to starboard,
    for ``duration_s``), ``speed`` (change speed linearly to ``speed_kn`` over
    ``duration_s`` while keeping course), ``stop`` (speed 0 for
    ``duration_s`` or until the scenario time ``until_s``) and ``goto`` (turn
    towards the waypoint at ``rate_deg_s`` and follow the geodesic to it at
    ``speed_kn``, or the current speed). ``duration_s=None`` on a final
    straight or stop leg means "until the end of the feed".
    """

    kind: str
    duration_s: float | None = None
    rate_deg_s: float = 3.0
    speed_kn: float | None = None
    lat_deg: float | None = None
    lon_deg: float | None = None
    until_s: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in _LEG_KINDS:
            raise ParameterError(f"leg kind {self.kind!r} is not one of {', '.join(_LEG_KINDS)}", parameter="kind")
        if self.duration_s is not None and self.duration_s < 0:
            raise ParameterError("must be >= 0", parameter="duration_s")
        if self.kind in ("turn", "speed") and self.duration_s is None:
            raise ParameterError(f"a {self.kind} leg needs it", parameter="duration_s")
        if self.kind == "speed" and (self.speed_kn is None or self.speed_kn < 0):
            raise ParameterError("a speed leg needs speed_kn >= 0", parameter="speed_kn")
        if self.kind == "goto" and (self.lat_deg is None or self.lon_deg is None):
            raise ParameterError("a goto leg needs lat_deg and lon_deg", parameter="lat_deg")

    @classmethod
    def straight(cls, duration_s: float | None = None) -> Leg:
        """Keep course and speed (``None``: until the end of the feed)."""
        return cls(kind="straight", duration_s=duration_s)

    @classmethod
    def turn(cls, rate_deg_s: float, duration_s: float) -> Leg:
        """Turn at a constant rate (deg/s, positive clockwise) at constant speed."""
        return cls(kind="turn", rate_deg_s=rate_deg_s, duration_s=duration_s)

    @classmethod
    def turn_by(cls, angle_deg: float, rate_deg_s: float = 3.0) -> Leg:
        """Turn through ``angle_deg`` (positive clockwise) at ``rate_deg_s``."""
        rate = math.copysign(abs(rate_deg_s), angle_deg)
        return cls(kind="turn", rate_deg_s=rate, duration_s=abs(angle_deg) / abs(rate_deg_s))

    @classmethod
    def speed(cls, speed_kn: float, duration_s: float) -> Leg:
        """Change speed linearly to ``speed_kn`` over ``duration_s``."""
        return cls(kind="speed", speed_kn=speed_kn, duration_s=duration_s)

    @classmethod
    def stop(cls, duration_s: float | None = None, *, until_s: float | None = None) -> Leg:
        """Stop for ``duration_s`` or until scenario time ``until_s`` (or the feed end)."""
        return cls(kind="stop", duration_s=duration_s, until_s=until_s)

    @classmethod
    def goto(cls, lat_deg: float, lon_deg: float, speed_kn: float | None = None, *,
             rate_deg_s: float = 3.0) -> Leg:
        """Turn towards a waypoint, then follow the geodesic to it."""
        return cls(kind="goto", lat_deg=lat_deg, lon_deg=lon_deg, speed_kn=speed_kn,
                   rate_deg_s=rate_deg_s)


@dataclass(frozen=True, kw_only=True)
class VesselPlan:
    """A vessel's plan: where and when it appears, then its legs.

    The vessel exists from ``start_time_s`` (seconds from the feed start, may
    be negative: already present) until its legs end, when it vanishes (at a
    berth, or wherever it is; a vessel that leaves the cover simply stops
    giving plots). ``note`` says what the vessel is there to show.
    """

    name: str
    start_time_s: float
    start_lat_deg: float
    start_lon_deg: float
    course_deg: float
    speed_kn: float
    legs: tuple[Leg, ...] = ()
    note: str = ""
    length_m: float = 0.0
    beam_m: float | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "legs", tuple(self.legs))
        if not self.length_m >= 0.0:
            raise ValueError(f"vessel {self.name!r}: length_m must be >= 0")
        if self.beam_m is not None and not 0.0 <= self.beam_m <= self.length_m:
            raise ValueError(f"vessel {self.name!r}: beam_m must lie in [0, length_m]")

    @property
    def hull_beam_m(self) -> float:
        """Beam of the hull: ``beam_m`` or, when not given, a sixth of the length."""
        return self.length_m / 6.0 if self.beam_m is None else float(self.beam_m)


@dataclass(frozen=True, kw_only=True)
class SimSensor:
    """A simulated radar: its configuration and simulation-only extras.

    ``outages_s`` are ``(start, end)`` windows in seconds from the feed start
    with no plots at all. ``noise`` is ``"gaussian"`` (the sensor file's
    sigmas) or ``"arpa"`` (the component error model of ``_scenarios.ARPA``).
    ``emit_sigma_m`` adds a per-plot ``sigma_m`` column.
    """

    config: SensorConfig
    outages_s: tuple[tuple[float, float], ...] = ()
    noise: str = "gaussian"
    emit_sigma_m: bool = False


@dataclass(frozen=True, kw_only=True)
class Scenario:
    """Everything :func:`simulate` needs, plus optional zone and rule files."""

    name: str
    start_epoch_s: float
    duration_s: float
    sensors: tuple[SimSensor, ...]
    vessels: tuple[VesselPlan, ...]
    zones_geojson: str | None = None
    rules_toml: str | None = None


@dataclass(frozen=True, kw_only=True)
class ScenarioSpec:
    """A named scenario: ``build(seed, duration_s)`` returns the :class:`Scenario`."""

    name: str
    description: str
    build: Callable[[int, float | None], Scenario]
    default_seed: int = 1
    default_duration_s: float = 1800.0


# --------------------------------------------------------------------------- results


@dataclass(frozen=True, kw_only=True, eq=False)
class PlotArrays:
    """Simulated plots, columnar, sorted by time then sensor.

    ``vessel`` is the index into :attr:`SimulationResult.truth` or ``-1`` for
    clutter; ``range_error_m``/``bearing_error_deg`` are the errors drawn
    (NaN for clutter); ``true_range_m``/``true_bearing_deg`` the geometry of
    the vessel at the plot time (for clutter: the drawn position).
    """

    time: Array
    sensor: NDArray[np.int64]
    lat_deg: Array
    lon_deg: Array
    scan: NDArray[np.int64]
    vessel: NDArray[np.int64]
    range_error_m: Array
    bearing_error_deg: Array
    true_range_m: Array
    true_bearing_deg: Array
    sigma_m: Array

    def __len__(self) -> int:
        return int(self.time.size)


@dataclass(frozen=True, kw_only=True, eq=False)
class VesselTruth:
    """True track of one vessel, sampled every :data:`TRUTH_STEP_S` within the feed."""

    name: str
    time: Array
    lat_deg: Array
    lon_deg: Array
    v_east_m_s: Array
    v_north_m_s: Array
    speed_m_s: Array
    course_deg: Array
    in_cover: NDArray[np.bool_]
    length_m: float = 0.0
    beam_m: float = 0.0


@dataclass(frozen=True, kw_only=True, eq=False)
class SimulationResult:
    """Output of :func:`simulate`. Times are epoch seconds (UTC).

    ``north_times`` holds, per sensor, the times ``T_k`` at which revolution
    ``k`` points north (scan ``k`` covers ``[T_k, T_k + scan_period_s)``).
    """

    scenario: Scenario
    seed: int
    sensors: tuple[SensorConfig, ...]
    plots: PlotArrays
    truth: tuple[VesselTruth, ...]
    north_times: tuple[Array, ...]

    @property
    def start_epoch_s(self) -> float:
        return self.scenario.start_epoch_s

    @property
    def end_epoch_s(self) -> float:
        return self.scenario.start_epoch_s + self.scenario.duration_s
