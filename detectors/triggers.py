"""The cheap pass: per-sensor triggers over a whole screening window.

One compiled pass over the samples estimates, per block of ``block_s``, a robust baseline
(block median), the noise of the signal (MAD of the first difference) and the noise of the
rate statistic (MAD of the ``L``-sample difference). A second pass marks samples where
either

* the change over the rate window, ``|x[i] - x[i-L]|``, exceeds ``noise_multiple`` robust
  deviations of that change (and at least ``min_rate_pa_s * L * dt``), or
* the excursion from the baseline of the preceding ``excursion_window_s`` exceeds
  ``noise_multiple`` noise deviations (and at least ``min_amplitude_pa``),

and merges marks closer than ``merge_gap_s`` into :class:`Episode` records. Only episodes
are handed on to the detailed analysis. NaN samples never trigger and a difference that
spans a NaN is skipped, so nothing is interpolated across a gap.

The robust scale is the median absolute deviation, ``sigma = 1.4826 MAD`` for Gaussian
noise (Hampel, "The influence curve and its role in robust estimation", J. Am. Stat. Assoc.
69(346), 1974); for white noise the first difference has ``sqrt(2)`` times the signal's
deviation. The trigger is an amplitude-and-rate form of the short-term/long-term detector
(Allen, "Automatic earthquake recognition and timing from single traces", Bull. Seismol.
Soc. Am. 68(5), 1978).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

from .params import DetectionParams

__all__ = ["Episode", "SensorScreen", "screen_segment", "block_statistics", "MAD_TO_SIGMA"]

#: Samples per block that the medians look at (evenly strided) [-].
STAT_SAMPLES = 24

#: Gaussian consistency factor of the MAD [-] (Hampel 1974).
MAD_TO_SIGMA = 1.4826


@dataclass(frozen=True)
class Episode:
    """A run of trigger marks on one sensor.

    Attributes
    ----------
    start, stop : int
        First marked sample and one past the last marked sample (segment-relative indices
        are converted to trace indices by :func:`screen_segment`).
    flat_line : bool
        True for a run of identical values, not a trigger.
    """

    start: int
    stop: int
    flat_line: bool = False


@dataclass(frozen=True)
class SensorScreen:
    """Outcome of the cheap pass over one contiguous segment.

    Attributes
    ----------
    episodes : tuple of Episode
        In time order, trace indices.
    block_size : int
        Samples per block [-].
    block_median_pa : numpy.ndarray
        Median of each block (NaN where the block has too few valid samples) [Pa].
    noise_sigma_pa : numpy.ndarray
        Smoothed robust noise deviation of the signal per block [Pa].
    rate_lag : int
        ``L``, the samples of the rate window [-].
    offset : int
        Trace index of the segment's first sample.
    """

    episodes: tuple[Episode, ...]
    block_size: int
    block_median_pa: np.ndarray
    noise_sigma_pa: np.ndarray
    rate_lag: int
    offset: int

    def noise_at(self, index: int) -> float:
        """Noise deviation at a trace index [Pa]."""
        j = (index - self.offset) // self.block_size
        j = int(np.clip(j, 0, self.noise_sigma_pa.size - 1))
        return float(self.noise_sigma_pa[j])


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


@numba.njit(cache=True, nogil=True)
def _rolling_nanmedian_kernel(x, before, after):  # pragma: no cover - compiled
    n = x.size
    out = np.full(n, np.nan)
    buf = np.empty(max(before + after + 1, MEDIAN_BUFFER))
    for i in range(n):
        m = 0
        for j in range(max(0, i - before), min(n, i + after + 1)):
            if not np.isnan(x[j]):
                buf[m] = x[j]
                m += 1
        if m > 0:
            out[i] = _median_inplace(buf, m)
    return out


@numba.njit(cache=True, nogil=True)
def _block_statistics(values, lag, block, stride):  # pragma: no cover - compiled
    n = values.size
    n_blocks = (n + block - 1) // block
    medians = np.full(n_blocks, np.nan)
    mad_diff = np.full(n_blocks, np.nan)
    mad_lag = np.full(n_blocks, np.nan)
    size = max(block // stride + 1, MEDIAN_BUFFER)
    buf_v = np.empty(size)
    buf_d = np.empty(size)
    buf_l = np.empty(size)
    need = max(2, (block // 4) // stride)
    for j in range(n_blocks):
        a = j * block
        b = min(a + block, n)
        nv = 0
        nd = 0
        nl = 0
        for i in range(a, b, stride):
            x = values[i]
            if np.isnan(x):
                continue
            buf_v[nv] = x
            nv += 1
            if i >= 1 and not np.isnan(values[i - 1]):
                buf_d[nd] = x - values[i - 1]
                nd += 1
            if i >= lag and not np.isnan(values[i - lag]):
                buf_l[nl] = x - values[i - lag]
                nl += 1
        if nv >= need:
            medians[j] = _median_inplace(buf_v, nv)
        if nd >= need:
            mad_diff[j] = _mad_inplace(buf_d, nd)
        if nl >= need:
            mad_lag[j] = _mad_inplace(buf_l, nl)
    return medians, mad_diff, mad_lag


@numba.njit(cache=True, nogil=True)
def _mark_episodes(values, lag, block, rate_thr, base, exc_thr, merge_gap):  # pragma: no cover
    n = values.size
    n_blocks = (n + block - 1) // block
    flat = np.zeros(n_blocks, dtype=np.bool_)
    cap = n // max(merge_gap, 1) + 2
    starts = np.empty(cap, dtype=np.int64)
    stops = np.empty(cap, dtype=np.int64)
    count = 0
    open_ep = False
    last = -1
    for j in range(n_blocks):
        a = j * block
        b = min(a + block, n)
        r_thr = rate_thr[j]
        e_thr = exc_thr[j]
        centre = base[j]
        use_base = not np.isnan(centre)
        n_diff = 0
        nonzero = False
        for i in range(max(a, 1), b):
            x = values[i]
            d1 = x - values[i - 1]
            if d1 == d1:
                n_diff += 1
                if d1 != 0.0:
                    nonzero = True
            if i < lag or x != x:
                continue
            d = x - values[i - lag]
            hit = abs(d) > r_thr  # False when the lagged sample is NaN
            if not hit and use_base:
                hit = abs(x - centre) > e_thr
            if not hit:
                continue
            if open_ep and i - last > merge_gap:
                stops[count] = last + 1
                count += 1
                open_ep = False
            if not open_ep:
                starts[count] = max(i - lag, 0)
                open_ep = True
            last = i
        flat[j] = n_diff >= block // 2 and not nonzero
    if open_ep:
        stops[count] = last + 1
        count += 1
    return starts[:count], stops[:count], flat


def _rolling_nanmedian(x: np.ndarray, width: int, centred: bool) -> np.ndarray:
    """Median over ``width`` blocks (centred, or the ``width`` blocks before), NaN-aware."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    if centred:
        return _rolling_nanmedian_kernel(x, width // 2, width - width // 2 - 1)
    shifted = _rolling_nanmedian_kernel(x, width - 1, 0)
    return np.concatenate(([np.nan], shifted[:-1])) if x.size else shifted


def block_statistics(values: np.ndarray, lag: int, block: int):
    """Per-block median, MAD of the first difference and MAD of the ``lag`` difference.

    Parameters
    ----------
    values : numpy.ndarray
        float64 samples, NaN for gaps [Pa].
    lag : int
        Samples of the rate difference (at least 1).
    block : int
        Samples per block (at least 8).

    Returns
    -------
    medians, mad_diff, mad_lag : numpy.ndarray
        [Pa] per block; NaN where a block has fewer than a quarter of valid samples.
    Notes
    -----
    The medians use at most :data:`STAT_SAMPLES` evenly strided samples of each block: the
    noise is smoothed over ``noise_blocks`` blocks later, so
    a few hundred differences set each estimate, and the pass stays cheap. The MAD of a
    small sample is biased low by a few per cent (Croux & Rousseeuw, "Time-efficient
    algorithms for two highly robust estimators of scale", 1992): the conservative side for
    a trigger.
    """
    if lag < 1 or block < 8:
        raise ValueError(f"lag = {lag} must be >= 1 and block = {block} must be >= 8 samples")
    stride = max(1, block // STAT_SAMPLES)
    return _block_statistics(np.ascontiguousarray(values, dtype=np.float64), lag, block, stride)


def _samples(span_s: float, dt_s: float, minimum: int) -> int:
    return max(minimum, int(round(span_s / dt_s)))


def screen_segment(
    values: np.ndarray, sample_interval_s: float, params: DetectionParams, offset: int = 0
) -> SensorScreen:
    """Run the cheap pass over one contiguous (no time gap) segment of a pressure channel.

    Parameters
    ----------
    values : numpy.ndarray
        Gauge pressure [Pa], NaN for missing samples.
    sample_interval_s : float
        Sampling interval [s].
    params : DetectionParams
    offset : int
        Trace index of ``values[0]``; episodes are returned in trace indices.

    Returns
    -------
    SensorScreen
    """
    if not sample_interval_s > 0:
        raise ValueError(f"sample_interval_s = {sample_interval_s!r} must be above 0")
    dt = float(sample_interval_s)
    lag = _samples(params.rate_window_s, dt, 1)
    block = _samples(params.block_s, dt, 8)
    medians, mad_diff, mad_lag = block_statistics(values, lag, block)
    noise_sigma = _rolling_nanmedian(MAD_TO_SIGMA * mad_diff / np.sqrt(2.0), params.noise_blocks, True)
    lag_sigma = _rolling_nanmedian(MAD_TO_SIGMA * mad_lag, params.noise_blocks, True)
    noise_sigma = np.nan_to_num(noise_sigma, nan=0.0)
    lag_sigma = np.nan_to_num(lag_sigma, nan=0.0)
    span_s = lag * dt
    rate_thr = np.maximum(
        params.noise_multiple * lag_sigma,
        min(params.min_rate_pa_s * span_s, 0.5 * params.min_amplitude_pa),
    )
    exc_blocks = max(3, int(round(params.excursion_window_s / (block * dt))))
    base = _rolling_nanmedian(medians, exc_blocks, centred=False)
    exc_thr = np.maximum(params.noise_multiple * noise_sigma, params.min_amplitude_pa)
    merge_gap = _samples(params.merge_gap_s, dt, 1)
    starts, stops, flat = _mark_episodes(
        np.ascontiguousarray(values, dtype=np.float64), lag, block, rate_thr, base, exc_thr, merge_gap
    )
    episodes = [Episode(int(a) + offset, int(b) + offset) for a, b in zip(starts, stops)]
    episodes += _flat_line_episodes(flat, noise_sigma, block, dt, params, offset, values.size)
    episodes.sort(key=lambda e: e.start)
    return SensorScreen(tuple(episodes), block, medians, noise_sigma, lag, offset)


def _flat_line_episodes(flat, noise_sigma, block, dt, params, offset, n) -> list[Episode]:
    """Runs of flat blocks lasting ``flatline_min_s`` on a channel that otherwise shows noise."""
    if flat.size == 0 or not np.any(flat):
        return []
    if not np.median(noise_sigma[~flat]) > 0 if np.any(~flat) else True:
        return []  # a channel that never shows noise (coarse quantisation) is not stuck
    min_blocks = max(1, int(np.ceil(params.flatline_min_s / (block * dt))))
    edges = np.diff(np.concatenate(([0], flat.astype(np.int8), [0])))
    run_starts = np.flatnonzero(edges == 1)
    run_stops = np.flatnonzero(edges == -1)
    out = []
    for a, b in zip(run_starts, run_stops):
        if b - a >= min_blocks:
            out.append(Episode(int(a * block) + offset, int(min(b * block, n)) + offset, True))
    return out
