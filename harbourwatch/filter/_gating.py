"""Gating of (hypothesis, plot) pairs and the per-pair Kalman updates, vectorised.

Each plot is scored at its own time: the hypothesis' leaf is predicted from
its node time to the plot time (methods note §D, P13). A cheap pre-filter
that provably keeps every pair inside the gate keeps the exact per-pair test
small (``_kernels.gate_candidates``).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.special import chdtri, ndtr

from harbourwatch.errors import ParameterError
from harbourwatch.filter._kernels import gate_candidates
from harbourwatch.scene.records import SensorModel

Array = NDArray[np.float64]
_POS = [0, 2]

def chi2_gate(gate_probability: float, dim: int = 2) -> float:
    """Squared-Mahalanobis gate that keeps a true plot with probability ``gate_probability``.

    The innovation of a correct plot has ``νᵀ S⁻¹ ν ~ χ²(dim)``, so the gate is
    the ``gate_probability`` quantile of that distribution. For ``dim = 2`` it
    equals ``-2 ln(1 - P)``.

    Parameters
    ----------
    gate_probability
        In ``(0, 1)``.
    dim
        Measurement dimension (2 for a position plot).

    Examples
    --------
    >>> round(chi2_gate(0.99), 4)
    9.2103
    """
    p = float(gate_probability)
    if not 0.0 < p < 1.0:
        raise ParameterError(f"gate probability must lie in (0, 1), got {gate_probability!r}", parameter="gate_probability")
    if int(dim) != dim or dim < 1:
        raise ParameterError(f"dimension must be a positive integer, got {dim!r}", parameter="dim")
    return float(chdtri(int(dim), 1.0 - p))  # the chi-square quantile, lighter than scipy.stats


#: Smallest step between two nodes of one chain (keeps chain times increasing).
MIN_STEP_S = 1e-3


def gate_pairs(
    gate: Any, motion: Any, leaf_mm: Any, leaf_mP: Any, leaf_mu: Any, pd: Any, t_leaf: Any, z: Any, R: Any, tj: Any
) -> Any:
    """Gated pairs ``(i, j, log-lik, node time, merged mean, merged cov, mode means,
    mode covs, mode probabilities)``.

    ``motion`` is the two-mode motion model; ``leaf_mm, leaf_mP, leaf_mu`` are
    the per-mode moments of each hypothesis' leaf at ``t_leaf``; ``pd``
    selects the hypotheses that can be detected. A pair passes the gate when
    the plot is inside the ellipsoid of at least one mode's prediction to the
    plot's own time; it is scored with the mode-mixture likelihood (IMM).
    """
    m = z.shape[0]
    act = np.flatnonzero(pd > 0)
    empty = (
        np.zeros(0, np.int64),
        np.zeros(0, np.int64),
        np.zeros(0),
        np.zeros(0),
        np.zeros((0, 4)),
        np.zeros((0, 4, 4)),
        np.zeros((0, 2, 4)),
        np.zeros((0, 2, 4, 4)),
        np.zeros((0, 2)),
    )
    if m == 0 or act.size == 0:
        return empty
    # a cheap pre-filter that provably keeps every pair inside the gate, then the exact
    # test at each plot's time
    ii, jj = gate_candidates(
        act, leaf_mm, leaf_mP, t_leaf, motion.q_max, z, R, tj, float(gate), MIN_STEP_S
    )
    if ii.size == 0:
        return empty
    ok, ll, stamp, m_upd, P_upd, um, uP, post = motion.gate_update(
        leaf_mm, leaf_mP, leaf_mu, t_leaf, ii, jj, tj, z, R, gate, MIN_STEP_S
    )
    return ii[ok], jj[ok], ll, stamp, m_upd, P_upd, um, uP, post


def cover_detection(pm: Array, pP: Array, sensor: SensorModel) -> Array:
    """Detection probability of predicted states: ``p_D Pr(inside the range)``.

    The probability of being inside ``max_range_m`` is taken along the line
    of sight, ``Φ((R_max - ρ̂) / σ_ρ)``. Far from the edge this is the
    detection probability at the predicted mean (methods note §D); near it,
    it stops a hypothesis that is predicted just outside from escaping its
    missed detections for free while one just inside pays for them, which
    would bias where vessels are estimated to leave the cover.
    """
    de = pm[:, 0] - sensor.site[0]
    dn = pm[:, 2] - sensor.site[1]
    rho = np.hypot(de, dn)
    safe = np.maximum(rho, 1e-9)
    ue, un = de / safe, dn / safe
    var = ue * ue * pP[:, 0, 0] + 2 * ue * un * pP[:, 0, 2] + un * un * pP[:, 2, 2]
    inside = ndtr((sensor.max_range_m - rho) / np.sqrt(np.maximum(var, 1e-12)))
    return np.where(inside >= 0.01, sensor.detection_probability * inside, 0.0)


def batch_update(mp: Array, Pp: Array, nu: Array, S: Array, R: Array) -> tuple[Array, Array]:
    """Joseph-form Kalman updates with position plots, batched (closed-form 2x2 inverse)."""
    a, b, d = S[:, 0, 0], S[:, 0, 1], S[:, 1, 1]
    det = a * d - b * b
    Sinv = np.empty_like(S)
    Sinv[:, 0, 0], Sinv[:, 1, 1] = d / det, a / det
    Sinv[:, 0, 1] = Sinv[:, 1, 0] = -b / det
    PHt = Pp[:, :, _POS]
    K = PHt @ Sinv
    m = mp + np.einsum("nij,nj->ni", K, nu)
    IKH = np.broadcast_to(np.eye(4), Pp.shape).copy()
    IKH[:, :, _POS] -= K
    P = IKH @ Pp @ np.swapaxes(IKH, 1, 2) + K @ R @ np.swapaxes(K, 1, 2)
    return m, 0.5 * (P + np.swapaxes(P, 1, 2))
