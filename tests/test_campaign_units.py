"""Campaign pieces on small cases: chunking, result keys, the join, the index page, find's times."""

from __future__ import annotations

import datetime as dt
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harbourwatch.campaign.archive import FileSpan, chunk_name, discover_feeds, plan_chunks
from harbourwatch.campaign.find import parse_when
from harbourwatch.campaign.join import ChunkPieces, join_chunks, mean_distance
from harbourwatch.campaign.page import index_html
from harbourwatch.campaign.task import ChunkTask, chunk_key
from harbourwatch.errors import InputError
from harbourwatch.trajectories import Trajectory

DAY = 86400.0
T0 = 1790812800.0  # 2026-10-01T00:00:00Z (computed by hand: 20727 days after 1970-01-01)


def _span(path: str, t0: float, t1: float) -> FileSpan:
    return FileSpan(path=path, size=1, mtime_ns=0, sha256="0" * 64, rows=10, t_min=t0, t_max=t1)


def test_chunks_are_utc_days_with_the_overlap_shared() -> None:
    spans = [_span("a", T0 + 60, T0 + DAY - 1), _span("b", T0 + DAY, T0 + 2 * DAY - 60)]
    plans = plan_chunks(spans, chunk_s=DAY, overlap_s=3600.0)
    assert [p.name for p in plans] == ["20261001T0000Z", "20261002T0000Z"]
    assert plans[0].core == (T0, T0 + DAY)
    assert plans[0].window == (T0 - 1800.0, T0 + DAY + 1800.0)
    # each day reads its own file and the neighbour's, whose rows reach into its overlap
    assert [f.path for f in plans[0].files] == ["a", "b"]
    assert [f.path for f in plans[1].files] == ["a", "b"]
    assert chunk_name(T0 + 7200) == "20261001T0200Z"


@given(st.floats(0.5, 48.0), st.floats(0.0, 0.9), st.floats(0.0, 5 * DAY), st.floats(1.0, 5 * DAY))
@settings(max_examples=50, deadline=None)
def test_chunk_cores_tile_the_archive(chunk_h: float, ov: float, a: float, length: float) -> None:
    chunk_s = 3600.0 * chunk_h
    plans = plan_chunks([_span("x", T0 + a, T0 + a + length)], chunk_s=chunk_s,
                        overlap_s=ov * chunk_s)
    cores = [p.core for p in plans]
    assert cores[0][0] <= T0 + a and cores[-1][1] > T0 + a + length
    assert all(c1 == d0 for (_, c1), (d0, _) in zip(cores[:-1], cores[1:], strict=True))
    for p in plans:
        assert p.window[0] <= p.core[0] and p.window[1] >= p.core[1]
        assert p.window[1] - p.window[0] == pytest.approx(chunk_s * (1 + ov))


def test_bad_chunking_and_archive_names_are_refused(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="overlap"):
        plan_chunks([_span("x", T0, T0 + 10)], chunk_s=3600.0, overlap_s=3600.0)
    with pytest.raises(InputError, match="no feed files"):
        discover_feeds([str(tmp_path / "nothing-*.csv")])
    (tmp_path / "d").mkdir()
    (tmp_path / "d" / "a.csv").write_text("time,sensor,lat,lon\n")
    (tmp_path / "d" / "notes.txt").write_text("x")
    assert discover_feeds([str(tmp_path / "d")]) == [str(tmp_path / "d" / "a.csv")]


def test_result_key_changes_with_every_input_and_parameter() -> None:
    task = ChunkTask(name="c", core=(0.0, 10.0), window=(-1.0, 11.0), feeds=("f",),
                     feed_sha256=("a" * 64,), sensors="s", zones="z", rules="r",
                     config_sha256=("1", "2", "3"), out_dir="o")
    k = chunk_key(task)
    assert len(k) == 64 and k == chunk_key(task)
    assert chunk_key(replace(task, out_dir="elsewhere", feeds=("g",))) == k  # content, not names
    for change in ({"feed_sha256": ("b" * 64,)}, {"config_sha256": ("1", "2", "4")},
                   {"seed": 1}, {"window": (-2.0, 11.0)}, {"core": (0.0, 11.0)}):
        assert chunk_key(replace(task, **change)) != k  # type: ignore[arg-type]


def _traj(tid: str, t: np.ndarray, e: np.ndarray, n: np.ndarray) -> Trajectory:
    mean = np.zeros((t.size, 4))
    mean[:, 0], mean[:, 2] = e, n
    cov = np.broadcast_to(np.eye(4), (t.size, 4, 4)).copy()
    return Trajectory(id=tid, time=t, mean=mean, cov=cov, filt_mean=mean, filt_cov=cov,
                      pred_mean=mean, pred_cov=cov, existence=0.99,
                      sensor_ids=np.zeros(t.size, np.int64), plot_ids=np.zeros(t.size, np.int64))


def test_mean_distance_against_brute_force(rng: np.random.Generator) -> None:
    t = np.arange(0.0, 100.0, 2.5)
    a = _traj("a", t, rng.normal(0, 100, t.size), rng.normal(0, 100, t.size))
    tb = np.arange(1.0, 90.0, 3.0)
    b = _traj("b", tb, rng.normal(0, 100, tb.size), rng.normal(0, 100, tb.size))
    d, n = mean_distance(a, b, 10.0, 80.0)
    # brute force: a's times in [10, 80) within b's life, b interpolated by hand
    ds = []
    for ti, ei, ni in zip(t, a.mean[:, 0], a.mean[:, 2], strict=True):
        if 10.0 <= ti < 80.0 and tb[0] <= ti <= tb[-1]:
            j = np.searchsorted(tb, ti, side="right") - 1
            j = min(j, tb.size - 2)
            w = (ti - tb[j]) / (tb[j + 1] - tb[j])
            eb = (1 - w) * b.mean[j, 0] + w * b.mean[j + 1, 0]
            nb = (1 - w) * b.mean[j, 2] + w * b.mean[j + 1, 2]
            ds.append(np.hypot(ei - eb, ni - nb))
    assert n == len(ds) and d == pytest.approx(np.mean(ds), rel=1e-12)


def test_join_splits_at_the_boundary_and_keeps_near_vessels_apart() -> None:
    b = 3600.0
    t_left = np.arange(0.0, b + 600.0, 3.0)
    t_right = np.arange(b - 600.0, 2 * b, 3.0)
    # two vessels 80 m apart on parallel courses, both across the boundary
    def ship(t: np.ndarray, off: float) -> tuple[np.ndarray, np.ndarray]:
        return 2.0 * t, np.full(t.size, off)

    left = ChunkPieces(name="L", core=(0.0, b), spans={}, boundary={})
    right = ChunkPieces(name="R", core=(b, 2 * b), spans={}, boundary={})
    for i, off in enumerate((0.0, 80.0)):
        tl = _traj(f"T{i}", t_left, *ship(t_left, off))
        tr = _traj(f"T{i + 5}", t_right, *ship(t_right, off + 2.0))  # 2 m apart: the same vessel
        left.boundary[tl.id], left.spans[tl.id] = tl, (tl.start, tl.end)
        right.boundary[tr.id], right.spans[tr.id] = tr, (tr.start, tr.end)
    res = join_chunks([left, right], overlap_s=1200.0)
    assert sorted((m[1], m[2]) for m in res.matches) == [("T0", "T5"), ("T1", "T6")]
    assert res.piece_id[("R", "T5")] == res.piece_id[("L", "T0")] == "L-T0"
    assert not res.local
    (j0,) = [tr for tr in res.joined if tr.id == "L-T0"]
    assert np.all(np.diff(j0.time) > 0)
    # states before the boundary come from the left chunk, from it on from the right
    assert np.all(j0.mean[j0.time < b, 2] == 0.0) and np.all(j0.mean[j0.time >= b, 2] == 2.0)
    assert j0.time[0] == 0.0 and j0.time[-1] == t_right[-1]


def test_index_page_escapes_hostile_names() -> None:
    evil = '<script>alert("x")</script>{{ 6*7 }}&'
    runs = [{"chunk": "20261001T0000Z", "start": "2026-10-01T00:00:00.000Z",
             "end": "2026-10-02T00:00:00.000Z", "status": "done", "reason": "", "alerts": 1,
             "report": f"chunks/{evil}/report.html"},
            {"chunk": "20261002T0000Z", "start": "2026-10-02T00:00:00.000Z",
             "end": "2026-10-03T00:00:00.000Z", "status": "failed", "reason": evil, "alerts": None,
             "report": ""}]
    alerts = [{"rule": evil, "kind": "loiter", "track": evil, "other_track": "", "zone": evil,
               "start": "2026-10-01T01:00:00.000Z", "end": "2026-10-01T02:00:00.000Z",
               "probability": "0.900", "summary": evil, "chunk": "20261001T0000Z"}]
    health = [{"chunk": "20261001T0000Z", "sensor": evil, "plots_per_scan": 5.0,
               "clutter_share": 0.5, "outages": 1, "outage_min": 3.0, "longest_outage_min": 3.0,
               "pd_estimated": 0.5, "pd_configured": 0.9, "flags": "outage,pd-drift"}]
    page = index_html(runs=runs, alerts=alerts, health=health)
    assert "<script>alert" not in page and "{{ 6*7 }}" not in page
    assert page.count("&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;&#123;&#123; 6*7 &#125;&#125;&amp;") >= 6
    assert page.count("<script>") == 1  # our filter script only
    assert "health flag" in page and "failed" in page


def test_find_times() -> None:
    assert parse_when("2026-10-01", option="--from") == dt.datetime(2026, 10, 1, tzinfo=dt.UTC)
    assert parse_when("2026-10-01T02:00+02:00", option="--to") == dt.datetime(2026, 10, 1,
                                                                              tzinfo=dt.UTC)
    with pytest.raises(InputError, match="zone"):
        parse_when("2026-10-01T02:00", option="--to")


def test_radar_health_finds_the_simulated_outage(tmp_path: Path) -> None:
    from harbourwatch.campaign.health import radar_health
    from harbourwatch.pipeline import run_review
    from harbourwatch.sim import simulate_to_dir

    # scenario 'outage': mole-light gives no plot for 600 s mid-feed (simulator truth)
    simulate_to_dir("outage", tmp_path / "sim", duration_s=900.0)
    zones = tmp_path / "zones.geojson"
    zones.write_text('{"type": "FeatureCollection", "features": []}')
    rules = tmp_path / "rules.toml"
    rules.write_text("")
    got: dict[str, list[dict[str, object]]] = {}

    def keep(inp, tset, alerts):  # type: ignore[no-untyped-def]
        got["h"] = radar_health(inp.plots, inp.scans, inp.sensors, tset)

    run_review([tmp_path / "sim" / "plots.csv"], sensors=tmp_path / "sim" / "sensors.toml",
               zones=zones, rules=rules, out=tmp_path / "out", progress=False, collect=keep)
    head, mole = got["h"]
    assert head["sensor"] == "calder-head" and head["outages"] == 0 and head["flags"] == ""
    assert mole["outages"] == 1 and "outage" in str(mole["flags"])
    # the gap between the last scan before and the first after is the outage plus at most
    # about one scan period (3 s) on either side
    assert 10.0 <= float(mole["longest_outage_min"]) <= 10.0 + 6.5 / 60.0  # type: ignore[arg-type]
    for h in (head, mole):  # configured detection probability 0.9
        assert abs(float(h["pd_estimated"]) - 0.9) < 0.1  # type: ignore[arg-type]
