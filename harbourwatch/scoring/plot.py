"""The plot of ``harbourwatch score --plot``: per-step metrics as inline SVG, no library.

``.html`` (a page with inline SVG, no scripts, no network) or ``.svg``; other
suffixes (``.png`` included) raise :class:`~harbourwatch.errors.InputError`.
"""

from __future__ import annotations

import html
from os import PathLike
from pathlib import Path

import numpy as np

from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.report import charts
from harbourwatch.report._style import PALETTE
from harbourwatch.scoring.score import ScoreReport
from harbourwatch.units import CAUTION

__all__ = ["write_score_plot"]


def _svg_chart(report: ScoreReport) -> str:
    """Per-step GOSPA and the per-step trajectory GOSPA contributions, metres (one SVG)."""
    t = report.grid_t
    p = report.order
    tg = report.tgospa
    sw = np.concatenate([tg.switch_t, [0.0]]) if len(t) else np.zeros(0)
    per_step = (tg.localisation_t + tg.missed_t + tg.false_t + sw) ** (1.0 / p)
    t0 = float(t[0]) if len(t) else 0.0
    t1 = float(t[-1]) if len(t) else 1.0
    return charts.time_chart(
        [charts.Series(t, report.gospa_t, PALETTE["blue"], "GOSPA per step"),
         charts.Series(t, per_step, PALETTE["vermillion"],
                       "trajectory GOSPA per step (with switches)", dash="6 4")],
        t0=t0, t1=t1, title="GOSPA and trajectory GOSPA per grid step", y_label="metres",
        caption="", height=280.0, standalone=True)


def write_score_plot(report: ScoreReport, path: str | PathLike[str]) -> None:
    """Write the per-step metrics as ``.html`` (page with inline SVG) or ``.svg``.

    Raises
    ------
    InputError
        For any other suffix (``.png`` included: no plotting library is used).
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in (".html", ".htm", ".svg"):
        raise InputError(f"only .html and .svg plots are supported, found {suffix or 'none'!r}",
                         file=str(p), field="--plot")
    svg = _svg_chart(report)
    if suffix == ".svg":
        text = '<?xml version="1.0" encoding="UTF-8"?>\n' + svg + "\n"
    else:
        text = ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                "<title>harbourwatch score</title>"
                "<style>body{font-family:sans-serif;max-width:800px;margin:1em auto}"
                "pre{font-size:13px}</style></head>"
                f"<body><h1>Score</h1><p>{html.escape(report.tracks_path)} against "
                f"{html.escape(report.truth_path)}</p>{svg}<pre>{html.escape(report.as_table())}</pre>"
                f"<p>{html.escape(CAUTION)}</p></body></html>\n")
    try:
        atomic_write_text(p, text)
    except OSError as exc:
        raise InputError(f"cannot write the plot: {exc.strerror or exc}", file=str(p),
                         field="--plot") from exc
