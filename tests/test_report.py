"""Tests of the HTML reports (harbourwatch.report) without a browser."""

from __future__ import annotations

import hashlib
import html
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from report_fixtures import T0, make_inputs
from scipy.spatial.distance import mahalanobis

from harbourwatch.errors import HarbourwatchError
from harbourwatch.report import CAUTION, _assets, write_reports
from harbourwatch.report._data import REPLAY_STEP_S, replay_payload, scan_series
from harbourwatch.report._layers import ellipse_latlon
from harbourwatch.report.charts import nice_ticks
from harbourwatch.report.incident import narrative
from harbourwatch.scene.geodesy import WGS84_GEOD, LocalFrame

HOSTILE_ZONE = "<script>alert(1)</script>"
HOSTILE_RULE = '"&<>'
TEMPLATE_ZONE = "Calder `${alert(2)}` \\x Range"
# jinja2 delimiters (folium renders through jinja2): must stay text, never be evaluated
JINJA_ZONE = "{{ 6*7 }}{% if true %}IF{% endif %}{# hidden #} Fairway"


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, list[Path]]:
    out = tmp_path_factory.mktemp("report")
    return out, write_reports(out, make_inputs())


def _pages(written: tuple[Path, list[Path]]) -> dict[Path, str]:
    return {p: p.read_text("utf-8") for p in written[1]}


class _Collect(HTMLParser):
    """Tags, attributes, script bodies and visible text of one page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.scripts: list[str] = []
        self.text: list[str] = []
        self._in_script = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))
        self._in_script = tag == "script"
        if self._in_script:
            self.scripts.append("")

    def handle_endtag(self, tag: str) -> None:
        if tag == "script":
            self._in_script = False

    def handle_data(self, data: str) -> None:
        if self._in_script:
            self.scripts[-1] += data
        else:
            self.text.append(data)


def _parse(text: str) -> _Collect:
    p = _Collect()
    p.feed(text)
    p.close()
    return p


def _http_outside_leaflet(text: str) -> list[str]:
    """Every http(s) string of a page once the verbatim, hash-checked Leaflet is taken out."""
    js = _assets.leaflet_js()
    assert text.count(js) == 1
    return re.findall(r"https?://[^\s\"'<>)`]*", text.replace(js, ""), flags=re.IGNORECASE)


# --- offline: no external resource ------------------------------------------------------


def test_pages_written_in_alert_order(written: tuple[Path, list[Path]]) -> None:
    out, paths = written
    assert paths[0] == out / "report.html"
    assert paths[1:] == [out / "incidents" / "alert-0001.html", out / "incidents" / "alert-0002.html"]
    # temp file + os.replace leaves no partial files behind
    assert not list(out.rglob("*.tmp"))


def test_no_http_resource_anywhere(written: tuple[Path, list[Path]]) -> None:
    for path, text in _pages(written).items():
        assert _http_outside_leaflet(text) == [], path
        doc = _parse(text)
        for tag, attrs in doc.tags:
            # nothing is loaded by reference: no src at all, links only to local pages
            assert "src" not in attrs, (path, tag, attrs)
            if tag == "link":
                pytest.fail(f"{path}: <link> element {attrs}")
            href = attrs.get("href")
            if href is not None:
                assert not re.match(r"^[a-z][a-z0-9+.-]*:", href, re.I), (path, href)
        for target in re.findall(r"url\(\s*['\"]?([^)'\"]*)", text):
            assert target.startswith(("data:", "#")), (path, target)
        assert "L.tileLayer" not in text


def test_leaflet_own_strings_are_only_namespace_and_credit() -> None:
    # The two kinds of http string in Leaflet 1.9.4's leaflet.js: the SVG namespace
    # URI (a name, never fetched; W3C SVG 1.1, section 1.3) and the link to the
    # project's site in the licence header and the attribution prefix.
    found = set(re.findall(r"https?://[^\s\"'<>)]*", _assets.leaflet_js()))
    assert found == {"http://www.w3.org/2000/svg", "https://leafletjs.com"}


def test_user_tile_server_is_the_only_exception(tmp_path: Path) -> None:
    url = "https://tiles.calder-sound.invalid/{z}/{x}/{y}.png"
    paths = write_reports(tmp_path, make_inputs(tile_url=url))
    for p in paths:
        text = p.read_text("utf-8")
        found = _http_outside_leaflet(text)
        assert found and set(found) == {url}, p
        assert text.count("L.tileLayer(") == 1


# --- Leaflet pinned and checked ---------------------------------------------------------


def test_leaflet_files_match_pinned_release() -> None:
    # Reference SHA-256 values: the dist/ files of the npm registry tarball
    # leaflet-1.9.4.tgz (computed with sha256sum when the pin was chosen).
    js = _assets.leaflet_js().encode()
    assert hashlib.sha256(js).hexdigest() == (
        "db49d009c841f5ca34a888c96511ae936fd9f5533e90d8b2c4d57596f4e5641a")
    assert b"Leaflet 1.9.4, a JS library for interactive maps" in js[:200]
    raw_css = _assets._leaflet_file("leaflet.css")
    assert hashlib.sha256(raw_css).hexdigest() == (
        "a7837102824184820dfa198d1ebcd109ff6d0ff9a2672a074b9a1b4d147d04c6")
    css = _assets.leaflet_css()
    assert "url(images/" not in css and css.count("url(data:image/png;base64,") == 3


def test_modified_leaflet_is_refused(monkeypatch: pytest.MonkeyPatch) -> None:
    real = _assets._leaflet_file

    def tampered(name: str) -> bytes:
        data = real(name)
        return data + b"\n/* changed */" if name in ("leaflet.js", "leaflet.css") else data

    monkeypatch.setattr(_assets, "_leaflet_file", tampered)
    _assets.leaflet_js.cache_clear()
    _assets.leaflet_css.cache_clear()
    try:
        with pytest.raises(HarbourwatchError, match="SHA-256"):
            _assets.leaflet_js()
        with pytest.raises(HarbourwatchError, match="SHA-256"):
            _assets.leaflet_css()
    finally:
        monkeypatch.undo()
        _assets.leaflet_js.cache_clear()
        _assets.leaflet_css.cache_clear()
    assert _assets.leaflet_js()


# --- escaping ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def hostile(tmp_path_factory: pytest.TempPathFactory) -> dict[Path, str]:
    out = tmp_path_factory.mktemp("hostile")
    inputs = make_inputs(restricted_name=HOSTILE_ZONE, rule_id=HOSTILE_RULE)
    zones = list(inputs.zones)
    from dataclasses import replace

    zones[2] = replace(zones[2], name=TEMPLATE_ZONE)
    zones[3] = replace(zones[3], name=JINJA_ZONE)
    inputs = replace(inputs, zones=zones)
    return {p: p.read_text("utf-8") for p in write_reports(out, inputs)}


def test_hostile_names_never_appear_raw(hostile: dict[Path, str]) -> None:
    for path, text in hostile.items():
        assert HOSTILE_ZONE not in text, path
        assert HOSTILE_RULE not in text, path
        # backtick and ${ are harmless in HTML text but must never reach a script
        scripts = "".join(_parse(text).scripts)
        assert "${alert(2)}" not in scripts and "\\x Range" not in scripts, path
        # every <script> opened is closed by its own end tag
        assert text.count("<script") == text.count("</script>"), path


def test_template_delimiters_in_names_are_never_evaluated(hostile: dict[Path, str]) -> None:
    for path, text in hostile.items():
        # no template delimiter at all in the written page (names are escaped) ...
        assert "{{" not in text and "{%" not in text and "{#" not in text, path
        # ... and nothing was evaluated on the way: 6*7 never became 42 next to the name
        visible = html.unescape(text)
        assert "42IF" not in visible and "42 Fairway" not in visible, path
    overview = next(t for p, t in hostile.items() if p.name == "report.html")
    doc = _parse(overview)
    assert JINJA_ZONE in "".join(doc.text)  # the zones table shows the name as typed
    assert JINJA_ZONE in html.unescape("".join(doc.scripts))  # so does the map's tooltip


def test_hostile_names_shown_as_text_everywhere(hostile: dict[Path, str]) -> None:
    overview = next(t for p, t in hostile.items() if p.name == "report.html")
    doc = _parse(overview)
    visible = "".join(doc.text)
    # tables and SVG chart labels: the parser turns the escapes back into the literal name
    assert HOSTILE_RULE in visible
    assert HOSTILE_ZONE in visible
    # folium tooltips (HTML inside JS template literals): escaped, backtick/$ neutralised
    js = "".join(doc.scripts)
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in js
    assert "&#96;&#36;&#123;alert(2)&#125;&#96; &#92;x" in js
    assert "&quot;&amp;&lt;&gt;" in js  # the rule id in the alert marker's tooltip
    # JSON inside <script>: no raw "<" at all in the data blocks
    data = re.findall(r'<script type="application/json" id="[^"]+">(.*?)</script>', overview, re.S)
    assert data and all("<" not in d and ">" not in d for d in data)
    incident = next(t for p, t in hostile.items() if p.name == "alert-0001.html")
    assert HOSTILE_RULE in "".join(_parse(incident).text)


def test_provenance_escaped(written: tuple[Path, list[Path]]) -> None:
    text = written[1][0].read_text("utf-8")
    assert "zones/&lt;calder&gt;.geojson" in text and "zones/<calder>" not in text
    assert "ab" * 32 in text and "filter_s" in text


# --- alerts table -----------------------------------------------------------------------


def test_alerts_table_links_each_alert_to_its_page(written: tuple[Path, list[Path]]) -> None:
    out, paths = written
    text = paths[0].read_text("utf-8")
    table = re.search(r'<table class="hw-sortable" id="hw-alerts">(.*?)</table>', text, re.S)
    assert table is not None
    rows = re.findall(r"<tr>(.*?)</tr>", table.group(1).split("<tbody>")[1], re.S)
    inputs = make_inputs()
    assert len(rows) == len(inputs.alerts)
    for i, (row, alert) in enumerate(zip(rows, inputs.alerts, strict=True)):
        links = set(re.findall(r'href="([^"]+)"', row))
        assert links == {f"incidents/alert-{i + 1:04d}.html"}
        assert (out / next(iter(links))).is_file()
        assert f"<td><bdi>{alert.rule}</bdi></td>" in row  # isolated (see _html.esc_user)


# --- determinism ------------------------------------------------------------------------


def test_same_inputs_give_identical_bytes(tmp_path: Path, written: tuple[Path, list[Path]]) -> None:
    again = write_reports(tmp_path, make_inputs())
    for a, b in zip(written[1], again, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name
        # folium's random 32-hex element ids are gone
        assert not re.search(r"_[0-9a-f]{32}\b", a.read_text("utf-8"))


# --- page content -----------------------------------------------------------------------


def test_every_page_has_caution_first_and_print_rules(written: tuple[Path, list[Path]]) -> None:
    for p in written[1]:
        text = p.read_text("utf-8")
        body = re.split(r"<body[^>]*>", text, maxsplit=1)[1]
        assert body.lstrip().startswith('<p class="hw-caution"')
        assert CAUTION in body
        assert "@page { size: A4" in text


def test_overview_marks_radar_outage(written: tuple[Path, list[Path]]) -> None:
    text = written[1][0].read_text("utf-8")
    charts = re.findall(r"<figure class=\"hw-fig\">(.*?)</figure>", text, re.S)
    radar = [c for c in charts if "plots per scan" in c]
    assert len(radar) == 2
    assert "hw-gap" not in radar[0] and radar[1].count('class="hw-gap"') == 1


def test_scan_gaps_found_where_a_radar_stopped() -> None:
    inp = make_inputs(outage=(1200.0, 1500.0))
    series = scan_series(inp.scans, inp.sensors, inp.trajectories.feed_start,
                         inp.trajectories.feed_end)
    assert series[0].gaps == []
    (a, b), = series[1].gaps
    # the last scan before the outage and the first after it bound the gap
    assert T0 + 1195 <= a <= T0 + 1200 and T0 + 1500 <= b <= T0 + 1505


def test_replay_positions_decode_to_the_trajectory() -> None:
    inp = make_inputs()
    ts = inp.trajectories
    pay = replay_payload(ts)
    for enc, tr in zip(pay["hindsight"], ts.trajectories, strict=True):
        q = np.cumsum(np.asarray(enc["p"], np.int64).reshape(-1, 3), axis=0)
        t = ts.feed_start + q[:, 0]
        assert t[0] >= tr.start - 0.5 and t[-1] <= tr.end + 0.5
        assert np.all(np.diff(t) <= REPLAY_STEP_S + 1e-9)
        e = np.interp(t, tr.time, tr.mean[:, 0])
        n = np.interp(t, tr.time, tr.mean[:, 2])
        lat, lon = ts.frame.to_wgs84(e, n)
        # independent check of the 5-decimal coordinates with pyproj's geodesic
        # (Karney's algorithm): half a unit of 1e-5 degree is at most ~0.6 m here,
        # plus up to 0.5 s of rounded time at up to 7 m/s.
        _, _, dist = WGS84_GEOD.inv(lon, lat, q[:, 2] / 1e5, q[:, 1] / 1e5)
        assert float(np.max(dist)) < 0.7 + 0.5 * 7.5


def test_two_sigma_ellipse_axes_and_shape() -> None:
    frame = LocalFrame(57.5, -30.0)
    cov = np.diag([900.0, 1.0, 100.0, 1.0])  # sd 30 m east, 10 m north
    ring = ellipse_latlon(frame, np.zeros(4), cov, k_sigma=2.0)
    _, _, d = WGS84_GEOD.inv(np.full(len(ring), -30.0), np.full(len(ring), 57.5),
                             ring[:, 1], ring[:, 0])
    # the 2-sigma ellipse of independent axes has semi-axes 2*sd (60 m, 20 m)
    assert abs(d.max() - 60.0) < 0.1 and abs(d.min() - 20.0) < 0.1
    # rotated covariance: every vertex at Mahalanobis distance 2 (scipy)
    p = np.array([[400.0, 150.0], [150.0, 200.0]])
    cov4 = np.zeros((4, 4))
    cov4[np.ix_([0, 2], [0, 2])] = p
    ring = ellipse_latlon(frame, np.array([100.0, 0, -50.0, 0]), cov4, k_sigma=2.0)
    e, n = frame.to_local(ring[:, 0], ring[:, 1])
    vi = np.linalg.solve(p, np.eye(2))
    md = [mahalanobis([a, b], [100.0, -50.0], vi) for a, b in zip(e, n, strict=True)]
    assert np.allclose(md, 2.0, atol=1e-6)


def test_incident_page_content(written: tuple[Path, list[Path]]) -> None:
    inputs = make_inputs()
    first = written[1][1].read_text("utf-8")
    # the loiter rule's speed limit drawn on the speed chart
    assert 'class="hw-threshold"' in first and "rule limit 1.5 kn" in first
    # one embedded point per plot used by the trajectory
    tr = inputs.trajectories.by_id("T0001")
    pts = re.search(r"(\[\[[-0-9.,\[\]]*\]\])\.forEach", first)
    assert pts is not None
    assert pts.group(1).count("],[") + 1 == int((tr.plot_ids >= 0).sum())
    assert first.count('"className": "hw-ellipse"') == 2  # entry and exit
    second = written[1][2].read_text("utf-8")
    assert second.count('"className": "hw-ellipse"') == 4  # start, closest, end + other's closest
    assert "T0003" in second and "hw-other" in second


def test_narrative_states_the_facts() -> None:
    inputs = make_inputs()
    a = inputs.alerts[1]
    rule = next(r for r in inputs.rules if r.id == a.rule)
    text = narrative(a, rule=rule, zone=None, n_plots=900, sd_m=5.4)
    assert "between 06:12:30 and 06:27:30 UTC (15 min 00 s)" in text
    assert "within 150 m of the vessel on trajectory T0003" in text
    assert "0.71" in text and "threshold 0.60" in text and "900 radar plot(s)" in text


@settings(max_examples=60, deadline=None)
@given(st.floats(-1e4, 1e4), st.floats(1e-3, 1e4), st.integers(2, 8))
def test_nice_ticks_are_round_and_inside(lo: float, width: float, n: int) -> None:
    hi = lo + width
    ticks = nice_ticks(lo, hi, n)
    assert ticks and all(lo - 1e-6 * width <= t <= hi + 1e-6 * width for t in ticks)
    if len(ticks) > 1:
        steps = np.diff(ticks)
        assert np.allclose(steps, steps[0], rtol=1e-6)
        mant = steps[0] / 10 ** np.floor(np.log10(steps[0]))
        assert any(abs(mant - m) < 1e-6 for m in (1, 2, 5, 10))


def test_six_hour_shift_stays_small(tmp_path: Path) -> None:
    # 250 trajectories over 6 h, about 2,250 states each at a 2.5 s scan period
    inputs = make_inputs(n_tracks=250, hours=6.0, outage=(7200.0, 7800.0))
    assert sum(tr.time.size for tr in inputs.trajectories) > 500_000
    paths = write_reports(tmp_path, inputs)
    size = paths[0].stat().st_size
    assert size < 5_000_000, size  # the stated bound for the overview (README, "Reports: design")
    text = paths[0].read_text("utf-8")
    assert text.count('"className": "hw-traj') == 250


def test_empty_shift_and_dangling_alert(tmp_path: Path) -> None:
    from dataclasses import replace

    from harbourwatch.trajectories import AsSeenTable, TrajectorySet

    base = make_inputs(n_tracks=3)
    one = base.trajectories.trajectories[0]
    single = replace(one, id="T9999", time=one.time[:1], mean=one.mean[:1], cov=one.cov[:1],
                     plot_ids=one.plot_ids[:1])
    ts = TrajectorySet(trajectories=(single,), frame=base.trajectories.frame,
                       as_seen=AsSeenTable.empty(), feed_start=T0, feed_end=T0 + 60.0)
    alert = replace(base.alerts[1], track="T-missing", other_track="")
    inputs = replace(base, trajectories=ts, scans=[], alerts=[alert], provenance={})
    paths = write_reports(tmp_path, inputs)
    assert len(paths) == 2
    text = paths[0].read_text("utf-8")
    assert text.count('"className": "hw-traj') == 1 and "T-missing" in text
    empty = replace(inputs, trajectories=replace(ts, trajectories=()), alerts=[], sensors=[])
    (page,) = write_reports(tmp_path / "empty", empty)
    assert "No alerts were raised" in page.read_text("utf-8")


def test_screenshots_skipped_without_browser(monkeypatch: pytest.MonkeyPatch,
                                             written: tuple[Path, list[Path]]) -> None:
    from harbourwatch.report import screenshot

    monkeypatch.setattr(screenshot, "CHROMIUM", "/nonexistent/chromium")
    assert screenshot.take_screenshots(written[0]) == []
    assert not (written[0] / "screenshots").exists()


# --- bidirectional text -----------------------------------------------------------------

RTL_ZONE = "\u05de\u05e2\u05d2\u05df \u05d7\u05d9\u05e6\u05d5\u05e0\u05d9"  # an invented Hebrew name
RTL_RULE = "\u05e9\u05d4\u05d9\u05d9\u05d4-7"  # an invented rule id: Hebrew letters, a digit


class _OutsideBdi(HTMLParser):
    """Visible text that is *not* inside a ``<bdi>`` element (scripts, SVG and title aside)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.outside: list[str] = []
        self.inside: list[str] = []
        self._bdi = 0
        self._skip = 0

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self._bdi += tag == "bdi"
        self._skip += tag in ("script", "svg", "title", "style")

    def handle_endtag(self, tag: str) -> None:
        self._bdi -= tag == "bdi"
        self._skip -= tag in ("script", "svg", "title", "style")

    def handle_data(self, data: str) -> None:
        if not self._skip:
            (self.inside if self._bdi else self.outside).append(data)


def test_user_strings_are_isolated_from_the_sentence_around_them(tmp_path: Path) -> None:
    # Unicode Standard Annex #9 (the bidirectional algorithm), section 2.7 "Markup and
    # formatting characters": the HTML <bdi> element isolates its content, so a
    # right-to-left zone name cannot reorder the times and probability beside it.
    from dataclasses import replace

    inputs = make_inputs(rule_id=RTL_RULE)
    zones = [replace(z, name=RTL_ZONE) if z.id == "outer-roads" else z for z in inputs.zones]
    alerts = [replace(a, summary=a.summary.replace("Outer Roads", RTL_ZONE))
              for a in inputs.alerts]
    inputs = replace(inputs, zones=zones, alerts=alerts)
    pages = write_reports(tmp_path, inputs)
    seen_inside = 0
    for path in (pages[0], pages[1]):  # the overview and the loiter alert's incident page
        doc = _OutsideBdi()
        doc.feed(path.read_text("utf-8"))
        outside, inside = "".join(doc.outside), "".join(doc.inside)
        assert RTL_ZONE not in outside and RTL_RULE not in outside, path.name
        seen_inside += inside.count(RTL_ZONE) + inside.count(RTL_RULE)
        assert RTL_RULE in inside, path.name
    incident = pages[1].read_text("utf-8")
    narr = re.search(r'<p class="hw-narrative" id="hw-narrative">(.*?)</p>', incident, re.S)
    assert narr is not None and f"<bdi>{RTL_ZONE}</bdi>" in narr.group(1)
    assert seen_inside >= 4


def test_replay_of_a_long_feed_keeps_within_its_position_budget(tmp_path: Path,
                                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    from harbourwatch.report import overview
    from harbourwatch.report._data import REPLAY_MAX_POSITIONS, replay_step

    inp = make_inputs(hours=3.0)
    ts = inp.trajectories

    def positions(pay: dict[str, object]) -> int:
        return sum(len(e["p"]) // 3 for e in pay["hindsight"])  # type: ignore[attr-defined]

    full = positions(replay_payload(ts, REPLAY_STEP_S))
    assert replay_step(ts) == REPLAY_STEP_S  # a short feed: within the default budget
    assert full < REPLAY_MAX_POSITIONS
    budget = full // 4
    step = replay_step(ts, max_positions=budget)
    assert step % REPLAY_STEP_S == 0 and 4 <= step / REPLAY_STEP_S <= 5  # a whole multiple
    pay = replay_payload(ts, step)
    assert positions(pay) <= budget + 2 * len(ts)  # about the budget (each track's ends kept)
    for enc in pay["hindsight"]:  # type: ignore[union-attr]
        t = np.cumsum(np.asarray(enc["p"], np.int64).reshape(-1, 3), axis=0)[:, 0]
        assert np.all(np.diff(t) <= step + 1e-9)
    # the page says the coarser step, and carries it to the replay script
    monkeypatch.setattr(overview, "replay_step", lambda t: replay_step(t, max_positions=budget))
    write_reports(tmp_path, inp)
    html = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert f"resampled to {step:g} s" in html and f"steps of {step:g} s (a long feed" in html
    data = re.search(r'id="hw-replay-data">(.*?)</script>', html, re.S)
    assert data is not None and json.loads(data.group(1))["step"] == step
