"""A campaign end to end: discover, scan, chunk, schedule, join, catalogue, index page.

See :func:`run_campaign`. The log (``campaign.log`` in the campaign folder,
and the terminal) says for every chunk whether it was reviewed, skipped as
finished earlier or failed, and why.
"""

from __future__ import annotations

import json
import logging
import shutil
import sys
import time
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, field, replace
from os import PathLike
from pathlib import Path
from typing import Any

from harbourwatch import __version__
from harbourwatch.campaign.alerts import combine_alerts, read_alert_rows
from harbourwatch.campaign.archive import (
    FileSpan,
    discover_feeds,
    load_index,
    plan_chunks,
    save_index,
    scan_file,
)
from harbourwatch.campaign.archive import still_valid as _still_valid
from harbourwatch.campaign.catalogue import (
    alerts_table,
    write_catalogue,
    write_tracks,
    write_trajectories,
)
from harbourwatch.campaign.join import ChunkPieces, join_chunks
from harbourwatch.campaign.schedule import open_runner
from harbourwatch.campaign.task import (
    CHUNKS_DIR,
    ChunkTask,
    chunk_key,
    load_states,
    read_done,
    run_chunk,
)
from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text, sha256_file
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.io.toml_files import load_rules, load_sensors
from harbourwatch.io.zone_file import load_zones
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import Trajectory

__all__ = ["run_campaign", "CampaignSummary", "ChunkOutcome"]

log = logging.getLogger("harbourwatch.campaign")
PathArg = str | PathLike[str]
LOG_FILE = "campaign.log"
#: a finished chunk's boundary trajectories, trajectory spans and alert rows
_Loaded = tuple[dict[str, Trajectory], dict[str, tuple[float, float]], list[dict[str, str]]]


@dataclass(frozen=True, kw_only=True)
class ChunkOutcome:
    """What became of one chunk in this campaign run."""

    name: str
    status: str  # "done" (reviewed now), "skipped" (finished earlier), "failed"
    reason: str = ""
    bad_input: bool = False
    result: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True, kw_only=True)
class CampaignSummary:
    """A campaign's outcome, for the terminal and for scripts."""

    out_dir: Path
    chunks: tuple[ChunkOutcome, ...]
    file_failures: tuple[tuple[str, str], ...]
    trajectories: int
    joined: int
    alerts: int
    seconds: float
    where: str
    workers: int
    timings: dict[str, float] = field(default_factory=dict)

    @property
    def failed(self) -> list[ChunkOutcome]:
        return [c for c in self.chunks if c.status == "failed"]

    @property
    def bad_input(self) -> bool:
        """True when every failure came from bad input (a corrupt or unreadable file)."""
        fails = self.failed
        return bool(self.file_failures or fails) and all(c.bad_input for c in fails)

    def as_text(self) -> str:
        """The summary table: one row per chunk, then the totals."""
        head = ("chunk", "status", "plots", "trajectories", "alerts", "seconds", "note")
        rows = []
        for c in self.chunks:
            r = c.result
            note = c.reason if c.status == "failed" else (
                "finished earlier" if c.status == "skipped"
                else f"{r.get('worker', '')}, attempt {r.get('attempt', 1)}")
            rows.append((c.name, c.status, str(r.get("plots", "")), str(r.get("trajectories", "")),
                         str(r.get("alerts", "")),
                         f"{r['seconds']:.1f}" if "seconds" in r and c.status == "done" else "",
                         note))
        widths = [max(len(h), *(len(x[i]) for x in rows)) if rows else len(h)
                  for i, h in enumerate(head)]

        def line(cells: Sequence[str]) -> str:
            return "  ".join(c.ljust(w) for c, w in zip(cells, widths, strict=True)).rstrip()

        out = [line(head), line(["-" * w for w in widths]), *(line(r) for r in rows)]
        n = {s: sum(1 for c in self.chunks if c.status == s) for s in ("done", "skipped", "failed")}
        out += ["", f"chunks          {len(self.chunks)}: {n['done']} reviewed, {n['skipped']} "
                f"skipped (finished earlier), {n['failed']} failed",
                f"trajectories    {self.trajectories} ({self.joined} joined across chunks)",
                f"alerts          {self.alerts}",
                f"ran on          {self.where}",
                f"time taken      {self.seconds:.1f} s",
                f"outputs         {self.out_dir}"]
        out += [f"file failed     {p}: {why}" for p, why in self.file_failures]
        return "\n".join(out)


def _setup_log(out_dir: Path, progress: bool) -> list[logging.Handler]:
    handlers: list[logging.Handler] = [logging.FileHandler(out_dir / LOG_FILE, encoding="utf-8")]
    if progress:
        handlers.append(logging.StreamHandler(sys.stderr))
    fmt = logging.Formatter("%(asctime)s %(levelname)s %(message)s", "%Y-%m-%dT%H:%M:%SZ")
    fmt.converter = time.gmtime
    for h in handlers:
        h.setFormatter(fmt)
        log.addHandler(h)
    log.setLevel(logging.INFO)
    log.propagate = False
    return handlers


def _scan(runner: Any, paths: Sequence[str], out_dir: Path
          ) -> tuple[list[FileSpan], list[tuple[str, str]]]:
    known = load_index(out_dir)
    spans, todo = [], []
    for p in paths:
        s = known.get(p)
        if s is not None and _still_valid(s):
            spans.append(s)
        else:
            todo.append(p)
    log.info("%d feed files: %d known from earlier scans, %d to scan", len(paths),
             len(paths) - len(todo), len(todo))
    failures = []
    for i, span, err in runner.map(scan_file, todo, label="files", names=[str(k) for k in range(len(todo))]):
        if err is not None:
            failures.append((todo[i], str(err)))
            log.error("feed file %s cannot be read: %s", todo[i], err)
        else:
            spans.append(span)
    if todo:
        save_index(out_dir, spans)
    return sorted(spans, key=lambda s: s.path), failures


def _cleanup(chunks_dir: Path) -> None:
    """Remove what killed attempts left behind (temporary and superseded folders)."""
    for pattern in (".*.tmp-*", ".*.old-*"):
        for p in chunks_dir.glob(pattern):
            shutil.rmtree(p, ignore_errors=True)
            log.info("removed the partial output %s of an interrupted attempt", p.name)


def run_campaign(
    archive: Sequence[str],
    *,
    sensors: PathArg,
    zones: PathArg,
    rules: PathArg,
    out: PathArg,
    chunk_h: float = 24.0,
    overlap_min: float = 60.0,
    scheduler: str | None = None,
    seed: int = 0,
    settings: FilterSettings | None = None,
    progress: bool = True,
    executor: str = "dask",
    n_workers: int | None = None,
    allow_gaps: bool = False,
) -> CampaignSummary:
    """Review an archive of feeds in time chunks on dask.distributed and combine the results.

    Parameters
    ----------
    archive
        Feed files, folders (searched recursively) or glob patterns.
    sensors, zones, rules
        The sensor TOML, zones GeoJSON and rules TOML, as for one review run.
    out
        Campaign folder: ``chunks/<name>/`` per chunk, the combined tables,
        ``catalogue.duckdb``, ``index.html``, ``campaign.json``, ``campaign.log``.
    chunk_h, overlap_min
        Chunk length (UTC hours, cut on multiples from the epoch) and the
        overlap shared by neighbouring chunks (minutes).
    scheduler
        Address of an existing dask scheduler; default: dask's configured
        ``scheduler-address``, else a local cluster sized to the machine.
    seed, settings
        As for one review run.
    progress
        Progress bar and log lines on the terminal.
    executor
        ``"dask"``, or ``"inline"`` to run the chunks one after another in
        this process (a baseline for benchmarks).
    n_workers
        Workers of the local cluster (default: one per usable core).
    allow_gaps
        Passed to each chunk's review: accept silences of every radar longer
        than the review run allows (each becomes a warning in the chunk).

    Raises
    ------
    InputError
        Bad configuration, options or archive names (before any chunk runs).
    """
    t_start = time.perf_counter()
    settings = settings or FilterSettings()
    from harbourwatch.rules import RULE_SCHEMAS

    sensor_cfg = load_sensors(sensors)
    zone_cfg = load_zones(zones)
    rule_cfg = load_rules(rules, zone_cfg, RULE_SCHEMAS)
    if not chunk_h > 0:
        raise InputError(f"chunk length must be positive, got {chunk_h!r}", field="--chunk-h")
    if not 0 <= overlap_min < 60.0 * chunk_h:
        raise InputError(f"overlap must be at least 0 and shorter than a chunk, got {overlap_min!r}",
                         field="--overlap-min")
    paths = discover_feeds([str(a) for a in archive])
    out_dir = Path(out)
    chunks_dir = out_dir / CHUNKS_DIR
    chunks_dir.mkdir(parents=True, exist_ok=True)
    handlers = _setup_log(out_dir, progress)
    try:
        log.info("campaign into %s: chunks of %g h, overlap %g min", out_dir, chunk_h, overlap_min)
        config_sha = (sha256_file(sensors), sha256_file(zones), sha256_file(rules))
        outcomes: dict[str, ChunkOutcome] = {}
        loaded: dict[str, _Loaded] = {}
        with open_runner(scheduler=scheduler, executor=executor, n_workers=n_workers,
                         progress=progress) as runner:
            where, workers = runner.where, runner.workers()
            tick = time.perf_counter()
            spans, file_failures = _scan(runner, paths, out_dir)
            timings = {"start_s": tick - t_start, "scan_s": time.perf_counter() - tick}
            tick = time.perf_counter()
            plans = plan_chunks(spans, chunk_s=3600.0 * chunk_h, overlap_s=60.0 * overlap_min)
            tasks = []
            for p in plans:
                task = ChunkTask(
                    name=p.name, core=p.core, window=p.window,
                    feeds=tuple(f.path for f in p.files), feed_sha256=tuple(f.sha256 for f in p.files),
                    sensors=str(sensors), zones=str(zones), rules=str(rules),
                    config_sha256=config_sha, out_dir=str(out_dir), seed=seed, settings=settings,
                    allow_gaps=allow_gaps, tables_thread=executor == "inline")
                task = replace(task, key=chunk_key(task))
                done = read_done(task.folder, task.key)
                if done is not None:
                    outcomes[p.name] = ChunkOutcome(name=p.name, status="skipped", result=done)
                    log.info("chunk %s: finished earlier (key %s), skipped", p.name, task.key[:12])
                else:
                    tasks.append(task)
            log.info("%d chunks: %d to review, %d finished earlier", len(plans), len(tasks),
                     len(plans) - len(tasks))
            for i, res, err in runner.map(run_chunk, tasks, label="chunks",
                                          names=[t.name for t in tasks]):
                t = tasks[i]
                if err is not None:
                    res = {"status": "failed", "reason": f"{type(err).__name__}: {err}",
                           "bad_input": False}
                if res["status"] == "done":
                    outcomes[t.name] = ChunkOutcome(name=t.name, status="done", result=res)
                    _prefetch(loaded, out_dir, t.name)
                    log.info("chunk %s: reviewed on %s in %.1f s (attempt %d): %d trajectories, "
                             "%d alerts", t.name, res["worker"], res["seconds"], res["attempt"],
                             res["trajectories"], res["alerts"])
                else:
                    outcomes[t.name] = ChunkOutcome(name=t.name, status="failed",
                                                    reason=res["reason"],
                                                    bad_input=bool(res.get("bad_input")), result=res)
                    log.error("chunk %s: FAILED: %s", t.name, res["reason"])
            timings["review_s"] = time.perf_counter() - tick
        _cleanup(chunks_dir)
        ordered = tuple(outcomes[p.name] for p in plans)
        tick = time.perf_counter()
        combined = _combine(out_dir, plans, ordered, sensor_cfg=sensor_cfg, zone_cfg=zone_cfg,
                            rule_cfg=rule_cfg, seed=seed, overlap_s=60.0 * overlap_min,
                            loaded=loaded)
        timings["combine_s"] = time.perf_counter() - tick
        summary = CampaignSummary(
            out_dir=out_dir, chunks=ordered, file_failures=tuple(file_failures),
            trajectories=combined["trajectories"], joined=combined["joined"],
            alerts=combined["alerts"], seconds=time.perf_counter() - t_start, where=where,
            workers=workers, timings=timings)
        _write_provenance(out_dir, summary, chunk_h=chunk_h, overlap_min=overlap_min, seed=seed,
                          settings=settings, inputs=(sensors, zones, rules), config_sha=config_sha,
                          matches=combined["matches"])
        log.info("campaign finished in %.1f s: %d trajectories, %d alerts", summary.seconds,
                 summary.trajectories, summary.alerts)
        return summary
    finally:
        for h in handlers:
            log.removeHandler(h)
            h.close()


def _prefetch(loaded: dict[str, _Loaded], out_dir: Path, name: str) -> None:
    """Read a chunk that just finished while the others are reviewed (the join needs it later)."""
    try:
        loaded[name] = _load_chunk(out_dir, name)
    except Exception as exc:  # read again when combining, where an error is reported
        log.info("chunk %s: its outputs are read again at the end (%s)", name, exc)


def _load_chunk(out_dir: Path, name: str) -> _Loaded:
    """What the join and the alerts need of one finished chunk: boundary states, spans, alerts."""
    folder = out_dir / CHUNKS_DIR / name
    boundary, spans = load_states(folder)
    return boundary, spans, read_alert_rows(folder / "alerts.csv")


def _track_tables(out_dir: Path, chunks: Sequence[tuple[str, tuple[float, float], Path]],
                  piece_id: Any) -> tuple[int, Any]:
    stats, extra = write_tracks(out_dir, chunks, piece_id)
    return len(stats), write_trajectories(out_dir, stats, extra)


def _combine(out_dir: Path, plans: Sequence[Any], outcomes: Sequence[ChunkOutcome], *,
             sensor_cfg: Any, zone_cfg: Any, rule_cfg: Any, seed: int, overlap_s: float,
             loaded: dict[str, _Loaded] | None = None) -> dict[str, Any]:
    """Join the finished chunks and write the tables, the catalogue and the index page.

    ``loaded`` holds what was read of chunks as they finished (while others
    were still reviewed); the rest is read here. ``tracks.parquet`` and
    ``trajectories.parquet`` are written on a second thread (mostly pyarrow,
    shapely: off the interpreter lock) while the alerts are combined.
    """
    from harbourwatch.campaign.page import write_index

    loaded = loaded if loaded is not None else {}
    done = [(p, o) for p, o in zip(plans, outcomes, strict=True) if o.status in ("done", "skipped")]
    pieces, rows = [], {}
    for p, _ in done:
        got = loaded.get(p.name)
        boundary, spans, rows[p.name] = got if got is not None else _load_chunk(out_dir, p.name)
        pieces.append(ChunkPieces(name=p.name, core=p.core, boundary=boundary, spans=spans))
    join = join_chunks(pieces, overlap_s=overlap_s)
    log.info("joined across chunk boundaries: %d matches, %d trajectories rebuilt from pieces",
             len(join.matches), len(join.joined))
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="harbourwatch-catalogue") as pool:
        tables = pool.submit(_track_tables, out_dir, [(p.name, p.core, out_dir / CHUNKS_DIR / p.name)
                                                      for p, _ in done], join.piece_id)
        frame = LocalFrame.around([s.lat_deg for s in sensor_cfg], [s.lon_deg for s in sensor_cfg])
        cores = [(p.name, p.core[0], p.core[1]) for p, _ in done]
        alerts = combine_alerts(rows, join, zones=zone_cfg, rules=rule_cfg, frame=frame, seed=seed,
                                cores=cores)
        n_trajectories, traj_table = tables.result()
    runs, health = [], []
    for p, o in zip(plans, outcomes, strict=True):
        r = o.result
        base = {"chunk": p.name, "start": format_utc_one(p.core[0]),
                "end": format_utc_one(p.core[1])}
        runs.append({**base, "window_start": format_utc_one(p.window[0]),
                     "window_end": format_utc_one(p.window[1]),
                     "status": "failed" if o.status == "failed" else "done", "reason": o.reason,
                     "key": r.get("key", ""), "feeds": len(p.files), "plots": r.get("plots"),
                     "scans": r.get("scans"), "trajectories": r.get("trajectories"),
                     "alerts": sum(1 for a in alerts if a["chunk"] == p.name)
                     if o.status != "failed" else None,
                     "seconds": r.get("seconds"), "worker": r.get("worker", ""),
                     "attempt": r.get("attempt"),
                     "report": f"{CHUNKS_DIR}/{p.name}/report.html" if o.status != "failed" else ""})
        for h in r.get("health", []) if o.status != "failed" else []:
            health.append({**base, **h})
    write_catalogue(out_dir, runs=runs, trajectories=traj_table, alerts=alerts_table(alerts),
                    health=health)
    write_index(out_dir, runs=runs, alerts=alerts, health=health)
    return {"trajectories": n_trajectories, "joined": len(join.joined), "alerts": len(alerts),
            "matches": [list(m) for m in join.matches]}


def _write_provenance(out_dir: Path, s: CampaignSummary, *, chunk_h: float, overlap_min: float,
                      seed: int, settings: FilterSettings, inputs: Sequence[PathArg],
                      config_sha: Sequence[str], matches: Any) -> None:
    data = {
        "software": {"harbourwatch": __version__},
        "inputs": {k: {"path": str(p), "sha256": h}
                   for k, p, h in zip(("sensors", "zones", "rules"), inputs, config_sha, strict=True)},
        "parameters": {"chunk_h": chunk_h, "overlap_min": overlap_min, "seed": seed,
                       "filter": asdict(settings)},
        "chunks": [{"chunk": c.name, "status": c.status, "reason": c.reason,
                    "key": c.result.get("key", "")} for c in s.chunks],
        "file_failures": [{"path": p, "reason": r} for p, r in s.file_failures],
        "joins": matches,
        "results": {"trajectories": s.trajectories, "joined": s.joined, "alerts": s.alerts},
        "timings": {**s.timings, "total_s": s.seconds},
    }
    atomic_write_text(out_dir / "campaign.json", json.dumps(data, indent=1, sort_keys=True) + "\n")
