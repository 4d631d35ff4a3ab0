"""The trajectory PMBM filter: exact special cases, worked numbers, scenarios."""

from __future__ import annotations

import itertools
import math
import time

import numpy as np
import pytest
from scipy.stats import multivariate_normal
from tpmbm_synth import Radar, Vessel, make_feed, purity

from harbourwatch.filter import run_filter, tpmbm
from harbourwatch.filter._association import update_group
from harbourwatch.filter._hypotheses import (
    beta_predict,
    detection_log_weight,
    miss_update,
    new_trajectory_weight,
)
from harbourwatch.filter.tpmbm import _Filter
from harbourwatch.io.records import FilterSettings
from harbourwatch.models.cv import cv_process_noise, cv_transition
from harbourwatch.models.gaussian import kf_predict, kf_update, rts_smooth
from harbourwatch.scene.records import MeasurementScan, SensorModel

# -- 1. one vessel, every scan detected: the filter is a Kalman filter + RTS smoother -----


@pytest.mark.parametrize("p_detect", [1 - 1e-9, 1.0])
def test_single_vessel_equals_kalman_and_rts(p_detect):
    # p_D -> 1: w_miss = 1 - r p_D β stays > 0 for p_D < 1 (methods note P5); at p_D = 1 the
    # filter clamps ln w_miss at ln 1e-300 instead of -inf. With (almost) no clutter the
    # only surviving hypothesis uses every plot.
    v = Vessel(0.0, 400.0, (-1500.0, 300.0), (4.0, -2.5))
    feed = make_feed([v], [Radar(site=(0.0, 0.0), p_detect=1.0, clutter_per_scan=0.0)], 400.0)
    sensors = [
        SensorModel(
            index=0,
            site=(0.0, 0.0),
            detection_probability=p_detect,
            clutter_intensity=1e-14,
            max_range_m=8000.0,
            scan_period_s=3.0,
        )
    ]
    st = FilterSettings(accel_psd_m2_s3=0.05, birth_speed_sd_m_s=5.0)
    with np.errstate(all="raise"):  # no NaN, no overflow, no log(0)
        out = run_filter(feed.scans, sensors, st)
    assert len(out.trajectories) == 1
    tr = out.trajectories[0]
    # plain Kalman filter from the same initial state: [z0, 0], blockdiag(R0, σ_v² I)
    sc = feed.scans
    t = np.array([s.plot_time[0] for s in sc])
    z = np.array([s.z[0] for s in sc])
    m = np.array([z[0, 0], 0.0, z[0, 1], 0.0])
    P = np.zeros((4, 4))
    P[np.ix_([0, 2], [0, 2])] = sc[0].R[0]
    P[1, 1] = P[3, 3] = st.birth_speed_sd_m_s**2
    fm, fP, pm, pP = [m], [P], [m], [P]
    for k in range(1, len(sc)):
        dt = t[k] - t[k - 1]
        mp, Pp = kf_predict(m, P, cv_transition(dt), cv_process_noise(dt, st.accel_psd_m2_s3))
        m, P, _ = kf_update(mp, Pp, z[k], sc[k].R[0])
        fm.append(m), fP.append(P), pm.append(mp), pP.append(Pp)
    ms, Ps = rts_smooth(t, np.array(fm), np.array(fP), np.array(pm), np.array(pP))
    np.testing.assert_allclose(tr.time, t, rtol=0, atol=1e-12)
    np.testing.assert_allclose(tr.filt_mean, np.array(fm), rtol=0, atol=1e-9)
    np.testing.assert_allclose(tr.filt_cov, np.array(fP), rtol=0, atol=1e-9)
    np.testing.assert_allclose(tr.mean, ms, rtol=0, atol=1e-9)
    np.testing.assert_allclose(tr.cov, Ps, rtol=0, atol=1e-9)
    assert np.array_equal(tr.plot_ids, np.array([s.plot_ids[0] for s in sc]))
    assert tr.alive_at_end and tr.existence > 0.999


# -- 2. worked numbers of methods note §1.4 (computed there from the equations) -----------


def test_worked_numbers_miss_and_predict():
    p_s, p_d = 0.99, 0.9
    r, alive, ends = 0.9, 1.0, ()
    alive, ends = beta_predict(alive, ends, p_s)
    assert (alive, ends[0]) == pytest.approx((0.99, 0.01))
    r, alive, ends, w = miss_update(r, alive, ends, p_d)
    assert r == pytest.approx(0.4952044, abs=1e-7)
    assert (alive, ends[0]) == pytest.approx((0.9082569, 0.0917431), abs=1e-7)
    assert w == pytest.approx(0.1981, abs=1e-7)
    alive, ends = beta_predict(alive, ends, p_s)
    assert r == pytest.approx(0.4952044, abs=1e-7)
    # table order: (alive at k+1, ended at k, ended at k-1)
    assert (alive, ends[1], ends[0]) == pytest.approx((0.8991743, 0.0090826, 0.0917431), abs=1e-7)
    r, alive, ends, w = miss_update(r, alive, ends, p_d)
    assert r == pytest.approx(0.1576245, abs=1e-7)
    assert (alive, ends[1], ends[0]) == pytest.approx((0.4714059, 0.0476168, 0.4809773), abs=1e-7)
    assert w == pytest.approx(0.5992524, abs=1e-7)


def test_worked_numbers_detection_and_new_trajectory():
    S = np.diag([100.0, 100.0])
    ll = multivariate_normal(mean=[0.0, 0.0], cov=S).logpdf([0.0, 0.0])  # scipy, outside us
    assert math.exp(detection_log_weight(0.9, 0.99, 0.9, ll)) == pytest.approx(
        1.2762635e-3, rel=1e-7
    )
    e = 0.9 * 0.1 * math.exp(ll)
    assert e == pytest.approx(1.4323944e-4, rel=1e-7)
    w, r = new_trajectory_weight(e, 1e-4)
    assert w == pytest.approx(2.4323944e-4, rel=1e-7)
    assert r == pytest.approx(0.5888825, abs=1e-7)


# -- 3. one scan, two Bernoullis, the Poisson part, two plots: brute-force posterior ------


def _scan(sensor, t, z, ids, sigma=20.0):
    z = np.asarray(z, float)
    return MeasurementScan(
        sensor=sensor,
        time=float(t),
        plot_ids=np.asarray(ids, np.int64),
        plot_time=np.full(len(z), float(t)),
        z=z,
        R=np.broadcast_to(sigma**2 * np.eye(2), (len(z), 2, 2)).copy(),
    )


def test_one_scan_hypothesis_weights_match_enumeration():
    sensor = SensorModel(
        index=0,
        site=(0.0, 0.0),
        detection_probability=0.8,
        clutter_intensity=2e-8,
        max_range_m=5000.0,
        scan_period_s=3.0,
    )
    st = FilterSettings(
        log_weight_prune=1e9,
        existence_prune=0.0,
        max_global_hypotheses=1000,
        initial_vessels=40.0,
        birth_speed_sd_m_s=3.0,
        manoeuvre_accel_psd_m2_s3=None,  # one motion mode: plain Gaussian likelihoods
        extended_vessels=False,  # the point-target enumeration (cells: tests/test_extent.py)
    )
    f = _Filter([sensor], st, [])
    f.process(_scan(0, 10.0, [[1000.0, 1000.0], [1060.0, 1000.0]], [0, 1]), 0)
    prior = {}
    for c in f.clusters:
        for b in c.berns:
            (lh,) = b.lhs
            prior[b.bid] = (
                lh.r,
                lh.alive,
                f.nodes.t[lh.node],
                f.nodes.m[lh.node],
                f.nodes.P[lh.node],
            )
    assert len(prior) == 2
    t2 = 13.0
    z2 = np.array([[1025.0, 1010.0], [1040.0, 990.0]])
    D = f.ppp.density(z2) * math.exp(-3.0 / st.mean_lifetime_s)
    D += (
        f.ppp.birth[f.ppp._cells(z2)]
        * st.mean_lifetime_s
        * (1 - math.exp(-3.0 / st.mean_lifetime_s))
    )
    new_w = 0.8 * D + 2e-8
    f.process(_scan(0, t2, z2, [2, 3]), 1)
    # brute force: each plot goes to Bernoulli 1, Bernoulli 2, or starts a trajectory
    bids = sorted(prior)
    ref = {}
    for assign in itertools.product([None, *bids], repeat=2):
        if assign[0] is not None and assign[0] == assign[1]:
            continue
        w = 1.0
        for bid in bids:
            r, alive, t1, m1, P1 = prior[bid]
            ps = math.exp(-(t2 - t1) / st.mean_lifetime_s)
            if bid in assign:
                j = assign.index(bid)
                mp, Pp = kf_predict(
                    m1, P1, cv_transition(t2 - t1), cv_process_noise(t2 - t1, st.accel_psd_m2_s3)
                )
                S = Pp[np.ix_([0, 2], [0, 2])] + 400.0 * np.eye(2)
                w *= r * 0.8 * alive * ps * multivariate_normal(mp[[0, 2]], S).pdf(z2[j])
            else:
                w *= 1.0 - r * 0.8 * alive * ps
        for j in range(2):
            if assign[j] is None:
                w *= new_w[j]
        ref[assign] = w
    total = sum(ref.values())
    # the filter's joint global hypotheses (product over its clusters)
    got = {}
    for rows in itertools.product(*[range(c.logw.size) for c in f.clusters]):
        lw = sum(c.logw[g] for c, g in zip(f.clusters, rows, strict=True))
        assign = [None, None]
        for c, g in zip(f.clusters, rows, strict=True):
            for b, h in zip(c.berns, c.table[g], strict=True):
                if h < 0 or b.bid not in prior:
                    continue
                plot = f.nodes.plot[b.lhs[h].node]
                if plot >= 2:
                    assign[int(plot) - 2] = b.bid
        got[tuple(assign)] = got.get(tuple(assign), 0.0) + math.exp(lw)
    assert len(ref) == 7 and set(got) == set(ref)
    for k, w in ref.items():
        assert got[k] == pytest.approx(w / total, rel=1e-9, abs=1e-15)


# -- 4. scenarios ---------------------------------------------------------------------


def _check_identities(out, feed, n_vessels, *, min_share=0.9):
    """Each vessel's plots mostly in one trajectory, and that trajectory mostly its plots."""
    pur = purity(out.trajectories, feed.truth_of_plot, n_vessels)
    owners = []
    for counts in pur:
        assert counts, "a vessel has no trajectory"
        tid, n = max(counts.items(), key=lambda kv: kv[1])
        assert n >= min_share * sum(counts.values()), pur
        owners.append(tid)
    assert len(set(owners)) == n_vessels, pur  # no two vessels share their main trajectory
    return pur


def test_crossing_and_parallel_vessels_keep_identities():
    s45 = math.sqrt(0.5)
    vessels = [
        # two vessels crossing at 45 degrees, at the same point at the same time (t = 300 s)
        Vessel(0.0, 600.0, (-1800.0, -1500.0), (6.0, 0.0)),
        Vessel(0.0, 600.0, (-1800.0 + 1800 - 1800 * s45, -1500.0 - 1800 * s45), (6 * s45, 6 * s45)),
        # two vessels 120 m apart on parallel courses
        Vessel(0.0, 600.0, (-2500.0, 2000.0), (5.0, 0.0)),
        Vessel(0.0, 600.0, (-2500.0, 2120.0), (5.0, 0.0)),
    ]
    radar = Radar(site=(0.0, 0.0), period=3.0, clutter_per_scan=15.0, sigma=15.0)
    feed = make_feed(vessels, [radar], 600.0, seed=11)
    calls = []
    out = run_filter(
        feed.scans, feed.sensors, FilterSettings(), progress=lambda i, n: calls.append((i, n))
    )
    pur = _check_identities(out, feed, len(vessels))
    assert calls[-1] == (len(feed.scans), len(feed.scans)) and len(calls) >= 50
    assert [c[0] for c in calls] == sorted(c[0] for c in calls)
    for tr in out.trajectories:
        assert np.all(np.diff(tr.time) > 0)
        assert np.allclose(tr.cov, np.swapaxes(tr.cov, 1, 2))
        assert np.all(np.linalg.eigvalsh(tr.cov) > 0)
        assert tr.pred_mean.shape == tr.filt_mean.shape
        np.testing.assert_array_equal(tr.pred_mean[0], tr.filt_mean[0])
    assert out.stats["plots_in_trajectories"] == sum(
        int((t.plot_ids >= 0).sum()) for t in out.trajectories
    )
    assert out.stats["scans"] == len(feed.scans)
    # the as-seen view uses the same ids; its positions follow the smoothed trajectory
    ids = {t.id for t in out.trajectories}
    assert ids <= set(out.as_seen.track.tolist())
    for tr in out.trajectories:
        rows = out.as_seen.track == tr.id
        east = np.interp(out.as_seen.time[rows], tr.time, tr.mean[:, 0])
        assert np.median(np.abs(out.as_seen.mean[rows, 0] - east)) < 30.0
    assert all(t in ids or t.startswith("P") for t in out.as_seen.track.tolist())
    # continuous cover, no track breaks: one trajectory per vessel (a few plots taken by
    # the other vessel where both are within a plot's error of each other), no false ones
    assert all(sum(p.values()) - max(p.values()) <= 5 for p in pur), pur
    assert len(out.trajectories) == len(vessels)
    # same inputs, same outputs (house style: determinism)
    again = run_filter(feed.scans, feed.sensors, FilterSettings())
    assert [t.id for t in again.trajectories] == [t.id for t in out.trajectories]
    for a, b in zip(again.trajectories, out.trajectories, strict=True):
        assert np.array_equal(a.mean, b.mean) and np.array_equal(a.plot_ids, b.plot_ids)


def test_vessel_leaving_cover_and_vessel_stopping_end_on_time():
    radar = Radar(site=(0.0, 0.0), period=3.0, max_range=4000.0, clutter_per_scan=10.0)
    vessels = [
        Vessel(0.0, 900.0, (2500.0, 0.0), (6.0, 0.0)),  # crosses r = 4000 m at t = 250 s
        Vessel(0.0, 200.0, (-1000.0, -1000.0), (0.0, 4.0)),  # disappears at t = 200 s
        Vessel(0.0, 600.0, (-2000.0, 1500.0), (3.0, -1.0)),  # present to the end
    ]
    feed = make_feed(vessels, [radar], 600.0, seed=5)
    out = run_filter(feed.scans, feed.sensors, FilterSettings())
    pur = _check_identities(out, feed, len(vessels))
    by_id = {t.id: t for t in out.trajectories}
    main = [by_id[max(p.items(), key=lambda kv: kv[1])[0]] for p in pur]
    assert abs(main[0].end - 250.0) <= 2 * radar.period
    assert abs(main[1].end - 200.0) <= 2 * radar.period
    assert main[1].end_probability > 0.5 and not main[1].alive_at_end
    assert main[2].alive_at_end and main[2].end >= 600.0 - 2 * radar.period


def test_clutter_burst_completes_with_caps_logged():
    vessels = [
        Vessel(0.0, 300.0, (-1000.0, 0.0), (5.0, 0.0)),
        Vessel(0.0, 300.0, (-1000.0, 300.0), (5.0, 0.0)),
    ]
    # a squall: 500 false plots within 250 m of both vessels in one scan
    radar = Radar(
        site=(0.0, 0.0),
        period=3.0,
        clutter_per_scan=10.0,
        bursts={33: (500, (-500.0, 150.0), 250.0)},
    )
    feed = make_feed(vessels, [radar], 300.0, seed=2)
    t0 = time.perf_counter()
    out = run_filter(feed.scans, feed.sensors, FilterSettings())
    assert time.perf_counter() - t0 < 10.0
    assert out.stats["caps_bitten"].get("large_group", 0) >= 1
    assert any("large_group" in line for line in out.log)
    _check_identities(out, feed, len(vessels))
    assert len(out.trajectories) == len(vessels)


def test_outage_of_one_radar_does_not_break_tracks():
    vessels = [Vessel(0.0, 1500.0, (-3000.0 + 1000 * k, -2000.0), (2.0, 3.0)) for k in range(3)]
    radars = [
        Radar(site=(-2000.0, 0.0), period=2.5, clutter_per_scan=15.0),
        Radar(
            site=(2000.0, 0.0),
            period=3.0,
            offset=1.1,
            clutter_per_scan=15.0,
            silent=[(300.0, 900.0)],
        ),  # ten minutes without scans
    ]
    feed = make_feed(vessels, radars, 1500.0, seed=8)
    out = run_filter(feed.scans, feed.sensors, FilterSettings())
    pur = _check_identities(out, feed, len(vessels))
    assert all(len(p) == 1 for p in pur), pur
    assert len(out.trajectories) == len(vessels)


def test_radar_going_silent_at_the_end_keeps_tracks_alive():
    vessels = [Vessel(0.0, 900.0, (-2000.0 + 1500 * k, 500.0 * k), (3.0, 1.0)) for k in range(3)]
    # the radar returns empty scans for the last five minutes (a dead receiver)
    radar = Radar(site=(0.0, 0.0), period=3.0, clutter_per_scan=10.0, empty=[(600.0, 900.0)])
    feed = make_feed(vessels, [radar], 900.0, seed=4)
    last_plot_time = max(float(s.time) for s in feed.scans if s.z.shape[0])
    out = run_filter(feed.scans, feed.sensors, FilterSettings())
    pur = _check_identities(out, feed, len(vessels))
    assert all(len(p) == 1 for p in pur), pur
    assert out.stats["scans_skipped_as_outage"] >= 90
    for t in out.trajectories:
        assert t.alive_at_end and t.end >= last_plot_time - 2 * radar.period


def test_fast_paths_give_the_general_result(monkeypatch):
    # the shortcuts for tiny groups must not change anything: rerun without them
    vessels = [
        Vessel(0.0, 240.0, (-1500.0, -500.0), (5.0, 1.0)),
        Vessel(0.0, 240.0, (-1500.0, -380.0), (5.0, 1.0)),
        Vessel(0.0, 240.0, (1000.0, 1000.0), (-3.0, -3.0)),
    ]
    feed = make_feed(vessels, [Radar(site=(0.0, 0.0), clutter_per_scan=15.0)], 240.0, seed=3)
    fast = run_filter(feed.scans, feed.sensors, FilterSettings())
    monkeypatch.setattr(tpmbm, "fast_path", lambda *a: False)
    monkeypatch.setattr(
        tpmbm,
        "update_single",
        lambda c, plots, ctx, max_hyp: update_group(
            [c], plots, ctx, max_hyp=max_hyp, count_cap=lambda name: None
        ),
    )
    slow = run_filter(feed.scans, feed.sensors, FilterSettings())
    assert [t.id for t in fast.trajectories] == [t.id for t in slow.trajectories]
    for a, b in zip(fast.trajectories, slow.trajectories, strict=True):
        np.testing.assert_allclose(a.mean, b.mean, rtol=0, atol=1e-9)
        assert np.array_equal(a.plot_ids, b.plot_ids) and a.existence == pytest.approx(b.existence)

    def rows(o):  # the order of rows within one scan is not part of the contract
        a = o.as_seen
        return sorted(
            zip(a.time.tolist(), a.track.tolist(), a.mean[:, 0].round(6).tolist(), strict=True)
        )

    assert rows(fast) == rows(slow)


def test_undetected_density_counts_and_birth_region():
    from shapely.geometry import box

    from harbourwatch.filter._undetected import UndetectedDensity

    tau = 3600.0
    ppp = UndetectedDensity(
        [(0.0, 0.0)],
        [5000.0],
        initial_vessels=10.0,
        arrivals_per_hour=6.0,
        mean_lifetime_s=tau,
        regions=[(box(1000.0, 1000.0, 2000.0, 2000.0), 12.0)],
    )
    assert ppp.expected_undetected() == pytest.approx(10.0)
    ppp.predict(0.0)
    ppp.predict(1800.0)
    # dN/dt = -N/τ + b  =>  N(t) = N0 e^{-t/τ} + b τ (1 - e^{-t/τ})  (linear ODE, closed form)
    decay = math.exp(-0.5)
    expected = 10.0 * decay + (6.0 + 12.0) / 3600.0 * tau * (1 - decay)
    assert ppp.expected_undetected() == pytest.approx(expected)
    inside, outside = ppp.density(np.array([[1500.0, 1500.0], [-1500.0, -1500.0]]))
    assert inside > 10 * outside > 0
    ppp.thin(0, 0.9)
    assert ppp.expected_undetected() == pytest.approx(0.1 * expected)
    assert ppp.density(np.array([[9000.0, 9000.0]]))[0] == 0.0  # outside the grid


def test_node_store_compaction_changes_nothing(monkeypatch):
    # dropping unreachable nodes mid-run must give byte-identical results
    vessels = [
        Vessel(0.0, 300.0, (-1500.0, -500.0), (5.0, 1.0)),
        Vessel(0.0, 150.0, (1000.0, 1000.0), (-3.0, -3.0)),
    ]
    feed = make_feed(vessels, [Radar(site=(0.0, 0.0), clutter_per_scan=15.0)], 300.0, seed=6)
    plain = run_filter(feed.scans, feed.sensors, FilterSettings())
    from harbourwatch.filter._nodes import NodeStore

    monkeypatch.setattr(tpmbm, "_COMPACT_MIN", 64)
    monkeypatch.setattr(tpmbm, "NodeStore", lambda: NodeStore(capacity=128))
    squeezed = run_filter(feed.scans, feed.sensors, FilterSettings())
    assert squeezed.stats["nodes"] < plain.stats["nodes"]  # compaction did happen
    assert [t.id for t in plain.trajectories] == [t.id for t in squeezed.trajectories]
    for a, b in zip(plain.trajectories, squeezed.trajectories, strict=True):
        for name in ("time", "mean", "cov", "filt_mean", "pred_cov", "plot_ids", "sensor_ids"):
            assert np.array_equal(getattr(a, name), getattr(b, name)), name
        assert a.end_probability == b.end_probability
    for name in ("time", "track", "mean", "sd", "existence"):
        assert np.array_equal(getattr(plain.as_seen, name), getattr(squeezed.as_seen, name))


def test_outage_of_one_radar_during_a_burst_on_the_other_breaks_no_track():
    # issue 14: radar B silent for ten minutes while a squall of 500 false plots per scan
    # hits radar A for 30 s in the middle of the traffic; every vessel radar A still sees
    # must come out as one trajectory throughout (its plots in a single trajectory)
    vessels = [
        Vessel(0.0, 1500.0, (-3000.0 + 800.0 * k, -2500.0 + 300.0 * (k % 3)), (2.0, 3.0))
        for k in range(8)
    ]
    radars = [
        Radar(
            site=(-2000.0, 0.0),
            period=2.5,
            clutter_per_scan=15.0,
            bursts={k: (500, (-500.0, -500.0), 1500.0) for k in range(240, 252)},
        ),  # scans 240..251: t = 600 .. 630 s, during the outage of radar B
        Radar(
            site=(2000.0, 0.0),
            period=3.0,
            offset=1.1,
            clutter_per_scan=15.0,
            silent=[(300.0, 900.0)],
        ),  # ten minutes without scans
    ]
    feed = make_feed(vessels, radars, 1500.0, seed=8)
    out = run_filter(feed.scans, feed.sensors, FilterSettings())
    pur = _check_identities(out, feed, len(vessels))
    assert all(len(p) == 1 for p in pur), pur
    assert len(out.trajectories) == len(vessels)


def test_estimating_finished_clusters_early_changes_nothing_and_frees_their_nodes(monkeypatch):
    # a cluster whose hypotheses have all ended is estimated when it is finished (so that
    # its nodes can be freed): byte-identical to estimating it at the end of the feed
    vessels = [
        Vessel(0.0, 200.0, (-1500.0, -500.0), (5.0, 1.0)),  # stops at 200 s
        Vessel(100.0, 400.0, (1000.0, 1000.0), (-3.0, -3.0)),  # 100 .. 400 s
        Vessel(0.0, 900.0, (-2000.0, 1500.0), (3.0, -1.0)),  # to the end
        Vessel(0.0, 900.0, (2500.0, 0.0), (6.0, 0.0)),  # leaves the cover at 250 s
    ]
    radar = Radar(site=(0.0, 0.0), max_range=4000.0, clutter_per_scan=15.0)
    feed = make_feed(vessels, [radar], 900.0, seed=6)
    from harbourwatch.filter import _estimate
    from harbourwatch.filter._nodes import NodeStore

    monkeypatch.setattr(tpmbm, "_COMPACT_MIN", 64)
    monkeypatch.setattr(tpmbm, "NodeStore", lambda: NodeStore(capacity=128))
    early_pieces = []
    real = _estimate.estimate_retired

    def spy(*args, **kw):
        pieces, waiting = real(*args, **kw)
        early_pieces.extend(pieces)
        return pieces, waiting

    monkeypatch.setattr(_estimate, "estimate_retired", spy)
    early = run_filter(feed.scans, feed.sensors, FilterSettings())
    held_early = _nodes_held(feed)
    monkeypatch.setattr(_estimate, "estimate_retired", lambda retired, *a, **k: ([], list(retired)))
    late = run_filter(feed.scans, feed.sensors, FilterSettings())
    assert len(early_pieces) >= 2  # vessels that ended were estimated early
    assert held_early < _nodes_held(feed)  # and no hypothesis holds their chains any more
    assert [t.id for t in early.trajectories] == [t.id for t in late.trajectories]
    for a, b in zip(early.trajectories, late.trajectories, strict=True):
        for name in ("time", "mean", "cov", "filt_mean", "filt_cov", "pred_mean", "pred_cov",
                     "plot_ids", "sensor_ids"):
            assert np.array_equal(getattr(a, name), getattr(b, name)), name
        assert (a.existence, a.end_probability, a.alive_at_end) == (
            b.existence, b.end_probability, b.alive_at_end)
    for name in ("time", "track", "mean", "sd", "existence"):
        assert np.array_equal(getattr(early.as_seen, name), getattr(late.as_seen, name))
    assert early.stats["plots_in_trajectories"] == late.stats["plots_in_trajectories"]


def _nodes_held(feed):
    """Nodes reachable from the filter's hypotheses after the last scan (what compaction keeps)."""
    from harbourwatch.filter._kernels import reachable

    filt = _Filter(feed.sensors, FilterSettings(), ())
    for k, scan in enumerate(sorted(feed.scans, key=lambda sc: (float(sc.time), sc.sensor))):
        filt.process(scan, k)
    lhs = [lh for c in filt.retired + filt.clusters for b in c.berns for lh in b.lhs]
    live = [lh.node for lh in lhs] + [n for lh in lhs for n in lh.end_nodes]
    keep = reachable(filt.nodes.parent, filt.nodes.n, np.array(live, np.int64))
    return int(np.count_nonzero(keep))
