"""Command line: parse, call the library once, print, return an exit code.

Exit status: 0 success (alerts or not), 2 bad input, 1 anything else,
``3`` from ``run --flag-alerts`` when at least one alert was raised, and
``141`` when standard output was closed early (``| head``), without a
traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from harbourwatch import __version__
from harbourwatch.errors import HarbourwatchError, InputError
from harbourwatch.units import CAUTION

__all__ = ["main", "build_parser"]

EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_BAD_INPUT = 2
EXIT_ALERTS = 3
EXIT_PIPE = 141  # 128 + SIGPIPE, what a shell reports for a program whose reader went away


EXIT_CODES = (
    "exit status: 0 success (alerts or not); 1 failure (e.g. a full disk); 2 bad input or "
    f"an unusable option or --out; {EXIT_ALERTS} alerts raised (run --flag-alerts only); "
    f"{EXIT_PIPE} output pipe closed early (e.g. | head)"
)


class _WithDefaults(argparse.HelpFormatter):
    """Each option's help ends with its default: a value, "none" or, for a flag, "off"."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        if not action.option_strings or action.required or action.default is argparse.SUPPRESS:
            return text
        d = action.default
        shown = "none" if d is None else "off" if d is False else "%(default)s"
        return f"{text} (default: {shown})"


def _parser(sub: Any, name: str, help_: str) -> argparse.ArgumentParser:
    return sub.add_parser(name, help=help_, description=help_[0].upper() + help_[1:] + ".",
                          epilog=EXIT_CODES, formatter_class=_WithDefaults)


def _time_zone(text: str) -> str:
    """argparse type of ``--display-tz``: a known IANA zone name, else a usage error (exit 2)."""
    from harbourwatch.errors import ParameterError
    from harbourwatch.report._fmt import display_zone

    try:
        display_zone(text)
    except ParameterError:
        raise argparse.ArgumentTypeError(
            f"unknown time zone {text!r}: give an IANA name such as Europe/Oslo") from None
    return text


def build_parser() -> argparse.ArgumentParser:
    """The ``harbourwatch`` argument parser with its commands.

    Every option has a help text; the formatter adds each default to it.
    """
    p = argparse.ArgumentParser(
        prog="harbourwatch",
        description="After-the-fact review of harbour radar plots. " + CAUTION,
        epilog=EXIT_CODES,
    )
    p.add_argument("--version", action="version", version=f"harbourwatch {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    r = _parser(sub, "run", "review plot feeds: trajectories, alerts, reports")
    r.add_argument("feeds", nargs="+", metavar="FEED", help="plot feed files (CSV, .csv.gz, Parquet)")
    r.add_argument("--sensors", required=True, metavar="SENSORS.toml", help="the radars (TOML)")
    r.add_argument("--zones", required=True, metavar="ZONES.geojson", help="the zones (GeoJSON)")
    r.add_argument("--rules", required=True, metavar="RULES.toml", help="the rules (TOML)")
    r.add_argument("--out", required=True, metavar="DIR",
                   help="output folder: new, empty or an earlier run's, replaced whole")
    r.add_argument("--seed", type=int, default=0, help="seed of the alert-probability draws")
    r.add_argument("--tiles", metavar="URL", default=None,
                   help="tile server URL template for a basemap; none: offline, no basemap")
    r.add_argument("--flag-alerts", action="store_true",
                   help=f"exit with status {EXIT_ALERTS} when any alert is raised")
    r.add_argument("--quiet", action="store_true", help="no progress bars")
    r.add_argument("--display-tz", metavar="ZONE", default=None, type=_time_zone,
                   help="also show times in this IANA time zone beside UTC on the pages, "
                        "e.g. Europe/Oslo; none: UTC only")
    r.add_argument("--allow-gaps", action="store_true",
                   help="accept a feed in which every radar is silent for more than 6 h "
                        "(each gap is named in a warning); refused otherwise")

    s = _parser(sub, "score",
                "accuracy of tracks against ground truth (GOSPA, trajectory GOSPA)")
    s.add_argument("tracks", metavar="TRACKS.csv", help="a run's tracks.csv")
    s.add_argument("truth", metavar="TRUTH.csv", help="ground truth: track,time,lat,lon")
    s.add_argument("--cutoff-m", type=float, default=200.0, help="GOSPA cut-off c, metres")
    s.add_argument("--order", type=float, default=2.0, help="GOSPA order p, from 1 to 20")
    s.add_argument("--switch-cost-m", type=float, default=100.0,
                   help="trajectory GOSPA switching cost, metres")
    s.add_argument("--grid-s", type=float, default=10.0,
                   help="evaluation grid step, seconds; 0: the time stamps of both files")
    s.add_argument("--max-gap-s", type=float, default=60.0,
                   help="no interpolation across gaps longer than this within one trajectory")
    s.add_argument("--tgospa-window-min", type=float, default=0.0,
                   help="solve the trajectory GOSPA in windows of this many minutes (long "
                        "feeds); reports an upper and a lower bound. 0: the whole feed at once")
    s.add_argument("--json", action="store_true", help="print one JSON object")
    s.add_argument("--plot", metavar="FILE", default=None,
                   help="write the metric over time to FILE: .html (a page) or .svg")

    d = _parser(sub, "demo", "the bundled scenario, end to end")
    d.add_argument("--out", default="demo_out", metavar="DIR", help="output folder")
    d.add_argument("--quiet", action="store_true", help="no progress bars")

    c = _parser(sub, "campaign", "review an archive of feeds in time chunks on dask.distributed")
    c.add_argument("archive", nargs="+", metavar="ARCHIVE",
                   help="feed files, folders (searched recursively) or glob patterns")
    c.add_argument("--sensors", required=True, metavar="SENSORS.toml", help="the radars (TOML)")
    c.add_argument("--zones", required=True, metavar="ZONES.geojson", help="the zones (GeoJSON)")
    c.add_argument("--rules", required=True, metavar="RULES.toml", help="the rules (TOML)")
    c.add_argument("--out", required=True, metavar="DIR",
                   help="campaign folder (a re-run into it skips the finished chunks)")
    c.add_argument("--chunk-h", type=float, default=24.0, metavar="H",
                   help="chunk length in UTC hours (24: one UTC day)")
    c.add_argument("--overlap-min", type=float, default=60.0, metavar="M",
                   help="overlap shared by neighbouring chunks, minutes")
    c.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="address of a running dask scheduler; none: dask's configured "
                        "scheduler-address, else a local cluster sized to this machine")
    c.add_argument("--seed", type=int, default=0, help="seed of the alert-probability draws")
    c.add_argument("--allow-gaps", action="store_true",
                   help="accept chunks in which every radar is silent for more than 6 h")
    c.add_argument("--quiet", action="store_true", help="no progress bar or log lines on the terminal")

    f = _parser(sub, "find", "query a campaign's catalogue")
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
    f.add_argument("--format", choices=("table", "csv", "json"), default="table",
                   help="output format")

    m = _parser(sub, "simulate", "write an invented scenario with ground truth")
    m.add_argument("--scenario", default="demo", help="scenario name (see --list)")
    m.add_argument("--list", action="store_true", help="list the scenario names and exit")
    m.add_argument("--seed", type=int, default=None, help="random seed; none: the scenario's own")
    m.add_argument("--duration-min", type=float, default=None,
                   help="feed length, minutes; none: the scenario's own")
    m.add_argument("--format", choices=("csv", "csv.gz", "parquet"), default="csv",
                   help="feed file format")
    m.add_argument("--out", metavar="DIR", default=None, help="output folder (needed unless --list)")
    return p


def _cmd_run(a: argparse.Namespace) -> int:
    from harbourwatch.pipeline import run_review

    summary = run_review(
        a.feeds, sensors=a.sensors, zones=a.zones, rules=a.rules, out=a.out,
        seed=a.seed, tile_url=a.tiles, progress=not a.quiet, display_tz=a.display_tz,
        allow_gaps=a.allow_gaps,
    )
    print(summary.as_text())
    print(f"\nOpen the shift overview: {Path(a.out, 'report.html').resolve()}")
    if a.flag_alerts and summary.alerts:
        return EXIT_ALERTS
    return EXIT_OK


def _cmd_score(a: argparse.Namespace) -> int:
    from harbourwatch.scoring.plot import write_score_plot
    from harbourwatch.scoring.score import score_files

    report = score_files(
        a.tracks, a.truth, cutoff_m=a.cutoff_m, order=a.order,
        switch_cost_m=a.switch_cost_m, grid_s=a.grid_s, max_gap_s=a.max_gap_s,
        tgospa_window_s=60.0 * a.tgospa_window_min,
        notice=lambda line: print(f"harbourwatch: note: {line}", file=sys.stderr, flush=True),
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

    summary = run_demo(a.out, progress=not a.quiet)
    print(summary.as_text())
    print(f"\nOpen the shift overview: {Path(a.out, 'report.html').resolve()}")
    return EXIT_OK


def _cmd_campaign(a: argparse.Namespace) -> int:
    from .campaign import run_campaign

    summary = run_campaign(
        a.archive, sensors=a.sensors, zones=a.zones, rules=a.rules, out=a.out, chunk_h=a.chunk_h,
        overlap_min=a.overlap_min, scheduler=a.scheduler, seed=a.seed, progress=not a.quiet,
        allow_gaps=a.allow_gaps,
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
    try:
        status = _main(argv)
        sys.stdout.flush()  # here, so that a closed pipe is caught below, not at exit
        return status
    except BrokenPipeError:
        # the reader of standard output went away (| head): no traceback, and no second
        # error when Python flushes standard output at exit (the recipe of the Python
        # documentation, signal module, "Note on SIGPIPE")
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except (AttributeError, OSError, ValueError):  # not a real file (tests)
            pass
        return EXIT_PIPE


def _main(argv: Sequence[str] | None) -> int:
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
