"""One chunk of a campaign as a task: what it carries, its result key, what runs on the worker.

A :class:`ChunkTask` carries file paths and parameters only, never plot
arrays: the worker reads its own files, keeps its window's rows and runs
the library's review run (:func:`harbourwatch.pipeline.run_review`) into a
temporary folder beside the chunk's final folder, then renames it into
place. A chunk folder therefore exists only when it is complete; a worker
killed half-way leaves at most a temporary folder, which the next attempt
(and the campaign at its end) removes.

The result key is the SHA-256 of the chunk's inputs (the SHA-256 of every
feed file it reads, of the sensor, zone and rule files) and of every
parameter (window, core, seed, filter settings, software version). A chunk
folder whose ``chunk.json`` holds the same key is finished and is skipped.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import resource
import shutil
import time
import uuid
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from harbourwatch import __version__
from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.io.records import FilterSettings
from harbourwatch.trajectories import Trajectory, TrajectorySet

__all__ = ["ChunkTask", "chunk_key", "run_chunk", "read_done", "STATES_FILE", "CHUNK_FILE",
           "load_states"]

CHUNK_FILE = "chunk.json"
STATES_FILE = "boundary_states.npz"
CHUNKS_DIR = "chunks"


@dataclass(frozen=True, kw_only=True)
class ChunkTask:
    """Everything a worker needs to review one chunk (paths and parameters only)."""

    name: str
    core: tuple[float, float]
    window: tuple[float, float]
    feeds: tuple[str, ...]
    feed_sha256: tuple[str, ...]
    sensors: str
    zones: str
    rules: str
    config_sha256: tuple[str, str, str]
    out_dir: str
    seed: int = 0
    settings: FilterSettings = field(default_factory=FilterSettings)
    allow_gaps: bool = False
    #: write the trajectory tables on a second thread (only where a core is free: inline);
    #: how the chunk runs, not what it gives, so not part of the key
    tables_thread: bool = False
    key: str = ""

    @property
    def folder(self) -> Path:
        """The chunk's final folder."""
        return Path(self.out_dir) / CHUNKS_DIR / self.name


def chunk_key(task: ChunkTask) -> str:
    """Hex SHA-256 of the chunk's inputs and parameters (its result key)."""
    payload = {
        "software": __version__,
        "feeds": list(task.feed_sha256),
        "config": list(task.config_sha256),
        "core": list(task.core),
        "window": list(task.window),
        "seed": task.seed,
        "allow_gaps": task.allow_gaps,
        "settings": asdict(task.settings),
    }
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def read_done(folder: Path, key: str) -> dict[str, Any] | None:
    """The stored result of a finished chunk with this key, or ``None``."""
    try:
        data = json.loads((folder / CHUNK_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("key") != key or data.get("status") != "done":
        return None
    return data


def peak_rss_mb() -> float:
    """This process's peak resident memory, MB (``VmHWM``: its own, not inherited at spawn)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:  # pragma: no cover - not Linux
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # pragma: no cover


def _worker_name() -> str:
    try:
        from distributed import get_worker

        return str(get_worker().address)
    except (ImportError, ValueError):
        return f"local-{os.getpid()}"


def _boundary_trajectories(tset: TrajectorySet, task: ChunkTask) -> list[Trajectory]:
    """Trajectories with a state in an overlap around either end of the core."""
    (c0, c1), (w0, w1) = task.core, task.window
    half_left, half_right = c0 - w0, w1 - c1
    keep = []
    for tr in tset:
        t = tr.time
        left = (t >= c0 - half_left) & (t < c0 + half_left)
        right = (t >= c1 - half_right) & (t < c1 + half_right)
        if (left | right).any():
            keep.append(tr)
    return keep


def _save_states(path: Path, trajs: Sequence[Trajectory], tset: TrajectorySet) -> None:
    """The boundary trajectories' arrays and every trajectory's id and span, as ``.npz``."""
    def cat(name: str, shape: tuple[int, ...]) -> np.ndarray:
        parts = [getattr(tr, name) for tr in trajs]
        return np.concatenate(parts) if parts else np.zeros((0, *shape))

    all_ids = [tr.id for tr in tset]
    arrays = {
        "ids": np.array([tr.id for tr in trajs], dtype=str),
        "lengths": np.array([tr.time.size for tr in trajs], dtype=np.int64),
        "existence": np.array([tr.existence for tr in trajs], dtype=np.float64),
        "end_probability": np.array([tr.end_probability for tr in trajs], dtype=np.float64),
        "alive_at_end": np.array([tr.alive_at_end for tr in trajs], dtype=bool),
        "time": cat("time", ()),
        "mean": cat("mean", (4,)), "cov": cat("cov", (4, 4)),
        "filt_mean": cat("filt_mean", (4,)), "filt_cov": cat("filt_cov", (4, 4)),
        "pred_mean": cat("pred_mean", (4,)), "pred_cov": cat("pred_cov", (4, 4)),
        "sensor_ids": cat("sensor_ids", ()).astype(np.int64),
        "all_ids": np.array(all_ids, dtype=str),
        "all_start": np.array([tr.start for tr in tset], dtype=np.float64),
        "all_end": np.array([tr.end for tr in tset], dtype=np.float64),
    }
    with open(path, "wb") as fh:
        np.savez(fh, **arrays)  # type: ignore[arg-type]


def load_states(folder: Path) -> tuple[dict[str, Trajectory], dict[str, tuple[float, float]]]:
    """Read a chunk's boundary trajectories and the span of every trajectory."""
    with np.load(folder / STATES_FILE) as z:
        d = {k: z[k] for k in z.files}
    trajs: dict[str, Trajectory] = {}
    offs = np.concatenate(([0], np.cumsum(d["lengths"])))
    for i, tid in enumerate(d["ids"].tolist()):
        a, b = int(offs[i]), int(offs[i + 1])
        trajs[tid] = Trajectory(
            id=tid, time=d["time"][a:b], mean=d["mean"][a:b], cov=d["cov"][a:b],
            filt_mean=d["filt_mean"][a:b], filt_cov=d["filt_cov"][a:b],
            pred_mean=d["pred_mean"][a:b], pred_cov=d["pred_cov"][a:b],
            existence=float(d["existence"][i]), end_probability=float(d["end_probability"][i]),
            alive_at_end=bool(d["alive_at_end"][i]), sensor_ids=d["sensor_ids"][a:b],
            plot_ids=np.full(b - a, -1, dtype=np.int64),
        )
    spans = {tid: (float(s), float(e)) for tid, s, e in
             zip(d["all_ids"].tolist(), d["all_start"], d["all_end"], strict=True)}
    return trajs, spans


def _remove(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        shutil.rmtree(path)


def run_chunk(task: ChunkTask) -> dict[str, Any]:
    """Review one chunk on this worker; return a small JSON-able result.

    The chunk's outputs appear in :attr:`ChunkTask.folder` complete or not at
    all. Every error is caught and returned as ``status: failed`` with its
    reason, so one bad chunk never stops the others.
    """
    from harbourwatch.campaign.health import radar_health
    from harbourwatch.pipeline import run_review

    started = time.perf_counter()
    cpu0 = time.process_time()
    final = task.folder
    parent = final.parent
    parent.mkdir(parents=True, exist_ok=True)
    stale = sorted(parent.glob(f".{task.name}.tmp-*"))
    for s in stale:  # left by an attempt whose worker died
        _remove(s)
    tmp = parent / f".{task.name}.tmp-{os.getpid()}-{uuid.uuid4().hex[:8]}"
    base: dict[str, Any] = {
        "chunk": task.name, "key": task.key, "core": list(task.core), "window": list(task.window),
        "feeds": list(task.feeds), "attempt": len(stale) + 1, "worker": _worker_name(),
    }
    kept: dict[str, Any] = {}

    def collect(inp: Any, tset: TrajectorySet, alerts: Sequence[Any]) -> None:
        kept["health"] = radar_health(inp.plots, inp.scans, inp.sensors, tset)
        kept["states"] = (_boundary_trajectories(tset, task), tset)
        kept["trajectories"] = len(tset)

    # the review run writes (and swaps in) its own folder inside the staging folder
    run_dir = tmp / "run"
    try:
        tmp.mkdir()
        summary = run_review(
            list(task.feeds), sensors=task.sensors, zones=task.zones, rules=task.rules,
            out=run_dir, settings=task.settings, seed=task.seed, progress=False,
            window=task.window, collect=collect, allow_gaps=task.allow_gaps,
            tables_thread=task.tables_thread,
        )
        _save_states(run_dir / STATES_FILE, *kept.pop("states"))
        result = {
            **base, "status": "done", "reason": "",
            "trajectories": kept["trajectories"], "alerts": len(summary.alerts),
            "plots": summary.plots_total, "scans": summary.scans,
            "health": kept["health"],
            "seconds": time.perf_counter() - started,
            "cpu_s": time.process_time() - cpu0,
            "peak_rss_mb": peak_rss_mb(),
        }
        atomic_write_text(run_dir / CHUNK_FILE, json.dumps(result, indent=1, sort_keys=True) + "\n")
        old = None
        if final.exists():
            old = parent / f".{task.name}.old-{uuid.uuid4().hex[:12]}"
            os.replace(final, old)
        os.replace(run_dir, final)
        _remove(tmp)
        if old is not None:
            _remove(old)
        return result
    except Exception as exc:  # fault isolation: report, never raise into the campaign
        _remove(tmp)
        return {**base, "status": "failed", "bad_input": isinstance(exc, InputError),
                "reason": f"{type(exc).__name__}: {exc}",
                "seconds": time.perf_counter() - started}
