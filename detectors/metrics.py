"""What one sensor saw of one event: levels, fronts, rates, settling, period and damping.

:func:`observe_event` turns the samples of an analysis span (a quiet lead-in, the onset,
the transient and its settling) into a :class:`SensorObservation`. It reports only what
the sampling supports and says in ``notes`` what it cannot resolve: at slow rates there is
no onset better than one sample, no period below two samples and no front faster than
the sampling.

All pressures are gauge [Pa], all times [s] or UTC [ns].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from .changepoint import moving_mean_centred
from .cycles import PressureCycleSummary, pressure_cycle_summary
from .params import DetectionParams
from .ringing import damping_ratio_log_decrement, dominant_period_s
from .triggers import MAD_TO_SIGMA

#: Samples of the mean whose first departure from the band gives the first motion's sign [-].
DIRECTION_MEAN_SAMPLES = 5

#: Samples of the mean on which the end of the first front (its first clear reversal) is
#: judged [-].
FRONT_END_MEAN_SAMPLES = 9

#: A sample further than this many deviations from its window's median is a spike [-].
SPIKE_SIGMAS = 8.0

__all__ = [
    "SensorObservation",
    "observe_event",
    "first_front_amplitude",
    "settle_index",
]


@dataclass(frozen=True)
class SensorObservation:
    """One sensor's view of one event (gauge pressures [Pa]).

    ``max_pa`` is "at least" when ``clipped`` is True: the sensor hit its range.
    ``rise_time_s`` is the time from the onset to the peak of the first front [s].
    ``settle_duration_s``, ``dominant_period_s`` and ``damping_ratio`` are None where the
    window or the sampling cannot resolve them; ``notes`` says why. ``cycles``: the pressure
    cycles from the onset, binned by range, for fatigue screening.
    """

    sensor_id: str
    onset_time_ns: int
    onset_uncertainty_s: float
    baseline_pa: float
    max_pa: float
    min_pa: float
    max_rate_pa_s: float
    first_front_pa: float
    settle_duration_s: float | None
    dominant_period_s: float | None
    damping_ratio: float | None
    clipped: bool
    sample_interval_s: float
    notes: tuple[str, ...] = ()
    max_rise_rate_pa_s: float = 0.0
    max_fall_rate_pa_s: float = 0.0
    final_level_pa: float = float("nan")
    noise_sigma_pa: float = float("nan")
    margin_to_allowable_pa: float | None = None
    margin_to_minimum_pa: float | None = None
    onset_index: float = float("nan")
    clock_synchronised: bool = True
    despiked_max_pa: float = float("nan")
    despiked_min_pa: float = float("nan")
    rise_time_s: float = float("nan")
    cycles: PressureCycleSummary | None = None

    @property
    def excursion_pa(self) -> float:
        """Largest departure from the baseline, either sign [Pa]."""
        return max(self.max_pa - self.baseline_pa, self.baseline_pa - self.min_pa)

    @property
    def settled_shift_pa(self) -> float:
        """Final level minus baseline [Pa]: negative when the pressure settled lower."""
        return self.final_level_pa - self.baseline_pa


def first_front_amplitude(excess: np.ndarray, reversal_pa: float) -> tuple[float, int]:
    """Amplitude of the first front: the running extreme before the first clear reversal.

    Parameters
    ----------
    excess : numpy.ndarray
        Pressure minus baseline from the onset on [Pa], NaN allowed.
    reversal_pa : float
        A fall back from the running extreme by more than this ends the front [Pa].

    Returns
    -------
    amplitude_pa, index : float, int
        Signed amplitude (negative for a down-surge) and where it peaks.

    Notes
    -----
    The direction of the first motion is the sign of the first
    ``DIRECTION_MEAN_SAMPLES``-sample mean that leaves the band of ``reversal_pa``; when
    none does, the sign of the larger excursion of that mean over the first samples. A
    reversal larger than ``max(reversal_pa, 0.2 |extreme|)`` of the
    ``FRONT_END_MEAN_SAMPLES``-sample mean ends the first front (common practice: the
    first front is the Joukowsky rise before the first reflection). The means keep the
    noise of a slow front from flipping the sign or ending the front early; the amplitude
    and its index are read on the samples themselves.
    """
    y = np.nan_to_num(np.asarray(excess, dtype=np.float64), nan=0.0)
    if y.size == 0:
        return 0.0, 0
    short = moving_mean_centred(y, DIRECTION_MEAN_SAMPLES)
    beyond = np.flatnonzero(np.abs(short) > reversal_pa)
    if beyond.size:
        direction = 1.0 if short[beyond[0]] > 0 else -1.0
    else:
        probe = short[: max(8, min(y.size, 64))]
        direction = 1.0 if abs(probe.max()) >= abs(probe.min()) else -1.0
    z = direction * y
    smooth = moving_mean_centred(z, FRONT_END_MEAN_SAMPLES)
    running = np.maximum.accumulate(smooth)
    drop = running - smooth
    ends = np.flatnonzero((drop > np.maximum(reversal_pa, 0.2 * running)) & (running > reversal_pa))
    stop = int(ends[0]) if ends.size else z.size
    peak = int(np.argmax(z[: max(stop, 1)]))
    return float(direction * z[peak]), peak


def settle_index(values: np.ndarray, final_level: float, band_pa: float) -> int | None:
    """First index after which every valid sample stays within ``band_pa`` of the final level.

    Returns None when the last excursion outside the band lies in the final 10 % of the
    span (the window ended before the pressure settled).
    """
    outside = np.flatnonzero(np.abs(values - final_level) > band_pa)
    if outside.size == 0:
        return 0
    last = int(outside[-1])
    if last >= int(0.9 * values.size):
        return None
    return last + 1


def _rates(values: np.ndarray, lag: int, dt: float) -> tuple[float, float]:
    if values.size <= lag:
        return 0.0, 0.0
    d = (values[lag:] - values[:-lag]) / (lag * dt)
    d = d[np.isfinite(d)]
    if d.size == 0:
        return 0.0, 0.0
    return float(max(d.max(), 0.0)), float(min(d.min(), 0.0))


def _despike(values: np.ndarray, max_samples: int, noise_pa: float, local_spread: bool = False) -> np.ndarray:
    """Replace runs of up to ``max_samples`` outliers by the running median (Hampel filter).

    A sample is an outlier when it lies more than ``SPIKE_SIGMAS`` noise deviations from the
    median of its window of ``2 max_samples + 1`` samples. With ``local_spread`` (a slow
    logger, whose samples may be seconds apart inside a surge) it must also lie more than
    ``SPIKE_SIGMAS`` deviations of its own window's spread (``1.4826 MAD`` of the window)
    from that median, so the steep samples of a transient are kept.

    Pearson, R. K. (2002). Outliers in process modeling and identification. IEEE Trans.
    Control Syst. Technol. 10(1), 55-63.
    """
    width = 2 * max_samples + 1
    finite = np.isfinite(values)
    filled = values if finite.all() else np.where(finite, values, np.nanmedian(values) if finite.any() else 0.0)
    med = ndimage.median_filter(filled, size=width, mode="nearest")
    out = values.copy()
    threshold = max(SPIKE_SIGMAS * noise_pa, 1.0)
    if local_spread and filled.size >= width:
        padded = np.pad(filled, max_samples, mode="edge")
        windows = np.lib.stride_tricks.sliding_window_view(padded, width)
        spread = MAD_TO_SIGMA * np.median(np.abs(windows - med[:, None]), axis=1)
        threshold = np.maximum(threshold, SPIKE_SIGMAS * spread)
    bad = np.abs(values - med) > threshold
    out[bad] = med[bad]
    return out


def observe_event(
    sensor_id: str,
    times_ns: np.ndarray,
    values: np.ndarray,
    clipped: np.ndarray | None,
    onset_index: float,
    onset_time_ns: int,
    onset_uncertainty_s: float,
    baseline_pa: float,
    noise_pa: float,
    sample_interval_s: float,
    params: DetectionParams,
    *,
    range_max_pa: float | None = None,
    allowable_pa: float | None = None,
    minimum_pa: float | None = None,
    clock_synchronised: bool = True,
    lead_in_pa: np.ndarray | None = None,
) -> SensorObservation:
    """Metrics of one sensor over an analysis span.

    Parameters
    ----------
    sensor_id : str
    times_ns, values, clipped : numpy.ndarray
        The span's samples [ns], [Pa] (NaN gaps) and over-range marks.
    onset_index : float
        Sub-sample onset, index into the span [-].
    onset_time_ns : int
    onset_uncertainty_s : float
    baseline_pa, noise_pa : float
        Pre-event level and noise deviation [Pa].
    sample_interval_s : float
    params : DetectionParams
    range_max_pa, allowable_pa, minimum_pa : float, optional
        Sensor range, pipe's allowable and minimum pressure [Pa].
    clock_synchronised : bool
    lead_in_pa : numpy.ndarray, optional
        Baseline samples before the onset that count in the pressure range [Pa]: a slow
        logger's onset is known to a sample only, and the level it left belongs to the
        event's range (the lowest pressure of a closure upstream is where it started).

    Returns
    -------
    SensorObservation
    """
    dt = float(sample_interval_s)
    notes: list[str] = []
    k0 = int(max(0, math.floor(onset_index)))
    post = values[k0:]
    n_missing = int(np.count_nonzero(~np.isfinite(post)))
    if n_missing:
        notes.append(f"{n_missing} samples missing after the onset")
    slow = dt >= params.slow_interval_s
    clean = _despike(post, params.spike_max_samples, noise_pa, local_spread=slow)
    ranged, clean_ranged = post, clean
    if lead_in_pa is not None and len(lead_in_pa):
        lead = np.asarray(lead_in_pa, dtype=np.float64)
        ranged = np.concatenate((lead, post))
        clean_ranged = np.concatenate((_despike(lead, params.spike_max_samples, noise_pa, local_spread=slow), clean))
    max_pa = float(np.nanmax(ranged)) if np.any(np.isfinite(ranged)) else baseline_pa
    min_pa = float(np.nanmin(ranged)) if np.any(np.isfinite(ranged)) else baseline_pa
    clean_max, clean_min = float(np.nanmax(clean_ranged)), float(np.nanmin(clean_ranged))
    if max_pa - clean_max > max(params.settle_tolerance_pa, 4 * noise_pa):
        notes.append(f"maximum {max_pa / 1e3:.1f} kPa is a short spike; without it {clean_max / 1e3:.1f} kPa")
    if clean_min - min_pa > max(params.settle_tolerance_pa, 4 * noise_pa):
        notes.append(f"minimum {min_pa / 1e3:.1f} kPa is a short spike; without it {clean_min / 1e3:.1f} kPa")
    is_clipped = bool(clipped is not None and np.any(clipped[k0:]))
    if range_max_pa is not None and max_pa >= 0.999 * range_max_pa:
        is_clipped = True
    if is_clipped:
        notes.append(f"sensor at its range: the maximum is at least {max_pa / 1e3:.1f} kPa")
    band = max(params.settle_tolerance_pa, params.settle_noise_multiple * noise_pa)
    front, front_peak = first_front_amplitude(clean - baseline_pa, band)
    rise_time_s = max(0.0, (front_peak - (onset_index - k0)) * dt)
    lag = max(1, int(round(params.rate_resolution_s / dt)))
    rise, fall = _rates(clean, lag, dt)
    tail = clean[-max(8, clean.size // 10) :]
    final_level = float(np.nanmedian(tail)) if np.any(np.isfinite(tail)) else baseline_pa
    settle_at = settle_index(np.nan_to_num(clean, nan=final_level), final_level, band)
    settle_s = None
    if settle_at is None:
        notes.append("not settled within the analysis window")
    else:
        settle_s = max(0.0, (int(times_ns[min(k0 + settle_at, times_ns.size - 1)]) - onset_time_ns) * 1e-9)
    span = clean if settle_at in (None, 0) else clean[: max(settle_at, 16)]
    period = None
    damping = None
    if np.all(np.isfinite(span)):
        period = dominant_period_s(span - final_level, dt)
        if period is not None:
            damping = damping_ratio_log_decrement(span - final_level, dt, period, noise_pa)
    if dt >= params.slow_interval_s:
        notes.append(
            f"sampled every {dt:g} s: onset to one sample, no period below {2 * dt:g} s, "
            f"fronts faster than {dt:g} s not resolved (rates are lower bounds)"
        )
    if min_pa <= params.vapour_pressure_gauge_pa + 5e3:
        notes.append("minimum at vapour pressure: column separation likely")
    return SensorObservation(
        sensor_id=sensor_id,
        onset_time_ns=int(onset_time_ns),
        onset_uncertainty_s=float(onset_uncertainty_s),
        baseline_pa=float(baseline_pa),
        max_pa=max_pa,
        min_pa=min_pa,
        max_rate_pa_s=max(rise, -fall),
        first_front_pa=front,
        settle_duration_s=settle_s,
        dominant_period_s=period,
        damping_ratio=damping,
        clipped=is_clipped,
        sample_interval_s=dt,
        notes=tuple(notes),
        max_rise_rate_pa_s=rise,
        max_fall_rate_pa_s=fall,
        final_level_pa=final_level,
        noise_sigma_pa=float(noise_pa),
        margin_to_allowable_pa=None if allowable_pa is None else float(allowable_pa - max_pa),
        margin_to_minimum_pa=None if minimum_pa is None else float(min_pa - minimum_pa),
        onset_index=float(onset_index),
        clock_synchronised=clock_synchronised,
        despiked_max_pa=clean_max,
        despiked_min_pa=clean_min,
        rise_time_s=float(rise_time_s),
        cycles=pressure_cycles(clean, noise_pa, params),
    )


def pressure_cycles(values: np.ndarray, noise_pa: float, params: DetectionParams) -> PressureCycleSummary | None:
    """Rainflow cycles (ASTM E1049-85) of the despiked history from the onset, binned by
    range; the gate is ``cycle_gate_pa`` or ``noise_multiple`` noise deviations, whichever
    is larger (over minutes of samples, white noise alone swings by 8 deviations now and
    then). None where the history is too short to hold a cycle."""
    finite = values[np.isfinite(values)]
    if finite.size < 3:
        return None
    gate = max(params.cycle_gate_pa, params.noise_multiple * noise_pa)
    span = float(finite.max() - finite.min())
    bin_pa = max(params.cycle_bin_pa, span / 199.0)  # at most 200 bins, however large the surge
    return pressure_cycle_summary(finite, bin_pa, gate, max_bins=200)
