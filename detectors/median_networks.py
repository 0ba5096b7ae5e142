"""Medians of many short sets at once: sorting networks, compiled.

The cheap pass of the detector takes a median (or a median absolute deviation) of a few dozen
values per block of samples, tens of thousands of times a night per sensor, and rolling
medians over a few dozen blocks. Each median is exact (the same value ``numpy.median``
gives); what differs is how it is found:

- :func:`_median_inplace` sorts one set by a sorting network (up to 32 values, no
  data-dependent branch) or selects by Wirth's algorithm;
- :func:`medians_of_columns` sorts up to :data:`LANES` sets side by side, one set per column
  of a ``(network size, LANES)`` buffer: every compare-exchange of the network is applied to
  all columns in one contiguous loop, which the compiler turns into vector instructions.
  Sets shorter than the network are padded with +inf, which sorts after every value.

Sorting networks: Batcher, "Sorting networks and their applications", AFIPS Spring Joint
Computer Conference, 1968 (odd-even merge sort); Knuth, *The Art of Computer Programming*,
vol. 3, sec. 5.3.4, 1998.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["MEDIAN_BUFFER", "LANES", "NETWORK_SIZES", "network_for", "medians_of_columns",
           "mads_of_columns"]

#: Sets sorted side by side by :func:`medians_of_columns` [-].
LANES = 64

def _batcher_comparators(size: int) -> tuple[np.ndarray, np.ndarray]:
    """Compare-exchange pairs (low, high) of Batcher's odd-even merge sort for ``size`` (a power
    of two) elements (Batcher, "Sorting networks and their applications", AFIPS Spring Joint
    Computer Conference, 1968; 63 pairs for 16, 191 for 32)."""
    pairs = []
    p = 1
    while p < size:
        k = p
        while k >= 1:
            for j in range(k % p, size - k, 2 * k):
                for i in range(min(k, size - j - k)):
                    if (i + j) // (2 * p) == (i + j + k) // (2 * p):
                        pairs.append((i + j, i + j + k))
            k //= 2
        p *= 2
    return np.array([a for a, _ in pairs], np.int64), np.array([b for _, b in pairs], np.int64)


_NET16_LOW, _NET16_HIGH = _batcher_comparators(16)
_NET32_LOW, _NET32_HIGH = _batcher_comparators(32)

#: Smallest buffer for which :func:`_median_inplace` can use the 32-element network [-].
MEDIAN_BUFFER = 32


@numba.njit(cache=True, nogil=True)
def _sort_by_network(buf, n, size, low, high):  # pragma: no cover - compiled
    """Sort ``buf[:n]`` in place with a sorting network for ``size >= n`` elements, padding
    ``buf[n:size]`` with +inf (no data-dependent branch: fast on the short, random blocks
    where selection mispredicts)."""
    for i in range(n, size):
        buf[i] = np.inf
    for c in range(low.size):
        i = low[c]
        j = high[c]
        a = buf[i]
        b = buf[j]
        buf[i] = min(a, b)
        buf[j] = max(a, b)


@numba.njit(cache=True, nogil=True)
def _median_inplace(buf, n):  # pragma: no cover - compiled
    """Median of ``buf[:n]`` (reorders ``buf``, and may use ``buf[n:32]`` as scratch); NaN when
    ``n == 0``. Up to 32 values (and a buffer that long) by a sorting network, else by
    Wirth's selection (Wirth, "Algorithms + Data Structures = Programs", 1976)."""
    if n == 0:
        return np.nan
    if n <= 32 and buf.size >= 32:
        if n <= 16:
            _sort_by_network(buf, n, 16, _NET16_LOW, _NET16_HIGH)
        else:
            _sort_by_network(buf, n, 32, _NET32_LOW, _NET32_HIGH)
        if n % 2 == 1:
            return buf[n // 2]
        return 0.5 * (buf[n // 2 - 1] + buf[n // 2])
    k = n // 2
    lo = 0
    hi = n - 1
    while lo < hi:
        pivot = buf[k]
        i = lo
        j = hi
        while True:
            while buf[i] < pivot:
                i += 1
            while pivot < buf[j]:
                j -= 1
            if i <= j:
                tmp = buf[i]
                buf[i] = buf[j]
                buf[j] = tmp
                i += 1
                j -= 1
            if i > j:
                break
        if j < k:
            lo = i
        if k < i:
            hi = j
    upper = buf[k]
    if n % 2 == 1:
        return upper
    lower = buf[0]
    for i in range(1, k):
        if buf[i] > lower:
            lower = buf[i]
    return 0.5 * (lower + upper)


@numba.njit(cache=True, nogil=True)
def _mad_inplace(buf, n):  # pragma: no cover - compiled
    """Median absolute deviation of ``buf[:n]`` about its median (reorders ``buf``)."""
    centre = _median_inplace(buf, n)
    for i in range(n):
        buf[i] = abs(buf[i] - centre)
    return _median_inplace(buf, n)


_NET64_LOW, _NET64_HIGH = _batcher_comparators(64)

#: The network sizes available to :func:`network_for` [-].
NETWORK_SIZES = (16, 32, 64)


def network_for(n: int) -> tuple[int, np.ndarray, np.ndarray]:
    """The smallest network (size, low, high) that sorts ``n`` values; ValueError above 64."""
    if n <= 16:
        return 16, _NET16_LOW, _NET16_HIGH
    if n <= 32:
        return 32, _NET32_LOW, _NET32_HIGH
    if n <= 64:
        return 64, _NET64_LOW, _NET64_HIGH
    raise ValueError(f"n = {n} values is more than the largest network (64) sorts")


@numba.njit(cache=True, nogil=True)
def _sort_columns(buf, low, high, width):  # pragma: no cover - compiled
    """Sort the first ``width`` columns of ``buf`` (each as long as the network) in place.

    The smaller value is stored as ``min(a, b) + 0.0``: written plainly, the compiler sees
    that the low row keeps its value wherever ``a < b`` and stores it with a masked vector
    store, which made the loop three times slower (measured). Adding zero changes no value
    but -0.0 (to +0.0, equal for every comparison and median)."""
    for c in range(low.size):
        row_low = buf[low[c]]
        row_high = buf[high[c]]
        for lane in range(width):
            a = row_low[lane]
            b = row_high[lane]
            row_low[lane] = min(a, b) + 0.0
            row_high[lane] = max(a, b)


@numba.njit(cache=True, nogil=True)
def medians_of_columns(buf, counts, low, high, width, out):  # pragma: no cover - compiled
    """Median of each column ``buf[:counts[k], k]`` for ``k < width`` into ``out[k]`` (NaN
    where a count is 0); the rows ``counts[k]`` up to the network size must hold +inf.
    Sorts the columns in place."""
    _sort_columns(buf, low, high, width)
    for lane in range(width):
        n = counts[lane]
        if n == 0:
            out[lane] = np.nan
        elif n % 2 == 1:
            out[lane] = buf[n // 2, lane]
        else:
            out[lane] = 0.5 * (buf[n // 2 - 1, lane] + buf[n // 2, lane])


@numba.njit(cache=True, nogil=True)
def mads_of_columns(buf, counts, low, high, width, out):  # pragma: no cover - compiled
    """Median absolute deviation about the median of each column (see
    :func:`medians_of_columns`) into ``out``."""
    medians_of_columns(buf, counts, low, high, width, out)
    size = buf.shape[0]
    for i in range(size):
        for lane in range(width):
            if i < counts[lane]:
                buf[i, lane] = abs(buf[i, lane] - out[lane])
    medians_of_columns(buf, counts, low, high, width, out)
