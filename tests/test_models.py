"""Motion and measurement models against outside references.

- converted_covariance: the worked numbers of the converted-measurement
  covariance for rho = 5000 m, 30 deg mathematical angle, 20 m, 0.5 deg
  (computed from R = J diag(s_r^2, s_b^2) J^T, first-order linearisation as in
  Lerro and Bar-Shalom, IEEE TAES 29(3), 1993 -- from memory) and a
  Monte-Carlo of range/bearing noise judged with scipy.stats.
- cv_process_noise: numerical integration of e^{As} L q L^T e^{A^T s} over
  [0, T] with scipy.linalg.expm and scipy.integrate.quad_vec (the definition
  of the discretised continuous white-noise-acceleration model).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, linalg, stats

from harbourwatch.models.cv import (
    converted_covariance,
    cv_process_noise,
    cv_process_noise_batch,
    cv_transition,
    cv_transition_batch,
)

RHO, THETA_DEG, SR, SB_DEG = 5000.0, 30.0, 20.0, 0.5


def _worked_case() -> tuple[float, float]:
    th = math.radians(THETA_DEG)  # mathematical angle: counter-clockwise from east
    return RHO * math.cos(th), RHO * math.sin(th)


def test_converted_covariance_worked_numbers() -> None:
    de, dn = _worked_case()
    r = converted_covariance(de, dn, SR, math.radians(SB_DEG))
    assert r.shape == (1, 2, 2)
    # worked numbers (methods note 6.5, computed from the linearised equations)
    expected = np.array([[775.965, -651.190], [-651.190, 1527.894]])
    np.testing.assert_allclose(r[0], expected, atol=1e-3)
    w = np.linalg.eigvalsh(r[0])
    np.testing.assert_allclose(w, [400.0, 1903.859], atol=1e-3)  # s_r^2 and (rho s_b)^2


def test_converted_covariance_against_monte_carlo(rng: np.random.Generator) -> None:
    de, dn = _worked_case()
    n = 200_000
    th = math.radians(THETA_DEG) + rng.normal(0.0, math.radians(SB_DEG), n)
    rho = RHO + rng.normal(0.0, SR, n)
    x = np.column_stack([rho * np.cos(th) - de, rho * np.sin(th) - dn])
    r = converted_covariance(de, dn, SR, math.radians(SB_DEG))[0]
    # whiten with R: the whitened sample covariance must be I within sampling error
    chol = np.linalg.cholesky(r)
    z = linalg.solve_triangular(chol, (x - x.mean(axis=0)).T, lower=True).T
    s = np.cov(z.T)
    # asymptotic sd of a sample variance of N(0,1) is sqrt(2/n), of a covariance sqrt(1/n)
    assert abs(s[0, 0] - 1) < 4 * math.sqrt(2 / n)
    assert abs(s[1, 1] - 1) < 4 * math.sqrt(2 / n)
    assert abs(s[0, 1]) < 4 * math.sqrt(1 / n)
    # squared Mahalanobis distances follow chi-square with 2 dof (scipy.stats.kstest)
    m2 = np.sum(z[:20_000] ** 2, axis=1)
    assert stats.kstest(m2, stats.chi2(df=2).cdf).pvalue > 1e-3


def test_converted_covariance_detects_wrong_model(rng: np.random.Generator) -> None:
    # the same Monte-Carlo check rejects a covariance with bearing sigma 10 % too small
    de, dn = _worked_case()
    n = 200_000
    th = math.radians(THETA_DEG) + rng.normal(0.0, math.radians(SB_DEG), n)
    rho = RHO + rng.normal(0.0, SR, n)
    x = np.column_stack([rho * np.cos(th) - de, rho * np.sin(th) - dn])
    wrong = converted_covariance(de, dn, SR, 0.9 * math.radians(SB_DEG))[0]
    z = linalg.solve_triangular(np.linalg.cholesky(wrong), x.T, lower=True).T
    s = np.cov(z.T)
    assert max(abs(s[0, 0] - 1), abs(s[1, 1] - 1)) > 10 * math.sqrt(2 / n)


def test_converted_covariance_sigma_override() -> None:
    de = np.array([1000.0, 0.0, -3000.0])
    dn = np.array([0.0, 2000.0, 4000.0])
    sig = np.array([np.nan, 7.0, 12.5])
    r = converted_covariance(de, dn, 15.0, math.radians(0.4), sigma_m=sig)
    # finite sigma_m: isotropic sigma^2 I; NaN: the range/bearing model
    np.testing.assert_allclose(r[1], 49.0 * np.eye(2))
    np.testing.assert_allclose(r[2], 12.5**2 * np.eye(2))
    np.testing.assert_allclose(r[0], np.diag([15.0**2, (1000.0 * math.radians(0.4)) ** 2]))


@settings(max_examples=50, deadline=None)
@given(
    rho=st.floats(1.0, 30_000.0),
    brg=st.floats(0.0, 2 * math.pi),
    sr=st.floats(1.0, 100.0),
    sb=st.floats(1e-4, 0.05),
)
def test_converted_covariance_is_jacobian_form(rho: float, brg: float, sr: float, sb: float) -> None:
    # compass form of the Jacobian, J = [[sin b, rho cos b], [cos b, -rho sin b]]
    de, dn = rho * math.sin(brg), rho * math.cos(brg)
    j = np.array([[math.sin(brg), rho * math.cos(brg)], [math.cos(brg), -rho * math.sin(brg)]])
    expected = j @ np.diag([sr**2, sb**2]) @ j.T
    r = converted_covariance(de, dn, sr, sb)[0]
    np.testing.assert_allclose(r, expected, rtol=1e-9, atol=1e-9 * expected.max())
    assert np.all(np.linalg.eigvalsh(r) > 0)
    np.testing.assert_array_equal(r, r.T)


def _q_by_quadrature(dt: float, q: float) -> np.ndarray:
    a = np.kron(np.eye(2), np.array([[0.0, 1.0], [0.0, 0.0]]))
    ell = np.kron(np.eye(2), np.array([[0.0], [1.0]]))

    def integrand(s: float) -> np.ndarray:
        e = linalg.expm(a * s)
        return e @ ell @ (q * np.eye(2)) @ ell.T @ e.T

    val, _ = integrate.quad_vec(integrand, 0.0, dt, epsabs=1e-12, epsrel=1e-10)
    return val


@pytest.mark.parametrize(("dt", "q"), [(0.5, 0.05), (2.5, 0.05), (3.0, 0.2), (17.0, 0.01)])
def test_cv_process_noise_against_quadrature(dt: float, q: float) -> None:
    # reference: scipy.linalg.expm + scipy.integrate.quad_vec of the continuous model
    ref = _q_by_quadrature(dt, q)
    np.testing.assert_allclose(cv_process_noise(dt, q), ref, rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(cv_process_noise_batch([dt], q)[0], ref, rtol=1e-8, atol=1e-12)


def test_cv_transition_is_matrix_exponential() -> None:
    a = np.kron(np.eye(2), np.array([[0.0, 1.0], [0.0, 0.0]]))
    for dt in (0.0, 1.0, 2.5, 40.0):
        np.testing.assert_allclose(cv_transition(dt), linalg.expm(a * dt), atol=1e-12)
        np.testing.assert_allclose(cv_transition_batch([dt])[0], linalg.expm(a * dt), atol=1e-12)
