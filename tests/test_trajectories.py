"""Trajectory records and their export (tracks.csv, as_seen.csv, GeoJSON)."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harbourwatch.scene.geodesy import WGS84_GEOD, LocalFrame
from harbourwatch.trajectories import (
    TRACK_COLUMNS,
    AsSeenTable,
    Trajectory,
    TrajectorySet,
    as_seen_csv_text,
    cut_at_antimeridian,
    tracks_csv_text,
    trajectories_geojson,
)
from harbourwatch.units import KNOT_M_S

T0 = 1_777_874_400.0  # 2026-05-04T06:00:00Z


def straight(track_id: str, start_xy, course_deg: float, speed_kn: float, n: int = 50, dt=2.5):
    """A constant-velocity trajectory in the local frame, with a fixed covariance."""
    t = T0 + dt * np.arange(n)
    v = speed_kn * KNOT_M_S
    ve, vn = v * np.sin(np.radians(course_deg)), v * np.cos(np.radians(course_deg))
    mean = np.column_stack(
        [start_xy[0] + ve * (t - T0), np.full(n, ve), start_xy[1] + vn * (t - T0), np.full(n, vn)]
    )
    cov = np.broadcast_to(np.diag([100.0, 1.0, 100.0, 1.0]), (n, 4, 4)).copy()
    return Trajectory(
        id=track_id, time=t, mean=mean, cov=cov, filt_mean=mean, filt_cov=cov,
        pred_mean=mean, pred_cov=cov, existence=0.97, alive_at_end=True,
        plot_ids=np.arange(n), sensor_ids=np.zeros(n, np.int64),
    )


@pytest.fixture
def tset() -> TrajectorySet:
    frame = LocalFrame(57.5, -30.0)
    trajs = (straight("T1", (-8000.0, 6000.0), 90.0, 10.0), straight("T2", (9000.0, -9000.0), 315.0, 6.0))
    return TrajectorySet(trajectories=trajs, frame=frame, as_seen=AsSeenTable.empty(),
                         feed_start=T0, feed_end=T0 + 200)


def test_tracks_csv_has_contract_columns_and_rows(tset):
    rows = list(csv.DictReader(io.StringIO(tracks_csv_text(tset))))
    assert tuple(rows[0].keys()) == TRACK_COLUMNS
    assert len(rows) == sum(t.time.size for t in tset)
    assert rows[0]["time"] == "2026-05-04T06:00:00.000Z"
    assert all(r["time"].endswith("Z") and len(r["time"]) == 24 for r in rows)


def test_sog_cog_match_pyproj_geodesic(tset):
    # Reference: pyproj's Geod.inv (Karney's geodesic on WGS84) between consecutive
    # exported positions gives the true course and distance travelled.
    rows = list(csv.DictReader(io.StringIO(tracks_csv_text(tset))))
    for tid in ("T1", "T2"):
        rr = [r for r in rows if r["track"] == tid]
        lat = np.array([float(r["lat"]) for r in rr])
        lon = np.array([float(r["lon"]) for r in rr])
        az, _, dist = WGS84_GEOD.inv(lon[:-1], lat[:-1], lon[1:], lat[1:])
        sog = np.array([float(r["sog_kn"]) for r in rr])
        cog = np.array([float(r["cog_deg"]) for r in rr])
        speed_geod_kn = dist / 2.5 / KNOT_M_S
        # the frame's scale error within 25 km is far below 0.1 % (tests/test_geodesy.py)
        assert np.allclose(sog[:-1], speed_geod_kn, rtol=2e-3, atol=0.01)
        diff = (cog[:-1] - az % 360.0 + 180.0) % 360.0 - 180.0
        assert np.all(np.abs(diff) < 0.3)


def test_geojson_is_feature_collection_of_linestrings(tset):
    g = trajectories_geojson(tset)
    assert g["type"] == "FeatureCollection"
    assert [f["properties"]["track"] for f in g["features"]] == ["T1", "T2"]
    assert all(f["geometry"]["type"] == "LineString" for f in g["features"])
    json.dumps(g)  # serialisable


def test_as_seen_csv_empty_and_filled(tset):
    assert as_seen_csv_text(tset).strip().split(",")[0] == "time"
    a = AsSeenTable(time=np.array([T0]), track=np.array(["T1"]), mean=np.array([[0.0, 1.0, 0.0, 0.0]]),
                    sd=np.array([12.0]), existence=np.array([0.9]))
    ts = TrajectorySet(trajectories=tset.trajectories, frame=tset.frame, as_seen=a,
                       feed_start=T0, feed_end=T0)
    rows = list(csv.DictReader(io.StringIO(as_seen_csv_text(ts))))
    assert rows[0]["track"] == "T1" and float(rows[0]["cog_deg"]) == pytest.approx(90.0, abs=0.5)


def test_sample_shape_and_moments(tset, rng):
    t = tset.trajectories[0]
    s = t.sample(rng, 400)
    assert s.shape == (400, t.time.size, 4)
    # filt == smoothed here with no dynamics coupling checked: mean within 4 sd/sqrt(n)
    assert np.all(np.abs(s[:, -1, 0].mean() - t.mean[-1, 0]) < 4 * 10 / np.sqrt(400))


# --- antimeridian (RFC 7946, section 3.1.9) ----------------------------------------------


def test_cut_at_antimeridian_gives_the_rfc_example():
    # RFC 7946, section 3.1.9: the LineString from (170, 45) to (-170, 45) is represented as
    # the MultiLineString [[[170, 45], [180, 45]], [[-180, 45], [-170, 45]]]
    assert cut_at_antimeridian([170.0, -170.0], [45.0, 45.0]) == [
        [[170.0, 45.0], [180.0, 45.0]], [[-180.0, 45.0], [-170.0, 45.0]]]
    # and the other way round, westward
    assert cut_at_antimeridian([-170.0, 170.0], [40.0, 50.0]) == [
        [[-170.0, 40.0], [-180.0, 45.0]], [[180.0, 45.0], [170.0, 50.0]]]


def _unwrapped_cut_lat(x0: float, y0: float, x1: float, y1: float) -> float:
    # RFC 7946, section 3.1.1: a segment is the straight line in (lon, lat); the short way
    # round across ±180 is the one with the longitude difference below 180 degrees
    dx = (x1 - x0 + 180.0) % 360.0 - 180.0
    edge = 180.0 if dx > 0 else -180.0
    return y0 + (edge - x0) / dx * (y1 - y0)


def test_a_track_crossing_the_antimeridian_is_cut_there():
    frame = LocalFrame(-16.5, 180.0)  # a harbour on the antimeridian (invented)
    trajs = (straight("T1", (-900.0, 500.0), 80.0, 12.0, n=120),   # eastward across it
             straight("T2", (700.0, -900.0), 265.0, 9.0, n=120),   # westward across it
             straight("T3", (-9000.0, 0.0), 0.0, 8.0, n=60))        # stays west of it
    ts = TrajectorySet(trajectories=trajs, frame=frame, as_seen=AsSeenTable.empty(),
                       feed_start=T0, feed_end=T0 + 300)
    rows = list(csv.DictReader(io.StringIO(tracks_csv_text(ts))))
    feats = {f["id"]: f["geometry"] for f in trajectories_geojson(ts)["features"]}
    assert feats["T3"]["type"] == "LineString"
    for tid in ("T1", "T2"):
        geom = feats[tid]
        assert geom["type"] == "MultiLineString" and len(geom["coordinates"]) == 2
        first, second = geom["coordinates"]
        for part in geom["coordinates"]:
            lon = np.array([p[0] for p in part])
            assert np.all(np.abs(np.diff(lon)) <= 180.0) and np.all(np.abs(lon) <= 180.0)
        # the first part ends on its side of ±180, the second starts on the other, same lat
        assert abs(first[-1][0]) == 180.0 and second[0][0] == -first[-1][0]
        assert first[-1][1] == second[0][1]
        # every vertex of tracks.csv is kept, in order, and only the two cut points added
        mine = [[float(r["lon"]), float(r["lat"])] for r in rows if r["track"] == tid]
        assert first[:-1] + second[1:] == mine
        x0, y0 = first[-2]
        x1, y1 = second[1]
        assert first[-1][1] == pytest.approx(_unwrapped_cut_lat(x0, y0, x1, y1), abs=1e-7)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.floats(-179.99, 179.99), st.floats(-80.0, 80.0)),
                min_size=2, max_size=30))
def test_cut_parts_never_cross_and_keep_every_vertex(points):
    lon = [p[0] for p in points]
    lat = [p[1] for p in points]
    parts = cut_at_antimeridian(lon, lat)
    crossings = sum(abs(b - a) > 180.0 for a, b in zip(lon, lon[1:], strict=False))
    assert len(parts) == crossings + 1
    kept = []
    for k, part in enumerate(parts):
        xs = [p[0] for p in part]
        assert all(abs(b - a) <= 180.0 for a, b in zip(xs, xs[1:], strict=False))
        kept += part[(k > 0):len(part) - (k < len(parts) - 1)]  # drop the added cut points
    assert kept == [[x, y] for x, y in points]
