"""The clutter map of the filter: storms raise the clutter intensity where they are, only there.

Reference: the intensity of a Poisson point process estimated by a count per
area (the maximum-likelihood estimate of a homogeneous rate: count / area),
common practice, no source.
"""

from __future__ import annotations

import math
import shutil

import numpy as np
import pytest

from harbourwatch import simulate_to_dir
from harbourwatch.filter._cluttermap import BURST_PLOTS, CELL_M, STORM_PLOTS, ClutterMap
from harbourwatch.pipeline import demo_paths, run_review
from harbourwatch.scoring.score import score_files

BASE = 6.0 / (math.pi * 14_000.0**2)  # the demo radar: 6 false plots per scan over 14 km
COVER = math.pi * 14_000.0**2


def _cell_plots(rng, n, cell=(1, 1)):
    return np.column_stack([rng.uniform(cell[0] * CELL_M, (cell[0] + 1) * CELL_M, n),
                            rng.uniform(cell[1] * CELL_M, (cell[1] + 1) * CELL_M, n)])


def test_a_persistent_storm_cell_gets_its_count_over_its_area(rng):
    cmap = ClutterMap()
    z1, z2 = _cell_plots(rng, 12), _cell_plots(rng, 9)
    assert cmap.intensity(0, z1, np.ones(12, bool), BASE, COVER) == BASE  # one scan: not yet
    lam = cmap.intensity(0, z2, np.ones(9, bool), BASE, COVER)
    # the lower of the two counts over the cell's area
    np.testing.assert_allclose(lam, 9 / CELL_M**2)


def test_plots_explained_by_confirmed_tracks_do_not_count(rng):
    cmap = ClutterMap()
    z = _cell_plots(rng, 12)
    for _ in range(3):
        assert cmap.intensity(0, z, np.zeros(12, bool), BASE, COVER) == BASE


def test_other_cells_and_other_radars_keep_the_configured_rate(rng):
    cmap = ClutterMap()
    storm = _cell_plots(rng, 10)
    calm = _cell_plots(rng, STORM_PLOTS - 1, cell=(4, 4))
    z = np.vstack([storm, calm])
    cmap.intensity(0, z, np.ones(len(z), bool), BASE, COVER)
    lam = cmap.intensity(0, z, np.ones(len(z), bool), BASE, COVER)
    assert np.all(lam[:10] > BASE) and np.all(lam[10:] == BASE)
    assert cmap.intensity(1, z, np.ones(len(z), bool), BASE, COVER) == BASE  # radar 1: first scan


def test_a_burst_counts_at_once(rng):
    z = _cell_plots(rng, BURST_PLOTS)
    lam = ClutterMap().intensity(0, z, np.ones(BURST_PLOTS, bool), BASE, COVER)
    np.testing.assert_allclose(lam, BURST_PLOTS / CELL_M**2)


def test_a_storm_over_the_whole_cover_sets_the_floor(rng):
    cmap = ClutterMap()
    n = 600  # uniform: about 8 per 9 km2 cell
    r = 14_000.0 * np.sqrt(rng.uniform(0, 1, (2, n)))
    a = rng.uniform(0, 2 * np.pi, (2, n))
    z = [np.column_stack([r[k] * np.cos(a[k]), r[k] * np.sin(a[k])]) for k in range(2)]
    cmap.intensity(0, z[0], np.ones(n, bool), BASE, COVER)
    lam = cmap.intensity(0, z[1], np.ones(n, bool), BASE, COVER)
    assert np.all(lam >= n / COVER * (1 - 1e-12))


@pytest.fixture(scope="module")
def storm_run(tmp_path_factory):
    """Five minutes of 'quiet' (four vessels) with 500 false plots per scan for two minutes."""
    d = tmp_path_factory.mktemp("storm")
    simulate_to_dir("quiet", d, duration_s=300.0)
    p = demo_paths()
    shutil.copy(p["zones"], d / "zones.geojson")
    shutil.copy(p["rules"], d / "rules.toml")
    import pandas as pd
    from pyproj import Geod

    geod = Geod(ellps="WGS84")
    feed = pd.read_csv(d / "plots.csv")
    times = pd.to_datetime(feed.time)
    t0 = times.min()
    rng = np.random.default_rng(5)
    parts = [feed]
    for scan, grp in feed.groupby("scan"):
        ts = pd.to_datetime(grp.time).max()
        if 60 <= (ts - t0).total_seconds() <= 180:
            n = 500
            lon, lat, _ = geod.fwd(np.full(n, -30.070082), np.full(n, 57.515245),
                                   rng.uniform(0, 360, n), 14_000 * np.sqrt(rng.uniform(0, 1, n)))
            tt = ts - pd.to_timedelta(rng.uniform(0, 2.4, n), unit="s")
            parts.append(pd.DataFrame({
                "time": tt.strftime("%Y-%m-%dT%H:%M:%S.%f").str[:-3] + "Z",
                "sensor": "calder-head", "lat": lat.round(7), "lon": lon.round(7), "scan": scan}))
    pd.concat(parts).to_csv(d / "storm.csv", index=False)
    out = d / "out"
    summary = run_review([d / "storm.csv"], sensors=d / "sensors.toml", zones=d / "zones.geojson",
                         rules=d / "rules.toml", out=out, progress=False)
    return d, out, summary


def test_a_storm_breaks_no_track_and_adds_no_vessel(storm_run):
    d, out, summary = storm_run
    score = score_files(out / "tracks.csv", d / "truth.csv").as_dict()
    assert score["truth_vessels"] == 4
    assert score["estimated_tracks"] == 4  # without the map: 855 (one per storm plot or so)
    assert score["track_breaks"] == 0 and score["identity_swaps"] == 0
    # and the run says the clutter was far above the configured rate
    assert any("false_plots_per_scan" in w for w in summary.warnings)
