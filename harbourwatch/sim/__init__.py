"""The simulator: invented scenarios with ground truth (vessels on the ellipsoid, rotating radars, clutter).

Modules, in the order the data flows: ``model`` (the declarative records of a
scenario and of a simulation's result), ``engine`` (vessel motion and the
radar plot model; :func:`simulate`), ``scenarios`` (the built-in scenarios,
Port Calder among them) and ``writing`` (the contract's files;
:func:`simulate_to_dir`).
"""

from __future__ import annotations

from harbourwatch.sim import quay as _quay  # noqa: F401  (registers the East Quay scenes)
from harbourwatch.sim.engine import ARPA_ERRORS, TRUTH_STEP_S, arpa_sigmas, simulate
from harbourwatch.sim.model import (
    Leg,
    PlotArrays,
    Scenario,
    ScenarioSpec,
    SimSensor,
    SimulationResult,
    VesselPlan,
    VesselTruth,
)
from harbourwatch.sim.scenarios import SCENARIOS
from harbourwatch.sim.writing import (
    TRUTH_FILE_STEP_S,
    plots_columns,
    sensors_to_toml,
    simulate_to_dir,
    truth_columns,
    write_sensors_toml,
)

__all__ = [
    "Leg",
    "VesselPlan",
    "SimSensor",
    "Scenario",
    "ScenarioSpec",
    "PlotArrays",
    "VesselTruth",
    "SimulationResult",
    "simulate",
    "simulate_to_dir",
    "sensors_to_toml",
    "write_sensors_toml",
    "SCENARIOS",
    "TRUTH_STEP_S",
    "TRUTH_FILE_STEP_S",
    "ARPA_ERRORS",
    "arpa_sigmas",
    "plots_columns",
    "truth_columns",
]
