"""Where the clutter is: a coarse, per-radar map of unexplained plots (storms, rain, sea state).

The configured ``false_plots_per_scan`` spreads clutter uniformly over a
radar's cover. A rain cell or a sea state gives hundreds or thousands of
false plots per scan in one part of it; trusting the uniform rate there
makes each of them a likely new vessel, and the hypotheses explode.

Per radar, the map counts in square cells of :data:`CELL_M` the plots of
each scan that gate with no confirmed hypothesis (existence above 0.5). A
cell is stormy when it held at least :data:`STORM_PLOTS` such plots in this
scan *and* in the radar's previous scan (persistent: a few vessels appearing
together pass in one scan, since their plots gate with their own new
hypotheses in the next), or :data:`BURST_PLOTS` in this scan alone. In a stormy cell the clutter intensity of the scan's
plots is raised to the lower of the two counts over the cell's area (never
lowered below the configured rate). At the level of the whole cover, a radar
whose unexplained plots exceed :data:`SCAN_FACTOR` times its configured
clutter in two scans running gets their count spread over its cover as the
floor of its intensity (a storm over everything). Elsewhere the configured rate is used
unchanged, so ordinary feeds give exactly the results they gave before.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["ClutterMap", "CELL_M", "STORM_PLOTS", "BURST_PLOTS"]

#: Side of a map cell, metres.
CELL_M = 3000.0
#: Unexplained plots per cell and scan from which a cell counts as stormy (9 km²; the
#: configured clutter of a harbour radar gives about 0.1 there).
STORM_PLOTS = 4
#: So many unexplained plots in one cell and scan count as a storm at once (no traffic
#: puts that many unknown vessels into 9 km² in one revolution).
BURST_PLOTS = 30
#: A radar whose unexplained plots exceed this factor times its configured clutter (plus
#: :data:`SCAN_MARGIN`) in two scans running gets their count spread over its cover.
SCAN_FACTOR = 5.0
SCAN_MARGIN = 20.0


class ClutterMap:
    """Counts of unexplained plots per cell of each radar's last scan."""

    def __init__(self) -> None:
        self._last: dict[int, dict[int, int]] = {}
        self._total: dict[int, int] = {}

    @staticmethod
    def _keys(z: NDArray[np.float64]) -> NDArray[np.int64]:
        ij = np.floor(z / CELL_M).astype(np.int64)
        return ij[:, 0] * 1_000_003 + ij[:, 1]

    def intensity(self, sensor: int, z: NDArray[np.float64], unexplained: NDArray[np.bool_],
                  base: float, cover_m2: float) -> float | NDArray[np.float64]:
        """Clutter intensity (per m²) for each plot of this scan; records the scan's counts.

        ``base`` is the configured intensity and ``cover_m2`` the cover's area.
        """
        if z.shape[0] == 0:
            self._last[sensor] = {}
            self._total[sensor] = 0
            return base
        total = int(np.count_nonzero(unexplained))
        before_total = self._total.get(sensor, 0)
        self._total[sensor] = total
        level = base
        expected = base * cover_m2
        if min(total, before_total) > SCAN_FACTOR * expected + SCAN_MARGIN:
            level = max(base, min(total, before_total) / cover_m2)  # the whole cover is stormy
        keys = self._keys(z)
        cells, counts = np.unique(keys[unexplained], return_counts=True)
        now = {int(c): int(k) for c, k in zip(cells, counts, strict=True) if k >= STORM_PLOTS}
        before = self._last.get(sensor, {})
        self._last[sensor] = now
        stormy = {c: min(k, before[c]) if c in before else k for c, k in now.items()
                  if c in before or k >= BURST_PLOTS}
        if not stormy:
            return level
        per_m2 = np.array([stormy.get(int(c), 0) for c in keys], float) / (CELL_M * CELL_M)
        return np.maximum(level, per_m2)
