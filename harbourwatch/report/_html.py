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

User strings in element content are also *isolated* from the text around
them (:func:`esc_user`, :func:`esc_isolating`: an HTML ``<bdi>`` element,
HTML Living Standard section 4.5.24), so a name in a right-to-left script
cannot reorder the times and probability next to it. Bidirectional control
characters never get this far: the input readers refuse them.

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
from collections.abc import Iterable
from typing import Any

__all__ = ["esc", "esc_user", "esc_isolating", "esc_tooltip", "tooltip_user", "script_json",
           "fmt_prob"]


def esc(text: object) -> str:
    """HTML-escape ``text`` (``& < > " '`` and ``{ }``) for element content or attributes.

    Examples
    --------
    >>> esc('<b>{{ x }}</b>')
    '&lt;b&gt;&#123;&#123; x &#125;&#125;&lt;/b&gt;'
    """
    return html.escape(str(text), quote=True).replace("{", "&#123;").replace("}", "&#125;")


def esc_user(text: object) -> str:
    """A user string (id, name) as element content: escaped and isolated in ``<bdi>``.

    Not for attribute values or ``<title>``, where markup is not allowed: use :func:`esc`.

    Examples
    --------
    >>> esc_user("Calder <Fairway>")
    '<bdi>Calder &lt;Fairway&gt;</bdi>'
    """
    return f"<bdi>{esc(text)}</bdi>"


def esc_isolating(text: object, user_strings: Iterable[object]) -> str:
    """Escape ``text`` (our sentence) and isolate each occurrence of a user string in it.

    For narratives and summaries that quote zone names and rule ids: the
    longest user string is matched first, so a name that contains another is
    isolated whole.

    Examples
    --------
    >>> esc_isolating("vessel T3 entered Inner <b> for 5 min", ["Inner <b>"])
    'vessel T3 entered <bdi>Inner &lt;b&gt;</bdi> for 5 min'
    """
    names = sorted({str(u) for u in user_strings if str(u)}, key=len, reverse=True)
    plain = str(text)
    if not names:
        return esc(plain)
    pattern = re.compile("|".join(re.escape(n) for n in names))
    out: list[str] = []
    pos = 0
    for m in pattern.finditer(plain):
        out.append(esc(plain[pos:m.start()]))
        out.append(esc_user(m.group(0)))
        pos = m.end()
    out.append(esc(plain[pos:]))
    return "".join(out)


def esc_tooltip(text: object) -> str:
    """Escape for folium's ``Tooltip`` (HTML inside a JS template literal)."""
    return (
        esc(text).replace("\\", "&#92;").replace("`", "&#96;").replace("$", "&#36;")
    )


def tooltip_user(text: object) -> str:
    """A user string inside a folium ``Tooltip``: :func:`esc_tooltip`, isolated in ``<bdi>``."""
    return f"<bdi>{esc_tooltip(text)}</bdi>"


def script_json(obj: Any) -> str:
    """Compact JSON that is safe to place verbatim inside ``<script>``.

    Examples
    --------
    >>> script_json({"a": "</script>"})
    '{"a":"\\\\u003c/script\\\\u003e"}'
    >>> import json; v = "${x}`\\\\n\\"\\\\"; json.loads(script_json([v])) == [v]
    True
    """
    text = json.dumps(obj, ensure_ascii=True, separators=(",", ":"), allow_nan=False)
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    text = text.replace("$", "\\u0024").replace("`", "\\u0060")  # only ever inside strings
    if "{" in text or "\\\\" in text:  # braces and backslashes inside strings as \\u escapes;
        text = _JSON_STRING.sub(_escape_braces, text)  # structural JSON never forms "{{", "{%"
    return text


_JSON_STRING = re.compile(r'"(?:[^"\\]|\\.)*"')


_JSON_BACKSLASH = re.compile(r"\\\\")  # an escaped backslash: the two characters \\


def _escape_braces(match: re.Match[str]) -> str:
    text = match.group(0).replace("{", "\\u007b").replace("}", "\\u007d")
    # escape pairs are read left to right, so each non-overlapping pair is one backslash
    return _JSON_BACKSLASH.sub(lambda _m: "\\u005c", text)


def fmt_prob(p: float) -> str:
    """Probability with two decimals (``0.87``); ``n/a`` for NaN."""
    if not math.isfinite(p):
        return "n/a"
    return f"{p:.2f}"
