"""harbourwatch: after-the-fact review of harbour and coastal radar plots.

Turns raw radar plots into the estimated set of all vessel trajectories,
checks them against geofence rules with a probability on every alert, and
writes offline HTML map reports. Its output supports, and never replaces,
qualified watchkeepers and the competent authority.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .config import FilterSettings, RuleConfig, SensorConfig, ZoneConfig
from .errors import HarbourwatchError, InputError
from .geodesy import LocalFrame
from .trajectories import AsSeenTable, Trajectory, TrajectorySet

__all__ = [
    "__version__",
    "HarbourwatchError",
    "InputError",
    "SensorConfig",
    "ZoneConfig",
    "RuleConfig",
    "FilterSettings",
    "LocalFrame",
    "Trajectory",
    "TrajectorySet",
    "AsSeenTable",
]
