"""Writers of the simulator's files: plot feed, sensor TOML, truth (private helpers)."""

from __future__ import annotations

import gzip
import io
import json
import math
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_bytes
from harbourwatch.io.records import SensorConfig
from harbourwatch.io.timefmt import format_utc
from harbourwatch.sim.engine import simulate
from harbourwatch.sim.model import SimulationResult
from harbourwatch.sim.scenarios import SCENARIOS

Array = NDArray[np.float64]

#: Step of the rows written to ``truth.csv`` (seconds, on a grid from the feed start).
TRUTH_FILE_STEP_S = 2.0


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)


def sensors_to_toml(sensors: Sequence[SensorConfig]) -> str:
    """The sensor file (contract keys) for these sensors, as TOML text."""
    lines = ["# Sensor file: one [[sensor]] table per radar (harbourwatch contract).", ""]
    for s in sensors:
        lines += [
            "[[sensor]]",
            f"id = {_toml_str(s.id)}",
            f"lat = {float(s.lat_deg)!r}",
            f"lon = {float(s.lon_deg)!r}",
            f"scan_period_s = {float(s.scan_period_s)!r}",
            f"range_sigma_m = {float(s.range_sigma_m)!r}",
            f"bearing_sigma_deg = {float(s.bearing_sigma_deg)!r}",
            f"detection_probability = {float(s.detection_probability)!r}",
            f"false_plots_per_scan = {float(s.false_plots_per_scan)!r}",
            f"max_range_m = {float(s.max_range_m)!r}",
            "",
        ]
    return "\n".join(lines)


def _write_atomic(path: Path, data: bytes) -> None:
    atomic_write_bytes(path, data)


def write_sensors_toml(sensors: Sequence[SensorConfig], path: str | os.PathLike[str]) -> Path:
    """Write :func:`sensors_to_toml` to ``path`` (atomically)."""
    p = Path(path)
    _write_atomic(p, sensors_to_toml(sensors).encode("utf-8"))
    return p


def _gzip(data: bytes) -> bytes:
    buf = io.BytesIO()
    # mtime=0 and no file name in the header: byte-identical output
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, mtime=0, compresslevel=9) as g:
        g.write(data)
    return buf.getvalue()


def _csv_bytes(header: Sequence[str], columns: Sequence[NDArray[np.str_]]) -> bytes:
    if columns and columns[0].size:
        rows = columns[0].astype(object)
        for c in columns[1:]:
            rows = rows + "," + c.astype(object)
        body = "\n".join(rows.tolist()) + "\n"
    else:
        body = ""
    return (",".join(header) + "\n" + body).encode("utf-8")


def _fmt(x: Array, digits: int) -> NDArray[np.str_]:
    return np.char.mod(f"%.{digits}f", np.asarray(x, float))


def plots_columns(result: SimulationResult) -> dict[str, NDArray[np.str_]]:
    """The plot feed as string columns (contract order; ``sigma_m`` only when set)."""
    p = result.plots
    ids = np.array([s.id for s in result.sensors] or [""], dtype=object)
    cols = {
        "time": format_utc(p.time),
        "sensor": ids[p.sensor].astype(str) if len(p) else np.zeros(0, str),
        "lat": _fmt(p.lat_deg, 7),
        "lon": _fmt(p.lon_deg, 7),
        "scan": p.scan.astype(str),
    }
    if np.isfinite(p.sigma_m).any():
        cols["sigma_m"] = np.where(np.isfinite(p.sigma_m), _fmt(p.sigma_m, 2), "")
    return cols


def truth_columns(result: SimulationResult, *, step_s: float = TRUTH_FILE_STEP_S
                  ) -> dict[str, NDArray[np.str_]]:
    """Truth rows ``track,time,lat,lon`` every ``step_s`` (grid from the feed start), in cover only.

    When some vessel has a hull (``length_m > 0``) an optional ``length_m``
    column follows (0 for a point-like vessel).
    """
    names, times, lats, lons, lengths = [], [], [], [], []
    t0 = result.start_epoch_s
    for tr in result.truth:
        if tr.time.size == 0:
            continue
        rel = tr.time - t0
        grid = step_s * np.arange(math.ceil(rel[0] / step_s - 1e-9),
                                  math.floor(rel[-1] / step_s + 1e-9) + 1)
        if grid.size == 0:
            continue
        lat = np.interp(grid, rel, tr.lat_deg)
        lon = np.interp(grid, rel, tr.lon_deg)
        cover = np.interp(grid, rel, tr.in_cover.astype(float)) >= 0.5
        names.append(np.full(int(cover.sum()), tr.name, dtype=object))
        times.append(t0 + grid[cover])
        lats.append(lat[cover])
        lons.append(lon[cover])
        lengths.append(np.full(int(cover.sum()), tr.length_m))
    if not names:
        z = np.zeros(0)
        return {"track": np.zeros(0, str), "time": format_utc(z), "lat": _fmt(z, 7), "lon": _fmt(z, 7)}
    out = {"track": np.concatenate(names).astype(str), "time": format_utc(np.concatenate(times)),
           "lat": _fmt(np.concatenate(lats), 7), "lon": _fmt(np.concatenate(lons), 7)}
    if any(tr.length_m > 0 for tr in result.truth):
        out["length_m"] = _fmt(np.concatenate(lengths), 1)
    return out


_FEED_FORMATS = ("csv", "csv.gz", "parquet")


def simulate_to_dir(name: str, out: str | os.PathLike[str], *, seed: int | None = None,
                    duration_s: float | None = None, feed_format: str = "csv") -> list[Path]:
    """Simulate a named scenario and write the contract's files into ``out``.

    Writes ``plots.<feed_format>``, ``sensors.toml``, ``truth.csv`` (``.csv.gz``
    when the feed is gzipped) and, where the scenario has them,
    ``zones.geojson`` and ``rules.toml``. Same name, seed and duration give
    byte-identical files.

    Returns
    -------
    list of Path
        The files written, in that order.
    """
    if name not in SCENARIOS:
        raise InputError(f"unknown scenario {name!r}; choose one of {', '.join(SCENARIOS)}",
                         field="--scenario")
    if feed_format not in _FEED_FORMATS:
        raise InputError(f"unknown feed format {feed_format!r}; choose one of "
                         f"{', '.join(_FEED_FORMATS)}", field="--format")
    if duration_s is not None and not duration_s > 0:
        raise InputError(f"duration must be positive, got {duration_s!r}", field="--duration-min")
    spec = SCENARIOS[name]
    seed = spec.default_seed if seed is None else int(seed)
    scenario = spec.build(seed, duration_s)
    result = simulate(scenario, seed)
    outdir = Path(out)
    outdir.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []

    pc = plots_columns(result)
    feed = outdir / f"plots.{feed_format}"
    if feed_format == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        p = result.plots
        data = {"time": pa.array(pc["time"].tolist(), pa.string()),
                "sensor": pa.array(pc["sensor"].tolist(), pa.string()),
                "lat": pa.array(p.lat_deg), "lon": pa.array(p.lon_deg),
                "scan": pa.array(p.scan)}
        if "sigma_m" in pc:
            data["sigma_m"] = pa.array(p.sigma_m)
        buf = io.BytesIO()
        pq.write_table(pa.table(data), buf)
        _write_atomic(feed, buf.getvalue())
    else:
        raw = _csv_bytes(list(pc), list(pc.values()))
        _write_atomic(feed, _gzip(raw) if feed_format == "csv.gz" else raw)
    written.append(feed)
    written.append(write_sensors_toml(result.sensors, outdir / "sensors.toml"))
    tc = truth_columns(result)
    raw = _csv_bytes(list(tc), list(tc.values()))
    if feed_format == "csv.gz":
        truth_path = outdir / "truth.csv.gz"
        _write_atomic(truth_path, _gzip(raw))
    else:
        truth_path = outdir / "truth.csv"
        _write_atomic(truth_path, raw)
    written.append(truth_path)
    if scenario.zones_geojson is not None:
        zp = outdir / "zones.geojson"
        _write_atomic(zp, scenario.zones_geojson.encode("utf-8"))
        written.append(zp)
    if scenario.rules_toml is not None:
        rp = outdir / "rules.toml"
        _write_atomic(rp, scenario.rules_toml.encode("utf-8"))
        written.append(rp)
    return written
