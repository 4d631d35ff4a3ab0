"""Where alerts happened: the position columns of alerts.csv against the trajectories.

Reference: the WGS84 ellipsoid geodesics of pyproj (``Geod(ellps="WGS84")``,
Karney's algorithm) on the positions of ``tracks.csv``, and shapely's
predicates on the WGS84 zone polygons; nothing here uses the project's own
local frame.
"""

from __future__ import annotations

import csv
import json
from collections import defaultdict
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import Point, shape

from harbourwatch.pipeline import demo_paths
from harbourwatch.rules.output import ALERT_COLUMNS
from harbourwatch.rules.positions import POSITION_COLUMNS

pytestmark = pytest.mark.xdist_group("demo_run")  # the demo is reviewed once, on one worker

GEOD = Geod(ellps="WGS84")
#: tracks.csv and alerts.csv both round degrees to 7 decimals (about 1 cm): allow 5 cm.
SAME_POINT_M = 0.05


def _epoch(iso: str) -> float:
    t = np.datetime64(iso.rstrip("Z"), "ms")
    return float((t - np.datetime64("1970-01-01T00:00:00", "ms")) / np.timedelta64(1, "s"))


def _tracks(folder: Path) -> dict[str, dict[str, np.ndarray]]:
    cols: dict[str, dict[str, list[float]]] = defaultdict(lambda: defaultdict(list))
    with open(folder / "tracks.csv", newline="") as fh:
        for r in csv.DictReader(fh):
            c = cols[r["track"]]
            c["time"].append(_epoch(r["time"]))
            for k in ("lat", "lon", "sog_kn", "sd_m"):
                c[k].append(float(r[k]))
    return {tid: {k: np.asarray(v) for k, v in c.items()} for tid, c in cols.items()}


def _dist(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    return float(GEOD.inv(lon1, lat1, lon2, lat2)[2])


def _at(tr: dict[str, np.ndarray], t: float) -> tuple[float, float, float]:
    """The tracks.csv row of state time ``t`` (times written to the millisecond)."""
    i = int(np.argmin(np.abs(tr["time"] - t)))
    assert abs(tr["time"][i] - t) < 1e-3, "the alert's time is one of the trajectory's states"
    return float(tr["lat"][i]), float(tr["lon"][i]), float(tr["sd_m"][i])


@pytest.fixture(scope="module")
def demo_alerts(demo_run: Path) -> list[dict[str, str]]:
    with open(demo_run / "alerts.csv", newline="") as fh:
        reader = csv.DictReader(fh)
        assert tuple(reader.fieldnames or ()) == ALERT_COLUMNS + POSITION_COLUMNS
        return list(reader)


def test_every_demo_alert_has_positions_on_its_trajectory(demo_run: Path,
                                                          demo_alerts: list[dict[str, str]]) -> None:
    tracks = _tracks(demo_run)
    zones = {f["properties"]["id"]: shape(f["geometry"]) for f in
             json.loads(demo_paths()["zones"].read_text())["features"]}
    # the demo raises one alert of each kind (demo_feeds/README.md)
    assert {r["kind"] for r in demo_alerts} == {"pass-through", "loiter", "rendezvous", "speed",
                                                "entry"}
    for r in demo_alerts:
        assert all(r[c] != "" for c in POSITION_COLUMNS), r
        lat, lon, sd = float(r["lat"]), float(r["lon"]), float(r["sd_m"])
        tr = tracks[r["track"]]
        t0, t1 = _epoch(r["start"]), _epoch(r["end"])
        for t, la, lo in ((t0, r["start_lat"], r["start_lon"]), (t1, r["end_lat"], r["end_lon"])):
            ref = _at(tr, t)
            assert _dist(float(la), float(lo), ref[0], ref[1]) < SAME_POINT_M, r["rule"]
        inside = (tr["time"] >= t0 - 1e-3) & (tr["time"] <= t1 + 1e-3)
        if r["kind"] in ("pass-through", "entry", "loiter"):
            # key point: the entry (first state of the episode)
            ref = _at(tr, t0)
            assert _dist(lat, lon, ref[0], ref[1]) < SAME_POINT_M
            assert sd == pytest.approx(ref[2], abs=0.051)
        if r["kind"] in ("pass-through", "entry"):
            assert zones[r["zone"]].contains(Point(lon, lat))
            before = tr["time"] < t0 - 1e-3
            if before.any():  # the state just before the entry is outside
                j = np.flatnonzero(before)[-1]
                assert not zones[r["zone"]].contains(Point(tr["lon"][j], tr["lat"][j]))
        if r["kind"] == "speed":
            # key point: where the speed over ground was highest within the episode
            j = np.flatnonzero(inside)[np.argmax(tr["sog_kn"][inside])]
            assert _dist(lat, lon, tr["lat"][j], tr["lon"][j]) < SAME_POINT_M
            assert sd == pytest.approx(tr["sd_m"][j], abs=0.051)
        if r["kind"] == "rendezvous":
            # key point: halfway between the two vessels at their closest approach, the
            # second one interpolated linearly in time onto the first one's state times
            other = tracks[r["other_track"]]
            ts = tr["time"][inside]
            olat = np.interp(ts, other["time"], other["lat"])
            olon = np.interp(ts, other["time"], other["lon"])
            az, _, d = GEOD.inv(tr["lon"][inside], tr["lat"][inside], olon, olat)
            assert d.min() <= 150.0  # the rule's max_distance_m (demo_feeds/rules.toml)
            # the minimum is flat (stopped vessels): any time within 10 cm of it will do
            near = np.flatnonzero(d <= d.min() + 0.10)
            mlon, mlat, _ = GEOD.fwd(tr["lon"][inside][near], tr["lat"][inside][near],
                                     az[near], d[near] / 2)
            miss = [_dist(lat, lon, la, lo) for la, lo in zip(mlat, mlon, strict=True)]
            assert min(miss) < 0.5
            k = int(near[int(np.argmin(miss))])
            assert 0.0 < sd < float(tr["sd_m"][inside][k])
