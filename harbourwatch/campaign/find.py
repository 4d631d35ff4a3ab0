"""Querying a campaign's catalogue (``catalogue.duckdb``) for the everyday questions.

:func:`find` lists the alerts that match the filters (zone, rule id or kind,
a UTC time range the alert overlaps, a smallest vessel length where the
catalogue has one), or runs one SQL query of the caller's own on a
read-only connection. :func:`format_rows` prints the answer as a table,
CSV or JSON.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import math
from collections.abc import Sequence
from os import PathLike
from pathlib import Path
from typing import Any

from harbourwatch.errors import HarbourwatchError, InputError

__all__ = ["find", "format_rows", "parse_when"]


def parse_when(text: str, *, option: str) -> dt.datetime:
    """A UTC instant from ISO 8601 with a zone, or a bare date (its UTC midnight)."""
    try:
        if len(text) == 10:
            return dt.datetime.fromisoformat(text).replace(tzinfo=dt.UTC)
        t = dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError as exc:
        raise InputError(f"expected an ISO 8601 time with a zone (2026-10-01T00:00Z) or a "
                         f"date (2026-10-01), found {text!r}", field=option) from exc
    if t.tzinfo is None:
        raise InputError(f"time without a zone designator: {text!r} (add Z for UTC)", field=option)
    return t.astimezone(dt.UTC)


def _connect(catalogue: str | PathLike[str]) -> Any:
    import duckdb

    path = Path(catalogue)
    if path.is_dir():
        path = path / "catalogue.duckdb"
    if not path.is_file():
        raise InputError("no campaign catalogue here (expected catalogue.duckdb or the "
                         "campaign folder)", file=str(catalogue))
    try:
        return duckdb.connect(str(path), read_only=True)
    except duckdb.Error as exc:
        raise InputError(f"not a readable DuckDB catalogue: {exc}", file=str(path)) from exc


def find(catalogue: str | PathLike[str], *, zone: str | None = None, rule: str | None = None,
         start: str | None = None, end: str | None = None, min_length_m: float | None = None,
         sql: str | None = None) -> tuple[list[str], list[tuple[Any, ...]]]:
    """Column names and rows answering the filters (or ``sql``) from a campaign catalogue.

    Parameters
    ----------
    catalogue
        ``catalogue.duckdb`` or the campaign folder holding it.
    zone
        Zone id of the alert.
    rule
        Rule id or rule kind (``loiter``, ``rendezvous``, ...).
    start, end
        UTC range ``[start, end)`` (ISO 8601 with a zone, or a date) that the
        alert's span overlaps.
    min_length_m
        Only vessels at least this long (needs the optional ``length_m`` column).
    sql
        One query of your own instead of the filters (read-only connection).

    Raises
    ------
    InputError
        No catalogue, a bad time, ``--min-length-m`` on a catalogue without
        vessel lengths, or a query DuckDB refuses.
    """
    import duckdb

    con = _connect(catalogue)
    try:
        if sql is not None:
            try:
                cur = con.execute(sql)
            except duckdb.Error as exc:
                raise InputError(f"the query failed: {exc}", field="--sql") from exc
            if cur.description is None:
                return [], []
            return [d[0] for d in cur.description], cur.fetchall()
        where: list[str] = []
        params: list[Any] = []
        if zone is not None:
            where.append("a.zone = ?")
            params.append(zone)
        if rule is not None:
            where.append("(a.rule = ? OR a.kind = ?)")
            params += [rule, rule]
        if start is not None:
            where.append('a."end" >= ?')
            params.append(parse_when(start, option="--from"))
        if end is not None:
            where.append("a.start < ?")
            params.append(parse_when(end, option="--to"))
        join = ""
        if min_length_m is not None:
            cols = {r[0] for r in con.execute("DESCRIBE trajectories").fetchall()}
            if "length_m" not in cols:
                raise InputError("this catalogue has no vessel lengths (no length_m column: the "
                                 "reviews estimated no vessel size)", field="--min-length-m")
            join = " JOIN trajectories t ON t.track = a.track"
            where.append("t.length_m >= ?")
            params.append(float(min_length_m))
        query = ("SELECT a.start, a.\"end\", a.rule, a.kind, a.track, a.other_track, a.zone, "
                 "a.probability, a.chunk, a.summary FROM alerts a" + join
                 + (" WHERE " + " AND ".join(where) if where else "")
                 + " ORDER BY a.start, a.rule, a.track")
        cur = con.execute(query, params)
        return [d[0] for d in cur.description], cur.fetchall()
    except duckdb.Error as exc:  # pragma: no cover - a damaged catalogue
        raise HarbourwatchError(f"catalogue query failed: {exc}") from exc
    finally:
        con.close()


def _text(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, dt.datetime):
        v = v.astimezone(dt.UTC) if v.tzinfo else v.replace(tzinfo=dt.UTC)
        return v.strftime("%Y-%m-%dT%H:%M:%S.") + f"{v.microsecond // 1000:03d}Z"
    if isinstance(v, float):
        return "" if math.isnan(v) else f"{v:.6g}"
    return str(v)


def format_rows(columns: Sequence[str], rows: Sequence[Sequence[Any]], fmt: str = "table") -> str:
    """``table`` (aligned text), ``csv`` or ``json`` (a list of objects, times in ISO 8601 UTC)."""
    cells = [[_text(v) for v in r] for r in rows]
    if fmt == "csv":
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(columns)
        w.writerows(cells)
        return buf.getvalue().rstrip("\n")
    if fmt == "json":
        recs = [{c: (v if isinstance(v, int | float | bool) and not isinstance(v, float)
                     or (isinstance(v, float) and math.isfinite(v)) else (_text(v) or None))
                 for c, v in zip(columns, r, strict=True)} for r in rows]
        return json.dumps(recs, ensure_ascii=False, indent=1)
    if not columns:
        return "(no result)"
    widths = [max(len(c), *(len(r[i]) for r in cells)) if cells else len(c)
              for i, c in enumerate(columns)]
    lines = ["  ".join(c.ljust(w) for c, w in zip(columns, widths, strict=True)).rstrip(),
             "  ".join("-" * w for w in widths)]
    lines += ["  ".join(v.ljust(w) for v, w in zip(r, widths, strict=True)).rstrip() for r in cells]
    lines.append(f"{len(rows)} row{'s' if len(rows) != 1 else ''}")
    return "\n".join(lines)
