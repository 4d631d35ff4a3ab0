"""The overview's true replay and vessel list in a real headless Chromium, offline.

Reference values come from the synthetic shift of ``report_fixtures`` (its
trajectories' states) and shapely's predicates on its WGS84 zone polygons,
never from the page's own data.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
import shapely
from report_fixtures import T0, make_inputs
from shapely.geometry import LineString, Point

from harbourwatch.report import ReportInputs, write_reports
from harbourwatch.report.screenshot import CHROMIUM, block_network

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.access(CHROMIUM, os.X_OK),
                       reason=f"no Chromium at {CHROMIUM} (apt-get install chromium)"),
]
sync_api = pytest.importorskip("playwright.sync_api", reason="playwright not installed")

#: Metres per degree of latitude and of longitude at 57.5 N, for distances of a few
#: metres (WGS84 ellipsoid, 111,132.954 - 559.822 cos 2φ m per degree of latitude;
#: from memory): the page rounds degrees to 5 decimals, about 1 m.
LAT0 = 57.5
M_LAT = 111132.954 - 559.822 * math.cos(2 * math.radians(LAT0))
M_LON = 111412.84 * math.cos(math.radians(LAT0))


def _xy(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    return np.column_stack([np.asarray(lon) * M_LON, np.asarray(lat) * M_LAT])


@pytest.fixture(scope="module")
def shift(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, ReportInputs]:
    out = tmp_path_factory.mktemp("replay")
    inputs = make_inputs(n_tracks=8)
    write_reports(out, inputs)
    return out, inputs


@pytest.fixture
def page(browser: sync_api.Browser, shift: tuple[Path, ReportInputs]) -> Iterator[sync_api.Page]:
    ctx = browser.new_context(viewport={"width": 1280, "height": 900})
    pg = ctx.new_page()
    problems: list[str] = []
    pg.on("pageerror", lambda e: problems.append(str(e)))
    block_network(pg, problems)
    pg.goto((shift[0] / "report.html").resolve().as_uri(), wait_until="load")
    pg.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")
    yield pg
    assert problems == []
    ctx.close()


def _slide(pg: sync_api.Page, seconds: float) -> None:
    pg.eval_on_selector("#hw-slider", "(el, v) => { el.value = v; el.dispatchEvent(new Event('input')); }",
                        seconds)


@pytest.mark.parametrize("t", [500.0, 900.0, 2400.0])
def test_at_slider_time_nothing_after_it_is_drawn(page: sync_api.Page,
                                                  shift: tuple[Path, ReportInputs], t: float) -> None:
    inputs = shift[1]
    ts = inputs.trajectories
    _slide(page, t)
    drawn = dict(page.evaluate("hwReplay.drawn()"))
    started = {tr.id for tr in ts if tr.start <= T0 + t}
    assert set(drawn) == started  # every vessel seen by then, and no vessel seen later
    for tr in ts:
        if tr.id not in drawn:
            continue
        # the trajectory up to t: its states until t and its interpolated position at t
        sel = tr.time <= T0 + t
        e = np.r_[tr.mean[sel, 0], np.interp(T0 + t, tr.time, tr.mean[:, 0])]
        n = np.r_[tr.mean[sel, 2], np.interp(T0 + t, tr.time, tr.mean[:, 2])]
        lat, lon = ts.frame.to_wgs84(e, n)
        past = LineString(_xy(lat, lon)) if lat.size > 1 else Point(_xy(lat, lon)[0])
        pts = np.asarray(drawn[tr.id], float)
        far = [past.distance(Point(p)) for p in _xy(pts[:, 0], pts[:, 1])]
        assert max(far) < 2.0, (tr.id, max(far))
        future = tr.time > T0 + t + 60
        if future.any():  # the part still to come, where it is away from the past: not drawn
            fl, fo = ts.frame.to_wgs84(tr.mean[future, 0], tr.mean[future, 2])
            fxy = _xy(fl, fo)
            away = np.array([past.distance(Point(f)) for f in fxy])
            if away.max() > 20.0:
                ahead = fxy[int(np.argmax(away))]
                assert min(np.hypot(*(_xy(pts[:, 0], pts[:, 1]) - ahead).T)) > 10.0
    # whole-shift lines and alerts are hidden; alerts that had started are drawn
    assert not page.locator("path.hw-traj").first.is_visible()
    assert not page.locator("path.hw-alert").first.is_visible()
    assert page.locator("path.hw-alert-live").count() == sum(a.start <= T0 + t for a in inputs.alerts)
    # the vessel symbol: a position dot and a direction dot for each vessel present
    assert page.locator("path.hw-vessel").count() == page.locator("path.hw-bow").count() > 0
    # switched off: the whole shift again
    page.uncheck("#hw-upto")
    assert page.locator("path.hw-traj").first.is_visible()
    assert page.evaluate("hwReplay.drawn()") == []


def test_vessel_tooltip_gives_speed_course_and_position(page: sync_api.Page) -> None:
    # T0002 at 06:10 (report_fixtures): east at -200/60 m/s, north at 0.3 m/s, so
    # 3.347 m/s = 6.5 kn on a course of atan2(-3.333, 0.3) = 275 degrees (computed by hand)
    _slide(page, 600.0)
    tip = page.evaluate("hwReplay.tip('T0002')")
    m = re.search(r"([0-9.]+) kn, course ([0-9]{3})°", tip)
    assert tip.startswith("T0002") and m and "06:10:00 UTC" in tip
    # shown to 0.1 kn and 1 degree from positions rounded to about 1 m
    assert float(m[1]) == pytest.approx(math.hypot(200 / 60, 0.3) / (1852 / 3600), abs=0.15)
    assert int(m[2]) == pytest.approx(math.degrees(math.atan2(-200 / 60, 0.3)) % 360, abs=1.5)
    pos = dict((p[0], p[1:]) for p in page.evaluate("hwReplay.positions()"))["T0002"]
    lat_min = (pos[0] - 57) * 60
    assert f"57°{lat_min:06.3f}'N" in tip


def test_vessel_list_filters_and_moves_the_replay(page: sync_api.Page,
                                                  shift: tuple[Path, ReportInputs]) -> None:
    inputs = shift[1]
    ts = inputs.trajectories

    def shown() -> list[str]:
        return page.eval_on_selector_all(
            "#hw-vessels tbody tr:not([hidden])", "rs => rs.map(r => r.cells[0].textContent)")

    assert sorted(shown()) == sorted(tr.id for tr in ts)
    page.fill("#hw-vsearch", "t0003")
    assert shown() == ["T0003"]
    page.fill("#hw-vsearch", "")
    # zone: the vessels with a smoothed state inside Outer Roads (shapely, WGS84)
    roads = next(z for z in inputs.zones if z.id == "outer-roads").geometry
    want = []
    for tr in ts:
        lat, lon = ts.frame.to_wgs84(tr.mean[:, 0], tr.mean[:, 2])
        if shapely.contains_xy(roads, lon, lat).any():
            want.append(tr.id)
    page.select_option("#hw-vzone", "outer-roads")
    assert sorted(shown()) == sorted(want) and "T0001" in want
    page.select_option("#hw-vzone", "")
    page.select_option("#hw-vstatus", "departed")
    assert sorted(shown()) == sorted(tr.id for tr in ts if not tr.alive_at_end)
    page.select_option("#hw-vstatus", "")
    page.select_option("#hw-vrule", "sound-meeting")
    assert sorted(shown()) == ["T0002", "T0003"]
    page.select_option("#hw-vrule", "")
    # a time window: the vessels present at some moment between 06:50 and 06:55 UTC
    page.fill("#hw-vfrom", "06:50")
    page.fill("#hw-vto", "06:55")
    lo, hi = T0 + 3000.0, T0 + 3300.0
    assert sorted(shown()) == sorted(tr.id for tr in ts if tr.end >= lo and tr.start <= hi)
    page.fill("#hw-vfrom", "")
    page.fill("#hw-vto", "")
    # a click: the replay goes to the vessel's first moment, with the vessel on the map
    page.locator("#hw-vessels tbody tr", has_text="T0003").click()
    t3 = ts.by_id("T0003")
    assert page.evaluate("hwReplay.time()") == pytest.approx(t3.start - T0)
    assert page.locator("#hw-clock").inner_text() == "06:05:00 UTC"
    assert "T0003" in [p[0] for p in page.evaluate("hwReplay.positions()")]
    # an alert row's map button: the replay goes to the alert's start
    page.locator("#hw-alerts button.hw-goto").nth(1).click()
    assert page.evaluate("hwReplay.time()") == pytest.approx(inputs.alerts[1].start - T0)
