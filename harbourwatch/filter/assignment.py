"""Ranked 2-D assignment: the best and the k best ways to assign every row.

Rows are measurements (plots), columns are Bernoullis followed by the
new-trajectory columns (methods note §1.5). Every row must take exactly one
column, each column serves at most one row, and forbidden pairs carry
``+inf``. Costs are negative log-weights, so the cheapest assignment is the
most likely child hypothesis.

The k best come from Murty's ranking (K. G. Murty, "An algorithm for ranking
all the assignments in order of increasing cost", Operations Research 16(3),
1968) with the partition of Miller, Stone and Cox (IEEE TAES 33(3), 1997):
the space of a solved subproblem minus its solution splits into disjoint
children, child ``l`` fixing the solution's first ``l - 1`` pairs and
forbidding pair ``l``. Fixed rows and their columns are removed from the
child (their cost is carried as an offset), so subproblems shrink as the
ranking goes deeper. Each subproblem is solved with
:func:`scipy.optimize.linear_sum_assignment`, which takes ``+inf`` as
"forbidden" and raises ``ValueError`` when no finite assignment exists.
"""

from __future__ import annotations

import heapq
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import linear_sum_assignment

from harbourwatch.errors import ParameterError

__all__ = ["best_assignment", "kbest_assignments"]

Array = NDArray[np.float64]
IntArray = NDArray[np.int64]


def _check(cost: ArrayLike) -> Array:
    """Return ``cost`` as a float 2-D array; reject NaN and ``-inf`` (programming errors)."""
    c = np.asarray(cost, dtype=np.float64)
    if c.ndim != 2:
        raise ParameterError(f"cost matrix must be 2-D, got shape {c.shape}", parameter="cost")
    if np.isnan(c).any() or np.isneginf(c).any():
        raise ParameterError("cost matrix contains NaN or -inf (forbidden pairs must be +inf)", parameter="cost")
    return c


def _solve(M: Array) -> IntArray | None:
    """Column (local index) per row of ``M`` at minimum cost, or None if infeasible."""
    if M.shape[0] == 0:
        return np.empty(0, dtype=np.int64)
    if M.shape[0] > M.shape[1]:
        return None
    try:
        _, c = linear_sum_assignment(M)
    except ValueError:  # "cost matrix is infeasible": no finite complete assignment
        return None
    return c.astype(np.int64, copy=False)


@dataclass(eq=False)
class _Node:
    """A solved subproblem: free rows/columns (original indices) and their costs."""

    assignment: IntArray  # full column vector, original indices
    free_rows: IntArray
    free_cols: IntArray
    M: Array  # cost over free rows x free columns, with this node's bans as +inf
    local: IntArray  # solution as local column index per free row


def best_assignment(cost: ArrayLike) -> tuple[float, IntArray] | None:
    """The single cheapest assignment of every row to a distinct column.

    Parameters
    ----------
    cost
        ``(m, n)`` costs; ``+inf`` marks a forbidden pair.

    Returns
    -------
    (total cost, column index per row), or None when no assignment has a
    finite cost. With ``m = 0`` the answer is ``(0.0, [])``.
    """
    c = _check(cost)
    a = _solve(c)
    if a is None:
        return None
    return float(c[np.arange(c.shape[0]), a].sum()), a


def kbest_assignments(cost: ArrayLike, k: int) -> list[tuple[float, IntArray]]:
    """The ``k`` cheapest assignments of every row to a distinct column (Murty).

    Parameters
    ----------
    cost
        ``(m, n)`` costs with ``m <= n`` for a solution to exist; ``+inf``
        marks a forbidden pair. NaN and ``-inf`` raise ``ValueError``.
    k
        How many assignments to return at most.

    Returns
    -------
    list of (total cost, column index per row)
        In non-decreasing cost; fewer than ``k`` when fewer assignments have
        a finite cost (an empty list when none has). With ``m = 0`` the only
        assignment is the empty one, with cost 0.

    Notes
    -----
    Children are queued unsolved under a lower bound (fixed pairs plus each
    free row's cheapest entry, never below the parent's cost) and solved only
    when they reach the front of the queue -- the second optimisation of
    Miller, Stone and Cox, with a row-minimum bound in place of dual
    variables, which scipy does not expose. Most children are never solved.

    The total is summed over the rows in row order, so an assignment always
    gets the same float whichever way it was found. Among the returned
    assignments, equal costs are ordered lexicographically on the column
    vector; when a tie straddles the ``k``-th place, which of the tied
    assignments are returned is fixed by the (deterministic) search order.

    Examples
    --------
    >>> inf = float("inf")
    >>> [(round(c, 3), a.tolist()) for c, a in kbest_assignments([[1.0, 2.0], [1.5, inf]], 3)]
    [(3.5, [1, 0])]
    """
    c = _check(cost)
    if k <= 0:
        return []
    all_rows = np.arange(c.shape[0])

    def total(a: IntArray) -> float:
        return float(c[all_rows, a].sum())

    root_local = _solve(c)
    if root_local is None:
        return []
    root = _Node(
        assignment=root_local,
        free_rows=all_rows,
        free_cols=np.arange(c.shape[1]),
        M=c,
        local=root_local,
    )
    # Heap entries: (key, 0, seq, parent, l) for a child not yet solved, keyed by a
    # lower bound; (cost, 1, assignment tuple, node) for a solved one. At equal
    # keys the unsolved entry pops first, so a solved node leaves the queue only
    # when nothing cheaper can remain. The partition is disjoint, so two solved
    # entries never share an assignment and nodes are never compared.
    heap: list[tuple] = [(total(root_local), 1, tuple(root_local.tolist()), root)]
    seq = 0
    out: list[tuple[float, IntArray]] = []
    while heap and len(out) < k:
        entry = heapq.heappop(heap)
        if entry[1] == 0:
            child = _solve_child(entry[3], entry[4])
            if child is not None:
                a = child.assignment
                heapq.heappush(heap, (total(a), 1, tuple(a.tolist()), child))
            continue
        cost_s, node = entry[0], entry[3]
        out.append((cost_s, node.assignment))
        if len(out) == k:
            break
        for l, bound in _child_bounds(node, cost_s):  # noqa: E741 -- pair index
            heapq.heappush(heap, (bound, 0, seq, node, l))
            seq += 1
    out.sort(key=lambda item: (item[0], tuple(item[1].tolist())))
    return out


def _child_bounds(node: _Node, cost: float) -> list[tuple[int, float]]:
    """Lower bounds on the children of a solved node, for the children that can be feasible.

    Child ``l`` fixes pairs ``0..l-1`` of the node's solution and bans pair
    ``l``; each free row costs at least its cheapest entry over the node's
    columns (the banned entry excluded for row ``l``), and no child is cheaper
    than its parent. A child whose banned row
    has no other finite entry is infeasible and is left out.
    """
    M, local = node.M, node.local
    p = M.shape[0]
    if p == 0:  # the empty assignment has no children
        return []
    rows = np.arange(p)
    chosen = M[rows, local]
    rest = M.copy()
    rest[rows, local] = np.inf
    second = rest.min(axis=1)  # cheapest alternative in each row
    row_min = np.minimum(chosen, second)
    feasible = np.flatnonzero(np.isfinite(second))
    if feasible.size == 0:
        return []
    # Rows fixed by the node's ancestors: their cost is the node's cost minus its free part.
    offset = cost - float(chosen.sum())
    fixed_before = offset + np.concatenate(([0.0], np.cumsum(chosen)[:-1]))
    free_after = np.concatenate((np.cumsum(row_min[::-1])[::-1][1:], [0.0]))
    bound = (fixed_before + second + free_after)[feasible]
    # Sums in a different order than the true totals: keep the bound conservative.
    bound = np.maximum(bound - 1e-12 * (1.0 + np.abs(bound)), cost)
    return list(zip(feasible.tolist(), bound.tolist(), strict=True))


def _solve_child(node: _Node, l: int) -> _Node | None:  # noqa: E741 -- pair index
    """Solve child ``l`` of ``node``: pairs ``0..l-1`` fixed and removed, pair ``l`` banned."""
    M, local = node.M, node.local
    keep = np.ones(M.shape[1], dtype=bool)
    keep[local[:l]] = False
    cols = np.flatnonzero(keep)
    sub = M[l:, cols]  # fancy indexing: a copy
    sub[0, int(np.searchsorted(cols, local[l]))] = np.inf
    child_local = _solve(sub)
    if child_local is None:
        return None
    a = node.assignment.copy()
    a[node.free_rows[l:]] = node.free_cols[cols[child_local]]
    return _Node(
        assignment=a,
        free_rows=node.free_rows[l:],
        free_cols=node.free_cols[cols],
        M=sub,
        local=child_local,
    )
