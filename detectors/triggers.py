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

from .median_networks import (LANES, MEDIAN_BUFFER, NETWORK_SIZES, _median_inplace,
                              medians_of_columns, mads_of_columns, network_for)
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


@numba.njit(cache=True, nogil=True)
def _rolling_nanmedian_kernel(x, before, after):  # pragma: no cover - compiled
    """One median at a time (any window length)."""
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
def _rolling_nanmedian_columns(x, before, after, low, high):  # pragma: no cover - compiled
    """:func:`_rolling_nanmedian_kernel` for windows the network sorts, ``LANES`` at once."""
    n = x.size
    out = np.full(n, np.nan)
    buf = np.empty((np.max(high) + 1, LANES))
    counts = np.zeros(LANES, np.int64)
    medians = np.empty(LANES)
    for first in range(0, n, LANES):
        width = min(LANES, n - first)
        buf[:] = np.inf
        for lane in range(width):
            i = first + lane
            m = 0
            for j in range(max(0, i - before), min(n, i + after + 1)):
                if not np.isnan(x[j]):
                    buf[m, lane] = x[j]
                    m += 1
            counts[lane] = m
        medians_of_columns(buf, counts, low, high, width, medians)
        for lane in range(width):
            out[first + lane] = medians[lane]
    return out


@numba.njit(cache=True, nogil=True)
def _block_statistics(values, lag, block, stride, low, high):  # pragma: no cover - compiled
    """Per block: median of the strided samples, MADs of their first and ``lag`` differences;
    ``LANES`` blocks at a time, each set in a column sorted by the network (low, high)."""
    n = values.size
    n_blocks = (n + block - 1) // block
    medians = np.full(n_blocks, np.nan)
    mad_diff = np.full(n_blocks, np.nan)
    mad_lag = np.full(n_blocks, np.nan)
    size = np.max(high) + 1
    buf_v = np.empty((size, LANES))
    buf_d = np.empty((size, LANES))
    buf_l = np.empty((size, LANES))
    count_v = np.zeros(LANES, np.int64)
    count_d = np.zeros(LANES, np.int64)
    count_l = np.zeros(LANES, np.int64)
    result = np.empty(LANES)
    need = max(2, (block // 4) // stride)
    for first in range(0, n_blocks, LANES):
        width = min(LANES, n_blocks - first)
        buf_v[:] = np.inf
        buf_d[:] = np.inf
        buf_l[:] = np.inf
        for lane in range(width):
            a = (first + lane) * block
            b = min(a + block, n)
            nv = 0
            nd = 0
            nl = 0
            for i in range(a, b, stride):
                x = values[i]
                if np.isnan(x):
                    continue
                buf_v[nv, lane] = x
                nv += 1
                if i >= 1 and not np.isnan(values[i - 1]):
                    buf_d[nd, lane] = x - values[i - 1]
                    nd += 1
                if i >= lag and not np.isnan(values[i - lag]):
                    buf_l[nl, lane] = x - values[i - lag]
                    nl += 1
            count_v[lane] = nv
            count_d[lane] = nd
            count_l[lane] = nl
        medians_of_columns(buf_v, count_v, low, high, width, result)
        for lane in range(width):
            if count_v[lane] >= need:
                medians[first + lane] = result[lane]
        mads_of_columns(buf_d, count_d, low, high, width, result)
        for lane in range(width):
            if count_d[lane] >= need:
                mad_diff[first + lane] = result[lane]
        mads_of_columns(buf_l, count_l, low, high, width, result)
        for lane in range(width):
            if count_l[lane] >= need:
                mad_lag[first + lane] = result[lane]
    return medians, mad_diff, mad_lag


@numba.njit(cache=True, nogil=True)
def _block_census(values, a, b, lag, r_thr, centre, e_thr):  # pragma: no cover - compiled
    """(marks, finite first differences, non-zero ones) of the samples ``a..b-1`` of one
    block. Branch-free over aligned slices, so the loops vectorise; a NaN compares false,
    so a gap neither marks nor counts. ``marks`` is 0 exactly when no sample marks."""
    start = max(a, lag)
    now = values[start:b]
    lagged = values[start - lag:b - lag]
    marks = 0
    for k in range(now.size):
        x = now[k]
        marks += np.int64(abs(x - lagged[k]) > r_thr) + np.int64(abs(x - centre) > e_thr)
    start = max(a, 1)
    now = values[start:b]
    before = values[start - 1:b - 1]
    n_nan = 0
    n_not_zero = 0  # NaN counts as not zero here, and is taken off below
    for k in range(now.size):
        d1 = now[k] - before[k]
        n_nan += np.int64(d1 != d1)
        n_not_zero += np.int64(d1 != 0.0)
    return marks, now.size - n_nan, n_not_zero - n_nan


@numba.njit(cache=True, nogil=True)
def _mark_episodes(values, lag, block, rate_thr, base, exc_thr, merge_gap):  # pragma: no cover
    """Episode starts and stops, and the flat blocks. Each block is first counted by
    :func:`_block_census` (vectorised); only a block with a mark is walked sample by sample
    to open, extend or close episodes, which a block without a mark never does."""
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
        centre = base[j]  # NaN: no baseline yet, the excursion test never marks
        marks, n_diff, n_nonzero = _block_census(values, a, b, lag, r_thr, centre, e_thr)
        flat[j] = n_diff >= block // 2 and n_nonzero == 0
        if marks == 0:
            continue
        for i in range(max(a, lag), b):
            x = values[i]
            hit = abs(x - values[i - lag]) > r_thr or abs(x - centre) > e_thr
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
    if open_ep:
        stops[count] = last + 1
        count += 1
    return starts[:count], stops[:count], flat


def _rolling_nanmedian(x: np.ndarray, width: int, centred: bool) -> np.ndarray:
    """Median over ``width`` blocks (centred, or the ``width`` blocks before), NaN-aware."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    before, after = (width // 2, width - width // 2 - 1) if centred else (width - 1, 0)
    if width <= max(NETWORK_SIZES):
        _, low, high = network_for(width)
        medians = _rolling_nanmedian_columns(x, before, after, low, high)
    else:
        medians = _rolling_nanmedian_kernel(x, before, after)
    if centred or not x.size:
        return medians
    return np.concatenate(([np.nan], medians[:-1]))


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
    _, low, high = network_for(len(range(0, block, stride)))  # at most 47 samples a block
    return _block_statistics(np.ascontiguousarray(values, dtype=np.float64), lag, block, stride,
                             low, high)


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
