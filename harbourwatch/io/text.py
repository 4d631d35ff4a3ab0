"""Reading inputs once, with bounds, and checking user strings.

Every input file is read exactly once, through :func:`read_input`: in blocks,
with a size limit, hashing the stored bytes on the way (the SHA-256 recorded
in ``run.json``), and with the checks that tell a text file from anything
else done on the first block, so that ``/dev/zero``, random bytes or a binary
file are refused after a few kilobytes instead of after gigabytes. A FIFO or
a process substitution works, since nothing is opened twice.
"""

from __future__ import annotations

import codecs
import hashlib
import unicodedata
import zlib
from collections.abc import Generator, Iterator, MutableMapping
from dataclasses import dataclass
from os import PathLike
from typing import Any

from harbourwatch.errors import InputError

__all__ = ["BIDI_CONTROLS", "control_character", "read_text", "read_input", "InputBytes",
           "InputStream", "stream_input",
           "BLOCK_BYTES", "FEED_MAX_BYTES", "CONFIG_MAX_BYTES", "ZONES_MAX_BYTES"]

#: Block size of every read; the text checks look at the first block first.
BLOCK_BYTES = 1 << 20
#: A feed larger than this (after gzip decompression) is refused: it would not fit in memory.
FEED_MAX_BYTES = 8 << 30
#: Sensor and rules TOML files larger than this are refused (a real one is a few kB).
CONFIG_MAX_BYTES = 4 << 20
#: Zones GeoJSON larger than this is refused (100,000 vertices take about 4 MB).
ZONES_MAX_BYTES = 256 << 20
_GZIP_MAGIC = b"\x1f\x8b"
_PARQUET_MAGIC = b"PAR1"
_MIB = 1 << 20

#: The bidirectional formatting characters (Unicode Standard Annex #9, "Unicode
#: Bidirectional Algorithm", table 4 "Explicit formatting characters" and section 2.6
#: "Implicit directional marks"): embeddings and overrides U+202A..U+202E, isolates
#: U+2066..U+2069, and the marks LRM U+200E, RLM U+200F and ALM U+061C.
BIDI_CONTROLS = frozenset(
    [chr(c) for c in range(0x202A, 0x202F)] + [chr(c) for c in range(0x2066, 0x206A)]
    + ["\u200e", "\u200f", "\u061c"]
)


def control_character(text: str) -> str | None:
    """Why ``text`` is refused for holding a control character, or ``None`` when it is fine.

    Ids, names and kinds end up in terminal tables, CSV files and web pages;
    a control character (tab, newline, escape, ...) has no place in any of
    them and could rewrite what a terminal shows. Bidirectional controls
    (:data:`BIDI_CONTROLS`) are refused too: a right-to-left override in a
    zone name would reverse the rest of a narrative, times and probability
    included, wherever it is shown.

    Examples
    --------
    >>> control_character("Calder Fairway")
    >>> control_character("red\x1b[31m")
    'control character U+001B is not allowed (at position 4)'
    >>> control_character("Calder\u202eyawriaF")
    'bidirectional control character U+202E is not allowed (at position 7)'
    """
    for k, ch in enumerate(text):
        if unicodedata.category(ch) == "Cc":
            return f"control character U+{ord(ch):04X} is not allowed (at position {k + 1})"
        if ch in BIDI_CONTROLS:
            return (f"bidirectional control character U+{ord(ch):04X} is not allowed "
                    f"(at position {k + 1})")
    return None


@dataclass(frozen=True, eq=False)
class InputBytes:
    """One input file's content, read once.

    Attributes
    ----------
    data
        The content (decompressed when the file was gzip).
    sha256
        Hex SHA-256 of the bytes as stored (before decompression).
    kind
        ``"text"``, ``"gzip"`` (gzip-compressed text) or ``"parquet"``.
    """

    data: bytes
    sha256: str
    kind: str


def _blocks(path: str | PathLike[str], digest: Any) -> Generator[bytes, None, None]:
    try:
        fh = open(path, "rb")  # noqa: SIM115 - closed in the finally below
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror or exc}", file=path) from None
    try:
        while True:
            try:
                block = fh.read(BLOCK_BYTES)
            except OSError as exc:
                raise InputError(f"cannot read the file: {exc.strerror or exc}",
                                 file=path) from None
            if not block:
                return
            digest.update(block)
            yield block
    finally:
        fh.close()


def _gunzip(blocks: Iterator[bytes], path: str | PathLike[str], limit: int) -> Iterator[bytes]:
    """Decompress gzip members block by block, never more than ``limit`` bytes in all."""
    total = 0
    d = zlib.decompressobj(wbits=31)
    started = False
    for raw in blocks:
        data = raw
        while data:
            started = True
            try:
                piece = d.decompress(data, min(BLOCK_BYTES, limit + 1 - total))
            except zlib.error as exc:
                raise InputError(f"cannot read the gzip data: {exc}", file=path) from None
            total += len(piece)
            if total > limit:
                raise InputError(f"larger than {limit >> 20} MiB once decompressed; split "
                                 "the feed into several files", file=path)
            if piece:
                yield piece
            if d.eof:
                data, d, started = d.unused_data, zlib.decompressobj(wbits=31), False
                # zero padding after the last member is common and harmless
                if not data.strip(b"\0"):
                    data = b""
            else:
                data = d.unconsumed_tail
    if started and not d.eof:
        raise InputError("cannot read the gzip data: the file is truncated", file=path)


class _TextCheck:
    """Streaming checks that the content is UTF-8 text with line breaks and no NUL.

    Only what the messages need is kept from the blocks already seen (the
    counts of line breaks, the header line and the start of the current
    line), so a long feed can be checked as it streams past.
    """

    def __init__(self, path: str | PathLike[str], *, lines: bool) -> None:
        self.path = path
        self.seen = 0
        self.lines = lines
        self.newline_seen = not lines  # only files of lines need a line break early
        self.decoder = codecs.getincrementaldecoder("utf-8")()
        self.lf = 0  # line breaks in the blocks before the current one
        self.cr = 0
        self.header = b""  # the first line, once complete (or all of it so far)
        self.header_done = False
        self.carry = b""  # the blocks' bytes after their last line break (capped)
        self.block = b""
        self.start = 0

    def _line_at(self, offset: int) -> int:
        head = self.block[: offset - self.start]
        lf = self.lf + head.count(b"\n")
        return (lf if lf else self.cr + head.count(b"\r")) + 1

    def _field_at(self, offset: int) -> str | None:
        """The header's name for the column at ``offset`` (CSV files of lines only)."""
        if not self.lines:
            return None
        sep = b"\n" if self.lf or b"\n" in self.block else b"\r"
        rel = offset - self.start
        before = self.lf if sep == b"\n" else self.cr
        cut = self.block.rfind(sep, 0, rel)
        if cut < 0 and before == 0:
            return None  # in the header itself
        line = self.block[cut + 1 : rel] if cut >= 0 else self.carry + self.block[:rel]
        header = self.header
        if not self.header_done:
            header = (header + self.block).split(sep, 1)[0]
        names = header.rstrip(b"\r").split(b",")
        col = line.count(b",")
        return names[col].decode("utf-8", "replace").strip() if col < len(names) else None

    def feed(self, block: bytes) -> None:
        self.start = self.seen
        self.block = block
        start = self.start
        self.seen += len(block)
        nul = block.find(b"\0")
        if nul >= 0:
            raise InputError(f"NUL byte at byte {start + nul + 1}: this is not a text file "
                             "(binary data?)", file=self.path, line=self._line_at(start + nul),
                             field=self._field_at(start + nul))
        if not self.newline_seen:
            self.newline_seen = b"\n" in block or b"\r" in block
            if not self.newline_seen and self.seen >= _MIB:
                raise InputError("no line break in the first MiB: this is not a text file "
                                 "of lines (binary data?)", file=self.path, line=1)
        if not (block.isascii() and not self.decoder.getstate()[0]):
            try:
                self.decoder.decode(block)
            except UnicodeDecodeError as exc:
                at = start + max(exc.start, 0)
                raise InputError("not valid UTF-8 text", file=self.path, line=self._line_at(at),
                                 field=self._field_at(at)) from None
        self._remember(block)

    def _remember(self, block: bytes) -> None:
        """Keep the counts, the header and the current line's start for later messages."""
        lf, cr = block.count(b"\n"), block.count(b"\r")
        if not self.header_done:
            sep = b"\n" if (self.lf + lf) else b"\r"
            self.header = (self.header + block).split(sep, 1)[0] if (lf or cr) else (
                self.header + block)[:_MIB]
            self.header_done = bool(lf or cr)
        self.lf += lf
        self.cr += cr
        sep = b"\n" if self.lf else b"\r"
        cut = block.rfind(sep)
        self.carry = block[cut + 1 :] if cut >= 0 else (self.carry + block)[-_MIB:]

    def finish(self) -> None:
        try:
            self.decoder.decode(b"", final=True)
        except UnicodeDecodeError:
            self.block, self.start = b"", self.seen
            raise InputError("not valid UTF-8 text (the file ends inside a character)",
                             file=self.path, line=self._line_at(self.seen)) from None


class InputStream:
    """One input file's content as checked blocks, read once (see :func:`stream_input`).

    Iterate :attr:`blocks` once; :attr:`sha256` is known when they are all read.
    """

    def __init__(self, path: str | PathLike[str], *, limit: int, formats: str) -> None:
        self._digest = hashlib.sha256()
        self._raw = _blocks(path, self._digest)
        self._first = next(self._raw, b"")
        self.kind = "text"
        if formats == "feed" and self._first[:4] == _PARQUET_MAGIC:
            self.kind = "parquet"
        elif formats == "feed" and self._first[:2] == _GZIP_MAGIC:
            self.kind = "gzip"
        self._path, self._limit, self._formats = path, limit, formats
        self.blocks: Iterator[bytes] = self._checked()

    def _stored(self) -> Iterator[bytes]:
        if self._first:
            yield self._first
        self._first = b""
        yield from self._raw

    def _checked(self) -> Iterator[bytes]:
        path, limit, formats = self._path, self._limit, self._formats
        try:
            if self.kind == "parquet":
                total = 0
                for block in self._stored():
                    total += len(block)
                    if total > limit:
                        raise InputError(f"larger than {limit >> 20} MiB", file=path)
                    yield block
                return
            content = _gunzip(self._stored(), path, limit) if self.kind == "gzip" else self._stored()
            check = _TextCheck(path, lines=formats == "feed")
            for block in content:
                if check.seen + len(block) > limit:
                    raise InputError(f"larger than {limit >> 20} MiB; split it into several files"
                                     if formats == "feed" else f"larger than {limit >> 20} MiB: "
                                     "not a file of this kind", file=path)
                check.feed(block)
                yield block
            check.finish()
        finally:
            self.close()

    @property
    def sha256(self) -> str:
        """Hex SHA-256 of the stored bytes (once every block has been read)."""
        return self._digest.hexdigest()

    def close(self) -> None:
        """Close the file now (also when refused early: a FIFO's writer sees it)."""
        self._raw.close()


def stream_input(path: str | PathLike[str], *, limit: int, formats: str = "text") -> InputStream:
    """Open one input file for a single pass over its checked content, block by block.

    The same checks as :func:`read_input`, made on each block as it is read;
    nothing but the current block is kept, so a feed of gigabytes streams
    through in constant memory.
    """
    return InputStream(path, limit=limit, formats=formats)


def read_input(path: str | PathLike[str], *, limit: int, formats: str = "text") -> InputBytes:
    """Read one input file once, in blocks, refusing what is not what it should be.

    Parameters
    ----------
    path
        The file (a FIFO or a pipe works: it is opened once).
    limit
        Largest accepted content in bytes (after decompression).
    formats
        ``"text"``: UTF-8 text only. ``"feed"``: Parquet (by its magic
        bytes), gzip-compressed text (by the gzip magic) or UTF-8 text.

    Raises
    ------
    InputError
        Unreadable file, too large, a NUL byte, no line break in the first
        MiB (feeds only: a GeoJSON file may be one line), not UTF-8, broken
        gzip data. The text checks run on each block
        as it arrives, so a binary file is refused after its first block.
    """
    stream = stream_input(path, limit=limit, formats=formats)
    try:
        data = b"".join(stream.blocks)
    finally:
        stream.close()
    return InputBytes(data, stream.sha256, stream.kind)


def read_text(
    path: str | PathLike[str], *, limit: int = CONFIG_MAX_BYTES,
    digests: MutableMapping[str, str] | None = None,
) -> str:
    """The whole file as text (UTF-8, a leading BOM dropped), or an :class:`InputError` naming it.

    Read once with :func:`read_input`; the file's SHA-256 is stored in
    ``digests[str(path)]`` when ``digests`` is given.
    """
    got = read_input(path, limit=limit)
    if digests is not None:
        digests[str(path)] = got.sha256
    return got.data.decode("utf-8-sig")
