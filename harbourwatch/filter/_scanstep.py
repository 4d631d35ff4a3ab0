"""Pieces of one scan of the filter: the children of local hypotheses, and grouping.

:class:`ChildMaker` makes the missed-detection, detection and new-trajectory
children of one scan and queues the nodes they need; the queue is written in
one batch at the end of the scan (``_kernels.write_nodes``), and each queued
node's index is known in advance (the store's size plus its queue position).
:func:`group_work` splits the scan into independent groups of plots and the
clusters they gate with.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._association import LONE_LOGW, LONE_TABLE, ScanContext
from harbourwatch.filter._hypotheses import (
    ALIVE_FLOOR,
    Bernoulli,
    Cluster,
    LocalHyp,
    miss_update,
    step_and_miss,
)
from harbourwatch.io.records import FilterSettings

__all__ = ["ChildMaker", "group_work", "fast_path", "MISS", "DET", "NEW"]

MISS, DET, NEW = 0, 1, 2  # kinds of queued nodes


class ChildMaker:
    """Children of one scan's local hypotheses, with their nodes queued.

    Parameters
    ----------
    base
        Index the first queued node will get (the node store's size).
    leaf_nodes
        Node of each active local hypothesis, by slot.
    pair_slot
        Slot of the hypothesis of each gated (hypothesis, plot) pair.
    p_detect, p_survive, inside
        Per slot: detection probability at the prediction, survival
        probability over the step, and whether the predicted mean is inside
        the radar's range (a missed detection then adds a node).
    r_new
        Existence of a new trajectory started by each plot.
    existence_prune
        Children below this existence are pruned for certain (see
        ``_association.prune``): they get no node.
    new_bid
        Returns a fresh Bernoulli id.
    """

    __slots__ = (
        "base", "pend", "_leaf_nodes", "_pair_slot", "_pd", "_ps", "_inside", "_r_new",
        "_r_prune", "_new_bid", "_miss_node", "_det_node", "slot_ext", "pair_ext", "born_ext",
    )

    def __init__(
        self,
        base: int,
        leaf_nodes: list[int],
        pair_slot: list[int],
        p_detect: list[float],
        p_survive: list[float],
        inside: list[bool],
        r_new: list[float],
        existence_prune: float,
        new_bid: Callable[[], int],
    ) -> None:
        self.base = base
        self.pend: list[int] = []  # flat (kind, source, parent node) triples
        self._leaf_nodes = leaf_nodes
        self._pair_slot = pair_slot
        self._pd = p_detect
        self._ps = p_survive
        self._inside = inside
        self._r_new = r_new
        self._r_prune = existence_prune
        self._new_bid = new_bid
        self._miss_node: dict[int, int] = {}
        self._det_node: dict[int, int] = {}
        # extents (see ``_extent``): predicted per extended slot, updated per extended pair,
        # of a new vessel per multi-plot cell; point-like hypotheses have none
        self.slot_ext: dict[int, tuple[float, ...]] = {}
        self.pair_ext: dict[int, tuple[float, ...]] = {}
        self.born_ext: dict[int, tuple[float, ...]] = {}

    def miss(self, old: LocalHyp) -> LocalHyp:
        """The missed-detection child of ``old`` (``old`` itself where it cannot be detected)."""
        s = old.slot
        if s < 0 or self._pd[s] <= 0.0:
            return old
        if not self._inside[s]:  # just outside the cover: reweight, no new state
            r2, al2, endp2, _ = miss_update(old.r, old.alive, old.end_p, self._pd[s])
            child = LocalHyp(old.node, r2, al2, old.end_nodes, endp2)
            child.ext = old.ext
            if al2 < ALIVE_FLOOR:
                child.freeze()
            return child
        r2, al2, endp2 = step_and_miss(old.r, old.alive, old.end_p, self._ps[s], self._pd[s])
        if r2 < self._r_prune:
            # pruned for certain: no node is written for it (mostly clutter that started nothing)
            return LocalHyp(old.node, r2, al2, old.end_nodes, endp2)
        node = self._miss_node.get(s)
        if node is None:
            node = self._miss_node[s] = self.base + len(self.pend) // 3
            self.pend.extend((MISS, s, old.node))
        child = LocalHyp(node, r2, al2, old.end_nodes + (old.node,), endp2)
        if old.ext is not None:
            child.ext = self.slot_ext.get(s, old.ext)
        if al2 < ALIVE_FLOOR:
            child.freeze()
        return child

    def detection(self, pair: int, j: int) -> LocalHyp:
        """The child of the hypothesis of gated ``pair`` updated with its plot ``j``."""
        node = self._det_node.get(pair)
        if node is None:
            node = self._det_node[pair] = self.base + len(self.pend) // 3
            self.pend.extend((DET, pair, self._leaf_nodes[self._pair_slot[pair]]))
        child = LocalHyp(node, 1.0)
        if self.pair_ext:
            child.ext = self.pair_ext.get(pair)
        return child

    def born(self, j: int) -> Bernoulli:
        """A new Bernoulli whose trajectory starts at plot (or multi-plot cell) ``j``."""
        self.pend.extend((NEW, j, -1))
        lh = LocalHyp(self.base + len(self.pend) // 3 - 1, self._r_new[j])
        if self.born_ext:
            lh.ext = self.born_ext.get(j)
        return Bernoulli(self._new_bid(), [lh])

    def queued(self) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
        """The queued nodes' kinds, sources (slot, pair or plot) and parent nodes."""
        kinds, src, par = np.array(self.pend, np.int64).reshape(-1, 3).T
        return np.ascontiguousarray(kinds), np.ascontiguousarray(src), np.ascontiguousarray(par)


def collect_groups(
    find: Callable[[int], int],
    m: int,
    n_clusters: int,
    slot_cluster: list[int],
    slots_in_cover: list[int],
) -> tuple[list[tuple[list[int], list[int]]], set[int]]:
    """The work list of a scan from a union-find over plots ``0..m-1`` and clusters ``m + c``.

    Shared by :func:`group_work` (plots) and the cell grouping of extended vessels.
    """
    groups: dict[int, tuple[list[int], list[int]]] = {}
    for j in range(m):
        groups.setdefault(find(j), ([], []))[0].append(j)
    for ci in range(n_clusters):
        root = find(m + ci)
        if root in groups:
            groups[root][1].append(ci)
    touched = {ci for _, cis in groups.values() for ci in cis}
    miss_only = sorted({slot_cluster[s] for s in slots_in_cover} - touched)
    work: list[tuple[list[int], list[int]]] = [([], [ci]) for ci in miss_only] + sorted(
        groups.values(), key=lambda g: g[0]
    )
    return work, touched | set(miss_only)


def group_work(
    m: int,
    n_clusters: int,
    pair_slot: list[int],
    pair_plot: list[int],
    slot_cluster: list[int],
    slots_in_cover: list[int],
) -> tuple[list[tuple[list[int], list[int]]], set[int]]:
    """Independent pieces of work of one scan, and the clusters they involve.

    Plots and clusters joined by a gated pair form a group (union-find).
    Returns the work list ``[(plots, cluster indices)]`` (clusters in the
    radar's cover that gate with no plot first, each alone, then the groups
    by their first plot) and the set of clusters it involves; every other
    cluster is left as it is.
    """
    parent = list(range(m + n_clusters))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for i, j in zip(pair_slot, pair_plot, strict=True):
        ra, rb = find(j), find(m + slot_cluster[i])
        if ra != rb:
            parent[ra] = rb
    return collect_groups(find, m, n_clusters, slot_cluster, slots_in_cover)


def fast_path(clusters: list[Cluster], settings: FilterSettings, plots: list[int], cis: list[int],
              ctx: ScanContext, r_new: list[float], out: list[Cluster]) -> bool:
    """Handle the common tiny groups without the general machinery.

    Same result as :func:`update_group` followed by :func:`prune` for: a
    plot that gates with nothing; one Bernoulli with one hypothesis and no
    plot; and one Bernoulli with one hypothesis and one plot when one of
    the two children is below the weight threshold.
    """
    thr = settings.existence_prune
    if not cis:
        if len(plots) != 1:
            return False
        j = plots[0]
        if r_new[j] >= thr:
            out.append(Cluster([ctx.born(j)], LONE_TABLE, LONE_LOGW))
        return True
    if len(cis) != 1 or len(plots) > 1:
        return False
    c = clusters[cis[0]]
    if c.logw.size != 1 or len(c.berns) != 1:
        return False
    b = c.berns[0]
    lh = b.lhs[c.table.item(0)]
    if not plots:
        child = ctx.miss_child(lh)
        if child.r >= thr:
            out.append(Cluster([Bernoulli(b.bid, [child])], LONE_TABLE, LONE_LOGW))
        return True
    j = plots[0]
    pair = -1
    for jj, p in ctx.det_pairs.get(lh.slot, ()):
        if jj == j:
            pair = p
            break
    if pair < 0:
        return False
    d = ctx.ln_miss[lh.slot] + ctx.ln_new_list[j] - ctx.ln_det[pair]
    lwp = settings.log_weight_prune
    if d < -lwp:
        child = ctx.det_child(pair, j)
        out.append(Cluster([Bernoulli(b.bid, [child])], LONE_TABLE, LONE_LOGW))
        return True
    if d > lwp:
        child = ctx.miss_child(lh)
        if child.r >= thr:
            out.append(Cluster([Bernoulli(b.bid, [child])], LONE_TABLE, LONE_LOGW))
        if r_new[j] >= thr:
            out.append(Cluster([ctx.born(j)], LONE_TABLE, LONE_LOGW))
        return True
    return False
