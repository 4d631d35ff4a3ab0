"""Command line: parse, call the library once, print, return an exit code.

Exit status: 0 success (alerts or not), 2 bad input, 1 anything else, and
``3`` from ``run --flag-alerts`` when at least one alert was raised.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path

from harbourwatch import __version__
from harbourwatch.errors import HarbourwatchError, InputError
from harbourwatch.units import CAUTION

__all__ = ["main", "build_parser"]

EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_BAD_INPUT = 2
EXIT_ALERTS = 3


def build_parser() -> argparse.ArgumentParser:
    """The ``harbourwatch`` argument parser with its commands."""
    p = argparse.ArgumentParser(
        prog="harbourwatch",
        description="After-the-fact review of harbour radar plots. " + CAUTION,
    )
    p.add_argument("--version", action="version", version=f"harbourwatch {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    r = sub.add_parser("run", help="review plot feeds: trajectories, alerts, reports")
    r.add_argument("feeds", nargs="+", metavar="FEED", help="plot feed files (CSV, .csv.gz, Parquet)")
    r.add_argument("--sensors", required=True, metavar="SENSORS.toml")
    r.add_argument("--zones", required=True, metavar="ZONES.geojson")
    r.add_argument("--rules", required=True, metavar="RULES.toml")
    r.add_argument("--out", required=True, metavar="DIR")
    r.add_argument("--seed", type=int, default=0, help="seed of the alert-probability draws (default 0)")
    r.add_argument("--tiles", metavar="URL", default=None,
                   help="tile server URL template for a basemap (default: none, offline)")
    r.add_argument("--flag-alerts", action="store_true",
                   help=f"exit with status {EXIT_ALERTS} when any alert is raised")
    r.add_argument("--quiet", action="store_true", help="no progress bar")

    s = sub.add_parser("score", help="accuracy of tracks against ground truth (GOSPA, trajectory GOSPA)")
    s.add_argument("tracks", metavar="TRACKS.csv")
    s.add_argument("truth", metavar="TRUTH.csv")
    s.add_argument("--cutoff-m", type=float, default=200.0)
    s.add_argument("--order", type=float, default=2.0)
    s.add_argument("--switch-cost-m", type=float, default=100.0)
    s.add_argument("--grid-s", type=float, default=10.0)
    s.add_argument("--max-gap-s", type=float, default=60.0,
                   help="no interpolation across gaps longer than this within one trajectory")
    s.add_argument("--tgospa-window-min", type=float, default=0.0,
                   help="solve the trajectory GOSPA in windows of this many minutes (long "
                        "feeds); reports an upper and a lower bound. 0: the whole feed at once")
    s.add_argument("--json", action="store_true", help="print one JSON object")
    s.add_argument("--plot", metavar="FILE", default=None,
                   help="write the metric over time to FILE (.png or .html)")

    d = sub.add_parser("demo", help="the bundled scenario, end to end")
    d.add_argument("--out", default="demo_out", metavar="DIR")

    c = sub.add_parser("campaign", help="review an archive of feeds in time chunks on dask.distributed")
    c.add_argument("archive", nargs="+", metavar="ARCHIVE",
                   help="feed files, folders (searched recursively) or glob patterns")
    c.add_argument("--sensors", required=True, metavar="SENSORS.toml")
    c.add_argument("--zones", required=True, metavar="ZONES.geojson")
    c.add_argument("--rules", required=True, metavar="RULES.toml")
    c.add_argument("--out", required=True, metavar="DIR")
    c.add_argument("--chunk-h", type=float, default=24.0, metavar="H",
                   help="chunk length in UTC hours (default 24: one UTC day)")
    c.add_argument("--overlap-min", type=float, default=60.0, metavar="M",
                   help="overlap shared by neighbouring chunks, minutes (default 60)")
    c.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="address of a running dask scheduler (default: dask's configured "
                        "scheduler-address, else a local cluster sized to this machine)")
    c.add_argument("--seed", type=int, default=0, help="seed of the alert-probability draws (default 0)")
    c.add_argument("--quiet", action="store_true", help="no progress bar or log lines on the terminal")

    f = sub.add_parser("find", help="query a campaign's catalogue")
    f.add_argument("catalogue", metavar="CATALOGUE", help="catalogue.duckdb or its campaign folder")
    f.add_argument("--zone", default=None, help="zone id")
    f.add_argument("--rule", default=None, help="rule id or kind")
    f.add_argument("--from", dest="start", default=None, metavar="TIME",
                   help="alerts ending at or after TIME (ISO 8601 with zone, or a date)")
    f.add_argument("--to", dest="end", default=None, metavar="TIME",
                   help="alerts starting before TIME")
    f.add_argument("--min-length-m", type=float, default=None, metavar="L",
                   help="vessels at least L metres long (catalogues with vessel sizes)")
    f.add_argument("--sql", default=None, metavar="QUERY", help="run one SQL query of your own")
    f.add_argument("--format", choices=("table", "csv", "json"), default="table")

    m = sub.add_parser("simulate", help="write an invented scenario with ground truth")
    m.add_argument("--scenario", default="demo", help="scenario name (see --list)")
    m.add_argument("--list", action="store_true", help="list the scenario names and exit")
    m.add_argument("--seed", type=int, default=None, help="random seed (default: the scenario's own)")
    m.add_argument("--duration-min", type=float, default=None)
    m.add_argument("--format", choices=("csv", "csv.gz", "parquet"), default="csv")
    m.add_argument("--out", metavar="DIR", default=None)
    return p


def _cmd_run(a: argparse.Namespace) -> int:
    from harbourwatch.pipeline import run_review

    summary = run_review(
        a.feeds, sensors=a.sensors, zones=a.zones, rules=a.rules, out=a.out,
        seed=a.seed, tile_url=a.tiles, progress=not a.quiet,
    )
    print(summary.as_text())
    if a.flag_alerts and summary.alerts:
        return EXIT_ALERTS
    return EXIT_OK


def _cmd_score(a: argparse.Namespace) -> int:
    from harbourwatch.scoring.score import score_files, write_score_plot

    report = score_files(
        a.tracks, a.truth, cutoff_m=a.cutoff_m, order=a.order,
        switch_cost_m=a.switch_cost_m, grid_s=a.grid_s, max_gap_s=a.max_gap_s,
        tgospa_window_s=60.0 * a.tgospa_window_min,
    )
    if a.plot:
        write_score_plot(report, a.plot)
    if a.json:
        print(json.dumps(report.as_dict(), sort_keys=True))
    else:
        print(report.as_table())
    return EXIT_OK


def _cmd_demo(a: argparse.Namespace) -> int:
    from harbourwatch.pipeline import run_demo

    summary = run_demo(a.out)
    print(summary.as_text())
    print(f"\nOpen the shift overview: {Path(a.out, 'report.html').resolve()}")
    return EXIT_OK


def _cmd_campaign(a: argparse.Namespace) -> int:
    from .campaign import run_campaign

    summary = run_campaign(
        a.archive, sensors=a.sensors, zones=a.zones, rules=a.rules, out=a.out, chunk_h=a.chunk_h,
        overlap_min=a.overlap_min, scheduler=a.scheduler, seed=a.seed, progress=not a.quiet,
    )
    print(summary.as_text())
    if summary.failed or summary.file_failures:
        return EXIT_BAD_INPUT if summary.bad_input else EXIT_FAILURE
    return EXIT_OK


def _cmd_find(a: argparse.Namespace) -> int:
    from .campaign import find, format_rows

    cols, rows = find(a.catalogue, zone=a.zone, rule=a.rule, start=a.start, end=a.end,
                      min_length_m=a.min_length_m, sql=a.sql)
    print(format_rows(cols, rows, a.format))
    return EXIT_OK


def _cmd_simulate(a: argparse.Namespace) -> int:
    from harbourwatch.sim import SCENARIOS, simulate_to_dir

    if a.list:
        for name, scen in SCENARIOS.items():
            print(f"{name:14s} {scen.description}")
        return EXIT_OK
    if a.out is None:
        raise InputError("--out DIR is required", field="--out")
    written = simulate_to_dir(a.scenario, a.out, seed=a.seed,
                              duration_s=None if a.duration_min is None else 60.0 * a.duration_min,
                              feed_format=a.format)
    for path in written:
        print(path)
    return EXIT_OK


_COMMANDS = {"run": _cmd_run, "score": _cmd_score, "demo": _cmd_demo, "simulate": _cmd_simulate,
             "campaign": _cmd_campaign, "find": _cmd_find}


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``harbourwatch`` command. Returns the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: 2 for usage errors, 0 for --help
        return int(exc.code or 0)
    try:
        return _COMMANDS[args.command](args)
    except InputError as exc:
        print(f"harbourwatch: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except HarbourwatchError as exc:
        print(f"harbourwatch: error: {exc}", file=sys.stderr)
        return EXIT_FAILURE
    except KeyboardInterrupt:
        print("harbourwatch: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
