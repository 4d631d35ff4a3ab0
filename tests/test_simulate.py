"""The scenario simulator against outside references.

References named beside each check: scipy.stats (kstest, chisquare,
binomtest) for the error, clutter and detection statistics; pyproj's Geod
(Karney's geodesics on WGS84) for the geometry, computed independently of
the simulator's own bookkeeping from the written plot positions and the
truth.
"""

from __future__ import annotations

import gzip
import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from shapely.geometry import Point, shape

from harbourwatch.cli import main as cli_main
from harbourwatch.io.records import SensorConfig
from harbourwatch.scene.geodesy import WGS84_GEOD, LocalFrame
from harbourwatch.sim import (
    SCENARIOS,
    Leg,
    Scenario,
    SimSensor,
    SimulationResult,
    VesselPlan,
    arpa_sigmas,
    plots_columns,
    sensors_to_toml,
    simulate,
    simulate_to_dir,
)
from harbourwatch.units import KNOT_M_S

GEOD = WGS84_GEOD
REPO = Path(__file__).resolve().parents[1]
START = 1777874400.0
SITE = (57.5, -30.0)


def _stats_scenario(duration_s: float = 3600.0, outages: tuple[tuple[float, float], ...] = ()
                    ) -> Scenario:
    cfg = SensorConfig(id="test-site", lat_deg=SITE[0], lon_deg=SITE[1], scan_period_s=2.5,
                       range_sigma_m=15.0, bearing_sigma_deg=0.4, detection_probability=0.9,
                       false_plots_per_scan=6.0, max_range_m=12000.0)
    vessels = []
    for i, (az, r, course, kn) in enumerate([(10, 3000, 90, 6), (100, 6000, 0, 8),
                                              (200, 8000, 270, 4), (300, 5000, 180, 10),
                                              (45, 9000, 315, 3)]):
        lon, lat, _ = GEOD.fwd(SITE[1], SITE[0], az, r)
        vessels.append(VesselPlan(name=f"v{i}", start_time_s=-10.0, start_lat_deg=float(lat),
                                  start_lon_deg=float(lon), course_deg=course, speed_kn=kn,
                                  legs=[Leg.straight(600), Leg.turn_by(180, 2.0)] * 4
                                  + [Leg.straight()]))
    return Scenario(name="stats", start_epoch_s=START, duration_s=duration_s,
                    sensors=(SimSensor(config=cfg, outages_s=outages),), vessels=tuple(vessels))


@pytest.fixture(scope="module")
def run() -> SimulationResult:
    return simulate(_stats_scenario(), seed=12345)


def _true_geometry(res: SimulationResult, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """True range and bearing at the plot times, from the truth samples (independent path)."""
    p = res.plots
    lat = np.empty(mask.sum())
    lon = np.empty(mask.sum())
    idx = np.flatnonzero(mask)
    for v in np.unique(p.vessel[idx]):
        sel = p.vessel[idx] == v
        tr = res.truth[v]
        lat[sel] = np.interp(p.time[idx][sel], tr.time, tr.lat_deg)
        lon[sel] = np.interp(p.time[idx][sel], tr.time, tr.lon_deg)
    s = res.sensors[0]
    az, _, r = GEOD.inv(np.full(lat.size, s.lon_deg), np.full(lat.size, s.lat_deg), lon, lat)
    return np.asarray(r), np.mod(np.asarray(az), 360.0)


def _measured(res: SimulationResult, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    p = res.plots
    s = res.sensors[0]
    n = int(mask.sum())
    az, _, r = GEOD.inv(np.full(n, s.lon_deg), np.full(n, s.lat_deg), p.lon_deg[mask],
                        p.lat_deg[mask])
    return np.asarray(r), np.mod(np.asarray(az), 360.0)


def test_range_and_bearing_errors_are_normal(run: SimulationResult) -> None:
    vessel = run.plots.vessel >= 0
    assert vessel.sum() > 5000
    r_true, b_true = _true_geometry(run, vessel)
    r_meas, b_meas = _measured(run, vessel)
    s = run.sensors[0]
    zr = (r_meas - r_true) / s.range_sigma_m
    zb = ((b_meas - b_true + 180.0) % 360.0 - 180.0) / s.bearing_sigma_deg
    # reference: scipy.stats.kstest against N(0, 1)
    assert stats.kstest(zr, "norm").pvalue > 1e-3
    assert stats.kstest(zb, "norm").pvalue > 1e-3
    # the recorded errors are the ones in the positions (to the ms time rounding)
    np.testing.assert_allclose(r_meas - r_true, run.plots.range_error_m[vessel], atol=0.05)


def test_wrong_sigma_would_be_rejected(run: SimulationResult) -> None:
    # the same KS check has the power to see a 20 % error in the range sigma
    vessel = run.plots.vessel >= 0
    r_true, _ = _true_geometry(run, vessel)
    r_meas, _ = _measured(run, vessel)
    z = (r_meas - r_true) / (1.2 * run.sensors[0].range_sigma_m)
    assert stats.kstest(z, "norm").pvalue < 1e-3


def _complete_scans(res: SimulationResult, si: int = 0) -> np.ndarray:
    period = res.sensors[si].scan_period_s
    north = res.north_times[si]
    ok = (north >= res.start_epoch_s) & (north + period <= res.end_epoch_s)
    return np.flatnonzero(ok)


def test_clutter_counts_are_poisson(run: SimulationResult) -> None:
    ks = _complete_scans(run)
    clutter = run.plots.vessel < 0
    counts = np.bincount(run.plots.scan[clutter], minlength=run.north_times[0].size)[ks]
    lam = run.sensors[0].false_plots_per_scan
    # bins {0,1}, 2..11 and a tail bin, all with expected counts >= 5
    pois = stats.poisson(lam)
    obs = np.array([np.sum(counts <= 1)] + [np.sum(counts == k) for k in range(2, 12)]
                   + [np.sum(counts >= 12)])
    exp = np.array([pois.cdf(1)] + [pois.pmf(k) for k in range(2, 12)] + [pois.sf(11)])
    exp = exp * counts.size
    assert exp.min() >= 5
    # reference: scipy.stats.chisquare goodness of fit to Poisson(mean)
    assert stats.chisquare(obs, exp).pvalue > 1e-3
    assert counts.mean() == pytest.approx(lam, rel=0.05)


def test_detection_rate_is_binomial(run: SimulationResult) -> None:
    period = run.sensors[0].scan_period_s
    north = run.north_times[0]
    ks = _complete_scans(run)
    opportunities = 0
    detections = 0
    for vi, tr in enumerate(run.truth):
        assert tr.in_cover.all()
        inside = ks[(north[ks] >= tr.time[0]) & (north[ks] + period <= tr.time[-1])]
        opportunities += inside.size
        mine = run.plots.scan[run.plots.vessel == vi]
        detections += np.isin(mine, inside).sum()
        assert np.unique(mine).size == mine.size  # at most one plot per scan
    # reference: scipy.stats.binomtest against detection_probability
    res = stats.binomtest(int(detections), int(opportunities),
                          run.sensors[0].detection_probability)
    assert res.pvalue > 1e-3


def test_plot_time_follows_bearing(run: SimulationResult) -> None:
    p = run.plots
    period = run.sensors[0].scan_period_s
    frac = (p.time - run.north_times[0][p.scan]) / period
    assert frac.min() >= -1e-3 / period and frac.max() < 1 + 1e-3 / period
    # vessels: time within the revolution gives the true bearing (clockwise from north)
    vessel = p.vessel >= 0
    _, b_true = _true_geometry(run, vessel)
    d = (frac[vessel] * 360.0 - b_true + 180.0) % 360.0 - 180.0
    assert np.abs(d).max() < 360.0 * 1e-3 / period + 1e-6
    # clutter: no bearing noise, so the measured bearing itself
    clutter = ~vessel
    n = int(clutter.sum())
    s = run.sensors[0]
    az, _, _ = GEOD.inv(np.full(n, s.lon_deg), np.full(n, s.lat_deg), p.lon_deg[clutter],
                        p.lat_deg[clutter])
    d = (frac[clutter] * 360.0 - np.mod(az, 360.0) + 180.0) % 360.0 - 180.0
    assert np.abs(d).max() < 360.0 * 1e-3 / period + 1e-6


def test_clutter_uniform_over_cover(run: SimulationResult) -> None:
    clutter = run.plots.vessel < 0
    r, b = _measured(run, clutter)
    rmax = run.sensors[0].max_range_m
    assert r.max() <= rmax + 1e-6
    # reference: scipy.stats.kstest; uniform in area means r^2/R^2 ~ U(0, 1)
    assert stats.kstest((r / rmax) ** 2, "uniform").pvalue > 1e-3
    assert stats.kstest(b / 360.0, "uniform").pvalue > 1e-3
    # and a linear-in-radius draw would fail the same check
    assert stats.kstest(r / rmax, "uniform").pvalue < 1e-6


def test_outage_has_no_plots() -> None:
    res = simulate(_stats_scenario(1200.0, outages=((400.0, 700.0),)), seed=3)
    rel = res.plots.time - START
    assert not np.any((rel >= 400.0) & (rel < 700.0))
    assert np.any(rel < 400.0) and np.any(rel >= 700.0)


def test_outage_scenario() -> None:
    res = simulate(SCENARIOS["outage"].build(1, None), seed=1)
    rel = res.plots.time - res.start_epoch_s
    mid = res.scenario.duration_s / 2
    down = res.plots.sensor == 1
    assert not np.any(down & (rel >= mid - 300) & (rel < mid + 300))
    assert np.any(~down & (rel >= mid - 300) & (rel < mid + 300))


def test_determinism() -> None:
    sc = _stats_scenario(300.0)
    a, b, c = simulate(sc, seed=7), simulate(sc, seed=7), simulate(sc, seed=8)
    for name in ("time", "sensor", "lat_deg", "lon_deg", "scan", "vessel"):
        np.testing.assert_array_equal(getattr(a.plots, name), getattr(b.plots, name))
    assert len(a.plots) != len(c.plots) or not np.array_equal(a.plots.lat_deg, c.plots.lat_deg)


def test_motion_on_the_ellipsoid() -> None:
    lon0, lat0 = SITE[1], SITE[0]
    glon, glat, _ = GEOD.fwd(lon0, lat0, 30.0, 2000.0)
    plan = VesselPlan(name="m", start_time_s=0.0, start_lat_deg=lat0, start_lon_deg=lon0,
                      course_deg=0.0, speed_kn=10.0,
                      legs=[Leg.straight(120), Leg.turn(2.0, 45), Leg.speed(4.0, 60),
                            Leg.stop(30), Leg.goto(float(glat), float(glon), 6.0)])
    cfg = SensorConfig(id="s", lat_deg=lat0, lon_deg=lon0, scan_period_s=2.0, range_sigma_m=10,
                       bearing_sigma_deg=0.3, detection_probability=1.0,
                       false_plots_per_scan=0.0, max_range_m=20000)
    res = simulate(Scenario(name="m", start_epoch_s=START, duration_s=2000.0,
                            sensors=(SimSensor(config=cfg),), vessels=(plan,)), seed=1)
    tr = res.truth[0]
    t = tr.time - START
    # straight leg: the geodesic distance run per second is the speed (reference: Geod.inv)
    s = (t >= 0) & (t <= 120)
    az, _, d = GEOD.inv(tr.lon_deg[s][:-1], tr.lat_deg[s][:-1], tr.lon_deg[s][1:], tr.lat_deg[s][1:])
    np.testing.assert_allclose(d / np.diff(t[s]), 10 * KNOT_M_S, rtol=1e-6)
    np.testing.assert_allclose((np.asarray(az) + 180) % 360 - 180, 0.0, atol=1e-3)
    # turn: 2 deg/s for 45 s, so the course after the turn is 90 deg
    i = np.searchsorted(t, 165.0)
    assert tr.course_deg[i] == pytest.approx(90.0, abs=0.05)
    # speed change: linear from 10 to 4 kn over 60 s
    j = np.searchsorted(t, 195.0)
    assert tr.speed_m_s[j] / KNOT_M_S == pytest.approx(7.0, abs=1e-6)
    # stop: no motion for 30 s
    k0, k1 = np.searchsorted(t, 226.0), np.searchsorted(t, 254.0)
    _, _, d = GEOD.inv(tr.lon_deg[k0], tr.lat_deg[k0], tr.lon_deg[k1], tr.lat_deg[k1])
    assert d < 1e-6
    # goto: ends on the waypoint
    _, _, d = GEOD.inv(tr.lon_deg[-1], tr.lat_deg[-1], float(glon), float(glat))
    assert d < 0.01
    # truth velocity agrees with the finite difference of positions in a local frame
    f = LocalFrame(lat0, lon0)
    e, n = f.to_local(tr.lat_deg, tr.lon_deg)
    mid_ve = np.diff(e) / np.diff(t)
    ve = 0.5 * (tr.v_east_m_s[1:] + tr.v_east_m_s[:-1])
    assert np.median(np.abs(mid_ve - ve)) < 0.01


def test_arpa_noise_sigmas() -> None:
    res = simulate(SCENARIOS["arpa"].build(1, None), seed=1)
    v = res.plots.vessel >= 0
    r_sd, b_sd = arpa_sigmas()
    # Annex 3 components (see simulate.ARPA_ERRORS): sqrt(20^2 + 18.52^2/3) m
    assert r_sd == pytest.approx(math.sqrt(20.0**2 + (0.01 * 1852) ** 2 / 3), rel=1e-12)
    assert np.std(res.plots.range_error_m[v]) == pytest.approx(r_sd, rel=0.05)
    assert np.std(res.plots.bearing_error_deg[v]) == pytest.approx(b_sd, rel=0.05)
    assert res.sensors[0].range_sigma_m == pytest.approx(r_sd, abs=1e-3)


def test_sensors_toml_round_trip() -> None:
    sc = SCENARIOS["demo"].build(1, 60.0)
    cfgs = [s.config for s in sc.sensors]
    parsed = tomllib.loads(sensors_to_toml(cfgs))["sensor"]
    assert [p["id"] for p in parsed] == [c.id for c in cfgs]
    for p, c in zip(parsed, cfgs, strict=True):
        assert p["lat"] == c.lat_deg and p["lon"] == c.lon_deg
        assert p["scan_period_s"] == c.scan_period_s and p["max_range_m"] == c.max_range_m


@pytest.mark.parametrize("fmt", ["csv", "csv.gz", "parquet"])
def test_simulate_to_dir_byte_identical(tmp_path: Path, fmt: str) -> None:
    a = simulate_to_dir("quiet", tmp_path / "a", seed=5, duration_s=240.0, feed_format=fmt)
    b = simulate_to_dir("quiet", tmp_path / "b", seed=5, duration_s=240.0, feed_format=fmt)
    assert [p.name for p in a] == [p.name for p in b]
    for pa, pb in zip(a, b, strict=True):
        assert pa.read_bytes() == pb.read_bytes(), pa.name
    assert not list((tmp_path / "a").glob("*.tmp"))


def test_cli_simulate(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert cli_main(["simulate", "--list"]) == 0
    out = capsys.readouterr().out
    for name in ("demo", "quiet", "crossing45", "parallel120", "outage", "bench", "arpa"):
        assert name in out
    assert cli_main(["simulate", "--scenario", "crossing45", "--seed", "2", "--duration-min", "3",
                     "--out", str(tmp_path)]) == 0
    header = (tmp_path / "plots.csv").read_text().splitlines()[0]
    assert header == "time,sensor,lat,lon,scan"
    assert (tmp_path / "truth.csv").read_text().startswith("track,time,lat,lon\n")
    assert cli_main(["simulate", "--scenario", "no-such", "--out", str(tmp_path)]) == 2


# --------------------------------------------------------------------------- Port Calder demo


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    simulate_to_dir("demo", out, feed_format="csv.gz")
    return out


def test_demo_matches_committed_files(demo: Path) -> None:
    committed = REPO / "demo_feeds"
    for name in ("plots.csv.gz", "truth.csv.gz"):
        with gzip.open(demo / name) as f1, gzip.open(committed / name) as f2:
            assert f1.read() == f2.read(), name
    for name in ("sensors.toml", "rules.toml"):
        assert (demo / name).read_bytes() == (committed / name).read_bytes(), name
    # the zones are kept once, in zones/ (the demo reads them from there)
    assert (demo / "zones.geojson").read_bytes() == (REPO / "zones/port_calder.geojson").read_bytes()
    assert not (committed / "zones.geojson").exists()


def test_demo_zones_valid(demo: Path) -> None:
    fc = json.loads((demo / "zones.geojson").read_text())
    ids = [f["properties"]["id"] for f in fc["features"]]
    assert len(ids) == len(set(ids))
    for zid in ("inner-basin", "fairway", "naval-berth", "range-area", "outer-roads"):
        assert zid in ids
    for f in fc["features"]:
        g = shape(f["geometry"])
        assert g.is_valid and g.area > 0, f["properties"]["id"]
        lon, lat = g.centroid.x, g.centroid.y
        assert 57.3 < lat < 57.7 and -30.4 < lon < -29.6  # mid-ocean, invented
    assert any(f["properties"]["kind"] == "land" for f in fc["features"])
    rules = tomllib.loads((demo / "rules.toml").read_text())["rule"]
    assert {r["kind"] for r in rules} == {"loiter", "pass-through", "entry", "speed", "rendezvous"}
    assert {r["zone"] for r in rules} <= set(ids)


@pytest.fixture(scope="module")
def demo_truth() -> tuple[SimulationResult, dict]:
    sc = SCENARIOS["demo"].build(SCENARIOS["demo"].default_seed, None)
    res = simulate(sc, SCENARIOS["demo"].default_seed)
    zones = {f["properties"]["id"]: shape(f["geometry"])
             for f in json.loads(sc.zones_geojson)["features"]}
    return res, zones


def _inside(tr, zone) -> np.ndarray:  # noqa: ANN001 - test helper
    return np.array([zone.contains(Point(x, y)) for x, y in zip(tr.lon_deg, tr.lat_deg,
                                                                 strict=True)])


def _longest_run_s(mask: np.ndarray, t: np.ndarray) -> float:
    best, start = 0.0, None
    for i, m in enumerate(mask):
        if m and start is None:
            start = t[i]
        if start is not None and (not m or i == mask.size - 1):
            best = max(best, (t[i] if m else t[i - 1]) - start)
            start = None
    return best


def test_demo_cases_on_truth(demo_truth: tuple[SimulationResult, dict]) -> None:
    # each demo rule has a case it should catch and a near miss, judged on the truth
    res, zones = demo_truth
    tr = {v.name: v for v in res.truth}
    kn = KNOT_M_S
    land = [z for k, z in zones.items() if k.startswith("land")]
    for v in res.truth:
        pts = [Point(x, y) for x, y in zip(v.lon_deg[::30], v.lat_deg[::30], strict=True)]
        assert not any(lz.contains(p) for lz in land for p in pts), v.name
    slow = lambda v: _inside(v, zones["inner-basin"]) & (v.speed_m_s < 1.5 * kn)  # noqa: E731
    assert _longest_run_s(slow(tr["fishing-1"]), tr["fishing-1"].time) > 20 * 60
    assert 5 * 60 < _longest_run_s(slow(tr["leisure-1"]), tr["leisure-1"].time) < 10 * 60
    for v in res.truth:
        if v.name != "fishing-1":
            assert _longest_run_s(slow(v), v.time) < 15 * 60, v.name
    rng_in = _inside(tr["fishing-2"], zones["range-area"])
    assert rng_in.any() and not rng_in[0] and not rng_in[-1]
    skirt = tr["leisure-2"]
    assert zones["range-area"].distance(
        shape({"type": "LineString", "coordinates": list(zip(skirt.lon_deg, skirt.lat_deg,
                                                            strict=True))})) > 0
    fast = [(_inside(v, zones["fairway"]) & (v.speed_m_s > 8 * kn)) for v in res.truth]
    caught = [v.name for v, m in zip(res.truth, fast, strict=True) if m.any()]
    assert caught == ["pilot-1"]
    assert 3 * 60 < _longest_run_s(fast[[v.name for v in res.truth].index("pilot-1")],
                                   tr["pilot-1"].time) < 5 * 60
    assert np.max(tr["ferry-1"].speed_m_s[_inside(tr["ferry-1"], zones["fairway"])]) \
        == pytest.approx(7 * kn, rel=1e-6)
    berth = [v.name for v in res.truth if _inside(v, zones["naval-berth"]).any()]
    assert berth == ["leisure-4"]
    # meeting in the roads: within 150 m, both slower than 3 kn, for 10+ minutes
    f = LocalFrame(57.5, -30.0)

    def together(a: str, b: str) -> float:
        va, vb = tr[a], tr[b]
        t = np.intersect1d(va.time, vb.time)
        ea, na = f.to_local(np.interp(t, va.time, va.lat_deg), np.interp(t, va.time, va.lon_deg))
        eb, nb = f.to_local(np.interp(t, vb.time, vb.lat_deg), np.interp(t, vb.time, vb.lon_deg))
        close = ((np.hypot(ea - eb, na - nb) < 150)
                 & (np.interp(t, va.time, va.speed_m_s) < 3 * kn)
                 & (np.interp(t, vb.time, vb.speed_m_s) < 3 * kn))
        return _longest_run_s(close, t) if t.size else 0.0

    assert together("fishing-3", "leisure-3") > 14 * 60
    assert together("fishing-4", "fishing-5") == 0.0
    names = [v.name for v in res.truth]
    arrivals = [v for v in res.truth if v.time[0] > res.start_epoch_s]
    departures = [v for v in res.truth if v.time[-1] < res.end_epoch_s]
    assert len(names) >= 24 and len(arrivals) >= 5 and len(departures) >= 5


def test_demo_only_one_meeting(demo_truth: tuple[SimulationResult, dict]) -> None:
    # no other pair of vessels is within 150 m, both below 3 kn, for 10 minutes
    res, _ = demo_truth
    f = LocalFrame(57.5, -30.0)
    kn = KNOT_M_S
    grid = np.arange(res.start_epoch_s, res.end_epoch_s, 10.0)
    pos = []
    for v in res.truth:
        alive = (grid >= v.time[0]) & (grid <= v.time[-1])
        e, n = f.to_local(np.interp(grid, v.time, v.lat_deg), np.interp(grid, v.time, v.lon_deg))
        slow = alive & (np.interp(grid, v.time, v.speed_m_s) < 3 * kn)
        pos.append((e, n, slow))
    pairs = []
    for i in range(len(pos)):
        for j in range(i + 1, len(pos)):
            ei, ni, si = pos[i]
            ej, nj, sj = pos[j]
            close = si & sj & (np.hypot(ei - ej, ni - nj) < 150.0)
            if _longest_run_s(close, grid) >= 600.0:
                pairs.append({res.truth[i].name, res.truth[j].name})
    assert pairs == [{"fishing-3", "leisure-3"}]


def test_geometry_scenarios() -> None:
    f = LocalFrame(57.5, -30.0)

    def local(v):  # noqa: ANN001, ANN202 - test helper
        return f.to_local(v.lat_deg, v.lon_deg)

    res = simulate(SCENARIOS["crossing45"].build(1, None), seed=1)
    a, b = res.truth
    ea, na = local(a)
    eb, nb = local(b)
    d = np.hypot(ea - eb, na - nb)
    k = int(np.argmin(d))
    # sampled every second at a closing speed of 3.2 m/s: within a few metres at 600 s
    assert d[k] < 5.0 and abs(a.time[k] - res.start_epoch_s - 600.0) < 2.0
    cross = abs(((a.course_deg[k] - b.course_deg[k]) + 180) % 360 - 180)
    assert cross == pytest.approx(45.0, abs=0.2)
    res = simulate(SCENARIOS["parallel120"].build(1, None), seed=1)
    a, b = res.truth
    ea, na = local(a)
    eb, nb = local(b)
    d = np.hypot(ea - eb, na - nb)
    # two eastward geodesics 120 m apart converge by about a metre over 3.7 km
    assert np.all(np.abs(d - 120.0) < 2.0) and (a.time[-1] - a.time[0]) >= 1200.0


def test_bench_keeps_about_forty_vessels() -> None:
    res = simulate(SCENARIOS["bench"].build(3, 1800.0), seed=3)
    grid = np.arange(res.start_epoch_s, res.end_epoch_s, 30.0)
    alive = np.array([sum(1 for v in res.truth if v.time.size and v.time[0] <= t <= v.time[-1])
                      for t in grid])
    assert 34 <= alive.min() and alive.max() <= 44
    assert [s.false_plots_per_scan for s in res.sensors] == [15.0, 15.0]


def test_sigma_m_column() -> None:
    sc = _stats_scenario(120.0)
    sim = SimSensor(config=sc.sensors[0].config, emit_sigma_m=True)
    sc = Scenario(name="s", start_epoch_s=START, duration_s=120.0, sensors=(sim,),
                  vessels=sc.vessels)
    res = simulate(sc, seed=1)
    cols = plots_columns(res)
    assert list(cols) == ["time", "sensor", "lat", "lon", "scan", "sigma_m"]
    vessel = res.plots.vessel >= 0
    r, _ = _measured(res, vessel)
    cfg = sim.config
    expected = np.sqrt(0.5 * (cfg.range_sigma_m**2 + (r * math.radians(cfg.bearing_sigma_deg)) ** 2))
    np.testing.assert_allclose(res.plots.sigma_m[vessel], expected, atol=0.006)
    assert "sigma_m" not in plots_columns(simulate(_stats_scenario(60.0), seed=1))
