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
    """Lower Cholesky factor of a symmetric PSD matrix, clipping tiny negative eigenvalues."""
    P = symmetrise(P)
    try:
        return np.asarray(np.linalg.cholesky(P), dtype=np.float64)
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(P)
        w = np.clip(w, 0.0, None)
        return V * np.sqrt(w)


def ffbs_sample(
    rng: np.random.Generator,
    n: int,
    times: Array,
    filt_m: Array,
    filt_P: Array,
    pred_m: Array,
    pred_P: Array,
) -> Array:
    """Joint draws of a whole trajectory by forward filtering, backward sampling.

    Returns ``(n, T, 4)`` samples from the joint Gaussian of ``x_{0:T-1}``
    given all plots (Carter and Kohn, Biometrika 1994; Frühwirth-Schnatter,
    J. Time Series Analysis 1994 -- from memory for the references).
    """
    T = times.size
    F = cv_transition_batch(np.diff(times, prepend=times[0]))
    G = _gains(filt_P, pred_P, F)
    out = np.empty((n, T, 4))
    L = _safe_cholesky(filt_P[-1])
    out[:, -1] = filt_m[-1] + rng.standard_normal((n, 4)) @ L.T
    for k in range(T - 2, -1, -1):
        mean = filt_m[k] + (out[:, k + 1] - pred_m[k + 1]) @ G[k].T
        cov = filt_P[k] - G[k] @ pred_P[k + 1] @ G[k].T
        L = _safe_cholesky(cov)
        out[:, k] = mean + rng.standard_normal((n, 4)) @ L.T
    return out
