"""What a review run records about itself: ``run.json`` (and the report's provenance section).

Software versions, every input with its SHA-256, every parameter, the
results, the filter's statistics and log, the warnings and the timings.
"""

from __future__ import annotations

import platform
from collections.abc import Sequence
from dataclasses import asdict
from os import PathLike
from typing import Any

import numpy as np

from harbourwatch import __version__
from harbourwatch.filter import FilterOutput
from harbourwatch.io.atomic import sha256_file
from harbourwatch.io.inputs import RunInputs
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.rules.evaluate import Alert
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import TrajectorySet
from harbourwatch.units import CAUTION

__all__ = ["run_record", "versions", "jsonable"]

PathArg = str | PathLike[str]


def versions() -> dict[str, str]:
    """Versions of harbourwatch, Python and the libraries that shape the results."""
    import folium
    import numba
    import pyproj
    import scipy
    import shapely

    return {
        "harbourwatch": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "shapely": shapely.__version__,
        "pyproj": pyproj.__version__,
        "folium": folium.__version__,
        "numba": numba.__version__,
    }


def run_record(
    inp: RunInputs,
    feeds: Sequence[PathArg],
    *,
    sensors: PathArg,
    zones: PathArg,
    rules: PathArg,
    settings: FilterSettings,
    seed: int,
    tile_url: str | None,
    frame: LocalFrame,
    tset: TrajectorySet,
    alerts: Sequence[Alert],
    fout: FilterOutput,
    timings: dict[str, float],
    warnings: Sequence[str] = (),
) -> dict[str, Any]:
    """run.json's content: software, inputs with checksums, parameters, results, timings."""
    plots_used = int(sum(int(np.count_nonzero(tr.plot_ids >= 0)) for tr in tset))

    def digest(p: PathArg) -> str:  # taken while reading: inputs are read once (FIFOs work)
        return inp.checksums.get(str(p)) or sha256_file(p)

    return {
        "software": versions(),
        "caution": CAUTION,
        "inputs": {
            "feeds": [{"path": str(p), "sha256": digest(p)} for p in feeds],
            "sensors": {"path": str(sensors), "sha256": digest(sensors)},
            "zones": {"path": str(zones), "sha256": digest(zones)},
            "rules": {"path": str(rules), "sha256": digest(rules)},
        },
        "parameters": {
            "filter": asdict(settings),
            "seed": seed,
            "tile_url": tile_url,
            "sensors": [asdict(s) for s in inp.sensors],
            "rules": [
                {"id": r.id, "kind": r.kind, "zone": r.zone, "min_probability": r.min_probability,
                 **dict(r.params)}
                for r in inp.rules
            ],
            "frame": {"projection": "azimuthal equidistant (WGS84)",
                      "lat0_deg": frame.lat0_deg, "lon0_deg": frame.lon0_deg},
        },
        "feed": {
            "start": format_utc_one(tset.feed_start) if len(inp.plots) else None,
            "end": format_utc_one(tset.feed_end) if len(inp.plots) else None,
            "plots": len(inp.plots),
            "duplicates_dropped": inp.plots.duplicates_dropped,
            "scans": len(inp.scans),
        },
        "results": {
            "trajectories": len(tset),
            "present_at_end": sum(1 for tr in tset if tr.alive_at_end),
            "alerts": len(alerts),
            "plots_in_trajectories": plots_used,
        },
        "filter_stats": jsonable(fout.stats),
        "filter_log": list(fout.log),
        "warnings": list(warnings),
        "timings": timings,
    }


def jsonable(obj: Any) -> Any:
    """``obj`` with numpy scalars and arrays as plain Python values (for JSON)."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    return obj
