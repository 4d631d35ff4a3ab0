"""Extended vessels: the GGIW maths, cells of plots, and a ship with two launches beside it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from harbourwatch.filter._cells import CellBook, scan_partitions
from harbourwatch.models.extent import (
    RHO,
    count_log_pmf,
    hull_size,
    inv2,
    iw_mean,
    length_probability,
    log_no_plot,
    predict_extent,
    scatter_log_lik,
    sqrtm2,
    update_extent,
)


@settings(deadline=None)
@given(n=st.integers(0, 40), alpha=st.floats(0.05, 200.0), beta=st.floats(0.01, 100.0))
def test_count_likelihood_is_scipy_negative_binomial(n: int, alpha: float, beta: float) -> None:
    # the gamma-Poisson mixture is the negative binomial r = α, p = β/(β+1)
    # (scipy.stats.nbinom, the reference)
    ref = stats.nbinom.logpmf(n, alpha, beta / (beta + 1.0))
    assert count_log_pmf(np.array([n]), np.array([alpha]), np.array([beta]))[0] == \
        pytest.approx(ref, rel=1e-9, abs=1e-9)
    assert log_no_plot(alpha, beta) == pytest.approx(stats.nbinom.logpmf(0, alpha,
                                                                         beta / (beta + 1.0)))


@settings(deadline=None)
@given(v=st.floats(3.5, 500.0), a=st.floats(10.0, 1e5), c=st.floats(10.0, 1e5),
       rho=st.floats(-0.95, 0.95))
def test_inverse_wishart_mean_is_scipys(v: float, a: float, c: float, rho: float) -> None:
    # scipy.stats.invwishart(df=v, scale=V).mean() = V / (v - d - 1), d = 2 (the reference)
    b = rho * math.sqrt(a * c)
    V = np.array([[a, b], [b, c]])
    ref = stats.invwishart(df=v, scale=V).mean()
    assert np.allclose(iw_mean(np.array([v]), V[None])[0], ref, rtol=1e-12)


def test_forgetting_keeps_the_mean_and_lowers_the_confidence() -> None:
    # methods note §9.4: E[X] unchanged, v towards d + 1, gamma mean unchanged
    V = np.array([[[9000.0, 100.0], [100.0, 800.0]]])
    a, b, v2, V2 = predict_extent(np.array([12.0]), np.array([3.0]), np.array([20.0]), V,
                                  np.array([30.0]))
    assert np.allclose(iw_mean(v2, V2), iw_mean(np.array([20.0]), V))
    assert 3.0 < v2[0] < 20.0
    assert a[0] / b[0] == pytest.approx(4.0)
    assert a[0] < 12.0


@settings(deadline=None)
@given(a=st.floats(1.0, 1e5), c=st.floats(1.0, 1e5), rho=st.floats(-0.99, 0.99))
def test_square_root_and_inverse_of_2x2(a: float, c: float, rho: float) -> None:
    # closed forms against numpy's matrix product and solve (computed by hand, checked here)
    b = rho * math.sqrt(a * c)
    A = np.array([[[a, b], [b, c]]])
    s = sqrtm2(A)
    assert np.allclose(s @ s, A, rtol=1e-8, atol=1e-8 * max(a, c))
    assert np.allclose(inv2(A)[0] @ A[0], np.eye(2), atol=1e-6)


def _grid_posterior(m: np.ndarray, P: np.ndarray, z: np.ndarray, Y: np.ndarray
                    ) -> tuple[float, np.ndarray, np.ndarray]:
    """Brute force: ∫ N(p; m, P) ∏ N(z_j; p, Y) dp, posterior mean and covariance, on a grid."""
    sd = math.sqrt(max(P[0, 0], P[1, 1]))
    g = np.linspace(-8 * sd, 8 * sd, 801)
    pe, pn = np.meshgrid(m[0] + g, m[1] + g, indexing="ij")
    pts = np.stack([pe.ravel(), pn.ravel()], axis=1)
    logw = stats.multivariate_normal(m, P).logpdf(pts)
    for zj in z:
        logw = logw + stats.multivariate_normal(zj, Y).logpdf(pts)
    top = logw.max()
    w = np.exp(logw - top)
    cell = (g[1] - g[0]) ** 2
    lik = math.log(w.sum() * cell) + top
    w /= w.sum()
    mean = w @ pts
    d = pts - mean
    return lik, mean, (w[:, None] * d).T @ d


def test_cell_update_against_brute_force_posterior() -> None:
    # a tiny case: position prior, a cell of three plots of an extended vessel with known X;
    # the centroid form (S = P + Y/n, scatter term) must equal direct numerical integration
    m = np.array([100.0, -50.0])
    P = np.array([[400.0, 60.0], [60.0, 250.0]])
    X = np.array([[3600.0, 900.0], [900.0, 500.0]])
    R = np.array([[225.0, 0.0], [0.0, 150.0]])
    Y = RHO * X + R
    z = np.array([[140.0, -30.0], [60.0, -70.0], [115.0, -35.0]])
    n = z.shape[0]
    zbar = z.mean(axis=0)
    Z = (z - zbar).T @ (z - zbar)
    S = P + Y / n
    K = P @ np.linalg.solve(S, np.eye(2))
    post_m = m + K @ (zbar - m)
    post_P = P - K @ S @ K.T
    lik = (stats.multivariate_normal(m, S).logpdf(zbar)
           + scatter_log_lik(np.array([n]), Z[None], Y[None])[0])
    ref_lik, ref_m, ref_P = _grid_posterior(m, P, z, Y)
    assert lik == pytest.approx(ref_lik, abs=1e-6)
    assert np.allclose(post_m, ref_m, atol=1e-4)
    assert np.allclose(post_P, ref_P, rtol=1e-4)


def test_extent_update_is_consistent_with_many_plots() -> None:
    # Monte Carlo check of the [FFK11] approximate update: with the true extent as prior
    # mean and many plots spread uniformly over that ellipse, E[X] stays near the truth
    rng = np.random.default_rng(4)
    L, B, hdg = 300.0, 40.0, math.radians(30.0)
    u = np.array([math.sin(hdg), math.cos(hdg)])
    w = np.array([math.cos(hdg), -math.sin(hdg)])
    X_true = (L / 2) ** 2 * np.outer(u, u) + (B / 2) ** 2 * np.outer(w, w)
    R = np.diag([225.0, 400.0])
    v = np.array([10.0])
    V = X_true[None] * 7.0
    for _ in range(40):
        n = 6
        rad, phi = np.sqrt(rng.random(n)), 2 * math.pi * rng.random(n)
        pts = (np.outer(0.5 * L * rad * np.cos(phi), u) + np.outer(0.5 * B * rad * np.sin(phi), w)
               + rng.multivariate_normal(np.zeros(2), R, n))
        zbar = pts.mean(axis=0)
        Z = (pts - zbar).T @ (pts - zbar)
        Y = RHO * iw_mean(v, V) + R
        _, _, v, V = update_extent(np.ones(1), np.ones(1), v, V, np.array([n]), np.zeros((1, 2)),
                                   Y / n, Z[None], Y)
        _, _, v, V = predict_extent(np.ones(1), np.ones(1), v, V, np.array([2.5]))
    length, beam, heading = hull_size(float(v[0]), V[0])
    assert length == pytest.approx(L, rel=0.15)
    assert heading == pytest.approx(30.0, abs=5.0)


def test_length_probability() -> None:
    # a confident 300 m hull: surely over 100 m and under 350 m; a wide prior is not sure
    X = np.diag([150.0**2, 20.0**2])
    assert length_probability(200.0, X * 197.0, 100.0, 350.0) > 0.99
    assert length_probability(200.0, X * 197.0, 0.0, 100.0) < 0.01
    p = length_probability(5.0, X * 2.0, 0.0, 300.0)
    assert 0.05 < p < 0.95
    # agrees with an independent sample of scipy's inverse Wishart (reference)
    draws = stats.invwishart(df=5.0, scale=X * 2.0).rvs(size=20000, random_state=7)
    ref = np.mean(2 * np.sqrt(np.linalg.eigvalsh(draws)[:, 1]) <= 300.0)
    assert p == pytest.approx(ref, abs=0.06)


@settings(max_examples=60, deadline=None)
@given(data=st.data(), m=st.integers(1, 25))
def test_partitions_never_drop_or_duplicate_a_plot(data: st.DataObject, m: int) -> None:
    xy = data.draw(st.lists(st.tuples(st.floats(-800, 800), st.floats(-800, 800)),
                            min_size=m, max_size=m))
    z = np.array(xy, float)
    best = np.array(data.draw(st.lists(st.integers(-1, 3), min_size=m, max_size=m)), np.int64)
    book = CellBook(m)
    parts = scan_partitions(z, best, book)
    assert parts[0] == list(range(m))
    keys = set()
    for p in parts:
        plots = sorted(j for c in p for j in book.plots_of(c))
        assert plots == list(range(m))  # each plot exactly once
        keys.add(tuple(p))
    assert len(keys) == len(parts)  # no partition twice


@settings(max_examples=80, deadline=None)
@given(data=st.data(), m=st.integers(0, 30))
def test_close_plot_test_matches_connected_components(data: st.DataObject, m: int) -> None:
    # reference: scipy's connected components of the plots within the widest cell distance
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    from harbourwatch.filter._cells import LADDER_M, has_close_plots

    xy = data.draw(st.lists(st.tuples(st.floats(0, 1500), st.floats(0, 1500)),
                            min_size=m, max_size=m))
    z = np.array(xy, float).reshape(m, 2)
    ref = False
    if m:
        p = cKDTree(z).query_pairs(LADDER_M[-1], output_type="ndarray")
        g = coo_matrix((np.ones(len(p)), (p[:, 0], p[:, 1])), shape=(m, m))
        ref = bool((np.bincount(connected_components(g, directed=False)[1]) >= 3).any())
    assert has_close_plots(z) == ref


def test_tracks_csv_hull_heading_is_degrees_true_against_pyproj_geodesic():
    """``heading_deg`` in tracks.csv is the hull axis in degrees true, not in the local grid.

    Source: pyproj's ``Geod.inv`` (Karney's geodesic on WGS84) gives the true
    azimuth from a hull's centre to a point 200 m along its main axis in the
    local frame; 25 km east and west of the frame's origin at 57.5 N the two
    differ from the grid axis by the meridians' convergence (about 0.3 deg).
    """
    import csv
    import io

    from pyproj import Geod

    from harbourwatch.scene.geodesy import LocalFrame
    from harbourwatch.trajectories import AsSeenTable, Trajectory, TrajectorySet, tracks_csv_text

    frame = LocalFrame(57.5, -30.0)
    geod = Geod(ellps="WGS84")
    axis_grid = 0.0  # main axis along local grid north: V diagonal, larger along north
    trajs = []
    for k, east in enumerate((-25_000.0, 25_000.0)):
        mean = np.array([[east, 0.0, 1000.0, 0.0], [east, 0.0, 1000.0, 0.0]])
        cov = np.broadcast_to(np.eye(4), (2, 4, 4)).copy()
        trajs.append(Trajectory(
            id=f"T{k + 1}", time=np.array([0.0, 10.0]) + 1.7e9, mean=mean, cov=cov,
            filt_mean=mean, filt_cov=cov, pred_mean=mean, pred_cov=cov, existence=1.0,
            extent=(30.0, 3.0, 12.0, 400.0, 0.0, 20_000.0)))
    none = AsSeenTable(time=np.zeros(0), track=np.zeros(0, "<U8"), mean=np.zeros((0, 4)),
                       sd=np.zeros(0), existence=np.zeros(0))
    ts = TrajectorySet(trajectories=tuple(trajs), frame=frame, as_seen=none, feed_start=1.7e9,
                       feed_end=1.7e9 + 10.0)
    rows = list(csv.DictReader(io.StringIO(tracks_csv_text(ts))))
    assert len(rows) == 4
    for row, tr in zip(rows[::2], trajs, strict=True):
        e, n = tr.mean[0, 0], tr.mean[0, 2]
        la0, lo0 = frame.to_wgs84(np.array([e]), np.array([n]))
        ga = np.radians(axis_grid)
        la1, lo1 = frame.to_wgs84(np.array([e + 200.0 * np.sin(ga)]),
                                  np.array([n + 200.0 * np.cos(ga)]))
        az = geod.inv(float(lo0[0]), float(la0[0]), float(lo1[0]), float(la1[0]))[0] % 180.0
        got = float(row["heading_deg"])
        diff = abs((got - az + 90.0) % 180.0 - 90.0)
        assert diff <= 0.06, (got, az)  # one decimal in the file, and the 200 m chord
        assert abs((got - axis_grid + 90.0) % 180.0 - 90.0) > 0.2  # convergence applied
