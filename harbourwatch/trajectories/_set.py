"""The set of all trajectories of a run, and its tables (``tracks.csv``, ``as_seen.csv``, GeoJSON).

Each table is produced as a sequence of text chunks (a bounded number of rows
or features each) whose concatenation is the whole file, so that a long run's
tables are written to disk piece by piece and never held as one text; the
``*_text`` forms join the chunks. Chunking never changes a byte: every number
is rounded and printed one value at a time.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories._records import AsSeenTable, Trajectory, held
from harbourwatch.units import KNOT_M_S

__all__ = [
    "TrajectorySet",
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

Array = NDArray[np.float64]


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


TRACK_COLUMNS = ("track", "time", "lat", "lon", "sog_kn", "cog_deg", "sd_m", "existence")
SIZE_COLUMNS = ("length_m", "beam_m", "heading_deg", "plots_per_scan")
AS_SEEN_COLUMNS = ("time", "track", "lat", "lon", "sog_kn", "cog_deg", "sd_m", "existence")

#: Rows of a CSV chunk (about 6 MB of text): large enough for pyarrow's writer to run at
#: full speed, small enough that a chunk's columns and their text (some 600 bytes a row
#: while it is made) stay near 40 MB.
CHUNK_ROWS = 1 << 16
#: Features of a GeoJSON chunk (at most; see :data:`CHUNK_STATES`).
CHUNK_FEATURES = 256
#: States of a GeoJSON chunk: a chunk ends once its features hold this many positions
#: (each feature is turned to text at once, so a chunk is text of about 2 MB).
CHUNK_STATES = 1 << 16


def _sog_cog(frame: LocalFrame, mean: Array) -> tuple[Array, Array, Array, Array]:
    """Latitude, longitude, SOG (kn) and COG (deg true) of local states ``(N, 4)``."""
    lat, lon = frame.to_wgs84(mean[:, 0], mean[:, 2])
    sog = np.hypot(mean[:, 1], mean[:, 3]) / KNOT_M_S
    grid_course = np.arctan2(mean[:, 1], mean[:, 3])
    conv = frame.grid_convergence_rad(mean[:, 0], mean[:, 2], latlon=(lat, lon))
    cog = np.degrees(grid_course + conv) % 360.0
    cog = np.where(np.round(cog, 1) >= 360.0, 0.0, cog)
    return lat, lon, sog, cog


def _axis_true_text(axis_deg: Array) -> list[str]:
    """A hull axis direction in degrees true as ``tracks.csv`` text: ``[0, 180)``, one decimal."""
    a = np.asarray(axis_deg, float) % 180.0
    a = np.where(np.round(a, 1) >= 180.0, 0.0, a)
    return [f"{x:.1f}" for x in a]


def _csv_text(header: tuple[str, ...], columns: list[Any], decimals: list[int | None],
              *, include_header: bool = True) -> str:
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
        table, sink, pacsv.WriteOptions(include_header=include_header, quoting_style="none")
    )
    return sink.getvalue().to_pybytes().decode("utf-8")


def _row_blocks(ts: tuple[Trajectory, ...], rows: int) -> Iterator[list[tuple[Trajectory, int, int]]]:
    """Consecutive ``(trajectory, first, stop)`` state ranges of at most ``rows`` rows in all."""
    block: list[tuple[Trajectory, int, int]] = []
    room = rows
    for t in map(held, ts):  # each array of a spilled trajectory read once
        n = int(t.time.size)
        i = 0
        while i < n:
            k = min(n - i, room)
            block.append((t, i, i + k))
            i += k
            room -= k
            if room == 0:
                yield block
                block, room = [], rows
    if block:
        yield block


def tracks_csv_chunks(tset: TrajectorySet, *, rows: int = CHUNK_ROWS) -> Iterator[str]:
    """``tracks.csv`` as text chunks of at most ``rows`` rows (the first holds the header).

    Rows by track, then time; track ids are plain ``T<n>`` strings, so no
    CSV quoting is ever needed.
    """
    from harbourwatch.io.timefmt import format_utc_list

    ts = tset.trajectories
    header: tuple[str, ...] = TRACK_COLUMNS
    decimals: list[int | None] = [None, None, 7, 7, 2, 1, 1, 4]
    sized = any(t.extent is not None for t in ts)  # optional size columns (README)
    if sized:
        header = header + SIZE_COLUMNS
        decimals = decimals + [None] * len(SIZE_COLUMNS)
    if not ts:
        yield ",".join(TRACK_COLUMNS) + "\n"
        return
    first = True
    for block in _row_blocks(ts, rows):
        mean = np.concatenate([t.mean[i0:i1] for t, i0, i1 in block])
        lat, lon, sog, cog = _sog_cog(tset.frame, mean)
        # the hull axis is estimated in the local grid: turned to degrees true per row
        conv_deg = (np.degrees(tset.frame.grid_convergence_rad(mean[:, 0], mean[:, 2],
                                                               latlon=(lat, lon)))
                    if sized else np.zeros(0))
        del mean
        columns: list[Any] = [
            np.concatenate([np.full(i1 - i0, t.id) for t, i0, i1 in block]),
            format_utc_list(np.concatenate([t.time[i0:i1] for t, i0, i1 in block])),
            lat,
            lon,
            sog,
            cog,
            np.concatenate([t.position_sd[i0:i1] for t, i0, i1 in block]),
            np.concatenate([np.full(i1 - i0, t.existence) for t, i0, i1 in block]),
        ]
        if sized:
            sizes = [t.size for t, _, _ in block]
            for k, fmt in enumerate(("%.1f", "%.1f", "%.1f", "%.2f")):
                text: list[str] = []
                row = 0
                for (_t, i0, i1), sz in zip(block, sizes, strict=True):
                    if sz is None:
                        text.extend([""] * (i1 - i0))
                    elif k == 2:
                        text.extend(_axis_true_text(sz[2] + conv_deg[row:row + i1 - i0]))
                    else:
                        text.extend([fmt % sz[k]] * (i1 - i0))
                    row += i1 - i0
                columns.append(text)
        yield _csv_text(header, columns, decimals, include_header=first)
        first = False


def tracks_csv_text(tset: TrajectorySet) -> str:
    """The contract's ``tracks.csv`` for a trajectory set (rows by track, then time)."""
    return "".join(tracks_csv_chunks(tset))


def as_seen_csv_chunks(tset: TrajectorySet, *, rows: int = CHUNK_ROWS) -> Iterator[str]:
    """``as_seen.csv`` as text chunks of at most ``rows`` rows (documented in README)."""
    from harbourwatch.io.timefmt import format_utc_list

    a = tset.as_seen
    if a.rows == 0:
        yield ",".join(AS_SEEN_COLUMNS) + "\n"
        return
    header: tuple[str, ...] = AS_SEEN_COLUMNS
    decimals: list[int | None] = [None, None, 7, 7, 2, 1, 1, 4]
    sized = a.sized  # as in tracks.csv
    if sized:
        header, decimals = AS_SEEN_COLUMNS + ("length_m",), decimals + [None]
    first = True
    for b in a.blocks(rows):  # a spilled table is read one block at a time
        lat, lon, sog, cog = _sog_cog(tset.frame, b.mean)
        columns: list[Any] = [format_utc_list(b.time), b.track, lat, lon, sog, cog,
                              b.sd, b.existence]
        if sized:
            assert b.length is not None
            text = np.char.mod("%.1f", b.length).astype(object)
            text[~np.isfinite(b.length)] = ""
            columns.append(text.tolist())
        yield _csv_text(header, columns, decimals, include_header=first)
        first = False


def as_seen_csv_text(tset: TrajectorySet) -> str:
    """``as_seen.csv``: the filtered estimate as known after each scan (documented in README)."""
    return "".join(as_seen_csv_chunks(tset))
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


def _feature(frame: LocalFrame, t: Trajectory) -> dict[str, Any]:
    """One trajectory as a GeoJSON Feature (a LineString, MultiLineString or Point)."""
    from harbourwatch.io.timefmt import format_utc_one

    lat, lon = frame.to_wgs84(t.mean[:, 0], t.mean[:, 2])
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
    return {
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


def trajectories_geojson(tset: TrajectorySet) -> dict[str, Any]:
    """All trajectories as an RFC 7946 FeatureCollection of LineStrings (WGS84).

    A trajectory that crosses the antimeridian is a MultiLineString cut there
    (:func:`cut_at_antimeridian`, RFC 7946 section 3.1.9).
    """
    return {"type": "FeatureCollection",
            "features": [_feature(tset.frame, t) for t in tset.trajectories]}


def geojson_chunks(tset: TrajectorySet, *, features: int = CHUNK_FEATURES,
                   states: int = CHUNK_STATES) -> Iterator[str]:
    """``trajectories.geojson`` as text chunks: the compact JSON of
    :func:`trajectories_geojson` and a newline, at most ``features`` features
    or about ``states`` positions at a time.
    """
    yield '{"type":"FeatureCollection","features":['
    parts: list[str] = []
    positions = 0
    first = True
    for t in map(held, tset.trajectories):
        parts.append(json.dumps(_feature(tset.frame, t), separators=(",", ":")))
        positions += int(t.time.size)
        if len(parts) >= features or positions >= states:
            text = ",".join(parts)
            yield text if first else "," + text
            parts, positions, first = [], 0, False
    if parts:
        text = ",".join(parts)
        yield text if first else "," + text
    yield "]}\n"
