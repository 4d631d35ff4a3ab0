"""Synthetic inputs for the report tests: an invented shift in Port Calder, Calder Sound.

Nothing here comes from the filter or the rules: trajectories are simple
kinematic paths (smoothed = filtered = predicted moments), plots are the
states plus noise, scans group them per radar, alerts are written by hand.
"""

from __future__ import annotations

from types import MappingProxyType

import numpy as np
from shapely.geometry import Polygon

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.records import RuleConfig, SensorConfig, ZoneConfig
from harbourwatch.report import ReportInputs
from harbourwatch.rules.evaluate import Alert
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import AsSeenTable, Trajectory, TrajectorySet

T0 = 1_777_874_400.0  # 2026-05-04T06:00:00Z
LAT0, LON0 = 57.5, -30.0
SCAN_S = 2.5


def _box(lat0: float, lon0: float, lat1: float, lon1: float) -> Polygon:
    return Polygon([(lon0, lat0), (lon1, lat0), (lon1, lat1), (lon0, lat1)])


def make_zones(restricted_name: str = "Calder Firing Range") -> list[ZoneConfig]:
    """Invented zones around Port Calder (WGS84 lon/lat), one of kind ``land``."""
    coast = Polygon([(-30.10, 57.535), (-30.05, 57.530), (-30.01, 57.538), (-29.97, 57.531),
                     (-29.90, 57.536), (-29.90, 57.56), (-30.10, 57.56)])
    return [
        ZoneConfig(id="calder-head", name="Calder Head", kind="land", geometry=coast),
        ZoneConfig(id="firing-range", name=restricted_name, kind="restricted",
                   geometry=_box(57.47, -30.06, 57.485, -30.03)),
        ZoneConfig(id="outer-roads", name="Outer Roads", kind="anchorage",
                   geometry=_box(57.49, -29.99, 57.505, -29.96)),
        ZoneConfig(id="sound-fairway", name="Sound Fairway", kind="fairway",
                   geometry=_box(57.495, -30.08, 57.503, -29.92)),
        ZoneConfig(id="north-quay", name="North Quay Berth", kind="berth",
                   geometry=_box(57.525, -30.012, 57.529, -30.004)),
    ]


def make_sensors() -> list[SensorConfig]:
    common = dict(scan_period_s=SCAN_S, range_sigma_m=15.0, bearing_sigma_deg=0.4,
                  detection_probability=0.9, false_plots_per_scan=4.0, max_range_m=20000.0)
    return [
        SensorConfig(id="calder-mast", lat_deg=57.528, lon_deg=-30.03, **common),
        SensorConfig(id="sound-light", lat_deg=57.47, lon_deg=-29.95, **common),
    ]


def _traj(tid: str, t: np.ndarray, e: np.ndarray, n: np.ndarray, *, alive: bool,
          plot_ids: np.ndarray) -> Trajectory:
    ve = np.gradient(e, t) if t.size > 1 else np.zeros_like(e)
    vn = np.gradient(n, t) if t.size > 1 else np.zeros_like(n)
    mean = np.column_stack([e, ve, n, vn])
    base = np.array([[30.0, 0.5, 6.0, 0.1], [0.5, 0.2, 0.1, 0.02],
                     [6.0, 0.1, 20.0, 0.4], [0.1, 0.02, 0.4, 0.15]])
    cov = np.repeat(base[None], t.size, axis=0)
    return Trajectory(id=tid, time=t, mean=mean, cov=cov, filt_mean=mean, filt_cov=cov,
                      pred_mean=mean, pred_cov=cov, existence=0.97, end_probability=0.9,
                      alive_at_end=alive, plot_ids=plot_ids.astype(np.int64),
                      sensor_ids=np.zeros(t.size, np.int64))


def make_inputs(*, n_tracks: int = 6, hours: float = 1.0, seed: int = 7,
                restricted_name: str = "Calder Firing Range", rule_id: str = "roads-loiter",
                tile_url: str | None = None, outage: tuple[float, float] | None = (1200.0, 1500.0),
                ) -> ReportInputs:
    """A complete synthetic run: ``n_tracks`` trajectories over ``hours`` hours, two alerts.

    Track ``T0001`` loiters in Outer Roads; ``T0002`` and ``T0003`` meet
    (rendezvous). Radar ``sound-light`` has no scans during ``outage``
    (seconds after the start).
    """
    rng = np.random.default_rng(seed)
    frame = LocalFrame(LAT0, LON0)
    t_end = T0 + hours * 3600.0
    grid = np.arange(T0, t_end + 1e-9, SCAN_S)
    specs: list[tuple[str, np.ndarray, np.ndarray, np.ndarray]] = []
    # T0001: drifts slowly inside Outer Roads for the whole feed
    ce, cn = frame.to_local([57.4975], [-29.975])
    t = grid.copy()
    ph = (t - T0) / 900.0
    specs.append(("T0001", t, ce[0] + 150 * np.sin(ph), cn[0] + 100 * np.cos(ph)))
    # T0002/T0003: converge, stay together 15 min, separate
    me, mn = frame.to_local([57.48], [-29.99])
    for k, sgn in ((2, 1.0), (3, -1.0)):
        t = grid[(grid >= T0 + 300) & (grid <= min(T0 + 3000, t_end))]
        s = np.clip((t - (T0 + 1200)) / 60.0, -15, 15)
        r = np.where(np.abs(s) < 7.5, 40.0, 40.0 + 200.0 * (np.abs(s) - 7.5))
        specs.append((f"T{k:04d}", t, me[0] + sgn * r, mn[0] + 0.3 * s * 60.0))
    for k in range(4, n_tracks + 1):
        dur = rng.uniform(600.0, min(10800.0, hours * 3600.0))
        st = rng.uniform(T0, max(T0, t_end - dur))
        t = grid[(grid >= st) & (grid <= st + dur)]
        if t.size < 2:
            t = grid[:2]
        hd = rng.uniform(0, 2 * np.pi)
        sp = rng.uniform(2.0, 7.0)
        turn = rng.normal(0.0, 2e-4)
        e0, n0 = rng.uniform(-5000, 5000, 2)
        tt = t - t[0]
        head = hd + turn * tt
        e = e0 + np.cumsum(sp * np.sin(head) * np.gradient(tt))
        n = n0 + np.cumsum(sp * np.cos(head) * np.gradient(tt))
        specs.append((f"T{k:04d}", t, e, n))

    # plots: one per state (10 % missed), plus clutter; sorted by time
    rows_t, rows_lat, rows_lon, rows_sensor, owner, owner_idx = [], [], [], [], [], []
    for j, (_tid, t, e, n) in enumerate(specs):
        det = rng.random(t.size) > 0.1
        la, lo = frame.to_wgs84(e + rng.normal(0, 12, t.size), n + rng.normal(0, 12, t.size))
        idx = np.flatnonzero(det)
        rows_t.append(t[idx])
        rows_lat.append(la[idx])
        rows_lon.append(lo[idx])
        rows_sensor.append(np.round((t[idx] - T0) / SCAN_S).astype(np.int64) % 2)
        owner.append(np.full(idx.size, j))
        owner_idx.append(idx)
    nclut = int(grid.size * 0.5)
    ct = rng.choice(grid, nclut)
    cla, clo = frame.to_wgs84(rng.uniform(-8000, 8000, nclut), rng.uniform(-8000, 8000, nclut))
    rows_t.append(ct)
    rows_lat.append(cla)
    rows_lon.append(clo)
    rows_sensor.append(np.round((ct - T0) / SCAN_S).astype(np.int64) % 2)
    owner.append(np.full(nclut, -1))
    owner_idx.append(np.zeros(nclut, np.int64))
    pt = np.concatenate(rows_t)
    psens = np.concatenate(rows_sensor)
    own = np.concatenate(owner)
    own_i = np.concatenate(owner_idx)
    if outage is not None:  # radar 1 goes quiet
        drop = (psens == 1) & (pt >= T0 + outage[0]) & (pt <= T0 + outage[1])
    else:
        drop = np.zeros(pt.size, bool)
    keep = ~drop
    order = np.flatnonzero(keep)[np.argsort(pt[keep], kind="stable")]
    pt, psens, own, own_i = pt[order], psens[order], own[order], own_i[order]
    plat = np.concatenate(rows_lat)[order]
    plon = np.concatenate(rows_lon)[order]
    plots = PlotTable(time=pt, sensor=psens, lat_deg=plat, lon_deg=plon,
                      scan=np.full(pt.size, -1, np.int64), sigma_m=np.full(pt.size, np.nan),
                      source=np.zeros(pt.size, np.int64), line=np.arange(2, pt.size + 2),
                      files=("calder-sound-plots.csv",))
    trajs = []
    for j, (tid, t, e, n) in enumerate(specs):
        pid = np.full(t.size, -1, np.int64)
        mine = np.flatnonzero(own == j)
        pid[own_i[mine]] = mine
        trajs.append(_traj(tid, t, e, n, alive=bool(t[-1] >= t_end - SCAN_S), plot_ids=pid))

    # scans: per radar every 2 scan periods (alternating), none during the outage
    scans: list[Scan] = []
    scan_no = np.round((pt - T0) / SCAN_S).astype(np.int64)
    for si in (0, 1):
        ks = np.arange(si, grid.size, 2)
        bounds = np.searchsorted(scan_no, [ks, ks + 1], side="left")
        for num, (a, b) in enumerate(zip(bounds[0], bounds[1], strict=True)):
            tk = T0 + ks[num] * SCAN_S
            if outage is not None and si == 1 and T0 + outage[0] <= tk <= T0 + outage[1]:
                continue
            idx = np.arange(a, b, dtype=np.int64)
            scans.append(Scan(sensor=si, number=int(num), time=float(tk), plots=idx))
    scans.sort(key=lambda s: (s.time, s.sensor))

    # as-seen: every 4th state of each trajectory, shifted a little, starting 60 s late
    a_t, a_id, a_m = [], [], []
    for tr in trajs:
        sel = np.arange(0, tr.time.size, 4)
        sel = sel[tr.time[sel] >= tr.start + 60.0]
        a_t.append(tr.time[sel])
        a_id.append(np.full(sel.size, tr.id, dtype="<U16"))
        a_m.append(tr.mean[sel] + np.array([8.0, 0.0, -6.0, 0.0]))
    at = np.concatenate(a_t)
    as_seen = AsSeenTable(time=at, track=np.concatenate(a_id), mean=np.vstack(a_m),
                          sd=np.full(at.size, 6.0), existence=np.full(at.size, 0.9))
    ts = TrajectorySet(trajectories=tuple(trajs), frame=frame, as_seen=as_seen,
                       feed_start=T0, feed_end=float(grid[-1]))

    rules = [
        RuleConfig(id=rule_id, kind="loiter", zone="outer-roads",
                   params=MappingProxyType({"min_duration_min": 15, "max_speed_kn": 1.5})),
        RuleConfig(id="sound-meeting", kind="rendezvous", zone=None, min_probability=0.6,
                   params=MappingProxyType({"max_distance_m": 150, "min_duration_min": 10,
                                            "max_speed_kn": 3.0})),
        RuleConfig(id="range-entry", kind="entry", zone="firing-range"),
    ]
    tr1 = trajs[0]
    i0, i1 = 24, min(tr1.time.size - 1, 1000)
    alerts = [
        Alert(rule=rule_id, kind="loiter", track="T0001", other_track="", zone="outer-roads",
              start=float(tr1.time[i0]), end=float(tr1.time[i1]), probability=0.93,
              summary=f"T0001 loitered in Outer Roads ({rule_id})",
              details=MappingProxyType({
                  "entry_time": float(tr1.time[i0]),
                  "entry_xy": (float(tr1.mean[i0, 0]), float(tr1.mean[i0, 2])),
                  "exit_time": float(tr1.time[i1]),
                  "exit_xy": (float(tr1.mean[i1, 0]), float(tr1.mean[i1, 2]))})),
        Alert(rule="sound-meeting", kind="rendezvous", track="T0002", other_track="T0003",
              zone="", start=T0 + 1200 - 450, end=T0 + 1200 + 450, probability=0.71,
              summary="T0002 and T0003 met for 15 min",
              details=MappingProxyType({"closest_time": T0 + 1200.0, "min_distance_m": 80.0})),
    ]
    prov = {
        "version": "0.1.0",
        "inputs": [{"path": "calder-sound-plots.csv", "sha256": "ab" * 32},
                   {"path": "zones/<calder>.geojson", "sha256": "cd" * 32}],
        "parameters": {"seed": seed, "existence_threshold": 0.5},
        "timings": {"filter_s": 12.5, "report_s": 1.25},
        "started": "2026-05-04T12:05:00.000Z",
    }
    return ReportInputs(trajectories=ts, plots=plots, scans=scans, sensors=make_sensors(),
                        zones=make_zones(restricted_name), rules=rules, alerts=alerts,
                        provenance=prov, tile_url=tile_url)


#: Hull sizes of the large vessels of :func:`make_hull_inputs`: length, beam (m) and the
#: main axis of the extent in the local grid (degrees from grid north, clockwise).
HULLS = {"T0001": (200.0, 30.0, 120.0), "T0002": (150.0, 24.0, 10.0),
         "T0099": (280.0, 42.0, 75.0)}
#: T0099: under way on grid course 240 at 4 m/s from +600 s, slows to rest over +1200..+1260 s.
T99_COURSE_DEG, T99_SPEED, T99_START, T99_STOP, T99_END = 240.0, 4.0, 600.0, 1200.0, 2400.0


def extent_tuple(length: float, beam: float, axis_deg: float, dof: float = 20.0) -> tuple[float, ...]:
    """``(α, β, v, V00, V01, V11)`` whose extent mean ``V / (v - 3)`` is the ellipse
    of this length and beam along ``axis_deg``: ``X = (L/2)^2 u u^T + (B/2)^2 w w^T``."""
    a = np.radians(axis_deg)
    u, w = np.array([np.sin(a), np.cos(a)]), np.array([np.cos(a), -np.sin(a)])
    x = (length / 2) ** 2 * np.outer(u, u) + (beam / 2) ** 2 * np.outer(w, w)
    v = (dof - 3.0) * x
    return (30.0, 10.0, dof, float(v[0, 0]), float(v[0, 1]), float(v[1, 1]))


def make_hull_inputs() -> ReportInputs:
    """:func:`make_inputs` with large vessels: T0001 (slow throughout, loiter alert),
    T0002 (under way, slow while it meets the point-like T0003) and T0099 (under way,
    then at rest); their as-seen rows know the length from 120 s after the first estimate."""
    import dataclasses

    base = make_inputs(n_tracks=6)
    ts = base.trajectories
    frame = ts.frame
    grid = np.arange(T0, T0 + 3600.0 + 1e-9, SCAN_S)
    t = grid[(grid >= T0 + T99_START) & (grid <= T0 + T99_END)]
    tt = t - t[0]
    ramp = T99_STOP - T99_START
    sp = T99_SPEED * np.clip(1.0 - (tt - ramp) / 60.0, 0.0, 1.0)
    dist = np.concatenate([[0.0], np.cumsum(0.5 * (sp[1:] + sp[:-1]) * np.diff(tt))])
    me, mn = frame.to_local([57.49], [-30.0])
    c = np.radians(T99_COURSE_DEG)
    e, n = me[0] + 1500.0 + dist * np.sin(c), mn[0] + 1500.0 + dist * np.cos(c)
    mean = np.column_stack([e, sp * np.sin(c), n, sp * np.cos(c)])
    cov = np.repeat(ts.trajectories[0].cov[:1], t.size, axis=0)
    t99 = Trajectory(id="T0099", time=t, mean=mean, cov=cov, filt_mean=mean, filt_cov=cov,
                     pred_mean=mean, pred_cov=cov, existence=0.99, end_probability=0.9,
                     alive_at_end=False, plot_ids=np.full(t.size, -1, np.int64),
                     sensor_ids=np.zeros(t.size, np.int64))
    trajs = [dataclasses.replace(tr, extent=extent_tuple(*HULLS[tr.id])) if tr.id in HULLS else tr
             for tr in ts.trajectories] + [dataclasses.replace(t99, extent=extent_tuple(*HULLS["T0099"]))]
    a = ts.as_seen
    sel = np.arange(0, t.size, 4)
    sel = sel[t[sel] >= t[0] + 60.0]
    at = np.concatenate([a.time, t[sel]])
    aid = np.concatenate([a.track, np.full(sel.size, "T0099", dtype="<U16")])
    am = np.vstack([a.mean, mean[sel]])
    first = {tid: at[aid == tid].min() for tid in set(aid.tolist())}
    length = np.full(at.size, np.nan)
    for tid, (hl, _, _) in HULLS.items():
        known = (aid == tid) & (at >= first[tid] + 120.0)
        length[known] = 0.9 * hl  # as known then: shorter than the final estimate
    order = np.lexsort((aid, at))
    as_seen = AsSeenTable(time=at[order], track=aid[order], mean=am[order],
                          sd=np.full(at.size, 6.0), existence=np.full(at.size, 0.9),
                          length=length[order])
    new_ts = TrajectorySet(trajectories=tuple(trajs), frame=frame, as_seen=as_seen,
                           feed_start=ts.feed_start, feed_end=ts.feed_end)
    return dataclasses.replace(base, trajectories=new_ts)
