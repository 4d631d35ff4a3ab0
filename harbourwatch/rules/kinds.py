"""Rule kinds: what each kind of geofence rule checks, state by state and per episode.

A rule kind is one class registered with :func:`register_kind`. It says

* which parameters it takes (``params``, checked against the rules TOML),
* the per-state condition on a batch of states (``condition``; for pairwise
  kinds ``pair_condition`` on two time-aligned batches), used alike on the
  smoothed mean and on joint samples,
* a relaxed version on the smoothed mean that may hold wherever a sample
  could satisfy the strict one (``candidates``), used to find windows worth
  sampling, and
* which runs of satisfied states count as an episode (``keep``), and how to
  describe one (``describe``).

Episode convention (all kinds): an episode runs from the first state time
satisfying the condition to the last one. Two runs whose satisfying states are
at most :data:`GAP_TOLERANCE_S` apart are one episode (a brief excursion does
not split it). The duration of an episode is ``time[i1] - time[i0]``.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from numpy.typing import NDArray

from harbourwatch.errors import ParameterError
from harbourwatch.io.records import RULE_SCHEMAS, ParamSpec, RuleConfig, RuleSchema
from harbourwatch.io.timefmt import format_clock
from harbourwatch.scene.zones import LocalZone
from harbourwatch.units import KNOT_M_S, fmt_duration

__all__ = [
    "GAP_TOLERANCE_S",
    "NEAR_MISS_SD",
    "RULE_KINDS",
    "RULE_SCHEMAS",
    "Episodes",
    "EpisodeView",
    "RuleKind",
    "find_episodes",
    "register_kind",
]

Array = NDArray[np.float64]
IntArray = NDArray[np.intp]
BoolArray = NDArray[np.bool_]

#: Satisfying states at most this far apart (seconds) belong to one episode:
#: an excursion out of the condition shorter than this does not split it.
GAP_TOLERANCE_S = 30.0
#: Candidate search on the smoothed mean: a state is worth sampling when the
#: condition could hold within this many standard deviations (position sd for
#: zones and distances, speed sd for speed thresholds).
NEAR_MISS_SD = 4.0
#: A draw of a state whose smoothed mean lies farther than this many position
#: sd from a zone's edge is on the mean's side of it (the chance of the
#: opposite is below 1e-11 per draw), so only states nearer the edge are tested
#: draw by draw.
SURE_SD = 7.0

RULE_KINDS: dict[str, type[RuleKind]] = {}


def register_kind(cls: type[RuleKind]) -> type[RuleKind]:
    """Class decorator: make a rule kind known to the rules file and the evaluator."""
    if not cls.kind:
        raise ParameterError(f"{cls.__name__} has no 'kind' name", parameter="kind")
    RULE_KINDS[cls.kind] = cls
    RULE_SCHEMAS[cls.kind] = RuleSchema(
        kind=cls.kind, params=cls.params + SIZE_PARAMS, zone_required=cls.zone_required,
        description=cls.description,
    )
    return cls


#: Optional hull-length limits every rule kind accepts (evaluated with the length's
#: probability: see ``rules.size_probability``).
SIZE_PARAMS = (
    ParamSpec(name="min_length_m", required=False,
              description="the rule applies to vessels at least this long, metres"),
    ParamSpec(name="max_length_m", required=False,
              description="the rule applies to vessels at most this long, metres"),
)


@dataclass(frozen=True)
class Episodes:
    """Episodes found in a batch of condition rows: sample ``row``, indices ``[i0, i1]``."""

    row: IntArray
    i0: IntArray
    i1: IntArray

    def __len__(self) -> int:
        return int(self.row.size)

    def select(self, mask: BoolArray) -> Episodes:
        return Episodes(self.row[mask], self.i0[mask], self.i1[mask])


def find_episodes(cond: BoolArray, time: Array, *, gap_s: float = GAP_TOLERANCE_S) -> Episodes:
    """Runs of ``True`` in each row of ``cond (n, W)``, merged across gaps ``<= gap_s``.

    Examples
    --------
    >>> c = np.array([[1, 1, 0, 1, 0, 0, 0, 1]], bool)
    >>> e = find_episodes(c, np.arange(8) * 10.0, gap_s=20.0)
    >>> e.i0.tolist(), e.i1.tolist()
    ([0, 7], [3, 7])
    """
    cond = np.atleast_2d(np.asarray(cond, bool))
    n, w = cond.shape
    padded = np.zeros((n, w + 2), np.int8)
    padded[:, 1:-1] = cond
    d = np.diff(padded, axis=1)
    rows, starts = np.nonzero(d == 1)
    _, ends = np.nonzero(d == -1)
    ends = ends - 1
    if rows.size == 0:
        z = np.zeros(0, np.intp)
        return Episodes(z, z.copy(), z.copy())
    new = np.ones(rows.size, bool)
    new[1:] = (rows[1:] != rows[:-1]) | (time[starts[1:]] - time[ends[:-1]] > gap_s)
    first = np.flatnonzero(new)
    last = np.r_[first[1:] - 1, rows.size - 1]
    return Episodes(rows[first].astype(np.intp), starts[first].astype(np.intp),
                    ends[last].astype(np.intp))


def speed_of(states: Array) -> Array:
    """Speed over ground (m/s) from the velocity components of ``(..., 4)`` states."""
    return np.hypot(states[..., 1], states[..., 3])


def position_sd_bound(cov: Array) -> Array:
    """``sqrt(var_e + var_n)``: at least the largest principal position sd (m)."""
    return np.sqrt(np.maximum(cov[..., 0, 0] + cov[..., 2, 2], 0.0))


def speed_sd_bound(cov: Array) -> Array:
    """``sqrt(var_ve + var_vn)``: bounds the sd of the speed to first order (m/s)."""
    return np.sqrt(np.maximum(cov[..., 1, 1] + cov[..., 3, 3], 0.0))


@dataclass(frozen=True, kw_only=True)
class EpisodeView:
    """What a kind needs to describe one episode (times and states of the window).

    ``i0``/``i1`` index ``time``/``states`` (the evaluated window);
    ``other_states`` is the second trajectory interpolated onto ``time``.
    """

    track: str
    other_track: str
    time: Array
    states: Array
    other_states: Array | None
    i0: int
    i1: int
    probability: float


def fmt_span(t0: float, t1: float) -> str:
    """``"06:12-06:36 UTC"``; with seconds for spans under five minutes."""
    sec = t1 - t0 < 300.0
    return f"{format_clock(t0, seconds=sec)}-{format_clock(t1, seconds=sec)} UTC"


def fmt_number(x: float) -> str:
    """A parameter as written by a person: ``8`` rather than ``8.0``."""
    return f"{x:g}"


class RuleKind:
    """Base of every rule kind. Subclass, set the class attributes, register.

    Parameters
    ----------
    rule
        The rule as read from the rules file.
    zone
        The rule's zone in the local frame, or ``None`` where it has none.
    """

    kind: ClassVar[str] = ""
    params: ClassVar[tuple[ParamSpec, ...]] = ()
    zone_required: ClassVar[bool] = True
    description: ClassVar[str] = ""
    pairwise: ClassVar[bool] = False

    def __init__(self, rule: RuleConfig, zone: LocalZone | None) -> None:
        self.rule = rule
        self.zone = zone
        self.min_duration_s = 60.0 * self.param("min_duration_min", 0.0)

    def param(self, name: str, default: float | None = None) -> float:
        """A numeric parameter of the rule (``default`` when absent)."""
        v = self.rule.params.get(name, default)
        if v is None:
            raise KeyError(name)
        return float(v)

    @property
    def zone_name(self) -> str:
        return self.zone.name if self.zone is not None else ""

    # -- single-trajectory kinds ------------------------------------------------
    def condition(self, states: Array) -> BoolArray:
        """Strict per-state condition on ``(..., W, 4)`` states -> ``(..., W)``."""
        raise NotImplementedError

    def candidates(self, mean: Array, cov: Array) -> BoolArray:
        """Relaxed condition on the smoothed mean ``(T, 4)``, ``(T, 4, 4)`` -> ``(T,)``."""
        return self.near_zone(mean, cov)

    # -- pairwise kinds ---------------------------------------------------------
    def pair_condition(self, a: Array, b: Array) -> BoolArray:
        """Strict condition on two time-aligned batches of states -> ``(..., W)``."""
        raise NotImplementedError

    def pair_candidates(self, a: Array, a_cov: Array, b: Array, b_cov: Array) -> BoolArray:
        """Relaxed condition on two time-aligned smoothed means -> ``(W,)``."""
        raise NotImplementedError

    # -- shared -----------------------------------------------------------------
    def keep(self, ep: Episodes, time: Array, width: int) -> BoolArray:
        """Which runs count as episodes: by default those lasting ``>= min_duration_s``."""
        return (time[ep.i1] - time[ep.i0]) >= self.min_duration_s

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        """One plain-language line and kind-specific details for one episode."""
        raise NotImplementedError

    _window_hint: tuple[BoolArray, IntArray] | None = None

    @contextmanager
    def sampling_window(self, mean: Array, cov: Array) -> Iterator[None]:
        """Within this block, :meth:`inside` on ``(n, W, 4)`` draws of this window
        tests draw by draw only the states whose mean is near the zone's edge
        (within :data:`SURE_SD` sd); the others take the mean's answer."""
        if self.zone is None:
            yield
            return
        x, y = mean[:, 0], mean[:, 2]
        edge = self.zone.near_edge(x, y, SURE_SD * position_sd_bound(cov) + 1.0)
        self._window_hint = (self.zone.contains(x, y), np.flatnonzero(edge))
        try:
            yield
        finally:
            self._window_hint = None

    def inside(self, states: Array) -> BoolArray:
        """Per-state inside test (everything is inside when the rule has no zone)."""
        if self.zone is None:
            return np.ones(states.shape[:-1], bool)
        hint = self._window_hint
        if hint is not None and states.ndim == 3 and states.shape[1] == hint[0].size:
            out = np.repeat(hint[0][None], states.shape[0], axis=0)
            cols = hint[1]
            if cols.size:
                out[:, cols] = self.zone.contains(states[:, cols, 0], states[:, cols, 2])
            return out
        return self.zone.contains(states[..., 0], states[..., 2])

    def near_zone(self, mean: Array, cov: Array) -> BoolArray:
        """Inside, or within :data:`NEAR_MISS_SD` position sd (+1 m) of the zone."""
        if self.zone is None:
            return np.ones(mean.shape[0], bool)
        margin = NEAR_MISS_SD * position_sd_bound(cov) + 1.0
        return self.zone.near(mean[:, 0], mean[:, 2], margin)

    def entry_exit(self, view: EpisodeView) -> dict[str, Any]:
        s, t = view.states, view.time
        return {
            "entry_time": float(t[view.i0]),
            "entry_xy": (float(s[view.i0, 0]), float(s[view.i0, 2])),
            "exit_time": float(t[view.i1]),
            "exit_xy": (float(s[view.i1, 0]), float(s[view.i1, 2])),
        }


@register_kind
class Loiter(RuleKind):
    """Stayed inside the zone below ``max_speed_kn`` for at least ``min_duration_min``."""

    kind = "loiter"
    params = (
        ParamSpec(name="min_duration_min", description="shortest stay that counts, minutes"),
        ParamSpec(name="max_speed_kn", description="speed below which a vessel loiters, knots"),
    )
    description = "stayed inside the zone at low speed"

    def condition(self, states: Array) -> BoolArray:
        return self.inside(states) & (speed_of(states) < self.param("max_speed_kn") * KNOT_M_S)

    def candidates(self, mean: Array, cov: Array) -> BoolArray:
        vmax = self.param("max_speed_kn") * KNOT_M_S
        slow = speed_of(mean) < vmax + NEAR_MISS_SD * speed_sd_bound(cov)
        return slow & self.near_zone(mean, cov)

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        t0, t1 = float(view.time[view.i0]), float(view.time[view.i1])
        sp = speed_of(view.states[view.i0 : view.i1 + 1])
        text = (
            f"vessel {view.track} stayed {fmt_duration(t1 - t0)} in {self.zone_name} below "
            f"{fmt_number(self.param('max_speed_kn'))} kn, {fmt_span(t0, t1)}, "
            f"probability {view.probability:.2f}"
        )
        return text, {"duration_s": t1 - t0, "max_speed_m_s": float(sp.max())}


@register_kind
class PassThrough(RuleKind):
    """Entered the zone from outside and later left it: one alert per crossing."""

    kind = "pass-through"
    params = ()
    description = "entered the zone and later left it"

    def condition(self, states: Array) -> BoolArray:
        return self.inside(states)

    def keep(self, ep: Episodes, time: Array, width: int) -> BoolArray:
        # outside before (a state precedes the visit) and outside after
        return (ep.i0 > 0) & (ep.i1 < width - 1)

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        d = self.entry_exit(view)
        sec = d["exit_time"] - d["entry_time"] < 300.0
        text = (
            f"vessel {view.track} crossed {self.zone_name}, entered "
            f"{format_clock(d['entry_time'], seconds=sec)} and left "
            f"{format_clock(d['exit_time'], seconds=sec)} UTC, probability {view.probability:.2f}"
        )
        return text, d


@register_kind
class Entry(RuleKind):
    """Was inside the zone at all: one alert per visit."""

    kind = "entry"
    params = ()
    description = "was inside the zone at all"

    def condition(self, states: Array) -> BoolArray:
        return self.inside(states)

    def keep(self, ep: Episodes, time: Array, width: int) -> BoolArray:
        return np.ones(len(ep), bool)

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        d = self.entry_exit(view)
        t0, t1 = d["entry_time"], d["exit_time"]
        text = (
            f"vessel {view.track} was inside {self.zone_name} for {fmt_duration(t1 - t0)}, "
            f"{fmt_span(t0, t1)}, probability {view.probability:.2f}"
        )
        return text, d


@register_kind
class Speed(RuleKind):
    """Faster than ``max_speed_kn`` inside the zone for at least ``min_duration_min``."""

    kind = "speed"
    params = (
        ParamSpec(name="max_speed_kn", description="speed limit in the zone, knots"),
        ParamSpec(name="min_duration_min", required=False,
                  description="shortest excess that counts, minutes (default 0)"),
    )
    description = "went faster than max_speed_kn inside the zone"

    def condition(self, states: Array) -> BoolArray:
        return self.inside(states) & (speed_of(states) > self.param("max_speed_kn") * KNOT_M_S)

    def candidates(self, mean: Array, cov: Array) -> BoolArray:
        vmax = self.param("max_speed_kn") * KNOT_M_S
        fast = speed_of(mean) > vmax - NEAR_MISS_SD * speed_sd_bound(cov)
        return fast & self.near_zone(mean, cov)

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        t0, t1 = float(view.time[view.i0]), float(view.time[view.i1])
        sp = speed_of(view.states[view.i0 : view.i1 + 1])
        k = int(np.argmax(sp))
        vmax_kn = float(sp[k]) / KNOT_M_S
        text = (
            f"vessel {view.track} went up to {vmax_kn:.1f} kn in {self.zone_name} (limit "
            f"{fmt_number(self.param('max_speed_kn'))} kn) for {fmt_duration(t1 - t0)}, "
            f"{fmt_span(t0, t1)}, probability {view.probability:.2f}"
        )
        return text, {
            "duration_s": t1 - t0,
            "max_speed_m_s": float(sp[k]),
            "max_speed_kn": vmax_kn,
            "max_speed_time": float(view.time[view.i0 + k]),
        }


@register_kind
class Rendezvous(RuleKind):
    """Two vessels within ``max_distance_m``, both slow, for ``min_duration_min``."""

    kind = "rendezvous"
    params = (
        ParamSpec(name="max_distance_m", description="separation that counts as a meeting, m"),
        ParamSpec(name="min_duration_min", description="shortest meeting that counts, minutes"),
        ParamSpec(name="max_speed_kn", description="both vessels slower than this, knots"),
    )
    zone_required = False
    description = "two vessels within max_distance_m of each other, both slow"
    pairwise = True

    def pair_condition(self, a: Array, b: Array) -> BoolArray:
        vmax = self.param("max_speed_kn") * KNOT_M_S
        close = np.hypot(a[..., 0] - b[..., 0], a[..., 2] - b[..., 2]) <= self.param(
            "max_distance_m"
        )
        ok = close & (speed_of(a) < vmax) & (speed_of(b) < vmax)
        if self.zone is not None:
            ok &= self.inside(a) & self.inside(b)
        return ok

    def slow_candidates(self, mean: Array, cov: Array) -> BoolArray:
        """Per-trajectory part of the relaxed condition (speed, zone)."""
        vmax = self.param("max_speed_kn") * KNOT_M_S
        slow = speed_of(mean) < vmax + NEAR_MISS_SD * speed_sd_bound(cov)
        return slow & self.near_zone(mean, cov)

    def pair_candidates(self, a: Array, a_cov: Array, b: Array, b_cov: Array) -> BoolArray:
        sd = np.sqrt(position_sd_bound(a_cov) ** 2 + position_sd_bound(b_cov) ** 2)
        dist = np.hypot(a[:, 0] - b[:, 0], a[:, 2] - b[:, 2])
        close = dist <= self.param("max_distance_m") + NEAR_MISS_SD * sd + 1.0
        return close & self.slow_candidates(a, a_cov) & self.slow_candidates(b, b_cov)

    def describe(self, view: EpisodeView) -> tuple[str, Mapping[str, Any]]:
        assert view.other_states is not None
        sl = slice(view.i0, view.i1 + 1)
        a, b = view.states[sl], view.other_states[sl]
        dist = np.hypot(a[:, 0] - b[:, 0], a[:, 2] - b[:, 2])
        k = int(np.argmin(dist))
        t0, t1 = float(view.time[view.i0]), float(view.time[view.i1])
        where = f" in {self.zone_name}" if self.zone is not None else ""
        text = (
            f"vessels {view.track} and {view.other_track} stayed within "
            f"{fmt_number(self.param('max_distance_m'))} m of each other{where} for "
            f"{fmt_duration(t1 - t0)} below {fmt_number(self.param('max_speed_kn'))} kn "
            f"(closest {dist[k]:.0f} m at {format_clock(float(view.time[view.i0 + k]))}), "
            f"{fmt_span(t0, t1)}, probability {view.probability:.2f}"
        )
        return text, {
            "duration_s": t1 - t0,
            "closest_time": float(view.time[view.i0 + k]),
            "min_distance_m": float(dist[k]),
            "closest_xy": (float(a[k, 0]), float(a[k, 2])),
            "other_closest_xy": (float(b[k, 0]), float(b[k, 2])),
        }
