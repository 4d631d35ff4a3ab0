"""A feed read in blocks, its bulky columns on disk, its scans made block by block.

Long feeds stream through in blocks of lines (``table_reader.CSV_BLOCK_BYTES``),
the plot table's positions, sigma_m, scan numbers and lines go to a temporary
file (``io.plotstore``) and the scans are moved into the local frame a block
at a time (``scene.scans``). None of it may change a value, a line number or
an error: each test reads the same data with tiny blocks and with one block
and compares, the reference being the whole-file result.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest
from conftest import BAD_FEEDS, CALDER_FEED
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from strategies import plot_rows
from test_feeds import SENSORS, T0  # the two Calder radars and 2026-05-04T06:00:00Z

from harbourwatch.errors import InputError, OutputError
from harbourwatch.io import feeds, table_reader, text
from harbourwatch.io.columns import StoredColumn
from harbourwatch.io.feeds import PlotTable, group_scans, read_feeds, scan_arrays
from harbourwatch.io.plotstore import STORED, store_plot_columns

COLUMNS = ("time", "sensor", "lat_deg", "lon_deg", "scan", "sigma_m", "source", "line")


def _same(a: PlotTable, b: PlotTable) -> None:
    assert len(a) == len(b)
    for name in COLUMNS:
        np.testing.assert_array_equal(np.asarray(getattr(a, name)), np.asarray(getattr(b, name)),
                                      err_msg=name)
    assert a.sha256 == b.sha256 and a.duplicates_dropped == b.duplicates_dropped


def _read(paths, block: int | None, monkeypatch, text_block: int | None = None) -> PlotTable:
    with monkeypatch.context() as m:
        if block is not None:
            m.setattr(table_reader, "CSV_BLOCK_BYTES", block)
        if text_block is not None:
            m.setattr(text, "BLOCK_BYTES", text_block)
        return read_feeds([str(p) for p in paths], SENSORS)


def _error(paths, block: int | None, monkeypatch, text_block: int | None = None) -> InputError:
    with pytest.raises(InputError) as info:
        _read(paths, block, monkeypatch, text_block)
    return info.value


def _feed(rows, *, iso: bool, crlf: bool = False, cr_only: bool = False,
          blank_every: int = 0) -> bytes:
    eol = "\r\n" if crlf else ("\r" if cr_only else "\n")
    out = ["time,sensor,lat,lon,sigma_m"]
    for k, (ms, sensor, lat, lon, sigma) in enumerate(rows):
        if iso:
            whole, frac = divmod(ms, 1000)
            import datetime as dt

            t = dt.datetime.fromtimestamp(whole, dt.UTC).strftime("%Y-%m-%dT%H:%M:%S")
            t = f"{t}.{frac:03d}Z"
        else:
            t = f"{ms / 1000:.3f}"
        out.append(f"{t},{sensor},{lat!r},{lon!r},{'' if sigma is None else repr(sigma)}")
        if blank_every and k % blank_every == 0:
            out.append(",,,,")  # a row of empty fields: skipped, but it counts as a line
    return (eol.join(out) + eol).encode()


# --- blocks of lines ----------------------------------------------------------------------


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=plot_rows(["calder-head", "sound-light"], max_rows=40), iso=st.booleans(),
       ending=st.sampled_from(["lf", "crlf", "cr"]), blank=st.sampled_from([0, 3]),
       block=st.integers(1, 400), gz=st.booleans())
def test_any_block_size_gives_the_same_table(tmp_path, monkeypatch, rows, iso, ending, blank,
                                             block, gz):
    data = _feed(rows, iso=iso, crlf=ending == "crlf", cr_only=ending == "cr", blank_every=blank)
    p = tmp_path / ("f.csv.gz" if gz else "f.csv")
    p.write_bytes(gzip.compress(data, mtime=0) if gz else data)
    whole = _read([p], None, monkeypatch)
    small = _read([p], block, monkeypatch, text_block=max(16, block // 3))  # >= the magic bytes
    _same(whole, small)
    assert len(whole) <= len(rows)  # exact duplicates dropped, nothing invented


@pytest.mark.parametrize("case", BAD_FEEDS, ids=[c[0] for c in BAD_FEEDS])
@pytest.mark.parametrize("block", [1, 40, 97])
def test_errors_are_the_same_in_any_block(tmp_path, monkeypatch, case, block):
    _, feed, line, field, words = case
    p = tmp_path / "bad.csv"
    p.write_text(feed)
    whole = _error([p], None, monkeypatch)
    small = _error([p], block, monkeypatch, text_block=16)
    assert (small.line, small.field, str(small)) == (whole.line, whole.field, str(whole))
    assert (whole.line, whole.field) == (line, field) and words in str(whole)


def test_a_bad_row_far_into_a_long_feed_names_its_line(tmp_path, monkeypatch):
    rows = [f"{T0 + 0.5 * k:.3f},calder-head,54.31,10.15," for k in range(5000)]
    rows[4321] = rows[4321].replace("54.31", "north")
    p = tmp_path / "long.csv"
    p.write_text("time,sensor,lat,lon,sigma_m\n" + "\n".join(rows) + "\n")
    err = _error([p], 1000, monkeypatch, text_block=333)
    assert (err.line, err.field) == (4321 + 2, "lat") and "found 'north'" in str(err)


def test_time_form_is_the_files_first_row_in_every_block(tmp_path, monkeypatch):
    # the first data row gives epoch seconds: an ISO time in a later block is a mixed form
    rows = [f"{T0 + k:.1f},calder-head,54.31,10.15," for k in range(400)]
    rows[300] = "2026-05-04T06:05:00Z,calder-head,54.31,10.15,"
    p = tmp_path / "mixed.csv"
    p.write_text("time,sensor,lat,lon,sigma_m\n" + "\n".join(rows) + "\n")
    err = _error([p], 500, monkeypatch)
    assert (err.line, err.field) == (302, "time") and "mixes time forms" in str(err)


def test_nul_byte_in_a_later_read_block_names_line_and_field(tmp_path, monkeypatch):
    body = b"".join(f"{T0 + k:.1f},calder-head,54.31,10.15,\n".encode() for k in range(300))
    data = (b"time,sensor,lat,lon,sigma_m\n" + body + f"{T0 + 400}.0,calder-head,54.3".encode()
            + b"\0" + b",10.15,\n")
    lines_before = 1 + body.count(b"\n")
    p = tmp_path / "nul.csv"
    p.write_bytes(data)
    err = _error([p], 256, monkeypatch, text_block=64)
    assert err.line == lines_before + 1 and err.field == "lat" and "NUL byte" in str(err)


# --- the plot columns on disk ----------------------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 3000), seed=st.integers(0, 2**32 - 1))
def test_stored_column_indexes_like_the_array(n, seed):
    rng = np.random.default_rng(seed)
    table = PlotTable(
        time=np.sort(rng.uniform(0, 100, n)), sensor=rng.integers(0, 2, n),
        lat_deg=rng.uniform(-90, 90, n), lon_deg=rng.uniform(-180, 180, n),
        scan=rng.integers(-1, 50, n), sigma_m=np.where(rng.random(n) < 0.3, np.nan, 5.0),
        source=np.zeros(n, np.int64), line=np.arange(2, n + 2), files=("f.csv",))
    stored, _ = store_plot_columns(table)
    for name in STORED:
        col, ref = getattr(stored, name), getattr(table, name)
        assert isinstance(col, StoredColumn) and len(col) == n and col.dtype == ref.dtype
        np.testing.assert_array_equal(np.asarray(col), ref)
        k = int(rng.integers(-n, n))
        assert col[k] == ref[k] or (np.isnan(col[k]) and np.isnan(ref[k]))
        a, b = sorted(rng.integers(0, n + 1, 2).tolist())
        np.testing.assert_array_equal(col[a:b], ref[a:b])
        np.testing.assert_array_equal(col[::7], ref[::7])
        mask = rng.random(n) < 0.2
        np.testing.assert_array_equal(col[mask], ref[mask])
        sparse = rng.integers(0, n, int(rng.integers(0, 5)))  # few rows far apart: the mapped path
        np.testing.assert_array_equal(col[sparse], ref[sparse])
        dense = np.sort(rng.integers(max(0, n // 2 - 20), n // 2 + 1, 30))
        np.testing.assert_array_equal(col[dense], ref[dense])
    with pytest.raises(IndexError):
        stored.lat_deg[n]


def test_plot_file_in_a_folder_that_cannot_be_written_is_an_output_error(tmp_path):
    table = read_feeds([str(_write_feed(tmp_path))], SENSORS)
    with pytest.raises(OutputError) as info:
        store_plot_columns(table, folder=str(tmp_path / "missing"))
    assert "TMPDIR" in str(info.value)


def _write_feed(tmp_path: Path) -> Path:
    p = tmp_path / "calder.csv"
    p.write_text(CALDER_FEED)
    return p


def test_stored_table_groups_and_converts_like_the_array_table(tmp_path):
    from harbourwatch.scene.build import sensor_models
    from harbourwatch.scene.geodesy import LocalFrame
    from harbourwatch.scene.scans import ScanStream, local_plots

    rng = np.random.default_rng(7)
    n = 2000
    table = PlotTable(
        time=np.sort(rng.uniform(T0, T0 + 600, n)), sensor=rng.integers(0, 2, n),
        lat_deg=54.3 + rng.normal(0, 0.05, n), lon_deg=10.15 + rng.normal(0, 0.08, n),
        scan=np.full(n, -1), sigma_m=np.where(rng.random(n) < 0.5, np.nan, 12.0),
        source=np.zeros(n, np.int64), line=np.arange(2, n + 2), files=("f.csv",))
    scans = group_scans(table, SENSORS)
    stored, _ = store_plot_columns(table)
    frame = LocalFrame.around([s.lat_deg for s in SENSORS], [s.lon_deg for s in SENSORS])
    models = sensor_models(SENSORS, frame)
    # the reference: every plot converted at once, then cut per scan
    z_all, R_all = local_plots(table, np.arange(n), models, SENSORS, frame)
    for block in (1, 5, 1000):
        stream = ScanStream(stored, scans, models, SENSORS, frame, block=block)
        assert len(stream) == len(scans)
        assert stream.order_keys() == [(sc.time, sc.sensor) for sc in scans]
        for k in [*range(len(scans)), 3, 0]:  # in order, then back to earlier blocks
            ms, sc = stream[k], scans[k]
            np.testing.assert_array_equal(ms.plot_ids, sc.plots)
            np.testing.assert_array_equal(ms.plot_time, table.time[sc.plots])
            np.testing.assert_array_equal(ms.z, z_all[sc.plots])  # bit for bit
            np.testing.assert_array_equal(ms.R, R_all[sc.plots])
            assert ms.sensor == sc.sensor and ms.time == sc.time


@settings(max_examples=30, deadline=None)
@given(n=st.integers(0, 2500), seed=st.integers(0, 2**32 - 1), numbered=st.booleans())
def test_scan_table_gives_the_scans_of_group_scans(n, seed, numbered):
    from harbourwatch.io.feeds import scan_arrays

    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(T0, T0 + 300, n))
    table = PlotTable(
        time=t, sensor=rng.integers(0, 2, n), lat_deg=np.full(n, 54.3), lon_deg=np.full(n, 10.15),
        scan=(np.floor((t - T0) / 2.7).astype(np.int64) if numbered else np.full(n, -1)),
        sigma_m=np.full(n, np.nan), source=np.zeros(n, np.int64), line=np.arange(2, n + 2),
        files=("f.csv",))
    listed = group_scans(table, SENSORS)
    _, stored = store_plot_columns(table, scans=scan_arrays(table, SENSORS))
    assert stored is not None and len(stored) == len(listed)
    walked = list(stored)
    picks = [0, len(listed) // 2, -1] if listed else []
    pairs = [*zip(walked, listed, strict=True), *((stored[k], listed[k]) for k in picks),
             *zip(stored[1:6], listed[1:6], strict=True)]
    for a, b in pairs:
        assert (a.sensor, a.number, a.time) == (b.sensor, b.number, b.time)
        np.testing.assert_array_equal(a.plots, b.plots)
    # every plot in exactly one scan
    assert sorted(np.concatenate([sc.plots for sc in walked]).tolist() if walked else []) == list(range(n))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data(), n=st.integers(0, 300), split=st.integers(1, 3))
def test_order_and_duplicates_equal_a_full_lexsort(tmp_path, data, n, split):
    # few distinct times (a radar stamping whole revolutions at once), repeated rows
    seed = data.draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    t = T0 + rng.integers(0, 6, n) * 2.5
    sensor = rng.integers(0, 2, n)
    lat = 54.3 + rng.integers(0, 4, n) * 1e-3
    lon = 10.15 + rng.integers(0, 4, n) * 1e-3
    sigma = np.where(rng.random(n) < 0.5, np.nan, 5.0)
    names = np.array(["calder-head", "sound-light"])
    lines = [f"{t[k]:.1f},{names[sensor[k]]},{lat[k]:.4f},{lon[k]:.4f},"
             f"{'' if np.isnan(sigma[k]) else '5.0'}" for k in range(n)]
    cuts = sorted(rng.integers(0, n + 1, split - 1).tolist())
    paths = []
    for i, (a, b) in enumerate(zip([0, *cuts], [*cuts, n], strict=True)):
        p = tmp_path / f"part{i}.csv"
        p.write_text("time,sensor,lat,lon,sigma_m\n" + "".join(x + "\n" for x in lines[a:b]))
        paths.append(p)
    got = read_feeds([str(p) for p in paths], SENSORS)
    with pytest.MonkeyPatch.context() as m:  # long columns are put in order a slice at a time
        m.setattr(feeds, "_GATHER_ROWS", 7)
        sliced = read_feeds([str(p) for p in paths], SENSORS)
        sliced_scans = scan_arrays(sliced, SENSORS)
    _same(got, sliced)
    whole_scans = scan_arrays(got, SENSORS)
    for name in ("sensor", "number", "time", "offsets", "rows"):
        np.testing.assert_array_equal(getattr(sliced_scans, name), getattr(whole_scans, name))
    # the reference: numpy's lexsort over every column at once (file, then line last), then the
    # first of each run of rows equal in the six contract fields
    src = np.concatenate([np.full(b - a, i) for i, (a, b) in
                          enumerate(zip([0, *cuts], [*cuts, n], strict=True))]).astype(int)
    line = np.concatenate([np.arange(2, 2 + b - a) for a, b in
                           zip([0, *cuts], [*cuts, n], strict=True)]).astype(int)
    tt = np.array([float(f"{x:.1f}") for x in t]) if n else np.empty(0)
    la = np.array([float(f"{x:.4f}") for x in lat]) if n else np.empty(0)
    lo = np.array([float(f"{x:.4f}") for x in lon]) if n else np.empty(0)
    order = np.lexsort((line, src, sigma, np.full(n, -1), lo, la, sensor, tt))
    seen, keep = set(), []
    for k in order:
        key = (tt[k], sensor[k], la[k], lo[k], -1 if np.isnan(sigma[k]) else sigma[k])
        keep.append(key not in seen)
        seen.add(key)
    kept = order[np.array(keep, bool)] if n else order
    np.testing.assert_array_equal(np.asarray(got.line), line[kept])
    np.testing.assert_array_equal(np.asarray(got.source), src[kept])
    np.testing.assert_array_equal(got.time, tt[kept])
    assert got.duplicates_dropped == n - kept.size


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_input_checks_in_blocks_give_the_whole_feeds_warnings(seed):
    from harbourwatch.scene.build import sensor_models
    from harbourwatch.scene.checks import InputChecks, input_warnings
    from harbourwatch.scene.geodesy import LocalFrame

    rng = np.random.default_rng(seed)
    n = 3000
    frame = LocalFrame.around([s.lat_deg for s in SENSORS], [s.lon_deg for s in SENSORS])
    models = sensor_models(SENSORS, frame)
    # plots of sensor 1 far outside its cover, a fifth of sensor 0's sigma_m far below its model
    sensor = rng.integers(0, 2, n)
    xy = rng.normal(0, 5000, (n, 2)) + np.where(sensor[:, None] == 1, 90_000.0, 0.0)
    sigma = np.where((sensor == 0) & (rng.random(n) < 0.2), 0.05, np.nan)
    table = PlotTable(time=np.arange(n, dtype=float), sensor=sensor, lat_deg=np.zeros(n),
                      lon_deg=np.zeros(n), scan=np.full(n, -1), sigma_m=sigma,
                      source=np.zeros(n, np.int64), line=np.arange(2, n + 2), files=("f",))
    whole = input_warnings(table, SENSORS, models, xy)
    assert len(whole) >= 2  # the far sensor and the sigma_m line both fire
    for block in (1, 17, 1000):
        checks = InputChecks(SENSORS, models)
        for a in range(0, n, block):
            checks.add(sensor[a:a + block], sigma[a:a + block], xy[a:a + block])
        assert checks.warnings() == whole
