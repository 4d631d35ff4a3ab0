"""The input contract under generated hostile inputs: a harness run in its own process.

Every generated case (a feed, sensor file, zones and rules, valid or broken
by :mod:`strategies`) goes through ``harbourwatch run`` in-process and must
end in one of two ways:

* exit 0 with every output written (tracks, as-seen, alerts, trajectories,
  run.json, report), or
* exit 2 with one line on stderr naming the input file at fault, and
  nothing written into the output folder;

never exit 1, never an exception escaping :func:`harbourwatch.cli.main`
(a traceback). The process runs under an address-space cap
(``resource.setrlimit(RLIMIT_AS)``) so a runaway allocation fails the case
instead of the machine, and each case under hypothesis' deadline.

``python tests/fuzz_contract.py --examples 40`` (``make test`` runs this
through ``tests/test_fuzz_contract.py``; ``make bench`` with more examples).
Prints one summary line: cases, exits 0 and 2.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import resource
import sys
import tempfile
from collections import Counter
from pathlib import Path

from conftest import CALDER_RULES, CALDER_SENSORS, CALDER_ZONES_DOC
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from strategies import hostile_feeds, hostile_toml, hostile_zones

OUTPUTS = ("tracks.csv", "as_seen.csv", "alerts.csv", "trajectories.geojson", "run.json",
           "report.html")


def base_feed() -> str:
    """Two vessels for a minute near Calder Head and a few clutter plots (valid)."""
    rows = ["time,sensor,lat,lon,sigma_m"]
    for k in range(24):
        t = 1777874400.0 + 2.5 * k
        stamp = f"2026-05-04T06:{int(t - 1777874400) // 60:02d}:{(t - 1777874400) % 60:06.3f}Z"
        rows.append(f"{stamp},calder-head,{54.3100 + 0.00004 * k:.6f},{10.1500 + 0.00006 * k:.6f},")
        rows.append(f"{stamp},calder-head,{54.3300 - 0.00003 * k:.6f},{10.1800:.6f},20")
        if k % 5 == 0:
            rows.append(f"{stamp},sound-light,{54.3600 + 0.001 * (k % 7):.6f},"
                        f"{10.2300 - 0.002 * (k % 3):.6f},")
    return "\n".join(rows) + "\n"


COUNTS: Counter[str] = Counter()


@st.composite
def cases(draw):
    def mostly(valid, broken):  # three in four files valid: about a third of cases run
        return draw(st.one_of(st.just(valid), st.just(valid), st.just(valid), broken))

    return {
        "feed": mostly(base_feed().encode(), hostile_feeds(base_feed())),
        "sensors": mostly(CALDER_SENSORS, hostile_toml(CALDER_SENSORS)),
        "zones": mostly(json.dumps(CALDER_ZONES_DOC), hostile_zones(CALDER_ZONES_DOC)),
        "rules": mostly(CALDER_RULES, hostile_toml(CALDER_RULES)),
        "allow_gaps": draw(st.booleans()),
    }


def check_case(case: dict) -> None:
    """Run one case and assert the contract (raises AssertionError on a breach)."""
    from harbourwatch.cli import main

    with tempfile.TemporaryDirectory(prefix="hw-fuzz-") as tmp:
        d = Path(tmp)
        paths = {"feed": d / "plots.csv", "sensors": d / "sensors.toml",
                 "zones": d / "zones.geojson", "rules": d / "rules.toml"}
        paths["feed"].write_bytes(case["feed"])
        for k in ("sensors", "zones", "rules"):
            paths[k].write_text(case[k], encoding="utf-8", errors="surrogatepass")
        out = d / "out"
        argv = ["run", str(paths["feed"]), "--sensors", str(paths["sensors"]), "--zones",
                str(paths["zones"]), "--rules", str(paths["rules"]), "--out", str(out), "--quiet"]
        if case["allow_gaps"]:
            argv.append("--allow-gaps")
        err, so = io.StringIO(), io.StringIO()
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(so):
            try:
                status = main(argv)
            except BaseException as exc:  # noqa: BLE001 - the contract forbids any escape
                raise AssertionError(f"exception escaped main: {exc!r}") from exc
        message = err.getvalue()
        assert status in (0, 2), f"exit {status}: {message}"
        COUNTS[f"exit {status}"] += 1
        if status == 0:
            missing = [f for f in OUTPUTS if not (out / f).is_file()]
            assert not missing, f"exit 0 but missing {missing}"
        else:
            assert message.startswith("harbourwatch: error: ") and message.count("\n") == 1, \
                message
            assert any(f"error: {p}" in message for p in paths.values()), message
            assert not out.exists() or not any(out.iterdir()), "exit 2 but outputs written"


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--examples", type=int, default=40)
    p.add_argument("--mem-gb", type=float, default=3.0, help="address-space cap (GiB)")
    p.add_argument("--random", action="store_true", help="random examples (default: derandomized)")
    a = p.parse_args(argv)
    cap = int(a.mem_gb * (1 << 30))
    resource.setrlimit(resource.RLIMIT_AS, (cap, cap))

    @settings(max_examples=a.examples, deadline=30_000, database=None,
              derandomize=not a.random, suppress_health_check=list(HealthCheck))
    @given(cases())
    def contract(case: dict) -> None:
        check_case(case)

    contract()
    total = sum(COUNTS.values())
    print(f"fuzz contract: {total} cases, {COUNTS['exit 0']} exit 0, {COUNTS['exit 2']} exit 2, "
          f"no breach (address space capped at {a.mem_gb:g} GiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
