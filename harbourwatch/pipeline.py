"""One review run, wired stage by stage: inputs -> frame -> filter -> rules -> outputs.

Everything is validated before anything is written, so bad input never
touches the output folder; every output file is written atomically.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from harbourwatch.filter import FilterOutput, run_filter
from harbourwatch.io.atomic import atomic_write_chunks, atomic_write_text
from harbourwatch.io.inputs import RunInputs
from harbourwatch.io.outdir import check_out_folder, run_folder
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.spill import SpillStore
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.progress import RunProgress
from harbourwatch.report.provenance import run_record
from harbourwatch.rules.evaluate import (
    RULE_SCHEMAS,
    Alert,
    alerts_table,
    evaluate_rules,
    write_alerts_csv,
)
from harbourwatch.scene.build import LocalScene, into_local_frame
from harbourwatch.scene.checks import clutter_warnings
from harbourwatch.trajectories import (
    TrajectorySet,
    as_seen_csv_chunks,
    geojson_chunks,
    tracks_csv_chunks,
)
from harbourwatch.units import CAUTION

__all__ = ["RunSummary", "run_review", "run_demo"]

PathArg = str | PathLike[str]
Callback = Callable[[int, int], None]


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
    warnings: tuple[str, ...] = field(default_factory=tuple)

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
        lines += [f"warning         {w}" for w in self.warnings]
        lines += ["", self.alerts_text or "no alerts", "", CAUTION]
        return "\n".join(lines)


def _write_trajectory_tables(out_dir: Path, tset: TrajectorySet, progress: Callback) -> float:
    """Write tracks.csv, as_seen.csv and trajectories.geojson; return the seconds taken.

    Each is written chunk by chunk into its temporary file (never one text in memory).
    """
    t = time.perf_counter()
    n_tracks = sum(int(tr.time.size) for tr in tset)
    n_seen = tset.as_seen.rows
    total = n_tracks + n_seen + len(tset)
    progress(0, total)
    atomic_write_chunks(out_dir / "tracks.csv", tracks_csv_chunks(tset))
    progress(n_tracks, total)
    atomic_write_chunks(out_dir / "as_seen.csv", as_seen_csv_chunks(tset))
    progress(n_tracks + n_seen, total)
    atomic_write_chunks(out_dir / "trajectories.geojson", geojson_chunks(tset))
    progress(total, total)
    return time.perf_counter() - t


def _quiet(done: int, total: int) -> None:
    """The progress callback of a stage nobody watches."""


@dataclass(frozen=True, kw_only=True, eq=False)
class _Request:
    """What one review run was asked to do (the arguments of :func:`run_review`)."""

    feeds: Sequence[PathArg]
    sensors: PathArg
    zones: PathArg
    rules: PathArg
    out: PathArg
    settings: FilterSettings
    seed: int
    tile_url: str | None
    screenshots: bool
    display_tz: str | None = None
    allow_gaps: bool = False
    window: tuple[float, float] | None = None
    collect: Callable[[RunInputs, TrajectorySet, Sequence[Alert]], None] | None = None
    tables_thread: bool = True

    def input_files(self) -> list[PathArg]:
        return [*self.feeds, self.sensors, self.zones, self.rules]


# --------------------------------------------------------------------------- stages
def _read_inputs(req: _Request, timings: dict[str, float]) -> RunInputs:
    """Stage 1: read and validate every input, before anything is written."""
    from harbourwatch.io.inputs import load_inputs

    t = time.perf_counter()
    inp = load_inputs(req.feeds, sensors=req.sensors, zones=req.zones, rules=req.rules,
                      rule_schemas=RULE_SCHEMAS, allow_gaps=req.allow_gaps, window=req.window)
    timings["read_inputs_s"] = time.perf_counter() - t
    return inp


def _track(req: _Request, inp: RunInputs, bars: RunProgress,
           timings: dict[str, float]) -> tuple[LocalScene, FilterOutput, TrajectorySet]:
    """Stage 2: the scene in the local frame, the filter, the set of trajectories."""
    t = time.perf_counter()
    scene = into_local_frame(inp, req.settings)
    tracking = bars.stage("tracking")
    if tracking is not None:
        tracking(0, len(scene.scans))  # the bar shows from the first scan on
    # finished trajectories go to an unlinked temporary file (memory stays flat along a long
    # feed); it is freed with the last trajectory that refers to it
    fout = run_filter(
        scene.scans, scene.sensors, req.settings,
        birth_regions=scene.birth_regions, progress=tracking, spill=SpillStore(),
    )
    timings["filter_s"] = time.perf_counter() - t
    scene = replace(scene, scans=())  # the scans in the local frame serve the filter only
    feed_start = float(inp.plots.time.min()) if len(inp.plots) else 0.0
    feed_end = float(inp.plots.time.max()) if len(inp.plots) else 0.0
    tset = TrajectorySet(
        trajectories=tuple(fout.trajectories), frame=scene.frame, as_seen=fout.as_seen,
        feed_start=feed_start, feed_end=feed_end,
    )
    return scene, fout, tset


def _warnings(inp: RunInputs, scene: LocalScene, tset: TrajectorySet) -> list[str]:
    """Every plausibility warning of the run (gaps, frame and zones, plots, clutter)."""
    used = np.zeros(len(inp.plots), bool)
    for tr in tset:
        used[tr.plot_ids[tr.plot_ids >= 0]] = True
    scans_per_sensor = np.bincount([sc.sensor for sc in inp.scans], minlength=len(inp.sensors))
    return [*inp.warnings, *scene.warnings,
            *clutter_warnings(inp.plots, inp.sensors, scans_per_sensor.tolist(), used)]


def _apply_rules(req: _Request, inp: RunInputs, scene: LocalScene, tset: TrajectorySet,
                 out_dir: Path, bars: RunProgress, timings: dict[str, float]) -> list[Alert]:
    """Stage 3: every rule over every trajectory; ``alerts.csv``."""
    t = time.perf_counter()
    alerts = evaluate_rules(tset, scene.zones, inp.rules, seed=req.seed,
                            progress=bars.stage("rules") or _quiet)
    timings["rules_s"] = time.perf_counter() - t
    write_alerts_csv(alerts, out_dir / "alerts.csv", trajectories=tset)
    return alerts


def _write_pages(req: _Request, inp: RunInputs, tset: TrajectorySet, alerts: list[Alert],
                 provenance: dict[str, Any], out_dir: Path, bars: RunProgress,
                 timings: dict[str, float]) -> None:
    """Stage 4: the overview and one incident page per alert."""
    from harbourwatch.report import ReportInputs, write_reports

    t = time.perf_counter()
    write_reports(
        out_dir,
        ReportInputs(
            trajectories=tset, plots=inp.plots, scans=inp.scans, sensors=inp.sensors,
            zones=inp.zones, rules=inp.rules, alerts=alerts, provenance=provenance,
            tile_url=req.tile_url, display_tz=req.display_tz,
        ),
        progress=bars.stage("reports"),
    )
    timings["reports_s"] = time.perf_counter() - t


def _screenshot_note(out_dir: Path, shown: Path) -> str:
    """Stage 5 (optional): PNG screenshots of the pages, when Chromium is here."""
    from harbourwatch.report.screenshot import take_screenshots

    shots = take_screenshots(out_dir)
    return f"screenshots in {shown / 'screenshots'}" if shots else "no screenshots: Chromium not found"


def _review_into(req: _Request, inp: RunInputs, out_dir: Path, bars: RunProgress,
                 timings: dict[str, float], t0: float) -> RunSummary:
    """Stages 2 to 5 into ``out_dir`` (the run's new folder, swapped in by the caller)."""
    scene, fout, tset = _track(req, inp, bars, timings)
    warnings = _warnings(inp, scene, tset)
    # the trajectory tables are written on a second thread while the rules and the
    # reports are worked out: much of their time is spent in pyproj, numpy and
    # pyarrow, which release the interpreter lock (unless asked not to: a campaign worker)
    pool = (ThreadPoolExecutor(max_workers=1, thread_name_prefix="harbourwatch-tables")
            if req.tables_thread else None)
    tables = (pool.submit(_write_trajectory_tables, out_dir, tset, bars.stage("tables") or _quiet)
              if pool is not None else None)
    try:
        alerts = _apply_rules(req, inp, scene, tset, out_dir, bars, timings)
        provenance = run_record(
            inp, req.feeds, sensors=req.sensors, zones=req.zones, rules=req.rules,
            settings=req.settings, seed=req.seed, tile_url=req.tile_url, frame=scene.frame,
            tset=tset, alerts=alerts, fout=fout, timings=timings, warnings=warnings,
        )
        provenance["parameters"]["display_tz"] = req.display_tz
        _write_pages(req, inp, tset, alerts, provenance, out_dir, bars, timings)
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    timings["write_tables_s"] = (tables.result() if tables is not None else
                                 _write_trajectory_tables(out_dir, tset, bars.stage("tables") or _quiet))
    bars.close()

    timings["total_s"] = time.perf_counter() - t0
    if req.window is not None:
        provenance["parameters"]["window"] = [format_utc_one(w) for w in req.window]
    atomic_write_text(out_dir / "run.json", json.dumps(provenance, indent=2, sort_keys=True) + "\n")
    if req.collect is not None:
        req.collect(inp, tset, alerts)

    notes: list[str] = list(fout.log[:5])
    if req.screenshots:
        notes.append(_screenshot_note(out_dir, Path(req.out)))
    present = sum(1 for tr in tset if tr.alive_at_end)
    return RunSummary(
        out_dir=Path(req.out),
        vessels=len(tset),
        still_present=present,
        departed=len(tset) - present,
        plots_total=len(inp.plots),
        plots_used=provenance["results"]["plots_in_trajectories"],
        scans=len(inp.scans),
        seconds=timings["total_s"],
        feed_seconds=tset.feed_end - tset.feed_start,
        alerts=tuple(alerts),
        alerts_text=alerts_table(alerts),
        notes=tuple(notes),
        warnings=tuple(warnings),
    )


def _review(req: _Request, *, progress: bool,
            extra: Callable[[Path, RunSummary], RunSummary] | None = None) -> RunSummary:
    """A whole run: check ``--out``, read, then stages 2 to 5 in a new folder swapped in."""
    t0 = time.perf_counter()
    target = check_out_folder(req.out, inputs=req.input_files())
    timings: dict[str, float] = {}
    inp = _read_inputs(req, timings)
    bars = RunProgress(enabled=progress)
    try:
        with run_folder(target) as stage:
            summary = _review_into(req, inp, stage, bars, timings, t0)
            if extra is not None:
                summary = extra(stage, summary)
    finally:
        bars.close()
    return summary


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
    display_tz: str | None = None,
    allow_gaps: bool = False,
    window: tuple[float, float] | None = None,
    collect: Callable[[RunInputs, TrajectorySet, Sequence[Alert]], None] | None = None,
    tables_thread: bool = True,
) -> RunSummary:
    """Review plot feeds end to end and write every output into ``out``.

    The run owns ``out``: it is checked before any work, locked against a
    second run, written as a new folder beside it and swapped in at the end,
    so it holds exactly this run's files and a failed or killed run leaves
    the previous one whole (:mod:`harbourwatch.io.outdir`).

    Parameters
    ----------
    feeds
        Plot feed files (CSV, ``.csv.gz``, Parquet); merged.
    sensors, zones, rules
        The sensor TOML, zones GeoJSON and rules TOML.
    out
        Output folder: new, empty or a previous run's (replaced whole).
    settings
        Filter tuning (defaults suit harbour traffic).
    seed
        Seed of the alert-probability draws.
    tile_url
        Optional tile server URL template for a basemap in the reports.
    progress
        Show progress bars of every stage on a terminal.
    display_tz
        IANA time zone shown beside UTC on the pages (``None``: UTC only).
    screenshots
        Also save PNG screenshots of the reports under ``out/screenshots``
        (needs a local Chromium; skipped with a note otherwise).
    allow_gaps
        Accept a feed in which every radar is silent for longer than
        :data:`~harbourwatch.io.gaps.MAX_GAP_S` (each gap becomes a warning);
        refused otherwise, naming the plot on the smaller side of the gap.
    window
        Optional UTC time window ``(t0, t1)``, epoch seconds: only plots with
        ``t0 <= time < t1`` are reviewed (a campaign chunk reads its own files
        and keeps its window's rows).
    collect
        Optional callback given the validated inputs, the trajectory set and
        the alerts once the outputs are written, inside the new folder before
        it is swapped in (a campaign chunk keeps what it needs for joining and
        radar health from there).
    tables_thread
        Write the trajectory tables on a second thread while the rules and
        the reports are worked out (default); ``False`` writes them after, on
        this thread (a campaign worker, whose core is its only one).

    Raises
    ------
    InputError
        For any invalid input or an unusable ``out`` (field ``--out``: a
        file, not writable, too little room, another run writing into it),
        before anything is written.
    OutputError
        When an output cannot be written (a full disk); ``out`` is left as
        it was.
    """
    req = _Request(feeds=feeds, sensors=sensors, zones=zones, rules=rules, out=out,
                   settings=settings or FilterSettings(), seed=seed, tile_url=tile_url,
                   screenshots=screenshots, display_tz=display_tz, allow_gaps=allow_gaps,
                   window=window, collect=collect, tables_thread=tables_thread)
    from harbourwatch.report._fmt import display_zone

    display_zone(display_tz)  # an unknown zone fails here, before any work
    return _review(req, progress=progress)


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


def run_demo(out: PathArg = "demo_out", *, progress: bool = True) -> RunSummary:
    """Run the bundled Port Calder scenario end to end into ``out``.

    Uses the committed demo files; where they are missing (an installed
    package without the repository) the scenario is regenerated from the
    simulator with its fixed seed first (kept in ``out/scenario``). Also
    scores the run against the scenario's ground truth (``score.json``) and
    saves screenshots of the reports when a local Chromium is available.
    """
    import shutil
    import tempfile

    paths = demo_paths()
    with tempfile.TemporaryDirectory(prefix="harbourwatch-demo-") as tmp:
        generated = not all(p.exists() for p in paths.values())
        if generated:
            from harbourwatch.sim import simulate_to_dir

            gen = Path(tmp) / "scenario"
            simulate_to_dir("demo", gen, feed_format="csv.gz")
            paths = {
                "feed": gen / "plots.csv.gz", "truth": gen / "truth.csv.gz",
                "sensors": gen / "sensors.toml", "rules": gen / "rules.toml",
                "zones": gen / "zones.geojson",
            }

        def score(stage: Path, summary: RunSummary) -> RunSummary:
            from harbourwatch.scoring.score import score_files

            if generated:
                shutil.copytree(Path(tmp) / "scenario", stage / "scenario")
            if not paths["truth"].exists():
                return summary
            d = score_files(stage / "tracks.csv", paths["truth"]).as_dict()
            atomic_write_text(stage / "score.json", json.dumps(d, indent=2, sort_keys=True) + "\n")
            note = (f"accuracy against the scenario's truth: mean GOSPA {d['gospa_mean']:.1f} m "
                    f"(c = 200 m, p = 2), trajectory GOSPA {d['tgospa']:.0f}; see score.json")
            return replace(summary, notes=(*summary.notes, note))

        req = _Request(feeds=[paths["feed"]], sensors=paths["sensors"], zones=paths["zones"],
                       rules=paths["rules"], out=out, settings=FilterSettings(), seed=0,
                       tile_url=None, screenshots=True)
        return _review(req, progress=progress, extra=score)
