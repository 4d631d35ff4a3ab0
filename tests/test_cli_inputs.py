"""Every malformed input, through load_inputs and through the command line (exit status 2).

Each case breaks one Port Calder file and names where the message must point:
the file, the line (None where no line applies: a missing file, no sensor at
all) and the field.
"""

from __future__ import annotations

import gzip
import json
import subprocess
import sys
from collections.abc import Callable

import pandas as pd
import pytest
from conftest import BAD_FEEDS, CALDER_ZONES_DOC, CalderFiles, line_of

from harbourwatch.errors import InputError
from harbourwatch.io.inputs import RunInputs, load_inputs

try:
    from harbourwatch.rules.evaluate import RULE_SCHEMAS
except ImportError:  # rules registry not there yet: validate leniently
    RULE_SCHEMAS = None

Expect = tuple[str, "int | None", "str | None", str]  # file, line, field, words
Case = Callable[[CalderFiles], Expect]


def _feed(text: str | bytes, line: int | None, field: str | None, words: str) -> Case:
    def make(c: CalderFiles) -> Expect:
        (c.feed.write_bytes if isinstance(text, bytes) else c.feed.write_text)(text)
        return str(c.feed), line, field, words
    return make


def _toml(which: str, old: str, new: str, field: str | None, words: str, *,
          at: str | None = None, nth: int = 1) -> Case:
    """Replace ``old`` by ``new`` in the sensors/rules file; expect the line holding ``at``."""
    def make(c: CalderFiles) -> Expect:
        text = getattr(c, f"{which}_text")
        changed = text.replace(old, new, 1)
        assert changed != text
        getattr(c, which).write_text(changed)
        line = line_of(changed, at if at is not None else new.strip().splitlines()[-1], nth)
        return str(getattr(c, which)), line, field, words
    return make


def _zones(edit: Callable[[dict], None], field: str | None, words: str, needle: str,
           nth: int = 1) -> Case:
    def make(c: CalderFiles) -> Expect:
        doc = json.loads(json.dumps(CALDER_ZONES_DOC))
        edit(doc)
        text = json.dumps(doc, indent=2) + "\n"
        c.zones.write_text(text)
        return str(c.zones), line_of(text, needle, nth), field, words
    return make


def _missing(which: str) -> Case:
    def make(c: CalderFiles) -> Expect:
        getattr(c, which).unlink()
        return str(getattr(c, which)), None, None, "cannot read the file"
    return make


def _gz_feed(c: CalderFiles) -> Expect:
    gz = c.dir / "plots.csv.gz"
    gz.write_bytes(gzip.compress(c.feed_text.replace("54.3101", "-95").encode()))
    c.feed = gz
    return str(gz), 4, "lat", "latitude"


def _parquet_feed(c: CalderFiles) -> Expect:
    pq = c.dir / "plots.parquet"
    frame = pd.read_csv(c.feed, dtype=str, keep_default_na=False)
    frame.loc[2, "sensor"] = "mast-west"
    frame.to_parquet(pq)
    c.feed = pq
    return str(pq), 4, "sensor", "Parquet row 3"


def _empty_sensors(c: CalderFiles) -> Expect:
    c.sensors.write_text("# Port Calder: no radars listed\n")
    return str(c.sensors), None, "sensor", "at least one"


CASES: dict[str, Case] = {
    # --- feeds ---
    **{f"feed-{cid}": _feed(text, line, field, words)
       for cid, text, line, field, words in BAD_FEEDS},
    "feed-zero-bytes": _feed(b"", 1, None, "no header"),
    "feed-bad-utf8": _feed(b"time,sensor,lat,lon\n2026-05-04T06:00:00Z,caf\xe9,54.3,10.1\n",
                           2, "sensor", "UTF-8"),
    "feed-missing": _missing("feed"),
    "feed-gzip-bad-lat": _gz_feed,
    "feed-parquet-unknown-sensor": _parquet_feed,
    # --- sensors ---
    "sensors-negative-sigma": _toml("sensors", "range_sigma_m = 15.0", "range_sigma_m = -3",
                                    "range_sigma_m", "expected a positive number, found -3"),
    "sensors-lat-range": _toml("sensors", "lat = 54.3550", "lat = 91", "lat", "-90 to 90"),
    "sensors-lon-range": _toml("sensors", "lon = 10.2100", "lon = 200", "lon", "-180 to 180"),
    "sensors-pd-one": _toml("sensors", "detection_probability = 0.85",
                            "detection_probability = 1.0", "detection_probability",
                            "strictly below 1"),
    "sensors-bool": _toml("sensors", "max_range_m = 18000", "max_range_m = true", "max_range_m",
                          "found true"),
    "sensors-string-number": _toml("sensors", "scan_period_s = 3.0", 'scan_period_s = "3"',
                                   "scan_period_s", "found '3'"),
    "sensors-zero-period": _toml("sensors", "scan_period_s = 3.0", "scan_period_s = 0",
                                 "scan_period_s", "positive"),
    "sensors-negative-clutter": _toml("sensors", "false_plots_per_scan = 4.0",
                                      "false_plots_per_scan = -1", "false_plots_per_scan",
                                      "zero or above"),
    "sensors-missing-key": _toml("sensors", "bearing_sigma_deg = 0.5\n", "", "bearing_sigma_deg",
                                 "missing", at="[[sensor]]", nth=2),
    "sensors-unknown-key": _toml("sensors", "max_range_m = 18000",
                                 "max_range_m = 18000\nbeam_width_deg = 1.2", "beam_width_deg",
                                 "valid keys: id, lat, lon"),
    "sensors-duplicate-id": _toml("sensors", 'id = "sound-light"', 'id = "calder-head"', "id",
                                  "duplicate", at='id = "calder-head"', nth=2),
    "sensors-syntax": _toml("sensors", "lat = 54.3550", "lat = 54.3550 54", None, "TOML"),
    "sensors-empty": _empty_sensors,
    "sensors-missing": _missing("sensors"),
    # --- zones ---
    "zones-invalid-json": _toml("zones", '"type": "FeatureCollection",',
                                '"type": "FeatureCollection",,', None, "JSON"),
    "zones-not-collection": _zones(lambda d: d.update(type="Feature"), "type",
                                   "FeatureCollection", '"type": "Feature"'),
    "zones-point": _zones(lambda d: d["features"][1]["geometry"].update(
        type="Point", coordinates=[10.2, 54.4]), "geometry.type", "feature 2",
        '"id": "firing-range"'),
    "zones-missing-id": _zones(lambda d: d["features"][2]["properties"].clear(),
                               "properties.id", "missing", '"type": "Feature"', nth=3),
    "zones-number-id": _zones(lambda d: d["features"][2]["properties"].update(id=5),
                              "properties.id", "string", '"type": "Feature"', nth=3),
    "zones-duplicate-id": _zones(lambda d: d["features"][2]["properties"].update(
        id="firing-range"), "properties.id", "duplicate", '"id": "firing-range"', nth=2),
    "zones-name-type": _zones(lambda d: d["features"][0]["properties"].update(name=1),
                              "properties.name", "string", '"id": "inner-basin"'),
    "zones-self-intersection": _zones(lambda d: d["features"][2]["geometry"].update(
        coordinates=[[[10.18, 54.33], [10.24, 54.37], [10.24, 54.33], [10.18, 54.37],
                      [10.18, 54.33]]]), "geometry", "Self-intersection", '"id": "outer-roads"'),
    "zones-lon-range": _zones(lambda d: d["features"][2]["geometry"]["coordinates"][0]
                              .__setitem__(2, [181.0, 54.37]), "geometry.coordinates",
                              "longitude", '"id": "outer-roads"'),
    "zones-missing": _missing("zones"),
    # --- rules ---
    "rules-unknown-kind": _toml("rules", 'kind = "loiter"', 'kind = "idle"', "kind",
                                "valid kinds:"),
    "rules-unknown-key": _toml("rules", "max_speed_kn = 1.5", "max_speed_kn = 1.5\nmax_spd = 2",
                               "max_spd", "valid keys: id, kind, zone, min_probability"),
    "rules-missing-param": _toml("rules", "max_distance_m = 150\n", "", "max_distance_m",
                                 "missing", at="[[rule]]", nth=3),
    "rules-missing-zone": _toml("rules", 'zone = "firing-range"\n', "", "zone", "needs a zone",
                                at="[[rule]]", nth=2),
    "rules-unknown-zone": _toml("rules", 'zone = "firing-range"', 'zone = "firing-rang"', "zone",
                                "valid zone ids: inner-basin, firing-range, outer-roads"),
    "rules-bool-param": _toml("rules", "max_speed_kn = 3.0", "max_speed_kn = false",
                              "max_speed_kn", "found false"),
    "rules-negative-param": _toml("rules", "min_duration_min = 15", "min_duration_min = -15",
                                  "min_duration_min", "found -15"),
    "rules-probability": _toml("rules", "min_probability = 0.7", "min_probability = 7",
                               "min_probability", "from 0 to 1"),
    "rules-duplicate-id": _toml("rules", 'id = "roads-meeting"', 'id = "basin-loiter"', "id",
                                "duplicate", at='id = "basin-loiter"', nth=2),
    "rules-syntax": _toml("rules", "[[rule]]\nid = \"range", "[[rule]\nid = \"range", None,
                          "TOML", at="[[rule]", nth=2),
    "rules-missing": _missing("rules"),
}


def _check(err_text: str, file: str, line: int | None, field: str | None, words: str) -> None:
    where = [file] + ([f"line {line}"] if line is not None else []) + (
        [f"field '{field}'"] if field is not None else [])
    assert ", ".join(where) + ": " in err_text
    if line is None:
        assert ", line " not in err_text
    assert words in err_text


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_load_inputs_rejects(calder, case):
    file, line, field, words = CASES[case](calder)
    with pytest.raises(InputError) as info:
        load_inputs([calder.feed], sensors=calder.sensors, zones=calder.zones,
                    rules=calder.rules, rule_schemas=RULE_SCHEMAS)
    err = info.value
    assert (err.file, err.line, err.field) == (file, line, field)
    _check(str(err), file, line, field, words)


def test_load_inputs_reads_everything(calder):
    inp = load_inputs([calder.feed], sensors=calder.sensors, zones=calder.zones,
                      rules=calder.rules, rule_schemas=RULE_SCHEMAS)
    assert isinstance(inp, RunInputs)
    assert [s.id for s in inp.sensors] == ["calder-head", "sound-light"]
    assert [z.id for z in inp.zones] == ["inner-basin", "firing-range", "outer-roads"]
    assert [r.id for r in inp.rules] == ["basin-loiter", "range-crossing", "roads-meeting"]
    assert len(inp.plots) == 4 and inp.feed_paths == (str(calder.feed),)
    # Period rule: calder-head plots 2.5 s apart (period 2.5 s), sound-light 2.5 s (period 3 s).
    # calder-head: 0 s and 2.5 s fall in revolutions 0 and 1 (a boundary plot goes to the later
    # one); sound-light: 0.5 s and 3.0 s both fall in its revolution 0.
    assert [(s.sensor, s.number, len(s.plots)) for s in inp.scans] == [(0, 0, 1), (0, 1, 1),
                                                                         (1, 0, 2)]
    assert inp.sensors_path == str(calder.sensors) and inp.rules_path == str(calder.rules)


def test_sensors_are_checked_before_the_rest(calder):
    calder.sensors.write_text(calder.sensors_text.replace("lat = 54.3012", "lat = 540"))
    calder.zones.write_text("not json")
    calder.feed.write_bytes(b"")
    with pytest.raises(InputError) as info:
        load_inputs([calder.feed], sensors=calder.sensors, zones=calder.zones, rules=calder.rules)
    assert info.value.file == str(calder.sensors)


def _argv(c: CalderFiles) -> list[str]:
    return ["run", str(c.feed), "--sensors", str(c.sensors), "--zones", str(c.zones),
            "--rules", str(c.rules), "--out", str(c.dir / "out"), "--quiet"]


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_cli_run_exits_2_with_located_message(calder, capsys, case):
    pytest.importorskip("harbourwatch.pipeline")
    from harbourwatch.cli import main

    file, line, field, words = CASES[case](calder)
    status = main(_argv(calder))
    err = capsys.readouterr().err
    assert status == 2, err
    assert err.startswith("harbourwatch: error: ") and err.count("\n") == 1  # one line
    _check(err, file, line, field, words)


def test_python_m_harbourwatch_run_exits_2(calder):
    pytest.importorskip("harbourwatch.pipeline")
    file, line, field, words = CASES["sensors-negative-sigma"](calder)
    proc = subprocess.run([sys.executable, "-m", "harbourwatch", *_argv(calder)],
                          capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    _check(proc.stderr, file, line, field, words)

