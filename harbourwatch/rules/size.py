"""Rules that know size: the probability that a vessel's hull length is within a rule's limits."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from harbourwatch.rules.kinds import RuleKind
    from harbourwatch.trajectories import Trajectory

__all__ = ["size_probability"]


def size_probability(kind: RuleKind, traj: Trajectory) -> float:
    """Probability that the vessel's hull length is within the rule's optional limits.

    ``min_length_m`` / ``max_length_m`` (either may be absent). A point-like
    vessel (no extent estimate, a single plot per scan) is taken as length 0:
    it passes a ``max_length_m`` and fails a ``min_length_m``. For an
    extended vessel the length ``2 sqrt(λ_max(X))`` is integrated over the
    inverse-Wishart extent estimate (``filter._extent.length_probability``).
    """
    params = kind.rule.params
    lo = float(params.get("min_length_m", 0.0))
    hi = float(params.get("max_length_m", np.inf))
    if lo <= 0.0 and np.isinf(hi):
        return 1.0
    if traj.extent is None:
        return 1.0 if lo <= 0.0 else 0.0
    from harbourwatch.models.extent import length_probability

    _, _, v, v00, v01, v11 = traj.extent
    return length_probability(v, np.array([[v00, v01], [v01, v11]]), lo, hi)
