"""Trajectory PMBM filter for the set of all trajectories (Gaussian, CV model).

The recursion follows the methods note (§1, §D): a Poisson part for vessels
never detected (here a density on a grid, see :mod:`._undetected`), and a
multi-Bernoulli mixture over trajectories. Each Bernoulli's local
hypotheses point at immutable filtered nodes (:mod:`._nodes`) that
hypotheses share; whole trajectories are RTS-smoothed only for the final
estimate. Global hypotheses are kept per cluster of Bernoullis (track
oriented): a scan's plots and the Bernoullis they gate with form groups;
clusters joined by a plot are merged (product of their global hypotheses),
each parent global hypothesis gets its ranked children (Murty), and after
pruning the independent Bernoullis are split off again.

Scans from several radars are processed in order of reference time; each
plot is scored at its own time (predict the leaf from its node time to the
plot time). A detection node is stamped with the plot's time, a missed
detection node with the scan's reference time.

Approximations (documented for review):

* undetected vessels: a uniform-in-cell density with a zero-mean velocity
  prior; new trajectories start at their first plot (``[z, 0]``,
  ``blockdiag(R, σ_v² I)``);
* the detection probability of a hypothesis is ``p_D`` times the
  probability that its predicted position is inside the radar's range
  (a soft edge; the same as ``p_D`` at the predicted mean away from it;
  below 1 % of ``p_D`` it is taken as 0);
* gating with the chi-square gate of ``gate_probability`` (2 dof);
* hypotheses whose alive probability drops below ``1e-4``, whose last
  node is older than ``max_coast_s`` or whose predicted position sd exceeds
  ``max_coast_sd_m`` (out of every cover, or the radars silent) are frozen
  as ended at their last state;
* a scan without a single plot from a radar that should see
  ``min_empty_scan_clutter`` or more false plots per scan is taken as a
  radar outage and skipped (a working radar essentially never returns an
  empty scan then: probability ``e^{-λ}``);
* a missed detection of a hypothesis predicted just outside the range
  reweights it without adding a state, so trajectories are not extended
  beyond the cover;
* per-cluster pruning of global hypotheses by weight (``log_weight_prune``)
  and count, of local hypotheses by count, of Bernoullis by existence, and
  track-oriented N-scan pruning (global hypotheses that disagree with the
  best one about a decision more than ``n_scan`` x (number of radars) nodes
  back are dropped);
* a group of more than ``LARGE_GROUP_PLOTS`` plots (a squall of false
  plots) keeps only its best parent and that parent's best assignment.

Each cap that bites is counted in ``stats["caps_bitten"]`` and told once in
the log.
"""

from __future__ import annotations

import gc
import math
import time as _time
from collections import defaultdict
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter import _estimate as est
from harbourwatch.filter._association import (
    ScanContext,
    prune,
    update_group,
    update_single,
)
from harbourwatch.filter._cells import (
    cell_groups,
    group_partitions,
    has_close_plots,
    update_partitions,
)
from harbourwatch.filter._cluttermap import ClutterMap
from harbourwatch.filter._estimate import FilterEnd, build_output, record_as_seen
from harbourwatch.filter._extscan import (
    cells_over_vessels,
    established,
    extended_scan,
    free_plots,
    inside_hulls,
    overlap_penalty,
    predict_slots,
)
from harbourwatch.filter._gating import MIN_STEP_S, chi2_gate, cover_detection, gate_pairs
from harbourwatch.filter._hypotheses import (
    Cluster,
    LocalHyp,
    detection_log_weight,
)
from harbourwatch.filter._kernels import write_nodes
from harbourwatch.filter._motion import TwoModeMotion
from harbourwatch.filter._nodes import NodeStore, compact_nodes
from harbourwatch.filter._scanstep import ChildMaker, fast_path, group_work
from harbourwatch.filter._undetected import UndetectedDensity
from harbourwatch.filter.output import FilterOutput
from harbourwatch.io.records import FilterSettings
from harbourwatch.io.spill import SpillStore
from harbourwatch.scene.records import BirthRegion, MeasurementScan, SensorModel
from harbourwatch.scene.scans import ScanStream

__all__ = ["run_tpmbm"]

Array = NDArray[np.float64]
_COMPACT_MIN = 1 << 16  # nodes: below this the store just grows
_CAP_TEXT = {
    "max_global_hypotheses": "global hypotheses of a cluster cut to max_global_hypotheses",
    "max_local_hypotheses": "local hypotheses of a trajectory cut to max_local_hypotheses",
    "merged_hypotheses": "product of merged clusters cut to 10 x max_global_hypotheses",
    "large_group": "too many plots in one group: only the best assignment is kept",
    "max_partitions": "candidate partitions of a group's plots into cells cut to the first 8",
}


class _Filter:
    """The filter's state between scans: node store, undetected density, clusters."""

    def __init__(
        self,
        sensors: Sequence[SensorModel],
        settings: FilterSettings,
        birth_regions: Sequence[BirthRegion],
        spill: SpillStore | None = None,
    ) -> None:
        self.sensors = {s.index: s for s in sensors}
        self.spill = spill  # where finished trajectories' arrays go (None: kept in memory)
        self.settings = settings
        self.motion = TwoModeMotion(
            settings.accel_psd_m2_s3,
            settings.manoeuvre_accel_psd_m2_s3,
            settings.manoeuvre_interval_s,
            settings.manoeuvre_duration_s,
        )
        self.gate = chi2_gate(settings.gate_probability)
        order = sorted(self.sensors)
        self.sensor_pos = {s: i for i, s in enumerate(order)}
        self.ppp = UndetectedDensity(
            [self.sensors[s].site for s in order],
            [self.sensors[s].max_range_m for s in order],
            initial_vessels=settings.initial_vessels,
            arrivals_per_hour=settings.arrivals_per_hour,
            mean_lifetime_s=settings.mean_lifetime_s,
            regions=[(b.polygon, b.arrivals_per_hour) for b in birth_regions],
        )
        self.nodes = NodeStore()
        self.clutter_map = ClutterMap()
        self.clusters: list[Cluster] = []
        self.retired: list[Cluster] = []  # every local hypothesis frozen, not yet estimated
        self.finished: list[est.Piece] = []  # trajectories of retired clusters, estimated
        self.next_bid = 0
        self.caps: dict[str, int] = defaultdict(int)
        self.log: list[str] = []
        self.timers: dict[str, float] = defaultdict(float)
        self.max_berns = 0
        self.max_hyps = 0
        self.ext_pairs = 0  # (hypothesis, cell) pairs scored with the extended model
        self.skipped_scans = 0
        self.plots_total = 0
        self.scan_count = 0
        self.scan_index = 0
        self.last_time = -math.inf
        self.as_seen = est.AsSeenLog(spill)

    # -- bookkeeping -------------------------------------------------------------------
    def count_cap(self, name: str) -> None:
        if self.caps[name] == 0:
            self.log.append(
                f"scan {self.scan_index}: cap '{name}' reached for the first time "
                f"({_CAP_TEXT.get(name, name)}); later occurrences are only counted"
            )
        self.caps[name] += 1

    def _new_bid(self) -> int:
        self.next_bid += 1
        return self.next_bid

    # -- one scan ----------------------------------------------------------------------
    def process(self, scan: MeasurementScan, scan_index: int) -> None:
        """Predict, gate, associate, prune and record the as-seen estimate for one scan."""
        self.scan_index = scan_index
        self.scan_count += 1
        st = self.settings
        sensor = self.sensors[scan.sensor]
        m = int(scan.z.shape[0])
        self.plots_total += m
        expected_clutter = sensor.clutter_intensity * math.pi * sensor.max_range_m**2
        if m == 0 and expected_clutter >= st.min_empty_scan_clutter:
            self.skipped_scans += 1
            if self.skipped_scans == 1:
                self.log.append(
                    f"scan {scan_index} of sensor {scan.sensor} has no plots at all; "
                    "taken as a radar outage and skipped"
                )
            return
        tk = max(float(scan.time), self.last_time)
        self.last_time = tk
        t0 = _time.perf_counter()
        self.ppp.predict(tk)

        # gather the active local hypotheses
        lhs: list[LocalHyp] = []
        slot_cluster: list[int] = []  # cluster index of each slot
        ext_slots: list[int] = []  # slots of extended vessels (see ``_extent``)
        slot_bern: list[int] = []  # Bernoulli id of each slot
        for ci, c in enumerate(self.clusters):
            for b in c.berns:
                for lh in b.lhs:
                    if lh.frozen:
                        lh.slot = -1
                    else:
                        lh.slot = len(lhs)
                        if lh.ext is not None:
                            ext_slots.append(len(lhs))
                        lhs.append(lh)
                        slot_cluster.append(ci)
                        slot_bern.append(b.bid)
        n = len(lhs)
        node_idx = np.fromiter((lh.node for lh in lhs), np.int64, n)
        t_leaf = self.nodes.t[node_idx]
        leaf_mm = self.nodes.mm[node_idx]
        leaf_mP = self.nodes.mP[node_idx]
        leaf_mu = self.nodes.mu[node_idx]
        tmiss = np.maximum(tk, t_leaf + MIN_STEP_S)
        dt = tmiss - t_leaf
        pmm, pmP, mu_pred, pm, pP = self.motion.predict(leaf_mm, leaf_mP, leaf_mu, dt)
        ps = np.exp(-dt / st.mean_lifetime_s)
        # hypotheses that have coasted too long (out of every cover, or radars silent) end
        coast = (tk - t_leaf > st.max_coast_s) | (
            np.maximum(pP[:, 0, 0], pP[:, 2, 2]) > st.max_coast_sd_m**2
        )
        if coast.any():
            for s in np.flatnonzero(coast):
                lhs[s].freeze(coasted=True)
                lhs[s].slot = -1
        pd = np.where(coast, 0.0, cover_detection(pm, pP, sensor))
        slot_ext: dict[int, tuple[float, float, float, Array]] = {}
        ext_pred: dict[int, tuple[float, ...]] = {}
        pd_point = pd
        if ext_slots:  # extended vessels: p_D of "at least one plot", and off the point path
            slot_ext, ext_pred, pd = predict_slots(lhs, ext_slots, dt, pd)
            pd_point = pd.copy()
            pd_point[ext_slots] = 0.0
        # a missed detection makes a node only where the predicted mean is inside the range
        hard = np.hypot(pm[:, 0] - sensor.site[0], pm[:, 2] - sensor.site[1]) <= sensor.max_range_m
        r = np.fromiter((lh.r for lh in lhs), float, n)
        alive = np.fromiter((lh.alive for lh in lhs), float, n)
        alive_pred = np.where(hard, alive * ps, alive)
        w_miss = 1.0 - r * pd * alive_pred
        ln_miss = np.log(np.maximum(w_miss, 1e-300))
        self.timers["predict"] += _time.perf_counter() - t0

        # gating and detection children (vectorised over hypothesis x plot)
        t0 = _time.perf_counter()
        z, R, tj, ids = scan.z, scan.R, scan.plot_time, scan.plot_ids
        pairs = gate_pairs(self.gate, self.motion, leaf_mm, leaf_mP, leaf_mu, pd_point, t_leaf,
                           z, R, tj)
        ext = None
        # cells only where they matter: an extended vessel to update, or three close plots of
        # no established small craft that could start one (``_extscan.PAIR_BIRTH``: not two)
        if st.extended_vessels and (ext_slots or (m > 2 and has_close_plots(
                free_plots(z, pairs[0], pairs[1], pP)))):
            ext = extended_scan(self.motion, self.gate, (leaf_mm, leaf_mP, leaf_mu, t_leaf), pm,
                                pP, tmiss, pd, slot_ext, z, R, tj, ids, pairs, slot_bern)
            if ext.book.cells or ext.ext_pairs:
                pairs = ext.pairs
                z, R, tj, ids = ext.z, ext.R, ext.tj, ext.ids
                self.ext_pairs += ext.ext_pairs
            else:
                ext = None
        ii, jj, ll, stamp, m_upd, P_upd, um, uP, mu_upd = pairs
        if slot_ext and ii.size:
            ll = overlap_penalty(ii, jj, ll, z, pm, pP, slot_ext, slot_bern, r)
        self._pair_modes = (um, uP, mu_upd)
        self._miss_modes = (pmm, pmP, mu_pred)
        self._pair_plot = jj
        ln_det = detection_log_weight(r[ii], alive_pred[ii], pd[ii], ll)
        det_pairs: dict[int, list[tuple[int, int]]] = defaultdict(list)
        for p, (i, j) in enumerate(zip(ii.tolist(), jj.tolist(), strict=True)):
            det_pairs[i].append((j, p))

        # new trajectories from the undetected density
        in_range = (
            np.hypot(z[:, 0] - sensor.site[0], z[:, 1] - sensor.site[1]) <= sensor.max_range_m
        )
        e = np.where(in_range, sensor.detection_probability, 0.0) * self.ppp.density(z)
        if slot_ext:  # no vessel starts inside a known hull
            e[inside_hulls(z, pm, pP, slot_ext, circle=np.arange(z.shape[0]) >= m)] = 0.0
        # clutter intensity: the configured rate, raised in cells of a persistent storm
        explained = np.zeros(m, bool)
        explained[jj[(r[ii] > 0.5) & (jj < m)]] = True
        lam = self.clutter_map.intensity(scan.sensor, z[:m], ~explained, sensor.clutter_intensity,
                                         math.pi * sensor.max_range_m**2)
        if z.shape[0] > m:  # multi-plot cells: their new-vessel weight is set below
            lam = np.concatenate([np.broadcast_to(lam, (m,)), np.zeros(z.shape[0] - m)])
        w_new = np.maximum(e + lam, 1e-300)  # > 0: every plot can always be clutter
        ln_new = np.log(w_new)
        r_new = e / w_new
        if ext is not None and ext.book.cells:  # a multi-plot cell: a new extended vessel
            point = np.flatnonzero((r > 0.5) & (pd_point > 0) & established(pP))
            e[m:][cells_over_vessels(ext, pm, point)] = 0.0
            ln_new[m:] = np.log(np.maximum(e[m:], 1e-300)) + ext.cell_ln_lik
            r_new[m:] = 1.0
        self.timers["gate"] += _time.perf_counter() - t0

        # children of the local hypotheses; their nodes are written in one batch below
        t0 = _time.perf_counter()
        pd_l = pd.tolist()  # plain Python floats: the per-hypothesis code reads single entries
        r_new_l = r_new.tolist()
        ii_l, jj_l = ii.tolist(), jj.tolist()
        maker = ChildMaker(
            self.nodes.n, node_idx.tolist(), ii_l, pd_l, ps.tolist(), hard.tolist(), r_new_l,
            st.existence_prune, self._new_bid,
        )
        if ext is not None:
            maker.slot_ext, maker.pair_ext, maker.born_ext = ext_pred, ext.pair_ext, ext.born_ext
        elif ext_pred:
            maker.slot_ext = ext_pred
        ctx = ScanContext(
            pd_l, ln_miss.tolist(), det_pairs, ln_det.tolist(), ln_new, maker.miss,
            maker.detection, maker.born, ln_new.tolist(),
        )
        cover_slots = np.flatnonzero(pd > 0).tolist()
        if ext is not None and ext.book.cells:
            work, busy = cell_groups(m, len(self.clusters), ii_l, jj_l, slot_cluster,
                                     cover_slots, ext.book)
        else:
            work, busy = group_work(m, len(self.clusters), ii_l, jj_l, slot_cluster, cover_slots)
        keep_clusters = [c for ci, c in enumerate(self.clusters) if ci not in busy]
        new_clusters: list[Cluster] = []
        updated = []
        for plots, cis in work:
            if ext is not None and ext.book.cells and len(plots) > 1:
                parts = group_partitions(plots, ext.partitions, ext.book)
                if len(parts) > 1:
                    cls = [self.clusters[ci] for ci in cis]
                    updated.append(update_partitions(cls, parts, ctx,
                                                     max_hyp=st.max_global_hypotheses,
                                                     count_cap=self.count_cap))
                    continue
            if fast_path(self.clusters, st, plots, cis, ctx, r_new_l, new_clusters):
                continue
            cls = [self.clusters[ci] for ci in cis]
            if len(cls) == 1 and len(cls[0].berns) == 1 and len(plots) <= 1:
                updated.append(update_single(cls[0], plots, ctx, max_hyp=st.max_global_hypotheses))
                continue
            updated.append(
                update_group(
                    cls, plots, ctx, max_hyp=st.max_global_hypotheses, count_cap=self.count_cap
                )
            )
        self._flush_nodes(maker, pm, pP, tmiss, stamp, m_upd, P_upd, z, R, scan, ids, tj)
        for berns, table, logw in updated:
            new_clusters.extend(
                prune(
                    berns,
                    table,
                    logw,
                    existence_prune=st.existence_prune,
                    log_weight_prune=st.log_weight_prune,
                    max_global=st.max_global_hypotheses,
                    max_local=st.max_local_hypotheses,
                    count_cap=self.count_cap,
                    node_parent=self.nodes.parent,
                    n_back=st.n_scan * len(self.sensors),
                )
            )
        self.clusters = keep_clusters + new_clusters
        if scan_index % 64 == 0:  # clusters whose hypotheses have all ended never change again
            self.retired.extend(c for c in self.clusters if _finished(c))
            self.clusters = [c for c in self.clusters if not _finished(c)]
            # estimate those nothing can change any more, so that compaction frees their nodes
            done, self.retired = est.estimate_retired(self.retired, self.nodes, st, self.last_time,
                                                     self.spill)
            self.finished.extend(done)
        self.timers["associate"] += _time.perf_counter() - t0

        t0 = _time.perf_counter()
        self.ppp.thin(self.sensor_pos[scan.sensor], sensor.detection_probability)
        nb = sum(len(c.berns) for c in self.clusters)
        self.max_berns = max(self.max_berns, nb)
        self.max_hyps = max([self.max_hyps] + [c.logw.size for c in new_clusters])
        record_as_seen(self, tk)
        compact_nodes(self.nodes, self.retired + self.clusters, _COMPACT_MIN)
        self.timers["bookkeeping"] += _time.perf_counter() - t0

    def _flush_nodes(self, maker: Any, pm: Any, pP: Any, tmiss: Any, stamp: Any, m_upd: Any, P_upd: Any, z: Any, R: Any, scan: Any, ids: Any, tj: Any) -> Any:
        """Write the scan's queued nodes in one compiled pass (see ``_kernels.write_nodes``).

        A missed detection carries the predicted per-mode moments, a
        detection the updated ones (see :mod:`._motion`); a new trajectory
        starts with both modes equal to its initial Gaussian.
        """
        if not maker.pend:
            return
        kinds, src, par = maker.queued()
        nodes = self.nodes
        start = nodes.reserve_rows(kinds.size)
        pmm, pmP, mu_pred = self._miss_modes
        um, uP, mu_upd = self._pair_modes
        write_nodes(
            nodes.columns(), start, kinds, src, par, scan.sensor, self.motion.q,
            self.motion.initial_mu(1)[0], (tmiss, pm, pP, pmm, pmP, mu_pred),
            (stamp, m_upd, P_upd, um, uP, mu_upd), self._pair_plot, ids, tj, z, R,
            self.settings.birth_speed_sd_m_s**2,
        )

    # -- estimates ---------------------------------------------------------------------


def _finished(c: Cluster) -> bool:
    return all(lh.frozen for b in c.berns for lh in b.lhs)


def run_tpmbm(
    scans: Sequence[MeasurementScan],
    sensors: Sequence[SensorModel],
    settings: FilterSettings,
    *,
    birth_regions: Sequence[BirthRegion] = (),
    progress: Callable[[int, int], None] | None = None,
    spill: SpillStore | None = None,
) -> FilterOutput:
    """Run the filter over all scans; see :func:`harbourwatch.filter.run_filter`."""
    filt = _Filter(sensors, settings, birth_regions, spill)
    # a stream of scans gives its keys without making the scans (they are made as read)
    keys = (scans.order_keys() if isinstance(scans, ScanStream)
            else [(float(sc.time), sc.sensor) for sc in scans])
    order = sorted(range(len(scans)), key=lambda i: (keys[i][0], keys[i][1], i))
    total = len(order)
    step = max(1, total // 100)
    # the filter makes millions of small objects but no reference cycles: the cyclic
    # garbage collector would only rescan the growing hypothesis store again and again
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        for k, i in enumerate(order):
            filt.process(scans[i], k)
            if progress is not None and ((k + 1) % step == 0 or k + 1 == total):
                progress(k + 1, total)
    finally:
        if gc_was_enabled:
            gc.enable()
    t0 = _time.perf_counter()
    out = build_output(
        FilterEnd(
            settings=filt.settings,
            nodes=filt.nodes,
            clusters=filt.retired + filt.clusters,
            finished=filt.finished,
            last_time=filt.last_time,
            as_seen=filt.as_seen,
            stats={
                "plots_total": filt.plots_total,
                "scans": filt.scan_count,
                "scans_skipped_as_outage": filt.skipped_scans,
                "caps_bitten": dict(filt.caps),
                "max_bernoullis": filt.max_berns,
                "max_global_hypotheses": filt.max_hyps,
                "extended_pairs": filt.ext_pairs,
            },
            log=filt.log,
            spill=spill,
        )
    )
    filt.timers["estimate"] += _time.perf_counter() - t0
    out.stats["seconds"] = {k: round(v, 4) for k, v in filt.timers.items()}
    return out
