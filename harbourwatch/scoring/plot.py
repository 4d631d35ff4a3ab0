"""The plot of ``harbourwatch score --plot``: per-step metrics as inline SVG, no library.

``.html`` (a page with inline SVG, no scripts, no network) or ``.svg``; other
suffixes (``.png`` included) raise :class:`~harbourwatch.errors.InputError`.
"""

from __future__ import annotations

import html
import math
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.scoring.score import ScoreReport
from harbourwatch.units import CAUTION

__all__ = ["write_score_plot"]


def _svg_chart(report: ScoreReport) -> str:
    """Per-step GOSPA and the per-step trajectory GOSPA contributions, metres."""
    t = report.grid_t
    p = report.order
    tg = report.tgospa
    sw = np.concatenate([tg.switch_t, [0.0]]) if len(t) else np.zeros(0)
    per_step = (tg.localisation_t + tg.missed_t + tg.false_t + sw) ** (1.0 / p)
    series = [("GOSPA per step", report.gospa_t, "#0072B2", ""),
              ("trajectory GOSPA per step (with switches)", per_step, "#D55E00", "6 4")]
    W_, H_, ml, mr, mt, mb = 760.0, 280.0, 56.0, 16.0, 16.0, 40.0
    pw, ph = W_ - ml - mr, H_ - mt - mb
    t0 = float(t[0]) if len(t) else 0.0
    t1 = max(float(t[-1]) if len(t) else 1.0, t0 + 1.0)
    ymax = max([float(np.nanmax(s)) for _, s, _, _ in series if len(s)] + [1.0]) * 1.08

    def sx(v: Any) -> Any:
        return ml + (np.asarray(v, float) - t0) / (t1 - t0) * pw

    def sy(v: Any) -> Any:
        return mt + ph - np.asarray(v, float) / ymax * ph

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W_:.0f} {H_:.0f}" '
           f'role="img" font-family="sans-serif" font-size="11">',
           "<title>GOSPA and trajectory GOSPA per grid step</title>",
           f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" fill="none" stroke="#1b1b1b"/>']
    step = 10 ** math.floor(math.log10(ymax / 4)) if ymax > 0 else 1.0
    step *= next(m for m in (1, 2, 5, 10) if ymax / (step * m) <= 5)
    for v in np.arange(0.0, ymax, step):
        y = float(sy(v))
        out.append(f'<line x1="{ml}" x2="{ml + pw}" y1="{y:.1f}" y2="{y:.1f}" stroke="#ddd"/>'
                   f'<text x="{ml - 4}" y="{y + 4:.1f}" text-anchor="end">{v:g}</text>')
    tick = next((s for s in (10, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 21600)
                 if (t1 - t0) / s <= 8), 86400)
    for tv in np.arange(math.ceil(t0 / tick) * tick, t1 + 1e-6, tick):
        x = float(sx(tv))
        label = format_utc_one(float(tv))[11:19 if tick < 60 else 16]
        out.append(f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{mt}" y2="{mt + ph}" stroke="#eee"/>'
                   f'<text x="{x:.1f}" y="{mt + ph + 16}" text-anchor="middle">{label}</text>')
    out.append(f'<text x="{ml + pw:.0f}" y="{H_ - 6:.0f}" text-anchor="end">time (UTC)</text>'
               f'<text x="14" y="{mt + ph / 2:.0f}" text-anchor="middle" '
               f'transform="rotate(-90 14 {mt + ph / 2:.0f})">metres</text>')
    for n, (label, s, colour, dash) in enumerate(series):
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        if len(s):
            pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(sx(t), sy(s), strict=True))
            out.append(f'<polyline points="{pts}" fill="none" stroke="{colour}" '
                       f'stroke-width="1.6"{dash_attr}/>')
        ly = mt + 14 + 15 * n
        out.append(f'<line x1="{ml + 10}" x2="{ml + 34}" y1="{ly - 4}" y2="{ly - 4}" '
                   f'stroke="{colour}" stroke-width="2.5"{dash_attr}/>'
                   f'<text x="{ml + 40}" y="{ly}">{html.escape(label)}</text>')
    out.append("</svg>")
    return "\n".join(out)


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
