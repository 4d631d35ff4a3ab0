"""The alert tables: ``alerts.csv`` (with its optional position columns) and the terminal table."""

from __future__ import annotations

import csv
import os
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from harbourwatch.io.atomic import atomic_open
from harbourwatch.io.timefmt import format_clock, format_utc
from harbourwatch.rules.positions import POSITION_COLUMNS, alert_positions
from harbourwatch.trajectories import TrajectorySet

if TYPE_CHECKING:
    from harbourwatch.rules.evaluate import Alert

__all__ = ["ALERT_COLUMNS", "write_alerts_csv", "alerts_table"]

#: Columns of ``alerts.csv``, in order (the file contract).
ALERT_COLUMNS = (
    "rule", "kind", "track", "other_track", "zone", "start", "end", "probability", "summary",
)


def write_alerts_csv(alerts: Sequence[Alert], path: str | os.PathLike[str],
                     *, trajectories: TrajectorySet | None = None) -> None:
    """Write ``alerts.csv`` (contract columns, ISO UTC times, 3-decimal probabilities).

    With ``trajectories`` the optional position columns follow
    (:data:`~harbourwatch.rules.positions.POSITION_COLUMNS`: degrees to 7
    decimals, ``sd_m`` to 0.1 m; empty when the trajectory is unknown).
    Written to a temporary file in the same folder, then moved into place.
    """
    path = Path(path)
    starts: list[str] = [str(x) for x in format_utc([a.start for a in alerts])] if alerts else []
    ends: list[str] = [str(x) for x in format_utc([a.end for a in alerts])] if alerts else []
    extra = POSITION_COLUMNS if trajectories is not None else ()
    with atomic_open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(ALERT_COLUMNS + extra)
        for a, s, e in zip(alerts, starts, ends, strict=True):
            row = [a.rule, a.kind, a.track, a.other_track, a.zone, str(s), str(e),
                   f"{a.probability:.3f}", a.summary]
            if trajectories is not None:
                pos = alert_positions(a, trajectories)
                row += [""] * len(extra) if pos is None else [
                    f"{pos.key.lat:.7f}", f"{pos.key.lon:.7f}", f"{pos.start.lat:.7f}",
                    f"{pos.start.lon:.7f}", f"{pos.end.lat:.7f}", f"{pos.end.lon:.7f}",
                    f"{pos.key.sd_m:.1f}"]
            w.writerow(row)


def alerts_table(alerts: Sequence[Alert]) -> str:
    """The plain-text table printed at the end of a run (one row per alert)."""
    if not alerts:
        return "no alerts raised"
    head = ("start", "end", "rule", "kind", "track", "zone", "prob.")
    rows = [
        (format_clock(a.start, seconds=True), format_clock(a.end, seconds=True), a.rule, a.kind,
         a.track + (f"+{a.other_track}" if a.other_track else ""), a.zone or "-",
         f"{a.probability:.3f}")
        for a in alerts
    ]
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]

    def line(cells: Sequence[str]) -> str:
        return "  ".join(c.ljust(w) for c, w in zip(cells, widths, strict=True)).rstrip()

    out = [line(head), line(["-" * w for w in widths])]
    out += [line(r) for r in rows]
    out.append(f"{len(alerts)} alert{'s' if len(alerts) != 1 else ''} raised (times UTC)")
    return "\n".join(out)
