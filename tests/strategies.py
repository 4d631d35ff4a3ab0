"""Hypothesis strategies shared by the tests (one place, as the house style asks)."""

from __future__ import annotations

# --- cost matrices for the k-best assignment (tests/test_assignment.py) -------------------------
import numpy as _np  # noqa: E402
from hypothesis import strategies as _st  # noqa: E402


@_st.composite
def cost_matrices(draw, *, max_rows: int = 4, max_cols: int = 6, integer: bool = False):
    """An ``m x n`` cost matrix (rows may exceed columns) with some ``+inf`` entries.

    ``integer=True`` draws small integers, so equal-cost assignments (ties) are common.
    """
    m = draw(_st.integers(0, max_rows))
    n = draw(_st.integers(0, max_cols))
    if integer:
        values = _st.integers(-5, 5).map(float)
    else:
        values = _st.floats(-20.0, 20.0, allow_nan=False, allow_infinity=False)
    entry = _st.one_of(values, values, values, _st.just(float("inf")))
    flat = draw(_st.lists(entry, min_size=m * n, max_size=m * n))
    return _np.array(flat, dtype=float).reshape(m, n)


@_st.composite
def pmbm_cost_matrices(draw, *, max_rows: int = 4, max_bernoullis: int = 4):
    """The PMBM layout of the methods note §1.5: plots are rows; an ``m x n`` block of
    previous Bernoullis (``+inf`` where the gate fails) then an ``m x m`` block of new
    Bernoullis, finite on the diagonal only."""
    m = draw(_st.integers(1, max_rows))
    n = draw(_st.integers(0, max_bernoullis))
    values = _st.floats(-15.0, 15.0, allow_nan=False, allow_infinity=False)
    entry = _st.one_of(values, _st.just(float("inf")))
    det = _np.array(draw(_st.lists(entry, min_size=m * n, max_size=m * n)), dtype=float)
    new = _np.full((m, m), _np.inf)
    new[_np.arange(m), _np.arange(m)] = draw(_st.lists(values, min_size=m, max_size=m))
    return _np.hstack([det.reshape(m, n), new])


# --- point sets and trajectory sets for GOSPA / trajectory GOSPA (tests/test_metrics.py) --------
@_st.composite
def point_sets(draw, *, max_points: int = 4, span: float = 30.0, integer: bool = False):
    """An ``(n, 2)`` array of points, ``0 <= n <= max_points``, in a ``span`` square.

    ``integer=True`` draws whole metres, so distances tie with each other and with a
    whole-number cut-off now and then.
    """
    n = draw(_st.integers(0, max_points))
    if integer:
        coord = _st.integers(0, int(span)).map(float)
    else:
        coord = _st.floats(0.0, span, allow_nan=False, allow_infinity=False)
    flat = draw(_st.lists(coord, min_size=2 * n, max_size=2 * n))
    return _np.array(flat, dtype=float).reshape(n, 2)


@_st.composite
def trajectory_sets(draw, *, steps: int, max_trajectories: int = 3, span: float = 30.0):
    """An ``(n, steps, 2)`` array of trajectories, NaN where absent (holes allowed)."""
    n = draw(_st.integers(0, max_trajectories))
    coord = _st.integers(0, int(span)).map(float)
    flat = draw(_st.lists(coord, min_size=2 * n * steps, max_size=2 * n * steps))
    present = draw(_st.lists(_st.booleans(), min_size=n * steps, max_size=n * steps))
    arr = _np.array(flat, dtype=float).reshape(n, steps, 2)
    arr[~_np.array(present, dtype=bool).reshape(n, steps)] = _np.nan
    return arr

# --- plot feeds (tests/test_feeds.py) ---------------------------------------------------------
from hypothesis import strategies as st  # noqa: E402


def feed_cell_garbage() -> st.SearchStrategy[str]:
    """One CSV cell of plausible-looking junk: numbers, times, words, quotes, commas."""
    numbers = st.floats(allow_nan=True, allow_infinity=True).map(repr)
    stamps = st.sampled_from(["2026-05-04T06:00:00Z", "2026-05-04T06:00:00", "2026-02-30T00:00Z",
                              "1777874400", "-1", "1e400", "0x10", "", " ", '"', '"a,b"',
                              "nan", "NaN", "true", "\\N", "NULL", "\t", "calder-head"])
    text = st.text(alphabet=st.characters(blacklist_categories=("Cs",),
                                          blacklist_characters="\r\n"), max_size=12)
    return st.one_of(numbers, stamps, text)


def plot_rows(sensor_ids: list[str], *, max_rows: int = 25) -> st.SearchStrategy[list[tuple]]:
    """Valid feed rows ``(epoch_ms, sensor, lat, lon, sigma_m or None)``, with repeats."""
    row = st.tuples(
        st.integers(1_700_000_000_000, 1_900_000_000_000),
        st.sampled_from(sensor_ids),
        st.floats(-90, 90, allow_nan=False),
        st.floats(-180, 180, allow_nan=False),
        st.one_of(st.none(), st.floats(1e-3, 1e4, allow_nan=False)),
    )
    return st.lists(row, min_size=0, max_size=max_rows).flatmap(
        lambda rows: st.lists(st.sampled_from(rows), max_size=5).map(lambda extra: rows + extra)
        if rows else st.just(rows))


def mode_states(rng, n):  # type: ignore[no-untyped-def]
    """Random per-mode means ``(n, 2, 4)``, covariances (positive definite) and mode probabilities."""
    m = rng.normal(0, 50, (n, 2, 4))
    A = rng.normal(0, 1, (n, 2, 4, 4))
    P = A @ _np.swapaxes(A, -1, -2) + 4 * _np.eye(4)
    mu = rng.dirichlet([2, 2], n)
    return m, P, mu


# --- hostile input files (tests/fuzz_contract.py) -------------------------------------------
#: Values a broken or hostile file might hold in any one cell or key.
HOSTILE_TEXT = ["", " ", "nan", "inf", "-inf", "1e309", "-0", "0", "1e-320", "99999999999999999999999",
                str(2**64), "-1", "abc", "NaN", "1,5", '"', "'", "\x00", "\x1b[31m", "\u202e",
                "\ufeff", "é", "1970-01-01T00:00:00Z", "2090-01-01T00:00:00Z",
                "2026-05-04T06:00:00", "2026-02-30T00:00:00Z", "1e10", "180.0000001", "-90",
                "x" * 300]


@_st.composite
def hostile_feeds(draw, base: str):
    """A plot feed (bytes) derived from the valid CSV ``base`` by a few hostile edits."""
    rows = base.splitlines()
    n_edits = draw(_st.integers(0, 3))
    for _ in range(n_edits):
        op = draw(_st.sampled_from(["cell", "cell", "drop", "dup", "swap", "extra", "ragged"]))
        if len(rows) < 2:
            break
        k = draw(_st.integers(1, len(rows) - 1))
        cells = rows[k].split(",")
        if op == "cell":
            c = draw(_st.integers(0, len(cells) - 1))
            cells[c] = draw(_st.one_of(_st.sampled_from(HOSTILE_TEXT),
                                       _st.text(max_size=8).filter(lambda s: "," not in s
                                                                   and "\n" not in s
                                                                   and "\r" not in s)))
            rows[k] = ",".join(cells)
        elif op == "drop":
            del rows[k]
        elif op == "dup":
            rows.insert(k, rows[k])
        elif op == "swap":
            j = draw(_st.integers(1, len(rows) - 1))
            rows[k], rows[j] = rows[j], rows[k]
        elif op == "extra":
            rows[k] += ",7"
        else:
            rows[k] = ",".join(cells[:-1])
    text = "\n".join(rows) + draw(_st.sampled_from(["\n", "", "\n\n"]))
    ending = draw(_st.sampled_from(["\n", "\n", "\r\n", "\r"]))
    data = text.replace("\n", ending).encode("utf-8", "surrogatepass")
    tail = draw(_st.sampled_from(["none", "none", "none", "bytes", "cut", "bom", "gzip"]))
    if tail == "bytes":
        data = data[: draw(_st.integers(0, len(data)))] + draw(_st.binary(min_size=1, max_size=64))
    elif tail == "cut":
        data = data[: draw(_st.integers(0, len(data)))]
    elif tail == "bom":
        data = b"\xef\xbb\xbf" + data
    elif tail == "gzip":
        import gzip

        data = gzip.compress(data, mtime=0)
        if draw(_st.booleans()):
            data = data[: draw(_st.integers(0, len(data)))]
    return data


@_st.composite
def hostile_toml(draw, base: str):
    """A TOML text derived from ``base``: a value replaced, a key dropped or added, a cut."""
    lines = base.splitlines()
    for _ in range(draw(_st.integers(0, 2))):
        keyed = [i for i, ln in enumerate(lines) if "=" in ln and not ln.lstrip().startswith("#")]
        op = draw(_st.sampled_from(["value", "value", "drop", "unknown", "cut", "table"]))
        if op == "value" and keyed:
            i = draw(_st.sampled_from(keyed))
            key = lines[i].split("=")[0].strip()
            value = draw(_st.one_of(
                _st.integers(-(2**80), 2**80).map(str),
                _st.floats(allow_nan=True, allow_infinity=True).map(
                    lambda f: "nan" if f != f else ("inf" if f == float("inf") else
                                                    "-inf" if f == float("-inf") else repr(f))),
                _st.sampled_from(["true", '""', '"x"', "[1, 2]", "{}", '"\\u202e"', "[[[[1]]]]"]),
                _st.text(max_size=6).map(lambda s: '"' + s.replace("\\", "").replace('"', "")
                                         .replace("\n", "") + '"')))
            lines[i] = f"{key} = {value}"
        elif op == "drop" and keyed:
            i = draw(_st.sampled_from(keyed))
            lines[i] = ""
        elif op == "unknown":
            lines.append("colour = 3")
        elif op == "table":
            lines.append(draw(_st.sampled_from(["[[sensor]]", "[[rule]]", "[other]"])))
        else:
            cut = draw(_st.integers(0, len(lines)))
            lines = lines[:cut]
    return "\n".join(lines) + "\n"


@_st.composite
def hostile_zones(draw, doc: dict):
    """A zones document (text) derived from ``doc``: moved, huge, broken or hostile features."""
    import copy
    import json

    d = copy.deepcopy(doc)
    feats = d["features"]
    for _ in range(draw(_st.integers(0, 2))):
        op = draw(_st.sampled_from(["shift", "world", "antipode", "coord", "id", "drop",
                                    "type", "nest", "cut"]))
        f = feats[draw(_st.integers(0, len(feats) - 1))] if feats else None
        if f is None:
            break
        ring = f["geometry"]["coordinates"][0] if f["geometry"]["type"] == "Polygon" else None
        if op == "shift" and ring:
            dx = draw(_st.floats(-20, 20))
            f["geometry"]["coordinates"] = [[[max(-180, min(180, x + dx)), y] for x, y in r]
                                            for r in f["geometry"]["coordinates"]]
        elif op == "world":
            f["geometry"] = {"type": "Polygon", "coordinates": [[[-180, -90], [180, -90],
                                                                  [180, 90], [-180, 90],
                                                                  [-180, -90]]]}
        elif op == "antipode" and ring:
            f["geometry"]["coordinates"] = [[[x - 180 if x > 0 else x + 180, -y] for x, y in r]
                                            for r in f["geometry"]["coordinates"]]
        elif op == "coord" and ring:
            k = draw(_st.integers(0, len(ring) - 1))
            ring[k] = [draw(_st.floats(-1000, 1000)), draw(_st.floats(-1000, 1000))]
        elif op == "id":
            f["properties"]["id"] = draw(_st.one_of(_st.sampled_from(HOSTILE_TEXT),
                                                    _st.integers(), _st.none()))
        elif op == "drop":
            feats.remove(f)
        elif op == "type":
            f["geometry"]["type"] = draw(_st.sampled_from(["Point", "LineString", "Polygonn"]))
        elif op == "nest":
            return "[" * 50_000 + "]" * 50_000
        else:
            text = json.dumps(d)
            return text[: draw(_st.integers(0, len(text)))]
    return json.dumps(d, indent=1)
