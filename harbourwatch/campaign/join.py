"""Joining trajectories across chunk boundaries.

Two neighbouring chunks both review the overlap around their common boundary
``B`` (``[B - overlap/2, B + overlap/2)``), from the same plots, so a vessel
present there has a trajectory in each. The join rule:

1. **Candidates**: the trajectories of each chunk with a state in the overlap.
2. **Distance**: for a left candidate ``a`` and a right candidate ``b``, the
   mean distance between ``a``'s smoothed positions at its state times in the
   overlap that fall within ``b``'s life and ``b``'s positions linearly
   interpolated to those times. At least :data:`MIN_COMMON_STATES` such
   times are needed, else the pair cannot match.
3. **Matching**: one-to-one, minimising the summed distance
   (``scipy.optimize.linear_sum_assignment``); a pair matches when its mean
   distance is below :data:`JOIN_DISTANCE_M`.
4. **Split at the midpoint**: every chunk contributes only the states of its
   core ``[T_k, T_k+1)``, so a joined trajectory takes the left chunk's
   states before ``B`` and the right chunk's from ``B`` on. Matches chain
   across chunks into one trajectory, named after its first piece
   (``<chunk>-<track>``).

A joined trajectory is *local* when a single piece contributes states and
that piece lies wholly inside its chunk's core: its chunk's own results for
it stand as they are. Every other trajectory is *joined*: its rules are
evaluated again on the joined states (see :mod:`harbourwatch.campaign.alerts`).

Failure modes: two vessels closer than the threshold throughout the overlap
(rafted alongside, towing) can be matched crosswise; a vessel whose track
breaks inside the overlap in one chunk but not in the other joins only one
of its pieces, the other stays a separate, short trajectory; a vessel seen
in the overlap by only one chunk (a track started late, an existence below
the threshold in the other) is cut at ``B``; a failed neighbour chunk leaves
the boundary unjoined and the failed core uncovered. The joined states
mix the two chunks' filtered moments at ``B``: the smoothed marginals are
each chunk's own, and the joint draws of the alert probabilities treat the
step across ``B`` as one filter step.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linear_sum_assignment

from harbourwatch.trajectories import Trajectory

__all__ = ["ChunkPieces", "JoinResult", "join_chunks", "JOIN_DISTANCE_M", "MIN_COMMON_STATES"]

#: Largest mean distance (m) at common times for two trajectories to be one vessel.
#: Two estimates of one vessel from the same plots differ by a few metres once both
#: filters have converged; vessels under way are rarely closer than this for a
#: whole overlap (common practice, no source).
JOIN_DISTANCE_M = 50.0
#: Fewest common state times for a match.
MIN_COMMON_STATES = 5


@dataclass(frozen=True, kw_only=True, eq=False)
class ChunkPieces:
    """What a finished chunk offers to the join."""

    name: str
    core: tuple[float, float]
    boundary: dict[str, Trajectory]
    spans: dict[str, tuple[float, float]]


@dataclass(frozen=True, kw_only=True, eq=False)
class JoinResult:
    """The joined set: ids of every piece, local pieces, re-built joined trajectories."""

    piece_id: dict[tuple[str, str], str]
    local: frozenset[tuple[str, str]]
    joined: tuple[Trajectory, ...]
    matches: tuple[tuple[str, str, str, float], ...] = field(default_factory=tuple)

    @property
    def ids(self) -> list[str]:
        """Every joined trajectory id, sorted."""
        return sorted(set(self.piece_id.values()))


def _overlap_positions(tr: Trajectory, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    sel = (tr.time >= lo) & (tr.time < hi)
    return tr.time[sel], tr.mean[sel][:, [0, 2]]


def mean_distance(a: Trajectory, b: Trajectory, lo: float, hi: float) -> tuple[float, int]:
    """Mean distance (m) of ``a`` and ``b`` at ``a``'s times in ``[lo, hi)`` within ``b``'s life."""
    t, p = _overlap_positions(a, lo, hi)
    inside = (t >= b.time[0]) & (t <= b.time[-1])
    t, p = t[inside], p[inside]
    if t.size == 0:
        return float("inf"), 0
    e = np.interp(t, b.time, b.mean[:, 0])
    n = np.interp(t, b.time, b.mean[:, 2])
    return float(np.mean(np.hypot(p[:, 0] - e, p[:, 1] - n))), int(t.size)


def match_boundary(left: ChunkPieces, right: ChunkPieces, *, half_s: float,
                   max_distance_m: float = JOIN_DISTANCE_M,
                   min_common: int = MIN_COMMON_STATES) -> list[tuple[str, str, float]]:
    """Matched ``(left id, right id, mean distance)`` pairs at the boundary between two chunks."""
    b = left.core[1]
    lo, hi = b - half_s, b + half_s
    la = sorted(t for t, tr in left.boundary.items() if ((tr.time >= lo) & (tr.time < hi)).any())
    ra = sorted(t for t, tr in right.boundary.items() if ((tr.time >= lo) & (tr.time < hi)).any())
    if not la or not ra:
        return []
    big = 1e12
    cost = np.full((len(la), len(ra)), big)
    for i, a in enumerate(la):
        ta = left.boundary[a]
        for j, r in enumerate(ra):
            tb = right.boundary[r]
            if ta.time[-1] < tb.time[0] or tb.time[-1] < ta.time[0]:
                continue
            d, n = mean_distance(ta, tb, lo, hi)
            if n >= min_common and d < max_distance_m:
                cost[i, j] = d
    rows, cols = linear_sum_assignment(cost)
    return [(la[i], ra[j], float(cost[i, j])) for i, j in zip(rows, cols, strict=True)
            if cost[i, j] < big]


class _Union:
    def __init__(self) -> None:
        self.parent: dict[tuple[str, str], tuple[str, str]] = {}

    def find(self, x: tuple[str, str]) -> tuple[str, str]:
        self.parent.setdefault(x, x)
        while self.parent[x] != x:
            self.parent[x] = self.parent[self.parent[x]]
            x = self.parent[x]
        return x

    def union(self, a: tuple[str, str], b: tuple[str, str]) -> None:
        ra, rb = self.find(a), self.find(b)
        if ra != rb:
            self.parent[max(ra, rb)] = min(ra, rb)


def join_chunks(chunks: Sequence[ChunkPieces], *, overlap_s: float,
                max_distance_m: float = JOIN_DISTANCE_M) -> JoinResult:
    """Join the trajectories of finished chunks (given in time order) into one set."""
    half = overlap_s / 2.0
    uf = _Union()
    order = {c.name: i for i, c in enumerate(chunks)}
    by_name = {c.name: c for c in chunks}
    matches = []
    for c in chunks:
        for tid in c.spans:
            uf.find((c.name, tid))
    for left, right in zip(chunks[:-1], chunks[1:], strict=True):
        if left.core[1] != right.core[0] or half <= 0:
            continue  # not neighbours (a failed or empty chunk between them)
        for a, b, d in match_boundary(left, right, half_s=half, max_distance_m=max_distance_m):
            uf.union((left.name, a), (right.name, b))
            matches.append((left.name, a, b, d))

    groups: dict[tuple[str, str], list[tuple[str, str]]] = {}
    for piece in sorted(uf.parent, key=lambda p: (order[p[0]], by_name[p[0]].spans[p[1]][0], p[1])):
        groups.setdefault(uf.find(piece), []).append(piece)

    piece_id: dict[tuple[str, str], str] = {}
    local: set[tuple[str, str]] = set()
    joined: list[Trajectory] = []
    for pieces in groups.values():
        contributing = []
        for name, tid in pieces:
            c = by_name[name]
            s, e = c.spans[tid]
            if e < c.core[0] or s >= c.core[1]:
                continue
            contributing.append((name, tid, c.core[0] <= s and e < c.core[1]))
        if not contributing:
            continue
        first = f"{contributing[0][0]}-{contributing[0][1]}"
        for p in pieces:
            piece_id[p] = first
        if len(contributing) == 1 and contributing[0][2]:
            local.add((contributing[0][0], contributing[0][1]))
        else:
            joined.append(_stitch(first, [(by_name[n], t) for n, t, _ in contributing]))
    joined.sort(key=lambda tr: tr.id)
    return JoinResult(piece_id=piece_id, local=frozenset(local), joined=tuple(joined),
                      matches=tuple(matches))


def _stitch(new_id: str, parts: Sequence[tuple[ChunkPieces, str]]) -> Trajectory:
    """The core states of each piece, in time order, as one trajectory."""
    cols: dict[str, list[np.ndarray]] = {k: [] for k in (
        "time", "mean", "cov", "filt_mean", "filt_cov", "pred_mean", "pred_cov", "sensor_ids")}
    weights = []
    for c, tid in parts:
        tr = c.boundary[tid]
        sel = (tr.time >= c.core[0]) & (tr.time < c.core[1])
        for k in cols:
            cols[k].append(getattr(tr, k)[sel])
        weights.append((int(np.count_nonzero(sel)), tr.existence))
    last = parts[-1][0].boundary[parts[-1][1]]
    existence = max(weights)[1]  # the piece with the most states speaks for the vessel
    arrays = {k: np.concatenate(v) for k, v in cols.items()}
    return Trajectory(
        id=new_id, existence=existence, end_probability=last.end_probability,
        alive_at_end=last.alive_at_end, plot_ids=np.full(arrays["time"].size, -1, np.int64),
        time=arrays["time"], mean=arrays["mean"], cov=arrays["cov"],
        filt_mean=arrays["filt_mean"], filt_cov=arrays["filt_cov"],
        pred_mean=arrays["pred_mean"], pred_cov=arrays["pred_cov"],
        sensor_ids=arrays["sensor_ids"],
    )
