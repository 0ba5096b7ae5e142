"""Standard uncertainty of a front delay: Cramer-Rao bound, bootstrap, sampling, shape change.

The parts of a :class:`DelayEstimate`'s uncertainty, each a function of the two front windows:

* :func:`delay_cramer_rao_s`: the bound for a known front shape in white noise (Kay 1993);
* a moving-block bootstrap of the baseline noise re-injected into the windows (Kunsch 1989);
* :func:`sampling_uncertainty_s`: the timing error left by the sampling of a sharp front;
* :func:`shape_misfit_s`: what the change of the front's shape between the sensors (friction,
  dispersion, a partial reflection arriving inside the window) can do to the delay.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fronts import FrontShape, _clearest_slope

__all__ = [
    "DelayEstimate",
    "delay_cramer_rao_s",
    "sampling_uncertainty_s",
    "shape_misfit_s",
]


@dataclass(frozen=True)
class DelayEstimate:
    """Delay of a front from sensor A to sensor B with its standard uncertainty.

    Attributes
    ----------
    delay_s : float
        Positive when the wave reaches B later [s].
    uncertainty_s : float
        Standard uncertainty (k = 1) [s]: ``sqrt(max(cramer_rao_s, bootstrap_s)^2 +
        sampling_s^2 + shape_s^2)``.
    method : str
        ``gcc_<weighting>`` or ``onset``.
    correlation_peak : float
        Normalised correlation at the peak [-] (NaN for ``onset``).
    snr_db : float
        Lower of the two fronts' ``20 log10(|step| / noise std)`` [dB].
    cramer_rao_s, bootstrap_s, sampling_s : float
        The parts of the uncertainty [s].
    shape_s : float
        The part from the change of the front's shape between the sensors [s]
        (:func:`shape_misfit_s`).
    rise_time_s : float
        Slower of the two fronts' 10-90 % rise times [s].
    """

    delay_s: float
    uncertainty_s: float
    method: str
    correlation_peak: float
    snr_db: float
    cramer_rao_s: float
    bootstrap_s: float
    sampling_s: float
    rise_time_s: float
    shape_s: float = 0.0


def _slope_energy(values: np.ndarray, shape: FrontShape, sample_interval_s: float) -> float:
    """Noise-corrected sum of squared slopes over the front region [unit^2 / s^2].

    From first differences; where the noise swamps them, from differences box-smoothed at the
    clearest width ``w`` (a slow front sampled fast). A mean of ``w`` differences of white
    noise has variance ``2 sigma^2 / w^2``, which is taken off each term.
    """
    low = max(0, shape.steepest_index - shape.margin_samples)
    high = shape.steepest_index + shape.margin_samples + 1
    difference = np.diff(values)
    energy = -1.0
    for slope, width in ((difference, 1), _clearest_slope(difference)):
        region = slope[low:high] / sample_interval_s
        noise_part = region.size * 2.0 * shape.noise_std**2 / (width * sample_interval_s) ** 2
        energy = float(np.sum(region**2) - noise_part)
        if energy > 0.0:
            break
    return energy


def delay_cramer_rao_s(values_a: np.ndarray, values_b: np.ndarray, sample_interval_s: float,
                       shape_a: FrontShape, shape_b: FrontShape) -> float:
    """Cramer-Rao lower bound on the standard deviation of the delay [s].

    Notes
    -----
    For a known shape ``s`` in white noise of variance ``sigma^2`` the arrival time obeys
    ``var >= sigma^2 / sum_n s'(n dt)^2`` (Kay 1993, eq. 3.14, from memory); with independent
    noise on both sensors the variances add (Carter 1987, from memory)::

        var(D) >= sigma_A^2 / sum s_A'^2 + sigma_B^2 / sum s_B'^2

    ``sum s'^2`` is estimated over the front region from smoothed first differences, less the
    noise's expected share. 0 (no bound known; the bootstrap then stands alone) when no slope
    energy remains above the noise.

    References
    ----------
    .. [1] Kay, S. M. "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, eq. 3.14.
    .. [2] Carter, G. C. "Coherence and time delay estimation", Proc. IEEE 75(2), 1987.
    """
    variance = 0.0
    for values, shape in ((values_a, shape_a), (values_b, shape_b)):
        energy = _slope_energy(np.asarray(values, dtype=float), shape, sample_interval_s)
        if energy <= 0.0:
            return 0.0
        variance += shape.noise_std**2 / energy
    return float(np.sqrt(variance))


def sampling_uncertainty_s(rise_samples: float, sample_interval_s: float) -> float:
    """Residual timing error from the sampling of a front [s].

    Parameters
    ----------
    rise_samples : float
        The faster of the two fronts' measured 10-90 % rise times [samples].
    sample_interval_s : float
        [s]

    Notes
    -----
    A front that rises within about a sample is not resolved: where it sits between two
    samples cannot be seen, and each arrival is only known to a uniform +-dt/2, ``dt/sqrt(6)``
    for the difference of two (rectangular distribution, JCGM 100:2008 sec. 4.3.7, from
    memory). Sub-sample interpolation removes this as the front is resolved. Measured on
    noiseless fronts (``bench_wavespeed.py --sampling``), RMS error of the GCC lag against the
    true 10-90 % rise: 0.41 samples at 0.05, 0.21 at 0.5, 0.03-0.08 at 1, 0.01-0.02 at 1.5-2;
    the *measured* rise of a sharp step reads 0.8-1.6 samples depending on its phase. Hence,
    conservatively, with ``r`` the measured rise [samples]::

        sigma = dt (0.01 + clip(2 - r, 0, 1) / sqrt(6))
    """
    ramp = float(np.clip(2.0 - rise_samples, 0.0, 1.0))
    return float(sample_interval_s * (_SAMPLING_FLOOR + ramp / np.sqrt(6.0)))


#: Interpolation and taper bias of resolved fronts, measured [samples].
_SAMPLING_FLOOR = 0.01


def _resample_noise(residuals: np.ndarray, noise_std: float, n: int, rows: int,
                    rng: np.random.Generator) -> np.ndarray:
    """``rows`` noise records of ``n`` samples: a moving-block bootstrap of baseline residuals
    (Kunsch 1989), Gaussian if too few."""
    if residuals.size < 16:
        return rng.normal(0.0, noise_std, (rows, n))
    block = max(1, int(round(residuals.size ** (1.0 / 3.0))))
    starts = rng.integers(0, residuals.size - block + 1, size=(rows, n // block + 1))
    index = (starts[:, :, None] + np.arange(block)).reshape(rows, -1)[:, :n]
    return residuals[index]


def _bootstrap_std(estimate_rows, values_a, values_b, shape_a, shape_b, n_bootstrap, seed):
    """Standard deviation of the replicated estimates [unit of ``estimate_rows``].

    ``estimate_rows(rows_a, rows_b)`` estimates every replicate (one per row) at once and
    returns NaN where one fails; the noise of all A's replicates is drawn first, then B's.
    """
    if n_bootstrap < 2:
        return 0.0
    rng = np.random.default_rng(seed)
    noisy_a = values_a + _resample_noise(shape_a.noise_residuals, shape_a.noise_std,
                                         values_a.size, n_bootstrap, rng)
    noisy_b = values_b + _resample_noise(shape_b.noise_residuals, shape_b.noise_std,
                                         values_b.size, n_bootstrap, rng)
    draws = np.asarray(estimate_rows(noisy_a, noisy_b), dtype=float)
    finite = draws[np.isfinite(draws)]
    return float(np.std(finite, ddof=1)) if finite.size >= 2 else float("inf")


def _check_interval(sample_interval_s: float) -> None:
    if not (np.isfinite(sample_interval_s) and sample_interval_s > 0):
        raise ValueError(f"sample_interval_s={sample_interval_s!r} must be a positive number "
                         "of seconds")


def _combine(delay_samples, dt, offset_b_s, method, peak, shapes, crb_s, boot_samples, rises,
             shape_s=0.0):
    sampling_s = sampling_uncertainty_s(min(rises), dt)
    boot_s = boot_samples * dt
    return DelayEstimate(
        delay_s=float(offset_b_s + delay_samples * dt),
        uncertainty_s=float(np.sqrt(max(crb_s, boot_s) ** 2 + sampling_s**2 + shape_s**2)),
        method=method, correlation_peak=float(peak),
        snr_db=min(shape.snr_db for shape in shapes), cramer_rao_s=crb_s, bootstrap_s=boot_s,
        sampling_s=sampling_s, rise_time_s=max(rises) * dt, shape_s=float(shape_s))


def shape_misfit_s(values_a: np.ndarray, values_b: np.ndarray, lag_samples: float,
                   sample_interval_s: float, shape_a: FrontShape, shape_b: FrontShape) -> float:
    """Delay uncertainty from the change of the front's shape between two sensors [s].

    Parameters
    ----------
    values_a, values_b : numpy.ndarray
        The two front windows, equally long and sampled [unit of the windows].
    lag_samples : float
        Estimated lag of B behind A within the windows [samples].
    sample_interval_s : float
        [s]
    shape_a, shape_b : FrontShape
        From :func:`detectors.fronts.locate_front`.

    Returns
    -------
    float
        Standard uncertainty [s]; 0 when the aligned fronts agree to within the noise.

    Notes
    -----
    Window B is shifted back by the lag (linear interpolation) and fitted to A by gain,
    offset and trend over A's front region (twice its half-width either side of the
    steepest slope). The residual ``r`` beyond the expected noise is shape the delay cannot
    explain. A front ``s`` distorted by ``r`` moves the least-squares delay by ``-sum r s' /
    sum s'^2`` (first-order perturbation of the matched filter, Kay 1993, sec. 3.11, from
    memory); the part of ``r`` that looks like a shift is absorbed into the estimate and
    cannot be seen, so its size is bounded by Cauchy-Schwarz from the part that can::

        u_shape = dt sqrt(max(0, sum r^2 - m sigma_r^2) / sum (Delta s)^2)

    with ``m`` samples in the region, ``sigma_r^2 = sigma_A^2 + g^2 kappa sigma_B^2`` the
    noise expected in the residual (``kappa`` the variance kept by the interpolation) and
    ``sum (Delta s)^2`` the noise-corrected slope energy of A per sample. The bound is
    conservative: it treats the whole unexplained misfit as if it were aligned with the
    slope. Where the fronts are alike (a clean step seen twice) it vanishes.
    """
    a = np.asarray(values_a, dtype=float)
    b = np.asarray(values_b, dtype=float)
    index = np.arange(a.size, dtype=float)
    shifted = np.interp(index + lag_samples, index, b, left=np.nan, right=np.nan)
    reach = 2 * max(shape_a.margin_samples, 2)
    low = max(0, shape_a.steepest_index - reach)
    high = min(a.size, shape_a.steepest_index + reach + 1)
    region = np.arange(low, high)
    region = region[np.isfinite(shifted[region])]
    if region.size < 8:
        return 0.0
    design = np.column_stack([shifted[region], np.ones(region.size), region - region.mean()])
    coefficients, *_ = np.linalg.lstsq(design, a[region], rcond=None)
    residual = a[region] - design @ coefficients
    fraction = (lag_samples % 1.0)
    kappa = (1.0 - fraction) ** 2 + fraction**2
    noise_variance = shape_a.noise_std**2 + coefficients[0] ** 2 * kappa * shape_b.noise_std**2
    excess = float(np.sum(residual**2) - (region.size - 3) * noise_variance)
    slope_energy = _slope_energy(a, shape_a, sample_interval_s) * sample_interval_s**2
    if excess <= 0.0 or slope_energy <= 0.0:
        return 0.0
    return float(sample_interval_s * np.sqrt(excess / slope_energy))

