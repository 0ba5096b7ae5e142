"""Statistics of the short arrays the per-event analysis works on: median, MAD, straight line.

The wave-speed and metric steps call these thousands of times a night on windows of tens to
thousands of samples, where numpy's general routines spend most of their time in argument
handling (``np.median`` about 50 us, a degree-1 ``np.polyfit`` about 100 us a call). These
compute the same quantities directly.
"""

from __future__ import annotations

import numba
import numpy as np

from .median_networks import MEDIAN_BUFFER, _median_inplace

__all__ = ["median", "median_abs_deviation", "line_fit"]


@numba.njit(cache=True, nogil=True)
def _finite_copy(x):  # pragma: no cover - compiled
    """A scratch copy of ``x`` (at least ``MEDIAN_BUFFER`` long), or None if it holds a NaN."""
    buf = np.empty(max(x.size, MEDIAN_BUFFER))
    for i in range(x.size):
        if np.isnan(x[i]):
            return None
        buf[i] = x[i]
    return buf


@numba.njit(cache=True, nogil=True)
def _median_copy(x):  # pragma: no cover - compiled
    buf = _finite_copy(x)
    if buf is None:
        return np.nan
    return _median_inplace(buf, x.size)


@numba.njit(cache=True, nogil=True)
def _mad_copy(x):  # pragma: no cover - compiled
    buf = _finite_copy(x)
    if buf is None:
        return np.nan
    centre = _median_inplace(buf, x.size)
    for i in range(x.size):
        buf[i] = abs(x[i] - centre)
    return _median_inplace(buf, x.size)


def median(values) -> float:
    """Median of a 1-D array (NaN if it holds a NaN or is empty), as ``numpy.median``."""
    return float(_median_copy(np.ascontiguousarray(values, dtype=np.float64).ravel()))


def median_abs_deviation(values) -> float:
    """``median(|x - median(x)|)``, unscaled (multiply by 1.4826 for a Gaussian sigma,
    Hampel 1974); NaN if the array holds a NaN or is empty."""
    return float(_mad_copy(np.ascontiguousarray(values, dtype=np.float64).ravel()))


def line_fit(x, y) -> tuple[float, float]:
    """Least-squares straight line ``y = slope x + intercept`` (ordinary least squares, the
    normal equations with centred sums; common practice), as ``numpy.polyfit(x, y, 1)``.

    Raises
    ------
    ValueError
        For fewer than two points or all ``x`` equal.
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    if x.size < 2 or x.size != y.size:
        raise ValueError(f"a line needs at least two (x, y) points of equal count, got "
                         f"{x.size} and {y.size}")
    x_mean, y_mean = x.mean(), y.mean()
    dx = x - x_mean
    sxx = float(dx @ dx)
    if sxx == 0.0:
        raise ValueError("all x are equal: no line can be fitted")
    slope = float(dx @ (y - y_mean)) / sxx
    return slope, float(y_mean - slope * x_mean)
