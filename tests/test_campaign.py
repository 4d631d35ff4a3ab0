"""Campaigns end to end: against one run over the whole span, on a real loopback cluster,
with a worker killed, re-runs, a corrupt file, and the catalogue queries.

The heavy tests share one simulated archive (scenario ``watch-days``: three
2-hour "days" with a vessel loitering across the 08:00 boundary, one crossing
the exercise range under way across it, and two meeting across 10:00) and
run in one xdist group, in file order, so the archive, the single run and the
campaigns are made once.
"""

from __future__ import annotations

import contextlib
import gzip
import json
import os
import signal
import socket
import subprocess
import sys
import threading
from pathlib import Path

import numpy as np
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest
from pyproj import Geod

from harbourwatch.campaign import run_campaign
from harbourwatch.campaign.join import JOIN_DISTANCE_M
from harbourwatch.cli import main
from harbourwatch.pipeline import run_review
from harbourwatch.sim import simulate_to_dir

pytestmark = pytest.mark.xdist_group("campaign")

BIN = Path(sys.executable).parent
GEOD = Geod(ellps="WGS84")  # reference geodesics (pyproj, Karney's algorithm)
B1 = "2026-05-04T08:00:00.000Z"  # first day boundary of the scenario


@pytest.fixture(scope="module")
def world(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("campaign")
    sim = root / "sim"
    simulate_to_dir("watch-days", sim, feed_format="csv.gz")
    args = {"sensors": sim / "sensors.toml", "zones": sim / "zones.geojson",
            "rules": sim / "rules.toml"}
    single = root / "single"
    run_review([sim / "plots.csv.gz"], out=single, progress=False, **args)
    local = root / "local"
    run_campaign([str(sim / "plots.csv.gz")], out=local, chunk_h=2, overlap_min=20,
                 progress=False, **args)
    return {"root": root, "sim": sim, "single": single, "local": local, **args}


def _cli_args(w: dict[str, Path]) -> list[str]:
    return ["--sensors", str(w["sensors"]), "--zones", str(w["zones"]), "--rules", str(w["rules"]),
            "--chunk-h", "2", "--overlap-min", "20", "--quiet"]


def _tracks(table) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:  # type: ignore[no-untyped-def]
    d = table.to_pydict()
    t = np.array([x.timestamp() if hasattr(x, "timestamp") else x for x in d["time"]], float)
    ids = np.array(d["track"], dtype=object)
    out = {}
    for tid in sorted(set(d["track"])):
        m = ids == tid
        order = np.argsort(t[m])
        out[tid] = (t[m][order], np.array(d["lat"])[m][order], np.array(d["lon"])[m][order])
    return out


def _single_tracks(path: Path):  # type: ignore[no-untyped-def]
    import pyarrow as pa

    tab = pacsv.read_csv(path, convert_options=pacsv.ConvertOptions(
        column_types={"time": pa.timestamp("ms", "UTC")}))
    return _tracks(tab)


def _match(single, camp) -> dict[str, tuple[str, float, float]]:  # type: ignore[no-untyped-def]
    """For each single-run trajectory: the campaign trajectory nearest on average (geodesic m)."""
    out = {}
    for sid, (ts, la, lo) in single.items():
        best = ("", np.inf, 0.0)
        for cid, (tc, lc, oc) in camp.items():
            m = (ts >= tc[0]) & (ts <= tc[-1])
            if m.sum() < 5:
                continue
            lat_i, lon_i = np.interp(ts[m], tc, lc), np.interp(ts[m], tc, oc)
            _, _, d = GEOD.inv(lo[m], la[m], lon_i, lat_i)
            if np.mean(d) < best[1]:
                best = (cid, float(np.mean(d)), float(m.mean()))
        out[sid] = best
    return out


def test_campaign_equals_one_run_over_the_span(world: dict[str, Path]) -> None:
    single = _single_tracks(world["single"] / "tracks.csv")
    camp = _tracks(pq.read_table(world["local"] / "tracks.parquet"))
    long_single = {k: v for k, v in single.items() if v[0][-1] - v[0][0] >= 120.0}
    long_camp = {k: v for k, v in camp.items() if v[0][-1] - v[0][0] >= 120.0}
    assert len(long_single) == len(long_camp) >= 7  # seven vessels in the scenario
    match = _match(long_single, long_camp)
    # one-to-one, within the join's tolerance, covering the whole single-run trajectory
    assert len({m[0] for m in match.values()}) == len(match)
    for sid, (cid, dist, cover) in match.items():
        assert dist < JOIN_DISTANCE_M, (sid, cid, dist)
        assert cover > 0.99, (sid, cid, cover)

    ids = {k: v[0] for k, v in match.items()}
    with open(world["single"] / "alerts.csv", encoding="utf-8") as fh:
        import csv

        ref = list(csv.DictReader(fh))
    got = pq.read_table(world["local"] / "alerts.parquet").to_pylist()
    assert len(got) == len(ref) == 5
    for r in ref:
        hits = [g for g in got if g["rule"] == r["rule"] and g["track"] == ids[r["track"]]
                and g["other_track"] == (ids[r["other_track"]] if r["other_track"] else "")]
        assert len(hits) == 1, r
        g = hits[0]
        assert abs(g["start"].timestamp() - _epoch(r["start"])) < 30.0
        assert abs(g["end"].timestamp() - _epoch(r["end"])) < 30.0
        # re-evaluated alerts use other draws: Monte-Carlo standard error at most 0.035
        assert abs(g["probability"] - float(r["probability"])) < 0.11
    # the loiter and the crossing span the 08:00 boundary and are one alert each
    b1 = _epoch(B1)
    for rule in ("basin-loiter", "range-crossing"):
        (a,) = [g for g in got if g["rule"] == rule]
        assert a["start"].timestamp() < b1 < a["end"].timestamp()
    # the ketch stops until 08:20:00 in the scenario's plan (simulator truth)
    (loiter,) = [g for g in got if g["rule"] == "basin-loiter"]
    assert abs(loiter["end"].timestamp() - _epoch("2026-05-04T08:20:00.000Z")) < 60.0


def _epoch(iso: str) -> float:
    import datetime as dt

    return dt.datetime.fromisoformat(iso.replace("Z", "+00:00")).timestamp()


def test_catalogue_tables_and_geoparquet(world: dict[str, Path]) -> None:
    import duckdb
    import geopandas as gpd

    traj = gpd.read_parquet(world["local"] / "trajectories.parquet")
    assert traj.crs.to_epsg() == 4326 and (traj.geometry.geom_type == "LineString").all()
    tracks = pq.read_table(world["local"] / "tracks.parquet")
    assert set(traj["track"]) == set(tracks.column("track").to_pylist())
    assert {"chunk", "chunk_track"} <= set(tracks.column_names)
    con = duckdb.connect(str(world["local"] / "catalogue.duckdb"), read_only=True)
    try:
        names = {r[0] for r in con.execute("SHOW TABLES").fetchall()}
        assert {"runs", "trajectories", "alerts", "radar_health"} <= names
        idx = {r[0] for r in con.execute("SELECT index_name FROM duckdb_indexes()").fetchall()}
        assert {"alerts_start", "trajectories_start", "runs_start", "radar_health_start"} <= idx
        assert con.execute("SELECT count(*) FROM runs WHERE status = 'done'").fetchone() == (3,)
        # two stations per chunk; configured detection probability 0.9 recovered within 0.1
        pd = con.execute("SELECT pd_estimated FROM radar_health").fetchall()
        assert len(pd) == 6 and all(abs(p[0] - 0.9) < 0.1 for p in pd)
    finally:
        con.close()
    page = (world["local"] / "index.html").read_text(encoding="utf-8")
    for chunk in ("20260504T0600Z", "20260504T0800Z", "20260504T1000Z"):
        assert f'href="chunks/{chunk}/report.html"' in page
        assert (world["local"] / "chunks" / chunk / "report.html").is_file()
    assert page.count("<tr><td>2026-05-04T") == 5  # the combined alerts table
    assert "http://" not in page and "https://" not in page  # offline


def test_find_filters_and_sql(world: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> None:
    cat = str(world["local"] / "catalogue.duckdb")
    assert main(["find", cat, "--zone", "inner-basin", "--format", "json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["rule"] for r in rows] == ["basin-loiter"]
    assert main(["find", cat, "--rule", "rendezvous", "--format", "csv"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert len(lines) == 2 and "roads-meeting" in lines[1]
    assert main(["find", cat, "--from", "2026-05-04T10:30Z", "--to", "2026-05-04T12:00Z",
                 "--format", "json"]) == 0
    assert [r["rule"] for r in json.loads(capsys.readouterr().out)] == ["berth-entry"]
    assert main(["find", str(world["local"]), "--sql",
                 "SELECT count(*) AS n FROM alerts WHERE probability >= 0.5", "--format",
                 "json"]) == 0
    assert json.loads(capsys.readouterr().out) == [{"n": 5}]
    assert main(["find", cat, "--min-length-m", "20"]) == 2  # no size columns in this archive
    assert "length_m" in capsys.readouterr().err
    assert main(["find", cat, "--from", "2026-05-04T10:30"]) == 2  # no zone designator
    capsys.readouterr()
    assert main(["find", cat, "--sql", "DROP TABLE alerts"]) == 2  # read-only
    capsys.readouterr()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture(scope="module")
def loopback(world: dict[str, Path]):  # type: ignore[no-untyped-def]
    """A dask scheduler and two single-threaded workers on 127.0.0.1, started here."""
    from distributed import Client

    port = _free_port()
    addr = f"tcp://127.0.0.1:{port}"
    log = open(world["root"] / "cluster.log", "wb")  # noqa: SIM115
    procs = [subprocess.Popen([str(BIN / "dask"), "scheduler", "--host", "127.0.0.1", "--port",
                               str(port), "--no-dashboard"], stdout=log, stderr=log)]
    try:
        with Client(addr, timeout="60s") as c:
            for _ in range(2):
                procs.append(subprocess.Popen(
                    [str(BIN / "dask"), "worker", addr, "--nthreads", "1", "--no-nanny",
                     "--no-dashboard", "--host", "127.0.0.1"], stdout=log, stderr=log))
            c.wait_for_workers(2, timeout=120)
        yield {"address": addr, "workers": procs[1:]}
    finally:
        for p in reversed(procs):
            if p.poll() is None:
                p.terminate()
        for p in procs:
            with contextlib.suppress(subprocess.TimeoutExpired):
                p.wait(timeout=20)
            if p.poll() is None:
                p.kill()
                p.wait()
        log.close()


def _same_tables(a: Path, b: Path) -> None:
    for name in ("tracks.parquet", "alerts.parquet", "trajectories.parquet"):
        assert pq.read_table(a / name).equals(pq.read_table(b / name)), name
    for chunk in sorted(p.name for p in (a / "chunks").iterdir()):
        for f in ("tracks.csv", "alerts.csv", "as_seen.csv"):
            assert (a / "chunks" / chunk / f).read_bytes() == (b / "chunks" / chunk / f).read_bytes()


def test_loopback_cluster_gives_the_local_cluster_results(world, loopback) -> None:  # type: ignore[no-untyped-def]
    out = world["root"] / "loopback"
    code = main(["campaign", str(world["sim"] / "plots.csv.gz"), "--out", str(out),
                 "--scheduler", loopback["address"], *_cli_args(world)])
    assert code == 0
    _same_tables(world["local"], out)
    log = (out / "campaign.log").read_text()
    assert loopback["address"] in log and "3 to review" in log


def test_rerun_after_success_does_no_work(world, loopback) -> None:  # type: ignore[no-untyped-def]
    out = world["local"]
    before = {p: p.stat().st_mtime_ns for p in (out / "chunks").rglob("*")}
    code = main(["campaign", str(world["sim"] / "plots.csv.gz"), "--out", str(out),
                 "--scheduler", loopback["address"], *_cli_args(world)])
    assert code == 0
    log = (out / "campaign.log").read_text().split("campaign into")[-1]
    assert "0 to review, 3 finished earlier" in log
    assert log.count("finished earlier (key") == 3 and "reviewed on" not in log
    assert "0 to scan" in log
    assert before == {p: p.stat().st_mtime_ns for p in (out / "chunks").rglob("*")}


def _split_archive(sim: Path, dest: Path, step_s: float) -> list[Path]:
    """The simulated feed as one file per station per ``step_s`` (an archive of small files)."""
    import datetime as dt

    lines = gzip.decompress((sim / "plots.csv.gz").read_bytes()).decode().splitlines()
    head, rows = lines[0], lines[1:]
    files: dict[Path, list[str]] = {}
    for row in rows:
        t = dt.datetime.fromisoformat(row.split(",", 1)[0].replace("Z", "+00:00")).timestamp()
        sensor = row.split(",")[1]
        f = dest / sensor / f"{int(t // step_s) * int(step_s)}.csv"
        files.setdefault(f, []).append(row)
    for f, body in files.items():
        f.parent.mkdir(parents=True, exist_ok=True)
        f.write_text(head + "\n" + "\n".join(body) + "\n")
    return sorted(files)


@pytest.fixture(scope="module")
def short(world: dict[str, Path], tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """90 minutes of the scenario as half-hour files per station (chunks of 30 min)."""
    root = tmp_path_factory.mktemp("short")
    sim = root / "sim"
    simulate_to_dir("watch-days", sim, feed_format="csv.gz", duration_s=5400.0)
    files = _split_archive(sim, root / "archive", 1800.0)
    return {"root": root, "sim": sim, "archive": root / "archive", "files": files}  # type: ignore[dict-item]


def test_killed_worker_chunk_is_retried_and_leaves_no_partial_output(world, loopback, short) -> None:  # type: ignore[no-untyped-def]
    out = short["root"] / "killed"
    result: dict[str, object] = {}

    def go() -> None:
        result["summary"] = run_campaign(
            [str(short["archive"])], out=out, chunk_h=0.5, overlap_min=10,
            scheduler=loopback["address"], progress=False, sensors=world["sensors"],
            zones=world["zones"], rules=world["rules"])

    th = threading.Thread(target=go)
    th.start()
    pids = {p.pid for p in loopback["workers"]}
    victim = None
    chunks = out / "chunks"
    while th.is_alive() and victim is None:  # bounded: ends with the campaign at the latest
        for p in (chunks.iterdir() if chunks.is_dir() else []):
            if ".tmp-" in p.name and int(p.name.split(".tmp-")[1].split("-")[0]) in pids:
                victim = int(p.name.split(".tmp-")[1].split("-")[0])
                os.kill(victim, signal.SIGKILL)
                break
        th.join(timeout=0.02)
    th.join()
    assert victim is not None, "no chunk was seen running"
    summary = result["summary"]
    assert not list(chunks.glob(".*"))  # no partial chunk output
    for c in summary.chunks:  # type: ignore[attr-defined]
        if c.status == "done":
            assert (chunks / c.name / "chunk.json").is_file()
            assert (chunks / c.name / "tracks.csv").is_file()
        else:
            assert c.reason  # reported with its reason
    log = (out / "campaign.log").read_text()
    assert "(attempt 2)" in log or "FAILED" in log
    assert (out / "catalogue.duckdb").is_file() and (out / "index.html").is_file()


def test_corrupt_file_fails_its_chunks_only_and_is_retried(world, loopback, short, capsys) -> None:  # type: ignore[no-untyped-def]
    import shutil

    archive = short["root"] / "corrupt-archive"
    shutil.copytree(short["archive"], archive)
    bad = sorted(archive.rglob("*.csv"))[-1]  # the last half hour of one station
    good_text = bad.read_text()
    lines = good_text.splitlines()
    cells = lines[5].split(",")
    cells[2] = "north"  # lat
    lines[5] = ",".join(cells)
    bad.write_text("\n".join(lines) + "\n")
    out = short["root"] / "corrupt"
    args = ["campaign", str(archive), "--out", str(out), "--scheduler", loopback["address"],
            "--sensors", str(world["sensors"]), "--zones", str(world["zones"]),
            "--rules", str(world["rules"]), "--chunk-h", "0.5", "--overlap-min", "10", "--quiet"]
    assert main(args) == 2  # bad input
    text = capsys.readouterr().out
    assert f"{bad}, line 6, field 'lat'" in text
    status = {c["chunk"]: c for c in json.loads((out / "campaign.json").read_text())["chunks"]}
    failed = [k for k, c in status.items() if c["status"] == "failed"]
    done = [k for k, c in status.items() if c["status"] == "done"]
    assert failed and done  # the others went on
    for k in failed:
        assert not (out / "chunks" / k).exists()
    assert not list((out / "chunks").glob(".*"))
    bad.write_text(good_text)  # repaired: the failed chunks run again, the others are skipped
    os.utime(bad)
    assert main(args) == 0
    log = (out / "campaign.log").read_text().split("campaign into")[-1]
    assert log.count("finished earlier (key") == len(done)
    assert log.count("reviewed on") == len(failed)
    capsys.readouterr()
