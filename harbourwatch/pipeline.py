"""One review run, wired stage by stage: inputs -> frame -> filter -> rules -> outputs.

Everything is validated before anything is written, so bad input never
touches the output folder; every output file is written atomically.
"""

from __future__ import annotations

import json
import platform
import sys
import time
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, field
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from harbourwatch import __version__
from harbourwatch.filter import FilterOutput, run_filter
from harbourwatch.io.atomic import atomic_write_text, sha256_file
from harbourwatch.io.inputs import RunInputs
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.rules.evaluate import Alert
from harbourwatch.scene.build import into_local_frame
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import (
    TrajectorySet,
    as_seen_csv_text,
    tracks_csv_text,
    trajectories_geojson,
)
from harbourwatch.units import CAUTION

__all__ = ["RunSummary", "run_review", "run_demo"]

PathArg = str | PathLike[str]



@dataclass(frozen=True, kw_only=True)
class RunSummary:
    """What a review run found, for the terminal and for scripts."""

    out_dir: Path
    vessels: int
    still_present: int
    departed: int
    plots_total: int
    plots_used: int
    scans: int
    seconds: float
    feed_seconds: float
    alerts: tuple[Alert, ...] = ()
    alerts_text: str = ""
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def clutter_share(self) -> float:
        """Share of plots not used by any estimated trajectory."""
        return 0.0 if self.plots_total == 0 else 1.0 - self.plots_used / self.plots_total

    def as_text(self) -> str:
        """A short plain-text summary followed by the alerts table."""
        rate = self.feed_seconds / self.seconds if self.seconds > 0 else float("inf")
        lines = [
            f"vessels found   {self.vessels} ({self.still_present} still present at the end, "
            f"{self.departed} departed earlier)",
            f"plots           {self.plots_total} in {self.scans} scans, {self.plots_used} used by "
            f"trajectories, clutter share {100 * self.clutter_share:.1f} %",
            f"time taken      {self.seconds:.1f} s for {self.feed_seconds / 60:.1f} min of feed "
            f"({rate:.0f}x real time)",
            f"outputs         {self.out_dir}",
        ]
        lines += [f"note            {n}" for n in self.notes]
        lines += ["", self.alerts_text or "no alerts", "", CAUTION]
        return "\n".join(lines)


def _progress_printer(enabled: bool) -> Callable[[int, int], None] | None:
    if not enabled or not sys.stderr.isatty():
        return None
    start = time.perf_counter()

    def show(i: int, n: int) -> None:
        frac = i / max(n, 1)
        bar = "#" * int(30 * frac)
        el = time.perf_counter() - start
        sys.stderr.write(f"\rtracking [{bar:<30s}] {100 * frac:5.1f} % {el:6.1f} s")
        if i >= n:
            sys.stderr.write("\n")
        sys.stderr.flush()

    return show


def _versions() -> dict[str, str]:
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


def _provenance(
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
) -> dict[str, Any]:
    """run.json's content: software, inputs with checksums, parameters, results, timings."""
    plots_used = int(sum(int(np.count_nonzero(tr.plot_ids >= 0)) for tr in tset))
    return {
        "software": _versions(),
        "caution": CAUTION,
        "inputs": {
            "feeds": [{"path": str(p), "sha256": sha256_file(p)} for p in feeds],
            "sensors": {"path": str(sensors), "sha256": sha256_file(sensors)},
            "zones": {"path": str(zones), "sha256": sha256_file(zones)},
            "rules": {"path": str(rules), "sha256": sha256_file(rules)},
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
        "filter_stats": _jsonable(fout.stats),
        "filter_log": list(fout.log),
        "timings": timings,
    }


def _write_trajectory_tables(out_dir: Path, tset: TrajectorySet) -> float:
    """Write tracks.csv, as_seen.csv and trajectories.geojson; return the seconds taken."""
    t = time.perf_counter()
    atomic_write_text(out_dir / "tracks.csv", tracks_csv_text(tset))
    atomic_write_text(out_dir / "as_seen.csv", as_seen_csv_text(tset))
    atomic_write_text(
        out_dir / "trajectories.geojson",
        json.dumps(trajectories_geojson(tset), separators=(",", ":")) + "\n",
    )
    return time.perf_counter() - t


def run_review(
    feeds: Sequence[PathArg],
    *,
    sensors: PathArg,
    zones: PathArg,
    rules: PathArg,
    out: PathArg,
    settings: FilterSettings | None = None,
    seed: int = 0,
    tile_url: str | None = None,
    progress: bool = True,
    screenshots: bool = False,
    window: tuple[float, float] | None = None,
    collect: Callable[[RunInputs, TrajectorySet, Sequence[Alert]], None] | None = None,
) -> RunSummary:
    """Review plot feeds end to end and write every output into ``out``.

    Parameters
    ----------
    feeds
        Plot feed files (CSV, ``.csv.gz``, Parquet); merged.
    sensors, zones, rules
        The sensor TOML, zones GeoJSON and rules TOML.
    out
        Output folder (created if missing).
    settings
        Filter tuning (defaults suit harbour traffic).
    seed
        Seed of the alert-probability draws.
    tile_url
        Optional tile server URL template for a basemap in the reports.
    progress
        Show a progress bar on a terminal.
    screenshots
        Also save PNG screenshots of the reports under ``out/screenshots``
        (needs a local Chromium; skipped with a note otherwise).
    window
        Optional UTC time window ``(t0, t1)``, epoch seconds: only plots with
        ``t0 <= time < t1`` are reviewed (a campaign chunk reads its own files
        and keeps its window's rows).
    collect
        Optional callback given the validated inputs, the trajectory set and
        the alerts once the outputs are written (a campaign chunk keeps what
        it needs for joining and radar health from there).

    Raises
    ------
    InputError
        For any invalid input, before anything is written.
    """
    from harbourwatch.io.inputs import load_inputs
    from harbourwatch.report import ReportInputs, write_reports
    from harbourwatch.rules.evaluate import (
        RULE_SCHEMAS,
        alerts_table,
        evaluate_rules,
        write_alerts_csv,
    )

    settings = settings or FilterSettings()
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    inp = load_inputs(feeds, sensors=sensors, zones=zones, rules=rules, rule_schemas=RULE_SCHEMAS,
                      window=window)
    timings["read_inputs_s"] = time.perf_counter() - t0

    t = time.perf_counter()
    scene = into_local_frame(inp, settings)
    frame = scene.frame
    fout = run_filter(
        scene.scans, scene.sensors, settings,
        birth_regions=scene.birth_regions, progress=_progress_printer(progress),
    )
    timings["filter_s"] = time.perf_counter() - t

    feed_start = float(inp.plots.time.min()) if len(inp.plots) else 0.0
    feed_end = float(inp.plots.time.max()) if len(inp.plots) else 0.0
    tset = TrajectorySet(
        trajectories=tuple(fout.trajectories), frame=frame, as_seen=fout.as_seen,
        feed_start=feed_start, feed_end=feed_end,
    )

    out_dir = Path(out)
    out_dir.mkdir(parents=True, exist_ok=True)
    # the trajectory tables are written on a second thread while the rules and the
    # reports are worked out: much of their time is spent in pyproj, numpy and
    # pyarrow, which release the interpreter lock
    pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="harbourwatch-tables")
    tables = pool.submit(_write_trajectory_tables, out_dir, tset)
    try:
        t = time.perf_counter()
        alerts = evaluate_rules(tset, scene.zones, inp.rules, seed=seed)
        timings["rules_s"] = time.perf_counter() - t
        write_alerts_csv(alerts, out_dir / "alerts.csv")
        provenance = _provenance(
            inp, feeds, sensors=sensors, zones=zones, rules=rules, settings=settings, seed=seed,
            tile_url=tile_url, frame=frame, tset=tset, alerts=alerts, fout=fout, timings=timings,
        )
        t = time.perf_counter()
        write_reports(
            out_dir,
            ReportInputs(
                trajectories=tset, plots=inp.plots, scans=inp.scans, sensors=inp.sensors,
                zones=inp.zones, rules=inp.rules, alerts=alerts, provenance=provenance,
                tile_url=tile_url,
            ),
        )
        timings["reports_s"] = time.perf_counter() - t
    finally:
        pool.shutdown(wait=True)
    timings["write_tables_s"] = tables.result()

    timings["total_s"] = time.perf_counter() - t0
    if window is not None:
        provenance["parameters"]["window"] = [format_utc_one(window[0]), format_utc_one(window[1])]
    atomic_write_text(out_dir / "run.json", json.dumps(provenance, indent=2, sort_keys=True) + "\n")
    if collect is not None:
        collect(inp, tset, alerts)

    notes: list[str] = list(fout.log[:5])
    if screenshots:
        from harbourwatch.report.screenshot import take_screenshots

        shots = take_screenshots(out_dir)
        notes.append(
            f"screenshots in {out_dir / 'screenshots'}" if shots
            else "no screenshots: Chromium not found"
        )

    present = sum(1 for tr in tset if tr.alive_at_end)
    return RunSummary(
        out_dir=out_dir,
        vessels=len(tset),
        still_present=present,
        departed=len(tset) - present,
        plots_total=len(inp.plots),
        plots_used=provenance["results"]["plots_in_trajectories"],
        scans=len(inp.scans),
        seconds=timings["total_s"],
        feed_seconds=feed_end - feed_start,
        alerts=tuple(alerts),
        alerts_text=alerts_table(alerts),
        notes=tuple(notes),
    )


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    return obj


def demo_paths() -> dict[str, Path]:
    """Where the bundled Port Calder scenario lives (the repository's folders)."""
    root = Path(__file__).resolve().parent.parent
    return {
        "feed": root / "demo_feeds" / "plots.csv.gz",
        "truth": root / "demo_feeds" / "truth.csv.gz",
        "sensors": root / "demo_feeds" / "sensors.toml",
        "rules": root / "demo_feeds" / "rules.toml",
        "zones": root / "zones" / "port_calder.geojson",
    }


def run_demo(out: PathArg = "demo_out") -> RunSummary:
    """Run the bundled Port Calder scenario end to end into ``out``.

    Uses the committed demo files; where they are missing (an installed
    package without the repository) the scenario is regenerated from the
    simulator with its fixed seed first. Also scores the run against the
    scenario's ground truth (``score.json``) and saves screenshots of the
    reports when a local Chromium is available.
    """
    from harbourwatch.scoring.score import score_files

    paths = demo_paths()
    out_dir = Path(out)
    if not all(p.exists() for p in paths.values()):
        from harbourwatch.sim import simulate_to_dir

        gen = out_dir / "scenario"
        simulate_to_dir("demo", gen, feed_format="csv.gz")
        paths = {
            "feed": gen / "plots.csv.gz", "truth": gen / "truth.csv.gz",
            "sensors": gen / "sensors.toml", "rules": gen / "rules.toml",
            "zones": gen / "zones.geojson",
        }
    summary = run_review(
        [paths["feed"]], sensors=paths["sensors"], zones=paths["zones"], rules=paths["rules"],
        out=out_dir, screenshots=True,
    )
    if paths["truth"].exists():
        report = score_files(out_dir / "tracks.csv", paths["truth"])
        d = report.as_dict()
        atomic_write_text(out_dir / "score.json", json.dumps(d, indent=2, sort_keys=True) + "\n")
        note = (f"accuracy against the scenario's truth: mean GOSPA {d['gospa_mean']:.1f} m "
                f"(c = 200 m, p = 2), trajectory GOSPA {d['tgospa']:.0f}; see score.json")
        summary = RunSummary(**{**summary.__dict__, "notes": (*summary.notes, note)})
    return summary
