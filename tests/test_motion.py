"""The two-mode (steady / manoeuvre) motion model and its IMM step."""

from __future__ import annotations

import numpy as np
from scipy.linalg import expm
from scipy.stats import multivariate_normal
from strategies import mode_states

from harbourwatch.filter._motion import TwoModeMotion, merge
from harbourwatch.models.cv import H, cv_process_noise, cv_transition
from harbourwatch.models.gaussian import kf_predict, kf_update


def test_mode_transition_matches_matrix_exponential(rng):
    # Reference: the continuous-time Markov chain's transition matrix is expm(G dt) (scipy).
    mot = TwoModeMotion(0.001, 0.05, interval_s=900.0, duration_s=60.0)
    dt = np.array([0.5, 2.5, 40.0, 600.0])
    G = np.array([[-1 / 900.0, 1 / 900.0], [1 / 60.0, -1 / 60.0]])
    T = mot._transition(dt)
    for k, d in enumerate(dt):
        np.testing.assert_allclose(T[k], expm(G * d), rtol=0, atol=1e-12)


def test_merge_is_moment_matching(rng):
    # Reference: mean and covariance of a two-component mixture computed from samples' definition
    m, P, mu = mode_states(rng, 3)
    mm, PP = merge(m, P, mu)
    for k in range(3):
        mean = mu[k] @ m[k]
        cov = sum(mu[k, j] * (P[k, j] + np.outer(m[k, j] - mean, m[k, j] - mean)) for j in range(2))
        np.testing.assert_allclose(mm[k], mean, atol=1e-10)
        np.testing.assert_allclose(PP[k], cov, atol=1e-9)


def test_imm_step_against_direct_computation(rng):
    # The IMM step written out directly for one pair: mixing, two Kalman filters
    # (harbourwatch.models.gaussian, itself checked against scipy), mixture likelihood
    # checked against scipy.stats.multivariate_normal.
    mot = TwoModeMotion(0.0005, 0.05, interval_s=900.0, duration_s=60.0)
    m, P, mu = mode_states(rng, 1)
    dt = np.array([2.5])
    z = rng.normal(0, 50, (1, 2))
    R = np.array([[[400.0, 50.0], [50.0, 900.0]]])
    nis, ll, um, uP, post, mg, Pg = mot.score_and_update(m, P, mu, dt, z, R)
    T = mot._transition(dt)[0]
    c = mu[0] @ T
    lik = np.empty(2)
    for j, q in enumerate((0.0005, 0.05)):
        w = mu[0] * T[:, j] / c[j]
        m0, P0 = merge(m, P, w[None])
        mp, Pp = kf_predict(m0[0], P0[0], cv_transition(2.5), cv_process_noise(2.5, q))
        S = H @ Pp @ H.T + R[0]
        lik[j] = multivariate_normal(H @ mp, S).pdf(z[0])
        mu_, Pu, _ = kf_update(mp, Pp, z[0], R[0])
        np.testing.assert_allclose(um[0, j], mu_, atol=1e-8)
        np.testing.assert_allclose(uP[0, j], Pu, atol=1e-8)
    np.testing.assert_allclose(ll[0], np.log(c @ lik), atol=1e-9)
    np.testing.assert_allclose(post[0], c * lik / (c @ lik), atol=1e-9)


def test_equal_levels_reduce_to_one_kalman_filter(rng):
    mot = TwoModeMotion(0.01, 0.01, interval_s=900.0, duration_s=60.0)
    m, P, _ = mode_states(rng, 1)
    m[:, 1], P[:, 1] = m[:, 0], P[:, 0]
    mu = np.array([[0.7, 0.3]])
    z, R = np.array([[10.0, -20.0]]), np.array([np.eye(2) * 100.0])
    _, ll, _, _, post, mg, Pg = mot.score_and_update(m, P, mu, np.array([3.0]), z, R)
    mp, Pp = kf_predict(m[0, 0], P[0, 0], cv_transition(3.0), cv_process_noise(3.0, 0.01))
    mu_, Pu, ll_ref = kf_update(mp, Pp, z[0], R[0])
    np.testing.assert_allclose(mg[0], mu_, atol=1e-9)
    np.testing.assert_allclose(Pg[0], Pu, atol=1e-9)
    assert abs(ll[0] - ll_ref) < 1e-9


def test_turn_raises_manoeuvre_probability_and_steady_leg_lowers_it(rng):
    # Common practice, no source: a 3 deg/s turn at 10 kn (0.27 m/s^2) is a manoeuvre.
    mot = TwoModeMotion(0.0002, 0.05, interval_s=900.0, duration_s=60.0)
    dt, sig = 2.5, 15.0
    R = np.eye(2) * sig**2

    def run(turn_rate):
        v, heading = 5.14, 0.0
        x = np.array([0.0, 0.0])
        m = np.zeros((1, 2, 4))
        m[0, :, 1] = 0.0
        m[0, :, 3] = v
        P = np.broadcast_to(np.diag([sig**2, 1.0, sig**2, 1.0]), (1, 2, 4, 4)).copy()
        mu = mot.initial_mu(1)
        hist = []
        for _ in range(60):
            heading += turn_rate * dt
            x = x + v * dt * np.array([np.sin(heading), np.cos(heading)])
            z = (x + rng.normal(0, sig, 2))[None]
            _, _, m, P, mu, _, _ = mot.score_and_update(m, P, mu, np.array([dt]), z, R[None])
            hist.append(mu[0, 1])
        return np.array(hist)

    steady = run(0.0)
    turning = run(np.radians(3.0))
    assert steady[-20:].max() < 0.1
    assert turning[10:].mean() > 0.5
