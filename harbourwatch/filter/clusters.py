"""Gating thresholds and clusters of the plot-Bernoulli gating graph.

Plots (rows) and Bernoullis (columns) that share no gated pair, directly or
through a chain of pairs, can be associated independently: each connected
component of the bipartite gating graph is a separate assignment problem
(methods note §1.9, clustering).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.sparse import coo_array
from scipy.sparse.csgraph import connected_components
from scipy.stats import chi2

__all__ = ["chi2_gate", "connected_clusters", "cluster_members"]

IntArray = NDArray[np.int64]


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
        raise ValueError(f"gate probability must lie in (0, 1), got {gate_probability!r}")
    if int(dim) != dim or dim < 1:
        raise ValueError(f"dimension must be a positive integer, got {dim!r}")
    return float(chi2.ppf(p, int(dim)))


def connected_clusters(
    n_rows: int, n_cols: int, row_idx: ArrayLike, col_idx: ArrayLike
) -> tuple[IntArray, IntArray]:
    """Connected components of a bipartite gating graph.

    Parameters
    ----------
    n_rows, n_cols
        Number of plots (rows) and Bernoullis (columns).
    row_idx, col_idx
        The gated pairs, as two equal-length integer arrays (duplicates allowed).

    Returns
    -------
    row_labels, col_labels
        ``(n_rows,)`` and ``(n_cols,)`` cluster labels. Every row belongs to a
        cluster (a plot gated by nothing is a cluster on its own: it can only
        start a trajectory or be clutter). Clusters are numbered ``0, 1, ...``
        in order of their smallest row index, so labels do not depend on the
        order of the pairs. A column gated by no row gets ``-1``: it is missed
        in every hypothesis and needs no assignment.

    Examples
    --------
    >>> r, c = connected_clusters(3, 3, [0, 1, 2], [2, 2, 0])
    >>> r.tolist(), c.tolist()
    ([0, 0, 1], [1, -1, 0])
    """
    rows = np.asarray(row_idx, dtype=np.int64).reshape(-1)
    cols = np.asarray(col_idx, dtype=np.int64).reshape(-1)
    if rows.shape != cols.shape:
        raise ValueError("row_idx and col_idx must have the same length")
    if rows.size and (rows.min() < 0 or rows.max() >= n_rows):
        raise ValueError("row index out of range")
    if cols.size and (cols.min() < 0 or cols.max() >= n_cols):
        raise ValueError("column index out of range")
    n = n_rows + n_cols
    graph = coo_array((np.ones(rows.size, dtype=np.int8), (rows, n_rows + cols)), shape=(n, n))
    _, comp = connected_components(graph, directed=False)
    comp = comp.astype(np.int64)
    row_comp, col_comp = comp[:n_rows], comp[n_rows:]
    # Renumber by first appearance among the rows: components without a row get -1.
    relabel = np.full(max(n, 1), -1, dtype=np.int64)
    uniq, first = np.unique(row_comp, return_index=True)
    relabel[uniq[np.argsort(first, kind="stable")]] = np.arange(uniq.size)
    return relabel[row_comp], relabel[col_comp]


def cluster_members(
    row_labels: ArrayLike, col_labels: ArrayLike
) -> list[tuple[IntArray, IntArray]]:
    """Row and column indices of each cluster, in label order.

    Columns labelled ``-1`` belong to no cluster and are left out.
    """
    r = np.asarray(row_labels, dtype=np.int64)
    c = np.asarray(col_labels, dtype=np.int64)
    n = int(r.max()) + 1 if r.size else 0
    if n == 0:
        return []
    r_order = np.argsort(r, kind="stable")
    c_keep = np.flatnonzero(c >= 0)
    c_order = c_keep[np.argsort(c[c_keep], kind="stable")]
    r_split = np.searchsorted(r[r_order], np.arange(1, n))
    c_split = np.searchsorted(c[c_order], np.arange(1, n))
    return list(zip(np.split(r_order, r_split), np.split(c_order, c_split), strict=True))
