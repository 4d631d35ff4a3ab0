"""Memory that does not grow with the feed: streamed tables and spilled trajectories."""

from __future__ import annotations

import json

import numpy as np
import pytest

from harbourwatch.errors import OutputError
from harbourwatch.io.atomic import atomic_write_chunks
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import (
    AsSeenTable,
    Trajectory,
    TrajectorySet,
    as_seen_csv_chunks,
    geojson_chunks,
    tracks_csv_chunks,
    trajectories_geojson,
)

T0 = 1_777_874_400.0  # 2026-05-04T06:00:00Z


def _random_trajectory(rng: np.random.Generator, k: int, n: int, sized: bool) -> Trajectory:
    t = T0 + np.cumsum(rng.uniform(0.5, 3.0, n))
    mean = rng.normal(0.0, [3000.0, 4.0, 3000.0, 4.0], (n, 4))
    a = rng.normal(size=(n, 4, 4))
    cov = a @ a.transpose(0, 2, 1) + np.eye(4)
    return Trajectory(
        id=f"T{k}", time=t, mean=mean, cov=cov, filt_mean=mean + 1.0, filt_cov=cov * 2.0,
        pred_mean=mean - 1.0, pred_cov=cov * 3.0, existence=float(rng.uniform(0.5, 1.0)),
        end_probability=float(rng.uniform()), alive_at_end=bool(k % 2),
        plot_ids=rng.integers(-1, 10_000, n), sensor_ids=rng.integers(0, 2, n),
        extent=(30.0, 3.0, 12.0, 900.0, 40.0, 60.0) if sized and k % 3 == 0 else None,
    )


def _set(seed: int, sized: bool) -> TrajectorySet:
    rng = np.random.default_rng(seed)
    trajs = tuple(_random_trajectory(rng, k + 1, int(rng.integers(1, 40)), sized) for k in range(9))
    m = 57
    length = np.where(rng.uniform(size=m) < 0.5, rng.uniform(10.0, 300.0, m), np.nan)
    as_seen = AsSeenTable(
        time=np.sort(T0 + rng.uniform(0.0, 100.0, m)),
        track=np.array([f"T{k}" for k in rng.integers(1, 10, m)], dtype="<U16"),
        mean=rng.normal(0.0, [3000.0, 4.0, 3000.0, 4.0], (m, 4)), sd=rng.uniform(1.0, 90.0, m),
        existence=rng.uniform(size=m), length=length if sized else None,
    )
    return TrajectorySet(trajectories=trajs, frame=LocalFrame(57.5, -30.0), as_seen=as_seen,
                         feed_start=T0, feed_end=T0 + 200.0)


@pytest.mark.parametrize("sized", [False, True])
def test_streamed_tables_are_the_bytes_of_the_whole_texts(sized):
    ts = _set(3, sized)
    whole = "".join(tracks_csv_chunks(ts, rows=10**9))
    assert whole.count("\n") == 1 + sum(t.time.size for t in ts)
    assert ("length_m" in whole.partition("\n")[0]) is sized
    for rows in (1, 2, 7, 50):
        chunks = list(tracks_csv_chunks(ts, rows=rows))
        assert len(chunks) == -(-sum(t.time.size for t in ts) // rows)
        assert "".join(chunks) == whole
    seen = "".join(as_seen_csv_chunks(ts, rows=10**9))
    assert seen.count("\n") == 1 + ts.as_seen.time.size
    for rows in (1, 5, 56):
        assert "".join(as_seen_csv_chunks(ts, rows=rows)) == seen
    one_text = json.dumps(trajectories_geojson(ts), separators=(",", ":")) + "\n"
    for features in (1, 2, 100):
        assert "".join(geojson_chunks(ts, features=features)) == one_text


def test_streamed_tables_of_an_empty_set():
    ts = TrajectorySet(trajectories=(), frame=LocalFrame(57.5, -30.0), as_seen=AsSeenTable.empty(),
                       feed_start=T0, feed_end=T0)
    assert "".join(tracks_csv_chunks(ts)).startswith("track,time,")
    assert "".join(as_seen_csv_chunks(ts)).startswith("time,track,")
    assert json.loads("".join(geojson_chunks(ts))) == {"type": "FeatureCollection", "features": []}


def test_a_chunk_that_fails_leaves_no_file_and_keeps_the_old_one(tmp_path):
    target = tmp_path / "tracks.csv"
    target.write_text("old\n", encoding="utf-8")

    def chunks():
        yield "a,b\n"
        raise RuntimeError("broken while producing the second chunk")

    with pytest.raises(RuntimeError):
        atomic_write_chunks(target, chunks())
    assert target.read_text(encoding="utf-8") == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["tracks.csv"]
    atomic_write_chunks(target, iter(["a,b\n", "1,2\n"]))
    assert target.read_text(encoding="utf-8") == "a,b\n1,2\n"
    with pytest.raises(OutputError):
        atomic_write_chunks(tmp_path / "tracks.csv" / "x", iter(["a\n"]))

