"""Palette and symbols of the reports (the README section "Reports: design" gives the reasons).

Colours are taken from the Okabe-Ito qualitative set (Okabe & Ito, "Color
Universal Design", 2008), which stays distinguishable under the common
colour-vision deficiencies; every distinction that matters is carried by a
second channel too (line dash pattern, fill versus outline, marker shape).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["INK", "PALETTE", "ZoneStyle", "zone_style", "TRACK_STYLE", "SENSOR_COLOURS"]

INK = "#1b1b1b"
WATER = "#eef3f6"

PALETTE = {
    "blue": "#0072B2",
    "orange": "#E69F00",
    "sky": "#56B4E9",
    "green": "#009E73",
    "yellow": "#F0E442",
    "vermillion": "#D55E00",
    "purple": "#CC79A7",
    "grey": "#7a7a7a",
}

#: Trajectory line styles: present at the end of the shift = solid blue,
#: departed earlier = dashed orange.
TRACK_STYLE = {
    "present": {"color": PALETTE["blue"], "weight": 2.5, "opacity": 0.9, "dash_array": None},
    "departed": {"color": PALETTE["orange"], "weight": 2.0, "opacity": 0.9, "dash_array": "7 5"},
    "other": {"color": PALETTE["purple"], "weight": 3.0, "opacity": 0.95, "dash_array": "2 5"},
}

#: One colour per radar in the charts (cycled).
SENSOR_COLOURS = (PALETTE["blue"], PALETTE["green"], PALETTE["purple"], PALETTE["orange"])


@dataclass(frozen=True)
class ZoneStyle:
    """How one zone kind is drawn."""

    stroke: str
    fill: str
    fill_opacity: float
    dash: str | None
    label: str


_ZONES = {
    "land": ZoneStyle("#8c8372", "#d9d2c3", 1.0, None, "land"),
    "restricted": ZoneStyle(PALETTE["vermillion"], PALETTE["vermillion"], 0.10, "4 3",
                            "restricted"),
    "anchorage": ZoneStyle(PALETTE["sky"], PALETTE["sky"], 0.12, "1 4", "anchorage"),
    "fairway": ZoneStyle(PALETTE["green"], PALETTE["green"], 0.08, "10 4", "fairway"),
    "berth": ZoneStyle("#9a8c00", PALETTE["yellow"], 0.25, None, "berth"),
}
_OTHER = ZoneStyle(PALETTE["grey"], PALETTE["grey"], 0.08, "6 3 1 3", "other")


def zone_style(kind: str) -> ZoneStyle:
    """Style for a zone ``kind`` (free text; unknown kinds share one neutral style)."""
    return _ZONES.get(kind.strip().lower(), _OTHER)


def zone_kinds() -> dict[str, ZoneStyle]:
    """All known kinds plus the fallback, for legends."""
    return {**_ZONES, "other": _OTHER}
