"""Start of a gradual front: the change point of a one-sided CUSUM on the pre-event noise.

A slow valve closure or a slowly ramped pump leaves its baseline so gently that the AIC
picker of :mod:`detectors.onsets` (which splits the window into two stationary parts) and
the straight-line refinement both settle where the rise has become steep, seconds after the
wave arrived. The cumulative sum of Page (1954) accumulates a small, persistent departure
that no single sample shows: standardised by the noise of the quiet samples and reduced by
a reference value (the drift allowance), it stays at zero while the signal is at its
baseline and climbs once the mean has moved. The last time it was at zero before a sample
where the front is certainly under way is the change point. Where the signal left its noise
band (:func:`leave_noise_index`) tells a gradual front from a sharp one.

Sign convention: indices count samples from the start of the array handed in; the returned
onset index lies half-way between the last unchanged sample and the first changed one, as
:func:`detectors.onsets.pick_onset` places a break (a front whose first changed sample is
51 has ``index == 50.5``).

>>> import numpy as np
>>> rng = np.random.default_rng(4)
>>> x = rng.normal(0.0, 1.0, 600)
>>> x[300:] += 0.02 * np.arange(300)          # a slow ramp from sample 300
>>> leave = leave_noise_index(x, 0.0, 1.0, 1.0, 599)
>>> c = cusum_change_point(x, 0.0, 1.0, 1.0, leave)
>>> bool(280 <= c.index <= leave - 30)
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .small_stats import line_fit, median_abs_deviation
from .triggers import MAD_TO_SIGMA

__all__ = ["CusumChange", "GradualOnset", "cusum_statistic", "cusum_change_point",
           "gradual_front_onset", "leave_noise_index", "moving_mean_centred"]

#: Reference value (drift allowance) of the CUSUM in noise deviations [-]: half the
#: smallest shift worth detecting quickly, a one-deviation shift (Page 1954; the usual
#: choice, e.g. Montgomery, *Introduction to Statistical Quality Control*, sec. 9.1, from
#: memory).
CUSUM_DRIFT_SIGMAS = 0.5

#: Samples of the centred mean that decides whether the signal has left its noise band [-].
LEAVE_MEAN_SAMPLES = 5

#: Multiple of the mean's own deviation beyond which the signal has left its noise band [-].
LEAVE_SIGMAS = 3.0


@dataclass(frozen=True)
class CusumChange:
    """Change point of a one-sided CUSUM.

    Attributes
    ----------
    index : float
        Onset, fractional index: half-way between the last unchanged sample and the first
        changed one [-].
    first_changed : int
        First sample of the excursion of the statistic that runs into ``until`` [-].
    statistic_at_end : float
        The CUSUM at ``until``, in noise deviations [-]: the evidence for the change.
    """

    index: float
    first_changed: int
    statistic_at_end: float


def moving_mean_centred(values: np.ndarray, width: int) -> np.ndarray:
    """Centred mean over ``width`` samples, same length; the ends average what exists."""
    x = np.asarray(values, dtype=np.float64)
    if width <= 1 or x.size == 0:
        return x.copy()
    c = np.concatenate(([0.0], np.cumsum(x)))
    half = width // 2
    i = np.arange(x.size)
    lo = np.maximum(i - half, 0)
    hi = np.minimum(i + width - half, x.size)
    return (c[hi] - c[lo]) / (hi - lo)


def cusum_statistic(values: np.ndarray, baseline: float, noise_sigma: float, direction: float,
                    drift_sigmas: float = CUSUM_DRIFT_SIGMAS) -> np.ndarray:
    """One-sided CUSUM of a series in the direction of a change, in noise deviations.

    Parameters
    ----------
    values : numpy.ndarray
        Samples, no NaN (input units).
    baseline : float
        Level before the change (input units).
    noise_sigma : float
        Deviation of the samples about the baseline before the change (input units, > 0).
    direction : float
        +1 for a rise, -1 for a fall.
    drift_sigmas : float
        Reference value :math:`\\nu` [noise deviations].

    Returns
    -------
    numpy.ndarray
        :math:`S_k` after sample ``k`` [-].

    Notes
    -----
    With :math:`z_k = d (x_k - \\mu_0) / \\sigma - \\nu`, the recursion of Page (1954)
    :math:`S_k = \\max(0, S_{k-1} + z_k)`, :math:`S_{-1} = 0`, equals
    :math:`S_k = C_k - \\min(0, \\min_{j \\le k} C_j)` with :math:`C_k = \\sum_{i \\le k} z_i`,
    which is computed here without a loop.

    References
    ----------
    Page, E. S. (1954). Continuous inspection schemes. Biometrika 41(1/2), 100-115.
    """
    if not noise_sigma > 0:
        raise ValueError(f"noise_sigma = {noise_sigma!r} must be above 0")
    if direction not in (1.0, -1.0):
        raise ValueError(f"direction = {direction!r} must be +1 or -1")
    x = np.asarray(values, dtype=np.float64)
    if not np.all(np.isfinite(x)):
        raise ValueError("cusum_statistic: the series holds NaN or inf; use a gap-free run")
    z = direction * (x - baseline) / noise_sigma - drift_sigmas
    c = np.cumsum(z)
    return c - np.minimum(np.minimum.accumulate(c), 0.0)


def cusum_change_point(values: np.ndarray, baseline: float, noise_sigma: float, direction: float,
                       until: int, drift_sigmas: float = CUSUM_DRIFT_SIGMAS) -> CusumChange | None:
    """Where the excursion of the CUSUM that is under way at ``until`` began.

    Parameters
    ----------
    values, baseline, noise_sigma, direction, drift_sigmas
        As :func:`cusum_statistic`.
    until : int
        A sample at which the change is certainly under way (the signal has left its noise
        band there, :func:`leave_noise_index`).

    Returns
    -------
    CusumChange or None
        None when the statistic is at zero at ``until`` (no change under way there) or never
        was at zero before it (the series never sat at its baseline).

    Notes
    -----
    The change point is the last time the statistic was zero before the excursion that
    leads into the change: the estimate that goes with the scheme (Page 1954; as in
    Basseville & Nikiforov, *Detection of Abrupt Changes*, 1993, sec. 2.2, from memory).
    Only samples up to ``until`` are used, so the late part of the transient cannot move it.
    """
    x = np.asarray(values, dtype=np.float64)
    if not 0 <= until < x.size:
        raise ValueError(f"until = {until} must lie in [0, {x.size}) (the series' length)")
    s = cusum_statistic(x[: until + 1], baseline, noise_sigma, direction, drift_sigmas)
    if s[-1] <= 0.0:
        return None
    zeros = np.flatnonzero(s <= 0.0)
    if zeros.size == 0:
        return None
    first = int(zeros[-1]) + 1
    return CusumChange(index=first - 0.5, first_changed=first, statistic_at_end=float(s[-1]))


def leave_noise_index(values: np.ndarray, baseline: float, noise_sigma: float, direction: float,
                      until: int, width: int = LEAVE_MEAN_SAMPLES,
                      multiple: float = LEAVE_SIGMAS) -> int:
    """Where the signal, on its way to ``until``, stood out of its noise band for the first time.

    Parameters
    ----------
    values : numpy.ndarray
        Samples, no NaN (input units).
    baseline, noise_sigma : float
        Level and deviation of the quiet samples (input units).
    direction : float
        +1 for a rise, -1 for a fall.
    until : int
        A sample inside the front.
    width : int
        Samples of the centred mean that is compared with the band [-].
    multiple : float
        The band is ``multiple`` deviations of that mean, ``noise_sigma / sqrt(width)`` [-].

    Returns
    -------
    int
        The first sample beyond the band after the mean was last back at the baseline;
        ``until`` itself when the mean there is still inside the band.

    Notes
    -----
    Averaging ``width`` samples narrows white noise by :math:`\\sqrt{width}`, so a slow
    departure stands out of the band earlier than any single sample does (common practice).
    The search starts where the mean last sat at (or beyond) the baseline, so noise that
    dips back into the band on a slow rise does not restart it (a hysteresis, as a trigger
    with separate on and off levels; common practice).
    """
    x = np.asarray(values, dtype=np.float64)
    if not 0 <= until < x.size:
        raise ValueError(f"until = {until} must lie in [0, {x.size}) (the series' length)")
    mean = direction * (moving_mean_centred(x[: until + 1], width) - baseline)
    band = multiple * noise_sigma / math.sqrt(max(width, 1))
    if not mean[-1] > band:
        return until
    at_base = np.flatnonzero(mean <= 0.0)
    start = int(at_base[-1]) + 1 if at_base.size else 0
    return start + int(np.argmax(mean[start:] > band))


@dataclass(frozen=True)
class GradualOnset:
    """Onset of a gradual front (:func:`gradual_front_onset`).

    Attributes
    ----------
    change : CusumChange
        The CUSUM change point on the detrended window.
    leave_index : int
        First sample of the run in which the signal stands out of its noise band [-].
    quiet_samples : int
        Leading samples that set the baseline, drift and noise in the final pass [-].
    noise_sigma : float
        Deviation of those samples about their drift line (input units).
    """

    change: CusumChange
    leave_index: int
    quiet_samples: int
    noise_sigma: float


def _detrended(x: np.ndarray, quiet: int) -> np.ndarray:
    """``x`` minus the straight line fitted to its first ``quiet`` samples."""
    t = np.arange(quiet, dtype=np.float64)
    slope, intercept = line_fit(t, x[:quiet])
    return x - (intercept + slope * np.arange(x.size))


def gradual_front_onset(values: np.ndarray, quiet_samples: int, until: int, direction: float, *,
                        drift_sigmas: float = CUSUM_DRIFT_SIGMAS, min_quiet: int = 16,
                        passes: int = 4) -> GradualOnset | None:
    """Change point of a front that leaves its baseline gradually.

    Parameters
    ----------
    values : numpy.ndarray
        Window: quiet samples first, the front after them, no NaN (input units).
    quiet_samples : int
        Leading samples believed to precede the front. A slow front may already have begun
        inside them; the passes shrink them to the change point found.
    until : int
        A sample inside the front (the AIC pick).
    direction : float
        +1 for a rising front, -1 for a falling one.
    drift_sigmas : float
        CUSUM reference value [noise deviations].
    min_quiet : int
        Fewest quiet samples that may set a baseline and a noise [-].
    passes : int
        Most re-estimates of the baseline from the samples before the last change point [-].

    Returns
    -------
    GradualOnset or None
        None when the quiet part is too short, flat (no noise), or the signal at ``until`` is
        still inside its noise band, or the CUSUM finds no excursion leading into it.

    Notes
    -----
    Each pass removes the straight line fitted to the quiet samples (drift), takes their
    robust deviation (:math:`1.4826\\,\\mathrm{MAD}`, Hampel 1974), finds where the signal
    leaves its noise band (:func:`leave_noise_index`) and the CUSUM change point before
    ``until`` (:func:`cusum_change_point`, Page 1954). When the change point lies inside the quiet
    part, the baseline was raised by the start of the front; the next pass uses only the
    samples before the change point.

    References
    ----------
    Page, E. S. (1954). Continuous inspection schemes. Biometrika 41(1/2), 100-115.
    Hampel, F. R. (1974). The influence curve and its role in robust estimation. J. Am. Stat.
    Assoc. 69(346), 383-393.
    """
    x = np.asarray(values, dtype=np.float64)
    if not 0 <= until < x.size:
        raise ValueError(f"until = {until} must lie in [0, {x.size}) (the window's length)")
    quiet = int(min(quiet_samples, until))
    found: GradualOnset | None = None
    for _ in range(passes):
        if quiet < min_quiet:
            break
        y = _detrended(x, quiet)
        sigma = MAD_TO_SIGMA * median_abs_deviation(y[:quiet])
        if not sigma > 0:
            break
        leave = leave_noise_index(y, 0.0, sigma, direction, until)
        if leave >= until:
            break
        change = cusum_change_point(y, 0.0, sigma, direction, until, drift_sigmas)
        if change is None or change.first_changed < min_quiet:
            break
        found = GradualOnset(change, leave, quiet, sigma)
        if change.first_changed >= quiet:
            break  # the quiet part held no part of the front
        quiet = change.first_changed
    return found
