"""Peak memory and wall time of one review run against the length of the feed.

The 'bench' scenario (two radars, about 40 vessels present at a time, 15
false plots per scan per radar) simulated for 6 h and 24 h (and 7 days with
``BENCH_WEEK=1``), each reviewed by ``python -m harbourwatch run --quiet``
in its own child process; the child's peak resident set (``wait4`` rusage)
and wall time are printed, with the ratio 24 h / 6 h of the peaks (target
at most 1.2). ``BENCH_MEMORY_HOURS`` (comma-separated) overrides the lengths.

Each feed is simulated in a child process of its own too: on Linux a child's
``ru_maxrss`` starts from the resident size of the parent it was forked from,
so a parent that had just simulated 24 hours (about 3 GB) would show as the
review run's peak.

Feeds longer than a day are simulated a day at a time (the simulator holds a
whole feed in memory: a week would need more than 8 GB) and joined: day ``d``
is the 24 h feed of seed ``seed + d`` moved ``d`` days later (times and scan
numbers shifted by whole revolutions), so the traffic has the same density
all along; vessels of one day end at midnight and the next day's begin, which
costs the review nothing it would not pay for real arrivals and departures.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

OUT = Path(os.environ.get("BENCH_OUT", "bench_out"))


def _line(label: str, value: str) -> None:
    print(f"  {label:<34s} {value}")


_SIMULATE = ("import sys; from harbourwatch import simulate_to_dir; "
             "simulate_to_dir('bench', sys.argv[1], duration_s=float(sys.argv[2]), "
             "feed_format='csv.gz', seed=int(sys.argv[3]) if len(sys.argv) > 3 else None)")
_DAY_S = 86400.0


def _simulate(feed_dir: Path, hours: float) -> Path:
    """The 'bench' feed of ``hours`` in ``feed_dir`` (days simulated apart and joined); its path."""
    if hours <= 24.0:
        subprocess.run([sys.executable, "-c", _SIMULATE, str(feed_dir), str(hours * 3600.0)],
                       check=True)
        return next(p for p in sorted(feed_dir.iterdir()) if p.name.startswith("plots"))
    import gzip
    import shutil

    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pacsv

    from harbourwatch.sim.scenarios import SCENARIOS

    seed = SCENARIOS["bench"].default_seed
    days = int(-(-hours // 24))
    feed = feed_dir / "plots.csv.gz"
    feed_dir.mkdir(parents=True, exist_ok=True)
    with gzip.open(feed, "wb", compresslevel=1) as out:
        for d in range(days):
            day = feed_dir / f"day{d}"
            subprocess.run([sys.executable, "-c", _SIMULATE, str(day), str(_DAY_S), str(seed + d)],
                           check=True)
            if d == 0:
                for name in ("sensors.toml", "zones.geojson", "rules.toml"):
                    shutil.copy(day / name, feed_dir / name)
            periods = _periods(day / "sensors.toml")
            t = pacsv.read_csv(day / "plots.csv.gz", convert_options=pacsv.ConvertOptions(
                column_types={"time": pa.timestamp("us", "UTC"), "sensor": pa.string()}))
            epoch = pc.divide(pc.cast(pc.cast(t["time"], pa.int64()), pa.float64()), 1e6)
            shift = pa.array([round(d * _DAY_S / periods[s]) for s in t["sensor"].to_pylist()],
                             pa.int64())
            t = pa.table({"time": pc.add(epoch, d * _DAY_S), "sensor": t["sensor"],
                          "lat": t["lat"], "lon": t["lon"], "scan": pc.add(t["scan"], shift)})
            pacsv.write_csv(t, out, pacsv.WriteOptions(include_header=d == 0))
            del t, epoch, shift
            shutil.rmtree(day)
    return feed


def _periods(sensors_toml: Path) -> dict[str, float]:
    import tomllib

    cfg = tomllib.loads(sensors_toml.read_text())
    return {s["id"]: float(s["scan_period_s"]) for s in cfg["sensor"]}


def measure(hours: float) -> tuple[float, float]:
    """Simulate ``hours`` of the 'bench' scenario, review it; return (peak MB, wall s)."""
    feed_dir = OUT / f"memory_{hours:g}h"
    feed = _simulate(feed_dir, hours)
    cmd = [sys.executable, "-m", "harbourwatch", "run", str(feed), "--sensors",
           str(feed_dir / "sensors.toml"), "--zones", str(feed_dir / "zones.geojson"),
           "--rules", str(feed_dir / "rules.toml"), "--out", str(feed_dir / "run"), "--quiet"]
    t = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)  # this child's own rusage, not every child's
    wall = time.perf_counter() - t
    err = proc.stderr.read().decode(errors="replace") if proc.stderr else ""
    if status != 0:
        raise SystemExit(f"{hours:g} h run failed (status {status}): {err[-2000:]}")
    return usage.ru_maxrss / 1024.0, wall  # ru_maxrss is in KiB on Linux


def main() -> None:
    from harbourwatch import warm_up

    warm_up()
    default = "6,24,168" if os.environ.get("BENCH_WEEK") == "1" else "6,24"
    hours = [float(h) for h in os.environ.get("BENCH_MEMORY_HOURS", default).split(",")]
    print("== memory against feed length: scenario 'bench', one `run` per length")
    peaks: dict[float, float] = {}
    for h in hours:
        peak, wall = measure(h)
        peaks[h] = peak
        _line(f"{h:g} h feed: peak RSS / wall", f"{peak:.0f} MB / {wall:.0f} s")
    if 6.0 in peaks and 24.0 in peaks:
        _line("peak ratio 24 h / 6 h", f"{peaks[24.0] / peaks[6.0]:.2f} (target <= 1.2)")
    if 168.0 not in peaks:
        _line("7-day feed", "not run (BENCH_WEEK=1 runs it)")


if __name__ == "__main__":
    OUT.mkdir(parents=True, exist_ok=True)
    main()
