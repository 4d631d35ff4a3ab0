"""Reading the two CSV files of ``harbourwatch score`` (tracks and ground truth).

Private helper of :mod:`harbourwatch.scoring.score`: columnar rows with their line
numbers, validated once here (file, line and field in every error).
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass, field
from datetime import datetime
from os import PathLike, fspath

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.text import FEED_MAX_BYTES, read_input

__all__ = ["ScoreTable", "read_score_csv", "group_by_track"]

Array = NDArray[np.float64]


@dataclass(frozen=True, kw_only=True, eq=False)
class ScoreTable:
    """Rows of one score input file, columnar."""

    path: str
    track: NDArray[np.str_]
    time: Array
    lat: Array
    lon: Array
    line: NDArray[np.int64]
    extra: dict[str, Array] = field(default_factory=dict)


def _open_text(path: str) -> io.TextIOBase:
    """The file as text, read once and bounded (gzip by its magic bytes), see ``read_input``."""
    got = read_input(path, limit=FEED_MAX_BYTES, formats="feed")
    if got.kind == "parquet":
        raise InputError("expected a CSV file (or .csv.gz), found Parquet", file=path)
    return io.StringIO(got.data.decode("utf-8-sig"), newline="")


def _parse_time(text: str, *, epoch: bool, path: str, line: int) -> float:
    s = text.strip()
    if epoch:
        try:
            v = float(s)
        except ValueError:
            raise InputError(f"expected epoch seconds like the first row, found {s!r}",
                             file=path, line=line, field="time") from None
        if not math.isfinite(v):
            raise InputError(f"expected a finite time, found {s!r}", file=path, line=line,
                             field="time")
        return v
    try:
        if _is_number(s):
            raise ValueError(s)
        dt = datetime.fromisoformat(s)
    except ValueError:
        raise InputError(f"expected an ISO 8601 time with a zone like the first row "
                         f"(e.g. 2026-05-04T06:00:01.250Z), found {s!r}",
                         file=path, line=line, field="time") from None
    if dt.tzinfo is None:
        raise InputError(f"time {s!r} has no zone designator (add Z or +hh:mm)",
                         file=path, line=line, field="time")
    return dt.timestamp()


def _is_number(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def read_score_csv(path: str | PathLike[str], *, optional: tuple[str, ...] = ()) -> ScoreTable:
    p = fspath(path)
    required = ("track", "time", "lat", "lon")
    with _open_text(p) as fh:
        try:
            reader = csv.reader(fh)
            header = next(reader, None)
            if header is None:
                raise InputError("the file is empty: expected a header line with "
                                 + ",".join(required), file=p, line=1)
            names = [h.strip() for h in header]
            missing = [c for c in required if c not in names]
            if missing:
                raise InputError(f"missing column(s) {', '.join(missing)}; found "
                                 f"{', '.join(names) or 'none'}", file=p, line=1, field=missing[0])
            col = {c: names.index(c) for c in required}
            opt = {c: names.index(c) for c in optional if c in names}
            rows = [(n, r) for n, r in enumerate(reader, start=2) if any(x.strip() for x in r)]
        except (csv.Error, UnicodeDecodeError) as exc:
            raise InputError(f"not a readable CSV file: {exc}", file=p) from exc
    width = max(list(col.values()) + list(opt.values())) + 1
    track, time, lat, lon, line = [], [], [], [], []
    extra: dict[str, list[float]] = {c: [] for c in opt}
    # one time form per file, decided by the first row (as for plot feeds)
    first = rows[0][1] if rows else []
    epoch = len(first) > col["time"] and _is_number(first[col["time"]].strip())
    seen: dict[tuple[str, float], int] = {}
    for n, r in rows:
        if len(r) < width:
            short = next(c for c, i in {**col, **opt}.items() if i >= len(r))
            raise InputError(f"the row has {len(r)} fields, expected {len(names)}",
                             file=p, line=n, field=short)
        tid = r[col["track"]].strip()
        if not tid:
            raise InputError("empty track id", file=p, line=n, field="track")
        t = _parse_time(r[col["time"]], epoch=epoch, path=p, line=n)
        key = (tid, t)
        if key in seen:
            raise InputError(f"track {tid!r} has two rows at this time (first at line "
                             f"{seen[key]})", file=p, line=n, field="time")
        seen[key] = n
        vals = {}
        for c in ("lat", "lon", *opt):
            s = r[col[c] if c in col else opt[c]].strip()
            try:
                v = float(s)
            except ValueError:
                raise InputError(f"expected a number, found {s!r}", file=p, line=n,
                                 field=c) from None
            if not math.isfinite(v):
                raise InputError(f"expected a finite number, found {s!r}", file=p, line=n,
                                 field=c)
            vals[c] = v
        if not -90.0 <= vals["lat"] <= 90.0:
            raise InputError(f"latitude must be within -90..90, found {vals['lat']!r}",
                             file=p, line=n, field="lat")
        if not -180.0 <= vals["lon"] <= 180.0:
            raise InputError(f"longitude must be within -180..180, found {vals['lon']!r}",
                             file=p, line=n, field="lon")
        track.append(tid)
        time.append(t)
        lat.append(vals["lat"])
        lon.append(vals["lon"])
        line.append(n)
        for c in opt:
            extra[c].append(vals[c])
    return ScoreTable(path=p, track=np.asarray(track, dtype=str), time=np.asarray(time, float),
                  lat=np.asarray(lat, float), lon=np.asarray(lon, float),
                  line=np.asarray(line, np.int64),
                  extra={c: np.asarray(v, float) for c, v in extra.items()})


def _natural_key(text: str) -> list[tuple[int, int | str]]:
    """Sort ``v2`` before ``v10``: digit runs compare as numbers."""
    return [(0, int(part)) if part.isdigit() else (1, part)
            for part in re.split(r"(\d+)", text) if part]


def group_by_track(tab: ScoreTable, columns: Array) -> tuple[list[str], list[tuple[Array, Array]]]:
    """Per track id (sorted): times and the given per-row columns, sorted by time."""
    ids = sorted(set(tab.track.tolist()), key=_natural_key)
    rank = {tid: k for k, tid in enumerate(ids)}
    key = np.asarray([rank[tid] for tid in tab.track.tolist()], dtype=np.int64)
    order = np.lexsort((tab.time, key))
    tr, tm, cols = key[order], tab.time[order], columns[order]
    bounds = np.flatnonzero(tr[1:] != tr[:-1]) + 1
    starts = np.concatenate([[0], bounds]) if len(tr) else np.zeros(0, int)
    ends = np.concatenate([bounds, [len(tr)]]) if len(tr) else np.zeros(0, int)
    return ids, [(tm[a:b], cols[a:b]) for a, b in zip(starts, ends, strict=True)]
