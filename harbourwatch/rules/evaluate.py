"""Geofence rules over whole trajectories, with a probability on every alert.

How an alert is found (see :mod:`harbourwatch.rules.kinds` for the kinds and
the episode convention; brief excursions up to ``GAP_TOLERANCE_S`` = 30 s do
not split an episode):

1. **Candidate windows.** On each smoothed trajectory a relaxed condition
   marks the states where the rule could hold within ``NEAR_MISS_SD`` = 4
   standard deviations (of position for zones and distances, of velocity for
   speed thresholds), so near misses are evaluated too. Its runs (merged
   across the same gaps, at least as long as the rule's minimum duration),
   grown by :data:`WINDOW_PAD_S` on both sides, are the windows worth
   sampling. A trajectory whose bounding box is far from the zone is skipped
   outright. For ``rendezvous`` the pairs come from a search per
   :data:`PAIR_BIN_S` time bin over bounding boxes of the states that may be
   slow (and near the zone); only those bins are looked at closely, with the
   second trajectory interpolated linearly onto the first one's state times
   (the first is the one whose id sorts first).
2. **Episodes.** In each window the strict condition is evaluated on the
   smoothed mean and on ``n_samples`` joint draws of the window
   (:func:`sample_window`, exact windowed FFBS). Each episode of the mean gets
   the fraction of draws having an episode that overlaps it in time; draws'
   episodes overlapping no mean episode are then ignored. A window with no
   mean episode but with episodes in some draws yields one episode from the
   draws: start and end are the medians, over the draws that have one, of
   each draw's longest episode.
3. **Probability** = existence (times the other's existence for pairs) times
   that fraction. An alert is raised when it is at least the rule's
   ``min_probability`` and above zero.

Monte-Carlo error: the fraction is binomial, its sd is at most
``0.5 / sqrt(n_samples)``, i.e. 0.035 at the default 200 draws.

Determinism: draws come from a generator per (rule, track[, other track])
spawned from the run seed with :class:`numpy.random.SeedSequence` keyed on
SHA-256 hashes of the ids, so results do not depend on evaluation order.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import ParameterError
from harbourwatch.io.records import RuleConfig, ZoneConfig
from harbourwatch.models.gaussian import backward_sample
from harbourwatch.rules.kinds import (
    GAP_TOLERANCE_S,
    NEAR_MISS_SD,
    RULE_KINDS,
    RULE_SCHEMAS,
    Episodes,
    EpisodeView,
    RuleKind,
    find_episodes,
    position_sd_bound,
    register_kind,
)
from harbourwatch.rules.output import ALERT_COLUMNS, alerts_table, write_alerts_csv
from harbourwatch.rules.size import size_probability
from harbourwatch.scene.zones import LocalZone, local_zones
from harbourwatch.trajectories import SpilledTrajectory, Trajectory, TrajectorySet

__all__ = [
    "Alert",
    "ALERT_COLUMNS",
    "DEFAULT_SAMPLES",
    "GAP_TOLERANCE_S",
    "NEAR_MISS_SD",
    "RULE_KINDS",
    "RULE_SCHEMAS",
    "RuleKind",
    "WINDOW_PAD_S",
    "alerts_table",
    "evaluate_rules",
    "register_kind",
    "sample_window",
    "write_alerts_csv",
]

Array = NDArray[np.float64]

#: Joint draws per candidate window (binomial sd of a probability <= 0.035).
DEFAULT_SAMPLES = 200
#: Seconds added before and after each candidate run before sampling, so
#: that a crossing's "outside before / after" states are part of the window.
WINDOW_PAD_S = 60.0
#: Time bin of the rendezvous pair search, seconds.
PAIR_BIN_S = 300.0


@dataclass(frozen=True, kw_only=True)
class Alert:
    """One raised alert: one episode of one rule for one trajectory (or pair).

    ``start``/``end`` are epoch seconds: the first and last state time of
    the episode. ``details`` holds extras in local-frame SI units (epoch
    seconds, metres, m/s), for the reports:

    * every alert: ``zone`` (id or ``None``), ``index_range`` (``(i0, i1)``
      state indices of ``track``), ``existence``, ``sample_fraction``,
      ``n_samples``, ``source`` (``"mean"`` when the episode was found on the
      smoothed mean, ``"samples"`` when only in the draws);
    * ``pass-through`` and ``entry``: ``entry_time``, ``entry_xy``,
      ``exit_time``, ``exit_xy`` (first and last state inside);
    * ``loiter``: ``duration_s``, ``max_speed_m_s``;
    * ``speed``: ``duration_s``, ``max_speed_m_s``, ``max_speed_kn``,
      ``max_speed_time``;
    * ``rendezvous``: ``other_index_range``, ``other_existence``,
      ``duration_s``, ``closest_time``, ``min_distance_m``, ``closest_xy``,
      ``other_closest_xy``.
    """

    rule: str
    kind: str
    track: str
    other_track: str
    zone: str
    start: float
    end: float
    probability: float
    summary: str
    details: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))


# --------------------------------------------------------------------------- sampling
def sample_window(traj: Trajectory, rng: np.random.Generator, n: int, i0: int, i1: int) -> Array:
    """``n`` joint draws of states ``i0..i1`` of ``traj`` given all plots, ``(n, W, 4)``.

    :func:`~harbourwatch.models.gaussian.backward_sample` over the window,
    started from the *smoothed* marginal at ``i1``: exact for the window, at
    ``O(W)`` instead of ``O(T)`` cost.
    """
    sl = slice(i0, i1 + 1)
    return backward_sample(rng, n, traj.time[sl], traj.filt_mean[sl], traj.filt_cov[sl],
                           traj.pred_mean[sl], traj.pred_cov[sl], traj.mean[i1], traj.cov[i1])


def _rng(seed: int, *keys: str) -> np.random.Generator:
    spawn_key = tuple(
        int.from_bytes(hashlib.sha256(k.encode("utf-8")).digest()[:8], "little") for k in keys
    )
    return np.random.default_rng(np.random.SeedSequence(seed % 2**64, spawn_key=spawn_key))


# --------------------------------------------------------------------------- episodes
def _windows(cand: NDArray[np.bool_], time: Array, min_duration_s: float) -> list[tuple[int, int]]:
    """Index windows around the runs of the relaxed condition (padded, merged)."""
    if not cand.any():
        return []
    ep = find_episodes(cand[None], time)
    long_enough = (time[ep.i1] - time[ep.i0]) >= min_duration_s - 1e-9
    out: list[tuple[int, int]] = []
    for a, b in zip(ep.i0[long_enough], ep.i1[long_enough], strict=True):
        w0 = int(np.searchsorted(time, time[a] - WINDOW_PAD_S, "left"))
        w1 = int(np.searchsorted(time, time[b] + WINDOW_PAD_S, "right")) - 1
        if out and w0 <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], w1))
        else:
            out.append((w0, w1))
    return out


def _episodes(kind: RuleKind, cond: NDArray[np.bool_], time: Array) -> Episodes:
    ep = find_episodes(cond, time)
    return ep.select(kind.keep(ep, time, cond.shape[-1])) if len(ep) else ep


def _match(mean_ep: Episodes, smp_ep: Episodes, n: int) -> Iterator[tuple[int, int, float, str]]:
    """``(i0, i1, fraction of draws, source)`` per reported episode of one window."""
    if len(mean_ep):
        for a, b in zip(mean_ep.i0, mean_ep.i1, strict=True):
            hit = (smp_ep.i0 <= b) & (smp_ep.i1 >= a)
            yield int(a), int(b), np.unique(smp_ep.row[hit]).size / n, "mean"
    elif len(smp_ep):
        # each draw's longest episode (first on ties), then the medians of their ends
        length = smp_ep.i1 - smp_ep.i0
        order = np.lexsort((-length, smp_ep.row))
        rows = smp_ep.row[order]
        first = order[np.r_[True, rows[1:] != rows[:-1]]]
        a = int(np.round(np.median(smp_ep.i0[first])))
        b = max(a, int(np.round(np.median(smp_ep.i1[first]))))
        yield a, b, first.size / n, "samples"


# --------------------------------------------------------------------------- evaluation
def _alert(
    kind: RuleKind, view: EpisodeView, *, index_range: tuple[int, int],
    extra: dict[str, Any],
) -> Alert:
    text, details = kind.describe(view)
    if extra.get("source") == "samples":
        text += " (seen in sampled tracks, not on the smoothed track)"
    d: dict[str, Any] = {
        "zone": kind.zone.id if kind.zone is not None else None,
        "index_range": index_range,
        **extra,
        **details,
    }
    return Alert(
        rule=kind.rule.id, kind=kind.kind, track=view.track, other_track=view.other_track,
        zone=kind.zone.id if kind.zone is not None else "",
        start=float(view.time[view.i0]), end=float(view.time[view.i1]),
        probability=view.probability, summary=text, details=MappingProxyType(d),
    )


def _raise(kind: RuleKind, p: float) -> bool:
    return p > 0.0 and p >= kind.rule.min_probability


def _bbox(
    traj: Trajectory, mask: NDArray[np.bool_] | None = None
) -> tuple[float, float, float, float]:
    pos = traj.position if mask is None else traj.position[mask]
    return (float(pos[:, 0].min()), float(pos[:, 1].min()),
            float(pos[:, 0].max()), float(pos[:, 1].max()))


def _evaluate_single(kind: RuleKind, traj: Trajectory, seed: int, n: int) -> list[Alert]:
    if traj.time.size == 0:
        return []
    p_size = size_probability(kind, traj)
    if p_size <= 0.0:
        return []
    if kind.zone is not None:
        margin = NEAR_MISS_SD * float(position_sd_bound(traj.cov).max()) + 1.0
        if not kind.zone.box_near(_bbox(traj), margin):
            return []
    windows = _windows(kind.candidates(traj.mean, traj.cov), traj.time, kind.min_duration_s)
    if not windows:
        return []
    rng = _rng(seed, kind.rule.id, traj.id)
    alerts = []
    for w0, w1 in windows:
        t = traj.time[w0 : w1 + 1]
        mean = traj.mean[w0 : w1 + 1]
        mean_ep = _episodes(kind, kind.condition(mean[None]), t)
        draws = sample_window(traj, rng, n, w0, w1)
        with kind.sampling_window(mean, traj.cov[w0 : w1 + 1]):
            smp_ep = _episodes(kind, kind.condition(draws), t)
        for a, b, frac, source in _match(mean_ep, smp_ep, n):
            p = traj.existence * frac * p_size
            if not _raise(kind, p):
                continue
            view = EpisodeView(track=traj.id, other_track="", time=t, states=mean,
                               other_states=None, i0=a, i1=b, probability=p)
            extra = {"existence": traj.existence, "sample_fraction": frac,
                     "n_samples": n, "source": source}
            if p_size < 1.0 or traj.extent is not None:
                extra["size_probability"] = p_size
            alerts.append(_alert(kind, view, index_range=(w0 + a, w0 + b), extra=extra))
    return alerts


def _interp(t: Array, values: Array, tq: Array, axis: int) -> Array:
    """Linear interpolation of ``values`` (time along ``axis``) at ``tq`` (inside ``t``)."""
    if t.size == 1:
        return np.repeat(np.take(values, [0], axis=axis), tq.size, axis=axis)
    j = np.clip(np.searchsorted(t, tq, "right") - 1, 0, t.size - 2)
    w = np.clip((tq - t[j]) / (t[j + 1] - t[j]), 0.0, 1.0)
    shape = [1] * values.ndim
    shape[axis] = tq.size
    w = w.reshape(shape)
    return np.take(values, j, axis=axis) * (1.0 - w) + np.take(values, j + 1, axis=axis) * w


def _pair_prefilter(
    kind: RuleKind, trajs: Sequence[Trajectory]
) -> dict[tuple[int, int], NDArray[np.int64]]:
    """Candidate pairs ``(i, j)``, ``i < j``, with the time bins where they may meet.

    Per trajectory and :data:`PAIR_BIN_S` time bin, the bounding box of the
    states that may be slow (and near the zone); two trajectories are a
    candidate pair in a bin where their boxes, grown by the meeting distance
    plus the near-miss margin, overlap.
    """
    cols: list[list[NDArray[Any]]] = [[] for _ in range(7)]
    for i, tr in enumerate(trajs):
        if tr.time.size == 0:
            continue
        slow = kind.slow_candidates(tr.mean, tr.cov)  # type: ignore[attr-defined]
        if not slow.any():
            continue
        b = np.floor(tr.time[slow] / PAIR_BIN_S).astype(np.int64)
        x, y = tr.mean[slow, 0], tr.mean[slow, 2]
        sd = position_sd_bound(tr.cov[slow])
        first = np.r_[0, np.flatnonzero(np.diff(b)) + 1]
        for c, v in zip(cols, (
            np.full(first.size, i), b[first],
            np.minimum.reduceat(x, first), np.minimum.reduceat(y, first),
            np.maximum.reduceat(x, first), np.maximum.reduceat(y, first),
            np.maximum.reduceat(sd, first),
        ), strict=True):
            c.append(v)
    if not cols[0]:
        return {}
    ti, tb, x0, y0, x1, y1, sd = (np.concatenate(c) for c in cols)
    order = np.argsort(tb, kind="stable")
    ti, tb, x0, y0, x1, y1, sd = (v[order] for v in (ti, tb, x0, y0, x1, y1, sd))
    cuts = np.r_[0, np.flatnonzero(np.diff(tb)) + 1, tb.size]
    found: dict[tuple[int, int], list[int]] = {}
    dmax = kind.param("max_distance_m")
    for g0, g1 in zip(cuts[:-1], cuts[1:], strict=True):
        if g1 - g0 < 2:
            continue
        g = slice(g0, g1)
        reach = dmax + NEAR_MISS_SD * (sd[g, None] + sd[None, g]) + 1.0
        ok = (x0[g, None] - reach <= x1[None, g]) & (x0[None, g] - reach <= x1[g, None])
        ok &= (y0[g, None] - reach <= y1[None, g]) & (y0[None, g] - reach <= y1[g, None])
        for p, q in zip(*np.nonzero(np.triu(ok, 1)), strict=True):
            found.setdefault((int(ti[g0 + p]), int(ti[g0 + q])), []).append(int(tb[g0]))
    return {k: np.array(v, np.int64) for k, v in sorted(found.items())}


def _evaluate_pair(
    kind: RuleKind, a: Trajectory, b: Trajectory, bins: NDArray[np.int64], seed: int, n: int,
) -> list[Alert]:
    p_size = size_probability(kind, a) * size_probability(kind, b)
    if p_size <= 0.0:
        return []
    t0, t1 = max(a.start, b.start), min(a.end, b.end)
    ia0 = int(np.searchsorted(a.time, t0, "left"))
    ia1 = int(np.searchsorted(a.time, t1, "right")) - 1
    if ia1 < ia0:
        return []
    ta = a.time[ia0 : ia1 + 1]
    # only the candidate bins (and their neighbours) are looked at closely
    tb = np.floor(ta / PAIR_BIN_S).astype(np.int64)
    sel = np.flatnonzero(np.isin(tb, np.concatenate([bins - 1, bins, bins + 1])))
    if sel.size == 0:
        return []
    cand = np.zeros(ta.size, bool)
    cand[sel] = kind.pair_candidates(
        a.mean[ia0 + sel], a.cov[ia0 + sel],
        _interp(b.time, b.mean, ta[sel], 0), _interp(b.time, b.cov, ta[sel], 0),
    )
    windows = _windows(cand, ta, kind.min_duration_s)
    if not windows:
        return []
    rng = _rng(seed, kind.rule.id, a.id, b.id)
    alerts = []
    for r0, r1 in windows:
        w0, w1 = ia0 + r0, ia0 + r1
        t = a.time[w0 : w1 + 1]
        j0 = max(int(np.searchsorted(b.time, t[0], "right")) - 1, 0)
        j1 = min(int(np.searchsorted(b.time, t[-1], "left")), b.time.size - 1)
        mean_a = a.mean[w0 : w1 + 1]
        mean_b = _interp(b.time[j0 : j1 + 1], b.mean[j0 : j1 + 1], t, 0)
        mean_ep = _episodes(kind, kind.pair_condition(mean_a[None], mean_b[None]), t)
        sa = sample_window(a, rng, n, w0, w1)
        sb = _interp(b.time[j0 : j1 + 1], sample_window(b, rng, n, j0, j1), t, 1)
        smp_ep = _episodes(kind, kind.pair_condition(sa, sb), t)
        for i0, i1, frac, source in _match(mean_ep, smp_ep, n):
            p = a.existence * b.existence * frac * p_size
            if not _raise(kind, p):
                continue
            view = EpisodeView(track=a.id, other_track=b.id, time=t, states=mean_a,
                               other_states=mean_b, i0=i0, i1=i1, probability=p)
            k0 = max(int(np.searchsorted(b.time, t[i0], "right")) - 1, 0)
            k1 = min(int(np.searchsorted(b.time, t[i1], "left")), b.time.size - 1)
            extra = {"other_index_range": (k0, k1),
                     "existence": a.existence, "other_existence": b.existence,
                     "sample_fraction": frac, "n_samples": n, "source": source}
            if p_size < 1.0:
                extra["size_probability"] = p_size
            alerts.append(_alert(kind, view, index_range=(w0 + i0, w0 + i1), extra=extra))
    return alerts


def evaluate_rules(
    trajectories: TrajectorySet,
    zones: Mapping[str, LocalZone] | Sequence[ZoneConfig],
    rules: Sequence[RuleConfig],
    *,
    seed: int = 0,
    n_samples: int = DEFAULT_SAMPLES,
    progress: Callable[[int, int], None] = lambda done, total: None,
) -> list[Alert]:
    """Every alert of every rule over the whole trajectory set.

    Parameters
    ----------
    trajectories
        The run's estimated set of trajectories (local frame).
    zones, rules
        As read from the zones and rules files.
    seed
        Run seed of the Monte-Carlo draws (same seed, same alerts).
    n_samples
        Joint draws per candidate window.
    progress
        Called as ``progress(rules_done, rules_total)`` along the way (the
        single-vessel rules are evaluated together, trajectory by trajectory:
        they count as done in proportion to the trajectories gone through).

    Returns
    -------
    list of Alert
        Sorted by ``(start, rule, track, other_track)``.
    """
    if n_samples < 1:
        raise ParameterError("must be at least 1", parameter="n_samples")
    if isinstance(zones, Mapping):
        local: Mapping[str, LocalZone] = zones
    else:
        used = {r.zone for r in rules if r.zone is not None}
        local = local_zones([z for z in zones if z.id in used], trajectories.frame)
    trajs = sorted(trajectories.trajectories, key=lambda tr: tr.id)
    kinds = [RULE_KINDS[rule.kind](rule, local.get(rule.zone) if rule.zone else None)
             for rule in rules]
    singles = [kind for kind in kinds if not kind.pairwise]
    pairwise = [kind for kind in kinds if kind.pairwise]
    total = len(kinds)
    progress(0, total)
    alerts: list[Alert] = []
    if singles:  # trajectory by trajectory: a spilled one is read once for all the rules
        for k, tr in enumerate(trajs):
            here = tr.held() if isinstance(tr, SpilledTrajectory) else tr
            for kind in singles:
                alerts += _evaluate_single(kind, here, seed, n_samples)
            progress(len(singles) * (k + 1) // len(trajs), total)
    for k, kind in enumerate(pairwise):
        for (i, j), bins in _pair_prefilter(kind, trajs).items():
            alerts += _evaluate_pair(kind, trajs[i], trajs[j], bins, seed, n_samples)
        progress(len(singles) + k + 1, total)
    progress(total, total)
    alerts.sort(key=lambda al: (al.start, al.rule, al.track, al.other_track))
    return alerts
