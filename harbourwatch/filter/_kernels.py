"""Compiled inner loops of the two-mode motion model (numba).

The filter predicts, gates and updates a few hundred (hypothesis, plot)
pairs per scan, tens of thousands of scans per shift. Batched numpy spends
most of that time on call overhead for arrays this small, so the per-pair
step is written here as plain loops over 4x4 matrices and compiled once by
numba (cached on disk next to this file). The maths is exactly that of the
vectorised reference in :mod:`._motion` (``TwoModeMotion.predict_reference``
and ``score_and_update_reference``), which the tests compare it with.

State order ``[east, v_east, north, v_north]``; plots measure ``[east, north]``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any, TypeVar

import numpy as np
from numba import njit

LOG_2PI = math.log(2.0 * math.pi)
F = TypeVar("F", bound=Callable[..., Any])


def _compiled(fn: F) -> F:
    """``numba.njit`` with the machine code cached on disk when there is a place for it.

    numba refuses ``cache=True`` when neither the package folder nor the
    user's cache folder is writable (a read-only install without a home
    folder); the kernels are then compiled afresh on each run instead.
    """
    try:
        return njit(cache=True, nogil=True)(fn)  # type: ignore[return-value]
    except RuntimeError:
        return njit(nogil=True)(fn)  # type: ignore[return-value]


@_compiled
def _mix_predict_one(mm: Any, mP: Any, mu: Any, dt: Any, q: Any, rate_up: Any, rate_down: Any, pi_hi: Any, pm: Any, pP: Any, c: Any) -> Any:
    """IMM mixing and per-mode CV prediction of one hypothesis, written into ``pm, pP, c``."""
    s = 1.0 - math.exp(-(rate_up + rate_down) * dt)
    p01 = pi_hi * s
    p10 = (1.0 - pi_hi) * s
    t00, t01, t10, t11 = 1.0 - p01, p01, p10, 1.0 - p10
    j00, j01 = mu[0] * t00, mu[0] * t01
    j10, j11 = mu[1] * t10, mu[1] * t11
    c[0] = j00 + j10
    c[1] = j01 + j11
    m0 = np.empty(4)
    P0 = np.empty((4, 4))
    FP = np.empty((4, 4))
    w = np.empty(2)
    dt2, dt3 = dt * dt, dt * dt * dt
    for j in range(2):
        cj = max(c[j], 1e-300)
        w[0] = (j00 if j == 0 else j01) / cj  # mixing weights mu_{i|j}
        w[1] = (j10 if j == 0 else j11) / cj
        _merge_one(mm, mP, w, m0, P0)
        # F = [[1, dt, 0, 0], [0, 1, 0, 0], [0, 0, 1, dt], [0, 0, 0, 1]]
        pm[j, 0] = m0[0] + dt * m0[1]
        pm[j, 1] = m0[1]
        pm[j, 2] = m0[2] + dt * m0[3]
        pm[j, 3] = m0[3]
        for k in range(4):
            FP[0, k] = P0[0, k] + dt * P0[1, k]
            FP[1, k] = P0[1, k]
            FP[2, k] = P0[2, k] + dt * P0[3, k]
            FP[3, k] = P0[3, k]
        for r in range(4):
            pP[j, r, 0] = FP[r, 0] + dt * FP[r, 1]
            pP[j, r, 1] = FP[r, 1]
            pP[j, r, 2] = FP[r, 2] + dt * FP[r, 3]
            pP[j, r, 3] = FP[r, 3]
        qa, qb, qc = q[j] * dt3 / 3.0, q[j] * dt2 / 2.0, q[j] * dt
        for i in (0, 2):
            pP[j, i, i] += qa
            pP[j, i, i + 1] += qb
            pP[j, i + 1, i] += qb
            pP[j, i + 1, i + 1] += qc
        for r in range(4):
            for k in range(r + 1, 4):
                v = 0.5 * (pP[j, r, k] + pP[j, k, r])
                pP[j, r, k] = v
                pP[j, k, r] = v


@_compiled
def _merge_one(mm: Any, mP: Any, w: Any, m: Any, P: Any) -> Any:
    """Moment-matched merge of two per-mode Gaussians with weights ``w`` into ``m, P``."""
    for r in range(4):
        m[r] = w[0] * mm[0, r] + w[1] * mm[1, r]
    for r in range(4):
        d0r = mm[0, r] - m[r]
        d1r = mm[1, r] - m[r]
        for k in range(4):
            P[r, k] = w[0] * (mP[0, r, k] + d0r * (mm[0, k] - m[k])) + w[1] * (
                mP[1, r, k] + d1r * (mm[1, k] - m[k])
            )
    for r in range(4):
        for k in range(r + 1, 4):
            v = 0.5 * (P[r, k] + P[k, r])
            P[r, k] = v
            P[k, r] = v


@_compiled
def imm_predict(mm: Any, mP: Any, mu: Any, dt: Any, q: Any, rate_up: Any, rate_down: Any, pi_hi: Any) -> Any:
    """Prediction without a plot for ``n`` hypotheses.

    Returns per-mode means ``(n, 2, 4)`` and covariances ``(n, 2, 4, 4)``,
    prior mode probabilities ``(n, 2)`` and the merged ``(n, 4)``, ``(n, 4, 4)``.
    """
    n = dt.shape[0]
    pm = np.empty((n, 2, 4))
    pP = np.empty((n, 2, 4, 4))
    c = np.empty((n, 2))
    m = np.empty((n, 4))
    P = np.empty((n, 4, 4))
    for i in range(n):
        _mix_predict_one(mm[i], mP[i], mu[i], dt[i], q, rate_up, rate_down, pi_hi, pm[i], pP[i], c[i])
        _merge_one(pm[i], pP[i], c[i], m[i], P[i])
    return pm, pP, c, m, P


@_compiled
def gate_candidates(act: Any, mm: Any, mP: Any, t_leaf: Any, q_max: Any, z: Any, R: Any, tj: Any, gate: Any, min_step: Any) -> Any:
    """Pre-filter of (hypothesis, plot) pairs that provably keeps every pair inside the gate.

    For a pair, the exact test (:func:`imm_gate_update`) mixes the leaf's two
    modes, predicts each over ``dt = max(tj, t_leaf + min_step) - t_leaf``
    and keeps the pair when some mode has ``νᵀ S⁻¹ ν < gate``. That implies
    ``|ν|² <= gate λ_max(S) <= gate tr S``. A mixed mode's mean is a convex
    combination of the two leaf modes, so its predicted position lies on the
    segment between ``pos_k + dt vel_k`` (k = 0, 1) and
    ``|ν| >= dist(z, segment)``; its covariance has position and velocity
    traces at most ``max_k tr_k + |Δ|²/4`` (Δ the difference of the modes'
    position or velocity), so by Cauchy-Schwarz
    ``tr S <= (√T_pp + dt √T_vv)² + 2 q_max dt³/3 + tr R``. A pair is a
    candidate when ``dist(z, segment) <= √(gate · that) + 1 m``.
    Returned in row-major order (hypothesis, then plot).
    """
    n = act.shape[0]
    m = z.shape[0]
    ii = np.empty(n * m, np.int64)
    jj = np.empty(n * m, np.int64)
    cnt = 0
    for a in range(n):
        i = act[a]
        d_pe, d_pn = mm[i, 1, 0] - mm[i, 0, 0], mm[i, 1, 2] - mm[i, 0, 2]
        d_ve, d_vn = mm[i, 1, 1] - mm[i, 0, 1], mm[i, 1, 3] - mm[i, 0, 3]
        t_pp = max(mP[i, 0, 0, 0] + mP[i, 0, 2, 2], mP[i, 1, 0, 0] + mP[i, 1, 2, 2])
        t_vv = max(mP[i, 0, 1, 1] + mP[i, 0, 3, 3], mP[i, 1, 1, 1] + mP[i, 1, 3, 3])
        s_pp = math.sqrt(max(t_pp + 0.25 * (d_pe * d_pe + d_pn * d_pn), 0.0))
        s_vv = math.sqrt(max(t_vv + 0.25 * (d_ve * d_ve + d_vn * d_vn), 0.0))
        for j in range(m):
            dt = max(tj[j], t_leaf[i] + min_step) - t_leaf[i]
            tr_s = (s_pp + dt * s_vv) ** 2 + 2.0 * q_max * dt * dt * dt / 3.0 + R[j, 0, 0] + R[j, 1, 1]
            bound = math.sqrt(gate * tr_s) + 1.0
            # distance from the plot to the segment between the two modes' predicted positions
            ae = mm[i, 0, 0] + dt * mm[i, 0, 1]
            an = mm[i, 0, 2] + dt * mm[i, 0, 3]
            se = d_pe + dt * d_ve
            sn = d_pn + dt * d_vn
            ze, zn = z[j, 0] - ae, z[j, 1] - an
            ss = se * se + sn * sn
            u = 0.0 if ss <= 0.0 else min(max((ze * se + zn * sn) / ss, 0.0), 1.0)
            if math.hypot(ze - u * se, zn - u * sn) <= bound:
                ii[cnt] = i
                jj[cnt] = j
                cnt += 1
    return ii[:cnt], jj[:cnt]


@_compiled
def imm_gate_update(
    mm: Any, mP: Any, mu: Any, t_leaf: Any, ii: Any, jj: Any, tj: Any, z: Any, R: Any, q: Any, rate_up: Any, rate_down: Any, pi_hi: Any, gate: Any, min_step: Any
) -> Any:
    """Score candidate (hypothesis ``ii``, plot ``jj``) pairs and update those inside the gate.

    Each leaf ``i`` is predicted to the plot's own time (at least
    ``min_step`` after the leaf). A pair passes when the smaller of the two
    modes' normalised innovation squares is below ``gate``; only passing
    pairs are updated (Joseph form) and written, in candidate order.

    Returns ``(count, index, ll, stamp, m, P, um, uP, post)`` where the first
    ``count`` rows are the passing pairs; ``index`` is their candidate position.
    """
    k = ii.shape[0]
    index = np.empty(k, np.int64)
    ll_out = np.empty(k)
    stamp_out = np.empty(k)
    m_out = np.empty((k, 4))
    P_out = np.empty((k, 4, 4))
    um = np.empty((k, 2, 4))
    uP = np.empty((k, 2, 4, 4))
    post = np.empty((k, 2))
    pm = np.empty((2, 4))
    pP = np.empty((2, 4, 4))
    c = np.empty(2)
    nis = np.empty(2)
    llj = np.empty(2)
    Sd = np.empty((2, 3))  # per mode: S00, S01, S11
    nu = np.empty((2, 2))
    K = np.empty((4, 2))
    A = np.empty((4, 4))
    AP = np.empty((4, 4))
    cnt = 0
    for p in range(k):
        i = ii[p]
        j = jj[p]
        stamp = max(tj[j], t_leaf[i] + min_step)
        dt = stamp - t_leaf[i]
        _mix_predict_one(mm[i], mP[i], mu[i], dt, q, rate_up, rate_down, pi_hi, pm, pP, c)
        for mode in range(2):
            a = pP[mode, 0, 0] + R[j, 0, 0]
            b = pP[mode, 0, 2] + R[j, 0, 1]
            d = pP[mode, 2, 2] + R[j, 1, 1]
            Sd[mode, 0], Sd[mode, 1], Sd[mode, 2] = a, b, d
            x = z[j, 0] - pm[mode, 0]
            y = z[j, 1] - pm[mode, 2]
            nu[mode, 0], nu[mode, 1] = x, y
            det = a * d - b * b
            maha = (d * x * x - 2.0 * b * x * y + a * y * y) / det
            nis[mode] = maha
            llj[mode] = -0.5 * maha - 0.5 * math.log(det) - LOG_2PI
        if min(nis[0], nis[1]) >= gate:
            continue
        a0 = math.log(max(c[0], 1e-300)) + llj[0]
        a1 = math.log(max(c[1], 1e-300)) + llj[1]
        top = max(a0, a1)
        ll = top + math.log(math.exp(a0 - top) + math.exp(a1 - top))
        post[cnt, 0] = math.exp(a0 - ll)
        post[cnt, 1] = math.exp(a1 - ll)
        for mode in range(2):
            a, b, d = Sd[mode, 0], Sd[mode, 1], Sd[mode, 2]
            det = a * d - b * b
            s00, s01, s11 = d / det, -b / det, a / det
            for r in range(4):  # K = P Hᵀ S⁻¹
                h0, h2 = pP[mode, r, 0], pP[mode, r, 2]
                K[r, 0] = h0 * s00 + h2 * s01
                K[r, 1] = h0 * s01 + h2 * s11
            for r in range(4):
                um[cnt, mode, r] = pm[mode, r] + K[r, 0] * nu[mode, 0] + K[r, 1] * nu[mode, 1]
            for r in range(4):  # A = I - K H
                for cc in range(4):
                    A[r, cc] = 1.0 if r == cc else 0.0
                A[r, 0] -= K[r, 0]
                A[r, 2] -= K[r, 1]
            for r in range(4):
                for cc in range(4):
                    acc = 0.0
                    for t in range(4):
                        acc += A[r, t] * pP[mode, t, cc]
                    AP[r, cc] = acc
            r00, r01, r10, r11 = R[j, 0, 0], R[j, 0, 1], R[j, 1, 0], R[j, 1, 1]
            for r in range(4):
                kr0, kr1 = K[r, 0], K[r, 1]
                for cc in range(4):
                    acc = 0.0
                    for t in range(4):
                        acc += AP[r, t] * A[cc, t]
                    kc0, kc1 = K[cc, 0], K[cc, 1]
                    acc += kr0 * (r00 * kc0 + r01 * kc1) + kr1 * (r10 * kc0 + r11 * kc1)
                    uP[cnt, mode, r, cc] = acc
            for r in range(4):
                for cc in range(r + 1, 4):
                    v = 0.5 * (uP[cnt, mode, r, cc] + uP[cnt, mode, cc, r])
                    uP[cnt, mode, r, cc] = v
                    uP[cnt, mode, cc, r] = v
        _merge_one(um[cnt], uP[cnt], post[cnt], m_out[cnt], P_out[cnt])
        index[cnt] = p
        ll_out[cnt] = ll
        stamp_out[cnt] = stamp
        cnt += 1
    return cnt, index, ll_out, stamp_out, m_out, P_out, um, uP, post


@_compiled
def rts_smooth_chain(t: Any, fm: Any, fP: Any, pm: Any, pP: Any) -> Any:
    """Rauch-Tung-Striebel smoother along one chain of the CV model.

    Same equations as :func:`harbourwatch.models.gaussian.rts_smooth` (the
    reference): ``G_k = P_k|k Fᵀ P_k+1|k⁻¹``, computed as the solve
    ``P_k+1|k G_kᵀ = F P_k|k`` by Gaussian elimination with partial pivoting.
    """
    T = t.shape[0]
    ms = fm.copy()
    Ps = fP.copy()
    A = np.empty((4, 4))
    M = np.empty((4, 4))
    G = np.empty((4, 4))
    D = np.empty((4, 4))
    GD = np.empty((4, 4))
    dx = np.empty(4)
    for k in range(T - 2, -1, -1):
        dt = t[k + 1] - t[k]
        for c in range(4):  # A = F P_k|k, M = P_k+1|k
            A[0, c] = fP[k, 0, c] + dt * fP[k, 1, c]
            A[1, c] = fP[k, 1, c]
            A[2, c] = fP[k, 2, c] + dt * fP[k, 3, c]
            A[3, c] = fP[k, 3, c]
            for r in range(4):
                M[r, c] = pP[k + 1, r, c]
        for col in range(4):  # forward elimination with partial pivoting on [M | A]
            piv = col
            best = abs(M[col, col])
            for r in range(col + 1, 4):
                if abs(M[r, col]) > best:
                    best = abs(M[r, col])
                    piv = r
            if piv != col:
                for c in range(4):
                    M[col, c], M[piv, c] = M[piv, c], M[col, c]
                    A[col, c], A[piv, c] = A[piv, c], A[col, c]
            for r in range(col + 1, 4):
                f = M[r, col] / M[col, col]
                for c in range(col, 4):
                    M[r, c] -= f * M[col, c]
                for c in range(4):
                    A[r, c] -= f * A[col, c]
        for c in range(4):  # back substitution: X = M⁻¹ A = Gᵀ
            for r in range(3, -1, -1):
                acc = A[r, c]
                for q in range(r + 1, 4):
                    acc -= M[r, q] * G[c, q]
                G[c, r] = acc / M[r, r]
        for r in range(4):
            dx[r] = ms[k + 1, r] - pm[k + 1, r]
        for r in range(4):
            acc = fm[k, r]
            for c in range(4):
                acc += G[r, c] * dx[c]
            ms[k, r] = acc
        for r in range(4):
            for c in range(4):
                D[r, c] = Ps[k + 1, r, c] - pP[k + 1, r, c]
        for r in range(4):
            for c in range(4):
                acc = 0.0
                for q in range(4):
                    acc += G[r, q] * D[q, c]
                GD[r, c] = acc
        for r in range(4):
            for c in range(4):
                acc = 0.0
                for q in range(4):
                    acc += GD[r, q] * G[c, q]
                Ps[k, r, c] = fP[k, r, c] + acc
        for r in range(4):
            for c in range(r + 1, 4):
                v = 0.5 * (Ps[k, r, c] + Ps[k, c, r])
                Ps[k, r, c] = v
                Ps[k, c, r] = v
    return ms, Ps


@_compiled
def write_nodes(
    store: Any, start: Any, kinds: Any, src: Any, par: Any, sensor: Any, q: Any, mu_new: Any,
    miss: Any, det: Any, pair_plot: Any, plot_ids: Any, plot_time: Any, z: Any, R: Any, var_v: Any,
) -> Any:
    """Write a scan's pending nodes into the store's columns from row ``start`` on.

    ``store`` is ``(t, parent, plot, sensor, m, P, mm, mP, mu, qin)``.
    ``kinds[k]`` is 0 (missed detection of hypothesis slot ``src[k]``: its
    prediction ``miss = (t, m, P, mode means, mode covs, mode probs)``), 1
    (detection, pair ``src[k]``: its update ``det``, same layout) or 2 (new
    trajectory from plot ``src[k]``: position ``z``, covariance ``R`` and
    velocity variance ``var_v``, both modes equal, mode probabilities ``mu_new``).
    """
    t_s, parent_s, plot_s, sensor_s, m_s, P_s, mm_s, mP_s, mu_s, qin_s = store
    for k in range(kinds.shape[0]):
        row = start + k
        s = src[k]
        parent_s[row] = par[k]
        sensor_s[row] = sensor
        kind = kinds[k]
        if kind == 2:
            t_s[row] = plot_time[s]
            plot_s[row] = plot_ids[s]
            for r in range(4):
                m_s[row, r] = 0.0
                for c in range(4):
                    P_s[row, r, c] = 0.0
            m_s[row, 0] = z[s, 0]
            m_s[row, 2] = z[s, 1]
            P_s[row, 0, 0] = R[s, 0, 0]
            P_s[row, 0, 2] = R[s, 0, 1]
            P_s[row, 2, 0] = R[s, 1, 0]
            P_s[row, 2, 2] = R[s, 1, 1]
            P_s[row, 1, 1] = var_v
            P_s[row, 3, 3] = var_v
            for j in range(2):
                mu_s[row, j] = mu_new[j]
                for r in range(4):
                    mm_s[row, j, r] = m_s[row, r]
                    for c in range(4):
                        mP_s[row, j, r, c] = P_s[row, r, c]
        else:
            tt, mm_, PP_, mmm, mmP, mmu = miss if kind == 0 else det
            t_s[row] = tt[s]
            plot_s[row] = -1 if kind == 0 else plot_ids[pair_plot[s]]
            for r in range(4):
                m_s[row, r] = mm_[s, r]
                for c in range(4):
                    P_s[row, r, c] = PP_[s, r, c]
            for j in range(2):
                mu_s[row, j] = mmu[s, j]
                for r in range(4):
                    mm_s[row, j, r] = mmm[s, j, r]
                    for c in range(4):
                        mP_s[row, j, r, c] = mmP[s, j, r, c]
        qin_s[row] = mu_s[row, 0] * q[0] + mu_s[row, 1] * q[1]


@_compiled
def reachable(parent: Any, n: Any, live: Any) -> Any:
    """Nodes ``0..n-1`` reachable from ``live`` by parent links.

    Relies on every parent having a smaller index than its child (nodes are
    appended in time order and compaction keeps the order), so one backward
    sweep suffices.
    """
    keep = np.zeros(n, np.bool_)
    for i in live:
        if i >= 0:
            keep[i] = True
    for i in range(n - 1, -1, -1):
        if keep[i]:
            p = parent[i]
            if p >= 0:
                keep[p] = True
    return keep


def warm_up() -> None:
    """Compile (or load from the on-disk cache) every kernel on tiny inputs."""
    mm = np.zeros((1, 2, 4))
    mP = np.broadcast_to(np.eye(4), (1, 2, 4, 4)).copy()
    mu = np.full((1, 2), 0.5)
    q = np.array([1e-4, 1e-2])
    imm_predict(mm, mP, mu, np.ones(1), q, 0.01, 0.1, 0.1)
    idx = np.zeros(1, np.int64)
    imm_gate_update(
        mm, mP, mu, np.zeros(1), idx, idx, np.ones(1), np.zeros((1, 2)),
        np.broadcast_to(np.eye(2), (1, 2, 2)).copy(), q, 0.01, 0.1, 0.1, 10.0, 1e-3,
    )
    gate_candidates(
        idx, mm, mP, np.zeros(1), 0.05, np.zeros((1, 2)),
        np.broadcast_to(np.eye(2), (1, 2, 2)).copy(), np.ones(1), 10.0, 1e-3,
    )
    P2 = np.broadcast_to(np.eye(4), (2, 4, 4)).copy()
    rts_smooth_chain(np.arange(2.0), np.zeros((2, 4)), P2, np.zeros((2, 4)), P2 + P2)
    reachable(np.array([-1, 0], np.int64), 2, np.array([1], np.int64))
