"""The progress display of a review run: one bar per stage, with rate and time left.

Drawn by tqdm on standard error, only when it is a terminal: nothing is
written to a pipe, a log file or with ``--quiet``. The stages and their
units:

========  =====  ==========================================================
stage     unit   counts
========  =====  ==========================================================
tracking  scan   radar scans through the filter
tables    row    rows of ``tracks.csv`` and ``as_seen.csv`` and trajectories
                 of ``trajectories.geojson`` (written on a second thread)
rules     rule   rules evaluated over every trajectory
reports   page   the overview and the incident pages
========  =====  ==========================================================
"""

from __future__ import annotations

import sys
import threading
from collections.abc import Callable
from typing import TextIO

from tqdm import tqdm

__all__ = ["STAGES", "RunProgress"]

#: Stage name -> unit, in the order the bars are drawn.
STAGES: dict[str, str] = {"tracking": "scan", "tables": "row", "rules": "rule", "reports": "page"}

Callback = Callable[[int, int], None]


def _is_terminal(stream: TextIO) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):  # closed or not a real stream
        return False


class RunProgress:
    """The bars of one run; :meth:`stage` gives each stage its ``(done, total)`` callback.

    Parameters
    ----------
    enabled
        ``False`` (``--quiet``) draws nothing.
    stream
        Where to draw (default: standard error); nothing is drawn unless it
        is a terminal.
    """

    def __init__(self, *, enabled: bool = True, stream: TextIO | None = None) -> None:
        self.stream = sys.stderr if stream is None else stream
        self.enabled = enabled and _is_terminal(self.stream)
        self._bars: dict[str, tqdm] = {}  # type: ignore[type-arg]
        self._lock = threading.Lock()  # the tables stage reports from a second thread

    def stage(self, name: str) -> Callback | None:
        """``progress(done, total)`` for stage ``name`` (one of :data:`STAGES`), or None."""
        if not self.enabled:
            return None
        unit = STAGES[name]
        position = list(STAGES).index(name)

        def update(done: int, total: int) -> None:
            with self._lock:
                bar = self._bars.get(name)
                if bar is None:
                    bar = tqdm(total=total, desc=f"{name:<8s}", unit=unit, file=self.stream,
                               position=position, leave=True, dynamic_ncols=True,
                               mininterval=0.2, unit_scale=unit == "row")
                    self._bars[name] = bar
                if bar.total != total:
                    bar.total = total
                bar.update(done - bar.n)
                if done >= total:
                    bar.refresh()

        return update

    def close(self) -> None:
        """Finish every bar (each keeps its last line on the terminal)."""
        with self._lock:
            for name in STAGES:
                if name in self._bars:
                    self._bars[name].close()
            self._bars.clear()
