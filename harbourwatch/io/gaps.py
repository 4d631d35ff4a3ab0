"""Silent gaps in the merged feed: refused unless allowed, named when allowed.

One plot with a time stamp decades away from the rest (a clock reset to
1970, a typed year) would stretch every per-time view of the run over the
whole span. :func:`check_gaps` looks at the times of all plots together
(sorted) and finds every silence longer than :data:`MAX_GAP_S` in which no
radar gave any plot. By default such a feed is refused, naming the file and
line of the plot on the smaller side of the first offending gap (for a
single wrong stamp: that row). With ``allow_gaps`` the run goes on and each
gap is named in one warning line; the filter does no per-scan work across
it (scans are only formed where plots are).
"""

from __future__ import annotations

import numpy as np

from harbourwatch.errors import InputError
from harbourwatch.io.feeds import PlotTable
from harbourwatch.io.timefmt import format_utc_one

__all__ = ["MAX_GAP_S", "check_gaps", "fmt_span"]

#: Longest silence of all radars together accepted without ``allow_gaps``: longer than
#: any outage of a watch, far shorter than a clock error (common practice, no source).
MAX_GAP_S = 6 * 3600.0
#: A side of a gap holding at most this many plots (or this share) is "isolated".
_ISOLATED_PLOTS = 10
_ISOLATED_SHARE = 0.01


def fmt_span(seconds: float) -> str:
    """A long duration in the largest fitting unit (``56.3 years``, ``3.2 days``, ``7.5 h``).

    Examples
    --------
    >>> fmt_span(7 * 3600.0)
    '7.0 h'
    >>> fmt_span(56.3 * 365.25 * 86400)
    '56.3 years'
    """
    if seconds >= 365.25 * 86400:
        return f"{seconds / (365.25 * 86400):.1f} years"
    if seconds >= 2 * 86400:
        return f"{seconds / 86400:.1f} days"
    return f"{seconds / 3600:.1f} h"


def _where(plots: PlotTable, row: int) -> str:
    return f"line {int(plots.line[row])} of {plots.files[int(plots.source[row])]}"


def check_gaps(plots: PlotTable, *, allow_gaps: bool = False,
               max_gap_s: float = MAX_GAP_S) -> tuple[str, ...]:
    """Refuse or name the silences longer than ``max_gap_s`` in the merged feed.

    Parameters
    ----------
    plots
        The merged plots (sorted by time, as :func:`read_feeds` gives them).
    allow_gaps
        Accept the gaps; return one warning line per gap instead.
    max_gap_s
        Longest accepted silence of all radars together.

    Returns
    -------
    tuple of str
        One warning per gap (empty without gaps, or when refused).

    Raises
    ------
    InputError
        Without ``allow_gaps``, for the first gap: file and line of the plot
        on its smaller side nearest the gap, field ``time``.
    """
    t = plots.time
    if t.size < 2:
        return ()
    d = np.diff(t)
    big = np.flatnonzero(d > max_gap_s)
    if big.size == 0:
        return ()
    if allow_gaps:
        return tuple(
            f"feed gap of {fmt_span(float(d[g]))}: no plot between "
            f"{format_utc_one(float(t[g]))} ({_where(plots, int(g))}) and "
            f"{format_utc_one(float(t[g + 1]))} ({_where(plots, int(g) + 1)}); accepted by "
            "--allow-gaps"
            for g in big
        )
    # segments between the gaps; the smallest one holds the suspect stamps
    bounds = np.concatenate(([0], big + 1, [t.size]))
    sizes = np.diff(bounds)
    k = int(np.argmin(sizes))
    first, last = int(bounds[k]), int(bounds[k + 1]) - 1
    isolated = sizes[k] <= max(_ISOLATED_PLOTS, _ISOLATED_SHARE * t.size)
    if k > 0:  # the gap before this segment: name its first plot
        row, other, gap = first, first - 1, float(d[first - 1])
        side = "after the previous plot"
    else:
        row, other, gap = last, last + 1, float(d[last])
        side = "before the next plot"
    what = (f"an isolated time ({int(sizes[k])} of {t.size} plots on this side of the gap: "
            "a reset clock or a typing error?)" if isolated
            else "all radars silent that long")
    raise InputError(
        f"time {format_utc_one(float(t[row]))} is {fmt_span(gap)} {side} "
        f"({format_utc_one(float(t[other]))}, {_where(plots, other)}): {what}; a feed with "
        f"gaps longer than {fmt_span(max_gap_s)} needs --allow-gaps",
        file=plots.files[int(plots.source[row])], line=int(plots.line[row]), field="time")
