"""Screenshots of written report pages with a local headless Chromium (optional).

Uses the Python package ``playwright`` (test extra) driving the system's
Chromium at :data:`CHROMIUM`; no browser is downloaded. With either missing,
:func:`take_screenshots` returns an empty list. All network requests other
than ``file:`` and ``data:`` URLs are blocked, so a screenshot also shows
that the page works offline.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

__all__ = [
    "CHROMIUM",
    "CHROMIUM_ARGS",
    "take_screenshots",
    "block_network",
    "page_load_seconds",
    "wait_for_map_to_settle",
]

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]


def block_network(page: Any, blocked: list[str] | None = None) -> None:
    """Abort every request of ``page`` that is not a ``file:`` or ``data:`` URL."""

    def handle(route: Any) -> None:
        url = route.request.url
        if url.startswith(("file://", "data:")):
            route.continue_()
        else:
            if blocked is not None:
                blocked.append(url)
            route.abort()

    page.route("**/*", handle)


def take_screenshots(out_dir: Path, *, max_incidents: int = 5) -> list[Path]:
    """Screenshot ``report.html`` and the first incident pages under ``out_dir/screenshots``.

    Returns the PNG paths written, or ``[]`` when Playwright or Chromium is
    not available (reports themselves never depend on this).
    """
    out_dir = Path(out_dir)
    if not os.access(CHROMIUM, os.X_OK):
        return []
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return []
    pages = [out_dir / "report.html"]
    pages += sorted((out_dir / "incidents").glob("alert-*.html"))[:max_incidents]
    pages = [p for p in pages if p.is_file()]
    if not pages:
        return []
    shots = out_dir / "screenshots"
    shots.mkdir(parents=True, exist_ok=True)
    # Playwright's sync API refuses to run inside a running asyncio loop (a
    # notebook, or another Playwright session): work in a thread of our own.
    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(_shoot, sync_playwright, pages, shots).result()


def _shoot(sync_playwright: Any, pages: list[Path], shots: Path) -> list[Path]:
    written: list[Path] = []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            block_network(page)
            for src in pages:
                page.goto(src.resolve().as_uri(), wait_until="load")
                page.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")
                wait_for_map_to_settle(page)
                dest = shots / (src.stem + ".png")
                page.screenshot(path=str(dest), full_page=True)
                written.append(dest)
        finally:
            browser.close()
    return written


def wait_for_map_to_settle(page: Any) -> None:
    """Let a zoom or pan animation started while the page loaded (fitting the map to
    the incident) finish, so the screenshot shows the final view."""
    two_frames = (
        "() => new Promise(done => requestAnimationFrame(() => requestAnimationFrame(done)))"
    )
    page.evaluate(two_frames)
    page.wait_for_function(
        "() => !document.querySelector('.leaflet-zoom-anim, .leaflet-pan-anim')", timeout=5000
    )


def page_load_seconds(page_path: Path) -> float | None:
    """Seconds from navigation to a drawn map for one page (``None`` without a browser).

    Measured with the network blocked, in a fresh headless Chromium: until the
    ``load`` event and the map's vector layer exist. Used by the benchmark.
    """
    if not os.access(CHROMIUM, os.X_OK):
        return None
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return None

    def measure() -> float:
        import time

        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            try:
                page = browser.new_page(viewport={"width": 1280, "height": 900})
                block_network(page)
                t0 = time.perf_counter()
                page.goto(Path(page_path).resolve().as_uri(), wait_until="load")
                page.wait_for_selector(".folium-map .leaflet-overlay-pane svg", state="attached")
                return time.perf_counter() - t0
            finally:
                browser.close()

    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(measure).result()
