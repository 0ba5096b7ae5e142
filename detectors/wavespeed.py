"""Wave speed of a pipe from the delay of a surge front between two sensors.

For every pair of pressure sensors on a common flow path, the front's delay is measured twice,
by generalised cross-correlation and by the difference of the front arrivals
(:mod:`detectors.delays`); each gives ``wave speed = distance along the pipes / delay``. A path
through several pipes gives the path's mean speed; :func:`detectors.calibration.solve_pipe_wave_speeds`
resolves it pipe by pipe. Every estimate is kept; one that fails a plausibility rule has
``accepted`` false and a reason (:func:`judge_pair`).

Sign convention: ``delay_s`` is positive when the wave reaches ``sensor_b`` later; pairs are
ordered so that A sees the front first.

>>> estimate = wave_speed_estimate(pipe_id="P1", sensor_a="A", sensor_b="B", distance_m=600.0,
...                                delay_s=0.5, delay_uncertainty_s=0.001, method="onset")
>>> estimate.wave_speed_m_s, round(estimate.uncertainty_m_s, 2)
(1200.0, 2.4)

The period method (:func:`period_wave_speed`) reads the wave speed from the dominant period
of the oscillation of a single pipe between two clean boundaries.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import curve_fit

from detectors.delays import estimate_front_delay, estimate_onset_delay, locate_front
from models.layout import PathLeg

__all__ = [
    "WaveSpeedEstimate",
    "wave_speed_estimate",
    "plausibility_reasons",
    "judge_pair",
    "estimate_pair_wave_speeds",
    "estimate_event_wave_speeds",
    "PERIOD_BOUNDARIES",
    "PeriodEstimate",
    "dominant_period_s",
    "period_wave_speed",
]


@dataclass(frozen=True)
class WaveSpeedEstimate:
    """One wave-speed estimate from one sensor pair and one method.

    Maps onto the ``wave_speed_estimates`` table (the service adds ``event_id``).

    Attributes
    ----------
    pipe_id : str
        The pipe, or the pipes of a multi-pipe path joined by ``+`` in travel order.
    sensor_a, sensor_b : str
        A sees the front first.
    distance_m : float
        Distance along the pipes from A to B [m].
    delay_s : float
        Positive when the wave reaches B later [s].
    wave_speed_m_s : float
        ``distance_m / delay_s`` [m/s]; the path's mean speed for several pipes.
    uncertainty_m_s : float
        Standard uncertainty (k = 1) [m/s]; the 95 % interval is +-1.96 of it.
    method : str
        ``gcc_<weighting>`` or ``onset``.
    correlation_peak : float
        Normalised correlation at the peak [-]; NaN for ``onset``.
    snr_db : float
        Lower of the two fronts' signal-to-noise ratios [dB].
    accepted : bool
    reason : str
        Why it was not accepted (``; ``-separated), empty when accepted.
    delay_uncertainty_s : float
        Standard uncertainty of the delay, clock included [s].
    legs : tuple of PathLeg
        The path, pipe by pipe.
    """

    pipe_id: str
    sensor_a: str
    sensor_b: str
    distance_m: float
    delay_s: float
    wave_speed_m_s: float
    uncertainty_m_s: float
    method: str
    correlation_peak: float = float("nan")
    snr_db: float = float("nan")
    accepted: bool = True
    reason: str = ""
    delay_uncertainty_s: float = float("nan")
    legs: tuple[PathLeg, ...] = ()


def wave_speed_estimate(
    *,
    pipe_id: str,
    sensor_a: str,
    sensor_b: str,
    distance_m: float,
    delay_s: float,
    delay_uncertainty_s: float,
    method: str,
    distance_uncertainty_m: float = 0.0,
    correlation_peak: float = float("nan"),
    snr_db: float = float("nan"),
    legs: tuple[PathLeg, ...] = (),
) -> WaveSpeedEstimate:
    """Wave speed and its uncertainty from a distance and a delay.

    Notes
    -----
    ``a = L / tau`` and, by first-order propagation (JCGM 100:2008 eq. 10, from memory),
    ``u(a) / a = sqrt((u(tau) / tau)^2 + (u(L) / L)^2)``. A delay that is not positive gives
    an infinite speed (the plausibility rules then reject it).
    """
    if not distance_m > 0:
        raise ValueError(f"distance_m={distance_m!r} must be > 0: the sensors must be apart")
    if delay_s > 0:
        speed = distance_m / delay_s
        relative = math.hypot(delay_uncertainty_s / delay_s, distance_uncertainty_m / distance_m)
        uncertainty = speed * relative
    else:
        speed, uncertainty = math.inf, math.inf
    return WaveSpeedEstimate(pipe_id, sensor_a, sensor_b, float(distance_m), float(delay_s),
                             float(speed), float(uncertainty), method, float(correlation_peak),
                             float(snr_db), True, "", float(delay_uncertainty_s), tuple(legs))


def plausibility_reasons(
    estimate: WaveSpeedEstimate,
    *,
    max_wave_speed_m_s: float,
    min_wave_speed_m_s: float,
    clocks_synchronised: bool = True,
) -> tuple[str, ...]:
    """Why an estimate cannot be right; empty when it passes.

    Parameters
    ----------
    estimate : WaveSpeedEstimate
    max_wave_speed_m_s : float
        The speed of sound in water at the water temperature [m/s]
        (:func:`models.properties.speed_of_sound_m_s`): no liquid-filled pipe is faster, so a
        faster estimate is a clock or distance problem (Wylie & Streeter 1993, sec. 2.2).
    min_wave_speed_m_s : float
        Floor [m/s], from the service config.
    clocks_synchronised : bool
        False when either sensor's clock is not synchronised.
    """
    reasons = []
    speed = estimate.wave_speed_m_s
    if not clocks_synchronised:
        reasons.append("sensor clocks not synchronised")
    if not np.isfinite(speed) or estimate.delay_s <= 0:
        reasons.append(f"delay {estimate.delay_s:.4g} s is not positive: the source may lie "
                       "between the sensors, or a clock is off")
    elif speed > max_wave_speed_m_s:
        reasons.append(f"{speed:.0f} m/s is faster than sound in water ({max_wave_speed_m_s:.0f}"
                       " m/s): check the clocks, the distance, or a source between the sensors")
    elif speed < min_wave_speed_m_s:
        reasons.append(f"{speed:.0f} m/s is below the floor of {min_wave_speed_m_s:.0f} m/s")
    if not np.isfinite(estimate.uncertainty_m_s):
        reasons.append("uncertainty could not be determined (no usable front)")
    return tuple(reasons)


def judge_pair(
    estimates: tuple[WaveSpeedEstimate, ...],
    *,
    max_wave_speed_m_s: float,
    min_wave_speed_m_s: float,
    clocks_synchronised: bool = True,
    agreement_k: float = 3.0,
) -> tuple[WaveSpeedEstimate, ...]:
    """Apply the plausibility rules and the agreement of the two methods to one pair.

    Two estimates of the same pair disagree when ``|a_1 - a_2| > agreement_k sqrt(u_1^2 +
    u_2^2)``; both are then rejected, since it is unknown which is wrong. The methods share the
    data, so the test is a little strict (their errors are partly correlated), which errs on
    the side of rejecting. Returns new estimates with ``accepted`` and ``reason`` set.
    """
    judged = []
    for estimate in estimates:
        reasons = list(plausibility_reasons(
            estimate, max_wave_speed_m_s=max_wave_speed_m_s,
            min_wave_speed_m_s=min_wave_speed_m_s, clocks_synchronised=clocks_synchronised))
        for other in estimates:
            if other is estimate or other.method == estimate.method:
                continue
            combined = math.hypot(estimate.uncertainty_m_s, other.uncertainty_m_s)
            gap = abs(estimate.wave_speed_m_s - other.wave_speed_m_s)
            if np.isfinite(combined) and gap > agreement_k * combined:
                reasons.append(f"methods disagree: {estimate.method} {estimate.wave_speed_m_s:.0f}"
                               f" vs {other.method} {other.wave_speed_m_s:.0f} m/s, "
                               f"{gap / combined:.1f} combined uncertainties apart")
        judged.append(replace(estimate, accepted=not reasons, reason="; ".join(reasons)))
    return tuple(judged)


def estimate_pair_wave_speeds(
    values_a: np.ndarray,
    values_b: np.ndarray,
    sample_interval_s: float,
    *,
    distance_m: float,
    pipe_id: str,
    sensor_a: str = "A",
    sensor_b: str = "B",
    offset_b_s: float = 0.0,
    legs: tuple[PathLeg, ...] = (),
    distance_uncertainty_m: float = 0.0,
    clock_uncertainty_s: float = 0.0,
    max_lag_s: float | None = None,
    n_bootstrap: int = 100,
    seed: int = 0,
) -> tuple[WaveSpeedEstimate, WaveSpeedEstimate]:
    """GCC and onset wave-speed estimates from two front windows (not yet judged).

    Parameters
    ----------
    values_a, values_b : numpy.ndarray
        Front windows of equal length [Pa].
    sample_interval_s : float
        [s]
    distance_m : float
        Distance along the pipes from A to B [m].
    offset_b_s : float
        Start of window B minus start of window A [s].
    distance_uncertainty_m : float
        Standard uncertainty of the distance [m] (chainage records).
    clock_uncertainty_s : float
        Standard uncertainty of the two clocks' offset [s], added to the delay's.

    Returns
    -------
    tuple of WaveSpeedEstimate
        ``(gcc, onset)``, both ``accepted``; pass them to :func:`judge_pair`.
    """
    delays = (
        estimate_front_delay(values_a, values_b, sample_interval_s, offset_b_s=offset_b_s,
                             max_lag_s=max_lag_s, n_bootstrap=n_bootstrap, seed=seed),
        estimate_onset_delay(values_a, values_b, sample_interval_s, offset_b_s=offset_b_s),
    )
    return tuple(
        wave_speed_estimate(
            pipe_id=pipe_id, sensor_a=sensor_a, sensor_b=sensor_b, distance_m=distance_m,
            delay_s=d.delay_s, delay_uncertainty_s=math.hypot(d.uncertainty_s,
                                                              clock_uncertainty_s),
            method=d.method, distance_uncertainty_m=distance_uncertainty_m,
            correlation_peak=d.correlation_peak, snr_db=d.snr_db, legs=legs)
        for d in delays
    )


def _front_window(trace, centre_ns: int, half_samples: int, clip: bool = False):
    """``(values, start_ns)`` of ``2 half + 1`` samples around a time, or a reason string.

    With ``clip`` the window is cut short at the ends of the trace instead.
    """
    centre = trace.index_at_time(centre_ns)
    start, stop = centre - half_samples, centre + half_samples + 1
    if clip:
        start, stop = max(0, start), min(len(trace), stop)
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


def _pair_windows(trace_a, trace_b, onset_a_ns, onset_b_ns, coarse_s):
    """Front windows of equal length centred on each sensor's steepest slope."""
    dt = trace_a.sample_interval_s
    if not math.isclose(dt, trace_b.sample_interval_s, rel_tol=1e-6):
        return ("sample intervals differ "
                f"({dt:g} s and {trace_b.sample_interval_s:g} s)")
    coarse = max(32, int(round(coarse_s / dt)))
    centres, margins, room = [], [], []
    for trace, onset in ((trace_a, onset_a_ns), (trace_b, onset_b_ns)):
        window = _front_window(trace, onset, coarse, clip=True)
        if isinstance(window, str):
            return window
        values, start_ns = window
        onset_index = int(round((onset - start_ns) * 1e-9 / dt))
        try:
            shape = locate_front(values, (onset_index - coarse // 4, onset_index + coarse // 2))
        except ValueError as error:
            return f"sensor {trace.sensor_id}: {error}"
        centre_ns = start_ns + int(round(shape.steepest_index * dt * 1e9))
        centre_index = trace.index_at_time(centre_ns)
        centres.append(centre_ns)
        margins.append(shape.margin_samples)
        room.append(min(centre_index, len(trace) - 1 - centre_index))
    half = int(min(np.clip(4 * max(margins), 32, coarse), min(room)))
    windows = [_front_window(t, c, half) for t, c in zip((trace_a, trace_b), centres)]
    for window in windows:
        if isinstance(window, str):
            return window
    (values_a, start_a), (values_b, start_b) = windows
    return values_a, values_b, dt, (start_b - start_a) * 1e-9, half * dt / 2


def _rejected(pipe_id, sensor_a, sensor_b, distance_m, legs, reason):
    nan = float("nan")
    return WaveSpeedEstimate(pipe_id, sensor_a, sensor_b, distance_m, nan, nan, nan, "none",
                             accepted=False, reason=reason, legs=legs)


def estimate_event_wave_speeds(
    observations,
    traces,
    layout,
    *,
    max_wave_speed_m_s: float,
    min_wave_speed_m_s: float,
    agreement_k: float = 3.0,
    coarse_window_s: float = 2.0,
    min_distance_m: float = 0.0,
    distance_uncertainty_m: float = 0.0,
    clock_uncertainty_s: float = 0.0,
    n_bootstrap: int = 100,
    seed: int = 0,
) -> tuple[WaveSpeedEstimate, ...]:
    """All pairwise wave-speed estimates of one detected event, judged.

    Parameters
    ----------
    observations : iterable
        The event's per-sensor observations; each has ``sensor_id`` and ``onset_time_ns``
        (:class:`detectors.metrics.SensorObservation`).
    traces : mapping of str to SensorTrace
        Pressure traces [Pa] by sensor id, covering the event.
    layout : models.layout.SystemLayout
        For the path and distance between sensors and their clock flags.
    max_wave_speed_m_s, min_wave_speed_m_s, agreement_k
        Plausibility limits (see :func:`judge_pair`), from the service config.
    coarse_window_s : float
        Half-width of the first window around each onset in which the front is located [s];
        the final windows are centred on the steepest slope, 4 front half-widths either side
        (at least 32 samples).
    min_distance_m : float
        Pairs closer than this are skipped [m].
    distance_uncertainty_m, clock_uncertainty_s, n_bootstrap, seed
        See :func:`estimate_pair_wave_speeds`.

    Returns
    -------
    tuple of WaveSpeedEstimate
        Two per usable pair (GCC and onset), ordered so that A sees the front first; a pair
        whose windows cannot be cut gives one rejected estimate (``method`` ``none``) saying
        why.
    """
    timed = sorted((o for o in observations
                    if o.onset_time_ns is not None and o.sensor_id in traces),
                   key=lambda o: o.onset_time_ns)
    results: list[WaveSpeedEstimate] = []
    for i, first in enumerate(timed):
        for second in timed[i + 1:]:
            legs = layout.path_between_sensors(first.sensor_id, second.sensor_id)
            if not legs:
                continue
            distance = float(sum(leg.length_m for leg in legs))
            if distance < max(min_distance_m, 1e-9):
                continue
            pipe_id = "+".join(dict.fromkeys(leg.pipe_id for leg in legs))
            synchronised = (layout.sensor(first.sensor_id).clock_synchronised
                            and layout.sensor(second.sensor_id).clock_synchronised)
            windows = _pair_windows(traces[first.sensor_id], traces[second.sensor_id],
                                    int(first.onset_time_ns), int(second.onset_time_ns),
                                    coarse_window_s)
            if isinstance(windows, str):
                results.append(_rejected(pipe_id, first.sensor_id, second.sensor_id, distance,
                                         tuple(legs), windows))
                continue
            values_a, values_b, dt, offset_s, max_lag_s = windows
            try:
                pair = estimate_pair_wave_speeds(
                    values_a, values_b, dt, distance_m=distance, pipe_id=pipe_id,
                    sensor_a=first.sensor_id, sensor_b=second.sensor_id, offset_b_s=offset_s,
                    legs=tuple(legs), distance_uncertainty_m=distance_uncertainty_m,
                    clock_uncertainty_s=clock_uncertainty_s, max_lag_s=max_lag_s,
                    n_bootstrap=n_bootstrap, seed=seed)
            except ValueError as error:
                results.append(_rejected(pipe_id, first.sensor_id, second.sensor_id, distance,
                                         tuple(legs), str(error)))
                continue
            results.extend(judge_pair(pair, max_wave_speed_m_s=max_wave_speed_m_s,
                                      min_wave_speed_m_s=min_wave_speed_m_s,
                                      clocks_synchronised=synchronised,
                                      agreement_k=agreement_k))
    return tuple(results)


#: Boundary cases of the period method and the number of pipe lengths per period.
PERIOD_BOUNDARIES = {"reservoir_closed": 4.0, "open_open": 2.0, "closed_closed": 2.0}


@dataclass(frozen=True)
class PeriodEstimate:
    """Wave speed from the dominant period of a pipe's oscillation.

    Attributes
    ----------
    period_s, period_uncertainty_s : float
        Dominant period and its standard uncertainty [s].
    wave_speed_m_s, uncertainty_m_s : float
        ``n L / T`` and its standard uncertainty [m/s].
    boundary : str
        Key of :data:`PERIOD_BOUNDARIES`.
    length_m : float
        [m]
    damping_per_s : float
        Decay rate of the fitted oscillation [1/s].
    n_cycles : float
        Periods covered by the record [-].
    """

    period_s: float
    period_uncertainty_s: float
    wave_speed_m_s: float
    uncertainty_m_s: float
    boundary: str
    length_m: float
    damping_per_s: float
    n_cycles: float


def _damped_cosine(t, amplitude, damping, frequency, phase, offset, trend):
    return amplitude * np.exp(-damping * t) * np.cos(2 * np.pi * frequency * t + phase) + (
        offset + trend * t)


def dominant_period_s(values: np.ndarray, sample_interval_s: float) -> tuple[float, float, float]:
    """Dominant period of an oscillation, its standard uncertainty and its decay rate.

    Parameters
    ----------
    values : numpy.ndarray
        The oscillation after the event, without gaps [Pa].
    sample_interval_s : float
        [s]

    Returns
    -------
    period_s, period_uncertainty_s, damping_per_s : float

    Raises
    ------
    ValueError
        Fewer than 2 periods in the record, gaps, or a fit that does not converge.

    Notes
    -----
    The peak of the Hann-windowed, 8-times zero-padded periodogram starts a least-squares fit
    of ``A exp(-zeta t) cos(2 pi f t + phi) + c0 + c1 t``; the uncertainty of ``f`` is the
    fit's (covariance scaled by the residual variance, which is optimistic for coloured
    residuals; common practice).
    """
    x = np.asarray(values, dtype=float)
    if x.ndim != 1 or x.size < 16 or not np.all(np.isfinite(x)):
        raise ValueError("the oscillation record must be a 1-D gap-free array of >= 16 samples")
    t = np.arange(x.size) * sample_interval_s
    detrended = x - np.polyval(np.polyfit(t, x, 1), t)
    n_fft = 8 * x.size
    power = np.abs(np.fft.rfft(detrended * np.hanning(x.size), n_fft)) ** 2
    frequencies = np.fft.rfftfreq(n_fft, sample_interval_s)
    lowest = 2.0 / t[-1]
    power[frequencies < lowest] = 0.0
    start_f = float(frequencies[int(np.argmax(power))])
    if start_f <= 0:
        raise ValueError(f"no oscillation with at least 2 periods in {t[-1]:.3g} s of record")
    guess = (float(np.std(detrended) * np.sqrt(2)), 0.1 * start_f, start_f, 0.0,
             float(x.mean()), 0.0)
    try:
        params, covariance = curve_fit(_damped_cosine, t, x, p0=guess, maxfev=20000)
    except RuntimeError as error:
        raise ValueError(f"the damped-oscillation fit did not converge: {error}") from None
    frequency = abs(params[2])
    if frequency * t[-1] < 2.0:
        raise ValueError(f"the record holds {frequency * t[-1]:.1f} periods; at least 2 needed")
    sigma_f = float(np.sqrt(covariance[2, 2]))
    return 1.0 / frequency, sigma_f / frequency**2, float(params[1])


def period_wave_speed(
    values: np.ndarray, sample_interval_s: float, *, length_m: float, boundary: str
) -> PeriodEstimate:
    """Wave speed from the period of a single pipe between two clean boundaries.

    Parameters
    ----------
    values : numpy.ndarray
        The oscillation after the event [Pa].
    sample_interval_s : float
        [s]
    length_m : float
        Length of the pipe between the two boundaries [m].
    boundary : str
        ``reservoir_closed`` (reservoir to a closed end: period 4L/a), ``open_open`` or
        ``closed_closed`` (period 2L/a).

    Notes
    -----
    ``a = n L / T`` with n from :data:`PERIOD_BOUNDARIES` (Wylie & Streeter 1993, ch. 1).
    Valid only where the system really is one uniform pipe between those boundaries: no
    junction, air valve, running pump or cavity in between; the caller decides that from the
    layout and the event.
    """
    if boundary not in PERIOD_BOUNDARIES:
        raise ValueError(f"unknown boundary {boundary!r}; use one of {sorted(PERIOD_BOUNDARIES)}")
    if not length_m > 0:
        raise ValueError(f"length_m={length_m!r} must be > 0")
    period, sigma, damping = dominant_period_s(values, sample_interval_s)
    lengths_per_period = PERIOD_BOUNDARIES[boundary]
    speed = lengths_per_period * length_m / period
    duration = (np.asarray(values).size - 1) * sample_interval_s
    return PeriodEstimate(period, sigma, speed, speed * sigma / period, boundary, float(length_m),
                          damping, duration / period)
