"""Motion and measurement models, in SI units in the local frame.

State vector ``x = [p_e, v_e, p_n, v_n]`` (metres, metres per second): east
position and velocity, then north position and velocity.

Motion: the discretised continuous white-noise-acceleration model, also called
nearly constant velocity, with ``F = I2 ⊗ [[1, T], [0, 1]]`` and
``Q = q I2 ⊗ [[T^3/3, T^2/2], [T^2/2, T]]`` (Bar-Shalom, Li, Kirubarajan,
*Estimation with Applications to Tracking and Navigation*, 2001, section
6.2.2 -- from memory for the section number).

Measurement: a plot is a position ``z = H x + w`` with ``H = I2 ⊗ [1, 0]``
and ``w ~ N(0, R)``; ``R`` is the first-order converted-measurement
covariance of a range/bearing plot, ``R = σ_r² u uᵀ + (ρ σ_b)² u⊥ u⊥ᵀ`` with
``u`` the unit line of sight from the antenna (Lerro and Bar-Shalom, IEEE
TAES 29(3), 1993 -- from memory), or isotropic ``σ² I`` where the plot
carries its own ``sigma_m``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "STATE_DIM",
    "MEAS_DIM",
    "H",
    "cv_transition",
    "cv_process_noise",
    "cv_transition_batch",
    "cv_process_noise_batch",
    "converted_covariance",
]

STATE_DIM = 4
MEAS_DIM = 2
#: Position measurement matrix for the ``[p_e, v_e, p_n, v_n]`` state.
H = np.array([[1.0, 0.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0]])


def cv_transition(dt: float) -> NDArray[np.float64]:
    """Transition matrix ``F(dt)`` of the constant-velocity model."""
    return np.array(
        [[1.0, dt, 0.0, 0.0], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, dt], [0.0, 0.0, 0.0, 1.0]]
    )


def cv_process_noise(dt: float, q: float) -> NDArray[np.float64]:
    """Process noise ``Q(dt)`` of the white-noise-acceleration model.

    Parameters
    ----------
    dt
        Time step in seconds (``>= 0``).
    q
        Acceleration power spectral density per axis, m^2/s^3.
    """
    a, b, c = dt**3 / 3.0, dt**2 / 2.0, dt
    return q * np.array(
        [[a, b, 0.0, 0.0], [b, c, 0.0, 0.0], [0.0, 0.0, a, b], [0.0, 0.0, b, c]]
    )


def cv_transition_batch(dt: ArrayLike) -> NDArray[np.float64]:
    """``F`` for many steps at once: shape ``(n, 4, 4)``."""
    d = np.asarray(dt, float).reshape(-1)
    out = np.zeros((d.size, 4, 4))
    out[:, [0, 1, 2, 3], [0, 1, 2, 3]] = 1.0
    out[:, 0, 1] = d
    out[:, 2, 3] = d
    return out


def cv_process_noise_batch(dt: ArrayLike, q: float) -> NDArray[np.float64]:
    """``Q`` for many steps at once: shape ``(n, 4, 4)``."""
    d = np.asarray(dt, float).reshape(-1)
    out = np.zeros((d.size, 4, 4))
    a, b = q * d**3 / 3.0, q * d**2 / 2.0
    for i in (0, 2):
        out[:, i, i] = a
        out[:, i, i + 1] = b
        out[:, i + 1, i] = b
        out[:, i + 1, i + 1] = q * d
    return out


def converted_covariance(
    d_east_m: ArrayLike,
    d_north_m: ArrayLike,
    range_sigma_m: float,
    bearing_sigma_rad: float,
    sigma_m: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Per-plot position covariance in the local frame, shape ``(n, 2, 2)``.

    Parameters
    ----------
    d_east_m, d_north_m
        Plot position minus antenna position, metres.
    range_sigma_m, bearing_sigma_rad
        The sensor's 1-sigma range and bearing errors.
    sigma_m
        Optional per-plot isotropic 1-sigma; where finite it replaces the
        range/bearing model for that plot.

    Notes
    -----
    ``R = σ_r² u uᵀ + (ρ σ_b)² u⊥ u⊥ᵀ`` with ``u`` the unit line of sight. A
    plot on the antenna itself (``ρ = 0``) gets ``σ_r² I``.
    """
    de = np.atleast_1d(np.asarray(d_east_m, float))
    dn = np.atleast_1d(np.asarray(d_north_m, float))
    rho = np.hypot(de, dn)
    safe = np.where(rho > 0, rho, 1.0)
    ue = np.where(rho > 0, de / safe, 1.0)
    un = np.where(rho > 0, dn / safe, 0.0)
    var_r = range_sigma_m**2
    var_c = (rho * bearing_sigma_rad) ** 2
    var_c = np.where(rho > 0, var_c, var_r)
    out = np.empty((de.size, 2, 2))
    out[:, 0, 0] = var_r * ue * ue + var_c * un * un
    out[:, 1, 1] = var_r * un * un + var_c * ue * ue
    out[:, 0, 1] = out[:, 1, 0] = (var_r - var_c) * ue * un
    if sigma_m is not None:
        s = np.broadcast_to(np.asarray(sigma_m, float), de.shape)
        own = np.isfinite(s)
        if own.any():
            out[own] = (s[own] ** 2)[:, None, None] * np.eye(2)
    return out
