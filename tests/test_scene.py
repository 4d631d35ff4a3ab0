"""The local-scene step: one build of frame, radar models, scans and zones per run."""

from __future__ import annotations

import json

import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import box
from tpmbm_synth import Radar, Vessel, make_feed

from harbourwatch import FilterSettings, into_local_frame, load_inputs, run_filter
from harbourwatch.scene.records import BirthRegion
from harbourwatch.scene.zones import DENSIFY_M


def _write_inputs(tmp_path, kind: str):
    (tmp_path / "sensors.toml").write_text(
        '[[sensor]]\nid = "head"\nlat = 57.5\nlon = -30.0\nscan_period_s = 3.0\n'
        "range_sigma_m = 15.0\nbearing_sigma_deg = 0.4\ndetection_probability = 0.9\n"
        "false_plots_per_scan = 5.0\nmax_range_m = 8000\n", encoding="utf-8")
    ring = [[-30.0, 57.5], [-29.98, 57.5], [-29.98, 57.51], [-30.0, 57.51], [-30.0, 57.5]]
    (tmp_path / "zones.geojson").write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"id": "mouth", "kind": kind},
         "geometry": {"type": "Polygon", "coordinates": [ring]}}]}), encoding="utf-8")
    (tmp_path / "rules.toml").write_text("# none\n", encoding="utf-8")
    (tmp_path / "plots.csv").write_text(
        "time,sensor,lat,lon\n2026-05-04T06:00:00Z,head,57.505,-29.99\n"
        "2026-05-04T06:00:03Z,head,57.5051,-29.99\n", encoding="utf-8")
    return load_inputs([tmp_path / "plots.csv"], sensors=tmp_path / "sensors.toml",
                       zones=tmp_path / "zones.geojson", rules=tmp_path / "rules.toml")


@pytest.mark.parametrize(("kind", "per_hour", "regions"),
                         [(" Entrance ", 30.0, 1), ("entrance", 0.0, 0), ("anchorage", 30.0, 0)])
def test_entrance_zones_become_birth_regions_only_when_asked(tmp_path, kind, per_hour, regions):
    scene = into_local_frame(_write_inputs(tmp_path, kind),
                             FilterSettings(entrance_arrivals_per_hour=per_hour))
    assert len(scene.birth_regions) == regions
    assert len(scene.sensors) == 1 and len(scene.scans) == 2
    if regions:
        assert scene.birth_regions[0].polygon is scene.zones["mouth"].polygon  # the one projection


def test_zones_are_densified_once_and_match_the_geodesic_edge_length(tmp_path):
    scene = into_local_frame(_write_inputs(tmp_path, "entrance"))
    poly = scene.zones["mouth"].polygon
    xy = np.asarray(poly.exterior.coords)
    assert np.hypot(*np.diff(xy, axis=0).T).max() <= DENSIFY_M + 1e-6
    # perimeter against pyproj's geodesic on the WGS84 ellipsoid (Karney's algorithm):
    # the zone is 0.02 deg by 0.01 deg at 57.5 N, so the local and geodesic lengths agree
    ring = [(-30.0, 57.5), (-29.98, 57.5), (-29.98, 57.51), (-30.0, 57.51), (-30.0, 57.5)]
    geod = Geod(ellps="WGS84")
    lon, lat = zip(*ring, strict=True)
    perim = geod.line_length(lon, lat)
    assert poly.exterior.length == pytest.approx(perim, rel=1e-4)


def test_entrance_births_confirm_a_vessel_appearing_there_sooner():
    # a vessel appears in the harbour mouth among heavy clutter; with extra arrivals
    # there its first plots are more likely a new vessel, so it is shown sooner
    vessel = Vessel(start=30.0, stop=400.0, p0=(2000.0, 2000.0), v=(4.0, 0.0))
    radar = Radar(site=(0.0, 0.0), p_detect=0.7, clutter_per_scan=40.0)
    feed = make_feed([vessel], [radar], 400.0, seed=3)
    mouth = BirthRegion(polygon=box(1700.0, 1700.0, 2300.0, 2300.0), arrivals_per_hour=60.0)

    def first_shown(regions) -> float:
        out = run_filter(feed.scans, feed.sensors, FilterSettings(), birth_regions=regions)
        a = out.as_seen
        near = (np.hypot(a.mean[:, 0] - 2000.0 - 4.0 * (a.time - 30.0), a.mean[:, 2] - 2000.0)
                < 100.0) & (a.existence > 0.5)
        assert near.any()
        return float(a.time[near].min())

    assert first_shown([mouth]) < first_shown([])
