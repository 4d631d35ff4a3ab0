"""Far radars, huge zones and implausible inputs: bounded cost, warnings instead of silence.

Reference values: pyproj's geodesic (``Geod(ellps="WGS84")``, C. F. F. Karney,
"Algorithms for geodesics", J. Geodesy 87, 2013) for distances and areas,
shapely predicates on the WGS84 geometry for inside/outside.
"""

from __future__ import annotations

import json
import math
import shutil
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import shapely

from harbourwatch import simulate_to_dir
from harbourwatch.errors import InputError
from harbourwatch.filter._undetected import UndetectedDensity
from harbourwatch.io.inputs import load_inputs
from harbourwatch.io.records import ZoneConfig
from harbourwatch.io.toml_files import load_sensors
from harbourwatch.pipeline import demo_paths, run_review
from harbourwatch.scene.build import into_local_frame
from harbourwatch.scene.extent import ACCURATE_WITHIN_M, SIMPLIFY_ABOVE_VERTICES, Covers
from harbourwatch.scene.geodesy import WGS84_GEOD, LocalFrame
from harbourwatch.scene.zones import LocalZone

GEOD = WGS84_GEOD


@pytest.fixture(scope="module")
def quiet(tmp_path_factory) -> Path:
    """Five minutes of the 'quiet' scenario (one radar, four vessels) with the demo zones/rules."""
    d = tmp_path_factory.mktemp("quiet")
    simulate_to_dir("quiet", d, duration_s=300.0)
    p = demo_paths()
    shutil.copy(p["zones"], d / "zones.geojson")
    shutil.copy(p["rules"], d / "rules.toml")
    return d


def _copy(quiet: Path, tmp_path: Path) -> Path:
    d = tmp_path / "in"
    shutil.copytree(quiet, d)
    return d


def _run(d: Path, out: Path, **kw):
    return run_review([d / "plots.csv"], sensors=d / "sensors.toml", zones=d / "zones.geojson",
                      rules=d / "rules.toml", out=out, progress=False, **kw)


def _sensor_line(d: Path, key: str, value: str) -> int:
    text = (d / "sensors.toml").read_text()
    lines = text.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.startswith(f"{key} ="))
    lines[k] = f"{key} = {value}"
    (d / "sensors.toml").write_text("\n".join(lines) + "\n")
    return k + 1


# --- the undetected-vessel grid -----------------------------------------------------------

def _grid(sites, ranges=(14_000.0, 14_000.0)):
    return UndetectedDensity(sites, list(ranges)[: len(sites)], initial_vessels=20.0,
                             arrivals_per_hour=20.0, mean_lifetime_s=4 * 3600.0)


@pytest.mark.parametrize("apart_m", [1_000_000.0, 1e7])
def test_far_radars_cost_what_two_separate_ones_cost(apart_m):
    one = _grid([(0.0, 0.0)])
    both = _grid([(0.0, 0.0), (apart_m, 0.7 * apart_m)])
    # stored cells: the two covers, each at most pi (r + cell)^2 / cell^2 cells (a cell is
    # stored when its centre is in a cover); a dense grid would hold the square between them
    cap = math.pi * (14_000.0 / one.cell + 1.0) ** 2
    assert one.keys.size <= cap and both.keys.size <= 2 * cap
    assert both.shape[0] * both.shape[1] > 100 * both.keys.size
    # a plot at each site sees the density; one between them sees nothing
    d = both.density(np.array([[0.0, 0.0], [apart_m, 0.7 * apart_m], [apart_m / 2, 0.0]]))
    assert d[0] > 0 and d[1] > 0 and d[2] == 0


def test_sparse_grid_has_the_uniform_density_of_its_covers():
    g = _grid([(0.0, 0.0), (5000.0, 0.0)])
    cell_area = g.cell**2
    # 20 initial vessels spread over the stored cover cells: sum D * area = 20 (computed by hand)
    assert g.expected_undetected() == pytest.approx(20.0)
    assert g.D.max() == pytest.approx(20.0 / (g.union.sum() * cell_area))


def test_two_ports_1000_km_apart_in_one_run(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    text = (d / "sensors.toml").read_text()
    far = text.split("\n[[sensor]]")[1].replace('"calder-head"', '"far-port"').replace(
        "lon = -30.070082", "lon = -13.4")  # about 1000 km east along 57.5 N
    (d / "sensors.toml").write_text(text + "\n[[sensor]]" + far)
    summary = _run(d, tmp_path / "out")
    assert summary.vessels == _run(quiet, tmp_path / "ref").vessels


# --- zones ---------------------------------------------------------------------------------

def _frame_and_covers(quiet: Path):
    sensors = load_sensors(quiet / "sensors.toml")
    frame = LocalFrame.around([s.lat_deg for s in sensors], [s.lon_deg for s in sensors])
    return sensors, frame, Covers.of(sensors, frame)


def _cover_points(sensors, frame, rng, n=3000):
    s = sensors[0]
    az = rng.uniform(0, 360, n)
    r = s.max_range_m * np.sqrt(rng.uniform(0, 1, n))
    lon, lat, _ = GEOD.fwd(np.full(n, s.lon_deg), np.full(n, s.lat_deg), az, r)
    e, nn = frame.to_local(lat, lon)
    return np.asarray(lat), np.asarray(lon), e, nn


def _circle(lon0, lat0, radius_deg, n):
    k = np.arange(n)
    ring = np.column_stack([lon0 + radius_deg / math.cos(math.radians(lat0)) * np.cos(2 * np.pi * k / n),
                            lat0 + radius_deg * np.sin(2 * np.pi * k / n)])
    return shapely.Polygon(ring)


@pytest.mark.parametrize("shape", ["box5", "world", "vertices100k"])
def test_huge_zones_are_cut_to_the_covers_and_agree_inside_them(quiet, rng, shape):
    sensors, frame, covers = _frame_and_covers(quiet)
    s = sensors[0]
    geom = {
        "box5": shapely.box(s.lon_deg - 2.5, s.lat_deg - 2.5, s.lon_deg + 2.5, s.lat_deg + 2.5),
        "world": shapely.box(-180, -90, 180, 90),
        "vertices100k": _circle(s.lon_deg + 0.05, s.lat_deg, 0.08, 100_000),
    }[shape]
    zone = LocalZone.from_config(ZoneConfig(id="z", name="z", kind="", geometry=geom), frame,
                                 covers)
    assert shapely.get_num_coordinates(zone.polygon) <= SIMPLIFY_ABOVE_VERTICES
    lat, lon, e, n = _cover_points(sensors, frame, rng)
    truth = shapely.contains_xy(geom, lon, lat)  # shapely on the WGS84 geometry
    got = zone.contains(e, n)
    # they may differ only within a few metres of the boundary (densification, 1 m simplify)
    near = zone.near_edge(e, n, np.full(e.shape, 5.0))
    assert np.all((got == truth) | near)
    assert truth.any()


def test_zone_across_the_antimeridian_keeps_its_area():
    # a radar at 179.95 E; the zone is given as two boxes either side of 180 (RFC 7946 3.1.9)
    from harbourwatch.io.records import SensorConfig
    s = SensorConfig(id="r", lat_deg=-16.5, lon_deg=179.95, scan_period_s=2.5,
                     range_sigma_m=15.0, bearing_sigma_deg=0.4, detection_probability=0.9,
                     false_plots_per_scan=1.0, max_range_m=20_000.0)
    frame = LocalFrame.around([s.lat_deg], [s.lon_deg])
    geom = shapely.MultiPolygon([shapely.box(179.9, -16.55, 180.0, -16.45),
                                 shapely.box(-180.0, -16.55, -179.95, -16.45)])
    zone = LocalZone.from_config(ZoneConfig(id="z", name="z", kind="", geometry=geom), frame,
                                 Covers.of([s], frame))
    area = sum(abs(GEOD.geometry_area_perimeter(p)[0]) for p in geom.geoms)  # pyproj geodesic
    assert zone.polygon.area == pytest.approx(area, rel=1e-3)


def _zones_with(quiet_dir: Path, geom: dict) -> int:
    doc = json.loads((quiet_dir / "zones.geojson").read_text())
    doc["features"].append({"type": "Feature", "properties": {"id": "hostile"}, "geometry": geom})
    text = json.dumps(doc, indent=1)
    (quiet_dir / "zones.geojson").write_text(text)
    return next(i for i, ln in enumerate(text.splitlines(), 1) if '"hostile"' in ln)


def test_zone_far_from_every_radar_is_warned_about(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _zones_with(d, {"type": "Polygon", "coordinates": [[[-20, 57], [-19.9, 57], [-19.9, 57.1],
                                                         [-20, 57.1], [-20, 57]]]})
    summary = _run(d, tmp_path / "out")
    sensors = load_sensors(d / "sensors.toml")
    # nearest vertex from the radar, pyproj geodesic
    dist = min(GEOD.inv(sensors[0].lon_deg, sensors[0].lat_deg, x, y)[2]
               for x, y in [(-20, 57), (-19.9, 57), (-19.9, 57.1), (-20, 57.1)])
    msg = [w for w in summary.warnings if "'hostile'" in w]
    assert msg == [f"zone 'hostile' is {dist / 1000:,.0f} km from the nearest radar: no part of "
                   "it lies in any radar's cover, so no rule on it can raise an alert"]
    assert msg[0] in json.loads((tmp_path / "out" / "run.json").read_text())["warnings"]


def test_zone_at_the_antipode_is_refused_with_its_line(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    sensors = load_sensors(d / "sensors.toml")
    lon, lat = sensors[0].lon_deg + 180.0, -sensors[0].lat_deg
    line = _zones_with(d, {"type": "Polygon", "coordinates": [[
        [lon - 0.1, lat - 0.1], [lon + 0.1, lat - 0.1], [lon + 0.1, lat + 0.1],
        [lon - 0.1, lat + 0.1], [lon - 0.1, lat - 0.1]]]})
    with pytest.raises(InputError) as info:
        _run(d, tmp_path / "out")
    assert (info.value.file, info.value.line, info.value.field) == (
        str(d / "zones.geojson"), line, "geometry")
    assert not (tmp_path / "out").exists()


# --- plots and radars beyond the frame, wrong signs -----------------------------------------

def test_sensor_longitude_sign_error_is_refused_with_the_plot_line(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _sensor_line(d, "lon", "30.070082")  # the plots are at 30.07 W
    with pytest.raises(InputError) as info:
        _run(d, tmp_path / "out")
    assert info.value.file == str(d / "plots.csv") and info.value.line == 2
    # 57.5 N, 60 degrees of longitude apart: about 3,500 km (pyproj geodesic, checked in text)
    assert "km from its sensor 'calder-head'" in info.value.message
    assert f"{ACCURATE_WITHIN_M / 1000:,.0f} km" in info.value.message


def test_sensor_placed_off_its_plots_is_warned_about(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _sensor_line(d, "lon", "-31.5")  # 1.43 degrees west: about 85 km from its plots
    summary = _run(d, tmp_path / "out")
    assert any("sensor 'calder-head': none of its" in w and "wrong sign" in w
               for w in summary.warnings)
    assert any("outside every radar's cover" in w for w in summary.warnings)


def test_plot_beyond_the_frame_is_refused_with_its_line(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    rows = (d / "plots.csv").read_text().splitlines()
    cells = rows[10].split(",")
    cells[3] = "150.0"  # longitude on the other side of the globe
    rows[10] = ",".join(cells)
    (d / "plots.csv").write_text("\n".join(rows) + "\n")
    with pytest.raises(InputError) as info:
        load_and_frame(d)
    assert (info.value.line, info.value.field) == (11, "lon")


def load_and_frame(d: Path):
    inp = load_inputs([d / "plots.csv"], sensors=d / "sensors.toml", zones=d / "zones.geojson",
                      rules=d / "rules.toml")
    return into_local_frame(inp)


# --- sigma_m and clutter ---------------------------------------------------------------------

def _with_sigma(d: Path, value: float, every: int = 3) -> None:
    frame = pd.read_csv(d / "plots.csv", dtype=str, keep_default_na=False)
    sig = np.where(np.arange(len(frame)) % every == 0, f"{value:g}", "")
    frame["sigma_m"] = sig
    frame.to_csv(d / "plots.csv", index=False)


def test_sigma_far_below_the_sensor_model_is_warned_about(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _with_sigma(d, 0.5)  # range sigma 15 m, bearing 0.4 deg: 0.5 m is 30x too small
    summary = _run(d, tmp_path / "out")
    assert any("sigma_m below a third of its range/bearing model" in w for w in summary.warnings)


def test_huge_sigma_runs_without_numpy_warnings(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _with_sigma(d, 1e5)  # the largest accepted
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        summary = _run(d, tmp_path / "out")
    assert any("sigma_m above three times" in w for w in summary.warnings)


def test_clutter_far_from_the_configured_rate_is_warned_about(quiet, tmp_path):
    d = _copy(quiet, tmp_path)
    _sensor_line(d, "false_plots_per_scan", "0.01")  # the feed was simulated with 1.0
    summary = _run(d, tmp_path / "out")
    assert any("false_plots_per_scan of 0.01" in w for w in summary.warnings)


def test_a_plausible_run_gives_no_warning(quiet, tmp_path):
    summary = _run(quiet, tmp_path / "out")
    assert summary.warnings == ()
    assert json.loads((tmp_path / "out" / "run.json").read_text())["warnings"] == []


# --- frames near the poles and across 180 degrees -------------------------------------------

@pytest.mark.parametrize(("lat0", "lon0"), [(89.9, 0.0), (-89.5, 120.0), (60.0, 180.0),
                                            (-10.0, -179.99)])
def test_frame_distances_near_poles_and_antimeridian(rng, lat0, lon0):
    frame = LocalFrame(lat0, lon0)
    n = 400
    az = rng.uniform(0, 360, (2, n))
    r = 25_000.0 * np.sqrt(rng.uniform(0, 1, (2, n)))
    lon, lat, _ = GEOD.fwd(np.full((2, n), lon0), np.full((2, n), lat0), az, r)
    e, nn = frame.to_local(lat, lon)
    d_frame = np.hypot(e[0] - e[1], nn[0] - nn[1])
    _, _, d_geo = GEOD.inv(lon[0], lat[0], lon[1], lat[1])  # pyproj geodesic
    # the bound of geodesy.py: (25 km / R)^2 / 6 of the distance, R >= 6.33e6 m (polar radius
    # of curvature is larger; the equatorial meridian radius 6,335,439 m is the smallest, from memory)
    bound = (25_000.0 / 6_335_439.0) ** 2 / 6.0
    assert np.all(d_frame >= d_geo * (1 - 1e-9) - 1e-6)
    assert np.all(d_frame - d_geo <= bound * d_geo + 1e-6)
    # round trip
    la, lo = frame.to_wgs84(e, nn)
    _, _, back = GEOD.inv(lo, la, lon, lat)
    assert np.max(back) < 1e-5
