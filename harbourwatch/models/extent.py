"""Plot rate and hull extent of extended vessels: the gamma Gaussian inverse-Wishart model.

A vessel that gives several plots per scan carries, besides its kinematic
Gaussian, a gamma density ``Gam(γ; α, β)`` of its Poisson plot rate and an
inverse-Wishart density ``IW(X; v, V)`` of its 2-D extent (the hull as an
ellipse; the decoupled GGIW form of Feldmann, Fränken and Koch 2011, used
in the extended-target PMBM of Granström, Fatemi and Svensson 2020).

Parameterisation (the classic trap, so stated once): ``IW(X; v, V)`` is
``scipy.stats.invwishart(df=v, scale=V)``, whose mean is ``V / (v - d - 1)``
with ``d = 2``, i.e. ``E[X] = V / (v - 3)``, defined for ``v > 3``. The
gamma density has shape ``α`` and rate ``β`` (mean ``α / β``).

Measurement model: given a detection, the number of plots is Poisson(γ);
each plot is ``z ~ N(H x, ρ X + R)`` with ``ρ = 1/4`` (a uniform ellipse of
shape ``X`` has covariance ``X / 4``). Scaling to hull size: for that ellipse
the semi-axes are the square roots of ``X``'s eigenvalues, so the length is
``2 sqrt(λ_max)`` and the beam ``2 sqrt(λ_min)``.

Everything here is batched over pairs (arrays of ``k`` rows, ``V`` of shape
``(k, 2, 2)``) and plain numpy; 2x2 square roots and inverses are in closed
form.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln

Array = NDArray[np.float64]

#: Covariance of a uniform ellipse over its shape matrix.
RHO = 0.25
#: Prior of a vessel's plot rate when it is first seen as extended: shape and rate.
RATE_PRIOR = (1.5, 0.5)
#: Prior extent: semi-axes of this many metres and ``v = 3 + EXTENT_PRIOR_DOF``.
EXTENT_PRIOR_SEMI_AXIS_M = 75.0
EXTENT_PRIOR_DOF = 4.0
#: Prior probability that a vessel is extended (weights the extended births).
EXTENDED_PRIOR = 0.1
#: Forgetting time constants of the rate and the extent (s), methods note §9.4.
RATE_TAU_S = 60.0
EXTENT_TAU_S = 120.0
#: Fewest degrees of freedom kept after forgetting (``E[X]`` stays defined).
MIN_DOF = 3.5

_LOG_2PI = math.log(2.0 * math.pi)


def iw_mean(v: Array, V: Array) -> Array:
    """``E[X] = V / (v - 3)`` for ``X ~ scipy.stats.invwishart(df=v, scale=V)``, d = 2."""
    return V / (np.asarray(v, float) - 3.0)[..., None, None]


def count_log_pmf(n: Array, alpha: Array, beta: Array) -> Array:
    """Log of the gamma-Poisson (negative binomial) probability of ``n`` plots.

    ``Γ(α + n) / (Γ(α) n!) (β/(β+1))^α (1/(β+1))^n``, which is
    ``scipy.stats.nbinom(r=α, p=β/(β+1))``.
    """
    n = np.asarray(n, float)
    return (gammaln(alpha + n) - gammaln(alpha) - gammaln(n + 1.0)
            + alpha * np.log(beta / (beta + 1.0)) - n * np.log1p(beta))


def log_no_plot(alpha: Array, beta: Array) -> Array:
    """``ln (β/(β+1))^α``: a detected vessel giving no plot at all, rate marginalised."""
    return alpha * np.log(beta / (beta + 1.0))


def sqrtm2(A: Array) -> Array:
    """Symmetric square roots of 2x2 SPD matrices: ``(A + s I) / t``, ``s = √det``, ``t = √(tr + 2s)``."""
    a, b, d = A[..., 0, 0], A[..., 0, 1], A[..., 1, 1]
    s = np.sqrt(np.maximum(a * d - b * b, 0.0))
    t = np.sqrt(a + d + 2.0 * s)
    out = np.empty_like(A)
    out[..., 0, 0] = (a + s) / t
    out[..., 1, 1] = (d + s) / t
    out[..., 0, 1] = out[..., 1, 0] = b / t
    return out


def inv2(A: Array) -> Array:
    """Inverses of 2x2 matrices in closed form."""
    a, b, c, d = A[..., 0, 0], A[..., 0, 1], A[..., 1, 0], A[..., 1, 1]
    det = a * d - b * c
    out = np.empty_like(A)
    out[..., 0, 0], out[..., 1, 1] = d / det, a / det
    out[..., 0, 1], out[..., 1, 0] = -b / det, -c / det
    return out


def prior_extent(k: int) -> tuple[Array, Array, Array, Array]:
    """``k`` copies of the prior ``(α, β, v, V)`` of a vessel first seen as extended."""
    v = np.full(k, 3.0 + EXTENT_PRIOR_DOF)
    V = np.zeros((k, 2, 2))
    V[:, 0, 0] = V[:, 1, 1] = EXTENT_PRIOR_SEMI_AXIS_M**2 * EXTENT_PRIOR_DOF
    return np.full(k, RATE_PRIOR[0]), np.full(k, RATE_PRIOR[1]), v, V


def predict_extent(alpha: Array, beta: Array, v: Array, V: Array, dt: Array
                   ) -> tuple[Array, Array, Array, Array]:
    """Forgetting over ``dt`` (methods note §9.4): the means stay, the confidence drops.

    ``α, β ← α/η, β/η`` with ``η = exp(Δt/τ_γ)``; ``v ← 3 + e^{-Δt/τ_X} (v - 3)``
    (at least :data:`MIN_DOF`) and ``V`` rescaled so that ``E[X]`` is unchanged.
    """
    eta = np.exp(-np.asarray(dt, float) / RATE_TAU_S)
    v2 = np.maximum(3.0 + np.exp(-np.asarray(dt, float) / EXTENT_TAU_S) * (v - 3.0), MIN_DOF)
    v2 = np.minimum(v2, v)
    return alpha * eta, beta * eta, v2, V * ((v2 - 3.0) / (v - 3.0))[:, None, None]


def cell_moments(z: Array) -> tuple[Array, Array]:
    """Centroid and scatter ``Z = Σ (z_j - z̄)(z_j - z̄)ᵀ`` of one cell's plots ``(n, 2)``."""
    zbar = z.mean(axis=0)
    d = z - zbar
    return zbar, d.T @ d


def scatter_log_lik(n: Array, Z: Array, Y: Array) -> Array:
    """Log density of a cell's scatter about its centroid under ``N(0, Y)`` per plot.

    ``∏_j N(z_j; μ, Y) = N(z̄; μ, Y/n) · (2π)^{-(n-1)} |Y|^{-(n-1)/2} n^{-1} exp(-½ tr(Y⁻¹ Z))``;
    this returns the log of the second factor (0 for ``n = 1``).
    """
    n = np.asarray(n, float)
    det = Y[..., 0, 0] * Y[..., 1, 1] - Y[..., 0, 1] * Y[..., 1, 0]
    tr = np.einsum("...ij,...ji->...", inv2(Y), Z)
    return -(n - 1.0) * _LOG_2PI - 0.5 * (n - 1.0) * np.log(det) - np.log(n) - 0.5 * tr


def update_extent(alpha: Array, beta: Array, v: Array, V: Array, n: Array, eps: Array,
                  S: Array, Z: Array, Y: Array) -> tuple[Array, Array, Array, Array]:
    """Rate and extent after a cell of ``n`` plots (methods note §9.3; the approximation of [FFK11]).

    ``α + n``, ``β + 1``, ``v + n`` and
    ``V + X̂^{1/2} S^{-1/2} ε εᵀ S^{-1/2} X̂^{1/2} + X̂^{1/2} Y^{-1/2} Z Y^{-1/2} X̂^{1/2}``
    with symmetric square roots, ``ε`` the centroid's innovation, ``S`` its
    covariance ``H P Hᵀ + Y / n`` and ``Y = ρ X̂ + R̄``.
    """
    n = np.asarray(n, float)
    Xs = sqrtm2(iw_mean(v, V))
    A = Xs @ inv2(sqrtm2(S))
    B = Xs @ inv2(sqrtm2(Y))
    N = np.einsum("ki,kj->kij", eps, eps)
    V2 = V + A @ N @ np.swapaxes(A, 1, 2) + B @ Z @ np.swapaxes(B, 1, 2)
    V2 = 0.5 * (V2 + np.swapaxes(V2, 1, 2))
    return alpha + n, beta + 1.0, v + n, V2


def hull_size(v: float, V: Array) -> tuple[float, float, float]:
    """``(length_m, beam_m, heading_deg)`` of the extent's mean.

    Length and beam are ``2 sqrt`` of the eigenvalues of ``E[X]`` (uniform
    ellipse); heading is the main axis' direction in the local grid (clockwise from
    the frame's grid north), degrees in ``[0, 180)``; ``tracks.csv`` turns it to
    degrees true per row.
    """
    X = np.asarray(V, float) / (v - 3.0)
    w, vec = np.linalg.eigh(X)
    e, n = vec[0, 1], vec[1, 1]
    heading = math.degrees(math.atan2(e, n)) % 180.0
    return 2.0 * math.sqrt(max(w[1], 0.0)), 2.0 * math.sqrt(max(w[0], 0.0)), heading


def hull_length(ext: tuple[float, ...]) -> float:
    """Length ``2 sqrt(λ_max(E[X]))`` of an extent tuple ``(α, β, v, V00, V01, V11)``."""
    _, _, v, a, b, c = ext
    lam = 0.5 * (a + c) + math.hypot(0.5 * (a - c), b)
    return 2.0 * math.sqrt(max(lam, 0.0) / (v - 3.0))


def length_probability(v: float, V: Array, lo: float, hi: float, *, draws: int = 400) -> float:
    """Probability that the hull length ``2 sqrt(λ_max(X))`` lies in ``[lo, hi]``, ``X ~ IW(v, V)``.

    Monte Carlo with a fixed seed, so the same estimate gives the same
    probability: ``draws`` samples of ``scipy.stats.invwishart(df=v, scale=V)``
    (kept per estimate: every rule of a run reads the same draws).
    """
    V = np.asarray(V, float)
    length = _length_draws(float(v), float(V[0, 0]), float(V[0, 1]), float(V[1, 1]), int(draws))
    return float(np.mean((length >= lo) & (length <= hi)))


@lru_cache(maxsize=4096)
def _length_draws(v: float, v00: float, v01: float, v11: float, draws: int) -> Array:
    from scipy.stats import invwishart

    X = invwishart(df=max(v, MIN_DOF), scale=np.array([[v00, v01], [v01, v11]])).rvs(
        size=draws, random_state=np.random.default_rng(20260504))
    lam = np.linalg.eigvalsh(X.reshape(draws, 2, 2))[:, 1]
    out = 2.0 * np.sqrt(np.maximum(lam, 0.0))
    out.flags.writeable = False
    return out
