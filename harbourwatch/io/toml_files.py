"""Private: reading and validating the sensor TOML, zones GeoJSON and rules TOML.

Public entry points are re-exported by :mod:`harbourwatch.io.records`. ``tomllib``
and ``json`` give no line numbers for values, so small scanners of the raw
text locate the ``[[table]]`` headers, the keys inside each, and GeoJSON
features, to point every message at a line.
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Iterable, Mapping, MutableMapping
from os import PathLike
from types import MappingProxyType
from typing import Any

from harbourwatch.errors import InputError
from harbourwatch.io.records import (
    RULE_SCHEMAS,
    ParamSpec,
    RuleConfig,
    RuleSchema,
    SensorConfig,
    ZoneConfig,
)
from harbourwatch.io.text import control_character, read_text

__all__ = ["load_sensors", "load_rules"]

#: Larger integers do not convert to floats exactly (2**53).
_MAX_EXACT_INT = 2**53
_TABLE_RE = re.compile(r"^\s*\[")
_ARRAY_TABLE_RE = re.compile(r"^\s*\[\[\s*([^\]]+?)\s*\]\]")
_KEY_RE = re.compile(r"""^\s*(?:"([^"]*)"|'([^']*)'|([A-Za-z0-9_-]+))\s*=""")


def _read_toml(path: str | PathLike[str],
               digests: MutableMapping[str, str] | None) -> tuple[dict[str, Any], str]:
    text = read_text(path, digests=digests)
    try:
        return tomllib.loads(text), text
    except RecursionError:
        raise InputError("TOML nested too deeply to read (arrays or tables inside each other "
                         "hundreds of levels deep)", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column \d+\)", msg)
        line = int(m.group(1)) if m else None
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
        if "end of document" in msg and line is None:
            line = text.count("\n") + 1
        raise InputError(f"TOML syntax error: {msg}", file=path, line=line) from None


def _table_blocks(text: str, name: str) -> list[tuple[int, dict[str, int]]]:
    """For each ``[[name]]`` header in order: its 1-based line and the lines of its keys."""
    blocks: list[tuple[int, dict[str, int]]] = []
    current: dict[str, int] | None = None
    for i, raw in enumerate(text.splitlines(), start=1):
        m = _ARRAY_TABLE_RE.match(raw)
        if m:
            current = None
            if m.group(1).strip("\"'") == name:
                current = {}
                blocks.append((i, current))
            continue
        if _TABLE_RE.match(raw):
            current = None
            continue
        if current is not None:
            k = _KEY_RE.match(raw)
            if k:
                key = next(g for g in k.groups() if g is not None)
                current.setdefault(key, i)
    return blocks


def _top_key_line(text: str, key: str) -> int | None:
    pat = re.compile(rf"""^\s*\[*\s*["']?{re.escape(key)}["']?\s*(?:\]|=)""")
    for i, raw in enumerate(text.splitlines(), start=1):
        if pat.match(raw):
            return i
    return None


def _show(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return repr(v)
    if isinstance(v, list):
        return "an array"
    if isinstance(v, dict):
        return "a table"
    return str(v)


class _Entry:
    """One ``[[table]]`` entry with the lines of its keys, for located messages."""

    def __init__(self, path: str | PathLike[str], data: Mapping[str, Any],
                 header: int | None, keys: Mapping[str, int], label: str) -> None:
        self.path, self.data, self.header, self.keys, self.label = path, data, header, keys, label

    def error(self, key: str, message: str) -> InputError:
        return InputError(message, file=self.path, line=self.keys.get(key, self.header), field=key)

    def string(self, key: str, *, required: bool = True) -> str | None:
        if key not in self.data:
            if required:
                raise self.error(key, f"missing required key in {self.label}")
            return None
        v = self.data[key]
        if not isinstance(v, str) or not v.strip():
            raise self.error(key, f"expected a non-empty string, found {_show(v)}")
        bad = control_character(v)
        if bad:
            raise self.error(key, bad)
        return v

    def number(self, key: str, *, lo: float = -math.inf, hi: float = math.inf,
               lo_open: bool = False, hi_open: bool = False, what: str = "a number",
               why: str = "", cap: float | None = None) -> float:
        """The number under ``key``; ``cap``: a sanity bound above the valid range."""
        if key not in self.data:
            raise self.error(key, f"missing required key in {self.label}")
        v = self.check_number(key, self.data[key], lo=lo, hi=hi, lo_open=lo_open,
                              hi_open=hi_open, what=what, why=why)
        if cap is not None and v > cap:
            raise self.error(key, f"expected {what} of at most {cap:g}{why}, found {_show(v)}")
        return v

    def check_number(self, key: str, v: Any, *, lo: float, hi: float, lo_open: bool = False,
                     hi_open: bool = False, what: str = "a number", why: str = "") -> float:
        if isinstance(v, bool) or not isinstance(v, int | float):
            hint = " (text, not a number: remove the quotes)" if _numeric_text(v) else ""
            raise self.error(key, f"expected {what}, found {_show(v)}{hint}")
        if isinstance(v, int) and abs(v) > _MAX_EXACT_INT:
            digits = len(str(abs(v)))
            raise self.error(key, f"expected {what}{why}, found an integer of {digits} digits "
                                  "(too large for any measure)")
        if not math.isfinite(v):
            raise self.error(key, f"expected {what}, found {_show(v)}")
        below = v <= lo if lo_open else v < lo
        above = v >= hi if hi_open else v > hi
        if below or above:
            raise self.error(key, f"expected {what}{why}, found {_show(v)}")
        return v


def _numeric_text(v: Any) -> bool:
    """True for a TOML string that holds a number (``lat = "54.3"``)."""
    if not isinstance(v, str):
        return False
    try:
        return math.isfinite(float(v))
    except ValueError:
        return False


def _entries(path: str | PathLike[str], data: Mapping[str, Any], text: str,
             name: str) -> list[_Entry]:
    """The ``[[name]]`` tables of a TOML file; other top-level keys are errors."""
    for key in data:
        if key != name:
            raise InputError(f"unknown top-level key; expected only [[{name}]] tables",
                             file=path, line=_top_key_line(text, key), field=key)
    tables = data.get(name, [])
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        raise InputError(f"expected [[{name}]] tables (an array of tables)",
                         file=path, line=_top_key_line(text, name), field=name)
    blocks = _table_blocks(text, name)
    out = []
    for i, table in enumerate(tables):
        header, keys = blocks[i] if len(blocks) == len(tables) else (None, {})
        out.append(_Entry(path, table, header, keys, f"[[{name}]] number {i + 1}"))
    return out


def _unknown_keys(entry: _Entry, valid: Iterable[str]) -> None:
    valid = list(valid)
    extra = [k for k in entry.data if k not in valid]
    if extra:
        key = min(extra, key=lambda k: entry.keys.get(k, 0))
        raise entry.error(key, f"unknown key; valid keys: {', '.join(valid)}")


def _duplicate(entry: _Entry, key: str, value: str, seen: dict[str, int | None], what: str) -> None:
    if value in seen:
        first = seen[value]
        where = f" (first at line {first})" if first else ""
        raise entry.error(key, f"duplicate {what} {value!r}{where}")
    seen[value] = entry.keys.get(key, entry.header)


# --- sensors -------------------------------------------------------------------------------

_SENSOR_KEYS = ("id", "lat", "lon", "scan_period_s", "range_sigma_m", "bearing_sigma_deg",
                "detection_probability", "false_plots_per_scan", "max_range_m")
#: Upper bounds of the sensor values: far beyond any shore radar (a few tens of km of
#: cover, seconds per revolution), low enough that no derived grid or count explodes.
#: Common practice, no source.
MAX_RANGE_M = 500_000.0
MAX_SCAN_PERIOD_S = 3600.0
MAX_RANGE_SIGMA_M = 10_000.0
MAX_BEARING_SIGMA_DEG = 45.0
MAX_FALSE_PLOTS_PER_SCAN = 1e6
_POSITIVE = "a positive number"


def load_sensors(path: str | PathLike[str], *,
                 digests: MutableMapping[str, str] | None = None) -> tuple[SensorConfig, ...]:
    """Read the sensor TOML file (``[[sensor]]`` tables) and validate every value.

    Raises
    ------
    InputError
        Naming the file, line and key of the first problem: unreadable file,
        TOML syntax, unknown or missing key, wrong type (``true`` is not a
        number), value out of range, duplicate id, no sensor at all.

    Examples
    --------
    A file holding the example of the file contract gives one
    :class:`~harbourwatch.io.records.SensorConfig` with ``lat_deg=54.3012``.
    """
    data, text = _read_toml(path, digests)
    entries = _entries(path, data, text, "sensor")
    if not entries:
        raise InputError("no sensors: the file needs at least one [[sensor]] table",
                         file=path, field="sensor")
    seen: dict[str, int | None] = {}
    out = []
    for e in entries:
        _unknown_keys(e, _SENSOR_KEYS)
        sid = e.string("id")
        assert sid is not None
        _duplicate(e, "id", sid, seen, "sensor id")
        out.append(SensorConfig(
            id=sid,
            lat_deg=float(e.number("lat", lo=-90, hi=90,
                                   what="a latitude in degrees from -90 to 90")),
            lon_deg=float(e.number("lon", lo=-180, hi=180,
                                   what="a longitude in degrees from -180 to 180")),
            scan_period_s=float(e.number("scan_period_s", lo=0, lo_open=True, what=_POSITIVE,
                                         cap=MAX_SCAN_PERIOD_S)),
            range_sigma_m=float(e.number("range_sigma_m", lo=0, lo_open=True, what=_POSITIVE,
                                         cap=MAX_RANGE_SIGMA_M)),
            bearing_sigma_deg=float(e.number("bearing_sigma_deg", lo=0, lo_open=True,
                                             what=_POSITIVE, cap=MAX_BEARING_SIGMA_DEG)),
            detection_probability=float(e.number(
                "detection_probability", lo=0, hi=1, lo_open=True, hi_open=True,
                what="a probability above 0 and below 1",
                why=" (strictly below 1: the filter weighs a missed detection by "
                    "1 - detection_probability)")),
            false_plots_per_scan=float(e.number("false_plots_per_scan", lo=0,
                                                what="a number zero or above",
                                                cap=MAX_FALSE_PLOTS_PER_SCAN)),
            max_range_m=float(e.number("max_range_m", lo=0, lo_open=True, what=_POSITIVE,
                                       cap=MAX_RANGE_M)),
        ))
    return tuple(out)


# --- rules ---------------------------------------------------------------------------------

_RULE_COMMON = ("id", "kind", "zone", "min_probability")


def load_rules(
    path: str | PathLike[str],
    zones: Iterable[ZoneConfig],
    schemas: Mapping[str, RuleSchema] | None = None,
    *,
    digests: MutableMapping[str, str] | None = None,
) -> tuple[RuleConfig, ...]:
    """Read the rules TOML file (``[[rule]]`` tables) and validate it.

    Parameters
    ----------
    path
        The rules file.
    zones
        The run's zones; a rule's ``zone`` must be one of their ids.
    schemas
        Rule kinds by name; by default every registered kind
        (:data:`harbourwatch.io.records.RULE_SCHEMAS`). The kind must be one
        of them and every other key one of the kind's parameters, within its
        bounds: the one validation of a rule, done here at the edge.

    Raises
    ------
    InputError
        Naming the file, line and key of the first problem.
    """
    if schemas is None:
        schemas = RULE_SCHEMAS
    data, text = _read_toml(path, digests)
    zone_ids = [z.id for z in zones]
    seen: dict[str, int | None] = {}
    out = []
    for e in _entries(path, data, text, "rule"):
        rid = e.string("id")
        kind = e.string("kind")
        assert rid is not None and kind is not None
        _duplicate(e, "id", rid, seen, "rule id")
        if kind not in schemas:
            raise e.error("kind", f"unknown rule kind {kind!r}; valid kinds: "
                                  f"{', '.join(sorted(schemas))}")
        schema = schemas[kind]
        _unknown_keys(e, (*_RULE_COMMON, *(p.name for p in schema.params)))
        zone = e.string("zone", required=False)
        if zone is not None and zone not in zone_ids:
            raise e.error("zone", f"unknown zone {zone!r}; valid zone ids: "
                                  f"{', '.join(zone_ids) or 'none'}")
        if zone is None and schema.zone_required:
            raise e.error("zone", f"missing required key: rule kind {kind!r} needs a zone")
        min_p = 0.5
        if "min_probability" in e.data:
            min_p = float(e.number("min_probability", lo=0, hi=1,
                                   what="a probability from 0 to 1"))
        params = _rule_params(e, schema)
        out.append(RuleConfig(
            id=rid, kind=kind, zone=zone, min_probability=min_p,
            params=MappingProxyType(params), source=str(path), line=e.header,
            param_lines=MappingProxyType(dict(e.keys)),
        ))
    return tuple(out)


def _rule_params(e: _Entry, schema: RuleSchema) -> dict[str, Any]:
    params: dict[str, Any] = {}
    spec: ParamSpec
    for spec in schema.params:
        if spec.name not in e.data:
            if spec.required:
                raise e.error(spec.name, f"missing required key: rule kind {schema.kind!r} "
                                         f"needs {spec.name}")
            continue
        what = f"a number from {spec.min_value:g} to {spec.max_value:g}"
        if math.isinf(spec.max_value):
            what = f"a number of at least {spec.min_value:g}"
        params[spec.name] = e.check_number(spec.name, e.data[spec.name], lo=spec.min_value,
                                           hi=spec.max_value, what=what)
    return params

