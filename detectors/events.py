"""Surge events in a window of one system's sensors: trigger, associate, pick, measure, classify.

:func:`detect_events` is what the service calls, once per system and window:

1. per pressure sensor, the cheap compiled pass of :mod:`detectors.triggers` over every
   gap-free segment finds *episodes*;
2. each episode is analysed in detail: onset (:func:`detectors.onsets.pick_onset`),
   baseline and noise from the quiet lead-in, amplitude on a despiked, lightly smoothed
   copy (so single-sample spikes and zero-mean noise bursts do not count), and the rate
   test that tells a surge from a demand swing;
3. arrivals on different sensors are one event when every pair's onset difference is at
   most the travel time along the pipes at the slowest plausible wave speed, plus the
   onsets' uncertainties, a slack, and a clock tolerance for unsynchronised channels;
   one-sensor transients inside a ringing event or at a flat line's ends are folded in
   (:mod:`detectors.associate`);
4. each event is measured (:mod:`detectors.metrics`), classified
   (:mod:`detectors.classify`) and ranked by severity against the pipe's limits.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from models.layout import SystemLayout

from .associate import absorb_later_phases, associate_arrivals
from .classify import Classification, classify_event, scada_context
from .metrics import SensorObservation, _despike, observe_event
from .onsets import pick_onset
from .params import DetectionParams
from .small_stats import median, median_abs_deviation
from .traces import SensorTrace, contiguous_segments
from .triggers import MAD_TO_SIGMA, Episode, SensorScreen, screen_segment

__all__ = [
    "DetectedEvent",
    "SensorObservation",
    "Arrival",
    "detect_events",
    "find_arrivals",
    "event_severity",
    "EVENT_KINDS",
]

EVENT_KINDS = ("pump_trip", "pump_start", "valve_closure", "burst_suspected", "sensor_fault", "unclassified")


@dataclass(frozen=True)
class DetectedEvent:
    """One surge event across the sensors of a system.

    ``source_node`` is the pump station or valve the front came from, where timing (or one
    sensor beside it) pins it; ``source_pipe_id`` and ``source_offset_m`` (chainage from
    the pipe's ``from_node`` [m]) the point of the pipes where timing located a source
    away from every asset; None otherwise.
    """

    kind: str
    severity: str
    start_time_ns: int
    end_time_ns: int
    origin_sensor: str
    reason: str
    observations: tuple[SensorObservation, ...]
    source_node: str | None = None
    source_description: str = ""
    confirmed_by_scada: bool = False
    source_pipe_id: str | None = None
    source_offset_m: float | None = None
    system_id: str = ""


@dataclass(frozen=True)
class Arrival:
    """A confirmed transient on one sensor: what association works on."""

    sensor_id: str
    onset_time_ns: int
    uncertainty_s: float
    end_time_ns: int
    observation: SensorObservation
    clock_synchronised: bool = True
    flat_line: bool = False


def _front_index(trace, screen: SensorScreen, ep: Episode, seg, dt, params) -> int | None:
    """First sample of the episode where the despiked, smoothed signal changes like a surge.

    The cheap pass merges marks within ``merge_gap_s``, so an episode may open on a spike
    or a noise burst some seconds before the front; the change over the rate window on a
    despiked copy (Hampel filter) and averaged over that window finds the front itself.
    Returns a trace index, or None when no surge-like change is there (a slow swing).
    """
    lag = max(1, screen.rate_lag)
    end = min(seg[1], ep.stop + lag)
    start = max(seg[0], ep.start - lag)
    noise = _episode_noise(trace, screen, ep, seg, dt, params)
    body = _despike(trace.values[start:end], params.spike_max_samples, noise, dt >= params.slow_interval_s)
    smooth = _moving_mean(body, lag, complete=True)  # a change never spans a gap
    if smooth.size <= lag:
        return None
    change = np.abs(smooth[lag:] - smooth[:-lag])
    needed = min(params.min_rate_pa_s * lag * dt, params.min_amplitude_pa)
    needed = max(needed, params.noise_multiple * noise * math.sqrt(2.0 / lag))
    hits = np.flatnonzero(change >= needed)
    if hits.size == 0:
        return None
    return int(start + hits[0] + lag)


def _episode_noise(trace, screen: SensorScreen, ep: Episode, seg, dt, params) -> float:
    """Noise deviation of an episode [Pa]: the cheap pass's block estimate, and for a slow
    logger no more than the noise of the quiet lead-in before the episode.

    The block estimate smooths over ``noise_blocks`` blocks; at one sample a second a block
    holds a handful of samples and a long transient fills most of the blocks around it, so
    its noise is the transient's swing. The lead-in's noise is the robust deviation from
    the MAD of the first difference (Hampel 1974), over ``pre_event_s`` before the episode.
    """
    block = max(screen.noise_at(ep.start), 1e-6)
    if dt < params.slow_interval_s:
        return block
    lead = trace.values[max(seg[0], ep.start - max(8, int(round(params.pre_event_s / dt)))) : ep.start]
    lead = lead[np.isfinite(lead)]
    if lead.size < 8:
        return block
    lead_noise = MAD_TO_SIGMA * median_abs_deviation(np.diff(lead)) / math.sqrt(2.0)
    return min(block, lead_noise) if lead_noise > 0 else block


def _arrival_from_episode(trace, screen: SensorScreen, ep: Episode, seg, dt, site, pipe, params) -> Arrival | None:
    seg_start, seg_stop = seg
    lag = screen.rate_lag
    front = _front_index(trace, screen, ep, seg, dt, params)
    if front is None:
        return None  # a slow swing (demand, drift) or a lone spike, not a surge
    quiet_n = max(8, int(round(params.pre_event_s / dt)))
    pick_n = max(8, int(round(params.pick_window_s / dt)))
    w0 = max(seg_start, front - lag - quiet_n)
    w1 = min(seg_stop, front + lag + pick_n)
    x = trace.values[w0:w1]
    finite = np.isfinite(x)
    rel = front - w0
    if not finite[max(rel - lag, 0) : rel + 1].any() or np.count_nonzero(finite) < 12:
        return None
    # gap-free run around the front
    bad = np.flatnonzero(~finite)
    lo = int(bad[bad < rel].max()) + 1 if np.any(bad < rel) else 0
    hi = int(bad[bad > rel].min()) if np.any(bad > rel) else x.size
    slow = dt >= params.slow_interval_s
    noise = _episode_noise(trace, screen, ep, seg, dt, params) if slow else max(screen.noise_at(front), 1e-6)
    x = _despike(x[lo:hi], params.spike_max_samples, noise, slow)
    w0 += lo
    if x.size < 12:
        return None
    quiet = int(np.clip(front - 2 * lag - w0, 0, x.size - 1))
    baseline = median(x[: max(quiet, 1)])
    # amplitude on a despiked, smoothed copy: spikes and zero-mean noise bursts do not count
    end = min(seg_stop, max(ep.stop, front) + max(lag, int(round(params.merge_gap_s / dt))),
              front + int(params.max_event_s / dt))
    body = _despike(trace.values[front - lag:end], params.spike_max_samples, noise, slow)
    smooth = _moving_mean(body, lag)
    excursion = float(np.nanmax(np.abs(smooth - baseline))) if np.any(np.isfinite(smooth)) else 0.0
    if not excursion >= params.min_amplitude_pa:
        return None
    try:
        onset_index, unc_s = _two_stage_pick(x, dt, quiet, lag, latest=front + lag - w0,
                                             drift_sigmas=params.cusum_drift_sigmas)
        onset_index += w0
    except ValueError:
        onset_index, unc_s = float(front - lag), lag * dt
    if dt >= params.slow_interval_s:
        unc_s = max(unc_s, dt)
    a0 = max(seg_start, int(math.floor(onset_index)) - 2)
    onset_ns = trace.time_at_index_ns(onset_index)
    obs = observe_event(
        trace.sensor_id, trace.times_ns[a0:end], trace.values[a0:end],
        None if trace.clipped is None else trace.clipped[a0:end],
        onset_index - a0, onset_ns, unc_s, baseline, noise, dt, params,
        range_max_pa=site.range_max_pa,
        allowable_pa=pipe.allowable_pressure_pa, minimum_pa=pipe.minimum_pressure_pa,
        clock_synchronised=site.clock_synchronised,
        lead_in_pa=trace.values[w0:a0] if slow else None,
    )
    return Arrival(trace.sensor_id, onset_ns, unc_s, int(trace.times_ns[end - 1]), obs, site.clock_synchronised)


def _two_stage_pick(x: np.ndarray, dt: float, quiet: int, lag: int, latest: int,
                    drift_sigmas: float) -> tuple[float, float]:
    """AIC pick on the window, then the detrended, refined pick with the quiet part before it.

    ``latest`` is the index by which the front is certainly under way (the rate test had
    fired); a pick after it has locked on a later, sharper part of the transient, so the
    window is cut there and picked again. Returns the fractional onset index into ``x``
    and its uncertainty [s].
    """
    first = pick_onset(x, dt, quiet_samples=quiet if quiet >= 4 else None, cusum_drift_sigmas=drift_sigmas)
    cut = latest + max(lag, 4)
    if first.aic_index > latest and quiet + 8 <= cut < x.size:
        x = x[:cut]
        first = pick_onset(x, dt, quiet_samples=quiet if quiet >= 4 else None, cusum_drift_sigmas=drift_sigmas)
    quiet2 = int(min(quiet, first.aic_index - max(2, lag // 2)))
    if quiet2 >= 4 and quiet2 != quiet:
        first = pick_onset(x, dt, quiet_samples=quiet2, cusum_drift_sigmas=drift_sigmas)
    return first.index, first.uncertainty_s


def _moving_mean(x: np.ndarray, width: int, complete: bool = False) -> np.ndarray:
    """Mean over ``width`` samples ("valid" span); NaN where fewer than half (``complete``:
    not all) of them are valid."""
    if width <= 1 or x.size < width:
        return x
    filled = np.nan_to_num(x, nan=0.0)
    valid = np.isfinite(x).astype(np.float64)
    kernel = np.ones(width)
    s = np.convolve(filled, kernel, "valid")
    c = np.convolve(valid, kernel, "valid")
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(c >= (width if complete else width / 2), s / np.maximum(c, 1), np.nan)


def find_arrivals(trace: SensorTrace, layout: SystemLayout, params: DetectionParams) -> list[Arrival]:
    """Confirmed transients on one pressure channel, in time order (flat lines included)."""
    if trace.quantity != "pressure" or len(trace) < 16:
        return []
    site = layout.sensor(trace.sensor_id)
    pipe = layout.pipe(site.pipe_id)
    dt = trace.sample_interval_s
    arrivals: list[Arrival] = []
    for seg in contiguous_segments(trace.times_ns, dt):
        if seg[1] - seg[0] < 16:
            continue
        screen = screen_segment(trace.values[seg[0] : seg[1]], dt, params, offset=seg[0])
        for ep in screen.episodes:
            if ep.flat_line:
                arrivals.append(_flat_line_arrival(trace, ep, dt, site, pipe))
                continue
            arrival = _arrival_from_episode(trace, screen, ep, seg, dt, site, pipe, params)
            if arrival is not None:
                arrivals.append(arrival)
    return sorted(arrivals, key=lambda a: a.onset_time_ns)


def _flat_line_arrival(trace, ep: Episode, dt, site, pipe) -> Arrival:
    t0, t1 = int(trace.times_ns[ep.start]), int(trace.times_ns[ep.stop - 1])
    level = float(np.nanmedian(trace.values[ep.start : ep.stop]))
    obs = SensorObservation(
        sensor_id=trace.sensor_id, onset_time_ns=t0, onset_uncertainty_s=dt, baseline_pa=level,
        max_pa=level, min_pa=level, max_rate_pa_s=0.0, first_front_pa=0.0, settle_duration_s=None,
        dominant_period_s=None, damping_ratio=None, clipped=False, sample_interval_s=dt,
        notes=(f"flat line at {level / 1e3:.1f} kPa for {(t1 - t0) * 1e-9:.0f} s",),
        final_level_pa=level, clock_synchronised=site.clock_synchronised,
    )
    return Arrival(trace.sensor_id, t0, dt, t1, obs, site.clock_synchronised, flat_line=True)


def event_severity(observations, layout: SystemLayout, params: DetectionParams) -> str:
    """``critical`` when a pressure is outside its pipe's limits, ``warning`` within the margin.

    The margin is ``severity_margin_fraction`` of the allowable pressure for the maximum,
    and of ``max(|minimum|, 100 kPa)`` for the minimum.
    """
    rank = 0
    for o in observations:
        pipe = layout.pipe_for_sensor(o.sensor_id)
        m = params.severity_margin_fraction
        if pipe.allowable_pressure_pa is not None:
            if o.max_pa > pipe.allowable_pressure_pa:
                rank = 2
            elif o.max_pa > pipe.allowable_pressure_pa * (1.0 - m):
                rank = max(rank, 1)
        if pipe.minimum_pressure_pa is not None:
            if o.min_pa < pipe.minimum_pressure_pa:
                rank = 2
            elif o.min_pa < pipe.minimum_pressure_pa + m * max(abs(pipe.minimum_pressure_pa), 100e3):
                rank = max(rank, 1)
    return ("info", "warning", "critical")[rank]


def _quiet_sensors(group, traces, layout, params) -> list[str]:
    """Pressure sensors with data over the event that showed not even a tenth of it."""
    seen = {a.sensor_id for a in group}
    first = group[0]
    amplitude = first.observation.excursion_pa
    quiet = []
    for sid, trace in traces.items():
        if sid in seen or trace.quantity != "pressure":
            continue
        travel = layout.distance_between_sensors_m(first.sensor_id, sid) / params.wave_speed_min_m_s
        if not math.isfinite(travel):
            continue
        t0 = first.onset_time_ns - int(params.pre_event_s * 1e9)
        t1 = first.onset_time_ns + int((travel + params.association_slack_s + 5.0) * 1e9)
        i0, i1 = trace.index_at_time(t0), trace.index_at_time(t1)
        x = trace.values[i0:i1]
        x = x[np.isfinite(x)]
        if x.size < 8:
            continue
        base = median(x[: max(2, x.size // 10)])
        spread = np.percentile(np.abs(x - base), 99)
        if spread < 0.1 * amplitude:
            quiet.append(sid)
    return quiet


def _event_from_group(group, traces, layout, params) -> DetectedEvent:
    observations = tuple(a.observation for a in group)
    if group[0].flat_line:
        a = group[0]
        cls = Classification("sensor_fault", f"{a.sensor_id}: {a.observation.notes[0]} after showing noise", a.sensor_id)
        return DetectedEvent("sensor_fault", "info", a.onset_time_ns, a.end_time_ns, a.sensor_id, cls.reason, observations, system_id=layout.system_id)
    onset_ns = min(a.onset_time_ns for a in group if a.clock_synchronised) if any(a.clock_synchronised for a in group) else group[0].onset_time_ns
    context = scada_context(traces, layout, onset_ns, params)
    quiet = _quiet_sensors(group, traces, layout, params) if len(group) == 1 else []
    cls = classify_event(observations, layout, params, context, quiet)
    origin = next(a for a in group if a.sensor_id == cls.origin_sensor)
    end_ns = max(
        a.onset_time_ns + int(1e9 * a.observation.settle_duration_s) if a.observation.settle_duration_s is not None else a.end_time_ns
        for a in group
    )
    severity = event_severity(observations, layout, params)
    return DetectedEvent(
        kind=cls.kind, severity=severity, start_time_ns=origin.onset_time_ns, end_time_ns=max(end_ns, origin.onset_time_ns),
        origin_sensor=cls.origin_sensor, reason=cls.reason, observations=observations,
        source_node=cls.source_node, source_description=cls.source_description,
        source_pipe_id=cls.source_pipe_id, source_offset_m=cls.source_offset_m,
        confirmed_by_scada=cls.confirmed_by_scada, system_id=layout.system_id,
    )


def detect_events(traces: Mapping[str, SensorTrace], layout: SystemLayout, params: DetectionParams,
                  map_sensors: Callable = map) -> list[DetectedEvent]:
    """Find, associate, measure and classify the surge events in one window of a system.

    Parameters
    ----------
    traces : mapping of sensor id to SensorTrace
        Every channel of the window: pressure channels are screened; pump status, flow and
        valve position channels give context.
    layout : SystemLayout
    params : DetectionParams
    map_sensors : callable
        ``map``-like (function, iterable) -> results in order, for the per-sensor screening;
        a thread pool's ``map`` screens sensors side by side (the compiled passes release
        the GIL). The result does not depend on it.

    Returns
    -------
    list of DetectedEvent
        In time order of their start (the onset at the first sensor).

    Raises
    ------
    ValueError
        A trace whose key and sensor id differ, or whose sensor the layout does not know.
    """
    known = {s.id for s in layout.sensors}
    for key, trace in traces.items():
        if key != trace.sensor_id:
            raise ValueError(f"traces[{key!r}] holds sensor {trace.sensor_id!r}; key the mapping by sensor id")
        if key not in known:
            raise ValueError(f"sensor {key!r} is not in system {layout.system_id!r}; known: {sorted(known)}")
    arrivals: list[Arrival] = []
    for found in map_sensors(lambda trace: find_arrivals(trace, layout, params), traces.values()):
        arrivals.extend(found)
    groups = associate_arrivals(arrivals, layout, params)
    groups, absorbed = absorb_later_phases(groups, params)
    events = []
    for i, g in enumerate(groups):
        event = _event_from_group(g, traces, layout, params)
        if absorbed.get(i):
            event = _with_late_observations(event, absorbed[i])
        events.append(event)
    return sorted(events, key=lambda e: e.start_time_ns)


def _with_late_observations(event: DetectedEvent, late: list[Arrival]) -> DetectedEvent:
    """Add the observations of sensors that saw only a later phase (not used for timing)."""
    note = "first seen after the front had passed (data gap or later phase): onset is not an arrival time"
    extra = tuple(
        dataclasses.replace(a.observation, notes=a.observation.notes + (note,), clock_synchronised=False)
        for a in late
    )
    end = max([event.end_time_ns] + [a.end_time_ns for a in late])
    return dataclasses.replace(event, observations=event.observations + extra, end_time_ns=end)
