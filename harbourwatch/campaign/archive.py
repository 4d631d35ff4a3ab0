"""Archive discovery and chunking: which feed files exist, what times they hold, which chunk reads which.

An archive is given as files, folders (searched recursively for ``*.csv``,
``*.csv.gz`` and ``*.parquet``) or glob patterns. Each file is scanned once
(on a worker: its SHA-256 and the first and last plot time); the scans are
kept in ``archive_index.json`` in the campaign folder, keyed by path, size
and modification time, so a re-run reads no feed again.

Chunks are cut on UTC hours that are multiples of the chunk length counted
from the Unix epoch (so daily chunks run from midnight to midnight UTC).
Chunk ``k`` owns its *core* ``[T_k, T_k + H)`` and reviews the window
``[T_k - overlap/2, T_k + H + overlap/2)``: neighbouring chunks share the
``overlap`` around each boundary.
"""

from __future__ import annotations

import glob
import json
import math
import os
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text, sha256_file
from harbourwatch.io.column_parse import parse_time
from harbourwatch.io.table_reader import read_table
from harbourwatch.io.timefmt import format_utc_one

__all__ = ["FileSpan", "ChunkPlan", "discover_feeds", "scan_file", "plan_chunks",
           "load_index", "save_index", "chunk_name"]

FEED_SUFFIXES = (".csv", ".csv.gz", ".parquet")
INDEX_FILE = "archive_index.json"


@dataclass(frozen=True, kw_only=True)
class FileSpan:
    """One scanned feed file: identity, checksum and the times it holds."""

    path: str
    size: int
    mtime_ns: int
    sha256: str
    rows: int
    t_min: float | None
    t_max: float | None


@dataclass(frozen=True, kw_only=True)
class ChunkPlan:
    """One chunk of a campaign: its name, core, review window and files."""

    name: str
    core: tuple[float, float]
    window: tuple[float, float]
    files: tuple[FileSpan, ...]


def chunk_name(t0: float) -> str:
    """Folder name of the chunk starting at ``t0``: ``20261003T0000Z``."""
    iso = format_utc_one(t0)
    return iso[0:4] + iso[5:7] + iso[8:10] + "T" + iso[11:13] + iso[14:16] + "Z"


def discover_feeds(archive: Sequence[str]) -> list[str]:
    """Feed files named by ``archive`` (files, folders, globs), sorted, without repeats.

    Raises
    ------
    InputError
        When an item names nothing, or nothing is found at all.
    """
    found: list[str] = []
    for item in archive:
        p = Path(item)
        if p.is_dir():
            hits = [str(f) for f in sorted(p.rglob("*")) if f.is_file() and _is_feed(f.name)]
        elif p.is_file():
            hits = [str(p)]
        else:
            hits = sorted(f for f in glob.glob(item, recursive=True)
                          if Path(f).is_file() and _is_feed(Path(f).name))
        if not hits:
            raise InputError("no feed files found (give files, folders or glob patterns of "
                             ".csv, .csv.gz or .parquet files)", file=item)
        found.extend(hits)
    return sorted(set(found), key=found.index)


def _is_feed(name: str) -> bool:
    return name.endswith(FEED_SUFFIXES) and not name.startswith(".")


def scan_file(path: str) -> FileSpan:
    """Checksum and time span of one feed file (runs on a worker).

    Raises
    ------
    InputError
        When the file cannot be read or a time cannot be parsed (file, line, field).
    """
    st = os.stat(path)
    table = read_table(path)
    times, problem = parse_time(table.columns["time"])
    if problem is not None:
        raise InputError(problem.message, file=path, line=int(table.lines[problem.row]),
                         field=problem.field)
    t = np.asarray(times, dtype=np.float64)
    return FileSpan(path=path, size=st.st_size, mtime_ns=st.st_mtime_ns, sha256=sha256_file(path),
                    rows=int(t.size), t_min=float(t.min()) if t.size else None,
                    t_max=float(t.max()) if t.size else None)


def load_index(out_dir: Path) -> dict[str, FileSpan]:
    """The scans kept by an earlier campaign in ``out_dir`` (empty when none or unreadable)."""
    try:
        raw = json.loads((out_dir / INDEX_FILE).read_text(encoding="utf-8"))
        return {d["path"]: FileSpan(**d) for d in raw["files"]}
    except (OSError, ValueError, KeyError, TypeError):
        return {}


def save_index(out_dir: Path, spans: Sequence[FileSpan]) -> None:
    """Keep the scans in ``out_dir/archive_index.json`` (atomically)."""
    data = {"files": [asdict(s) for s in sorted(spans, key=lambda s: s.path)]}
    atomic_write_text(out_dir / INDEX_FILE, json.dumps(data, indent=1, sort_keys=True) + "\n")


def still_valid(span: FileSpan) -> bool:
    """True when the file has the size and modification time it had when scanned."""
    try:
        st = os.stat(span.path)
    except OSError:
        return False
    return st.st_size == span.size and st.st_mtime_ns == span.mtime_ns


def plan_chunks(spans: Sequence[FileSpan], *, chunk_s: float, overlap_s: float) -> list[ChunkPlan]:
    """Cut the archive's time span into chunks and give each the files it must read.

    Parameters
    ----------
    spans
        The scanned feed files (files without rows are left out).
    chunk_s
        Chunk length, seconds (a whole number of seconds dividing into UTC hours is usual).
    overlap_s
        Total overlap shared by two neighbouring chunks, seconds.

    Returns
    -------
    list of ChunkPlan
        In time order; chunks whose window holds no file are skipped.
    """
    if not chunk_s > 0:
        raise InputError(f"chunk length must be positive, got {chunk_s / 3600.0!r} h",
                         field="--chunk-h")
    if not 0 <= overlap_s < chunk_s:
        raise InputError(f"overlap must be at least 0 and shorter than a chunk, got "
                         f"{overlap_s / 60.0!r} min", field="--overlap-min")
    full = [s for s in spans if s.t_min is not None and s.t_max is not None]
    if not full:
        return []
    t_first = min(float(s.t_min) for s in full if s.t_min is not None)
    t_last = max(float(s.t_max) for s in full if s.t_max is not None)
    k0 = math.floor(t_first / chunk_s)
    k1 = math.floor(t_last / chunk_s)
    half = overlap_s / 2.0
    plans = []
    for k in range(k0, k1 + 1):
        c0, c1 = k * chunk_s, (k + 1) * chunk_s
        w0, w1 = c0 - half, c1 + half
        files = tuple(s for s in full if s.t_max is not None and s.t_min is not None
                      and s.t_max >= w0 and s.t_min < w1)
        if files:
            plans.append(ChunkPlan(name=chunk_name(c0), core=(c0, c1), window=(w0, w1),
                                   files=files))
    return plans
