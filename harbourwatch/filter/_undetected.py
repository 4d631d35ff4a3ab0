"""The Poisson part: vessels present but never detected, as a density on a grid.

New trajectories start at their first plot and the undetected pre-history is
dropped (methods note §D), so the filter only ever needs the undetected
intensity *at a plot*. We therefore keep it as a density per m² that is
uniform inside each cell of a coarse grid over the union of the radar
covers, times a zero-mean velocity prior ``N(0, σ_v² I)``:

* prediction over ``Δt`` (exact solution of ``dD/dt = -D/τ + b``):
  ``D ← D e^{-Δt/τ} + b τ (1 - e^{-Δt/τ})`` with ``b`` the birth rate density
  (arrivals per second per m²: the uniform arrivals over the covers plus the
  extra arrivals of each birth region spread over its cells);
* update by a scan of sensor ``s``: ``D ← (1 - p_D^s) D`` in the cells whose
  centre is inside that sensor's range (the PPP thinning of §1.4);
* a plot ``z`` then sees ``e = p_D D(cell of z)``: the integral of a uniform
  density against ``N(z; Hx, R)`` is the density itself (up to edge effects
  within a few σ of the cover border), and the moment-matched initial state
  is ``[z, 0]`` with covariance ``blockdiag(R, σ_v² I)``.

This replaces a Gaussian-mixture PPP: with births that are uniform over
large covers a mixture needs hundreds of wide components to represent the
same thing, and every plot would have to be scored against all of them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import shapely
from numpy.typing import NDArray

Array = NDArray[np.float64]


#: At most this many cells across one cover: bounds the grid of a very long-range radar.
_MAX_CELLS_ACROSS = 1000


class UndetectedDensity:
    """Undetected-vessel density per m² on a sparse grid of square cells.

    Only the cells whose centre lies inside some radar's cover (and the cells
    of the birth regions within each radar's square ``site ± range``) are
    stored, as sorted flat indices of one global grid: two radars 1000 km
    apart cost what two separate ones cost, not the square between them.
    """

    def __init__(
        self,
        sites: Sequence[tuple[float, float]],
        ranges: Sequence[float],
        *,
        initial_vessels: float,
        arrivals_per_hour: float,
        mean_lifetime_s: float,
        regions: Sequence[tuple[Any, float]] = (),
        cell_m: float | None = None,
    ) -> None:
        sites_a = np.asarray(sites, float).reshape(-1, 2)
        rng_a = np.asarray(ranges, float)
        lo = (sites_a - rng_a[:, None]).min(axis=0)
        hi = (sites_a + rng_a[:, None]).max(axis=0)
        if cell_m is None:
            # about 100 cells across the largest cover, 250-500 m for harbour radars
            cell_m = float(np.clip(2 * rng_a.max() / 100.0, 50.0, 500.0))
            cell_m = max(cell_m, float(2 * rng_a.max() / _MAX_CELLS_ACROSS))
        self.cell = cell_m
        self.origin = lo
        self.shape = (
            max(1, int(math.ceil((hi[0] - lo[0]) / cell_m))),
            max(1, int(math.ceil((hi[1] - lo[1]) / cell_m))),
        )
        nx, ny = self.shape
        squares = []  # per radar: the flat indices and centres of the cells of its square
        cover_keys = []
        for site, r in zip(sites_a, rng_a, strict=True):
            i0 = max(0, int(math.floor((site[0] - r - lo[0]) / cell_m)))
            i1 = min(nx, int(math.ceil((site[0] + r - lo[0]) / cell_m)) + 1)
            j0 = max(0, int(math.floor((site[1] - r - lo[1]) / cell_m)))
            j1 = min(ny, int(math.ceil((site[1] + r - lo[1]) / cell_m)) + 1)
            ii, jj = np.meshgrid(np.arange(i0, i1), np.arange(j0, j1), indexing="ij")
            keys = (ii * ny + jj).ravel()
            ce = lo[0] + (ii.ravel() + 0.5) * cell_m
            cn = lo[1] + (jj.ravel() + 0.5) * cell_m
            squares.append((keys, ce, cn))
            cover_keys.append(keys[np.hypot(ce - site[0], cn - site[1]) <= r])
        region_keys = []
        for poly, _ in regions:
            hits = [k[shapely.contains_xy(poly, e, n)] for k, e, n in squares]
            region_keys.append(np.unique(np.concatenate(hits)))
        self.keys = np.unique(np.concatenate(cover_keys + region_keys))
        kx, ky = np.divmod(self.keys, ny)
        self.centres = np.column_stack([lo[0] + (kx + 0.5) * cell_m, lo[1] + (ky + 0.5) * cell_m])
        self.in_cover = [
            np.hypot(self.centres[:, 0] - s[0], self.centres[:, 1] - s[1]) <= r
            for s, r in zip(sites_a, rng_a, strict=True)
        ]
        union = np.logical_or.reduce(self.in_cover)
        self.union = union
        cell_area = cell_m * cell_m
        area = max(float(union.sum()) * cell_area, cell_area)
        self.tau = float(mean_lifetime_s)
        self.D = np.where(union, initial_vessels / area, 0.0)
        self.birth = np.where(union, arrivals_per_hour / 3600.0 / area, 0.0)
        for (poly, per_hour), rk in zip(regions, region_keys, strict=True):
            inside = np.isin(self.keys, rk)
            if not inside.any():
                p = shapely.get_coordinates(poly.representative_point())[0]
                c = int(self._cells(p[None, :])[0])
                if c < 0:
                    continue  # the region lies outside every cover: no plot can see it
                inside[c] = True
            self.birth[inside] += per_hour / 3600.0 / (inside.sum() * cell_area)
        self.t: float | None = None

    def _cells(self, z: Array) -> NDArray[np.int64]:
        """Index of each position's cell among the stored cells, ``-1`` where none is stored."""
        ij = np.floor((z - self.origin) / self.cell)
        nx, ny = self.shape
        with np.errstate(invalid="ignore"):
            ok = (ij[:, 0] >= 0) & (ij[:, 0] < nx) & (ij[:, 1] >= 0) & (ij[:, 1] < ny)
        ij = np.where(ok[:, None], ij, 0).astype(np.int64)
        flat = ij[:, 0] * ny + ij[:, 1]
        pos = np.minimum(np.searchsorted(self.keys, flat), self.keys.size - 1)
        return np.where(ok & (self.keys[pos] == flat), pos, -1)

    def predict(self, t: float) -> None:
        """Advance the density to time ``t`` (survival and births)."""
        if self.t is not None and t > self.t:
            ps = math.exp(-(t - self.t) / self.tau)
            self.D = self.D * ps + self.birth * (self.tau * (1.0 - ps))
        if self.t is None or t > self.t:
            self.t = t

    def density(self, z: Array) -> Array:
        """Undetected density per m² at each position ``z (m, 2)``."""
        c = self._cells(z)
        return np.where(c >= 0, self.D[np.maximum(c, 0)], 0.0)

    def thin(self, sensor: int, p_detect: float) -> None:
        """Missed-detection thinning by one scan of ``sensor``."""
        mask = self.in_cover[sensor]
        self.D[mask] *= 1.0 - p_detect

    def expected_undetected(self) -> float:
        """Expected number of undetected vessels over the grid."""
        return float(self.D.sum() * self.cell * self.cell)
