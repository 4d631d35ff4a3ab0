"""Accuracy of a run against ground truth: GOSPA, trajectory GOSPA, engineer figures.

``metrics`` is the pure mathematics (GOSPA, trajectory GOSPA as a linear
program); ``windows`` the trajectory GOSPA of long feeds in time windows
with certified bounds; ``reading`` reads the two CSV files; ``score`` puts
them on a grid and computes the figures of ``harbourwatch score``.
"""

from __future__ import annotations

from harbourwatch.scoring.plot import write_score_plot
from harbourwatch.scoring.score import ScoreReport, mean_gospa_files, score_files

__all__ = ["ScoreReport", "mean_gospa_files", "score_files", "write_score_plot"]
