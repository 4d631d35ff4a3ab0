"""Simulation engine: vessel motion on the ellipsoid and the rotating-radar plot model.

Private helpers of :mod:`harbourwatch.sim.model` (which documents the models).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import ParameterError
from harbourwatch.scene.geodesy import WGS84_GEOD
from harbourwatch.sim.model import (
    PlotArrays,
    Scenario,
    SimSensor,
    SimulationResult,
    VesselPlan,
    VesselTruth,
)
from harbourwatch.units import KNOT_M_S

Array = NDArray[Any]

#: Step of the in-memory truth samples (seconds).
TRUTH_STEP_S = 1.0
_TURN_STEP_S = 0.5


@dataclass
class _Seg:
    t0: float
    t1: float
    kind: str  # "geo" or "samples"
    lat: float = 0.0
    lon: float = 0.0
    az: float = 0.0
    v0: float = 0.0
    acc: float = 0.0
    st: Array = field(default_factory=lambda: np.zeros(0))
    slat: Array = field(default_factory=lambda: np.zeros(0))
    slon: Array = field(default_factory=lambda: np.zeros(0))
    scourse: Array = field(default_factory=lambda: np.zeros(0))
    sspeed: Array = field(default_factory=lambda: np.zeros(0))

    def evaluate(self, t: Array) -> tuple[Array, Array, Array, Array]:
        if self.kind == "geo":
            dt = t - self.t0
            s = self.v0 * dt + 0.5 * self.acc * dt * dt
            n = t.size
            lon, lat, baz = WGS84_GEOD.fwd(np.full(n, self.lon), np.full(n, self.lat),
                                           np.full(n, self.az), s)
            course = np.where(s > 0, np.mod(np.asarray(baz) + 180.0, 360.0), self.az % 360.0)
            return np.asarray(lat), np.asarray(lon), course, self.v0 + self.acc * dt
        lat = np.interp(t, self.st, self.slat)
        lon = np.interp(t, self.st, self.slon)
        course = np.mod(np.interp(t, self.st, self.scourse), 360.0)
        return lat, lon, course, np.interp(t, self.st, self.sspeed)

    def end_state(self) -> tuple[float, float, float, float]:
        lat, lon, course, v = self.evaluate(np.array([self.t1]))
        return float(lat[0]), float(lon[0]), float(course[0]), float(v[0])


def _wrap180(a: float) -> float:
    return (a + 180.0) % 360.0 - 180.0


def _segments(plan: VesselPlan, t_limit: float) -> list[_Seg]:
    """The plan as time segments, truncated at ``t_limit`` (seconds from the feed start)."""
    t = float(plan.start_time_s)
    lat, lon = float(plan.start_lat_deg), float(plan.start_lon_deg)
    course, v = float(plan.course_deg) % 360.0, float(plan.speed_kn) * KNOT_M_S
    segs: list[_Seg] = []

    def geo(d: float, acc: float = 0.0) -> None:
        nonlocal t, lat, lon, course, v
        seg = _Seg(t, t + d, "geo", lat=lat, lon=lon, az=course, v0=v, acc=acc)
        segs.append(seg)
        lat, lon, course, v = seg.end_state()
        t += d

    def turn(rate: float, d: float) -> None:
        nonlocal t, lat, lon, course, v
        n = max(1, math.ceil(d / _TURN_STEP_S))
        h = d / n
        st = t + h * np.arange(n + 1)
        slat, slon, sc = np.empty(n + 1), np.empty(n + 1), np.empty(n + 1)
        slat[0], slon[0], sc[0] = lat, lon, course
        c = course
        for i in range(n):
            if v > 0:
                lo, la, baz = WGS84_GEOD.fwd(slon[i], slat[i], c + rate * h / 2, v * h)
                c = float(baz) + 180.0 + rate * h / 2
                # keep the course continuous for interpolation
                c = sc[i] + rate * h + _wrap180(c - (sc[i] + rate * h))
            else:
                lo, la = slon[i], slat[i]
                c = sc[i] + rate * h
            slat[i + 1], slon[i + 1], sc[i + 1] = la, lo, c
        seg = _Seg(t, t + d, "samples", st=st, slat=slat, slon=slon, scourse=sc,
                   sspeed=np.full(n + 1, v))
        segs.append(seg)
        lat, lon, course = float(slat[-1]), float(slon[-1]), float(sc[-1]) % 360.0
        t += d

    for leg in plan.legs:
        if t >= t_limit:
            break
        k = leg.kind
        if k == "straight":
            geo(t_limit - t if leg.duration_s is None else leg.duration_s)
        elif k == "speed":
            assert leg.duration_s is not None and leg.speed_kn is not None
            d = leg.duration_s
            v1 = leg.speed_kn * KNOT_M_S
            if d == 0:
                v = v1
                continue
            if v1 == 0 and v == 0:
                geo(d)
                continue
            geo(d, (v1 - v) / d)
            v = v1
        elif k == "stop":
            if leg.until_s is not None:
                d = max(0.0, leg.until_s - t)
            else:
                d = t_limit - t if leg.duration_s is None else leg.duration_s
            v = 0.0
            geo(d)
        elif k == "turn":
            assert leg.duration_s is not None
            turn(leg.rate_deg_s, leg.duration_s)
        else:  # goto
            assert leg.lat_deg is not None and leg.lon_deg is not None
            if leg.speed_kn is not None:
                v = leg.speed_kn * KNOT_M_S
            if v <= 0:
                raise ParameterError(f"vessel {plan.name!r}: goto needs a speed > 0", parameter="speed_kn")
            az, _, _ = WGS84_GEOD.inv(lon, lat, leg.lon_deg, leg.lat_deg)
            delta = _wrap180(float(az) - course)
            if abs(delta) > 0.5:
                rate = math.copysign(abs(leg.rate_deg_s), delta)
                turn(rate, abs(delta) / abs(leg.rate_deg_s))
            az, _, dist = WGS84_GEOD.inv(lon, lat, leg.lon_deg, leg.lat_deg)
            course = float(az) % 360.0
            geo(float(dist) / v)
    return segs


def _vessel_truth(plan: VesselPlan, scenario: Scenario,
                  sites: list[tuple[float, float, float]]) -> VesselTruth:

    dur = scenario.duration_s
    segs = _segments(plan, dur)
    empty = np.zeros(0)
    if not segs:
        return VesselTruth(name=plan.name, time=empty, lat_deg=empty, lon_deg=empty,
                           v_east_m_s=empty, v_north_m_s=empty, speed_m_s=empty,
                           course_deg=empty, in_cover=np.zeros(0, bool),
                           length_m=plan.length_m, beam_m=plan.hull_beam_m)
    a = max(segs[0].t0, 0.0)
    b = min(segs[-1].t1, dur)
    if b < a:
        t = empty
    else:
        grid = TRUTH_STEP_S * np.arange(math.ceil(a / TRUTH_STEP_S), math.floor(b / TRUTH_STEP_S) + 1)
        t = np.unique(np.concatenate([[a, b], grid]))
    lat, lon, course, speed = (np.empty(t.size) for _ in range(4))
    starts = np.array([s.t0 for s in segs])
    idx = np.clip(np.searchsorted(starts, t, side="right") - 1, 0, len(segs) - 1)
    for i, s in enumerate(segs):
        m = idx == i
        if m.any():
            lat[m], lon[m], course[m], speed[m] = s.evaluate(t[m])
    c = np.radians(course)
    in_cover = np.zeros(t.size, bool)
    for slat, slon, rmax in sites:
        _, _, r = WGS84_GEOD.inv(np.full(t.size, slon), np.full(t.size, slat), lon, lat)
        in_cover |= np.asarray(r) <= rmax
    return VesselTruth(name=plan.name, time=scenario.start_epoch_s + t, lat_deg=lat,
                       lon_deg=lon, v_east_m_s=speed * np.sin(c), v_north_m_s=speed * np.cos(c),
                       speed_m_s=speed, course_deg=course, in_cover=in_cover,
                       length_m=plan.length_m, beam_m=plan.hull_beam_m)


# --------------------------------------------------------------------------- radar

#: Component sensor errors of a marine radar after the radar-plotting-aid
#: performance standard's Annex 3 (IMO; reproduced in US 33 CFR 164.38,
#: Appendix A): pulse shape, range sigma 20 m (normal); range quantisation
#: +-0.01 NM (rectangular); beam shape, bearing sigma 0.05 deg (normal);
#: antenna backlash +-0.05 deg (rectangular); bearing quantisation +-0.1 deg
#: (rectangular); bearing encoder sigma 0.03 deg (normal). Ship-motion terms
#: (roll, gyro, log) do not apply to a shore antenna; target glint is left out.
#: Values checked on a public copy of the Annex (imorules.com, "sensor errors").
@dataclass(frozen=True)
class ArpaErrors:
    """Error components (see :data:`ARPA_ERRORS`)."""

    range_normal_sigma_m: float = 20.0
    range_uniform_half_m: float = 0.01 * 1852.0
    bearing_normal_sigma_deg: float = math.hypot(0.05, 0.03)
    bearing_uniform_half_deg: tuple[float, ...] = (0.05, 0.1)


ARPA_ERRORS = ArpaErrors()


def arpa_sigmas() -> tuple[float, float]:
    """Combined 1-sigma ``(range_m, bearing_deg)`` of :data:`ARPA_ERRORS`."""
    e = ARPA_ERRORS
    r = math.sqrt(e.range_normal_sigma_m**2 + e.range_uniform_half_m**2 / 3.0)
    b2 = e.bearing_normal_sigma_deg**2 + sum(h * h / 3.0 for h in e.bearing_uniform_half_deg)
    return r, math.sqrt(b2)


def _draw_errors(sim: SimSensor, n: int, rng: np.random.Generator) -> tuple[Array, Array]:
    cfg = sim.config
    if sim.noise == "gaussian":
        return rng.normal(0.0, cfg.range_sigma_m, n), rng.normal(0.0, cfg.bearing_sigma_deg, n)
    if sim.noise == "arpa":
        e = ARPA_ERRORS
        r = rng.normal(0.0, e.range_normal_sigma_m, n)
        r += rng.uniform(-e.range_uniform_half_m, e.range_uniform_half_m, n)
        b = rng.normal(0.0, e.bearing_normal_sigma_deg, n)
        for h in e.bearing_uniform_half_deg:
            b += rng.uniform(-h, h, n)
        return r, b
    raise ParameterError(f"unknown noise model {sim.noise!r}", parameter="noise")


def _in_outage(t_rel: Array, outages: Sequence[tuple[float, float]]) -> NDArray[np.bool_]:
    out = np.zeros(t_rel.shape, bool)
    for a, b in outages:
        out |= (t_rel >= a) & (t_rel < b)
    return out


# --------------------------------------------------------------------------- hull scatter

#: Range resolution cell of the simulated plot extractor (m).
HULL_RANGE_CELL_M = 25.0
#: Horizontal beamwidth of the simulated antenna (deg): a bearing cell is ``r`` x this.
HULL_BEAM_DEG = 1.0
#: Cells a hull may span and still give a single plot.
HULL_ONE_PLOT_CELLS = 6.0
#: Scale of the extra plots: Poisson mean ``HULL_EXTRA_SCALE * sqrt(cells - HULL_ONE_PLOT_CELLS)``.
HULL_EXTRA_SCALE = 0.5


def hull_cells(length_m: float, beam_m: float, range_m: Array, aspect_rad: Array) -> Array:
    """Resolution cells a hull spans: ``(1 + a_r / c_r) (1 + a_b / c_b)``.

    ``aspect_rad`` is the angle between the hull's axis and the line of
    sight; ``a_r = L |cos| + B |sin|`` is the hull's extent along the line of
    sight, ``a_b = L |sin| + B |cos|`` across it, ``c_r`` the range cell and
    ``c_b = r θ_beam`` the bearing cell at that range.
    """
    ca, sa = np.abs(np.cos(aspect_rad)), np.abs(np.sin(aspect_rad))
    a_r = length_m * ca + beam_m * sa
    a_b = length_m * sa + beam_m * ca
    c_b = np.maximum(range_m, 1.0) * math.radians(HULL_BEAM_DEG)
    return (1.0 + a_r / HULL_RANGE_CELL_M) * (1.0 + a_b / c_b)


def hull_plot_rate(length_m: float, beam_m: float, range_m: Array, aspect_rad: Array) -> Array:
    """Mean number of plots per scan of a detected hull (1 + the extra plots' mean)."""
    cells = hull_cells(length_m, beam_m, range_m, aspect_rad)
    return 1.0 + HULL_EXTRA_SCALE * np.sqrt(np.maximum(cells - HULL_ONE_PLOT_CELLS, 0.0))


def _hull_plots(sim: SimSensor, tr: VesselTruth, t: Array, lat: Array, lon: Array, r: Array,
                tk: Array, rng: np.random.Generator) -> tuple[Array, ...]:
    """Plots of a hull detected at times ``t`` (hull-scatter model of our own).

    A detected hull gives ``1 + Poisson(HULL_EXTRA_SCALE sqrt(cells - 6))``
    plots (:func:`hull_cells`: the cells it spans at that range and aspect,
    so a small craft gives one plot). Each plot comes from a point drawn
    uniformly over the hull, taken as the ellipse of semi-axes ``L/2`` along
    the course and ``B/2`` across it, then carries the radar's range and
    bearing errors like a point target's plot. Returns ``(time, lat, lon,
    index of the detection, range error, bearing error, true range, true
    bearing)``, one entry per plot.
    """
    cfg = sim.config
    ve = np.interp(t, tr.time, tr.v_east_m_s)
    vn = np.interp(t, tr.time, tr.v_north_m_s)
    heading = np.degrees(np.arctan2(ve, vn))
    still = np.hypot(ve, vn) < 0.05  # stopped: the last course is kept
    heading = np.where(still, np.interp(t, tr.time, tr.course_deg), heading)
    b0, _, _ = WGS84_GEOD.inv(np.full(t.size, cfg.lon_deg), np.full(t.size, cfg.lat_deg), lon, lat)
    aspect = np.radians(heading - np.asarray(b0))
    rate = hull_plot_rate(tr.length_m, tr.beam_m, r, aspect)
    count = 1 + rng.poisson(rate - 1.0)
    idx = np.repeat(np.arange(t.size), count)
    n = idx.size
    rad = np.sqrt(rng.random(n))
    phi = 2.0 * math.pi * rng.random(n)
    along = 0.5 * tr.length_m * rad * np.cos(phi)
    across = 0.5 * tr.beam_m * rad * np.sin(phi)
    h = np.radians(heading[idx])
    de = along * np.sin(h) + across * np.cos(h)
    dn = along * np.cos(h) - across * np.sin(h)
    plon, plat, _ = WGS84_GEOD.fwd(lon[idx], lat[idx], np.degrees(np.arctan2(de, dn)),
                                   np.hypot(de, dn))
    sl, sa = np.full(n, cfg.lon_deg), np.full(n, cfg.lat_deg)
    bp, _, rp = WGS84_GEOD.inv(sl, sa, np.asarray(plon), np.asarray(plat))
    bp, rp = np.mod(np.asarray(bp), 360.0), np.asarray(rp)
    rerr, berr = _draw_errors(sim, n, rng)
    qlon, qlat, _ = WGS84_GEOD.fwd(sl, sa, bp + berr, np.abs(rp + rerr))
    # each plot at the time the beam crosses its own bearing (same revolution)
    tp = tk[idx] + bp / 360.0 * cfg.scan_period_s
    tp = np.where(np.abs(tp - t[idx]) < 0.5 * cfg.scan_period_s, tp, t[idx])
    return tp, np.asarray(qlat), np.asarray(qlon), idx, rerr, berr, rp, bp


def _sensor_plots(si: int, sim: SimSensor, truths: Sequence[VesselTruth], scenario: Scenario,
                  rng: np.random.Generator) -> tuple[dict[str, Array], Array]:
    cfg = sim.config
    period = cfg.scan_period_s
    t_start = scenario.start_epoch_s
    dur = scenario.duration_s
    phase = rng.uniform(0.0, period)
    north = t_start - phase + period * np.arange(math.ceil((dur + phase) / period))
    cols: dict[str, list[Array]] = {k: [] for k in (
        "time", "lat", "lon", "scan", "vessel", "rerr", "berr", "rtrue", "btrue")}

    def add(t: Array, lat: Array, lon: Array, scan: Array, vessel: int, rerr: Array,
            berr: Array, rtrue: Array, btrue: Array) -> None:
        for k, v in zip(cols, (t, lat, lon, scan, np.full(t.size, vessel), rerr, berr, rtrue, btrue),
                        strict=True):
            cols[k].append(np.asarray(v, float))

    site_lat, site_lon = cfg.lat_deg, cfg.lon_deg
    for vi, tr in enumerate(truths):
        if tr.time.size < 2:
            continue
        k0 = max(0, int(math.floor((tr.time[0] - north[0]) / period)))
        k1 = min(north.size - 1, int(math.ceil((tr.time[-1] - north[0]) / period)))
        if k1 < k0:
            continue
        ks = np.arange(k0, k1 + 1)
        tk = north[ks]
        n = ks.size
        slon, slat = np.full(n, site_lon), np.full(n, site_lat)
        t = tk.copy()
        for _ in range(4):  # plot time depends on bearing, bearing on time: fixed point
            lat = np.interp(t, tr.time, tr.lat_deg)
            lon = np.interp(t, tr.time, tr.lon_deg)
            b, _, r = WGS84_GEOD.inv(slon, slat, lon, lat)
            b = np.mod(np.asarray(b), 360.0)
            t = tk + b / 360.0 * period
        lat = np.interp(t, tr.time, tr.lat_deg)
        lon = np.interp(t, tr.time, tr.lon_deg)
        b, _, r = WGS84_GEOD.inv(slon, slat, lon, lat)
        b, r = np.mod(np.asarray(b), 360.0), np.asarray(r)
        consistent = np.abs(tk + b / 360.0 * period - t) < 1e-3
        detected = rng.random(n) < cfg.detection_probability
        rerr, berr = _draw_errors(sim, n, rng)
        keep = (consistent & detected & (r <= cfg.max_range_m)
                & (t >= tr.time[0]) & (t <= tr.time[-1])
                & (t >= t_start) & (t < t_start + dur)
                & ~_in_outage(t - t_start, sim.outages_s))
        if not keep.any():
            continue
        if tr.length_m > 0.0:
            hull = _hull_plots(sim, tr, t[keep], lat[keep], lon[keep], r[keep], tk[keep],
                               rng)
            add(hull[0], hull[1], hull[2], ks[keep][hull[3]], vi, *hull[4:])
            continue
        m = keep.sum()
        plon, plat, _ = WGS84_GEOD.fwd(np.full(m, site_lon), np.full(m, site_lat),
                                       b[keep] + berr[keep], np.abs(r[keep] + rerr[keep]))
        add(t[keep], np.asarray(plat), np.asarray(plon), ks[keep], vi, rerr[keep], berr[keep],
            r[keep], b[keep])

    counts = rng.poisson(cfg.false_plots_per_scan, north.size)
    total = int(counts.sum())
    ks = np.repeat(np.arange(north.size), counts)
    rad = cfg.max_range_m * np.sqrt(rng.random(total))
    brg = 360.0 * rng.random(total)
    t = north[ks] + brg / 360.0 * period
    keep = (t >= t_start) & (t < t_start + dur) & ~_in_outage(t - t_start, sim.outages_s)
    m = int(keep.sum())
    plon, plat, _ = WGS84_GEOD.fwd(np.full(m, site_lon), np.full(m, site_lat), brg[keep], rad[keep])
    nan = np.full(m, np.nan)
    add(t[keep], np.asarray(plat), np.asarray(plon), ks[keep], -1, nan, nan, rad[keep], brg[keep])

    out = {k: (np.concatenate(v) if v else np.zeros(0)) for k, v in cols.items()}
    out["sensor"] = np.full(out["time"].size, float(si))
    return out, north


# --------------------------------------------------------------------------- simulation


def simulate(scenario: Scenario, seed: int) -> SimulationResult:
    """Simulate a scenario: plots of every sensor and the vessels' truth.

    Parameters
    ----------
    scenario
        The scenario (see :data:`SCENARIOS` for built-in ones).
    seed
        Seed of the numpy generator; the same seed gives identical arrays.
    """
    if not scenario.sensors:
        raise ParameterError("a scenario needs at least one sensor", parameter="sensors")
    children = np.random.SeedSequence(seed).spawn(len(scenario.sensors))
    sites = [(s.config.lat_deg, s.config.lon_deg, s.config.max_range_m) for s in scenario.sensors]
    truths = tuple(_vessel_truth(p, scenario, sites) for p in scenario.vessels)
    parts, norths = [], []
    for si, (sim, ss) in enumerate(zip(scenario.sensors, children, strict=True)):
        part, north = _sensor_plots(si, sim, truths, scenario, np.random.default_rng(ss))
        parts.append(part)
        norths.append(north)
    col = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    t = np.round(col["time"] * 1000.0) / 1000.0
    order = np.lexsort((col["lon"], col["lat"], col["sensor"], t))
    sensor = col["sensor"][order].astype(np.int64)
    rtrue = col["rtrue"][order]
    rerr = col["rerr"][order]
    sigma = np.full(t.size, np.nan)
    for si, sim in enumerate(scenario.sensors):
        if sim.emit_sigma_m:
            m = sensor == si
            rng_m = np.where(np.isfinite(rerr[m]), rtrue[m] + rerr[m], rtrue[m])
            cfg = sim.config
            sigma[m] = np.round(np.sqrt(
                0.5 * (cfg.range_sigma_m**2 + (rng_m * np.radians(cfg.bearing_sigma_deg)) ** 2)), 2)
    plots = PlotArrays(
        time=t[order], sensor=sensor, lat_deg=col["lat"][order], lon_deg=col["lon"][order],
        scan=col["scan"][order].astype(np.int64), vessel=col["vessel"][order].astype(np.int64),
        range_error_m=rerr, bearing_error_deg=col["berr"][order], true_range_m=rtrue,
        true_bearing_deg=col["btrue"][order], sigma_m=sigma)
    return SimulationResult(scenario=scenario, seed=seed,
                            sensors=tuple(s.config for s in scenario.sensors),
                            plots=plots, truth=truths, north_times=tuple(norths))
