"""Private helpers of :mod:`harbourwatch.io.feeds`: reading one file, checking columns.

The fast path casts whole pyarrow columns at once; only when a cast fails is
the first failing row located, by bisection with the same cast, so the
reported row is exactly the one the fast path could not read.
"""

from __future__ import annotations

import csv
import ctypes
import io
import re
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
from numpy.typing import NDArray

from harbourwatch.errors import InputError
from harbourwatch.io.text import FEED_MAX_BYTES, InputStream, stream_input

REQUIRED = ("time", "sensor", "lat", "lon")
OPTIONAL = ("scan", "sigma_m")
_ZONE_RE = r"(?:Z|[+-]\d\d:?\d\d)$"
_DATE_RE = re.compile(r"^\s*[+-]?\d{4}-\d\d")
#: Epoch seconds accepted: 1970 up to year 2286 (pandas/pyarrow nanosecond range).
_EPOCH_MAX = 1e10


@dataclass(frozen=True)
class Problem:
    """The first bad row of one column: 0-based row, column, message."""

    row: int
    field: str
    message: str


@dataclass(frozen=True)
class Table:
    """One feed file's contract columns as pyarrow arrays, blank rows removed."""

    columns: dict[str, pa.ChunkedArray]
    lines: NDArray[np.int64]
    parquet: bool
    sha256: str = ""

    @property
    def num_rows(self) -> int:
        return int(self.lines.size)


def _check_header(names: Sequence[str], path: str) -> list[str]:
    present = [c for c in (*REQUIRED, *OPTIONAL) if c in names]
    for c in present:
        if list(names).count(c) > 1:
            raise InputError("column appears more than once in the header",
                             file=path, line=1, field=c)
    for c in REQUIRED:
        if c not in names:
            found = ", ".join(repr(n) for n in names) or "none"
            raise InputError(
                f"missing required column (required: {', '.join(REQUIRED)}; found: {found})",
                file=path, line=1, field=c)
    return present


def _locate_bad_row(data: bytes, path: str, width: int, header: list[str],
                    shift: int = 0) -> InputError | None:
    """Slow path after a failed CSV read: find the first ragged line.

    ``data`` starts with the header line; ``shift`` is added to its line
    numbers (a later block of a file, with the header put in front).
    """
    reader = csv.reader(io.StringIO(data.decode("utf-8-sig"), newline=""))
    try:
        for row in reader:
            if reader.line_num == 1 or row == [] or (len(row) == 1 and row[0] == ""):
                continue
            if len(row) != width:
                return _ragged(path, reader.line_num + shift, width, len(row), header)
    except csv.Error as exc:
        return InputError(f"cannot read as CSV: {exc}", file=path, line=reader.line_num + shift)
    return None


def _ragged(path: str, line: int, width: int, found: int, header: list[str]) -> InputError:
    field = header[found] if found < width else f"column {width + 1}"
    return InputError(f"expected {width} fields as in the header, found {found}",
                      file=path, line=line, field=field)


#: Bytes of CSV text parsed at a time: a long feed streams through in blocks of whole lines.
CSV_BLOCK_BYTES = 16 << 20


def _cr_only(data: bytes, final: bool) -> bool | None:
    """Whether the file's lines end with CR alone, by its first line break (``None``: not yet seen)."""
    lf, cr = data.find(b"\n"), data.find(b"\r")
    if cr < 0 or (0 <= lf < cr):
        return False if lf >= 0 or final else None
    if cr + 1 < len(data):
        return data[cr + 1 : cr + 2] != b"\n"
    return True if final else None


def _csv_blocks(blocks: Iterator[bytes]) -> Iterator[bytes]:
    """The text in blocks of whole lines of about :data:`CSV_BLOCK_BYTES`, each ending with LF.

    Classic Mac line ends (CR only: the first line break is a CR without LF) become LF; a
    last line without its line break gets one. A line longer than a block
    makes a block of its own.
    """
    pending: list[bytes] = []
    size = 0
    cr_only: bool | None = None
    rest = b""

    def lines_of(data: bytes, final: bool) -> Iterator[bytes]:
        nonlocal cr_only, rest
        if cr_only is None:
            cr_only = _cr_only(data, final)
            if cr_only is None:  # no line break yet: wait for more
                rest = data
                return
        if cr_only:
            data = data.replace(b"\r", b"\n")
        pos, target = 0, max(1, CSV_BLOCK_BYTES)
        while len(data) - pos >= target:
            cut = data.rfind(b"\n", pos, pos + target) + 1
            if cut <= pos:
                cut = data.find(b"\n", pos + target) + 1
                if cut <= 0:
                    break
            yield data[pos:cut]
            pos = cut
        rest = data[pos:]
        if final:
            if rest and not rest.endswith(b"\n"):
                rest += b"\n"  # a last line without its line break (a header-only file included)
            if rest:
                yield rest

    for b in blocks:
        pending.append(b)
        size += len(b)
        if size >= CSV_BLOCK_BYTES:
            data = rest + b"".join(pending)
            pending, size = [], 0
            yield from lines_of(data, final=False)
    yield from lines_of(rest + b"".join(pending), final=True)


def _read_csv(path: str, stream: InputStream) -> Iterator[Table]:
    """One CSV feed (plain or gzip) as tables of consecutive lines, checked as they stream past."""
    blocks = _csv_blocks(stream.blocks)
    data = next(blocks, b"")
    if not data.strip():
        raise InputError("empty file: no header line (expected the columns "
                         f"{', '.join(REQUIRED)})", file=path, line=1)
    first_line = data.split(b"\n", 1)[0]
    first = first_line.decode("utf-8-sig").rstrip("\r")
    try:
        header = next(csv.reader([first]), [])
    except csv.Error as exc:
        raise InputError(f"cannot read the header as CSV: {exc}", file=path, line=1) from None
    present = _check_header(header, path)
    line0 = 2  # the physical line of the block's first data line
    shift = 0  # line numbers in a block (header first) to line numbers in the file
    while True:
        table = _read_csv_block(path, data, header, present, line0, shift)
        line0 += data.count(b"\n") - 1  # every line of a block ends with LF; one is the header
        shift = line0 - 2
        yield table
        nxt = next(blocks, None)
        if nxt is None:
            return
        data = first_line + b"\n" + nxt


def _read_csv_block(path: str, data: bytes, header: list[str], present: list[str],
                    line0: int, shift: int) -> Table:
    """One block of whole lines (header first) into a :class:`Table` with file line numbers."""
    ragged: list[tuple[int | None, int, int]] = []

    def on_invalid(row: pacsv.InvalidRow) -> str:
        if not ragged:
            ragged.append((row.number, row.expected_columns, row.actual_columns))
        return "skip"

    try:
        table = pacsv.read_csv(
            pa.BufferReader(data),
            read_options=pacsv.ReadOptions(use_threads=False),
            parse_options=pacsv.ParseOptions(ignore_empty_lines=False,
                                             invalid_row_handler=on_invalid),
            convert_options=pacsv.ConvertOptions(
                column_types={c: pa.string() for c in present}, include_columns=present,
                strings_can_be_null=False, quoted_strings_can_be_null=False),
        )
    except (pa.ArrowException, OSError, ValueError) as exc:
        located = _locate_bad_row(data, path, len(header), header, shift)
        raise (located or InputError(f"cannot read as CSV: {exc}", file=path)) from None
    if ragged:
        number, width, found = ragged[0]
        if number is None:
            located = _locate_bad_row(data, path, len(header), header, shift)
            if located is not None:
                raise located
        raise _ragged(path, number + shift, width, found, header) if number else InputError(
            f"expected {width} fields as in the header, found {found}", file=path)
    n = table.num_rows
    lines = np.arange(line0, line0 + n, dtype=np.int64)
    if n:
        blank = np.ones(n, dtype=bool)
        for c in present:
            blank &= pc.equal(table[c], "").to_numpy(zero_copy_only=False)
        if blank.any():
            keep = ~blank
            table = table.filter(pa.array(keep))
            lines = lines[keep]
    return Table({c: table[c] for c in present}, lines, parquet=False)


def _read_parquet(path: str, data: bytes, sha256: str) -> Table:
    try:
        table = pq.read_table(pa.BufferReader(data))
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise InputError(f"cannot read as Parquet: {exc}", file=path) from None
    present = _check_header(table.column_names, path)
    cols = {}
    for c in present:
        arr = table[c]
        if pa.types.is_dictionary(arr.type):
            arr = arr.cast(arr.type.value_type)
        cols[c] = arr
    return Table(cols, np.arange(2, table.num_rows + 2, dtype=np.int64), parquet=True,
                 sha256=sha256)


def release_unused_memory() -> None:
    """Give the memory pyarrow's allocator keeps for reuse back to the system.

    Its pool keeps what a large read freed (about 400 MB after a 24-hour
    feed), which would otherwise stay in the process for the whole run. The
    C library's heap is trimmed too (glibc's ``malloc_trim``, where there is
    one): the read's scratch space goes back to the system instead of
    staying as the floor of the rest of the run.
    """
    pa.default_memory_pool().release_unused()
    _malloc_trim()


def _malloc_trim() -> None:
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(ctypes.c_size_t(0))
    except (OSError, AttributeError):  # not glibc (macOS, musl): nothing to trim
        pass


class FeedTables:
    """One feed file as consecutive :class:`Table` blocks, read once (iterate once).

    CSV streams through in blocks of :data:`CSV_BLOCK_BYTES`; Parquet is one
    block. :attr:`sha256` is the stored bytes' digest, known after the last block.
    """

    def __init__(self, path: str) -> None:
        self.path = path
        self._stream = stream_input(path, limit=FEED_MAX_BYTES, formats="feed")

    def __iter__(self) -> Iterator[Table]:
        try:
            if self._stream.kind == "parquet":
                yield _read_parquet(self.path, b"".join(self._stream.blocks), "")
            else:
                yield from _read_csv(self.path, self._stream)
        finally:
            self._stream.close()

    @property
    def sha256(self) -> str:
        return self._stream.sha256


def read_tables(path: str) -> FeedTables:
    """Open one feed file (CSV, gzip CSV or Parquet, by its first bytes) for reading in blocks."""
    return FeedTables(path)


def read_table(path: str) -> Table:
    """Read one feed file whole into a single :class:`Table` (the blocks concatenated)."""
    tables = read_tables(path)
    parts = list(tables)
    if len(parts) == 1:
        t = parts[0]
    else:
        t = Table({c: pa.chunked_array([c2 for p in parts for c2 in p.columns[c].chunks],
                                       parts[0].columns[c].type) for c in parts[0].columns},
                  np.concatenate([p.lines for p in parts]), parquet=False)
    return Table(t.columns, t.lines, parquet=t.parquet, sha256=tables.sha256)


# --- column checks -----------------------------------------------------------------------


def _is_text(t: pa.DataType) -> bool:
    return bool(pa.types.is_string(t) or pa.types.is_large_string(t))


def _first_failure(arr: pa.ChunkedArray, fn: Callable[[pa.ChunkedArray], object]) -> int:
    """Row of the first element of ``arr`` on which ``fn`` fails (``fn(arr)`` failed)."""
    lo, hi = 0, len(arr)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        try:
            fn(arr.slice(lo, mid - lo))
            lo = mid
        except (pa.ArrowException, ValueError):
            hi = mid
    return lo


def _to_numpy(arr: pa.ChunkedArray | pa.Array, dtype: type) -> NDArray:
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks() if arr.num_chunks else pa.array([], arr.type)
    return np.asarray(arr.to_numpy(zero_copy_only=False), dtype=dtype)


def _value(arr: pa.ChunkedArray, row: int) -> str:
    v = arr[row].as_py()
    return "''" if v is None else repr(v)


def _cast_float(arr: pa.ChunkedArray) -> tuple[NDArray[np.float64], int | None]:
    """Cast to float64; NaN for nulls. On failure, values up to the failing row."""
    n = len(arr)
    try:
        return _to_numpy(pc.cast(arr, pa.float64()), np.float64), None
    except (pa.ArrowException, ValueError):
        bad = _first_failure(arr, lambda a: pc.cast(a, pa.float64()))
        out = np.full(n, np.nan)
        out[:bad] = _to_numpy(pc.cast(arr.slice(0, bad), pa.float64()), np.float64)
        return out, bad


def parse_float(
    arr: pa.ChunkedArray, *, field: str, lo: float, hi: float, what: str,
    lo_open: bool = False, integer: bool = False, optional: bool = False,
) -> tuple[NDArray[np.float64], Problem | None]:
    """Numbers in ``[lo, hi]`` (``(lo, hi]`` when ``lo_open``); NaN where absent."""
    n = len(arr)
    failed: int | None = None
    if _is_text(arr.type):
        arr = arr.fill_null("")
        if optional:
            arr = pc.if_else(pc.equal(arr, ""), pa.scalar(None, pa.string()), arr)
        values, failed = _cast_float(arr)
    elif pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type):
        values = _to_numpy(pc.cast(arr, pa.float64()), np.float64)
    else:
        return np.full(n, np.nan), Problem(0, field, f"expected {what}, found a column of "
                                                    f"type {arr.type}")
    upto = n if failed is None else failed
    v = values[:upto]
    with np.errstate(invalid="ignore"):
        ok = (v > lo if lo_open else v >= lo) & (v <= hi)
        if integer:
            ok &= v == np.floor(v)
    if optional:
        ok |= np.isnan(v)
    if not ok.all():
        failed = int(np.argmax(~ok))
    if failed is None:
        return values, None
    raw = arr[failed].as_py()
    if raw is None or raw == "" or (isinstance(raw, float) and np.isnan(raw)):
        return values, Problem(failed, field, f"empty value, expected {what}")
    return values, Problem(failed, field, f"expected {what}, found {raw!r}")


def _micro_to_seconds(us: NDArray[np.int64]) -> NDArray[np.float64]:
    # Whole seconds and the microsecond remainder separately: both time forms
    # give the same float for the same instant.
    return (us // 1_000_000).astype(np.float64) + (us % 1_000_000).astype(np.float64) / 1e6


def _epoch(values: NDArray[np.float64]) -> NDArray[np.float64]:
    # out-of-range values are reported by the caller's range check; here they
    # only must not overflow the integer conversion
    ok = np.isfinite(values) & (np.abs(values) < 1e12)
    us = np.round(np.where(ok, values, 0.0) * 1e6).astype(np.int64)
    return _micro_to_seconds(us)


def time_form(arr: pa.ChunkedArray) -> bool | None:
    """Whether a text time column's first value is epoch seconds (``None``: not text, or empty).

    The first data row of a file sets its form: give it to :func:`parse_time`
    for every later block of the same file.
    """
    if not _is_text(arr.type) or len(arr) == 0:
        return None
    first_raw = arr.fill_null("")[0].as_py()
    try:
        float(pc.cast(pa.array([first_raw]), pa.float64())[0].as_py())
        return True
    except (pa.ArrowException, ValueError, TypeError):
        return False


def parse_time(arr: pa.ChunkedArray, *, epoch_form: bool | None = None,
               ) -> tuple[NDArray[np.float64], Problem | None]:
    """Times as epoch seconds (microsecond resolution), one form per file.

    ``epoch_form`` is the file's form (:func:`time_form` of its first block);
    by default this column's first value sets it.
    """
    n = len(arr)
    epoch_what = "epoch seconds (a number from 0 to 1e10)"
    if pa.types.is_timestamp(arr.type):
        if arr.type.tz is None:
            return np.zeros(n), Problem(0, "time", "time without a zone designator "
                                                   "(Parquet timestamp has no time zone)")
        us = _to_numpy(pc.cast(arr, pa.timestamp("us", "UTC")).cast(pa.int64()), np.int64)
        return _micro_to_seconds(us), None
    if not _is_text(arr.type):
        values, p = parse_float(arr, field="time", lo=0.0, hi=_EPOCH_MAX, what=epoch_what)
        return _epoch(values), p
    arr = arr.fill_null("")
    if n == 0:
        return np.zeros(0), None
    if epoch_form is None:
        epoch_form = bool(time_form(arr))
    if epoch_form:
        values, p = parse_float(arr, field="time", lo=0.0, hi=_EPOCH_MAX, what=epoch_what)
        if p is not None and _DATE_RE.match(str(arr[p.row].as_py())):
            p = Problem(p.row, "time", "this file mixes time forms: its first data row gives "
                        f"epoch seconds, this row an ISO 8601 time {_value(arr, p.row)}; use "
                        "one form per file")
        return _epoch(values), p
    # ISO 8601 with a zone designator.
    zoned = _to_numpy(pc.match_substring_regex(arr, _ZONE_RE), bool)
    upto = n if zoned.all() else int(np.argmax(~zoned))
    head = arr.slice(0, upto)
    ns_type = pa.timestamp("ns", "UTC")
    try:
        stamps = pc.cast(head, ns_type)
        failed = None
    except (pa.ArrowException, ValueError):
        failed = _first_failure(head, lambda a: pc.cast(a, ns_type))
        stamps = pc.cast(head.slice(0, failed), ns_type)
    ns = np.zeros(n, dtype=np.int64)
    ns[: len(stamps)] = _to_numpy(stamps.cast(pa.int64()), np.int64)
    t = _micro_to_seconds(ns // 1000)
    if failed is not None:
        return t, Problem(failed, "time", f"cannot read the ISO 8601 time {_value(arr, failed)}")
    if upto == n:
        return t, None
    raw = str(arr[upto].as_py())
    if raw.strip() == "":
        msg = "empty value, expected a time (ISO 8601 with zone designator or epoch seconds)"
    elif _is_number(raw):
        msg = (f"this file mixes time forms: its first data row gives an ISO 8601 time, this row "
               f"epoch seconds {raw!r}; use one form per file")
    elif _DATE_RE.match(raw):
        msg = (f"time without a zone designator {raw!r}: add 'Z' for UTC or an offset "
               "such as '+02:00'")
    else:
        msg = ("expected a time (ISO 8601 with zone designator, e.g. "
               f"'2026-05-04T06:00:01.250Z', or epoch seconds), found {raw!r}")
    return t, Problem(upto, "time", msg)


def _is_number(text: str) -> bool:
    try:
        pc.cast(pa.array([text]), pa.float64())
        return True
    except (pa.ArrowException, ValueError):
        return False


def parse_sensor(arr: pa.ChunkedArray, ids: Sequence[str]) -> tuple[NDArray[np.int64],
                                                                     Problem | None]:
    """Sensor ids to indices into ``ids``."""
    if not _is_text(arr.type):
        try:
            arr = pc.cast(arr, pa.string())
        except (pa.ArrowException, ValueError):
            return (np.zeros(len(arr), dtype=np.int64),
                    Problem(0, "sensor", f"expected a sensor id, found a column of type {arr.type}"))
    arr = arr.fill_null("")
    known = ", ".join(repr(i) for i in ids) or "none"
    idx = pc.index_in(arr, value_set=pa.array(list(ids), pa.string()))
    out = _to_numpy(idx.fill_null(-1), np.int64)
    bad = out < 0
    if not bad.any():
        return out, None
    row = int(np.argmax(bad))
    raw = arr[row].as_py()
    if raw == "":
        return out, Problem(row, "sensor", f"empty value, expected a sensor id (one of {known})")
    return out, Problem(row, "sensor", f"unknown sensor {raw!r}; known sensors: {known}")
