"""Large vessels: the simulator's hull scatter, and a review of ships beside small craft."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod

from harbourwatch.cli import main
from harbourwatch.rules import RULE_SCHEMAS
from harbourwatch.sim import SCENARIOS, simulate, simulate_to_dir
from harbourwatch.sim.engine import hull_plot_rate

_GEOD = Geod(ellps="WGS84")


def test_hull_rate_grows_with_cells_and_small_craft_give_one_plot() -> None:
    r = np.array([500.0, 1500.0, 3000.0])
    side = np.full(3, math.pi / 2)  # broadside to the line of sight
    ship = hull_plot_rate(300.0, 45.0, r, side)
    craft = hull_plot_rate(12.0, 4.0, r, side)
    assert np.all(np.diff(ship) < 0)  # nearer: more bearing cells, more plots
    assert ship[1] > 2.5
    assert np.all(craft == 1.0)


def test_quay_scene_plots_per_scan() -> None:
    spec = SCENARIOS["quay"]
    res = simulate(spec.build(spec.default_seed, 600.0), spec.default_seed)
    p = res.plots
    for vi, tr in enumerate(res.truth):
        m = p.vessel == vi
        if not m.any():
            continue
        per_scan = np.bincount(p.scan[m]).astype(float)
        per_scan = per_scan[per_scan > 0]
        if tr.length_m >= 180:
            assert per_scan.mean() > 2.0, tr.name
        elif tr.length_m <= 20:
            assert per_scan.max() == 1, tr.name
        # every plot of a hull lies within its ellipse plus the radar's errors
        lat = np.interp(p.time[m], tr.time, tr.lat_deg)
        lon = np.interp(p.time[m], tr.time, tr.lon_deg)
        _, _, d = _GEOD.inv(lon, lat, p.lon_deg[m], p.lat_deg[m])
        assert np.max(d) < tr.length_m / 2 + 8 * 15.0 + 0.4 / 57.3 * 8000 * 4, tr.name


def test_points_variant_has_no_hulls() -> None:
    spec = SCENARIOS["quay-points"]
    sc = spec.build(spec.default_seed, 60.0)
    assert all(v.length_m == 0.0 for v in sc.vessels)
    assert sorted(v.name for v in sc.vessels) == sorted(
        v.name for v in SCENARIOS["quay"].build(11, 60.0).vessels)


def test_every_rule_kind_accepts_length_limits() -> None:
    for schema in RULE_SCHEMAS.values():
        names = {p.name: p for p in schema.params}
        assert not names["min_length_m"].required and not names["max_length_m"].required


@pytest.fixture(scope="module")
def meeting_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    d = tmp_path_factory.mktemp("quay-meeting")
    simulate_to_dir("quay-meeting", d)
    out = tmp_path_factory.mktemp("quay-meeting-run")
    assert main(["run", str(d / "plots.csv"), "--sensors", str(d / "sensors.toml"),
                 "--zones", str(d / "zones.geojson"), "--rules", str(d / "rules.toml"),
                 "--out", str(out), "--quiet"]) == 0
    return d, out


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _epoch(text: str) -> float:
    from datetime import datetime

    return datetime.fromisoformat(text.replace("Z", "+00:00")).timestamp()


def _nearest_track(tracks: list[dict[str, str]], truth: list[dict[str, str]], name: str
                   ) -> dict[str, int]:
    """Per estimated track, at how many truth rows of ``name`` it is the nearest one (<= 60 m).

    Tracks are interpolated linearly to the truth times (inside their own span).
    """
    series: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
    for tid in sorted({r["track"] for r in tracks}):
        rows = [r for r in tracks if r["track"] == tid]
        series[tid] = (np.array([_epoch(r["time"]) for r in rows]),
                       np.array([float(r["lat"]) for r in rows]),
                       np.array([float(r["lon"]) for r in rows]))
    out: dict[str, int] = {}
    for t in truth:
        if t["track"] != name:
            continue
        tt = _epoch(t["time"])
        best, dist = "", math.inf
        for tid, (ts, la, lo) in series.items():
            if not ts[0] <= tt <= ts[-1]:
                continue
            d = _GEOD.inv(float(t["lon"]), float(t["lat"]), float(np.interp(tt, ts, lo)),
                          float(np.interp(tt, ts, la)))[2]
            if d < dist:
                best, dist = tid, d
        if dist <= 60.0:
            out[best] = out.get(best, 0) + 1
    return out


def test_two_launches_beside_a_ship_stay_two_and_meet(meeting_run: tuple[Path, Path]) -> None:
    d, out = meeting_run
    tracks = _rows(out / "tracks.csv")
    truth = _rows(d / "truth.csv")
    ids = {r["track"] for r in tracks}
    assert len(ids) == 3  # one ship, two launches
    owners = {}
    for name in ("launch-1", "launch-2"):
        hits = _nearest_track(tracks, truth, name)
        best = max(hits, key=hits.__getitem__)
        n_truth = sum(1 for t in truth if t["track"] == name)
        assert hits[best] >= 0.9 * n_truth, name  # one trajectory follows the launch
        owners[name] = best
    assert owners["launch-1"] != owners["launch-2"]
    for tid in owners.values():  # the launches stay point-like
        assert all(r["length_m"] == "" for r in tracks if r["track"] == tid)
    meetings = [a for a in _rows(out / "alerts.csv") if a["rule"] == "craft-meeting"]
    assert len(meetings) == 1
    assert {meetings[0]["track"], meetings[0]["other_track"]} == set(owners.values())
    # the ship: length within 20 % of its 300 m hull (the scene's truth file says 300)
    ship = [r for r in tracks if r["track"] not in owners.values()]
    assert {float(t["length_m"]) for t in truth if t["track"] == "calder-star"} == {300.0}
    assert float(ship[-1]["length_m"]) == pytest.approx(300.0, rel=0.2)


def test_incident_page_states_the_ship_size(meeting_run: tuple[Path, Path]) -> None:
    _, out = meeting_run
    alerts = _rows(out / "alerts.csv")
    tracks = _rows(out / "tracks.csv")
    k = next(i for i, a in enumerate(alerts) if a["rule"] == "quay-entry")
    ship = alerts[k]["track"]
    length = float(next(r["length_m"] for r in tracks if r["track"] == ship))
    pages = sorted((out / "incidents").glob("*.html"))
    text = next(p.read_text() for p in pages if f"Alert {k + 1}:" in p.read_text())
    assert f"hull about {length:.0f} m" in text
    # the launches' meeting page names no size: both are point-like
    m = next(i for i, a in enumerate(alerts) if a["rule"] == "craft-meeting")
    text = next(p.read_text() for p in pages if f"Alert {m + 1}:" in p.read_text())
    assert "hull about" not in text
