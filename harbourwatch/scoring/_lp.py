"""The trajectory GOSPA linear program, cluster by cluster (private to :mod:`metrics`).

Pairs that are never both present and closer than the cut-off are left out
(their weights are fixed at zero, see :func:`~harbourwatch.scoring.metrics.trajectory_gospa`);
each connected cluster of the rest is one LP solved by HiGHS on its own time
window, and its split of the cost is added into :class:`TGospaParts`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import sparse
from scipy.optimize import linprog

from harbourwatch.errors import ComputationError

Array = NDArray[np.float64]

_SNAP = 1e-7


def interacting_pairs(X: Array, Y: Array, c: float) -> NDArray[np.bool_]:
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


@dataclass(kw_only=True, eq=False)
class TGospaParts:
    """The per-step parts of trajectory GOSPA, filled component by component."""

    loc_t: Array
    missed_t: Array
    false_t: Array
    switch_t: Array
    assignment: NDArray[np.intp]
    span: NDArray[np.intp]
    matched: NDArray[np.bool_]
    fractional: bool = False
    n_comp: int = 0
    largest: int = 0


def add_component(acc: TGospaParts, Xa: Array, Ya: Array, ex: NDArray[np.bool_],
                   ey: NDArray[np.bool_], gi: NDArray[np.intp], gj: NDArray[np.intp], *,
                   c: float, p: float, gamma: float) -> None:
    """Solve one connected cluster of interacting pairs and put its LP split into ``acc``."""
    half = c**p / 2.0
    ci = np.unique(gi)
    cj = np.unique(gj)
    present = ex[ci].any(axis=0) | ey[cj].any(axis=0)
    steps = np.nonzero(present)[0]
    t0, t1 = int(steps[0]), int(steps[-1]) + 1
    acc.span[ci] = (t0, t1)
    ei = np.searchsorted(ci, gi)
    ej = np.searchsorted(cj, gj)
    Xc, Yc = Xa[ci, t0:t1], Ya[cj, t0:t1]
    exc, eyc = ex[ci, t0:t1], ey[cj, t0:t1]
    w, n_var = _solve_component(Xc, Yc, exc, eyc, ei, ej, c=c, p=p, gamma=gamma)
    acc.n_comp += 1
    acc.largest = max(acc.largest, n_var)
    E, a = len(ei), len(ci)
    W = w[:, :E].T                                           # (E, L)
    U = w[:, E:E + a].T                                      # (a, L)
    V = w[:, E + a:].T                                       # (b, L)
    acc.fractional |= bool(np.any((w > 0) & (w < 1)))
    both = exc[ei] & eyc[ej]
    d = np.sqrt(((Xc[ei] - Yc[ej]) ** 2).sum(axis=-1))
    with np.errstate(invalid="ignore"):
        close = both & (d < c)
    far = both & ~close
    x_only = exc[ei] & ~eyc[ej]
    y_only = eyc[ej] & ~exc[ei]
    sl = slice(t0, t1)
    # replace the closed-form unassigned costs of this cluster by the LP's split
    acc.missed_t[sl] -= half * exc.sum(axis=0)
    acc.false_t[sl] -= half * eyc.sum(axis=0)
    acc.loc_t[sl] += (W * np.where(close, np.nan_to_num(d) ** p, 0.0)).sum(axis=0)
    acc.missed_t[sl] += half * ((U * exc).sum(axis=0) + (W * (x_only | far)).sum(axis=0))
    acc.false_t[sl] += half * ((V * eyc).sum(axis=0) + (W * (y_only | far)).sum(axis=0))
    if t1 - t0 > 1:
        acc.switch_t[t0:t1 - 1] += 0.5 * gamma**p * np.abs(np.diff(W, axis=1)).sum(axis=0)
    on = W > 0.5
    ke, kt = np.nonzero(on)
    acc.assignment[t0 + kt, ci[ei[ke]]] = cj[ej[ke]]
    acc.matched[t0 + kt, ci[ei[ke]]] = close[ke, kt]
