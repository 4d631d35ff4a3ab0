"""GOSPA and trajectory GOSPA against hand computations, brute force and the published forms.

Sources:
[GOSPA] A. S. Rahmathullah, Á. F. García-Fernández, L. Svensson, "Generalized optimal
sub-pattern assignment metric", FUSION 2017, arXiv:1601.05585 -- the definition with
alpha = 2 and its split into localisation, missed and false parts.
[TGOSPA] Á. F. García-Fernández, A. S. Rahmathullah, L. Svensson, "A metric on the space of
finite sets of trajectories for evaluation of multi-target tracking algorithms", IEEE Trans.
Signal Processing 68:3917-3928, 2020, arXiv:1605.01177 -- the assignment (integer) form, its
LP relaxation (a metric, a lower bound of the integer form) and the switch costs.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import sparse
from scipy.optimize import linprog
from strategies import point_sets, trajectory_sets

from harbourwatch.scoring.metrics import gospa, grid_trajectories, trajectory_gospa

FAST = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
LP = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def line(values: list[float]) -> np.ndarray:
    """A 1-D trajectory embedded in 2-D, ``(T, 2)``; NaN = absent."""
    a = np.asarray(values, dtype=float)
    return np.stack([a, np.where(np.isnan(a), np.nan, 0.0)], axis=-1)


# --------------------------------------------------------------------------- GOSPA, by hand
def test_gospa_one_matched_one_missed_one_false_by_hand() -> None:
    # Computed by hand. c = 10, p = 1. Truth (0,0) and (100,0); estimates (3,4) and (0,100).
    # (0,0)-(3,4) is 5 m < c: matched, localisation 5. (100,0) is far from both estimates:
    # missed, c/2 = 5. (0,100) is far from both truths: false, c/2 = 5. Total 15.
    r = gospa([[0, 0], [100, 0]], [[3, 4], [0, 100]], c=10.0, p=1.0)
    assert r.localisation == pytest.approx(5.0)
    assert r.missed == pytest.approx(5.0)
    assert r.false == pytest.approx(5.0)
    assert r.value == pytest.approx(15.0)
    assert r.pairs.tolist() == [[0, 0]]
    assert (r.n_missed, r.n_false) == (1, 1)


def test_gospa_order_two_by_hand() -> None:
    # Computed by hand. c = 5, p = 2. Truth (0,0), (10,0); estimates (1,0), (10,3), (50,50).
    # Best pairs: (0,0)-(1,0) d = 1 -> 1; (10,0)-(10,3) d = 3 -> 9; localisation 10.
    # (50,50) is false: c^2/2 = 12.5. Total 22.5, value sqrt(22.5) = 4.74341649...
    r = gospa([[0, 0], [10, 0]], [[1, 0], [10, 3], [50, 50]], c=5.0, p=2.0)
    assert (r.localisation, r.missed, r.false) == pytest.approx((10.0, 0.0, 12.5))
    assert r.value == pytest.approx(math.sqrt(22.5))


def test_gospa_pair_beyond_cutoff_is_missed_plus_false_by_hand() -> None:
    # Computed by hand. c = 5, p = 2, truth (0,0), estimate (6,0): 6 > c so it costs
    # c^2/2 + c^2/2 = 25, value 5; nothing counts as localisation.
    r = gospa([[0, 0]], [[6, 0]], c=5.0, p=2.0)
    assert (r.localisation, r.missed, r.false, r.value) == pytest.approx((0, 12.5, 12.5, 5.0))


def test_gospa_tie_at_cutoff_counts_as_missed_and_false() -> None:
    # Computed by hand. d = c = 5, p = 1: matched it would cost min(d,c) = 5, unmatched
    # c/2 + c/2 = 5 -- the same value; our documented tie rule reports missed + false.
    r = gospa([[0, 0]], [[3, 4]], c=5.0, p=1.0)
    assert r.value == pytest.approx(5.0)
    assert (r.localisation, r.missed, r.false) == pytest.approx((0.0, 2.5, 2.5))
    assert len(r.pairs) == 0


def test_gospa_empty_sets_by_hand() -> None:
    # Computed by hand: with one set empty every point of the other costs c^p/2.
    r = gospa(np.zeros((0, 2)), [[0, 0], [1, 1]], c=5.0, p=2.0)
    assert (r.value, r.false, r.missed) == pytest.approx((5.0, 25.0, 0.0))
    r = gospa([[0, 0], [1, 1], [2, 2]], [], c=4.0, p=1.0)
    assert (r.value, r.missed) == pytest.approx((6.0, 6.0))
    assert gospa([], [], c=1.0, p=1.0).value == 0.0


def test_gospa_rejects_bad_parameters() -> None:
    with pytest.raises(ValueError, match="cut-off"):
        gospa([[0, 0]], [[0, 0]], c=0.0, p=1.0)
    with pytest.raises(ValueError, match="order"):
        gospa([[0, 0]], [[0, 0]], c=1.0, p=0.5)


# --------------------------------------------------------------------------- GOSPA, properties
def brute_force_gospa(x: np.ndarray, y: np.ndarray, c: float, p: float) -> float:
    """The published general form [GOSPA] with alpha = 2: for |X| <= |Y|,
    min over injections pi of sum min(d, c)^p + c^p / 2 * (|Y| - |X|), by enumeration."""
    if len(x) > len(y):
        x, y = y, x
    best = math.inf
    for perm in itertools.permutations(range(len(y)), len(x)):
        s = sum(min(float(np.linalg.norm(x[i] - y[j])), c) ** p for i, j in enumerate(perm))
        best = min(best, s)
    return (best + c**p / 2 * (len(y) - len(x))) ** (1 / p)


@FAST
@given(point_sets(), point_sets(), st.sampled_from([3.0, 7.0, 12.0]), st.sampled_from([1.0, 2.0]))
def test_gospa_equals_brute_force(x, y, c, p) -> None:
    r = gospa(x, y, c=c, p=p)
    assert r.value == pytest.approx(brute_force_gospa(x, y, c, p), rel=1e-9, abs=1e-9)
    assert r.value**p == pytest.approx(r.localisation + r.missed + r.false, rel=1e-9, abs=1e-9)
    # parts are counts of half cut-offs plus sub-cut-off distances
    assert r.n_missed == len(x) - len(r.pairs) and r.n_false == len(y) - len(r.pairs)


@FAST
@given(point_sets(integer=True), point_sets(integer=True), point_sets(integer=True),
       st.sampled_from([4.0, 10.0]), st.sampled_from([1.0, 2.0, 3.0]))
def test_gospa_is_a_metric(x, y, z, c, p) -> None:
    # identity, symmetry and the triangle inequality [GOSPA, metric property]
    assert gospa(x, x, c=c, p=p).value == 0.0
    dxy = gospa(x, y, c=c, p=p).value
    assert dxy == pytest.approx(gospa(y, x, c=c, p=p).value, rel=1e-12, abs=1e-12)
    assert dxy <= gospa(x, z, c=c, p=p).value + gospa(z, y, c=c, p=p).value + 1e-9


# --------------------------------------------------------------------------- TGOSPA, by hand
def test_tgospa_swap_is_followed_when_gamma_is_small_by_hand() -> None:
    # Computed by hand. 1-D positions, T = 4, c = 5, p = 1. Truths X1 = 1.0, X2 = 2.3 at
    # every step. Estimates Y1 = (2.0, 2.0, 1.3, 1.3), Y2 = (1.3, 1.3, 2.0, 2.0): they swap.
    # Follow the swap (X1-Y2, X2-Y1 then X1-Y1, X2-Y2): every pair is 0.3 apart,
    #   localisation 8 * 0.3 = 2.4, two full switches 2 * gamma.
    # Keep X1-Y2, X2-Y1 all along: steps 1-2 cost 0.3 + 0.3, steps 3-4 cost |1 - 2.0| +
    #   |2.3 - 1.3| = 2.0 each: 1.2 + 4.0 = 5.2. Keeping X1-Y1, X2-Y2 costs the same 5.2.
    # Dropping to missed/false costs c/2 = 2.5 per vessel-step, worse than either.
    # gamma = 1: follow = 2.4 + 2 = 4.4 < 5.2. gamma = 2: follow = 6.4 > 5.2 -> keep one.
    X = np.stack([line([1.0] * 4), line([2.3] * 4)])
    Y = np.stack([line([2.0, 2.0, 1.3, 1.3]), line([1.3, 1.3, 2.0, 2.0])])
    r = trajectory_gospa(X, Y, c=5.0, p=1.0, gamma=1.0)
    assert r.value == pytest.approx(4.4)
    assert (r.localisation, r.switch, r.missed, r.false) == pytest.approx((2.4, 2.0, 0, 0))
    assert r.assignment.tolist() == [[1, 0], [1, 0], [0, 1], [0, 1]]
    assert r.switch_t.tolist() == pytest.approx([0.0, 2.0, 0.0])
    r = trajectory_gospa(X, Y, c=5.0, p=1.0, gamma=2.0)
    assert r.value == pytest.approx(5.2)
    assert (r.localisation, r.switch) == pytest.approx((5.2, 0.0))
    assert (r.assignment == r.assignment[0]).all()             # no switch, either pairing
    assert sorted(r.assignment[0].tolist()) == [0, 1]


def test_tgospa_track_break_by_hand() -> None:
    # Computed by hand. T = 3, c = 2, gamma = 1. Truth X1 = 0 at every step; Y1 = 0.5 at
    # steps 1-2 (absent at 3), Y2 = 0.5 at step 3 only.
    # Switch X1 from Y1 to Y2 at step 3: localisation 3 * 0.5^p, one full switch gamma^p.
    # p = 1: 1.5 + 1 = 2.5. Alternatives: stay on Y1 at step 3 -> 1 + 1 + 1 (X1 assigned to an
    # absent Y1 costs c/2, Y2 false c/2) = 3.0 total; drop to dummy -> 1.0 + 0.5 + c/2 + c/2 +
    # ... = more. p = 2: 3 * 0.25 + 1 = 1.75, value sqrt(1.75).
    X = np.stack([line([0, 0, 0])])
    Y = np.stack([line([0.5, 0.5, np.nan]), line([np.nan, np.nan, 0.5])])
    r = trajectory_gospa(X, Y, c=2.0, p=1.0, gamma=1.0)
    assert (r.value, r.localisation, r.switch, r.missed, r.false) == pytest.approx(
        (2.5, 1.5, 1.0, 0.0, 0.0))
    r = trajectory_gospa(X, Y, c=2.0, p=2.0, gamma=1.0)
    assert r.value == pytest.approx(math.sqrt(1.75))
    assert r.matched[:, 0].all() and r.assignment[:, 0].tolist() == [0, 0, 1]


def test_tgospa_missed_and_false_trajectories_by_hand() -> None:
    # Computed by hand. c = 2, p = 1: a truth present 3 steps with no estimate costs
    # 3 * c/2 = 3; an estimate present 2 steps far from everything adds 2 * c/2 = 2.
    X = np.stack([line([0, 0, 0])])
    r = trajectory_gospa(X, np.zeros((0, 3, 2)), c=2.0, p=1.0, gamma=1.0)
    assert (r.value, r.missed, r.false) == pytest.approx((3.0, 3.0, 0.0))
    Y = np.stack([line([np.nan, 50, 50])])
    r = trajectory_gospa(X, Y, c=2.0, p=1.0, gamma=1.0)
    assert (r.value, r.missed, r.false) == pytest.approx((5.0, 3.0, 2.0))
    assert r.missed_t.tolist() == pytest.approx([1, 1, 1])
    assert r.false_t.tolist() == pytest.approx([0, 1, 1])
    assert r.n_components == 0  # nothing within c: closed form, no LP


def test_tgospa_rejects_bad_inputs() -> None:
    X = np.zeros((1, 3, 2))
    with pytest.raises(ValueError, match="gamma"):
        trajectory_gospa(X, X, c=1.0, p=1.0, gamma=0.0)
    with pytest.raises(ValueError, match="time grid"):
        trajectory_gospa(X, np.zeros((1, 4, 2)), c=1.0, p=1.0, gamma=1.0)
    with pytest.raises(ValueError, match="shape"):
        trajectory_gospa(np.zeros((3, 2)), X, c=1.0, p=1.0, gamma=1.0)


# --------------------------------------------------------------------------- TGOSPA, references
def integer_tgospa(X: np.ndarray, Y: np.ndarray, c: float, p: float, gamma: float) -> float:
    """The assignment (integer) form [TGOSPA] by exhaustive dynamic programming over the
    per-step assignment vectors pi^k (0 = unassigned) with the published switch weights:
    1 for a change between two estimates, 1/2 for gaining or losing an assignment."""
    nx, T, _ = X.shape
    ny = Y.shape[0]
    ex = ~np.isnan(X[..., 0])
    ey = ~np.isnan(Y[..., 0])
    states = [s for s in itertools.product(range(ny + 1), repeat=nx)
              if len([v for v in s if v]) == len({v for v in s if v})]

    def step_cost(k: int, s: tuple[int, ...]) -> float:
        cost, used = 0.0, set()
        for i, j in enumerate(s):
            if j == 0:
                cost += c**p / 2 * ex[i, k]
                continue
            used.add(j - 1)
            if ex[i, k] and ey[j - 1, k]:
                cost += min(float(np.linalg.norm(X[i, k] - Y[j - 1, k])), c) ** p
            elif ex[i, k] or ey[j - 1, k]:
                cost += c**p / 2
        cost += c**p / 2 * sum(ey[j, k] for j in range(ny) if j not in used)
        return cost

    def switch(a: tuple[int, ...], b: tuple[int, ...]) -> float:
        return sum(0.0 if u == v else (1.0 if u and v else 0.5) for u, v in zip(a, b, strict=True))

    best = {s: step_cost(0, s) for s in states}
    for k in range(1, T):
        best = {s: step_cost(k, s) + min(best[q] + gamma**p * switch(q, s) for q in states)
                for s in states}
    return min(best.values()) ** (1 / p)


def dense_lp_tgospa(X: np.ndarray, Y: np.ndarray, c: float, p: float, gamma: float) -> float:
    """The LP relaxation [TGOSPA] laid out directly, without any clustering: full
    (nx+1) x (ny+1) weight matrices per step and h >= |W^t - W^{t+1}| on the real block."""
    nx, T, _ = X.shape
    ny = Y.shape[0]
    ex = ~np.isnan(X[..., 0])
    ey = ~np.isnan(Y[..., 0])
    n1, m1 = nx + 1, ny + 1
    nw = T * n1 * m1
    nh = (T - 1) * nx * ny

    def w(k: int, i: int, j: int) -> int:
        return k * n1 * m1 + i * m1 + j

    cost = np.zeros(nw + nh)
    for k in range(T):
        for i in range(n1):
            for j in range(m1):
                xi = i < nx and ex[i, k]
                yj = j < ny and ey[j, k]
                if xi and yj:
                    d = min(float(np.linalg.norm(X[i, k] - Y[j, k])), c) ** p
                elif xi or yj:
                    d = c**p / 2
                else:
                    d = 0.0
                cost[w(k, i, j)] = d
    cost[nw:] = gamma**p / 2
    eq_rows, eq_cols = [], []
    r = 0
    for k in range(T):
        for j in range(ny):
            for i in range(n1):
                eq_rows.append(r)
                eq_cols.append(w(k, i, j))
            r += 1
        for i in range(nx):
            for j in range(m1):
                eq_rows.append(r)
                eq_cols.append(w(k, i, j))
            r += 1
    A_eq = sparse.csr_array((np.ones(len(eq_rows)), (eq_rows, eq_cols)), shape=(r, nw + nh))
    ub = []
    h = nw
    for k in range(T - 1):
        for i in range(nx):
            for j in range(ny):
                ub.append({w(k, i, j): 1, w(k + 1, i, j): -1, h: -1})
                ub.append({w(k, i, j): -1, w(k + 1, i, j): 1, h: -1})
                h += 1
    if ub:
        rows = [n for n, d in enumerate(ub) for _ in d]
        cols = [col for d in ub for col in d]
        vals = [v for d in ub for v in d.values()]
        A_ub = sparse.csr_array((vals, (rows, cols)), shape=(len(ub), nw + nh))
        b_ub = np.zeros(len(ub))
    else:
        A_ub, b_ub = None, None
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, A_eq=A_eq, b_eq=np.ones(r), bounds=(0, None),
                  method="highs")
    assert res.status == 0
    return max(res.fun, 0.0) ** (1 / p)


@LP
@given(trajectory_sets(steps=3, max_trajectories=2), trajectory_sets(steps=3, max_trajectories=2),
       st.sampled_from([4.0, 10.0]), st.sampled_from([1.0, 2.0]), st.sampled_from([2.0, 6.0]))
def test_tgospa_matches_published_lp_and_bounds_integer_form(X, Y, c, p, gamma) -> None:
    r = trajectory_gospa(X, Y, c=c, p=p, gamma=gamma)
    # the clustered LP equals the LP laid out in full
    assert r.value == pytest.approx(dense_lp_tgospa(X, Y, c, p, gamma), rel=1e-6, abs=1e-6)
    # the LP is a lower bound of the assignment form, equal when its optimum is integral
    d_int = integer_tgospa(X, Y, c, p, gamma)
    assert r.value <= d_int + 1e-6
    if not r.fractional:
        assert r.value == pytest.approx(d_int, rel=1e-6, abs=1e-6)
    # decomposition: parts sum to value^p, and per-step parts sum to the totals
    assert r.value**p == pytest.approx(r.localisation + r.missed + r.false + r.switch,
                                       rel=1e-6, abs=1e-6)
    for total, per_t in ((r.localisation, r.localisation_t), (r.missed, r.missed_t),
                         (r.false, r.false_t), (r.switch, r.switch_t)):
        assert total == pytest.approx(per_t.sum(), abs=1e-9)
        assert (per_t >= -1e-9).all()


@LP
@given(point_sets(integer=True), point_sets(integer=True), st.sampled_from([3.0, 8.0]),
       st.sampled_from([1.0, 2.0]))
def test_tgospa_on_one_step_equals_gospa(x, y, c, p) -> None:
    # With T = 1 there are no switches and the LP of one assignment step is the GOSPA
    # assignment problem [TGOSPA: the metric reduces to GOSPA for a single time step].
    r = trajectory_gospa(x[:, None, :], y[:, None, :], c=c, p=p, gamma=1.0)
    assert r.value == pytest.approx(gospa(x, y, c=c, p=p).value, rel=1e-6, abs=1e-6)
    assert r.switch == 0.0


@LP
@given(trajectory_sets(steps=3), trajectory_sets(steps=3), trajectory_sets(steps=3),
       st.sampled_from([5.0, 12.0]), st.sampled_from([1.0, 2.0]), st.sampled_from([3.0, 8.0]))
def test_tgospa_is_a_metric(X, Y, Z, c, p, gamma) -> None:
    # identity, symmetry, triangle inequality of the LP metric [TGOSPA, the LP metric is a metric]
    assert trajectory_gospa(X, X, c=c, p=p, gamma=gamma).value == pytest.approx(0.0, abs=1e-6)
    dxy = trajectory_gospa(X, Y, c=c, p=p, gamma=gamma).value
    assert dxy == pytest.approx(trajectory_gospa(Y, X, c=c, p=p, gamma=gamma).value,
                                rel=1e-6, abs=1e-6)
    dxz = trajectory_gospa(X, Z, c=c, p=p, gamma=gamma).value
    dzy = trajectory_gospa(Z, Y, c=c, p=p, gamma=gamma).value
    assert dxy <= dxz + dzy + 1e-6


def test_tgospa_clusters_separate_groups(rng: np.random.Generator) -> None:
    # Two groups of vessels 10 km apart never interact: two LP clusters, and the metric
    # of the union is the p-th-power sum of the metrics of the groups (the cost is additive).
    T = 20
    base = np.cumsum(rng.normal(0, 5, (3, T, 2)), axis=1)
    est = base + rng.normal(0, 10, base.shape)
    X = np.concatenate([base, base + 10_000.0])
    Y = np.concatenate([est, est[::-1] + 10_000.0])
    kw = dict(c=50.0, p=2.0, gamma=20.0)
    r = trajectory_gospa(X, Y, **kw)
    ra = trajectory_gospa(base, est, **kw)
    rb = trajectory_gospa(base + 10_000.0, est[::-1] + 10_000.0, **kw)
    assert r.value**2 == pytest.approx(ra.value**2 + rb.value**2, rel=1e-9)
    assert r.n_components == ra.n_components + rb.n_components


# --------------------------------------------------------------------------- grid helper
def test_grid_trajectories_interpolates_within_and_never_beyond() -> None:
    # Computed by hand: linear interpolation between (0 s, (0,0)) and (10 s, (10,20)) puts
    # (5,10) at 5 s; before 0 s and after the last state it is absent; a 90 s gap
    # (10 s -> 100 s) is longer than max_gap_s = 60 s so 15 s is absent but the states
    # themselves stay.
    g = grid_trajectories({"a": ([0.0, 10.0, 100.0], [[0, 0], [10, 20], [0, 0]])},
                          [-5.0, 0.0, 5.0, 10.0, 15.0, 100.0, 101.0], max_gap_s=60.0)
    assert g.shape == (1, 7, 2)
    assert np.isnan(g[0, [0, 4, 6]]).all()
    assert g[0, [1, 2, 3, 5]].tolist() == [[0, 0], [5, 10], [10, 20], [0, 0]]
    g = grid_trajectories([([0.0, 100.0], [[0.0], [100.0]])], [50.0], max_gap_s=np.inf)
    assert g[0, 0, 0] == 50.0
    with pytest.raises(ValueError, match="increasing"):
        grid_trajectories([([1.0, 1.0], [[0, 0], [1, 1]])], [1.0])


def test_tgospa_matches_published_forms_on_crowded_random_cases(rng: np.random.Generator) -> None:
    # Seeded cases in a small box, so that vessels interact, swap and break often: the
    # clustered LP equals the LP laid out in full and, when integral, the assignment form.
    switched = 0
    for _ in range(60):
        T, nx, ny = int(rng.integers(2, 5)), int(rng.integers(1, 3)), int(rng.integers(1, 4))
        X = rng.integers(0, 12, (nx, T, 2)).astype(float)
        Y = rng.integers(0, 12, (ny, T, 2)).astype(float)
        X[rng.random((nx, T)) < 0.2] = np.nan
        Y[rng.random((ny, T)) < 0.2] = np.nan
        c, p, gamma = float(rng.choice([4, 8])), float(rng.choice([1, 2])), float(rng.choice([1, 3]))
        r = trajectory_gospa(X, Y, c=c, p=p, gamma=gamma)
        assert r.value == pytest.approx(dense_lp_tgospa(X, Y, c, p, gamma), rel=1e-6, abs=1e-6)
        d_int = integer_tgospa(X, Y, c, p, gamma)
        assert r.value <= d_int + 1e-6
        if not r.fractional:
            assert r.value == pytest.approx(d_int, rel=1e-6, abs=1e-6)
        switched += r.switch > 0
    assert switched >= 5  # the cases do exercise the switch cost


@LP
@given(trajectory_sets(steps=6, max_trajectories=3), trajectory_sets(steps=6, max_trajectories=3),
       st.sets(st.integers(1, 5), max_size=3), st.sampled_from([4.0, 10.0]),
       st.sampled_from([1.0, 2.0]), st.sampled_from([2.0, 6.0]))
def test_windowed_tgospa_brackets_the_exact_value(X, Y, cuts, c, p, gamma) -> None:
    # the windows' optima sum to a lower bound; with the boundary switches of their
    # solutions added, to the cost of a feasible assignment: an upper bound
    from harbourwatch.scoring.windows import trajectory_gospa_windowed

    exact = trajectory_gospa(X, Y, c=c, p=p, gamma=gamma).value
    w = trajectory_gospa_windowed(X, Y, c=c, p=p, gamma=gamma, cuts=sorted(cuts))
    assert w.lower <= exact + 1e-6
    assert exact <= w.value + 1e-6
    assert w.windows == len(cuts) + 1
    assert w.value**p == pytest.approx(w.localisation + w.missed + w.false + w.switch,
                                       rel=1e-6, abs=1e-6)
    assert w.switch_t.size == X.shape[1] - 1 and w.assignment.shape == (X.shape[0], X.shape[1])[::-1]
    if w.exact:
        assert w.value == pytest.approx(exact, rel=1e-6, abs=1e-6)


def test_windowed_tgospa_is_exact_when_nothing_switches_at_a_boundary() -> None:
    # two vessels tracked without a switch: windows cannot change the value (computed by hand:
    # each estimate 1 m off its vessel at each of 6 steps, p = 2: 12 m^2, value sqrt(12))
    from harbourwatch.scoring.windows import trajectory_gospa_windowed

    t = np.arange(6.0)
    X = np.stack([np.c_[t, 0 * t], np.c_[t, 50 + 0 * t]])
    Y = X + np.array([1.0, 0.0])
    w = trajectory_gospa_windowed(X, Y, c=10.0, p=2.0, gamma=5.0, cuts=[2, 4])
    assert w.exact and w.windows == 3
    assert w.value == pytest.approx(math.sqrt(12.0)) and w.lower == pytest.approx(w.value)
