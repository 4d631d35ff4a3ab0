"""Where the run's frame and covers hold: plots and zones beyond them refused or clipped.

The local frame (:mod:`.geodesy`) keeps distances from its centre exact and
the scale across the radius ``k = x / sin x`` (``x = r / R``) within
``x² / 6`` of 1; :data:`ACCURATE_WITHIN_M` is the radius up to which the run
uses it (scale error below 0.5 %, a 150 m distance off by less than 0.7 m).
A plot or a radar beyond it is refused: at the radars' antipode every
distance of the frame is meaningless.

Zones are cut to the covers before any work: only the part of a zone within
:func:`clip_margin_m` of some radar's cover is moved into the frame
(clipped first in longitude/latitude to a box around each cover, then in the
frame to the covers' discs), and a zone of more than
:data:`SIMPLIFY_ABOVE_VERTICES` vertices is simplified within
:data:`SIMPLIFY_M`. A 5° box, a world polygon or a 100,000-vertex coast thus
costs what its part near the radars costs. A zone with no part near any cover
gives a warning with its distance from the nearest radar (it can raise no
alert); one wholly beyond the frame's bound is refused.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import shapely
from numpy.typing import NDArray
from shapely.geometry.base import BaseGeometry

from harbourwatch.errors import InputError
from harbourwatch.io.feeds import PlotTable
from harbourwatch.io.records import SensorConfig, ZoneConfig
from harbourwatch.scene.geodesy import LocalFrame

__all__ = ["ACCURATE_WITHIN_M", "SIMPLIFY_M", "SIMPLIFY_ABOVE_VERTICES", "Covers",
           "clip_margin_m", "check_frame_extent", "check_sensors_in_frame", "far_rows",
           "refuse_far_plots"]

#: Radius around the frame centre within which plots, radars and zones are accepted.
#: (1000 km / 6371 km)² / 6 = 0.41 % (scale bound of the module docstring).
ACCURATE_WITHIN_M = 1_000_000.0
#: Largest distance a simplified zone boundary moves, metres (far below any radar's sigma).
SIMPLIFY_M = 1.0
#: Zones with more vertices than this (after clipping) are simplified.
SIMPLIFY_ABOVE_VERTICES = 10_000
#: Metres per degree of latitude, rounded down (WGS84: 110,574 m at the equator, from memory).
_M_PER_DEG_LAT = 110_000.0


def clip_margin_m(max_range_m: float) -> float:
    """How far beyond a cover zones are kept: coasting tracks and smoothing reach past it."""
    return max(5_000.0, 0.25 * max_range_m)


@dataclass(frozen=True, eq=False)
class Covers:
    """The radars' covers grown by :func:`clip_margin_m`, in lon/lat boxes and frame discs."""

    boxes: tuple[tuple[float, float, float, float], ...]  # (lon0, lat0, lon1, lat1)
    discs: BaseGeometry  # union of the grown cover discs, local metres (prepared)
    sites_lonlat: NDArray[np.float64]

    @classmethod
    def of(cls, sensors: Sequence[SensorConfig], frame: LocalFrame) -> Covers:
        boxes: list[tuple[float, float, float, float]] = []
        discs = []
        for s in sensors:
            reach = s.max_range_m + clip_margin_m(s.max_range_m)
            dlat = reach / _M_PER_DEG_LAT
            lat0, lat1 = max(-90.0, s.lat_deg - dlat), min(90.0, s.lat_deg + dlat)
            top = max(abs(lat0), abs(lat1))
            coslat = math.cos(math.radians(top))
            dlon = 360.0 if coslat < 1e-6 else reach / (_M_PER_DEG_LAT * coslat)
            if dlon >= 180.0 or top >= 89.999:
                boxes.append((-180.0, lat0, 180.0, lat1))
            else:
                lon0, lon1 = s.lon_deg - dlon, s.lon_deg + dlon
                boxes.append((max(lon0, -180.0), lat0, min(lon1, 180.0), lat1))
                if lon0 < -180.0:  # across the antimeridian: the part on the other side
                    boxes.append((lon0 + 360.0, lat0, 180.0, lat1))
                if lon1 > 180.0:
                    boxes.append((-180.0, lat0, lon1 - 360.0, lat1))
            e, n = frame.to_local([s.lat_deg], [s.lon_deg])
            discs.append(shapely.Point(float(e[0]), float(n[0])).buffer(reach, quad_segs=64))
        union = shapely.union_all(discs)
        shapely.prepare(union)
        sites = np.array([[s.lon_deg, s.lat_deg] for s in sensors], float).reshape(-1, 2)
        return cls(tuple(boxes), union, sites)

    def clip_lonlat(self, geom: BaseGeometry) -> BaseGeometry:
        """The part of ``geom`` (lon/lat) inside the cover boxes; may be empty."""
        x0, y0, x1, y1 = geom.bounds
        if any(x0 >= b[0] and y0 >= b[1] and x1 <= b[2] and y1 <= b[3] for b in self.boxes):
            return geom  # wholly inside one box: nothing to cut
        parts = [shapely.clip_by_rect(geom, *b) for b in self.boxes
                 if not (x1 < b[0] or x0 > b[2] or y1 < b[1] or y0 > b[3])]
        parts = [p for p in parts if not p.is_empty]
        if not parts:
            return shapely.Polygon()
        return shapely.make_valid(shapely.union_all(parts)) if len(parts) > 1 else parts[0]


def nearest_km(geom: BaseGeometry, lon: NDArray[np.float64], lat: NDArray[np.float64],
               frame: LocalFrame) -> float:
    """Geodesic distance (km) from the nearest of the points to the nearest vertex of ``geom``."""
    pts = shapely.get_coordinates(shapely.segmentize(geom, 0.5))
    best = math.inf
    for x, y in zip(lon, lat, strict=True):
        d = frame.geodesic_m(np.full(len(pts), y), np.full(len(pts), x), pts[:, 1], pts[:, 0])
        best = min(best, float(d.min()))
    return best / 1000.0


def zone_outside_covers(zone: ZoneConfig, covers: Covers, frame: LocalFrame) -> str:
    """Warning for a zone with no part near any cover, or :class:`InputError` beyond the frame."""
    d_centre = nearest_km(zone.geometry, np.array([frame.lon0_deg]),
                          np.array([frame.lat0_deg]), frame)
    inside_centre = zone.geometry.contains(shapely.Point(frame.lon0_deg, frame.lat0_deg))
    if d_centre * 1000.0 > ACCURATE_WITHIN_M and not inside_centre:
        raise InputError(
            f"zone {zone.id!r} lies {d_centre:,.0f} km from the radars, beyond the "
            f"{ACCURATE_WITHIN_M / 1000:,.0f} km within which the run's local frame measures "
            "distances (a wrong sign in a longitude?)",
            file=zone.source or None, line=zone.line, field="geometry")
    d = nearest_km(zone.geometry, covers.sites_lonlat[:, 0], covers.sites_lonlat[:, 1], frame)
    return (f"zone {zone.id!r} is {d:,.0f} km from the nearest radar: no part of it lies in "
            "any radar's cover, so no rule on it can raise an alert")


def check_frame_extent(plots: PlotTable, sensors: Sequence[SensorConfig], frame: LocalFrame,
                       east: NDArray[np.float64], north: NDArray[np.float64],
                       sensors_path: str | None = None) -> None:
    """Refuse radars and plots farther than :data:`ACCURATE_WITHIN_M` from the frame centre.

    ``east``/``north`` are the plots in the frame: their distance from the
    centre is the geodesic distance (exact in the azimuthal equidistant frame).
    """
    check_sensors_in_frame(sensors, frame, sensors_path)
    refuse_far_plots(plots, sensors, frame, far_rows(east, north))


def check_sensors_in_frame(sensors: Sequence[SensorConfig], frame: LocalFrame,
                           sensors_path: str | None = None) -> None:
    """Refuse a radar farther than :data:`ACCURATE_WITHIN_M` from the frame centre."""
    se, sn = frame.to_local([s.lat_deg for s in sensors], [s.lon_deg for s in sensors])
    for s, r in zip(sensors, np.hypot(se, sn), strict=True):
        if not r <= ACCURATE_WITHIN_M:
            raise InputError(
                f"sensor {s.id!r} is {r / 1000:,.0f} km from the middle of the radars: the "
                f"run's local frame holds radars within {ACCURATE_WITHIN_M / 1000:,.0f} km of "
                "it; review far-apart ports in separate runs", file=sensors_path, field="lon")


def far_rows(east: NDArray[np.float64], north: NDArray[np.float64]) -> NDArray[np.int64]:
    """Indices of the plots (in the frame) farther than :data:`ACCURATE_WITHIN_M` from its centre."""
    return np.flatnonzero(~(np.hypot(east, north) <= ACCURATE_WITHIN_M))


def refuse_far_plots(plots: PlotTable, sensors: Sequence[SensorConfig], frame: LocalFrame,
                     far: NDArray[np.int64]) -> None:
    """Refuse the first (by file and line) of the plots ``far`` (rows of ``plots``), if any."""
    if far.size == 0:
        return
    first = int(far[np.lexsort((plots.line[far], plots.source[far]))[0]])
    s = sensors[int(plots.sensor[first])]
    d = frame.geodesic_m(np.array([s.lat_deg]), np.array([s.lon_deg]),
                         plots.lat_deg[first:first + 1], plots.lon_deg[first:first + 1])
    raise InputError(
        f"plot at {plots.lat_deg[first]:.5f}, {plots.lon_deg[first]:.5f} is "
        f"{float(d[0]) / 1000:,.0f} km from its sensor {s.id!r} (cover {s.max_range_m / 1000:g} "
        f"km), beyond the {ACCURATE_WITHIN_M / 1000:,.0f} km within which the run's local frame "
        "measures distances: a wrong sign in a longitude, or a plot of another port?",
        file=plots.files[int(plots.source[first])], line=int(plots.line[first]), field="lon")
