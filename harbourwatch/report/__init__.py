"""Self-contained offline HTML reports: the shift overview and one page per alert.

The only part of harbourwatch that imports folium. Pages carry Leaflet
(checked by SHA-256, see :mod:`._assets`), their styles, scripts and data
inline and make no network request unless the user configured a tile server.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.records import RuleConfig, SensorConfig, ZoneConfig
from harbourwatch.report._page import CAUTION, write_atomic
from harbourwatch.report.incident import incident_html
from harbourwatch.report.overview import incident_name, overview_html
from harbourwatch.rules.evaluate import Alert
from harbourwatch.trajectories import TrajectorySet

__all__ = ["ReportInputs", "write_reports", "CAUTION", "incident_name"]


@dataclass(frozen=True, kw_only=True, eq=False)
class ReportInputs:
    """Everything the reports show, as produced by one review run."""

    trajectories: TrajectorySet
    plots: PlotTable
    scans: Sequence[Scan]
    sensors: Sequence[SensorConfig]
    zones: Sequence[ZoneConfig]
    rules: Sequence[RuleConfig]
    alerts: Sequence[Alert]
    provenance: Mapping[str, Any]
    tile_url: str | None = None
    #: IANA time zone shown beside UTC on the pages (``--display-tz``), or ``None``.
    display_tz: str | None = None


def write_reports(out_dir: Path, inputs: ReportInputs, *,
                  progress: Callable[[int, int], None] | None = None) -> list[Path]:
    """Write ``report.html`` and ``incidents/alert-NNNN.html`` (one per alert) under ``out_dir``.

    Incident pages are numbered from 1 in the order of ``inputs.alerts``.
    Each file is written to a temporary file in its folder and then moved
    into place. ``progress(pages_done, pages_total)`` is called after each
    page. Returns the written paths, overview first.
    """
    out_dir = Path(out_dir)
    total = 1 + len(inputs.alerts)
    if progress is not None:
        progress(0, total)
    written = [write_atomic(out_dir / "report.html", overview_html(inputs))]
    if progress is not None:
        progress(1, total)
    for i in range(len(inputs.alerts)):
        written.append(
            write_atomic(out_dir / "incidents" / incident_name(i), incident_html(inputs, i))
        )
        if progress is not None:
            progress(i + 2, total)
    return written
