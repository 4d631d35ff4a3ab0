"""The estimated set of all trajectories: records, queries, export.

A :class:`Trajectory` is one vessel's whole estimated path in the run's local
frame, smoothed with the whole feed, together with what is needed to draw
joint samples of it (filtered and one-step predicted moments per state). A
:class:`TrajectorySet` holds every trajectory of a run plus the estimates as
they could be known at each moment (:class:`AsSeenTable`).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.models.gaussian import ffbs_sample
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.units import KNOT_M_S

__all__ = [
    "Trajectory",
    "TrajectorySet",
    "AsSeenTable",
    "tracks_csv_text",
    "as_seen_csv_text",
    "trajectories_geojson",
    "cut_at_antimeridian",
    "TRACK_COLUMNS",
    "AS_SEEN_COLUMNS",
]

Array = NDArray[np.float64]


@dataclass(frozen=True, kw_only=True, eq=False)
class Trajectory:
    """One estimated vessel trajectory (local frame, SI units).

    Attributes
    ----------
    id
        Trajectory id, unique in the run (``"T12"``).
    time
        ``(T,)`` state times, epoch seconds, strictly increasing. A state is
        stamped with its plot's own time where a plot was used, else with
        the scan's reference time.
    mean, cov
        ``(T, 4)``, ``(T, 4, 4)`` smoothed state ``[p_e, v_e, p_n, v_n]``.
    filt_mean, filt_cov, pred_mean, pred_cov
        Filtered moments and one-step predictions to each state time
        (``pred_*[0]`` is a copy of ``filt_*[0]``), for joint sampling.
    existence
        Probability that this trajectory exists (is a vessel, not clutter).
    end_probability
        Probability, given existence, that it ended at the chosen last state
        (for a vessel still present at the end of the feed: that it is alive
        at the last scan).
    alive_at_end
        True when the most likely end time is the feed's last scan that
        covers it, i.e. the vessel is still present.
    plot_ids
        ``(T,)`` row index into the run's plot table of the plot used at
        each state, ``-1`` for a missed detection.
    sensor_ids
        ``(T,)`` sensor index of the scan behind each state.
    extent
        Plot rate and hull extent of an extended vessel at its last state,
        ``(α, β, v, V00, V01, V11)``: rate ``Gam(α, β)``, extent
        ``scipy.stats.invwishart(df=v, scale=V)`` (mean ``V / (v - 3)``);
        ``None`` for a point-like vessel. See :attr:`size`.
    """

    id: str
    time: Array
    mean: Array
    cov: Array
    filt_mean: Array
    filt_cov: Array
    pred_mean: Array
    pred_cov: Array
    existence: float
    end_probability: float = 1.0
    alive_at_end: bool = False
    plot_ids: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, np.int64))
    sensor_ids: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, np.int64))
    extent: tuple[float, ...] | None = None

    @property
    def size(self) -> tuple[float, float, float, float] | None:
        """``(length_m, beam_m, heading_deg, plots_per_scan)``, or None for a point-like vessel.

        For a uniform ellipse of shape ``X`` the semi-axes are the square
        roots of ``X``'s eigenvalues: length ``2 sqrt(λ_max(E[X]))``, beam
        ``2 sqrt(λ_min(E[X]))``; heading is the main axis' direction (degrees
        true, 0-180); the plot rate is the gamma mean ``α / β``.
        """
        if self.extent is None:
            return None
        from harbourwatch.models.extent import hull_size

        a, b, v, v00, v01, v11 = self.extent
        length, beam, heading = hull_size(v, np.array([[v00, v01], [v01, v11]]))
        return length, beam, heading, a / b

    @property
    def start(self) -> float:
        """Time of the first state (epoch s)."""
        return float(self.time[0])

    @property
    def end(self) -> float:
        """Time of the last state (epoch s)."""
        return float(self.time[-1])

    @property
    def position(self) -> Array:
        """``(T, 2)`` smoothed east/north positions."""
        return self.mean[:, [0, 2]]

    @property
    def velocity(self) -> Array:
        """``(T, 2)`` smoothed east/north velocities."""
        return self.mean[:, [1, 3]]

    @property
    def speed(self) -> Array:
        """``(T,)`` smoothed speed over ground, m/s."""
        return np.hypot(self.mean[:, 1], self.mean[:, 3])

    @property
    def position_sd(self) -> Array:
        """``(T,)`` root of the mean of the two principal position variances, m."""
        return np.sqrt(0.5 * (self.cov[:, 0, 0] + self.cov[:, 2, 2]))

    def sample(self, rng: np.random.Generator, n: int) -> Array:
        """``n`` joint draws of the whole trajectory, shape ``(n, T, 4)`` (FFBS)."""
        return ffbs_sample(
            rng, n, self.time, self.filt_mean, self.filt_cov, self.pred_mean, self.pred_cov
        )


@dataclass(frozen=True, kw_only=True, eq=False)
class AsSeenTable:
    """Estimates as they could be known when each scan was processed.

    One row per (scan, trajectory): the filtered state of each Bernoulli of
    the best global hypothesis whose existence is above the threshold and
    whose most likely end is the current scan; rows sorted by (time, track).
    Never used by the rules.
    """

    time: Array  # (N,) scan reference time, epoch s
    track: NDArray[np.str_]  # (N,) trajectory id (same ids as the hindsight set where they match)
    mean: Array  # (N, 4)
    sd: Array  # (N,) position sd, m
    existence: Array  # (N,)
    length: Array | None = None  # (N,) hull length as known then, m (NaN: point-like); optional

    @classmethod
    def empty(cls) -> AsSeenTable:
        return cls(
            time=np.zeros(0),
            track=np.zeros(0, dtype="<U16"),
            mean=np.zeros((0, 4)),
            sd=np.zeros(0),
            existence=np.zeros(0),
        )


@dataclass(frozen=True, kw_only=True, eq=False)
class TrajectorySet:
    """All trajectories of one run, plus the as-seen estimates."""

    trajectories: tuple[Trajectory, ...]
    frame: LocalFrame
    as_seen: AsSeenTable
    feed_start: float
    feed_end: float

    def __len__(self) -> int:
        return len(self.trajectories)

    def tracks_csv(self) -> str:
        """The contract's ``tracks.csv`` text of this set."""
        return tracks_csv_text(self)

    def __iter__(self) -> Iterator[Trajectory]:
        return iter(self.trajectories)

    def by_id(self, track_id: str) -> Trajectory:
        """The trajectory with this id (``KeyError`` if absent)."""
        for t in self.trajectories:
            if t.id == track_id:
                return t
        raise KeyError(track_id)


# --------------------------------------------------------------------------- export


TRACK_COLUMNS = ("track", "time", "lat", "lon", "sog_kn", "cog_deg", "sd_m", "existence")
SIZE_COLUMNS = ("length_m", "beam_m", "heading_deg", "plots_per_scan")
AS_SEEN_COLUMNS = ("time", "track", "lat", "lon", "sog_kn", "cog_deg", "sd_m", "existence")


def _sog_cog(frame: LocalFrame, mean: Array) -> tuple[Array, Array, Array, Array]:
    """Latitude, longitude, SOG (kn) and COG (deg true) of local states ``(N, 4)``."""
    lat, lon = frame.to_wgs84(mean[:, 0], mean[:, 2])
    sog = np.hypot(mean[:, 1], mean[:, 3]) / KNOT_M_S
    grid_course = np.arctan2(mean[:, 1], mean[:, 3])
    conv = frame.grid_convergence_rad(mean[:, 0], mean[:, 2], latlon=(lat, lon))
    cog = np.degrees(grid_course + conv) % 360.0
    cog = np.where(np.round(cog, 1) >= 360.0, 0.0, cog)
    return lat, lon, sog, cog


def _csv_text(header: tuple[str, ...], columns: list[Any], decimals: list[int | None]) -> str:
    """CSV text of numeric and string columns, numbers rounded to ``decimals``.

    Written by pyarrow's CSV writer (fast on a million rows): each number is
    rounded, then printed in its shortest exact form (``12.5`` rather than
    ``12.50``), so the same inputs always give the same bytes.
    """
    import pyarrow as pa
    import pyarrow.csv as pacsv

    arrays = []
    for col, d in zip(columns, decimals, strict=True):
        if d is None:  # text: from a plain list (much faster than from numpy strings)
            text = col if isinstance(col, list) else np.asarray(col).astype(str).tolist()
            arrays.append(pa.array(text, pa.string()))
        else:
            arrays.append(pa.array(np.round(np.asarray(col, dtype=float), d) + 0.0))  # no -0
    table = pa.table(arrays, names=list(header))
    sink = pa.BufferOutputStream()
    pacsv.write_csv(
        table, sink, pacsv.WriteOptions(include_header=True, quoting_style="none")
    )
    return sink.getvalue().to_pybytes().decode("utf-8")


def tracks_csv_text(tset: TrajectorySet) -> str:
    """The contract's ``tracks.csv`` for a trajectory set (rows by track, then time).

    Track ids are plain ``T<n>`` strings, so no CSV quoting is ever needed.
    """
    from harbourwatch.io.timefmt import format_utc_list

    ts = tset.trajectories
    if not ts:
        return ",".join(TRACK_COLUMNS) + "\n"
    mean = np.concatenate([t.mean for t in ts])
    lat, lon, sog, cog = _sog_cog(tset.frame, mean)
    columns = [
        np.concatenate([np.full(t.time.size, t.id) for t in ts]),
        format_utc_list(np.concatenate([t.time for t in ts])),
        lat,
        lon,
        sog,
        cog,
        np.concatenate([t.position_sd for t in ts]),
        np.concatenate([np.full(t.time.size, t.existence) for t in ts]),
    ]
    header: tuple[str, ...] = TRACK_COLUMNS
    decimals: list[int | None] = [None, None, 7, 7, 2, 1, 1, 4]
    if any(t.extent is not None for t in ts):  # optional size columns (README)
        sizes = [t.size for t in ts]
        for k, (_name, fmt) in enumerate(zip(SIZE_COLUMNS, ("%.1f", "%.1f", "%.1f", "%.2f"),
                                            strict=True)):
            text = []
            for t, sz in zip(ts, sizes, strict=True):
                text.extend([fmt % sz[k] if sz is not None else ""] * t.time.size)
            columns.append(text)
        header = header + SIZE_COLUMNS
        decimals = decimals + [None] * len(SIZE_COLUMNS)
    return _csv_text(header, columns, decimals)


def as_seen_csv_text(tset: TrajectorySet) -> str:
    """``as_seen.csv``: the filtered estimate as known after each scan (documented in README)."""
    from harbourwatch.io.timefmt import format_utc_list

    a = tset.as_seen
    if a.time.size == 0:
        return ",".join(AS_SEEN_COLUMNS) + "\n"
    lat, lon, sog, cog = _sog_cog(tset.frame, a.mean)
    columns = [format_utc_list(a.time), a.track, lat, lon, sog, cog, a.sd, a.existence]
    if a.length is not None and np.isfinite(a.length).any():  # optional, as in tracks.csv
        text = np.char.mod("%.1f", a.length).astype(object)
        text[~np.isfinite(a.length)] = ""
        columns.append(text.tolist())
        return _csv_text(AS_SEEN_COLUMNS + ("length_m",), columns,
                         [None, None, 7, 7, 2, 1, 1, 4, None])
    return _csv_text(AS_SEEN_COLUMNS, columns, [None, None, 7, 7, 2, 1, 1, 4])


def cut_at_antimeridian(lon: list[float], lat: list[float]) -> list[list[list[float]]]:
    """A line of ``lon, lat`` vertices (degrees) cut into parts where it crosses ±180°.

    RFC 7946, section 3.1.9: a geometry that crosses the antimeridian SHOULD be
    cut in two so that neither part's representation crosses it. A segment
    crosses when its ends are more than 180° of longitude apart (the short
    way round goes over ±180°). The cut point lies on the segment's straight
    line in longitude and latitude (RFC 7946, section 3.1.1) with the second
    end's longitude unwrapped by 360°; the part before the cut ends at its
    side's ±180°, the part after starts at the other. A line that does not
    cross comes back whole as one part; parts with fewer than two positions
    (a line starting or ending exactly on ±180°) are dropped.

    Examples
    --------
    The example of RFC 7946, section 3.1.9:

    >>> cut_at_antimeridian([170.0, -170.0], [45.0, 45.0])
    [[[170.0, 45.0], [180.0, 45.0]], [[-180.0, 45.0], [-170.0, 45.0]]]
    """
    parts: list[list[list[float]]] = [[[lon[0], lat[0]]]] if lon else []
    for k in range(1, len(lon)):
        x0, y0, x1, y1 = lon[k - 1], lat[k - 1], lon[k], lat[k]
        if abs(x1 - x0) > 180.0:
            edge = 180.0 if x0 > 0 else -180.0  # the side the line leaves from
            x1u = x1 + 360.0 if x0 > 0 else x1 - 360.0
            f = (edge - x0) / (x1u - x0) if x1u != x0 else 0.0
            yc = round(y0 + f * (y1 - y0), 7) + 0.0
            if parts[-1][-1] != [edge, yc]:
                parts[-1].append([edge, yc])
            parts.append([[-edge, yc]])
            if parts[-1][-1] == [x1, y1]:
                continue
        parts[-1].append([x1, y1])
    return [q for q in parts if len(q) > 1]


def trajectories_geojson(tset: TrajectorySet) -> dict[str, Any]:
    """All trajectories as an RFC 7946 FeatureCollection of LineStrings (WGS84).

    A trajectory that crosses the antimeridian is a MultiLineString cut there
    (:func:`cut_at_antimeridian`, RFC 7946 section 3.1.9).
    """
    from harbourwatch.io.timefmt import format_utc_one

    features = []
    for t in tset.trajectories:
        lat, lon = tset.frame.to_wgs84(t.mean[:, 0], t.mean[:, 2])
        # rounded as in tracks.csv (numpy's rounding), 7 decimals of a degree ~ 1 cm
        lon7, lat7 = np.round(lon, 7) + 0.0, np.round(lat, 7) + 0.0
        coords = [[x, y] for x, y in zip(lon7.tolist(), lat7.tolist(), strict=True)]
        parts = cut_at_antimeridian(lon7.tolist(), lat7.tolist()) if len(coords) > 1 else []
        geom: dict[str, Any]
        if len(parts) > 1:
            geom = {"type": "MultiLineString", "coordinates": parts}
        elif len(coords) > 1:
            geom = {"type": "LineString", "coordinates": parts[0] if parts else coords}
        else:
            geom = {"type": "Point", "coordinates": coords[0]}
        features.append(
            {
                "type": "Feature",
                "id": t.id,
                "geometry": geom,
                "properties": {
                    "track": t.id,
                    "start": format_utc_one(t.start),
                    "end": format_utc_one(t.end),
                    "existence": round(t.existence, 4),
                    "end_probability": round(t.end_probability, 4),
                    "present_at_end": bool(t.alive_at_end),
                    "states": int(t.time.size),
                    "plots": int(np.count_nonzero(t.plot_ids >= 0)) if t.plot_ids.size else 0,
                    "max_sog_kn": round(float(t.speed.max()) / KNOT_M_S, 2),
                },
            }
        )
    return {"type": "FeatureCollection", "features": features}
