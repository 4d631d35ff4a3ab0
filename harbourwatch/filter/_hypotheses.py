"""Local hypotheses of trajectory Bernoullis and their per-scan updates.

Set of all trajectories (methods note §1.2-§1.4): a local hypothesis holds the
existence probability ``r``, the probability ``alive`` that the trajectory is
still going at its leaf node, and the probabilities that it ended at earlier
nodes of its chain (``end_nodes``, ``end_p``; they sum to ``1 - alive``).
Only nodes since the last detection can carry end mass, because a
detection puts all of β on "alive".

The end-time bookkeeping is per node rather than per scan: predicting the
leaf (node time ``t_L``) to a new node time moves ``(1 - p_S(Δt)) alive`` onto
"ended at the leaf". With the exponential lifetime ``p_S(Δt) = e^{-Δt/τ}``
this is the same as advancing β scan by scan and merging the end times that
share a last state, so scans in which a vessel is outside the cover (``p_D =
0``: nothing changes, methods note §D) need no node at all.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = [
    "LocalHyp",
    "Bernoulli",
    "Cluster",
    "beta_predict",
    "miss_update",
    "step_and_miss",
    "detection_log_weight",
    "new_trajectory_weight",
    "ALIVE_FLOOR",
]

#: A local hypothesis whose alive probability falls below this is frozen as
#: ended: no more predictions or updates (methods note §1.9, T_alive).
ALIVE_FLOOR = 1e-4


def beta_predict(
    alive: float, end_p: tuple[float, ...], p_survive: float
) -> tuple[float, tuple[float, ...]]:
    """Advance β over one step: returns ``(alive', end_p')`` (one new end entry)."""
    return alive * p_survive, end_p + ((1.0 - p_survive) * alive,)


def miss_update(
    r: float, alive: float, end_p: tuple[float, ...], p_detect: float
) -> tuple[float, float, tuple[float, ...], float]:
    """Missed-detection update of a predicted local hypothesis (methods note §1.4).

    Returns ``(r', alive', end_p', w_miss)`` with ``w_miss = 1 - r p_D β_alive``.
    """
    pd_alive = p_detect * alive
    w_miss = 1.0 - r * pd_alive
    norm = 1.0 - pd_alive
    if w_miss <= 0.0 or norm <= 0.0:  # p_D = 1 and surely alive: a miss is impossible
        return r, alive, end_p, 0.0
    r_new = r * norm / w_miss
    alive_new = alive * (1.0 - p_detect) / norm
    return r_new, alive_new, tuple(p / norm for p in end_p), w_miss


def step_and_miss(
    r: float, alive: float, end_p: tuple[float, ...], p_survive: float, p_detect: float
) -> tuple[float, float, tuple[float, ...]]:
    """:func:`beta_predict` then :func:`miss_update` in one call (the filter's hot path).

    Same operations in the same order; returns ``(r', alive', end_p')``.
    """
    al = alive * p_survive
    endp = end_p + ((1.0 - p_survive) * alive,)
    pd_alive = p_detect * al
    w_miss = 1.0 - r * pd_alive
    norm = 1.0 - pd_alive
    if w_miss <= 0.0 or norm <= 0.0:  # p_D = 1 and surely alive: a miss is impossible
        return r, al, endp
    return r * norm / w_miss, al * (1.0 - p_detect) / norm, tuple([p / norm for p in endp])


def detection_log_weight(r: Any, alive: Any, p_detect: Any, log_lik: Any) -> Any:
    """``ln(r p_D β_alive N(z; H m⁻, S))`` (methods note §1.4); works on arrays too."""
    return np.log(np.maximum(r * p_detect * alive, 1e-300)) + log_lik


def new_trajectory_weight(e: float, clutter: float) -> tuple[float, float]:
    """Weight ``e + λ_c`` and existence ``e / (e + λ_c)`` of "this plot starts a trajectory"."""
    w = e + clutter
    return w, (e / w if w > 0 else 0.0)


class LocalHyp:
    """One local hypothesis of a Bernoulli (mutable only while being built)."""

    __slots__ = ("node", "r", "alive", "end_nodes", "end_p", "frozen", "slot", "coasted", "ext")

    def __init__(
        self,
        node: int,
        r: float,
        alive: float = 1.0,
        end_nodes: tuple[int, ...] = (),
        end_p: tuple[float, ...] = (),
        frozen: bool = False,
    ) -> None:
        self.node = node
        self.r = r
        self.alive = alive
        self.end_nodes = end_nodes
        self.end_p = end_p
        self.frozen = frozen
        self.slot = -1  # index into the current scan's arrays, -1 if not active
        self.coasted = False  # frozen because it went unobserved too long (not by β)
        # plot rate and extent (α, β, v, V00, V01, V11) of an extended vessel at ``node``
        # (see ``_extent``); None for a point-like one
        self.ext: tuple[float, ...] | None = None

    def best_end(self) -> tuple[int, float, bool]:
        """``(node, probability, is_alive)`` of the most likely end time."""
        if self.end_p:
            k = max(range(len(self.end_p)), key=self.end_p.__getitem__)
            if self.end_p[k] > self.alive:
                return self.end_nodes[k], self.end_p[k], False
        return self.node, self.alive, True

    def freeze(self, *, coasted: bool = False) -> None:
        """Stop the hypothesis: the alive mass goes to "ended at the leaf"."""
        self.coasted = coasted
        if self.alive > 0.0:
            if self.end_nodes and self.end_nodes[-1] == self.node:
                self.end_p = self.end_p[:-1] + (self.end_p[-1] + self.alive,)
            else:
                self.end_nodes = self.end_nodes + (self.node,)
                self.end_p = self.end_p + (self.alive,)
        total = math.fsum(self.end_p)
        if total > 0:
            self.end_p = tuple(p / total for p in self.end_p)
        self.alive = 0.0
        self.frozen = True


class Bernoulli:
    """A potential trajectory: its local hypotheses and identity."""

    __slots__ = ("bid", "lhs")

    def __init__(self, bid: int, lhs: list[LocalHyp]) -> None:
        self.bid = bid
        self.lhs = lhs


class Cluster:
    """Bernoullis that share global hypotheses.

    ``table[g, i]`` is the local hypothesis of Bernoulli ``i`` in global
    hypothesis ``g`` (``-1``: absent); ``logw`` are normalised log-weights.
    """

    __slots__ = ("berns", "table", "logw")

    def __init__(self, berns: list[Bernoulli], table: Any, logw: Any) -> None:
        self.berns = berns
        self.table = table
        self.logw = logw
