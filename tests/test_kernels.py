"""The compiled kernels (numba) against their readable references.

References: the batched-numpy IMM of ``TwoModeMotion`` (itself checked against
scipy and the plain Kalman filter in test_motion.py), the step-by-step RTS
smoother of ``harbourwatch.models.gaussian`` (checked against the
Kalman smoother's closed form in test_gaussian.py), and a breadth-first walk of
parent links for node reachability.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from numba import njit
from strategies import mode_states

from harbourwatch.filter._kernels import (
    _compiled,
    gate_candidates,
    reachable,
    rts_smooth_chain,
    write_nodes,
)
from harbourwatch.filter._motion import TwoModeMotion
from harbourwatch.filter._nodes import NodeStore
from harbourwatch.models.cv import cv_process_noise_batch, cv_transition_batch
from harbourwatch.models.gaussian import kf_predict, rts_smooth


def _plot_covariances(rng, k):
    B = rng.normal(0, 3, (k, 2, 2))
    return B @ np.swapaxes(B, 1, 2) + 25 * np.eye(2)


def _all_pairs(n, m):
    """Every (hypothesis, plot) pair, row-major."""
    ii, jj = np.meshgrid(np.arange(n), np.arange(m), indexing="ij")
    return ii.ravel().astype(np.int64), jj.ravel().astype(np.int64)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 12), q_hi=st.sampled_from([0.0002, 0.05, 1.0]))
def test_compiled_prediction_equals_numpy_reference(seed, n, q_hi):
    rng = np.random.default_rng(seed)
    mot = TwoModeMotion(0.0002, q_hi, interval_s=900.0, duration_s=60.0)
    m, P, mu = mode_states(rng, n)
    dt = rng.uniform(1e-3, 120.0, n)
    got = mot.predict(m, P, mu, dt)
    ref = mot.predict_reference(m, P, mu, dt)
    for g, r in zip(got, ref, strict=True):
        np.testing.assert_allclose(g, r, rtol=1e-11, atol=1e-9)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6), m_plots=st.integers(1, 6))
def test_compiled_gating_and_update_equal_numpy_reference(seed, n, m_plots):
    # every (leaf, plot) candidate pair: the compiled kernel must keep exactly the pairs
    # whose smaller NIS is below the gate, with the reference's numbers for each
    rng = np.random.default_rng(seed)
    mot = TwoModeMotion(0.0002, 0.05, interval_s=900.0, duration_s=60.0)
    m, P, mu = mode_states(rng, n)
    t_leaf = rng.uniform(0.0, 5.0, n)
    tj = rng.uniform(0.0, 10.0, m_plots)
    z = rng.normal(0, 60, (m_plots, 2))
    R = _plot_covariances(rng, m_plots)
    ii, jj = _all_pairs(n, m_plots)
    gate = 13.8  # 0.999 quantile of chi-square with 2 degrees of freedom
    idx, ll, stamp, mg, Pg, um, uP, post = mot.gate_update(m, P, mu, t_leaf, ii, jj, tj, z, R, gate, 1e-3)
    stamp_ref = np.maximum(tj[jj], t_leaf[ii] + 1e-3)
    nis, ll_r, um_r, uP_r, post_r, mg_r, Pg_r = mot.score_and_update(
        m[ii], P[ii], mu[ii], stamp_ref - t_leaf[ii], z[jj], R[jj]
    )
    np.testing.assert_array_equal(idx, np.flatnonzero(nis < gate))
    for g, r in ((ll, ll_r), (stamp, stamp_ref), (mg, mg_r), (Pg, Pg_r), (um, um_r), (uP, uP_r), (post, post_r)):
        np.testing.assert_allclose(g, r[idx], rtol=1e-10, atol=1e-8)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), T=st.integers(1, 40))
def test_compiled_rts_equals_stepwise_reference(seed, T):
    rng = np.random.default_rng(seed)
    t = np.cumsum(rng.uniform(0.5, 30.0, T))
    A = rng.normal(0, 1, (T, 4, 4))
    fP = A @ np.swapaxes(A, 1, 2) + np.eye(4)
    fm = rng.normal(0, 100, (T, 4))
    pm, pP = fm.copy(), fP.copy()
    if T > 1:
        dt = np.diff(t)
        pm[1:], pP[1:] = kf_predict(fm[:-1], fP[:-1], cv_transition_batch(dt), cv_process_noise_batch(dt, 0.01))
    ms, Ps = rts_smooth_chain(t, fm, fP, pm, pP)
    ms_r, Ps_r = rts_smooth(t, fm, fP, pm, pP)
    np.testing.assert_allclose(ms, ms_r, rtol=1e-9, atol=1e-7)
    np.testing.assert_allclose(Ps, Ps_r, rtol=1e-9, atol=1e-7)
    np.testing.assert_array_equal(Ps, np.swapaxes(Ps, 1, 2))


@settings(max_examples=50, deadline=None)
@given(data=st.data(), n=st.integers(1, 60))
def test_reachable_equals_breadth_first_walk(data, n):
    # parents always precede their children, as in the node store
    parent = np.array([data.draw(st.integers(-1, i - 1)) for i in range(n)], np.int64)
    live = np.array(data.draw(st.lists(st.integers(-1, n - 1), max_size=8)), np.int64)
    ref = np.zeros(n, bool)
    todo = [int(i) for i in live if i >= 0]
    while todo:
        i = todo.pop()
        if not ref[i]:
            ref[i] = True
            if parent[i] >= 0:
                todo.append(int(parent[i]))
    np.testing.assert_array_equal(reachable(parent, n, live), ref)


def test_written_nodes_hold_the_miss_detection_and_new_moments(rng):
    store = NodeStore(capacity=2)
    mot = TwoModeMotion(0.0002, 0.05, interval_s=900.0, duration_s=60.0)
    miss_m, miss_P, miss_mu = mode_states(rng, 2)
    miss = (np.array([5.0, 6.0]), miss_m[:, 0], miss_P[:, 0], miss_m, miss_P, miss_mu)
    det_m, det_P, det_mu = mode_states(rng, 1)
    det = (np.array([7.5]), det_m[:, 1], det_P[:, 1], det_m, det_P, det_mu)
    z = np.array([[100.0, -50.0], [3.0, 4.0]])
    R = np.array([[[400.0, 30.0], [30.0, 900.0]], np.eye(2)])
    start = store.reserve_rows(3)  # grows the store past its capacity
    write_nodes(
        store.columns(), start, np.array([0, 1, 2]), np.array([1, 0, 0]), np.array([11, 12, -1]),
        2, mot.q, mot.initial_mu(1)[0], miss, det, np.array([1]), np.array([70, 71]),
        np.array([8.0, 8.5]), z, R, 25.0,
    )
    assert store.n == 3
    np.testing.assert_array_equal(store.parent[:3], [11, 12, -1])
    np.testing.assert_array_equal(store.plot[:3], [-1, 71, 70])
    np.testing.assert_array_equal(store.sensor[:3], [2, 2, 2])
    np.testing.assert_array_equal(store.t[:3], [6.0, 7.5, 8.0])
    np.testing.assert_array_equal(store.mP[0], miss_P[1])
    np.testing.assert_array_equal(store.m[1], det_m[0, 1])
    new_P = np.zeros((4, 4))
    new_P[np.ix_([0, 2], [0, 2])] = R[0]
    new_P[1, 1] = new_P[3, 3] = 25.0
    np.testing.assert_array_equal(store.P[2], new_P)
    np.testing.assert_array_equal(store.m[2], [100.0, 0.0, -50.0, 0.0])
    np.testing.assert_array_equal(store.mm[2], [[100.0, 0.0, -50.0, 0.0]] * 2)
    np.testing.assert_allclose(store.qin[:3], [miss_mu[1] @ mot.q, det_mu[0] @ mot.q, mot.initial_mu(1)[0] @ mot.q])


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6), m_plots=st.integers(1, 8))
@example(seed=210533338, n=5, m_plots=4)  # once found: a low-probability mode far from the merge
def test_prefilter_never_drops_a_pair_the_exact_gate_keeps(seed, n, m_plots):
    # the pre-filter must be conservative: every pair whose smaller NIS (numpy reference,
    # each leaf's modes mixed and predicted to the plot's own time) is inside the gate is
    # a candidate, including leaves whose two modes disagree a lot
    rng = np.random.default_rng(seed)
    mot = TwoModeMotion(0.0002, 0.05, interval_s=900.0, duration_s=60.0)
    m, P, mu = mode_states(rng, n)
    m[:, :, [1, 3]] = rng.normal(0, 6, (n, 2, 2))  # speeds of harbour craft
    t_leaf = rng.uniform(0.0, 5.0, n)
    tj = 6.0 + rng.uniform(-8.0, 2.5, m_plots)  # some plots older than the leaf
    z = m[:, 0, [0, 2]].mean(axis=0) + rng.normal(0, 40, (m_plots, 2))
    R = _plot_covariances(rng, m_plots)
    gate = 18.42  # chi-square 2 dof at 0.9999
    ci, cj = gate_candidates(np.arange(n), m, P, t_leaf, mot.q_max, z, R, tj, gate, 1e-3)
    cand = set(zip(ci.tolist(), cj.tolist(), strict=True))
    ii, jj = _all_pairs(n, m_plots)
    stamp = np.maximum(tj[jj], t_leaf[ii] + 1e-3)
    nis = mot.score_and_update(m[ii], P[ii], mu[ii], stamp - t_leaf[ii], z[jj], R[jj])[0]
    kept = {(int(i), int(j)) for i, j, v in zip(ii, jj, nis, strict=True) if v < gate}
    assert kept <= cand
    assert list(zip(ci.tolist(), cj.tolist(), strict=True)) == sorted(cand)  # row-major order


def test_kernels_still_compile_where_no_cache_folder_can_be_written():
    # a function without a source file stands for a read-only install: numba has
    # nowhere to cache it and refuses cache=True, so the kernels fall back to no cache
    ns: dict = {}
    exec("def f(x):\n    return 2 * x + 1\n", ns)
    with pytest.raises(RuntimeError, match="cannot cache"):
        njit(cache=True)(ns["f"])
    assert _compiled(ns["f"])(20) == 41
