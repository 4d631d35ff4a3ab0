"""Private helpers of :mod:`harbourwatch.io.feeds`: reading one feed file in blocks of lines.

The values of each column are checked and parsed in
:mod:`harbourwatch.io.column_parse`.
"""

from __future__ import annotations

import csv
import ctypes
import io
from collections.abc import Iterator, Sequence
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
