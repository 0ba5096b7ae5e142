"""Wave speed from the dominant period of a pipe's oscillation between two clean boundaries.

``a = n L / T`` with ``n = 4`` from a reservoir to a closed end and ``n = 2`` between two
ends of the same kind (Wylie & Streeter 1993, ch. 1). The caller decides from the layout and
the event whether the system really is one uniform pipe between such boundaries.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import curve_fit

from .small_stats import line_fit

__all__ = ["PERIOD_BOUNDARIES", "PeriodEstimate", "dominant_period_s", "period_wave_speed"]


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
    slope, intercept = line_fit(t, x)
    detrended = x - (slope * t + intercept)
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
