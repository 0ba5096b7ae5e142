"""Ringing after a surge: the period of the strongest oscillation and its damping.

Both read the span from the onset to where the pressure settled, less its final level
(:func:`detectors.metrics.observe_event`). They return None where the span or the sampling
cannot resolve them: fewer than two periods, a period below two samples (Nyquist), no clear
spectral peak, fewer than two peaks above the noise.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import fft as sp_fft
from scipy import signal

from .small_stats import line_fit, median

__all__ = ["dominant_period_s", "damping_ratio_log_decrement"]

#: Zero padding of the period spectrum, and the longest transform it may reach [-].
PERIOD_ZERO_PAD = 8
PERIOD_MAX_FFT = 2**17


def dominant_period_s(excess: np.ndarray, sample_interval_s: float) -> float | None:
    """Period of the strongest oscillation in a span [s], from a zero-padded Welch estimate.

    Parameters
    ----------
    excess : numpy.ndarray
        Pressure minus its final level [Pa], gap-free.
    sample_interval_s : float
        [s].

    Returns
    -------
    float or None
        None when the span holds fewer than two periods of the peak, the peak lies below
        two samples' worth of period (Nyquist), or the spectrum has no clear peak.

    Notes
    -----
    One Hann-windowed segment over the whole span (the Welch estimate with a single
    segment), zero-padded eightfold (up to a transform of ``PERIOD_MAX_FFT`` points) so
    the peak can fall between the natural bins:
    :math:`P(f) = |\\sum_n w_n x_n e^{-2\\pi i f n \\Delta t}|^2`.

    References
    ----------
    Welch, P. D. (1967). The use of fast Fourier transform for the estimation of power
    spectra. IEEE Trans. Audio Electroacoust. 15(2), 70-73.
    """
    x = np.asarray(excess, dtype=np.float64)
    n = x.size
    if n < 16 or not np.all(np.isfinite(x)):
        return None
    index = np.arange(n, dtype=np.float64)
    slope, intercept = line_fit(index, x)
    x = x - (slope * index + intercept)  # linear detrend (as scipy.signal.detrend)
    nfft = sp_fft.next_fast_len(max(n, min(PERIOD_ZERO_PAD * n, PERIOD_MAX_FFT)), real=True)
    spectrum = sp_fft.rfft(signal.get_window("hann", n) * x, nfft)
    power = spectrum.real**2 + spectrum.imag**2
    freqs = np.fft.rfftfreq(nfft, d=sample_interval_s)
    span_s = n * sample_interval_s
    usable = freqs >= 2.0 / span_s
    if not np.any(usable) or power[usable].max() <= 0:
        return None
    k = int(np.flatnonzero(usable)[np.argmax(power[usable])])
    if power[k] < 4.0 * median(power[usable]):
        return None
    period = 1.0 / freqs[k]
    if period < 2.0 * sample_interval_s:
        return None
    return float(period)


def damping_ratio_log_decrement(
    excess: np.ndarray, sample_interval_s: float, period_s: float, noise_pa: float
) -> float | None:
    """Damping ratio from the logarithmic decrement of successive peaks [-].

    Notes
    -----
    With peak amplitudes :math:`a_n` one period apart, the decrement
    :math:`\\delta` is minus the slope of :math:`\\ln a_n` against :math:`n` (least squares
    over all peaks above four noise deviations), and
    :math:`\\zeta = \\delta / \\sqrt{4\\pi^2 + \\delta^2}`.

    References
    ----------
    Thomson, W. T. & Dahleh, M. D. (1998). Theory of Vibration with Applications, 5th ed.,
    sec. 2.6 (logarithmic decrement).
    """
    x = np.nan_to_num(np.asarray(excess, dtype=np.float64), nan=0.0)
    distance = max(1, int(0.7 * period_s / sample_interval_s))
    best: list[float] = []
    for sign in (1.0, -1.0):
        peaks, _ = signal.find_peaks(sign * x, distance=distance)
        amps = sign * x[peaks]
        amps = amps[amps > 4.0 * max(noise_pa, 1e-9)]
        if amps.size > len(best):
            best = list(amps)
    if len(best) < 2:
        return None
    slope, _ = line_fit(np.arange(len(best)), np.log(best))
    delta = -float(slope)
    return float(delta / math.sqrt(4.0 * math.pi**2 + delta**2))
