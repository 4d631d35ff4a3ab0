"""A whole review run through the command line: outputs, determinism, exit codes."""

from __future__ import annotations

import csv
import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

from harbourwatch.cli import main
from harbourwatch.pipeline import demo_paths
from harbourwatch.sim import simulate_to_dir
from harbourwatch.trajectories import TRACK_COLUMNS

ALERT_COLUMNS = ["rule", "kind", "track", "other_track", "zone", "start", "end", "probability",
                 "summary"]  # the contract's alerts.csv columns (../shared/formats.md)


@pytest.fixture(scope="module")
def scenario(tmp_path_factory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("quiet")
    simulate_to_dir("quiet", d, duration_s=600.0)
    demo = demo_paths()
    return {"feed": d / "plots.csv", "sensors": d / "sensors.toml", "truth": d / "truth.csv",
            "zones": demo["zones"], "rules": demo["rules"]}


def _run(s: dict[str, Path], out: Path, *extra: str) -> int:
    return main(["run", str(s["feed"]), "--sensors", str(s["sensors"]), "--zones", str(s["zones"]),
                 "--rules", str(s["rules"]), "--out", str(out), "--quiet", *extra])


@pytest.fixture(scope="module")
def run_dir(scenario, tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("run")
    assert _run(scenario, out) == 0
    return out


def test_outputs_follow_the_contract(run_dir: Path) -> None:
    for name in ("tracks.csv", "alerts.csv", "as_seen.csv", "trajectories.geojson", "run.json",
                 "report.html"):
        assert (run_dir / name).is_file(), name
    with open(run_dir / "tracks.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows and tuple(rows[0]) == TRACK_COLUMNS
    assert all(r["time"].endswith("Z") for r in rows)
    with open(run_dir / "alerts.csv", newline="") as fh:
        assert next(csv.reader(fh))[:len(ALERT_COLUMNS)] == ALERT_COLUMNS  # then optional columns
    run = json.loads((run_dir / "run.json").read_text())
    assert {"software", "inputs", "parameters", "timings"} <= set(run)
    assert len(run["inputs"]["feeds"][0]["sha256"]) == 64
    assert not list(run_dir.glob(".*.tmp"))  # no temporary files left behind


def test_run_finds_the_vessels(run_dir: Path, scenario) -> None:
    # the quiet scenario: four well-separated vessels, one radar (harbourwatch simulate --list)
    tracks = {r["track"] for r in csv.DictReader(open(run_dir / "tracks.csv", newline=""))}
    truth = {r["track"] for r in csv.DictReader(open(scenario["truth"], newline=""))}
    assert len(tracks) == len(truth)
    assert main(["score", str(run_dir / "tracks.csv"), str(scenario["truth"]), "--json"]) == 0


def _without_provenance(html: str) -> str:
    # the provenance section shows this run's timings, which differ from run to run
    start = html.index('id="provenance"')
    return html[:start]


def test_same_inputs_give_byte_identical_outputs(scenario, run_dir: Path, tmp_path: Path) -> None:
    assert _run(scenario, tmp_path) == 0
    for name in ("tracks.csv", "alerts.csv", "as_seen.csv", "trajectories.geojson"):
        assert (tmp_path / name).read_bytes() == (run_dir / name).read_bytes(), name
    a = (tmp_path / "report.html").read_text()
    b = (run_dir / "report.html").read_text()
    assert _without_provenance(a) == _without_provenance(b)
    run_a = json.loads((tmp_path / "run.json").read_text())
    run_b = json.loads((run_dir / "run.json").read_text())
    for key in ("inputs", "parameters", "results", "feed", "software"):
        assert run_a[key] == run_b[key], key


def test_bad_input_writes_nothing(scenario, tmp_path: Path, capsys) -> None:
    bad = tmp_path / "bad.csv"
    bad.write_text("time,sensor,lat,lon\n2026-05-04T06:00:00Z,nowhere,57.5,-30.0\n")
    out = tmp_path / "out"
    s = dict(scenario, feed=bad)
    assert _run(s, out) == 2
    err = capsys.readouterr().err
    assert "bad.csv, line 2, field 'sensor'" in err
    assert not out.exists() or not any(out.iterdir())


def test_flag_alerts_changes_the_exit_status_only_when_asked(scenario, tmp_path: Path) -> None:
    # a rule every vessel of the scenario breaks: being anywhere in a zone covering the sea
    zones = tmp_path / "z.geojson"
    zones.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"id": "sea"},
        "geometry": {"type": "Polygon", "coordinates": [[[-31, 57], [-29, 57], [-29, 58],
                                                         [-31, 58], [-31, 57]]]}}]}))
    rules = tmp_path / "r.toml"
    rules.write_text('[[rule]]\nid = "anywhere"\nkind = "entry"\nzone = "sea"\n')
    s = dict(scenario, zones=zones, rules=rules)
    assert _run(s, tmp_path / "a") == 0
    assert _run(s, tmp_path / "b", "--flag-alerts") == 3
    rows = list(csv.DictReader(open(tmp_path / "a" / "alerts.csv", newline="")))
    assert rows and all(float(r["probability"]) >= 0.5 for r in rows)


def test_python_dash_m_entry_point(tmp_path: Path) -> None:
    proc = subprocess.run([sys.executable, "-m", "harbourwatch", "simulate", "--list"],
                          capture_output=True, text=True, check=False)
    assert proc.returncode == 0 and "demo" in proc.stdout


def test_outputs_do_not_depend_on_the_order_or_split_of_the_feed_rows(
        scenario, tmp_path: Path) -> None:
    # A radar that stamps every plot of a revolution with one time (the scan's first):
    # many plots share a time, so only the order of the rows tells them apart. The same
    # plots shuffled, and shuffled and split over two files, give byte-identical tables
    # (as_seen.csv rows by time, then track).
    import random

    lines = scenario["feed"].read_text().splitlines(keepends=True)
    header, rows = lines[0], lines[1:]
    assert header.strip() == "time,sensor,lat,lon,scan"
    first: dict[str, str] = {}
    stamped = []
    for row in rows:
        t, rest = row.split(",", 1)
        scan = row.rstrip("\n").rsplit(",", 1)[1]
        stamped.append(first.setdefault(scan, t) + "," + rest)
    feeds = {"as-is": [header + "".join(stamped)]}
    random.Random(15).shuffle(stamped)
    half = len(stamped) // 2
    feeds["shuffled"] = [header + "".join(stamped)]
    feeds["split"] = [header + "".join(stamped[half:]), header + "".join(stamped[:half])]
    args = ["--sensors", str(scenario["sensors"]), "--zones", str(scenario["zones"]),
            "--rules", str(scenario["rules"]), "--quiet"]
    outputs = {}
    for name, texts in feeds.items():
        paths = []
        for k, text in enumerate(texts):
            paths.append(tmp_path / f"{name}-{k}.csv")
            paths[-1].write_text(text)
        assert main(["run", *map(str, paths), "--out", str(tmp_path / name), *args]) == 0
        outputs[name] = {f: (tmp_path / name / f).read_bytes() for f in
                         ("tracks.csv", "as_seen.csv", "alerts.csv", "trajectories.geojson")}
    assert outputs["shuffled"] == outputs["as-is"]
    assert outputs["split"] == outputs["as-is"]
    with open(tmp_path / "as-is" / "as_seen.csv", newline="") as fh:
        keys = [(r["time"], r["track"]) for r in csv.DictReader(fh)]
    assert keys == sorted(keys) and len(keys) > 100
    assert len(set(keys)) < len(keys) or len({k[0] for k in keys}) < len(keys)  # times shared


class _Terminal(io.StringIO):
    """Standard error as a terminal would be (for the progress bars)."""

    def isatty(self) -> bool:
        return True


def test_progress_covers_every_stage_with_rate_and_time_left(scenario, tmp_path, monkeypatch,
                                                              capsys) -> None:
    import re

    term = _Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    args = ["run", str(scenario["feed"]), "--sensors", str(scenario["sensors"]),
            "--zones", str(scenario["zones"]), "--rules", str(scenario["rules"])]
    assert main([*args, "--out", str(tmp_path / "a")]) == 0
    shown = term.getvalue()
    for stage, unit in (("tracking", "scan"), ("tables", "row"), ("rules", "rule"),
                        ("reports", "page")):
        # tqdm's line: "stage : 100%|####| n/n [elapsed<left, rate unit/s]"
        line = re.search(rf"{stage}\s*: 100%\|[^|]*\| *[\d.]+k?/[\d.]+k? "
                         rf"\[\d\d:\d\d<\d\d:\d\d, *[\d.]+k?{unit}/s\]", shown)
        assert line is not None, (stage, shown[-600:])
    # quiet with --quiet, and when standard error is not a terminal
    term.seek(0)
    term.truncate()
    assert main([*args, "--out", str(tmp_path / "b"), "--quiet"]) == 0
    assert term.getvalue() == ""
    monkeypatch.setattr(sys, "stderr", io.StringIO())
    assert main([*args, "--out", str(tmp_path / "c")]) == 0
    assert sys.stderr.getvalue() == ""
