"""Gaussian algebra for the filter: Kalman steps, RTS smoothing, FFBS draws.

All functions keep covariances symmetric and never form an explicit inverse:
linear systems are solved through Cholesky factors (scipy.linalg).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from scipy.linalg import cho_factor, cho_solve

from harbourwatch.models.cv import H, cv_transition_batch

__all__ = [
    "LOG_2PI",
    "symmetrise",
    "kf_predict",
    "kf_update",
    "log_likelihood",
    "mahalanobis2_batch",
    "rts_smooth",
    "backward_sample",
    "ffbs_sample",
]

LOG_2PI = float(np.log(2.0 * np.pi))
Array = NDArray[np.float64]


def symmetrise(P: Array) -> Array:
    """``(P + Pᵀ) / 2`` over the last two axes."""
    return 0.5 * (P + np.swapaxes(P, -1, -2))


def kf_predict(m: Array, P: Array, F: Array, Q: Array) -> tuple[Array, Array]:
    """Kalman prediction ``m⁻ = F m``, ``P⁻ = F P Fᵀ + Q`` (batched over leading axes)."""
    m_pred = np.einsum("...ij,...j->...i", F, m)
    P_pred = symmetrise(F @ P @ np.swapaxes(F, -1, -2) + Q)
    return m_pred, P_pred


def kf_update(m: Array, P: Array, z: Array, R: Array) -> tuple[Array, Array, float]:
    """One Kalman update with a position plot (Joseph form).

    Returns the updated mean and covariance and ``ln N(z; H m, H P Hᵀ + R)``.
    """
    S = H @ P @ H.T + R
    c = cho_factor(S, lower=True)
    nu = z - H @ m
    PHt = P @ H.T
    K = cho_solve(c, PHt.T).T
    m_new = m + K @ nu
    IKH = np.eye(P.shape[0]) - K @ H
    P_new = symmetrise(IKH @ P @ IKH.T + K @ R @ K.T)
    maha = float(nu @ cho_solve(c, nu))
    logdet = 2.0 * float(np.log(np.diag(c[0])).sum())
    ll = -0.5 * maha - 0.5 * logdet - 0.5 * z.size * LOG_2PI
    return m_new, P_new, ll


def log_likelihood(nu: Array, S: Array) -> Array:
    """``ln N(ν; 0, S)`` for batches of 2-D innovations ``ν (..., 2)`` and ``S (..., 2, 2)``.

    Uses the closed-form 2x2 inverse and determinant (exact, vectorised).
    """
    a, b, d = S[..., 0, 0], S[..., 0, 1], S[..., 1, 1]
    det = a * d - b * b
    x, y = nu[..., 0], nu[..., 1]
    maha = (d * x * x - 2.0 * b * x * y + a * y * y) / det
    return -0.5 * maha - 0.5 * np.log(det) - LOG_2PI


def mahalanobis2_batch(nu: Array, S: Array) -> Array:
    """Squared Mahalanobis distance ``νᵀ S⁻¹ ν`` for 2-D batches."""
    a, b, d = S[..., 0, 0], S[..., 0, 1], S[..., 1, 1]
    det = a * d - b * b
    x, y = nu[..., 0], nu[..., 1]
    return (d * x * x - 2.0 * b * x * y + a * y * y) / det


def _gains(filt_P: Array, pred_P: Array, F: Array) -> Array:
    """Smoother gains ``G_k = P_k|k F_{k+1}ᵀ P_{k+1|k}⁻¹`` for k = 0..T-2 (as solves)."""
    T = filt_P.shape[0]
    G = np.empty((max(T - 1, 0), 4, 4))
    for k in range(T - 1):
        A = filt_P[k] @ F[k + 1].T  # (4,4)
        c = cho_factor(pred_P[k + 1], lower=True)
        G[k] = cho_solve(c, A.T).T
    return G


def rts_smooth(
    times: Array, filt_m: Array, filt_P: Array, pred_m: Array, pred_P: Array
) -> tuple[Array, Array]:
    """Rauch-Tung-Striebel smoother over one chain of filtered states.

    Parameters
    ----------
    times
        ``(T,)`` state times in seconds, increasing.
    filt_m, filt_P
        ``(T, 4)``, ``(T, 4, 4)`` filtered means and covariances.
    pred_m, pred_P
        ``(T, 4)``, ``(T, 4, 4)`` one-step predictions to each time (entry 0 unused).

    Returns
    -------
    mean, cov
        Smoothed ``(T, 4)`` and ``(T, 4, 4)``.
    """
    T = times.size
    F = cv_transition_batch(np.diff(times, prepend=times[0]))
    G = _gains(filt_P, pred_P, F)
    ms = filt_m.copy()
    Ps = filt_P.copy()
    for k in range(T - 2, -1, -1):
        ms[k] = filt_m[k] + G[k] @ (ms[k + 1] - pred_m[k + 1])
        Ps[k] = symmetrise(filt_P[k] + G[k] @ (Ps[k + 1] - pred_P[k + 1]) @ G[k].T)
    return ms, Ps


def _safe_cholesky(P: Array) -> Array:
    """Lower Cholesky factors of symmetric PSD matrices (a stack or one), clipping tiny negative eigenvalues."""
    P = symmetrise(P)
    try:
        return np.asarray(np.linalg.cholesky(P), dtype=np.float64)
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(P)
        return np.asarray(V * np.sqrt(np.clip(w, 0.0, None))[..., None, :], dtype=np.float64)


#: Steps of backward sampling whose noise is drawn at once (bounds memory).
_SAMPLE_BLOCK = 256


def backward_sample(
    rng: np.random.Generator,
    n: int,
    times: Array,
    filt_m: Array,
    filt_P: Array,
    pred_m: Array,
    pred_P: Array,
    end_m: Array,
    end_P: Array,
) -> Array:
    """Joint draws of states ``0..T-1`` given all plots, by backward sampling from the last one.

    ``x_{T-1} ~ N(end_m, end_P)``, then for ``k = T-2 .. 0``
    ``x_k ~ N(m_k|k + G_k (x_k+1 - m_k+1|k), P_k|k - G_k P_k+1|k G_kᵀ)`` with
    ``G_k = P_k|k Fᵀ P_k+1|k⁻¹`` (Carter and Kohn, Biometrika 1994;
    Frühwirth-Schnatter, J. Time Series Analysis 1994 -- from memory for the
    references). With ``end`` the filtered marginal of the last state this is
    forward filtering, backward sampling of a whole trajectory; with ``end``
    the *smoothed* marginal of a state inside a longer trajectory it draws the
    window ending there exactly (given ``x_k+1``, earlier states do not depend
    on later plots), at ``O(window)`` cost. Returns ``(n, T, 4)``.
    """
    w = times.size
    out = np.empty((w, n, 4))  # time-major while sampling: each step writes one block
    out[-1] = end_m + rng.standard_normal((n, 4)) @ _safe_cholesky(end_P).T
    if w > 1:
        F = cv_transition_batch(np.diff(times))  # F[k]: state k -> k+1
        Pf = filt_P[:-1]
        Pp = pred_P[1:]
        A = Pf @ np.swapaxes(F, -1, -2)  # P_k|k Fᵀ
        # Gᵀ = Pp⁻¹ Aᵀ (Pp symmetric): a batched solve, never an inverse
        Gt = np.linalg.solve(Pp, np.swapaxes(A, -1, -2))
        G = np.swapaxes(Gt, -1, -2)
        L = _safe_cholesky(Pf - G @ Pp @ Gt)
        # everything but the dependence on x_k+1, for all k at once
        shift = filt_m[:-1] - (G @ pred_m[1:, :, None])[..., 0]
        Lt = np.swapaxes(L, -1, -2)
        # blocks of steps, latest first, so the noise never needs O(W n) memory at once
        for b1 in range(w - 1, 0, -_SAMPLE_BLOCK):
            b0 = max(b1 - _SAMPLE_BLOCK, 0)
            base = shift[b0:b1, None, :] + rng.standard_normal((b1 - b0, n, 4)) @ Lt[b0:b1]
            for k in range(b1 - 1, b0 - 1, -1):
                np.matmul(out[k + 1], Gt[k], out=out[k])
                out[k] += base[k - b0]
    return np.swapaxes(out, 0, 1)


def ffbs_sample(
    rng: np.random.Generator,
    n: int,
    times: Array,
    filt_m: Array,
    filt_P: Array,
    pred_m: Array,
    pred_P: Array,
) -> Array:
    """Joint draws of a whole trajectory by forward filtering, backward sampling, ``(n, T, 4)``.

    :func:`backward_sample` started from the filtered marginal of the last state.
    """
    return backward_sample(rng, n, times, filt_m, filt_P, pred_m, pred_P, filt_m[-1], filt_P[-1])
