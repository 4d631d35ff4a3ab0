"""The command line itself: help texts, exit codes, a closed pipe, the report path, caution."""

from __future__ import annotations

import argparse
import subprocess
import sys
from pathlib import Path

import pytest

from harbourwatch.cli import EXIT_PIPE, build_parser, main
from harbourwatch.pipeline import demo_paths
from harbourwatch.sim import simulate_to_dir
from harbourwatch.units import CAUTION


def _subparsers(p: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    action = next(a for a in p._actions if isinstance(a, argparse._SubParsersAction))
    return dict(action.choices)


@pytest.mark.parametrize("command", ["run", "score", "demo", "simulate"])
def test_every_option_has_help_with_its_default_and_the_exit_codes(command, capsys):
    sub = _subparsers(build_parser())[command]
    for action in sub._actions:
        if not action.option_strings or action.dest == "help":
            continue
        assert action.help, (command, action.dest)
    assert main([command, "--help"]) == 0
    text = " ".join(capsys.readouterr().out.split())  # argparse wraps lines
    for action in sub._actions:
        if action.option_strings and action.dest != "help" and not action.required:
            d = action.default
            shown = "none" if d is None else "off" if d is False else str(d)
            assert f"(default: {shown})" in text, (command, action.dest)
    for code in ("0 success", "1 failure", "2 bad input", "3 alerts raised",
                 f"{EXIT_PIPE} output pipe closed early"):
        assert code in text, (command, code)


def test_score_help_says_what_plot_accepts(capsys):
    main(["score", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert ".html" in text and ".svg" in text and ".png" not in text


def test_a_closed_pipe_ends_quietly():
    # the reader goes away before anything is written (as `| head` does after its lines):
    # before, Python reported "Exception ignored ... BrokenPipeError" and exit status 120
    proc = subprocess.Popen([sys.executable, "-m", "harbourwatch", "simulate", "--list"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == EXIT_PIPE
    assert err == ""


def test_run_prints_the_report_path_and_the_caution(tmp_path: Path, capsys):
    simulate_to_dir("quiet", tmp_path / "s", duration_s=120.0)
    demo = demo_paths()
    out = tmp_path / "out"
    assert main(["run", str(tmp_path / "s" / "plots.csv"), "--sensors",
                 str(tmp_path / "s" / "sensors.toml"), "--zones", str(demo["zones"]),
                 "--rules", str(demo["rules"]), "--out", str(out), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert f"Open the shift overview: {(out / 'report.html').resolve()}" in text
    assert CAUTION in text
    # score output carries the same caution, from the same source
    assert main(["score", str(out / "tracks.csv"), str(tmp_path / "s" / "truth.csv")]) == 0
    assert capsys.readouterr().out.rstrip().endswith(CAUTION)
