"""Checking and parsing one feed column (pyarrow) into numpy, naming its first bad row.

The fast path casts whole pyarrow columns at once; only when a cast fails is
the first failing row located, by bisection with the same cast, so the
reported row is exactly the one the fast path could not read. Used by
:mod:`harbourwatch.io.feeds` on each block of a feed.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
from numpy.typing import NDArray

__all__ = ["Problem", "parse_float", "parse_time", "parse_sensor", "time_form"]

_ZONE_RE = r"(?:Z|[+-]\d\d:?\d\d)$"
_DATE_RE = re.compile(r"^\s*[+-]?\d{4}-\d\d")
#: Epoch seconds accepted: 1970 up to year 2286 (pandas/pyarrow nanosecond range).
_EPOCH_MAX = 1e10


@dataclass(frozen=True)
class Problem:
    """The first bad row of one column: 0-based row, column, message."""

    row: int
    field: str
    message: str


def _is_text(t: pa.DataType) -> bool:
    return bool(pa.types.is_string(t) or pa.types.is_large_string(t))


def _first_failure(arr: pa.ChunkedArray, fn: Callable[[pa.ChunkedArray], object]) -> int:
    """Row of the first element of ``arr`` on which ``fn`` fails (``fn(arr)`` failed)."""
    lo, hi = 0, len(arr)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        try:
            fn(arr.slice(lo, mid - lo))
            lo = mid
        except (pa.ArrowException, ValueError):
            hi = mid
    return lo


def _to_numpy(arr: pa.ChunkedArray | pa.Array, dtype: type) -> NDArray:
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks else pa.array([], arr.type)
    return np.asarray(arr.to_numpy(zero_copy_only=False), dtype=dtype)


def _value(arr: pa.ChunkedArray, row: int) -> str:
    v = arr[row].as_py()
    return "''" if v is None else repr(v)


def _cast_float(arr: pa.ChunkedArray) -> tuple[NDArray[np.float64], int | None]:
    """Cast to float64; NaN for nulls. On failure, values up to the failing row."""
    n = len(arr)
    try:
        return _to_numpy(pc.cast(arr, pa.float64()), np.float64), None
    except (pa.ArrowException, ValueError):
        bad = _first_failure(arr, lambda a: pc.cast(a, pa.float64()))
        out = np.full(n, np.nan)
        out[:bad] = _to_numpy(pc.cast(arr.slice(0, bad), pa.float64()), np.float64)
        return out, bad


def parse_float(
    arr: pa.ChunkedArray, *, field: str, lo: float, hi: float, what: str,
    lo_open: bool = False, integer: bool = False, optional: bool = False,
) -> tuple[NDArray[np.float64], Problem | None]:
    """Numbers in ``[lo, hi]`` (``(lo, hi]`` when ``lo_open``); NaN where absent."""
    n = len(arr)
    failed: int | None = None
    if _is_text(arr.type):
        arr = arr.fill_null("")
        if optional:
            arr = pc.if_else(pc.equal(arr, ""), pa.scalar(None, pa.string()), arr)
        values, failed = _cast_float(arr)
    elif pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type):
        values = _to_numpy(pc.cast(arr, pa.float64()), np.float64)
    else:
        return np.full(n, np.nan), Problem(0, field, f"expected {what}, found a column of "
                                                    f"type {arr.type}")
    upto = n if failed is None else failed
    v = values[:upto]
    with np.errstate(invalid="ignore"):
        ok = (v > lo if lo_open else v >= lo) & (v <= hi)
        if integer:
            ok &= v == np.floor(v)
    if optional:
        ok |= np.isnan(v)
    if not ok.all():
        failed = int(np.argmax(~ok))
    if failed is None:
        return values, None
    raw = arr[failed].as_py()
    if raw is None or raw == "" or (isinstance(raw, float) and np.isnan(raw)):
        return values, Problem(failed, field, f"empty value, expected {what}")
    return values, Problem(failed, field, f"expected {what}, found {raw!r}")


def _micro_to_seconds(us: NDArray[np.int64]) -> NDArray[np.float64]:
    # Whole seconds and the microsecond remainder separately: both time forms
    # give the same float for the same instant.
    return (us // 1_000_000).astype(np.float64) + (us % 1_000_000).astype(np.float64) / 1e6


def _epoch(values: NDArray[np.float64]) -> NDArray[np.float64]:
    # out-of-range values are reported by the caller's range check; here they
    # only must not overflow the integer conversion
    ok = np.isfinite(values) & (np.abs(values) < 1e12)
    us = np.round(np.where(ok, values, 0.0) * 1e6).astype(np.int64)
    return _micro_to_seconds(us)


def time_form(arr: pa.ChunkedArray) -> bool | None:
    """Whether a text time column's first value is epoch seconds (``None``: not text, or empty).

    The first data row of a file sets its form: give it to :func:`parse_time`
    for every later block of the same file.
    """
    if not _is_text(arr.type) or len(arr) == 0:
        return None
    first_raw = arr.fill_null("")[0].as_py()
    try:
        float(pc.cast(pa.array([first_raw]), pa.float64())[0].as_py())
        return True
    except (pa.ArrowException, ValueError, TypeError):
        return False


def parse_time(arr: pa.ChunkedArray, *, epoch_form: bool | None = None,
               ) -> tuple[NDArray[np.float64], Problem | None]:
    """Times as epoch seconds (microsecond resolution), one form per file.

    ``epoch_form`` is the file's form (:func:`time_form` of its first block);
    by default this column's first value sets it.
    """
    n = len(arr)
    epoch_what = "epoch seconds (a number from 0 to 1e10)"
    if pa.types.is_timestamp(arr.type):
        if arr.type.tz is None:
            return np.zeros(n), Problem(0, "time", "time without a zone designator "
                                                   "(Parquet timestamp has no time zone)")
        us = _to_numpy(pc.cast(arr, pa.timestamp("us", "UTC")).cast(pa.int64()), np.int64)
        return _micro_to_seconds(us), None
    if not _is_text(arr.type):
        values, p = parse_float(arr, field="time", lo=0.0, hi=_EPOCH_MAX, what=epoch_what)
        return _epoch(values), p
    arr = arr.fill_null("")
    if n == 0:
        return np.zeros(0), None
    if epoch_form is None:
        epoch_form = bool(time_form(arr))
    if epoch_form:
        values, p = parse_float(arr, field="time", lo=0.0, hi=_EPOCH_MAX, what=epoch_what)
        if p is not None and _DATE_RE.match(str(arr[p.row].as_py())):
            p = Problem(p.row, "time", "this file mixes time forms: its first data row gives "
                        f"epoch seconds, this row an ISO 8601 time {_value(arr, p.row)}; use "
                        "one form per file")
        return _epoch(values), p
    # ISO 8601 with a zone designator.
    zoned = _to_numpy(pc.match_substring_regex(arr, _ZONE_RE), bool)
    upto = n if zoned.all() else int(np.argmax(~zoned))
    head = arr.slice(0, upto)
    ns_type = pa.timestamp("ns", "UTC")
    try:
        stamps = pc.cast(head, ns_type)
        failed = None
    except (pa.ArrowException, ValueError):
        failed = _first_failure(head, lambda a: pc.cast(a, ns_type))
        stamps = pc.cast(head.slice(0, failed), ns_type)
    ns = np.zeros(n, dtype=np.int64)
    ns[: len(stamps)] = _to_numpy(stamps.cast(pa.int64()), np.int64)
    t = _micro_to_seconds(ns // 1000)
    if failed is not None:
        return t, Problem(failed, "time", f"cannot read the ISO 8601 time {_value(arr, failed)}")
    if upto == n:
        return t, None
    raw = str(arr[upto].as_py())
    if raw.strip() == "":
        msg = "empty value, expected a time (ISO 8601 with zone designator or epoch seconds)"
    elif _is_number(raw):
        msg = (f"this file mixes time forms: its first data row gives an ISO 8601 time, this row "
               f"epoch seconds {raw!r}; use one form per file")
    elif _DATE_RE.match(raw):
        msg = (f"time without a zone designator {raw!r}: add 'Z' for UTC or an offset "
               "such as '+02:00'")
    else:
        msg = ("expected a time (ISO 8601 with zone designator, e.g. "
               f"'2026-05-04T06:00:01.250Z', or epoch seconds), found {raw!r}")
    return t, Problem(upto, "time", msg)


def _is_number(text: str) -> bool:
    try:
        pc.cast(pa.array([text]), pa.float64())
        return True
    except (pa.ArrowException, ValueError):
        return False


def parse_sensor(arr: pa.ChunkedArray, ids: Sequence[str]) -> tuple[NDArray[np.int64],
                                                                     Problem | None]:
    """Sensor ids to indices into ``ids``."""
    if not _is_text(arr.type):
        try:
            arr = pc.cast(arr, pa.string())
        except (pa.ArrowException, ValueError):
            return (np.zeros(len(arr), dtype=np.int64),
                    Problem(0, "sensor", f"expected a sensor id, found a column of type {arr.type}"))
    arr = arr.fill_null("")
    known = ", ".join(repr(i) for i in ids) or "none"
    idx = pc.index_in(arr, value_set=pa.array(list(ids), pa.string()))
    out = _to_numpy(idx.fill_null(-1), np.int64)
    bad = out < 0
    if not bad.any():
        return out, None
    row = int(np.argmax(bad))
    raw = arr[row].as_py()
    if raw == "":
        return out, Problem(row, "sensor", f"empty value, expected a sensor id (one of {known})")
    return out, Problem(row, "sensor", f"unknown sensor {raw!r}; known sensors: {known}")
