"""Accuracy studies on the simulator's small scenarios (part of `make bench`).

Each study simulates a named scenario, reviews it with the real pipeline
stages in-process, scores the hindsight trajectories against the ground truth
with the project's own scoring (GOSPA, trajectory GOSPA) and prints the
figures next to their targets.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np

from bench.oracle import oracle_trajectories
from harbourwatch import (
    KNOT_M_S,
    SCENARIOS,
    FilterSettings,
    SimulationResult,
    TrajectorySet,
    into_local_frame,
    load_inputs,
    run_filter,
    score_files,
    simulate,
    simulate_to_dir,
)


def _line(label: str, value: str) -> None:
    print(f"  {label:<44s} {value}")


def review(name: str, work: Path, settings: FilterSettings | None = None,
           seed: int | None = None) -> tuple[SimulationResult, TrajectorySet, np.ndarray, Path, float]:
    """Simulate ``name``, run the filter on its files, return sim, trajectories, plot->row map, truth.

    The measurement scans and sensor models of the last review are kept in
    ``LAST`` for the oracle.
    """
    spec = SCENARIOS[name]
    seed = spec.default_seed if seed is None else seed
    sim = simulate(spec.build(seed, None), seed)
    files = simulate_to_dir(name, work / name, seed=seed)
    feed = next(p for p in files if p.name.startswith("plots"))
    truth = next(p for p in files if p.name.startswith("truth"))
    inp = load_inputs([feed], sensors=work / name / "sensors.toml",
                      zones=_empty_zones(work), rules=_empty_rules(work))
    scene = into_local_frame(inp, settings)
    frame, mscans, models = scene.frame, list(scene.scans), list(scene.sensors)
    t = time.perf_counter()
    out = run_filter(mscans, models, settings or FilterSettings())
    secs = time.perf_counter() - t
    LAST.update(mscans=mscans, models=models, settings=settings or FilterSettings())
    tset = TrajectorySet(trajectories=tuple(out.trajectories), frame=frame, as_seen=out.as_seen,
                         feed_start=float(inp.plots.time.min()), feed_end=float(inp.plots.time.max()))
    # plot table row -> simulator row: the feed is written in the simulator's order, one row a line
    sim_row = inp.plots.line - 2
    return sim, tset, sim_row, truth, secs


LAST: dict = {}


def _empty_zones(work: Path) -> Path:
    p = work / "empty_zones.geojson"
    p.write_text('{"type": "FeatureCollection", "features": []}\n', encoding="utf-8")
    return p


def _empty_rules(work: Path) -> Path:
    p = work / "empty_rules.toml"
    p.write_text("# no rules\n", encoding="utf-8")
    return p


def _score(tset: TrajectorySet, truth: Path, work: Path, tag: str) -> dict:
    p = work / f"{tag}_tracks.csv"
    p.write_text(tset.tracks_csv(), encoding="utf-8")
    return score_files(p, truth).as_dict()


def _vessel_of_track(sim: SimulationResult, tset: TrajectorySet, sim_row: np.ndarray) -> dict[str, int]:
    """Majority true vessel behind each estimated trajectory's plots (-1 for clutter)."""
    out = {}
    for tr in tset:
        ids = tr.plot_ids[tr.plot_ids >= 0]
        v = sim.plots.vessel[sim_row[ids]]
        vals, counts = np.unique(v, return_counts=True)
        out[tr.id] = int(vals[np.argmax(counts)]) if vals.size else -1
    return out


def study_quiet(work: Path) -> None:
    print("== quiet scenario: hindsight trajectories against the oracle")
    sim, tset, sim_row, truth, secs = review("quiet", work)
    run = _score(tset, truth, work, "quiet_run")
    plot_vessel = sim.plots.vessel[sim_row]
    oracle = oracle_trajectories(LAST["mscans"], LAST["models"], plot_vessel, LAST["settings"])
    oset = TrajectorySet(trajectories=tuple(oracle), frame=tset.frame, as_seen=tset.as_seen,
                         feed_start=tset.feed_start, feed_end=tset.feed_end)
    orc = _score(oset, truth, work, "quiet_oracle")
    ratio = run["gospa_mean"] / max(orc["gospa_mean"], 1e-9)
    _line("mean GOSPA run / oracle (c=200 m, p=2)", f"{run['gospa_mean']:.2f} m / {orc['gospa_mean']:.2f} m "
          f"= {ratio:.2f} (target <= 1.2) {'PASS' if ratio <= 1.2 else 'FAIL'}")
    _line("track breaks / identity swaps", f"{run.get('track_breaks')} / {run.get('identity_swaps')}")
    _line("filter time", f"{secs:.1f} s")


def study_identity(work: Path, name: str) -> None:
    print(f"== {name}: identities kept")
    sim, tset, sim_row, truth, _ = review(name, work)
    d = _score(tset, truth, work, name)
    sw = d["tgospa_parts"]["switch"]
    _line("trajectory GOSPA switch cost", f"{sw:.1f} (target 0) {'PASS' if sw == 0 else 'FAIL'}")
    _line("identity swaps / track breaks", f"{d.get('identity_swaps')} / {d.get('track_breaks')}")
    _line("trajectories / true vessels", f"{len(tset)} / {len(sim.truth)}")


def study_outage(work: Path) -> None:
    print("== outage: one radar down for 10 minutes")
    sim, tset, sim_row, truth, _ = review("outage", work)
    d = _score(tset, truth, work, "outage")
    br = d.get("track_breaks")
    _line("track breaks (target 0)", f"{br} {'PASS' if br == 0 else 'FAIL'}")
    _line("trajectories / true vessels", f"{len(tset)} / {len(sim.truth)}")


def study_end_times(work: Path) -> None:
    print("== departures: end times of vessels that left (demo scenario)")
    sim, tset, sim_row, _, _ = review("demo", work)
    owner = _vessel_of_track(sim, tset, sim_row)
    period = max(s.scan_period_s for s in sim.sensors)
    errs = []
    for tr in tset:
        v = owner[tr.id]
        if v < 0:
            continue
        vt = sim.plots.time[sim.plots.vessel == v]
        last_plot = float(vt.max())
        if last_plot < sim.end_epoch_s - 60:  # the vessel left or vanished well before the end
            errs.append(tr.end - last_plot)
    if errs:
        e = np.abs(np.array(errs))
        ok = np.mean(e <= 2 * period)
        _line("departed vessels", f"{len(errs)}")
        _line("|end - last true plot| median / max", f"{np.median(e):.1f} s / {e.max():.1f} s")
        _line("share within two scans", f"{100 * ok:.0f} % {'PASS' if ok == 1 else 'FAIL'}")


def study_arpa(work: Path) -> None:
    """As-seen (filtered) course and speed on straight steady legs, 3 minutes after start.

    Limits: the 3-minute true course and true speed accuracy (95 % probability)
    of the IMO plotting-aid performance standard as reproduced in US 33 CFR
    164.38 Appendix A, section 3.8.3 -- values from memory, see README.
    """
    print("== plotting-aid standard: filtered true course/speed after 3 min of steady tracking")
    sim, tset, sim_row, _, _ = review("arpa", work)
    a = tset.as_seen
    if a.time.size == 0:
        _line("as-seen estimates", "none: FAIL")
        return
    owner = _vessel_of_track(sim, tset, sim_row)
    course_err, speed_err = [], []
    for tr in tset:
        v = owner[tr.id]
        if v < 0:
            continue
        truth = sim.truth[v]
        sel = (a.track == tr.id) & (a.time >= tr.start + 180.0)
        if not sel.any():
            continue
        t = a.time[sel]
        ve = np.interp(t, truth.time, truth.v_east_m_s)
        vn = np.interp(t, truth.time, truth.v_north_m_s)
        est_e, est_n = a.mean[sel, 1], a.mean[sel, 3]
        conv = tset.frame.grid_convergence_rad(a.mean[sel, 0], a.mean[sel, 2])
        c_est = np.degrees(np.arctan2(est_e, est_n) + conv)
        c_true = np.degrees(np.arctan2(ve, vn))
        course_err.append(np.abs((c_est - c_true + 180.0) % 360.0 - 180.0))
        speed_err.append(np.abs(np.hypot(est_e, est_n) - np.hypot(ve, vn)) / KNOT_M_S)
    ce, se = np.concatenate(course_err), np.concatenate(speed_err)
    lim_c, lim_s = ARPA_3MIN_TRUE_COURSE_DEG, ARPA_3MIN_TRUE_SPEED_KN
    pc, ps = np.mean(ce <= lim_c), np.mean(se <= lim_s)
    _line("course error 95th percentile", f"{np.percentile(ce, 95):.2f} deg (limit {lim_c} deg)")
    _line("speed error 95th percentile", f"{np.percentile(se, 95):.2f} kn (limit {lim_s} kn)")
    _line("share within both limits", f"course {100 * pc:.1f} %, speed {100 * ps:.1f} % "
          f"(target >= 95 %) {'PASS' if min(pc, ps) >= 0.95 else 'FAIL'}")


#: 3-minute true course / true speed accuracy, 95 % probability, of the strictest
#: scenario of the plotting-aid standard's table (33 CFR 164.38 App. A 3.8.3) -- from memory.
ARPA_3MIN_TRUE_COURSE_DEG = 2.2
ARPA_3MIN_TRUE_SPEED_KN = 0.5


def main() -> None:
    with tempfile.TemporaryDirectory() as d:
        work = Path(d)
        study_quiet(work)
        study_identity(work, "crossing45")
        study_identity(work, "parallel120")
        study_outage(work)
        study_end_times(work)
        study_arpa(work)


if __name__ == "__main__":
    main()
