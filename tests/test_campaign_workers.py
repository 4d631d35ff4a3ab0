"""How a campaign's chunks run: the local workers' environment, the tables' writer thread."""

from __future__ import annotations

import os
import threading
from dataclasses import replace
from pathlib import Path
from typing import Any

import dask
import pytest

from harbourwatch import run_review, simulate_to_dir
from harbourwatch.campaign.schedule import WORKER_ENV, open_runner
from harbourwatch.campaign.task import ChunkTask, chunk_key


def test_local_workers_get_one_thread_per_pool_the_default_allocator_no_profiler(
        monkeypatch: pytest.MonkeyPatch) -> None:
    for k in WORKER_ENV:  # the user's own settings would win over ours
        monkeypatch.delenv(k, raising=False)
    before = dict(os.environ)
    with open_runner(scheduler=None, n_workers=1, progress=False) as runner:
        seen = {k: list(runner.client.run(os.getenv, k).values()) for k in WORKER_ENV}
        profiler = list(runner.client.run(dask.config.get, "distributed.worker.profile.enabled")
                        .values())
    # dask's own default would start the worker with MALLOC_TRIM_THRESHOLD_=65536
    assert seen == {k: [v] for k, v in WORKER_ENV.items()}
    assert seen["MALLOC_TRIM_THRESHOLD_"] == [None]
    assert seen["OPENBLAS_NUM_THREADS"] == ["1"]
    assert profiler == [False]  # dask's default: True
    assert dask.config.get("distributed.worker.profile.enabled") is True  # this process: as it was
    # the nanny writes the variables into this process before spawning: put back
    assert dict(os.environ) == before


def test_tables_written_on_the_run_thread_are_the_same_bytes(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import harbourwatch.pipeline as pipeline

    simulate_to_dir("demo", tmp_path / "s", duration_s=900.0)
    s = tmp_path / "s"
    args = {"sensors": s / "sensors.toml", "zones": s / "zones.geojson", "rules": s / "rules.toml"}
    writers: list[str] = []
    real = pipeline._write_trajectory_tables

    def spy(*a: Any) -> float:
        writers.append(threading.current_thread().name)
        return real(*a)

    monkeypatch.setattr(pipeline, "_write_trajectory_tables", spy)
    run_review([s / "plots.csv"], out=tmp_path / "threaded", progress=False, **args)
    run_review([s / "plots.csv"], out=tmp_path / "one", progress=False, tables_thread=False,
               **args)
    assert writers[0].startswith("harbourwatch-tables")
    assert writers[1] == threading.current_thread().name
    for name in ("tracks.csv", "as_seen.csv", "trajectories.geojson", "alerts.csv"):
        a, b = (tmp_path / d / name for d in ("threaded", "one"))
        assert a.read_bytes() == b.read_bytes(), name
    assert (tmp_path / "one" / "tracks.csv").stat().st_size > 1000  # a vessel was tracked


def test_how_a_chunk_writes_its_tables_is_not_part_of_its_key() -> None:
    task = ChunkTask(name="c", core=(0.0, 10.0), window=(-1.0, 11.0), feeds=("a",),
                     feed_sha256=("0" * 64,), sensors="s", zones="z", rules="r",
                     config_sha256=("1", "2", "3"), out_dir="o")
    assert chunk_key(replace(task, tables_thread=True)) == chunk_key(task)
    assert chunk_key(replace(task, seed=1)) != chunk_key(task)
