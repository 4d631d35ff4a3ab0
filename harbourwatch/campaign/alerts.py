"""The campaign's alerts: each chunk's own where it saw the whole story, re-evaluated where not.

* An alert of one trajectory stands as its chunk raised it when that
  trajectory is *local* (one piece, wholly inside its chunk's core; see
  :mod:`harbourwatch.campaign.join`).
* A meeting (pairwise rule) stands as its chunk raised it when at least one
  of its two trajectories is local: the episode lies within that
  trajectory's life, inside the core, where the chunk's states are the
  campaign's states.
* Every rule is evaluated again, with the library's own
  :func:`~harbourwatch.rules.evaluate_rules`, over the *joined*
  trajectories (those built from several chunks, or cut at a boundary);
  single-trajectory alerts and meetings between two joined trajectories
  come from there.

So an episode across a boundary (a vessel at anchor from 23:30 to 00:40)
gives one alert over its whole span, as one run over both days would, and
no alert is counted twice. The probability of a re-evaluated alert comes
from draws seeded by the joined trajectory id, so it differs from a single
run's by Monte-Carlo noise only (standard error at most 0.035).
"""

from __future__ import annotations

import csv
import re
from collections.abc import Mapping, Sequence
from pathlib import Path

from harbourwatch.campaign.join import JoinResult
from harbourwatch.io.records import RuleConfig, ZoneConfig
from harbourwatch.io.timefmt import format_utc_one
from harbourwatch.rules import Alert, evaluate_rules
from harbourwatch.rules.evaluate import ALERT_COLUMNS
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.trajectories import AsSeenTable, TrajectorySet

__all__ = ["combine_alerts", "read_alert_rows"]


def read_alert_rows(path: Path) -> list[dict[str, str]]:
    """Rows of one chunk's ``alerts.csv`` (all columns as text)."""
    with open(path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _rename(summary: str, names: Mapping[str, str]) -> str:
    if not names:
        return summary
    pattern = re.compile(r"\b(" + "|".join(re.escape(k) for k in sorted(names, key=len,
                                                                       reverse=True)) + r")\b")
    return pattern.sub(lambda m: names[m.group(1)], summary)


def _row(a: Alert, chunk: str) -> dict[str, str]:
    return {"rule": a.rule, "kind": a.kind, "track": a.track, "other_track": a.other_track,
            "zone": a.zone, "start": format_utc_one(a.start), "end": format_utc_one(a.end),
            "probability": f"{a.probability:.3f}", "summary": a.summary, "chunk": chunk,
            "source": "joined"}


def combine_alerts(chunk_rows: Mapping[str, Sequence[dict[str, str]]], join: JoinResult, *,
                   zones: Sequence[ZoneConfig], rules: Sequence[RuleConfig], frame: LocalFrame,
                   seed: int, cores: Sequence[tuple[str, float, float]] = ()
                   ) -> list[dict[str, str]]:
    """Every alert of the campaign, one row each (``alerts.csv`` columns plus ``chunk``, ``source``).

    Parameters
    ----------
    chunk_rows
        Each finished chunk's ``alerts.csv`` rows, by chunk name.
    join
        The joined trajectory set.
    zones, rules, frame, seed
        As the chunks used them (the frame of the run: around the sensor sites).
    cores
        ``(name, start, end)`` of every chunk's core: a re-evaluated alert's
        ``chunk`` is the one its start falls in.
    """
    out: list[dict[str, str]] = []
    for chunk, rows in chunk_rows.items():
        for r in rows:
            a, o = (chunk, r["track"]), (chunk, r.get("other_track") or "")
            pair = bool(o[1])
            keep = (a in join.local or o in join.local) if pair else a in join.local
            if not keep or a not in join.piece_id or (pair and o not in join.piece_id):
                continue
            names = {a[1]: join.piece_id[a]}
            if pair:
                names[o[1]] = join.piece_id[o]
            row = {c: r.get(c, "") for c in ALERT_COLUMNS}
            row["track"] = join.piece_id[a]
            row["other_track"] = join.piece_id[o] if pair else ""
            row["summary"] = _rename(r["summary"], names)
            row["chunk"] = chunk
            row["source"] = "chunk"
            out.append(row)
    if join.joined:
        t0 = min(float(tr.time[0]) for tr in join.joined)
        t1 = max(float(tr.time[-1]) for tr in join.joined)
        tset = TrajectorySet(trajectories=join.joined, frame=frame, as_seen=AsSeenTable.empty(),
                             feed_start=t0, feed_end=t1)
        for al in evaluate_rules(tset, zones, rules, seed=seed):
            chunk = next((n for n, c0, c1 in cores if c0 <= al.start < c1), "")
            out.append(_row(al, chunk))
    out.sort(key=lambda r: (r["start"], r["rule"], r["track"], r["other_track"]))
    return out
