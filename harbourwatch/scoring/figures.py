"""The plain-language figures of ``harbourwatch score`` (the "for the engineer" block).

Worked out from the trajectory GOSPA assignment on the evaluation grid; the
definitions are in :mod:`harbourwatch.scoring.score`'s docstring.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scoring.metrics import TGospaResult
from harbourwatch.units import KNOT_M_S

__all__ = ["engineer_figures", "MIN_COURSE_SPEED_KN"]

Array = NDArray[np.float64]
#: Course errors count only where the true speed is at least this (common practice, no source).
MIN_COURSE_SPEED_KN = 1.0


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


def engineer_figures(
    X: Array, eg: Array, has_vel: bool, grid: Array, tg: TGospaResult,
    truth_ids: list[str], frame: LocalFrame,
) -> tuple[dict[str, float | int | None], dict[str, dict[str, float | int | None]]]:
    """The figures of the whole run and per truth vessel (see the score module's docstring)."""
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
