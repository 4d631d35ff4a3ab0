"""Geofence zones carried into the run's local frame, once.

A :class:`LocalZone` is a :class:`~harbourwatch.io.records.ZoneConfig` whose
polygon (with holes, or a MultiPolygon) has been moved into the local
east/north metre frame. The WGS84 polygon's edges are straight lines in
longitude/latitude (as GeoJSON and shapely read them); they are densified to
about 50 m before the move so that they stay faithful after projection.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import shapely
from numpy.typing import ArrayLike, NDArray
from shapely.geometry.base import BaseGeometry

from harbourwatch.io.records import ZoneConfig
from harbourwatch.scene.extent import (
    SIMPLIFY_ABOVE_VERTICES,
    SIMPLIFY_M,
    Covers,
    zone_outside_covers,
)
from harbourwatch.scene.geodesy import LocalFrame

__all__ = ["LocalZone", "local_zones", "DENSIFY_M"]

#: Longest edge kept when moving a zone into the local frame, metres. At
#: harbour scales the sagitta between a straight lon/lat edge and a straight
#: local edge over 50 m is far below a millimetre.
DENSIFY_M = 50.0
#: Metres per degree of latitude, rounded down (so segments stay <= DENSIFY_M
#: in latitude and shorter still in longitude) -- common practice, no source.
_M_PER_DEG = 111_000.0


@dataclass(frozen=True, kw_only=True, eq=False)
class LocalZone:
    """One zone in the local frame (metres), prepared for fast point tests.

    Attributes
    ----------
    id, name, kind
        As in the zones file (``name`` falls back to ``id``).
    polygon
        Polygon or MultiPolygon in local east/north metres, prepared.
    """

    id: str
    name: str
    kind: str
    polygon: BaseGeometry

    @property
    def kind_key(self) -> str:
        """The kind as compared everywhere: trimmed, lower case."""
        return self.kind.strip().lower()

    @classmethod
    def from_config(cls, zone: ZoneConfig, frame: LocalFrame,
                    covers: Covers | None = None) -> LocalZone:
        """Move ``zone`` into ``frame``: densify in degrees, transform every ring at once.

        With ``covers``, only the part of the zone near the covers is moved
        (see :mod:`.extent`); the polygon is empty when no part is near.
        """
        geom = zone.geometry if covers is None else covers.clip_lonlat(zone.geometry)
        if geom.is_empty:
            return cls(id=zone.id, name=zone.name or zone.id, kind=zone.kind,
                       polygon=shapely.Polygon())
        dense = shapely.segmentize(geom, DENSIFY_M / _M_PER_DEG)

        def to_local(lonlat: NDArray[np.float64]) -> NDArray[np.float64]:
            e, n = frame.to_local(lonlat[:, 1], lonlat[:, 0])
            return np.column_stack([e, n])

        poly = shapely.make_valid(shapely.transform(dense, to_local))
        if covers is not None and not covers.discs.contains(poly):
            poly = _polygonal(shapely.intersection(poly, covers.discs))
        if shapely.get_num_coordinates(poly) > SIMPLIFY_ABOVE_VERTICES:
            poly = _polygonal(shapely.make_valid(
                shapely.simplify(poly, SIMPLIFY_M, preserve_topology=True)))
        shapely.prepare(poly)
        return cls(id=zone.id, name=zone.name or zone.id, kind=zone.kind, polygon=poly)

    @property
    def is_empty(self) -> bool:
        """No part of the zone lies near any cover (see :mod:`.extent`)."""
        return bool(self.polygon.is_empty)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """``(min_e, min_n, max_e, max_n)`` in metres."""
        b = self.polygon.bounds
        return float(b[0]), float(b[1]), float(b[2]), float(b[3])

    def contains(self, east_m: ArrayLike, north_m: ArrayLike) -> NDArray[np.bool_]:
        """Vectorised point-in-zone test (any shape of arrays, broadcast together).

        Points exactly on the boundary count as outside (shapely's ``contains``).
        """
        e = np.asarray(east_m, float)
        n = np.asarray(north_m, float)
        return np.asarray(shapely.contains_xy(self.polygon, e, n), dtype=bool)

    def near(self, east_m: ArrayLike, north_m: ArrayLike, margin_m: ArrayLike) -> NDArray[np.bool_]:
        """Inside, or outside by at most ``margin_m`` (per point), as a boolean array.

        Distances are only computed for points inside the bounding box grown
        by the margin, so a long trajectory far from the zone costs little.
        """
        e = np.asarray(east_m, float).ravel()
        n = np.asarray(north_m, float).ravel()
        m = np.broadcast_to(np.asarray(margin_m, float), e.shape)
        out = self.contains(e, n)
        x0, y0, x1, y1 = self.bounds
        cand = (~out) & (e >= x0 - m) & (e <= x1 + m) & (n >= y0 - m) & (n <= y1 + m)
        if cand.any():
            idx = np.flatnonzero(cand)
            d = shapely.distance(shapely.points(e[idx], n[idx]), self.polygon)
            out[idx] = d <= m[idx]
        return out.reshape(np.shape(east_m))

    @cached_property
    def boundary(self) -> BaseGeometry:
        """The zone's boundary rings (prepared)."""
        b = self.polygon.boundary
        shapely.prepare(b)
        return b

    def near_edge(self, east_m: ArrayLike, north_m: ArrayLike, margin_m: ArrayLike,
                  ) -> NDArray[np.bool_]:
        """Whether each point lies within ``margin_m`` of the zone's boundary (1-D arrays)."""
        e = np.asarray(east_m, float).ravel()
        n = np.asarray(north_m, float).ravel()
        m = np.broadcast_to(np.asarray(margin_m, float), e.shape)
        x0, y0, x1, y1 = self.bounds
        out = (e >= x0 - m) & (e <= x1 + m) & (n >= y0 - m) & (n <= y1 + m)
        if out.any():
            idx = np.flatnonzero(out)
            out[idx] = shapely.distance(shapely.points(e[idx], n[idx]), self.boundary) <= m[idx]
        return out

    def box_near(self, bbox: tuple[float, float, float, float], margin_m: float) -> bool:
        """Whether a ``(min_e, min_n, max_e, max_n)`` box comes within ``margin_m`` of the bounds."""
        x0, y0, x1, y1 = self.bounds
        return not (
            bbox[2] < x0 - margin_m
            or bbox[0] > x1 + margin_m
            or bbox[3] < y0 - margin_m
            or bbox[1] > y1 + margin_m
        )


def _polygonal(geom: BaseGeometry) -> BaseGeometry:
    """The polygons of ``geom`` (an intersection may add lines and points where edges touch)."""
    if geom.geom_type in ("Polygon", "MultiPolygon"):
        return geom
    polys = [g for g in shapely.get_parts(geom) if g.geom_type in ("Polygon", "MultiPolygon")]
    if not polys:
        return shapely.Polygon()
    return shapely.union_all(polys)


def local_zones(zones: Iterable[ZoneConfig], frame: LocalFrame, covers: Covers | None = None,
                warnings: list[str] | None = None) -> dict[str, LocalZone]:
    """All zones in the local frame, keyed by id.

    With ``covers``, zones are cut to the covers first; a zone with no part
    near any cover adds a line to ``warnings`` (or is refused beyond the
    frame's bound, see :func:`~harbourwatch.scene.extent.zone_outside_covers`).
    """
    out = {}
    for z in zones:
        local = LocalZone.from_config(z, frame, covers)
        if covers is not None and local.is_empty:
            note = zone_outside_covers(z, covers, frame)
            if warnings is not None:
                warnings.append(note)
        out[z.id] = local
    return out
