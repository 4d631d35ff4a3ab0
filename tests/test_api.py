"""The drawn public API: what `harbourwatch` exports, and that each name exists."""

from __future__ import annotations

import harbourwatch


def test_all_names_exist_and_are_unique():
    assert len(set(harbourwatch.__all__)) == len(harbourwatch.__all__)
    for name in harbourwatch.__all__:
        assert hasattr(harbourwatch, name), name


def test_public_list_is_the_drawn_one():
    expected = {
        "__version__", "HarbourwatchError", "InputError", "SensorConfig", "ZoneConfig",
        "RuleConfig", "FilterSettings", "LocalFrame", "Trajectory", "TrajectorySet",
        "AsSeenTable",
    }
    assert expected <= set(harbourwatch.__all__)


def test_input_error_is_a_value_error_and_names_location():
    err = harbourwatch.InputError("expected a number", file="a.csv", line=3, field="lat")
    assert isinstance(err, ValueError) and isinstance(err, harbourwatch.HarbourwatchError)
    assert str(err) == "a.csv, line 3, field 'lat': expected a number"
