"""How the pages write positions, distances and times (plain text, not escaped).

* Positions in degrees and decimal minutes, the form charts and logbooks
  use: ``57°31.204'N 030°02.118'W`` (three decimals of a minute, about 2 m).
* Distances in metres below one nautical mile, in nautical miles above
  (:data:`harbourwatch.units.NAUTICAL_MILE_M`).
* Times as ``HH:MM:SS`` UTC; the date is written once per page
  (:func:`fmt_day`) and beside a time only when it differs from the page's
  date. With a display time zone (``--display-tz``, an IANA name such as
  ``Europe/Oslo``) the local time follows in brackets.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from functools import cache
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from harbourwatch.errors import ParameterError
from harbourwatch.units import NAUTICAL_MILE_M

__all__ = ["fmt_dm", "fmt_distance", "fmt_clock", "fmt_day", "display_zone", "fmt_sd2"]


def _dm(value: float, *, width: int, hemis: str) -> str:
    thousandths = int(round(abs(value) * 60_000.0))  # of a minute, rounded once (no 60.000')
    deg, milli = divmod(thousandths, 60_000)
    hemi = hemis[0] if value >= 0 else hemis[1]
    return f"{deg:0{width}d}\u00b0{milli // 1000:02d}.{milli % 1000:03d}'{hemi}"


def fmt_dm(lat: float, lon: float) -> str:
    """Latitude and longitude in degrees and decimal minutes.

    Examples
    --------
    >>> fmt_dm(57.52006667, -30.0353)
    "57°31.204'N 030°02.118'W"
    >>> fmt_dm(-0.5, 179.99999999)
    "00°30.000'S 180°00.000'E"
    """
    if not (math.isfinite(lat) and math.isfinite(lon)):
        return "position unknown"
    return f"{_dm(lat, width=2, hemis='NS')} {_dm(lon, width=3, hemis='EW')}"


def fmt_distance(metres: float) -> str:
    """``820 m`` below one nautical mile, ``1.25 NM`` from there on.

    Examples
    --------
    >>> fmt_distance(82.4), fmt_distance(2315.0)
    ('82 m', '1.25 NM')
    """
    if not math.isfinite(metres):
        return "n/a"
    if abs(metres) < NAUTICAL_MILE_M:
        return f"{metres:.0f} m"
    return f"{metres / NAUTICAL_MILE_M:.2f} NM"


def fmt_sd2(sd_m: float) -> str:
    """The 2-sigma uncertainty of a 1-sigma ``sd_m``: ``±8 m (2σ)``."""
    if not math.isfinite(sd_m):
        return "n/a"
    return f"\u00b1{2.0 * sd_m:.0f} m (2\u03c3)"


@cache
def display_zone(name: str | None) -> ZoneInfo | None:
    """The IANA time zone ``name`` (``None`` for none).

    Raises
    ------
    ParameterError
        When the zone is not known to the system's or ``tzdata``'s database.
    """
    if not name:
        return None
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError) as exc:
        raise ParameterError(
            f"unknown time zone {name!r}: give an IANA name such as Europe/Oslo",
            parameter="display_tz",
        ) from exc


def _utc(t: float) -> datetime:
    return datetime.fromtimestamp(round(t, 3), tz=UTC)


def fmt_day(t: float) -> str:
    """The UTC date of ``t``: ``2026-05-04``."""
    return _utc(t).strftime("%Y-%m-%d")


def fmt_clock(t: float, *, day: str | None = None, tz: str | None = None,
              seconds: bool = True) -> str:
    """``06:23:08 UTC``; the date first when it is not ``day``; local time after with ``tz``.

    Seconds are truncated, as a clock shows them (``06:23:08.840`` is
    ``06:23:08``), the same as the ISO stamps of the CSV files cut short.

    Examples
    --------
    >>> fmt_clock(1777875788.84)
    '06:23:08 UTC'
    >>> fmt_clock(1777875788.84, day="2026-05-03", tz="Europe/Oslo")
    '2026-05-04 06:23:08 UTC (08:23:08 CEST)'
    """
    u = _utc(t)
    fmt = "%H:%M:%S" if seconds else "%H:%M"
    text = u.strftime(fmt) + " UTC"
    if day is not None and u.strftime("%Y-%m-%d") != day:
        text = u.strftime("%Y-%m-%d ") + text
    zone = display_zone(tz)
    if zone is not None:
        loc = u.astimezone(zone)
        same_day = loc.strftime("%Y-%m-%d") == u.strftime("%Y-%m-%d")
        text += f" ({loc.strftime(fmt if same_day else '%Y-%m-%d ' + fmt)} {loc.tzname()})"
    return text
