"""Data association of one scan inside one group of clusters, and pruning.

A group is a set of plots and the clusters of Bernoullis they gate with.
For each parent global hypothesis the children come from the ranked
assignments of the miss-normalised cost matrix of methods note §1.5
(plots as rows; previous Bernoullis, then one new-trajectory column per
plot). The merged table is then pruned (existence, weight, count, local
hypotheses per Bernoulli) and split again where Bernoullis are independent.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ._hypotheses import Bernoulli, Cluster, LocalHyp
from .assignment import kbest_assignments

IntArray = NDArray[np.int64]
Array = NDArray[np.float64]
#: Groups with more plots than this get one child per parent (the best assignment).
LARGE_GROUP_PLOTS = 40


def logsumexp(x: Array) -> float:
    m = float(x.max())
    return m + math.log(float(np.exp(x - m).sum()))


@dataclass
class ScanContext:
    """Per-scan quantities the group update reads (all indexed by slot / pair / plot)."""

    p_detect: Array  # (n_slots,) p_D at the predicted mean, 0 outside the cover
    ln_miss: Array  # (n_slots,) ln w_miss
    det_pairs: dict[int, list[tuple[int, int]]]  # slot -> [(plot, pair)]
    ln_det: Array  # (n_pairs,) ln w_det
    ln_new: Array  # (m,) ln(e_j + λ_c)
    miss_child: Callable[[LocalHyp], LocalHyp]
    det_child: Callable[[int, int], LocalHyp]  # (pair, plot) -> new hypothesis
    born: Callable[[int], Bernoulli]  # plot -> new Bernoulli with one local hypothesis


def merge_clusters(
    clusters: list[Cluster], cap: int
) -> tuple[list[Bernoulli], IntArray, Array, bool]:
    """Cartesian product of the clusters' global hypotheses (weights multiply)."""
    berns: list[Bernoulli] = []
    table = np.zeros((1, 0), np.int64)
    logw = np.zeros(1)
    capped = False
    for c in clusters:
        g1, g2 = logw.size, c.logw.size
        table = np.hstack([np.repeat(table, g2, axis=0), np.tile(c.table, (g1, 1))])
        logw = (logw[:, None] + c.logw[None, :]).ravel()
        berns.extend(c.berns)
        if logw.size > cap:
            order = np.argsort(-logw, kind="stable")[:cap]
            table, logw = table[order], logw[order]
            capped = True
    return berns, table, logw, capped


def _children(C: Array, k: int) -> list[tuple[float, IntArray]]:
    """The ``k`` cheapest assignments of ``C`` (fast paths for tiny problems)."""
    m = C.shape[0]
    if m == 0:
        return [(0.0, np.zeros(0, np.int64))]
    finite = np.isfinite(C)
    if m == 1:
        cols = np.flatnonzero(finite[0])
        order = np.argsort(C[0, cols], kind="stable")[:k]
        return [(float(C[0, c]), np.array([c], np.int64)) for c in cols[order]]
    n_old = C.shape[1] - m
    if not finite[:, :n_old].any():  # every plot starts its own trajectory
        cols = np.arange(n_old, n_old + m, dtype=np.int64)
        return [(float(C[np.arange(m), cols].sum()), cols)]
    return kbest_assignments(C, k)


def update_group(
    clusters: list[Cluster],
    plots: list[int],
    ctx: ScanContext,
    *,
    max_hyp: int,
    count_cap: Callable[[str], None],
) -> tuple[list[Bernoulli], IntArray, Array]:
    """Children of every global hypothesis of the merged group; unpruned."""
    if len(clusters) == 1:
        c = clusters[0]
        berns, table, logw = c.berns, c.table, c.logw
    else:
        berns, table, logw, capped = merge_clusters(clusters, 10 * max_hyp)
        if capped:
            count_cap("merged_hypotheses")
        logw = logw - logsumexp(logw)
    nb, mg = len(berns), len(plots)
    if mg > LARGE_GROUP_PLOTS and logw.size > 1:
        # a squall of plots: only the best parent, and only its best child (below)
        count_cap("large_group")
        best = int(np.argmax(logw))
        table, logw = table[best : best + 1], np.zeros(1)
    jloc = {j: i for i, j in enumerate(plots)}
    new_lhs: list[list[LocalHyp]] = [[] for _ in range(nb)]
    keys: list[dict[tuple[int, int], int]] = [{} for _ in range(nb)]
    rows: list[list[int]] = []
    weights: list[float] = []
    if mg:
        base_C = np.full((mg, nb + mg), np.inf)
        base_C[np.arange(mg), nb + np.arange(mg)] = -ctx.ln_new[plots]
    p_detect, ln_miss, det_pairs, ln_det = ctx.p_detect, ctx.ln_miss, ctx.det_pairs, ctx.ln_det
    table_l = table.tolist()
    for g, parent in enumerate(table_l):
        ln_miss_total = 0.0
        gated = False
        if mg:
            C = base_C.copy()
        for i, h in enumerate(parent):
            if h < 0:
                continue
            s = berns[i].lhs[h].slot
            if s < 0 or p_detect[s] <= 0.0:
                continue
            ln_miss_total += ln_miss[s]
            for j, pair in det_pairs.get(s, ()):
                jl = jloc.get(j)
                if jl is not None:
                    C[jl, i] = ln_miss[s] - ln_det[pair]
                    gated = True
        if not mg:
            children = [(0.0, [])]
        elif not gated:
            children = [(float(-ctx.ln_new[plots].sum()), list(range(nb, nb + mg)))]
        else:
            k = max(1, math.ceil(max_hyp * math.exp(logw[g])))
            if mg > LARGE_GROUP_PLOTS:
                if k > 1:
                    count_cap("large_group")
                k = 1
            children = [(c, a.tolist()) for c, a in _children(C, k)]
        for cost, cols in children:
            took = {c: j for j, c in enumerate(cols) if c < nb}
            row = []
            for i, h in enumerate(parent):
                if h < 0:
                    row.append(-1)
                    continue
                jl = took.get(i)
                key = (h, -1 if jl is None else plots[jl])
                idx = keys[i].get(key)
                if idx is None:
                    old = berns[i].lhs[h]
                    if key[1] < 0:
                        child = ctx.miss_child(old)
                    else:
                        pair = next(p for jj, p in det_pairs[old.slot] if jj == key[1])
                        child = ctx.det_child(pair, key[1])
                    idx = len(new_lhs[i])
                    new_lhs[i].append(child)
                    keys[i][key] = idx
                row.append(idx)
            row.extend(0 if c == nb + j else -1 for j, c in enumerate(cols))
            rows.append(row)
            weights.append(logw[g] + ln_miss_total - cost)
    out_berns = [Bernoulli(b.bid, lhs) for b, lhs in zip(berns, new_lhs, strict=True)]
    out_berns.extend(ctx.born(j) for j in plots)
    return out_berns, np.array(rows, np.int64).reshape(len(rows), nb + mg), np.array(weights)


def prune(
    berns: list[Bernoulli],
    table: IntArray,
    logw: Array,
    *,
    existence_prune: float,
    log_weight_prune: float,
    max_global: int,
    max_local: int,
    count_cap: Callable[[str], None],
    node_parent: IntArray | None = None,
    n_back: int = 0,
) -> list[Cluster]:
    """Prune a cluster's hypotheses, clean up the table and split off independent Bernoullis."""
    table = table.copy()
    # low-existence local hypotheses become "absent" (methods note §1.9)
    for i, b in enumerate(berns):
        low = [k for k, lh in enumerate(b.lhs) if lh.r < existence_prune]
        if low:
            col = table[:, i]
            col[np.isin(col, low)] = -1
    if logw.size > 1:
        table, logw = _merge_duplicates(table, logw)
        logw = logw - logsumexp(logw)
        keep = logw >= -log_weight_prune + float(logw.max())
        if keep.sum() > max_global:
            count_cap("max_global_hypotheses")
            order = np.argsort(-logw, kind="stable")
            keep = np.zeros_like(keep)
            keep[order[:max_global]] = True
        if not keep.all():
            table, logw = table[keep], logw[keep]
    if n_back > 0 and node_parent is not None and logw.size > 1:
        table, logw = _n_scan(berns, table, logw, node_parent, n_back)
    if logw.size > 1:
        # cap on local hypotheses per Bernoulli: keep those of the heaviest global hypotheses
        for i in range(len(berns)):
            if len(berns[i].lhs) <= max_local:
                continue
            col = table[:, i]
            used = np.unique(col[col >= 0])
            if used.size > max_local:
                count_cap("max_local_hypotheses")
                best = np.full(len(berns[i].lhs), -np.inf)
                np.maximum.at(best, col[col >= 0], logw[col >= 0])
                allowed = np.argsort(-best, kind="stable")[:max_local]
                ok = (col < 0) | np.isin(col, allowed)
                table, logw = table[ok], logw[ok]
        logw = logw - logsumexp(logw)
    else:
        logw = np.zeros(1)
    out: list[Cluster] = []
    if logw.size == 1:  # one global hypothesis: every Bernoulli is independent
        for b, h in zip(berns, table[0].tolist(), strict=True):
            if h >= 0:
                b.lhs = [b.lhs[h]]
                out.append(Cluster([b], np.zeros((1, 1), np.int64), np.zeros(1)))
        return out
    shared_cols: list[int] = []
    for i, b in enumerate(berns):
        col = table[:, i]
        if (col < 0).all():
            continue  # absent everywhere: the Bernoulli is gone
        used = np.unique(col[col >= 0])
        if used.size != len(b.lhs):
            remap = np.full(len(b.lhs), -1, np.int64)
            remap[used] = np.arange(used.size)
            b.lhs = [b.lhs[u] for u in used.tolist()]
            table[:, i] = np.where(col >= 0, remap[np.maximum(col, 0)], -1)
            col = table[:, i]
        if (col == col[0]).all():  # independent of the rest: its own cluster
            out.append(Cluster([b], col[:1].reshape(1, 1).copy(), np.zeros(1)))
        else:
            shared_cols.append(i)
    if shared_cols:
        sub = table[:, shared_cols]
        sub, lw = _merge_duplicates(sub, logw)
        lw = lw - logsumexp(lw)
        out.append(Cluster([berns[i] for i in shared_cols], sub, lw))
    return out


def _ancestor(parent: IntArray, node: int, n: int) -> int:
    """The node ``n`` steps up the chain, ``-2`` if the chain is shorter."""
    for _ in range(n):
        node = int(parent[node])
        if node < 0:
            return -2
    return node


def _n_scan(
    berns: list[Bernoulli], table: IntArray, logw: Array, parent: IntArray, n_back: int
) -> tuple[IntArray, Array]:
    """Track-oriented N-scan pruning (methods note §1.9).

    Drop the global hypotheses that disagree with the best one about a
    decision more than ``n_back`` nodes back: a different ancestor ``n_back``
    nodes up the chain of some Bernoulli, or that Bernoulli present in one and
    absent in the other while its chain is longer than ``n_back`` nodes.
    """
    best = int(np.argmax(logw))
    ok = np.ones(logw.size, bool)
    for i, b in enumerate(berns):
        col = table[:, i]
        hb = int(col[best])
        if (col == hb).all():
            continue
        anc = [_ancestor(parent, lh.node, n_back) for lh in b.lhs]
        ref = anc[hb] if hb >= 0 else -2
        for g in np.flatnonzero(col != hb):
            h = int(col[g])
            a = anc[h] if h >= 0 else -2
            if hb >= 0 and h >= 0:
                if a != ref and a != -2 and ref != -2:
                    ok[g] = False
            elif a != -2 or ref != -2:  # present in one, absent in the other, and old
                ok[g] = False
    return table[ok], logw[ok]


def _merge_duplicates(table: IntArray, logw: Array) -> tuple[IntArray, Array]:
    """Merge identical rows by adding their weights."""
    if table.shape[0] <= 1:
        return table, logw
    seen: dict[tuple[int, ...], int] = {}
    first: list[int] = []
    acc: list[float] = []
    for g, row in enumerate(map(tuple, table.tolist())):
        k = seen.get(row)
        if k is None:
            seen[row] = len(first)
            first.append(g)
            acc.append(float(logw[g]))
        else:
            acc[k] = float(np.logaddexp(acc[k], logw[g]))
    if len(first) == table.shape[0]:
        return table, logw
    return table[first], np.array(acc)
