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

from harbourwatch.filter._hypotheses import Bernoulli, Cluster, LocalHyp
from harbourwatch.filter.assignment import kbest_assignments

IntArray = NDArray[np.int64]
Array = NDArray[np.float64]
#: Table and weights of a cluster of one Bernoulli with one hypothesis (shared, read-only).
LONE_TABLE = np.zeros((1, 1), np.int64)
LONE_TABLE.flags.writeable = False
LONE_LOGW = np.zeros(1)
LONE_LOGW.flags.writeable = False
#: Groups with more plots than this get one child per parent (the best assignment).
LARGE_GROUP_PLOTS = 40


def logsumexp(x: Array) -> float:
    m = float(x.max())
    return m + math.log(float(np.exp(x - m).sum()))


@dataclass
class ScanContext:
    """Per-scan quantities the group update reads (all indexed by slot / pair / plot)."""

    p_detect: list[float]  # (n_slots,) p_D at the predicted mean, 0 outside the cover
    ln_miss: list[float]  # (n_slots,) ln w_miss
    det_pairs: dict[int, list[tuple[int, int]]]  # slot -> [(plot, pair)]
    ln_det: list[float]  # (n_pairs,) ln w_det
    ln_new: Array  # (m,) ln(e_j + λ_c)
    miss_child: Callable[[LocalHyp], LocalHyp]
    det_child: Callable[[int, int], LocalHyp]  # (pair, plot) -> new hypothesis
    born: Callable[[int], Bernoulli]  # plot -> new Bernoulli with one local hypothesis
    ln_new_list: list[float]  # ln_new as plain floats


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
) -> tuple[list[Bernoulli], list[list[int]], list[float]]:
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
    if mg > 1:
        base_C = np.full((mg, nb + mg), np.inf)
        base_C[np.arange(mg), nb + np.arange(mg)] = -ctx.ln_new[plots]
    p_detect, ln_miss, det_pairs, ln_det = ctx.p_detect, ctx.ln_miss, ctx.det_pairs, ctx.ln_det
    ln_new_one = float(-ctx.ln_new[plots[0]]) if mg == 1 else 0.0
    table_l = table.tolist()
    logw_l = logw.tolist()
    for g, parent in enumerate(table_l):
        ln_miss_total = 0.0
        gated = False
        # one plot: the options are listed directly as (cost, column)
        options = [(ln_new_one, nb)] if mg == 1 else []
        if mg > 1:
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
                    if mg == 1:
                        options.append((float(ln_miss[s] - ln_det[pair]), i))
                    else:
                        C[jl, i] = ln_miss[s] - ln_det[pair]
                    gated = True
        children: list[tuple[float, list[int]]]
        if not mg:
            children = [(0.0, [])]
        elif not gated:
            children = [(float(-ctx.ln_new[plots].sum()), list(range(nb, nb + mg)))]
        else:
            k = max(1, math.ceil(max_hyp * math.exp(logw_l[g])))
            if mg > LARGE_GROUP_PLOTS:
                if k > 1:
                    count_cap("large_group")
                k = 1
            if mg == 1:
                children = [(c, [col]) for c, col in sorted(options)[:k]]
            else:
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
            weights.append(logw_l[g] + ln_miss_total - cost)
    out_berns = [Bernoulli(b.bid, lhs) for b, lhs in zip(berns, new_lhs, strict=True)]
    out_berns.extend(ctx.born(j) for j in plots)
    return out_berns, rows, weights


def update_single(
    c: Cluster, plots: list[int], ctx: ScanContext, *, max_hyp: int
) -> tuple[list[Bernoulli], list[list[int]], list[float]]:
    """:func:`update_group` for the common case of one Bernoulli and at most one plot.

    Same children, same order, same weights; only the generic bookkeeping
    is left out.
    """
    (b,) = c.berns
    mg = len(plots)
    j = plots[0] if mg else -1
    cost_new = float(-ctx.ln_new[j]) if mg else 0.0
    p_detect, ln_miss, det_pairs, ln_det = ctx.p_detect, ctx.ln_miss, ctx.det_pairs, ctx.ln_det
    new_lhs: list[LocalHyp] = []
    keys: dict[tuple[int, int], int] = {}
    rows: list[list[int]] = []
    weights: list[float] = []
    for h, w in zip(c.table[:, 0].tolist(), c.logw.tolist(), strict=True):
        miss = 0.0
        pair = -1
        if h >= 0:
            s = b.lhs[h].slot
            if s >= 0 and p_detect[s] > 0.0:
                miss = ln_miss[s]
                if mg:
                    for jj, p in det_pairs.get(s, ()):
                        if jj == j:
                            pair = p
                            break
        if not mg:
            children = [(0.0, -1)]
        elif pair < 0:
            children = [(cost_new, 1)]
        else:
            k = max(1, math.ceil(max_hyp * math.exp(w)))
            children = sorted([(cost_new, 1), (miss - ln_det[pair], 0)])[:k]
        for cost, col in children:
            if h < 0:
                idx = -1
            else:
                key = (h, j if col == 0 else -1)
                idx = keys.get(key, -1)
                if idx < 0:
                    old = b.lhs[h]
                    child = ctx.det_child(pair, j) if col == 0 else ctx.miss_child(old)
                    idx = len(new_lhs)
                    new_lhs.append(child)
                    keys[key] = idx
            rows.append([idx, 0 if col == 1 else -1] if mg else [idx])
            weights.append(w + miss - cost)
    out = [Bernoulli(b.bid, new_lhs)]
    if mg:
        out.append(ctx.born(j))
    return out, rows, weights


def _lse(w: list[float]) -> float:
    m = max(w)
    return m + math.log(math.fsum([math.exp(x - m) for x in w]))


def _merge_rows(rows: list[list[int]], logw: list[float]) -> tuple[list[list[int]], list[float]]:
    """Merge identical rows (global hypotheses) by adding their weights; keeps first order."""
    if len(rows) <= 1:
        return rows, logw
    acc: dict[tuple[int, ...], int] = {}
    out_rows: list[list[int]] = []
    out_w: list[float] = []
    for row, w in zip(rows, logw, strict=True):
        key = tuple(row)
        k = acc.get(key)
        if k is None:
            acc[key] = len(out_rows)
            out_rows.append(row)
            out_w.append(w)
        else:
            a, b = out_w[k], w
            out_w[k] = max(a, b) + math.log1p(math.exp(-abs(a - b)))
    return out_rows, out_w


def prune(
    berns: list[Bernoulli],
    rows: list[list[int]],
    logw: list[float],
    *,
    existence_prune: float,
    log_weight_prune: float,
    max_global: int,
    max_local: int,
    count_cap: Callable[[str], None],
    node_parent: IntArray | None = None,
    n_back: int = 0,
) -> list[Cluster]:
    """Prune a cluster's hypotheses, clean up the table and split off independent Bernoullis.

    ``rows`` (one list per global hypothesis, local hypothesis index per
    Bernoulli or -1) is modified in place. Tables are tiny, so plain Python
    beats numpy here.
    """
    # low-existence local hypotheses become "absent" (methods note §1.9)
    for i, b in enumerate(berns):
        if len(b.lhs) == 1:
            if b.lhs[0].r < existence_prune:
                for row in rows:
                    if row[i] == 0:
                        row[i] = -1
            continue
        low = {k for k, lh in enumerate(b.lhs) if lh.r < existence_prune}
        if low:
            for row in rows:
                if row[i] in low:
                    row[i] = -1
    rows, logw = _merge_rows(rows, logw)
    if len(rows) > 1:
        best = max(logw)
        keep = [g for g, w in enumerate(logw) if w >= best - log_weight_prune]
        if len(keep) > max_global:
            count_cap("max_global_hypotheses")
            keep = sorted(keep, key=lambda g: -logw[g])[:max_global]
            keep.sort()
        if len(keep) < len(rows):
            rows, logw = [rows[g] for g in keep], [logw[g] for g in keep]
    if n_back > 0 and node_parent is not None and len(rows) > 1:
        rows, logw = _n_scan(berns, rows, logw, node_parent, n_back)
    if len(rows) > 1:
        for i, b in enumerate(berns):
            if len(b.lhs) <= max_local:
                continue
            best_of: dict[int, float] = {}
            for row, w in zip(rows, logw, strict=True):
                h = row[i]
                if h >= 0 and w > best_of.get(h, -math.inf):
                    best_of[h] = w
            if len(best_of) > max_local:
                count_cap("max_local_hypotheses")
                allowed = set(sorted(best_of, key=lambda h: (-best_of[h], h))[:max_local])
                keep = [g for g, row in enumerate(rows) if row[i] < 0 or row[i] in allowed]
                rows, logw = [rows[g] for g in keep], [logw[g] for g in keep]
    out: list[Cluster] = []
    if len(rows) == 1:  # one global hypothesis: every Bernoulli is independent
        for b, h in zip(berns, rows[0], strict=True):
            if h >= 0:
                b.lhs = [b.lhs[h]]
                out.append(Cluster([b], LONE_TABLE, LONE_LOGW))
        return out
    total = _lse(logw)
    logw = [w - total for w in logw]
    shared_cols: list[int] = []
    for i, b in enumerate(berns):
        col = [row[i] for row in rows]
        used = sorted(set(col))
        if used[0] < 0:  # -1 (absent) is the only negative entry
            del used[0]
        if not used:
            continue  # absent everywhere: the Bernoulli is gone
        if len(used) != len(b.lhs):
            remap = {h: k for k, h in enumerate(used)}
            b.lhs = [b.lhs[h] for h in used]
            for row in rows:
                if row[i] >= 0:
                    row[i] = remap[row[i]]
            col = [row[i] for row in rows]
        if col.count(col[0]) == len(col):  # independent of the rest: its own cluster
            b.lhs = [b.lhs[col[0]]]
            out.append(Cluster([b], LONE_TABLE, LONE_LOGW))
        else:
            shared_cols.append(i)
    if shared_cols:
        if len(shared_cols) == len(berns):  # rows are already distinct (merged above)
            sub, lw = rows, logw
        else:
            sub, lw = _merge_rows([[row[i] for i in shared_cols] for row in rows], logw)
        total = _lse(lw)
        out.append(
            Cluster(
                [berns[i] for i in shared_cols],
                np.array(sub, np.int64).reshape(len(sub), len(shared_cols)),
                np.array([w - total for w in lw]),
            )
        )
    return out


def _n_scan(
    berns: list[Bernoulli],
    rows: list[list[int]],
    logw: list[float],
    parent: IntArray,
    n_back: int,
) -> tuple[list[list[int]], list[float]]:
    """Track-oriented N-scan pruning (methods note §1.9).

    Drop the global hypotheses that disagree with the best one about a
    decision more than ``n_back`` nodes back: a different ancestor ``n_back``
    nodes up the chain of some Bernoulli (``-2`` if the chain is shorter), or
    that Bernoulli present in one and absent in the other while its chain is
    longer than ``n_back`` nodes.
    """
    best = max(range(len(logw)), key=logw.__getitem__)
    ok = [True] * len(rows)
    item = parent.item
    best_row = rows[best]
    for i, b in enumerate(berns):
        hb = best_row[i]
        col = [row[i] for row in rows]
        if col.count(hb) == len(col):  # every global hypothesis agrees with the best
            continue
        lhs = b.lhs
        anc = {-1: -2}
        via: dict[int, int] = {}  # parent node -> its ancestor n_back - 1 up (siblings share it)
        for h in col:
            if h not in anc:
                node = item(lhs[h].node)
                if node >= 0 and node not in via:
                    up = node
                    for _ in range(n_back - 1):
                        up = item(up)
                        if up < 0:
                            up = -2
                            break
                    via[node] = up
                anc[h] = via[node] if node >= 0 else -2
        ref = anc[hb]
        for g, h in enumerate(col):
            if h == hb or not ok[g]:
                continue
            a = anc[h]
            if hb >= 0 and h >= 0:
                if a != ref and a != -2 and ref != -2:
                    ok[g] = False
            elif a != -2 or ref != -2:  # present in one, absent in the other, and old
                ok[g] = False
    if all(ok):
        return rows, logw
    keep = [g for g in range(len(rows)) if ok[g]]
    return [rows[g] for g in keep], [logw[g] for g in keep]
