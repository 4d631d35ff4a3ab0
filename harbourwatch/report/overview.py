"""The shift overview page ``report.html``: map, replay, alerts, traffic, provenance."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import folium
import numpy as np

from harbourwatch.io.timefmt import format_clock
from harbourwatch.report import charts
from harbourwatch.report._data import (
    GAP_SCAN_PERIODS,
    REPLAY_STEP_S,
    SIMPLIFY_TOLERANCE_M,
    TRAIL_S,
    ZoneVisits,
    replay_payload,
    replay_step,
    scan_series,
    state_index,
    track_latlon,
    vessels_present,
    zone_visits,
)
from harbourwatch.report._fmt import fmt_clock, fmt_day
from harbourwatch.report._howto import how_to_read
from harbourwatch.report._html import (
    esc,
    esc_isolating,
    esc_tooltip,
    esc_user,
    fmt_prob,
    script_json,
    tooltip_user,
)
from harbourwatch.report._layers import (
    add_track,
    add_zones,
    alert_strings,
    track_status,
    zone_label,
)
from harbourwatch.report._mapbase import SafePopup, new_map, render_parts, round5
from harbourwatch.report._page import document, provenance_html
from harbourwatch.report._style import INK, PALETTE, SENSOR_COLOURS, TRACK_STYLE, zone_kinds
from harbourwatch.report._vessels import (
    filter_choices,
    vessel_rows,
    vessels_html,
    vessels_payload,
)
from harbourwatch.rules.evaluate import Alert
from harbourwatch.trajectories import TrajectorySet
from harbourwatch.units import fmt_duration

if TYPE_CHECKING:
    from harbourwatch.report import ReportInputs

__all__ = ["overview_html", "incident_name", "alert_latlon", "map_bounds"]


def incident_name(i: int) -> str:
    """File name of the ``i``-th (0-based) alert's page, in ``incidents/``."""
    return f"alert-{i + 1:04d}.html"


def alert_latlon(ts: TrajectorySet, a: Alert) -> tuple[float, float] | None:
    """Where an alert is drawn: ``details['entry_xy']`` if given, else the track at its start."""
    xy = a.details.get("entry_xy") if a.details else None
    if xy is None:
        try:
            tr = ts.by_id(a.track)
        except KeyError:
            return None
        m = tr.mean[state_index(tr, a.start)]
        xy = (m[0], m[2])
    lat, lon = ts.frame.to_wgs84([float(xy[0])], [float(xy[1])])
    return float(lat[0]), float(lon[0])


def map_bounds(points: Sequence[np.ndarray], fallback: Sequence[tuple[float, float]]
               ) -> list[list[float]]:
    """``[[lat_min, lon_min], [lat_max, lon_max]]`` of the given ``(K, 2)`` lat/lon arrays.

    With no point at all, the bounds of ``fallback`` (radar sites, zone corners).
    """
    arrs = [p for p in points if p.size]
    allp = np.vstack(arrs) if arrs else np.asarray(list(fallback) or [(0.0, 0.0)], float)
    lo, hi = allp.min(axis=0), allp.max(axis=0)
    pad = np.maximum((hi - lo) * 0.04, 0.002)
    return [[float(lo[0] - pad[0]), float(lo[1] - pad[1])],
            [float(hi[0] + pad[0]), float(hi[1] + pad[1])]]


def _legend(hulls: bool = False) -> str:
    items = []
    for key, label in (("present", "present at end of shift"), ("departed", "departed earlier")):
        st = TRACK_STYLE[key]
        dash = f' stroke-dasharray="{st["dash_array"]}"' if st["dash_array"] else ""
        items.append(
            f'<span class="hw-key"><svg width="34" height="10" aria-hidden="true"><line x1="1" '
            f'y1="5" x2="33" y2="5" stroke="{st["color"]}" stroke-width="3"{dash}/></svg>'
            f"trajectory, {label}</span>"
        )
    items.append(
        f'<span class="hw-key"><svg width="14" height="14" aria-hidden="true"><circle cx="7" '
        f'cy="7" r="5.5" fill="{PALETTE["vermillion"]}" stroke="#1b1b1b" stroke-width="1.5"/>'
        "</svg>alert</span>"
    )
    items.append(
        '<span class="hw-key"><svg width="14" height="14" aria-hidden="true"><circle cx="7" '
        'cy="7" r="5" fill="#0072B2" stroke="#1b1b1b" stroke-width="1.5"/></svg>'
        "replay: hindsight estimate (the small dot ahead of it shows the direction of travel)</span>"
    )
    items.append(
        '<span class="hw-key"><svg width="14" height="14" aria-hidden="true"><circle cx="7" '
        'cy="7" r="5" fill="#fff" stroke="#009E73" stroke-width="2.5"/></svg>'
        "replay: as seen at the time</span>"
    )
    if hulls:
        items.append(
            f'<span class="hw-key"><svg width="26" height="14" aria-hidden="true"><ellipse cx="13" '
            f'cy="7" rx="12" ry="4" fill="{PALETTE["blue"]}" fill-opacity="0.3" stroke="{INK}" '
            'stroke-width="1.5"/></svg>replay: hull outline of a large vessel, to scale '
            "(dashed green as seen at the time)</span>"
        )
    for zs in zone_kinds().values():
        dash = f' stroke-dasharray="{zs.dash}"' if zs.dash else ""
        items.append(
            f'<span class="hw-key"><svg width="22" height="14" aria-hidden="true"><rect x="1" '
            f'y="1" width="20" height="12" fill="{zs.fill}" fill-opacity="{max(zs.fill_opacity, 0.2)}" '
            f'stroke="{zs.stroke}" stroke-width="2"{dash}/></svg>zone: {esc(zs.label)}</span>'
        )
    return f'<div class="hw-legend">{"".join(items)}</div>'


def _replay_controls(t0: float, t1: float, tz: str | None) -> str:
    span = max(int(np.ceil(t1 - t0)), 1)
    speeds = "".join(
        f'<option value="{v}"{" selected" if v == 60 else ""}>{v}\u00d7</option>'
        for v in (10, 30, 60, 120, 300, 600)
    )
    trails = "".join(
        f'<option value="{v}"{" selected" if v == TRAIL_S else ""}>{label}</option>'
        for v, label in ((0, "none"), (60, "1 min"), (300, "5 min"), (900, "15 min"),
                         (3600, "1 h"), (1e9, "whole track")))
    return (
        '<div class="hw-replay" role="group" aria-label="Shift replay">'
        '<button type="button" id="hw-play" aria-pressed="false">Play</button>'
        f'<input type="range" id="hw-slider" min="0" max="{span}" step="1" value="{span}" '
        'aria-label="Replay time">'
        f'<output id="hw-clock" for="hw-slider">{esc(fmt_clock(t0, tz=tz))}</output>'
        f'<label>speed <select id="hw-speed">{speeds}</select></label>'
        f'<label>trail <select id="hw-trail">{trails}</select></label>'
        '<label><input type="checkbox" id="hw-upto" checked> only what had happened by then'
        "</label>"
        '<span role="radiogroup" aria-label="Estimate shown">'
        '<label><input type="radio" name="hw-mode" value="hindsight" checked> hindsight</label> '
        '<label><input type="radio" name="hw-mode" value="as_seen"> as seen at the time</label>'
        "</span></div>"
    )


NUM = ' class="num"'


def _alerts_table(inputs: ReportInputs) -> str:
    if not inputs.alerts:
        return "<p>No alerts were raised in this shift.</p>"
    day = fmt_day(inputs.trajectories.feed_start)
    tz = inputs.display_tz
    cols = [("#", True), ("rule", False), ("kind", False), ("track", False),
            ("other track", False), ("zone", False), ("start", True), ("end", True),
            ("duration", True), ("probability", True), ("summary", False)]
    head = "".join(
        f'<th scope="col"{NUM if num else ""}><button type="button">{esc(c)}</button></th>'
        for c, num in cols
    )
    rows = []
    for i, a in enumerate(inputs.alerts):
        link = f"incidents/{incident_name(i)}"
        cells = [
            f'<td class="num" data-sort="{i + 1}"><a href="{esc(link)}">{i + 1}</a> '
            f'<button type="button" class="hw-goto hw-noprint" data-alert="{i}" '
            f'title="show on the map and move the replay here">map</button></td>',
            f"<td>{esc_user(a.rule)}</td>",
            f"<td>{esc(a.kind)}</td>",
            f"<td>{esc(a.track)}</td>",
            f"<td>{esc(a.other_track)}</td>",
            f"<td>{esc_user(a.zone)}</td>",
            f'<td class="num" data-sort="{a.start:.3f}">{esc(fmt_clock(a.start, day=day, tz=tz))}</td>',
            f'<td class="num" data-sort="{a.end:.3f}">{esc(fmt_clock(a.end, day=day, tz=tz))}</td>',
            f'<td class="num" data-sort="{a.end - a.start:.3f}">{esc(fmt_duration(a.end - a.start))}</td>',
            f'<td class="num" data-sort="{a.probability:.6f}">{esc(fmt_prob(a.probability))}</td>',
            f'<td class="hw-summary"><a href="{esc(link)}">'
            f"{esc_isolating(a.summary, alert_strings(a, inputs.zones))}</a></td>",
        ]
        rows.append("<tr>" + "".join(cells) + "</tr>")
    return (
        '<div class="hw-scroll"><table class="hw-sortable" id="hw-alerts"><thead><tr>'
        f"{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
        '<p class="hw-sub hw-noprint">Click a column header to sort. Each row links to the '
        "alert's incident page.</p>"
    )


def _traffic(inputs: ReportInputs, visits: list[ZoneVisits]) -> str:
    ts = inputs.trajectories
    t0, t1 = ts.feed_start, ts.feed_end
    out = []
    t, n = vessels_present(ts)
    out.append("<h3>Vessels present</h3>")
    out.append(charts.time_chart(
        [charts.Series(t, n, PALETTE["blue"], "", step=True)], t0=t0, t1=t1,
        title="Vessels present over time", y_label="vessels",
        caption="Vessels present: estimated trajectories spanning each minute of the shift.",
    ))
    if visits:
        out.append("<h3>Entries per zone</h3>")
        out.append(charts.bar_chart(
            [zone_label(v.zone) for v in visits], [len(v.track) for v in visits],
            title="Entries per zone", unit="entries (visits by trajectories)",
            caption="Entries per zone: each contiguous run of smoothed states inside a zone "
                    "counts once (land zones left out).",
        ))
        out.append("<h3>Time spent in each zone</h3>")
        out.append(charts.histogram_grid(
            [(zone_label(v.zone), v.durations_min) for v in visits],
            title="Time spent in each zone",
            caption="Time spent in each zone: histogram of visit durations, minutes.",
        ))
    series = scan_series(inputs.scans, inputs.sensors, t0, t1)
    if series:
        out.append("<h3>Plots per scan, per radar</h3>")
    for k, s in enumerate(series):
        bands = [charts.Band(a, b, f"no scans {format_clock(a, seconds=True)}\u2013"
                             f"{format_clock(b, seconds=True)} UTC", kind="gap")
                 for a, b in s.gaps]
        gaps_txt = (f"{len(s.gaps)} outage(s) shaded (no scan for more than "
                    f"{GAP_SCAN_PERIODS:g} scan periods = {GAP_SCAN_PERIODS * s.sensor.scan_period_s:g} s)"
                    if s.gaps else "no outage")
        out.append(charts.time_chart(
            [charts.Series(s.t, s.mean_plots, SENSOR_COLOURS[k % len(SENSOR_COLOURS)], "")],
            t0=t0, t1=t1, bands=bands, height=170,
            title=f"Plots per scan, radar {s.sensor.id}", y_label="plots per scan",
            caption=f"Radar {s.sensor.id}: mean plots per scan over time "
                    f"({s.n_scans} scans); {gaps_txt}.",
        ))
    return "".join(out)


def _bounds(inputs: ReportInputs, latlon: dict[str, np.ndarray]) -> list[list[float]]:
    """The map's frame: every trajectory; with none, the radars and the zones."""
    fallback = [(s.lat_deg, s.lon_deg) for s in inputs.sensors]
    for z in inputs.zones:
        x0, y0, x1, y1 = z.geometry.bounds
        fallback += [(y0, x0), (y1, x1)]
    return map_bounds(list(latlon.values()), fallback)


def _alert_markers(m: folium.Map, inputs: ReportInputs) -> None:
    ts = inputs.trajectories
    alerts_fg = folium.FeatureGroup(name="Alerts").add_to(m)
    for i, a in enumerate(inputs.alerts):
        ll = alert_latlon(ts, a)
        if ll is None:
            continue
        tip = (f"<b>{tooltip_user(a.rule)}</b> ({esc_tooltip(a.kind)}), track "
               f"{esc_tooltip(a.track)}<br>{format_clock(a.start)}\u2013{format_clock(a.end)} UTC, "
               f"p = {fmt_prob(a.probability)}")
        mk = folium.CircleMarker(
            location=[round(ll[0], 5), round(ll[1], 5)], radius=7, color="#1b1b1b", weight=1.5,
            fill=True, fill_color=PALETTE["vermillion"], fill_opacity=0.95, class_name="hw-alert",
            tooltip=folium.Tooltip(tip),
        )
        mk.add_child(SafePopup(
            f'<b>{esc_user(a.rule)}</b><br>{esc_isolating(a.summary, alert_strings(a, inputs.zones))}<br>'
            f'<a href="incidents/{incident_name(i)}">open incident page {i + 1}</a>'))
        mk.add_to(alerts_fg)


def _live_alerts(inputs: ReportInputs) -> list[dict[str, object]]:
    """The alerts as the replay draws them once they have started (strings set as text)."""
    out: list[dict[str, object]] = []
    for i, a in enumerate(inputs.alerts):
        ll = alert_latlon(inputs.trajectories, a)
        if ll is None:
            continue
        out.append({"s": round(a.start - inputs.trajectories.feed_start, 3),
                    "lat": round(ll[0], 5), "lon": round(ll[1], 5), "rule": a.rule, "n": i + 1,
                    "href": f"incidents/{incident_name(i)}"})
    return out


def _warnings(inputs: ReportInputs) -> str:
    """Warnings the run recorded in run.json (``warnings``: a list of lines), if any."""
    found = inputs.provenance.get("warnings") if inputs.provenance else None
    if not found or not isinstance(found, list | tuple):
        return ""
    items = "".join(f"<li>{esc(w)}</li>" for w in found)
    return f'<div class="hw-warn" role="note" id="hw-warnings"><b>Warnings</b><ul>{items}</ul></div>'


def overview_html(inputs: ReportInputs) -> str:
    """The complete ``report.html`` text."""
    ts = inputs.trajectories
    empty = len(inputs.plots) == 0
    latlon = {tr.id: track_latlon(ts, tr) for tr in ts.trajectories}
    bounds = _bounds(inputs, latlon)
    m = new_map(bounds, tile_url=inputs.tile_url, height_px=560)

    land = folium.FeatureGroup(name="Land", control=False).add_to(m)
    add_zones(land, [z for z in inputs.zones if z.kind_key == "land"], ts.frame)
    zones = folium.FeatureGroup(name="Zones").add_to(m)
    add_zones(zones, [z for z in inputs.zones if z.kind_key != "land"], ts.frame)
    groups = {
        "present": folium.FeatureGroup(name="Trajectories present at end").add_to(m),
        "departed": folium.FeatureGroup(name="Trajectories departed").add_to(m),
    }
    for tr in ts.trajectories:
        add_track(groups[track_status(tr)], tr, latlon[tr.id])
    _alert_markers(m, inputs)
    folium.LayerControl(collapsed=False, position="topright").add_to(m)
    parts = render_parts(m)

    n_present = sum(1 for tr in ts.trajectories if tr.alive_at_end)
    tz = inputs.display_tz
    page = {"map": parts.name, "fit": round5(bounds)}
    scripts: tuple[str, ...]
    step = REPLAY_STEP_S  # coarser for a long feed (replay_step)
    visits = zone_visits(ts, inputs.zones)  # for the vessel list and the traffic charts
    if empty:
        day = "no plots in this feed"
        head = ("<h1>Shift review: no plots in this feed</h1>"
                '<p class="hw-empty" id="hw-empty">No plots in this feed: the feed file(s) have '
                "a header and no rows, so there is no shift to review, no trajectory and no "
                "alert. The map shows the radars' zones only.</p>")
        replay, blocks, scripts = "", {"hw-page-data": script_json(page)}, ("mapmarks.js",)
        vessels = ""
    else:
        day = fmt_day(ts.feed_start)
        span_txt = (f"{esc(fmt_clock(ts.feed_start, tz=tz))} to "
                    f"{esc(fmt_clock(ts.feed_end, day=day, tz=tz))}")
        head = (
            f'<h1>Shift review {esc(day)}</h1>'
            f'<p class="hw-sub">{span_txt} \u00b7 {len(ts)} trajectories '
            f"({n_present} present at end, {len(ts) - n_present} departed) \u00b7 "
            f'{len(inputs.alerts)} alert(s) \u00b7 {len(inputs.plots)} plots from '
            f"{len(inputs.sensors)} radar(s)</p>")
        step = replay_step(ts)
        payload = replay_payload(ts, step)
        payload["map"] = parts.name
        payload["tz"] = tz
        payload["day"] = day
        payload["alerts"] = _live_alerts(inputs)
        replay = _replay_controls(ts.feed_start, ts.feed_end, tz)
        vrows = vessel_rows(inputs, visits)
        vessels = ('<section class="hw-noprint"><h2 id="vessels">Vessels</h2>'
                   f"{vessels_html(inputs, vrows)}</section>")
        day0 = float(np.floor(ts.feed_start / 86400.0) * 86400.0) - ts.feed_start
        vdata = {"rows": vessels_payload(vrows, ts.feed_start), "day0": day0,
                 **filter_choices(inputs),
                 "alerts": [{"s": round(a.start - ts.feed_start, 3), "track": a.track}
                            for a in inputs.alerts]}
        blocks = {"hw-replay-data": script_json(payload), "hw-page-data": script_json(page),
                  "hw-vessels-data": script_json(vdata)}
        scripts = ("replay.js", "sort.js", "mapmarks.js", "vessels.js")
    nav = ('<p class="hw-sub hw-noprint"><a href="#vessels">vessels</a> \u00b7 '
           '<a href="#alerts">alerts</a> \u00b7 '
           '<a href="#traffic">traffic</a> \u00b7 <a href="#how-to-read">how to read this '
           'report</a> \u00b7 <a href="#provenance">provenance</a></p>')
    body = (
        f"{head}{nav}{_warnings(inputs)}"
        f"{parts.html}"
        f"{replay}"
        f"{_legend(any(tr.extent is not None for tr in ts.trajectories))}{vessels}"
        f'<p class="hw-sub">Trajectories are smoothed estimates (using the whole shift), drawn '
        f"simplified to {SIMPLIFY_TOLERANCE_M:g} m; the replay is resampled to "
        f"{step:g} s and shows a trail of the last few minutes. \u201cAs seen at the "
        "time\u201d shows the estimates that were available at each moment without hindsight. "
        "No basemap is drawn unless a tile server was configured; land is drawn from the "
        "zones file. Times are UTC"
        + (f", with local time ({esc(tz)}) in brackets" if tz else "") + ".</p>"
        '<section class="hw-alerts-block"><h2 id="alerts">Alerts</h2>'
        f"{_alerts_table(inputs)}</section>"
        '<section class="hw-noprint"><h2 id="traffic">Traffic</h2>'
        f"{'<p>No traffic: no plots in this feed.</p>' if empty else _traffic(inputs, visits)}</section>"
        f'<section class="hw-noprint">{how_to_read(step)}</section>'
        '<section class="hw-noprint"><h2 id="provenance">Run provenance</h2>'
        f"{provenance_html(dict(inputs.provenance))}</section>"
    )
    return document(
        title=f"Shift review {day}", body=body, parts=parts, scripts=scripts,
        data_blocks=blocks, page_class="hw-overview",
    )
