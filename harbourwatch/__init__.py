"""harbourwatch: after-the-fact review of harbour and coastal radar plots.

Turns raw radar plots into the estimated set of all vessel trajectories,
checks them against geofence rules with a probability on every alert, and
writes offline HTML map reports. Its output supports, and never replaces,
qualified watchkeepers and the competent authority.

The verbs, in the order of the data flow::

    inputs = load_inputs(feeds, sensors=..., zones=..., rules=...)
    scene = into_local_frame(inputs, settings)
    found = run_filter(scene.scans, scene.sensors, settings)
    alerts = evaluate_rules(trajectory_set, scene.zones, inputs.rules)

or all of it, outputs written, with :func:`run_review`. :func:`score_files`
scores a run against ground truth; :func:`simulate` and
:func:`simulate_to_dir` make invented scenarios with ground truth.
"""

from __future__ import annotations

__version__ = "0.1.0"

from harbourwatch.errors import (
    ComputationError,
    HarbourwatchError,
    InputError,
    OutputError,
    ParameterError,
)
from harbourwatch.filter import FilterOutput, run_filter, warm_up
from harbourwatch.io import (
    FilterSettings,
    RuleConfig,
    RunInputs,
    SensorConfig,
    ZoneConfig,
    load_inputs,
)
from harbourwatch.pipeline import RunSummary, demo_paths, run_demo, run_review
from harbourwatch.rules import Alert, evaluate_rules
from harbourwatch.scene import LocalFrame, LocalScene, LocalZone, into_local_frame
from harbourwatch.scoring import ScoreReport, mean_gospa_files, score_files
from harbourwatch.sim import SCENARIOS, Scenario, SimulationResult, simulate, simulate_to_dir
from harbourwatch.trajectories import AsSeenTable, Trajectory, TrajectorySet
from harbourwatch.units import CAUTION, KNOT_M_S, NAUTICAL_MILE_M

__all__ = [
    "__version__",
    # errors
    "HarbourwatchError",
    "InputError",
    "ParameterError",
    "ComputationError",
    "OutputError",
    # verbs
    "load_inputs",
    "into_local_frame",
    "run_filter",
    "warm_up",
    "evaluate_rules",
    "run_review",
    "run_demo",
    "demo_paths",
    "score_files",
    "mean_gospa_files",
    "simulate",
    "simulate_to_dir",
    # records
    "SensorConfig",
    "ZoneConfig",
    "RuleConfig",
    "FilterSettings",
    "RunInputs",
    "LocalFrame",
    "LocalScene",
    "LocalZone",
    "FilterOutput",
    "Trajectory",
    "TrajectorySet",
    "AsSeenTable",
    "Alert",
    "RunSummary",
    "ScoreReport",
    "Scenario",
    "SimulationResult",
    "SCENARIOS",
    # units and wording
    "CAUTION",
    "KNOT_M_S",
    "NAUTICAL_MILE_M",
]
