"""Calibration of alert probabilities: stated probability against observed frequency.

Many short trajectories whose true path runs along a zone edge at a random
offset are simulated from the very model the filter assumes (nearly constant
velocity with the same acceleration noise, plots with the same sd). The
posterior is then exact, so among cases stated at probability ``p`` the rule
must hold in the ground truth with frequency ``p``, up to binomial error
(the notion of a reliability diagram: Murphy and Winkler, J. Roy. Stat. Soc.
C 36(1), 1987 -- from memory).
"""

from __future__ import annotations

import numpy as np
from shapely.geometry import Polygon
from test_rules import T0, kalman_trajectory, rule, tset, zone

from harbourwatch.models.cv import cv_process_noise, cv_transition
from harbourwatch.rules.evaluate import evaluate_rules

Q_PSD = 0.05
SIGMA_M = 15.0
N_CASES = 400
N_SAMPLES = 100


def simulate_truth(rng: np.random.Generator, t: np.ndarray, x0: np.ndarray) -> np.ndarray:
    """True states at ``t`` drawn from the nearly-constant-velocity model itself."""
    x = np.empty((t.size, 4))
    x[0] = x0
    for k in range(1, t.size):
        dt = float(t[k] - t[k - 1])
        Q = cv_process_noise(dt, Q_PSD)
        x[k] = cv_transition(dt) @ x[k - 1] + rng.multivariate_normal(np.zeros(4), Q)
    return x


def test_entry_probabilities_are_calibrated() -> None:
    rng = np.random.default_rng(2026)
    # the zone is everything north of the local east axis (a large rectangle)
    zs = [zone("north-half", "Calder Sound North", Polygon(
        [(-20000, 0), (20000, 0), (20000, 20000), (-20000, 20000)]))]
    trajs, truth = [], {}
    for i in range(N_CASES):
        t = np.arange(0.0, 45.0, 2.5) + rng.uniform(0, 2.5)
        x0 = np.array([rng.uniform(-5000, 5000), rng.normal(3.0, 0.5),
                       rng.uniform(-30.0, 20.0), rng.normal(0.0, 0.3)])
        x = simulate_truth(rng, t, x0)
        z = x[:, [0, 2]] + rng.normal(0.0, SIGMA_M, (t.size, 2))
        tid = f"C{i:03d}"
        # the filter's prior is the truth's: flat in position, the same velocity law
        trajs.append(kalman_trajectory(tid, t, z, SIGMA_M, q=Q_PSD, v0=(3.0, 0.0),
                                       v0_sd=(0.5, 0.3)))
        truth[tid] = bool((x[:, 2] > 0.0).any())
        assert abs(trajs[-1].start - (T0 + t[0])) < 1e-6
    got = evaluate_rules(tset(trajs), zs, [rule("north", "entry", "north-half",
                                                min_probability=0.0)],
                         seed=5, n_samples=N_SAMPLES)
    stated = {tid: 0.0 for tid in truth}
    for a in got:
        stated[a.track] = max(stated[a.track], a.probability)
    p = np.array([stated[k] for k in truth])
    y = np.array([truth[k] for k in truth], float)
    assert 0.25 < y.mean() < 0.75  # a real mix of entering and not entering
    edges = [0.0, 0.05, 0.3, 0.5, 0.7, 0.95, 1.0001]
    table, used = [], 0
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        m = (p >= lo) & (p < hi)
        n = int(m.sum())
        if n < 10:
            continue
        used += n
        mean_p, freq = float(p[m].mean()), float(y[m].mean())
        # binomial sd of the observed frequency given the stated probabilities, plus the
        # Monte-Carlo sd of the stated ones (each at most p(1-p)/N_SAMPLES), floor 1/n
        var = (np.sum(p[m] * (1 - p[m])) * (1 + 1 / N_SAMPLES)) / n**2
        sd = max(float(np.sqrt(var)), 1.0 / n)
        table.append((lo, hi, n, round(mean_p, 3), round(freq, 3), round(sd, 3)))
        assert abs(freq - mean_p) <= 3 * sd, table
    assert used >= 0.9 * N_CASES and len(table) >= 4, table
    # overall: expected number of entries against the observed number
    assert abs(y.sum() - p.sum()) <= 3 * np.sqrt(np.sum(p * (1 - p)) + 1.0)
