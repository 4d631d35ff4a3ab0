"""LocalFrame against pyproj's Geod (Karney's geodesics on WGS84) as the named reference.

Reference: ``pyproj.Geod(ellps="WGS84")`` — C. F. F. Karney, "Algorithms for
geodesics", J. Geodesy 87:43-55, 2013, as implemented in PROJ's geodesic
library. It is independent of the projection pipeline LocalFrame uses.

Theory of the bound (sphere of radius R, then checked numerically on the
ellipsoid): the azimuthal equidistant projection keeps radial distances from
the centre exact; the scale across the radius at distance r is
k = (r/R) / sin(r/R) = 1 + (r/R)^2 / 6 + O((r/R)^4) >= 1. A segment between
two points within r of the centre is therefore stretched by at most
(r/R)^2 / 6 of its length. At r = 25 km with R = 6.383e6 m (the meridian
radius of curvature at 57.5 N, the smaller of the two principal radii there)
that is 2.558e-6, i.e. at most 0.128 m over the longest possible pair (50 km).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from harbourwatch.scene.geodesy import WGS84_GEOD, LocalFrame

GEOD = WGS84_GEOD
R_COVER_M = 25_000.0
CENTRES = [(57.5, -30.0), (0.0, 0.0), (-45.2, 170.3), (70.0, 179.9)]


def _meridian_radius(lat_deg: float) -> float:
    # WGS84 a and f (NIMA TR8350.2, from memory); M = a(1-e^2)/(1-e^2 sin^2 phi)^1.5
    a, f = 6378137.0, 1.0 / 298.257223563
    e2 = f * (2.0 - f)
    s = math.sin(math.radians(lat_deg))
    return a * (1.0 - e2) / (1.0 - e2 * s * s) ** 1.5


def _bound_rel(lat_deg: float, r_m: float = R_COVER_M) -> float:
    """(r/R)^2/6 with the smaller principal radius at the centre latitude."""
    return (r_m / _meridian_radius(lat_deg)) ** 2 / 6.0


def _points(rng: np.random.Generator, lat0: float, lon0: float, n: int, r_max: float = R_COVER_M
            ) -> tuple[np.ndarray, np.ndarray]:
    az = rng.uniform(0.0, 360.0, n)
    r = r_max * np.sqrt(rng.uniform(0.0, 1.0, n))
    lon, lat, _ = GEOD.fwd(np.full(n, lon0), np.full(n, lat0), az, r)
    return np.asarray(lat), np.asarray(lon)


def test_bound_value_at_port_calder() -> None:
    # the number written in geodesy.py's docstring
    assert _bound_rel(57.5) == pytest.approx(2.558e-6, rel=1e-3)
    assert 2 * R_COVER_M * _bound_rel(57.5) < 0.13


@pytest.mark.parametrize(("lat0", "lon0"), CENTRES)
def test_pair_distances_within_bound(rng: np.random.Generator, lat0: float, lon0: float) -> None:
    f = LocalFrame(lat0, lon0)
    n = 20_000
    la1, lo1 = _points(rng, lat0, lon0, n)
    la2, lo2 = _points(rng, lat0, lon0, n)
    e1, n1 = f.to_local(la1, lo1)
    e2, n2 = f.to_local(la2, lo2)
    d_frame = np.hypot(e2 - e1, n2 - n1)
    _, _, d_geod = GEOD.inv(lo1, la1, lo2, la2)  # reference: Karney geodesic distance
    err = d_frame - np.asarray(d_geod)
    # aeqd never shrinks (scale >= 1) and stretches by at most (r/R)^2/6
    assert err.min() > -1e-6
    assert np.all(err <= _bound_rel(lat0) * np.asarray(d_geod) * 1.02 + 1e-6)
    assert np.abs(err).max() < 0.13


def test_bound_is_tight_for_short_tangential_steps(rng: np.random.Generator) -> None:
    # across the radius at r = 25 km the scale excess reaches (r/R)^2/6
    lat0, lon0 = 57.5, -30.0
    f = LocalFrame(lat0, lon0)
    n = 500
    az = rng.uniform(0.0, 360.0, n)
    lon, lat, _ = GEOD.fwd(np.full(n, lon0), np.full(n, lat0), az, np.full(n, R_COVER_M))
    lon2, lat2, _ = GEOD.fwd(lon, lat, az + 90.0, np.full(n, 10.0))
    e1, n1 = f.to_local(lat, lon)
    e2, n2 = f.to_local(lat2, lon2)
    rel = (np.hypot(e2 - e1, n2 - n1) - 10.0) / 10.0
    b = _bound_rel(lat0)
    assert rel.max() <= b * 1.001
    assert rel.min() >= 0.99 * b  # R varies with azimuth between M and N: about 0.4 %


@pytest.mark.parametrize(("lat0", "lon0"), CENTRES)
def test_distance_and_azimuth_from_centre_exact(rng: np.random.Generator, lat0: float,
                                                lon0: float) -> None:
    f = LocalFrame(lat0, lon0)
    n = 5_000
    az = rng.uniform(0.0, 360.0, n)
    r = rng.uniform(1.0, 2 * R_COVER_M, n)
    lon, lat, _ = GEOD.fwd(np.full(n, lon0), np.full(n, lat0), az, r)  # reference geodesic
    e, nn = f.to_local(lat, lon)
    assert np.abs(np.hypot(e, nn) - r).max() < 1e-3
    grid_az = np.degrees(np.arctan2(e, nn))
    diff = (grid_az - az + 180.0) % 360.0 - 180.0
    # the grid azimuth from the centre equals the geodesic's azimuth at the centre
    assert np.abs(np.radians(diff) * r).max() < 1e-3


_FRAMES = {c: LocalFrame(*c) for c in CENTRES}


@settings(max_examples=200, deadline=None)
@given(
    centre=st.sampled_from(CENTRES),
    east=st.floats(-R_COVER_M, R_COVER_M),
    north=st.floats(-R_COVER_M, R_COVER_M),
)
def test_round_trip(centre: tuple[float, float], east: float, north: float) -> None:
    f = _FRAMES[centre]
    lat, lon = f.to_wgs84([east], [north])
    e2, n2 = f.to_local(lat, lon)
    # PROJ's aeqd snaps points closer than 1e-10 rad (about 0.64 mm) to the
    # centre onto it; everywhere else the round trip is below a micrometre
    tol = 1e-6 if math.hypot(east, north) > 1e-3 else 1e-3
    assert math.hypot(float(e2[0]) - east, float(n2[0]) - north) < tol
    # and the other way, measured on the ellipsoid with the reference
    lat2, lon2 = f.to_wgs84(e2, n2)
    _, _, d = GEOD.inv(lon, lat, lon2, lat2)
    assert float(np.max(d)) < 1e-6


def test_round_trip_random_centres(rng: np.random.Generator) -> None:
    for _ in range(8):
        f = LocalFrame(float(rng.uniform(-80, 80)), float(rng.uniform(-180, 180)))
        e = rng.uniform(-R_COVER_M, R_COVER_M, 2000)
        n = rng.uniform(-R_COVER_M, R_COVER_M, 2000)
        e2, n2 = f.to_local(*f.to_wgs84(e, n))
        assert np.hypot(e2 - e, n2 - n).max() < 1e-6


@pytest.mark.parametrize(("lat0", "lon0"), CENTRES)
def test_grid_convergence_against_geodesic_azimuth(rng: np.random.Generator, lat0: float,
                                                   lon0: float) -> None:
    f = LocalFrame(lat0, lon0)
    n = 300
    e = rng.uniform(-R_COVER_M, R_COVER_M, n)
    nn = rng.uniform(-R_COVER_M, R_COVER_M, n)
    grid_course = rng.uniform(0.0, 2 * math.pi, n)
    conv = f.grid_convergence_rad(e, nn)
    step = 5.0
    lat1, lon1 = f.to_wgs84(e, nn)
    lat2, lon2 = f.to_wgs84(e + step * np.sin(grid_course), nn + step * np.cos(grid_course))
    az, _, _ = GEOD.inv(lon1, lat1, lon2, lat2)  # reference: geodesic azimuth of a short step
    true_course = grid_course + conv
    diff = (np.radians(az) - true_course + math.pi) % (2 * math.pi) - math.pi
    # aeqd is not conformal: a course other than north is turned by up to the
    # maximum angular distortion, about 2 (k - 1) = 2 (r/R)^2/6 at distance r
    r = np.hypot(e, nn)
    tol = 2.0 * (r / _meridian_radius(lat0)) ** 2 / 6.0 * 1.05 + 1e-8
    assert np.all(np.abs(diff) <= tol)
    # exact for true north: a short northward geodesic step has grid course -conv
    lon3, lat3, _ = GEOD.fwd(lon1, lat1, np.zeros(n), np.full(n, step))
    e3, n3 = f.to_local(lat3, lon3)
    grid_north_course = np.arctan2(e3 - e, n3 - nn)
    assert np.abs(grid_north_course + conv).max() < 1e-7
    # and it is not trivially zero away from the centre at high latitude
    if abs(lat0) > 30:
        assert np.abs(conv).max() > 1e-3
