"""The Calder East Quay scenes: large ships near a radar among small craft (invented).

Five large ships (180-340 m) and six small craft around the (invented)
Calder East Quay, one radar about 1.5-2 km from the quay face: a ship that
berths, one that anchors, one that turns in the channel, one that passes and
one that leaves the quay; two launches meet about 80 m apart beside the
berthed hull. The ``-points`` variant is the same scene with every hull
replaced by a point target (length 0), for comparing accuracy; the
``quay-meeting`` scene is the launches' meeting beside the berthed ship
alone, a few minutes long (for tests).
"""

from __future__ import annotations

import json
from collections.abc import Callable

import numpy as np

from harbourwatch.sim.model import Leg, Scenario, ScenarioSpec, SimSensor, VesselPlan
from harbourwatch.sim.scenarios import (
    _FRAME,
    SCENARIOS,
    START_EPOCH_S,
    _go,
    _plan,
    _rect,
    _sensor,
)

__all__ = ["QUAY_RULES", "quay_zones_geojson", "QUAY_SPECS"]

_RADAR = (4000.0, -2500.0)

_ZONES: list[tuple[str, str, str, list[tuple[float, float]]]] = [
    ("east-quay", "Calder East Quay berths", "berth", _rect(3400, -700, 4800, -550)),
    ("quay-approach", "East Quay approach", "harbour", _rect(3400, -1200, 4800, -700)),
    ("east-channel", "East Quay channel", "fairway", _rect(3800, -7000, 5200, -1200)),
    ("east-anchorage", "Calder east anchorage", "anchorage", _rect(5500, -4500, 7000, -3500)),
    ("land-east-quay", "East Quay apron", "land", _rect(3000, -550, 5200, 400)),
]

QUAY_RULES = """\
# Calder East Quay rules (harbourwatch rules contract): rules that know size.

[[rule]]
id = "quay-entry"
kind = "entry"
zone = "east-quay"
min_length_m = 100

[[rule]]
id = "anchor-loiter"
kind = "loiter"
zone = "east-anchorage"
min_duration_min = 10
max_speed_kn = 1.5
min_length_m = 100

[[rule]]
id = "channel-speed"
kind = "speed"
zone = "east-channel"
max_speed_kn = 8.0
min_duration_min = 1
min_length_m = 100

[[rule]]
id = "craft-meeting"
kind = "rendezvous"
zone = "quay-approach"
max_distance_m = 150
min_duration_min = 5
max_speed_kn = 3.0
max_length_m = 60
"""


def quay_zones_geojson() -> str:
    """The East Quay zones as a GeoJSON FeatureCollection (text)."""
    feats = []
    for zid, name, kind, ring in _ZONES:
        e = np.array([p[0] for p in ring] + [ring[0][0]], float)
        n = np.array([p[1] for p in ring] + [ring[0][1]], float)
        lat, lon = _FRAME.to_wgs84(e, n)
        coords = [[round(float(x), 6), round(float(y), 6)] for x, y in zip(lon, lat, strict=True)]
        feats.append({"type": "Feature", "properties": {"id": zid, "name": name, "kind": kind},
                      "geometry": {"type": "Polygon", "coordinates": [coords]}})
    return json.dumps({"type": "FeatureCollection", "features": feats}, indent=1) + "\n"


def _hull(plan: VesselPlan, length_m: float, beam_m: float) -> VesselPlan:
    return VesselPlan(name=plan.name, start_time_s=plan.start_time_s,
                      start_lat_deg=plan.start_lat_deg, start_lon_deg=plan.start_lon_deg,
                      course_deg=plan.course_deg, speed_kn=plan.speed_kn, legs=plan.legs,
                      note=plan.note, length_m=length_m, beam_m=beam_m)


def _launches(t0: float, until_s: float) -> list[VesselPlan]:
    return [
        _hull(_plan("launch-1", t0, 3000, -1500, 60, 5,
                    [_go(4000, -780, 5), Leg.stop(until_s=until_s), _go(3960, -820, 1.5),
                     Leg.speed(6, 40), _go(2500, -2200, 6), Leg.straight()],
                    "meets launch-2 80 m apart beside the berthed ship (craft-meeting: caught)"),
              12.0, 4.0),
        _hull(_plan("launch-2", t0 + 60, 5600, -1700, 300, 5,
                    [_go(4080, -780, 5), Leg.stop(until_s=until_s), _go(4120, -820, 1.5),
                     Leg.speed(6, 40), _go(6500, -1500, 6), Leg.straight()], "meets launch-1 (craft-meeting: caught)"),
              10.0, 3.5),
    ]


def _berthed(t0: float) -> VesselPlan:
    return _hull(_plan("calder-star", t0, 4100, -640, 270, 0, [Leg.stop()],
                       "300 m container ship alongside the quay"), 300.0, 45.0)


def _vessels() -> list[VesselPlan]:
    v = [
        _hull(_plan("calder-star", 0, 4450, -7500, 0, 7,
                    [_go(4450, -1400, 6, 0.5), _go(4400, -640, 3, 0.5), _go(4100, -640, 1.5, 0.5),
                     Leg.stop()],
                    "300 m: up the channel at 6 kn, berths at the quay (quay-entry: caught)"),
              300.0, 45.0),
        _hull(_plan("calder-pearl", 200, 8500, -7500, 320, 8,
                    [_go(6400, -4200, 6, 0.5), Leg.speed(1.0, 120), _go(6250, -4000, 1.0, 0.5),
                     Leg.stop()],
                    "220 m: anchors in the east anchorage (anchor-loiter: caught)"),
              220.0, 32.0),
        _hull(_plan("calder-titan", 500, 4750, -8500, 0, 7,
                    [_go(4750, -3600, 5, 0.5), Leg.turn_by(180, 0.6), _go(4700, -9500, 7, 0.5),
                     _go(4700, -12000, 7, 0.5)],
                    "340 m: turns in the channel, leaves the cover to the south"),
              340.0, 48.0),
        _hull(_plan("calder-fern", 0, -2500, -3300, 90, 7, [_go(11500, -3300, 7, 0.5)],
                    "180 m: passes west to east 0.8 km south of the radar at 7 kn"),
              180.0, 28.0),
        _hull(_plan("calder-oak", 0, 3500, -640, 90, 0,
                    [Leg.stop(until_s=900), Leg.speed(2, 120), _go(3400, -1500, 3, 0.5),
                     _go(3300, -9000, 6, 0.5),
                     _go(3300, -12000, 6, 0.5)],
                    "250 m: leaves the quay at 15 min, heads south out of the cover"),
              250.0, 38.0),
        *_launches(1600, 2800),
        _hull(_plan("pilot-1", 600, 4500, -9000, 0, 14,
                    [_go(4500, -1500, 14), _go(2000, -1200, 10), Leg.straight(300)],
                    "15 m pilot boat at 14 kn in the channel (channel-speed is for ships "
                    "over 100 m: no alert)"), 15.0, 4.5),
        _hull(_plan("tug-1", 0, 2800, -3600, 90, 5,
                    [_go(5400, -3600, 5), _go(5400, -1400, 5), _go(2800, -1400, 5),
                     _go(2800, -3600, 5)] * 2 + [Leg.straight()],
                    "28 m tug on its rounds, 1.1-1.4 km from the radar"), 28.0, 9.0),
        _hull(_plan("fishing-1", 0, 7000, -1500, 180, 3,
                    [_go(7500, -2500, 3), _go(6800, -2800, 3), _go(7200, -1400, 3)] * 2
                    + [Leg.straight()], "18 m trawler east of the quay"), 18.0, 6.0),
        _hull(_plan("leisure-1", 0, 1000, -2000, 200, 4,
                    [_go(0, -4500, 4), _go(1500, -5000, 4), _go(1200, -1800, 4), Leg.straight()],
                    "10 m yacht west of the channel"), 10.0, 3.0),
    ]
    return v


def _sensor_cfg() -> SimSensor:
    cfg = _sensor("quay-radar", *_RADAR, scan_period_s=2.5, range_sigma_m=15.0,
                  bearing_sigma_deg=0.4, detection_probability=0.9, false_plots_per_scan=6.0,
                  max_range_m=8000.0)
    return SimSensor(config=cfg)


def _as_points(vessels: list[VesselPlan]) -> list[VesselPlan]:
    return [_hull(p, 0.0, 0.0) for p in vessels]


def _build(points: bool, name: str) -> Callable[[int, float | None], Scenario]:
    def build(seed: int, duration_s: float | None) -> Scenario:
        v = _vessels()
        return Scenario(name=name, start_epoch_s=START_EPOCH_S,
                        duration_s=3600.0 if duration_s is None else duration_s,
                        sensors=(_sensor_cfg(),), vessels=tuple(_as_points(v) if points else v),
                        zones_geojson=quay_zones_geojson(), rules_toml=QUAY_RULES)
    return build


def _meeting(seed: int, duration_s: float | None) -> Scenario:
    dur = 540.0 if duration_s is None else duration_s
    v = [_berthed(-60.0), *_launches(-700.0, 500.0)]
    return Scenario(name="quay-meeting", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=(_sensor_cfg(),), vessels=tuple(v),
                    zones_geojson=quay_zones_geojson(), rules_toml=QUAY_RULES)


#: (name, build, seed, duration, description) of the East Quay scenes.
QUAY_SPECS: tuple[tuple[str, Callable[[int, float | None], Scenario], int, float, str], ...] = (
    ("quay", _build(False, "quay"), 11, 3600.0,
     "Calder East Quay, 1 h, one radar, five ships of 180-340 m (several plots per scan) "
     "and six small craft; berthing, anchoring, turning, two launches meeting beside a hull"),
    ("quay-points", _build(True, "quay-points"), 11, 3600.0,
     "the quay scene with every hull replaced by a point target (for comparison)"),
    ("quay-meeting", _meeting, 11, 540.0,
     "9 min: two launches meet 80 m apart beside a berthed 300 m ship"),
)

# registered with the built-in scenarios (``harbourwatch.sim`` imports this module)
for _name, _build_fn, _seed, _dur, _text in QUAY_SPECS:
    SCENARIOS[_name] = ScenarioSpec(name=_name, build=_build_fn, default_seed=_seed,
                                    default_duration_s=_dur, description=_text)
