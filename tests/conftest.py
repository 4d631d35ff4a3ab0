"""Shared tiny fixtures. Helpers for one module live in that module's test file."""

from __future__ import annotations

import numpy as np
import pytest


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator: tests are deterministic."""
    return np.random.default_rng(20261202)


# --- Port Calder input files (invented harbour), shared by the input tests ----------------

CALDER_SENSORS = """\
# Port Calder shore radars (invented)
[[sensor]]
id = "calder-head"
lat = 54.3012
lon = 10.1468
scan_period_s = 2.5
range_sigma_m = 15.0
bearing_sigma_deg = 0.4
detection_probability = 0.9
false_plots_per_scan = 6.0
max_range_m = 22000

[[sensor]]
id = "sound-light"
lat = 54.3550
lon = 10.2100
scan_period_s = 3.0
range_sigma_m = 20.0
bearing_sigma_deg = 0.5
detection_probability = 0.85
false_plots_per_scan = 4.0
max_range_m = 18000
"""

CALDER_ZONES_DOC = {
    "type": "FeatureCollection",
    "features": [
        {
            "type": "Feature",
            "properties": {"id": "inner-basin", "name": "Calder Inner Basin", "kind": "anchorage"},
            "geometry": {
                "type": "Polygon",
                "coordinates": [
                    [[10.14, 54.30], [10.17, 54.30], [10.17, 54.32], [10.14, 54.32], [10.14, 54.30]],
                    [[10.15, 54.305], [10.16, 54.305], [10.16, 54.31], [10.15, 54.31],
                     [10.15, 54.305]],
                ],
            },
        },
        {
            "type": "Feature",
            "properties": {"id": "firing-range"},
            "geometry": {
                "type": "MultiPolygon",
                "coordinates": [
                    [[[10.25, 54.40], [10.28, 54.40], [10.28, 54.42], [10.25, 54.40]]],
                    [[[10.30, 54.40], [10.32, 54.40], [10.32, 54.42], [10.30, 54.40]]],
                ],
            },
        },
        {
            "type": "Feature",
            "properties": {"id": "outer-roads", "name": "Calder Sound Outer Roads",
                           "kind": "fairway"},
            "geometry": {
                "type": "Polygon",
                "coordinates": [[[10.18, 54.33], [10.24, 54.33], [10.24, 54.37], [10.18, 54.37],
                                 [10.18, 54.33]]],
            },
        },
    ],
}

CALDER_RULES = """\
[[rule]]
id = "basin-loiter"
kind = "loiter"
zone = "inner-basin"
min_duration_min = 15
max_speed_kn = 1.5

[[rule]]
id = "range-crossing"
kind = "pass-through"
zone = "firing-range"
min_probability = 0.7

[[rule]]
id = "roads-meeting"
kind = "rendezvous"
max_distance_m = 150
min_duration_min = 10
max_speed_kn = 3.0
"""

CALDER_FEED = """\
time,sensor,lat,lon,sigma_m
2026-05-04T06:00:00.000Z,calder-head,54.3100,10.1500,
2026-05-04T06:00:00.500Z,sound-light,54.3400,10.2000,25
2026-05-04T06:00:02.500Z,calder-head,54.3101,10.1502,
2026-05-04T06:00:03.000Z,sound-light,54.3401,10.2003,
"""


class CalderFiles:
    """Valid Port Calder input files in one folder; tests overwrite one to break it."""

    def __init__(self, folder) -> None:
        import json

        self.dir = folder
        self.sensors_text = CALDER_SENSORS
        self.zones_text = json.dumps(CALDER_ZONES_DOC, indent=2) + "\n"
        self.rules_text = CALDER_RULES
        self.feed_text = CALDER_FEED
        self.sensors = folder / "sensors.toml"
        self.zones = folder / "zones.geojson"
        self.rules = folder / "rules.toml"
        self.feed = folder / "plots.csv"
        self.sensors.write_text(self.sensors_text, encoding="utf-8")
        self.zones.write_text(self.zones_text, encoding="utf-8")
        self.rules.write_text(self.rules_text, encoding="utf-8")
        self.feed.write_text(self.feed_text, encoding="utf-8")


@pytest.fixture
def calder(tmp_path) -> CalderFiles:
    """Valid sensors, zones, rules and a small feed for the invented Port Calder."""
    return CalderFiles(tmp_path)


def line_of(text: str, needle: str, nth: int = 1) -> int:
    """1-based line of the ``nth`` line of ``text`` containing ``needle`` (test helper)."""
    hits = [i for i, ln in enumerate(text.splitlines(), start=1) if needle in ln]
    return hits[nth - 1]


def feed_edit(column: str, value: str, line: int = 4, text: str = CALDER_FEED) -> str:
    """``text`` (a CSV feed) with ``column`` of physical ``line`` set to ``value``."""
    rows = text.splitlines()
    col = rows[0].split(",").index(column)
    cells = rows[line - 1].split(",")
    cells[col] = value
    rows[line - 1] = ",".join(cells)
    return "\n".join(rows) + "\n"


def feed_without(column: str, text: str = CALDER_FEED) -> str:
    """``text`` with ``column`` removed from the header and every row."""
    rows = [r.split(",") for r in text.splitlines()]
    col = rows[0].index(column)
    return "\n".join(",".join(c for i, c in enumerate(r) if i != col) for r in rows) + "\n"


CALDER_FEED_EPOCH = "".join(
    # 2026-05-04T06:00:00Z is 1777874400 epoch seconds (Python's datetime/calendar.timegm).
    ln.replace("2026-05-04T06:00:0", "177787440").replace("Z,", ",") + "\n"
    for ln in CALDER_FEED.splitlines()
)
CALDER_FEED_SCAN = """\
time,sensor,lat,lon,scan
2026-05-04T06:00:00.000Z,calder-head,54.3100,10.1500,0
2026-05-04T06:00:00.500Z,sound-light,54.3400,10.2000,0
2026-05-04T06:00:02.500Z,calder-head,54.3101,10.1502,1
2026-05-04T06:00:03.000Z,sound-light,54.3401,10.2003,1
"""

#: Malformed feeds: (case id, CSV text, line, field, words the message must hold).
BAD_FEEDS = [
    *[(f"missing-{c}", feed_without(c), 1, c, "missing required column")
      for c in ("time", "sensor", "lat", "lon")],
    ("lat-text", feed_edit("lat", "north"), 4, "lat", "found 'north'"),
    ("lat-range", feed_edit("lat", "91.5"), 4, "lat", "latitude"),
    ("lat-nan", feed_edit("lat", "nan"), 4, "lat", "found 'nan'"),
    ("lat-empty", feed_edit("lat", ""), 4, "lat", "empty value"),
    ("lon-range", feed_edit("lon", "-180.5"), 4, "lon", "longitude"),
    ("lon-text", feed_edit("lon", "10,15"), 4, "column 6", "expected 5 fields"),
    ("time-empty", feed_edit("time", ""), 4, "time", "empty value"),
    ("time-no-zone", feed_edit("time", "2026-05-04T06:00:02.500"), 4, "time",
     "zone designator"),
    ("time-bad-date", feed_edit("time", "2026-05-04T25:00:02Z"), 4, "time", "cannot read"),
    ("time-garbage", feed_edit("time", "soon"), 4, "time", "found 'soon'"),
    ("time-mixed-epoch", feed_edit("time", "1777874402.5"), 4, "time", "mixes time forms"),
    ("time-mixed-iso", feed_edit("time", "2026-05-04T06:00:02.500Z", text=CALDER_FEED_EPOCH),
     4, "time", "mixes time forms"),
    ("time-epoch-negative", feed_edit("time", "-5", text=CALDER_FEED_EPOCH), 4, "time",
     "epoch seconds"),
    ("sensor-unknown", feed_edit("sensor", "mast-west"), 4, "sensor",
     "known sensors: 'calder-head', 'sound-light'"),
    ("sensor-empty", feed_edit("sensor", ""), 4, "sensor", "empty value"),
    ("sigma-zero", feed_edit("sigma_m", "0"), 4, "sigma_m", "positive"),
    ("sigma-negative", feed_edit("sigma_m", "-2.5"), 4, "sigma_m", "positive"),
    ("sigma-text", feed_edit("sigma_m", "small"), 4, "sigma_m", "found 'small'"),
    ("scan-fraction", feed_edit("scan", "1.5", text=CALDER_FEED_SCAN), 4, "scan", "integer"),
    ("scan-negative", feed_edit("scan", "-1", text=CALDER_FEED_SCAN), 4, "scan", "integer"),
    ("scan-text", feed_edit("scan", "first", text=CALDER_FEED_SCAN), 4, "scan", "found 'first'"),
    ("scan-empty", feed_edit("scan", "", text=CALDER_FEED_SCAN), 4, "scan", "empty value"),
    ("too-many-fields", CALDER_FEED.replace("10.1502,", "10.1502,,7"), 4, "column 6",
     "expected 5 fields as in the header, found 6"),
    ("too-few-fields", CALDER_FEED.replace("10.1502,", "10.1502"), 4, "sigma_m",
     "expected 5 fields as in the header, found 4"),
    ("blank-line-then-bad", CALDER_FEED.replace("\n2026-05-04T06:00:02", "\n\n2026-05-04T06:00:02")
     .replace("54.3101", "x"), 5, "lat", "found 'x'"),
    ("duplicate-column", CALDER_FEED.replace("sigma_m", "lat", 1), 1, "lat", "more than once"),
    ("header-only-wrong", "time,sensor,latitude,lon\n", 1, "lat", "found: 'time'"),
]


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    """The bundled Port Calder demo reviewed once per test session (no screenshots): its folder.

    With a display time zone, the widest times the pages write.
    """
    from harbourwatch.pipeline import demo_paths, run_review

    paths = demo_paths()
    out = tmp_path_factory.mktemp("demo-run")
    run_review([paths["feed"]], sensors=paths["sensors"], zones=paths["zones"],
               rules=paths["rules"], out=out, progress=False, display_tz="Europe/Oslo")
    return out


@pytest.fixture(scope="module")
def browser():  # type: ignore[no-untyped-def]
    """Headless Chromium (Debian's), one per test module; the browser tests skip without it."""
    from playwright import sync_api

    from harbourwatch.report.screenshot import CHROMIUM, CHROMIUM_ARGS

    with sync_api.sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()
