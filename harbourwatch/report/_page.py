"""The HTML document around a folium map: head with inlined assets, caution, body."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.report._assets import leaflet_css, leaflet_js, own_asset
from harbourwatch.report._html import esc, esc_user
from harbourwatch.report._mapbase import MapParts
from harbourwatch.units import CAUTION

__all__ = ["CAUTION", "document", "provenance_html", "write_atomic"]

#: Shown at the top of every page, above the fold.


def document(*, title: str, body: str, parts: MapParts, scripts: Sequence[str] = (),
             data_blocks: Mapping[str, str] | None = None, page_class: str = "") -> str:
    """A complete, self-contained HTML page.

    ``body`` is our own (escaped) markup; ``parts`` the folium map pieces,
    whose ``html`` must already be inside ``body`` (see :func:`map_slot`).
    ``data_blocks`` maps element ids to JSON text (already script-safe) put
    into ``<script type="application/json">`` blocks; ``scripts`` are names
    of our own assets run after the map script; ``page_class`` is put on
    ``<body>`` (our own constant, selects the print layout).
    """
    data = "".join(
        f'<script type="application/json" id="{esc(k)}">{v}</script>\n'
        for k, v in (data_blocks or {}).items()
    )
    body_tag = f'<body class="{esc(page_class)}">' if page_class else "<body>"
    own = "".join(f"<script>\n{own_asset(name)}</script>\n" for name in scripts)
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        f"<title>{esc(title)}</title>\n"
        '<meta name="color-scheme" content="light">\n'
        f"<style>\n{leaflet_css()}</style>\n"
        f"<script>\n{leaflet_js()}</script>\n"
        f"{parts.header}\n"
        f"<style>\n{own_asset('report.css')}</style>\n"
        "</head>\n"
        f"{body_tag}\n"
        f'<p class="hw-caution" role="note" id="hw-caution">{esc(CAUTION)}</p>\n'
        f"<main>\n{body}\n</main>\n"
        f"<script>\n{parts.script}\n</script>\n"
        f"{data}{own}"
        "</body>\n</html>\n"
    )


def _scalar(v: Any) -> str:
    if isinstance(v, float):
        return esc(f"{v:.6g}")
    if isinstance(v, str):  # file names, rule ids: user strings, isolated
        return esc_user(v)
    return esc(v)


def provenance_html(prov: Any, depth: int = 0) -> str:
    """Render a nested mapping/list (run.json content) as escaped tables."""
    if isinstance(prov, Mapping):
        if not prov:
            return "<em>none</em>"
        rows = "".join(
            f"<tr><th scope=\"row\">{esc(k)}</th><td>{provenance_html(v, depth + 1)}</td></tr>"
            for k, v in prov.items()
        )
        return f'<table class="hw-prov">{rows}</table>'
    if isinstance(prov, list | tuple):
        if not prov:
            return "<em>none</em>"
        if all(isinstance(x, Mapping) for x in prov):
            keys: list[str] = []
            for x in prov:
                keys.extend(k for k in x if k not in keys)
            head = "".join(f"<th>{esc(k)}</th>" for k in keys)
            rows = "".join(
                "<tr>" + "".join(f"<td>{provenance_html(x.get(k, ''), depth + 1)}</td>"
                                 for k in keys) + "</tr>"
                for x in prov
            )
            return f'<table class="hw-prov"><thead><tr>{head}</tr></thead><tbody>{rows}</tbody></table>'
        return ", ".join(provenance_html(x, depth + 1) for x in prov)
    if prov is None:
        return ""
    return _scalar(prov)


def write_atomic(path: Path, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically (temp file in the same folder, rename)."""
    atomic_write_text(path, text)
    return path
