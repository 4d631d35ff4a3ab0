"""Two motion modes, steady legs and manoeuvres, with the IMM estimator.

A vessel is either on a steady leg (white-acceleration intensity ``q_lo``) or
manoeuvring (``q_hi``): a two-state Markov chain in continuous time with mean
sojourns ``interval_s`` (steady) and ``duration_s`` (manoeuvre). Each node of
a trajectory carries one Gaussian per mode and the mode probabilities; the
interacting multiple model (IMM) estimator mixes them before each prediction,
runs a Kalman filter per mode, scores a plot with the mode mixture of the two
likelihoods and updates the mode probabilities (Blom and Bar-Shalom, IEEE
Trans. Automatic Control 33(8), 1988 -- from memory; also Bar-Shalom, Li and
Kirubarajan 2001, ch. 11). The merged Gaussian of each node (moment matched)
is what gating pre-filters, the as-seen view and the smoother use; the
smoother takes ``q_eff = Σ μ_j q_j`` with the node's mode probabilities as the
process noise of the step into the node (the usual approximation of smoothing
a merged IMM output).

With ``q_hi <= q_lo`` both modes are the same and the estimator is exactly the
Kalman filter of the nearly-constant-velocity model.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._kernels import imm_gate_update, imm_predict
from harbourwatch.models.cv import cv_process_noise_batch, cv_transition_batch
from harbourwatch.models.gaussian import kf_predict, log_likelihood, mahalanobis2_batch

__all__ = ["TwoModeMotion", "merge"]

Array = NDArray[np.float64]
_POS = [0, 2]


def merge(mm: Array, mP: Array, w: Array) -> tuple[Array, Array]:
    """Moment-matched single Gaussian of per-mode Gaussians ``(n, 2, ...)`` with weights ``(n, 2)``."""
    m = np.einsum("nk,nki->ni", w, mm)
    d = mm - m[:, None, :]
    P = np.einsum("nk,nkij->nij", w, mP + d[:, :, :, None] * d[:, :, None, :])
    return m, 0.5 * (P + np.swapaxes(P, 1, 2))


class TwoModeMotion:
    """Steady / manoeuvre process-noise levels with Markov mode switching (IMM)."""

    def __init__(self, q_lo: float, q_hi: float | None, interval_s: float, duration_s: float) -> None:
        self.q_lo = float(q_lo)
        self.q_hi = float(q_hi) if q_hi is not None and q_hi > q_lo else self.q_lo
        self.q = np.array([self.q_lo, self.q_hi])
        self.enabled = self.q_hi > self.q_lo
        self.a = 1.0 / interval_s  # steady -> manoeuvre rate
        self.b = 1.0 / duration_s  # manoeuvre -> steady rate
        self.pi_hi = self.a / (self.a + self.b)

    @property
    def q_max(self) -> float:
        return self.q_hi

    def initial_mu(self, n: int) -> Array:
        """Mode probabilities ``(n, 2)`` of a new trajectory: the chain's stationary ones."""
        out = np.empty((n, 2))
        out[:, 0], out[:, 1] = 1.0 - self.pi_hi, self.pi_hi
        return out

    def q_eff(self, mu: Array) -> Array:
        return mu @ self.q

    def _transition(self, dt: Array) -> Array:
        """``(n, 2, 2)`` mode transition probabilities ``p[i, j] = Pr(j at t+dt | i at t)``."""
        s = 1.0 - np.exp(-(self.a + self.b) * dt)
        p01 = self.pi_hi * s
        p10 = (1.0 - self.pi_hi) * s
        T = np.empty((dt.size, 2, 2))
        T[:, 0, 0], T[:, 0, 1] = 1.0 - p01, p01
        T[:, 1, 0], T[:, 1, 1] = p10, 1.0 - p10
        return T

    def _mix_predict(self, mm: Array, mP: Array, mu: Array, dt: Array) -> tuple[Array, Array, Array]:
        """IMM mixing and per-mode prediction: predicted ``(n,2,4)``, ``(n,2,4,4)``, prior ``c (n,2)``."""
        T = self._transition(dt)
        joint = mu[:, :, None] * T  # (n, i, j)
        c = joint.sum(axis=1)  # predicted mode probabilities
        wmix = joint / np.maximum(c[:, None, :], 1e-300)  # mu_{i|j}
        F = cv_transition_batch(dt)
        Qu = cv_process_noise_batch(dt, 1.0)
        pm = np.empty_like(mm)
        pP = np.empty_like(mP)
        for j in range(2):
            m0, P0 = merge(mm, mP, wmix[:, :, j])
            pm[:, j], pP[:, j] = kf_predict(m0, P0, F, Qu * self.q[j])
        return pm, pP, c

    def predict(self, mm: Array, mP: Array, mu: Array, dt: Array) -> tuple[Array, Array, Array, Array, Array]:
        """Prediction without a plot: per-mode moments, prior mode probabilities and their merge.

        Compiled (:func:`._kernels.imm_predict`); :meth:`predict_reference` is the same in numpy.
        """
        return imm_predict(  # type: ignore[no-any-return]
            np.ascontiguousarray(mm), np.ascontiguousarray(mP), np.ascontiguousarray(mu),
            np.ascontiguousarray(dt, dtype=float), self.q, self.a, self.b, self.pi_hi,
        )

    def predict_reference(
        self, mm: Array, mP: Array, mu: Array, dt: Array
    ) -> tuple[Array, Array, Array, Array, Array]:
        """:meth:`predict` written with batched numpy (the readable reference of the kernel)."""
        pm, pP, c = self._mix_predict(mm, mP, mu, dt)
        m, P = merge(pm, pP, c)
        return pm, pP, c, m, P

    def gate_update(
        self,
        mm: Array,
        mP: Array,
        mu: Array,
        t_leaf: Array,
        ii: NDArray[np.int64],
        jj: NDArray[np.int64],
        tj: Array,
        z: Array,
        R: Array,
        gate: float,
        min_step: float,
    ) -> tuple[NDArray[np.int64], Array, Array, Array, Array, Array, Array, Array]:
        """Gate candidate pairs (leaf ``ii``, plot ``jj``) and update the ones inside the gate.

        Each leaf is predicted to its plot's own time ``max(tj, t_leaf + min_step)``;
        a pair passes when the smaller of the two modes' NIS is below ``gate``
        (as :meth:`score_and_update`, which is the numpy reference). Returns,
        for the passing pairs in candidate order: their candidate positions,
        the mixture log-likelihood, the node time, the merged mean and
        covariance, the per-mode means and covariances and the mode probabilities.
        """
        cnt, idx, ll, stamp, m, P, um, uP, post = imm_gate_update(
            mm, mP, mu, t_leaf, np.ascontiguousarray(ii), np.ascontiguousarray(jj), tj, z, R,
            self.q, self.a, self.b, self.pi_hi, float(gate), float(min_step),
        )
        return idx[:cnt], ll[:cnt], stamp[:cnt], m[:cnt], P[:cnt], um[:cnt], uP[:cnt], post[:cnt]

    def score_and_update(
        self, mm: Array, mP: Array, mu: Array, dt: Array, z: Array, R: Array
    ) -> tuple[Array, Array, Array, Array, Array, Array, Array]:
        """IMM step with one plot for a batch of (hypothesis, plot) pairs.

        Returns the gate statistic (the smaller of the two modes' NIS), the
        mixture log-likelihood, the updated per-mode means and covariances,
        the posterior mode probabilities, and their merged mean and covariance.
        Batched numpy: the reference that :meth:`gate_update` is tested against.
        """
        from harbourwatch.filter._gating import batch_update

        pm, pP, c = self._mix_predict(mm, mP, mu, dt)
        n = dt.size
        ll_j = np.empty((n, 2))
        nis_j = np.empty((n, 2))
        um = np.empty_like(pm)
        uP = np.empty_like(pP)
        for j in range(2):
            S = pP[:, j][:, _POS][:, :, _POS] + R
            nu = z - pm[:, j, _POS]
            nis_j[:, j] = mahalanobis2_batch(nu, S)
            ll_j[:, j] = log_likelihood(nu, S)
            um[:, j], uP[:, j] = batch_update(pm[:, j], pP[:, j], nu, S, R)
        a = np.log(np.maximum(c, 1e-300)) + ll_j
        top = a.max(axis=1)
        ll = top + np.log(np.exp(a - top[:, None]).sum(axis=1))
        post = np.exp(a - ll[:, None])
        m, P = merge(um, uP, post)
        return nis_j.min(axis=1), ll, um, uP, post, m, P
