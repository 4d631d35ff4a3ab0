"""Small inline SVG charts drawn here (no plotting library, no scripts).

Every chart is a ``<figure>`` with an ``<svg class="hw-chart">`` scaled by
``viewBox`` and a caption. Text passes through :func:`._html.esc`. Times on
the x axis are epoch seconds labelled ``HH:MM`` UTC.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from harbourwatch.io.timefmt import format_clock
from harbourwatch.report._html import esc
from harbourwatch.report._style import INK, PALETTE

__all__ = ["Series", "time_chart", "bar_chart", "histogram_grid", "nice_ticks"]

W, H = 720.0, 220.0
ML, MR, MT, MB = 52.0, 14.0, 14.0, 34.0


@dataclass(frozen=True)
class Series:
    """One line of a time chart; NaN in ``y`` breaks the line."""

    t: ArrayLike
    y: ArrayLike
    colour: str
    label: str
    dash: str | None = None
    step: bool = False
    width: float = 1.6


@dataclass(frozen=True)
class Band:
    """A shaded time span (``kind`` selects the look: ``episode`` or ``gap``)."""

    start: float
    end: float
    label: str
    kind: str = "episode"


@dataclass(frozen=True)
class HLine:
    """A horizontal reference line (e.g. a rule's speed threshold)."""

    y: float
    label: str
    colour: str = PALETTE["vermillion"]
    extra: dict[str, str] = field(default_factory=dict)


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """About ``n`` round tick values covering ``[lo, hi]`` (1-2-5 steps)."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(n, 1)
    mag = 10 ** math.floor(math.log10(raw))
    steps = [m * mag for m in (0.1, 0.2, 0.5, 1, 2, 5, 10)]
    k = next(i for i, st in enumerate(steps) if st >= raw)
    while True:
        step = steps[k]
        first = math.ceil(lo / step - 1e-9) * step
        count = math.floor((hi - first) / step + 1e-9) + 1
        if count >= 2 or k == 0:
            break
        k -= 1  # a coarse step can miss the range entirely: take the next finer one
    return [round(first + i * step, 10) for i in range(max(count, 0))] or [lo]


def _time_ticks(t0: float, t1: float) -> list[float]:
    span = max(t1 - t0, 1.0)
    for step in (60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200, 86400):
        if span / step <= 8:
            break
    first = math.ceil(t0 / step) * step
    return [float(v) for v in np.arange(first, t1 + 1e-6, step)]


def _f(v: float) -> str:
    return f"{v:.1f}"


def _svg_open(title: str, height: float = H, width: float = W, cls: str = "hw-chart") -> str:
    return (
        f'<svg class="{cls}" viewBox="0 0 {_f(width)} {_f(height)}" role="img" '
        f'preserveAspectRatio="xMidYMid meet">'
        f"<title>{esc(title)}</title>"
    )


def _figure(svg: str, caption: str, legend: Sequence[tuple[str, str, str | None]] = ()) -> str:
    items = "".join(
        f'<span class="hw-key"><svg width="22" height="10" aria-hidden="true">'
        f'<line x1="1" y1="5" x2="21" y2="5" stroke="{c}" stroke-width="2.5"'
        + (f' stroke-dasharray="{d}"' if d else "")
        + f"/></svg>{esc(label)}</span>"
        for label, c, d in legend
    )
    leg = f'<div class="hw-legend">{items}</div>' if items else ""
    return f'<figure class="hw-fig">{svg}<figcaption>{esc(caption)}{leg}</figcaption></figure>'


def time_chart(
    series: Sequence[Series],
    *,
    t0: float,
    t1: float,
    title: str,
    y_label: str,
    caption: str,
    bands: Sequence[Band] = (),
    hlines: Sequence[HLine] = (),
    y_min: float = 0.0,
    height: float = H,
    standalone: bool = False,
) -> str:
    """A line chart over time with optional shaded spans and reference lines.

    Returns a ``<figure>`` for our pages, or with ``standalone`` a whole SVG
    document (its own styles and legend, for a chart outside our pages).
    """
    ys = [np.asarray(s.y, float) for s in series]
    finite = [y[np.isfinite(y)] for y in ys]
    y_max = max([float(f.max()) for f in finite if f.size] + [h.y for h in hlines] + [1.0])
    y_max *= 1.08
    t1 = max(t1, t0 + 1.0)
    pw, ph = W - ML - MR, height - MT - MB

    def X(t: Any) -> Any:
        return ML + (np.asarray(t, float) - t0) / (t1 - t0) * pw

    def Y(y: Any) -> Any:
        return MT + ph - (np.asarray(y, float) - y_min) / (y_max - y_min) * ph

    out = [_svg_open(title, height, cls="hw-chart hw-time")]
    for b in bands:
        a, e = max(b.start, t0), min(b.end, t1)
        if e < a:
            continue
        cls = "hw-gap" if b.kind == "gap" else "hw-band"
        out.append(
            f'<rect class="{cls}" x="{_f(X(a))}" y="{_f(MT)}" width="{_f(max(X(e) - X(a), 1.5))}" '
            f'height="{_f(ph)}"><title>{esc(b.label)}</title></rect>'
        )
        if b.kind == "gap" and X(e) - X(a) > 34:
            out.append(f'<text class="hw-small" x="{_f((X(a) + X(e)) / 2)}" y="{_f(MT + 11)}" '
                       'text-anchor="middle">no scans</text>')
    # axes and grid
    for v in nice_ticks(y_min, y_max / 1.08, 4):
        yv = Y(v)
        out.append(f'<line class="hw-grid" x1="{_f(ML)}" x2="{_f(W - MR)}" y1="{_f(yv)}" y2="{_f(yv)}"/>')
        out.append(f'<text class="hw-tick" x="{_f(ML - 5)}" y="{_f(yv + 3.5)}" text-anchor="end">'
                   f"{v:g}</text>")
    for tick in _time_ticks(t0, t1):
        x = X(tick)
        out.append(f'<line class="hw-grid" x1="{_f(x)}" x2="{_f(x)}" y1="{_f(MT)}" y2="{_f(MT + ph)}"/>')
        out.append(f'<text class="hw-tick" x="{_f(x)}" y="{_f(MT + ph + 14)}" text-anchor="middle">'
                   f"{format_clock(tick)}</text>")
    out.append(f'<text class="hw-axis" x="{_f(W - MR)}" y="{_f(height - 4)}" text-anchor="end">'
               "time (UTC)</text>")
    out.append(f'<text class="hw-axis" x="12" y="{_f(MT + ph / 2)}" text-anchor="middle" '
               f'transform="rotate(-90 12 {_f(MT + ph / 2)})">{esc(y_label)}</text>')
    out.append(f'<rect x="{_f(ML)}" y="{_f(MT)}" width="{_f(pw)}" height="{_f(ph)}" '
               f'fill="none" stroke="{INK}" stroke-width="0.8"/>')
    for h in hlines:
        hy = Y(h.y)
        out.append(
            f'<line class="hw-threshold" x1="{_f(ML)}" x2="{_f(W - MR)}" y1="{_f(hy)}" y2="{_f(hy)}" '
            f'stroke="{h.colour}" stroke-width="1.6" stroke-dasharray="8 4"/>'
            f'<text class="hw-tick" x="{_f(W - MR - 4)}" y="{_f(hy - 4)}" text-anchor="end" '
            f'fill="{h.colour}">{esc(h.label)}</text>'
        )
    for s, ya in zip(series, ys, strict=True):
        ta = np.asarray(s.t, float)
        if ta.size == 0:
            continue
        if s.step:  # draw as a staircase: value holds until the next sample
            ta = np.repeat(ta, 2)[1:]
            ya = np.repeat(ya, 2)[:-1]
        xs, yv = X(ta), Y(ya)
        ok = np.isfinite(yv)
        # split on NaN runs
        breaks = np.flatnonzero(np.diff(ok.astype(np.int8)) != 0) + 1
        for seg in np.split(np.arange(ta.size), breaks):
            if seg.size == 0 or not ok[seg[0]]:
                continue
            pts = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(xs[seg], yv[seg], strict=True))
            dash = f' stroke-dasharray="{s.dash}"' if s.dash else ""
            if seg.size == 1:
                out.append(f'<circle cx="{_f(xs[seg[0]])}" cy="{_f(yv[seg[0]])}" r="1.8" '
                           f'fill="{s.colour}"/>')
            else:
                out.append(f'<polyline class="hw-line" points="{pts}" fill="none" '
                           f'stroke="{s.colour}" stroke-width="{s.width}"{dash}/>')
    legend = [(s.label, s.colour, s.dash) for s in series if s.label]
    if standalone:
        return _standalone(out, legend, height)
    out.append("</svg>")
    return _figure("".join(out), caption, legend)


#: The look of a chart's parts where our page styles are absent (a standalone SVG file).
_STANDALONE_STYLE = (
    "text{font:11px sans-serif;fill:#1b1b1b}.hw-small{font-size:9.5px}.hw-axis{fill:#4a4a48}"
    ".hw-grid{stroke:#e3e3de;stroke-width:0.8}.hw-band{fill:#56B4E9;fill-opacity:0.22}"
    ".hw-gap{fill:#D55E00;fill-opacity:0.30;stroke:#D55E00;stroke-width:0.8}"
)


def _standalone(parts: list[str], legend: Sequence[tuple[str, str, str | None]],
                height: float) -> str:
    """The chart's parts as one SVG document, the legend drawn inside the plot area."""
    head = parts[0].replace("<svg ", '<svg xmlns="http://www.w3.org/2000/svg" ', 1)
    keys = []
    for n, (label, colour, dash) in enumerate(legend):
        y = MT + 14 + 15 * n
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        keys.append(f'<line x1="{_f(ML + 10)}" x2="{_f(ML + 34)}" y1="{_f(y - 4)}" y2="{_f(y - 4)}" '
                    f'stroke="{colour}" stroke-width="2.5"{dash_attr}/>'
                    f'<text x="{_f(ML + 40)}" y="{_f(y)}">{esc(label)}</text>')
    return (head + f"<style>{_STANDALONE_STYLE}</style>" + "".join(parts[1:]) + "".join(keys)
            + "</svg>")


def bar_chart(labels: Sequence[str], values: Sequence[float], *, title: str, caption: str,
              unit: str, colour: str = PALETTE["blue"]) -> str:
    """Horizontal bars, one per label (labels escaped, longest cut at 28 characters)."""
    n = max(len(labels), 1)
    row = 22.0
    height = MT + n * row + 26
    left = 190.0
    pw = W - left - 60
    vmax = max([float(v) for v in values] + [1.0])
    out = [_svg_open(title, height)]
    for i, (lab, v) in enumerate(zip(labels, values, strict=True)):
        y = MT + i * row
        w = pw * float(v) / vmax
        short = lab if len(lab) <= 28 else lab[:27] + "\u2026"
        out.append(f'<text class="hw-tick" x="{_f(left - 6)}" y="{_f(y + 14)}" text-anchor="end">'
                   f"{esc(short)}<title>{esc(lab)}</title></text>")
        out.append(f'<rect class="hw-bar" x="{_f(left)}" y="{_f(y + 3)}" width="{_f(max(w, 0.5))}" '
                   f'height="{_f(row - 7)}" fill="{colour}"/>')
        out.append(f'<text class="hw-tick" x="{_f(left + w + 5)}" y="{_f(y + 14)}">{v:g}</text>')
    out.append(f'<text class="hw-axis" x="{_f(W - MR)}" y="{_f(height - 6)}" text-anchor="end">'
               f"{esc(unit)}</text>")
    out.append("</svg>")
    return _figure("".join(out), caption)


#: Bin edges for the time-in-zone histograms, minutes (last bin open).
DURATION_BINS_MIN = (0.0, 5.0, 15.0, 30.0, 60.0, 120.0, math.inf)


def histogram_grid(groups: Sequence[tuple[str, Sequence[float]]], *, title: str,
                   caption: str, colour: str = PALETTE["green"]) -> str:
    """Small multiples: one histogram of visit durations (minutes) per group."""
    cols = 3
    cw, chh = W / cols, 120.0
    rows = max(math.ceil(len(groups) / cols), 1)
    height = rows * chh + 8
    labels = ["<5", "5-15", "15-30", "30-60", "60-120", ">120"]
    out = [_svg_open(title, height)]
    for k, (name, durations) in enumerate(groups):
        ox, oy = (k % cols) * cw, (k // cols) * chh
        counts, _ = np.histogram(np.asarray(durations, float), bins=np.asarray(DURATION_BINS_MIN))
        cmax = max(int(counts.max()) if counts.size else 0, 1)
        short = name if len(name) <= 30 else name[:29] + "\u2026"
        out.append(f'<text class="hw-tick" x="{_f(ox + 10)}" y="{_f(oy + 14)}" font-weight="bold">'
                   f"{esc(short)}<title>{esc(name)}</title></text>")
        bw = (cw - 30) / len(labels)
        base = oy + chh - 26
        for i, c in enumerate(counts):
            h = (chh - 50) * c / cmax
            x = ox + 10 + i * bw
            out.append(f'<rect class="hw-bar" x="{_f(x + 1)}" y="{_f(base - h)}" width="{_f(bw - 2)}" '
                       f'height="{_f(h)}" fill="{colour}"><title>{labels[i]} min: {int(c)}</title>'
                       "</rect>")
            if c:
                out.append(f'<text class="hw-tick" x="{_f(x + bw / 2)}" y="{_f(base - h - 3)}" '
                           f'text-anchor="middle">{int(c)}</text>')
            out.append(f'<text class="hw-small" x="{_f(x + bw / 2)}" y="{_f(base + 11)}" '
                       f'text-anchor="middle">{labels[i]}</text>')
        out.append(f'<line x1="{_f(ox + 10)}" x2="{_f(ox + cw - 20)}" y1="{_f(base)}" '
                   f'y2="{_f(base)}" stroke="{INK}" stroke-width="0.8"/>')
    out.append("</svg>")
    return _figure("".join(out), caption)
