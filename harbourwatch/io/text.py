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
    """Streaming checks that the content is UTF-8 text with line breaks and no NUL."""

    def __init__(self, path: str | PathLike[str], *, lines: bool) -> None:
        self.path = path
        self.seen = 0
        self.lines = lines
        self.newline_seen = not lines  # only files of lines need a line break early
        self.decoder = codecs.getincrementaldecoder("utf-8")()
        self.parts: list[bytes] = []

    def _line_at(self, offset: int) -> int:
        head = b"".join(self.parts)[:offset]
        breaks = head.count(b"\n")
        return (breaks if breaks else head.count(b"\r")) + 1

    def _field_at(self, offset: int) -> str | None:
        """The header's name for the column at ``offset`` (CSV files of lines only)."""
        if not self.lines:
            return None
        head = b"".join(self.parts)
        sep = b"\n" if b"\n" in head else b"\r"
        start = head.rfind(sep, 0, offset) + 1
        if start == 0:
            return None  # in the header itself
        header = head[: head.find(sep)].rstrip(b"\r").split(b",")
        col = head[start:offset].count(b",")
        return header[col].decode("utf-8", "replace").strip() if col < len(header) else None

    def feed(self, block: bytes) -> None:
        start = self.seen
        self.parts.append(block)
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
        if block.isascii() and not self.decoder.getstate()[0]:
            return
        try:
            self.decoder.decode(block)
        except UnicodeDecodeError as exc:
            at = start + max(exc.start, 0)
            raise InputError("not valid UTF-8 text", file=self.path, line=self._line_at(at),
                             field=self._field_at(at)) from None

    def finish(self) -> None:
        try:
            self.decoder.decode(b"", final=True)
        except UnicodeDecodeError:
            raise InputError("not valid UTF-8 text (the file ends inside a character)",
                             file=self.path, line=self._line_at(self.seen)) from None


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
    digest = hashlib.sha256()
    blocks = _blocks(path, digest)
    try:
        got = _read_blocks(path, blocks, limit, formats)
    finally:
        blocks.close()  # closes the file now, also when refused early (a FIFO's writer sees it)
    return InputBytes(got[0], digest.hexdigest(), got[1])


def _read_blocks(path: str | PathLike[str], blocks: Iterator[bytes], limit: int,
                 formats: str) -> tuple[bytes, str]:
    first = next(blocks, b"")
    kind = "text"
    if formats == "feed" and first[:4] == _PARQUET_MAGIC:
        kind = "parquet"
    elif formats == "feed" and first[:2] == _GZIP_MAGIC:
        kind = "gzip"

    def stored() -> Iterator[bytes]:
        if first:
            yield first
        yield from blocks

    if kind == "parquet":
        parts, total = [], 0
        for block in stored():
            total += len(block)
            if total > limit:
                raise InputError(f"larger than {limit >> 20} MiB", file=path)
            parts.append(block)
        return b"".join(parts), kind
    content = _gunzip(stored(), path, limit) if kind == "gzip" else stored()
    check = _TextCheck(path, lines=formats == "feed")
    for block in content:
        if check.seen + len(block) > limit:
            raise InputError(f"larger than {limit >> 20} MiB; split it into several files"
                             if formats == "feed" else f"larger than {limit >> 20} MiB: "
                             "not a file of this kind", file=path)
        check.feed(block)
    check.finish()
    return b"".join(check.parts), kind


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
