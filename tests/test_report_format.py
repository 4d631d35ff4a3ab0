"""How the pages write positions, distances and times; the empty feed; ``--display-tz``."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st
from shapely.geometry import box, shape

from harbourwatch.cli import main
from harbourwatch.errors import ParameterError
from harbourwatch.pipeline import demo_paths
from harbourwatch.report._fmt import display_zone, fmt_clock, fmt_distance, fmt_dm, fmt_sd2

DM = re.compile(r"(\d{2})°(\d{2})\.(\d{3})'([NS]) (\d{3})°(\d{2})\.(\d{3})'([EW])")


def _parse_dm(text: str) -> tuple[float, float]:
    m = DM.fullmatch(text)
    assert m, text
    lat = int(m[1]) + (int(m[2]) + int(m[3]) / 1000) / 60
    lon = int(m[5]) + (int(m[6]) + int(m[7]) / 1000) / 60
    return (lat if m[4] == "N" else -lat), (lon if m[8] == "E" else -lon)


@given(st.floats(-89.999, 89.999), st.floats(-179.999, 179.999))
def test_degrees_and_decimal_minutes_round_trip(lat: float, lon: float) -> None:
    # one degree is sixty minutes (common practice, no source); three decimals of a
    # minute, so the written value is within half a thousandth of a minute
    text = fmt_dm(lat, lon)
    back = _parse_dm(text)
    assert abs(back[0] - lat) <= 0.0005 / 60 + 1e-12
    assert abs(back[1] - lon) <= 0.0005 / 60 + 1e-12
    minutes = [int(m) for m in DM.fullmatch(text).group(2, 6)]  # type: ignore[union-attr]
    assert all(0 <= m < 60 for m in minutes)


def test_worked_positions_and_distances() -> None:
    # 57.52006667 N = 57 deg + 0.52006667 * 60 min = 57 deg 31.204 min (computed by hand)
    assert fmt_dm(57.52006667, -30.0353) == "57°31.204'N 030°02.118'W"
    assert fmt_dm(10.99999999, 0.0) == "11°00.000'N 000°00.000'E"  # no 60.000'
    # one nautical mile is 1852 m (BIPM SI brochure, 9th edition, table 8)
    assert fmt_distance(1851.0) == "1851 m" and fmt_distance(1852.0) == "1.00 NM"
    assert fmt_distance(5556.0) == "3.00 NM"
    assert fmt_sd2(4.26) == "±9 m (2σ)"


def test_clock_with_a_local_zone() -> None:
    t = 1_777_875_788.84  # 2026-05-04T06:23:08.840Z
    assert fmt_clock(t) == "06:23:08 UTC"
    # Norway keeps summer time (UTC+2, CEST) from the last Sunday of March to the last
    # Sunday of October (EU Directive 2000/84/EC)
    assert fmt_clock(t, tz="Europe/Oslo") == "06:23:08 UTC (08:23:08 CEST)"
    assert fmt_clock(t + 86400, day="2026-05-04") == "2026-05-05 06:23:08 UTC"
    # 23:30 UTC is already the next day in Oslo
    assert fmt_clock(1_777_937_400.0, tz="Europe/Oslo") == "23:30:00 UTC (2026-05-05 01:30:00 CEST)"
    with pytest.raises(ParameterError):
        display_zone("Calder/Sound")


def test_unknown_display_zone_is_a_usage_error(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    d = demo_paths()
    code = main(["run", str(d["feed"]), "--sensors", str(d["sensors"]), "--zones", str(d["zones"]),
                 "--rules", str(d["rules"]), "--out", str(tmp_path / "out"),
                 "--display-tz", "Calder/Sound"])
    assert code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert "unknown time zone 'Calder/Sound'" in err[-1]
    assert not (tmp_path / "out").exists()


def test_header_only_feed_says_so(tmp_path: Path) -> None:
    d = demo_paths()
    feed = tmp_path / "plots.csv"
    feed.write_text("time,sensor,lat,lon\n")  # a valid, empty feed (the file contract)
    out = tmp_path / "out"
    assert main(["run", str(feed), "--sensors", str(d["sensors"]), "--zones", str(d["zones"]),
                 "--rules", str(d["rules"]), "--out", str(out), "--quiet",
                 "--display-tz", "Europe/Oslo"]) == 0
    html = (out / "report.html").read_text("utf-8")
    assert "no plots in this feed" in html.lower()
    assert "1970" not in html
    assert 'id="hw-replay-data"' not in html  # no replay of nothing
    # the map frames every zone, not a corner of them (shapely on the WGS84 zones file)
    page = json.loads(re.search(r'id="hw-page-data">(.*?)</script>', html).group(1))  # type: ignore[union-attr]
    (lat0, lon0), (lat1, lon1) = page["fit"]
    frame = box(lon0, lat0, lon1, lat1)
    zones = [shape(f["geometry"]) for f in json.loads(d["zones"].read_text())["features"]]
    assert all(frame.contains(z) for z in zones)
    run = json.loads((out / "run.json").read_text())
    assert run["parameters"]["display_tz"] == "Europe/Oslo"


@given(st.text())
def test_script_json_round_trips_and_hides_script_syntax(text: str) -> None:
    from harbourwatch.report._html import script_json

    # RFC 8259: a \u escape is the same character as itself in a JSON string
    out = script_json({"name": text, "n": [1, 2]})
    assert json.loads(out) == {"name": text, "n": [1, 2]}
    assert not any(c in out for c in "<>&$`") and "\\\\" not in out
    assert "{{" not in out and "{%" not in out and "{#" not in out


def test_warnings_in_run_json_are_shown_escaped(tmp_path: Path) -> None:
    from dataclasses import replace

    from report_fixtures import make_inputs

    from harbourwatch.report import write_reports

    inputs = make_inputs(n_tracks=3)
    warn = "zone <Far> is 4,200 km from the nearest radar"
    inputs = replace(inputs, provenance={**inputs.provenance, "warnings": [warn]})
    html = write_reports(tmp_path, inputs)[0].read_text("utf-8")
    assert '<div class="hw-warn" role="note" id="hw-warnings">' in html
    assert "zone &lt;Far&gt; is 4,200 km" in html and warn not in html
