"""Tests of harbourwatch.filter.clusters (gating graph components, chi-square gates)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harbourwatch.filter.clusters import chi2_gate, cluster_members, connected_clusters


def reference_components(n_rows: int, n_cols: int, pairs: list[tuple[int, int]]):
    """Plain breadth-first search over the bipartite graph (independent of scipy's csgraph)."""
    adj: dict[tuple[str, int], set[tuple[str, int]]] = {}
    for r, c in pairs:
        adj.setdefault(("r", r), set()).add(("c", c))
        adj.setdefault(("c", c), set()).add(("r", r))
    comp: dict[tuple[str, int], int] = {}
    label = 0
    for start in [("r", i) for i in range(n_rows)] + [("c", j) for j in range(n_cols)]:
        if start in comp:
            continue
        stack = [start]
        comp[start] = label
        while stack:
            node = stack.pop()
            for nb in adj.get(node, ()):
                if nb not in comp:
                    comp[nb] = label
                    stack.append(nb)
        label += 1
    return comp


@st.composite
def gating_graphs(draw):
    n_rows = draw(st.integers(0, 8))
    n_cols = draw(st.integers(0, 8))
    if n_rows == 0 or n_cols == 0:
        return n_rows, n_cols, []
    pair = st.tuples(st.integers(0, n_rows - 1), st.integers(0, n_cols - 1))
    return n_rows, n_cols, draw(st.lists(pair, max_size=20))


@settings(max_examples=200, deadline=None)
@given(graph=gating_graphs())
def test_components_match_breadth_first_search(graph) -> None:
    n_rows, n_cols, pairs = graph
    rows = np.array([p[0] for p in pairs], dtype=np.int64)
    cols = np.array([p[1] for p in pairs], dtype=np.int64)
    rl, cl = connected_clusters(n_rows, n_cols, rows, cols)
    assert rl.shape == (n_rows,) and cl.shape == (n_cols,)
    ref = reference_components(n_rows, n_cols, pairs)
    # Same partition: two nodes share a label iff BFS puts them together.
    nodes = [("r", i) for i in range(n_rows)] + [("c", j) for j in range(n_cols)]
    ours = {("r", i): int(rl[i]) for i in range(n_rows)} | {
        ("c", j): int(cl[j]) for j in range(n_cols)
    }
    for a in nodes:
        for b in nodes:
            if ours[a] >= 0 and ours[b] >= 0:
                assert (ours[a] == ours[b]) == (ref[a] == ref[b])
    # -1 exactly for columns in no pair; rows always labelled, numbered by first row.
    gated_cols = {c for _, c in pairs}
    assert [j for j in range(n_cols) if cl[j] < 0] == [
        j for j in range(n_cols) if j not in gated_cols
    ]
    assert (rl >= 0).all()
    firsts = [int(rl[i]) for i in range(n_rows) if int(rl[i]) not in rl[:i]]
    assert firsts == list(range(len(firsts)))
    # Labels do not depend on the order of the pairs.
    perm = np.arange(len(pairs))[::-1]
    rl2, cl2 = connected_clusters(n_rows, n_cols, rows[perm], cols[perm])
    np.testing.assert_array_equal(rl, rl2)
    np.testing.assert_array_equal(cl, cl2)
    # cluster_members lists each cluster's rows and columns.
    members = cluster_members(rl, cl)
    assert len(members) == (int(rl.max()) + 1 if n_rows else 0)
    for label, (r_idx, c_idx) in enumerate(members):
        np.testing.assert_array_equal(r_idx, np.flatnonzero(rl == label))
        np.testing.assert_array_equal(c_idx, np.flatnonzero(cl == label))


def test_small_example() -> None:
    # Plots 0 and 1 share Bernoulli 1; plot 2 gates nothing; Bernoulli 2 is gated by nothing.
    rl, cl = connected_clusters(3, 4, [0, 1, 1, 0], [1, 1, 3, 0])
    assert rl.tolist() == [0, 0, 1]
    assert cl.tolist() == [0, 0, -1, 0]


def test_bad_indices_rejected() -> None:
    with pytest.raises(ValueError):
        connected_clusters(2, 2, [0, 2], [0, 1])
    with pytest.raises(ValueError):
        connected_clusters(2, 2, [0], [0, 1])


@pytest.mark.parametrize("p", [0.5, 0.9, 0.99, 0.999, 0.9999, 0.9999546])
def test_two_dimensional_gate_closed_form(p: float) -> None:
    # chi-square with 2 degrees of freedom is exponential with mean 2, so its
    # P-quantile is -2 ln(1 - P) (standard distribution fact).
    assert chi2_gate(p) == pytest.approx(-2.0 * math.log1p(-p), rel=1e-12)


def test_gate_reference_values() -> None:
    # Chi-square quantile tables (e.g. NIST/SEMATECH e-Handbook of Statistical
    # Methods, table 1.3.6.7.4 -- from memory for the table number): upper 1 % point
    # for 1 dof is 6.635, for 3 dof 11.345.
    assert chi2_gate(0.99, dim=1) == pytest.approx(6.635, abs=5e-4)
    assert chi2_gate(0.99, dim=3) == pytest.approx(11.345, abs=5e-4)
    # 1 dof: the gate is the squared two-sided normal quantile (1.959964^2 for 95 %).
    assert chi2_gate(0.95, dim=1) == pytest.approx(1.959963984540054**2, rel=1e-10)


@pytest.mark.parametrize("p", [0.0, 1.0, -0.1, 1.5])
def test_gate_probability_out_of_range(p: float) -> None:
    with pytest.raises(ValueError):
        chi2_gate(p)
