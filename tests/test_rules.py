"""Rules over whole trajectories: zones, rule kinds, episodes, probabilities, outputs.

Test trajectories come from simulated plots: a true path in the local frame
(straight legs, speed ramps, stops), noisy position plots about every 2.5 s
(some missed), a plain Kalman filter and RTS smoother. The harbour is the
invented Port Calder on the invented Calder Sound.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Sequence
from types import MappingProxyType

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from pyproj import Geod
from shapely.geometry import MultiPolygon, Polygon

from harbourwatch.errors import InputError
from harbourwatch.io.records import RuleConfig, ZoneConfig
from harbourwatch.io.toml_files import load_rules
from harbourwatch.models.cv import cv_process_noise, cv_transition
from harbourwatch.models.gaussian import ffbs_sample, kf_predict, kf_update, rts_smooth
from harbourwatch.rules.evaluate import (
    ALERT_COLUMNS,
    RULE_KINDS,
    RULE_SCHEMAS,
    Alert,
    RuleKind,
    alerts_table,
    evaluate_rules,
    register_kind,
    sample_window,
    write_alerts_csv,
)
from harbourwatch.rules.kinds import find_episodes
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scene.zones import LocalZone
from harbourwatch.trajectories import AsSeenTable, Trajectory, TrajectorySet
from harbourwatch.units import KNOT_M_S

#: Centre of the invented Port Calder frame (an arbitrary open-sea position).
FRAME = LocalFrame(56.02, -4.71)
T0 = 1_777_874_400.0  # 2026-05-04T06:00:00Z
Q_PSD = 0.05
EPISODE_TOL_S = 30.0

# --------------------------------------------------------------------------- builders


def true_path(
    start_xy: tuple[float, float], legs: Sequence[tuple[float, float, float]], *,
    ramp_s: float = 30.0, step_s: float = 0.1,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Fine-grained true path from legs ``(duration_s, speed_kn, heading_deg)``.

    Speed ramps linearly from the previous leg's speed over ``ramp_s``;
    heading is constant within a leg (degrees true, 0 = north).
    Returns times (s from T0), positions (N, 2) and velocities (N, 2).
    """
    times, vel = [], []
    t, v_prev = 0.0, legs[0][1]
    for dur, kn, hdg in legs:
        tt = np.arange(0.0, dur, step_s)
        sp = np.where(tt < ramp_s, v_prev + (kn - v_prev) * np.minimum(tt / ramp_s, 1), kn)
        sp = sp * KNOT_M_S
        h = math.radians(hdg)
        vel.append(np.column_stack([sp * math.sin(h), sp * math.cos(h)]))
        times.append(t + tt)
        t += dur
        v_prev = kn
    time = np.concatenate(times)
    v = np.concatenate(vel)
    pos = np.asarray(start_xy) + np.vstack([[0.0, 0.0], np.cumsum(v[:-1] * step_s, axis=0)])
    return time, pos, v


def plot_times(duration_s: float, rng: np.random.Generator, *, period_s: float = 2.5,
               p_detect: float = 0.9) -> np.ndarray:
    t = np.arange(0.0, duration_s - 1.0, period_s) + rng.uniform(-0.2, 0.2)
    t = np.clip(t, 0.0, None)
    keep = rng.random(t.size) < p_detect
    keep[[0, -1]] = True
    return t[keep]


def kalman_trajectory(tid: str, t: np.ndarray, z: np.ndarray, sigma_m: float, *,
                      q: float = Q_PSD, existence: float = 1.0,
                      v0: tuple[float, float] = (0.0, 0.0),
                      v0_sd: tuple[float, float] = (10.0, 10.0)) -> Trajectory:
    """Plain Kalman filter + RTS smoother over position plots ``z (T, 2)`` at times ``t``.

    The first state is the first plot (a flat position prior) with velocity
    prior ``N(v0, diag(v0_sd)^2)``.
    """
    n = t.size
    R = sigma_m**2 * np.eye(2)
    fm, fP = np.empty((n, 4)), np.empty((n, 4, 4))
    pm, pP = np.empty((n, 4)), np.empty((n, 4, 4))
    m = np.array([z[0, 0], v0[0], z[0, 1], v0[1]])
    P = np.diag([sigma_m**2, v0_sd[0] ** 2, sigma_m**2, v0_sd[1] ** 2])
    fm[0], fP[0], pm[0], pP[0] = m, P, m, P
    for k in range(1, n):
        dt = float(t[k] - t[k - 1])
        mp, Pp = kf_predict(fm[k - 1], fP[k - 1], cv_transition(dt), cv_process_noise(dt, q))
        pm[k], pP[k] = mp, Pp
        fm[k], fP[k], _ = kf_update(mp, Pp, z[k], R)
    ms, Ps = rts_smooth(t, fm, fP, pm, pP)
    return Trajectory(id=tid, time=T0 + t, mean=ms, cov=Ps, filt_mean=fm, filt_cov=fP,
                      pred_mean=pm, pred_cov=pP, existence=existence)


class Vessel:
    """A simulated vessel: truth at its state times and the smoothed trajectory."""

    def __init__(self, tid: str, start_xy: tuple[float, float],
                 legs: Sequence[tuple[float, float, float]], rng: np.random.Generator, *,
                 sigma_m: float = 10.0) -> None:
        ft, fpos, fvel = true_path(start_xy, legs)
        t = plot_times(float(ft[-1]), rng)
        self.t = t
        self.pos = np.column_stack([np.interp(t, ft, fpos[:, i]) for i in (0, 1)])
        self.vel = np.column_stack([np.interp(t, ft, fvel[:, i]) for i in (0, 1)])
        z = self.pos + rng.normal(0.0, sigma_m, self.pos.shape)
        self.traj = kalman_trajectory(tid, t, z, sigma_m)

    @property
    def speed(self) -> np.ndarray:
        return np.hypot(self.vel[:, 0], self.vel[:, 1])


def tset(trajs: Sequence[Trajectory]) -> TrajectorySet:
    return TrajectorySet(trajectories=tuple(trajs), frame=FRAME, as_seen=AsSeenTable.empty(),
                         feed_start=min(t.start for t in trajs), feed_end=max(t.end for t in trajs))


def zone(zid: str, name: str, local: Polygon | MultiPolygon, kind: str = "restricted", *,
         densify_m: float | None = 10.0) -> ZoneConfig:
    """A ZoneConfig whose WGS84 vertices are the local vertices moved to lon/lat.

    With ``densify_m`` the local edges are densified first, so the zone stays
    straight-edged in the local frame; without it the WGS84 edges are straight
    in lon/lat between the moved corners.
    """
    def to_lonlat(xy: np.ndarray) -> np.ndarray:
        lat, lon = FRAME.to_wgs84(xy[:, 0], xy[:, 1])
        return np.column_stack([lon, lat])
    if densify_m is not None:
        local = shapely.segmentize(local, densify_m)
    return ZoneConfig(id=zid, name=name, kind=kind, geometry=shapely.transform(local, to_lonlat))


def rule(rid: str, kind: str, zone_id: str | None, min_probability: float = 0.5,
         **params: float) -> RuleConfig:
    return RuleConfig(id=rid, kind=kind, zone=zone_id, min_probability=min_probability,
                      params=MappingProxyType(dict(params)), source="rules.toml", line=1,
                      param_lines=MappingProxyType({"zone": 4, "kind": 3}))


def true_span(t: np.ndarray, ok: np.ndarray) -> tuple[float, float]:
    """First and last state time where the true condition holds (one-episode scenarios)."""
    idx = np.flatnonzero(ok)
    assert idx.size, "scenario has no true episode"
    return T0 + float(t[idx[0]]), T0 + float(t[idx[-1]])


BASIN = Polygon([(0, 0), (1000, 0), (1000, 1000), (0, 1000)])
FIRING = Polygon([(2000, -400), (2900, -500), (3000, 300), (2100, 450)])
BERTH = Polygon([(0, -2000), (800, -2000), (800, -1500), (0, -1500)])
FAIRWAY = Polygon([(-3000, 2000), (3000, 2000), (3000, 2400), (-3000, 2400)])
ZONES = [
    zone("inner-basin", "Inner Basin", BASIN, "anchorage"),
    zone("firing-range", "Calder Firing Range", FIRING),
    zone("naval-berth", "North Mole Berth", BERTH),
    zone("fairway", "Calder Sound Fairway", FAIRWAY, "fairway"),
]


@pytest.fixture(scope="module")
def scenario() -> dict[str, Vessel]:
    return build_scenario(5)


def build_scenario(seed: int) -> dict[str, Vessel]:
    rng = np.random.default_rng(seed)
    v = {}
    # loiters: 6 kn east into the basin, stop, stay 25 (8) min, leave north
    v["L25"] = Vessel("L25", (-600, 500), [(360, 6, 90), (60, 0, 90), (25 * 60, 0, 90),
                                           (300, 6, 0)], rng)
    v["L08"] = Vessel("L08", (-600, 300), [(360, 6, 90), (60, 0, 90), (8 * 60, 0, 90),
                                           (300, 6, 0)], rng)
    # straight crossing of the firing range at 8 kn
    v["X1"] = Vessel("X1", (1500, 0), [(500, 8, 90)], rng)
    # skirting the berth 60 m outside its north edge, 15 m plots
    v["S1"] = Vessel("S1", (-500, -1440), [(450, 7, 90)], rng, sigma_m=15.0)
    # fairway: 6 kn, 12 kn for 4 min, 6 kn; and a steady 7 kn
    v["F12"] = Vessel("F12", (-2800, 2200), [(120, 6, 90), (240, 12, 90), (180, 6, 90)], rng)
    v["F07"] = Vessel("F07", (-2800, 2150), [(540, 7, 90)], rng)
    # rendezvous: approach, 15 min side by side 100 m apart at 1 kn, separate
    v["R1"] = Vessel("R1", (4000, 4000), [(240, 6, 90), (15 * 60, 1, 90), (240, 6, 180)], rng)
    leg = 240 * 6 * KNOT_M_S / math.sqrt(2.0)  # R2's approach from the north-east
    v["R2"] = Vessel("R2", (4000 + 240 * 6 * KNOT_M_S + leg, 4100 + leg),
                     [(240, 6, 225), (15 * 60, 1, 90), (240, 6, 45)], rng)
    # passing 300 m apart on opposite courses at 1 kn
    v["P1"] = Vessel("P1", (7000, -3000), [(1200, 1, 90)], rng)
    v["P2"] = Vessel("P2", (7600, -2700), [(1200, 1, 270)], rng)
    # across the firing range, out for about 3 minutes, and back across: two crossings
    v["X2"] = Vessel("X2", (1500, 150), [(450, 8, 90), (450, 8, 270)], rng)
    return v


RULES = [
    rule("basin-loiter", "loiter", "inner-basin", min_duration_min=15, max_speed_kn=1.5),
    rule("range-crossing", "pass-through", "firing-range"),
    rule("berth-entry", "entry", "naval-berth"),
    rule("fairway-speed", "speed", "fairway", max_speed_kn=8.0, min_duration_min=1),
    rule("sound-meeting", "rendezvous", None, max_distance_m=150, min_duration_min=10,
         max_speed_kn=3.0),
]


@pytest.fixture(scope="module")
def alerts(scenario: dict[str, Vessel]) -> list[Alert]:
    return evaluate_rules(tset([v.traj for v in scenario.values()]), ZONES, RULES, seed=7)


def by_rule(alerts: list[Alert], rid: str) -> list[Alert]:
    return [a for a in alerts if a.rule == rid]


def local_inside(poly: Polygon, xy: np.ndarray) -> np.ndarray:
    return shapely.contains_xy(poly, xy[:, 0], xy[:, 1])


# --------------------------------------------------------------------------- acceptance


def test_loiter_25_min_caught_8_min_not(scenario: dict[str, Vessel], alerts: list[Alert]) -> None:
    got = by_rule(alerts, "basin-loiter")
    assert [a.track for a in got] == ["L25"]
    v = scenario["L25"]
    ok = local_inside(BASIN, v.pos) & (v.speed < 1.5 * KNOT_M_S)
    t0, t1 = true_span(v.t, ok)
    assert abs(got[0].start - t0) <= EPISODE_TOL_S and abs(got[0].end - t1) <= EPISODE_TOL_S
    assert got[0].probability > 0.9
    assert "Inner Basin" in got[0].summary and "L25" in got[0].summary
    # the 8-minute stop really was a stop inside the basin (the rule, not the scenario, says no)
    v8 = scenario["L08"]
    s0, s1 = true_span(v8.t, local_inside(BASIN, v8.pos) & (v8.speed < 1.5 * KNOT_M_S))
    assert 7 * 60 < s1 - s0 < 10 * 60


def test_crossing_caught_with_entry_and_exit(scenario: dict[str, Vessel],
                                             alerts: list[Alert]) -> None:
    got = by_rule(alerts, "range-crossing")
    assert sorted(a.track for a in got) == ["X1", "X2", "X2"]  # one alert per crossing
    twice = [a for a in got if a.track == "X2"]
    v2 = scenario["X2"]
    inside2 = local_inside(FIRING, v2.pos)
    k_out = int(np.argmax(v2.pos[:, 0]))  # the turn, outside east of the range
    assert not inside2[k_out]
    for a, part in zip(twice, (slice(0, k_out), slice(k_out, None)), strict=True):
        t0, t1 = true_span(v2.t[part], inside2[part])
        assert abs(a.start - t0) <= EPISODE_TOL_S and abs(a.end - t1) <= EPISODE_TOL_S
    got = [a for a in got if a.track == "X1"]
    v = scenario["X1"]
    inside = local_inside(FIRING, v.pos)
    t0, t1 = true_span(v.t, inside)
    d = got[0].details
    assert abs(d["entry_time"] - t0) <= EPISODE_TOL_S and abs(d["exit_time"] - t1) <= EPISODE_TOL_S
    assert (got[0].start, got[0].end) == (d["entry_time"], d["exit_time"])
    # entry and exit points lie near the true crossing points (10 m plots)
    k0, k1 = np.flatnonzero(inside)[[0, -1]]
    assert np.hypot(*(np.asarray(d["entry_xy"]) - v.pos[k0])) < 40.0
    assert np.hypot(*(np.asarray(d["exit_xy"]) - v.pos[k1])) < 40.0
    assert got[0].probability > 0.9 and got[0].zone == "firing-range"


def test_skirting_60_m_outside_not_alerted(scenario: dict[str, Vessel],
                                           alerts: list[Alert]) -> None:
    v = scenario["S1"]
    edge_gap = shapely.distance(shapely.points(v.pos), BERTH)
    assert not local_inside(BERTH, v.pos).any() and edge_gap.min() > 55.0
    assert by_rule(alerts, "berth-entry") == []


def test_speed_12_kn_caught_7_kn_not(scenario: dict[str, Vessel], alerts: list[Alert]) -> None:
    got = by_rule(alerts, "fairway-speed")
    assert [a.track for a in got] == ["F12"]
    v = scenario["F12"]
    t0, t1 = true_span(v.t, local_inside(FAIRWAY, v.pos) & (v.speed > 8 * KNOT_M_S))
    assert abs(got[0].start - t0) <= EPISODE_TOL_S and abs(got[0].end - t1) <= EPISODE_TOL_S
    assert 11.0 < got[0].details["max_speed_kn"] < 13.5


def test_rendezvous_100_m_caught_300_m_not(scenario: dict[str, Vessel],
                                           alerts: list[Alert]) -> None:
    got = by_rule(alerts, "sound-meeting")
    assert [(a.track, a.other_track) for a in got] == [("R1", "R2")]
    a, b = scenario["R1"], scenario["R2"]
    # truth on R1's state times, R2 interpolated (both true paths are continuous)
    bx = np.column_stack([np.interp(a.t, b.t, b.pos[:, i]) for i in (0, 1)])
    bs = np.interp(a.t, b.t, b.speed)
    ok = (np.hypot(*(a.pos - bx).T) <= 150) & (a.speed < 3 * KNOT_M_S) & (bs < 3 * KNOT_M_S)
    t0, t1 = true_span(a.t, ok)
    assert abs(got[0].start - t0) <= EPISODE_TOL_S and abs(got[0].end - t1) <= EPISODE_TOL_S
    assert got[0].probability > 0.9


def test_rendezvous_separation_matches_karney_geodesic(scenario: dict[str, Vessel],
                                                       alerts: list[Alert]) -> None:
    d = by_rule(alerts, "sound-meeting")[0].details
    (xa, ya), (xb, yb) = d["closest_xy"], d["other_closest_xy"]
    lat, lon = FRAME.to_wgs84([xa, xb], [ya, yb])
    # reference: pyproj.Geod.inv, Karney's geodesic on WGS84 (pyproj documentation)
    _, _, s = Geod(ellps="WGS84").inv(lon[0], lat[0], lon[1], lat[1])
    # aeqd scale error ~ (rho/R)^2 / 3 at rho ~ 6 km from the centre: < 1e-6 (from memory)
    assert d["min_distance_m"] == pytest.approx(s, rel=1e-5, abs=0.01)
    # and it is the true separation at that time, up to the smoothing error (a few metres
    # per vessel; the minimum over the episode is biased low by a couple of sd)
    a, b = scenario["R1"], scenario["R2"]
    tc = d["closest_time"] - T0
    true_sep = np.hypot(*(np.interp(tc, a.t, a.pos[:, i]) - np.interp(tc, b.t, b.pos[:, i])
                          for i in (0, 1)))
    assert 95.0 < true_sep < 105.0  # the vessels lay 100 m apart
    assert abs(s - true_sep) < 30.0


def test_local_zone_agrees_with_shapely_on_wgs84() -> None:
    rng = np.random.default_rng(11)
    with_hole = Polygon([(0, 0), (1200, 0), (1200, 900), (0, 900)],
                        [[(300, 300), (700, 300), (700, 600), (300, 600)]])
    multi = MultiPolygon([Polygon([(-2000, -2000), (-1500, -2000), (-1700, -1400)]),
                          Polygon([(-1400, -1900), (-900, -1900), (-900, -1500)])])
    # long straight lon/lat edges 12 km from the centre: densification matters here
    far = Polygon([(9000, 9000), (17000, 9000), (17000, 15000), (9000, 15000)])
    for poly in (with_hole, multi, far):
        zc = zone("z", "Test Zone", poly, densify_m=None)
        lz = LocalZone.from_config(zc, FRAME)
        x0, y0, x1, y1 = poly.bounds
        x = rng.uniform(x0 - 300, x1 + 300, 4000)
        y = rng.uniform(y0 - 300, y1 + 300, 4000)
        lat, lon = FRAME.to_wgs84(x, y)
        # reference: shapely's own predicate on the WGS84 lon/lat geometry
        ref = shapely.contains_xy(zc.geometry, lon, lat)
        ours = lz.contains(x, y)
        away = shapely.distance(shapely.points(x, y), lz.polygon.boundary) > 1.0
        assert away.sum() > 3500
        np.testing.assert_array_equal(ours[away], ref[away])


def test_probability_60_m_outside_low_inside_high() -> None:
    big = Polygon([(-5000, 0), (5000, 0), (5000, 5000), (-5000, 5000)])
    zs = [zone("big", "Outer Roads", big)]
    trajs, sds = [], []
    for tid, n0 in (("OUT", -60.0), ("IN", 60.0)):
        # plots exactly on the path (and the right velocity prior): the smoothed mean runs
        # exactly 60 m from the edge, while its sd is that of 71 m plots
        t = np.arange(0.0, 120.0, 2.5)
        pos = np.column_stack([-300 + 1.0 * t, np.full(t.size, n0)])
        tr = kalman_trajectory(tid, t, pos, 71.0, v0=(1.0, 0.0))
        np.testing.assert_allclose(tr.position, pos, atol=1e-6)
        trajs.append(tr)
        sds.append(float(np.median(tr.position_sd)))
    assert all(14.0 < s < 16.0 for s in sds), sds  # the scenario's 15 m sd
    got = evaluate_rules(tset(trajs), zs, [rule("roads", "entry", "big", min_probability=0.0)],
                         seed=1)
    p = {a.track: a.probability for a in got}
    assert p.get("OUT", 0.0) < 0.1
    assert p["IN"] > 0.9


# --------------------------------------------------------------------------- mechanics


def test_sample_window_matches_smoothed_moments(scenario: dict[str, Vessel]) -> None:
    tr = scenario["X1"].traj
    i0, i1 = 40, 70
    s = sample_window(tr, np.random.default_rng(2), 4000, i0, i1)
    assert s.shape == (4000, i1 - i0 + 1, 4)
    for k in (0, 15, 30):
        m, P = tr.mean[i0 + k], tr.cov[i0 + k]
        sd = np.sqrt(np.diag(P))
        assert np.all(np.abs(s[:, k].mean(0) - m) < 5 * sd / math.sqrt(4000))
        # sampling sd of a covariance entry: sqrt((P_ii P_jj + P_ij^2) / N) (Wishart moments)
        tol = 5 * np.sqrt((np.outer(sd**2, sd**2) + P**2) / 4000)
        assert np.all(np.abs(np.cov(s[:, k].T) - P) < tol)
    # the joint structure agrees with full-trajectory FFBS: lag-1 cross-covariance
    full = ffbs_sample(np.random.default_rng(3), 4000, tr.time, tr.filt_mean, tr.filt_cov,
                       tr.pred_mean, tr.pred_cov)[:, i0 : i1 + 1]
    cw = np.cov(s[:, 10, 0], s[:, 11, 0])[0, 1]
    cf = np.cov(full[:, 10, 0], full[:, 11, 0])[0, 1]
    assert cw == pytest.approx(cf, rel=0.15)


def _reference_runs(c: list[bool], t: list[float], gap: float) -> list[tuple[int, int]]:
    runs: list[tuple[int, int]] = []
    for i, v in enumerate(c):
        if not v:
            continue
        if runs and (runs[-1][1] == i - 1 or t[i] - t[runs[-1][1]] <= gap):
            runs[-1] = (runs[-1][0], i)
        else:
            runs.append((i, i))
    return runs


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.booleans(), st.floats(0.5, 20.0)), min_size=1, max_size=60),
       st.floats(0.0, 40.0))
def test_find_episodes_matches_simple_loop(data: list[tuple[bool, float]], gap: float) -> None:
    c = [d[0] for d in data]
    t = np.cumsum([d[1] for d in data])
    ep = find_episodes(np.array([c]), t, gap_s=gap)
    assert list(zip(ep.i0.tolist(), ep.i1.tolist(), strict=True)) == _reference_runs(
        c, t.tolist(), gap)


def test_same_seed_same_alerts_regardless_of_order(scenario: dict[str, Vessel],
                                                   alerts: list[Alert]) -> None:
    trajs = [v.traj for v in scenario.values()]
    again = evaluate_rules(tset(trajs[::-1]), ZONES, RULES[::-1], seed=7)

    def key(a: Alert) -> tuple:
        return (a.rule, a.track, a.other_track, a.start, a.end, a.probability, a.summary)
    assert [key(a) for a in again] == [key(a) for a in alerts]


def test_a_new_kind_is_one_registered_class(scenario: dict[str, Vessel]) -> None:
    @register_kind
    class NorthOf(RuleKind):
        kind = "north-of"
        params = (RULE_SCHEMAS["speed"].params[0].__class__(name="north_m"),)
        zone_required = False

        def condition(self, states: np.ndarray) -> np.ndarray:
            return states[..., 2] > self.param("north_m")

        def candidates(self, mean: np.ndarray, cov: np.ndarray) -> np.ndarray:
            return mean[:, 2] > self.param("north_m") - 4 * np.sqrt(cov[:, 2, 2])

        def describe(self, view):  # type: ignore[no-untyped-def]
            return f"vessel {view.track} north", {}

    try:
        got = evaluate_rules(tset([v.traj for v in scenario.values()]), ZONES,
                             [rule("far-north", "north-of", None, north_m=3500.0)])
        truth = {k for k, v in scenario.items() if (v.pos[:, 1] > 3550).any()}
        assert {a.track for a in got} == truth == {"R1", "R2"}
    finally:
        del RULE_KINDS["north-of"], RULE_SCHEMAS["north-of"]


def _rules_file(tmp_path, text: str):
    p = tmp_path / "rules.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_rules_are_validated_once_at_the_edge_with_file_line_and_field(tmp_path) -> None:
    # the one validation: load_rules against the registered kinds' schemas
    p = _rules_file(tmp_path, '[[rule]]\nid = "x"\nkind = "entry"\nzone = "no-such-zone"\n')
    with pytest.raises(InputError) as e:
        load_rules(p, ZONES)
    assert (e.value.file, e.value.line, e.value.field) == (str(p), 4, "zone")
    assert "inner-basin" in str(e.value)
    p = _rules_file(tmp_path, '[[rule]]\nid = "x"\nkind = "loiter"\nzone = "inner-basin"\n'
                              'min_duration_min = 5\n')
    with pytest.raises(InputError, match="max_speed_kn"):
        load_rules(p, ZONES)
    p = _rules_file(tmp_path, '[[rule]]\nid = "x"\nkind = "entry"\n')
    with pytest.raises(InputError, match="needs a zone"):
        load_rules(p, ZONES)


def test_alerts_csv_contract_and_special_characters(tmp_path) -> None:  # type: ignore[no-untyped-def]
    nasty = 'Berth "A", <b>north</b> & co;\nsecond line'
    al = [Alert(rule="r<1>", kind="entry", track="T1", other_track="", zone="z,1",
                start=T0 + 0.25, end=T0 + 61.0, probability=0.96651, summary=nasty),
          Alert(rule="m", kind="rendezvous", track="T1", other_track="T2", zone="",
                start=T0, end=T0 + 600.0, probability=1.0, summary="ok")]
    out = tmp_path / "alerts.csv"
    write_alerts_csv(al, out)
    with out.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    # the contract's columns, in order (shared formats.md, alerts.csv)
    assert rows[0] == ["rule", "kind", "track", "other_track", "zone", "start", "end",
                       "probability", "summary"]
    assert list(ALERT_COLUMNS) == rows[0]
    assert rows[1] == ["r<1>", "entry", "T1", "", "z,1", "2026-05-04T06:00:00.250Z",
                       "2026-05-04T06:01:01.000Z", "0.967", nasty]
    assert rows[2][3] == "T2" and rows[2][7] == "1.000"
    assert [p.name for p in tmp_path.iterdir()] == ["alerts.csv"]  # no temp file left
    write_alerts_csv([], out)
    assert out.read_text(encoding="utf-8").strip() == ",".join(rows[0])


def test_alerts_table_lists_every_alert(alerts: list[Alert]) -> None:
    text = alerts_table(alerts)
    lines = text.splitlines()
    assert len(lines) == len(alerts) + 3
    assert all(a.rule in text for a in alerts)
    assert alerts_table([]) == "no alerts raised"


def test_rendezvous_optionally_inside_a_zone(scenario: dict[str, Vessel]) -> None:
    roads = zone("outer-roads", "Outer Roads", Polygon([(3500, 3000), (7500, 3000),
                                                        (7500, 5000), (3500, 5000)]))
    trajs = [scenario[k].traj for k in ("R1", "R2", "P1", "P2")]
    params = {"max_distance_m": 150, "min_duration_min": 10, "max_speed_kn": 3.0}
    rs = [rule("roads-meeting", "rendezvous", "outer-roads", **params),
          rule("basin-meeting", "rendezvous", "inner-basin", **params)]
    got = evaluate_rules(tset(trajs), [*ZONES, roads], rs, seed=3)
    assert [(a.rule, a.track, a.other_track) for a in got] == [("roads-meeting", "R1", "R2")]
    assert "Outer Roads" in got[0].summary


def test_existence_scales_the_probability(scenario: dict[str, Vessel]) -> None:
    import dataclasses

    tr = dataclasses.replace(scenario["L25"].traj, existence=0.6)
    r = RULES[0]
    got = evaluate_rules(tset([tr]), ZONES, [r], seed=7)
    assert len(got) == 1 and 0.5 < got[0].probability <= 0.6
    strict = dataclasses.replace(r, min_probability=0.7)
    assert evaluate_rules(tset([tr]), ZONES, [strict], seed=7) == []


def test_contract_example_rules_load_with_these_kinds(tmp_path) -> None:  # type: ignore[no-untyped-def]

    # the rules example of the file contract (shared formats.md), verbatim keys
    text = """
[[rule]]
id = "basin-loiter"
kind = "loiter"
zone = "inner-basin"
min_duration_min = 15
max_speed_kn = 1.5

[[rule]]
id = "range-crossing"
kind = "pass-through"
zone = "firing-range"

[[rule]]
id = "berth-entry"
kind = "entry"
zone = "naval-berth"

[[rule]]
id = "fairway-speed"
kind = "speed"
zone = "fairway"
max_speed_kn = 8.0
min_duration_min = 1

[[rule]]
id = "offshore-meeting"
kind = "rendezvous"
max_distance_m = 150
min_duration_min = 10
max_speed_kn = 3.0
zone = "outer-roads"
"""
    p = tmp_path / "rules.toml"
    p.write_text(text, encoding="utf-8")
    zs = [*ZONES, zone("outer-roads", "Outer Roads", Polygon([(0, 0), (1, 0), (1, 1)]))]
    rules = load_rules(p, zs, RULE_SCHEMAS)
    assert [r.kind for r in rules] == ["loiter", "pass-through", "entry", "speed", "rendezvous"]
    bad = text.replace("max_speed_kn = 8.0", "max_speed_kn = -1.0")
    with pytest.raises(InputError) as e:
        load_rules(_rules_file(tmp_path, bad), zs)
    assert (e.value.line, e.value.field) == (bad.splitlines().index("max_speed_kn = -1.0") + 1,
                                             "max_speed_kn")
