"""Hull outlines of large vessels: replay payload, outline geometry, incident pages, browser.

Reference values are computed independently of the report code: directions
on the ellipsoid with pyproj's ``Geod`` (Karney's geodesic algorithms on
WGS84: ``inv`` for the true azimuth of a short step along a local-grid
direction, ``fwd`` for the points half a length ahead of and behind the
centre), and the kinematics of the invented shift in ``report_fixtures``
(``HULLS``, the ``T99_*`` plan), never the page's own numbers.
"""

from __future__ import annotations

import json
import math
import os
import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod
from report_fixtures import (
    HULLS,
    T0,
    T99_COURSE_DEG,
    T99_SPEED,
    T99_START,
    T99_STOP,
    make_hull_inputs,
)

from harbourwatch.report import ReportInputs, write_reports
from harbourwatch.report._data import replay_payload
from harbourwatch.report._hull import HULL_COURSE_MIN_KN, HULL_RING_POINTS, hull_outline
from harbourwatch.report.screenshot import CHROMIUM, block_network
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import Trajectory
from harbourwatch.units import KNOT_M_S

GEOD = Geod(ellps="WGS84")
N = HULL_RING_POINTS


@pytest.fixture(scope="module")
def inputs() -> ReportInputs:
    return make_hull_inputs()


def _true_azimuth(frame: LocalFrame, e: float, n: float, grid_deg: float) -> float:
    """True azimuth (deg) of a 10 m step along ``grid_deg`` from local ``(e, n)``, by Geod.inv."""
    g = math.radians(grid_deg)
    lat, lon = frame.to_wgs84([e, e + 10 * math.sin(g)], [n, n + 10 * math.cos(g)])
    return float(GEOD.inv(lon[0], lat[0], lon[1], lat[1])[0]) % 360.0


def _ang(a: float, b: float) -> float:
    return abs((a - b + 180.0) % 360.0 - 180.0)


def _expected_heading(frame: LocalFrame, tr: Trajectory, t: float) -> float:
    """Course when making 1 kn or more, else the fixture's axis turned to the last course."""
    e, n = np.interp(t, tr.time, tr.mean[:, 0]), np.interp(t, tr.time, tr.mean[:, 2])
    ve, vn = np.interp(t, tr.time, tr.mean[:, 1]), np.interp(t, tr.time, tr.mean[:, 3])
    if math.hypot(ve, vn) >= HULL_COURSE_MIN_KN * KNOT_M_S:
        return _true_azimuth(frame, e, n, math.degrees(math.atan2(ve, vn)))
    axis = HULLS[tr.id][2]
    moving = np.hypot(tr.mean[:, 1], tr.mean[:, 3]) >= HULL_COURSE_MIN_KN * KNOT_M_S
    before = np.flatnonzero(moving & (tr.time <= t))
    after = np.flatnonzero(moving)
    ref = before[-1] if before.size else (after[0] if after.size else None)
    if ref is not None and _ang(axis, math.degrees(math.atan2(tr.mean[ref, 1], tr.mean[ref, 3]))) > 90:
        axis += 180.0
    return _true_azimuth(frame, e, n, axis)


def _decode(entry: dict[str, object]) -> tuple[np.ndarray, np.ndarray]:
    """Sample times (s from T0) and headings of one payload entry."""
    p = np.cumsum(np.asarray(entry["p"], float).reshape(-1, 3), axis=0)
    h = np.cumsum(np.asarray(entry["h"], float)) % 360.0
    return p[:, 0], h


def test_payload_large_vessels_carry_size_and_heading_point_ones_nothing(
        inputs: ReportInputs) -> None:
    ts = inputs.trajectories
    pay = replay_payload(ts)
    hind = {d["id"]: d for d in pay["hindsight"]}  # type: ignore[union-attr]
    seen = {d["id"]: d for d in pay["as_seen"]}  # type: ignore[union-attr]
    for tid in ("T0003", "T0004"):  # point-like: nothing beyond id, samples, status
        assert set(hind[tid]) == {"id", "p", "live"}
        assert set(seen[tid]) == {"id", "p"}
    for tid, (length, beam, _) in HULLS.items():
        tr = ts.by_id(tid)
        assert hind[tid]["hull"] == [pytest.approx(length, abs=0.05), pytest.approx(beam, abs=0.05)]
        t, h = _decode(hind[tid])
        assert len(hind[tid]["h"]) == t.size  # type: ignore[arg-type]
        for k in range(0, t.size, 7):
            assert _ang(h[k], _expected_heading(ts.frame, tr, T0 + t[k])) < 0.6, (tid, t[k])
        # as seen: the length as known then (0 before it was known), the final proportions
        ts_, hs = _decode(seen[tid])
        lens = np.cumsum(seen[tid]["len"])
        rows = ts.as_seen.track == tid
        first = ts.as_seen.time[rows].min() - T0
        step_known = np.floor((first + 120.0) / 10.0) * 10.0
        assert np.all(lens[ts_ < step_known] == 0)
        assert np.all(lens[ts_ > step_known] == round(0.9 * length))
        assert seen[tid]["bl"] == pytest.approx(beam / length, abs=1e-3)
        assert hs.size == ts_.size
    # T0099 turns from its course (240 grid) to its axis' far end (75 + 180) when it stops
    t, h = _decode(hind["T0099"])
    frame = ts.frame
    tr = ts.by_id("T0099")
    k_go = int(np.searchsorted(t, T99_START + 300))
    k_rest = int(np.searchsorted(t, T99_STOP + 300))
    e, n = tr.mean[-1, 0], tr.mean[-1, 2]
    assert _ang(h[k_go], _true_azimuth(frame, tr.mean[0, 0], tr.mean[0, 2], T99_COURSE_DEG)) < 0.6
    assert _ang(h[k_rest], _true_azimuth(frame, e, n, HULLS["T0099"][2] + 180.0)) < 0.6
    # as seen, under way: the course of the filtered velocity (the fixture's own)
    ts_, hs = _decode(seen["T0099"])
    go = ts_ < T99_STOP - 60.0
    assert go.sum() > 10
    assert max(_ang(x, _true_azimuth(frame, tr.mean[0, 0], tr.mean[0, 2], T99_COURSE_DEG))
               for x in hs[go]) < 0.6


def test_payload_stays_compact(inputs: ReportInputs) -> None:
    # headings are delta-encoded: a vessel holding its course adds two characters per sample
    pay = replay_payload(inputs.trajectories)
    t99 = next(d for d in pay["hindsight"] if d["id"] == "T0099")  # type: ignore[union-attr]
    steps = np.asarray(t99["h"][1:])
    assert np.mean(steps == 0) > 0.9
    def size(v: object) -> int:
        return len(json.dumps(v, separators=(",", ":")))

    assert size(t99["h"]) + size(t99["hull"]) < 0.25 * size(t99["p"])


@pytest.mark.parametrize(("tid", "dt"), [("T0099", 300.0), ("T0099", 1500.0), ("T0001", 900.0),
                                         ("T0002", 700.0), ("T0002", 1200.0)])
def test_outline_geometry_against_geod_forward(inputs: ReportInputs, tid: str, dt: float) -> None:
    ts = inputs.trajectories
    tr = ts.by_id(tid)
    i = int(np.searchsorted(tr.time, tr.start + dt))
    h = hull_outline(ts.frame, tr, i)
    assert h is not None
    length, beam, _ = HULLS[tid]
    lat, lon = ts.frame.to_wgs84([tr.mean[i, 0]], [tr.mean[i, 2]])
    az = _expected_heading(ts.frame, tr, float(tr.time[i]))
    assert _ang(h.heading_deg, az) < 0.01
    assert h.under_way == (tr.speed[i] >= HULL_COURSE_MIN_KN * KNOT_M_S)
    for k, bearing, dist in ((0, az, length / 2), (N // 2, az + 180, length / 2),
                             (N // 4, az + 90, beam / 2), (3 * N // 4, az - 90, beam / 2)):
        lon2, lat2, _ = GEOD.fwd(lon[0], lat[0], bearing, dist)
        miss = GEOD.inv(lon2, lat2, h.ring[k, 1], h.ring[k, 0])[2]
        assert miss < 0.05, (k, miss)
    assert np.array_equal(h.ring[0], h.ring[-1])


def test_point_vessel_has_no_outline(inputs: ReportInputs) -> None:
    ts = inputs.trajectories
    assert hull_outline(ts.frame, ts.by_id("T0003"), 10) is None


def _narrative(html: str) -> str:
    m = re.search(r'id="hw-narrative">(.*?)</p>', html, re.S)
    assert m
    return re.sub(r"<[^>]+>", "", m.group(1)).replace("&#x27;", "'")


def test_incident_pages_draw_the_hull_at_key_times_and_state_the_size(
        inputs: ReportInputs, tmp_path: Path) -> None:
    write_reports(tmp_path, inputs)
    loiter = (tmp_path / "incidents" / "alert-0001.html").read_text()
    meet = (tmp_path / "incidents" / "alert-0002.html").read_text()
    # loiter of T0001: entry and exit; meeting: T0002 at start, closest approach and end
    assert loiter.count('"className": "hw-hull"') == 2
    assert meet.count('"className": "hw-hull"') == 3
    text = _narrative(loiter)
    assert "hull about 200 m by 30 m" in text
    assert "T0001's estimated hull outline" in text and "at the entry" in text
    assert "along the main axis" in text  # it drifts at well under 1 kn
    text = _narrative(meet)
    assert "T0002: hull about 150 m by 24 m" in text and "T0003: point-like" in text
    assert text.index("Estimated size") < text.index("This is a statistical estimate")
    assert "estimated hull outline at the episode" in meet  # the map's key
    # the overview's legend names the outline; the how-to says what it is
    over = (tmp_path / "report.html").read_text()
    assert "replay: hull outline of a large vessel" in over
    assert "Hull outlines</dt>" in over


# --------------------------------------------------------------------------- browser
needs_chromium = pytest.mark.skipif(not os.access(CHROMIUM, os.X_OK),
                                    reason=f"no Chromium at {CHROMIUM} (apt-get install chromium)")


@pytest.fixture(scope="module")
def written(inputs: ReportInputs, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("hulls")
    write_reports(out, inputs)
    return out


@pytest.fixture
def page(browser, written: Path) -> Iterator[object]:  # type: ignore[no-untyped-def]
    pytest.importorskip("playwright.sync_api", reason="playwright not installed")
    ctx = browser.new_context(viewport={"width": 1280, "height": 900})
    pg = ctx.new_page()
    problems: list[str] = []
    pg.on("pageerror", lambda e: problems.append(str(e)))
    block_network(pg, problems)
    pg.goto((written / "report.html").resolve().as_uri(), wait_until="load")
    pg.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")
    yield pg
    assert problems == []
    ctx.close()


def _slide(pg, seconds: float) -> None:  # type: ignore[no-untyped-def]
    pg.eval_on_selector("#hw-slider", "(el, v) => { el.value = v; el.dispatchEvent(new Event('input')); }",
                        seconds)


def _hulls(pg) -> dict[str, tuple[dict[str, float], np.ndarray]]:  # type: ignore[no-untyped-def]
    return {h[0]: (h[1], np.asarray(h[2], float)) for h in pg.evaluate("hwReplay.hulls()")}


def _check_ring(ring: np.ndarray, centre: list[float], heading: float, length: float,
                beam: float) -> None:
    """Bow, stern and beam vertices against Geod.fwd from the drawn centre."""
    for k, bearing, dist in ((0, heading, length / 2), (N // 2, heading + 180, length / 2),
                             (N // 4, heading + 90, beam / 2)):
        lon2, lat2, _ = GEOD.fwd(centre[1], centre[0], bearing, dist)
        miss = GEOD.inv(lon2, lat2, ring[k, 1], ring[k, 0])[2]
        assert miss < 0.1, (k, miss)


@pytest.mark.browser
@needs_chromium
def test_replay_outline_moves_and_turns_with_the_slider(page, inputs: ReportInputs) -> None:  # type: ignore[no-untyped-def]
    ts = inputs.trajectories
    tr = ts.by_id("T0099")
    length, beam, _ = HULLS["T0099"]
    drawn = []
    for dt in (T99_START + 300.0, T99_STOP + 600.0):
        _slide(page, dt)
        hulls = _hulls(page)
        present = {tid for tid in HULLS if ts.by_id(tid).start <= T0 + dt <= ts.by_id(tid).end}
        assert set(hulls) == present  # large vessels only, and only while present
        assert page.locator("path.hw-hull").count() == len(present)
        size, ring = hulls["T0099"]
        assert (size["length"], size["beam"]) == (pytest.approx(length, abs=0.05),
                                                  pytest.approx(beam, abs=0.05))
        assert _ang(size["heading"], _expected_heading(ts.frame, tr, T0 + dt)) < 0.6
        centre = dict((p[0], p[1:]) for p in page.evaluate("hwReplay.positions()"))["T0099"]
        _check_ring(ring, centre, size["heading"], length, beam)
        d = page.evaluate("""() => Array.from(document.querySelectorAll('path.hw-hull'))
                             .map(p => p.getAttribute('d'))""")
        drawn.append((centre, size["heading"], d))
        assert "hull about 280 m" in page.evaluate("hwReplay.tip('T0099')")
    (c0, h0, d0), (c1, h1, d1) = drawn
    # it moved as far as the plan says (4 m/s for 300 s, then a 60 s stop: 1320 m) and turned
    moved = GEOD.inv(c0[1], c0[0], c1[1], c1[0])[2]
    assert moved == pytest.approx(T99_SPEED * (T99_STOP - T99_START - 300.0 + 30.0), abs=5.0)
    assert _ang(h0, h1) == pytest.approx(_ang(T99_COURSE_DEG, HULLS["T0099"][2] + 180), abs=1.0)
    assert d0 != d1
    # a point-like vessel has the usual symbol and no outline
    assert "T0003" not in _hulls(page)


@pytest.mark.browser
@needs_chromium
def test_as_seen_outline_appears_once_the_size_was_known(page, inputs: ReportInputs) -> None:  # type: ignore[no-untyped-def]
    ts = inputs.trajectories
    length, beam, _ = HULLS["T0099"]
    page.check("input[name=hw-mode][value=as_seen]")
    first = ts.as_seen.time[ts.as_seen.track == "T0099"].min() - T0
    _slide(page, first + 60.0)  # shown, its size not known yet
    assert "T0099" in [p[0] for p in page.evaluate("hwReplay.positions()")]
    assert "T0099" not in _hulls(page)
    _slide(page, first + 400.0)
    size, ring = _hulls(page)["T0099"]
    assert size["length"] == round(0.9 * length)
    assert size["beam"] == pytest.approx(size["length"] * beam / length, rel=2e-3)
    centre = dict((p[0], p[1:]) for p in page.evaluate("hwReplay.positions()"))["T0099"]
    _check_ring(ring, centre, size["heading"], size["length"], size["beam"])
    # as seen it is drawn dashed green, like the as-seen vessel symbol
    style = page.eval_on_selector("path.hw-hull", "p => [p.getAttribute('stroke'), "
                                  "p.getAttribute('stroke-dasharray')]")
    assert style[0].lower() == "#009e73" and style[1]
