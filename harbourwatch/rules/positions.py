"""Where an alert happened: its key point, start and end, and every event point, in WGS84.

The reports and ``alerts.csv`` tell the places of an alert from here, so a
position in a table, a page and the CSV is always the same number.

Positions are taken from the smoothed trajectory: the state at the event
time, or the linear interpolation between the two states around it (the
second vessel of a rendezvous is interpolated onto the first one's state
times when the rule is evaluated, so its point is interpolated here too).
The uncertainty ``sd_m`` is the trajectory's 1-sigma position uncertainty
at that time (square root of the mean of the two principal variances, as
in ``tracks.csv``).

The key point of an alert, by kind (the ``lat``/``lon`` of ``alerts.csv``):

* ``pass-through``, ``entry``: the entry (first state inside the zone);
* ``speed``: the point of the maximum speed;
* ``rendezvous``: the meeting point, halfway between the two vessels at the
  closest approach (its ``sd_m`` treats the two estimates as independent);
* ``loiter`` and any other kind: the start of the episode.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from harbourwatch.trajectories import Trajectory, TrajectorySet

if TYPE_CHECKING:
    from harbourwatch.rules.evaluate import Alert

__all__ = ["EventPoint", "AlertPositions", "alert_positions", "POSITION_COLUMNS"]

#: Optional position columns of ``alerts.csv``, in order (after the contract's columns).
POSITION_COLUMNS = ("lat", "lon", "start_lat", "start_lon", "end_lat", "end_lon", "sd_m")


@dataclass(frozen=True, kw_only=True)
class EventPoint:
    """One told position: what happened there, when, where, and how sure.

    ``sd_m`` is the 1-sigma position uncertainty in metres; ``track`` the
    trajectory the point lies on (empty for a rendezvous meeting point).
    """

    label: str
    time: float
    lat: float
    lon: float
    sd_m: float
    track: str


@dataclass(frozen=True, kw_only=True)
class AlertPositions:
    """The key point, the start and end, and all event points of one alert, in time order."""

    key: EventPoint
    start: EventPoint
    end: EventPoint
    points: tuple[EventPoint, ...]


def _moments_at(tr: Trajectory, t: float) -> tuple[float, float, float]:
    """East, north and 1-sigma position sd of ``tr`` at ``t`` (linear between states)."""
    tt = np.clip(t, tr.time[0], tr.time[-1])
    e = float(np.interp(tt, tr.time, tr.mean[:, 0]))
    n = float(np.interp(tt, tr.time, tr.mean[:, 2]))
    var = float(np.interp(tt, tr.time, tr.position_sd ** 2))
    return e, n, float(np.sqrt(max(var, 0.0)))


def _point(ts: TrajectorySet, tr: Trajectory, label: str, t: float) -> EventPoint:
    e, n, sd = _moments_at(tr, t)
    lat, lon = ts.frame.to_wgs84([e], [n])
    return EventPoint(label=label, time=float(t), lat=float(lat[0]), lon=float(lon[0]),
                      sd_m=sd, track=tr.id)


def _detail_time(a: Alert, key: str) -> float | None:
    d = a.details or {}
    v = d.get(key)
    if v is None:
        return None
    v = float(v)
    return v if np.isfinite(v) else None


def alert_positions(a: Alert, ts: TrajectorySet) -> AlertPositions | None:
    """Every told position of alert ``a``; ``None`` when its trajectory is not in ``ts``."""
    try:
        tr = ts.by_id(a.track)
    except KeyError:
        return None
    if tr.time.size == 0:
        return None
    other: Trajectory | None = None
    if a.other_track:
        try:
            other = ts.by_id(a.other_track)
        except KeyError:
            other = None
    start = _point(ts, tr, "start", a.start)
    end = _point(ts, tr, "end", a.end)
    points = [start]
    key = start
    kind = a.kind.strip().lower()
    entry_t, exit_t = _detail_time(a, "entry_time"), _detail_time(a, "exit_time")
    if kind in ("pass-through", "entry") and entry_t is not None:
        key = _point(ts, tr, "entry", entry_t)
        points.append(key)
        if exit_t is not None:
            points.append(_point(ts, tr, "exit", exit_t))
    max_t = _detail_time(a, "max_speed_time")
    if kind == "speed" and max_t is not None:
        key = _point(ts, tr, "maximum speed", max_t)
        points.append(key)
    close_t = _detail_time(a, "closest_time")
    if kind == "rendezvous" and close_t is not None:
        mine = _point(ts, tr, "closest approach", close_t)
        points.append(mine)
        if other is not None:
            theirs = _point(ts, other, "closest approach", close_t)
            e1, n1, sd1 = _moments_at(tr, close_t)
            e2, n2, sd2 = _moments_at(other, close_t)
            lat, lon = ts.frame.to_wgs84([0.5 * (e1 + e2)], [0.5 * (n1 + n2)])
            key = EventPoint(label="meeting point", time=close_t, lat=float(lat[0]),
                             lon=float(lon[0]), sd_m=0.5 * float(np.hypot(sd1, sd2)), track="")
            points += [theirs, key]
        else:
            key = mine
    points.append(end)
    order = sorted(range(len(points)), key=lambda i: (points[i].time, i))
    return AlertPositions(key=key, start=start, end=end, points=tuple(points[i] for i in order))
