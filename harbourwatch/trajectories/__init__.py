"""The estimated set of all trajectories: records, queries, export.

A :class:`Trajectory` is one vessel's whole estimated path in the run's local
frame, smoothed with the whole feed, together with what is needed to draw
joint samples of it (filtered and one-step predicted moments per state). A
:class:`TrajectorySet` holds every trajectory of a run plus the estimates as
they could be known at each moment (:class:`AsSeenTable`). The export to the
contract's tables (:mod:`._set`) is written chunk by chunk, so that a long
run's tables never exist as one text in memory.
"""

from __future__ import annotations

from harbourwatch.trajectories._records import (
    AsSeenTable,
    SpilledAsSeenTable,
    SpilledTrajectory,
    Trajectory,
    held,
)
from harbourwatch.trajectories._set import (
    AS_SEEN_COLUMNS,
    TRACK_COLUMNS,
    TrajectorySet,
    as_seen_csv_chunks,
    as_seen_csv_text,
    cut_at_antimeridian,
    geojson_chunks,
    tracks_csv_chunks,
    tracks_csv_text,
    trajectories_geojson,
)

__all__ = [
    "Trajectory",
    "SpilledTrajectory",
    "SpilledAsSeenTable",
    "held",
    "TrajectorySet",
    "AsSeenTable",
    "tracks_csv_text",
    "tracks_csv_chunks",
    "as_seen_csv_text",
    "as_seen_csv_chunks",
    "trajectories_geojson",
    "geojson_chunks",
    "cut_at_antimeridian",
    "TRACK_COLUMNS",
    "AS_SEEN_COLUMNS",
]
