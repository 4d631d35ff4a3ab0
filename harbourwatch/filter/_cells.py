"""Cells of plots for extended vessels: candidate partitions, groups, association over partitions.

A large ship gives several plots per scan, so the unit of association is a
cell (a set of plots one vessel gave), not a plot (methods note §9.5).
Candidate partitions of a scan's plots into cells:

* every plot its own cell (the point-target association, always kept);
* distance partitioning: cells are the connected components of plots
  closer than a threshold, for each threshold of :data:`LADDER_M`;
* the same components split by the predicted vessel each plot gates best
  with (prediction-guided splitting: two small craft 80 m apart beside a
  hull stay two cells);
* prediction-guided cells: the plots that gate best with one predicted
  vessel.

Each partition is an assignment problem of its cells to the existing
Bernoullis, a new vessel or clutter, ranked with Murty's algorithm as for
plots (:func:`update_partitions`). A cell of one plot is the plot itself
(index ``j < m``); a cell of several plots gets an index ``m + c``.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray
from scipy.spatial import cKDTree

from harbourwatch.filter._association import (
    LARGE_GROUP_PLOTS,
    ScanContext,
    _children,
    logsumexp,
    merge_clusters,
)
from harbourwatch.filter._hypotheses import Bernoulli, Cluster, LocalHyp
from harbourwatch.filter._scanstep import collect_groups

__all__ = [
    "LADDER_M", "CellBook", "scan_partitions", "cell_groups", "update_partitions", "has_close_plots",
]

IntArray = NDArray[np.int64]
#: Distance thresholds of the distance partitioning (m).
LADDER_M = (60.0, 130.0, 260.0)
#: At most this many partitions per group (the cost driver; counted when it bites).
MAX_PARTITIONS = 8
#: A partition whose best assignment is this much less likely than the best partition's
#: (relative weight) gives no children.
PARTITION_PRUNE = 1e-3


class CellBook:
    """The distinct multi-plot cells of one scan, indexed ``m, m + 1, ...``."""

    def __init__(self, m: int) -> None:
        self.m = m
        self.cells: list[tuple[int, ...]] = []
        self._index: dict[tuple[int, ...], int] = {}

    def add(self, plots: list[int]) -> int:
        """Index of the cell made of ``plots`` (a plot's own index for a single plot)."""
        if len(plots) == 1:
            return plots[0]
        key = tuple(sorted(plots))
        k = self._index.get(key)
        if k is None:
            k = self._index[key] = self.m + len(self.cells)
            self.cells.append(key)
        return k

    def plots_of(self, aug: int) -> tuple[int, ...]:
        """The plots of cell ``aug``."""
        return (aug,) if aug < self.m else self.cells[aug - self.m]


def _components(m: int, a: IntArray, b: IntArray) -> IntArray:
    """Connected components of the graph on ``m`` plots with edges ``(a, b)``: a label per plot.

    Union-find: a scan has tens of close pairs, for which scipy's sparse
    graph costs more in setting up than in solving. Only which plots share
    a label matters (cells are listed by their first plot).
    """
    parent = list(range(m))

    def find(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for x, y in zip(a.tolist(), b.tolist(), strict=True):
        rx, ry = find(x), find(y)
        if rx != ry:
            parent[max(rx, ry)] = min(rx, ry)
    return np.array([find(x) for x in range(m)], np.int64)


def _groups(labels: IntArray) -> list[list[int]]:
    out: dict[int, list[int]] = {}
    for j, lab in enumerate(labels.tolist()):
        out.setdefault(lab, []).append(j)
    return list(out.values())


def _fill(best: IntArray, lab: IntArray, z: NDArray[np.float64]) -> IntArray:
    """``best`` with each unlabelled plot given the label of the nearest labelled plot of its cell."""
    out = best.copy()
    for j in np.flatnonzero(best < 0).tolist():
        same = np.flatnonzero((lab == lab[j]) & (best >= 0))
        if same.size:
            out[j] = best[same[np.argmin(np.hypot(*(z[same] - z[j]).T))]]
    return out


def scan_partitions(z: NDArray[np.float64], best: IntArray, book: CellBook,
                    ladder: tuple[float, ...] = LADDER_M) -> list[list[int]]:
    """Candidate partitions of a scan's plots (lists of cell indices), singletons first.

    ``best`` is, per plot, the hypothesis slot it gates best with (-1: none).
    Only partitions with a multi-plot cell are added after the singletons;
    every partition covers each plot exactly once.
    """
    m = z.shape[0]
    parts: list[list[int]] = [list(range(m))]
    if m < 2:
        return parts
    seen = {tuple(range(m))}
    label_sets: list[IntArray] = []
    pairs = cKDTree(z).query_pairs(ladder[-1], output_type="ndarray")
    if pairs.size:
        d = np.hypot(*(z[pairs[:, 0]] - z[pairs[:, 1]]).T)
        for thr in ladder:
            sel = d <= thr
            if sel.any():
                lab = _components(m, pairs[sel, 0], pairs[sel, 1])
                label_sets.append(lab)
                # split by the predicted vessel each plot gates best with
                label_sets.append(lab * (int(best.max()) + 2) + (_fill(best, lab, z) + 1))
    if (np.bincount(best[best >= 0]) > 1).any():
        label_sets.append(np.where(best >= 0, best, -1 - np.arange(m)))
    for lab in label_sets:
        _, lab = np.unique(lab, return_inverse=True)
        cells = sorted(book.add(g) for g in _groups(lab.astype(np.int64)))
        key = tuple(cells)
        if key not in seen and len(cells) < m:
            seen.add(key)
            parts.append(cells)
    return parts


def cell_groups(m: int, n_clusters: int, pair_slot: list[int], pair_cell: list[int],
                slot_cluster: list[int], slots_in_cover: list[int], book: CellBook
                ) -> tuple[list[tuple[list[int], list[int]]], set[int]]:
    """As ``_scanstep.group_work``, with the plots of every multi-plot cell in one group."""
    parent = list(range(m + n_clusters))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    def union(a: int, b: int) -> None:
        ra, rb = find(a), find(b)
        if ra != rb:
            parent[ra] = rb

    for cell in book.cells:
        for j in cell[1:]:
            union(cell[0], j)
    for i, c in zip(pair_slot, pair_cell, strict=True):
        union(book.plots_of(c)[0], m + slot_cluster[i])
    return collect_groups(find, m, n_clusters, slot_cluster, slots_in_cover)


def group_partitions(plots: list[int], parts: list[list[int]], book: CellBook) -> list[list[int]]:
    """The scan's partitions restricted to one group's plots (distinct, singletons first)."""
    inside = set(plots)
    out: list[list[int]] = []
    seen: set[tuple[int, ...]] = set()
    for p in parts:
        cells = [c for c in p if book.plots_of(c)[0] in inside]
        key = tuple(cells)
        if key not in seen:
            seen.add(key)
            out.append(cells)
    return out


def update_partitions(
    clusters: list[Cluster],
    partitions: list[list[int]],
    ctx: ScanContext,
    *,
    max_hyp: int,
    count_cap: Callable[[str], None],
) -> tuple[list[Bernoulli], list[list[int]], list[float]]:
    """Children of every global hypothesis over every candidate partition; unpruned.

    For each parent global hypothesis and each partition, the ranked
    assignments of the partition's cells (rows) to the previous Bernoullis
    or a new vessel per cell (columns), as ``_association.update_group``
    does for plots. Children of all partitions share the local hypotheses
    they have in common, and each distinct cell gets one new Bernoulli.
    """
    if len(partitions) > MAX_PARTITIONS:
        count_cap("max_partitions")
        partitions = partitions[:MAX_PARTITIONS]
    if len(clusters) == 1:
        berns, table, logw = clusters[0].berns, clusters[0].table, clusters[0].logw
    else:
        berns, table, logw, capped = merge_clusters(clusters, 10 * max_hyp)
        if capped:
            count_cap("merged_hypotheses")
        logw = logw - logsumexp(logw)
    nb = len(berns)
    all_cells = sorted({c for p in partitions for c in p})
    new_lhs: list[list[LocalHyp]] = [[] for _ in range(nb)]
    keys: list[dict[tuple[int, int], int]] = [{} for _ in range(nb)]
    rows: list[list[int]] = []
    weights: list[float] = []
    p_detect, ln_miss, det_pairs, ln_det = ctx.p_detect, ctx.ln_miss, ctx.det_pairs, ctx.ln_det
    table_l, logw_l = table.tolist(), logw.tolist()
    for g, parent in enumerate(table_l):
        ln_miss_total = 0.0
        active: list[tuple[int, int]] = []
        for i, h in enumerate(parent):
            if h < 0:
                continue
            s = berns[i].lhs[h].slot
            if s < 0 or p_detect[s] <= 0.0:
                continue
            ln_miss_total += ln_miss[s]
            active.append((i, s))
        k = max(1, math.ceil(max_hyp * math.exp(logw_l[g])))
        mats = []
        for cells in partitions:
            mg = len(cells)
            rloc = {c: r for r, c in enumerate(cells)}
            C = np.full((mg, nb + mg), np.inf)
            C[np.arange(mg), nb + np.arange(mg)] = -ctx.ln_new[cells]
            for i, s in active:
                for c, pair in det_pairs.get(s, ()):
                    r = rloc.get(c)
                    if r is not None:
                        C[r, i] = ln_miss[s] - ln_det[pair]
            mats.append(C)
        # the k children are shared out by each partition's best weight (its best first)
        firsts = [_children(C, 1) for C in mats]
        best_cost = [f[0][0] if f else math.inf for f in firsts]
        top = min(best_cost)
        share = [math.exp(top - c) for c in best_cost]
        total = sum(share)
        for cells, C, first, sh in zip(partitions, mats, firsts, share, strict=True):
            if not first or sh < PARTITION_PRUNE:
                continue
            kk = max(1, math.ceil(k * sh / total))
            if len(cells) > LARGE_GROUP_PLOTS:  # a squall of plots: the best assignment only
                if kk > 1:
                    count_cap("large_group")
                kk = 1
            for cost, cols in (first if kk == 1 else _children(C, kk)):
                took = {int(col): cells[r] for r, col in enumerate(cols.tolist()) if col < nb}
                row: list[int] = []
                for i, h in enumerate(parent):
                    if h < 0:
                        row.append(-1)
                        continue
                    c = took.get(i, -1)
                    key = (h, c)
                    idx = keys[i].get(key)
                    if idx is None:
                        old = berns[i].lhs[h]
                        if c < 0:
                            child = ctx.miss_child(old)
                        else:
                            pair = next(p for cc, p in det_pairs[old.slot] if cc == c)
                            child = ctx.det_child(pair, c)
                        idx = keys[i][key] = len(new_lhs[i])
                        new_lhs[i].append(child)
                    row.append(idx)
                born = {cells[r] for r, col in enumerate(cols.tolist()) if col >= nb}
                row.extend(0 if c in born else -1 for c in all_cells)
                rows.append(row)
                weights.append(logw_l[g] + ln_miss_total - cost)
    out = [Bernoulli(b.bid, lhs) for b, lhs in zip(berns, new_lhs, strict=True)]
    out.extend(ctx.born(c) for c in all_cells)
    return out, rows, weights


def has_close_plots(z: NDArray[np.float64], min_plots: int = 3) -> bool:
    """Whether ``min_plots`` (2 or 3) plots of the scan are connected within the widest distance.

    Three connected plots exist exactly when some plot has two neighbours
    (a connected component of three or more has a node of degree two).
    Pairwise distances, cheap for a scan's tens of plots.
    """
    m = z.shape[0]
    if m < min_plots:
        return False
    if m > 400:  # a squall: the tree is cheaper than the full matrix
        pairs = cKDTree(z).query_pairs(LADDER_M[-1], output_type="ndarray")
        if min_plots <= 2 or not pairs.size:
            return bool(pairs.size)
        return bool((np.bincount(pairs.ravel(), minlength=m) >= 2).any())
    d2 = (z[:, None, 0] - z[None, :, 0]) ** 2 + (z[:, None, 1] - z[None, :, 1]) ** 2
    deg = (d2 <= LADDER_M[-1] ** 2).sum(axis=1) - 1
    return bool((deg >= min_plots - 1).any())
