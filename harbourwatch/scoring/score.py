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

The figures are worked out in :mod:`harbourwatch.scoring.figures`; the plot
of ``--plot`` in :mod:`harbourwatch.scoring.plot`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scoring.figures import engineer_figures
from harbourwatch.scoring.metrics import TGospaResult, gospa, grid_trajectories, trajectory_gospa
from harbourwatch.scoring.reading import ScoreTable, group_by_track, read_score_csv
from harbourwatch.scoring.windows import trajectory_gospa_windowed
from harbourwatch.units import CAUTION, fmt_duration

__all__ = ["ScoreReport", "score_files", "mean_gospa_files", "estimate_tgospa_seconds"]

Array = NDArray[np.float64]
MAX_GRID_STEPS = 2_000_000
#: Highest GOSPA order p accepted. p = 1 or 2 is usual (common practice, no source); a larger p
#: weighs the worst error alone, and c^p soon leaves the range the linear program is solved in.
MAX_ORDER = 20.0
#: Largest trajectory GOSPA linear program solved (one window): grid steps x truth vessels x
#: tracks. Measured on the demo (27 vessels, 28 tracks) on 2 cores: 0.4 million cells (541
#: steps) take 0.6 s, 2.0 million 4.3 s, 4.1 million 17 s and 1.7 GB; the time grows about as
#: 0.5 s + (cells / 1 million)^2 s (:func:`estimate_tgospa_seconds`), so 8 million is a minute.
MAX_LP_CELLS = 8_000_000
#: A longer estimate is told before the work starts (``notice``).
NOTICE_SECONDS = 10.0
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
        lines += ["", CAUTION]
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
              ("--order", order, 1 <= order <= MAX_ORDER, f"a number from 1 to {MAX_ORDER:g}"),
              ("--switch-cost-m", switch_cost_m, switch_cost_m > 0, "a positive number of metres"),
              ("--grid-s", grid_s, grid_s >= 0, "0 (time stamps) or a positive number of seconds"),
              ("--max-gap-s", max_gap_s, max_gap_s > 0, "a positive number of seconds")]
    for name, v, ok, what in checks:
        if not (math.isfinite(v) and ok):
            raise InputError(f"expected {what}, found {v!r}", field=name)
    if order * math.log10(max(cutoff_m, switch_cost_m, 1.0)) > 100:
        raise InputError(f"order {order:g} with a cut-off of {cutoff_m:g} m and a switching cost "
                         f"of {switch_cost_m:g} m gives costs beyond 1e100; use a smaller order",
                         field="--order")


def estimate_tgospa_seconds(cells: Sequence[float]) -> float:
    """Rough seconds of the trajectory GOSPA linear programs of windows of ``cells`` each.

    A cell is one (grid step, truth vessel, track) triple; see :data:`MAX_LP_CELLS` for the
    measurements behind the law ``0.5 s + (cells / 1 million)^2 s`` per window.

    Examples
    --------
    >>> round(estimate_tgospa_seconds([4_000_000]), 1)
    16.5
    """
    return float(sum(0.5 + (c / 1e6) ** 2 for c in cells))


def _plan_tgospa(grid: Array, X: Array, Y: Array, *, grid_s: float, window_s: float,
                 notice: Callable[[str], None] | None) -> list[int]:
    """Where the windows start (grid indices), refusing a program too large and telling a long one.

    The cells of a window count the truth vessels and tracks present in it.
    """
    cuts: list[int] = []
    if window_s > 0 and grid.size:
        n_win = max(1, math.ceil((grid[-1] - grid[0]) / window_s))
        starts = grid[0] + window_s * np.arange(1, n_win)
        cuts = np.searchsorted(grid, starts).tolist()
    n_truth, n_est = X.shape[0], Y.shape[0]
    edges = [0, *cuts, grid.size]
    cells = []
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        nx = int(np.any(~np.isnan(X[:, a:b, 0]), axis=1).sum()) if b > a else 0
        ny = int(np.any(~np.isnan(Y[:, a:b, 0]), axis=1).sum()) if b > a else 0
        cells.append(float(b - a) * max(nx, 1) * max(ny, 1))
    span = float(grid[-1] - grid[0]) if grid.size else 0.0
    hint = (f"--grid-s 10 gives {int(span // 10) + 1:,} steps"
            + ("" if window_s > 0 else "; --tgospa-window-min 10 solves in 10-minute windows"))
    how = ("at the time stamps of both files" if grid_s == 0 else f"every {grid_s:g} s")
    if max(cells, default=0.0) > MAX_LP_CELLS:
        raise InputError(
            f"{grid.size:,} grid steps {how} with {n_truth} truth vessels and {n_est} tracks "
            f"make a trajectory GOSPA program of {max(cells) / 1e6:.0f} million cells (at most "
            f"{MAX_LP_CELLS / 1e6:.0f} million, about a minute; this would take roughly "
            f"{fmt_duration(estimate_tgospa_seconds(cells))}); {hint}", field="--grid-s")
    est = estimate_tgospa_seconds(cells)
    if notice is not None and est > NOTICE_SECONDS:
        notice(f"scoring {grid.size:,} grid steps {how} ({n_truth} truth vessels, {n_est} "
               f"tracks"
               + (f", {len(cells)} windows" if len(cells) > 1 else "")
               + f"): expect roughly {fmt_duration(est)}; {hint}")
    return cuts


def _grid(times: Array, grid_s: float) -> Array:
    if grid_s == 0:
        stamps = np.unique(times)
        if stamps.size > MAX_GRID_STEPS:
            raise InputError(f"the files hold {stamps.size} distinct times (at most "
                             f"{MAX_GRID_STEPS} grid steps); use a grid step", field="--grid-s")
        return stamps
    t0, t1 = float(times.min()), float(times.max())
    n = int(math.floor((t1 - t0) / grid_s + 1e-9)) + 1
    if n > MAX_GRID_STEPS:
        raise InputError(f"the files span {t1 - t0:.0f} s, which gives {n} grid steps at "
                         f"{grid_s:g} s (at most {MAX_GRID_STEPS}); use a larger step",
                         field="--grid-s")
    return np.asarray(t0 + grid_s * np.arange(n), dtype=np.float64)


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
    notice: Callable[[str], None] | None = None,
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
    notice
        Called with one line before the work when it is expected to take
        more than :data:`NOTICE_SECONDS` (the command line prints it).

    Raises
    ------
    InputError
        Unreadable files, missing columns, bad numbers or times (naming file,
        line and field), bad options, both files without rows, a trajectory
        GOSPA program beyond :data:`MAX_LP_CELLS` (field ``--grid-s``).
    """
    _check_options(cutoff_m, order, switch_cost_m, grid_s, max_gap_s, tgospa_window_s)
    g = _gridded(tracks_path, truth_path, grid_s=grid_s, max_gap_s=max_gap_s)
    X, eg, Y, grid = g.X, g.eg, g.Y, g.grid
    cuts = _plan_tgospa(grid, X, Y, grid_s=grid_s, window_s=tgospa_window_s, notice=notice)
    g_t, parts_t = _per_step_gospa(X, Y, c=cutoff_m, p=order)
    if tgospa_window_s > 0 and grid.size:
        tg = trajectory_gospa_windowed(X, Y, c=cutoff_m, p=order, gamma=switch_cost_m,
                                       cuts=cuts)
    else:
        tg = trajectory_gospa(X, Y, c=cutoff_m, p=order, gamma=switch_cost_m)
    figures, per_truth = engineer_figures(X, eg, g.has_vel, grid, tg, g.truth_ids, g.frame)
    return ScoreReport(
        tracks_path=g.tracks_path, truth_path=g.truth_path, cutoff_m=cutoff_m, order=order,
        switch_cost_m=switch_cost_m, grid_s=grid_s, max_gap_s=max_gap_s,
        tgospa_window_s=tgospa_window_s, grid_t=grid,
        gospa_t=g_t, gospa_parts_t=parts_t, tgospa=tg, truth_ids=tuple(g.truth_ids),
        track_ids=tuple(g.track_ids), figures=figures, per_truth=per_truth,
    )



