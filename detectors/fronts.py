"""Where a step-like pressure front sits in a window, and when it crosses a level.

:func:`locate_front` finds the steepest part of a front at the clearest smoothing scale, its
baseline, plateau and noise; :func:`front_crossing_samples` the sub-sample time at which it
crosses a fraction of its own amplitude. Lengths are in samples throughout.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .small_stats import line_fit, median_abs_deviation
__all__ = ["FrontShape", "locate_front", "front_crossing_samples", "rise_samples"]


@dataclass(frozen=True)
class FrontShape:
    """Where a step-like front sits in a window, and how clean it is.

    Attributes
    ----------
    steepest_index : int
        Middle of the steepest part of the front [samples].
    margin_samples : int
        Half-width of the front region around it [samples].
    baseline, plateau : float
        Mean level just before and just after the front region [unit of the window].
    noise_std : float
        Standard deviation of the noise [unit of the window].
    noise_residuals : numpy.ndarray
        Detrended baseline samples (empty when the baseline is too short).
    n_baseline, n_plateau : int
        Samples averaged into ``baseline`` and ``plateau``.
    """

    steepest_index: int
    margin_samples: int
    baseline: float
    plateau: float
    noise_std: float
    noise_residuals: np.ndarray = field(repr=False)
    n_baseline: int
    n_plateau: int

    @property
    def amplitude(self) -> float:
        """Plateau minus baseline, signed [unit of the window]."""
        return self.plateau - self.baseline

    @property
    def snr_db(self) -> float:
        """``20 log10(|amplitude| / noise_std)`` [dB]."""
        if self.noise_std <= 0:
            return float("inf")
        return float(20.0 * np.log10(max(abs(self.amplitude), 1e-300) / self.noise_std))


def _clearest_slope(difference: np.ndarray) -> tuple[np.ndarray, int]:
    """Box-smoothed slope at the width (3, 9, 27 ... samples) where its peak stands out most.

    The clarity of a width is the peak over the robust spread (MAD) of the smoothed slope: a
    slow front in fast sampling needs more smoothing to rise above the noise.
    """
    best, best_width, best_clarity = difference, 1, -1.0
    width = 3
    while width <= max(3, difference.size // 8):
        smoothed = np.convolve(difference, np.ones(width) / width, mode="same")
        spread = median_abs_deviation(smoothed) + 1e-300
        clarity = float(np.max(np.abs(smoothed)) / spread)
        if clarity > best_clarity:
            best, best_width, best_clarity = smoothed, width, clarity
        width *= 3
    return best, best_width


def locate_front(values: np.ndarray, search: tuple[int, int] | None = None) -> FrontShape:
    """Find the front in a window: steepest slope, its extent, levels either side, noise.

    The front is the middle of the run of samples where the smoothed slope (box of 3, 9, 27 ...
    samples, whichever makes the peak clearest above the noise) is above half its largest
    value within ``search`` (a sample range; default the whole window); its region extends that run by its own width (at least 2 samples)
    on either side. The baseline and
    plateau are means over up to ``max(8, margin)`` samples just outside the region. The noise
    is the standard deviation of the baseline about a fitted straight line when at least 16
    baseline samples exist, else ``MAD(second differences) / (0.6745 sqrt 6)`` over the window.

    Raises
    ------
    ValueError
        When the front lies within 4 samples of either window edge.
    """
    x = np.asarray(values, dtype=float)
    slope, _ = _clearest_slope(np.diff(x))
    lo, hi = (0, slope.size) if search is None else (max(0, search[0]), min(slope.size, search[1]))
    if hi <= lo:
        raise ValueError(f"search range {search} lies outside the {x.size}-sample window")
    peak = lo + int(np.argmax(np.abs(slope[lo:hi])))
    above = np.abs(slope) >= 0.5 * abs(slope[peak])
    left, right = peak, peak
    while left > 0 and above[left - 1]:
        left -= 1
    while right < above.size - 1 and above[right + 1]:
        right += 1
    width = right - left + 1
    start, stop = left - max(2, width), right + 1 + max(2, width)
    peak, margin = (left + right) // 2, (stop - start) // 2
    if start < 4 or x.size - stop < 4:
        raise ValueError(
            f"front at sample {peak} with half-width {margin} is too close to the edge of a "
            f"{x.size}-sample window; widen the window (at least 4 samples of baseline and of "
            "plateau beyond the front)"
        )
    span = max(8, margin)
    before, after = x[max(0, start - span):start], x[stop:stop + span]
    baseline_region = x[:start]
    if baseline_region.size >= 16:
        index = np.arange(baseline_region.size)
        slope, intercept = line_fit(index, baseline_region)
        residuals = baseline_region - (slope * index + intercept)
        noise = float(np.sqrt(np.sum(residuals**2) / (residuals.size - 2)))
    else:
        residuals = np.empty(0)
        second = np.diff(x, 2)
        noise = median_abs_deviation(second) / (0.6745 * np.sqrt(6.0))
    return FrontShape(peak, margin, float(before.mean()), float(after.mean()), noise, residuals,
                      before.size, after.size)


def front_crossing_samples(values: np.ndarray, shape: FrontShape,
                           fraction: float = 0.5) -> tuple[float, float]:
    """Sub-sample time at which a front crosses a fraction of its amplitude.

    Parameters
    ----------
    values : numpy.ndarray
        The window.
    shape : FrontShape
        From :func:`locate_front`.
    fraction : float
        Level as a fraction of the amplitude above the baseline [-], 0 < fraction < 1.

    Returns
    -------
    index : float
        Crossing [samples from the window start], linear interpolation between the samples
        either side of the crossing nearest the steepest slope.
    uncertainty : float
        Standard uncertainty [samples]: noise and level error over the local slope.

    Notes
    -----
    ``sigma_t^2 = sigma^2 (1 + (1-f)^2/n_baseline + f^2/n_plateau) / slope^2`` with the slope
    from a straight line through the four samples around the crossing (first-order error
    propagation, JCGM 100:2008 sec. 5.1, from memory).
    """
    if not 0.0 < fraction < 1.0:
        raise ValueError(f"fraction={fraction!r} must lie strictly between 0 and 1")
    x = np.asarray(values, dtype=float)
    level = shape.baseline + fraction * shape.amplitude
    low = max(0, shape.steepest_index - shape.margin_samples)
    high = min(x.size - 1, shape.steepest_index + shape.margin_samples + 1)
    sign = np.sign(x[low:high + 1] - level)
    crossings = np.nonzero(sign[:-1] * sign[1:] <= 0)[0] + low
    crossings = crossings[x[crossings] != x[crossings + 1]]
    if crossings.size == 0:
        raise ValueError(f"the front never crosses {fraction:.0%} of its amplitude")
    i = int(crossings[np.argmin(np.abs(crossings - shape.steepest_index))])
    index = i + (level - x[i]) / (x[i + 1] - x[i])
    around = np.arange(max(0, i - 1), min(x.size, i + 3))
    slope, _ = line_fit(around, x[around])
    variance = shape.noise_std**2 * (
        1.0 + (1.0 - fraction) ** 2 / shape.n_baseline + fraction**2 / shape.n_plateau)
    return float(index), float(np.sqrt(variance) / max(abs(slope), 1e-300))


def rise_samples(values: np.ndarray, shape: FrontShape) -> float:
    """10-90 % rise time of a front [samples]; 0 when a crossing cannot be found."""
    try:
        t10, _ = front_crossing_samples(values, shape, 0.1)
        t90, _ = front_crossing_samples(values, shape, 0.9)
    except ValueError:
        return 0.0
    return abs(t90 - t10)

