"""GOSPA and trajectory GOSPA (linear-programming form): pure maths, no file I/O.

Two metrics between a ground truth and an estimate, both in metres:

* :func:`gospa` — generalised optimal sub-pattern assignment between two finite
  sets of points, with ``alpha = 2`` so that it splits into localisation,
  missed and false parts [Rahmathullah, García-Fernández, Svensson, FUSION 2017,
  arXiv:1601.05585].
* :func:`trajectory_gospa` — the linear-programming relaxation of trajectory
  GOSPA between two sets of trajectories on a common time grid, itself a metric,
  with an extra cost for track switches [García-Fernández, Rahmathullah,
  Svensson, IEEE Trans. Signal Processing 68:3917-3928, 2020, arXiv:1605.01177].

The LP layout (objective, dummy costs, switch term on the real block only,
and the split of an assigned pair at ``d >= c`` into half missed, half false)
was checked against the authors' published reference implementation of the
LP metric that accompanies arXiv:1605.01177.

Conventions shared by both:

* The base distance is the Euclidean distance of positions, cut off at ``c``.
* **Ties at d = c.** A pair at distance ``d >= c`` (the tie ``d == c``
  included) is never counted as localisation: it costs ``c**p``, which is
  exactly one missed plus one false target, and it is reported that way. The
  metric value does not depend on this choice, only its decomposition does.
* All parts are *p-th power* parts: ``value**p == localisation + missed +
  false (+ switch)``.
* Absent states are NaN: a trajectory whose position at grid step ``t`` has a
  NaN coordinate does not exist at ``t`` (outside its span or in a hole).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse
from scipy.optimize import linear_sum_assignment
from scipy.sparse.csgraph import connected_components

from harbourwatch.errors import ParameterError
from harbourwatch.scoring._lp import TGospaParts, add_component, interacting_pairs

__all__ = [
    "GospaResult",
    "TGospaResult",
    "gospa",
    "trajectory_gospa",
    "grid_trajectories",
]

Array = NDArray[np.float64]

# LP weights closer than this to 0 or 1 are snapped before decomposing.


def _as_points(a: ArrayLike, name: str) -> Array:
    arr = np.asarray(a, dtype=float)
    if arr.size == 0:
        return arr.reshape(0, arr.shape[-1] if arr.ndim == 2 else 2)
    if arr.ndim != 2:
        raise ParameterError(f"must have shape (n, d), got {arr.shape}", parameter=name)
    return arr


def _check_params(c: float, p: float) -> None:
    if not (np.isfinite(c) and c > 0):
        raise ParameterError(f"cut-off c must be a positive number, got {c!r}", parameter="c")
    if not (np.isfinite(p) and p >= 1):
        raise ParameterError(f"order p must be a number >= 1, got {p!r}", parameter="p")


@dataclass(frozen=True, kw_only=True, eq=False)
class GospaResult:
    """GOSPA (alpha = 2) between a truth set X and an estimate set Y.

    Attributes
    ----------
    value
        The metric, in the units of the positions.
    localisation, missed, false
        The p-th power parts: ``value**p == localisation + missed + false``.
    pairs
        ``(k, 2)`` int array of matched ``(index in X, index in Y)`` with
        distance below the cut-off, sorted by the X index.
    n_missed, n_false
        Truth points and estimated points not matched within the cut-off.
    """

    value: float
    localisation: float
    missed: float
    false: float
    pairs: NDArray[np.intp]
    n_missed: int
    n_false: int


def gospa(X: ArrayLike, Y: ArrayLike, *, c: float, p: float) -> GospaResult:
    """GOSPA metric with ``alpha = 2`` between point sets ``X`` (truth) and ``Y``.

    Parameters
    ----------
    X, Y
        ``(n, d)`` and ``(m, d)`` arrays of points (either may be empty).
    c
        Cut-off distance (> 0).
    p
        Order (>= 1).

    Returns
    -------
    GospaResult
        Value and its decomposition. Pairs at distance ``>= c`` (ties at
        ``d == c`` included) are counted as one missed plus one false point.

    Notes
    -----
    ``d(X, Y)**p = min over partial assignments g of
    sum_{(i,j) in g} d(x_i, y_j)**p + c**p / 2 * (|X| + |Y| - 2 |g|)``,
    solved as a rectangular assignment on ``min(d, c)**p`` with
    :func:`scipy.optimize.linear_sum_assignment`.

    Examples
    --------
    >>> r = gospa([[0.0, 0.0]], [[3.0, 4.0], [50.0, 0.0]], c=10.0, p=1.0)
    >>> r.value, r.localisation, r.missed, r.false
    (10.0, 5.0, 0.0, 5.0)
    """
    _check_params(c, p)
    x = _as_points(X, "X")
    y = _as_points(Y, "Y")
    half = c**p / 2.0
    n, m = len(x), len(y)
    pairs = np.zeros((0, 2), dtype=np.intp)
    loc = 0.0
    if n and m:
        d = np.sqrt(((x[:, None, :] - y[None, :, :]) ** 2).sum(axis=-1))
        cost = np.minimum(d, c) ** p
        rows, cols = linear_sum_assignment(cost)
        keep = d[rows, cols] < c
        rows, cols = rows[keep], cols[keep]
        loc = float((d[rows, cols] ** p).sum())
        order = np.argsort(rows)
        pairs = np.stack([rows[order], cols[order]], axis=1).astype(np.intp)
    k = len(pairs)
    missed = half * (n - k)
    false = half * (m - k)
    value = float((loc + missed + false) ** (1.0 / p))
    return GospaResult(value=value, localisation=loc, missed=missed, false=false,
                       pairs=pairs, n_missed=n - k, n_false=m - k)


@dataclass(frozen=True, kw_only=True, eq=False)
class TGospaResult:
    """Trajectory GOSPA (LP form) between truth and estimated trajectories.

    Attributes
    ----------
    value
        The metric, ``(localisation + missed + false + switch) ** (1/p)``.
    localisation, missed, false, switch
        p-th power parts summed over the grid.
    localisation_t, missed_t, false_t
        ``(T,)`` the same parts per grid step.
    switch_t
        ``(T - 1,)`` switch part between step ``t`` and ``t + 1``.
    assignment
        ``(T, nx)`` int: the estimate index that truth ``i`` is assigned to at
        step ``t`` (weight > 0.5 in the LP solution), ``-1`` for none. An
        assignment may hold while one of the two is absent or farther than
        ``c`` (that costs the same as no assignment and avoids a switch); use
        ``matched`` for the pairs that count as localisation.
    matched
        ``(T, nx)`` bool: assigned, both exist and closer than ``c``.
    fractional
        True when the LP optimum has weights that are not 0 or 1 (the parts
        are then fractional; the value is still the LP metric).
    n_components, largest_lp_variables
        How the problem was split: number of clusters solved by LP and the
        variable count of the largest one.
    truth_span
        ``(nx, 2)`` int: for each truth, the grid steps ``[start, end)`` of
        the LP cluster it belongs to, ``(-1, -1)`` when in none. Outside that
        span all of the cluster's trajectories are absent, so its assignments
        may be carried on there at no cost.
    lower, windows
        When the LP was solved in time windows (see
        :func:`harbourwatch.scoring.windows.trajectory_gospa_windowed`):
        a lower bound of the metric and the number of windows; ``value`` is
        then the cost of a feasible assignment, an upper bound. Solved whole:
        ``lower == value`` and ``windows == 1``.
    """

    value: float
    localisation: float
    missed: float
    false: float
    switch: float
    localisation_t: Array
    missed_t: Array
    false_t: Array
    switch_t: Array
    assignment: NDArray[np.intp]
    matched: NDArray[np.bool_]
    fractional: bool
    n_components: int
    largest_lp_variables: int
    truth_span: NDArray[np.intp] | None = None
    lower: float = math.nan
    windows: int = 1

    @property
    def exact(self) -> bool:
        """True when ``value`` is the metric itself (not only an upper bound)."""
        return self.windows == 1 or self.value <= self.lower * (1.0 + 1e-9) + 1e-12


def _as_traj(a: ArrayLike, name: str) -> Array:
    arr = np.asarray(a, dtype=float)
    if arr.ndim != 3 or arr.shape[-1] < 1:
        raise ParameterError(f"must have shape (n, T, d), got {arr.shape}", parameter=name)
    return arr


def trajectory_gospa(
    X: ArrayLike, Y: ArrayLike, *, c: float, p: float, gamma: float,
) -> TGospaResult:
    """Trajectory GOSPA in its linear-programming form, with track switches.

    Parameters
    ----------
    X, Y
        ``(nx, T, d)`` truth and ``(ny, T, d)`` estimated positions on one time
        grid; a NaN coordinate marks a trajectory absent at that step.
    c
        Cut-off distance (> 0).
    p
        Order (>= 1).
    gamma
        Switching cost (> 0), in the units of the positions.

    Returns
    -------
    TGospaResult

    Notes
    -----
    Minimises, over assignment weights ``W^t`` of size ``(nx+1) x (ny+1)`` whose
    real rows and real columns sum to one,
    ``sum_t sum_ij D^t_ij W^t_ij + gamma**p / 2 * sum_{t<T} sum_{i<=nx, j<=ny}
    |W^t_ij - W^{t+1}_ij|`` and returns its ``1/p``-th power, where
    ``D^t_ij = min(d, c)**p`` when both exist, ``c**p / 2`` when exactly one
    exists, 0 when neither; the dummy column (row) costs ``c**p / 2`` for an
    existing truth (estimate) [arXiv:1605.01177, the LP metric].

    The LP is split exactly into independent clusters: a pair that is never
    both present and closer than ``c`` costs the same assigned as unassigned,
    so its weights are fixed at zero (moving them to the dummies keeps the
    cost and cannot add switches); trajectories with no such partner cost
    ``c**p / 2`` per present step in closed form; each remaining connected
    cluster is solved with HiGHS on its own time window.
    """
    Xa, Ya = _tgospa_inputs(X, Y, c=c, p=p, gamma=gamma)
    nx, T = Xa.shape[:2]
    ex = np.asarray(~np.isnan(Xa).any(axis=-1), dtype=bool)       # (nx, T)
    ey = np.asarray(~np.isnan(Ya).any(axis=-1), dtype=bool)       # (ny, T)
    half = c**p / 2.0
    acc = TGospaParts(
        loc_t=np.zeros(T),
        missed_t=half * ex.sum(axis=0).astype(float),
        false_t=half * ey.sum(axis=0).astype(float),
        switch_t=np.zeros(max(T - 1, 0)),
        assignment=np.full((T, nx), -1, dtype=np.intp),
        span=np.full((nx, 2), -1, dtype=np.intp),
        matched=np.zeros((T, nx), dtype=bool),
    )
    inter = interacting_pairs(Xa, Ya, c)
    if inter.any():
        gi, gj = np.nonzero(inter)
        graph = sparse.coo_array((np.ones(len(gi)), (gi, nx + gj)),
                                 shape=(nx + Ya.shape[0], nx + Ya.shape[0]))
        _, labels = connected_components(graph, directed=False)
        comp_of_edge = labels[gi]
        for comp in np.unique(comp_of_edge):
            sel = comp_of_edge == comp
            add_component(acc, Xa, Ya, ex, ey, gi[sel], gj[sel], c=c, p=p, gamma=gamma)
    return _result(acc, half, p)


def _tgospa_inputs(X: ArrayLike, Y: ArrayLike, *, c: float, p: float,
                   gamma: float) -> tuple[Array, Array]:
    """Check the parameters and shapes of :func:`trajectory_gospa`; the two arrays."""
    _check_params(c, p)
    if not (np.isfinite(gamma) and gamma > 0):
        raise ParameterError(f"switching cost gamma must be a positive number, got {gamma!r}",
                             parameter="gamma")
    Xa = _as_traj(X, "X")
    Ya = _as_traj(Y, "Y")
    T = Xa.shape[1]
    if Ya.shape[1] != T:
        raise ParameterError(f"X and Y must share the time grid: T = {T} and {Ya.shape[1]}",
                             parameter="Y")
    if Ya.shape[2] != Xa.shape[2]:
        raise ParameterError("X and Y must have the same state dimension", parameter="Y")
    return Xa, Ya


def _result(acc: TGospaParts, half: float, p: float) -> TGospaResult:
    """The metric and its parts from the per-step sums."""
    # snap float noise from the subtract-and-add of the components
    missed_t = np.where(np.abs(acc.missed_t) < 1e-9 * half, 0.0, acc.missed_t)
    false_t = np.where(np.abs(acc.false_t) < 1e-9 * half, 0.0, acc.false_t)
    loc, mis, fal, sw = (float(v.sum()) for v in (acc.loc_t, missed_t, false_t,
                                                   acc.switch_t))
    value = float(max(loc + mis + fal + sw, 0.0) ** (1.0 / p))
    return TGospaResult(
        value=value, localisation=loc, missed=mis, false=fal, switch=sw,
        localisation_t=acc.loc_t, missed_t=missed_t, false_t=false_t,
        switch_t=acc.switch_t, assignment=acc.assignment, matched=acc.matched,
        fractional=acc.fractional, n_components=acc.n_comp,
        largest_lp_variables=acc.largest, truth_span=acc.span, lower=value,
    )


def grid_trajectories(
    trajectories: Mapping[str, tuple[ArrayLike, ArrayLike]] | Sequence[tuple[ArrayLike, ArrayLike]],
    grid_t: ArrayLike,
    *,
    max_gap_s: float = np.inf,
) -> Array:
    """Put trajectories on a common time grid by linear interpolation.

    Parameters
    ----------
    trajectories
        ``id -> (times (N,), values (N, k))`` (or a sequence of such pairs),
        times in seconds, strictly increasing within each trajectory.
    grid_t
        ``(T,)`` increasing grid times, seconds.
    max_gap_s
        No interpolation across consecutive states more than this apart:
        grid times strictly inside such a gap are absent.

    Returns
    -------
    ndarray
        ``(n, T, k)`` in the order of ``trajectories``; NaN where a trajectory
        is absent (before its first state, after its last, inside a long gap).
        Never extrapolated.

    Examples
    --------
    >>> a = grid_trajectories({"a": ([0.0, 10.0], [[0.0, 0.0], [10.0, 20.0]])}, [-5, 0, 5, 10, 15])
    >>> a[0, :, 0].tolist()
    [nan, 0.0, 5.0, 10.0, nan]
    """
    items = list(trajectories.values()) if isinstance(trajectories, Mapping) else list(trajectories)
    g = np.asarray(grid_t, dtype=float)
    k = 2
    if items:
        k = np.asarray(items[0][1], dtype=float).reshape(len(np.atleast_1d(items[0][0])), -1).shape[1]
    out = np.full((len(items), len(g), k), np.nan)
    for n, (times, values) in enumerate(items):
        t = np.asarray(times, dtype=float).ravel()
        v = np.asarray(values, dtype=float).reshape(len(t), -1)
        if len(t) == 0:
            continue
        if np.any(np.diff(t) <= 0):
            raise ParameterError("trajectory times must be strictly increasing", parameter="times")
        lo = np.searchsorted(g, t[0], side="left")
        hi = np.searchsorted(g, t[-1], side="right")
        if hi <= lo:
            continue
        gs = g[lo:hi]
        seg = np.clip(np.searchsorted(t, gs, side="right") - 1, 0, max(len(t) - 2, 0))
        if len(t) == 1:
            out[n, lo:hi] = v[0]
            continue
        t_a, t_b = t[seg], t[seg + 1]
        frac = (gs - t_a) / (t_b - t_a)
        vals = v[seg] + frac[:, None] * (v[seg + 1] - v[seg])
        on_knot = (gs == t_a) | (gs == t_b)
        gap = ((t_b - t_a) > max_gap_s) & ~on_knot
        vals[gap] = np.nan
        out[n, lo:hi] = vals
    return out
