"""Reading plot feeds into columnar arrays and grouping them into scans.

A feed is CSV (optionally gzip-compressed, ``.csv.gz``) or Parquet with the
columns ``time``, ``sensor``, ``lat``, ``lon`` and optionally ``scan`` and
``sigma_m`` (see the file contract). Other columns are ignored. The format is
recognised from the file's first bytes (``PAR1`` for Parquet, the gzip magic
for compressed CSV), so the suffix does not matter.

Every value is checked once, here, with vectorised pyarrow/numpy code; the
first offending row of a file is reported as an
:class:`~harbourwatch.errors.InputError` naming the file, its 1-based physical
line (the header is line 1) and the column. Parquet files have no lines: a
problem in the Parquet row ``N`` (1-based) is reported as ``line N + 1``, the
line the row would have in the same data written as CSV, and the message says
``Parquet row N``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from os import PathLike
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.column_parse import Problem, parse_sensor, parse_time, time_form
from harbourwatch.io.column_parse import parse_float as _parse_float
from harbourwatch.io.columns import ColumnWriter, StoredColumn
from harbourwatch.io.records import SensorConfig
from harbourwatch.io.table_reader import Table, read_tables, release_unused_memory

__all__ = ["PlotTable", "Scan", "ScanArrays", "read_feeds", "group_scans", "scan_arrays"]


@dataclass(frozen=True, kw_only=True, eq=False)
class PlotTable:
    """All plots of a run, merged, sorted by time, exact duplicates dropped.

    Attributes
    ----------
    time
        ``(N,)`` float64 epoch seconds (UTC).
    sensor
        ``(N,)`` int64 index into the run's sensor tuple.
    lat_deg, lon_deg
        ``(N,)`` WGS84 degrees.
    scan
        ``(N,)`` int64 scan number from the feed, ``-1`` where absent.
    sigma_m
        ``(N,)`` float64 per-plot 1-sigma, NaN where absent.
    source, line
        ``(N,)`` index into ``files`` and 1-based line number of each row.
    files
        The feed paths as given.
    sha256
        Hex SHA-256 of each feed file's bytes, as read (each file is read once).
    duplicates_dropped
        Count of exact duplicate rows removed.
    """

    time: NDArray[np.float64]
    sensor: NDArray[np.int64]
    lat_deg: NDArray[np.float64]
    lon_deg: NDArray[np.float64]
    scan: NDArray[np.int64]
    sigma_m: NDArray[np.float64]
    source: NDArray[np.int64]
    line: NDArray[np.int64]
    files: tuple[str, ...]
    duplicates_dropped: int = 0
    sha256: tuple[str, ...] = ()

    def __len__(self) -> int:
        return int(self.time.size)


@dataclass(frozen=True, kw_only=True, eq=False)
class Scan:
    """One antenna revolution of one sensor: a measurement set.

    ``time`` is the reference time of the scan (its latest plot's time;
    :func:`group_scans` makes no empty scans); ``plots`` are row indices into
    the :class:`PlotTable`, sorted by plot time.
    """

    sensor: int
    number: int
    time: float
    plots: NDArray[np.int64]


#: Largest per-plot sigma_m accepted, metres: wider than any radar cover, so a larger
#: value is a unit or typing error (common practice, no source).
MAX_SIGMA_M = 100_000.0

_COLUMNS = ("time", "sensor", "lat", "lon", "scan", "sigma_m")


#: Columns of the feed besides time (time is read back whole for the sort, the others by row).
_ON_DISK = ("sensor", "lat", "lon", "scan", "sigma_m", "source", "line")
#: Rows gathered at a time when a long column is put in order.
_GATHER_ROWS = 1 << 22
_DTYPES = {"time": np.float64, "sensor": np.int64, "lat": np.float64, "lon": np.float64,
           "scan": np.int64, "sigma_m": np.float64, "source": np.int64, "line": np.int64}


def _read_one(path: str, index: int, sensors: Sequence[SensorConfig],
              sinks: dict[str, ColumnWriter], window: tuple[float, float] | None) -> str:
    """Read and validate one feed file, its rows appended to ``sinks``; its SHA-256.

    The file streams through in blocks of lines (:func:`read_tables`): each
    block's text is parsed, checked, appended to the columns on disk and
    dropped before the next is read, so a long feed's text never exists
    whole and its columns never are in memory at once. The first bad row of
    the file is the first bad row of the first block that has one. Rows
    outside ``window`` are dropped after they are checked.
    """
    tables = read_tables(path)
    form: bool | None = None
    for table in tables:
        if form is None:  # the file's first data row sets the form of its times
            form = time_form(table.columns["time"])
        cols = _parse_block(path, table, sensors, form)
        del table
        cols["source"] = np.full(cols["time"].size, index, dtype=np.int64)
        if window is not None:
            inside = (cols["time"] >= window[0]) & (cols["time"] < window[1])
            cols = {c: v[inside] for c, v in cols.items()}
        for c, v in cols.items():
            sinks[c].append(v)
    return tables.sha256


def _parse_block(path: str, table: Table, sensors: Sequence[SensorConfig],
                 form: bool | None) -> dict[str, NDArray[Any]]:
    """One block's contract columns checked and parsed; the first bad row raises."""
    n = table.num_rows
    problems: list[Problem | None] = []
    # each text column is dropped once parsed: a block's text never exists twice over
    text, lines, parquet = dict(table.columns), table.lines, table.parquet
    del table

    time, p = parse_time(text.pop("time"), epoch_form=form)
    problems.append(p)
    sensor, p = parse_sensor(text.pop("sensor"), [s.id for s in sensors])
    problems.append(p)
    lat, p = _parse_float(text.pop("lat"), field="lat", lo=-90.0, hi=90.0, what="a latitude in degrees")
    problems.append(p)
    lon, p = _parse_float(text.pop("lon"), field="lon", lo=-180.0, hi=180.0,
                          what="a longitude in degrees")
    problems.append(p)

    if "scan" in text:
        scan_f, p = _parse_float(text.pop("scan"), field="scan", lo=0.0, hi=2.0**53, integer=True,
                                 what="a non-negative integer scan number")
        problems.append(p)
        scan = np.where(np.isfinite(scan_f), scan_f, -1).astype(np.int64)
    else:
        scan = np.full(n, -1, dtype=np.int64)
    if "sigma_m" in text:
        sigma, p = _parse_float(text.pop("sigma_m"), field="sigma_m", lo=0.0, hi=MAX_SIGMA_M, lo_open=True,
                                optional=True,
                                what=f"a positive number of metres up to {MAX_SIGMA_M:g}")
        problems.append(p)
    else:
        sigma = np.full(n, np.nan)

    found = [q for q in problems if q is not None]
    if found:
        first = min(found, key=lambda q: q.row)  # stable: earlier checks win ties
        line = int(lines[first.row])
        where = f" (Parquet row {line - 1})" if parquet else ""
        raise InputError(first.message + where, file=path, line=line, field=first.field)

    return {
        "time": time, "sensor": sensor, "lat": lat, "lon": lon, "scan": scan,
        "sigma_m": sigma, "line": lines.astype(np.int64, copy=False),
    }


def read_feeds(paths: Sequence[str | PathLike[str]], sensors: Sequence[SensorConfig], *,
               window: tuple[float, float] | None = None) -> PlotTable:
    """Read and merge plot feeds (CSV, ``.csv.gz``, Parquet).

    Parameters
    ----------
    paths
        Feed files; their rows are merged.
    sensors
        The run's sensors; ``sensor`` values must be one of their ids, and
        :attr:`PlotTable.sensor` indexes this sequence.
    window
        Optional UTC time window ``(t0, t1)``, epoch seconds: only rows with
        ``t0 <= time < t1`` are kept (after every row has been validated).

    Returns
    -------
    PlotTable
        Rows sorted by time; ties by sensor, lat, lon, scan and sigma_m, so
        the order of the rows and their split over files never matter (then
        by file in the order given and line, for exact duplicates),
        exact duplicates (same time, sensor, lat, lon, scan, sigma_m) dropped
        after the first and counted.

    Raises
    ------
    InputError
        For the first problem of the first bad file: unreadable or empty
        file, missing required column, wrong number of fields, empty or
        malformed value, time without zone designator, a file mixing epoch
        and ISO 8601 times, unknown sensor, out-of-range position,
        negative or non-integer scan, non-positive sigma_m.

    Notes
    -----
    Times are epoch seconds, both forms rounded to the microsecond the same
    way, so ``1777874401.25`` and ``2026-05-04T06:00:01.250Z`` give the same
    float. A row whose contract fields are all empty (a blank line) is
    skipped. Columns other than the six of the contract are ignored. Line
    numbers assume no line break inside a quoted value.
    """
    files = tuple(str(p) for p in paths)
    sinks = {c: ColumnWriter(_DTYPES[c]) for c in ("time", *_ON_DISK)}
    digests = tuple(_read_one(f, i, sensors, sinks, window) for i, f in enumerate(files))
    stored = {c: w.finish() for c, w in sinks.items()}
    del sinks
    time, order, keep = _sorted_order(np.asarray(stored.pop("time")), stored)
    dropped = int(keep.size - np.count_nonzero(keep)) if keep is not None else 0
    if keep is not None:
        time, order = time[keep], order[keep]
    # every other column in that order, one at a time: read whole, gathered and written
    # back a slice at a time
    out: dict[str, Any] = {}
    for c in _ON_DISK:
        column = np.asarray(stored.pop(c))
        if c == "sensor":  # used all along the run: it stays in memory
            out[c] = column[order]
            continue
        w = ColumnWriter(_DTYPES[c])
        for a in range(0, order.size, _GATHER_ROWS):
            w.append(column[order[a:a + _GATHER_ROWS]])
        out[c] = w.finish()
        del column, w
    del order
    release_unused_memory()  # the reading's scratch space (text, order) back to the system
    return PlotTable(
        time=time.astype(np.float64, copy=False), sensor=out["sensor"], lat_deg=out["lat"],
        lon_deg=out["lon"], scan=out["scan"], sigma_m=out["sigma_m"], source=out["source"],
        line=out["line"], files=files, duplicates_dropped=dropped, sha256=digests,
    )


def _sorted_order(time: NDArray[np.float64], stored: dict[str, StoredColumn],
                  ) -> tuple[NDArray[np.float64], NDArray[np.int64], NDArray[np.bool_] | None]:
    """The times sorted, the rows' order, and the mask of the rows kept (``None``: no duplicate).

    By time, then by the plot's own values, and only then by file and line:
    plots that share a time (a radar stamping a whole revolution at once)
    come out in the same order whatever the order of the rows or the split
    of the files. Only the rows that share their time with another are
    looked at beyond their time (read back from disk), so the sort needs
    the time column alone in memory.
    """
    order = np.argsort(time, kind="stable")
    t = time[order]
    del time
    same = t[1:] == t[:-1]
    if not same.any():
        return t, order, None
    tied = np.zeros(t.size, dtype=bool)
    tied[1:] |= same
    tied[:-1] |= same
    pos = np.flatnonzero(tied)  # positions (in time order) of rows in runs of one time
    rows = order[pos]
    cols = {c: np.asarray(stored[c][rows]) for c in _ON_DISK}
    cols["time"] = t[pos]
    sub = np.lexsort((cols["line"], cols["source"], cols["sigma_m"], cols["scan"], cols["lon"],
                      cols["lat"], cols["sensor"], cols["time"]))
    # each run of one time holds consecutive positions, and ``sub`` keeps each run in its place
    order[pos] = rows[sub]
    keep = np.ones(t.size, dtype=bool)
    keep[pos] = _first_of_duplicates({c: v[sub] for c, v in cols.items()})
    return t, order, (None if keep.all() else keep)


def _first_of_duplicates(cols: dict[str, NDArray]) -> NDArray[np.bool_]:
    """Mask keeping the first of each set of exact duplicate rows (rows sorted by time).

    Duplicates share their time, so only runs of equal times are compared.
    """
    t = cols["time"]
    keep = np.ones(t.size, dtype=bool)
    same = t[1:] == t[:-1]
    if not same.any():
        return keep
    tied = np.zeros(t.size, dtype=bool)
    tied[1:] |= same
    tied[:-1] |= same
    frame = pd.DataFrame({c: cols[c][tied] for c in _COLUMNS})
    keep[tied] = ~frame.duplicated(keep="first").to_numpy()
    return keep


@dataclass(frozen=True, kw_only=True, eq=False)
class ScanArrays:
    """Every scan of a run as arrays: scan ``k`` holds the plot rows
    ``rows[offsets[k]:offsets[k + 1]]`` (sorted by plot time)."""

    sensor: NDArray[np.int64]
    number: NDArray[np.int64]
    time: NDArray[np.float64]
    offsets: NDArray[np.int64]
    rows: NDArray[np.int64]

    def __len__(self) -> int:
        return int(self.time.size)


def group_scans(plots: PlotTable, sensors: Sequence[SensorConfig]) -> list[Scan]:
    """Group plots into scans per sensor, ordered by reference time.

    Plots that carry a feed ``scan`` number are grouped by (sensor, scan).
    A sensor whose plots carry none is cut into revolutions of its
    ``scan_period_s``, counted from its first plot: revolution
    ``floor((t - t_first) / scan_period_s)``, so a plot exactly on a
    boundary belongs to the later revolution.

    Only revolutions holding at least one plot become scans. A revolution
    without any plot at all (not even clutter) is taken as a sensor outage
    that carries no information, rather than as a scan in which every vessel
    was missed.

    Returns
    -------
    list of Scan
        Ordered by (reference time, sensor index, number); ``Scan.time`` is
        the latest plot time of the scan, ``Scan.plots`` the row indices
        sorted by plot time.

    Raises
    ------
    InputError
        When one sensor has plots both with and without scan numbers (feed
        files that disagree).
    """
    a = scan_arrays(plots, sensors)
    return [
        Scan(sensor=int(a.sensor[k]), number=int(a.number[k]), time=float(a.time[k]),
             plots=a.rows[a.offsets[k]:a.offsets[k + 1]])
        for k in range(len(a))
    ]


def scan_arrays(plots: PlotTable, sensors: Sequence[SensorConfig]) -> ScanArrays:
    """The scans of :func:`group_scans` as compact arrays (same scans, same order, same rows)."""
    n = len(plots)
    if n == 0:
        empty = np.empty(0, np.int64)
        return ScanArrays(sensor=empty, number=empty, time=np.empty(0), offsets=np.zeros(1, np.int64),
                          rows=empty)
    sensor = plots.sensor
    scan = np.asarray(plots.scan)
    has_scan = scan >= 0
    n_sensors = max(len(sensors), int(sensor.max()) + 1)
    with_scan = np.bincount(sensor, weights=has_scan, minlength=n_sensors)
    total = np.bincount(sensor, minlength=n_sensors)
    mixed = (with_scan > 0) & (with_scan < total)
    if mixed.any():
        s = int(np.argmax(mixed))
        row = int(np.argmax((sensor == s) & ~has_scan))
        raise InputError(
            f"sensor '{sensors[s].id}' has plots with and without a scan number; "
            "give the scan column in every feed file of this sensor or in none",
            file=plots.files[int(plots.source[row])], line=int(plots.line[row]), field="scan",
        )
    # Revolution index for sensors without feed scan numbers (computed in place: a long
    # feed's columns are large, and each temporary is one more of them)
    big = np.finfo(np.float64).max
    first = np.full(n_sensors, big)
    np.minimum.at(first, sensor, plots.time)
    period = np.array([s.scan_period_s for s in sensors] + [1.0] * (n_sensors - len(sensors)))
    rev = first[sensor]
    np.subtract(plots.time, rev, out=rev)
    np.divide(rev, period[sensor], out=rev)
    np.floor(rev, out=rev)
    number = rev.astype(np.int64)
    del rev
    np.copyto(number, scan, where=has_scan)
    del scan, has_scan

    order = np.lexsort((plots.time, number, sensor))
    s_sorted = sensor[order]
    new_scan = s_sorted[1:] != s_sorted[:-1]
    del s_sorted
    n_sorted = number[order]
    del number
    new_scan |= n_sorted[1:] != n_sorted[:-1]
    starts = np.flatnonzero(np.concatenate(([True], new_scan)))
    del new_scan
    ends = np.append(starts[1:], n) - 1
    ref_time = plots.time[order[ends]]
    g_sensor, g_number = sensor[order[starts]], n_sorted[starts]
    del n_sorted
    by = np.lexsort((g_number, g_sensor, ref_time))
    # the plot rows of every scan, scan after scan in the order of ``by``
    sizes = (ends - starts + 1)[by]
    offsets = np.concatenate(([0], np.cumsum(sizes)))
    rows = np.repeat(starts[by] - offsets[:-1], sizes)
    rows += np.arange(n)
    for a in range(0, n, _GATHER_ROWS):  # positions into rows, a slice at a time
        rows[a:a + _GATHER_ROWS] = order[rows[a:a + _GATHER_ROWS]]
    del order
    return ScanArrays(sensor=g_sensor[by].astype(np.int64), number=g_number[by].astype(np.int64),
                      time=ref_time[by].astype(np.float64), offsets=offsets.astype(np.int64),
                      rows=rows)
