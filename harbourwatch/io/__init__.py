"""The edges of a run: reading and validating inputs, writing outputs, time formats.

``records`` holds the frozen records every later stage works with
(sensors, zones, rules, filter settings); ``text``, ``toml_files`` and
``zone_file`` read the configuration files; ``table_reader`` and ``feeds``
read plot feeds into columns and scans; ``inputs`` loads all of a run's
inputs in order; ``atomic`` writes files whole or not at all; ``timefmt``
formats UTC times. Nothing here imports a later stage.
"""

from __future__ import annotations

from harbourwatch.io.inputs import RunInputs, load_inputs
from harbourwatch.io.records import FilterSettings, RuleConfig, SensorConfig, ZoneConfig

__all__ = ["RunInputs", "load_inputs", "FilterSettings", "RuleConfig", "SensorConfig", "ZoneConfig"]
