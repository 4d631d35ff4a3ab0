"""Immutable filtered nodes shared by all hypotheses (methods note §1.7, option 3).

A node is one state of a trajectory: its time, the filtered mean and
covariance of that state, the plot used (``-1`` for a missed detection), the
sensor of the scan, a pointer to its parent node (``-1`` at the start), the
per-mode means ``mm`` and covariances ``mP`` and mode probabilities ``mu`` of
the two-mode motion model (see :mod:`._motion`; ``m``, ``P`` are their merge),
and the effective process-noise intensity ``qin`` of the step into it, for the
smoother.
Hypotheses that share history share nodes; a whole trajectory is the chain
from a leaf back to its root and is smoothed on demand.

Nodes live in growable columnar arrays (not one Python object each). The
one-step predictions needed by the smoother are not stored: they are
recomputed from the parent's filtered moments with the same ``F(Δt)``,
``Q(Δt)`` the filter used, which halves the memory. When the store is full,
nodes no hypothesis can reach any more (pruned branches, clutter that
started nothing) are dropped by :meth:`NodeStore.compact` before it grows.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._kernels import reachable
from harbourwatch.models.cv import cv_process_noise_batch, cv_transition_batch
from harbourwatch.models.gaussian import kf_predict

if TYPE_CHECKING:
    from harbourwatch.filter._hypotheses import Cluster

Array = NDArray[np.float64]
IntArray = NDArray[np.int64]


class NodeStore:
    """Append-only columnar store of filtered trajectory nodes."""

    __slots__ = ("n", "t", "parent", "plot", "sensor", "m", "P", "mm", "mP", "mu", "qin")
    _COLUMNS = ("t", "parent", "plot", "sensor", "m", "P", "mm", "mP", "mu", "qin")

    def __init__(self, capacity: int = 4096) -> None:
        self.n = 0
        self.t = np.empty(capacity)
        self.parent = np.empty(capacity, np.int64)
        self.plot = np.empty(capacity, np.int64)
        self.sensor = np.empty(capacity, np.int64)
        self.m = np.empty((capacity, 4))
        self.P = np.empty((capacity, 4, 4))
        self.mm = np.empty((capacity, 2, 4))
        self.mP = np.empty((capacity, 2, 4, 4))
        self.mu = np.empty((capacity, 2))
        self.qin = np.empty(capacity)

    def _reserve(self, extra: int) -> None:
        need = self.n + extra
        cap = self.t.size
        if need <= cap:
            return
        new = max(need, 2 * cap)
        for name in self._COLUMNS:
            old = getattr(self, name)
            arr = np.empty((new,) + old.shape[1:], old.dtype)
            arr[: self.n] = old[: self.n]
            setattr(self, name, arr)

    def reserve_rows(self, k: int) -> int:
        """Make room for ``k`` more nodes, count them as added and return the first new row.

        The caller fills rows ``start .. start + k - 1`` of every column at once.
        """
        self._reserve(k)
        start = self.n
        self.n += k
        return start

    def columns(self) -> tuple[Array, IntArray, IntArray, IntArray, Array, Array, Array, Array, Array, Array]:
        """The column arrays, in the order of ``_COLUMNS`` (for compiled writers)."""
        return (self.t, self.parent, self.plot, self.sensor, self.m, self.P, self.mm, self.mP, self.mu, self.qin)

    def chain(self, leaf: int) -> IntArray:
        """Node indices from the root to ``leaf`` (inclusive), in time order."""
        out = []
        item = self.parent.item
        i = int(leaf)
        while i >= 0:
            out.append(i)
            i = item(i)
        return np.asarray(out[::-1], dtype=np.int64)

    def moments(self, idx: IntArray) -> tuple[Array, Array, Array, Array, Array]:
        """Times, filtered and one-step predicted moments along a chain.

        ``pred[0]`` is a copy of ``filt[0]``; ``pred[k]`` is the prediction of
        ``filt[k-1]`` to ``time[k]`` with the ``q`` the filter used for that
        step (``qin`` of node ``k``).
        """
        t = self.t[idx].copy()
        fm = self.m[idx].copy()
        fP = self.P[idx].copy()
        pm = fm.copy()
        pP = fP.copy()
        if idx.size > 1:
            dt = np.diff(t)
            pm[1:], pP[1:] = kf_predict(
                fm[:-1], fP[:-1], cv_transition_batch(dt),
                cv_process_noise_batch(dt, 1.0) * self.qin[idx[1:], None, None],
            )
        return t, fm, fP, pm, pP

    def release(self) -> None:
        """Free every column (the filter's end: the estimate no longer needs the nodes).

        ``n`` keeps the count of nodes the store held, for the run's figures.
        """
        for name in self._COLUMNS:
            old = getattr(self, name)
            setattr(self, name, np.empty((0,) + old.shape[1:], old.dtype))

    def compact(self, live: IntArray) -> IntArray:
        """Drop nodes unreachable from ``live``; return the old-to-new index map (-1 = gone).

        Parents always have smaller indices than their children (nodes are
        appended in time order; compaction keeps the order).
        """
        keep = reachable(self.parent, self.n, np.ascontiguousarray(live, dtype=np.int64))
        old = np.flatnonzero(keep)
        remap = np.full(self.n + 1, -1, np.int64)  # last slot maps parent -1 to -1
        remap[old] = np.arange(old.size)
        k = old.size
        for name in ("t", "plot", "sensor", "m", "P", "mm", "mP", "mu", "qin"):
            arr = getattr(self, name)
            arr[:k] = arr[old]
        self.parent[:k] = remap[self.parent[old]]
        self.n = k
        return remap[:-1]


def compact_nodes(nodes: NodeStore, clusters: list[Cluster], min_nodes: int) -> None:
    """Drop nodes no hypothesis of ``clusters`` can reach any more, instead of growing the store.

    Only when the store is at least 90 % full and holds ``min_nodes`` or more;
    every local hypothesis' node indices are remapped.
    """
    cap = nodes.t.size
    if nodes.n < 0.9 * cap or nodes.n < min_nodes:
        return
    all_lhs = [lh for c in clusters for b in c.berns for lh in b.lhs]
    live = [lh.node for lh in all_lhs]
    for lh in all_lhs:
        live.extend(lh.end_nodes)
    remap = nodes.compact(np.array(live, np.int64))
    for lh in all_lhs:
        lh.node = int(remap[lh.node])
        if lh.end_nodes:
            lh.end_nodes = tuple(remap[list(lh.end_nodes)].tolist())
    if nodes.n > 0.5 * cap:  # mostly live: make room now
        nodes._reserve(cap - nodes.n + 1)
