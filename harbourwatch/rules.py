"""Zones in the local frame and rule kinds over whole trajectories.

(Interface fixed; implementation in progress.)
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

__all__ = ["Alert"]


@dataclass(frozen=True, kw_only=True)
class Alert:
    """One raised alert: one episode of one rule for one trajectory (or pair).

    ``start``/``end`` are epoch seconds. ``details`` holds kind-specific
    extras in local-frame SI units (e.g. ``entry_time``, ``entry_xy``,
    ``exit_time``, ``exit_xy``, ``closest_time``, ``min_distance_m``), used by
    the reports.
    """

    rule: str
    kind: str
    track: str
    other_track: str
    zone: str
    start: float
    end: float
    probability: float
    summary: str
    details: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))
