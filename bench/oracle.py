"""The oracle a filter is measured against: Kalman smoothing with the true association.

For each simulated vessel, its own plots (the simulator knows which plot came
from which vessel) are filtered with the same constant-velocity model and the
same per-plot covariances as the real run, then RTS-smoothed. No clutter, no
association errors, no births or deaths to guess: the best a tracker can do
with these plots under this model.
"""

from __future__ import annotations

import numpy as np

from harbourwatch.config import FilterSettings
from harbourwatch.filter.gaussian import kf_predict, kf_update, rts_smooth
from harbourwatch.geodesy import LocalFrame
from harbourwatch.models import converted_covariance, cv_process_noise, cv_transition
from harbourwatch.simulate import SimulationResult
from harbourwatch.trajectories import AsSeenTable, Trajectory, TrajectorySet


def oracle_trajectories(sim: SimulationResult, settings: FilterSettings | None = None) -> TrajectorySet:
    """Kalman filter + RTS smoother per true vessel, on its own plots only."""
    settings = settings or FilterSettings()
    frame = LocalFrame.around([s.lat_deg for s in sim.sensors], [s.lon_deg for s in sim.sensors])
    p = sim.plots
    e, n = frame.to_local(p.lat_deg, p.lon_deg)
    se, sn = frame.to_local([s.lat_deg for s in sim.sensors], [s.lon_deg for s in sim.sensors])
    R = np.empty((len(p), 2, 2))
    for i, s in enumerate(sim.sensors):
        idx = np.flatnonzero(p.sensor == i)
        R[idx] = converted_covariance(e[idx] - se[i], n[idx] - sn[i], s.range_sigma_m,
                                      np.radians(s.bearing_sigma_deg), p.sigma_m[idx])
    q = settings.accel_psd_m2_s3
    out = []
    for v in range(len(sim.truth)):
        idx = np.flatnonzero(p.vessel == v)
        if idx.size < 2:
            continue
        idx = idx[np.argsort(p.time[idx], kind="stable")]
        t = p.time[idx]
        keep = np.concatenate([[True], np.diff(t) > 1e-6])
        idx, t = idx[keep], t[keep]
        z = np.column_stack([e[idx], n[idx]])
        T = t.size
        fm = np.zeros((T, 4))
        fP = np.zeros((T, 4, 4))
        pm = np.zeros((T, 4))
        pP = np.zeros((T, 4, 4))
        vs = settings.birth_speed_sd_m_s**2
        m = np.array([z[0, 0], 0.0, z[0, 1], 0.0])
        P = np.zeros((4, 4))
        P[np.ix_([0, 2], [0, 2])] = R[idx[0]]
        P[1, 1] = P[3, 3] = vs
        fm[0], fP[0], pm[0], pP[0] = m, P, m, P
        for k in range(1, T):
            dt = t[k] - t[k - 1]
            mp, Pp = kf_predict(m, P, cv_transition(dt), cv_process_noise(dt, q))
            m, P, _ = kf_update(mp, Pp, z[k], R[idx[k]])
            fm[k], fP[k], pm[k], pP[k] = m, P, mp, Pp
        sm, sP = rts_smooth(t, fm, fP, pm, pP)
        out.append(Trajectory(id=f"O{v + 1}", time=t, mean=sm, cov=sP, filt_mean=fm, filt_cov=fP,
                              pred_mean=pm, pred_cov=pP, existence=1.0, plot_ids=idx,
                              sensor_ids=p.sensor[idx]))
    return TrajectorySet(trajectories=tuple(out), frame=frame, as_seen=AsSeenTable.empty(),
                         feed_start=float(p.time.min()), feed_end=float(p.time.max()))
