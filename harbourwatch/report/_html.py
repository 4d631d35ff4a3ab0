"""Escaping helpers: every user string passes through here before it reaches HTML.

Three contexts occur in the reports:

* HTML text and attribute values: :func:`esc` (``html.escape`` with quotes).
* Text that folium pastes into a JavaScript template literal and Leaflet then
  shows as HTML (``folium.Tooltip``): :func:`esc_tooltip` additionally turns
  the backtick, ``$`` and backslash into character references so the literal
  can neither be closed nor interpolated.
* JSON inside ``<script>``: :func:`script_json` (ASCII only, ``<``, ``>``
  and ``&`` as ``\\u`` escapes, so neither ``</script>`` nor ``<!--`` can
  appear).

Curly braces in user strings are also written as character references
(HTML) or ``\\u`` escapes (JSON), so that no user string can ever form a
template delimiter (``{{``, ``{%``, ``{#``) in anything a template engine
might see; see also ``report._mapbase._render_macro``.
"""

from __future__ import annotations

import html
import json
import math
import re
from typing import Any

__all__ = ["esc", "esc_tooltip", "script_json", "fmt_prob"]


def esc(text: object) -> str:
    """HTML-escape ``text`` (``& < > " '`` and ``{ }``) for element content or attributes.

    Examples
    --------
    >>> esc('<b>{{ x }}</b>')
    '&lt;b&gt;&#123;&#123; x &#125;&#125;&lt;/b&gt;'
    """
    return html.escape(str(text), quote=True).replace("{", "&#123;").replace("}", "&#125;")


def esc_tooltip(text: object) -> str:
    """Escape for folium's ``Tooltip`` (HTML inside a JS template literal)."""
    return (
        esc(text).replace("\\", "&#92;").replace("`", "&#96;").replace("$", "&#36;")
    )


def script_json(obj: Any) -> str:
    """Compact JSON that is safe to place verbatim inside ``<script>``.

    Examples
    --------
    >>> script_json({"a": "</script>"})
    '{"a":"\\\\u003c/script\\\\u003e"}'
    """
    text = json.dumps(obj, ensure_ascii=True, separators=(",", ":"), allow_nan=False)
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    if "{" in text:  # braces inside strings as escapes; structural JSON never forms "{{", "{%", "{#"
        text = _JSON_STRING.sub(_escape_braces, text)
    return text


_JSON_STRING = re.compile(r'"(?:[^"\\]|\\.)*"')


def _escape_braces(match: re.Match[str]) -> str:
    return match.group(0).replace("{", "\\u007b").replace("}", "\\u007d")


def fmt_prob(p: float) -> str:
    """Probability with two decimals (``0.87``); ``n/a`` for NaN."""
    if not math.isfinite(p):
        return "n/a"
    return f"{p:.2f}"
