"""The campaign's combined outputs: Parquet tables, GeoParquet trajectories, a DuckDB catalogue.

* ``tracks.parquet``: the rows of every finished chunk's ``tracks.csv``
  inside its core, with the joined trajectory id in ``track``, the chunk's
  own id in ``chunk_track`` and the chunk's name in ``chunk``; ``time`` is a
  UTC timestamp (milliseconds). Written chunk by chunk (bounded memory).
* ``trajectories.parquet``: GeoParquet (geopandas, EPSG:4326), one
  LineString per joined trajectory with its span and a few figures.
* ``alerts.parquet``: the campaign's alerts (``alerts.csv`` columns, joined
  ids, ``start``/``end`` as UTC timestamps), plus ``chunk`` and ``source``.
* ``catalogue.duckdb``: tables ``runs``, ``trajectories`` (geometry as WKT
  text and a bounding box), ``alerts`` and ``radar_health``, each with an
  index on its start time.

Every file is written to a temporary name in the campaign folder and
renamed into place.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from harbourwatch.rules.evaluate import ALERT_COLUMNS
from harbourwatch.trajectories import TRACK_COLUMNS

__all__ = ["write_catalogue", "TrackStats", "TRACKS_FILE", "TRAJECTORIES_FILE", "ALERTS_FILE",
           "CATALOGUE_FILE"]

TRACKS_FILE = "tracks.parquet"
TRAJECTORIES_FILE = "trajectories.parquet"
ALERTS_FILE = "alerts.parquet"
CATALOGUE_FILE = "catalogue.duckdb"
#: Optional columns of ``tracks.csv`` carried along when the chunks have them.
SIZE_COLUMNS = ("length_m", "beam_m", "heading_deg", "plots_per_scan")
_TS = pa.timestamp("ms", tz="UTC")


@contextlib.contextmanager
def _atomic_path(final: Path) -> Iterator[Path]:
    fd, tmp = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".tmp", dir=final.parent)
    os.close(fd)
    os.unlink(tmp)  # writers that want to create the file themselves (duckdb)
    try:
        yield Path(tmp)
        os.replace(tmp, final)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


@dataclass
class TrackStats:
    """What the trajectory rows of one joined trajectory add up to (built chunk by chunk)."""

    lat: list[np.ndarray]
    lon: list[np.ndarray]
    start: int
    end: int
    states: int
    max_sog_kn: float
    existence: float
    chunks: list[str]
    length: list[np.ndarray]


def _read_tracks(path: Path, extra: Sequence[str]) -> pa.Table:
    types = {"track": pa.string(), "time": _TS}
    types.update({c: pa.float64() for c in TRACK_COLUMNS[2:]})
    types.update({c: pa.float64() for c in extra})
    return pacsv.read_csv(path, convert_options=pacsv.ConvertOptions(
        column_types=types, include_columns=[*TRACK_COLUMNS, *extra],
        include_missing_columns=True))


def _header(path: Path) -> list[str]:
    with open(path, encoding="utf-8") as fh:
        return fh.readline().strip().split(",")


def write_tracks(out: Path, chunks: Sequence[tuple[str, tuple[float, float], Path]],
                 piece_id: Mapping[tuple[str, str], str]) -> tuple[dict[str, TrackStats], list[str]]:
    """Write ``tracks.parquet`` chunk by chunk; return per-trajectory figures and the size columns."""
    extra = [c for c in SIZE_COLUMNS if any(c in _header(p / "tracks.csv") for _, _, p in chunks)]
    schema = pa.schema([("track", pa.string()), ("time", _TS),
                        *[(c, pa.float64()) for c in TRACK_COLUMNS[2:]],
                        *[(c, pa.float64()) for c in extra],
                        ("chunk", pa.string()), ("chunk_track", pa.string())])
    stats: dict[str, TrackStats] = {}
    with _atomic_path(out / TRACKS_FILE) as tmp, pq.ParquetWriter(tmp, schema) as writer:
        for name, (c0, c1), folder in chunks:
            t = _read_tracks(folder / "tracks.csv", extra)
            ms = t.column("time").cast(pa.int64())
            own = t.column("track")
            uniq = pc.unique(own)
            mapped = pa.array([piece_id.get((name, x), "") for x in uniq.to_pylist()], pa.string())
            joined = pc.take(mapped, pc.index_in(own, value_set=uniq))
            keep = pc.and_(pc.and_(pc.greater_equal(ms, round(c0 * 1000)),
                                   pc.less(ms, round(c1 * 1000))),
                           pc.not_equal(joined, ""))
            t = t.set_column(0, "track", joined)
            t = t.append_column("chunk", pa.repeat(pa.scalar(name, pa.string()), t.num_rows))
            t = t.append_column("chunk_track", own)
            t = t.filter(keep).sort_by([("track", "ascending"), ("time", "ascending")])
            writer.write_table(t.select(schema.names).cast(schema))
            _accumulate(stats, t, name, extra)
    return stats, extra


def _accumulate(stats: dict[str, TrackStats], t: pa.Table, chunk: str, extra: Sequence[str]) -> None:
    if t.num_rows == 0:
        return
    enc = t.column("track").combine_chunks().dictionary_encode()
    codes = enc.indices.to_numpy(zero_copy_only=False)
    names = enc.dictionary.to_pylist()
    ms = t.column("time").cast(pa.int64()).to_numpy()
    lat, lon = t.column("lat").to_numpy(), t.column("lon").to_numpy()
    sog, ex = t.column("sog_kn").to_numpy(), t.column("existence").to_numpy()
    length = t.column("length_m").to_numpy(zero_copy_only=False) if "length_m" in extra else None
    starts = np.flatnonzero(np.concatenate(([True], codes[1:] != codes[:-1])))
    ends = np.append(starts[1:], codes.size)
    for a, b in zip(starts, ends, strict=True):
        tid = str(names[codes[a]])
        s = stats.get(tid)
        if s is None:
            s = stats[tid] = TrackStats(lat=[], lon=[], start=int(ms[a]), end=int(ms[b - 1]),
                                        states=0, max_sog_kn=0.0, existence=0.0, chunks=[],
                                        length=[])
        s.lat.append(lat[a:b])
        s.lon.append(lon[a:b])
        s.start, s.end = min(s.start, int(ms[a])), max(s.end, int(ms[b - 1]))
        s.states += int(b - a)
        s.max_sog_kn = max(s.max_sog_kn, float(np.max(sog[a:b])))
        s.existence = max(s.existence, float(np.max(ex[a:b])))
        s.chunks.append(chunk)
        if length is not None:
            s.length.append(length[a:b])


def write_trajectories(out: Path, stats: Mapping[str, TrackStats], extra: Sequence[str]) -> pa.Table:
    """Write ``trajectories.parquet`` (GeoParquet); return the attribute table with WKT for DuckDB."""
    import geopandas as gpd
    import shapely

    ids = sorted(stats)
    geoms = []
    for tid in ids:
        s = stats[tid]
        lon, lat = np.concatenate(s.lon), np.concatenate(s.lat)
        if lon.size == 1:
            lon, lat = np.repeat(lon, 2), np.repeat(lat, 2)
        geoms.append(shapely.linestrings(np.column_stack([lon, lat])))
    cols: dict[str, Any] = {
        "track": ids,
        "start": pa.array([stats[t].start for t in ids], pa.int64()).cast(_TS),
        "end": pa.array([stats[t].end for t in ids], pa.int64()).cast(_TS),
        "duration_min": [(stats[t].end - stats[t].start) / 60000.0 for t in ids],
        "states": [stats[t].states for t in ids],
        "chunks": [len(stats[t].chunks) for t in ids],
        "first_chunk": [stats[t].chunks[0] for t in ids],
        "last_chunk": [stats[t].chunks[-1] for t in ids],
        "max_sog_kn": [stats[t].max_sog_kn for t in ids],
        "existence": [stats[t].existence for t in ids],
    }
    if "length_m" in extra:
        cols["length_m"] = [_median(stats[t].length) for t in ids]
    attrs = pa.table(cols)
    frame = gpd.GeoDataFrame(attrs.to_pandas(), geometry=geoms, crs="EPSG:4326")
    with _atomic_path(out / TRAJECTORIES_FILE) as tmp:
        frame.to_parquet(tmp, index=False)
    bounds = shapely.bounds(np.array(geoms, dtype=object)) if geoms else np.zeros((0, 4))
    return (attrs.append_column("wkt", pa.array(shapely.to_wkt(geoms, rounding_precision=7).tolist()
                                                if geoms else [], pa.string()))
            .append_column("min_lon", pa.array(bounds[:, 0], pa.float64()))
            .append_column("min_lat", pa.array(bounds[:, 1], pa.float64()))
            .append_column("max_lon", pa.array(bounds[:, 2], pa.float64()))
            .append_column("max_lat", pa.array(bounds[:, 3], pa.float64())))


def _median(parts: Sequence[np.ndarray]) -> float | None:
    v = np.concatenate(parts) if parts else np.zeros(0)
    v = v[np.isfinite(v)]
    return float(np.median(v)) if v.size else None


def alerts_table(rows: Sequence[Mapping[str, str]]) -> pa.Table:
    """The campaign alerts as an Arrow table (times as UTC timestamps)."""
    cols: dict[str, Any] = {}
    for c in (*ALERT_COLUMNS, "chunk", "source"):
        vals = [r.get(c, "") for r in rows]
        if c in ("start", "end"):
            cols[c] = pa.array(vals, pa.string()).cast(_TS) if vals else pa.array([], _TS)
        elif c == "probability":
            cols[c] = pa.array([float(v) for v in vals], pa.float64())
        else:
            cols[c] = pa.array(vals, pa.string())
    return pa.table(cols)


RUNS_SCHEMA = pa.schema([
    ("chunk", pa.string()), ("start", _TS), ("end", _TS), ("window_start", _TS),
    ("window_end", _TS), ("status", pa.string()), ("reason", pa.string()), ("key", pa.string()),
    ("feeds", pa.int64()), ("plots", pa.int64()), ("scans", pa.int64()),
    ("trajectories", pa.int64()), ("alerts", pa.int64()), ("seconds", pa.float64()),
    ("worker", pa.string()), ("attempt", pa.int64()), ("report", pa.string()),
])
HEALTH_SCHEMA = pa.schema([
    ("chunk", pa.string()), ("start", _TS), ("end", _TS), ("sensor", pa.string()),
    ("scans", pa.int64()), ("plots", pa.int64()), ("plots_per_scan", pa.float64()),
    ("clutter_share", pa.float64()), ("false_plots_per_scan", pa.float64()),
    ("false_plots_per_scan_configured", pa.float64()), ("outages", pa.int64()),
    ("outage_min", pa.float64()), ("longest_outage_min", pa.float64()),
    ("pd_estimated", pa.float64()), ("pd_configured", pa.float64()), ("pd_states", pa.int64()),
    ("flags", pa.string()),
])


def records_table(records: Iterable[Mapping[str, Any]], schema: pa.Schema) -> pa.Table:
    """Records (times as ISO 8601 text) as an Arrow table of ``schema``."""
    recs = list(records)
    cols = []
    for f in schema:
        vals = [r.get(f.name) for r in recs]
        if f.type == _TS:
            cols.append(pa.array(vals, pa.string()).cast(_TS))
        else:
            cols.append(pa.array([None if isinstance(v, float) and not np.isfinite(v) else v
                                  for v in vals], f.type))
    return pa.Table.from_arrays(cols, schema=schema)


def write_catalogue(out: Path, *, runs: Sequence[Mapping[str, Any]],
                    trajectories: pa.Table, alerts: pa.Table,
                    health: Sequence[Mapping[str, Any]]) -> Path:
    """Write ``alerts.parquet`` and ``catalogue.duckdb``; return the catalogue's path."""
    import duckdb

    with _atomic_path(out / ALERTS_FILE) as tmp:
        pq.write_table(alerts, tmp)
    tables = {
        "runs": records_table(runs, RUNS_SCHEMA),
        "trajectories": trajectories,
        "alerts": alerts,
        "radar_health": records_table(health, HEALTH_SCHEMA),
    }
    final = out / CATALOGUE_FILE
    with _atomic_path(final) as tmp:
        con = duckdb.connect(str(tmp))
        try:
            for name, table in tables.items():
                con.register("incoming", table)
                con.execute(f"CREATE TABLE {name} AS SELECT * FROM incoming")
                con.unregister("incoming")
                if "start" in table.column_names:
                    con.execute(f"CREATE INDEX {name}_start ON {name} (start)")
                if "end" in table.column_names:
                    con.execute(f'CREATE INDEX {name}_end ON {name} ("end")')
            con.execute("CHECKPOINT")
        finally:
            con.close()
        wal = Path(str(tmp) + ".wal")
        with contextlib.suppress(FileNotFoundError):
            wal.unlink()
    return final
