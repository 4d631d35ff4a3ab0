"""Numbers behind the reports: drawn geometry, replay data, zone visits, scan gaps.

Everything here works on the run's arrays and returns plain numbers or lists;
no HTML. Drawn lines are simplified in the local frame (Douglas-Peucker,
:data:`SIMPLIFY_TOLERANCE_M`); the replay is resampled to
:data:`REPLAY_STEP_S`. Neither touches the CSV outputs.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray

from harbourwatch.io.feeds import Scan
from harbourwatch.io.records import SensorConfig, ZoneConfig
from harbourwatch.report._hull import encode_headings, true_headings
from harbourwatch.trajectories import Trajectory, TrajectorySet, held

__all__ = [
    "SIMPLIFY_TOLERANCE_M",
    "REPLAY_STEP_S",
    "REPLAY_MAX_POSITIONS",
    "replay_step",
    "TRAIL_S",
    "GAP_SCAN_PERIODS",
    "track_latlon",
    "replay_payload",
    "ZoneVisits",
    "zone_visits",
    "vessels_present",
    "ScanSeries",
    "scan_series",
    "state_index",
]

#: Tolerance of the line simplification of drawn trajectories, metres.
SIMPLIFY_TOLERANCE_M = 5.0
#: Time step of the replay data, seconds.
REPLAY_STEP_S = 10.0
#: Most positions of the overview's hindsight replay at :data:`REPLAY_STEP_S` (a day of a
#: busy harbour: about 350,000). A longer feed is replayed in coarser steps, the smallest
#: whole multiple of :data:`REPLAY_STEP_S` that keeps within it (the as-seen replay takes
#: the same steps), so that the page and the memory to build it stay bounded at any length
#: of feed; the tables keep every state.
REPLAY_MAX_POSITIONS = 600_000
#: Length of the replay trail behind each vessel marker, seconds.
TRAIL_S = 300.0
#: A radar with no scan for more than this many scan periods is shown as out.
GAP_SCAN_PERIODS = 3.0
#: As-seen estimates further apart than this many replay steps are not joined.
AS_SEEN_MAX_GAP_STEPS = 3

Array = NDArray[np.float64]


def track_latlon(ts: TrajectorySet, traj: Trajectory, *, simplify: bool = True) -> Array:
    """``(K, 2)`` lat/lon of the drawn line of ``traj`` (simplified in the local frame)."""
    xy = traj.position
    if simplify and xy.shape[0] > 2:
        line = shapely.LineString(xy).simplify(SIMPLIFY_TOLERANCE_M, preserve_topology=False)
        xy = np.asarray(line.coords, float)
    lat, lon = ts.frame.to_wgs84(xy[:, 0], xy[:, 1])
    return np.column_stack([lat, lon])


def _encode(step: NDArray[np.int64], lat: Array, lon: Array) -> list[int]:
    """Delta-encode ``(step, lat*1e5, lon*1e5)`` triples as one flat int list."""
    q = np.column_stack([step, np.round(lat * 1e5), np.round(lon * 1e5)]).astype(np.int64)
    d = np.diff(q, axis=0, prepend=np.zeros((1, 3), np.int64))
    return [int(v) for v in d.ravel()]


def replay_step(ts: TrajectorySet, max_positions: int = REPLAY_MAX_POSITIONS) -> float:
    """The replay's time step: :data:`REPLAY_STEP_S`, or the smallest whole multiple of it
    that keeps the hindsight replay within about ``max_positions`` positions."""
    t0, step = ts.feed_start, REPLAY_STEP_S
    n = 0
    for tr in ts.trajectories:
        k0 = int(np.ceil((tr.start - t0) / step - 1e-9))
        k1 = int(np.floor((tr.end - t0) / step + 1e-9))
        n += max(k1 - k0 + 1, 0) + 2  # the grid inside its span, its first and last state
    return step * max(1, int(np.ceil(n / max(max_positions, 1))))


def replay_payload(ts: TrajectorySet, step: float | None = None) -> dict[str, object]:
    """Compact replay data: per track, delta-encoded ``[t_s, lat_e5, lon_e5]`` triples.

    ``t_s`` is whole seconds since ``feed_start``; ``lat_e5``/``lon_e5`` are
    degrees times 1e5 rounded. The first triple is absolute, each later one
    the difference to the previous.

    ``hindsight`` holds the smoothed tracks linearly interpolated to a grid
    of ``step`` seconds (from ``feed_start``; default :func:`replay_step`)
    inside each track's span.
    ``as_seen`` holds, per track id, the last as-seen estimate in each grid
    step (no interpolation; the page does not join points further apart
    than ``max_gap`` seconds). Coordinates are kept to 5 decimals (about 1 m).

    Only large vessels (a trajectory with a :attr:`~Trajectory.size`) carry
    the hull outline's fields (:mod:`._hull`): ``h``, the outline's heading
    at each sample (whole degrees true, delta-encoded modulo 360); in
    ``hindsight`` also ``hull``, ``[length_m, beam_m]`` of the estimate; in
    ``as_seen`` (the same id as a large trajectory) ``len``, the hull length
    as known at each sample in whole metres (``0``: not yet judged extended;
    delta-encoded like the positions) and ``bl``, the estimate's
    beam-to-length ratio.
    """
    t0 = ts.feed_start
    step = replay_step(ts) if step is None else step
    hind: list[dict[str, object]] = []
    for tr in map(held, ts.trajectories):
        k0 = int(np.ceil((tr.start - t0) / step - 1e-9))
        k1 = int(np.floor((tr.end - t0) / step + 1e-9))
        ks = np.arange(k0, k1 + 1, dtype=np.int64)
        tg = t0 + ks * step
        # always keep the exact first and last state so short tracks show up
        tq = np.unique(np.concatenate([[tr.start], tg, [tr.end]]))
        kq = np.round(tq - t0).astype(np.int64)  # whole seconds from t0
        e = np.interp(tq, tr.time, tr.mean[:, 0])
        n = np.interp(tq, tr.time, tr.mean[:, 2])
        lat, lon = ts.frame.to_wgs84(e, n)
        keep = np.concatenate([[True], np.diff(kq) > 0])
        entry: dict[str, object] = {"id": tr.id, "p": _encode(kq[keep], lat[keep], lon[keep]),
                                    "live": bool(tr.alive_at_end)}
        sz = tr.size
        if sz is not None:  # a large vessel: its hull outline
            ve = np.interp(tq, tr.time, tr.mean[:, 1])
            vn = np.interp(tq, tr.time, tr.mean[:, 3])
            hd, _ = true_headings(ts.frame, e[keep], n[keep], ve[keep], vn[keep], sz[2])
            entry["hull"] = [round(sz[0], 1), round(sz[1], 1)]
            entry["h"] = encode_headings(hd)
        hind.append(entry)
    return {
        "t0": t0,
        "t1": ts.feed_end,
        "step": step,
        "trail": TRAIL_S,
        "max_gap": AS_SEEN_MAX_GAP_STEPS * step,
        "hindsight": hind,
        "as_seen": _as_seen_payload(ts, step),
    }


def _last_in_step(k: NDArray[np.int64]) -> NDArray[np.bool_]:
    """Rows (in time order) that are the last of their replay step."""
    return np.concatenate([k[1:] != k[:-1], [True]])


def _as_seen_payload(ts: TrajectorySet, step: float) -> list[dict[str, object]]:
    """The ``as_seen`` part of :func:`replay_payload`, read one block of the table at a time.

    The table is in time order, so each track's rows of a block are in time
    order: keeping the last row of each step per block, then again over the
    kept rows of all blocks, keeps the last row of each step. Only those
    rows are held (a spilled table is never in memory whole).
    """
    t0 = ts.feed_start
    sized = {tr.id: tr for tr in ts.trajectories if tr.extent is not None}
    kept: dict[str, list[tuple[NDArray[Any], ...]]] = {}
    for b in ts.as_seen.blocks():
        lat, lon = ts.frame.to_wgs84(b.mean[:, 0], b.mean[:, 2])
        kstep = np.floor((b.time - t0) / step + 1e-9).astype(np.int64)
        ids, inv = np.unique(np.asarray(b.track).astype(str), return_inverse=True)
        by_track = np.argsort(inv, kind="stable")  # each track's rows, in time order
        cuts = np.searchsorted(inv[by_track], np.arange(ids.size + 1))
        for g, tid in enumerate(ids.tolist()):
            rows = by_track[cuts[g] : cuts[g + 1]]
            r = rows[_last_in_step(kstep[rows])]
            part: tuple[NDArray[Any], ...] = (kstep[r], lat[r], lon[r])
            if tid in sized and b.length is not None:
                part += (b.length[r], b.mean[r])
            kept.setdefault(tid, []).append(part)
    seen: list[dict[str, object]] = []
    for tid in sorted(kept):
        cols = [np.concatenate(c) for c in zip(*kept.pop(tid), strict=True)]
        last = _last_in_step(cols[0])
        cols = [c[last] for c in cols]
        entry: dict[str, object] = {
            "id": tid, "p": _encode(np.round(cols[0] * step).astype(np.int64), cols[1], cols[2])}
        if len(cols) == 5:
            entry.update(_as_seen_hull(ts, sized[tid], cols[3], cols[4]))
        seen.append(entry)
    return seen


def _as_seen_hull(ts: TrajectorySet, tr: Trajectory, length: Array, m: Array) -> dict[str, object]:
    """As-seen outline fields of one vessel: the length as known then (0: not yet judged
    extended), the final estimate's beam-to-length ratio, headings from the filtered state."""
    sz = tr.size
    if sz is None or not np.isfinite(length).any():
        return {}
    hd, _ = true_headings(ts.frame, m[:, 0], m[:, 2], m[:, 1], m[:, 3], sz[2])
    whole = np.round(np.nan_to_num(length, nan=0.0)).astype(np.int64)
    return {"len": [int(v) for v in np.diff(whole, prepend=0)],
            "bl": round(sz[1] / sz[0], 3), "h": encode_headings(hd)}


@dataclass(frozen=True)
class ZoneVisits:
    """Visits of trajectories to one zone: one entry per contiguous inside run."""

    zone: ZoneConfig
    track: tuple[str, ...]
    start: tuple[float, ...]
    end: tuple[float, ...]

    @property
    def durations_min(self) -> list[float]:
        return [(b - a) / 60.0 for a, b in zip(self.start, self.end, strict=True)]


def zone_visits(ts: TrajectorySet, zones: Sequence[ZoneConfig],
                latlon: dict[str, Array] | None = None) -> list[ZoneVisits]:
    """Inside runs of every trajectory's smoothed states, per non-land zone.

    A visit starts at the first state inside and ends at the last state
    inside of a run (state resolution, no interpolation of the crossing).
    One trajectory's positions at a time (each is tested against every zone).
    """
    wanted = [z for z in zones if z.kind_key != "land"]
    for z in wanted:
        shapely.prepare(z.geometry)
    found: list[tuple[list[str], list[float], list[float]]] = [([], [], []) for _ in wanted]
    for tr in map(held, ts.trajectories):
        if latlon is not None and tr.id in latlon:
            ll = latlon[tr.id]
        else:
            lat, lon = ts.frame.to_wgs84(tr.mean[:, 0], tr.mean[:, 2])
            ll = np.column_stack([lat, lon])
        for z, (tracks, starts, ends) in zip(wanted, found, strict=True):
            inside = shapely.contains_xy(z.geometry, ll[:, 1], ll[:, 0])
            if not inside.any():
                continue
            edges = np.diff(np.concatenate([[0], inside.astype(np.int8), [0]]))
            t = tr.time
            for a, b in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1,
                            strict=True):
                tracks.append(tr.id)
                starts.append(float(t[a]))
                ends.append(float(t[b]))
    return [ZoneVisits(z, tuple(tracks), tuple(starts), tuple(ends))
            for z, (tracks, starts, ends) in zip(wanted, found, strict=True)]


def vessels_present(ts: TrajectorySet, step_s: float = 60.0,
                    max_points: int = 20_000) -> tuple[Array, Array]:
    """Count of trajectories spanning each time of a ``step_s`` grid over the feed.

    The step grows beyond ``step_s`` when the feed is so long (gaps allowed by
    ``--allow-gaps``) that the grid would hold more than ``max_points``.
    """
    step_s = max(step_s, (ts.feed_end - ts.feed_start) / max_points)
    t = np.arange(ts.feed_start, ts.feed_end + 1e-9, step_s)
    if t.size == 0:
        t = np.array([ts.feed_start])
    starts = np.sort([tr.start for tr in ts.trajectories])
    ends = np.sort([tr.end for tr in ts.trajectories])
    n = np.searchsorted(starts, t, side="right") - np.searchsorted(ends, t, side="left")
    return t, n.astype(float)


@dataclass(frozen=True)
class ScanSeries:
    """Plots per scan of one radar, binned for drawing, and its outages."""

    sensor: SensorConfig
    t: Array  # bin centres
    mean_plots: Array  # NaN where a bin has no scan
    n_scans: int
    gaps: list[tuple[float, float]]


def scan_series(scans: Sequence[Scan], sensors: Sequence[SensorConfig], t0: float, t1: float,
                max_bins: int = 360) -> list[ScanSeries]:
    """Per sensor: mean plots per scan in up to ``max_bins`` bins, and gaps.

    A gap is a stretch longer than :data:`GAP_SCAN_PERIODS` scan periods
    with no scan, including before the first and after the last scan of the
    sensor within ``[t0, t1]``.
    """
    out: list[ScanSeries] = []
    span = max(t1 - t0, 1.0)
    for si, s in enumerate(sensors):
        ts = np.array([sc.time for sc in scans if sc.sensor == si], float)
        npl = np.array([sc.plots.size for sc in scans if sc.sensor == si], float)
        order = np.argsort(ts, kind="stable")
        ts, npl = ts[order], npl[order]
        limit = GAP_SCAN_PERIODS * s.scan_period_s
        edges_t = np.concatenate([[t0], ts, [t1]])
        d = np.diff(edges_t)
        gaps = [(float(edges_t[i]), float(edges_t[i + 1])) for i in np.flatnonzero(d > limit)]
        nb = int(min(max_bins, max(1, np.ceil(span / s.scan_period_s))))
        bins = np.linspace(t0, t1, nb + 1)
        idx = np.clip(np.searchsorted(bins, ts, side="right") - 1, 0, nb - 1)
        cnt = np.bincount(idx, minlength=nb).astype(float)
        tot = np.bincount(idx, weights=npl, minlength=nb)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(cnt > 0, tot / np.maximum(cnt, 1), np.nan)
        out.append(ScanSeries(s, 0.5 * (bins[:-1] + bins[1:]), mean, int(ts.size), gaps))
    return out


def state_index(traj: Trajectory, t: float) -> int:
    """Index of the state of ``traj`` nearest in time to ``t``."""
    i = int(np.searchsorted(traj.time, t))
    if i <= 0:
        return 0
    if i >= traj.time.size:
        return traj.time.size - 1
    return i if traj.time[i] - t < t - traj.time[i - 1] else i - 1
