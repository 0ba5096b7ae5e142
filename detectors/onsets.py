"""Arrival (onset) time of a pressure front on one sensor, to a fraction of a sample.

Two published steps:

1. :func:`aic_curve` and its minimum place the onset to the sample: the Akaike information
   criterion picker of Maeda (1985) splits the window in two stationary parts and takes the
   split that explains the samples best.
2. :func:`refine_onset_hinge` fits a continuous two-phase (broken-line) regression around
   that sample: flat before the onset, a straight rise after it, with the break point as a
   continuous parameter (Hinkley, "Inference about the intersection in two-phase
   regression", Biometrika 56(3), 1969). The break point is the sub-sample onset.

A slow drift is removed first by a straight line fitted to the quiet samples that precede
the front, so a drifting baseline does not pull the pick.

Sign convention: indices count samples from the start of the window handed in; the onset
index is the fractional position where the front leaves the baseline, so a front that
starts exactly at sample 50 has ``index == 50.0`` and the first changed sample is 51.

>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> x = rng.normal(0.0, 100.0, 400)
>>> x[200:] += 50e3 * np.minimum(np.arange(200) + 0.5, 4) / 4   # front starts at 199.5
>>> pick = pick_onset(x, 0.01)
>>> bool(abs(pick.index - 199.5) < 0.3)
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .changepoint import CUSUM_DRIFT_SIGMAS, gradual_front_onset, moving_mean_centred
from .small_stats import line_fit, median, median_abs_deviation

__all__ = ["OnsetPick", "aic_curve", "aic_support_halfwidth", "pick_onset", "refine_onset_hinge"]

#: Shortest stretch either side of the AIC split [samples].
_MIN_PART = 3

#: AIC rise that bounds the supported onsets around the minimum [-].
AIC_SUPPORT_DELTA = 2.0

#: The two-phase fit spans the rise up to this fraction of the first front [-].
HINGE_FIT_FRACTION = 0.3

#: Longest rise, and longest walk back from the AIC pick, that the two-phase fit uses
#: [samples] (bounds its cost; a longer rise is fitted over its first part).
HINGE_MAX_SAMPLES = 256

#: Share of the fitted rise's length added to the onset uncertainty for its shape [-]:
#: a gradual (curved) front leaves the noise later than it leaves the baseline.
RISE_SHAPE_FRACTION = 0.2

#: Samples averaged before the sign of the first motion is read, so that one noisy sample
#: cannot flip it [-].
DIRECTION_MEAN_SAMPLES = 5

#: A front is gradual, and timed by the CUSUM change point, when its two-phase break lies
#: this many samples after the point where the signal left its noise band [-]: a sharp
#: front leaves the band within a sample or two of its break.
GRADUAL_LEAD_SAMPLES = 8


@dataclass(frozen=True)
class OnsetPick:
    """A picked onset.

    Attributes
    ----------
    index : float
        Sub-sample onset, fractional index into the window [-].
    aic_index : int
        Sample of the AIC minimum: the first sample of the post-onset part [-].
    uncertainty_samples : float
        One standard uncertainty of ``index`` [samples].
    uncertainty_s : float
        The same in seconds [s].
    noise_sigma : float
        Robust noise deviation of the detrended pre-onset samples, from the MAD of their
        first difference (input units).
    front_slope_per_sample : float
        Slope of the fitted rise after the onset (input units per sample).
    snr : float
        Front amplitude over the fit window divided by ``noise_sigma`` [-].
    """

    index: float
    aic_index: int
    uncertainty_samples: float
    uncertainty_s: float
    noise_sigma: float
    front_slope_per_sample: float
    snr: float


def aic_curve(values: np.ndarray) -> np.ndarray:
    """Akaike information criterion of every two-part split of a window (Maeda 1985).

    Parameters
    ----------
    values : numpy.ndarray
        Samples of the window, no NaN, at least ``2 * 3`` of them.

    Returns
    -------
    numpy.ndarray
        ``aic[k]`` for the split into ``values[:k]`` and ``values[k:]``; ``inf`` where a
        part would hold fewer than 3 samples. The minimum's ``k`` is the first sample of
        the second (post-onset) part.

    Notes
    -----
    With the 1-based samples ``x[1..N]`` of the source, Eq. (2) of Maeda:

    .. math:: \\mathrm{AIC}(k) = k \\log \\operatorname{var}(x[1..k])
              + (N - k - 1) \\log \\operatorname{var}(x[k+1..N])

    Variances are population variances from cumulative sums, so the curve costs O(N).
    A variance of zero (a perfectly flat part) is floored at a tiny multiple of the
    window's variance so the logarithm stays finite.

    References
    ----------
    Maeda, N. (1985). A method for reading and checking phase times in auto-processing
    system of seismic wave data. Zisin (J. Seismol. Soc. Japan) 38, 365-379.
    """
    x = np.asarray(values, dtype=np.float64)
    n = x.size
    if n < 2 * _MIN_PART:
        raise ValueError(f"aic_curve needs at least {2 * _MIN_PART} samples, got {n}")
    if not np.all(np.isfinite(x)):
        raise ValueError("aic_curve: the window holds NaN or inf; pick on a gap-free window")
    x = x - x.mean()
    c1 = np.concatenate(([0.0], np.cumsum(x)))
    c2 = np.concatenate(([0.0], np.cumsum(x * x)))
    k = np.arange(n + 1, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        var_before = c2 / k - (c1 / k) ** 2
        m = n - k
        var_after = (c2[-1] - c2) / m - ((c1[-1] - c1) / m) ** 2
    floor = max(float(np.var(x)), 1e-300) * 1e-12
    var_before = np.maximum(var_before, floor)
    var_after = np.maximum(var_after, floor)
    aic = np.full(n + 1, np.inf)
    ok = slice(_MIN_PART, n - _MIN_PART + 1)
    aic[ok] = k[ok] * np.log(var_before[ok]) + (n - k[ok] - 1) * np.log(var_after[ok])
    return aic[:n]


def aic_support_halfwidth(aic: np.ndarray, k_min: int, delta: float = AIC_SUPPORT_DELTA) -> float:
    """Half-width of the run of splits around the minimum within ``delta`` of it [samples].

    Notes
    -----
    Splits whose AIC lies within 2 of the minimum have substantial support (Burnham &
    Anderson, *Model Selection and Multimodel Inference*, 2nd ed., 2002, sec. 2.6, from
    memory); for a Gaussian profile a rise of 2 in :math:`-2\\log L` is reached at
    :math:`\\sqrt{2}` standard deviations, so ``halfwidth / sqrt(2)`` is taken as one
    standard uncertainty. A sharp front gives a narrow well, a gradual front in noise a
    broad one.
    """
    level = aic[k_min] + delta
    lo = k_min
    while lo - 1 >= 0 and aic[lo - 1] <= level:
        lo -= 1
    hi = k_min
    while hi + 1 < aic.size and aic[hi + 1] <= level:
        hi += 1
    return 0.5 * (hi - lo)


def _detrend_from_quiet(x: np.ndarray, quiet_samples: int) -> np.ndarray:
    """Subtract the straight line fitted to the first ``quiet_samples`` samples."""
    if quiet_samples < 4:
        return x - median(x[: max(quiet_samples, 1)])
    t = np.arange(quiet_samples, dtype=np.float64)
    slope, intercept = line_fit(t, x[:quiet_samples])
    return x - (intercept + slope * np.arange(x.size))


def _robust_noise(x: np.ndarray) -> float:
    """Noise deviation from the MAD of the first difference (white-noise scaling)."""
    if x.size < 3:
        return float(np.std(x)) if x.size > 1 else 0.0
    d = np.diff(x)
    return float(1.4826 * median_abs_deviation(d) / math.sqrt(2.0))


def refine_onset_hinge(
    values: np.ndarray, aic_index: int, baseline: float, noise_sigma: float
) -> tuple[float, float, float]:
    """Sub-sample break point of a flat-then-linear fit around an AIC pick.

    Parameters
    ----------
    values : numpy.ndarray
        Detrended window.
    aic_index : int
        First post-onset sample from :func:`aic_curve`.
    baseline : float
        Level before the onset (input units).
    noise_sigma : float
        Pre-onset noise deviation (input units).

    Returns
    -------
    index, slope, uncertainty_samples : float
        Break point [samples], slope after it [units/sample], standard uncertainty [samples].

    Notes
    -----
    Model: :math:`y_n = b + m \\max(0, n - \\tau)` with the baseline :math:`b` known and
    :math:`m` solved by least squares for each :math:`\\tau`; :math:`\\tau` minimises the
    residual sum of squares (Hinkley 1969). The fit spans a few samples before the pick and
    the rise up to a part of the first front, where a straight line is a fair model. When the
    rise lies within one sample the break is only known to lie in the interval before the
    first changed sample; its centre is returned with a uniform-interval uncertainty of
    :math:`1/\\sqrt{12}` sample. Otherwise the uncertainty combines the time the front takes
    to rise by one noise deviation, :math:`\\sigma / m`, that quantisation term, and a
    shape term of ``RISE_SHAPE_FRACTION`` of the fitted rise's length in samples (a gradual
    front leaves the noise later than it leaves the baseline; a straight line through a
    curved rise moves the break). The fit spans the rise up to ``HINGE_FIT_FRACTION`` of
    the first front.

    References
    ----------
    Hinkley, D. V. (1969). Inference about the intersection in two-phase regression.
    Biometrika 56(3), 495-504.
    """
    y = np.asarray(values, dtype=np.float64) - baseline
    n = y.size
    k0 = int(np.clip(aic_index, 1, n - 1))
    look = moving_mean_centred(y[k0 : min(n, k0 + 64)], DIRECTION_MEAN_SAMPLES)
    direction = 1.0 if look[np.argmax(np.abs(look))] >= 0 else -1.0
    y = direction * y
    local_peak = float(np.max(y[k0 : min(n, k0 + 64)]))
    # the first changed sample: walk back from the pick while the samples, or the next
    # earlier pair, stand above the noise
    first = k0
    threshold = 3.0 * noise_sigma
    earliest = max(1, k0 - HINGE_MAX_SAMPLES)
    while first - 1 > earliest and (y[first - 1] > threshold or (first > 2 and y[first - 2] > threshold)):
        first -= 1
    half = np.flatnonzero(y[first:] >= HINGE_FIT_FRACTION * local_peak)
    stop = first + (int(half[0]) if half.size else 0) + 1
    stop = int(min(max(stop, first + 1), n, first + HINGE_MAX_SAMPLES))
    rising = stop - first
    lead = max(4, 2 * rising)
    start = max(0, first - lead)
    t = np.arange(start, stop, dtype=np.float64)
    seg = y[start:stop]
    if rising <= 1:
        index = first - 0.5
        slope = float(y[first])
        return float(index), direction * slope, 1.0 / math.sqrt(12.0)
    low = max(float(start), first - 1.5 - min(rising, lead - 1))
    grid = np.linspace(low, stop - 1.0, min(int(round((stop - 1.0 - low) * 40)) + 2, 4000))
    h = np.maximum(0.0, t[None, :] - grid[:, None])
    hh = np.einsum("ij,ij->i", h, h)
    ok = hh > 0
    slopes = np.where(ok, (h @ seg) / np.where(ok, hh, 1.0), 0.0)
    rss = np.where(ok, np.sum((seg[None, :] - slopes[:, None] * h) ** 2, axis=1), np.inf)
    best = int(np.argmin(rss))
    best_tau, best_m = float(grid[best]), float(slopes[best])
    jitter = noise_sigma / best_m if best_m > 0 else 1.0
    shape = RISE_SHAPE_FRACTION * rising  # a curved rise biases the straight-line break
    uncertainty = math.sqrt(jitter**2 + 1.0 / 12.0 + shape**2)
    return best_tau, direction * best_m, uncertainty


def pick_onset(
    values: np.ndarray,
    sample_interval_s: float,
    *,
    quiet_samples: int | None = None,
    cusum_drift_sigmas: float = CUSUM_DRIFT_SIGMAS,
) -> OnsetPick:
    """Onset of a pressure front in a window, to a fraction of a sample.

    Parameters
    ----------
    values : numpy.ndarray
        The window: quiet samples first, the front somewhere after them, no NaN.
    sample_interval_s : float
        Sampling interval [s]; only converts the uncertainty to seconds.
    quiet_samples : int, optional
        Leading samples known to precede the front; a straight line fitted to them is
        removed (drift) and they set the noise. Default: the samples before the AIC pick.
    cusum_drift_sigmas : float
        Reference value of the CUSUM that times a gradual front [noise deviations].

    Returns
    -------
    OnsetPick

    Raises
    ------
    ValueError
        Fewer than 6 samples, NaN in the window, a non-positive interval.

    Notes
    -----
    AIC picker (Maeda 1985, Eq. 2) for the sample, then the two-phase regression of
    Hinkley (1969) for the fraction; see :func:`aic_curve` and :func:`refine_onset_hinge`.

    A gradual front (a slow valve closure) leaves its baseline long before it becomes steep,
    and both steps then settle on the steep part. When the break lies more than
    ``GRADUAL_LEAD_SAMPLES`` after the point where the signal left its noise band, the onset
    is the change point of a one-sided CUSUM on the pre-event noise instead (Page 1954;
    :func:`detectors.changepoint.gradual_front_onset`), if that is earlier; its uncertainty
    is at least half the span between the change point and the break: where a gradual front
    begins is only known that well.

    References
    ----------
    Maeda, N. (1985). Zisin 38, 365-379. Hinkley, D. V. (1969). Biometrika 56(3), 495-504.
    Page, E. S. (1954). Continuous inspection schemes. Biometrika 41(1/2), 100-115.
    """
    if not sample_interval_s > 0:
        raise ValueError(f"sample_interval_s = {sample_interval_s!r} must be above 0")
    x = np.asarray(values, dtype=np.float64)
    if quiet_samples is not None and not 0 <= quiet_samples < x.size:
        raise ValueError(
            f"quiet_samples = {quiet_samples} must lie in [0, {x.size}) (the window length)"
        )
    aic = aic_curve(x)
    k0 = int(np.argmin(aic))
    quiet = quiet_samples if quiet_samples else max(k0 - 1, 1)
    y = _detrend_from_quiet(x, min(quiet, k0))
    if quiet_samples:  # re-pick on the detrended window
        aic = aic_curve(y)
        k0 = int(np.argmin(aic))
    pre = y[: quiet_samples] if quiet_samples else y[: max(k0 - 1, 1)]
    baseline = median(pre) if pre.size else 0.0
    noise = _robust_noise(pre)
    index, slope, unc = refine_onset_hinge(y, k0, baseline, noise)
    unc = max(unc, aic_support_halfwidth(aic, k0) / math.sqrt(2.0))
    if slope != 0.0:
        index, unc = _gradual_override(x, quiet, k0, math.copysign(1.0, slope), index, unc,
                                       cusum_drift_sigmas)
    span = np.abs(y[k0 : min(y.size, k0 + 64)] - baseline)
    snr = float(span.max() / noise) if noise > 0 and span.size else math.inf
    return OnsetPick(
        index=float(index),
        aic_index=k0,
        uncertainty_samples=float(unc),
        uncertainty_s=float(unc * sample_interval_s),
        noise_sigma=noise,
        front_slope_per_sample=float(slope),
        snr=snr,
    )


def _gradual_override(x: np.ndarray, quiet: int, k0: int, direction: float, index: float,
                      unc: float, drift_sigmas: float) -> tuple[float, float]:
    """The CUSUM change point in place of the break, for a clearly gradual front."""
    found = gradual_front_onset(x, quiet, k0, direction, drift_sigmas=drift_sigmas)
    if found is None or index - found.leave_index < GRADUAL_LEAD_SAMPLES:
        return index, unc
    if not found.change.index < index:
        return index, unc
    return found.change.index, max(unc, 0.5 * (index - found.change.index))
