"""One-pass summaries of long sample arrays, compiled: no temporary array as long as a file.

A night of 100 Hz data is millions of samples a logger; the ingest and the archive ask a few
questions of each array (are the times in order, is there a gap, are values at the range or
missing). Asked one numpy expression at a time, each question allocates and fills an array
as long as the file and reads it back; these kernels answer them in a single read.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["time_step_range", "value_census", "ValueCensus", "rounded_to_float32",
           "float64_copy_census", "scale_to_float32_in_place"]


@numba.njit(cache=True, nogil=True)
def _step_range(times_ns):  # pragma: no cover - compiled
    lowest = np.int64(0)
    highest = np.int64(0)
    for i in range(1, times_ns.size):
        step = times_ns[i] - times_ns[i - 1]
        if i == 1 or step < lowest:
            lowest = step
        if i == 1 or step > highest:
            highest = step
    return lowest, highest


def time_step_range(times_ns: np.ndarray) -> tuple[int, int]:
    """Smallest and largest step ``t[i+1] - t[i]`` of int64 times [ns]; ``(0, 0)`` for fewer
    than two samples. A smallest step above 0 means strictly increasing times."""
    times = np.ascontiguousarray(times_ns, dtype=np.int64)
    lowest, highest = _step_range(times)
    return int(lowest), int(highest)


@numba.njit(cache=True, nogil=True)
def _round_to_float32(values, out):  # pragma: no cover - compiled
    for i in range(values.size):
        out[i] = np.float64(np.float32(values[i]))


def rounded_to_float32(values: np.ndarray) -> np.ndarray:
    """A float64 copy of ``values`` rounded to the nearest float32 (IEEE 754 round to
    nearest even), in one pass: ``values.astype(np.float32).astype(np.float64)`` without
    the intermediate array."""
    x = np.ascontiguousarray(values, dtype=np.float64)
    out = np.empty_like(x)
    _round_to_float32(x, out)
    return out


@numba.njit(cache=True, nogil=True)
def _scale_round(values, factor):  # pragma: no cover - compiled
    for i in range(values.size):
        values[i] = np.float64(np.float32(values[i] * factor))


def scale_to_float32_in_place(values: np.ndarray, factor: float) -> np.ndarray:
    """``values`` times ``factor``, rounded to the nearest float32, written over ``values``
    (a writable float64 array) in one pass; returns ``values``. The same numbers as
    ``rounded_to_float32(values * factor)``: the product is taken in float64 first."""
    if values.dtype != np.float64 or not values.flags.writeable or not values.flags.c_contiguous:
        raise ValueError("scale_to_float32_in_place needs a writable, contiguous float64 array")
    _scale_round(values, float(factor))
    return values


@numba.njit(cache=True, nogil=True)
def _copy_census(values, out, start, top, bottom, low_si, high_si, factor,
                 counts):  # pragma: no cover - compiled
    """Copy ``values`` to ``out[start:]`` (``out`` None: no copy) and add their counts (nan,
    +inf, -inf, at top, at bottom, implausible) to ``counts``. Without branches, so the
    loop vectorises: a NaN fails every comparison and counts only as NaN."""
    n_nan = 0
    n_pos_inf = 0
    n_neg_inf = 0
    n_top = 0
    n_bottom = 0
    n_implausible = 0
    for i in range(values.size):
        x = np.float64(values[i])
        if out is not None:
            out[start + i] = x
        n_nan += x != x
        n_pos_inf += x == np.inf
        n_neg_inf += x == -np.inf
        n_top += x >= top
        n_bottom += x <= bottom
        si = x * factor
        n_implausible += (si < low_si) | (si > high_si)
    counts[0] += n_nan
    counts[1] += n_pos_inf
    counts[2] += n_neg_inf
    counts[3] += n_top
    counts[4] += n_bottom
    counts[5] += n_implausible


class ValueCensus:
    """Counts over one value column (see :func:`value_census`)."""

    __slots__ = ("n_nan", "n_pos_inf", "n_neg_inf", "n_at_top", "n_at_bottom", "n_implausible")

    def __init__(self, n_nan, n_pos_inf, n_neg_inf, n_at_top, n_at_bottom, n_implausible):
        self.n_nan, self.n_pos_inf, self.n_neg_inf = int(n_nan), int(n_pos_inf), int(n_neg_inf)
        self.n_at_top, self.n_at_bottom = int(n_at_top), int(n_at_bottom)
        self.n_implausible = int(n_implausible)


def value_census(values: np.ndarray, top: float, bottom: float, low_si: float, high_si: float,
                 factor: float) -> ValueCensus:
    """Missing (NaN), infinite, at-or-beyond-range and physically implausible values.

    Parameters
    ----------
    values : numpy.ndarray
        The column as recorded (file units), float32 or float64, NaN for a gap.
    top, bottom : float
        Transducer range in file units (``inf`` and ``-inf`` when not configured).
    low_si, high_si : float
        The physically possible range of the quantity [SI].
    factor : float
        File unit to SI.
    """
    x = np.ascontiguousarray(values)
    if x.dtype not in (np.float32, np.float64):
        x = x.astype(np.float64)
    counts = np.zeros(6, np.int64)
    _copy_census(x, None, 0, float(top), float(bottom), float(low_si), float(high_si),
                 float(factor), counts)
    return ValueCensus(*counts)


def float64_copy_census(chunks, top: float = np.inf, bottom: float = -np.inf,
                        low_si: float = -np.inf, high_si: float = np.inf,
                        factor: float = 1.0) -> tuple[np.ndarray, ValueCensus]:
    """A new float64 array of the concatenated float ``chunks`` (numpy arrays, NaN for a
    gap) and the :func:`value_census` of its values, in one pass over them.

    The arguments after ``chunks`` are those of :func:`value_census`; left at their
    defaults, the census counts only the missing and infinite values.
    """
    arrays = [np.ascontiguousarray(c) if c.dtype in (np.float32, np.float64)
              else np.asarray(c, np.float64) for c in chunks]
    out = np.empty(sum(a.size for a in arrays), dtype=np.float64)
    counts = np.zeros(6, np.int64)
    start = 0
    for array in arrays:
        _copy_census(array, out, start, float(top), float(bottom), float(low_si), float(high_si),
                     float(factor), counts)
        start += array.size
    return out, ValueCensus(*counts)
