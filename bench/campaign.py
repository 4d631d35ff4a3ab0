"""Campaign benchmark: a 4-day two-radar archive on two workers against one process.

The archive is simulated once (the simulator's ``archive-days`` scenario: two
radars, 12 vessel slots with random routes, 6 false plots per scan per radar,
from midnight UTC for ``BENCH_CAMPAIGN_DAYS`` days, default 4) and written as
one file per station per UTC day. It is then reviewed twice as a campaign of daily
chunks with the default overlap of 60 minutes:

* one process: the same chunk tasks run one after another in a fresh
  process (``executor="inline"``), each as ``harbourwatch run`` runs: the
  trajectory tables written on a second thread, which has the second core
  to itself (unchanged from the first version of this benchmark);
* two workers: a ``LocalCluster`` of two single-threaded worker processes
  (one thread per numerical pool, the C allocator's defaults, no task
  profiler; each chunk writes its tables on its own thread).

Both runs start with an empty campaign folder (so both scan the files) and
are timed from the call of ``run_campaign`` to its return. The machine
should be otherwise idle: on a shared machine run the benchmark twice and
compare the pairs.

Printed: wall times, the speed-up (end to end, and of the chunk reviews
alone), the peak memory (max RSS) of each worker, and on paper from these
figures the time of a year of such archives on a 64-core cluster.
"""

from __future__ import annotations

import gzip
import json
import math
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

OUT = Path(os.environ.get("BENCH_OUT", "bench_out")) / "campaign"
DAY = 86400.0
MIDNIGHT = 1777852800.0  # 2026-05-04T00:00:00Z


def _line(label: str, value: str) -> None:
    print(f"  {label:<44s} {value}")


def make_archive(days: float) -> Path:
    """Simulate the archive and write one file per station per UTC day (kept between runs)."""
    from harbourwatch import SCENARIOS, simulate
    from harbourwatch.sim import plots_columns, write_sensors_toml

    root = OUT / f"archive-{days:g}d"
    if (root / "done").exists():
        return root
    shutil.rmtree(root, ignore_errors=True)
    scen = SCENARIOS["archive-days"].build(1, days * DAY)
    res = simulate(scen, seed=1)
    cols = plots_columns(res)
    day = np.floor((res.plots.time - MIDNIGHT) / DAY).astype(int)
    for si, s in enumerate(res.sensors):
        for d in np.unique(day):
            m = (res.plots.sensor == si) & (day == d)
            rows = [",".join(r) for r in zip(*(c[m].tolist() for c in cols.values()), strict=True)]
            f = root / "feeds" / s.id / f"2026-05-{4 + int(d):02d}.csv.gz"
            f.parent.mkdir(parents=True, exist_ok=True)
            text = ",".join(cols) + "\n" + "\n".join(rows) + "\n"
            f.write_bytes(gzip.compress(text.encode("utf-8"), compresslevel=1, mtime=0))
    write_sensors_toml(res.sensors, root / "sensors.toml")
    (root / "zones.geojson").write_text(scen.zones_geojson or "")
    (root / "rules.toml").write_text(scen.rules_toml or "")
    (root / "done").write_text(f"{len(res.plots):,} plots, {len(scen.vessels)} vessels\n")
    return root


def _campaign(root: Path, out: Path, **kw: object) -> dict:  # type: ignore[type-arg]
    from harbourwatch.campaign import peak_rss_mb, run_campaign

    shutil.rmtree(out, ignore_errors=True)
    t = time.perf_counter()
    s = run_campaign([str(root / "feeds")], sensors=root / "sensors.toml",
                     zones=root / "zones.geojson", rules=root / "rules.toml", out=out,
                     progress=False, **kw)  # type: ignore[arg-type]
    wall = time.perf_counter() - t
    if s.failed:
        raise SystemExit(f"campaign failed: {[c.reason for c in s.failed]}")
    return {"wall": wall, "timings": s.timings, "chunks": [c.result for c in s.chunks],
            "trajectories": s.trajectories, "joined": s.joined, "alerts": s.alerts,
            "client_peak_mb": peak_rss_mb()}


def _child(*args: str) -> dict:  # type: ignore[type-arg]
    """Run this module in a fresh process (its own peak memory) and read its JSON answer."""
    proc = subprocess.run([sys.executable, "-m", "bench.campaign", *args], capture_output=True,
                          text=True)
    if proc.returncode != 0:
        print(proc.stdout[-3000:], proc.stderr[-3000:])
        raise SystemExit(f"bench child {args} failed with status {proc.returncode}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    days = float(os.environ.get("BENCH_CAMPAIGN_DAYS", "4"))
    print(f"== campaign: {days:g}-day two-radar archive, daily chunks, 60 min overlap")
    made = _child("--archive", str(days))
    if made.get("note"):
        _line("simulation and writing (not timed below)", made["note"])
    root = Path(made["root"])
    files = sorted((root / "feeds").rglob("*.csv.gz"))
    _line("archive", f"{len(files)} files ({sum(f.stat().st_size for f in files) / 1e6:.0f} MB), "
          f"{(root / 'done').read_text().strip()}")

    one = _child("--inline", str(root))
    two = _campaign(root, OUT / "two-workers", n_workers=2)
    review_one = one["timings"]["review_s"]
    review_two = two["timings"]["review_s"]
    by_worker: dict[str, list[dict]] = {}  # type: ignore[type-arg]
    for r in two["chunks"]:
        by_worker.setdefault(r["worker"], []).append(r)
    _line("chunks / trajectories / alerts", f"{len(two['chunks'])} / {two['trajectories']} "
          f"({two['joined']} joined across days) / {two['alerts']}")
    for label, d in (("one process", one), ("two workers", two)):
        tm = d["timings"]
        _line(f"{label}: wall time", f"{d['wall']:.1f} s (start {tm['start_s']:.1f}, scan "
              f"{tm['scan_s']:.1f}, chunk reviews {tm['review_s']:.1f}, combine "
              f"{tm['combine_s']:.1f} s)")
    _line("speed-up, end to end", f"{one['wall'] / two['wall']:.2f}x (target >= 1.8x on 2 cores)")
    _line("speed-up, chunk reviews", f"{review_one / review_two:.2f}x")
    per_chunk = [r["seconds"] for r in one["chunks"]]
    _line("one chunk-day, one process (min / max)", f"{min(per_chunk):.1f} / {max(per_chunk):.1f} s")
    per_chunk2 = [r["seconds"] for r in two["chunks"]]
    _line("one chunk-day, two workers (min / max)", f"{min(per_chunk2):.1f} / {max(per_chunk2):.1f} s")
    # CPU seconds do not depend on what else the machine runs: with two free cores the
    # cluster's wall time would be its busiest worker's CPU time plus the fixed parts
    cpu_one = sum(r["cpu_s"] for r in one["chunks"])
    cpu_busiest = max(sum(r["cpu_s"] for r in rs) for rs in by_worker.values())
    tm2 = two["timings"]
    fixed2 = tm2["start_s"] + tm2["scan_s"] + tm2["combine_s"]
    fixed1 = one["timings"]["start_s"] + one["timings"]["scan_s"] + one["timings"]["combine_s"]
    _line("CPU of the chunk reviews: one process / busiest worker",
          f"{cpu_one:.1f} s / {cpu_busiest:.1f} s")
    _line("speed-up on two free cores (from CPU seconds)",
          f"{(cpu_one + fixed1) / (cpu_busiest + fixed2):.2f}x")
    for w, rs in sorted(by_worker.items()):
        _line(f"peak memory, worker {w}", f"{max(r['peak_rss_mb'] for r in rs):.0f} MB "
              f"({len(rs)} chunks)")
    _line("peak memory, one process (all chunks)", f"{one['client_peak_mb']:.0f} MB")
    _line("peak memory, client of the cluster run", f"{two['client_peak_mb']:.0f} MB")
    same = all((OUT / "one-process" / n).read_bytes() == (OUT / "two-workers" / n).read_bytes()
               for n in ("alerts.parquet", "tracks.parquet", "trajectories.parquet"))
    _line("byte-identical tables from both", "yes" if same else "NO")
    n = len(two["chunks"])
    per_day = sum(per_chunk2) / n  # a chunk's review with the other core busy too
    combine_day = two["timings"]["combine_s"] / n
    waves = math.ceil(365 / 64)
    year = two["timings"]["start_s"] + waves * per_day + 365 * combine_day
    _line("paper: one chunk-day review / its share of combine", f"{per_day:.1f} s / {combine_day:.2f} s")
    _line("paper: a year on 64 cores (64 workers)",
          f"{waves} waves x {per_day:.0f} s + 365 x {combine_day:.2f} s on the client = "
          f"{year / 60:.1f} min (on one core: {365 * (per_day + combine_day) / 3600:.1f} h)")
    busy = 4 * 28.0  # a busy day: four times the 6-hour throughput benchmark (README figure)
    _line("paper: a year of busy days (~112 s/day) on 64 cores",
          f"{(waves * busy + 365 * combine_day) / 60:.1f} min")


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "--archive":
        from harbourwatch import warm_up

        warm_up()
        r = OUT / f"archive-{float(sys.argv[2]):g}d"
        note = "" if (r / "done").exists() else "made"
        t0 = time.perf_counter()
        root = make_archive(float(sys.argv[2]))
        print(json.dumps({"root": str(root),
                          "note": note and f"{time.perf_counter() - t0:.0f} s"}))
    elif len(sys.argv) == 3 and sys.argv[1] == "--inline":
        print(json.dumps(_campaign(Path(sys.argv[2]), OUT / "one-process", executor="inline")))
    else:
        main()
