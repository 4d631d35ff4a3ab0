"""Loading and validating every input of a review run, in a fixed order.

:func:`load_inputs` is the first step of a review run: it reads the sensors,
zones, rules and plot feeds, checks each once at the edge, and groups the
plots into scans. Any problem raises :class:`~harbourwatch.errors.InputError`
naming the file, line and field, before any computation starts.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from os import PathLike

from harbourwatch.io.feeds import PlotTable, Scan, read_feeds, scan_arrays
from harbourwatch.io.gaps import check_gaps
from harbourwatch.io.plotstore import store_plot_columns
from harbourwatch.io.records import (
    RuleConfig,
    RuleSchema,
    SensorConfig,
    ZoneConfig,
)
from harbourwatch.io.table_reader import release_unused_memory
from harbourwatch.io.toml_files import load_rules, load_sensors
from harbourwatch.io.zone_file import load_zones

__all__ = ["RunInputs", "load_inputs"]


@dataclass(frozen=True, kw_only=True, eq=False)
class RunInputs:
    """Everything a review run reads, validated.

    Attributes
    ----------
    sensors, zones, rules
        The parsed configuration records, in file order.
    plots
        All plots, merged and sorted by time; the positions, ``sigma_m``, scan
        numbers and lines are :class:`~harbourwatch.io.plotstore.StoredColumn`
        (on disk, read by index), time and sensor are in memory.
    scans
        The plots grouped into scans (see :func:`harbourwatch.io.feeds.group_scans`), as a
        :class:`~harbourwatch.io.plotstore.ScanTable` (records made when read).
    feed_paths, sensors_path, zones_path, rules_path
        The input paths as given.
    checksums
        Hex SHA-256 of every input file's bytes by path, taken while reading
        it (every input is read once, so a FIFO works).
    warnings
        One line per accepted oddity of the inputs (gaps allowed by ``allow_gaps``).
    """

    sensors: tuple[SensorConfig, ...]
    zones: tuple[ZoneConfig, ...]
    rules: tuple[RuleConfig, ...]
    plots: PlotTable
    scans: Sequence[Scan]
    feed_paths: tuple[str, ...]
    sensors_path: str
    zones_path: str
    rules_path: str
    checksums: Mapping[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()


def load_inputs(
    feeds: Sequence[str | PathLike[str]],
    *,
    sensors: str | PathLike[str],
    zones: str | PathLike[str],
    rules: str | PathLike[str],
    rule_schemas: Mapping[str, RuleSchema] | None = None,
    allow_gaps: bool = False,
    window: tuple[float, float] | None = None,
) -> RunInputs:
    """Load and validate sensors, zones, rules and feeds (in that order), then form scans.

    Parameters
    ----------
    feeds
        Plot feed files (CSV, ``.csv.gz``, Parquet), merged.
    sensors, zones, rules
        The sensor TOML, zones GeoJSON and rules TOML files.
    rule_schemas
        Rule kinds by name, to validate the rules strictly (see
        :func:`harbourwatch.io.records.load_rules`).
    allow_gaps
        Accept silences of every radar longer than
        :data:`~harbourwatch.io.gaps.MAX_GAP_S` (named in ``warnings``);
        without it such a feed is refused (see :func:`~harbourwatch.io.gaps.check_gaps`).
    window
        Optional UTC time window ``(t0, t1)`` in epoch seconds: only plots with
        ``t0 <= time < t1`` are kept (see :func:`harbourwatch.io.feeds.read_feeds`).

    Raises
    ------
    InputError
        The first problem found, naming its file, line and field.
    """
    digests: dict[str, str] = {}
    sensor_cfg = load_sensors(sensors, digests=digests)
    zone_cfg = load_zones(zones, digests=digests)
    rule_cfg = load_rules(rules, zone_cfg, rule_schemas, digests=digests)
    plots = read_feeds(feeds, sensor_cfg, window=window)
    digests.update(zip(plots.files, plots.sha256, strict=True))
    warnings = check_gaps(plots, allow_gaps=allow_gaps)
    # the bulky columns and the scans' plot rows go to a temporary file: the rest of the run
    # reads them a block at a time
    plots, scans = store_plot_columns(plots, scans=scan_arrays(plots, sensor_cfg))
    assert scans is not None  # given the scans, their table comes back
    release_unused_memory()
    return RunInputs(
        sensors=sensor_cfg, zones=zone_cfg, rules=rule_cfg, plots=plots, scans=scans,
        feed_paths=tuple(str(f) for f in feeds), sensors_path=str(sensors),
        zones_path=str(zones), rules_path=str(rules), checksums=digests,
        warnings=warnings,
    )
