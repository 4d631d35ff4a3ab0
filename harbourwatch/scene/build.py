"""Into the local frame, once per run: frame, radars, scans, zones.

Every later stage (filter, rules, reports) works in the local azimuthal
equidistant frame in metres. :func:`into_local_frame` builds everything they
share, once: the frame around the radars, one :class:`SensorModel` per radar,
the plots of every scan with their converted range/bearing covariances, and
the zones moved into the frame with one densification
(:data:`~harbourwatch.scene.zones.DENSIFY_M`), used alike by the filter's
birth regions, the rules and the report maps.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.inputs import RunInputs
from harbourwatch.io.records import FilterSettings, SensorConfig
from harbourwatch.scene.checks import InputChecks
from harbourwatch.scene.extent import Covers, check_sensors_in_frame, far_rows, refuse_far_plots
from harbourwatch.scene.geodesy import LocalFrame
from harbourwatch.scene.records import BirthRegion, MeasurementScan, SensorModel
from harbourwatch.scene.scans import ScanStream
from harbourwatch.scene.zones import LocalZone, local_zones

__all__ = ["LocalScene", "into_local_frame", "sensor_models", "measurement_scans"]

#: Zone kind whose polygons get the extra arrivals of
#: ``FilterSettings.entrance_arrivals_per_hour``.
ENTRANCE_KIND = "entrance"


@dataclass(frozen=True, kw_only=True, eq=False)
class LocalScene:
    """A run's inputs in the local frame (SI units), built once by :func:`into_local_frame`.

    Attributes
    ----------
    frame
        The local azimuthal equidistant frame around the radars.
    sensors
        One :class:`SensorModel` per radar, in the order of the sensor file.
    scans
        The plots of every scan in the frame, with their covariances (made a
        block of scans at a time as they are read: :class:`ScanStream`).
    zones
        Every zone in the frame (densified once), by id.
    birth_regions
        Polygons with extra arrivals for the filter (zones of kind ``entrance``
        when ``FilterSettings.entrance_arrivals_per_hour`` is positive).
    warnings
        One line per implausible input found on the way (see :mod:`.checks`).
    """

    frame: LocalFrame
    sensors: tuple[SensorModel, ...]
    scans: Sequence[MeasurementScan]
    zones: Mapping[str, LocalZone]
    birth_regions: tuple[BirthRegion, ...]
    warnings: tuple[str, ...] = ()


def sensor_models(sensors: Sequence[SensorConfig], frame: LocalFrame) -> list[SensorModel]:
    """The radars as the filter sees them: site in the frame, clutter intensity per m^2."""
    e, n = frame.to_local([s.lat_deg for s in sensors], [s.lon_deg for s in sensors])
    return [
        SensorModel(
            index=i,
            site=(float(e[i]), float(n[i])),
            detection_probability=s.detection_probability,
            clutter_intensity=s.clutter_intensity_per_m2,
            max_range_m=s.max_range_m,
            scan_period_s=s.scan_period_s,
        )
        for i, s in enumerate(sensors)
    ]


def measurement_scans(
    plots: PlotTable,
    scans: Sequence[Scan],
    models: Sequence[SensorModel],
    sensors: Sequence[SensorConfig],
    frame: LocalFrame,
) -> ScanStream:
    """Plots into the local frame with their covariances, one record per scan.

    The records are made a block of scans at a time as they are read
    (:class:`~harbourwatch.scene.scans.ScanStream`), so a long feed's scans
    never all exist at once in the frame.
    """
    return ScanStream(plots, scans, models, sensors, frame)


#: Plots moved into the frame at a time for the checks of :func:`into_local_frame`.
CHECK_ROWS = 1 << 20


def _check_plots(inputs: RunInputs, models: Sequence[SensorModel], frame: LocalFrame) -> list[str]:
    """The frame's bound (refused) and the plausibility warnings, a block of plots at a time.

    Raises
    ------
    InputError
        A radar, or a plot (the first by file and line), beyond the frame's bound.
    """
    plots = inputs.plots
    check_sensors_in_frame(inputs.sensors, frame, inputs.sensors_path or None)
    checks = InputChecks(inputs.sensors, models)
    far: list[NDArray[np.int64]] = []
    for a in range(0, len(plots), CHECK_ROWS):
        b = min(len(plots), a + CHECK_ROWS)
        e, n = frame.to_local(plots.lat_deg[a:b], plots.lon_deg[a:b])
        far.append(a + far_rows(e, n))
        checks.add(plots.sensor[a:b], plots.sigma_m[a:b], np.column_stack([e, n]))
    refuse_far_plots(plots, inputs.sensors, frame,
                     np.concatenate(far) if far else np.empty(0, np.int64))
    return checks.warnings()


def _birth_regions(zones: Mapping[str, LocalZone], per_hour: float) -> tuple[BirthRegion, ...]:
    if per_hour <= 0:
        return ()
    return tuple(
        BirthRegion(polygon=z.polygon, arrivals_per_hour=per_hour)
        for z in zones.values()
        if z.kind_key == ENTRANCE_KIND and not z.is_empty
    )


def into_local_frame(inputs: RunInputs, settings: FilterSettings | None = None) -> LocalScene:
    """Build a run's :class:`LocalScene` from its validated inputs.

    Parameters
    ----------
    inputs
        What :func:`~harbourwatch.io.inputs.load_inputs` returned.
    settings
        Filter settings (for the entrance births); defaults if omitted.

    Examples
    --------
    >>> from harbourwatch.pipeline import demo_paths
    >>> from harbourwatch.io.inputs import load_inputs
    >>> p = demo_paths()
    >>> scene = into_local_frame(load_inputs([p["feed"]], sensors=p["sensors"],
    ...                                      zones=p["zones"], rules=p["rules"]))
    >>> len(scene.sensors), sorted(scene.zones)[:2]
    (2, ['fairway', 'inner-basin'])
    """
    settings = settings or FilterSettings()
    frame = LocalFrame.around([s.lat_deg for s in inputs.sensors],
                              [s.lon_deg for s in inputs.sensors])
    models = sensor_models(inputs.sensors, frame)
    warnings = _check_plots(inputs, models, frame)
    zones = local_zones(inputs.zones, frame, Covers.of(inputs.sensors, frame), warnings)
    return LocalScene(
        frame=frame,
        sensors=tuple(models),
        scans=measurement_scans(inputs.plots, inputs.scans, models, inputs.sensors, frame),
        zones=zones,
        birth_regions=_birth_regions(zones, settings.entrance_arrivals_per_hour),
        warnings=tuple(warnings),
    )

