"""Trajectory GOSPA of long feeds, solved in time windows with certified bounds.

The linear program of :func:`harbourwatch.scoring.metrics.trajectory_gospa` couples
every time step of a cluster of trajectories; over a whole shift in a busy
harbour nearly every vessel joins one cluster and the program grows past
what a solver handles in reasonable time (a 6-hour benchmark did not finish
in 15 minutes). Solving it window by window gives two bounds of the exact
value:

* **lower**: the sum of the windows' optima. The exact optimum restricted
  to one window is feasible for that window's program, and the switches
  across window boundaries cost nothing in this sum, so it cannot exceed
  the exact optimum.
* **upper** (reported as ``value``): the cost of the feasible assignment made
  of the windows' solutions, that is the same sum plus the switches at the
  boundaries (counted exactly from 0/1 solutions, each cluster's assignment
  carried on to the window's edge, and a pair that is free in every earlier
  (later) window joined from the start (kept to the end) of the feed at no
  cost; for a fractional window
  solution, bounded by ``gamma**p`` per truth trajectory).

Where no assignment changes at a boundary the two coincide and the value is
exact; ``TGospaResult.exact`` says so.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from harbourwatch.scoring.metrics import TGospaResult, trajectory_gospa

__all__ = ["trajectory_gospa_windowed"]


def trajectory_gospa_windowed(
    X: ArrayLike, Y: ArrayLike, *, c: float, p: float, gamma: float, cuts: Sequence[int],
) -> TGospaResult:
    """Trajectory GOSPA with the linear program split at the grid steps ``cuts``.

    Parameters
    ----------
    X, Y, c, p, gamma
        As :func:`harbourwatch.scoring.metrics.trajectory_gospa`.
    cuts
        Grid steps where a new window starts (0 and ``T`` are implied;
        others outside ``(0, T)`` are ignored).

    Returns
    -------
    TGospaResult
        ``value`` is an upper bound (a feasible assignment's cost) and
        ``lower`` a lower bound of the metric; per-step parts, ``switch_t``
        (boundary switches included) and ``assignment`` belong to that
        feasible assignment.
    """
    Xa = np.asarray(X, dtype=float)
    Ya = np.asarray(Y, dtype=float)
    T = Xa.shape[1] if Xa.ndim == 3 else 0
    edges = sorted({int(k) for k in cuts if 0 < int(k) < T})
    if not edges:
        return trajectory_gospa(Xa, Ya, c=c, p=p, gamma=gamma)
    bounds = list(zip([0, *edges], [*edges, T], strict=True))
    parts = [trajectory_gospa(Xa[:, a:b], Ya[:, a:b], c=c, p=p, gamma=gamma) for a, b in bounds]
    nx, ny = Xa.shape[0], Ya.shape[0]
    # who is ever assigned in each window: a pair free in every window before (after) a
    # boundary can be assigned to each other there at no cost, so it pays no switch
    truth_used = np.zeros((len(parts), nx), dtype=bool)
    est_used = np.zeros((len(parts), ny), dtype=bool)
    for w, r in enumerate(parts):
        truth_used[w] = (r.assignment >= 0).any(axis=0)
        est_used[w, r.assignment[r.assignment >= 0]] = True
    switch_t: list[np.ndarray] = []
    for k, r in enumerate(parts):
        switch_t.append(r.switch_t)
        if k + 1 < len(parts):
            nxt = parts[k + 1]
            if r.fractional or nxt.fractional:
                # Σ|ΔW| <= Σ W(before) + Σ W(after) <= 2 nx: every truth row sums to at most 1
                cost = 0.5 * gamma**p * 2.0 * nx
            else:
                units = _boundary_switches(
                    _carried(r, last=True), _carried(nxt, last=False),
                    truth_used[: k + 1].any(axis=0), est_used[: k + 1].any(axis=0),
                    truth_used[k + 1 :].any(axis=0), est_used[k + 1 :].any(axis=0),
                )
                cost = 0.5 * gamma**p * units
            switch_t.append(np.array([cost]))
    sw_t = np.concatenate(switch_t)
    loc_t = np.concatenate([r.localisation_t for r in parts])
    missed_t = np.concatenate([r.missed_t for r in parts])
    false_t = np.concatenate([r.false_t for r in parts])
    inside = sum(r.localisation + r.missed + r.false + r.switch for r in parts)
    loc, mis, fal, sw = (float(v.sum()) for v in (loc_t, missed_t, false_t, sw_t))
    return TGospaResult(
        value=float(max(loc + mis + fal + sw, 0.0) ** (1.0 / p)),
        localisation=loc, missed=mis, false=fal, switch=sw,
        localisation_t=loc_t, missed_t=missed_t, false_t=false_t, switch_t=sw_t,
        assignment=np.concatenate([r.assignment for r in parts]),
        matched=np.concatenate([r.matched for r in parts]),
        fractional=any(r.fractional for r in parts),
        n_components=sum(r.n_components for r in parts),
        largest_lp_variables=max(r.largest_lp_variables for r in parts),
        lower=float(max(inside, 0.0) ** (1.0 / p)),
        windows=len(parts),
    )


def _carried(r: TGospaResult, *, last: bool) -> np.ndarray:
    """Each truth's assignment at a window's last (or first) step, clusters' carried on.

    Outside its cluster's span a truth's assignment is free (every trajectory of
    the cluster is absent there), so the feasible assignment keeps the cluster's
    last (first) assignment up to the window's edge and no switch is paid inside.
    """
    span = r.truth_span
    L = r.assignment.shape[0]
    if span is None:  # pragma: no cover - trajectory_gospa always fills it
        return r.assignment[-1 if last else 0]
    step = np.where(span[:, 0] < 0, 0, span[:, 1] - 1 if last else span[:, 0])
    out = r.assignment[np.clip(step, 0, L - 1), np.arange(span.shape[0])]
    return np.where(span[:, 0] < 0, -1, out)


def _boundary_switches(
    a_end: NDArray[np.intp], b_start: NDArray[np.intp], truth_before: ArrayLike,
    est_before: ArrayLike, truth_after: ArrayLike, est_after: ArrayLike,
) -> int:
    """Unit weight changes ``Σ|ΔW|`` between two windows' 0/1 assignments.

    Truth ``i`` goes from estimate ``a_end[i]`` to ``b_start[i]`` (-1: none).
    Leaving ``a`` costs one unit unless truth ``i`` and estimate ``a`` are
    never assigned again later (the pair is then kept to the end of the feed
    at no cost); joining ``b`` costs one unit unless neither was ever
    assigned before (the pair is then assigned from the start of the feed).
    """
    truth_before, est_before = np.asarray(truth_before, bool), np.asarray(est_before, bool)
    truth_after, est_after = np.asarray(truth_after, bool), np.asarray(est_after, bool)
    units = 0
    for i in np.flatnonzero(a_end != b_start).tolist():
        a, b = int(a_end[i]), int(b_start[i])
        if a >= 0 and (truth_after[i] or est_after[a]):
            units += 1
        if b >= 0 and (truth_before[i] or est_before[b]):
            units += 1
    return units
