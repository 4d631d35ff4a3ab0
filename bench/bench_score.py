"""Timing of trajectory GOSPA on one synthetic hour of harbour traffic.

40 invented vessels in Calder Sound for one hour on a 10 s grid (361 steps):
truth = smooth random paths, estimates = truth + position noise, with some
missing segments, a few false tracks and one identity swap between two
vessels that pass close to each other. No simulation of radar plots.

Run: ``.venv/bin/python -m bench.bench_score`` (or ``python bench/bench_score.py``).
"""

from __future__ import annotations

import time

import numpy as np

from harbourwatch.scoring.metrics import gospa, trajectory_gospa

__all__ = ["make_scenario", "main"]


def make_scenario(
    *, n_vessels: int = 40, duration_s: float = 3600.0, grid_s: float = 10.0, seed: int = 7,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Truth ``(n, T, 2)``, estimates ``(m, T, 2)`` (NaN = absent) and grid times."""
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, duration_s + grid_s / 2, grid_s)
    T = len(t)
    # smooth paths: constant speed 2-12 kn with a slowly wandering heading, in a 12 km box
    speed = rng.uniform(1.0, 6.0, n_vessels)
    heading = rng.uniform(0, 2 * np.pi, n_vessels)[:, None] + np.cumsum(
        rng.normal(0.0, 0.02, (n_vessels, T)), axis=1)
    vel = speed[:, None, None] * np.stack([np.sin(heading), np.cos(heading)], axis=-1)
    start = rng.uniform(-6000, 6000, (n_vessels, 1, 2))
    truth = start + np.cumsum(vel * grid_s, axis=1)
    # vessels arrive and leave: each present for a random span of at least 20 min
    first = rng.integers(0, T // 3, n_vessels)
    last = np.minimum(T, first + rng.integers(T // 3, T, n_vessels))
    steps = np.arange(T)[None, :]
    absent = (steps < first[:, None]) | (steps >= last[:, None])
    truth[absent] = np.nan
    # make vessels 0 and 1 run side by side 60 m apart so a swap is plausible
    truth[1] = truth[0] + np.array([60.0, 0.0])
    est = truth + rng.normal(0.0, 25.0, truth.shape)
    # the estimates of 0 and 1 swap half way through their common span
    both = np.nonzero(~np.isnan(truth[0, :, 0]))[0]
    mid = both[len(both) // 2]
    est[[0, 1], mid:] = est[[1, 0], mid:]
    # missing segments: every fifth vessel loses 5 min of its estimate
    for i in range(0, n_vessels, 5):
        span = np.nonzero(~np.isnan(est[i, :, 0]))[0]
        if len(span) > 60:
            s0 = span[len(span) // 3]
            est[i, s0:s0 + 30] = np.nan
    # three false tracks of 10 minutes each
    false = np.full((3, T, 2), np.nan)
    for k in range(3):
        s0 = rng.integers(0, T - 60)
        false[k, s0:s0 + 60] = rng.uniform(-6000, 6000, 2) + np.cumsum(
            rng.normal(0, 20, (60, 2)), axis=0)
    return truth, np.concatenate([est, false]), t


def main() -> None:
    """Print the time of one trajectory GOSPA evaluation (and per-step GOSPA)."""
    truth, est, t = make_scenario()
    c, p, gamma = 200.0, 2.0, 100.0
    trajectory_gospa(truth[:2, :10], est[:2, :10], c=c, p=p, gamma=gamma)  # warm the imports
    t0 = time.perf_counter()
    res = trajectory_gospa(truth, est, c=c, p=p, gamma=gamma)
    elapsed = time.perf_counter() - t0
    t1 = time.perf_counter()
    for k in range(len(t)):
        x = truth[:, k][~np.isnan(truth[:, k, 0])]
        y = est[:, k][~np.isnan(est[:, k, 0])]
        gospa(x, y, c=c, p=p)
    elapsed_gospa = time.perf_counter() - t1
    print(f"score: {truth.shape[0]} vessels x 1 h at 10 s grid: {elapsed:.2f} s")
    print(f"  ({len(t)} steps, {res.n_components} LP clusters, largest LP "
          f"{res.largest_lp_variables} variables; per-step GOSPA {elapsed_gospa:.2f} s; "
          f"TGOSPA {res.value:.1f} m, switch part {res.switch:.0f} m^{p:g})")


if __name__ == "__main__":
    main()
