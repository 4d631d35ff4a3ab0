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
from scipy.optimize import linear_sum_assignment, linprog
from scipy.sparse.csgraph import connected_components

from harbourwatch.errors import ComputationError, ParameterError

__all__ = [
    "GospaResult",
    "TGospaResult",
    "gospa",
    "trajectory_gospa",
    "grid_trajectories",
]

Array = NDArray[np.float64]

# LP weights closer than this to 0 or 1 are snapped before decomposing.
_SNAP = 1e-7


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


def _interacting_pairs(X: Array, Y: Array, c: float) -> NDArray[np.bool_]:
    """``(nx, ny)``: pairs that are both present and closer than ``c`` at some step."""
    nx, T, _ = X.shape
    ny = Y.shape[0]
    out = np.zeros((nx, ny), dtype=bool)
    if nx == 0 or ny == 0:
        return out
    chunk = max(1, 2_000_000 // max(1, nx * ny))  # bound memory to a few tens of MB
    for t0 in range(0, T, chunk):
        xs = X[:, t0:t0 + chunk]
        ys = Y[:, t0:t0 + chunk]
        d2 = ((xs[:, None] - ys[None, :]) ** 2).sum(axis=-1)  # NaN where either absent
        with np.errstate(invalid="ignore"):
            out |= (d2 < c * c).any(axis=-1)
    return out


def _solve_component(
    X: Array, Y: Array, ex: NDArray[np.bool_], ey: NDArray[np.bool_],
    ei: NDArray[np.intp], ej: NDArray[np.intp], *, c: float, p: float, gamma: float,
) -> tuple[Array, int]:
    """LP of one cluster on its own time window, costs scaled by ``1 / c**p``.

    Returns the weights ``(L, E + a + b)`` per step (edges, missed, false) and
    the number of LP variables. Variables per step: ``W_e`` for the E
    interacting pairs, ``u_i`` (truth i unassigned), ``v_j`` (estimate j
    unassigned); then ``W_e^{t+1} - W_e^t = h+ - h-`` with ``h+, h- >= 0``, both
    costing ``gamma**p / 2``: at the optimum one of them is zero, so
    ``h+ + h- = |W_e^{t+1} - W_e^t|``. This equality form gives the same optimum
    as the ``h >= +-(W^{t+1} - W^t)`` inequality form and solves several times
    faster with HiGHS on crowded clusters (measured).
    """
    a, L, _ = X.shape
    b = Y.shape[0]
    E = len(ei)
    s = E + a + b
    n_w = L * s
    n_h = (L - 1) * E
    n_var = n_w + 2 * n_h
    tt = np.arange(L)[:, None]

    # cost per step (scaled by 1 / c**p): pair, unassigned truth, unassigned estimate
    both = ex[ei] & ey[ej]                                         # (E, L)
    d = np.sqrt(((X[ei] - Y[ej]) ** 2).sum(axis=-1))               # NaN where absent
    pair_cost = np.where(both, np.minimum(np.nan_to_num(d, nan=c) / c, 1.0) ** p,
                         0.5 * (ex[ei] ^ ey[ej]))
    cost = np.concatenate([pair_cost.T, 0.5 * ex.T, 0.5 * ey.T], axis=1).ravel()
    cost = np.concatenate([cost, np.full(2 * n_h, 0.5 * (gamma / c) ** p)])

    # assignment rows per step: a truth rows then b estimate rows, each summing to one
    e_idx = np.arange(E)[None, :]
    n_rows = L * (a + b)
    rows = [(tt * (a + b) + ei[None, :]).ravel(),                  # W_e in truth row
            (tt * (a + b) + a + ej[None, :]).ravel(),              # W_e in estimate row
            (tt * (a + b) + np.arange(a)[None, :]).ravel(),        # u_i
            (tt * (a + b) + a + np.arange(b)[None, :]).ravel()]    # v_j
    cols = [(tt * s + e_idx).ravel(),
            (tt * s + e_idx).ravel(),
            (tt * s + E + np.arange(a)[None, :]).ravel(),
            (tt * s + E + a + np.arange(b)[None, :]).ravel()]
    vals = [np.ones(len(r)) for r in rows]
    if n_h:
        # switch rows: W^{t+1}_e - W^t_e - h+ + h- = 0
        w_now = (np.arange(L - 1)[:, None] * s + e_idx).ravel()
        r = n_rows + np.arange(n_h)
        h_plus = n_w + np.arange(n_h)
        rows += [r, r, r, r]
        cols += [w_now + s, w_now, h_plus, h_plus + n_h]
        vals += [np.ones(n_h), -np.ones(n_h), -np.ones(n_h), np.ones(n_h)]
    A_eq = sparse.csr_array((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                            shape=(n_rows + n_h, n_var))
    b_eq = np.concatenate([np.ones(n_rows), np.zeros(n_h)])
    res = linprog(cost, A_eq=A_eq, b_eq=b_eq, bounds=(0, None), method="highs")
    if res.status != 0:  # pragma: no cover - the LP is always feasible and bounded
        raise ComputationError(f"trajectory GOSPA LP failed: {res.message}")
    w = np.clip(res.x[:n_w], 0.0, 1.0).reshape(L, s)
    w = np.where(np.abs(w - np.round(w)) < _SNAP, np.round(w), w)
    return w, n_var


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
    _check_params(c, p)
    if not (np.isfinite(gamma) and gamma > 0):
        raise ParameterError(f"switching cost gamma must be a positive number, got {gamma!r}", parameter="gamma")
    Xa = _as_traj(X, "X")
    Ya = _as_traj(Y, "Y")
    nx, T = Xa.shape[:2]
    ny = Ya.shape[0]
    if Ya.shape[1] != T:
        raise ParameterError(f"X and Y must share the time grid: T = {T} and {Ya.shape[1]}", parameter="Y")
    if Ya.shape[2] != Xa.shape[2]:
        raise ParameterError("X and Y must have the same state dimension", parameter="Y")
    ex = np.asarray(~np.isnan(Xa).any(axis=-1), dtype=bool)       # (nx, T)
    ey = np.asarray(~np.isnan(Ya).any(axis=-1), dtype=bool)       # (ny, T)
    half = c**p / 2.0

    loc_t = np.zeros(T)
    missed_t = half * ex.sum(axis=0).astype(float)
    false_t = half * ey.sum(axis=0).astype(float)
    switch_t = np.zeros(max(T - 1, 0))
    assignment = np.full((T, nx), -1, dtype=np.intp)
    span = np.full((nx, 2), -1, dtype=np.intp)
    matched = np.zeros((T, nx), dtype=bool)
    fractional = False
    n_comp = 0
    largest = 0

    inter = _interacting_pairs(Xa, Ya, c)
    if inter.any():
        gi, gj = np.nonzero(inter)
        graph = sparse.coo_array((np.ones(len(gi)), (gi, nx + gj)), shape=(nx + ny, nx + ny))
        _, labels = connected_components(graph, directed=False)
        comp_of_edge = labels[gi]
        for comp in np.unique(comp_of_edge):
            sel = comp_of_edge == comp
            ci = np.unique(gi[sel])
            cj = np.unique(gj[sel])
            present = ex[ci].any(axis=0) | ey[cj].any(axis=0)
            steps = np.nonzero(present)[0]
            t0, t1 = int(steps[0]), int(steps[-1]) + 1
            span[ci] = (t0, t1)
            ei = np.searchsorted(ci, gi[sel])
            ej = np.searchsorted(cj, gj[sel])
            Xc, Yc = Xa[ci, t0:t1], Ya[cj, t0:t1]
            exc, eyc = ex[ci, t0:t1], ey[cj, t0:t1]
            w, n_var = _solve_component(Xc, Yc, exc, eyc, ei, ej, c=c, p=p, gamma=gamma)
            n_comp += 1
            largest = max(largest, n_var)
            E, a = len(ei), len(ci)
            W = w[:, :E].T                                           # (E, L)
            U = w[:, E:E + a].T                                      # (a, L)
            V = w[:, E + a:].T                                       # (b, L)
            fractional |= bool(np.any((w > 0) & (w < 1)))
            both = exc[ei] & eyc[ej]
            d = np.sqrt(((Xc[ei] - Yc[ej]) ** 2).sum(axis=-1))
            with np.errstate(invalid="ignore"):
                close = both & (d < c)
            far = both & ~close
            x_only = exc[ei] & ~eyc[ej]
            y_only = eyc[ej] & ~exc[ei]
            sl = slice(t0, t1)
            # replace the closed-form unassigned costs of this cluster by the LP's split
            missed_t[sl] -= half * exc.sum(axis=0)
            false_t[sl] -= half * eyc.sum(axis=0)
            loc_t[sl] += (W * np.where(close, np.nan_to_num(d) ** p, 0.0)).sum(axis=0)
            missed_t[sl] += half * ((U * exc).sum(axis=0) + (W * (x_only | far)).sum(axis=0))
            false_t[sl] += half * ((V * eyc).sum(axis=0) + (W * (y_only | far)).sum(axis=0))
            if t1 - t0 > 1:
                switch_t[t0:t1 - 1] += 0.5 * gamma**p * np.abs(np.diff(W, axis=1)).sum(axis=0)
            on = W > 0.5
            ke, kt = np.nonzero(on)
            assignment[t0 + kt, ci[ei[ke]]] = cj[ej[ke]]
            matched[t0 + kt, ci[ei[ke]]] = close[ke, kt]
    # snap float noise from the subtract-and-add above
    missed_t = np.where(np.abs(missed_t) < 1e-9 * half, 0.0, missed_t)
    false_t = np.where(np.abs(false_t) < 1e-9 * half, 0.0, false_t)
    loc, mis, fal, sw = (float(v.sum()) for v in (loc_t, missed_t, false_t, switch_t))
    value = float(max(loc + mis + fal + sw, 0.0) ** (1.0 / p))
    return TGospaResult(
        value=value, localisation=loc, missed=mis, false=fal, switch=sw,
        localisation_t=loc_t, missed_t=missed_t, false_t=false_t, switch_t=switch_t,
        assignment=assignment, matched=matched, fractional=fractional,
        n_components=n_comp, largest_lp_variables=largest, truth_span=span, lower=value,
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
