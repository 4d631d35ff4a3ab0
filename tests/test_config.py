"""Sensor TOML, zones GeoJSON and rules TOML: good files parse, bad ones are located."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from conftest import CALDER_ZONES_DOC, line_of
from shapely.geometry import MultiPolygon, Polygon

from harbourwatch.errors import InputError
from harbourwatch.io.records import ParamSpec, RuleSchema
from harbourwatch.io.toml_files import load_rules, load_sensors
from harbourwatch.io.zone_file import load_zones


def _raises(fn, *args, **kw) -> InputError:
    with pytest.raises(InputError) as info:
        fn(*args, **kw)
    return info.value


def _located(err: InputError, path: Path, line: int | None, field: str | None) -> None:
    """The message names the file, the line and the field, in InputError's format."""
    text = str(err)
    assert err.file == str(path) and text.startswith(str(path))
    assert err.line == line
    if line is not None:
        assert f"line {line}" in text
    assert err.field == field
    if field is not None:
        assert f"field '{field}'" in text


# --- sensors -------------------------------------------------------------------------------


def test_sensors_parse(calder):
    s1, s2 = load_sensors(calder.sensors)
    assert (s1.id, s1.lat_deg, s1.lon_deg) == ("calder-head", 54.3012, 10.1468)
    assert s1.scan_period_s == 2.5 and s1.range_sigma_m == 15.0 and s1.max_range_m == 22000.0
    assert (s2.id, s2.detection_probability, s2.false_plots_per_scan) == ("sound-light", 0.85, 4.0)
    assert isinstance(s1.max_range_m, float)


def test_sensor_message_matches_the_documented_example(calder):
    calder.sensors.write_text(calder.sensors_text.replace("range_sigma_m = 15.0",
                                                          "range_sigma_m = -3"))
    err = _raises(load_sensors, calder.sensors)
    assert str(err) == (f"{calder.sensors}, line 7, field 'range_sigma_m': "
                        "expected a positive number, found -3")


SENSOR_BAD_VALUES = [
    # (key, bad TOML value, words the message must hold)
    ("lat", "91.0", "from -90 to 90"),
    ("lat", "-90.5", "from -90 to 90"),
    ("lat", '"54.3"', "found '54.3' (text, not a number: remove the quotes)"),
    ("max_range_m", '"22000"', "remove the quotes"),
    ("lon", "180.01", "from -180 to 180"),
    ("scan_period_s", "0", "positive"),
    ("scan_period_s", "true", "found true"),
    ("range_sigma_m", "nan", "found nan"),
    ("bearing_sigma_deg", "0.0", "positive"),
    ("detection_probability", "1.0", "strictly below 1"),
    ("detection_probability", "0", "above 0"),
    ("detection_probability", "false", "found false"),
    ("false_plots_per_scan", "-0.5", "zero or above"),
    ("max_range_m", "[22000]", "found an array"),
    ("max_range_m", "inf", "found inf"),
    ("id", "7", "non-empty string"),
    ("id", '""', "non-empty string"),
    ("id", '"mole\\u001b[2Jhead"', "control character U+001B"),  # would clear a terminal
    # bidirectional controls (Unicode Standard Annex #9, table 4 and section 2.6)
    ("id", '"mole\\u202Edaeh"', "bidirectional control character U+202E"),
    ("id", '"mole\\u2066head"', "bidirectional control character U+2066"),
]


@pytest.mark.parametrize(("key", "value", "words"), SENSOR_BAD_VALUES)
def test_sensor_bad_value_is_located(calder, key, value, words):
    # Break the key in the second sensor, so the block scanner must pick the right one.
    lines = calder.sensors_text.splitlines()
    at = line_of(calder.sensors_text, f"{key} =", nth=2)
    lines[at - 1] = f"{key} = {value}"
    calder.sensors.write_text("\n".join(lines) + "\n")
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, at, key)
    assert words in err.message


def test_sensor_missing_key_points_at_its_table(calder):
    text = calder.sensors_text.replace("range_sigma_m = 20.0\n", "")
    calder.sensors.write_text(text)
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, line_of(text, "[[sensor]]", nth=2), "range_sigma_m")
    assert "missing" in err.message


def test_sensor_unknown_key_lists_valid_keys(calder):
    text = calder.sensors_text.replace("max_range_m = 18000", "max_range_m = 18000\nrange_m = 3")
    calder.sensors.write_text(text)
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, line_of(text, "range_m = 3"), "range_m")
    assert "scan_period_s" in err.message and "detection_probability" in err.message


def test_sensor_duplicate_id(calder):
    text = calder.sensors_text.replace('"sound-light"', '"calder-head"')
    calder.sensors.write_text(text)
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, line_of(text, 'id = "calder-head"', nth=2), "id")
    assert "duplicate" in err.message and "line 3" in err.message


def test_sensor_toml_syntax_error_gives_line(calder):
    text = calder.sensors_text.replace("lon = 10.2100", "lon = 10.21.00")
    calder.sensors.write_text(text)
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, line_of(text, "10.21.00"), None)
    assert "TOML" in err.message


@pytest.mark.parametrize("text", ["", "# nothing here\n"])
def test_no_sensor_is_an_error(calder, text):
    calder.sensors.write_text(text)
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, None, "sensor")


def test_single_table_instead_of_array_of_tables(calder):
    calder.sensors.write_text('[sensor]\nid = "calder-head"\n')
    err = _raises(load_sensors, calder.sensors)
    _located(err, calder.sensors, 1, "sensor")


def test_unknown_top_level_key(calder):
    text = 'radar = "x"\n' + calder.sensors_text
    calder.sensors.write_text(text)
    _located(_raises(load_sensors, calder.sensors), calder.sensors, 1, "radar")


def test_missing_and_undecodable_files(tmp_path):
    missing = tmp_path / "nope.toml"
    _located(_raises(load_sensors, missing), missing, None, None)
    bad = tmp_path / "latin1.toml"
    bad.write_bytes(b'[[sensor]]\nid = "caf\xe9"\n')
    _located(_raises(load_sensors, bad), bad, 2, None)


# --- zones ---------------------------------------------------------------------------------


def test_zones_parse(calder):
    basin, firing, roads = load_zones(calder.zones)
    assert (basin.id, basin.name, basin.kind) == ("inner-basin", "Calder Inner Basin", "anchorage")
    # Name defaults to the id, kind to "".
    assert (firing.name, firing.kind) == ("firing-range", "")
    # Geometry equals the polygons built independently by shapely from the same coordinates.
    coords = CALDER_ZONES_DOC["features"][0]["geometry"]["coordinates"]
    assert isinstance(basin.geometry, Polygon) and len(basin.geometry.interiors) == 1
    assert basin.geometry.equals(Polygon(coords[0], coords[1:]))
    assert isinstance(firing.geometry, MultiPolygon) and len(firing.geometry.geoms) == 2
    assert roads.kind == "fairway"


def _write_zones(calder, doc) -> str:
    text = json.dumps(doc, indent=2) + "\n"
    calder.zones.write_text(text)
    return text


def _doc():
    return json.loads(json.dumps(CALDER_ZONES_DOC))


def test_zones_invalid_json_gives_line(calder):
    text = calder.zones_text.replace('"kind": "fairway"', '"kind": "fairway",')
    calder.zones.write_text(text)
    err = _raises(load_zones, calder.zones)
    assert err.file == str(calder.zones) and err.line == line_of(text, '"fairway",') + 1
    assert "JSON" in err.message


def test_zones_not_a_feature_collection(calder):
    doc = _doc()
    doc["type"] = "GeometryCollection"
    _write_zones(calder, doc)
    _located(_raises(load_zones, calder.zones), calder.zones, 2, "type")


@pytest.mark.parametrize(("edit", "field", "words"), [
    (lambda f: f["geometry"].update(type="Point", coordinates=[10.2, 54.3]),
     "geometry.type", "Polygon or MultiPolygon"),
    (lambda f: f["properties"].update(id=17), "properties.id", "string"),
    (lambda f: f["properties"].update(name=["a"]), "properties.name", "string"),
    (lambda f: f["properties"].update(kind=3), "properties.kind", "string"),
    (lambda f: f["properties"].update(name="Outer\nRoads"), "properties.name", "U+000A"),
    (lambda f: f["properties"].update(kind="anchorage\t"), "properties.kind", "U+0009"),
    (lambda f: f["geometry"].update(coordinates=[[[10.18, 54.33], [10.24, 54.37],
                                                  [10.24, 54.33], [10.18, 54.37],
                                                  [10.18, 54.33]]]),
     "geometry", "Self-intersection"),
    (lambda f: f["geometry"]["coordinates"][0].__setitem__(1, [190.0, 54.33]),
     "geometry.coordinates", "longitude"),
    (lambda f: f["geometry"]["coordinates"][0].__setitem__(1, [10.2, 91.0]),
     "geometry.coordinates", "latitude"),
    (lambda f: f["geometry"]["coordinates"][0].__setitem__(4, [10.181, 54.33]),
     "geometry.coordinates", "not closed"),
    (lambda f: f["geometry"].update(coordinates=[[[10.18, 54.33], [10.24, 54.33],
                                                  [10.18, 54.33]]]),
     "geometry.coordinates", "at least 4"),
])
def test_zone_bad_feature_is_named_and_located(calder, edit, field, words):
    doc = _doc()
    edit(doc["features"][2])
    text = _write_zones(calder, doc)
    err = _raises(load_zones, calder.zones)
    fid = doc["features"][2]["properties"]["id"]
    # Line of the feature's id when it is a string, else of its "type": "Feature".
    needle = '"id": "outer-roads"' if isinstance(fid, str) else '"type": "Feature"'
    _located(err, calder.zones, line_of(text, needle, nth=1 if isinstance(fid, str) else 3),
             field)
    assert "feature 3" in err.message and words in err.message


def test_zone_id_with_a_control_character_is_refused(calder):
    doc = _doc()
    doc["features"][1]["properties"]["id"] = "inner\u0007basin"  # the terminal bell
    _write_zones(calder, doc)
    err = _raises(load_zones, calder.zones)
    assert err.field == "properties.id" and "U+0007" in err.message and err.line is not None


@pytest.mark.parametrize("code", [*range(0x202A, 0x202F), *range(0x2066, 0x206A),
                                  0x200E, 0x200F, 0x061C])
@pytest.mark.parametrize("prop", ["id", "name"])
def test_zone_id_or_name_with_a_bidirectional_control_is_refused(calder, code, prop):
    # the explicit formatting characters and the implicit marks of Unicode Standard
    # Annex #9 (table 4, section 2.6): an override would reverse the rest of a narrative
    doc = _doc()
    doc["features"][1]["properties"][prop] = f"inner{chr(code)}basin"
    _write_zones(calder, doc)
    err = _raises(load_zones, calder.zones)
    assert err.field == f"properties.{prop}" and f"U+{code:04X}" in err.message
    assert "bidirectional control character" in err.message
    assert err.file == str(calder.zones) and err.line is not None


def test_zone_missing_and_duplicate_id(calder):
    doc = _doc()
    del doc["features"][1]["properties"]["id"]
    text = _write_zones(calder, doc)
    err = _raises(load_zones, calder.zones)
    _located(err, calder.zones, line_of(text, '"type": "Feature"', nth=2), "properties.id")
    assert "feature 2" in err.message
    doc = _doc()
    doc["features"][2]["properties"]["id"] = "inner-basin"
    text = _write_zones(calder, doc)
    err = _raises(load_zones, calder.zones)
    assert err.field == "properties.id" and "duplicate" in err.message
    # the duplicate's own line, and the first one's in the message
    assert err.line == line_of(text, '"id": "inner-basin"', nth=2)
    first = line_of(text, '"id": "inner-basin"')
    assert err.line != first and f"first at line {first}" in err.message


def test_zone_missing_file(tmp_path):
    p = tmp_path / "zones.geojson"
    _located(_raises(load_zones, p), p, None, None)


# --- rules ---------------------------------------------------------------------------------

SCHEMAS = {
    "loiter": RuleSchema(kind="loiter", params=(
        ParamSpec(name="min_duration_min", min_value=0.0),
        ParamSpec(name="max_speed_kn", min_value=0.0, max_value=50.0),
    )),
    "pass-through": RuleSchema(kind="pass-through", params=()),
    "rendezvous": RuleSchema(kind="rendezvous", zone_required=False, params=(
        ParamSpec(name="max_distance_m", min_value=1.0),
        ParamSpec(name="min_duration_min"),
        ParamSpec(name="max_speed_kn", required=False),
    )),
}


def test_rules_parse_with_given_and_registered_schemas(calder):
    zones = load_zones(calder.zones)
    for schemas in (None, SCHEMAS):  # None: the registered kinds
        loiter, crossing, meeting = load_rules(calder.rules, zones, schemas)
        assert (loiter.id, loiter.kind, loiter.zone) == ("basin-loiter", "loiter", "inner-basin")
        assert dict(loiter.params) == {"min_duration_min": 15, "max_speed_kn": 1.5}
        assert loiter.min_probability == 0.5 and crossing.min_probability == 0.7
        assert meeting.zone is None and meeting.params["max_distance_m"] == 150
        assert loiter.source == str(calder.rules)
        assert (loiter.line, crossing.line, meeting.line) == (1, 8, 14)
        assert loiter.param_lines["max_speed_kn"] == 6 and crossing.param_lines["zone"] == 11


RULE_CASES = [
    # (old text, new text, field, words, schemas needed)
    ('kind = "loiter"', 'kind = "lurk"', "kind", "valid kinds: loiter, pass-through, rendezvous",
     True),
    ("max_speed_kn = 1.5", "max_speed_kn = 1.5\nmax_sped_kn = 2", "max_sped_kn",
     "valid keys: id, kind, zone, min_probability, min_duration_min, max_speed_kn", True),
    ("min_duration_min = 15\n", "", "min_duration_min", "missing", True),
    ('zone = "firing-range"\n', "", "zone", "needs a zone", True),
    ("max_speed_kn = 1.5", "max_speed_kn = 60", "max_speed_kn", "from 0 to 50", True),
    ("max_distance_m = 150", "max_distance_m = 0.5", "max_distance_m", "at least 1", True),
    ("max_speed_kn = 1.5", "max_speed_kn = true", "max_speed_kn", "found true", False),
    ("max_speed_kn = 1.5", 'max_speed_kn = "fast"', "max_speed_kn", "found 'fast'", False),
    ("max_speed_kn = 1.5", 'max_speed_kn = "1.5"', "max_speed_kn", "remove the quotes", False),
    ('zone = "inner-basin"', 'zone = "inner-basn"', "zone",
     "valid zone ids: inner-basin, firing-range, outer-roads", False),
    ('id = "range-crossing"', 'id = "basin-loiter"', "id", "duplicate", False),
    ('id = "range-crossing"\n', "", "id", "missing", False),
    ('kind = "pass-through"', "kind = 3", "kind", "non-empty string", False),
    ('id = "range-crossing"', 'id = "range\\rcrossing"', "id", "control character U+000D", False),
    ('id = "range-crossing"', 'id = "range\\u202Egnissorc"', "id",
     "bidirectional control character U+202E", False),
    ('id = "range-crossing"', 'id = "range\\u200Fcrossing"', "id",
     "bidirectional control character U+200F", False),
    ("min_probability = 0.7", "min_probability = 1.5", "min_probability", "from 0 to 1", False),
    ("min_probability = 0.7", "min_probability = false", "min_probability", "found false", False),
]


@pytest.mark.parametrize(("old", "new", "field", "words", "strict"), RULE_CASES)
def test_rule_problem_is_located(calder, old, new, field, words, strict):
    text = calder.rules_text.replace(old, new, 1)
    assert text != calder.rules_text
    calder.rules.write_text(text)
    zones = load_zones(calder.zones)
    err = _raises(load_rules, calder.rules, zones, SCHEMAS if strict else None)
    at = calder.rules_text.index(old)
    if new.strip() and field in new:  # the edited line (the last one when a line was added)
        line = text[:at].count("\n") + 1 + new.rstrip("\n").count("\n")
    else:  # the key is missing: the line of its [[rule]] header
        line = line_of(text, "[[rule]]", nth=calder.rules_text[:at].count("[[rule]]"))
    _located(err, calder.rules, line, field)
    assert words in err.message


def test_rule_syntax_error_and_missing_file(calder, tmp_path):
    text = calder.rules_text.replace('zone = "inner-basin"', 'zone = inner-basin')
    calder.rules.write_text(text)
    err = _raises(load_rules, calder.rules, ())
    _located(err, calder.rules, line_of(text, "zone = inner-basin"), None)
    p = tmp_path / "none.toml"
    _located(_raises(load_rules, p, ()), p, None, None)


def test_rules_file_may_be_empty(calder):
    calder.rules.write_text("# no rules tonight\n")
    assert load_rules(calder.rules, ()) == ()


def test_knot_is_1852_m_per_hour():
    from harbourwatch.units import KNOT_M_S

    # International nautical mile = 1852 m exactly (BIPM SI brochure, table 8).
    assert math.isclose(KNOT_M_S * 3600.0, 1852.0)
