"""The built-in scenarios: Port Calder (demo) and small test and benchmark scenes.

Port Calder on Calder Sound is invented and placed in the open North
Atlantic (about 57.5 N, 30.0 W) so that it cannot be taken for a real
harbour. Its geometry is laid out in metres east/north of a harbour origin
and converted to WGS84 with the azimuthal equidistant :class:`LocalFrame`.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable

import numpy as np

from harbourwatch.io.records import SensorConfig
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.sim.engine import arpa_sigmas
from harbourwatch.sim.model import Leg, Scenario, ScenarioSpec, SimSensor, VesselPlan

__all__ = ["SCENARIOS", "PORT_CALDER_ORIGIN", "port_calder_zones_geojson", "PORT_CALDER_RULES"]

#: Harbour origin of Port Calder (invented, mid-ocean).
PORT_CALDER_ORIGIN = (57.5, -30.0)
#: Feed start of the built-in scenarios: 2026-05-04T06:00:00Z.
START_EPOCH_S = 1777874400.0

_FRAME = LocalFrame(*PORT_CALDER_ORIGIN)


def _ll(e: float, n: float) -> tuple[float, float]:
    lat, lon = _FRAME.to_wgs84([e], [n])
    return float(lat[0]), float(lon[0])


def _go(e: float, n: float, kn: float | None = None, rate: float = 3.0) -> Leg:
    lat, lon = _ll(e, n)
    return Leg.goto(lat, lon, kn, rate_deg_s=rate)


def _plan(name: str, t0: float, e: float, n: float, course: float, kn: float,
          legs: list[Leg], note: str = "") -> VesselPlan:
    lat, lon = _ll(e, n)
    return VesselPlan(name=name, start_time_s=t0, start_lat_deg=lat, start_lon_deg=lon,
                      course_deg=course, speed_kn=kn, legs=tuple(legs), note=note)


def _sensor(sid: str, e: float, n: float, **kw: float) -> SensorConfig:
    lat, lon = _ll(e, n)
    return SensorConfig(id=sid, lat_deg=round(lat, 6), lon_deg=round(lon, 6), **kw)


# --------------------------------------------------------------------------- Port Calder

# Polygons in metres east/north of the origin (exterior rings, counter-clockwise).
_LAND_MAIN: list[tuple[float, float]] = [(-20000, 4800), (-9000, 3000), (-5600, 2200), (-4600, 1300), (-3800, 1250),
              (-2600, 900), (-1600, 300), (-1500, 30), (-1500, 1250), (1500, 1250), (1500, 0),
              (2200, -10), (3200, -10), (4500, 300), (7000, 900), (20000, 3000),
              (20000, 16000), (-20000, 16000)]
_LAND_MOLE: list[tuple[float, float]] = [(-1520, -30), (900, -30), (900, 30), (-1520, 30)]
_LAND_ISLAND: list[tuple[float, float]] = [(5950, -4300), (6050, -5300), (5900, -6400), (6800, -7900), (9500, -8200),
                (11500, -6500), (11000, -3800), (8500, -2600), (6000, -3200)]


def _rect(e0: float, n0: float, e1: float, n1: float) -> list[tuple[float, float]]:
    return [(e0, n0), (e1, n0), (e1, n1), (e0, n1)]


_ZONES: list[tuple[str, str, str, list[tuple[float, float]]]] = [
    ("inner-basin", "Calder inner basin", "anchorage", _rect(-1460, 60, 1460, 1210)),
    ("fairway", "Calder fairway", "fairway", _rect(1000, -5000, 1400, 200)),
    ("naval-berth", "Calder naval berth", "restricted", _rect(2300, -300, 3100, -15)),
    ("range-area", "Sound exercise range", "restricted", _rect(-9000, -8000, -4500, -4000)),
    ("outer-roads", "Calder outer roads", "anchorage", _rect(-500, -9500, 5000, -5600)),
    ("land-mainland", "Calder mainland", "land", _LAND_MAIN),
    ("land-mole", "Calder mole", "land", _LAND_MOLE),
    ("land-ness-island", "Ness Island", "land", _LAND_ISLAND),
]


def port_calder_zones_geojson() -> str:
    """The Port Calder zones and land as a GeoJSON FeatureCollection (text)."""
    feats = []
    for zid, name, kind, ring in _ZONES:
        e = np.array([p[0] for p in ring] + [ring[0][0]], float)
        n = np.array([p[1] for p in ring] + [ring[0][1]], float)
        lat, lon = _FRAME.to_wgs84(e, n)
        coords = [[round(float(x), 6), round(float(y), 6)] for x, y in zip(lon, lat, strict=True)]
        feats.append({"type": "Feature",
                      "properties": {"id": zid, "name": name, "kind": kind},
                      "geometry": {"type": "Polygon", "coordinates": [coords]}})
    return json.dumps({"type": "FeatureCollection", "features": feats}, indent=1) + "\n"


PORT_CALDER_RULES = """\
# Port Calder demo rules (harbourwatch rules contract).

[[rule]]
id = "basin-loiter"
kind = "loiter"
zone = "inner-basin"
min_duration_min = 15
max_speed_kn = 1.5

[[rule]]
id = "range-crossing"
kind = "pass-through"
zone = "range-area"

[[rule]]
id = "berth-entry"
kind = "entry"
zone = "naval-berth"

[[rule]]
id = "fairway-speed"
kind = "speed"
zone = "fairway"
max_speed_kn = 8.0
min_duration_min = 1

[[rule]]
id = "roads-meeting"
kind = "rendezvous"
zone = "outer-roads"
max_distance_m = 150
min_duration_min = 10
max_speed_kn = 3.0
"""

# fairway lanes: southbound e = 1300, northbound e = 1100
_S, _N = 1300.0, 1100.0
_TERMINAL = (-700.0, 800.0)
_LANDING = (5850.0, -5300.0)
_MARINA = (-1200.0, 350.0)
_PILOTS = (1250.0, 500.0)


def _demo_vessels() -> list[VesselPlan]:
    v: list[VesselPlan] = []
    # --- ferries across the sound (7 kn or less in the fairway, 12 kn outside)
    out_ferry = [_go(0, 500, 6), _go(_S, 100, 7), _go(_S, -5200, 7), Leg.speed(12, 60),
                 _go(*_LANDING, 12)]
    v.append(_plan("ferry-1", 120, *_TERMINAL, 90, 0, out_ferry,
                   "departs the terminal, 7 kn in the fairway (fairway-speed near miss)"))
    v.append(_plan("ferry-3", 3900, *_TERMINAL, 90, 0, out_ferry, "second sailing, still out at the end"))
    in_ferry = [_go(1500, -5250, 12), Leg.speed(6.5, 40), _go(_N, -4900, 6.5), _go(_N, 250, 6.5),
                _go(*_TERMINAL, 5)]
    v.append(_plan("ferry-2", 600, *_LANDING, 270, 0, in_ferry, "crosses from Ness Island, berths"))
    v.append(_plan("ferry-4", 3300, *_LANDING, 270, 0, in_ferry, "crossing at the end of the feed"))
    # --- pilot boats
    v.append(_plan("pilot-1", 2700, *_PILOTS, 180, 0,
                   [_go(_S, 100, 6), _go(_S, -600, 7), Leg.speed(12, 20), Leg.straight(240),
                    Leg.speed(7, 20), _go(_S, -5000, 7), _go(8000, -13000, 15)],
                   "12 kn in the fairway for 4 min (fairway-speed: caught), leaves the cover"))
    v.append(_plan("pilot-2", 1500, 4000, -11000, 330, 14,
                   [_go(_N, -5400, 14), Leg.speed(6.5, 30), _go(_N, 200, 6.5), _go(*_PILOTS, 4)],
                   "returns from sea, 6.5 kn in the fairway, berths"))
    # --- basin loiterers
    v.append(_plan("fishing-1", 300, _N, -2500, 0, 6,
                   [_go(_N, 300, 6), _go(0, 700, 4), Leg.speed(0.8, 60), _go(-400, 760, 0.8),
                    _go(-300, 980, 0.8), _go(0, 1150, 3)],
                   "drifts ~24 min below 1.5 kn in the inner basin (basin-loiter: caught)"))
    v.append(_plan("leisure-1", 600, *_MARINA, 80, 1.0,
                   [_go(-950, 380, 1.0), _go(1200, 400, 5), _go(_S, -300, 5), _go(_S, -3500, 6.5),
                    _go(-3800, -3500, 6.5), _go(-3800, -16000, 6.5)],
                   "only ~8 min slow in the inner basin (basin-loiter near miss), leaves the cover"))
    # --- exercise range
    v.append(_plan("fishing-2", 900, -11000, -6000, 90, 8,
                   [_go(-3000, -6000, 8), _go(-3000, -16000, 8)],
                   "crosses the exercise range (range-crossing: caught), leaves the cover"))
    v.append(_plan("leisure-2", -200, -10000, -3900, 90, 6,
                   [_go(-3800, -3900, 6), _go(-2700, 700, 6)],
                   "skirts 100 m north of the exercise range (range-crossing near miss), berths"))
    # --- outer roads: a meeting and a passing
    v.append(_plan("fishing-3", 1000, -2000, -9200, 60, 6,
                   [_go(1000, -7500, 6), Leg.stop(until_s=2200), _go(1463, -7500, 1.0),
                    _go(1400, -7100, 6), _go(-2500, -7000, 6), _go(-2500, -16000, 6)],
                   "meets leisure-3 ~100 m apart for ~15 min (roads-meeting: caught)"))
    v.append(_plan("leisure-3", 900, 4500, -9000, 290, 6,
                   [_go(1000, -7600, 6), Leg.stop(until_s=2200), _go(1463, -7600, 1.0),
                    _go(4500, -12500, 6), Leg.straight()],
                   "meets fishing-3 (roads-meeting: caught)"))
    v.append(_plan("fishing-4", 2300, 0, -8700, 90, 2,
                   [_go(3000, -8700, 2), _go(4500, -10500, 2), Leg.straight()],
                   "passes fishing-5 300 m apart at 2 kn (roads-meeting near miss)"))
    v.append(_plan("fishing-5", 2300, 3000, -8400, 270, 2,
                   [_go(0, -8400, 2), _go(-1500, -10500, 2), Leg.straight()],
                   "passes fishing-4 300 m apart (roads-meeting near miss)"))
    v.append(_plan("tanker-1", 0, 9000, -14000, 315, 8,
                   [_go(4000, -8600, 8), Leg.speed(2, 180), _go(3500, -8000, 2), Leg.stop()],
                   "enters the cover, anchors in the outer roads"))
    # --- naval berth
    v.append(_plan("leisure-4", 3000, *_MARINA, 80, 5,
                   [_go(1200, 300, 5), _go(_S, -500, 5), _go(2700, -150, 4), Leg.stop(60),
                    _go(2000, -1500, 5), _go(-1000, -3000, 5), Leg.straight()],
                   "enters the naval berth (berth-entry: caught)"))
    v.append(_plan("leisure-5", 1200, 4500, -450, 270, 5,
                   [_go(1700, -450, 5), _go(1200, 300, 5), _go(900, 1100, 4)],
                   "passes 150 m south of the naval berth (berth-entry near miss), berths"))
    # --- other traffic
    patrol = [_go(-2500, -1800, 10), _go(-7000, -2800, 10)] * 4
    v.append(_plan("patrol-1", -300, -6000, -1500, 100, 10, patrol + [Leg.straight()],
                   "patrols the west sound"))
    v.append(_plan("fishing-6", -900, -8000, -1000, 70, 3,
                   [_go(-6000, -500, 3), _go(-8000, -2000, 3), _go(-10000, -600, 3),
                    _go(-8000, -1000, 3), Leg.straight()], "trawls the west sound"))
    v.append(_plan("fishing-7", 0, -2000, -15000, 0, 8,
                   [_go(-2000, -4500, 8), _go(_N, -5100, 6.5), _go(_N, 200, 6.5), _go(300, 1150, 4)],
                   "enters the cover from the south, berths at the fish quay"))
    v.append(_plan("fishing-8", -600, 7000, -2000, 80, 5, [_go(17000, -1000, 5)],
                   "present at the start, leaves the cover to the east"))
    v.append(_plan("fishing-9", -1200, -6000, -11000, 100, 3,
                   [_go(0, -12000, 3), _go(-6000, -11500, 3), Leg.straight()], "trawls off the range"))
    v.append(_plan("fishing-10", 0, 5000, -12500, 95, 3,
                   [_go(9000, -12800, 3), _go(5000, -13000, 3), Leg.straight()], "trawls south"))
    tacks = [_go(4800, -2200, 4.5), _go(2300, -3200, 4.5)] * 4
    v.append(_plan("leisure-6", -100, 2300, -1800, 120, 4.5, tacks + [Leg.straight()],
                   "yacht tacking east of the fairway"))
    v.append(_plan("leisure-7", 1500, 4800, -3800, 290, 4.0,
                   [_go(2600, -2600, 4), _go(4700, -1400, 4)] * 3 + [Leg.straight()],
                   "yacht tacking east of the fairway"))
    v.append(_plan("leisure-8", 1000, -2700, 700, 200, 10,
                   [_go(-6000, -800, 20), _go(-19000, -2000, 20)],
                   "fast launch leaving the cover to the west"))
    v.append(_plan("tender-1", -500, 4500, -300, 75, 6,
                   [_go(7000, 300, 6), _go(15000, 1600, 6), _go(17000, 1800, 6)],
                   "buoy tender along the east coast, leaves the cover"))
    return v


def _demo(seed: int, duration_s: float | None) -> Scenario:
    common = dict(range_sigma_m=15.0, bearing_sigma_deg=0.4, detection_probability=0.9,
                  false_plots_per_scan=6.0, max_range_m=14000.0)
    sensors = (
        SimSensor(config=_sensor("calder-head", -4200, 1700, scan_period_s=2.5, **common)),
        SimSensor(config=_sensor("mole-light", 870, 0, scan_period_s=3.0, **common)),
    )
    return Scenario(name="demo", start_epoch_s=START_EPOCH_S,
                    duration_s=5400.0 if duration_s is None else duration_s,
                    sensors=sensors, vessels=tuple(_demo_vessels()),
                    zones_geojson=port_calder_zones_geojson(), rules_toml=PORT_CALDER_RULES)


# --------------------------------------------------------------------------- small scenes


def _open_sea_sensor(sid: str, e: float, n: float, **kw: float) -> SensorConfig:
    base = dict(scan_period_s=2.5, range_sigma_m=15.0, bearing_sigma_deg=0.4,
                detection_probability=0.9, false_plots_per_scan=6.0, max_range_m=14000.0)
    base.update(kw)
    return _sensor(sid, e, n, **base)


def _quiet(seed: int, duration_s: float | None) -> Scenario:
    s = _open_sea_sensor("calder-head", -4200, 1700, false_plots_per_scan=1.0)
    vessels = [
        _plan("quiet-1", 0, -6000, -3000, 90, 8, [Leg.straight()]),
        _plan("quiet-2", 0, 2000, -9000, 0, 6, [Leg.straight(600), Leg.turn_by(90, 2),
                                                 Leg.straight()]),
        _plan("quiet-3", 120, -9000, -8000, 45, 10, [Leg.straight()]),
        _plan("quiet-4", 0, 3000, -2000, 200, 4, [Leg.straight(900), Leg.stop()]),
    ]
    return Scenario(name="quiet", start_epoch_s=START_EPOCH_S,
                    duration_s=1800.0 if duration_s is None else duration_s,
                    sensors=(SimSensor(config=s),), vessels=tuple(vessels))


def _crossing(angle_deg: float, name: str) -> Callable[[int, float | None], Scenario]:
    def build(seed: int, duration_s: float | None) -> Scenario:
        dur = 1200.0 if duration_s is None else duration_s
        s = _open_sea_sensor("mole-light", 870, 0)
        speed = 8.0 * 1852.0 / 3600.0
        half = dur / 2.0
        cross = (0.0, -5000.0)
        vessels = []
        for i, course in enumerate((90.0, 90.0 + angle_deg)):
            c = math.radians(course)
            e0 = cross[0] - math.sin(c) * speed * half
            n0 = cross[1] - math.cos(c) * speed * half
            vessels.append(_plan(f"{name}-{i + 1}", 0, e0, n0, course, 8.0, [Leg.straight()]))
        return Scenario(name=name, start_epoch_s=START_EPOCH_S, duration_s=dur,
                        sensors=(SimSensor(config=s),), vessels=tuple(vessels))
    return build


def _parallel(seed: int, duration_s: float | None) -> Scenario:
    dur = 1200.0 if duration_s is None else duration_s
    s = _open_sea_sensor("mole-light", 870, 0)
    vessels = [_plan("parallel-1", 0, -4000, -5000, 90, 6, [Leg.straight()]),
               _plan("parallel-2", 0, -4000, -5120, 90, 6, [Leg.straight()])]
    return Scenario(name="parallel120", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=(SimSensor(config=s),), vessels=tuple(vessels))


def _outage(seed: int, duration_s: float | None) -> Scenario:
    dur = 1800.0 if duration_s is None else duration_s
    a = _open_sea_sensor("calder-head", -4200, 1700)
    b = _open_sea_sensor("mole-light", 870, 0, scan_period_s=3.0)
    mid = dur / 2.0
    sensors = (SimSensor(config=a), SimSensor(config=b, outages_s=((mid - 300.0, mid + 300.0),)))
    vessels = [_plan("outage-1", 0, -5000, -4000, 80, 7, [Leg.straight()]),
               _plan("outage-2", 0, 3000, -9000, 340, 5, [Leg.straight()]),
               _plan("outage-3", 0, -1000, -7000, 180, 3, [Leg.straight(600), Leg.turn_by(-90, 1),
                                                           Leg.straight()])]
    return Scenario(name="outage", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=sensors, vessels=tuple(vessels))


def _arpa(seed: int, duration_s: float | None) -> Scenario:
    dur = 1800.0 if duration_s is None else duration_s
    r_sd, b_sd = arpa_sigmas()
    s = _open_sea_sensor("mole-light", 870, 0, range_sigma_m=round(r_sd, 3),
                         bearing_sigma_deg=round(b_sd, 4), false_plots_per_scan=3.0)
    rng = np.random.default_rng(seed)
    vessels = []
    for i in range(6):
        ang = rng.uniform(0, 2 * math.pi)
        rad = rng.uniform(3000, 9000)
        course = float(rng.uniform(0, 360))
        vessels.append(_plan(f"arpa-{i + 1}", 0, 870 + rad * math.sin(ang), rad * math.cos(ang),
                             course, float(rng.uniform(4, 14)), [Leg.straight()]))
    return Scenario(name="arpa", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=(SimSensor(config=s, noise="arpa"),), vessels=tuple(vessels))


def _route_chains(rng: np.random.Generator, *, slots: int, duration_s: float, prefix: str,
                  digits: int, pause_s: float) -> list[VesselPlan]:
    """Vessels on random routes within 11 km of the origin, ``slots`` chains of them.

    Each slot is a chain: a vessel sails 2-4 legs at 3-14 kn between random
    points, and the next one appears 40 s plus up to ``pause_s`` after it would
    have finished, until ``duration_s``.
    """

    def point() -> tuple[float, float]:
        r = 11000.0 * math.sqrt(rng.random())
        th = rng.uniform(0, 2 * math.pi)
        return r * math.sin(th), r * math.cos(th)

    vessels: list[VesselPlan] = []
    count = 0
    for slot in range(slots):
        t = -rng.uniform(0, 1800.0)
        while t < duration_s:
            e, n = point()
            kn = float(rng.uniform(3, 14))
            legs, length, pe, pn = [], 0.0, e, n
            for _ in range(int(rng.integers(2, 5))):
                we, wn = point()
                legs.append(_go(we, wn, kn))
                length += math.hypot(we - pe, wn - pn)
                pe, pn = we, wn
            count += 1
            vessels.append(_plan(f"{prefix}-{slot:02d}-{count:0{digits}d}", t, e, n,
                                 float(rng.uniform(0, 360)), kn, legs))
            t += length / (kn * 1852.0 / 3600.0) + 40.0 + rng.uniform(0, pause_s)
    return vessels


def _bench(seed: int, duration_s: float | None) -> Scenario:
    """About 40 vessels at any time: 40 slots, each a chain of vessels with random routes."""
    dur = 6 * 3600.0 if duration_s is None else duration_s
    a = _open_sea_sensor("bench-west", -4000, 0, false_plots_per_scan=15.0, max_range_m=15000.0)
    b = _open_sea_sensor("bench-east", 4000, 0, scan_period_s=3.0, false_plots_per_scan=15.0,
                         max_range_m=15000.0)
    vessels = _route_chains(np.random.default_rng([seed, 7]), slots=40, duration_s=dur,
                            prefix="bench", digits=4, pause_s=60.0)
    return Scenario(name="bench", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=(SimSensor(config=a), SimSensor(config=b)), vessels=tuple(vessels),
                    zones_geojson=port_calder_zones_geojson(), rules_toml=PORT_CALDER_RULES)


def _watch_days(seed: int, duration_s: float | None) -> Scenario:
    """Three 2-hour "days" at Port Calder with vessels across the day boundaries.

    Boundaries (UTC) at 08:00 and 10:00 (7200 s and 14400 s into the feed):
    a ketch loiters in the inner basin from about 07:37 to 08:20, a launch
    crosses the exercise range under way from about 07:47 to 08:12, two
    boats meet in the outer roads from about 09:45 to 10:15; a patrol boat
    is present throughout; a pilot boat speeds in the fairway on the first
    day and a tender enters the naval berth on the third.
    """
    dur = 3 * 7200.0 if duration_s is None else duration_s
    common = dict(range_sigma_m=15.0, bearing_sigma_deg=0.4, detection_probability=0.9,
                  false_plots_per_scan=3.0, max_range_m=14000.0)
    sensors = (
        SimSensor(config=_sensor("calder-head", -4200, 1700, scan_period_s=2.5, **common)),
        SimSensor(config=_sensor("mole-light", 870, 0, scan_period_s=3.0, **common)),
    )
    patrol = [_go(-2500, -1800, 10), _go(-7000, -2800, 10)] * 13
    v = [
        _plan("ketch-anchor", 5400, -1000, 300, 60, 3,
              [_go(0, 700, 3), Leg.stop(until_s=8400), _go(-1200, 350, 3)],
              "loiters in the inner basin across the 08:00 boundary"),
        _plan("launch-cross", 5964, -10500, -6000, 90, 6, [_go(-2000, -6000, 6)],
              "crosses the exercise range under way across the 08:00 boundary"),
        _plan("patrol-long", 0, -6000, -1500, 100, 10, patrol, "patrols the west sound all day"),
        _plan("pilot-fast", 1500, *_PILOTS, 180, 0,
              [_go(_S, 100, 6), _go(_S, -600, 7), Leg.speed(12, 20), Leg.straight(240),
               Leg.speed(7, 20), _go(_S, -5000, 7), _go(8000, -13000, 15)],
              "12 kn in the fairway on the first day"),
        _plan("meet-west", 12600, -2000, -9200, 60, 6,
              [_go(1000, -7500, 6), Leg.stop(until_s=15300), _go(-2500, -7000, 6),
               _go(-2500, -16000, 6)], "meets meet-east across the 10:00 boundary"),
        _plan("meet-east", 12500, 4500, -9000, 290, 6,
              [_go(1000, -7600, 6), Leg.stop(until_s=15300), _go(4500, -12500, 6)],
              "meets meet-west across the 10:00 boundary"),
        _plan("tender-berth", 16500, *_MARINA, 80, 5,
              [_go(1200, 300, 5), _go(_S, -500, 5), _go(2700, -150, 4), Leg.stop(60),
               _go(2000, -1500, 5), _go(-1000, -3000, 5)],
              "enters the naval berth on the third day"),
    ]
    return Scenario(name="watch-days", start_epoch_s=START_EPOCH_S, duration_s=dur,
                    sensors=sensors, vessels=tuple(v),
                    zones_geojson=port_calder_zones_geojson(), rules_toml=PORT_CALDER_RULES)


#: Midnight UTC before the built-in scenarios' start: 2026-05-04T00:00:00Z.
MIDNIGHT_EPOCH_S = 1777852800.0


def _archive_days(seed: int, duration_s: float | None) -> Scenario:
    """Days of ordinary traffic from midnight UTC, two radars: an archive for campaigns.

    12 vessel slots, each a chain of vessels on random routes across the
    two covers, 6 false plots per scan per radar; default 4 days.
    """
    dur = 4 * 86400.0 if duration_s is None else duration_s
    a = _open_sea_sensor("archive-west", -4000, 0, max_range_m=15000.0)
    b = _open_sea_sensor("archive-east", 4000, 0, scan_period_s=3.0, max_range_m=15000.0)
    vessels = _route_chains(np.random.default_rng([seed, 11]), slots=12, duration_s=dur,
                            prefix="archive", digits=5, pause_s=600.0)
    return Scenario(name="archive-days", start_epoch_s=MIDNIGHT_EPOCH_S, duration_s=dur,
                    sensors=(SimSensor(config=a), SimSensor(config=b)), vessels=tuple(vessels),
                    zones_geojson=port_calder_zones_geojson(), rules_toml=PORT_CALDER_RULES)


SCENARIOS: dict[str, ScenarioSpec] = {
    s.name: s for s in (
        ScenarioSpec(name="demo", build=_demo, default_seed=20260504, default_duration_s=5400.0,
                     description="Port Calder, 90 min, two radars, 27 vessels, a case for "
                                 "every demo rule and a near miss for each"),
        ScenarioSpec(name="quiet", build=_quiet, default_duration_s=1800.0,
                     description="four well-separated vessels, one radar, low clutter, 30 min"),
        ScenarioSpec(name="crossing45", build=_crossing(45.0, "crossing45"),
                     default_duration_s=1200.0,
                     description="two vessels crossing at 45 deg, at the crossing point together"),
        ScenarioSpec(name="parallel120", build=_parallel, default_duration_s=1200.0,
                     description="two vessels 120 m apart on parallel courses for 20 min"),
        ScenarioSpec(name="outage", build=_outage, default_duration_s=1800.0,
                     description="two radars, mole-light down for 10 min mid-feed"),
        ScenarioSpec(name="bench", build=_bench, default_duration_s=6 * 3600.0,
                     description="6 h, two radars, ~40 vessels at any time, 15 false plots "
                                 "per scan per radar"),
        ScenarioSpec(name="arpa", build=_arpa, default_duration_s=1800.0,
                     description="one radar with the plotting-aid standard's sensor error "
                                 "model, six vessels on steady legs"),
        ScenarioSpec(name="archive-days", build=_archive_days, default_duration_s=4 * 86400.0,
                     description="4 days from midnight UTC, two radars, ~12 vessels at any "
                                 "time: an archive for campaigns"),
        ScenarioSpec(name="watch-days", build=_watch_days, default_duration_s=3 * 7200.0,
                     description="three 2-hour days, two radars, vessels loitering, crossing "
                                 "and meeting across the day boundaries"),
    )
}
