"""Flags a person must act on, with the message that says what to check.

The detectors measure; this module applies the configured limits (the pipe's allowable surge
pressure and minimum pressure) and words the finding for the morning report. Each flag names
the asset (a pipe or node id) and the check a person should make. These are screening
findings: ratings and allowances follow local codes, manufacturers' data and the judgement of
a licensed engineer.
"""

from __future__ import annotations

import math
from typing import Any, Iterable

from detectors.burst import burst_size_from_drop
from models.layout import SystemLayout

from .units import STANDARD_GRAVITY_M_S2

__all__ = ["limit_flags", "repeated_trip_flag"]

KPA = 1000.0


def _where(layout: SystemLayout, sensor_id: str) -> str:
    site = layout.sensor(sensor_id)
    return f"{sensor_id} (pipe {site.pipe_id}, chainage {site.offset_m:.0f} m)"


def limit_flags(event: Any, layout: SystemLayout) -> list[dict]:
    """Pressure above the pipe's allowable surge pressure or below its minimum, per sensor."""
    flags = []
    for obs in event.observations:
        site = layout.sensor(obs.sensor_id)
        if site.quantity != "pressure":
            continue
        pipe = layout.pipe(site.pipe_id)
        clipped = bool(getattr(obs, "clipped", False))
        if pipe.allowable_pressure_pa is not None and obs.max_pa is not None and obs.max_pa > pipe.allowable_pressure_pa:
            peak = f"at least {obs.max_pa / KPA:.0f} kPa (sensor at its range)" if clipped else f"{obs.max_pa / KPA:.0f} kPa"
            flags.append(dict(
                asset_id=pipe.id, kind="above_allowable_pressure", severity="critical",
                message=(
                    f"{_where(layout, obs.sensor_id)} reached {peak}, above the allowable surge pressure "
                    f"{pipe.allowable_pressure_pa / KPA:.0f} kPa of pipe {pipe.id}. Check the main and its "
                    "fittings near the sensor for damage or leakage, check the surge protection and the "
                    "operation that caused the event, and confirm the rating with the manufacturer's data."
                ),
            ))
        elif clipped:
            flags.append(dict(
                asset_id=obs.sensor_id, kind="sensor_clipped", severity="warning",
                message=(
                    f"{_where(layout, obs.sensor_id)} was at the top of its range: the true peak was at "
                    f"least {obs.max_pa / KPA:.0f} kPa and may be higher. Fit a transducer with a wider range."
                ),
            ))
        if pipe.minimum_pressure_pa is not None and obs.min_pa is not None and obs.min_pa < pipe.minimum_pressure_pa:
            flags.append(dict(
                asset_id=pipe.id, kind="below_minimum_pressure", severity="critical",
                message=(
                    f"{_where(layout, obs.sensor_id)} fell to {obs.min_pa / KPA:.0f} kPa, below the minimum "
                    f"{pipe.minimum_pressure_pa / KPA:.0f} kPa of pipe {pipe.id}. Sub-atmospheric pressure: "
                    "risk of column separation (and of the pressure rise when the column rejoins) and of "
                    "ingress through joints. Check air valves and the surge protection, and consider water "
                    "quality sampling near the sensor."
                ),
            ))
    return flags


def repeated_trip_flag(
    station_id: str, trip_times: Iterable[Any], count: int, period_h: float
) -> dict | None:
    """A flag when ``count`` or more pump trips at one station fall within ``period_h`` hours."""
    times = sorted(trip_times)
    for i in range(len(times) - count + 1):
        span_h = (times[i + count - 1] - times[i]).total_seconds() / 3600.0
        if span_h <= period_h:
            return dict(
                asset_id=station_id, kind="repeated_pump_trips", severity="warning",
                message=(
                    f"{len(times)} pump trips at {station_id} within {period_h:.0f} h "
                    f"(from {times[0]:%Y-%m-%d %H:%M} UTC). Check the power supply, the protection "
                    "relays and the pump controls; each trip loads the main with a full surge cycle."
                ),
            )
    return None


def kind_flags(event: Any, burst_size: str = "") -> list[dict]:
    """Flags that follow from the kind of event itself: a suspected burst (with its size, when
    :func:`burst_size_text` could estimate it), a faulty sensor."""
    if event.kind == "burst_suspected":
        where = getattr(event, "source_description", "") or f"near {event.origin_sensor}"
        return [dict(
            asset_id=getattr(event, "source_node", None) or event.origin_sensor, kind="possible_burst",
            severity="warning",
            message=(
                f"possible burst or large new leak, {where}: {event.reason}. "
                + (f"{burst_size}. " if burst_size else "")
                + "Compare with the flow records and the night-flow balance, look for reports of "
                "water or low pressure, and send someone to walk the line if they agree."
            ),
        )]
    if event.kind == "sensor_fault":
        return [dict(
            asset_id=event.origin_sensor, kind="sensor_fault", severity="warning",
            message=(
                f"{event.origin_sensor}: {event.reason}. Check the logger, its transducer and cable, "
                "the tapping and its isolating valve; its data may hide or fake a surge until fixed."
            ),
        )]
    return []


def burst_size_text(event: Any, layout: Any, density_kg_m3: float,
                    opening_elevation_m: float | None = None) -> str:
    """The size of a suspected burst from the first drop at the sensor that saw it first
    (:func:`detectors.burst.burst_size_from_drop`), as a sentence; empty where the sensor's
    pipe has no wave speed or the first front is not a drop. The effective opening needs the
    elevation of the located opening (the head over it); without one, only the flow is given."""
    first = next((o for o in event.observations if o.sensor_id == event.origin_sensor), None)
    if first is None or not first.first_front_pa < 0:
        return ""
    site = layout.sensor(first.sensor_id)
    pipe = layout.pipe(site.pipe_id)
    if not pipe.wave_speed_m_s:
        return ""
    after_pa = first.baseline_pa + first.first_front_pa  # at the sensor, just after the drop
    if opening_elevation_m is None:
        over_opening_pa = float("nan")
    else:  # the sensor's pressure carried to the opening's elevation
        over_opening_pa = after_pa + density_kg_m3 * STANDARD_GRAVITY_M_S2 * (site.elevation_m - opening_elevation_m)
    size = burst_size_from_drop(-first.first_front_pa, over_opening_pa, pipe.wave_speed_m_s,
                                math.pi * pipe.diameter_m**2 / 4.0, density_kg_m3)
    opening = (f" through an effective opening (discharge coefficient times area) of about "
               f"{size.effective_area_m2 * 1e4:.0f} cm2" if math.isfinite(size.effective_area_m2) else "")
    return (f"Sized from the first drop of {-first.first_front_pa / 1e3:.0f} kPa at {first.sensor_id}: "
            f"about {size.flow_m3_s * 1e3:.0f} l/s{opening} (at least: a slower opening, or a sensor "
            "further from it, shows a smaller drop)")
