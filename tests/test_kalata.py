"""Steady-state Kalman gains of the constant-velocity toolkit on a straight track.

With position-only plots at a fixed period T, the Kalman gain of each axis
settles to ``[alpha, beta / T]``: the filter becomes an alpha-beta tracker.

* Discrete white-noise-acceleration model (the acceleration is constant over
  each period, process noise ``sigma_w^2 [[T^4/4, T^3/2], [T^3/2, T^2]]``):
  P. R. Kalata, "The tracking index: a generalized parameter for alpha-beta
  and alpha-beta-gamma target trackers", IEEE Trans. Aerospace and Electronic
  Systems 20(2):174-182, 1984 (volume/pages from memory) gives, with the
  tracking index ``Lambda = sigma_w T^2 / sigma_v``,

      r = (4 + Lambda - sqrt(8 Lambda + Lambda^2)) / 4,   alpha = 1 - r^2,
      beta = 2 (2 - alpha) - 4 sqrt(1 - alpha),            Lambda^2 = beta^2 / (1 - alpha).

  The closed form was cross-checked against a public implementation of
  Kalata's relations and a library manual quoting ``beta(alpha)``.
* Our filter's model is the discretised continuous white-noise-acceleration
  model (``models.cv_process_noise``), for which Kalata's relation does not
  hold. Its steady state is checked against the discrete algebraic Riccati
  equation solved by scipy.linalg.solve_discrete_are.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import solve_discrete_are

from harbourwatch.models.cv import H, cv_process_noise, cv_transition
from harbourwatch.models.gaussian import kf_predict, kf_update


def kalata_alpha_beta(lam: float) -> tuple[float, float]:
    """Kalata (1984): steady-state alpha, beta of the discrete white-noise-acceleration model."""
    r = (4.0 + lam - math.sqrt(8.0 * lam + lam * lam)) / 4.0
    alpha = 1.0 - r * r
    beta = 2.0 * (2.0 - alpha) - 4.0 * math.sqrt(1.0 - alpha)
    return alpha, beta


def dwna_noise(dt: float, sigma_w: np.ndarray) -> np.ndarray:
    """Discrete white-noise-acceleration Q for the [p_e, v_e, p_n, v_n] state, per-axis sigma_w."""
    g = np.array([dt * dt / 2.0, dt])
    Q = np.zeros((4, 4))
    Q[:2, :2] = sigma_w[0] ** 2 * np.outer(g, g)
    Q[2:, 2:] = sigma_w[1] ** 2 * np.outer(g, g)
    return Q


def steady_gain(F: np.ndarray, Q: np.ndarray, R: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Run the toolkit's predict/update to steady state; return the gain and P_{k|k-1}.

    The gain is read off the mean update: from a zero predicted mean, a plot at
    ``e_i`` moves the mean by column i of K.
    """
    m = np.zeros(4)
    P = np.diag([1e6, 1e4, 1e6, 1e4])
    P_pred = P
    for _ in range(5000):
        _, P_pred_new = kf_predict(m, P, F, Q)
        _, P, _ = kf_update(m, P_pred_new, np.zeros(2), R)
        done = np.allclose(P_pred_new, P_pred, rtol=1e-15, atol=0.0)
        P_pred = P_pred_new
        if done:
            break
    K = np.column_stack([kf_update(m, P_pred, e, R)[0] for e in np.eye(2)])
    return K, P_pred


@pytest.mark.parametrize(
    ("T", "sigma_w", "sigma_v"),
    [
        (1.0, (0.5, 2.0), (10.0, 5.0)),  # Lambda = 0.05 and 0.4
        (2.5, (0.1, 1.0), (20.0, 3.0)),  # Lambda = 0.03125 and 2.0833
        (4.0, (0.02, 3.0), (25.0, 1.0)),  # Lambda = 0.0128 and 48
    ],
)
def test_discrete_white_noise_acceleration_matches_kalata(T, sigma_w, sigma_v) -> None:
    F = cv_transition(T)
    Q = dwna_noise(T, np.asarray(sigma_w))
    R = np.diag(np.square(sigma_v))
    K, _ = steady_gain(F, Q, R)
    for axis in range(2):
        lam = sigma_w[axis] * T * T / sigma_v[axis]
        alpha, beta = kalata_alpha_beta(lam)
        i = 2 * axis
        # Kalata (1984): K = [alpha, beta / T] per axis.
        assert K[i, axis] == pytest.approx(alpha, rel=1e-9, abs=1e-12)
        assert K[i + 1, axis] == pytest.approx(beta / T, rel=1e-9, abs=1e-12)
        # Kalata (1984): Lambda^2 = beta^2 / (1 - alpha), from the filter's own gains.
        a, b = K[i, axis], K[i + 1, axis] * T
        assert b * b / (1.0 - a) == pytest.approx(lam * lam, rel=1e-8)
        # Axes stay uncoupled.
        assert K[i, 1 - axis] == 0.0 and K[i + 1, 1 - axis] == 0.0


@pytest.mark.parametrize(
    ("T", "q", "sigma_v"),
    [(1.0, 0.01, 10.0), (2.5, 0.05, 15.0), (3.0, 1.0, 2.0), (10.0, 0.001, 30.0)],
)
def test_continuous_white_noise_acceleration_matches_riccati(T, q, sigma_v) -> None:
    F = cv_transition(T)
    Q = cv_process_noise(T, q)
    R = sigma_v**2 * np.eye(2)
    K, P_pred = steady_gain(F, Q, R)
    # scipy.linalg.solve_discrete_are solves A'XA - X - A'XB (R + B'XB)^-1 B'XA + Q = 0;
    # with A = F', B = H' its X is the steady predicted covariance P_{k|k-1}.
    X = solve_discrete_are(F.T, H.T, Q, R)
    np.testing.assert_allclose(P_pred, X, rtol=1e-9, atol=1e-9 * np.abs(X).max())
    K_ref = np.linalg.solve(H @ X @ H.T + R, H @ X).T  # X H' (H X H' + R)^-1
    np.testing.assert_allclose(K, K_ref, rtol=1e-9, atol=1e-12)
    # Still an alpha-beta tracker: alpha in (0, 1) and 0 < beta < 2 - alpha (stability
    # region of the alpha-beta filter; Kalata 1984, from memory).
    alpha, beta = K[0, 0], K[1, 0] * T
    assert 0.0 < alpha < 1.0 and 0.0 < beta < 2.0 - alpha


def test_riccati_reference_agrees_with_kalata_on_its_own_model() -> None:
    # The two outside references agree where both apply (discrete model, Lambda = 0.4).
    T, sw, sv = 1.0, 2.0, 5.0
    F = cv_transition(T)
    Q = dwna_noise(T, np.array([sw, sw]))
    R = sv**2 * np.eye(2)
    X = solve_discrete_are(F.T, H.T, Q, R)
    K = np.linalg.solve(H @ X @ H.T + R, H @ X).T
    alpha, beta = kalata_alpha_beta(sw * T * T / sv)
    assert K[0, 0] == pytest.approx(alpha, rel=1e-10)
    assert K[1, 0] * T == pytest.approx(beta, rel=1e-10)
