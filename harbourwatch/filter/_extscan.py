"""One scan's extended-vessel pairs: cells of plots scored against the predicted vessels.

Point-like hypotheses and single plots keep the compiled point path
(``_gating.gate_pairs``). What this module adds, per scan:

* extended hypotheses (those carrying a rate and an extent, see
  :mod:`._extent`) against every single plot, with the per-plot covariance
  ``ρ X̂ + R``;
* every hypothesis against every multi-plot cell of the candidate
  partitions (:mod:`._cells`), the cell's centroid with ``S = H P Hᵀ + Y/n``,
  ``Y = ρ X̂ + R̄``. A point-like hypothesis is scored with the prior extent
  and the prior probability of being extended (it becomes extended if it
  takes the cell);
* the new-vessel option of each multi-plot cell.

The kinematic part reuses the compiled IMM gate-and-update kernel with the
pair's own covariance; the cell's likelihood adds the negative-binomial
count term and the scatter term (methods note §9.3). Extents are carried
as tuples ``(α, β, v, V00, V01, V11)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from harbourwatch.filter._cells import CellBook, scan_partitions
from harbourwatch.filter._gating import MIN_STEP_S
from harbourwatch.filter._kernels import gate_candidates
from harbourwatch.models.extent import (
    EXTENDED_PRIOR,
    RHO,
    count_log_pmf,
    inv2,
    iw_mean,
    log_no_plot,
    prior_extent,
    scatter_log_lik,
    update_extent,
)

Array = NDArray[np.float64]
IntArray = NDArray[np.int64]
Ext = tuple[float, ...]


def ext_arrays(exts: list[Ext]) -> tuple[Array, Array, Array, Array]:
    """``(α, β, v, V)`` arrays of a list of extent tuples."""
    a = np.array(exts, float).reshape(-1, 6)
    V = np.empty((a.shape[0], 2, 2))
    V[:, 0, 0], V[:, 0, 1], V[:, 1, 0], V[:, 1, 1] = a[:, 3], a[:, 4], a[:, 4], a[:, 5]
    return a[:, 0], a[:, 1], a[:, 2], V


def ext_tuples(alpha: Array, beta: Array, v: Array, V: Array) -> list[Ext]:
    """Extent tuples of ``(α, β, v, V)`` arrays."""
    return list(zip(alpha.tolist(), beta.tolist(), v.tolist(), V[:, 0, 0].tolist(),
                    V[:, 0, 1].tolist(), V[:, 1, 1].tolist(), strict=True))


@dataclass
class ExtendedScan:
    """The scan as the association sees it once cells are formed."""

    pairs: tuple[IntArray, IntArray, Array, Array, Array, Array, Array, Array, Array]
    z: Array
    R: Array
    tj: Array
    ids: IntArray
    book: CellBook
    partitions: list[list[int]]
    pair_ext: dict[int, Ext] = field(default_factory=dict)
    born_ext: dict[int, Ext] = field(default_factory=dict)
    cell_ln_lik: Array = field(default_factory=lambda: np.zeros(0))
    ext_pairs: int = 0


#: Extra prior weight of a new extended vessel from a cell of only two plots (as often two
#: small craft side by side as one hull).
PAIR_BIRTH = 1e-6
#: Below this speed (m/s) a vessel's course is not taken to turn its hull, and one
#: update turns it by at most this much (rad): a ship turns slowly, a noisy course does not.
_TURN_MIN_SPEED = 1.5
_TURN_MAX_STEP = np.radians(3.0)


def rotate_with_course(V: Array, prior: Array, post: Array) -> Array:
    """Turn the extent with the change of course an update brings (a turning ship's hull turns).

    ``V ← T V Tᵀ`` with ``T`` the rotation by the angle between the prior
    and posterior velocity of ``[p_e, v_e, p_n, v_n]`` states, at most
    :data:`_TURN_MAX_STEP` per update; no rotation where a speed is below
    :data:`_TURN_MIN_SPEED`: a noisy course does not turn a hull.
    """
    a0 = np.arctan2(prior[:, 1], prior[:, 3])
    a1 = np.arctan2(post[:, 1], post[:, 3])
    fast = (np.hypot(prior[:, 1], prior[:, 3]) > _TURN_MIN_SPEED) & (
        np.hypot(post[:, 1], post[:, 3]) > _TURN_MIN_SPEED)
    d = (a1 - a0 + np.pi) % (2 * np.pi) - np.pi
    d = np.where(fast, np.clip(d, -_TURN_MAX_STEP, _TURN_MAX_STEP), 0.0)  # clockwise from north
    cs, sn = np.cos(d), np.sin(d)
    T = np.empty_like(V)
    T[:, 0, 0], T[:, 0, 1], T[:, 1, 0], T[:, 1, 1] = cs, sn, -sn, cs
    out = T @ V @ np.swapaxes(T, 1, 2)
    return 0.5 * (out + np.swapaxes(out, 1, 2))


def _concat(a: tuple, b: tuple) -> tuple:  # type: ignore[type-arg]
    return tuple(np.concatenate([x, y]) for x, y in zip(a, b, strict=True))


def _one_plot_each(pairs: tuple, point: NDArray[np.bool_]  # type: ignore[type-arg]
                   ) -> tuple[IntArray, IntArray, Array]:
    """``(slot, plot, log-likelihood)`` of the point path's pairs, one plot per point-like slot.

    An established point-like vessel gives at most one plot, so it guides
    the partitions with its best plot only; the other plots in its gate go
    with the vessel that gates best with them next (beside a hull: the
    hull's cell), so that a partition with the craft's plot alone and the
    ship's plots together is among the candidates.
    """
    ii, jj, ll = pairs[0], pairs[1], pairs[2]
    keep = ~point[ii]
    top: dict[int, tuple[float, int]] = {}
    for p in np.flatnonzero(~keep).tolist():
        i, v = int(ii[p]), float(ll[p])
        if v > top.get(i, (-math.inf, -1))[0]:
            top[i] = (v, p)
    keep[[p for _, p in top.values()]] = True
    return ii[keep], jj[keep], ll[keep]


def extended_scan(motion: Any, gate: Any, leaf: Any, pm: Any, pP: Any, tmiss: Any, pd: Any, slot_ext: Any, z: Any, R: Any, tj: Any, ids: Any,
                  std_pairs: Any, slot_bern: Any) -> ExtendedScan:
    """Extended pairs, cells and their new-vessel terms for one scan (see the module note).

    ``leaf`` is ``(mm, mP, mu, t_leaf)`` per slot; ``pm, pP, tmiss`` the
    predictions to the scan time; ``pd`` the detection probability per slot
    (already lowered by the no-plot probability for extended slots);
    ``slot_ext`` the predicted extent per extended slot ``{slot: (α, β, v, V)}``
    with ``V`` a 2x2 array; ``std_pairs`` the point path's gated pairs;
    ``slot_bern`` the Bernoulli of each slot (cells are guided by Bernoulli,
    so that two hypotheses of one vessel do not split its plots).
    """
    mm, mP, mu, t_leaf = leaf
    n, m = pm.shape[0], z.shape[0]
    a0, b0, v0, V0 = prior_extent(n)
    is_ext = np.zeros(n, bool)
    for s, (a, b, v, V) in slot_ext.items():
        a0[s], b0[s], v0[s], V0[s] = a, b, v, V
        is_ext[s] = True
    X = iw_mean(v0, V0)
    lam = np.linalg.eigvalsh(X)[:, 1]
    out_pairs = std_pairs
    new_ii: list[IntArray] = []
    new_cell: list[IntArray] = []
    extra = []
    # extended hypotheses against single plots
    act_e = np.flatnonzero(is_ext & (pd > 0))
    if act_e.size and m:
        Rb = R + RHO * float(lam[act_e].max()) * np.eye(2)
        ii, jj = gate_candidates(act_e, mm, mP, t_leaf, motion.q_max, z, Rb, tj, float(gate),
                                 MIN_STEP_S)
        if ii.size:
            Rp = np.ascontiguousarray(R[jj] + RHO * X[ii])
            res = motion.gate_update(mm, mP, mu, t_leaf, ii, np.arange(ii.size), tj[jj],
                                     np.ascontiguousarray(z[jj]), Rp, gate, MIN_STEP_S)
            k = res[0]
            extra.append((ii[k], jj[k], np.ones(k.size), z[jj[k]], np.zeros((k.size, 2, 2)),
                          R[jj[k]], res))
    # the plot each slot gates best with (prediction-guided cells and splitting)
    best = np.full(m, -1, np.int64)
    score = np.full(m, -np.inf)
    for ii_, jj_, ll_ in [_one_plot_each(std_pairs, established(pP) & ~is_ext)] + [
            (e[0], e[1], e[6][1]) for e in extra]:
        for i, j, ll in zip(ii_.tolist(), jj_.tolist(), ll_.tolist(), strict=True):
            if ll > score[j]:
                score[j], best[j] = ll, slot_bern[i]
    _, best = np.unique(best, return_inverse=True)  # compact labels, -1 stays the smallest
    best = best.astype(np.int64) - (1 if (score == -np.inf).any() else 0)
    book = CellBook(m)
    parts = scan_partitions(z, best, book)
    nc = len(book.cells)
    zbar = np.zeros((nc, 2))
    Zc = np.zeros((nc, 2, 2))
    Rbar = np.zeros((nc, 2, 2))
    tbar = np.zeros(nc)
    cnt = np.zeros(nc)
    cid = np.zeros(nc, np.int64)
    for c, plots in enumerate(book.cells):
        p = list(plots)
        zbar[c] = z[p].mean(axis=0)
        d = z[p] - zbar[c]
        Zc[c] = d.T @ d
        Rbar[c] = R[p].mean(axis=0)
        tbar[c] = tj[p].mean()
        cnt[c] = len(p)
        cid[c] = ids[p[0]]
    # an established point-like vessel never takes a multi-plot cell; a young one may turn out
    # to be extended (its first plots came one per scan)
    act = np.flatnonzero((is_ext | ~established(pP)) & (pd > 0))
    if nc and act.size:
        Rb = (Rbar + RHO * float(lam[act].max()) * np.eye(2)) / cnt[:, None, None]
        ii, cc = gate_candidates(act, mm, mP, t_leaf, motion.q_max, zbar, Rb, tbar,
                                 float(gate), MIN_STEP_S)
        if ii.size:
            Rp = np.ascontiguousarray((Rbar[cc] + RHO * X[ii]) / cnt[cc, None, None])
            res = motion.gate_update(mm, mP, mu, t_leaf, ii, np.arange(ii.size), tbar[cc],
                                     np.ascontiguousarray(zbar[cc]), Rp, gate, MIN_STEP_S)
            k = res[0]
            c = cc[k]
            extra.append((ii[k], m + c, cnt[c], zbar[c], Zc[c], Rbar[c], res))
    pair_ext: dict[int, Ext] = {}
    n_ext = 0
    for ii_, aug, nn, zz, ZZ, RR, res in extra:
        if not ii_.size:
            continue
        _, ll, stamp, m_upd, P_upd, um, uP, post = res
        Y = RHO * X[ii_] + RR
        S = pP[ii_][:, [0, 2]][:, :, [0, 2]] + Y / nn[:, None, None]
        dtp = (stamp - tmiss[ii_])[:, None]
        eps = zz - (pm[ii_][:, [0, 2]] + dtp * pm[ii_][:, [1, 3]])
        lc = count_log_pmf(nn, a0[ii_], b0[ii_]) - np.log1p(-np.exp(log_no_plot(a0[ii_], b0[ii_])))
        lc = np.where(is_ext[ii_], lc, lc + math.log(EXTENDED_PRIOR))
        ll_tot = ll + lc + scatter_log_lik(nn, ZZ, Y)
        a2, b2, v2, V2 = update_extent(a0[ii_], b0[ii_], v0[ii_], V0[ii_], nn, eps, S, ZZ, Y)
        e2 = ext_tuples(a2, b2, v2, rotate_with_course(V2, pm[ii_], m_upd))
        base = out_pairs[0].size
        pair_ext.update(zip(range(base, base + ii_.size), e2, strict=True))
        out_pairs = _concat(out_pairs, (ii_, aug, ll_tot, stamp, m_upd, P_upd, um, uP, post))
        new_ii.append(ii_)
        new_cell.append(aug)
        n_ext += ii_.size
    # new vessels from the multi-plot cells
    born_ext: dict[int, Ext] = {}
    cell_ll = np.zeros(nc)
    Rinit = np.zeros((nc, 2, 2))
    if nc:
        pa, pb, pv, pV = prior_extent(nc)
        Y0 = RHO * iw_mean(pv, pV) + Rbar
        cell_ll = (math.log(EXTENDED_PRIOR) + count_log_pmf(cnt, pa, pb)
                   + scatter_log_lik(cnt, Zc, Y0) + np.where(cnt < 3, math.log(PAIR_BIRTH), 0.0))
        ea, eb, ev, eV = update_extent(pa, pb, pv, pV, cnt, np.zeros((nc, 2)),
                                       np.broadcast_to(np.eye(2), (nc, 2, 2)).copy(), Zc, Y0)
        Rinit = (RHO * iw_mean(ev, eV) + Rbar) / cnt[:, None, None]
        born_ext = dict(zip(range(m, m + nc), ext_tuples(ea, eb, ev, eV), strict=True))
    return ExtendedScan(
        pairs=out_pairs, z=np.vstack([z, zbar]), R=np.concatenate([R, Rinit]),
        tj=np.concatenate([tj, tbar]), ids=np.concatenate([ids, cid]), book=book,
        partitions=parts, pair_ext=pair_ext, born_ext=born_ext, cell_ln_lik=cell_ll,
        ext_pairs=n_ext)


#: A new vessel cannot start inside a known hull: the undetected density is taken as 0
#: where ``(z - p)ᵀ (X̂ + P)⁻¹ (z - p)`` is below this (1.5 times the hull ellipse).
HULL_EXCLUSION = 1.5**2
#: Radius of a hull's circle, in half-lengths.
HULL_CIRCLE = 1.2


def _hulls(slot_ext: dict, pP: Array  # type: ignore[type-arg]
           ) -> tuple[IntArray, Array, Array, Array, Array]:
    """``(slots, v, X̂, λ_max(X̂), P_pos)`` of the extended slots, as arrays (closed-form 2x2)."""
    slots = np.fromiter(slot_ext, np.int64, len(slot_ext))
    v = np.array([float(e[2]) for e in slot_ext.values()])
    X = np.array([e[3] for e in slot_ext.values()], float).reshape(-1, 2, 2) / (v - 3.0)[:, None, None]
    lam = 0.5 * (X[:, 0, 0] + X[:, 1, 1]) + np.hypot(0.5 * (X[:, 0, 0] - X[:, 1, 1]), X[:, 0, 1])
    return slots, v, X, lam, pP[slots][:, [0, 2]][:, :, [0, 2]]


def _inside(z: Array, pm: Array, hulls: tuple[IntArray, Array, Array, Array, Array],
            circle: NDArray[np.bool_] | None) -> NDArray[np.bool_]:
    """``(slots, k)``: position ``k`` inside slot's predicted hull (see :func:`inside_hulls`)."""
    slots, _, X, lam, Pp = hulls
    d = z[None, :, :] - pm[slots][:, [0, 2]][:, None, :]
    hit = np.einsum("ski,sij,skj->sk", d, inv2(X + Pp), d) < HULL_EXCLUSION
    if circle is not None:
        r2 = HULL_CIRCLE**2 * lam + Pp[:, 0, 0] + Pp[:, 1, 1]
        hit = np.where(circle[None, :], np.einsum("ski,ski->sk", d, d) < r2[:, None], hit)
    return hit


def inside_hulls(z: Array, pm: Array, pP: Array, slot_ext: dict,  # type: ignore[type-arg]
                 circle: NDArray[np.bool_] | None = None) -> NDArray[np.bool_]:
    """Positions ``z (k, 2)`` inside the predicted hull of some extended slot (see above).

    Where ``circle`` is set the test is the hull's circle instead, of radius
    :data:`HULL_CIRCLE` half-lengths (a new extended vessel, or a shorter one's
    cell, cannot lie across a longer hull whatever the hull's heading).
    All slots at once (arrays of slots x positions).
    """
    if not slot_ext:
        return np.zeros(z.shape[0], bool)
    return np.asarray(_inside(z, pm, _hulls(slot_ext, pP), circle).any(axis=0), bool)


#: A point-like track is established once its velocity sd (m/s) is below this.
ESTABLISHED_SPEED_SD = 1.0


def established(pP: Array) -> NDArray[np.bool_]:
    """Tracks whose velocity is known to :data:`ESTABLISHED_SPEED_SD` (not new any more)."""
    return 0.5 * (pP[:, 1, 1] + pP[:, 3, 3]) < ESTABLISHED_SPEED_SD**2


def cells_over_vessels(ext: ExtendedScan, pm: Array, slots: IntArray) -> NDArray[np.bool_]:
    """Multi-plot cells whose new hull would cover the predicted position of one of ``slots``.

    Two vessels cannot share a place, so such a cell cannot start a new
    vessel (two small craft side by side are not one large one).
    """
    m = ext.z.shape[0] - len(ext.book.cells)
    out = np.zeros(len(ext.book.cells), bool)
    if not slots.size or not out.size:
        return out
    a, b, v, V = ext_arrays([ext.born_ext[m + c] for c in range(out.size)])
    Xi = inv2(iw_mean(v, V))
    d = pm[slots][:, [0, 2]][None, :, :] - ext.z[m:][:, None, :]
    q = np.einsum("cki,cij,ckj->ck", d, Xi, d)
    return (q < 1.0).any(axis=1)


#: Log-weight given to a vessel taking plots inside the hull of a longer vessel.
OVERLAP_LOG_PENALTY = -30.0


def overlap_penalty(ii: IntArray, jj: IntArray, ll: Array, z: Array, pm: Array, pP: Array,
                    slot_ext: dict, slot_bern: list[int], r: Array) -> Array:  # type: ignore[type-arg]
    """Pair log-likelihoods with hulls that do not overlap.

    Two vessels cannot share a place: a pair whose plot (or cell centroid)
    lies inside the predicted hull (see :data:`HULL_EXCLUSION`) of another
    Bernoulli's vessel (existence above 1/2) gets :data:`OVERLAP_LOG_PENALTY`
    when its own vessel is the less established of the two, so that a ship
    keeps its own plots and a fragment of it starves:

    * a point-like vessel yields to any hull, unless it is an established
      small craft (:func:`established`): a point vessel gives at most one
      plot, its gate is small, and one plot of it beside or over a hull is
      scored by the likelihoods alone (a launch passing a ship's bow keeps
      its track);
    * of two extended vessels, the one whose extent rests on fewer plots
      yields (the inverse-Wishart's ``v - 3``: the plots behind the extent,
      after forgetting), the shorter one where they are equal. A fragment
      that took part of a ship's plots and looks longer for a moment (its
      prior extent plus scatter) does not push the ship off its plots.
    """
    ll = ll.copy()
    if not slot_ext or not ii.size:
        return ll
    bern = np.asarray(slot_bern, np.int64)
    hulls = _hulls(slot_ext, pP)
    slots, v, _, lam, _ = hulls
    pos = np.full(pm.shape[0], -1, np.int64)
    pos[slots] = np.arange(slots.size)
    k = pos[ii]
    own = np.where(k >= 0, lam[k], 0.0)
    own_v = np.where(k >= 0, v[k], 0.0)
    craft = (k < 0) & established(pP)[ii]
    inside = _inside(z[jj], pm, hulls, own > 0.0)
    weaker = (own_v[None, :] < v[:, None]) | ((own_v[None, :] == v[:, None])
                                              & (own[None, :] < lam[:, None]))
    hit = inside & (bern[ii][None, :] != bern[slots][:, None]) & weaker & ~craft[None, :]
    for row in np.flatnonzero((r[slots] > 0.5) & hit.any(axis=1)).tolist():
        ll[hit[row]] += OVERLAP_LOG_PENALTY
    return ll


def predict_slots(lhs: list, ext_slots: list[int], dt: Array, pd: Array  # type: ignore[type-arg]
                  ) -> tuple[dict[int, tuple[float, float, float, Array]], dict[int, Ext], Array]:
    """Predicted extents of the extended slots, as arrays and as tuples, and their ``p_D``.

    The detection probability of an extended slot becomes
    ``p_D (1 - (β/(β+1))^α)``: detected and giving at least one plot.
    """
    from harbourwatch.models.extent import predict_extent

    a, b, v, V = ext_arrays([lhs[s].ext for s in ext_slots])
    idx = np.asarray(ext_slots, np.int64)
    a, b, v, V = predict_extent(a, b, v, V, dt[idx])
    pd = pd.copy()
    pd[idx] *= -np.expm1(log_no_plot(a, b))
    arrays = {s: (a[k], b[k], v[k], V[k]) for k, s in enumerate(ext_slots)}
    return arrays, dict(zip(ext_slots, ext_tuples(a, b, v, V), strict=True)), pd


def free_plots(z: Array, ii: NDArray[np.int64], jj: NDArray[np.int64], pP: Array) -> Array:
    """The plots no established point-like track gates with (those could start a large vessel)."""
    taken = np.zeros(z.shape[0], bool)
    taken[jj[established(pP)[ii]]] = True
    return z[~taken]
