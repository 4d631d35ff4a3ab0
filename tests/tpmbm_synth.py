"""A small synthetic radar feed for the filter tests (straight-line vessels, uniform clutter).

Independent of harbourwatch.sim.model on purpose: the filter tests must not
depend on another module's modelling choices.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from harbourwatch.models.cv import converted_covariance
from harbourwatch.scene.records import MeasurementScan, SensorModel


@dataclass
class Vessel:
    start: float
    stop: float
    p0: tuple[float, float]  # position at ``start``, m
    v: tuple[float, float]  # m/s

    def position(self, t: np.ndarray) -> np.ndarray:
        dt = np.asarray(t, float) - self.start
        return np.asarray(self.p0)[None, :] + dt[:, None] * np.asarray(self.v)[None, :]


@dataclass
class Radar:
    site: tuple[float, float]
    period: float = 3.0
    max_range: float = 8000.0
    p_detect: float = 0.9
    clutter_per_scan: float = 5.0
    sigma: float = 15.0
    bearing_sd_deg: float | None = None  # if set: range/bearing noise (range sd = sigma)
    offset: float = 0.0
    silent: list[tuple[float, float]] = field(default_factory=list)  # outages (no scans)
    empty: list[tuple[float, float]] = field(default_factory=list)  # outages (empty scans)
    bursts: dict[int, tuple[int, tuple[float, float], float]] = field(default_factory=dict)
    # scan number -> (extra clutter plots, centre, radius): a squall of false plots


@dataclass
class Feed:
    scans: list[MeasurementScan]
    sensors: list[SensorModel]
    truth_of_plot: dict[int, int]  # plot id -> vessel index
    n_plots: int


def make_feed(vessels: list[Vessel], radars: list[Radar], t_end: float, seed: int = 1) -> Feed:
    rng = np.random.default_rng(seed)
    scans: list[MeasurementScan] = []
    truth: dict[int, int] = {}
    pid = 0
    sensors = []
    for s, rd in enumerate(radars):
        area = np.pi * rd.max_range**2
        sensors.append(
            SensorModel(
                index=s,
                site=rd.site,
                detection_probability=rd.p_detect,
                clutter_intensity=max(rd.clutter_per_scan, 1e-9) / area,
                max_range_m=rd.max_range,
                scan_period_s=rd.period,
            )
        )
        t0 = rd.offset
        k_scan = -1
        while t0 + rd.period <= t_end:
            k_scan += 1
            if any(a <= t0 < b for a, b in rd.silent):
                t0 += rd.period
                continue
            if any(a <= t0 < b for a, b in rd.empty):
                scans.append(
                    MeasurementScan(
                        sensor=s,
                        time=t0 + rd.period,
                        plot_ids=np.zeros(0, np.int64),
                        plot_time=np.zeros(0),
                        z=np.zeros((0, 2)),
                        R=np.zeros((0, 2, 2)),
                    )
                )
                t0 += rd.period
                continue
            zs, ts, who = [], [], []
            for vi, v in enumerate(vessels):
                # the antenna passes the vessel's bearing at t0 + period * bearing / 2π
                p_start = v.position(np.array([t0]))[0]
                brg = np.arctan2(p_start[0] - rd.site[0], p_start[1] - rd.site[1]) % (2 * np.pi)
                t = t0 + rd.period * brg / (2 * np.pi)
                if not (v.start <= t <= v.stop):
                    continue
                p = v.position(np.array([t]))[0]
                if np.hypot(*(p - np.asarray(rd.site))) > rd.max_range:
                    continue
                if rng.random() >= rd.p_detect:
                    continue
                if rd.bearing_sd_deg is None:
                    zs.append(p + rng.normal(0.0, rd.sigma, 2))
                else:
                    d = p - np.asarray(rd.site)
                    rho = np.hypot(*d) + rng.normal(0.0, rd.sigma)
                    brg = np.arctan2(d[0], d[1]) + np.radians(rng.normal(0.0, rd.bearing_sd_deg))
                    zs.append(np.asarray(rd.site) + rho * np.array([np.sin(brg), np.cos(brg)]))
                ts.append(t)
                who.append(vi)
            nc = rng.poisson(rd.clutter_per_scan)
            rad = rd.max_range * np.sqrt(rng.random(nc))
            ang = rng.random(nc) * 2 * np.pi
            for k in range(nc):
                zs.append(np.asarray(rd.site) + rad[k] * np.array([np.sin(ang[k]), np.cos(ang[k])]))
                ts.append(t0 + rd.period * ang[k] / (2 * np.pi))
                who.append(-1)
            if k_scan in rd.bursts:
                nb, centre, radius = rd.bursts[k_scan]
                rad = radius * np.sqrt(rng.random(nb))
                ang = rng.random(nb) * 2 * np.pi
                for k in range(nb):
                    zs.append(
                        np.asarray(centre) + rad[k] * np.array([np.sin(ang[k]), np.cos(ang[k])])
                    )
                    ts.append(t0 + rd.period * 0.5)
                    who.append(-1)
            order = np.argsort(ts, kind="stable")
            z = np.array(zs, float).reshape(-1, 2)[order]
            tt = np.array(ts, float)[order]
            ids = np.arange(pid, pid + len(order), dtype=np.int64)
            for i, o in enumerate(order):
                if who[o] >= 0:
                    truth[int(ids[i])] = who[o]
            pid += len(order)
            scans.append(
                MeasurementScan(
                    sensor=s,
                    time=float(tt.max()) if tt.size else t0 + rd.period,
                    plot_ids=ids,
                    plot_time=tt,
                    z=z,
                    R=_covariances(rd, z),
                )
            )
            t0 += rd.period
    scans.sort(key=lambda sc: (sc.time, sc.sensor))
    return Feed(scans=scans, sensors=sensors, truth_of_plot=truth, n_plots=pid)


def _covariances(rd: Radar, z: np.ndarray) -> np.ndarray:
    if rd.bearing_sd_deg is None:
        return np.broadcast_to(rd.sigma**2 * np.eye(2), (len(z), 2, 2)).copy()
    d = z - np.asarray(rd.site)[None, :]
    return converted_covariance(d[:, 0], d[:, 1], rd.sigma, np.radians(rd.bearing_sd_deg))


def purity(trajectories, truth_of_plot: dict[int, int], n_vessels: int) -> list[dict[str, int]]:
    """For each true vessel: how many estimated trajectories hold its plots, and how many."""
    out = []
    for vi in range(n_vessels):
        counts: dict[str, int] = {}
        for tr in trajectories:
            c = sum(1 for p in tr.plot_ids if p >= 0 and truth_of_plot.get(int(p)) == vi)
            if c:
                counts[tr.id] = c
        out.append(counts)
    return out
