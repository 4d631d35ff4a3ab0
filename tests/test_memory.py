"""Memory that does not grow with the feed: streamed tables and spilled trajectories."""

from __future__ import annotations

import json

import numpy as np
import pytest

from harbourwatch.errors import OutputError
from harbourwatch.io.atomic import atomic_write_chunks
from harbourwatch.io.spill import SpillStore
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import (
    AsSeenTable,
    SpilledAsSeenTable,
    SpilledTrajectory,
    Trajectory,
    TrajectorySet,
    as_seen_csv_chunks,
    geojson_chunks,
    tracks_csv_chunks,
    trajectories_geojson,
)
from harbourwatch.trajectories._records import SPILLED_ARRAYS

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
    for states in (1, 30, 10**6):  # a chunk ends at a number of positions too
        chunks = list(geojson_chunks(ts, states=states))
        assert "".join(chunks) == one_text
        assert (len(chunks) == 2 + len(ts)) is (states == 1)


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


# --- the spill store ---------------------------------------------------------------------


def test_spill_round_trip_keeps_dtype_shape_and_values(tmp_path):
    rng = np.random.default_rng(1)
    groups = [
        [rng.normal(size=(n, 4, 4)), rng.integers(-1, 99, n), np.arange(n, dtype=np.float64)]
        for n in (0, 1, 7, 300)
    ]
    with SpillStore(folder=str(tmp_path), cache_bytes=10_000) as store:  # a cache of ~1 group
        keys = [store.put(g) for g in groups]
        for _ in range(2):  # read again after eviction: from the file, same values
            for key, g in zip(keys, groups, strict=True):
                back = store.get(key)
                assert [(a.dtype, a.shape) for a in back] == [(a.dtype, a.shape) for a in g]
                assert all(np.array_equal(a, b) for a, b in zip(back, g, strict=True))
        assert store.bytes_written == sum(a.nbytes for g in groups for a in g)
        assert len(store) == 4
        first = store.put_each(groups[3])  # one group per array, consecutive keys
        assert len(store) == 4 + len(groups[3])
        for k, a in enumerate(groups[3]):
            (back,) = store.get(first + k)
            assert back.dtype == a.dtype and np.array_equal(back, a)
        with pytest.raises(ValueError):  # read-only: a read may be shared through the cache
            store.get(keys[2])[0][0, 0, 0] = 5.0


def test_spill_file_never_shows_in_the_folder_even_on_error(tmp_path):
    with pytest.raises(RuntimeError), SpillStore(folder=str(tmp_path)) as store:
        store.put([np.zeros(1000)])
        assert list(tmp_path.iterdir()) == []  # unlinked from the start: nothing to clean up
        raise RuntimeError("a run that fails")
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(ValueError):  # closed with the error: its file (and space) is gone
        store.get(0)


def test_spill_reads_from_two_threads_agree():
    from concurrent.futures import ThreadPoolExecutor

    rng = np.random.default_rng(2)
    groups = [[rng.normal(size=(int(n), 4))] for n in rng.integers(1, 500, 64)]
    store = SpillStore(cache_bytes=50_000)
    keys = [store.put(g) for g in groups]

    def check(order):
        return all(np.array_equal(store.get(keys[k])[0], groups[k][0]) for k in order)

    with ThreadPoolExecutor(2) as pool:
        orders = [rng.permutation(64) for _ in range(8)]
        assert all(pool.map(check, orders))


def _spilled_copy(ts: TrajectorySet, store: SpillStore) -> TrajectorySet:
    spilled = []
    for t in ts:
        key = store.put_each([getattr(t, name) for name in SPILLED_ARRAYS])
        spilled.append(SpilledTrajectory(id=t.id, store=store, key=key, existence=t.existence,
                                         end_probability=t.end_probability,
                                         alive_at_end=t.alive_at_end, extent=t.extent))
    return TrajectorySet(trajectories=tuple(spilled), frame=ts.frame, as_seen=ts.as_seen,
                         feed_start=ts.feed_start, feed_end=ts.feed_end)


def test_a_spilled_trajectory_is_the_trajectory(rng):
    ts = _set(4, sized=True)
    sp = _spilled_copy(ts, SpillStore(cache_bytes=0))  # no cache: every access reads the file
    for a, b in zip(ts, sp, strict=True):
        assert isinstance(b, Trajectory) and b.id == a.id and b.extent == a.extent
        for name in SPILLED_ARRAYS:
            assert np.array_equal(getattr(a, name), getattr(b, name)), name
        assert (b.start, b.end, b.size) == (a.start, a.end, a.size)
        assert np.array_equal(a.position_sd, b.position_sd)
        seed = int(rng.integers(1 << 30))
        assert np.array_equal(a.sample(np.random.default_rng(seed), 3),
                              b.sample(np.random.default_rng(seed), 3))
    assert "".join(tracks_csv_chunks(sp, rows=5)) == "".join(tracks_csv_chunks(ts))
    assert "".join(geojson_chunks(sp)) == "".join(geojson_chunks(ts))


def test_a_held_spilled_trajectory_reads_each_array_once(monkeypatch):
    ts = _set(5, sized=False)
    store = SpillStore(cache_bytes=0)
    sp = _spilled_copy(ts, store)
    reads: list[int] = []
    get = store.get
    monkeypatch.setattr(store, "get", lambda key: (reads.append(key), get(key))[1])
    plain, tr = ts.trajectories[0], sp.trajectories[0]
    held = tr.held()  # type: ignore[attr-defined]
    for _ in range(3):
        for name in SPILLED_ARRAYS:
            assert np.array_equal(getattr(held, name), getattr(plain, name)), name
    assert sorted(reads) == [tr.key + k for k in range(len(SPILLED_ARRAYS))]  # once each
    reads.clear()
    for _ in range(2):
        tr.mean  # noqa: B018  (not held: read every time, nothing kept)
    assert reads == [tr.key + 1] * 2


def test_rules_over_spilled_trajectories_give_the_same_alerts():
    from harbourwatch.rules.evaluate import evaluate_rules
    from tests.test_rules import RULES, ZONES, build_scenario, tset  # every kind of alert

    ts = tset([v.traj for v in build_scenario(11).values()])
    store = SpillStore(cache_bytes=0)
    want = evaluate_rules(ts, ZONES, RULES, seed=7)
    assert {a.kind for a in want} >= {"loiter", "pass-through", "speed", "rendezvous"}
    got = evaluate_rules(_spilled_copy(ts, store), ZONES, RULES, seed=7)
    assert got == want


def test_the_filter_with_a_spill_store_gives_the_same_trajectories():
    from harbourwatch.filter import run_filter
    from harbourwatch.io.records import FilterSettings
    from tests.tpmbm_synth import Radar, Vessel, make_feed

    radar = Radar(site=(0.0, 0.0), period=3.0, max_range=4000.0, clutter_per_scan=5.0)
    vessels = [Vessel(0.0, 150.0, (-1000.0, -1000.0), (0.0, 4.0)),  # gone long before the end
               Vessel(100.0, 300.0, (1500.0, 500.0), (-3.0, 1.0)),
               Vessel(0.0, 1500.0, (-2000.0, 1500.0), (3.0, -1.0))]  # present to the end
    feed = make_feed(vessels, [radar], 1500.0, seed=7)
    plain = run_filter(feed.scans, feed.sensors, FilterSettings())
    store = SpillStore()
    spilled = run_filter(feed.scans, feed.sensors, FilterSettings(), spill=store)
    assert sum(isinstance(t, SpilledTrajectory) for t in spilled.trajectories) >= 2
    assert not any(isinstance(t, SpilledTrajectory) for t in plain.trajectories)
    assert store.bytes_written > 0
    assert {**spilled.stats, "seconds": 0} == {**plain.stats, "seconds": 0}
    assert [t.id for t in spilled.trajectories] == [t.id for t in plain.trajectories]
    for a, b in zip(plain.trajectories, spilled.trajectories, strict=True):
        assert (a.existence, a.end_probability, a.alive_at_end) == (
            b.existence, b.end_probability, b.alive_at_end)
        for name in SPILLED_ARRAYS:
            assert np.array_equal(getattr(a, name), getattr(b, name)), name


# --- the as-seen log ---------------------------------------------------------------------


def _as_seen_reference(rows, ids):
    """The as-seen table as it was built in one piece from every scan's rows."""
    tt = np.concatenate([np.full(r.bids.size, r.time) for r in rows])
    bids = np.concatenate([r.bids for r in rows])
    names = {int(b): ids.get(int(b), f"P{int(b)}") for b in np.unique(bids)}
    track = np.array([names[int(b)] for b in bids], dtype="<U16")
    order = np.lexsort((track, tt))
    cols = {name: np.concatenate([getattr(r, name) for r in rows])[order]
            for name in ("mean", "sd", "existence", "length")}
    return {"time": tt[order], "track": track[order], **cols}


@pytest.mark.parametrize("spilled", [False, True])
def test_as_seen_log_in_blocks_gives_the_one_piece_table(monkeypatch, spilled):
    from harbourwatch.filter import _estimate

    rng = np.random.default_rng(5)
    rows = []
    t = T0
    for _ in range(300):
        t += float(rng.choice([0.0, 1.25, 2.5]))  # two radars' scans may share a time
        n = int(rng.integers(1, 9))
        rows.append(_estimate.AsSeenRows(
            time=t, bids=rng.choice(40, n, replace=False).astype(np.int64),
            mean=rng.normal(size=(n, 4)), sd=rng.uniform(1, 50, n), existence=rng.uniform(size=n),
            length=np.where(rng.uniform(size=n) < 0.3, 80.0, np.nan)))
    ids = {b: f"T{k + 1}" for k, b in enumerate(rng.permutation(40)[:25].tolist())}
    monkeypatch.setattr(_estimate, "AS_SEEN_BLOCK", 37)
    log = _estimate.AsSeenLog(SpillStore() if spilled else None)
    for r in rows:
        log.append(r)
    table = log.table(ids)
    assert isinstance(table, SpilledAsSeenTable) is spilled  # on disk when there is a store
    ref = _as_seen_reference(rows, ids)
    assert log.rows == ref["time"].size == table.rows
    for name, want in ref.items():
        assert np.array_equal(getattr(table, name), want, equal_nan=name == "length"), name
    assert table.track.dtype.itemsize < np.dtype("<U16").itemsize  # as wide as the longest id
    # read block by block, the rows are the same rows in the same order
    for rows_per_block in (5, 1 << 16):
        got = list(table.blocks(rows_per_block))
        assert max(b.rows for b in got) <= rows_per_block
        for name, want in ref.items():
            joined = np.concatenate([getattr(b, name) for b in got])
            assert np.array_equal(joined, want, equal_nan=name == "length"), name
    assert table.sized == bool(np.isfinite(ref["length"]).any())


def test_as_seen_rows_out_of_time_order_are_sorted_in_one_piece(monkeypatch):
    from harbourwatch.filter import _estimate

    monkeypatch.setattr(_estimate, "AS_SEEN_BLOCK", 2)
    rows = [_estimate.AsSeenRows(time=T0 + t, bids=np.array([b], np.int64), mean=np.zeros((1, 4)),
                                 sd=np.ones(1), existence=np.ones(1), length=np.full(1, np.nan))
            for t, b in ((5.0, 1), (7.0, 2), (6.0, 3), (1.0, 4))]  # not in time order
    log = _estimate.AsSeenLog(SpillStore())
    for r in rows:
        log.append(r)
    table = log.table({})
    assert not isinstance(table, SpilledAsSeenTable)  # the block-wise sort would be wrong
    assert table.time.tolist() == [T0 + 1.0, T0 + 5.0, T0 + 6.0, T0 + 7.0]
    assert table.track.tolist() == ["P4", "P1", "P3", "P2"]


def _spilled_as_seen(a: AsSeenTable, store: SpillStore, block: int) -> SpilledAsSeenTable:
    """``a`` written to ``store`` in groups of ``block`` rows (as the filter leaves it)."""
    names = np.unique(a.track)
    code = np.searchsorted(names, a.track).astype(np.int32)
    length = a.length if a.length is not None else np.full(a.rows, np.nan)
    keys = tuple(store.put([a.time[i:i + block], code[i:i + block], a.mean[i:i + block],
                            a.sd[i:i + block], a.existence[i:i + block], length[i:i + block]])
                 for i in range(0, a.rows, block))
    return SpilledAsSeenTable(store=store, keys=keys, names=names, rows=a.rows, sized=a.sized)


@pytest.mark.parametrize("sized", [False, True])
def test_a_spilled_as_seen_table_gives_the_same_csv_and_replay(sized):
    from harbourwatch.report._data import replay_payload

    ts = _set(4, sized)
    with SpillStore(cache_bytes=0) as store:
        spilled = TrajectorySet(trajectories=ts.trajectories, frame=ts.frame,
                                as_seen=_spilled_as_seen(ts.as_seen, store, 4),
                                feed_start=ts.feed_start, feed_end=ts.feed_end)
        assert "".join(as_seen_csv_chunks(spilled)) == "".join(as_seen_csv_chunks(ts))
        want = replay_payload(ts)
        assert want["as_seen"]  # the case has as-seen rows to replay
        assert json.dumps(replay_payload(spilled)) == json.dumps(want)


def test_a_full_temporary_folder_is_an_output_error_naming_it(tmp_path, monkeypatch):
    """ENOSPC while spilling becomes an OutputError (one line at the command line), not a traceback."""
    import errno
    import os

    store = SpillStore(folder=str(tmp_path))

    def full(*_args, **_kw):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "pwrite", full)
    with pytest.raises(OutputError) as info:
        store.put([np.arange(4.0)])
    assert str(tmp_path) in str(info.value) and "TMPDIR" in str(info.value)
    assert os.strerror(errno.ENOSPC) in str(info.value)
    store.close()


def test_an_unwritable_temporary_folder_is_an_output_error(tmp_path):
    missing = tmp_path / "gone"
    with pytest.raises(OutputError) as info:
        SpillStore(folder=str(missing))
    assert str(missing) in str(info.value)
