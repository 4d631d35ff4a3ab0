"""Plot feeds: reading, validation with located messages, merging, grouping into scans."""

from __future__ import annotations

import calendar
import datetime as dt
import gzip
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from conftest import BAD_FEEDS, CALDER_FEED, CALDER_FEED_EPOCH, CALDER_FEED_SCAN
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from strategies import feed_cell_garbage, plot_rows

from harbourwatch.errors import InputError
from harbourwatch.io.feeds import PlotTable, group_scans, read_feeds
from harbourwatch.io.records import SensorConfig


def _sensor(sid: str, period: float = 2.5) -> SensorConfig:
    return SensorConfig(id=sid, lat_deg=54.3, lon_deg=10.15, scan_period_s=period,
                        range_sigma_m=15.0, bearing_sigma_deg=0.4, detection_probability=0.9,
                        false_plots_per_scan=6.0, max_range_m=22000.0)


SENSORS = (_sensor("calder-head", 2.5), _sensor("sound-light", 3.0))
# 2026-05-04T06:00:00Z in epoch seconds, from Python's calendar.timegm (outside the project).
T0 = calendar.timegm((2026, 5, 4, 6, 0, 0))


def _write(tmp_path: Path, text: str | bytes, name: str = "plots.csv") -> Path:
    p = tmp_path / name
    if isinstance(text, str):
        text = text.encode("utf-8")
    p.write_bytes(text)
    return p


def _error(paths, sensors=SENSORS) -> InputError:
    with pytest.raises(InputError) as info:
        read_feeds([str(p) for p in paths], sensors)
    return info.value


def _same(a: PlotTable, b: PlotTable) -> None:
    for name in ("time", "sensor", "lat_deg", "lon_deg", "scan", "line"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    np.testing.assert_array_equal(a.sigma_m, b.sigma_m)  # NaNs compare equal here


# --- good feeds ------------------------------------------------------------------------------


def test_reads_the_small_feed(tmp_path):
    plots = read_feeds([_write(tmp_path, CALDER_FEED)], SENSORS)
    assert len(plots) == 4 and plots.duplicates_dropped == 0
    np.testing.assert_array_equal(plots.time, T0 + np.array([0.0, 0.5, 2.5, 3.0]))
    np.testing.assert_array_equal(plots.sensor, [0, 1, 0, 1])
    np.testing.assert_array_equal(plots.lat_deg, [54.31, 54.34, 54.3101, 54.3401])
    np.testing.assert_array_equal(plots.scan, [-1, -1, -1, -1])
    assert np.isnan(plots.sigma_m[[0, 2, 3]]).all() and plots.sigma_m[1] == 25.0
    np.testing.assert_array_equal(plots.line, [2, 3, 4, 5])
    assert plots.time.dtype == np.float64 and plots.sensor.dtype == np.int64


def test_epoch_and_iso_forms_give_identical_times(tmp_path):
    iso = read_feeds([_write(tmp_path, CALDER_FEED, "a.csv")], SENSORS)
    epoch = read_feeds([_write(tmp_path, CALDER_FEED_EPOCH, "b.csv")], SENSORS)
    _same(iso, epoch)


@pytest.mark.parametrize("stamp", [
    "2026-05-04T06:00:01.250Z", "2026-05-04T08:00:01.250+02:00", "2026-05-04T08:00:01.250+0200",
    "2026-05-04T01:30:01.250-04:30", "2026-05-04 06:00:01.250Z",
])
def test_zone_designators(tmp_path, stamp):
    # Reference: Python's datetime.fromisoformat (outside the project) for the same instant.
    ref = dt.datetime(2026, 5, 4, 6, 0, 1, 250000, tzinfo=dt.UTC).timestamp()
    assert ref == T0 + 1.25
    plots = read_feeds([_write(tmp_path, f"time,sensor,lat,lon\n{stamp},calder-head,54.3,10.1\n")],
                       SENSORS)
    assert plots.time[0] == ref


def test_millisecond_precision_is_kept(tmp_path):
    text = "time,sensor,lat,lon\n" + "".join(
        f"2026-05-04T06:00:00.{ms:03d}Z,calder-head,54.3,10.1\n" for ms in range(0, 1000, 7))
    plots = read_feeds([_write(tmp_path, text)], SENSORS)
    np.testing.assert_array_equal(np.round((plots.time - T0) * 1000), np.arange(0, 1000, 7))


def test_bom_and_crlf(tmp_path):
    text = b"\xef\xbb\xbf" + CALDER_FEED.replace("\n", "\r\n").encode()
    _same(read_feeds([_write(tmp_path, text)], SENSORS),
          read_feeds([_write(tmp_path, CALDER_FEED, "plain.csv")], SENSORS))


def test_header_only_is_an_empty_feed(tmp_path):
    plots = read_feeds([_write(tmp_path, "time,sensor,lat,lon,sigma_m\r\n")], SENSORS)
    assert len(plots) == 0 and group_scans(plots, SENSORS) == []


def test_extra_columns_are_ignored(tmp_path):
    text = "\n".join(ln + (",note" if i == 0 else ",anything at all")
                     for i, ln in enumerate(CALDER_FEED.splitlines())) + "\n"
    _same(read_feeds([_write(tmp_path, text)], SENSORS),
          read_feeds([_write(tmp_path, CALDER_FEED, "plain.csv")], SENSORS))


def test_gzip_and_parquet_equal_csv(tmp_path):
    csv_path = _write(tmp_path, CALDER_FEED)
    gz = tmp_path / "plots.csv.gz"
    gz.write_bytes(gzip.compress(CALDER_FEED.encode()))
    parquet = tmp_path / "plots.parquet"
    pq.write_table(pa.Table.from_pandas(pd.read_csv(csv_path, dtype=str, keep_default_na=False)),
                   parquet)
    ref = read_feeds([csv_path], SENSORS)
    _same(read_feeds([gz], SENSORS), ref)
    _same(read_feeds([parquet], SENSORS), ref)


def test_parquet_with_native_types(tmp_path):
    frame = pd.DataFrame({
        "time": pd.to_datetime(["2026-05-04T06:00:00.5Z", "2026-05-04T06:00:00.0Z"],
                              format="ISO8601", utc=True),
        "sensor": pd.Categorical(["sound-light", "calder-head"]),
        "lat": [54.34, 54.31], "lon": [10.2, 10.15], "scan": [3, 4], "sigma_m": [np.nan, 12.0],
    })
    p = tmp_path / "typed.parquet"
    frame.to_parquet(p)
    plots = read_feeds([p], SENSORS)
    np.testing.assert_array_equal(plots.time, [T0, T0 + 0.5])
    np.testing.assert_array_equal(plots.sensor, [0, 1])
    np.testing.assert_array_equal(plots.scan, [4, 3])
    np.testing.assert_array_equal(plots.line, [3, 2])


def test_merge_sort_and_dedup(tmp_path):
    a = _write(tmp_path, CALDER_FEED, "a.csv")
    # b repeats a's second row exactly, and has a row tied in time with a's first one.
    b = _write(tmp_path, "time,sensor,lat,lon,sigma_m\n"
                         "2026-05-04T06:00:00.500Z,sound-light,54.3400,10.2000,25\n"
                         "2026-05-04T06:00:00.000Z,sound-light,54.4000,10.3000,\n"
                         "2026-05-04T05:59:59.000Z,calder-head,54.3000,10.1000,\n"
                         "2026-05-04T05:59:59.000Z,calder-head,54.3000,10.1000,\n", "b.csv")
    plots = read_feeds([a, b], SENSORS)
    assert plots.duplicates_dropped == 2 and len(plots) == 6
    assert plots.files == (str(a), str(b))
    assert np.all(np.diff(plots.time) >= 0)
    # Ties in time: sensor (calder-head before sound-light) first, here also the file order.
    np.testing.assert_array_equal(plots.source, [1, 0, 1, 0, 0, 0])
    np.testing.assert_array_equal(plots.line, [4, 2, 3, 3, 4, 5])
    # A different sigma_m makes a different row, not a duplicate.
    c = _write(tmp_path, CALDER_FEED.replace(",25\n", ",26\n"), "c.csv")
    assert read_feeds([a, c], SENSORS).duplicates_dropped == 3


def test_plots_sharing_a_time_come_out_in_one_order_whatever_the_rows_order(tmp_path):
    # a radar stamping a whole revolution with one time: only the values tell the plots apart
    rows = ["2026-05-04T06:00:00.000Z,calder-head,54.3100,10.1500,",
            "2026-05-04T06:00:00.000Z,calder-head,54.3050,10.1600,",
            "2026-05-04T06:00:00.000Z,calder-head,54.3050,10.1400,",
            "2026-05-04T06:00:00.000Z,sound-light,54.3000,10.1000,"]
    head = "time,sensor,lat,lon,sigma_m\n"
    a = _write(tmp_path, head + "\n".join(rows) + "\n", "a.csv")
    b = _write(tmp_path, head + "\n".join(rows[::-1]) + "\n", "b.csv")
    c1 = _write(tmp_path, head + "\n".join(rows[2:]) + "\n", "c1.csv")
    c2 = _write(tmp_path, head + "\n".join(rows[:2]) + "\n", "c2.csv")
    tables = [read_feeds([a], SENSORS), read_feeds([b], SENSORS), read_feeds([c1, c2], SENSORS)]
    for t in tables:
        np.testing.assert_array_equal(t.sensor, [0, 0, 0, 1])
        np.testing.assert_array_equal(t.lat_deg, [54.305, 54.305, 54.31, 54.30])
        np.testing.assert_array_equal(t.lon_deg, [10.14, 10.16, 10.15, 10.10])


def test_no_files_is_an_empty_table():
    assert len(read_feeds([], SENSORS)) == 0


# --- bad feeds -------------------------------------------------------------------------------


@pytest.mark.parametrize(("text", "line", "field", "words"),
                         [c[1:] for c in BAD_FEEDS], ids=[c[0] for c in BAD_FEEDS])
def test_bad_feed_is_located(tmp_path, text, line, field, words):
    p = _write(tmp_path, text)
    err = _error([p])
    assert (err.file, err.line, err.field) == (str(p), line, field)
    assert str(err).startswith(f"{p}, line {line}, field '{field}': ")
    assert words in err.message


# Parquet has no field counts, blank lines or duplicate header names.
PARQUET_CASES = [c for c in BAD_FEEDS if "fields" not in c[4] and c[0] not in
                 ("blank-line-then-bad", "duplicate-column")]


@pytest.mark.parametrize(("text", "line", "field", "words"), [c[1:] for c in PARQUET_CASES],
                         ids=[c[0] for c in PARQUET_CASES])
def test_bad_parquet_is_located_like_csv(tmp_path, text, line, field, words):
    frame = pd.read_csv(_write(tmp_path, text), dtype=str, keep_default_na=False)
    p = tmp_path / "plots.parquet"
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), p)
    err = _error([p])
    assert (err.file, err.line, err.field) == (str(p), line, field)
    assert words in err.message
    if line > 1:
        assert f"Parquet row {line - 1}" in err.message


def test_parquet_timestamp_without_zone(tmp_path):
    p = tmp_path / "naive.parquet"
    pd.DataFrame({"time": pd.to_datetime(["2026-05-04T06:00:00"]), "sensor": ["calder-head"],
                  "lat": [54.3], "lon": [10.1]}).to_parquet(p)
    err = _error([p])
    assert (err.line, err.field) == (2, "time") and "zone" in err.message


def test_second_file_is_named(tmp_path):
    good = _write(tmp_path, CALDER_FEED, "good.csv")
    bad = _write(tmp_path, CALDER_FEED.replace("calder-head,54.3101", "mast-west,54.3101"),
                 "bad.csv")
    err = _error([good, bad])
    assert (err.file, err.line, err.field) == (str(bad), 4, "sensor")


def test_earliest_bad_row_wins_across_columns(tmp_path):
    text = CALDER_FEED.replace("10.2003,", "10.2003,-1").replace("54.3101", "95")
    err = _error([_write(tmp_path, text)])
    assert (err.line, err.field) == (4, "lat")


@pytest.mark.parametrize(("content", "line"), [(b"", 1), (b"\n\n", 1), (b"\xff\xfe\x00t", 1)])
def test_empty_or_undecodable_file(tmp_path, content, line):
    p = _write(tmp_path, content)
    err = _error([p])
    assert (err.file, err.line) == (str(p), line)


def test_bad_utf8_in_a_row_is_located(tmp_path):
    p = _write(tmp_path, CALDER_FEED.encode().replace(b"sound-light,54.3401", b"s\xe9,54.3401"))
    err = _error([p])
    assert (err.file, err.line) == (str(p), 5) and "UTF-8" in err.message


def test_missing_file_and_directory(tmp_path):
    for p in (tmp_path / "absent.csv", tmp_path):
        err = _error([p])
        assert err.file == str(p) and "cannot read" in err.message


# --- fuzzing ---------------------------------------------------------------------------------


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.binary(max_size=300))
def test_garbage_bytes_raise_only_input_error(tmp_path, data):
    p = _write(tmp_path, b"time,sensor,lat,lon\n" + data)
    try:
        read_feeds([p], SENSORS)
    except InputError as err:
        assert err.file == str(p)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(row=st.integers(0, 3), column=st.sampled_from(["time", "sensor", "lat", "lon", "sigma_m"]),
       value=feed_cell_garbage())
def test_mutated_cell_raises_only_input_error_at_that_line(tmp_path, row, column, value):
    rows = CALDER_FEED.splitlines()
    col = rows[0].split(",").index(column)
    cells = rows[row + 1].split(",")
    cells[col] = value
    rows[row + 1] = ",".join(cells)
    p = _write(tmp_path, "\n".join(rows) + "\n")
    try:
        read_feeds([p], SENSORS)
    except InputError as err:
        assert err.file == str(p)
        if row == 0 and column == "time":  # may change the file's time form: any row then
            assert err.line in (2, 3, 4, 5)
        else:
            assert err.line == row + 2


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=plot_rows(["calder-head", "sound-light"]))
def test_valid_rows_round_trip_in_both_time_forms(tmp_path, rows):
    def stamp_iso(ms: int) -> str:
        d = dt.datetime.fromtimestamp(ms // 1000, dt.UTC) + dt.timedelta(milliseconds=ms % 1000)
        return d.strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"

    head = "time,sensor,lat,lon,sigma_m\n"
    iso = head + "".join(f"{stamp_iso(ms)},{s},{la!r},{lo!r},{'' if sg is None else repr(sg)}\n"
                         for ms, s, la, lo, sg in rows)
    epoch = head + "".join(f"{ms / 1000!r},{s},{la!r},{lo!r},{'' if sg is None else repr(sg)}\n"
                           for ms, s, la, lo, sg in rows)
    a = read_feeds([_write(tmp_path, iso, "iso.csv")], SENSORS)
    b = read_feeds([_write(tmp_path, epoch, "epoch.csv")], SENSORS)
    _same(a, b)
    # Against the rows themselves: first of each exact duplicate kept, sorted by time, then
    # by sensor, lat, lon and sigma_m (a missing sigma_m last).
    seen, expected = set(), []
    for r in rows:
        if r not in seen:
            seen.add(r)
            expected.append(r)
    names = ["calder-head", "sound-light"]
    expected.sort(key=lambda r: (r[0], names.index(r[1]), r[2], r[3], r[4] is None, r[4] or 0.0))
    assert a.duplicates_dropped == len(rows) - len(expected)
    np.testing.assert_array_equal(np.round(a.time * 1000).astype(np.int64),
                                  [r[0] for r in expected])
    np.testing.assert_array_equal(a.lat_deg, [r[2] for r in expected])
    np.testing.assert_array_equal(a.lon_deg, [r[3] for r in expected])
    np.testing.assert_array_equal(a.sensor, [["calder-head", "sound-light"].index(r[1])
                                             for r in expected])


# --- scans -----------------------------------------------------------------------------------


def test_group_by_scan_column(tmp_path):
    plots = read_feeds([_write(tmp_path, CALDER_FEED_SCAN)], SENSORS)
    scans = group_scans(plots, SENSORS)
    assert [(s.sensor, s.number) for s in scans] == [(0, 0), (1, 0), (0, 1), (1, 1)]
    assert [s.time for s in scans] == list(T0 + np.array([0.0, 0.5, 2.5, 3.0]))
    assert [s.plots.tolist() for s in scans] == [[0], [1], [2], [3]]


def test_scan_column_groups_regardless_of_time_gaps(tmp_path):
    text = ("time,sensor,lat,lon,scan\n"
            f"{T0 + 1.0},calder-head,54.3,10.1,7\n"
            f"{T0 + 0.2},calder-head,54.3,10.2,7\n"
            f"{T0 + 0.9},sound-light,54.3,10.2,7\n"
            f"{T0 + 1.5},calder-head,54.3,10.3,8\n")
    scans = group_scans(read_feeds([_write(tmp_path, text)], SENSORS), SENSORS)
    assert [(s.sensor, s.number) for s in scans] == [(1, 7), (0, 7), (0, 8)]
    assert [s.time - T0 for s in scans] == pytest.approx([0.9, 1.0, 1.5], abs=1e-6)
    assert scans[1].plots.tolist() == [0, 2]  # row indices, sorted by plot time


def test_group_by_period_boundary_goes_to_later_revolution(tmp_path):
    # calder-head turns every 2.5 s, counted from its first plot at T0 + 1.
    offsets = [1.0, 2.0, 3.4999, 3.5, 6.0, 13.6]
    text = "time,sensor,lat,lon\n" + "".join(f"{T0 + o},calder-head,54.3,10.1\n" for o in offsets)
    scans = group_scans(read_feeds([_write(tmp_path, text)], SENSORS), SENSORS)
    # Revolutions floor((t - 1) / 2.5): 0, 0, 0, 1, 2, 5. Revolutions 3 and 4 hold no plot
    # (an outage) and make no scan.
    assert [s.number for s in scans] == [0, 1, 2, 5]
    assert [s.plots.tolist() for s in scans] == [[0, 1, 2], [3], [4], [5]]
    assert [s.time - T0 for s in scans] == pytest.approx([3.4999, 3.5, 6.0, 13.6], abs=1e-6)


def test_group_by_period_orders_sensors_by_reference_time(rng, tmp_path):
    t = T0 + rng.uniform(0, 60, 400)
    s = rng.integers(0, 2, 400)
    text = "time,sensor,lat,lon\n" + "".join(
        f"{float(ti)!r},{SENSORS[si].id},54.3,10.1\n" for ti, si in zip(t, s, strict=True))
    plots = read_feeds([_write(tmp_path, text)], SENSORS)
    scans = group_scans(plots, SENSORS)
    keys = [(sc.time, sc.sensor, sc.number) for sc in scans]
    assert keys == sorted(keys)
    allp = np.concatenate([sc.plots for sc in scans])
    assert sorted(allp.tolist()) == list(range(400))  # every plot in exactly one scan
    for sc in scans:
        period = SENSORS[sc.sensor].scan_period_s
        first = plots.time[plots.sensor == sc.sensor].min()
        assert np.all(np.floor((plots.time[sc.plots] - first) / period) == sc.number)
        assert np.all(plots.sensor[sc.plots] == sc.sensor)
        assert np.all(np.diff(plots.time[sc.plots]) >= 0) and sc.time == plots.time[sc.plots[-1]]


def test_sensor_with_and_without_scan_numbers_is_rejected(tmp_path):
    a = _write(tmp_path, CALDER_FEED_SCAN, "a.csv")
    b = _write(tmp_path, CALDER_FEED.replace("06:00:0", "06:01:0"), "b.csv")
    plots = read_feeds([a, b], SENSORS)
    with pytest.raises(InputError) as info:
        group_scans(plots, SENSORS)
    assert info.value.file == str(b) and info.value.field == "scan" and info.value.line == 2
