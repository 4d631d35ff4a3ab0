"""Hull outlines of large vessels: which way a hull points, and its drawn ellipse.

A large vessel's estimated extent (:attr:`Trajectory.size`: the filter's last
estimate of the hull ellipse) is drawn as that ellipse, to scale: length
along its heading, beam across it, centred on the vessel's position. The
heading at a moment is the vessel's course over ground when it makes way at
:data:`HULL_COURSE_MIN_KN` or more (the smoothed velocity in hindsight, the
filtered one as seen), and the main axis of the extent estimate when it is
slower (a ship at rest, or drifting, has no meaningful course). The axis has
no bow or stern, so it is turned to the end nearest the last course under way
(the next one when the vessel was never under way before).

Headings here are degrees true; the local frame's grid convergence is added
to grid directions the way ``tracks.csv``'s ``cog_deg`` is made.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import folium
import numpy as np
from branca.element import Element
from numpy.typing import NDArray

from harbourwatch.io.timefmt import format_clock
from harbourwatch.report._fmt import fmt_clock
from harbourwatch.report._html import esc_tooltip, tooltip_user
from harbourwatch.report._mapbase import round5
from harbourwatch.report._style import INK, PALETTE
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import Trajectory
from harbourwatch.units import KNOT_M_S

__all__ = [
    "HULL_COURSE_MIN_KN",
    "HULL_RING_POINTS",
    "grid_headings",
    "true_headings",
    "HullOutline",
    "hull_outline",
    "add_hulls",
    "hull_sentence",
    "HULL_KEY",
    "hull_ring_local",
    "encode_headings",
]

Array = NDArray[np.float64]

#: Below this speed over ground (knots) the outline lies along the extent's
#: main axis instead of the course (a course from a near-zero velocity is noise).
HULL_COURSE_MIN_KN = 1.0
#: Vertices of a drawn hull ellipse (vertex 0 is the bow end, vertex N/2 the stern).
HULL_RING_POINTS = 36


def grid_headings(ve: Array, vn: Array, axis_grid_deg: float) -> tuple[Array, NDArray[np.bool_]]:
    """Heading of the hull outline in the local grid (degrees) at each of the given states.

    ``ve, vn`` are local velocities (time order); ``axis_grid_deg`` is the
    extent's main axis in the local grid (the ``heading_deg`` of
    :attr:`~harbourwatch.trajectories.Trajectory.size`). Returns the
    headings and whether each came from the course (under way) rather than
    the axis.
    """
    ve, vn = np.asarray(ve, float), np.asarray(vn, float)
    grid = np.degrees(np.arctan2(ve, vn))
    moving = np.hypot(ve, vn) >= HULL_COURSE_MIN_KN * KNOT_M_S
    if moving.any():
        # the end of the axis nearest the last course under way (the next one before any)
        idx = np.flatnonzero(moving)
        j = np.searchsorted(idx, np.arange(ve.size), side="right") - 1
        ref = grid[idx[np.where(j >= 0, j, 0)]]
        flip = np.abs((axis_grid_deg - ref + 180.0) % 360.0 - 180.0) > 90.0
        axis = axis_grid_deg + np.where(flip, 180.0, 0.0)
    else:
        axis = np.full(ve.size, float(axis_grid_deg))
    return np.where(moving, grid, axis) % 360.0, moving


def true_headings(frame: LocalFrame, e: Array, n: Array, ve: Array, vn: Array,
                  axis_grid_deg: float) -> tuple[Array, NDArray[np.bool_]]:
    """:func:`grid_headings` turned to degrees true at the positions ``e, n``, ``[0, 360)``."""
    grid, moving = grid_headings(ve, vn, axis_grid_deg)
    e, n = np.asarray(e, float), np.asarray(n, float)
    conv = np.degrees(frame.grid_convergence_rad(e, n)) if e.size else np.zeros(0)
    return (grid + conv) % 360.0, moving


def hull_ring_local(e: float, n: float, length_m: float, beam_m: float, heading_grid_deg: float,
                    points: int = HULL_RING_POINTS) -> Array:
    """Closed ring ``(points + 1, 2)`` of local east/north metres: the hull ellipse.

    Vertex 0 is the bow end (``length_m / 2`` ahead along the heading),
    vertex ``points // 2`` the stern end; vertex ``points // 4`` lies
    ``beam_m / 2`` to starboard.
    """
    h = np.radians(heading_grid_deg)
    phi = np.linspace(0.0, 2.0 * np.pi, points + 1)
    along, across = 0.5 * length_m * np.cos(phi), 0.5 * beam_m * np.sin(phi)
    de = along * np.sin(h) + across * np.cos(h)
    dn = along * np.cos(h) - across * np.sin(h)
    ring = np.column_stack([e + de, n + dn])
    ring[-1] = ring[0]
    return ring


def encode_headings(deg: Array) -> list[int]:
    """Whole degrees, delta-encoded modulo 360 (each step in ``[-180, 180)``; the first absolute)."""
    h = np.round(np.asarray(deg, float)).astype(np.int64) % 360
    d = np.diff(h, prepend=0)
    d[1:] = (d[1:] + 180) % 360 - 180
    return [int(v) for v in d]



@dataclass(frozen=True)
class HullOutline:
    """The hull ellipse of one large vessel at one of its states, ready to draw."""

    ring: Array  # (HULL_RING_POINTS + 1, 2) lat/lon, vertex 0 at the bow end
    length_m: float
    beam_m: float
    heading_deg: float  # degrees true
    under_way: bool  # heading from the course (else from the extent's main axis)


def hull_outline(frame: LocalFrame, tr: Trajectory, i: int) -> HullOutline | None:
    """The outline of ``tr`` at its state ``i`` (smoothed), ``None`` for a point-like vessel."""
    sz = tr.size
    if sz is None:
        return None
    grid, moving = grid_headings(tr.mean[:, 1], tr.mean[:, 3], sz[2])
    e, n = float(tr.mean[i, 0]), float(tr.mean[i, 2])
    local = hull_ring_local(e, n, sz[0], sz[1], float(grid[i]))
    lat, lon = frame.to_wgs84(local[:, 0], local[:, 1])
    conv = float(np.degrees(frame.grid_convergence_rad([e], [n])[0]))
    return HullOutline(np.column_stack([lat, lon]), sz[0], sz[1], (float(grid[i]) + conv) % 360.0,
                       bool(moving[i]))


#: ``(trajectory, label of the key time, state time, outline)`` of one drawn outline.
KeyHull = tuple[Trajectory, str, float, HullOutline]

#: The incident map's legend entry for the outlines (our own symbol).
HULL_KEY = (f'<span class="hw-key"><svg width="26" height="14" aria-hidden="true"><ellipse '
            f'cx="13" cy="7" rx="12" ry="4" fill="{PALETTE["grey"]}" fill-opacity="0.45" '
            f'stroke="{INK}" stroke-width="1.5"/></svg>estimated hull outline at the '
            "episode's key times, to scale</span>")


def hull_words(h: HullOutline) -> str:
    """``about 305 m × 49 m, heading 249°`` (plain text)."""
    return f"about {h.length_m:.0f} m \u00d7 {h.beam_m:.0f} m, heading {h.heading_deg:03.0f}\u00b0"


def add_hulls(parent: Element, hulls: Sequence[KeyHull], *, tz: str | None) -> None:
    """Draw the outlines (class ``hw-hull``) in their own layer, each with a tooltip."""
    if not hulls:
        return
    fg = folium.FeatureGroup(name="Hull outlines").add_to(parent)
    for tr, lab, t, h in hulls:
        how = ("along its course over ground" if h.under_way else
               f"along the main axis of its size estimate (slower than {HULL_COURSE_MIN_KN:g} kn)")
        folium.Polygon(
            locations=round5(h.ring), color=INK, weight=1.5, fill=True,
            fill_color=PALETTE["grey"], fill_opacity=0.3, class_name="hw-hull",
            tooltip=folium.Tooltip(
                f"{tooltip_user(tr.id)}: hull outline at {esc_tooltip(lab)}, "
                f"{esc_tooltip(fmt_clock(t, tz=tz))}<br>{esc_tooltip(hull_words(h))}, "
                f"{esc_tooltip(how)}"),
        ).add_to(fg)


def hull_sentence(hulls: Sequence[KeyHull]) -> str:
    """The narrative's sentence on where the map draws the outlines (plain text, not escaped)."""
    by_track: dict[str, list[str]] = {}
    for tr, lab, t, h in hulls:
        slow = "" if h.under_way else ", slow: along the main axis of the size estimate"
        by_track.setdefault(tr.id, []).append(
            f"at the {lab} ({format_clock(t, seconds=True)} UTC, heading "
            f"{h.heading_deg:03.0f}\u00b0{slow})")
    out = ""
    for tid, at in by_track.items():
        where = at[0] if len(at) == 1 else ", ".join(at[:-1]) + " and " + at[-1]
        out += (f" The map draws {tid}'s estimated hull outline, an ellipse of that length and "
                f"beam, {where}.")
    return out
