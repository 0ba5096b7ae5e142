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

Only pairs with sensor A on the path from the event's source to sensor B measure a wave speed
(:mod:`detectors.wavespeed_pairs`); the front windows end before the first reflection can
reach either sensor. The period method (:mod:`detectors.wavespeed_period`, names importable
from here) reads the wave speed from the dominant period of a single pipe's oscillation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from detectors.delays import estimate_front_delay, estimate_onset_delay, front_shapes
from detectors.reflections import Reflection, sensor_reflections
from detectors.wavespeed_judge import front_quality_reasons, judge_pair, plausibility_reasons
from detectors.wavespeed_pairs import (
    Point,
    cut_pair_windows,
    event_source_point,
    pair_order,
)
from detectors.wavespeed_period import (
    PERIOD_BOUNDARIES,
    PeriodEstimate,
    dominant_period_s,
    period_wave_speed,
)
from models.layout import PathLeg

__all__ = [
    "WaveSpeedEstimate",
    "wave_speed_estimate",
    "plausibility_reasons",
    "front_quality_reasons",
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
    shapes = front_shapes(values_a, values_b)  # located once, used by both methods
    delays = (
        estimate_front_delay(values_a, values_b, sample_interval_s, offset_b_s=offset_b_s,
                             max_lag_s=max_lag_s, n_bootstrap=n_bootstrap, seed=seed,
                             shapes=shapes),
        estimate_onset_delay(values_a, values_b, sample_interval_s, offset_b_s=offset_b_s,
                             shapes=shapes),
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
    source_node: str | None = None,
    source: Point | None = None,
    coarse_window_s: float = 2.0,
    reflection_guard: float = 0.8,
    reflection_min_fraction: float = 0.3,
    min_distance_m: float = 0.0,
    source_tolerance_m: float = 10.0,
    distance_uncertainty_m: float = 0.0,
    clock_uncertainty_s: float = 0.0,
    n_bootstrap: int = 100,
    seed: int = 0,
    min_snr_db: float = 10.0,
    min_correlation: float = 0.5,
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
        Paths and distances between sensors, their clock flags, prior wave speeds.
    max_wave_speed_m_s, min_wave_speed_m_s, agreement_k, min_snr_db, min_correlation
        Plausibility and front-quality limits (see :func:`judge_pair`), from the service
        config.
    source_node : str, optional
        The node the event was attributed to (``DetectedEvent.source_node``).
    source : tuple of (str, float), optional
        The located source point ``(pipe_id, offset_m)`` (a burst); takes precedence.
        Without either, the source is fitted to the onsets (:func:`event_source_point`).
    coarse_window_s : float
        Half-width of the first window around each onset in which the front is located [s].
    reflection_guard : float
        Fraction of the reflection-free time (:func:`reflection_free_time_s`) the windows
        may use after the onset, for wave speeds faster than the prior and late picks [-].
        A reflection inside a front adds its bound to the delay's uncertainty, and one that
        reaches a sensor before its front's steepest slope refuses the correlation estimate
        of the pair (the onset estimate stands; :func:`detectors.wavespeed_pairs.cut_pair_windows`)
        when it is strong (``reflection_min_fraction``).
    reflection_min_fraction : float
        A reflection refuses the correlation estimate only when its coefficient is at least
        this large in magnitude (:func:`detectors.reflections.sensor_reflections`: a
        reservoir or a dead end 1, a T of equal pipes 1/3) [-]; from the service config.
    min_distance_m : float
        Pairs closer than this are skipped [m].
    source_tolerance_m : float
        Tolerance of the on-path test (:func:`pair_order`) [m].
    distance_uncertainty_m, clock_uncertainty_s, n_bootstrap, seed
        See :func:`estimate_pair_wave_speeds`.

    Returns
    -------
    tuple of WaveSpeedEstimate
        Two per usable pair (GCC and onset), A on the path from the source to B. A pair that
        cannot measure a wave speed gives one rejected estimate (``method`` ``none``, no
        speed) saying why, the reasons in this order: a clock that is not synchronised,
        the source between the sensors, windows that cannot be cut.
    """
    if not 0.0 < reflection_guard <= 1.0:
        raise ValueError(f"reflection_guard={reflection_guard!r} must lie in (0, 1]")
    if not 0.0 <= reflection_min_fraction <= 1.0:
        raise ValueError(f"reflection_min_fraction={reflection_min_fraction!r} must lie in "
                         "[0, 1] (the magnitude of a reflection coefficient)")
    timed = sorted((o for o in observations
                    if o.onset_time_ns is not None and o.sensor_id in traces),
                   key=lambda o: o.onset_time_ns)
    speeds = [p.wave_speed_m_s for p in layout.pipes if p.wave_speed_m_s]
    default_speed = float(np.median(speeds)) if speeds else 1000.0
    origin, _ = event_source_point(layout, timed, source_node=source_node, source=source,
                                   default_wave_speed_m_s=default_speed)
    onsets = {o.sensor_id: int(o.onset_time_ns) for o in timed}
    free: dict[str, float] = {}
    strong: dict[str, Reflection | None] = {}
    results: list[WaveSpeedEstimate] = []
    for i, first in enumerate(timed):
        for second in timed[i + 1:]:
            order = (pair_order(layout, origin, first.sensor_id, second.sensor_id,
                                source_tolerance_m) if origin is not None else None)
            sensor_a, sensor_b = order or (first.sensor_id, second.sensor_id)
            legs = layout.path_between_sensors(sensor_a, sensor_b)
            if not legs:
                continue
            distance = float(sum(leg.length_m for leg in legs))
            if distance < max(min_distance_m, 1e-9):
                continue
            legs = tuple(legs)
            pipe_id = "+".join(dict.fromkeys(leg.pipe_id for leg in legs))
            unsynchronised = [s for s in (sensor_a, sensor_b)
                              if not layout.sensor(s).clock_synchronised]
            reasons = ([f"sensor clocks not synchronised ({', '.join(unsynchronised)}): no "
                        "delay is computed"] if unsynchronised else [])
            if order is None:
                reasons.append("source between the sensors: the pair does not measure a wave "
                               "speed" if origin is not None else "source unknown")
            if reasons:
                results.append(_rejected(pipe_id, sensor_a, sensor_b, distance, legs,
                                         "; ".join(reasons)))
                continue
            for s in (sensor_a, sensor_b):
                if s not in free:  # one walk of the layout gives both
                    found = sensor_reflections(layout, origin, s, default_speed)
                    free[s] = found[0].delay_s if found else math.inf
                    strong[s] = next((r for r in found if abs(r.coefficient) >= reflection_min_fraction),
                                     None)
            windows = cut_pair_windows(traces[sensor_a], traces[sensor_b], onsets[sensor_a],
                                       onsets[sensor_b], coarse_s=coarse_window_s,
                                       free_s=(free[sensor_a], free[sensor_b]),
                                       guard=reflection_guard,
                                       strong=(strong[sensor_a], strong[sensor_b]))
            if isinstance(windows, str):
                results.append(_rejected(pipe_id, sensor_a, sensor_b, distance, legs, windows))
                continue
            values_a, values_b, dt, offset_s, max_lag_s, reflection_s, early = windows
            try:
                pair = estimate_pair_wave_speeds(
                    values_a, values_b, dt, distance_m=distance, pipe_id=pipe_id,
                    sensor_a=sensor_a, sensor_b=sensor_b, offset_b_s=offset_s, legs=legs,
                    distance_uncertainty_m=distance_uncertainty_m,
                    clock_uncertainty_s=math.hypot(clock_uncertainty_s, reflection_s),
                    max_lag_s=max_lag_s, n_bootstrap=n_bootstrap, seed=seed)
            except ValueError as error:
                results.append(_rejected(pipe_id, sensor_a, sensor_b, distance, legs, str(error)))
                continue
            refused = {e.method: early for e in pair if early and e.method.startswith("gcc")}
            results.extend(judge_pair(pair, max_wave_speed_m_s=max_wave_speed_m_s,
                                      min_wave_speed_m_s=min_wave_speed_m_s,
                                      agreement_k=agreement_k, min_snr_db=min_snr_db,
                                      min_correlation=min_correlation, refused=refused))
    return tuple(results)
