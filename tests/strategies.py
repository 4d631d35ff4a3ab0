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
