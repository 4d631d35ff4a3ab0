"""folium map construction shared by the overview and the incident pages.

We let folium build the Leaflet map (map, layers, polylines, polygons,
circle markers, tooltips, layer switcher) and take its rendered pieces
(header, map ``<div>``, script) into our own page template. folium's CDN
links are switched off per map instance (``default_js``/``default_css``
emptied): the pages inline Leaflet themselves (see :mod:`._assets`) and use
no jQuery, Bootstrap or icon fonts. Two small element classes of our own
replace folium features that would need jQuery (``Popup``) or would write
thousands of separate statements (one ``CircleMarker`` per radar plot).

folium names every element with a random hex id; :func:`render_parts`
renumbers them in tree order first so that the same inputs give the same
bytes.
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import folium
import numpy as np
from branca.element import Element, Figure, MacroElement
from folium.template import Template

from harbourwatch.errors import HarbourwatchError
from harbourwatch.report._html import esc, script_json

__all__ = ["MapParts", "new_map", "render_parts", "SafePopup", "PointLayer", "round5"]


def round5(values: Any) -> list[list[float]]:
    """``[[lat, lon], ...]`` rounded to 5 decimals (about 1 m), as plain floats."""
    arr = np.asarray(values if isinstance(values, (list, tuple, np.ndarray)) else list(values), float)
    return (np.round(arr.reshape(-1, 2), 5) + 0.0).tolist()  # type: ignore[no-any-return]


def new_map(
    bounds: Sequence[Sequence[float]], *, tile_url: str | None = None, height_px: int = 560
) -> folium.Map:
    """A folium map without basemap (or with the user's tile server) fitted to ``bounds``.

    ``bounds`` is ``[[lat_min, lon_min], [lat_max, lon_max]]``.
    """
    (lat0, lon0), (lat1, lon1) = bounds
    m = folium.Map(
        location=[round((lat0 + lat1) / 2, 5), round((lon0 + lon1) / 2, 5)],
        zoom_start=12,
        tiles=None,
        height=height_px,
        control_scale=False,  # our own scale bar in nautical miles (assets/mapmarks.js)
        prefer_canvas=False,
        zoom_snap=0.25,
    )
    # no CDN links at all: Leaflet is inlined by the page template
    m.default_js = []
    m.default_css = []
    if tile_url:
        folium.TileLayer(
            tiles=tile_url, attr=esc("user tile server"), name="Basemap", overlay=False
        ).add_to(m)
    m.fit_bounds(round5(bounds))
    return m


class SafePopup(MacroElement):
    """A popup whose HTML (already escaped by the caller) is passed as JSON.

    folium's own ``Popup`` needs jQuery; this one is one ``bindPopup`` call.
    """

    _template = Template(
        """
        {% macro script(this, kwargs) %}
            {{ this._parent.get_name() }}.bindPopup({{ this.html_json }});
        {% endmacro %}
        """
    )

    def __init__(self, html: str) -> None:
        super().__init__()
        self._name = "SafePopup"
        self.html_json = script_json(html)


class PointLayer(MacroElement):
    """Many small circle markers drawn from one embedded JSON array.

    Parameters
    ----------
    points
        ``[[lat, lon], ...]`` (rounded to 5 decimals here).
    options
        Leaflet ``circleMarker`` options (``radius``, ``color``, ``className`` ...).
    """

    _template = Template(
        """
        {% macro script(this, kwargs) %}
            var {{ this.get_name() }} = L.featureGroup().addTo({{ this._parent.get_name() }});
            {{ this.points_json }}.forEach(function (p) {
                L.circleMarker(p, {{ this.options_json }}).addTo({{ this.get_name() }});
            });
        {% endmacro %}
        """
    )

    def __init__(self, points: Any, options: dict[str, Any]) -> None:
        super().__init__()
        self._name = "PointLayer"
        self.points_json = script_json(round5(points))
        self.options_json = script_json(options)


@dataclass(frozen=True)
class MapParts:
    """The rendered pieces of a folium map for our own page template."""

    name: str  # JS variable name of the L.map
    header: str
    html: str
    script: str


_EXTERNAL = re.compile(r"<(script|link)\b[^>]*\b(src|href)\s*=", re.IGNORECASE)


def _renumber(root: Element) -> None:
    counter = 0
    stack: list[Element] = [root]
    seen: set[int] = set()
    while stack:
        el = stack.pop(0)
        if id(el) in seen:
            continue
        seen.add(id(el))
        el._id = f"hw{counter:05d}"
        counter += 1
        if isinstance(el, Figure):
            stack.extend([el.header, el.html, el.script])
        stack.extend(el._children.values())


class _Rendered(Element):
    """Text that is already rendered: returned as it is, never parsed as a template."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self._rendered = text

    def render(self, **kwargs: Any) -> str:
        return self._rendered


def _render_macro(self: MacroElement, **kwargs: Any) -> None:
    """``MacroElement.render`` without parsing the rendered macros as templates again.

    branca wraps each rendered macro in ``Element(text)``, which compiles the
    text as a jinja template and renders it once more: any ``{{ }}``,
    ``{% %}`` or ``{# #}`` in it (say, in a zone name shown in a tooltip)
    would be evaluated as template code, and large rendered blocks
    (trajectory coordinates) are compiled for nothing. Otherwise the same
    as branca's method (branca 0.8).
    """
    figure = self.get_root()
    if not isinstance(figure, Figure):
        raise HarbourwatchError("internal: a map element is rendered outside its page")
    module = self._template.module.__dict__
    for part, target in (("header", figure.header), ("html", figure.html), ("script", figure.script)):
        macro = module.get(part)
        if macro is not None:
            target.add_child(_Rendered(macro(self, kwargs)), name=self.get_name())
    for element in self._children.values():
        element.render(**kwargs)


@contextmanager
def _macros_rendered_once() -> Iterator[None]:
    original = MacroElement.render
    MacroElement.render = _render_macro  # type: ignore[method-assign]
    try:
        yield
    finally:
        MacroElement.render = original  # type: ignore[method-assign]


def render_parts(m: folium.Map) -> MapParts:
    """Render ``m`` with deterministic ids; return its header, div and script.

    Rendered macros are never parsed as templates again (see :func:`_render_macro`).
    """
    fig = m.get_root()
    assert isinstance(fig, Figure)
    _renumber(fig)
    with _macros_rendered_once():
        fig.render()
    # folium's viewport meta forbids zooming the page: allow it (accessibility)
    header = re.sub(r'<meta name="viewport"[^>]*>',
                    '<meta name="viewport" content="width=device-width, initial-scale=1">',
                    fig.header.render())
    if _EXTERNAL.search(header):
        # a folium element brought its own CDN link: refuse rather than ship it
        raise HarbourwatchError("internal: a map element requires an external resource")
    return MapParts(
        name=m.get_name(), header=header, html=fig.html.render(), script=fig.script.render()
    )
