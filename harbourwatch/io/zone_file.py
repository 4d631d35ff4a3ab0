"""Private: reading and validating the zones GeoJSON (re-exported by ``config``)."""

from __future__ import annotations

import json
import math
import re
from collections.abc import MutableMapping
from os import PathLike
from typing import Any

import shapely
import shapely.errors
import shapely.geometry
from shapely.validation import explain_validity

from harbourwatch.errors import InputError
from harbourwatch.io.records import ZoneConfig
from harbourwatch.io.text import ZONES_MAX_BYTES, control_character, read_text

__all__ = ["load_zones"]

_AREA_TYPES = ("Polygon", "MultiPolygon")
_FEATURE_RE = re.compile(r'"type"\s*:\s*"Feature"')


class _Feature:
    """One feature of the collection, located in the raw text for messages."""

    def __init__(self, path: str | PathLike[str], text: str, index: int, raw: Any,
                 nth: int = 0) -> None:
        self.path, self.index, self.raw = path, index, raw
        props = raw.get("properties") if isinstance(raw, dict) else None
        fid = props.get("id") if isinstance(props, dict) else None
        self.id = fid if isinstance(fid, str) else None
        self.line = _feature_line(text, index, self.id, nth)
        self.label = f"feature {index + 1}" + (f" ({self.id!r})" if self.id else "")

    def error(self, field: str, message: str) -> InputError:
        return InputError(f"{self.label}: {message}", file=self.path, line=self.line, field=field)


def _feature_line(text: str, index: int, fid: str | None, nth: int = 0) -> int | None:
    """Best effort: the line of the feature's ``"id"``, else of its N-th ``"type": "Feature"``.

    ``nth`` counts the earlier features with the same id, so a duplicate is
    located at its own line, not at the first feature's.
    """
    if fid is not None:
        for form in (json.dumps(fid), json.dumps(fid, ensure_ascii=False)):
            found = list(re.finditer(r'"id"\s*:\s*' + re.escape(form), text))
            if found:
                m = found[min(nth, len(found) - 1)]
                return text.count("\n", 0, m.start()) + 1
    matches = list(_FEATURE_RE.finditer(text))
    if index < len(matches):
        return text.count("\n", 0, matches[index].start()) + 1
    return None


def _first_line(text: str, needle: str) -> int:
    at = text.find(needle)
    return 1 if at < 0 else text.count("\n", 0, at) + 1


def _check_rings(f: _Feature, gtype: str, coords: Any) -> None:
    polys = coords if gtype == "MultiPolygon" else [coords]
    field = "geometry.coordinates"
    if not isinstance(polys, list) or not polys:
        raise f.error(field, f"expected the coordinates of a {gtype}, found none")
    for poly in polys:
        if not isinstance(poly, list) or not poly:
            raise f.error(field, "expected a polygon as a list of linear rings")
        for ring in poly:
            if not isinstance(ring, list) or len(ring) < 4:
                raise f.error(field, "a linear ring needs at least 4 positions "
                                     "(closed: the last equals the first)")
            for pos in ring:
                if (not isinstance(pos, list) or len(pos) < 2
                        or any(isinstance(c, bool) or not isinstance(c, int | float)
                               or not math.isfinite(c) for c in pos)):
                    raise f.error(field, f"expected a position [lon, lat], found {pos!r}")
                lon, lat = pos[0], pos[1]
                if not -180 <= lon <= 180:
                    raise f.error(field, f"longitude out of range -180 to 180, found {lon}")
                if not -90 <= lat <= 90:
                    raise f.error(field, f"latitude out of range -90 to 90, found {lat}")
            if ring[0][:2] != ring[-1][:2]:
                raise f.error(field, "linear ring is not closed (the last position must "
                                     "equal the first)")


def _optional_string(f: _Feature, props: dict[str, Any], key: str, default: str) -> str:
    v = props.get(key)
    if v is None:
        return default
    if not isinstance(v, str):
        raise f.error(f"properties.{key}", f"expected a string, found {json.dumps(v)}")
    bad = control_character(v)
    if bad:
        raise f.error(f"properties.{key}", bad)
    return v


def load_zones(path: str | PathLike[str], *,
               digests: MutableMapping[str, str] | None = None) -> tuple[ZoneConfig, ...]:
    """Read the zones GeoJSON FeatureCollection and validate every feature.

    Features must be Polygon or MultiPolygon (holes allowed) with valid
    geometry in WGS84 longitude/latitude, and ``properties.id`` a unique
    string; ``name`` (default: the id) and ``kind`` (default ``""``) are
    optional strings. Geometries are read with :func:`shapely.geometry.shape`
    from the text already parsed (the file is read once); the structure is checked from the JSON text so each message can name the
    feature and its line (the line of its ``"id"``, best effort).

    Raises
    ------
    InputError
        Naming the file, line and property of the first problem.
    """
    text = read_text(path, limit=ZONES_MAX_BYTES, digests=digests)
    try:
        doc = json.loads(text)
    except RecursionError:
        raise InputError("JSON nested too deeply to read (arrays or objects inside each "
                         "other thousands of levels deep)", file=path) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"invalid JSON: {exc.msg} (column {exc.colno})",
                         file=path, line=exc.lineno) from None
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        found = doc.get("type") if isinstance(doc, dict) else type(doc).__name__
        raise InputError(f"expected a GeoJSON FeatureCollection, found {json.dumps(found)}",
                         file=path, line=_first_line(text, '"type"'), field="type")
    raw_features = doc.get("features")
    if not isinstance(raw_features, list):
        raise InputError("expected 'features' to be an array", file=path, field="features")
    seen: dict[str, int | None] = {}
    feats: list[tuple[_Feature, str, dict[str, Any]]] = []
    ids_so_far: list[Any] = []
    for i, raw in enumerate(raw_features):
        props_raw = raw.get("properties") if isinstance(raw, dict) else None
        rid = props_raw.get("id") if isinstance(props_raw, dict) else None
        f = _Feature(path, text, i, raw, nth=ids_so_far.count(rid) if isinstance(rid, str) else 0)
        ids_so_far.append(rid)
        if not isinstance(raw, dict) or raw.get("type") != "Feature":
            raise f.error("type", "expected a GeoJSON Feature object")
        geom = raw.get("geometry")
        gtype = geom.get("type") if isinstance(geom, dict) else None
        if gtype not in _AREA_TYPES:
            raise f.error("geometry.type", f"expected a Polygon or MultiPolygon, found "
                                           f"{json.dumps(gtype)}")
        props = raw.get("properties")
        if not isinstance(props, dict) or "id" not in props:
            raise f.error("properties.id", "missing required property 'id'")
        if f.id is None or not f.id.strip():
            raise f.error("properties.id",
                          f"expected a non-empty string, found {json.dumps(props['id'])}")
        fid: str = f.id
        bad = control_character(fid)
        if bad:
            raise f.error("properties.id", bad)
        if f.id in seen:
            first = seen[f.id]
            raise f.error("properties.id", f"duplicate zone id {f.id!r}"
                          + (f" (first at line {first})" if first else ""))
        seen[f.id] = f.line
        _optional_string(f, props, "name", f.id)
        _optional_string(f, props, "kind", "")
        assert isinstance(geom, dict)
        _check_rings(f, gtype, geom.get("coordinates"))
        feats.append((f, fid, props))
    if not feats:
        return ()

    out = []
    for f, fid, props in feats:
        shape = _geometry(f)
        if shape is None or shape.is_empty:
            raise f.error("geometry", "empty geometry")
        if not shape.is_valid:
            raise f.error("geometry", f"invalid polygon: {explain_validity(shape)}")
        out.append(ZoneConfig(id=fid, name=_optional_string(f, props, "name", fid),
                              kind=_optional_string(f, props, "kind", ""), geometry=shape,
                              source=str(path), line=f.line))
    return tuple(out)


def _geometry(f: _Feature) -> Any:
    """The feature's geometry as shapely reads GeoJSON (from the text already parsed)."""
    try:
        return shapely.geometry.shape(f.raw["geometry"])
    except (ValueError, TypeError, shapely.errors.ShapelyError) as exc:
        raise f.error("geometry", f"cannot read the geometry: {exc}") from None
