"""Regressions of the extended-vessel association, one per cause found on the East Quay scene.

* A fragment of a ship (a new Bernoulli that took part of the ship's plots
  while the ship turned slowly and its hull estimate lagged) looked longer
  than the ship for a moment and pushed the ship off its own plots: the
  ship's trajectory ended and the fragment carried on (an identity swap).
  Now of two hulls the one whose extent rests on fewer plots yields.
* A small craft crossing over a ship's hull (the simulator does not keep
  vessels apart) lost its plots to the hull: its plots inside the hull were
  penalised, and the only candidate partitions put the plots around it in
  one cell that an established point track may not take. Its trajectory
  broke in two. Now an established small craft keeps its own plot to the
  likelihoods and guides the partitions with its best plot only.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harbourwatch.cli import main
from harbourwatch.filter._cells import CellBook, scan_partitions
from harbourwatch.filter._extscan import OVERLAP_LOG_PENALTY, _one_plot_each, overlap_penalty
from harbourwatch.sim import SCENARIOS, simulate_to_dir
from harbourwatch.sim.model import Scenario, ScenarioSpec
from harbourwatch.sim.quay import QUAY_RULES, _hull, _sensor_cfg, quay_zones_geojson
from harbourwatch.sim.scenarios import START_EPOCH_S, _go, _plan


def _state(e: float, n: float, vel_var: float) -> tuple[np.ndarray, np.ndarray]:
    m = np.array([e, 0.0, n, 0.0])
    P = np.diag([100.0, vel_var, 100.0, vel_var])
    return m, P


def _ext(length_m: float, beam_m: float, v: float) -> tuple[float, float, float, np.ndarray]:
    """An extent ``(α, β, v, V)`` whose mean is a hull of that length and beam along north."""
    X = np.diag([(beam_m / 2) ** 2, (length_m / 2) ** 2])
    return 30.0, 10.0, v, X * (v - 3.0)


def _penalised(slot_ext: dict, pm: np.ndarray, pP: np.ndarray, z: np.ndarray,  # type: ignore[type-arg]
               ii: list[int], jj: list[int], bern: list[int]) -> np.ndarray:
    ii_a, jj_a = np.array(ii), np.array(jj)
    ll = np.zeros(ii_a.size)
    out = overlap_penalty(ii_a, jj_a, ll, z, pm, pP, slot_ext, bern, np.ones(pm.shape[0]))
    return out < 0.5 * OVERLAP_LOG_PENALTY


def test_a_fragment_longer_for_a_moment_does_not_push_the_ship_off_its_plots() -> None:
    # slot 0: the ship, 220 m, its extent from some hundred plots; slot 1: a fragment that
    # took a cell of the ship's plots and, from its prior extent, reads 260 m on a few plots
    pm, pP = map(np.array, zip(_state(0.0, 0.0, 0.05), _state(10.0, 5.0, 4.0), strict=True))
    slot_ext = {0: _ext(220.0, 32.0, 100.0), 1: _ext(260.0, 60.0, 9.0)}
    z = np.array([[0.0, 20.0]])  # a cell centroid on the ship's centre line
    hit = _penalised(slot_ext, pm, pP, z, [0, 1], [0, 0], [7, 8])
    assert not hit[0]  # the ship keeps it
    assert hit[1]  # the fragment yields
    # two hulls resting on as many plots: the shorter one yields (as before)
    slot_ext = {0: _ext(220.0, 32.0, 50.0), 1: _ext(260.0, 60.0, 50.0)}
    hit = _penalised(slot_ext, pm, pP, z, [0, 1], [0, 0], [7, 8])
    assert hit[0] and not hit[1]


def test_an_established_craft_keeps_its_plot_over_a_hull_a_new_one_does_not() -> None:
    # slot 0: a 300 m ship; slot 1: a launch known for minutes (small velocity variance)
    # 75 m ahead of the ship's centre, over its hull; slot 2: a track started a scan ago there
    pm, pP = map(np.array, zip(_state(0.0, 0.0, 0.05), _state(0.0, 75.0, 0.1),
                               _state(5.0, 75.0, 25.0), strict=True))
    slot_ext = {0: _ext(300.0, 45.0, 100.0)}
    z = np.array([[3.0, 78.0]])
    hit = _penalised(slot_ext, pm, pP, z, [1, 2], [0, 0], [7, 8, 9])
    assert not hit[0]
    assert hit[1]


def test_an_established_craft_guides_the_partitions_with_one_plot() -> None:
    # plots 0-2 around the craft (plot 1 is its own), plots 3-5 along the hull beside it
    z = np.array([[0.0, 75.0], [2.0, 76.0], [-15.0, 60.0], [0.0, 20.0], [3.0, -40.0], [0.0, -90.0]])
    # point path pairs: the craft (slot 1) gates plots 0-2, plot 1 best
    pairs = (np.array([1, 1, 1]), np.array([0, 1, 2]), np.array([-8.0, -7.2, -8.6]))
    point = np.array([False, True])
    ii, jj, ll = _one_plot_each(pairs, point)
    assert jj.tolist() == [1] and ii.tolist() == [1] and ll.tolist() == [-7.2]
    # a young track (not established) guides with every plot in its gate
    ii, jj, _ = _one_plot_each(pairs, np.array([False, False]))
    assert jj.tolist() == [0, 1, 2]
    # best labels: the craft's plot 1, the ship's (label 0) for the rest it gates with
    best = np.array([0, 1, 0, 0, 0, 0])
    book = CellBook(z.shape[0])
    parts = [sorted(book.plots_of(c) for c in p) for p in scan_partitions(z, best, book)]
    assert [(0, 2, 3, 4, 5), (1,)] in parts


def _bow_crossing(seed: int, duration_s: float | None) -> Scenario:
    """A 300 m ship up a channel at 3 kn; a launch crosses 75 m ahead of its centre at 5 kn."""
    ship = _hull(_plan("ship", -60.0, 4450, -1600, 0, 3, [_go(4450, 2000, 3)], "300 m"),
                 300.0, 45.0)
    launch = _hull(_plan("launch", 0.0, 4950, -1160, 270, 5, [_go(2000, -1160, 5)],
                         "crosses the ship's bow"), 10.0, 3.5)
    return Scenario(name="bow-crossing", start_epoch_s=START_EPOCH_S,
                    duration_s=360.0 if duration_s is None else duration_s,
                    sensors=(_sensor_cfg(),), vessels=(ship, launch),
                    zones_geojson=quay_zones_geojson(), rules_toml=QUAY_RULES)


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_a_launch_crossing_over_a_hull_stays_one_trajectory(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from harbourwatch import score_files

    monkeypatch.setitem(SCENARIOS, "bow-crossing", ScenarioSpec(
        name="bow-crossing", description="test", build=_bow_crossing, default_seed=11,
        default_duration_s=360.0))
    d = tmp_path / "feed"
    simulate_to_dir("bow-crossing", d)
    out = tmp_path / "run"
    assert main(["run", str(d / "plots.csv"), "--sensors", str(d / "sensors.toml"),
                 "--zones", str(d / "zones.geojson"), "--rules", str(d / "rules.toml"),
                 "--out", str(out), "--quiet"]) == 0
    rep = score_files(out / "tracks.csv", d / "truth.csv")
    launch = rep.per_truth["launch"]
    assert launch["breaks"] == 0 and launch["swaps"] == 0
    assert rep.per_truth["ship"]["swaps"] == 0
    assert len({r["track"] for r in _rows(out / "tracks.csv")}) == 2


@settings(max_examples=120, deadline=None)
@given(data=st.data(), m=st.integers(1, 40))
def test_cell_components_are_scipys_connected_components(data: st.DataObject, m: int) -> None:
    # the union-find of the distance partitioning against scipy's sparse-graph components
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    from harbourwatch.filter._cells import _components

    edges = data.draw(st.lists(st.tuples(st.integers(0, m - 1), st.integers(0, m - 1)),
                               max_size=3 * m))
    a = np.array([e[0] for e in edges], np.int64)
    b = np.array([e[1] for e in edges], np.int64)
    got = _components(m, a, b)
    ref = connected_components(coo_matrix((np.ones(a.size), (a, b)), shape=(m, m)),
                               directed=False)[1]
    # the same partition of the plots: labels equal exactly where the reference's are
    assert np.array_equal(got[:, None] == got[None, :], ref[:, None] == ref[None, :])
