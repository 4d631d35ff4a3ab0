"""``harbourwatch score``: accuracy of a run's ``tracks.csv`` against ground truth.

Reads the two CSV files (``track,time,lat,lon`` at least), puts every
trajectory on one time grid in the local frame, and reports

* per-step GOSPA (mean over the grid) and the LP trajectory GOSPA with its
  parts (see :mod:`harbourwatch.scoring.metrics`);
* plain-language figures from the trajectory GOSPA assignment: position,
  speed and course errors of matched vessels, missed-vessel and false-track
  minutes, track breaks and identity swaps.

Definitions of the plain-language figures
------------------------------------------
*Matched*: a truth vessel at a grid step is matched when the trajectory GOSPA
assignment pairs it with an estimate that exists at that step and is closer
than the cut-off. Minutes are integrated over the grid with trapezoid weights
(a vessel present for one hour on any grid counts 60 minutes).

* ``mean_position_error_m``: mean distance over matched vessel-steps.
* ``mean_speed_error_kn``, ``mean_course_error_deg``: mean absolute errors
  over matched vessel-steps. The truth's velocity is the central finite
  difference of its interpolated positions on the grid (one-sided at the ends
  of a span). The estimate's is the ``sog_kn`` / ``cog_deg`` columns of
  ``tracks.csv`` when present (interpolated on the grid; course through its
  sine and cosine) -- what the review shows the watchkeeper -- else the same
  finite difference as the truth. Course errors only count where the true
  speed is at least 1 kn (course over ground is meaningless when stopped;
  common practice, no source).
* ``missed_vessel_min``: truth vessel-minutes not matched.
* ``false_track_min``: estimated track-minutes not matched to any truth.
* ``track_breaks``: per truth vessel, the number of times it is matched again
  after unmatched steps (only steps where the truth exists count), summed.
* ``identity_swaps``: per truth vessel, the number of changes of the matched
  estimate between consecutive matched steps, summed. A break that resumes on
  another track counts as one break and one swap.

Every row of ``tracks.csv`` is part of the estimate: the ``existence`` and
``sd_m`` columns are not used (the run already chose which trajectories to
report).

Plots: :func:`write_score_plot` writes ``.html`` (a page with inline SVG, no
scripts, no network) or ``.svg``; other suffixes (``.png`` included) raise
:class:`~harbourwatch.errors.InputError`, to avoid a plotting dependency.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scoring.metrics import TGospaResult, gospa, grid_trajectories, trajectory_gospa
from harbourwatch.scoring.reading import ScoreTable, group_by_track, read_score_csv
from harbourwatch.scoring.windows import trajectory_gospa_windowed
from harbourwatch.units import CAUTION, KNOT_M_S

__all__ = ["ScoreReport", "score_files", "write_score_plot"]

Array = NDArray[np.float64]
MAX_GRID_STEPS = 2_000_000
MIN_COURSE_SPEED_KN = 1.0


# --------------------------------------------------------------------------- report
@dataclass(frozen=True, kw_only=True, eq=False)
class ScoreReport:
    """Result of :func:`score_files`; see the module docstring for the definitions."""

    tracks_path: str
    truth_path: str
    cutoff_m: float
    order: float
    switch_cost_m: float
    grid_s: float
    max_gap_s: float
    tgospa_window_s: float
    grid_t: Array
    gospa_t: Array
    gospa_parts_t: Array          # (T, 3) localisation, missed, false (p-th powers)
    tgospa: TGospaResult
    truth_ids: tuple[str, ...]
    track_ids: tuple[str, ...]
    figures: dict[str, float | int | None]
    per_truth: dict[str, dict[str, float | int | None]]

    def as_dict(self) -> dict[str, Any]:
        """The JSON object of ``harbourwatch score --json`` (keys per the file contract)."""
        tg = self.tgospa
        T = len(self.grid_t)
        parts = self.gospa_parts_t.mean(axis=0) if T else np.zeros(3)
        return {
            "gospa_mean": _num(self.gospa_t.mean() if T else 0.0),
            "gospa_rms": _num(math.sqrt(float((self.gospa_t**2).mean())) if T else 0.0),
            "gospa": {"localisation": _num(parts[0]), "missed": _num(parts[1]),
                      "false": _num(parts[2])},
            "tgospa": _num(tg.value),
            "tgospa_parts": {"localisation": _num(tg.localisation), "missed": _num(tg.missed),
                             "false": _num(tg.false), "switch": _num(tg.switch)},
            "tgospa_fractional": tg.fractional,
            "tgospa_lower": _num(tg.lower),
            "tgospa_exact": tg.exact,
            "tgospa_windows": tg.windows,
            "grid_steps": T,
            "start": format_utc_one(self.grid_t[0]) if T else None,
            "end": format_utc_one(self.grid_t[-1]) if T else None,
            "truth_vessels": len(self.truth_ids),
            "estimated_tracks": len(self.track_ids),
            "parameters": {"cutoff_m": self.cutoff_m, "order": self.order,
                           "switch_cost_m": self.switch_cost_m, "grid_s": self.grid_s,
                           "max_gap_s": self.max_gap_s,
                           "tgospa_window_min": self.tgospa_window_s / 60.0},
            **{k: _num(v) for k, v in self.figures.items()},
            "per_truth": {k: {kk: _num(vv) for kk, vv in v.items()}
                          for k, v in self.per_truth.items()},
        }

    def as_table(self) -> str:
        """Human-readable summary for the terminal."""
        d = self.as_dict()
        p = self.order
        unit = f"m^{p:g}" if p != 1 else "m"

        def f(v: Any, fmt: str = ".1f") -> str:
            return "n/a" if v is None else format(v, fmt)

        lines = [
            f"Score of {self.tracks_path} against {self.truth_path}",
            f"  grid: {d['grid_steps']} steps, {d['start']} to {d['end']}"
            + (f", every {self.grid_s:g} s" if self.grid_s > 0 else " (time stamps of both files)"),
            f"  cut-off c = {self.cutoff_m:g} m, order p = {p:g}, "
            f"switching cost = {self.switch_cost_m:g} m",
            f"  truth vessels {d['truth_vessels']}, estimated tracks {d['estimated_tracks']}",
            "",
            "Metrics",
            f"  GOSPA, mean over steps          {f(d['gospa_mean'], '.2f')} m",
            f"    localisation / missed / false {f(d['gospa']['localisation'])} / "
            f"{f(d['gospa']['missed'])} / {f(d['gospa']['false'])} {unit} (means)",
            f"  trajectory GOSPA (LP)           {f(d['tgospa'], '.2f')} m"
            + ("" if d["tgospa_windows"] == 1 else
               f" at most, at least {f(d['tgospa_lower'], '.2f')} m "
               f"({d['tgospa_windows']} windows of {self.tgospa_window_s / 60:g} min"
               + (", exact)" if d["tgospa_exact"] else ")")),
            "    localisation / missed / false / switch  "
            + " / ".join(f(d["tgospa_parts"][k], ".0f")
                         for k in ("localisation", "missed", "false", "switch"))
            + f" {unit} (sums)",
            "",
            "For the engineer",
            f"  mean position error (matched)   {f(d['mean_position_error_m'])} m",
            f"  mean speed error                {f(d['mean_speed_error_kn'], '.2f')} kn",
            f"  mean course error (>= 1 kn)     {f(d['mean_course_error_deg'])} deg",
            f"  truth time covered              {f(d['coverage_percent'])} %",
            f"  missed-vessel minutes           {f(d['missed_vessel_min'])}",
            f"  false-track minutes             {f(d['false_track_min'])}",
            f"  track breaks                    {d['track_breaks']}",
            f"  identity swaps                  {d['identity_swaps']}",
        ]
        if self.per_truth:
            lines += ["", f"  {'truth vessel':<20s} {'min':>7s} {'matched':>8s} "
                          f"{'err m':>7s} {'breaks':>6s} {'swaps':>5s}"]
            for tid, v in self.per_truth.items():
                lines.append(f"  {tid[:20]:<20s} {f(v['minutes']):>7s} "
                             f"{f(v['matched_minutes']):>8s} {f(v['mean_error_m']):>7s} "
                             f"{v['breaks']:>6d} {v['swaps']:>5d}")
        return "\n".join(lines)


def _num(v: Any) -> Any:
    """JSON-safe number: plain float/int, None for NaN or missing."""
    if v is None or isinstance(v, bool | int | str):
        return v
    x = float(v)
    return x if math.isfinite(x) else None


# --------------------------------------------------------------------------- scoring
def _check_options(cutoff_m: float, order: float, switch_cost_m: float, grid_s: float,
                   max_gap_s: float, tgospa_window_s: float = 0.0) -> None:
    checks = [("--tgospa-window-min", tgospa_window_s / 60.0, tgospa_window_s >= 0,
               "0 (the whole feed) or a positive number of minutes"),
              ("--cutoff-m", cutoff_m, cutoff_m > 0, "a positive number of metres"),
              ("--order", order, order >= 1, "a number >= 1"),
              ("--switch-cost-m", switch_cost_m, switch_cost_m > 0, "a positive number of metres"),
              ("--grid-s", grid_s, grid_s >= 0, "0 (time stamps) or a positive number of seconds"),
              ("--max-gap-s", max_gap_s, max_gap_s > 0, "a positive number of seconds")]
    for name, v, ok, what in checks:
        if not (math.isfinite(v) and ok):
            raise InputError(f"expected {what}, found {v!r}", field=name)


def _grid(times: Array, grid_s: float) -> Array:
    if grid_s == 0:
        return np.unique(times)
    t0, t1 = float(times.min()), float(times.max())
    n = int(math.floor((t1 - t0) / grid_s + 1e-9)) + 1
    if n > MAX_GRID_STEPS:
        raise InputError(f"the files span {t1 - t0:.0f} s, which gives {n} grid steps at "
                         f"{grid_s:g} s (at most {MAX_GRID_STEPS}); use a larger step",
                         field="--grid-s")
    return np.asarray(t0 + grid_s * np.arange(n), dtype=np.float64)


def _velocity(pos: Array, t: Array) -> Array:
    """Central differences over the grid, one-sided at span ends; NaN where absent."""
    v = np.full_like(pos, np.nan)
    if pos.shape[1] < 2:
        return v
    dt_f = (t[1:] - t[:-1])[None, :, None]
    fwd = (pos[:, 1:] - pos[:, :-1]) / dt_f                      # (n, T-1, 2)
    f_pad = np.concatenate([fwd, np.full_like(fwd[:, :1], np.nan)], axis=1)   # forward at t
    b_pad = np.concatenate([np.full_like(fwd[:, :1], np.nan), fwd], axis=1)   # backward at t
    cen = np.full_like(pos, np.nan)
    if pos.shape[1] > 2:
        cen[:, 1:-1] = (pos[:, 2:] - pos[:, :-2]) / (t[2:] - t[:-2])[None, :, None]
    v = np.where(np.isnan(cen), np.where(np.isnan(f_pad), b_pad, f_pad), cen)
    return v


def _trapezoid_weights(t: Array) -> Array:
    if len(t) < 2:
        return np.zeros(len(t))
    d = np.diff(t)
    w = np.zeros(len(t))
    w[:-1] += d / 2
    w[1:] += d / 2
    return w



@dataclass(frozen=True)
class _Gridded:
    """Both files on one grid in one local frame (NaN where a trajectory is absent)."""

    X: Array  # truth positions (n_truth, T, 2)
    eg: Array  # estimates (n_est, T, 2 or 5: positions, then sog_kn, sin cog, cos cog)
    Y: Array  # estimate positions (n_est, T, 2)
    grid: Array
    truth_ids: list[str]
    track_ids: list[str]
    has_vel: bool
    frame: LocalFrame
    tracks_path: str
    truth_path: str


def _gridded(tracks_path: str | PathLike[str], truth_path: str | PathLike[str], *,
             grid_s: float, max_gap_s: float) -> _Gridded:
    est = read_score_csv(tracks_path, optional=("sog_kn", "cog_deg"))
    tru = read_score_csv(truth_path)
    if len(est.time) + len(tru.time) == 0:
        raise InputError("neither file has any rows: nothing to score",
                         file=f"{est.path} and {tru.path}")
    frame = LocalFrame.around(np.concatenate([est.lat, tru.lat]),
                              np.concatenate([est.lon, tru.lon]))
    grid = _grid(np.concatenate([est.time, tru.time]), grid_s)

    def local(tab: ScoreTable) -> Array:
        e, n = frame.to_local(tab.lat, tab.lon)
        return np.stack([e, n], axis=1)

    has_vel = {"sog_kn", "cog_deg"} <= est.extra.keys()
    est_cols = local(est)
    if has_vel:
        cog = np.radians(est.extra["cog_deg"])
        est_cols = np.column_stack([est_cols, est.extra["sog_kn"], np.sin(cog), np.cos(cog)])
    track_ids, est_trajs = group_by_track(est, est_cols)
    truth_ids, tru_trajs = group_by_track(tru, local(tru))
    eg = grid_trajectories(est_trajs, grid, max_gap_s=max_gap_s)
    if not track_ids:
        eg = np.zeros((0, len(grid), 5 if has_vel else 2))
    X = grid_trajectories(tru_trajs, grid, max_gap_s=max_gap_s)
    if not truth_ids:
        X = np.zeros((0, len(grid), 2))
    Y = eg[..., :2]

    return _Gridded(X=X, eg=eg, Y=Y, grid=grid, truth_ids=list(truth_ids),
                    track_ids=list(track_ids), has_vel=has_vel, frame=frame,
                    tracks_path=est.path, truth_path=tru.path)


def _per_step_gospa(X: Array, Y: Array, *, c: float, p: float) -> tuple[Array, Array]:
    """GOSPA at every grid step and its (localisation, missed, false) parts."""
    T = X.shape[1] if X.ndim == 3 else Y.shape[1]
    g_t = np.zeros(T)
    parts_t = np.zeros((T, 3))
    ex = ~np.isnan(X[..., 0])
    ey = ~np.isnan(Y[..., 0])
    for k in range(T):
        r = gospa(X[ex[:, k], k], Y[ey[:, k], k], c=c, p=p)
        g_t[k] = r.value
        parts_t[k] = (r.localisation, r.missed, r.false)
    return g_t, parts_t


def mean_gospa_files(
    tracks_path: str | PathLike[str],
    truth_path: str | PathLike[str],
    *,
    cutoff_m: float = 200.0,
    order: float = 2.0,
    grid_s: float = 10.0,
    max_gap_s: float = 60.0,
) -> float:
    """Mean over the grid of the per-step GOSPA only (no trajectory metric).

    For long feeds where the trajectory GOSPA linear program is costly; same
    reading, grid and interpolation as :func:`score_files`.
    """
    _check_options(cutoff_m, order, 1.0, grid_s, max_gap_s)  # no switching cost here
    g = _gridded(tracks_path, truth_path, grid_s=grid_s, max_gap_s=max_gap_s)
    g_t, _ = _per_step_gospa(g.X, g.Y, c=cutoff_m, p=order)
    return float(g_t.mean()) if g_t.size else 0.0


def score_files(
    tracks_path: str | PathLike[str],
    truth_path: str | PathLike[str],
    *,
    cutoff_m: float = 200.0,
    order: float = 2.0,
    switch_cost_m: float = 100.0,
    grid_s: float = 10.0,
    max_gap_s: float = 60.0,
    tgospa_window_s: float = 0.0,
) -> ScoreReport:
    """Score a run's ``tracks.csv`` against a ground-truth CSV.

    Parameters
    ----------
    tracks_path, truth_path
        CSV files (``.csv.gz`` too) with at least ``track,time,lat,lon``;
        ``sog_kn`` and ``cog_deg`` of the tracks are used when present.
    cutoff_m, order, switch_cost_m
        GOSPA / trajectory GOSPA cut-off c, order p and switching cost gamma.
    grid_s
        Evaluation grid step from the earliest to the latest time in either
        file; ``0`` means the union of the time stamps of both files.
    max_gap_s
        No interpolation across a gap longer than this between consecutive
        states of one trajectory (it is absent inside the gap).
    tgospa_window_s
        ``0``: the trajectory GOSPA's linear program over the whole feed
        (exact). Otherwise solved in windows of this length, which keeps long
        feeds tractable; the report then holds an upper bound (``tgospa``,
        the cost of a feasible assignment) and a lower bound
        (``tgospa_lower``); see :mod:`harbourwatch.scoring.windows`.

    Raises
    ------
    InputError
        Unreadable files, missing columns, bad numbers or times (naming file,
        line and field), bad options, both files without rows.
    """
    _check_options(cutoff_m, order, switch_cost_m, grid_s, max_gap_s, tgospa_window_s)
    g = _gridded(tracks_path, truth_path, grid_s=grid_s, max_gap_s=max_gap_s)
    X, eg, Y, grid = g.X, g.eg, g.Y, g.grid
    g_t, parts_t = _per_step_gospa(X, Y, c=cutoff_m, p=order)
    if tgospa_window_s > 0 and grid.size:
        n_win = max(1, math.ceil((grid[-1] - grid[0]) / tgospa_window_s))
        starts = grid[0] + tgospa_window_s * np.arange(1, n_win)
        tg = trajectory_gospa_windowed(X, Y, c=cutoff_m, p=order, gamma=switch_cost_m,
                                       cuts=np.searchsorted(grid, starts).tolist())
    else:
        tg = trajectory_gospa(X, Y, c=cutoff_m, p=order, gamma=switch_cost_m)
    figures, per_truth = _engineer_figures(X, eg, g.has_vel, grid, tg, g.truth_ids, g.frame)
    return ScoreReport(
        tracks_path=g.tracks_path, truth_path=g.truth_path, cutoff_m=cutoff_m, order=order,
        switch_cost_m=switch_cost_m, grid_s=grid_s, max_gap_s=max_gap_s,
        tgospa_window_s=tgospa_window_s, grid_t=grid,
        gospa_t=g_t, gospa_parts_t=parts_t, tgospa=tg, truth_ids=tuple(g.truth_ids),
        track_ids=tuple(g.track_ids), figures=figures, per_truth=per_truth,
    )


def _engineer_figures(
    X: Array, eg: Array, has_vel: bool, grid: Array, tg: TGospaResult,
    truth_ids: list[str], frame: LocalFrame,
) -> tuple[dict[str, float | int | None], dict[str, dict[str, float | int | None]]]:
    Y = eg[..., :2]
    nx, T = X.shape[:2]
    ex = ~np.isnan(X[..., 0])
    ey = ~np.isnan(Y[..., 0])
    w = _trapezoid_weights(grid)
    matched = tg.matched.T                                         # (nx, T)
    jj = np.where(matched, tg.assignment.T, 0)                     # (nx, T)
    ti, tt = np.nonzero(matched)
    tj = jj[ti, tt]
    err = np.linalg.norm(X[ti, tt] - Y[tj, tt], axis=1) if len(ti) else np.zeros(0)

    # speeds and courses at matched vessel-steps
    vt = _velocity(X, grid)[ti, tt]
    speed_true_kn = np.linalg.norm(vt, axis=1) / KNOT_M_S if len(ti) else np.zeros(0)
    if has_vel:
        speed_est_kn = eg[tj, tt, 2]
        course_est = np.arctan2(eg[tj, tt, 3], eg[tj, tt, 4])
    else:
        ve = _velocity(Y, grid)[tj, tt]
        speed_est_kn = np.linalg.norm(ve, axis=1) / KNOT_M_S if len(ti) else np.zeros(0)
        course_est = np.arctan2(ve[:, 0], ve[:, 1]) + frame.grid_convergence_rad(
            Y[tj, tt, 0], Y[tj, tt, 1]) if len(ti) else np.zeros(0)
    course_true = (np.arctan2(vt[:, 0], vt[:, 1]) + frame.grid_convergence_rad(
        X[ti, tt, 0], X[ti, tt, 1])) if len(ti) else np.zeros(0)
    dspeed = np.abs(speed_est_kn - speed_true_kn)
    dspeed = dspeed[np.isfinite(dspeed)]
    moving = np.isfinite(speed_true_kn) & (speed_true_kn >= MIN_COURSE_SPEED_KN)
    dcourse = np.abs(np.angle(np.exp(1j * (course_est - course_true))))[moving]
    dcourse = dcourse[np.isfinite(dcourse)]

    est_matched = np.zeros_like(ey)
    est_matched[tj, tt] = True
    truth_min = float((ex * w).sum()) / 60.0
    missed_min = float(((ex & ~matched) * w).sum()) / 60.0
    false_min = float(((ey & ~est_matched) * w).sum()) / 60.0

    per_truth: dict[str, dict[str, float | int | None]] = {}
    breaks_total = swaps_total = 0
    for i, tid in enumerate(truth_ids):
        steps = np.flatnonzero(ex[i])
        pos = np.flatnonzero(matched[i, steps])                    # index among present steps
        breaks = int((np.diff(pos) > 1).sum())
        ids = jj[i, steps[pos]]
        swaps = int((np.diff(ids) != 0).sum())
        e_i = err[ti == i]
        per_truth[tid] = {
            "minutes": float((ex[i] * w).sum()) / 60.0,
            "matched_minutes": float((matched[i] * w).sum()) / 60.0,
            "mean_error_m": float(e_i.mean()) if e_i.size else None,
            "breaks": breaks,
            "swaps": swaps,
        }
        breaks_total += breaks
        swaps_total += swaps
    figures: dict[str, float | int | None] = {
        "mean_position_error_m": float(err.mean()) if err.size else None,
        "rms_position_error_m": float(np.sqrt((err**2).mean())) if err.size else None,
        "mean_speed_error_kn": float(dspeed.mean()) if dspeed.size else None,
        "mean_course_error_deg": float(np.degrees(dcourse.mean())) if dcourse.size else None,
        "coverage_percent": (100.0 * float((matched * w).sum()) / float((ex * w).sum())
                             if truth_min > 0 else None),
        "missed_vessel_min": missed_min,
        "false_track_min": false_min,
        "track_breaks": breaks_total,
        "identity_swaps": swaps_total,
        "velocity_source": "columns" if has_vel else "positions",  # type: ignore[dict-item]
    }
    return figures, per_truth


# --------------------------------------------------------------------------- plot
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
