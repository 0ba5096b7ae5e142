"""Time delay of a pressure-wave front between two sensors.

Two independent methods work on a pair of equally sampled *front windows*, one per sensor,
each holding a stretch of baseline, the front and a little of what follows:

* :func:`gcc_lag_samples`, generalised cross-correlation (Knapp & Carter 1976) with a
  selectable weighting and sub-sample peak refinement; :func:`gcc_lags_of_rows` does the
  same for many window pairs at once (one 2-D transform; the bootstrap's replicates) and
  agrees with it to rounding;
* :func:`front_crossing_time_s`, the time each front crosses a fixed fraction of its own
  amplitude (the onset-difference method).

:func:`estimate_front_delay` and :func:`estimate_onset_delay` turn either into a
:class:`DelayEstimate` with a standard uncertainty built from the Cramer-Rao bound, a residual
block bootstrap over the window, the sampling interval and the change of the front's shape
between the sensors (see :mod:`detectors.delay_uncertainty`). The correlation itself lives in
:mod:`detectors.delay_gcc` (one pair) and :mod:`detectors.delay_gcc_rows` (many pairs), front
location and level crossings in :mod:`detectors.fronts`; their names are importable from here
too.

Sign convention: the delay is positive when the wave reaches sensor B later than sensor A.

>>> import numpy as np
>>> t = np.arange(200)
>>> a = np.tanh((t - 80.0) / 3.0)
>>> b = np.tanh((t - 83.0) / 3.0)          # B sees the front 3 samples later
>>> lag, _ = gcc_lag_samples(a, b)
>>> lag
3.0

Lengths are in samples in the ``*_samples`` functions and in seconds everywhere else.
"""

from __future__ import annotations

import numpy as np

from .delay_gcc import (
    DEFAULT_REFINEMENT,
    DEFAULT_WEIGHTING,
    GCC_WEIGHTINGS,
    PEAK_REFINEMENTS,
    _check_pair,
    gaussian_peak_offset,
    gcc_lag_samples,
    parabolic_peak_offset,
)
from .delay_gcc_rows import gcc_lags_of_rows
from .delay_uncertainty import (
    DelayEstimate,
    _bootstrap_std,
    _check_interval,
    _combine,
    delay_cramer_rao_s,
    sampling_uncertainty_s,
    shape_misfit_s,
)
from .fronts import FrontShape, front_crossing_samples, locate_front, rise_samples

__all__ = [
    "GCC_WEIGHTINGS",
    "PEAK_REFINEMENTS",
    "DEFAULT_WEIGHTING",
    "DEFAULT_REFINEMENT",
    "parabolic_peak_offset",
    "gaussian_peak_offset",
    "gcc_lag_samples",
    "gcc_lags_of_rows",
    "FrontShape",
    "locate_front",
    "front_crossing_samples",
    "DelayEstimate",
    "delay_cramer_rao_s",
    "sampling_uncertainty_s",
    "shape_misfit_s",
    "estimate_front_delay",
    "estimate_onset_delay",
    "front_shapes",
]


def front_shapes(values_a: np.ndarray, values_b: np.ndarray) -> tuple:
    """``(locate_front(a), locate_front(b))`` of two checked front windows, to hand to both
    :func:`estimate_front_delay` and :func:`estimate_onset_delay`."""
    a, b = _check_pair(values_a, values_b)
    return locate_front(a), locate_front(b)


def estimate_front_delay(
    values_a: np.ndarray,
    values_b: np.ndarray,
    sample_interval_s: float,
    *,
    offset_b_s: float = 0.0,
    weighting: str = DEFAULT_WEIGHTING,
    refinement: str = DEFAULT_REFINEMENT,
    max_lag_s: float | None = None,
    n_bootstrap: int = 100,
    seed: int = 0,
    shapes: tuple | None = None,
) -> DelayEstimate:
    """Delay of the front from sensor A to sensor B by generalised cross-correlation.

    Parameters
    ----------
    values_a, values_b : numpy.ndarray
        Front windows of equal length and sample interval: baseline, front and what follows
        [Pa or any pressure unit].
    sample_interval_s : float
        [s]
    offset_b_s : float
        Start time of window B minus start time of window A [s]; 0 for a common window.
    weighting, refinement : str
        See :func:`gcc_lag_samples`.
    max_lag_s : float, optional
        Largest lag searched beyond ``offset_b_s`` [s]; default half the window.
    n_bootstrap : int
        Replicates of the residual block bootstrap (0 to skip it) [-].
    seed : int
        Seed of the bootstrap's generator, so that results are reproducible.
    shapes : tuple, optional
        ``(locate_front(values_a), locate_front(values_b))`` when the caller has them.

    Returns
    -------
    DelayEstimate
        ``method`` is ``gcc_<weighting>``.

    Notes
    -----
    The bootstrap re-injects noise drawn from the detrended baseline of each window in moving
    blocks (Kunsch 1989, Ann. Statist. 17(3)) and repeats the whole estimate; to first order
    the spread of the replicates is the estimator's own standard deviation, including what
    the Cramer-Rao bound leaves out (an estimator that is not efficient, coloured noise). The
    change of shape between the fronts adds :func:`shape_misfit_s`, which no resampling of
    the noise can reveal.
    """
    _check_interval(sample_interval_s)
    a, b = _check_pair(values_a, values_b)
    max_lag = None if max_lag_s is None else max_lag_s / sample_interval_s

    def lags_of(rows_a, rows_b):
        return gcc_lags_of_rows(rows_a, rows_b, weighting=weighting, refinement=refinement,
                                max_lag_samples=max_lag)

    lag, peak = gcc_lag_samples(a, b, weighting=weighting, refinement=refinement,
                                max_lag_samples=max_lag)
    shapes = shapes or (locate_front(a), locate_front(b))
    crb_s = delay_cramer_rao_s(a, b, sample_interval_s, *shapes)
    boot = _bootstrap_std(lags_of, a, b, *shapes, n_bootstrap, seed)
    rises = (rise_samples(a, shapes[0]), rise_samples(b, shapes[1]))
    shape_s = shape_misfit_s(a, b, lag, sample_interval_s, *shapes)
    return _combine(lag, sample_interval_s, offset_b_s, f"gcc_{weighting}", peak, shapes,
                    crb_s, boot, rises, shape_s)


def estimate_onset_delay(
    values_a: np.ndarray,
    values_b: np.ndarray,
    sample_interval_s: float,
    *,
    offset_b_s: float = 0.0,
    fraction: float = 0.5,
    shapes: tuple | None = None,
) -> DelayEstimate:
    """Delay of the front from sensor A to sensor B from the difference of its arrivals.

    Each front's arrival is the time it crosses ``fraction`` of its own amplitude
    (:func:`front_crossing_samples`), which makes the method blind to a change of amplitude
    between the sensors and independent of the correlation. Same parameters as
    :func:`estimate_front_delay`; ``method`` is ``onset``. The uncertainty combines the two
    crossing uncertainties in quadrature (they play the part of the Cramer-Rao term; the
    bootstrap part is zero) with the sampling and shape-change terms. ``shapes`` as for
    :func:`estimate_front_delay`.
    """
    _check_interval(sample_interval_s)
    a, b = _check_pair(values_a, values_b)
    shapes = shapes or (locate_front(a), locate_front(b))
    crossing_a, sigma_a = front_crossing_samples(a, shapes[0], fraction)
    crossing_b, sigma_b = front_crossing_samples(b, shapes[1], fraction)
    rises = (rise_samples(a, shapes[0]), rise_samples(b, shapes[1]))
    crossing_s = float(np.hypot(sigma_a, sigma_b)) * sample_interval_s
    lag = crossing_b - crossing_a
    shape_s = shape_misfit_s(a, b, lag, sample_interval_s, *shapes)
    return _combine(lag, sample_interval_s, offset_b_s, "onset", np.nan, shapes, crossing_s,
                    0.0, rises, shape_s)
