"""Which sensor pairs of an event measure a wave speed, and the front windows to cut for them.

A pair (A, B) measures the wave speed over the path A -> B only when the front passes A on
its way from the source to B: A lies on the path from the source to B. When the source lies
between the sensors, each sensor sees its own front from the source and the delay is a
difference of two unrelated distances ("faster than sound" estimates). :func:`pair_order`
tests this on the pipe graph; a pair that straddles a junction on the way still measures the
mean speed of its legs, which is what the calibration solves pipe by pipe.

The front windows must hold the first front only: a reflection from a node beyond the sensor
(a junction, a dead end, the far end of a branch) arriving inside the window changes the
shape of the front at one sensor and not the other, and biases the correlation.
:func:`reflection_free_time_s` gives, from the layout and its prior wave speeds, how long
after the direct front the first reflected wave can reach a sensor.

Points on the network are ``(pipe_id, offset_m)``: chainage from the pipe's ``from_node``.
"""

from __future__ import annotations

import math

import numpy as np

from models.layout import SystemLayout

from .fronts import locate_front
from .traces import GAP_FACTOR

__all__ = [
    "node_point",
    "sensor_point",
    "distance_between_points_m",
    "travel_time_between_points_s",
    "event_source_point",
    "pair_order",
    "reflection_free_time_s",
    "cut_pair_windows",
    "resample_around",
]

Point = tuple[str, float]


def node_point(layout: SystemLayout, node_id: str) -> Point:
    """A node as a point on one of its pipes."""
    for pipe in layout.pipes:
        if pipe.from_node == node_id:
            return pipe.id, 0.0
        if pipe.to_node == node_id:
            return pipe.id, pipe.length_m
    raise ValueError(f"node {node_id!r} is not the end of any pipe of system {layout.system_id!r}")


def sensor_point(layout: SystemLayout, sensor_id: str) -> Point:
    """A sensor's position as a point."""
    site = layout.sensor(sensor_id)
    return site.pipe_id, site.offset_m


def distance_between_points_m(layout: SystemLayout, p: Point, q: Point) -> float:
    """Shortest distance along the pipes [m]; ``inf`` when not connected."""
    legs = layout.path_between_points(p[0], p[1], q[0], q[1])
    return math.inf if legs is None else float(sum(leg.length_m for leg in legs))


def travel_time_between_points_s(layout: SystemLayout, p: Point, q: Point,
                                 default_wave_speed_m_s: float = 1000.0) -> float:
    """Travel time along the shortest path with each pipe's wave speed [s]."""
    legs = layout.path_between_points(p[0], p[1], q[0], q[1])
    return math.inf if legs is None else layout.travel_time_s(legs, default_wave_speed_m_s)


def pair_order(layout: SystemLayout, source: Point, sensor_1: str, sensor_2: str,
               tolerance_m: float = 10.0) -> tuple[str, str] | None:
    """``(A, B)`` with A on the path from the source to B, or None (source between them).

    Notes
    -----
    A lies on the shortest path from S to B when ``d(S, A) + d(A, B) <= d(S, B) +
    tolerance`` (the triangle equality on the pipe graph; common practice). The tolerance
    [m] allows for the precision of a located source point.
    """
    p1, p2 = sensor_point(layout, sensor_1), sensor_point(layout, sensor_2)
    d1 = distance_between_points_m(layout, source, p1)
    d2 = distance_between_points_m(layout, source, p2)
    d12 = distance_between_points_m(layout, p1, p2)
    if not all(math.isfinite(d) for d in (d1, d2, d12)):
        return None
    if d1 <= d2 and d1 + d12 <= d2 + tolerance_m:
        return sensor_1, sensor_2
    if d2 < d1 and d2 + d12 <= d1 + tolerance_m:
        return sensor_2, sensor_1
    return None


def event_source_point(
    layout,
    observations,
    *,
    source_node: str | None = None,
    source: Point | None = None,
    default_wave_speed_m_s: float = 1000.0,
) -> tuple[Point | None, str]:
    """Where the event's front came from, as a point, and how that was found.

    In order: the located point ``source`` (pipe id, chainage [m]); the ``source_node`` the
    event was attributed to; a fit of the synchronised sensors' onsets to a point of the
    pipes (:func:`detectors.locate.locate_source`) where three or more synchronised sensors
    fix it (two onsets with an unknown wave-speed factor do not); the first-arrival
    synchronised sensor. ``(None, reason)`` when none of these is available.
    """
    if source is not None:
        pipe_id, offset_m = source
        length = layout.pipe(pipe_id).length_m
        if not 0.0 <= offset_m <= length:
            raise ValueError(f"source offset_m={offset_m!r} lies outside pipe {pipe_id!r} "
                             f"(0 to {length:g} m); give the chainage from its from_node")
        return (pipe_id, float(offset_m)), f"source on {pipe_id} at {offset_m:.0f} m"
    if source_node is not None:
        return node_point(layout, source_node), f"source at {source_node}"
    timed = [o for o in observations if layout.sensor(o.sensor_id).clock_synchronised]
    if len(timed) >= 3:
        from detectors.locate import locate_source

        t0 = min(o.onset_time_ns for o in timed)
        try:
            fit = locate_source(
                layout, {o.sensor_id: (o.onset_time_ns - t0) * 1e-9 for o in timed},
                {o.sensor_id: float(getattr(o, "onset_uncertainty_s", 0.01) or 0.01)
                 for o in timed}, default_wave_speed_m_s=default_wave_speed_m_s)
        except ValueError:
            fit = None
        if fit is not None and fit.node_id is not None:
            return node_point(layout, fit.node_id), f"source at {fit.node_id} (onset fit)"
        if fit is not None and fit.pipe_id is not None and fit.misfit <= 1.0:
            return ((fit.pipe_id, float(fit.offset_m)),
                    f"source on {fit.pipe_id} at {fit.offset_m:.0f} m (onset fit)")
    if timed:
        first = min(timed, key=lambda o: o.onset_time_ns)
        return sensor_point(layout, first.sensor_id), f"source near {first.sensor_id} (first arrival)"
    return None, "no synchronised sensor"


def reflection_free_time_s(layout: SystemLayout, source: Point, sensor_id: str,
                           default_wave_speed_m_s: float = 1000.0) -> float:
    """Time after the direct front until a reflected wave can reach a sensor [s].

    Notes
    -----
    Every node reflects part of a wave (a junction, a change of pipe, a reservoir, a closed
    valve; Wylie & Streeter 1993, sec. 3.6). A node N off the direct path S -> X sends its
    reflection ``T(S, N) + T(N, X) - T(S, X)`` after the direct front. A node on the direct
    path reflects back toward the source; that wave must be reflected again, at a node M
    between the source and N or at the source itself, so it arrives ``2 T(M, N)`` late.
    The smallest of these, with the layout's prior wave speeds, is returned (``inf`` for a
    layout without reflecting nodes in reach): the earliest of
    :func:`detectors.reflections.sensor_reflections`, whatever its strength.
    """
    from .reflections import sensor_reflections  # it builds on this module's points

    found = sensor_reflections(layout, source, sensor_id, default_wave_speed_m_s)
    return found[0].delay_s if found else math.inf


def resample_around(trace, sample_interval_s: float, centre_ns: int, reach_s: float):
    """The samples of ``trace`` within ``reach_s`` of ``centre_ns`` at a longer sample interval.

    Two loggers at different rates (a 200 Hz and a 50 Hz logger on one main) can only be
    correlated on a common time step: the faster record is brought to the slower one's.
    It is low-passed first with a zero-phase Butterworth filter (order 4, run forward and
    backward: no delay, so the front keeps its time) at 80 % of the slower Nyquist
    frequency against aliasing, then sampled linearly on the new grid, which starts at
    the first kept sample. A stretch holding a gap (NaN) is only interpolated, not
    filtered (a filter would spread the gap); the window cutter then refuses a gap that
    falls inside a front window. Clipped marks carry over to the new samples they touch.

    Returns
    -------
    SensorTrace
        The resampled stretch (same sensor, quantity and UTC time base).
    """
    from scipy import signal

    from .traces import SensorTrace

    lo = trace.index_at_time(centre_ns - int(reach_s * 1e9))
    hi = trace.index_at_time(centre_ns + int(reach_s * 1e9) + 1)
    times, values = trace.times_ns[lo:hi], trace.values[lo:hi]
    step_ns = int(round(sample_interval_s * 1e9))
    if times.size < 2 or step_ns <= 0:
        return SensorTrace(trace.sensor_id, trace.quantity, times, values,
                           None if trace.clipped is None else trace.clipped[lo:hi])
    cutoff = 0.8 * trace.sample_interval_s / sample_interval_s  # of the faster Nyquist
    jumps = np.diff(times) > GAP_FACTOR * trace.sample_interval_s * 1e9  # gaps in time
    if (np.all(np.isfinite(values)) and not jumps.any() and values.size > 30
            and 0.0 < cutoff < 1.0):
        sos = signal.butter(4, cutoff, output="sos")
        values = signal.sosfiltfilt(sos, values)
    grid = np.arange(times[0], times[-1] + 1, step_ns, dtype=np.int64)
    offsets = (times - times[0]).astype(np.float64)
    new_values = np.interp((grid - times[0]).astype(np.float64), offsets, values)
    if jumps.any():  # never bridge a gap in time: new samples inside one are gaps
        right = np.clip(np.searchsorted(times, grid, side="right"), 1, times.size - 1)
        new_values[jumps[right - 1] & (grid > times[right - 1])] = np.nan
    clipped = None
    if trace.clipped is not None:
        clipped = np.interp((grid - times[0]).astype(np.float64), offsets,
                            trace.clipped[lo:hi].astype(np.float64)) > 0.0
    return SensorTrace(trace.sensor_id, trace.quantity, grid, new_values, clipped)


def _front_window(trace, start: int, stop: int):
    """``(values, start_ns)`` of trace samples ``[start, stop)``, or a reason string."""
    if start < 0 or stop > len(trace) or stop - start < 16:
        return f"sensor {trace.sensor_id}: the trace does not cover the front window"
    values = trace.values[start:stop]
    if not np.all(np.isfinite(values)):
        return f"sensor {trace.sensor_id}: gap in the front window"
    if trace.has_clipping(start, stop):
        return f"sensor {trace.sensor_id}: clipped samples in the front window"
    steps = np.diff(trace.times_ns[start:stop])
    if steps.max() > 1.5 * steps.min():
        return f"sensor {trace.sensor_id}: irregular sampling in the front window"
    return values, int(trace.times_ns[start])


def cut_pair_windows(trace_a, trace_b, onset_a_ns: int, onset_b_ns: int, *, coarse_s: float,
                     free_s: tuple[float, float] = (math.inf, math.inf), guard: float = 0.8,
                     strong=(None, None)):
    """Equally long front windows, one per sensor, each ending before the first reflection.

    Parameters
    ----------
    trace_a, trace_b : SensorTrace
    onset_a_ns, onset_b_ns : int
        The detector's onsets [ns since the epoch, UTC].
    coarse_s : float
        Half-width of the first window around each onset in which the front is located [s].
    free_s : tuple of float
        Reflection-free time after each sensor's front (:func:`reflection_free_time_s`) [s].
    guard : float
        Fraction of ``free_s`` the windows may use after the onset [-] (prior wave speeds may
        be low, onsets late).
    strong : tuple of (Reflection or None)
        For each sensor, the earliest reflection strong enough to reshape its front
        (:func:`detectors.reflections.sensor_reflections`, filtered by the caller), or None.

    Returns
    -------
    tuple or str
        ``(values_a, values_b, sample_interval_s, offset_b_s, max_lag_s, reflection_s,
        early_reflection)``, or a reason why the windows cannot be cut. ``reflection_s`` is
        the standard uncertainty of the delay from a reflection that arrives inside a front
        [s], 0 when none does; ``early_reflection`` says, for the correlation estimate, which
        sensor's front a strong reflection (``strong``) reaches before its steepest slope,
        naming the node, its coefficient and the timing (empty when none).

    Notes
    -----
    Traces at different sample intervals are first brought to the longer interval around
    their onsets (:func:`resample_around`). Each window is placed on its own front's steepest slope (found by
    :func:`detectors.fronts.locate_front` inside ``[onset - coarse/4, onset + coarse/2]``;
    a front whose steepest slope moves when the search reaches ``3 coarse / 4`` is still
    steepening and is refused) and reaches 4 front half-widths (at least 32 samples) past it, but no further than
    ``guard * free`` after the onset; it never cuts into the front itself (the front's
    half-maximum region and 8 samples beyond). A reflection arriving after the steepest
    slope changes only the front's tail, which the shape-change term of the delay
    uncertainty measures. One arriving ``t_r`` after the onset but before the steepest
    slope adds a copy of the whole front ``R`` times as large (``|R| <= 1``); for a
    reflector like a closed end (``R`` near 1) the front's centre moves by up to ``t_r / 2``,
    taken as a uniform bound (``t_r / (2 sqrt 3)``, JCGM 100:2008 sec. 4.3.7, from memory).
    Such a front is not used for a correlation delay at all (``early_reflection``) when the
    reflection is strong (``strong``; a weak one, ``|R|`` small, barely moves it): the
    correlation aligns the whole front, which the reflection has reshaped at one sensor
    only, and its error follows the reflection, not the noise; the arrival (onset) comes
    before the reflection and still carries a delay (common practice).
    """
    if not math.isclose(trace_a.sample_interval_s, trace_b.sample_interval_s, rel_tol=1e-6):
        slow = max(trace_a.sample_interval_s, trace_b.sample_interval_s)
        reach_s = 2.0 * max(32 * slow, coarse_s) + 16 * slow
        if trace_a.sample_interval_s < slow:
            trace_a = resample_around(trace_a, slow, onset_a_ns, reach_s)
        else:
            trace_b = resample_around(trace_b, slow, onset_b_ns, reach_s)
    dt = trace_a.sample_interval_s
    coarse = max(32, int(round(coarse_s / dt)))
    centres, margins, before, after, inside, early = [], [], [], [], [], []
    for trace, onset, free, reflection in ((trace_a, onset_a_ns, free_s[0], strong[0]),
                                            (trace_b, onset_b_ns, free_s[1], strong[1])):
        onset_index = trace.index_at_time(onset)
        start, stop = max(0, onset_index - coarse), min(len(trace), onset_index + coarse + 1)
        window = _front_window(trace, start, stop)
        if isinstance(window, str):
            return window
        values, _ = window
        rel = onset_index - start
        try:
            shape = locate_front(values, (rel - coarse // 4, rel + coarse // 2))
            wider = locate_front(values, (rel - coarse // 4, rel + 3 * coarse // 4))
        except ValueError as error:
            return f"sensor {trace.sensor_id}: {error}"
        if abs(wider.steepest_index - shape.steepest_index) > max(2, shape.margin_samples // 2):
            return (f"sensor {trace.sensor_id}: the front is still steepening {coarse_s / 2:g} s "
                    "after the onset; too slow a front for an arrival-time delay")
        centre = start + shape.steepest_index
        front_end = centre + shape.margin_samples + 8
        free_end = onset_index + (int(math.floor(guard * free / dt)) if math.isfinite(free)
                                  else coarse)
        if free_end < centre:
            inside.append(free)
        if (reflection is not None and onset_index
                + int(math.floor(guard * reflection.delay_s / dt)) < centre):
            early.append(f"{trace.sensor_id} as early as {guard * reflection.delay_s:.3g} s "
                         f"after its arrival (from {reflection.node_id}, {reflection.via}, "
                         f"coefficient {reflection.coefficient:+.2f}), before its "
                         f"front's steepest slope at {(centre - onset_index) * dt:.3g} s")
        centres.append(centre)
        margins.append(shape.margin_samples)
        before.append(centre)
        after.append(min(len(trace) - 1, max(free_end, front_end)) - centre)
    post = int(min(np.clip(4 * max(margins), 32, coarse), min(after)))
    pre = int(min(max(post, 24), min(before)))
    if post < 8 or pre < 8:
        return "the front windows are too short: the front lies at the edge of the usable data"
    windows = [_front_window(t, c - pre, c + post + 1)
               for t, c in zip((trace_a, trace_b), centres)]
    for window in windows:
        if isinstance(window, str):
            return window
    (values_a, start_a), (values_b, start_b) = windows
    reflection_s = float(np.hypot(*(inside + [0.0, 0.0])[:2])) / (2.0 * math.sqrt(3.0))
    early_reflection = ("" if not early else
                        "a strong reflection (by the layout's travel times and reflection "
                        "coefficients) reaches " + " and ".join(early) + ": the "
                        "correlation would align a front the reflection has reshaped at one "
                        "sensor only; the onset estimate is judged on its own")
    return (values_a, values_b, dt, (start_b - start_a) * 1e-9, min(pre, post) * dt / 2,
            reflection_s, early_reflection)
