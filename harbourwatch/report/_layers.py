"""Map layers shared by the overview and the incident pages (zones, tracks, ellipses)."""

from __future__ import annotations

from collections.abc import Sequence

import folium
import numpy as np
import shapely
from branca.element import Element
from numpy.typing import NDArray
from shapely.geometry import MultiPolygon, Polygon

from harbourwatch.io.records import ZoneConfig
from harbourwatch.io.timefmt import format_clock
from harbourwatch.report._data import SIMPLIFY_TOLERANCE_M
from harbourwatch.report._html import esc_tooltip, tooltip_user
from harbourwatch.report._mapbase import round5
from harbourwatch.report._style import TRACK_STYLE, zone_style
from harbourwatch.rules.evaluate import Alert
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import Trajectory

__all__ = ["add_zones", "add_track", "ellipse_latlon", "zone_label", "track_status"]


def zone_label(z: ZoneConfig) -> str:
    """``Name (id)`` or just the id when the zone has no separate name (not escaped)."""
    return f"{z.name} ({z.id})" if z.name and z.name != z.id else z.id


def alert_strings(a: Alert, zones: Sequence[ZoneConfig]) -> tuple[str, ...]:
    """The user strings an alert's sentences quote: rule id, zone id and zone name."""
    names = [a.rule, a.zone]
    names += [z.name for z in zones if z.id == a.zone and z.name]
    return tuple(n for n in names if n)


def _polygons(geom: shapely.Geometry) -> list[Polygon]:
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return list(geom.geoms)
    return []


def _simplify_lonlat(geom: shapely.Geometry, frame: LocalFrame) -> shapely.Geometry:
    """Simplify a lon/lat geometry by :data:`SIMPLIFY_TOLERANCE_M` in the local frame."""

    def fwd(c: NDArray[np.float64]) -> NDArray[np.float64]:
        e, n = frame.to_local(c[:, 1], c[:, 0])
        return np.column_stack([e, n])

    def inv(c: NDArray[np.float64]) -> NDArray[np.float64]:
        lat, lon = frame.to_wgs84(c[:, 0], c[:, 1])
        return np.column_stack([lon, lat])

    local = shapely.transform(geom, fwd)
    simple = local.simplify(SIMPLIFY_TOLERANCE_M, preserve_topology=True)
    return shapely.transform(simple, inv)


def add_zones(parent: Element, zones: Sequence[ZoneConfig],
              frame: LocalFrame) -> None:
    """Draw zones styled by kind; ``land`` zones are filled opaque like a chart's land."""
    for z in sorted(zones, key=lambda z: (z.kind_key != "land", z.id)):
        st = zone_style(z.kind)
        land = z.kind_key == "land"
        tip = f"{tooltip_user(zone_label(z))} \u2014 {tooltip_user(z.kind or 'zone')}"
        for poly in _polygons(_simplify_lonlat(z.geometry, frame)):
            rings = [round5((lat, lon) for lon, lat in poly.exterior.coords)]
            rings += [round5((lat, lon) for lon, lat in r.coords) for r in poly.interiors]
            folium.Polygon(
                locations=rings if len(rings) > 1 else rings[0],
                color=st.stroke,
                weight=1.0 if land else 2.0,
                dash_array=st.dash,
                fill=True,
                fill_color=st.fill,
                fill_opacity=st.fill_opacity,
                class_name="hw-land" if land else "hw-zone",
                interactive=not land,
                tooltip=None if land else folium.Tooltip(tip),
            ).add_to(parent)


def track_status(tr: Trajectory) -> str:
    """``present`` when the vessel is still there at the end of the feed, else ``departed``."""
    return "present" if tr.alive_at_end else "departed"


def size_text(tr: Trajectory) -> str:
    """The vessel's estimated size in words (plain text; the numbers are the filter's)."""
    sz = tr.size
    if sz is None:
        return "point-like (at most one plot per scan)"
    length, beam, _, rate = sz
    return f"hull about {length:.0f} m by {beam:.0f} m, {rate:.1f} plots per scan"


def add_track(parent: Element, tr: Trajectory, latlon: NDArray[np.float64],
              *, role: str | None = None, extra_class: str = "") -> folium.PolyLine:
    """One trajectory as its own Leaflet polyline (class ``hw-traj``) with a tooltip."""
    status = track_status(tr)
    st = TRACK_STYLE[role or status]
    words = "present at end of shift" if status == "present" else "departed"
    tip = (f"<b>{esc_tooltip(tr.id)}</b><br>{format_clock(tr.start)}\u2013"
           f"{format_clock(tr.end)} UTC, {words}<br>existence {tr.existence:.2f}")
    if tr.extent is not None:
        tip += f"<br>{esc_tooltip(size_text(tr))}"
    line = folium.PolyLine(
        locations=round5(latlon),
        color=st["color"],
        weight=st["weight"],
        opacity=st["opacity"],
        dash_array=st["dash_array"],
        class_name=f"hw-traj hw-traj-{status} {extra_class}".strip(),
        tooltip=folium.Tooltip(tip),
    )
    line.add_to(parent)
    return line


def ellipse_latlon(frame: LocalFrame, mean: NDArray[np.float64], cov: NDArray[np.float64],
                   *, k_sigma: float = 2.0, n: int = 48) -> NDArray[np.float64]:
    """Closed ring ``(n+1, 2)`` lat/lon of the ``k_sigma`` ellipse of a 4-state.

    ``mean``/``cov`` are ``[p_e, v_e, p_n, v_n]`` moments; the ellipse is the
    set ``d^T P^-1 d = k^2`` of the position block ``P`` (via ``eigh``).
    """
    p = cov[np.ix_([0, 2], [0, 2])]
    p = 0.5 * (p + p.T)
    w, v = np.linalg.eigh(p)
    w = np.clip(w, 0.0, None)
    ang = np.linspace(0.0, 2 * np.pi, n + 1)
    circle = np.stack([np.cos(ang), np.sin(ang)])
    d = (v * (k_sigma * np.sqrt(w))) @ circle
    lat, lon = frame.to_wgs84(mean[0] + d[0], mean[2] + d[1])
    return np.column_stack([lat, lon])
