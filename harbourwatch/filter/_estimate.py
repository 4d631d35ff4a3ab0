"""The final estimate of the set of all trajectories, and the as-seen table.

Estimator 1 of the methods note (§1.8): per cluster the global hypothesis of
largest weight; every Bernoulli whose local hypothesis has ``r`` above the
threshold; its most likely end time (argmax of β); the chain of nodes from
its start to that end, RTS-smoothed (§6.3). A trajectory whose most
likely end is "alive" but that was last seen well before the end of the feed
(it left the cover, or coasted until it was given up) ends at its last plot:
the missed detections after it carry no information about where it went.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, NamedTuple

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._hypotheses import Cluster
from harbourwatch.filter._kernels import rts_smooth_chain
from harbourwatch.filter._nodes import NodeStore
from harbourwatch.filter.output import FilterOutput
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.spill import SpillStore
from harbourwatch.models.extent import hull_length
from harbourwatch.trajectories import (
    AsSeenTable,
    SpilledAsSeenTable,
    SpilledTrajectory,
    Trajectory,
)

if TYPE_CHECKING:
    from harbourwatch.filter.tpmbm import _Filter


#: Confirmation of a large vessel: an extended trajectory is reported once it was detected
#: (a cell of plots assigned to it) in at least this many scans. A new extended vessel
#: starts with existence 1 (a cell of several plots is never clutter), so the fragments a
#: hull throws off for a few scans while it turns or stops would otherwise be reported.
MIN_EXTENDED_DETECTIONS = 12


class AsSeenRows(NamedTuple):
    """The hypotheses shown as-seen after one scan (the filtered estimate at that time)."""

    time: float
    bids: NDArray[np.int64]
    mean: NDArray[np.float64]
    sd: NDArray[np.float64]
    existence: NDArray[np.float64]
    length: NDArray[np.float64]  # hull length as known then (NaN: point-like)


#: Rows of an as-seen block: the rows of many scans are kept (or spilled) as one block.
AS_SEEN_BLOCK = 1 << 16


class AsSeenLog:
    """The as-seen rows of the run so far, gathered into blocks of about
    :data:`AS_SEEN_BLOCK` rows, each spilled to ``spill`` when given (kept in
    memory otherwise): the log costs the same few megabytes at any hour of a
    long feed, and no per-scan arrays pile up.
    """

    def __init__(self, spill: SpillStore | None = None) -> None:
        self.spill = spill
        self.rows = 0
        self._pending: list[AsSeenRows] = []
        self._pending_rows = 0
        self._blocks: list[int | tuple[NDArray[Any], ...]] = []

    def append(self, r: AsSeenRows) -> None:
        self._pending.append(r)
        self._pending_rows += r.bids.size
        self.rows += r.bids.size
        if self._pending_rows >= AS_SEEN_BLOCK:
            self._flush()

    def _flush(self) -> None:
        if not self._pending:
            return
        p = self._pending
        block = (
            np.concatenate([np.full(r.bids.size, r.time) for r in p]),
            np.concatenate([r.bids for r in p]),
            np.concatenate([r.mean for r in p]),
            np.concatenate([r.sd for r in p]),
            np.concatenate([r.existence for r in p]),
            np.concatenate([r.length for r in p]),
        )
        self._blocks.append(block if self.spill is None else self.spill.put(block))
        self._pending, self._pending_rows = [], 0

    def blocks(self) -> Iterator[tuple[NDArray[Any], ...]]:
        """``(time, bids, mean, sd, existence, length)`` of each block, in order of recording."""
        self._flush()
        for b in self._blocks:
            if isinstance(b, tuple):
                yield b
            else:
                assert self.spill is not None
                yield self.spill.get(b)

    def table(self, ids: dict[int, str]) -> AsSeenTable:
        """The rows as a table sorted by (time, track), Bernoulli ``b`` named ``ids[b]`` or ``P<b>``.

        The order of Bernoullis within a scan follows the order of the plots in
        the input, which must not show in any output. With a spill store the
        table stays on disk (:meth:`_spilled_table`); without one it is built
        in memory in two passes over the blocks (the keys, then each value
        column scattered into place), so that only the final columns and a
        few index arrays exist at once.
        """
        if self.spill is not None:
            spilled = self._spilled_table(ids, self.spill)
            if spilled is not None:
                return spilled
        tt = np.concatenate([b[0] for b in self.blocks()])
        uniq, inv = np.unique(np.concatenate([b[1] for b in self.blocks()]), return_inverse=True)
        names = np.array([ids.get(int(b), f"P{int(b)}") for b in uniq.tolist()])
        rank = np.searchsorted(np.sort(names), names)  # sorting by rank is sorting by name
        order = np.lexsort((rank[inv], tt))
        track = names[inv[order]]
        del inv, rank
        where = np.empty_like(order)
        where[order] = np.arange(order.size)  # the final row of each recorded row
        del order
        time = np.empty_like(tt)
        time[where] = tt
        del tt
        out = [np.empty((self.rows, 4)), np.empty(self.rows), np.empty(self.rows), np.empty(self.rows)]
        k = 0
        for b in self.blocks():
            n = b[0].size
            for col, values in zip(out, b[2:], strict=True):
                col[where[k : k + n]] = values
            k += n
        return AsSeenTable(time=time, track=track, mean=out[0], sd=out[1], existence=out[2],
                           length=out[3])

    def _spilled_table(self, ids: dict[int, str], store: SpillStore) -> SpilledAsSeenTable | None:
        """The sorted table written to ``store`` block by block (``None``: times out of order).

        The rows are recorded scan by scan in time order, so sorting each
        block by (time, track) sorts the whole table, but for the rows of a
        block's last time, which the next block may continue: they are
        carried over into it (a stable sort keeps the order of recording
        among equal keys, as the one-piece sort does). Memory: one block and
        the names, at any length of feed.
        """
        uniq = np.zeros(0, np.int64)
        for b in self.blocks():
            uniq = np.union1d(uniq, b[1])
        names = np.array([ids.get(int(b), f"P{int(b)}") for b in uniq.tolist()])
        by_name = np.argsort(names, kind="stable")
        rank = np.empty(by_name.size, np.int32)
        rank[by_name] = np.arange(by_name.size, dtype=np.int32)  # code of each bid: its name's rank
        keys: list[int] = []
        carry: list[NDArray[Any]] | None = None
        sized = False
        for b in self.blocks():
            cols = [b[0], rank[np.searchsorted(uniq, b[1])], *b[2:]]
            if carry is not None:
                cols = [np.concatenate([c, x]) for c, x in zip(carry, cols, strict=True)]
            if cols[0].size > 1 and bool((np.diff(cols[0]) < 0).any()):
                return None  # not recorded in time order: sorted in one piece instead
            order = np.lexsort((cols[1], cols[0]))
            cols = [c[order] for c in cols]
            cut = int(np.searchsorted(cols[0], cols[0][-1], "left"))
            if cut:
                keys.append(store.put([c[:cut] for c in cols]))
                sized = sized or bool(np.isfinite(cols[5][:cut]).any())
            carry = [c[cut:] for c in cols]
        if carry is not None and carry[0].size:
            keys.append(store.put(carry))
            sized = sized or bool(np.isfinite(carry[5]).any())
        return SpilledAsSeenTable(store=store, keys=tuple(keys), names=names[by_name],
                                  rows=self.rows, sized=sized)


@dataclass(frozen=True, kw_only=True, eq=False)
class FilterEnd:
    """What the recursion hands to the estimator when the last scan is processed."""

    settings: FilterSettings
    nodes: NodeStore
    clusters: Sequence[Cluster]  # not yet estimated: retired ones first, then the live ones
    finished: Sequence[Piece]  # estimated when their clusters were finished
    last_time: float
    as_seen: AsSeenLog
    stats: dict[str, Any]
    log: Iterable[str]
    spill: SpillStore | None = None  # where the finished pieces' arrays were spilled


class Piece(NamedTuple):
    """One estimated trajectory before its id is given (ids follow the order of all of them)."""

    start: float
    east: float
    bid: int
    arrays: tuple[NDArray[Any], ...]  # time, smoothed, filtered, predicted moments, plots, sensors
    existence: float
    end_probability: float
    alive_at_end: bool
    extent: tuple[float, ...] | None
    key: int = -1  # spilled: the key of its first array in the spill store (``arrays`` empty)
    plots_used: int = -1  # spilled: the number of plots in the trajectory


def spill_piece(p: Piece, store: SpillStore) -> Piece:
    """The piece with its arrays written to ``store`` and dropped from memory."""
    plots_used = int((p.arrays[7] >= 0).sum())
    return p._replace(arrays=(), key=store.put_each(p.arrays), plots_used=plots_used)


def cluster_pieces(c: Cluster, nodes: NodeStore, st: FilterSettings, last_scan: float) -> list[Piece]:
    """The trajectories of one cluster's best global hypothesis, RTS-smoothed (§1.8, §6.3).

    Depends on the rest of the run only through ``last_scan``, the time of the
    last scan; for a cluster whose hypotheses are all frozen and whose nodes
    are all older than ``last_scan - as_seen_window_s`` it gives the same
    pieces at any later ``last_scan`` (see :func:`estimate_retired`).
    """
    out: list[Piece] = []
    row = c.table[int(np.argmax(c.logw))]
    for b, h in zip(c.berns, row, strict=True):
        if h < 0:
            continue
        lh = b.lhs[h]
        if lh.r <= st.existence_threshold:
            continue
        end_node, end_p, is_alive = lh.best_end()
        if (is_alive or (lh.coasted and end_node == lh.node)) and (
            nodes.t[end_node] < last_scan - st.as_seen_window_s
        ):
            # last seen well before the end of the feed (left the cover, or its radars
            # went silent): it was last known at its last plot, not at the missed
            # detections that followed while it was predicted inside a cover
            while nodes.plot[end_node] < 0 and nodes.parent[end_node] >= 0:
                end_node = int(nodes.parent[end_node])
        idx = nodes.chain(end_node)
        if lh.ext is not None and int((nodes.plot[idx] >= 0).sum()) < MIN_EXTENDED_DETECTIONS:
            continue  # an unconfirmed extended vessel: a fragment of a hull, not a ship
        t, fm, fP, pm, pP = nodes.moments(idx)
        ms, Ps = rts_smooth_chain(t, fm, fP, pm, pP)
        out.append(
            Piece(
                start=float(nodes.t[idx[0]]),
                east=float(nodes.m[idx[0], 0]),
                bid=b.bid,
                arrays=(t, ms, Ps, fm, fP, pm, pP, nodes.plot[idx].copy(), nodes.sensor[idx].copy()),
                existence=float(lh.r),
                end_probability=float(end_p),
                alive_at_end=bool(
                    is_alive and not lh.frozen and t[-1] >= last_scan - st.as_seen_window_s
                ),
                extent=lh.ext,
            )
        )
    return out


def estimate_retired(
    retired: Sequence[Cluster], nodes: NodeStore, st: FilterSettings, last_scan: float,
    spill: SpillStore | None = None,
) -> tuple[list[Piece], list[Cluster]]:
    """Estimate the retired clusters that nothing can change any more.

    A retired cluster (every local hypothesis frozen) is independent of the
    rest, and its estimate depends on the feed's end only through the time of
    the last scan (is it last seen within ``as_seen_window_s`` of it?). Once
    all its nodes are older than that window, :func:`cluster_pieces` gives
    now what it would give at the end.

    Returns
    -------
    pieces, waiting
        The smoothed trajectories of the clusters estimated (their arrays
        written to ``spill`` when given), and the clusters kept for later.
    """
    horizon = last_scan - st.as_seen_window_s
    t = nodes.t
    pieces: list[Piece] = []
    waiting: list[Cluster] = []
    for c in retired:
        latest = max(
            (
                max(t[lh.node], max(t[list(lh.end_nodes)]) if lh.end_nodes else -np.inf)
                for b in c.berns
                for lh in b.lhs
            ),
            default=-np.inf,
        )
        if latest < horizon:
            done = cluster_pieces(c, nodes, st, last_scan)
            pieces.extend(done if spill is None else [spill_piece(p, spill) for p in done])
        else:
            waiting.append(c)
    return pieces, waiting


def build_output(end: FilterEnd) -> FilterOutput:
    """The estimated set of all trajectories and the as-seen table (estimator of §1.8)."""
    st = end.settings
    nodes = end.nodes
    chosen = list(end.finished)
    for c in end.clusters:  # spilled at once too: one cluster's arrays in memory at a time
        done = cluster_pieces(c, nodes, st, end.last_time)
        chosen.extend(done if end.spill is None else [spill_piece(p, end.spill) for p in done])
    chosen.sort(key=lambda x: (x.start, x.east, x.bid))
    n_nodes = nodes.n
    nodes.release()  # every chain is copied into ``chosen``: room for the as-seen table
    trajectories: list[Trajectory] = []
    ids: dict[int, str] = {}
    used_plots = 0
    for k, piece in enumerate(chosen):
        tid = f"T{k + 1}"
        ids[piece.bid] = tid
        if piece.key >= 0:
            assert end.spill is not None
            used_plots += piece.plots_used
            trajectories.append(
                SpilledTrajectory(
                    id=tid, store=end.spill, key=piece.key, existence=piece.existence,
                    end_probability=piece.end_probability, alive_at_end=piece.alive_at_end,
                    extent=piece.extent,
                )
            )
            continue
        t, ms, Ps, fm, fP, pm, pP, plots, sensors = piece.arrays
        used_plots += int((plots >= 0).sum())
        trajectories.append(
            Trajectory(
                id=tid,
                time=t,
                mean=ms,
                cov=Ps,
                filt_mean=fm,
                filt_cov=fP,
                pred_mean=pm,
                pred_cov=pP,
                existence=piece.existence,
                end_probability=piece.end_probability,
                alive_at_end=piece.alive_at_end,
                plot_ids=plots,
                sensor_ids=sensors,
                extent=piece.extent,
            )
        )
    chosen.clear()
    as_seen = end.as_seen.table(ids) if end.as_seen.rows else AsSeenTable.empty()
    stats = {**end.stats, "plots_in_trajectories": used_plots, "nodes": n_nodes}
    return FilterOutput(trajectories=trajectories, as_seen=as_seen, stats=stats, log=list(end.log))


def record_as_seen(self: _Filter, tk: float) -> None:
    """Record the cheap filtered estimate of this moment (methods note §D).

    The leaf of each Bernoulli of the best global hypothesis with ``r``
    above the threshold whose most likely end is "alive" and recent.
    """
    thr = self.settings.existence_threshold
    oldest = tk - self.settings.as_seen_window_s
    t_node = self.nodes.t.item
    bids: list[int] = []
    leaves: list[int] = []
    rs: list[float] = []
    lengths: list[float] = []
    for c in self.clusters:
        berns = c.berns
        if c.logw.size == 1:
            row = [c.table.item(0)] if len(berns) == 1 else c.table[0].tolist()
        else:
            lw = c.logw.tolist()
            row = c.table[lw.index(max(lw))].tolist()  # the first best, as np.argmax
        for b, h in zip(berns, row, strict=True):
            if h < 0:
                continue
            lh = b.lhs[h]
            if lh.frozen or lh.r <= thr or (lh.end_p and max(lh.end_p) > lh.alive):
                continue
            if t_node(lh.node) < oldest:
                continue
            bids.append(b.bid)
            leaves.append(lh.node)
            rs.append(lh.r)
            lengths.append(math.nan if lh.ext is None else hull_length(lh.ext))
    if bids:
        idx = np.array(leaves, np.int64)
        P = self.nodes.P[idx]
        self.as_seen.append(
            AsSeenRows(
                time=tk,
                bids=np.array(bids, np.int64),
                mean=self.nodes.m[idx],
                sd=np.sqrt(0.5 * (P[:, 0, 0] + P[:, 2, 2])),
                existence=np.array(rs),
                length=np.array(lengths),
            )
        )
