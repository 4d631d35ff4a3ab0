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

from typing import TYPE_CHECKING, Any

import numpy as np

from ..models import cv_transition_batch
from ..trajectories import AsSeenTable, Trajectory
from . import FilterOutput

if TYPE_CHECKING:
    from .tpmbm import _Filter


def _compose_suffix(G: np.ndarray, c: np.ndarray, D: np.ndarray) -> None:
    """In place: turn each step map into the composition of it and all later ones.

    Step ``k`` maps the smoothed moments at ``k+1`` to those at ``k``:
    ``x ↦ G_k x + c_k`` and ``X ↦ G_k X G_kᵀ + D_k``. Composition is
    associative, so the suffix compositions come from ``log2(T)`` doubling
    rounds of batched 4x4 products instead of ``T`` small sequential steps.
    """
    n = G.shape[0]
    d = 1
    while d < n:
        G2, c2, D2 = G[d:].copy(), c[d:].copy(), D[d:].copy()
        G1 = G[: n - d]
        c[: n - d] = c[: n - d] + np.einsum("kij,kj->ki", G1, c2)
        D[: n - d] = D[: n - d] + G1 @ D2 @ np.swapaxes(G1, 1, 2)
        G[: n - d] = G1 @ G2
        d *= 2


def rts_smooth_scan(
    t: np.ndarray, fm: np.ndarray, fP: np.ndarray, pm: np.ndarray, pP: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Rauch-Tung-Striebel smoother (methods note §6.3) by a parallel suffix scan.

    Same equations as :func:`harbourwatch.filter.gaussian.rts_smooth`; the
    gains are batched solves and the backward pass is evaluated by composing
    its affine steps, which keeps hours-long chains cheap in numpy.
    """
    T = t.size
    if T == 1:
        return fm.copy(), fP.copy()
    F = cv_transition_batch(np.diff(t))  # F_{k+1} for k = 0..T-2
    # G_k = P_k|k F_{k+1}ᵀ P_{k+1|k}⁻¹, as a solve: G_kᵀ = P_{k+1|k}⁻¹ F_{k+1} P_k|k
    G = np.swapaxes(np.linalg.solve(pP[1:], F @ fP[:-1]), 1, 2)
    c = fm[:-1] - np.einsum("kij,kj->ki", G, pm[1:])
    D = fP[:-1] - G @ pP[1:] @ np.swapaxes(G, 1, 2)
    _compose_suffix(G, c, D)
    ms = np.empty_like(fm)
    Ps = np.empty_like(fP)
    ms[-1], Ps[-1] = fm[-1], fP[-1]
    ms[:-1] = c + G @ fm[-1]
    Ps[:-1] = D + G @ fP[-1] @ np.swapaxes(G, 1, 2)
    return ms, 0.5 * (Ps + np.swapaxes(Ps, 1, 2))


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
        ms, Ps = rts_smooth_scan(t, fm, fP, pm, pP)
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
