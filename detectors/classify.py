"""Why an event happened: pump trip, pump start, valve closure, suspected burst, sensor fault.

The classification reads physics the layout knows and, where the window carries them,
SCADA context channels:

1. **Where the front came from.** The onsets of the clock-synchronised sensors are fitted
   to a source on the pipes (:func:`detectors.locate.locate_source`: travel times along
   the pipes with each pipe's wave speed, a common wave-speed factor, one outlier pick
   tolerated). A pump station or valve whose arrival pattern fits is the source; when
   none fits, the best point on the pipes is named. With one timed sensor only, an asset
   within ``asset_distance_m`` of it stands in (and the reason says so).
2. **Either side of an in-line asset** (:mod:`detectors.sides`): a rise upstream of a valve
   in the middle of the main with a fall downstream is its closure (a pump's trip), the
   reverse an opening (a start); a fall on both sides of a valve the timing points to is a
   sudden outflow near it (suspected burst), not an operation of the valve.
   **First motion**: a down-surge (negative first front) at a pump station is a trip, an
   up-surge a start; an up-surge from a valve is a closure.
3. **Where the pressure settles**: a down-surge located by timing at a point of the pipes
   away from every pump and valve is a sudden outflow there (suspected burst, or a
   draw-off); without a located source, a down-surge that settles at a lower level is a
   suspected burst (a burst near a reservoir may settle only a little lower).
4. **Who saw it**: a transient on one sensor while the others, with data, stayed quiet is a
   sensor fault (spike train, step, clipping).
5. **SCADA context**: a pump run signal that drops (rises) near the onset confirms a trip
   (start); a run signal that stays on rules a trip out; a valve-position fall or a flow
   step at a valve confirms a valve operation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping, Sequence

import numpy as np

from models.layout import SystemLayout

from .locate import locate_source
from .metrics import SensorObservation
from .params import DetectionParams
from .sides import SideReading, read_sides
from .traces import SensorTrace

__all__ = ["Classification", "classify_event", "travel_time_from_node_s", "scada_context"]

DEFAULT_WAVE_SPEED_M_S = 1000.0


@dataclass(frozen=True)
class Classification:
    """Kind of an event and the short reason for it."""

    kind: str
    reason: str
    origin_sensor: str
    source_node: str | None = None
    source_description: str = ""
    confirmed_by_scada: bool = False
    source_pipe_id: str | None = None
    source_offset_m: float | None = None


@dataclass(frozen=True)
class ContextFinding:
    """What a SCADA channel did around the onset."""

    sensor_id: str
    asset_id: str | None
    quantity: str
    change: str  # "dropped" | "rose" | "on_throughout" | "off_throughout" | "step_down" | "step_up" | "steady"


def travel_time_from_node_s(layout: SystemLayout, node_id: str, sensor_id: str) -> float:
    """Travel time of a wave from a node to a sensor along the pipes [s]; ``inf`` if apart."""
    for pipe in layout.pipes:
        if node_id in (pipe.from_node, pipe.to_node):
            offset = 0.0 if pipe.from_node == node_id else pipe.length_m
            site = layout.sensor(sensor_id)
            legs = layout.path_between_points(pipe.id, offset, site.pipe_id, site.offset_m)
            if legs is None:
                return math.inf
            return layout.travel_time_s(legs, DEFAULT_WAVE_SPEED_M_S)
    return math.inf


def _nearest_asset(layout: SystemLayout, sensor_id: str) -> tuple[str | None, float]:
    best: tuple[str | None, float] = (None, math.inf)
    for node in layout.nodes:
        if node.kind in ("pump_station", "valve"):
            d = layout.distance_from_node_m(sensor_id, node.id)
            if d < best[1]:
                best = (node.id, d)
    return best


def _change_of_status(trace: SensorTrace, onset_ns: int, tol_ns: int) -> str | None:
    window = (trace.times_ns >= onset_ns - tol_ns) & (trace.times_ns <= onset_ns + tol_ns)
    before = trace.values[(trace.times_ns < onset_ns - tol_ns) & np.isfinite(trace.values)]
    inside = trace.values[window & np.isfinite(trace.values)]
    seq = np.concatenate((before[-1:], inside))
    if seq.size == 0:
        return None
    on = seq > 0.5
    if on[0] and not on[-1]:
        return "dropped"
    if not on[0] and on[-1]:
        return "rose"
    return "on_throughout" if bool(np.all(on)) else ("off_throughout" if not np.any(on) else "steady")


def _change_of_level(trace: SensorTrace, onset_ns: int, tol_ns: int, fraction: float) -> str | None:
    span = max(tol_ns, int(30e9))
    t, v = trace.times_ns, trace.values
    before = v[(t >= onset_ns - tol_ns - span) & (t < onset_ns - tol_ns) & np.isfinite(v)]
    after = v[(t > onset_ns + tol_ns) & (t <= onset_ns + tol_ns + span) & np.isfinite(v)]
    if before.size == 0 or after.size == 0:
        return None
    b, a = float(np.median(before)), float(np.median(after))
    scale = max(abs(b), abs(a), 1e-12)
    if (a - b) / scale <= -fraction:
        return "step_down"
    if (a - b) / scale >= fraction:
        return "step_up"
    return "steady"


def scada_context(
    traces: Mapping[str, SensorTrace], layout: SystemLayout, onset_ns: int, params: DetectionParams
) -> list[ContextFinding]:
    """What each context channel (pump status, flow, valve position) did near the onset."""
    tol_ns = int(params.context_tolerance_s * 1e9)
    found = []
    for trace in traces.values():
        if trace.quantity == "pressure":
            continue
        site = layout.sensor(trace.sensor_id)
        asset = site.asset_id
        if asset is None:
            asset, d = _nearest_asset(layout, trace.sensor_id)
            if d > params.asset_distance_m:
                asset = None
        if trace.quantity == "pump_status":
            change = _change_of_status(trace, onset_ns, tol_ns)
        else:
            change = _change_of_level(trace, onset_ns, tol_ns, params.min_flow_step_fraction)
        if change is not None:
            found.append(ContextFinding(trace.sensor_id, asset, trace.quantity, change))
    return found


def _finite(value: float) -> float:
    return float(value) if math.isfinite(value) else 0.0


def _node_kind(layout: SystemLayout, node_id: str | None) -> str | None:
    return None if node_id is None else layout.node(node_id).kind


def classify_event(
    observations: Sequence[SensorObservation],
    layout: SystemLayout,
    params: DetectionParams,
    context: Sequence[ContextFinding] = (),
    quiet_sensors: Sequence[str] = (),
) -> Classification:
    """Kind of an event from its observations, the layout and the SCADA context.

    Parameters
    ----------
    observations : sequence of SensorObservation
        Every sensor that saw the event.
    layout : SystemLayout
    params : DetectionParams
    context : sequence of ContextFinding
        From :func:`scada_context`.
    quiet_sensors : sequence of str
        Pressure sensors that had data over the event and showed nothing (not even a
        tenth of the event's amplitude).

    Returns
    -------
    Classification
    """
    if not observations:
        raise ValueError("classify_event needs at least one observation")
    timed = sorted((o for o in observations if o.clock_synchronised), key=lambda o: o.onset_time_ns)
    ordered = timed or sorted(observations, key=lambda o: o.onset_time_ns)
    origin = ordered[0]
    front = origin.first_front_pa
    motion = "up" if front > 0 else "down"
    band = max(params.settle_tolerance_pa, params.settle_noise_multiple * origin.noise_sigma_pa)
    shift = origin.settled_shift_pa
    settles_lower = shift < -band
    settle_text = (
        f"settled {abs(shift) / 1e3:.0f} kPa lower" if settles_lower
        else ("returned to its old level" if abs(shift) <= max(params.settle_fraction * abs(front), band)
              else f"settled {shift / 1e3:.0f} kPa higher")
    )
    first = f"{motion}-surge of {abs(front) / 1e3:.0f} kPa first at {origin.sensor_id}"

    # 1. one sensor only while the others, with data, stayed quiet
    if len(observations) == 1 and quiet_sensors:
        what = "clipped at its range" if origin.clipped else ("a step" if not settles_lower and abs(shift) > band else "a transient")
        return Classification(
            "sensor_fault",
            f"{what} on {origin.sensor_id} only; {', '.join(quiet_sensors)} saw nothing",
            origin.sensor_id,
        )
    below = [o for o in observations if o.despiked_min_pa < params.vapour_pressure_gauge_pa - 20e3]
    if below and len(observations) == 1:
        return Classification(
            "sensor_fault",
            f"{origin.sensor_id} read {origin.despiked_min_pa / 1e3:.0f} kPa, below vapour pressure: not physical",
            origin.sensor_id,
        )
    caveat = "".join(
        f"; {o.sensor_id} read {o.despiked_min_pa / 1e3:.0f} kPa, below vapour pressure: check that channel"
        for o in below
    )
    fit = _locate(timed, layout, params) if len(timed) >= 2 else None
    cls = _classify_by_source(observations, timed, origin, front, motion, first, settles_lower,
                              settle_text, layout, params, context, fit)
    if fit is not None and fit.node_id is None and fit.misfit <= 1.0:
        cls = replace(cls, source_pipe_id=fit.pipe_id, source_offset_m=fit.offset_m)
    return replace(cls, reason=cls.reason + caveat) if caveat else cls


def _locate(timed, layout, params):
    """Source fit of the timed observations (:func:`detectors.locate.locate_source`)."""
    return locate_source(
        layout,
        {o.sensor_id: o.onset_time_ns * 1e-9 - timed[0].onset_time_ns * 1e-9 for o in timed},
        {o.sensor_id: o.onset_uncertainty_s for o in timed},
        source_tolerance_s=params.source_tolerance_s,
        wave_speed_tolerance_fraction=params.wave_speed_tolerance_fraction,
        default_wave_speed_m_s=DEFAULT_WAVE_SPEED_M_S,
        late_allowance_s={o.sensor_id: params.late_pick_fraction * _finite(o.rise_time_s) for o in timed},
    )


def _classify_by_source(observations, timed, origin, front, motion, first, settles_lower,
                        settle_text, layout, params, context, fit) -> Classification:
    """Kind from the SCADA context, the located source, the first motion and the settling."""

    # 2. SCADA context
    for c in context:
        kind = _node_kind(layout, c.asset_id)
        if c.quantity == "pump_status" and c.change == "dropped":
            return Classification("pump_trip", f"run signal {c.sensor_id} of {c.asset_id} dropped at the event; {first}", origin.sensor_id, c.asset_id, confirmed_by_scada=True)
        if c.quantity == "pump_status" and c.change == "rose":
            return Classification("pump_start", f"run signal {c.sensor_id} of {c.asset_id} rose at the event; {first}", origin.sensor_id, c.asset_id, confirmed_by_scada=True)
        if kind == "valve" and c.quantity in ("valve_position", "flow") and c.change == "step_down" and motion == "up":
            return Classification("valve_closure", f"{c.quantity} {c.sensor_id} at {c.asset_id} stepped down at the event; {first}", origin.sensor_id, c.asset_id, confirmed_by_scada=True)
    running = {c.asset_id for c in context if c.quantity == "pump_status" and c.change == "on_throughout"}
    stopped = {c.asset_id for c in context if c.quantity == "pump_status" and c.change == "off_throughout"}

    # 3. the two sides of an in-line valve or pump station moved apart
    sides = read_sides(observations, layout, head_tolerance_m=params.inline_head_tolerance_m,
                       noise_multiple=params.settle_noise_multiple)
    by_sides = _classify_by_sides(sides, origin, first, settle_text, running, stopped)
    if by_sides is not None:
        return by_sides

    # 4. where the front came from
    source, how = None, ""
    off_asset = False  # located by timing at a point of the pipes away from every asset
    if fit is not None:
        source, how = fit.node_id, fit.describe(layout)
        off_asset = fit.node_id is None and fit.misfit <= 1.0
    else:
        node_id, distance = _nearest_asset(layout, origin.sensor_id)
        if node_id is not None and distance <= params.asset_distance_m:
            source = node_id
            how = f"one timed sensor, {distance:.0f} m from {node_id}: source not located by timing"
        else:
            how = "one timed sensor, away from any pump station or valve: source not located"
    kind_of_source = _node_kind(layout, source)

    if kind_of_source == "pump_station" and motion == "down" and source not in running:
        return Classification("pump_trip", f"{first}; {how}; {settle_text}", origin.sensor_id, source, how)
    if kind_of_source == "pump_station" and motion == "up" and source not in stopped:
        return Classification("pump_start", f"{first}; {how}; {settle_text}", origin.sensor_id, source, how)
    if kind_of_source == "valve" and motion == "up":
        return Classification("valve_closure", f"{first}; {how}; {settle_text}", origin.sensor_id, source, how)
    fell_both = next((r for r in sides if r.node_id == source and r.motions == (-1, -1)), None)
    if fell_both is not None and kind_of_source == "valve":
        return Classification(
            "burst_suspected",
            f"{first}; {how}; {settle_text}; {fell_both.reason}: a valve closing raises the "
            "pressure upstream of it, so a fall on both sides is a sudden outflow near it "
            "(burst, or a draw-off such as a hydrant opening)", origin.sensor_id, None, how)
    if motion == "down" and off_asset and not settles_lower:
        return Classification(
            "burst_suspected",
            f"{first}; {how}; {settle_text} (a sudden outflow there: burst, or a draw-off "
            "such as a hydrant opening)", origin.sensor_id, None, how)
    if motion == "down" and settles_lower:
        extra = f"; {source} ran throughout" if source in running else ""
        return Classification("burst_suspected", f"{first}; {how}{extra}; {settle_text}", origin.sensor_id, None, how)
    return Classification("unclassified", f"{first}; {how}; {settle_text}", origin.sensor_id, source, how)


def _classify_by_sides(sides: Sequence[SideReading], origin, first, settle_text, running,
                       stopped) -> Classification | None:
    """Kind from the first motions either side of an in-line asset (:mod:`detectors.sides`).

    Only sides that moved apart count: one way upstream, the other way downstream is the
    signature of the asset itself. A pump station's signature is not taken when its run
    signal says the opposite (running throughout for a trip, stopped for a start).
    """
    for r in sides:
        if not r.opposite:
            continue
        if r.kind is None or r.kind == "valve_opening":
            what = "a valve opening" if r.kind == "valve_opening" else "an operation of it"
            return Classification("unclassified", f"{first}; {r.reason}: {what}, not a closure, trip, "
                                  f"start or burst; {settle_text}", origin.sensor_id, r.node_id, r.reason)
        if (r.kind == "pump_trip" and r.node_id in running) or (r.kind == "pump_start" and r.node_id in stopped):
            continue
        return Classification(r.kind, f"{first}; {r.reason}; {settle_text}", origin.sensor_id, r.node_id, r.reason)
    return None
