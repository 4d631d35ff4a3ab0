"""One source for units, the caution wording and the duration format.

Everything that states a unit conversion, the decision-support caution or a
duration in words takes it from here, so the terminal, ``run.json``, the
CSV summaries and the pages never disagree.
"""

from __future__ import annotations

__all__ = ["KNOT_M_S", "NAUTICAL_MILE_M", "CABLE_M", "CAUTION", "fmt_duration"]

#: One international nautical mile in metres (BIPM SI brochure, 9th edition, table 8,
#: non-SI units accepted for use with the SI).
NAUTICAL_MILE_M = 1852.0
#: One international knot (one nautical mile per hour) in metres per second (same table).
KNOT_M_S = NAUTICAL_MILE_M / 3600.0
#: One cable, a tenth of a nautical mile, in metres (common practice, no source).
CABLE_M = NAUTICAL_MILE_M / 10.0

#: Shown wherever results are shown: terminal, run.json, score output, every page.
CAUTION = (
    "Decision support only: these results support, and do not replace, qualified "
    "watchkeepers and the competent authority. Not for navigation. Local regulations prevail."
)


def fmt_duration(seconds: float) -> str:
    """A duration in words, rounded to the whole second (one rule everywhere).

    Examples
    --------
    >>> fmt_duration(45.4)
    '45 s'
    >>> fmt_duration(342.0)
    '5 min 42 s'
    >>> fmt_duration(3725.0)
    '1 h 02 min 05 s'
    """
    s = int(round(max(seconds, 0.0)))
    h, rem = divmod(s, 3600)
    m, sec = divmod(rem, 60)
    if h:
        return f"{h} h {m:02d} min {sec:02d} s"
    if m:
        return f"{m} min {sec:02d} s"
    return f"{sec} s"
