"""Tests of harbourwatch.filter.assignment (Murty's k-best assignment).

Reference: brute-force enumeration of every injective row -> column map with
itertools.permutations (the definition of the ranked assignment problem), and
scipy.optimize.linear_sum_assignment's optimum for the single best.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from strategies import cost_matrices, pmbm_cost_matrices

from harbourwatch.filter.assignment import best_assignment, kbest_assignments

INF = np.inf


def brute_force(cost: np.ndarray) -> list[tuple[float, tuple[int, ...]]]:
    """Every complete assignment with a finite cost, sorted by (cost, assignment)."""
    m, n = cost.shape
    rows = np.arange(m)
    out = []
    for perm in itertools.permutations(range(n), m):
        total = float(cost[rows, list(perm)].sum())
        if math.isfinite(total):
            out.append((total, perm))
    out.sort()
    return out


def check_against_brute_force(cost: np.ndarray, k: int) -> None:
    ref = brute_force(cost)
    got = kbest_assignments(cost, k)
    assert len(got) == min(k, len(ref))
    costs = np.array([c for c, _ in got])
    # Costs: the k smallest of the enumeration, in non-decreasing order.
    np.testing.assert_allclose(costs, [c for c, _ in ref[: len(got)]], rtol=0, atol=1e-9)
    assert np.all(np.diff(costs) >= 0)
    seen = set()
    for c, a in got:
        assert a.dtype == np.int64 and a.shape == (cost.shape[0],)
        t = tuple(a.tolist())
        assert len(set(t)) == len(t), "a column used twice"
        assert t not in seen, "an assignment returned twice"
        seen.add(t)
        assert c == pytest.approx(cost[np.arange(cost.shape[0]), a].sum(), abs=1e-9)
    # Assignments: every cost level strictly below the last returned one comes
    # out complete (ties included); the last level is a subset of the enumeration's.
    if got:
        last = costs[-1]
        below = {p for c, p in ref if c < last - 1e-9}
        assert below == {tuple(a.tolist()) for c, a in got if c < last - 1e-9}
        at_last = {p for c, p in ref if abs(c - last) <= 1e-9}
        assert {tuple(a.tolist()) for c, a in got if abs(c - last) <= 1e-9} <= at_last
    # Among equal costs the output is lexicographic on the column vector.
    keys = [(c, tuple(a.tolist())) for c, a in got]
    assert keys == sorted(keys)


@settings(max_examples=300, deadline=None)
@given(cost=cost_matrices(), k=st.integers(1, 40))
def test_kbest_matches_brute_force_on_random_matrices(cost: np.ndarray, k: int) -> None:
    check_against_brute_force(cost, k)


@settings(max_examples=150, deadline=None)
@given(cost=cost_matrices(integer=True), k=st.integers(1, 40))
def test_kbest_matches_brute_force_with_many_ties(cost: np.ndarray, k: int) -> None:
    check_against_brute_force(cost, k)


@settings(max_examples=300, deadline=None)
@given(cost=pmbm_cost_matrices(), k=st.integers(1, 40))
def test_kbest_matches_brute_force_on_pmbm_layout(cost: np.ndarray, k: int) -> None:
    check_against_brute_force(cost, k)


@settings(max_examples=100, deadline=None)
@given(cost=cost_matrices())
def test_best_assignment_is_the_optimum(cost: np.ndarray) -> None:
    ref = brute_force(cost)
    got = best_assignment(cost)
    if not ref:
        assert got is None
        return
    assert got is not None
    assert got[0] == pytest.approx(ref[0][0], abs=1e-9)
    kb = kbest_assignments(cost, 1)
    assert kb[0][0] == pytest.approx(got[0], abs=1e-9)


def test_k_larger_than_the_number_of_assignments() -> None:
    cost = np.arange(12.0).reshape(3, 4)  # 4 * 3 * 2 = 24 complete assignments
    got = kbest_assignments(cost, 1000)
    assert len(got) == 24
    assert len({tuple(a.tolist()) for _, a in got}) == 24
    cost[0, 1:] = INF  # row 0 must take column 0: 3 * 2 = 6 left
    assert len(kbest_assignments(cost, 1000)) == 6


def test_no_rows_gives_the_empty_assignment() -> None:
    for n in (0, 3):
        got = kbest_assignments(np.zeros((0, n)), 5)
        assert len(got) == 1
        assert got[0][0] == 0.0 and got[0][1].shape == (0,)
        best = best_assignment(np.zeros((0, n)))
        assert best is not None and best[0] == 0.0 and best[1].size == 0


@pytest.mark.parametrize(
    "cost",
    [
        np.full((2, 3), INF),  # everything forbidden
        np.zeros((3, 2)),  # more plots than columns
        np.zeros((1, 0)),
        np.array([[1.0, INF], [2.0, INF]]),  # both rows can only take column 0
        np.array([[1.0, 2.0, 3.0], [INF, INF, INF]]),  # a row with no option
    ],
)
def test_infeasible_gives_nothing(cost: np.ndarray) -> None:
    assert kbest_assignments(cost, 10) == []
    assert best_assignment(cost) is None


@pytest.mark.parametrize("bad", [np.nan, -np.inf])
def test_nan_and_minus_inf_are_rejected(bad: float) -> None:
    cost = np.array([[1.0, bad], [0.0, 2.0]])
    with pytest.raises(ValueError):
        kbest_assignments(cost, 3)
    with pytest.raises(ValueError):
        best_assignment(cost)


def test_zero_or_negative_k() -> None:
    assert kbest_assignments(np.eye(3), 0) == []
    assert kbest_assignments(np.eye(3), -2) == []


def test_input_untouched_and_output_deterministic(rng: np.random.Generator) -> None:
    cost = rng.normal(size=(6, 14))
    cost[rng.random(cost.shape) < 0.4] = INF
    before = cost.copy()
    a = kbest_assignments(cost, 15)
    b = kbest_assignments(cost, 15)
    np.testing.assert_array_equal(cost, before)
    assert [(c, x.tolist()) for c, x in a] == [(c, x.tolist()) for c, x in b]


def test_all_zero_matrix_ties_are_lexicographic() -> None:
    # Every assignment costs 0: the output must still be distinct, complete
    # assignments; among those returned, lexicographic order.
    got = kbest_assignments(np.zeros((3, 5)), 20)
    assert len(got) == 20
    vecs = [tuple(a.tolist()) for _, a in got]
    assert len(set(vecs)) == 20 and vecs == sorted(vecs)
    assert all(c == 0.0 for c, _ in got)


def test_larger_pmbm_case_against_brute_force(rng: np.random.Generator) -> None:
    # 6 plots, 5 previous Bernoullis: 11 columns, 332,640 injective maps (brute force ~1 s).
    m, n = 6, 5
    det = rng.normal(2.0, 2.0, size=(m, n))
    det[rng.random((m, n)) < 0.4] = INF
    new = np.full((m, m), INF)
    new[np.arange(m), np.arange(m)] = rng.normal(3.0, 1.0, m)
    cost = np.hstack([det, new])
    finite_cols = [np.flatnonzero(np.isfinite(r)) for r in cost]
    ref = []  # enumerate over each row's finite columns only (same set, faster)
    for combo in itertools.product(*finite_cols):
        if len(set(combo)) == m:
            ref.append((float(cost[np.arange(m), list(combo)].sum()), combo))
    ref.sort()
    got = kbest_assignments(cost, 25)
    assert [tuple(a.tolist()) for _, a in got] == [p for _, p in ref[:25]]
    np.testing.assert_allclose([c for c, _ in got], [c for c, _ in ref[:25]], atol=1e-12)


def test_worked_example_of_the_methods_note() -> None:
    # Methods note §1.5 worked example: one previous Bernoulli with w_miss = 0.1,
    # w_det(z1) = 0.5, w_det(z2) = 0.05; new-Bernoulli weights 0.02 and 0.03.
    # The child weights are products of the weights (by definition of C): 0.5*0.03,
    # 0.05*0.02 and 0.1*0.02*0.03, normalised -> 0.9339975, 0.0622665, 0.0037360.
    cost = np.array(
        [
            [-math.log(0.5 / 0.1), -math.log(0.02), INF],
            [-math.log(0.05 / 0.1), INF, -math.log(0.03)],
        ]
    )
    got = kbest_assignments(cost, 10)
    assert [a.tolist() for _, a in got] == [[0, 2], [1, 0], [1, 2]]
    w = 0.1 * np.exp(-np.array([c for c, _ in got]))
    np.testing.assert_allclose(w, [0.5 * 0.03, 0.05 * 0.02, 0.1 * 0.02 * 0.03], rtol=1e-12)
    np.testing.assert_allclose(w / w.sum(), [0.9339975, 0.0622665, 0.0037360], atol=5e-8)
    assert got[0][0] == pytest.approx(1.897120, abs=5e-7)
