"""The local scene: everything a run needs in the local frame, built once.

``geodesy`` holds :class:`LocalFrame` (the only module that talks to pyproj);
``records`` the radar and scan records the filter reads; ``zones`` the
zones in the frame; ``build`` the one step :func:`into_local_frame` that
makes a :class:`LocalScene` from a run's validated inputs.
"""

from __future__ import annotations

from harbourwatch.scene.build import LocalScene, into_local_frame
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scene.records import MeasurementScan, SensorModel
from harbourwatch.scene.zones import LocalZone

__all__ = ["LocalScene", "into_local_frame", "LocalFrame", "MeasurementScan", "SensorModel", "LocalZone"]
