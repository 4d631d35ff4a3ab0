"""Sensors, zones, rules and filter settings, parsed and validated once.

Everything a review run is configured with ends up in a frozen dataclass
here. Parsing functions raise :class:`~harbourwatch.errors.InputError` naming
the file, line and field of the first problem found.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

from shapely.geometry.base import BaseGeometry

__all__ = [
    "SensorConfig",
    "ZoneConfig",
    "RuleConfig",
    "FilterSettings",
    "ParamSpec",
    "RuleSchema",
    "RULE_SCHEMAS",
]

@dataclass(frozen=True, kw_only=True)
class SensorConfig:
    """One shore radar, as given in the sensor TOML file."""

    id: str
    lat_deg: float
    lon_deg: float
    scan_period_s: float
    range_sigma_m: float
    bearing_sigma_deg: float
    detection_probability: float
    false_plots_per_scan: float
    max_range_m: float

    @property
    def cover_area_m2(self) -> float:
        """Area of the instrumented cover, a full circle of ``max_range_m``."""
        return math.pi * self.max_range_m**2

    @property
    def clutter_intensity_per_m2(self) -> float:
        """Clutter intensity: false plots per scan spread uniformly over the cover."""
        return self.false_plots_per_scan / self.cover_area_m2


@dataclass(frozen=True, kw_only=True, eq=False)
class ZoneConfig:
    """One geofence zone from the zones GeoJSON.

    ``geometry`` is a valid shapely Polygon or MultiPolygon in WGS84
    longitude/latitude (GeoJSON axis order). ``source`` and ``line`` locate
    the feature in the zones file (for later messages).
    """

    id: str
    name: str
    kind: str
    geometry: BaseGeometry
    source: str = ""
    line: int | None = None

    @property
    def kind_key(self) -> str:
        """The kind as compared everywhere (``land``, ``entrance`` ...): trimmed, lower case."""
        return self.kind.strip().lower()


@dataclass(frozen=True, kw_only=True)
class RuleConfig:
    """One rule from the rules TOML.

    Kind-specific numbers (``min_duration_min``, ``max_speed_kn``,
    ``max_distance_m`` ...) are kept in ``params`` exactly as given (units in
    their names); the rule kind that reads them validates which are required.
    ``line`` is the 1-based line of the rule's ``[[rule]]`` header in
    ``source`` so later validation can still point at it; ``param_lines``
    maps each key of the rule to its own 1-based line.
    """

    id: str
    kind: str
    zone: str | None
    min_probability: float = 0.5
    params: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))
    source: str = ""
    line: int | None = None
    param_lines: Mapping[str, int] = field(default_factory=lambda: MappingProxyType({}))


@dataclass(frozen=True, kw_only=True)
class FilterSettings:
    """Tuning of the trajectory-set filter. Defaults suit harbour traffic.

    Attributes
    ----------
    accel_psd_m2_s3
        Power spectral density ``q`` of the white acceleration of the
        nearly-constant-velocity model, per axis (m^2/s^3), on steady legs.
    manoeuvre_accel_psd_m2_s3
        The higher ``q`` of the manoeuvre mode (turns, speed changes). Each
        trajectory carries the probability of being in that mode; the two
        modes are merged after every plot (GPB1, see ``filter/_motion.py``).
        ``None`` or a value not above ``accel_psd_m2_s3`` gives the plain
        single-mode model.
    manoeuvre_interval_s, manoeuvre_duration_s
        Mean time between manoeuvres and mean length of one (the Markov
        chain of the two modes).
    mean_lifetime_s
        Mean time a vessel stays in the surveillance picture; survival
        probability over ``dt`` is ``exp(-dt / mean_lifetime_s)``.
    arrivals_per_hour
        Expected number of new vessels per hour over all covers together.
    entrance_arrivals_per_hour
        Extra arrivals per hour spread over the zones of kind ``entrance``
        (harbour mouths, where vessels appear), on top of ``arrivals_per_hour``;
        0 (the default) treats every place in cover alike.
    initial_vessels
        Expected number of vessels already present when the feed starts.
    birth_speed_sd_m_s
        Standard deviation of each velocity component of a new vessel.
    gate_probability
        Probability mass inside the ellipsoidal gate (chi-square, 2 dof).
    max_global_hypotheses
        k of the k-best assignment per cluster and cap on kept global hypotheses.
    log_weight_prune
        Global hypotheses whose log-weight is this far below the best are dropped.
    existence_prune
        Bernoullis with existence probability below this are removed.
    existence_threshold
        Estimated trajectories need existence probability above this.
    max_local_hypotheses
        Cap on local hypotheses kept per Bernoulli.
    n_scan
        Track-oriented N-scan pruning depth (scans of the same sensor).
    max_coast_s
        A hypothesis with no new state for this long (outside every cover,
        or its radars silent) is taken as ended.
    max_coast_sd_m
        A hypothesis whose predicted position standard deviation exceeds
        this (m) is taken as ended (it has coasted too long to re-acquire).
    min_empty_scan_clutter
        A scan with no plot at all from a radar expected to give at least
        this many false plots per scan is taken as an outage and skipped.
    as_seen_window_s
        The as-seen view shows a trajectory while its last state is at most
        this old.
    extended_vessels
        Model vessels that give several plots per scan (large ships near the
        radar: plot rate and hull extent, cells of plots). ``False`` gives the
        point-target filter (at most one plot per vessel per scan).
    """

    accel_psd_m2_s3: float = 0.0002
    manoeuvre_accel_psd_m2_s3: float | None = 0.05
    manoeuvre_interval_s: float = 900.0
    manoeuvre_duration_s: float = 60.0
    mean_lifetime_s: float = 4 * 3600.0
    arrivals_per_hour: float = 20.0
    entrance_arrivals_per_hour: float = 0.0
    initial_vessels: float = 20.0
    birth_speed_sd_m_s: float = 5.0
    gate_probability: float = 0.9999
    max_global_hypotheses: int = 20
    log_weight_prune: float = 6.91  # ln 1e3; the methods note suggests 1e-4: see the README tuning table
    existence_prune: float = 1e-4
    existence_threshold: float = 0.5
    max_local_hypotheses: int = 30
    n_scan: int = 4
    max_coast_s: float = 1800.0
    max_coast_sd_m: float = 500.0
    min_empty_scan_clutter: float = 3.0
    as_seen_window_s: float = 15.0
    extended_vessels: bool = True


@dataclass(frozen=True, kw_only=True)
class ParamSpec:
    """One numeric parameter a rule kind accepts (for validation of rules TOML)."""

    name: str
    required: bool = True
    min_value: float = 0.0
    max_value: float = math.inf
    description: str = ""


@dataclass(frozen=True, kw_only=True)
class RuleSchema:
    """What a rule kind accepts: its parameters and whether ``zone`` is required."""

    kind: str
    params: tuple[ParamSpec, ...]
    zone_required: bool = True
    description: str = ""


#: The schema of every known rule kind, by kind name: what the rules TOML
#: accepts. Filled by :func:`harbourwatch.rules.kinds.register_kind` when the
#: kinds are imported (importing any part of harbourwatch imports them), and
#: read by :func:`harbourwatch.io.toml_files.load_rules`, the one place rules
#: are validated.
RULE_SCHEMAS: dict[str, RuleSchema] = {}
