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


class UndetectedDensity:
    """Undetected-vessel density per m² on a grid of square cells."""

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
        self.cell = cell_m
        self.origin = lo
        self.shape = (
            max(1, int(math.ceil((hi[0] - lo[0]) / cell_m))),
            max(1, int(math.ceil((hi[1] - lo[1]) / cell_m))),
        )
        nx, ny = self.shape
        ce = lo[0] + (np.arange(nx) + 0.5) * cell_m
        cn = lo[1] + (np.arange(ny) + 0.5) * cell_m
        E, N = np.meshgrid(ce, cn, indexing="ij")
        self.centres = np.column_stack([E.ravel(), N.ravel()])
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
        for poly, per_hour in regions:
            inside = shapely.contains_xy(poly, self.centres[:, 0], self.centres[:, 1])
            if not inside.any():
                p = shapely.get_coordinates(poly.representative_point())[0]
                inside = np.zeros(union.size, bool)
                inside[self._cells(p[None, :])[0]] = True
            self.birth[inside] += per_hour / 3600.0 / (inside.sum() * cell_area)
        self.t: float | None = None

    def _cells(self, z: Array) -> NDArray[np.int64]:
        """Flat cell index of each position, ``-1`` outside the grid."""
        ij = np.floor((z - self.origin) / self.cell).astype(np.int64)
        nx, ny = self.shape
        ok = (ij[:, 0] >= 0) & (ij[:, 0] < nx) & (ij[:, 1] >= 0) & (ij[:, 1] < ny)
        return np.where(ok, ij[:, 0] * ny + ij[:, 1], -1)

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
