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

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._hypotheses import Cluster
from harbourwatch.filter._kernels import rts_smooth_chain
from harbourwatch.filter._nodes import NodeStore
from harbourwatch.filter.output import FilterOutput
from harbourwatch.io.records import FilterSettings
from harbourwatch.trajectories import AsSeenTable, Trajectory


class AsSeenRows(NamedTuple):
    """The hypotheses shown as-seen after one scan (the filtered estimate at that time)."""

    time: float
    bids: NDArray[np.int64]
    mean: NDArray[np.float64]
    sd: NDArray[np.float64]
    existence: NDArray[np.float64]


@dataclass(frozen=True, kw_only=True, eq=False)
class FilterEnd:
    """What the recursion hands to the estimator when the last scan is processed."""

    settings: FilterSettings
    nodes: NodeStore
    clusters: Sequence[Cluster]  # retired ones first, then the live ones
    last_time: float
    as_seen: Sequence[AsSeenRows]
    stats: dict[str, Any]
    log: Iterable[str]


def build_output(end: FilterEnd) -> FilterOutput:
    """The estimated set of all trajectories and the as-seen table (estimator of §1.8)."""
    st = end.settings
    nodes = end.nodes
    last_scan = end.last_time
    chosen: list[tuple[float, float, int, Any]] = []
    for c in end.clusters:
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
            chosen.append(
                (
                    float(nodes.t[idx[0]]),
                    float(nodes.m[idx[0], 0]),
                    b.bid,
                    (lh, idx, end_p, is_alive),
                )
            )
    chosen.sort(key=lambda x: (x[0], x[1], x[2]))
    trajectories: list[Trajectory] = []
    ids: dict[int, str] = {}
    used_plots = 0
    for k, (_, _, bid, (lh, idx, end_p, is_alive)) in enumerate(chosen):
        tid = f"T{k + 1}"
        ids[bid] = tid
        t, fm, fP, pm, pP = nodes.moments(idx)
        ms, Ps = rts_smooth_chain(t, fm, fP, pm, pP)
        plots = nodes.plot[idx].copy()
        used_plots += int((plots >= 0).sum())
        alive_at_end = bool(is_alive and not lh.frozen and t[-1] >= last_scan - st.as_seen_window_s)
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
                existence=float(lh.r),
                end_probability=float(end_p),
                alive_at_end=alive_at_end,
                plot_ids=plots,
                sensor_ids=nodes.sensor[idx].copy(),
            )
        )
    if end.as_seen:
        tt = np.concatenate([np.full(r.bids.size, r.time) for r in end.as_seen])
        bids = np.concatenate([r.bids for r in end.as_seen])
        names = {int(b): ids.get(int(b), f"P{int(b)}") for b in np.unique(bids)}
        track = np.array([names[int(b)] for b in bids], dtype="<U16")
        # rows by (time, track): the order of Bernoullis within a scan follows the order
        # of the plots in the input, which must not show in any output
        order = np.lexsort((track, tt))
        as_seen = AsSeenTable(
            time=tt[order],
            track=track[order],
            mean=np.concatenate([r.mean for r in end.as_seen])[order],
            sd=np.concatenate([r.sd for r in end.as_seen])[order],
            existence=np.concatenate([r.existence for r in end.as_seen])[order],
        )
    else:
        as_seen = AsSeenTable.empty()
    stats = {**end.stats, "plots_in_trajectories": used_plots, "nodes": nodes.n}
    return FilterOutput(trajectories=trajectories, as_seen=as_seen, stats=stats, log=list(end.log))
