"""Each run owns its output folder: checked first, locked, written aside, swapped in whole."""

from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from harbourwatch.cli import main
from harbourwatch.errors import InputError
from harbourwatch.io import atomic, outdir
from harbourwatch.io.outdir import check_out_folder, leftovers, run_folder
from harbourwatch.pipeline import demo_paths
from harbourwatch.sim import simulate_to_dir


@pytest.fixture(scope="module")
def scenario(tmp_path_factory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("quiet")
    simulate_to_dir("quiet", d, duration_s=600.0)
    demo = demo_paths()
    # a zone over the whole sea: every vessel of the scenario raises an entry alert
    zones = d / "sea.geojson"
    zones.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"id": "sea"},
        "geometry": {"type": "Polygon", "coordinates": [[[-31, 57], [-29, 57], [-29, 58],
                                                         [-31, 58], [-31, 57]]]}}]}))
    rules = d / "sea.toml"
    rules.write_text('[[rule]]\nid = "anywhere"\nkind = "entry"\nzone = "sea"\n')
    return {"feed": d / "plots.csv", "sensors": d / "sensors.toml", "zones": demo["zones"],
            "rules": demo["rules"], "sea_zones": zones, "sea_rules": rules}


def _args(s: dict[str, Path], out: Path | str, *, many_alerts: bool = False) -> list[str]:
    z, r = ("sea_zones", "sea_rules") if many_alerts else ("zones", "rules")
    return ["run", str(s["feed"]), "--sensors", str(s["sensors"]), "--zones", str(s[z]),
            "--rules", str(s[r]), "--out", str(out), "--quiet"]


def _files(folder: Path) -> dict[str, str]:
    """Every file under ``folder`` (relative path -> SHA-256)."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _beside(out: Path) -> set[str]:
    """Names beside ``out`` that a run made (its lock file aside)."""
    return {p.name for p in leftovers(out)}


@pytest.fixture(scope="module")
def many(scenario, tmp_path_factory) -> Path:
    """A previous run with one alert per vessel."""
    out = tmp_path_factory.mktemp("many") / "out"
    assert main(_args(scenario, out, many_alerts=True)) == 0
    assert len(list((out / "incidents").glob("alert-*.html"))) >= 3
    return out


def _previous(many: Path, tmp_path: Path) -> Path:
    """A copy of the previous run in a fresh place, to run into."""
    import shutil

    out = tmp_path / "out"
    shutil.copytree(many, out)
    return out


def test_second_run_with_fewer_alerts_leaves_exactly_its_files(scenario, many, tmp_path):
    out = _previous(many, tmp_path)
    (out / ".report.html.abc123.tmp").write_text("left by a run killed in an older version")
    assert main(_args(scenario, out)) == 0
    fresh = tmp_path / "fresh"
    assert main(_args(scenario, fresh)) == 0
    assert set(_files(out)) == set(_files(fresh))  # exactly the new run's files
    assert len(list((out / "incidents").glob("*.html"))) < len(list((many / "incidents").glob("*")))
    for name in ("tracks.csv", "as_seen.csv", "alerts.csv", "trajectories.geojson"):
        assert (out / name).read_bytes() == (fresh / name).read_bytes()
    assert not _beside(out) and not _beside(fresh)


def test_a_run_killed_mid_way_leaves_the_previous_run_whole(scenario, many, tmp_path):
    out = _previous(many, tmp_path)
    before = _files(out)
    proc = subprocess.Popen([sys.executable, "-m", "harbourwatch", *_args(scenario, out)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        for _ in range(6000):  # at most about 60 s: until the run's new folder appears
            if _beside(out):
                break
            try:
                proc.wait(timeout=0.01)
            except subprocess.TimeoutExpired:
                continue
            pytest.fail(f"the run ended (status {proc.returncode}) before it could be killed")
        else:
            pytest.fail("the run's new folder never appeared")
        proc.send_signal(signal.SIGKILL)
        assert proc.wait(timeout=60) == -signal.SIGKILL
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert _files(out) == before  # the previous run, whole
    assert _beside(out)  # the killed run's folder is still beside it ...
    assert main(_args(scenario, out)) == 0
    assert not _beside(out)  # ... until the next run removes it
    assert (out / "run.json").is_file() and set(_files(out)) != set(before)


def test_a_full_disk_gives_one_line_and_keeps_the_previous_run(scenario, many, tmp_path,
                                                               monkeypatch, capsys):
    # ENOSPC cannot be had without mounting a small filesystem (root and a mount); it is
    # injected instead: every write of as_seen.csv fails as a full disk fails (errno 28)
    out = _previous(many, tmp_path)
    before = _files(out)
    real_open = open

    class FullDisk:
        def __init__(self, fh):
            self.fh = fh

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.fh.close()

        def write(self, data):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    def fake_open(path, mode="r", **kw):
        fh = real_open(path, mode, **kw)
        return FullDisk(fh) if ".as_seen.csv." in os.fspath(path) else fh

    monkeypatch.setattr(atomic, "open", fake_open, raising=False)
    assert main(_args(scenario, out)) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("harbourwatch: error: no space left on ")
    assert err.rstrip().endswith(f"while writing {out.resolve() / 'as_seen.csv'}")
    assert _files(out) == before
    assert not _beside(out)


@pytest.mark.parametrize("case", ["empty", "file", "foreign", "input-inside", "parent-file"])
def test_an_unusable_out_is_refused_before_the_filter(scenario, tmp_path, monkeypatch, capsys,
                                                      case):
    import harbourwatch.pipeline as pipeline

    def no_filter(*a, **k):
        raise AssertionError("the filter started")

    monkeypatch.setattr(pipeline, "run_filter", no_filter)
    s = dict(scenario)
    out: Path | str = tmp_path / "out"
    if case == "empty":
        out = ""
    elif case == "file":
        Path(out).write_text("not a folder")
    elif case == "foreign":
        Path(out).mkdir()
        (Path(out) / "notes.txt").write_text("someone's notes")
    elif case == "input-inside":
        Path(out).mkdir()
        (Path(out) / "run.json").write_text("{}")
        (Path(out) / "plots.csv").write_bytes(scenario["feed"].read_bytes())
        s["feed"] = Path(out) / "plots.csv"
    elif case == "parent-file":
        (tmp_path / "f").write_text("x")
        out = tmp_path / "f" / "out"
    assert main(_args(s, out)) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "field '--out'" in err
    if case in ("file", "foreign", "input-inside"):
        assert Path(out).exists()  # untouched
    assert not list(tmp_path.glob(".*"))  # no lock, no new folder


def test_no_room_or_no_write_permission_is_refused(scenario, tmp_path, monkeypatch, capsys):
    real = os.statvfs

    class Small:
        def __init__(self, st):
            self.f_frsize = st.f_frsize
            self.f_bavail = (1 << 20) // st.f_frsize  # 1 MiB free

    monkeypatch.setattr(outdir.os, "statvfs", lambda p: Small(real(p)))
    assert main(_args(scenario, tmp_path / "out")) == 2
    err = capsys.readouterr().err
    assert "MiB free on the filesystem" in err and err.count("\n") == 1
    monkeypatch.setattr(outdir.os, "statvfs", real)
    # root may write anywhere: a folder without write permission is taken from os.access
    monkeypatch.setattr(outdir.os, "access", lambda p, mode: False)
    assert main(_args(scenario, tmp_path / "out")) == 2
    assert "cannot write into" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_a_second_run_into_the_same_out_is_refused(scenario, tmp_path, capsys):
    out = tmp_path / "out"
    lock = tmp_path / ".out.lock"
    with open(lock, "w") as fh:  # another run holds the lock (flock, one per open file)
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        assert main(_args(scenario, out)) == 2
        err = capsys.readouterr().err
        assert "another run is writing into" in err and "field '--out'" in err
        assert not out.exists() and not _beside(out)
    assert main(_args(scenario, out)) == 0  # the lock released, the next run goes ahead


def test_a_swap_cut_short_is_repaired_and_failures_keep_the_previous_run(tmp_path, monkeypatch):
    # without renameat2 the swap takes two renames; a run killed between them leaves the
    # previous run as .out.old-*.tmp and no out: the next run puts it back first
    out = tmp_path / "out"
    old = tmp_path / ".out.old-x1.tmp"
    old.mkdir()
    (old / "run.json").write_text("previous")
    target = check_out_folder(out)
    with pytest.raises(RuntimeError), run_folder(target) as stage:
        (stage / "run.json").write_text("new")
        raise RuntimeError("a failure inside the run")
    assert (out / "run.json").read_text() == "previous" and not _beside(out)
    monkeypatch.setattr(outdir, "_exchange", lambda a, b: False)
    with run_folder(target) as stage:
        (stage / "run.json").write_text("new")
    assert (out / "run.json").read_text() == "new" and not _beside(out)


def test_check_out_folder_messages():
    with pytest.raises(InputError) as info:
        check_out_folder("  ")
    assert info.value.field == "--out" and "empty folder name" in info.value.message
    with pytest.raises(InputError) as info:
        check_out_folder("/")
    assert "filesystem root" in info.value.message
