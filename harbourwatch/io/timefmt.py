"""Time stamps at the edges: epoch seconds inside, ISO 8601 UTC outside."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["format_utc", "format_utc_one", "format_clock"]


def format_utc(t: ArrayLike) -> NDArray[np.str_]:
    """Epoch seconds to ISO 8601 UTC with milliseconds and a trailing ``Z``.

    Rounds to the nearest millisecond (half away from zero is irrelevant at
    float64 resolution of epoch seconds, about 0.2 microseconds).

    Examples
    --------
    >>> format_utc([0.0, 1777874401.25]).tolist()
    ['1970-01-01T00:00:00.000Z', '2026-05-04T06:00:01.250Z']
    """
    return np.array(format_utc_list(t), dtype=str)


def format_utc_list(t: ArrayLike) -> list[str]:
    """:func:`format_utc` as a plain list (the fast form for writing big tables)."""
    ms = np.round(np.asarray(t, dtype=np.float64).reshape(-1) * 1000.0).astype("int64")
    s = np.datetime_as_string(ms.astype("datetime64[ms]"), unit="ms")
    return [x + "Z" for x in s.tolist()]


def format_utc_one(t: float) -> str:
    """One epoch time to ISO 8601 UTC with milliseconds and ``Z``."""
    return str(format_utc([t])[0])


def format_clock(t: float, *, seconds: bool = False) -> str:
    """``HH:MM`` (or ``HH:MM:SS``) UTC for plain-language summaries."""
    iso = format_utc_one(t)
    return iso[11:19] if seconds else iso[11:16]
