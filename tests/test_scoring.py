"""``harbourwatch score``: reading, grid, metrics and plain-language figures end to end.

Positions of the invented Calder Sound vessels are laid out with pyproj's geodesic solver
(``pyproj.Geod(ellps="WGS84").fwd``, Karney's algorithm), independent of the local frame
the scorer uses, so the distances checked below come from outside the project.
"""

from __future__ import annotations

import csv
import json
import math
import re
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pyproj import Geod

from harbourwatch.cli import main
from harbourwatch.errors import InputError
from harbourwatch.scoring.plot import write_score_plot
from harbourwatch.scoring.score import mean_gospa_files, score_files

GEOD = Geod(ellps="WGS84")
KN = 1852.0 / 3600.0   # international knot in m/s (1 nmi = 1852 m exactly, by definition)
T0 = 1_777_874_400.0   # 2026-05-04T06:00:00Z
LAT0, LON0 = 56.412, -5.471  # an invented spot in Calder Sound, off Port Calder

HEADER_TRACKS = ["track", "time", "lat", "lon", "sog_kn", "cog_deg", "sd_m", "existence"]


def iso(t: float) -> str:
    from harbourwatch.io.timefmt import format_utc_one

    return format_utc_one(t)


def write_csv(path: Path, header: list[str], rows: list[list[object]]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


def northbound(times_s: np.ndarray, speed_kn: float) -> tuple[np.ndarray, np.ndarray]:
    """A vessel steaming due north from (LAT0, LON0) at a steady speed (geodesic)."""
    dist = speed_kn * KN * (times_s - times_s[0])
    lon, lat, _ = GEOD.fwd(np.full_like(dist, LON0), np.full_like(dist, LAT0),
                           np.zeros_like(dist), dist)
    return np.asarray(lat), np.asarray(lon)


def offset(lat: np.ndarray, lon: np.ndarray, az_deg: float, dist_m: float):
    lon2, lat2, _ = GEOD.fwd(lon, lat, np.full_like(lat, az_deg), np.full_like(lat, dist_m))
    return np.asarray(lat2), np.asarray(lon2)


def truth_rows(track: str, t: np.ndarray, lat: np.ndarray, lon: np.ndarray) -> list[list[object]]:
    return [[track, iso(a), f"{b:.9f}", f"{c:.9f}"] for a, b, c in zip(t, lat, lon, strict=True)]


def track_rows(track: str, t, lat, lon, sog: float, cog: float) -> list[list[object]]:
    return [[track, iso(a), f"{b:.9f}", f"{c:.9f}", sog, cog, 20.0, 0.99]
            for a, b, c in zip(t, lat, lon, strict=True)]


@pytest.fixture
def pilot(tmp_path: Path) -> tuple[Path, Path, int]:
    """Truth: the pilot launch 'Calder Tern' 10 kn due north for 5 min, a state every 10 s.
    Track: the same vessel estimated 50 m due east at the same times, 10 kn, course 000."""
    t = T0 + 10.0 * np.arange(31)
    lat, lon = northbound(t, 10.0)
    elat, elon = offset(lat, lon, 90.0, 50.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("calder-tern", t, lat, lon))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS,
                       track_rows("T1", t, elat, elon, 10.0, 0.0))
    return tracks, truth, len(t)


# --------------------------------------------------------------------------- worked cases
def test_constant_offset_by_hand(pilot) -> None:
    tracks, truth, n = pilot
    r = score_files(tracks, truth, cutoff_m=200.0, order=2.0, switch_cost_m=100.0, grid_s=10.0)
    d = r.as_dict()
    # Computed by hand: every step has one truth and one estimate 50 m apart (geodesic, from
    # pyproj), c = 200: GOSPA per step = 50 m, localisation part 2500 m^2; trajectory GOSPA =
    # sqrt(31 * 2500) = 50 sqrt(31) with no switch, missed or false cost.
    assert d["grid_steps"] == n == 31
    assert d["gospa_mean"] == pytest.approx(50.0, abs=0.05)
    assert d["gospa"]["localisation"] == pytest.approx(2500.0, rel=2e-3)
    assert d["gospa"]["missed"] == d["gospa"]["false"] == 0.0
    assert d["tgospa"] == pytest.approx(50.0 * math.sqrt(31), rel=1e-3)
    assert d["tgospa_parts"]["switch"] == 0.0
    assert d["mean_position_error_m"] == pytest.approx(50.0, abs=0.05)
    # the estimate reports 10 kn, course 000: same as the truth's geodesic motion
    assert d["mean_speed_error_kn"] == pytest.approx(0.0, abs=0.01)
    assert d["mean_course_error_deg"] == pytest.approx(0.0, abs=0.05)
    assert d["missed_vessel_min"] == 0.0 and d["false_track_min"] == 0.0
    assert d["coverage_percent"] == pytest.approx(100.0)
    assert d["per_truth"]["calder-tern"]["minutes"] == pytest.approx(5.0)
    assert (d["track_breaks"], d["identity_swaps"]) == (0, 0)


def test_speed_and_course_errors_from_the_track_columns(tmp_path: Path) -> None:
    # Computed by hand: truth 10 kn due north; the track reports 12 kn, course 010 at the
    # true positions -> speed error 2 kn, course error 10 degrees, position error 0.
    t = T0 + 10.0 * np.arange(13)
    lat, lon = northbound(t, 10.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("v", t, lat, lon))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS, track_rows("a", t, lat, lon,
                                                                          12.0, 10.0))
    d = score_files(tracks, truth).as_dict()
    assert d["mean_speed_error_kn"] == pytest.approx(2.0, abs=0.01)
    assert d["mean_course_error_deg"] == pytest.approx(10.0, abs=0.05)
    assert d["mean_position_error_m"] == pytest.approx(0.0, abs=1e-3)
    assert d["velocity_source"] == "columns"


def test_track_break_and_swap_by_hand(tmp_path: Path) -> None:
    # Truth 'calder-ferry' every 10 s from 0 to 600 s. Track 'a' sits exactly on it from 0 to
    # 190 s, track 'b' from 390 to 600 s; nothing from 200 to 380 s (19 grid steps).
    # Computed by hand, c = 200, p = 2, gamma = 100:
    #   missed: 19 steps * c^2/2 = 19 * 20000 = 380000; localisation 0; false 0;
    #   switch: leaving 'a' and taking 'b' is one full switch (or two half) = gamma^2 = 10000.
    #   trajectory GOSPA = sqrt(390000). Missed minutes = 19 * 10 s = 3.1667 min.
    #   One break (matched, unmatched, matched again) and one swap (a -> b).
    t = T0 + 10.0 * np.arange(61)
    lat, lon = northbound(t, 6.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("calder-ferry", t, lat, lon))
    a, b = slice(0, 20), slice(39, 61)
    rows = (track_rows("a", t[a], lat[a], lon[a], 6.0, 0.0)
            + track_rows("b", t[b], lat[b], lon[b], 6.0, 0.0))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS, rows)
    d = score_files(tracks, truth).as_dict()
    assert d["tgospa_parts"]["missed"] == pytest.approx(380000.0)
    assert d["tgospa_parts"]["switch"] == pytest.approx(10000.0)
    assert d["tgospa_parts"]["false"] == pytest.approx(0.0, abs=1e-6)
    assert d["tgospa"] == pytest.approx(math.sqrt(390000.0), rel=1e-6)
    assert d["missed_vessel_min"] == pytest.approx(190.0 / 60.0)
    assert d["false_track_min"] == 0.0
    assert (d["track_breaks"], d["identity_swaps"]) == (1, 1)
    assert d["per_truth"]["calder-ferry"]["breaks"] == 1


def test_identity_swap_between_two_vessels_by_hand(tmp_path: Path) -> None:
    # Two launches 150 m apart abreast, both 5 kn north, 4 min. Track 'p' follows the western
    # one then, half way, jumps to the eastern one; track 'q' does the opposite. Positions
    # are exact, so following the swap costs 2 full switches = 2 * gamma^2 = 20000, while
    # keeping the first pairing would cost 150^2 = 22500 per vessel for each of the 13 steps
    # after the swap (and dropping to missed + false c^2 = 40000): the metric follows the
    # swap. Two identity swaps (one per truth), no break.
    t = T0 + 10.0 * np.arange(25)
    lat_w, lon_w = northbound(t, 5.0)
    lat_e, lon_e = offset(lat_w, lon_w, 90.0, 150.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("west", t, lat_w, lon_w) + truth_rows("east", t, lat_e, lon_e))
    h = 12
    p_lat = np.concatenate([lat_w[:h], lat_e[h:]])
    p_lon = np.concatenate([lon_w[:h], lon_e[h:]])
    q_lat = np.concatenate([lat_e[:h], lat_w[h:]])
    q_lon = np.concatenate([lon_e[:h], lon_w[h:]])
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS,
                       track_rows("p", t, p_lat, p_lon, 5.0, 0.0)
                       + track_rows("q", t, q_lat, q_lon, 5.0, 0.0))
    d = score_files(tracks, truth, cutoff_m=200.0, switch_cost_m=100.0).as_dict()
    assert d["identity_swaps"] == 2 and d["track_breaks"] == 0
    assert d["tgospa_parts"]["switch"] == pytest.approx(20000.0)
    assert d["tgospa"] == pytest.approx(math.sqrt(20000.0), abs=0.01)


def test_grid_zero_uses_union_of_time_stamps_and_never_extrapolates(tmp_path: Path) -> None:
    # Truth at 0, 10, 20 s; track at 5 and 15 s -> union grid 0, 5, 10, 15, 20 (5 steps).
    # The track is not extrapolated to 0 or 20 s: the truth is missed there. Computed by
    # hand: trapezoid weights of the union grid are 2.5, 5, 5, 5, 2.5 s -> missed time at
    # 0 s and 20 s is 2.5 + 2.5 = 5 s.
    tt = T0 + np.array([0.0, 10.0, 20.0])
    lat, lon = northbound(tt, 4.0)
    te = T0 + np.array([5.0, 15.0])
    elat, elon = northbound(te, 4.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("v", tt, lat, lon))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS,
                       track_rows("a", te, elat, elon, 4.0, 0.0))
    r = score_files(tracks, truth, grid_s=0.0)
    d = r.as_dict()
    assert d["grid_steps"] == 5
    assert r.grid_t.tolist() == (T0 + np.array([0, 5, 10, 15, 20.0])).tolist()
    assert d["missed_vessel_min"] == pytest.approx(5.0 / 60.0)
    assert r.tgospa.matched[:, 0].tolist() == [False, True, True, True, False]


def test_gap_longer_than_max_gap_is_absent(tmp_path: Path) -> None:
    # The truth has states at 0, 10 and 200 s: with max_gap_s = 60 the 10 -> 200 s gap is not
    # interpolated, so the truth exists at 0, 10 and 200 s of the 10 s grid only (3 steps), and
    # a track that also stops at 10 s is not charged as missed in between.
    tt = T0 + np.array([0.0, 10.0, 200.0])
    lat, lon = northbound(tt, 1.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("v", tt, lat, lon))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS,
                       track_rows("a", tt[:2], lat[:2], lon[:2], 1.0, 0.0))
    r = score_files(tracks, truth, grid_s=10.0, max_gap_s=60.0)
    assert r.as_dict()["grid_steps"] == 21
    # only the last step (200 s) has a missed vessel: c^2/2 = 20000 there, zero elsewhere
    assert r.tgospa.missed == pytest.approx(20000.0)
    assert np.flatnonzero(r.tgospa.missed_t).tolist() == [20]


def test_mean_gospa_alone_equals_the_full_score(pilot) -> None:
    # computed by hand as above: 50 m at every step
    tracks, truth, _ = pilot
    assert mean_gospa_files(tracks, truth) == pytest.approx(50.0, abs=0.05)
    assert mean_gospa_files(tracks, truth) == score_files(tracks, truth).as_dict()["gospa_mean"]


def test_identical_files_score_zero(pilot) -> None:
    _, truth, _ = pilot
    d = score_files(truth, truth).as_dict()
    assert d["tgospa"] == 0.0 and d["gospa_mean"] == 0.0
    assert all(v == 0.0 for v in d["tgospa_parts"].values())
    assert all(v == 0.0 for v in d["gospa"].values())
    assert d["missed_vessel_min"] == 0.0 and d["false_track_min"] == 0.0
    assert d["mean_position_error_m"] == 0.0
    assert d["velocity_source"] == "positions"


def test_epoch_seconds_and_iso_give_the_same_score(pilot, tmp_path: Path) -> None:
    tracks, truth, _ = pilot
    rows = list(csv.reader(open(truth, encoding="utf-8")))
    from datetime import datetime

    epoch_rows = [[r[0], f"{datetime.fromisoformat(r[1]).timestamp():.3f}", r[2], r[3]]
                  for r in rows[1:]]
    truth_epoch = write_csv(tmp_path / "truth_epoch.csv", rows[0], epoch_rows)
    a = score_files(tracks, truth).as_dict()
    b = score_files(tracks, truth_epoch).as_dict()
    assert a == b


# --------------------------------------------------------------------------- command line
def test_cli_json_has_the_contract_keys(pilot, capsys) -> None:
    tracks, truth, n = pilot
    assert main(["score", str(tracks), str(truth), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    for key in ("gospa_mean", "gospa", "tgospa", "tgospa_parts", "grid_steps"):
        assert key in d
    assert set(d["gospa"]) >= {"localisation", "missed", "false"}
    assert set(d["tgospa_parts"]) >= {"localisation", "missed", "false", "switch"}
    assert d["grid_steps"] == n
    # the table form prints the same metric
    assert main(["score", str(tracks), str(truth)]) == 0
    out = capsys.readouterr().out
    assert f"{d['tgospa']:.2f}" in out and "identity swaps" in out


def test_cli_windowed_trajectory_gospa_brackets_the_whole_feed_value(tmp_path, capsys) -> None:
    # Two vessels 300 m apart steaming north for 10 min; the estimates swap identity at
    # 5 min and one estimate is missing for a minute. Scored in 2-minute windows, the
    # report brackets the exact value (whole-feed LP) between its two bounds.
    t = T0 + 10.0 * np.arange(61)
    lat_a, lon_a = northbound(t, 8.0)
    lat_b, lon_b = offset(lat_a, lon_a, 90.0, 300.0)
    truth = write_csv(tmp_path / "truth.csv", ["track", "time", "lat", "lon"],
                      truth_rows("a", t, lat_a, lon_a) + truth_rows("b", t, lat_b, lon_b))
    first, second, gap = t < T0 + 300.0, t >= T0 + 300.0, (t > T0 + 400.0) & (t < T0 + 460.0)
    rows = (track_rows("T1", t[first], lat_a[first], lon_a[first], 8.0, 0.0)
            + track_rows("T1", t[second], lat_b[second], lon_b[second], 8.0, 0.0)
            + track_rows("T2", t[first], lat_b[first], lon_b[first], 8.0, 0.0)
            + track_rows("T2", t[second & ~gap], lat_a[second & ~gap], lon_a[second & ~gap], 8.0, 0.0))
    tracks = write_csv(tmp_path / "tracks.csv", HEADER_TRACKS, rows)
    assert main(["score", str(tracks), str(truth), "--json"]) == 0
    whole = json.loads(capsys.readouterr().out)
    assert whole["tgospa_windows"] == 1 and whole["tgospa_exact"] is True
    assert whole["tgospa_lower"] == whole["tgospa"]
    assert main(["score", str(tracks), str(truth), "--json", "--tgospa-window-min", "2"]) == 0
    win = json.loads(capsys.readouterr().out)
    assert win["tgospa_windows"] == 5 and win["parameters"]["tgospa_window_min"] == 2.0
    assert win["tgospa_lower"] <= whole["tgospa"] + 1e-9 <= win["tgospa"] + 2e-9
    assert win["gospa_mean"] == whole["gospa_mean"]  # the per-step metric is untouched
    assert main(["score", str(tracks), str(truth), "--tgospa-window-min", "2"]) == 0
    assert "5 windows of 2 min" in capsys.readouterr().out


def test_cli_identical_files_give_zeros(pilot, capsys) -> None:
    _, truth, _ = pilot
    assert main(["score", str(truth), str(truth), "--json", "--grid-s", "0"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["tgospa"] == 0.0 and d["gospa_mean"] == 0.0


@pytest.mark.parametrize(
    ("header", "row", "line", "field"),
    [
        (["track", "time", "lat"], None, 1, "lon"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:10Z", "abc", "-5.4"], 3, "lat"),
        (["track", "time", "lat", "lon"], ["v", "06:00:10", "56.4", "-5.4"], 3, "time"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:10", "56.4", "-5.4"], 3, "time"),
        (["track", "time", "lat", "lon"], ["v", "1777874410", "56.4", "-5.4"], 3, "time"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:00Z", "56.4", "-5.4"], 3, "time"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:10Z", "96.4", "-5.4"], 3, "lat"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:10Z", "56.4", "nan"], 3, "lon"),
        (["track", "time", "lat", "lon"], ["", "2026-05-04T06:00:10Z", "56.4", "-5.4"], 3, "track"),
        (["track", "time", "lat", "lon"], ["v", "2026-05-04T06:00:10Z"], 3, "lat"),
    ],
    ids=["missing-column", "bad-number", "bad-time", "no-zone", "mixed-forms", "duplicate",
         "lat-range", "nan", "empty-id", "short-row"],
)
def test_cli_bad_truth_exits_2_naming_file_line_field(pilot, tmp_path, capsys, header, row,
                                                      line, field) -> None:
    tracks, _, _ = pilot
    rows = [] if row is None else [["v", "2026-05-04T06:00:00Z", "56.4", "-5.4"], row]
    bad = write_csv(tmp_path / "bad_truth.csv", header, rows)
    assert main(["score", str(tracks), str(bad), "--json"]) == 2
    err = capsys.readouterr().err
    assert str(bad) in err and f"line {line}" in err and f"field '{field}'" in err


@pytest.mark.parametrize("opt", [["--cutoff-m", "0"], ["--order", "0.5"],
                                 ["--switch-cost-m", "-1"], ["--grid-s", "-10"],
                                 ["--max-gap-s", "0"], ["--tgospa-window-min", "-5"],
                                 ["--order", "1000"], ["--order", "inf"],
                                 ["--order", "20", "--cutoff-m", "1e6"]])
def test_cli_bad_options_exit_2(pilot, capsys, opt) -> None:
    # --order 1000 used to end in an OverflowError traceback (200 ** 1000 is no float)
    tracks, truth, _ = pilot
    assert main(["score", str(tracks), str(truth), *opt]) == 2
    err = capsys.readouterr().err
    assert f"field '{opt[0]}'" in err and err.count("\n") == 1 and "Traceback" not in err


def test_cli_a_score_too_large_to_solve_is_refused_with_the_time_it_would_take(tmp_path, capsys):
    # A crowded anchorage: 210 vessels and 210 tracks over 200 s at 1 s. At --grid-s 0 every
    # time stamp is a grid step, and 200 x 210 x 210 = 8.8 million cells is past the cap
    # (the demo at --grid-s 0 has 61,322 steps, 27 vessels and 28 tracks: 46 million).
    t = T0 + np.arange(200.0)
    lines_x, lines_y = ["track,time,lat,lon"], ["track,time,lat,lon"]
    stamps = [iso(a) for a in t]
    for k in range(210):
        lat = 57.45 + 0.0005 * (k // 15)
        lon = -30.05 + 0.001 * (k % 15)
        lines_x += [f"v{k},{s},{lat:.7f},{lon:.7f}" for s in stamps]
        lines_y += [f"T{k},{s},{lat + 1e-5:.7f},{lon:.7f}" for s in stamps]
    truth, tracks = tmp_path / "truth.csv", tmp_path / "tracks.csv"
    truth.write_text("\n".join(lines_x) + "\n")
    tracks.write_text("\n".join(lines_y) + "\n")
    assert main(["score", str(tracks), str(truth), "--grid-s", "0"]) == 2
    err = capsys.readouterr().err
    assert "field '--grid-s'" in err and "200 grid steps at the time stamps" in err
    assert "9 million cells" in err and "210 truth vessels and 210 tracks" in err
    assert re.search(r"would take roughly \d+ min", err) and "--tgospa-window-min" in err
    assert err.count("\n") == 1


def test_cli_tells_a_long_score_before_it_starts(pilot, capsys, monkeypatch) -> None:
    import harbourwatch.scoring.score as score_mod

    tracks, truth, n = pilot
    monkeypatch.setattr(score_mod, "NOTICE_SECONDS", 0.0)  # everything counts as long here
    assert main(["score", str(tracks), str(truth), "--json"]) == 0
    out, err = capsys.readouterr()
    assert json.loads(out)["grid_steps"] == n
    assert err.startswith(f"harbourwatch: note: scoring {n} grid steps every 10 s ")
    assert "expect roughly" in err and err.count("\n") == 1


def test_estimate_follows_the_measured_law() -> None:
    # the law of MAX_LP_CELLS's measurements: 0.5 s + (cells / 1e6)^2 s per window
    from harbourwatch.scoring.score import estimate_tgospa_seconds

    assert estimate_tgospa_seconds([2e6]) == pytest.approx(4.5)
    assert estimate_tgospa_seconds([1e6] * 4) == pytest.approx(6.0)
    assert estimate_tgospa_seconds([4e6]) > 3 * estimate_tgospa_seconds([2e6])


def test_cli_missing_file_and_empty_files(tmp_path, pilot, capsys) -> None:
    tracks, _, _ = pilot
    assert main(["score", str(tracks), str(tmp_path / "nope.csv")]) == 2
    assert "nope.csv" in capsys.readouterr().err
    e1 = write_csv(tmp_path / "e1.csv", ["track", "time", "lat", "lon"], [])
    e2 = write_csv(tmp_path / "e2.csv", ["track", "time", "lat", "lon"], [])
    assert main(["score", str(e1), str(e2)]) == 2
    # an empty estimate against a real truth is valid: everything is missed
    _, truth, n = pilot
    assert main(["score", str(e1), str(truth), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    # computed by hand: n steps * c^2/2 with c = 200
    assert d["tgospa_parts"]["missed"] == pytest.approx(n * 20000.0)
    assert d["mean_position_error_m"] is None


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(cell=st.text(max_size=12))
def test_any_lat_cell_scores_or_names_its_line(tmp_path_factory, cell) -> None:
    d = tmp_path_factory.mktemp("fuzz")
    truth = write_csv(d / "truth.csv", ["track", "time", "lat", "lon"],
                      [["v", "2026-05-04T06:00:00Z", "56.4", "-5.4"],
                       ["v", "2026-05-04T06:00:10Z", cell, "-5.4"]])
    try:
        r = score_files(truth, truth)
    except InputError as exc:
        assert exc.line == 3 and exc.field in ("lat", "lon", "track")
    else:
        assert r.tgospa.value == 0.0


# --------------------------------------------------------------------------- plot
def test_plot_html_and_svg_are_written_and_escaped(tmp_path: Path, pilot) -> None:
    tracks, truth, _ = pilot
    odd = tmp_path / "tracks<b>&.csv"
    odd.write_bytes(tracks.read_bytes())
    r = score_files(odd, truth)
    write_score_plot(r, tmp_path / "score.html")
    page = (tmp_path / "score.html").read_text(encoding="utf-8")
    assert "<svg" in page and "<polyline" in page and "<script" not in page
    assert "tracks<b>" not in page and "tracks&lt;b&gt;&amp;.csv" in page
    write_score_plot(r, tmp_path / "score.svg")
    assert (tmp_path / "score.svg").read_text(encoding="utf-8").startswith("<?xml")
    with pytest.raises(InputError, match="only .html and .svg"):
        write_score_plot(r, tmp_path / "score.png")
    assert not (tmp_path / "score.png").exists()
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []
