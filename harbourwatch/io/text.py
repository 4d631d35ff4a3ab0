"""Reading a small text input (TOML, GeoJSON) and checking user strings."""

from __future__ import annotations

import unicodedata
from os import PathLike

from harbourwatch.errors import InputError

__all__ = ["control_character", "read_text"]


def control_character(text: str) -> str | None:
    """Why ``text`` is refused for holding a control character, or ``None`` when it is fine.

    Ids, names and kinds end up in terminal tables, CSV files and web pages;
    a control character (tab, newline, escape, ...) has no place in any of
    them and could rewrite what a terminal shows.

    Examples
    --------
    >>> control_character("Calder Fairway")
    >>> control_character("red\x1b[31m")
    'control character U+001B is not allowed (at position 4)'
    """
    for k, ch in enumerate(text):
        if unicodedata.category(ch) == "Cc":
            return f"control character U+{ord(ch):04X} is not allowed (at position {k + 1})"
    return None


def read_text(path: str | PathLike[str]) -> str:
    """The whole file as text (UTF-8, a leading BOM dropped), or an :class:`InputError` naming it."""
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror or exc}", file=path) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputError("not valid UTF-8 text", file=path, line=line) from None
