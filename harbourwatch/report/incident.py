"""One page per alert: zoomed map, uncertainty ellipses, plots, speed chart, narrative."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import folium
import numpy as np

from harbourwatch.io.records import RuleConfig, ZoneConfig
from harbourwatch.io.timefmt import format_clock, format_utc_one
from harbourwatch.report import charts
from harbourwatch.report._data import state_index, track_latlon
from harbourwatch.report._html import esc, esc_tooltip, fmt_prob
from harbourwatch.report._layers import add_track, add_zones, ellipse_latlon, zone_label
from harbourwatch.report._mapbase import PointLayer, new_map, render_parts, round5
from harbourwatch.report._page import document
from harbourwatch.report._style import PALETTE
from harbourwatch.report.overview import map_bounds
from harbourwatch.rules.evaluate import Alert
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
              n_plots: int | None = None, sd_m: float | None = None) -> str:
    """Plain-language paragraph about one alert (not escaped; plain text).

    Built only from the alert's own fields, its rule's parameters and the
    trajectory's plot count and uncertainty, so a reviewer can paste it into
    an incident record.
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
    if n_plots is not None:
        text += (f" The trajectory was reconstructed after the fact from {n_plots} radar "
                 "plot(s)")
        if sd_m is not None and np.isfinite(sd_m):
            text += f"; its position uncertainty at the start of the episode was about {sd_m:.0f} m (1 sigma)"
        text += "."
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


def incident_html(inputs: ReportInputs, index: int) -> str:
    """The complete page of alert ``index`` (0-based, order of ``inputs.alerts``)."""
    a = inputs.alerts[index]
    ts = inputs.trajectories
    rule = next((r for r in inputs.rules if r.id == a.rule), None)
    zone = next((z for z in inputs.zones if z.id == a.zone), None)
    trs: list[tuple[str, Trajectory]] = []
    for role, tid in (("focus", a.track), ("other", a.other_track)):
        if tid:
            try:
                trs.append((role, ts.by_id(tid)))
            except KeyError:
                pass
    tracks = [tr for _, tr in trs]
    w0, w1 = _window(a, tracks)
    ell = []
    for role, tr in trs:
        for lab, t in ellipse_points(a):
            if role == "other" and lab not in ("closest approach",):
                continue
            i = state_index(tr, t)
            ring = ellipse_latlon(ts.frame, tr.mean[i], tr.cov[i], k_sigma=ELLIPSE_K_SIGMA)
            ell.append((tr, lab, float(tr.time[i]), ring, float(tr.position_sd[i])))

    seg_pts = [_segment(ts, tr, a.start, a.end) for tr in tracks] + [e[3] for e in ell]
    fallback = [(s.lat_deg, s.lon_deg) for s in inputs.sensors]
    bounds = map_bounds(seg_pts, fallback)
    m = new_map(bounds, tile_url=inputs.tile_url, height_px=470)
    add_zones(m, [z for z in inputs.zones if z.kind_key == "land"], ts.frame)
    if zone is not None and zone.kind_key != "land":
        add_zones(m, [zone], ts.frame)
    plots_fg = folium.FeatureGroup(name="Radar plots").add_to(m)
    n_plots = 0
    for role, tr in trs:
        pid = tr.plot_ids[tr.plot_ids >= 0] if tr.plot_ids.size else np.zeros(0, np.int64)
        pid = pid[pid < len(inputs.plots)]
        if role == "focus":
            n_plots = int(pid.size)
        pts = np.column_stack([inputs.plots.lat_deg[pid], inputs.plots.lon_deg[pid]])
        if pts.size:
            plots_fg.add_child(PointLayer(pts, {
                "radius": 2, "weight": 1, "color": "#1b1b1b", "fillColor": "#ffffff",
                "fillOpacity": 1.0, "className": "hw-plot", "interactive": False}))
    tracks_fg = folium.FeatureGroup(name="Trajectories").add_to(m)
    for role, tr in trs:
        add_track(tracks_fg, tr, track_latlon(ts, tr),
                  role="other" if role == "other" else None,
                  extra_class="hw-focus" if role == "focus" else "hw-other")
    ell_fg = folium.FeatureGroup(name="2-sigma ellipses").add_to(m)
    for tr, lab, t, ring, sd in ell:
        folium.Polygon(
            locations=round5(ring), color=PALETTE["blue"], weight=1.5, fill=True,
            fill_color=PALETTE["sky"], fill_opacity=0.25, class_name="hw-ellipse",
            tooltip=folium.Tooltip(
                f"{esc_tooltip(tr.id)}: {esc_tooltip(lab)} at {format_clock(t, seconds=True)} "
                f"UTC<br>2-sigma position ellipse (1-sigma about {sd:.0f} m)"),
        ).add_to(ell_fg)
    folium.LayerControl(collapsed=False, position="topright").add_to(m)
    parts = render_parts(m)

    # speed chart
    series = []
    for role, tr in trs:
        sel = (tr.time >= w0) & (tr.time <= w1)
        colour = PALETTE["blue"] if role == "focus" else PALETTE["purple"]
        series.append(charts.Series(tr.time[sel], tr.speed[sel] / KNOT_M_S, colour,
                                    f"speed over ground, {tr.id}",
                                    dash=None if role == "focus" else "5 4"))
    hl = []
    if rule is not None and "max_speed_kn" in rule.params:
        hl.append(charts.HLine(float(rule.params["max_speed_kn"]),
                               f"rule limit {_num(rule.params['max_speed_kn'])} kn"))
    chart = charts.time_chart(
        series, t0=w0, t1=w1, title=f"Speed over ground, alert {index + 1}", y_label="knots",
        bands=[charts.Band(a.start, a.end, "alert episode")], hlines=hl,
        caption="Smoothed speed over ground (knots) around the alert; the shaded span is the "
                "alert episode" + ("; the dashed red line is the rule's speed limit." if hl else "."),
    )

    sd0 = ell[0][4] if ell else None
    text = narrative(a, rule=rule, zone=zone, n_plots=n_plots if trs else None, sd_m=sd0)
    facts = [
        ("rule", f"{a.rule} ({a.kind})"),
        ("trajectory", a.track),
        ("other trajectory", a.other_track),
        ("zone", zone_label(zone) if zone is not None else a.zone),
        ("start", format_utc_one(a.start)),
        ("end", format_utc_one(a.end)),
        ("duration", fmt_duration(a.end - a.start)),
        ("probability", fmt_prob(a.probability)),
        ("summary", a.summary),
    ]
    facts_html = "".join(f"<tr><td>{esc(k)}</td><td>{esc(v)}</td></tr>" for k, v in facts if v)
    body = (
        '<p class="hw-nav hw-noprint"><a href="../report.html">\u2190 shift overview</a></p>'
        f"<h1>Alert {index + 1}: {esc(a.rule)}</h1>"
        f'<table class="hw-facts">{facts_html}</table>'
        "<h2>Narrative</h2>"
        f'<p class="hw-narrative" id="hw-narrative">{esc(text)}</p>'
        "<h2>Map</h2>"
        f"{parts.html}"
        '<p class="hw-sub">Line: smoothed trajectory (dotted purple: the other vessel); white '
        "dots: the radar plots used by the trajectory; blue ellipses: 2-sigma position "
        "uncertainty at the marked moments.</p>"
        "<h2>Speed</h2>"
        f"{chart}"
    )
    return document(title=f"Alert {index + 1}: {a.rule}", body=body, parts=parts)
