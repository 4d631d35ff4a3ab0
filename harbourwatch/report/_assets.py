"""Leaflet and our own scripts/styles, read from installed packages and inlined.

Leaflet 1.9.4 comes from the PyPI package ``django-js-lib-leaflet==1.9.4.1``
(pinned in ``pyproject.toml``). It ships the unmodified release files of
Leaflet 1.9.4 (same bytes as the ``dist/`` files of the npm package
``leaflet@1.9.4``) and has no dependency on Django; we only read its static
files with :mod:`importlib.resources` and never import Django. The SHA-256 of
each file is checked against the values below before use: a different file
raises :class:`~harbourwatch.errors.HarbourwatchError` instead of silently
shipping unknown code in a report.

Leaflet's stylesheet refers to its control images by relative URL
(``url(images/layers.png)``); those references are replaced by ``data:`` URIs
of the package's own images so a report never asks for a file, and its
comments are dropped (after the hash check). ``leaflet.js`` is inlined
byte for byte.
"""

from __future__ import annotations

import base64
import functools
import hashlib
import re
from importlib import resources

from harbourwatch.errors import HarbourwatchError

__all__ = [
    "LEAFLET_VERSION",
    "LEAFLET_JS_SHA256",
    "LEAFLET_CSS_SHA256",
    "leaflet_js",
    "leaflet_css",
    "own_asset",
    "check_sha256",
]

LEAFLET_VERSION = "1.9.4"
LEAFLET_PACKAGE = "js_lib_leaflet"
#: SHA-256 of ``leaflet.js`` and ``leaflet.css`` of the Leaflet 1.9.4 release
#: (checked equal to the npm tarball ``leaflet-1.9.4.tgz``, ``package/dist/``).
LEAFLET_JS_SHA256 = "db49d009c841f5ca34a888c96511ae936fd9f5533e90d8b2c4d57596f4e5641a"
LEAFLET_CSS_SHA256 = "a7837102824184820dfa198d1ebcd109ff6d0ff9a2672a074b9a1b4d147d04c6"
_IMAGES = ("layers.png", "layers-2x.png", "marker-icon.png")


def check_sha256(data: bytes, expected: str, what: str) -> None:
    """Raise :class:`HarbourwatchError` unless ``sha256(data) == expected``."""
    got = hashlib.sha256(data).hexdigest()
    if got != expected:
        raise HarbourwatchError(
            f"{what}: SHA-256 {got} differs from the expected {expected} of Leaflet "
            f"{LEAFLET_VERSION}; reinstall django-js-lib-leaflet==1.9.4.1"
        )


def _leaflet_file(name: str) -> bytes:
    try:
        root = resources.files(LEAFLET_PACKAGE)
    except ModuleNotFoundError as exc:  # pragma: no cover - install problem
        raise HarbourwatchError(
            "Leaflet is missing: install django-js-lib-leaflet==1.9.4.1"
        ) from exc
    return root.joinpath("static", LEAFLET_PACKAGE, name).read_bytes()


@functools.cache
def leaflet_js() -> str:
    """The checked ``leaflet.js`` text, ready to inline (``</script`` cannot occur)."""
    data = _leaflet_file("leaflet.js")
    check_sha256(data, LEAFLET_JS_SHA256, "leaflet.js")
    text = data.decode("utf-8")
    if "</script" in text.lower():  # pragma: no cover - not in 1.9.4
        raise HarbourwatchError("leaflet.js cannot be inlined: contains </script")
    return text


@functools.cache
def leaflet_css() -> str:
    """The checked ``leaflet.css``, images inlined as ``data:`` URIs, comments dropped."""
    data = _leaflet_file("leaflet.css")
    check_sha256(data, LEAFLET_CSS_SHA256, "leaflet.css")
    text = data.decode("utf-8")
    for name in _IMAGES:
        png = _leaflet_file(f"images/{name}")
        uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
        text = text.replace(f"url(images/{name})", f"url({uri})")
    # comments only (two of them cite browser bug trackers by URL): drop them
    return re.sub(r"/\*.*?\*/", "", text, flags=re.DOTALL)


@functools.cache
def own_asset(name: str) -> str:
    """Text of one of our files under ``harbourwatch/report/assets/``."""
    return resources.files(__package__).joinpath("assets", name).read_text("utf-8")
