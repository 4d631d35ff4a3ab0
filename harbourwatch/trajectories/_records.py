"""The estimated set of all trajectories: the records and their queries.

A :class:`Trajectory` is one vessel's whole estimated path in the run's local
frame, smoothed with the whole feed, together with what is needed to draw
joint samples of it (filtered and one-step predicted moments per state). A
:class:`TrajectorySet` holds every trajectory of a run plus the estimates as
they could be known at each moment (:class:`AsSeenTable`).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.io.spill import SpillStore
from harbourwatch.models.gaussian import ffbs_sample

__all__ = ["Trajectory", "SpilledTrajectory", "AsSeenTable", "SpilledAsSeenTable", "held",
           "SPILLED_ARRAYS", "AS_SEEN_BLOCK_ROWS"]

Array = NDArray[np.float64]


@dataclass(frozen=True, kw_only=True, eq=False)
class Trajectory:
    """One estimated vessel trajectory (local frame, SI units).

    Attributes
    ----------
    id
        Trajectory id, unique in the run (``"T12"``).
    time
        ``(T,)`` state times, epoch seconds, strictly increasing. A state is
        stamped with its plot's own time where a plot was used, else with
        the scan's reference time.
    mean, cov
        ``(T, 4)``, ``(T, 4, 4)`` smoothed state ``[p_e, v_e, p_n, v_n]``.
    filt_mean, filt_cov, pred_mean, pred_cov
        Filtered moments and one-step predictions to each state time
        (``pred_*[0]`` is a copy of ``filt_*[0]``), for joint sampling.
    existence
        Probability that this trajectory exists (is a vessel, not clutter).
    end_probability
        Probability, given existence, that it ended at the chosen last state
        (for a vessel still present at the end of the feed: that it is alive
        at the last scan).
    alive_at_end
        True when the most likely end time is the feed's last scan that
        covers it, i.e. the vessel is still present.
    plot_ids
        ``(T,)`` row index into the run's plot table of the plot used at
        each state, ``-1`` for a missed detection.
    sensor_ids
        ``(T,)`` sensor index of the scan behind each state.
    extent
        Plot rate and hull extent of an extended vessel at its last state,
        ``(α, β, v, V00, V01, V11)``: rate ``Gam(α, β)``, extent
        ``scipy.stats.invwishart(df=v, scale=V)`` (mean ``V / (v - 3)``);
        ``None`` for a point-like vessel. See :attr:`size`.
    """

    id: str
    time: Array
    mean: Array
    cov: Array
    filt_mean: Array
    filt_cov: Array
    pred_mean: Array
    pred_cov: Array
    existence: float
    end_probability: float = 1.0
    alive_at_end: bool = False
    plot_ids: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, np.int64))
    sensor_ids: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, np.int64))
    extent: tuple[float, ...] | None = None

    @property
    def size(self) -> tuple[float, float, float, float] | None:
        """``(length_m, beam_m, heading_deg, plots_per_scan)``, or None for a point-like vessel.

        For a uniform ellipse of shape ``X`` the semi-axes are the square
        roots of ``X``'s eigenvalues: length ``2 sqrt(λ_max(E[X]))``, beam
        ``2 sqrt(λ_min(E[X]))``; heading is the main axis' direction (degrees
        in the local grid, 0-180; ``tracks.csv`` turns it to degrees true);
        the plot rate is the gamma mean ``α / β``.
        """
        if self.extent is None:
            return None
        from harbourwatch.models.extent import hull_size

        a, b, v, v00, v01, v11 = self.extent
        length, beam, heading = hull_size(v, np.array([[v00, v01], [v01, v11]]))
        return length, beam, heading, a / b

    @property
    def start(self) -> float:
        """Time of the first state (epoch s)."""
        return float(self.time[0])

    @property
    def end(self) -> float:
        """Time of the last state (epoch s)."""
        return float(self.time[-1])

    @property
    def position(self) -> Array:
        """``(T, 2)`` smoothed east/north positions."""
        return self.mean[:, [0, 2]]

    @property
    def velocity(self) -> Array:
        """``(T, 2)`` smoothed east/north velocities."""
        return self.mean[:, [1, 3]]

    @property
    def speed(self) -> Array:
        """``(T,)`` smoothed speed over ground, m/s."""
        return np.hypot(self.mean[:, 1], self.mean[:, 3])

    @property
    def position_sd(self) -> Array:
        """``(T,)`` root of the mean of the two principal position variances, m."""
        return np.sqrt(0.5 * (self.cov[:, 0, 0] + self.cov[:, 2, 2]))

    def sample(self, rng: np.random.Generator, n: int) -> Array:
        """``n`` joint draws of the whole trajectory, shape ``(n, T, 4)`` (FFBS)."""
        return ffbs_sample(
            rng, n, self.time, self.filt_mean, self.filt_cov, self.pred_mean, self.pred_cov
        )


#: Rows of a piece of the as-seen table read at a time (about 8 MB of columns).
AS_SEEN_BLOCK_ROWS = 1 << 16

#: The per-state arrays of a trajectory, in the order a spilled trajectory stores them.
SPILLED_ARRAYS = ("time", "mean", "cov", "filt_mean", "filt_cov", "pred_mean", "pred_cov",
                  "plot_ids", "sensor_ids")


def _spilled(k: int) -> Any:
    def read(self: SpilledTrajectory) -> Any:
        memo = self._memo
        if memo is None:
            return self.store.get(self.key + k)[0]
        a = memo.get(k)
        if a is None:
            a = memo[k] = self.store.get(self.key + k)[0]
        return a

    read.__doc__ = f"``{SPILLED_ARRAYS[k]}``, read back from the spill store."
    return property(read)


class SpilledTrajectory(Trajectory):
    """A :class:`Trajectory` whose per-state arrays live in a :class:`~harbourwatch.io.spill.SpillStore`.

    The filter spills each trajectory it finishes long before the end of the
    feed, so that a long run's memory does not grow with the number of
    trajectories behind it; every array attribute reads the arrays back
    (the store caches the ones read last). The scalars stay in memory. The
    store lives as long as any trajectory that refers to it. The arrays
    are stored one group each (:meth:`~harbourwatch.io.spill.SpillStore.put_each`,
    ``key`` is the first), so a reader of ``mean`` does not read the
    covariances. Same values,
    same behaviour as an in-memory :class:`Trajectory` (but
    ``dataclasses.replace`` needs an in-memory one).
    """

    store: SpillStore
    key: int
    _memo: dict[int, Any] | None

    def __init__(self, *, id: str, store: SpillStore, key: int, existence: float,
                 end_probability: float = 1.0, alive_at_end: bool = False,
                 extent: tuple[float, ...] | None = None) -> None:
        for name, value in (("id", id), ("store", store), ("key", key), ("existence", existence),
                            ("end_probability", end_probability), ("alive_at_end", alive_at_end),
                            ("extent", extent), ("_memo", None)):
            object.__setattr__(self, name, value)

    def __repr__(self) -> str:
        return f"SpilledTrajectory(id={self.id!r}, key={self.key})"

    def held(self) -> SpilledTrajectory:
        """A copy that keeps each array once read (until the copy is dropped).

        For a reader that uses one trajectory's arrays many times in a row
        (every rule over it): the store is read once per array, whatever the
        size of its cache, and nothing stays once the copy is gone.
        """
        copy = SpilledTrajectory(id=self.id, store=self.store, key=self.key,
                                 existence=self.existence, end_probability=self.end_probability,
                                 alive_at_end=self.alive_at_end, extent=self.extent)
        object.__setattr__(copy, "_memo", {})
        return copy

    time = _spilled(0)
    mean = _spilled(1)
    cov = _spilled(2)
    filt_mean = _spilled(3)
    filt_cov = _spilled(4)
    pred_mean = _spilled(5)
    pred_cov = _spilled(6)
    plot_ids = _spilled(7)
    sensor_ids = _spilled(8)


def held(traj: Trajectory) -> Trajectory:
    """``traj``, or for a spilled one a copy that reads each array once (:meth:`SpilledTrajectory.held`).

    For a reader that goes through the trajectories one at a time and uses
    each one's arrays several times.
    """
    return traj.held() if isinstance(traj, SpilledTrajectory) else traj


@dataclass(frozen=True, kw_only=True, eq=False)
class AsSeenTable:
    """Estimates as they could be known when each scan was processed.

    One row per (scan, trajectory): the filtered state of each Bernoulli of
    the best global hypothesis whose existence is above the threshold and
    whose most likely end is the current scan; rows sorted by (time, track).
    Never used by the rules.
    """

    time: Array  # (N,) scan reference time, epoch s
    track: NDArray[np.str_]  # (N,) trajectory id (same ids as the hindsight set where they match)
    mean: Array  # (N, 4)
    sd: Array  # (N,) position sd, m
    existence: Array  # (N,)
    length: Array | None = None  # (N,) hull length as known then, m (NaN: point-like); optional

    @classmethod
    def empty(cls) -> AsSeenTable:
        return cls(
            time=np.zeros(0),
            track=np.zeros(0, dtype="<U16"),
            mean=np.zeros((0, 4)),
            sd=np.zeros(0),
            existence=np.zeros(0),
        )

    @property
    def rows(self) -> int:
        """Number of rows."""
        return int(self.time.size)

    @property
    def sized(self) -> bool:
        """True when some row has a hull length (``as_seen.csv`` then has ``length_m``)."""
        return self.length is not None and bool(np.isfinite(self.length).any())

    def blocks(self, rows: int = AS_SEEN_BLOCK_ROWS) -> Iterator[AsSeenTable]:
        """The table as consecutive pieces of at most ``rows`` rows, in order.

        A reader that goes through the pieces one at a time never needs the
        whole table in memory (see :class:`SpilledAsSeenTable`).
        """
        for r0 in range(0, self.rows, rows):
            sl = slice(r0, r0 + rows)
            yield AsSeenTable(time=self.time[sl], track=self.track[sl], mean=self.mean[sl],
                              sd=self.sd[sl], existence=self.existence[sl],
                              length=None if self.length is None else self.length[sl])


def _seen_column(k: int) -> Any:
    def read(self: SpilledAsSeenTable) -> Any:
        parts = [self._column(key, k) for key in self.keys]
        if parts:
            return np.concatenate(parts)
        return self.names[:0] if k == 1 else np.zeros((0, 4) if k == 2 else 0)

    read.__doc__ = (f"``{_SEEN_NAMES[k]}`` of every row, read back whole from the spill store "
                    "(for small tables and tests; a long run's readers use :meth:`blocks`).")
    return property(read)


_SEEN_NAMES = ("time", "track", "mean", "sd", "existence", "length")


class SpilledAsSeenTable(AsSeenTable):
    """An :class:`AsSeenTable` whose rows live in a :class:`~harbourwatch.io.spill.SpillStore`.

    A day's feed has millions of as-seen rows (about 130 bytes each in
    memory): they are kept on disk as groups of consecutive rows, already in
    the table's order, each group ``(time, code, mean, sd, existence,
    length)`` with ``code`` an ``int32`` index into ``names`` (the track
    ids, sorted). :meth:`blocks` reads one group at a time; the column
    attributes read the whole table (same values as an in-memory table).
    """

    store: SpillStore
    keys: tuple[int, ...]
    names: NDArray[np.str_]
    _rows: int
    _sized: bool

    def __init__(self, *, store: SpillStore, keys: tuple[int, ...], names: NDArray[np.str_],
                 rows: int, sized: bool) -> None:
        for name, value in (("store", store), ("keys", keys), ("names", names),
                            ("_rows", rows), ("_sized", sized)):
            object.__setattr__(self, name, value)

    def __repr__(self) -> str:
        return f"SpilledAsSeenTable(rows={self._rows}, groups={len(self.keys)})"

    def _column(self, key: int, k: int) -> Any:
        a = self.store.get(key)[k]
        return self.names[a] if k == 1 else a

    @property
    def rows(self) -> int:
        return int(self._rows)

    @property
    def sized(self) -> bool:
        return bool(self._sized)

    def blocks(self, rows: int = AS_SEEN_BLOCK_ROWS) -> Iterator[AsSeenTable]:
        for key in self.keys:
            t, code, mean, sd, ex, length = self.store.get(key)
            for r0 in range(0, int(t.size), rows):
                sl = slice(r0, r0 + rows)
                yield AsSeenTable(time=t[sl], track=self.names[code[sl]], mean=mean[sl], sd=sd[sl],
                                  existence=ex[sl], length=length[sl])

    time = _seen_column(0)
    track = _seen_column(1)
    mean = _seen_column(2)
    sd = _seen_column(3)
    existence = _seen_column(4)
    length = _seen_column(5)
