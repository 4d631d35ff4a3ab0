"""The filter's result record."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from harbourwatch.trajectories import AsSeenTable, Trajectory

__all__ = ["FilterOutput"]


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
