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

from harbourwatch.io.feeds import PlotTable, Scan
from harbourwatch.io.inputs import RunInputs
from harbourwatch.io.records import FilterSettings, SensorConfig
from harbourwatch.scene.checks import input_warnings
from harbourwatch.scene.extent import Covers, check_frame_extent
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
    e, n = frame.to_local(np.asarray(inputs.plots.lat_deg), np.asarray(inputs.plots.lon_deg))
    check_frame_extent(inputs.plots, inputs.sensors, frame, e, n,
                       sensors_path=inputs.sensors_path or None)
    warnings = input_warnings(inputs.plots, inputs.sensors, models, np.column_stack([e, n]))
    del e, n  # the checks' copy of every plot in the frame; the filter's comes block by block
    zones = local_zones(inputs.zones, frame, Covers.of(inputs.sensors, frame), warnings)
    return LocalScene(
        frame=frame,
        sensors=tuple(models),
        scans=measurement_scans(inputs.plots, inputs.scans, models, inputs.sensors, frame),
        zones=zones,
        birth_regions=_birth_regions(zones, settings.entrance_arrivals_per_hour),
        warnings=tuple(warnings),
    )

