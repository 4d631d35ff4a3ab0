"""The reports in a real headless Chromium, offline (all network requests blocked)."""

from __future__ import annotations

import csv
import os
from collections.abc import Iterator
from dataclasses import replace
from pathlib import Path

import pytest
from report_fixtures import make_inputs

from harbourwatch.report import write_reports
from harbourwatch.report.screenshot import CHROMIUM, block_network, take_screenshots

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.access(CHROMIUM, os.X_OK),
                       reason=f"no Chromium at {CHROMIUM} (apt-get install chromium)"),
]
sync_api = pytest.importorskip("playwright.sync_api", reason="playwright not installed")

HOSTILE_ZONE = "<script>alert(1)</script>"
HOSTILE_RULE = '"&<>`${alert(3)}`'


@pytest.fixture(scope="module")
def site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("site")
    inputs = make_inputs(n_tracks=8, restricted_name=HOSTILE_ZONE, rule_id=HOSTILE_RULE)
    write_reports(out, inputs)
    # a tracks.csv as the pipeline writes it, to count distinct tracks from the file
    with open(out / "tracks.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["track", "time"])
        for tr in inputs.trajectories:
            for t in tr.time[::50]:
                w.writerow([tr.id, f"{t:.3f}"])
    return out


class _Page:
    def __init__(self, page: sync_api.Page) -> None:
        self.page = page
        self.errors: list[str] = []
        self.blocked: list[str] = []
        self.dialogs: list[str] = []
        page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: self.errors.append(str(e)))
        page.on("dialog", lambda d: (self.dialogs.append(d.message), d.dismiss()))
        block_network(page, self.blocked)

    def open(self, path: Path) -> None:
        self.page.goto(path.resolve().as_uri(), wait_until="load")
        self.page.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")

    def clean(self) -> None:
        assert self.errors == []
        assert self.blocked == []
        assert self.dialogs == []


@pytest.fixture
def page(browser: sync_api.Browser) -> Iterator[_Page]:
    ctx = browser.new_context(viewport={"width": 1280, "height": 800})
    yield _Page(ctx.new_page())
    ctx.close()


def _set_slider(page: sync_api.Page, seconds: float) -> None:
    page.eval_on_selector(
        "#hw-slider",
        "(el, v) => { el.value = v; el.dispatchEvent(new Event('input')); }",
        seconds,
    )


def _marker_paths(page: sync_api.Page) -> list[str]:
    return page.eval_on_selector_all("path.hw-vessel", "els => els.map(e => e.getAttribute('d'))")


def test_overview_offline(page: _Page, site: Path, tmp_path: Path) -> None:
    p = page.page
    page.open(site / "report.html")
    with open(site / "tracks.csv") as fh:
        n_tracks = len({row["track"] for row in csv.DictReader(fh)})
    assert n_tracks == 8
    assert p.locator("path.hw-traj").count() == n_tracks
    assert p.locator("path.hw-zone").count() == 4 and p.locator("path.hw-land").count() == 1
    assert p.locator("path.hw-alert").count() == 2
    # caution fully inside the first screen, without scrolling
    box = p.locator("#hw-caution").bounding_box()
    assert box is not None and box["y"] >= 0 and box["y"] + box["height"] <= 800
    assert "Not for navigation" in p.locator("#hw-caution").inner_text()
    # the replay: moving the slider moves the drawn markers
    _set_slider(p, 900)
    first = _marker_paths(p)
    assert p.locator("#hw-clock").inner_text() == "06:15:00 UTC"  # the date is in the heading
    _set_slider(p, 1500)
    second = _marker_paths(p)
    assert first and second and first != second
    assert p.locator("#hw-clock").inner_text() == "06:25:00 UTC"
    pos = p.evaluate("hwReplay.positions()")
    assert all(57.3 < lat < 57.7 and -30.3 < lon < -29.7 for _, lat, lon in pos)
    # as seen at the time: same moment, other estimates (offset in the fixture)
    p.check("input[value=as_seen]")
    seen = p.evaluate("hwReplay.positions()")
    assert seen and sorted(seen) != sorted(pos)
    # play advances the clock (wait on the page, no sleeping)
    p.select_option("#hw-speed", "600")
    p.click("#hw-play")
    p.wait_for_function("document.getElementById('hw-clock').textContent > '06:25:30'")
    p.click("#hw-play")
    assert p.locator("#hw-play").inner_text() == "Play"
    # sortable alerts table: probability descending puts the 0.93 alert first
    head = p.locator("#hw-alerts thead th button", has_text="probability")
    head.click()
    head.click()
    assert p.locator("#hw-alerts tbody tr").first.locator("td").nth(9).inner_text() == "0.93"
    # hostile names are shown as text, never run
    assert HOSTILE_RULE in p.locator("#hw-alerts").inner_text()
    p.screenshot(path=str(tmp_path / "overview.png"))
    page.clean()


def test_incident_offline(page: _Page, site: Path, tmp_path: Path) -> None:
    p = page.page
    page.open(site / "incidents" / "alert-0002.html")
    assert p.locator(".folium-map").is_visible()
    assert p.locator("path.hw-traj").count() == 2  # the vessel and the other one
    assert p.locator("path.hw-ellipse").count() == 4
    assert p.locator("path.hw-plot").count() > 100
    chart = p.locator("svg.hw-chart")
    assert chart.count() == 1 and chart.is_visible()
    cbox = chart.bounding_box()
    assert cbox is not None and cbox["height"] > 100
    assert p.locator("#hw-caution").is_visible()
    assert "T0003" in p.locator("#hw-narrative").inner_text()
    p.screenshot(path=str(tmp_path / "incident.png"), full_page=True)
    # print: A4 layout without controls, map and chart kept
    p.emulate_media(media="print")
    assert not p.locator(".leaflet-control-zoom").is_visible()
    assert p.locator(".folium-map").is_visible() and chart.is_visible()
    pdf = p.pdf(format="A4")
    assert pdf.startswith(b"%PDF")
    page.clean()


def test_take_screenshots(site: Path, tmp_path: Path) -> None:
    out = tmp_path / "run"
    out.mkdir()
    for f in ("report.html",):
        (out / f).write_bytes((site / f).read_bytes())
    (out / "incidents").mkdir()
    (out / "incidents" / "alert-0001.html").write_bytes(
        (site / "incidents" / "alert-0001.html").read_bytes())
    shots = take_screenshots(out)
    assert [s.name for s in shots] == ["report.png", "alert-0001.png"]
    assert all(s.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for s in shots)


def test_user_tiles_are_requested_only_from_the_given_server(browser: sync_api.Browser,
                                                             tmp_path: Path) -> None:
    url = "https://tiles.calder-sound.invalid/{z}/{x}/{y}.png"
    inputs = replace(make_inputs(n_tracks=4), tile_url=url)
    write_reports(tmp_path, inputs)
    ctx = browser.new_context(viewport={"width": 1000, "height": 700})
    pg = _Page(ctx.new_page())
    with pg.page.expect_event("requestfailed") as failed:
        pg.page.goto((tmp_path / "report.html").resolve().as_uri(), wait_until="load")
    assert failed.value.url.startswith("https://tiles.calder-sound.invalid/")
    pg.page.wait_for_selector(".leaflet-tile", state="attached")
    ctx.close()
    assert pg.blocked and all(u.startswith("https://tiles.calder-sound.invalid/") for u in pg.blocked)


def test_page_load_seconds_measures_a_drawn_map(site: Path) -> None:
    from harbourwatch.report.screenshot import page_load_seconds

    secs = page_load_seconds(site / "report.html")
    assert secs is not None and 0.0 < secs < 30.0
