"""The overview's vessel list: one row per trajectory, searchable and filterable.

The numbers come from the smoothed trajectories: time in cover (first to
last state), distance run (sum of the straight steps between states in the
local frame), maximum and mean speed over ground (the velocity states),
zones visited (:func:`._data.zone_visits`) and alerts. Filtering and the
link to the replay are in ``assets/vessels.js``; the rows' filter values
travel as JSON (:func:`vessels_payload`), never through HTML attributes.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from harbourwatch.report._data import ZoneVisits
from harbourwatch.report._fmt import fmt_clock, fmt_day, fmt_distance
from harbourwatch.report._html import esc, esc_user
from harbourwatch.report._layers import track_status, zone_label
from harbourwatch.trajectories import held
from harbourwatch.units import KNOT_M_S, fmt_duration

if TYPE_CHECKING:
    from harbourwatch.report import ReportInputs
    from harbourwatch.trajectories import Trajectory

__all__ = ["VesselRow", "vessel_rows", "vessels_payload", "vessels_html", "filter_choices"]


@dataclass(frozen=True, kw_only=True)
class VesselRow:
    """What the list says about one trajectory."""

    id: str
    start: float
    end: float
    status: str  # "present" | "departed"
    distance_m: float
    max_kn: float
    mean_kn: float
    zones: tuple[str, ...]  # zone ids, in zone file order
    rules: tuple[str, ...]  # rule ids of the alerts it is part of
    n_alerts: int
    size: str = ""  # estimated hull length x beam of a large vessel, "" for a point-like one


def vessel_rows(inputs: ReportInputs, visits: Sequence[ZoneVisits]) -> list[VesselRow]:
    """One :class:`VesselRow` per trajectory, in the run's order."""
    by_track: dict[str, list[str]] = {}
    for v in visits:
        for tid in dict.fromkeys(v.track):
            by_track.setdefault(tid, []).append(v.zone.id)
    rows = []
    for tr in map(held, inputs.trajectories.trajectories):
        pos = tr.position
        steps = np.hypot(*np.diff(pos, axis=0).T) if pos.shape[0] > 1 else np.zeros(0)
        mine = [a for a in inputs.alerts if tr.id in (a.track, a.other_track)]
        rows.append(VesselRow(
            id=tr.id, start=tr.start, end=tr.end, status=track_status(tr),
            distance_m=float(steps.sum()),
            max_kn=float(tr.speed.max() / KNOT_M_S) if tr.time.size else 0.0,
            mean_kn=float(tr.speed.mean() / KNOT_M_S) if tr.time.size else 0.0,
            zones=tuple(by_track.get(tr.id, [])),
            rules=tuple(dict.fromkeys(a.rule for a in mine)), n_alerts=len(mine),
            size=_size(tr),
        ))
    return rows


_DASH = "\u2014"


def _size(tr: Trajectory) -> str:
    """``"281 x 40 m"`` for a large vessel (its estimated hull), ``""`` for a point-like one."""
    sz = tr.size
    return "" if sz is None else f"{sz[0]:.0f} \u00d7 {sz[1]:.0f} m"


def vessels_payload(rows: Sequence[VesselRow], t0: float) -> list[dict[str, object]]:
    """The filter values of the rows, for ``vessels.js`` (times in seconds from ``t0``)."""
    return [{"id": r.id, "s": round(r.start - t0, 3), "e": round(r.end - t0, 3),
             "status": r.status, "zones": list(r.zones), "rules": list(r.rules)} for r in rows]


def filter_choices(inputs: ReportInputs) -> dict[str, list[list[str]]]:
    """``[value, label]`` of the zone and rule filters; ``vessels.js`` adds them as text."""
    return {"zones": [[z.id, zone_label(z)] for z in inputs.zones if z.kind_key != "land"],
            "rules": [[r.id, r.id] for r in inputs.rules]}


def vessels_html(inputs: ReportInputs, rows: Sequence[VesselRow]) -> str:
    """The list's filters and table (our markup; every user string escaped)."""
    ts = inputs.trajectories
    day, tz = fmt_day(ts.feed_start), inputs.display_tz
    zones = {z.id: zone_label(z) for z in inputs.zones if z.kind_key != "land"}
    size_note = ("the estimated hull length \u00d7 beam of a large vessel (drawn as its outline "
                 "in the replay), \u2014 for a point-like one." if any(r.size for r in rows)
                 else "not estimated in this run.")
    body = []
    for i, r in enumerate(rows):
        zone_txt = ", ".join(esc_user(zones.get(z, z)) for z in r.zones) or "\u2014"
        body.append(
            f'<tr data-i="{i}" tabindex="0" title="show on the map and move the replay here">'
            f"<td>{esc(r.id)}</td>"
            f'<td class="num" data-sort="{r.start:.3f}">{esc(fmt_clock(r.start, day=day, tz=tz))}</td>'
            f'<td class="num" data-sort="{r.end:.3f}">{esc(fmt_clock(r.end, day=day, tz=tz))}</td>'
            f'<td class="num" data-sort="{r.end - r.start:.3f}">{esc(fmt_duration(r.end - r.start))}</td>'
            f'<td class="num" data-sort="{r.distance_m:.1f}">{esc(fmt_distance(r.distance_m))}</td>'
            f'<td class="num" data-sort="{r.max_kn:.3f}">{r.max_kn:.1f}</td>'
            f'<td class="num" data-sort="{r.mean_kn:.3f}">{r.mean_kn:.1f}</td>'
            f"<td>{esc(r.size or _DASH)}</td>"
            f"<td>{zone_txt}</td>"
            f'<td class="num" data-sort="{r.n_alerts}">{r.n_alerts}</td>'
            f"<td>{'present at end' if r.status == 'present' else 'departed'}</td></tr>"
        )
    heads = [("track", False), ("start", True), ("end", True), ("time in cover", True),
             ("distance run", True), ("max kn", True), ("mean kn", True), ("size", False),
             ("zones visited", False), ("alerts", True), ("status", False)]
    num_cls = ' class="num"'
    head = "".join(f'<th scope="col"{num_cls if num else ""}><button type="button">'
                   f"{esc(c)}</button></th>" for c, num in heads)
    return (
        '<div class="hw-vfilters" role="search" aria-label="Filter the vessel list">'
        '<label>track <input type="search" id="hw-vsearch" size="8" placeholder="e.g. T24"></label>'
        '<label>from <input type="time" id="hw-vfrom" step="60"></label>'
        '<label>to <input type="time" id="hw-vto" step="60"></label>'
        '<label>zone <select id="hw-vzone"><option value="">any zone</option></select></label>'
        '<label>rule <select id="hw-vrule"><option value="">any rule or none</option></select>'
        "</label>"
        '<label>status <select id="hw-vstatus"><option value="">all</option>'
        '<option value="present">present at end</option><option value="departed">departed'
        "</option></select></label>"
        f'<output id="hw-vcount">{len(rows)} of {len(rows)} vessels</output></div>'
        '<div class="hw-scroll hw-vlist"><table class="hw-sortable" id="hw-vessels"><thead><tr>'
        f"{head}</tr></thead><tbody>{''.join(body)}</tbody></table></div>"
        '<p class="hw-sub hw-noprint">Times are UTC; "from"/"to" keep the vessels present at '
        "some moment in that window. Click a row (or press Enter on it) to show the vessel on "
        f"the map and move the replay to its first moment. Size: {size_note}</p>"
    )
