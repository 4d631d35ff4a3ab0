"""Printed and phone-sized reports of the Port Calder demo, in a real headless Chromium, offline.

Print: Chromium's own PDF output (``page.pdf``, A4) is counted page by page
(the PDF page objects, ISO 32000-1 section 7.7.3.3: one ``/Type /Page``
dictionary per page). The scale bar is checked against pyproj's WGS84
geodesic between two points of the drawn map.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

import pytest
from pyproj import Geod

from harbourwatch.report.screenshot import CHROMIUM, block_network, wait_for_map_to_settle

pytestmark = [
    pytest.mark.browser,
    pytest.mark.xdist_group("demo_run"),  # the demo is reviewed once, on one worker
    pytest.mark.skipif(not os.access(CHROMIUM, os.X_OK),
                       reason=f"no Chromium at {CHROMIUM} (apt-get install chromium)"),
]
sync_api = pytest.importorskip("playwright.sync_api", reason="playwright not installed")

#: A4 less the pages' 10 mm margins, in CSS pixels (96 per inch, 25.4 mm per inch): the
#: width Chromium lays a printed page out at.
A4_INNER_PX = ((210 - 20) / 25.4 * 96, (297 - 20) / 25.4 * 96)
NM = 1852.0  # metres in one international nautical mile (BIPM SI brochure, table 8)
GEOD = Geod(ellps="WGS84")


def pdf_pages(pdf: bytes) -> int:
    """Page objects in a PDF (``/Type /Page``, not the ``/Type /Pages`` tree nodes)."""
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))


def _open(browser: sync_api.Browser, path: Path, width: int, height: int = 900,
          ) -> tuple[sync_api.BrowserContext, sync_api.Page, list[str]]:
    ctx = browser.new_context(viewport={"width": width, "height": height})
    page = ctx.new_page()
    problems: list[str] = []
    page.on("pageerror", lambda e: problems.append(str(e)))
    page.on("console", lambda m: problems.append(m.text) if m.type == "error" else None)
    block_network(page, problems)
    page.goto(path.resolve().as_uri(), wait_until="load")
    page.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")
    wait_for_map_to_settle(page)
    return ctx, page, problems


def _inside(inner: dict[str, float], outer: dict[str, float], tol: float = 1.0) -> bool:
    return (inner["x"] >= outer["x"] - tol and inner["y"] >= outer["y"] - tol
            and inner["x"] + inner["width"] <= outer["x"] + outer["width"] + tol
            and inner["y"] + inner["height"] <= outer["y"] + outer["height"] + tol)


def test_each_incident_prints_on_one_a4_page_with_the_whole_episode(
        browser: sync_api.Browser, demo_run: Path) -> None:
    pages = sorted((demo_run / "incidents").glob("alert-*.html"))
    assert len(pages) == 5  # the demo's five alerts (demo_feeds/README.md)
    for path in pages:
        ctx, page, problems = _open(browser, path, 1280)
        page.set_viewport_size({"width": int(A4_INNER_PX[0]), "height": int(A4_INNER_PX[1])})
        page.emulate_media(media="print")
        wait_for_map_to_settle(page)  # the fit started at load (slow on a loaded machine)
        page.evaluate("hwPage.fitFrame()")  # what the page does itself on beforeprint
        wait_for_map_to_settle(page)  # and the redraw of the vector layer that follows
        assert page.evaluate("hwPage.episodeInView()"), path.name
        frame = page.locator(".folium-map").bounding_box()
        assert frame is not None
        # about 88 mm high on paper (96 CSS px per inch, 25.4 mm per inch)
        assert frame["height"] == pytest.approx(88 / 25.4 * 96, abs=2)
        episode = page.locator("path.hw-episode")
        assert episode.count() >= 1
        for i in range(episode.count()):
            box = episode.nth(i).bounding_box()
            assert box is not None and _inside(box, frame), path.name
        for sel in (".hw-scale", ".hw-north", "svg.hw-chart", "#hw-narrative", "#hw-positions"):
            assert page.locator(sel).is_visible(), (path.name, sel)
        assert not page.locator(".leaflet-control-zoom").is_visible()
        assert not page.locator(".leaflet-control-layers").is_visible()
        pdf = page.pdf(format="A4", print_background=True)
        assert pdf.startswith(b"%PDF") and pdf_pages(pdf) == 1, path.name
        # nothing wider than the paper (it would be cut at the right edge)
        assert page.evaluate("document.documentElement.scrollWidth") <= A4_INNER_PX[0] + 0.5
        assert problems == []
        ctx.close()


def test_scale_bar_is_in_nautical_miles_and_true(browser: sync_api.Browser, demo_run: Path) -> None:
    ctx, page, problems = _open(browser, demo_run / "incidents" / "alert-0001.html", 1280)
    text = page.locator(".hw-scale-text").inner_text()
    assert re.fullmatch(r"[0-9.]+ NM \([0-9.]+ (m|km)\)", text), text
    nm = float(text.split()[0])
    px = float(page.locator(".hw-scale-bar").get_attribute("data-px") or "nan")
    # two map points px apart on the map's middle row, as latitude/longitude
    ends = page.evaluate(
        """px => { const m = hwPage.map, y = m.getSize().y / 2;
                   const a = m.containerPointToLatLng([10, y]), b = m.containerPointToLatLng([10 + px, y]);
                   return [a.lat, a.lng, b.lat, b.lng]; }""", px)
    metres = GEOD.inv(ends[1], ends[0], ends[3], ends[2])[2]
    # Web Mercator is conformal: along one row the scale is true to well under 1 %
    assert metres == pytest.approx(nm * NM, rel=0.01)
    assert problems == []
    ctx.close()


def test_overview_prints_as_map_page_then_alerts_table(browser: sync_api.Browser,
                                                       demo_run: Path) -> None:
    ctx, page, problems = _open(browser, demo_run / "report.html", 1280)
    page.set_viewport_size({"width": int(A4_INNER_PX[0]), "height": int(A4_INNER_PX[1])})
    page.emulate_media(media="print")
    wait_for_map_to_settle(page)
    page.evaluate("hwPage.fitFrame()")
    wait_for_map_to_settle(page)
    # the whole shift inside the printed map, nothing wider than the paper
    assert page.evaluate("""() => {
        const fit = JSON.parse(document.getElementById('hw-page-data').textContent).fit;
        return hwPage.map.getBounds().contains(L.latLngBounds(fit)); }""")
    assert page.evaluate("document.documentElement.scrollWidth") <= A4_INNER_PX[0] + 0.5
    for sel in (".hw-replay", "#traffic", "#provenance", ".leaflet-control-zoom"):
        assert not page.locator(sel).is_visible(), sel
    assert page.locator("#hw-alerts").is_visible() and page.locator(".hw-scale").is_visible()
    # no sort arrows on paper
    arrow = page.eval_on_selector("#hw-alerts thead th button",
                                  "b => getComputedStyle(b, '::after').content")
    assert arrow in ("none", "normal", "")
    pdf = page.pdf(format="A4", print_background=True)
    assert pdf_pages(pdf) == 2  # the map page, then the five alerts
    assert problems == []
    ctx.close()


@pytest.mark.parametrize("name", ["report.html", "incidents/alert-0003.html"])
def test_pages_fit_a_phone(browser: sync_api.Browser, demo_run: Path, name: str) -> None:
    ctx, page, problems = _open(browser, demo_run / name, 400, 800)
    # no horizontal scroll of the page body
    width = page.evaluate("Math.max(document.documentElement.scrollWidth, document.body.scrollWidth)")
    assert width <= 400
    # tables scroll inside their own box instead; charts scale down to the screen
    boxes = page.eval_on_selector_all(
        "main table:not(table table)",
        "ts => ts.map(t => [t.getBoundingClientRect().right, t.scrollWidth, t.clientWidth])")
    assert boxes
    for right, _, _ in boxes:
        assert right <= 400 + 0.5
    if name == "report.html":  # the alerts table is wider than a phone: it scrolls in its box
        right, scroll_w, client_w = page.eval_on_selector(
            "#hw-alerts", "t => [t.getBoundingClientRect().right, t.scrollWidth, t.clientWidth]")
        assert scroll_w > client_w
    for right in page.eval_on_selector_all(
            "svg.hw-chart", "ss => ss.map(s => s.getBoundingClientRect().right)"):
        assert right <= 400 + 0.5
    map_box = page.locator(".folium-map").bounding_box()
    assert map_box is not None and map_box["x"] + map_box["width"] <= 400 + 0.5
    assert problems == []
    ctx.close()
