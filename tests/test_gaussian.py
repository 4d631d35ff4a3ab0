"""Tests of harbourwatch.models.gaussian (Kalman steps, RTS smoother, FFBS draws).

Outside references: scipy.stats (normal and multivariate normal densities),
scipy.linalg (dense solves of the normal equations / of the joint Gaussian),
and the textbook scalar Kalman update (Bar-Shalom, Li, Kirubarajan 2001,
ch. 5 -- from memory for the chapter).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sla
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.distance import mahalanobis
from scipy.stats import multivariate_normal, norm

from harbourwatch.models.cv import H, cv_process_noise, cv_transition
from harbourwatch.models.gaussian import (
    ffbs_sample,
    kf_predict,
    kf_update,
    log_likelihood,
    mahalanobis2_batch,
    rts_smooth,
)

seeds = st.integers(0, 2**32 - 1)


def random_spd(rng: np.random.Generator, n: int, scale: float = 1.0) -> np.ndarray:
    A = rng.normal(size=(n, n))
    return scale * (A @ A.T + 0.5 * n * np.eye(n))


def assert_symmetric_pd(P: np.ndarray) -> None:
    np.testing.assert_array_equal(P, np.swapaxes(P, -1, -2))
    assert np.all(np.linalg.eigvalsh(P) > 0)


# --- single Kalman steps --------------------------------------------------------------------------


def test_update_per_axis_closed_form() -> None:
    # Decoupled axes, position-only plot, diagonal R: each axis is the scalar update
    # S = p11 + r, K = [p11, p12] / S, P'11 = p11 r / S, P'12 = p12 r / S,
    # P'22 = p22 - p12^2 / S (textbook scalar Kalman update, from memory).
    m = np.array([100.0, 3.0, -50.0, -1.5])
    P = np.zeros((4, 4))
    P[:2, :2] = [[400.0, 30.0], [30.0, 9.0]]
    P[2:, 2:] = [[225.0, -12.0], [-12.0, 4.0]]
    R = np.diag([100.0, 64.0])
    z = np.array([130.0, -70.0])
    m_new, P_new, ll = kf_update(m, P, z, R)
    expect_ll = 0.0
    for ax, (i, r) in enumerate(((0, 100.0), (2, 64.0))):
        p11, p12, p22 = P[i, i], P[i, i + 1], P[i + 1, i + 1]
        S = p11 + r
        nu = z[ax] - m[i]
        assert m_new[i] == pytest.approx(m[i] + p11 / S * nu, rel=1e-14)
        assert m_new[i + 1] == pytest.approx(m[i + 1] + p12 / S * nu, rel=1e-14)
        assert P_new[i, i] == pytest.approx(p11 * r / S, rel=1e-13)
        assert P_new[i, i + 1] == pytest.approx(p12 * r / S, rel=1e-13)
        assert P_new[i + 1, i + 1] == pytest.approx(p22 - p12**2 / S, rel=1e-13)
        expect_ll += norm.logpdf(z[ax], loc=m[i], scale=np.sqrt(S))  # scipy.stats
    assert P_new[0, 2] == 0.0 and P_new[1, 3] == 0.0
    assert ll == pytest.approx(expect_ll, rel=1e-13)


@settings(max_examples=60, deadline=None)
@given(seed=seeds)
def test_update_matches_information_form_and_scipy_density(seed: int) -> None:
    rng = np.random.default_rng(seed)
    P = random_spd(rng, 4, scale=rng.uniform(0.1, 100.0))
    R = random_spd(rng, 2, scale=rng.uniform(0.1, 100.0))
    m = rng.normal(scale=50.0, size=4)
    z = H @ m + rng.normal(scale=20.0, size=2)
    m_new, P_new, ll = kf_update(m, P, z, R)
    # Information form: (P^-1 + H' R^-1 H) x = P^-1 m + H' R^-1 z, solved densely.
    Pinv = sla.solve(P, np.eye(4), assume_a="pos")
    Rinv = sla.solve(R, np.eye(2), assume_a="pos")
    A = Pinv + H.T @ Rinv @ H
    P_ref = sla.solve(A, np.eye(4), assume_a="pos")
    m_ref = sla.solve(A, Pinv @ m + H.T @ Rinv @ z, assume_a="pos")
    scale = np.sqrt(np.outer(np.diag(P_ref), np.diag(P_ref)))
    np.testing.assert_allclose((P_new - P_ref) / scale, 0.0, atol=1e-9)
    np.testing.assert_allclose((m_new - m_ref) / np.sqrt(np.diag(P_ref)), 0.0, atol=1e-9)
    assert_symmetric_pd(P_new)
    # Predictive density of the plot: scipy.stats.multivariate_normal.
    ref_ll = multivariate_normal.logpdf(z, mean=H @ m, cov=H @ P @ H.T + R)
    assert ll == pytest.approx(ref_ll, rel=1e-10, abs=1e-10)


def test_predict_matches_definition(rng: np.random.Generator) -> None:
    m = rng.normal(size=4)
    P = random_spd(rng, 4)
    F, Q = cv_transition(2.5), cv_process_noise(2.5, 0.3)
    m_pred, P_pred = kf_predict(m, P, F, Q)
    np.testing.assert_allclose(m_pred, [m[0] + 2.5 * m[1], m[1], m[2] + 2.5 * m[3], m[3]])
    np.testing.assert_allclose(P_pred, F @ P @ F.T + Q, rtol=1e-13)
    assert_symmetric_pd(P_pred)
    # Batched over a leading axis.
    mb, Pb = kf_predict(np.stack([m, 2 * m]), np.stack([P, 2 * P]), F, Q)
    np.testing.assert_allclose(mb[1], F @ (2 * m))
    np.testing.assert_allclose(Pb[1], F @ (2 * P) @ F.T + Q, rtol=1e-13)


@settings(max_examples=40, deadline=None)
@given(seed=seeds, shape=st.sampled_from([(1,), (7,), (3, 5)]))
def test_batched_likelihood_and_mahalanobis_match_scipy(seed: int, shape: tuple) -> None:
    rng = np.random.default_rng(seed)
    n = int(np.prod(shape))
    S = np.stack([random_spd(rng, 2, scale=rng.uniform(0.01, 1e4)) for _ in range(n)])
    nu = rng.normal(size=(n, 2)) * np.sqrt(S[:, [0, 1], [0, 1]]) * 2.0
    ll = log_likelihood(nu.reshape(*shape, 2), S.reshape(*shape, 2, 2))
    d2 = mahalanobis2_batch(nu.reshape(*shape, 2), S.reshape(*shape, 2, 2))
    assert ll.shape == shape and d2.shape == shape
    for i in range(n):
        ref = multivariate_normal.logpdf(nu[i], mean=np.zeros(2), cov=S[i])  # scipy.stats
        assert ll.reshape(-1)[i] == pytest.approx(ref, rel=1e-10, abs=1e-10)
        # scipy.spatial.distance.mahalanobis takes the inverse covariance.
        ref_d = mahalanobis(nu[i], np.zeros(2), sla.inv(S[i]))
        assert d2.reshape(-1)[i] == pytest.approx(ref_d**2, rel=1e-9)


# --- chains: RTS smoother and FFBS against the joint Gaussian ---------------------------------


def run_chain(rng: np.random.Generator, T: int, q: float, miss_prob: float = 0.3):
    """Simulate a CV chain with irregular steps and some missed plots; filter it."""
    times = np.cumsum(np.concatenate(([0.0], rng.uniform(0.5, 6.0, size=T - 1))))
    m0 = np.array([0.0, 4.0, 0.0, -2.0])
    P0 = np.diag([400.0, 25.0, 400.0, 25.0])
    Rs, zs = [], []
    filt_m, filt_P = np.empty((T, 4)), np.empty((T, 4, 4))
    pred_m, pred_P = np.empty((T, 4)), np.empty((T, 4, 4))
    m, P = m0, P0
    x = m0 + rng.normal(size=4) * np.sqrt(np.diag(P0))
    for k in range(T):
        if k > 0:
            dt = times[k] - times[k - 1]
            F, Q = cv_transition(dt), cv_process_noise(dt, q)
            m, P = kf_predict(m, P, F, Q)
            x = F @ x + rng.multivariate_normal(np.zeros(4), Q)
        pred_m[k], pred_P[k] = m, P
        if k == 0 or rng.random() > miss_prob:
            R = random_spd(rng, 2, scale=20.0)
            z = H @ x + rng.multivariate_normal(np.zeros(2), R)
            m, P, _ = kf_update(m, P, z, R)
        else:
            R, z = None, None  # missed: filtered = predicted
        Rs.append(R)
        zs.append(z)
        filt_m[k], filt_P[k] = m, P
    return times, m0, P0, Rs, zs, filt_m, filt_P, pred_m, pred_P


def joint_posterior(times, m0, P0, q, Rs, zs):
    """Condition the stacked prior of x_{0:T-1} on every plot with dense linear algebra."""
    T = times.size
    # x = A w with w = (x_0, noise_1, ..., noise_{T-1}): block lower-triangular A.
    A = np.zeros((4 * T, 4 * T))
    cov_w = np.zeros((4 * T, 4 * T))
    cov_w[:4, :4] = P0
    Fs = [np.eye(4)] + [cv_transition(times[k] - times[k - 1]) for k in range(1, T)]
    for k in range(1, T):
        cov_w[4 * k : 4 * k + 4, 4 * k : 4 * k + 4] = cv_process_noise(times[k] - times[k - 1], q)
    for k in range(T):
        for j in range(k + 1):  # x_k = F_k ... F_{j+1} w_j
            M = np.eye(4)
            for i in range(j + 1, k + 1):
                M = Fs[i] @ M
            A[4 * k : 4 * k + 4, 4 * j : 4 * j + 4] = M
    mu = A[:, :4] @ m0
    Sigma = A @ cov_w @ A.T
    obs = [k for k in range(T) if zs[k] is not None]
    Hs = np.zeros((2 * len(obs), 4 * T))
    Rb = np.zeros((2 * len(obs), 2 * len(obs)))
    y = np.zeros(2 * len(obs))
    for i, k in enumerate(obs):
        Hs[2 * i : 2 * i + 2, 4 * k : 4 * k + 4] = H
        Rb[2 * i : 2 * i + 2, 2 * i : 2 * i + 2] = Rs[k]
        y[2 * i : 2 * i + 2] = zs[k]
    Syy = Hs @ Sigma @ Hs.T + Rb
    Sxy = Sigma @ Hs.T
    gain = sla.solve(Syy, Sxy.T, assume_a="pos").T
    post_mu = mu + gain @ (y - Hs @ mu)
    post_Sigma = Sigma - gain @ Sxy.T
    return post_mu.reshape(T, 4), 0.5 * (post_Sigma + post_Sigma.T)


def smoother_gains(times, filt_P, pred_P):
    """G_k = P_{k|k} F^T P_{k+1|k}^{-1}, as dense solves (reference for the cross-covariances)."""
    out = []
    for k in range(times.size - 1):
        F = cv_transition(times[k + 1] - times[k])
        out.append(sla.solve(pred_P[k + 1], (filt_P[k] @ F.T).T, assume_a="pos").T)
    return out


@settings(max_examples=25, deadline=None)
@given(seed=seeds, T=st.integers(1, 9), q=st.sampled_from([0.01, 0.1, 1.0]))
def test_rts_matches_joint_gaussian_posterior(seed: int, T: int, q: float) -> None:
    rng = np.random.default_rng(seed)
    times, m0, P0, Rs, zs, fm, fP, pm, pP = run_chain(rng, T, q)
    ms, Ps = rts_smooth(times, fm, fP, pm, pP)
    mu, Sigma = joint_posterior(times, m0, P0, q, Rs, zs)
    for k in range(T):
        blk = Sigma[4 * k : 4 * k + 4, 4 * k : 4 * k + 4]
        sd = np.sqrt(np.diag(blk))
        np.testing.assert_allclose((ms[k] - mu[k]) / sd, 0.0, atol=1e-9)
        np.testing.assert_allclose((Ps[k] - blk) / np.outer(sd, sd), 0.0, atol=1e-9)
        assert_symmetric_pd(Ps[k])
        assert_symmetric_pd(fP[k])
    # Smoothed cross-covariance Cov(x_k, x_{k+1}) = G_k P^s_{k+1} (methods note §6.3).
    for k, G in enumerate(smoother_gains(times, fP, pP)):
        cross = Sigma[4 * k : 4 * k + 4, 4 * (k + 1) : 4 * (k + 2)]
        sd_k = np.sqrt(np.diag(Sigma)[4 * k : 4 * k + 4])
        sd_k1 = np.sqrt(np.diag(Sigma)[4 * (k + 1) : 4 * (k + 2)])
        np.testing.assert_allclose((G @ Ps[k + 1] - cross) / np.outer(sd_k, sd_k1), 0.0, atol=1e-9)


def test_rts_last_state_is_the_filtered_one(rng: np.random.Generator) -> None:
    times, _, _, _, _, fm, fP, pm, pP = run_chain(rng, 5, 0.1)
    ms, Ps = rts_smooth(times, fm, fP, pm, pP)
    np.testing.assert_array_equal(ms[-1], fm[-1])
    np.testing.assert_array_equal(Ps[-1], fP[-1])


def test_ffbs_draws_follow_the_smoothed_joint(rng: np.random.Generator) -> None:
    T, n = 6, 40_000
    times, m0, P0, Rs, zs, fm, fP, pm, pP = run_chain(rng, T, 0.2)
    ms, Ps = rts_smooth(times, fm, fP, pm, pP)
    draws = ffbs_sample(np.random.default_rng(7), n, times, fm, fP, pm, pP)
    assert draws.shape == (n, T, 4)
    flat = draws.reshape(n, 4 * T)
    mean = flat.mean(axis=0).reshape(T, 4)
    cov = np.cov(flat, rowvar=False)
    _, Sigma = joint_posterior(times, m0, P0, 0.2, Rs, zs)
    # Sampling tolerances: 5 standard errors. The mean's standard error is
    # sqrt(C_ii / n); a sample covariance entry's is sqrt((C_ii C_jj + C_ij^2) / n)
    # for Gaussian data (Anderson, An Introduction to Multivariate Statistical
    # Analysis, from memory).
    sd = np.sqrt(np.diag(Sigma))
    np.testing.assert_array_less(np.abs(mean.reshape(-1) - ms.reshape(-1)), 5 * sd / np.sqrt(n))
    se = np.sqrt((np.outer(sd**2, sd**2) + Sigma**2) / n)
    np.testing.assert_array_less(np.abs(cov - Sigma), 5 * se)
    # The marginals and the consecutive cross-covariances, against the smoother.
    for k, G in enumerate(smoother_gains(times, fP, pP)):
        blk = slice(4 * k, 4 * k + 4), slice(4 * (k + 1), 4 * (k + 2))
        np.testing.assert_array_less(np.abs(cov[blk] - G @ Ps[k + 1]), 5 * se[blk])
    for k in range(T):
        blk = slice(4 * k, 4 * k + 4), slice(4 * k, 4 * k + 4)
        np.testing.assert_array_less(np.abs(cov[blk] - Ps[k]), 5 * se[blk])


def test_ffbs_is_reproducible_and_handles_a_single_state(rng: np.random.Generator) -> None:
    times, _, _, _, _, fm, fP, pm, pP = run_chain(rng, 4, 0.1)
    a = ffbs_sample(np.random.default_rng(3), 10, times, fm, fP, pm, pP)
    b = ffbs_sample(np.random.default_rng(3), 10, times, fm, fP, pm, pP)
    np.testing.assert_array_equal(a, b)
    one = ffbs_sample(np.random.default_rng(3), 20_000, times[:1], fm[:1], fP[:1], pm[:1], pP[:1])
    assert one.shape == (20_000, 1, 4)
    sd = np.sqrt(np.diag(fP[0]))
    np.testing.assert_array_less(np.abs(one[:, 0].mean(axis=0) - fm[0]), 5 * sd / np.sqrt(20_000))
