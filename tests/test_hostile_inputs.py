"""Unreadable and hostile inputs: refused fast, with file and line, reading each input once.

Bounds are stated in data, not in seconds: a feed fed through a FIFO by a
writer that would never stop shows how many bytes the reader took before it
refused (at most its first block and the pipe's buffer).
"""

from __future__ import annotations

import gzip
import json
import os
import threading
from pathlib import Path

import numpy as np
import pytest
from conftest import CALDER_FEED, CalderFiles

from harbourwatch.cli import main
from harbourwatch.errors import InputError
from harbourwatch.io.atomic import sha256_file
from harbourwatch.io.inputs import load_inputs
from harbourwatch.io.text import BLOCK_BYTES

#: Linux pipe buffer (pipe(7): 16 pages, 65,536 bytes by default), from memory.
PIPE_BUFFER = 1 << 16


def _load(c: CalderFiles, feed: str | Path | None = None, **kw):
    return load_inputs([feed or c.feed], sensors=c.sensors, zones=c.zones, rules=c.rules, **kw)


class EndlessWriter:
    """Writes ``block`` into a FIFO forever (until the reader closes it); counts the bytes."""

    def __init__(self, fifo: Path, block: bytes, head: bytes = b"") -> None:
        self.fifo, self.block, self.head = fifo, block, head
        self.written = 0
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _run(self) -> None:
        fd = os.open(self.fifo, os.O_WRONLY)  # waits for the reader
        try:
            if self.head:
                self.written += os.write(fd, self.head)
            while self.block and self.written < 1 << 34:  # 16 GiB: beyond any accepted feed
                self.written += os.write(fd, self.block)
        except BrokenPipeError:
            pass
        finally:
            os.close(fd)


@pytest.fixture
def fifo(tmp_path) -> Path:
    path = tmp_path / "stream.csv"
    os.mkfifo(path)
    return path


@pytest.mark.parametrize(("block", "words"), [
    (b"\0" * 65536, "NUL byte"),                       # a NUL flood, like /dev/zero
    (b"x" * 65536, "no line break in the first MiB"),  # text without lines
])
def test_endless_unreadable_stream_refused_after_the_first_mib(calder, fifo, block, words):
    writer = EndlessWriter(fifo, block)
    with pytest.raises(InputError) as info:
        _load(calder, fifo)
    writer.thread.join(timeout=60)
    assert not writer.thread.is_alive()
    assert words in info.value.message and info.value.file == str(fifo)
    assert info.value.line == 1
    # bounded by data: the reader stopped after its first MiB and a block
    assert writer.written <= (1 << 20) + BLOCK_BYTES + PIPE_BUFFER + len(block)


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="no /dev/zero")
def test_dev_zero_as_feed_exits_2(calder, capsys):
    status = main(["run", "/dev/zero", "--sensors", str(calder.sensors), "--zones",
                   str(calder.zones), "--rules", str(calder.rules), "--out",
                   str(calder.dir / "out"), "--quiet"])
    err = capsys.readouterr().err
    assert status == 2 and "/dev/zero, line 1: NUL byte" in err
    assert not (calder.dir / "out").exists()


def test_random_bytes_refused_with_line(calder):
    data = np.random.default_rng(14).bytes(4 << 20)
    calder.feed.write_bytes(data)
    with pytest.raises(InputError) as info:
        _load(calder)
    assert "NUL byte" in info.value.message or "not valid UTF-8" in info.value.message
    # the line of the first offending byte, counted by hand from the data
    first_bad = min(i for i in (data.find(b"\0"), 10**9) if i >= 0)
    try:
        data[:first_bad].decode("utf-8")
    except UnicodeDecodeError as exc:
        first_bad = exc.start
    assert info.value.line == data[:first_bad].count(b"\n") + 1


def test_nul_after_good_lines_names_its_line(calder):
    calder.feed.write_bytes(CALDER_FEED.encode().replace(b"54.3101", b"54.3\x0001"))
    with pytest.raises(InputError) as info:
        _load(calder)
    assert info.value.line == 4 and "NUL" in info.value.message


def test_gzip_of_nul_flood_refused_in_the_first_block(calder):
    # 64 MiB of zeros compress to about 64 kB; only the first block is ever decompressed
    path = calder.dir / "bomb.csv.gz"
    path.write_bytes(gzip.compress(b"\0" * (64 << 20), compresslevel=1))
    with pytest.raises(InputError) as info:
        _load(calder, path)
    assert "NUL byte at byte 1" in info.value.message


def test_truncated_gzip_refused(calder):
    path = calder.dir / "cut.csv.gz"
    path.write_bytes(gzip.compress(CALDER_FEED.encode())[:-12])
    with pytest.raises(InputError, match="truncated|gzip"):
        _load(calder, path)


def test_cr_only_line_ends_read_like_lf(calder):
    lf = _load(calder)
    calder.feed.write_bytes(CALDER_FEED.replace("\n", "\r").encode())
    cr = _load(calder)
    for name in ("time", "lat_deg", "lon_deg", "sigma_m", "line", "sensor"):
        np.testing.assert_array_equal(getattr(cr.plots, name), getattr(lf.plots, name))


def test_cr_only_bad_value_names_its_line(calder):
    calder.feed.write_bytes(CALDER_FEED.replace("54.3101", "north").replace("\n", "\r").encode())
    with pytest.raises(InputError) as info:
        _load(calder)
    assert (info.value.line, info.value.field) == (4, "lat")


def test_header_only_feed_without_final_newline_is_an_empty_feed(calder, capsys):
    calder.feed.write_text("time,sensor,lat,lon")
    assert len(_load(calder).plots) == 0
    out = calder.dir / "out"
    status = main(["run", str(calder.feed), "--sensors", str(calder.sensors), "--zones",
                   str(calder.zones), "--rules", str(calder.rules), "--out", str(out), "--quiet"])
    assert status == 0, capsys.readouterr().err
    assert (out / "tracks.csv").read_text().count("\n") == 1  # the header only


def test_last_row_without_final_newline_is_read(calder):
    calder.feed.write_text(CALDER_FEED.rstrip("\n"))
    assert len(_load(calder).plots) == 4


def test_fifo_feed_is_read_once(calder, fifo):
    data = CALDER_FEED.encode()
    writer = EndlessWriter(fifo, b"", head=data)  # the feed once, then end of file

    inp = _load(calder, fifo)
    writer.thread.join(timeout=60)
    assert len(inp.plots) == 4  # the header was not lost to a first look at the magic bytes
    assert inp.checksums[str(fifo)] == sha256_file(calder.feed)  # same bytes as the file


@pytest.mark.parametrize("which", ["zones", "sensors"])
def test_nested_100000_levels_exit_2_naming_the_file(calder, capsys, which):
    target = getattr(calder, which)
    if which == "zones":
        target.write_text("[" * 100_000 + "]" * 100_000)
    else:
        target.write_text("a = " + "[" * 100_000 + "]" * 100_000 + "\n")
    status = main(["run", str(calder.feed), "--sensors", str(calder.sensors), "--zones",
                   str(calder.zones), "--rules", str(calder.rules), "--out",
                   str(calder.dir / "out"), "--quiet"])
    err = capsys.readouterr().err
    assert status == 2 and f"error: {target}" in err and "nested too deeply" in err


@pytest.mark.parametrize(("key", "value"), [
    ("max_range_m", "99999999999999999999999"),
    ("max_range_m", "1e300"),
    ("scan_period_s", str(2**70)),
    ("false_plots_per_scan", "1e12"),
])
def test_huge_sensor_numbers_refused_with_line(calder, key, value):
    text = calder.sensors_text
    old = next(ln for ln in text.splitlines() if ln.startswith(key))
    calder.sensors.write_text(text.replace(old, f"{key} = {value}", 1))
    with pytest.raises(InputError) as info:
        _load(calder)
    line = text.splitlines().index(old) + 1
    assert (info.value.file, info.value.line, info.value.field) == (str(calder.sensors), line, key)


def test_huge_sigma_refused_with_line(calder):
    calder.feed.write_text(CALDER_FEED.replace(",25\n", ",1e308\n"))
    with pytest.raises(InputError) as info:
        _load(calder)
    assert (info.value.line, info.value.field) == (3, "sigma_m")


def test_zone_file_read_once_and_checksummed(calder):
    inp = _load(calder)
    for path in (calder.sensors, calder.zones, calder.rules, calder.feed):
        assert inp.checksums[str(path)] == sha256_file(path)


# --- time gaps ------------------------------------------------------------------------------

def _with_row(text: str, row: str, at: int) -> str:
    rows = text.splitlines()
    rows.insert(at, row)
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize(("stamp", "at", "line"), [
    ("1970-01-01T00:00:00.000Z", 1, 2),   # a reset clock among 2026 plots: first after sorting
    ("2090-05-04T06:00:03.000Z", 5, 6),   # decades later: last after sorting
    ("2026-05-04T05:00:00.000Z", 3, 4),   # one hour early only: a short gap, accepted
])
def test_isolated_time_refused_with_its_line(calder, stamp, at, line):
    calder.feed.write_text(_with_row(CALDER_FEED, f"{stamp},calder-head,54.31,10.15,", at))
    if stamp.startswith("2026"):
        assert len(_load(calder).plots) == 5 and _load(calder).warnings == ()
        return
    with pytest.raises(InputError) as info:
        _load(calder)
    assert (info.value.file, info.value.line, info.value.field) == (str(calder.feed), line, "time")
    assert "isolated time" in info.value.message and "--allow-gaps" in info.value.message


def test_allow_gaps_runs_and_warns(calder, capsys):
    calder.feed.write_text(
        _with_row(CALDER_FEED, "1970-01-01T00:00:00.000Z,calder-head,54.31,10.15,", 1))
    out = calder.dir / "out"
    argv = ["run", str(calder.feed), "--sensors", str(calder.sensors), "--zones",
            str(calder.zones), "--rules", str(calder.rules), "--out", str(out), "--quiet"]
    assert main(argv) == 2 and not out.exists()
    assert "line 2, field 'time'" in capsys.readouterr().err
    assert main([*argv, "--allow-gaps"]) == 0
    text = capsys.readouterr().out
    warnings = [w for w in json.loads((out / "run.json").read_text())["warnings"]
                if w.startswith("feed gap")]  # (this tiny feed also has far less clutter)
    # 1970-01-01 to 2026-05-04T06:00Z: 1777874400 s (Python's calendar.timegm) = 56.3 years
    assert len(warnings) == 1 and "feed gap of 56.3 years" in warnings[0]
    assert f"line 2 of {calder.feed}" in warnings[0] and warnings[0] in text
