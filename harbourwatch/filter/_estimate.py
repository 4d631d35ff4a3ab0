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
from typing import TYPE_CHECKING, Any

import numpy as np

from ..trajectories import AsSeenTable, Trajectory
from . import FilterOutput
from ._extent import hull_length
from ._kernels import rts_smooth_chain

if TYPE_CHECKING:
    from .tpmbm import _Filter


def build_output(filt: _Filter) -> FilterOutput:
    st = filt.settings
    nodes = filt.nodes
    last_scan = filt.last_time
    chosen: list[tuple[float, float, int, Any]] = []
    for c in filt.retired + filt.clusters:
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
                extent=lh.ext,
            )
        )
    if filt.as_seen:
        tt = np.concatenate([np.full(r[1].size, r[0]) for r in filt.as_seen])
        bids = np.concatenate([r[1] for r in filt.as_seen])
        names = {int(b): ids.get(int(b), f"P{int(b)}") for b in np.unique(bids)}
        as_seen = AsSeenTable(
            time=tt,
            track=np.array([names[int(b)] for b in bids], dtype="<U16"),
            mean=np.concatenate([r[2] for r in filt.as_seen]),
            sd=np.concatenate([r[3] for r in filt.as_seen]),
            existence=np.concatenate([r[4] for r in filt.as_seen]),
            length=np.concatenate([r[5] for r in filt.as_seen]),
        )
    else:
        as_seen = AsSeenTable.empty()
    stats = {
        "plots_total": filt.plots_total,
        "plots_in_trajectories": used_plots,
        "scans": filt.scan_count,
        "scans_skipped_as_outage": filt.skipped_scans,
        "caps_bitten": dict(filt.caps),
        "max_bernoullis": filt.max_berns,
        "max_global_hypotheses": filt.max_hyps,
        "nodes": nodes.n,
    }
    return FilterOutput(trajectories=trajectories, as_seen=as_seen, stats=stats, log=list(filt.log))


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
            (
                tk,
                np.array(bids, np.int64),
                self.nodes.m[idx],
                np.sqrt(0.5 * (P[:, 0, 0] + P[:, 2, 2])),
                np.array(rs),
                np.array(lengths),
            )
        )
