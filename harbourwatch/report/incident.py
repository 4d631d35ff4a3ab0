"""One page per alert: zoomed map, uncertainty ellipses, plots, speed chart, narrative."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import folium
import numpy as np

from harbourwatch.io.records import RuleConfig, ZoneConfig
from harbourwatch.io.timefmt import format_clock, format_utc_one
from harbourwatch.report import charts
from harbourwatch.report._data import state_index, track_latlon
from harbourwatch.report._fmt import fmt_clock, fmt_day, fmt_dm, fmt_sd2
from harbourwatch.report._html import (
    esc,
    esc_isolating,
    esc_tooltip,
    esc_user,
    fmt_prob,
    script_json,
    tooltip_user,
)
from harbourwatch.report._hull import (
    HULL_KEY,
    HullOutline,
    add_hulls,
    hull_outline,
    hull_sentence,
)
from harbourwatch.report._layers import (
    add_track,
    add_zones,
    alert_strings,
    ellipse_latlon,
    size_text,
    track_status,
    zone_label,
)
from harbourwatch.report._mapbase import MapParts, PointLayer, new_map, render_parts, round5
from harbourwatch.report._page import document
from harbourwatch.report._style import INK, PALETTE, TRACK_STYLE, zone_style
from harbourwatch.report.overview import map_bounds
from harbourwatch.rules.evaluate import Alert
from harbourwatch.rules.positions import AlertPositions, alert_positions
from harbourwatch.trajectories import Trajectory, TrajectorySet
from harbourwatch.units import KNOT_M_S, fmt_duration

if TYPE_CHECKING:
    from harbourwatch.report import ReportInputs

__all__ = ["incident_html", "narrative", "ellipse_points"]

#: Ellipse size: 2 standard deviations along each principal axis.
ELLIPSE_K_SIGMA = 2.0


def _num(v: Any) -> str:
    return f"{float(v):g}"


def narrative(a: Alert, *, rule: RuleConfig | None, zone: ZoneConfig | None,
              n_plots: int | None = None, sd_m: float | None = None,
              positions: AlertPositions | None = None, size: str = "") -> str:
    """Plain-language paragraph about one alert (not escaped; plain text).

    Built only from the alert's own fields, its rule's parameters and the
    trajectory's plot count and uncertainty, so a reviewer can paste it into
    an incident record. ``size`` (sentences on a large vessel's size) goes
    before the closing caution.
    """
    params: Mapping[str, Any] = rule.params if rule is not None else {}
    where = f"zone {zone_label(zone)}" if zone is not None else (
        f"zone {a.zone}" if a.zone else "")
    kind = a.kind.strip().lower()
    if kind == "loiter":
        lim = f" (slower than {_num(params['max_speed_kn'])} kn)" if "max_speed_kn" in params else ""
        what = f"stayed inside {where} at low speed{lim}"
    elif kind == "pass-through":
        what = f"entered {where} and later left it"
    elif kind == "entry":
        what = f"was inside {where}"
    elif kind == "speed":
        lim = f"{_num(params['max_speed_kn'])} kn" if "max_speed_kn" in params else "the limit"
        what = f"went faster than {lim} inside {where}"
    elif kind == "rendezvous":
        dist = f"{_num(params['max_distance_m'])} m" if "max_distance_m" in params else "close range"
        what = f"stayed within {dist} of the vessel on trajectory {a.other_track}"
        if where:
            what += f" inside {where}"
    else:
        what = "met the conditions of the rule" + (f" in {where}" if where else "")
    day = format_utc_one(a.start)[:10]
    text = (
        f"On {day}, between {format_clock(a.start, seconds=True)} and "
        f"{format_clock(a.end, seconds=True)} UTC ({fmt_duration(a.end - a.start)}), the vessel "
        f"on estimated trajectory {a.track} {what}. Rule {a.rule} ({a.kind}) holds with an "
        f"estimated probability of {fmt_prob(a.probability)}"
    )
    if rule is not None:
        text += f" (alert threshold {fmt_prob(rule.min_probability)})"
    text += "."
    if positions is not None:
        p0, p1, key = positions.start, positions.end, positions.key
        text += (f" The episode began at {fmt_dm(p0.lat, p0.lon)} and ended at "
                 f"{fmt_dm(p1.lat, p1.lon)}")
        if key.label not in ("start", "entry"):
            text += f"; the {key.label} was at {fmt_dm(key.lat, key.lon)}"
        elif key.label == "entry" and kind == "pass-through":
            text += " (entry and exit of the zone)"
        text += f" (WGS84, each within about {2 * max(p0.sd_m, p1.sd_m, key.sd_m):.0f} m, 2 sigma)."
    if n_plots is not None:
        text += (f" The trajectory was reconstructed after the fact from {n_plots} radar "
                 "plot(s)")
        if sd_m is not None and np.isfinite(sd_m):
            text += f"; its position uncertainty at the start of the episode was about {sd_m:.0f} m (1 sigma)"
        text += "."
    text += size
    text += (" This is a statistical estimate from radar data alone; confirm it with other "
             "sources before acting on it.")
    return text


def ellipse_points(a: Alert) -> list[tuple[str, float]]:
    """``(label, time)`` of the ellipses to draw: entry/exit/closest from details, else start/end."""
    d = a.details or {}
    out = [(lab, float(d[key])) for key, lab in
           (("entry_time", "entry"), ("closest_time", "closest approach"), ("exit_time", "exit"))
           if key in d and d[key] is not None and np.isfinite(float(d[key]))]
    if not any(lab == "entry" for lab, _ in out):
        out.insert(0, ("episode start", a.start))
    if not any(lab == "exit" for lab, _ in out):
        out.append(("episode end", a.end))
    return out


def _window(a: Alert, trs: list[Trajectory]) -> tuple[float, float]:
    pad = max(600.0, 0.5 * (a.end - a.start))
    lo = min([tr.start for tr in trs] + [a.start])
    hi = max([tr.end for tr in trs] + [a.end])
    return max(a.start - pad, lo), min(a.end + pad, hi)


def _segment(ts: TrajectorySet, tr: Trajectory, t0: float, t1: float) -> np.ndarray:
    sel = (tr.time >= t0) & (tr.time <= t1)
    if not sel.any():
        sel[state_index(tr, 0.5 * (t0 + t1))] = True
    lat, lon = ts.frame.to_wgs84(tr.mean[sel, 0], tr.mean[sel, 2])
    return np.column_stack([lat, lon])


@dataclass(frozen=True, kw_only=True, eq=False)
class _Incident:
    """What one incident page shows, worked out once."""

    index: int
    alert: Alert
    rule: RuleConfig | None
    zone: ZoneConfig | None
    trs: tuple[tuple[str, Trajectory], ...]  # ("focus" | "other", trajectory)
    window: tuple[float, float]
    ellipses: tuple[tuple[Trajectory, str, float, np.ndarray, float], ...]
    hulls: tuple[tuple[Trajectory, str, float, HullOutline], ...]  # large vessels, key times
    positions: AlertPositions | None
    episode: tuple[np.ndarray, ...]  # lat/lon of each trajectory between start and end
    day: str
    tz: str | None
    quoted: tuple[str, ...]  # the user strings the sentences quote (isolated in <bdi>)


def _incident(inputs: ReportInputs, index: int) -> _Incident:
    a = inputs.alerts[index]
    ts = inputs.trajectories
    trs: list[tuple[str, Trajectory]] = []
    for role, tid in (("focus", a.track), ("other", a.other_track)):
        if tid:
            try:
                trs.append((role, ts.by_id(tid)))
            except KeyError:
                pass
    ell, hulls = [], []
    for role, tr in trs:
        for lab, t in ellipse_points(a):
            if role == "other" and lab not in ("closest approach",):
                continue
            i = state_index(tr, t)
            ring = ellipse_latlon(ts.frame, tr.mean[i], tr.cov[i], k_sigma=ELLIPSE_K_SIGMA)
            ell.append((tr, lab, float(tr.time[i]), ring, float(tr.position_sd[i])))
            hull = hull_outline(ts.frame, tr, i)
            if hull is not None:
                hulls.append((tr, lab, float(tr.time[i]), hull))
    return _Incident(
        index=index, alert=a,
        rule=next((r for r in inputs.rules if r.id == a.rule), None),
        zone=next((z for z in inputs.zones if z.id == a.zone), None),
        trs=tuple(trs), window=_window(a, [tr for _, tr in trs]), ellipses=tuple(ell),
        hulls=tuple(hulls),
        positions=alert_positions(a, ts),
        episode=tuple(_segment(ts, tr, a.start, a.end) for _, tr in trs),
        day=fmt_day(a.start), tz=inputs.display_tz, quoted=alert_strings(a, inputs.zones),
    )


# --------------------------------------------------------------------------- map
def _add_plots(m: folium.Map, inc: _Incident, inputs: ReportInputs) -> int:
    """The radar plots used by the trajectories; returns the focus vessel's plot count."""
    plots_fg = folium.FeatureGroup(name="Radar plots").add_to(m)
    n_plots = 0
    for role, tr in inc.trs:
        pid = tr.plot_ids[tr.plot_ids >= 0] if tr.plot_ids.size else np.zeros(0, np.int64)
        pid = pid[pid < len(inputs.plots)]
        if role == "focus":
            n_plots = int(pid.size)
        pts = np.column_stack([inputs.plots.lat_deg[pid], inputs.plots.lon_deg[pid]])
        if pts.size:
            plots_fg.add_child(PointLayer(pts, {
                "radius": 2, "weight": 1, "color": "#1b1b1b", "fillColor": "#ffffff",
                "fillOpacity": 1.0, "className": "hw-plot", "interactive": False}))
    return n_plots


def _add_tracks(m: folium.Map, inc: _Incident, ts: TrajectorySet) -> None:
    """Whole trajectories, the episode drawn over them, start and end marks."""
    tracks_fg = folium.FeatureGroup(name="Trajectories").add_to(m)
    for role, tr in inc.trs:
        add_track(tracks_fg, tr, track_latlon(ts, tr),
                  role="other" if role == "other" else None,
                  extra_class="hw-focus" if role == "focus" else "hw-other")
    for (role, _tr), seg in zip(inc.trs, inc.episode, strict=True):
        folium.PolyLine(
            locations=round5(seg), color=INK if role == "focus" else PALETTE["purple"],
            weight=5 if role == "focus" else 4, opacity=0.55, interactive=False,
            class_name=f"hw-episode hw-episode-{role}",
        ).add_to(tracks_fg)
    pos = inc.positions
    if pos is None:
        return
    for p, letter, cls in ((pos.start, "S", "hw-mark-start"), (pos.end, "E", "hw-mark-end")):
        folium.Marker(
            location=[round(p.lat, 5), round(p.lon, 5)],
            icon=folium.DivIcon(html=f'<span class="hw-mark {cls}">{letter}</span>',
                                icon_size=(20, 20), icon_anchor=(10, 10), class_name="hw-divicon"),
            tooltip=folium.Tooltip(
                f"episode {esc_tooltip(p.label)}, {esc_tooltip(fmt_clock(p.time, tz=inc.tz))}"
                f"<br>{esc_tooltip(fmt_dm(p.lat, p.lon))}"),
        ).add_to(tracks_fg)


def _add_ellipses(m: folium.Map, inc: _Incident) -> None:
    """2-sigma ellipses to scale, each with a ring of fixed size so a small one is still found."""
    ell_fg = folium.FeatureGroup(name="2-sigma ellipses").add_to(m)
    for tr, lab, t, ring, sd in inc.ellipses:
        tip = folium.Tooltip(
            f"{tooltip_user(tr.id)}: {esc_tooltip(lab)} at {esc_tooltip(fmt_clock(t, tz=inc.tz))}"
            f"<br>2-sigma position ellipse ({esc_tooltip(fmt_sd2(sd))})")
        folium.Polygon(
            locations=round5(ring), color=PALETTE["blue"], weight=2, fill=True,
            fill_color=PALETTE["sky"], fill_opacity=0.35, class_name="hw-ellipse", tooltip=tip,
        ).add_to(ell_fg)
        centre = ring[:-1].mean(axis=0)
        folium.CircleMarker(
            location=[round(float(centre[0]), 5), round(float(centre[1]), 5)], radius=15,
            color=PALETTE["blue"], weight=1.5, fill=False, dash_array="3 3",
            class_name="hw-ellipse-ring", interactive=False,
        ).add_to(ell_fg)


def _map(inc: _Incident, inputs: ReportInputs) -> tuple[MapParts, int, list[list[float]]]:
    """The incident map; its parts, the focus plot count and the episode's bounds."""
    ts = inputs.trajectories
    seg_pts = list(inc.episode) + [e[3] for e in inc.ellipses] + [h[3].ring for h in inc.hulls]
    fallback = [(s.lat_deg, s.lon_deg) for s in inputs.sensors]
    bounds = map_bounds(seg_pts, fallback)
    m = new_map(bounds, tile_url=inputs.tile_url, height_px=470)
    add_zones(m, [z for z in inputs.zones if z.kind_key == "land"], ts.frame)
    if inc.zone is not None and inc.zone.kind_key != "land":
        add_zones(m, [inc.zone], ts.frame)
    n_plots = _add_plots(m, inc, inputs)
    _add_tracks(m, inc, ts)
    add_hulls(m, inc.hulls, tz=inc.tz)
    _add_ellipses(m, inc)
    folium.LayerControl(collapsed=False, position="topright").add_to(m)
    return render_parts(m), n_plots, bounds


def _legend(inc: _Incident) -> str:
    """The map's key, naming only what this page draws."""
    focus = next((tr for role, tr in inc.trs if role == "focus"), None)
    items = []
    if focus is not None:
        status = track_status(focus)
        st = TRACK_STYLE[status]
        words = ("still present at the end of the shift" if status == "present" else
                 "departed before the end of the shift")
        items.append(_line_key(str(st["color"]), _dash(st["dash_array"]),
                               f"vessel {focus.id}: smoothed trajectory, {words}"))
    if any(role == "other" for role, _ in inc.trs):
        other = next(tr for role, tr in inc.trs if role == "other")
        st = TRACK_STYLE["other"]
        items.append(_line_key(str(st["color"]), _dash(st["dash_array"]),
                               f"the other vessel, {other.id}: smoothed trajectory"))
    items.append(_line_key(INK, None, "the alert episode (thick underlay)", width=5,
                           opacity=0.55))
    items.append('<span class="hw-key"><span class="hw-mark hw-mark-start">S</span>'
                 '<span class="hw-mark hw-mark-end">E</span>start and end of the episode</span>')
    items.append('<span class="hw-key"><svg width="14" height="14" aria-hidden="true"><circle '
                 'cx="7" cy="7" r="2.5" fill="#fff" stroke="#1b1b1b"/></svg>radar plots used by '
                 "the trajectory</span>")
    items.append(f'<span class="hw-key"><svg width="22" height="22" aria-hidden="true"><circle '
                 f'cx="11" cy="11" r="9" fill="none" stroke="{PALETTE["blue"]}" stroke-dasharray="3 3"/>'
                 f'<ellipse cx="11" cy="11" rx="5" ry="3" fill="{PALETTE["sky"]}" fill-opacity="0.5" '
                 f'stroke="{PALETTE["blue"]}"/></svg>2-sigma position ellipse, drawn to scale (the '
                 "dashed ring of fixed size marks where it is when it is too small to see)</span>")
    if inc.hulls:
        items.append(HULL_KEY)
    if inc.zone is not None:
        zs = zone_style(inc.zone.kind)
        dash = f' stroke-dasharray="{zs.dash}"' if zs.dash else ""
        items.append(
            f'<span class="hw-key"><svg width="22" height="14" aria-hidden="true"><rect x="1" '
            f'y="1" width="20" height="12" fill="{zs.fill}" fill-opacity="0.25" '
            f'stroke="{zs.stroke}" stroke-width="2"{dash}/></svg>zone {esc_user(zone_label(inc.zone))}'
            "</span>")
    return f'<div class="hw-legend">{"".join(items)}</div>'


def _dash(v: object) -> str | None:
    return str(v) if v else None


def _line_key(colour: str, dash: str | None, text: str, *, width: float = 3,
              opacity: float = 1.0) -> str:
    d = f' stroke-dasharray="{dash}"' if dash else ""
    return (f'<span class="hw-key"><svg width="34" height="10" aria-hidden="true"><line x1="1" '
            f'y1="5" x2="33" y2="5" stroke="{colour}" stroke-width="{width}" '
            f'stroke-opacity="{opacity}"{d}/></svg>{esc(text)}</span>')


# --------------------------------------------------------------------------- speed chart
def _speed_chart(inc: _Incident) -> str:
    w0, w1 = inc.window
    series = []
    for role, tr in inc.trs:
        sel = (tr.time >= w0) & (tr.time <= w1)
        colour = PALETTE["blue"] if role == "focus" else PALETTE["purple"]
        series.append(charts.Series(tr.time[sel], tr.speed[sel] / KNOT_M_S, colour,
                                    f"speed over ground, {tr.id}",
                                    dash=None if role == "focus" else "5 4"))
    hl = []
    rule = inc.rule
    if rule is not None and "max_speed_kn" in rule.params:
        hl.append(charts.HLine(float(rule.params["max_speed_kn"]),
                               f"rule limit {_num(rule.params['max_speed_kn'])} kn"))
    return charts.time_chart(
        series, t0=w0, t1=w1, title=f"Speed over ground, alert {inc.index + 1}", y_label="knots",
        bands=[charts.Band(inc.alert.start, inc.alert.end, "alert episode")], hlines=hl,
        caption="Smoothed speed over ground (knots) around the alert; the shaded span is the "
                "alert episode" + ("; the dashed red line is the rule's speed limit." if hl else "."),
    )


# --------------------------------------------------------------------------- tables
def _sizes(inc: _Incident) -> dict[str, str]:
    """Estimated size per trajectory of the alert, when one of them is a large vessel."""
    if not any(tr.extent is not None for _, tr in inc.trs):
        return {}
    return {tr.id: size_text(tr) for _, tr in inc.trs}


def _facts(inc: _Incident) -> str:
    a = inc.alert
    sizes = _sizes(inc)
    facts = [
        ("rule", f"{a.rule} ({a.kind})"),
        ("trajectory", a.track),
        ("size", sizes.get(a.track, "")),
        ("other trajectory", a.other_track),
        ("other size", sizes.get(a.other_track, "") if a.other_track else ""),
        ("zone", zone_label(inc.zone) if inc.zone is not None else a.zone),
        ("start", fmt_clock(a.start, day=inc.day, tz=inc.tz)),
        ("end", fmt_clock(a.end, day=inc.day, tz=inc.tz)),
        ("duration", fmt_duration(a.end - a.start)),
        ("probability", fmt_prob(a.probability)),
        ("summary", a.summary),
    ]
    skip = ' class="hw-print-skip"'
    rows = "".join(
        f'<tr{skip if k == "summary" else ""}><th scope="row">{esc(k)}</th>'
        f"<td>{esc_isolating(v, inc.quoted)}</td></tr>"
        for k, v in facts if v)
    return f'<table class="hw-facts">{rows}</table>'


def _positions(inc: _Incident) -> str:
    pos = inc.positions
    if pos is None:
        return "<p>No positions: the trajectory is not in this run.</p>"
    rows = "".join(
        f'<tr><td>{esc(p.label)}</td><td>{esc_user(p.track) if p.track else "both vessels"}</td>'
        f'<td class="num">{esc(fmt_clock(p.time, day=inc.day, tz=inc.tz))}</td>'
        f'<td class="num hw-pos">{esc(fmt_dm(p.lat, p.lon))}</td>'
        f'<td class="num">{esc(fmt_sd2(p.sd_m))}</td></tr>'
        for p in pos.points
    )
    return (
        '<div class="hw-scroll"><table class="hw-positions" id="hw-positions"><thead><tr>'
        '<th scope="col">event</th><th scope="col">trajectory</th><th scope="col">time</th>'
        '<th scope="col">position (WGS84)</th><th scope="col">uncertainty</th></tr></thead>'
        f"<tbody>{rows}</tbody></table></div>"
    )


def incident_html(inputs: ReportInputs, index: int) -> str:
    """The complete page of alert ``index`` (0-based, order of ``inputs.alerts``)."""
    inc = _incident(inputs, index)
    a = inc.alert
    parts, n_plots, bounds = _map(inc, inputs)
    sd0 = inc.ellipses[0][4] if inc.ellipses else None
    sizes = _sizes(inc)
    size = ""
    if sizes:  # large vessels: say how large, and where the map draws the hull
        size = " Estimated size: " + "; ".join(f"{k}: {v}" for k, v in sizes.items()) + "."
        size += hull_sentence(inc.hulls)
    text = narrative(a, rule=inc.rule, zone=inc.zone, n_plots=n_plots if inc.trs else None,
                     sd_m=sd0, positions=inc.positions, size=size)
    body = (
        '<p class="hw-nav hw-noprint"><a href="../report.html">\u2190 shift overview</a> \u00b7 '
        '<a href="../report.html#how-to-read">how to read this report</a></p>'
        f"<h1>Alert {index + 1}: {esc_user(a.rule)} <span class=\"hw-day\">{esc(inc.day)} "
        "(times UTC)</span></h1>"
        '<div class="hw-incident-top">'
        f'<section><h2>Facts</h2><div class="hw-scroll">{_facts(inc)}</div></section>'
        f"<section><h2>Positions</h2>{_positions(inc)}</section></div>"
        "<h2>Narrative</h2>"
        f'<p class="hw-narrative" id="hw-narrative">{esc_isolating(text, inc.quoted)}</p>'
        '<section class="hw-map-block"><h2>Map</h2>'
        f"{parts.html}{_legend(inc)}</section>"
        '<section class="hw-chart-block"><h2>Speed</h2>'
        f"{_speed_chart(inc)}</section>"
    )
    episode = [round5(seg) for seg in inc.episode]
    page = {"map": parts.name, "fit": round5(bounds), "episode": episode}
    return document(title=f"Alert {index + 1}: {a.rule}", body=body, parts=parts,
                    scripts=("mapmarks.js",), data_blocks={"hw-page-data": script_json(page)},
                    page_class="hw-incident")
