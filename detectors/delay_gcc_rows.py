"""Generalised cross-correlation lags of many pairs of front windows at once.

:func:`gcc_lags_of_rows` is :func:`detectors.delay_gcc.gcc_lag_samples` (Knapp & Carter 1976)
for a 2-D array of window pairs, one pair per row, with the transforms of all rows in one 2-D
FFT; the bootstrap of :func:`detectors.delays.estimate_front_delay` uses it for its replicates.
It agrees with a loop over the single-pair function to rounding.
"""

from __future__ import annotations

import numpy as np
from scipy import fft as sp_fft
from scipy.signal.windows import tukey

from .delay_gcc import (
    DEFAULT_REFINEMENT,
    DEFAULT_WEIGHTING,
    _fourier_refine,
    _weighted_cross_spectrum,
)

__all__ = ["gcc_lags_of_rows"]


def _prepare_rows(values: np.ndarray, weighting: str) -> np.ndarray:
    """:func:`_prepare` applied to each row of a 2-D array (same arithmetic, one pass)."""
    if weighting == "derivative":
        x = np.diff(values, axis=1)
    else:
        x = values - values.mean(axis=1, keepdims=True)
        ramp = np.linspace(0.0, 1.0, x.shape[1])
        x = x - (x[:, :1] + (x[:, -1:] - x[:, :1]) * ramp)
    return x * tukey(x.shape[1], 0.2)


def _weighted_cross_rows(a: np.ndarray, b: np.ndarray, weighting: str, n_fft: int):
    """:func:`_weighted_cross_spectrum` of each row pair, in one 2-D transform."""
    if weighting == "scot":
        return np.stack([_weighted_cross_spectrum(x, y, weighting, n_fft) for x, y in zip(a, b)])
    cross = np.conj(sp_fft.rfft(a, n_fft, axis=1)) * sp_fft.rfft(b, n_fft, axis=1)
    if weighting in ("plain", "derivative"):
        return cross
    magnitude = np.abs(cross)
    floor = 1e-12 * np.maximum(magnitude.max(axis=1, keepdims=True), 1e-300)
    return cross / np.maximum(magnitude, floor)


def _parabolic_offsets(y_before, y_peak, y_after) -> np.ndarray:
    """:func:`parabolic_peak_offset` of arrays of neighbours."""
    curvature = y_before - 2.0 * y_peak + y_after
    with np.errstate(divide="ignore", invalid="ignore"):
        offset = np.clip(0.5 * (y_before - y_after) / curvature, -0.5, 0.5)
    return np.where(curvature < 0.0, offset, 0.0)


def _peak_offsets(neighbours: tuple[np.ndarray, np.ndarray, np.ndarray], refinement: str):
    if refinement != "gaussian":
        return _parabolic_offsets(*neighbours)
    positive = np.minimum(np.minimum(neighbours[0], neighbours[1]), neighbours[2]) > 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        logs = tuple(np.log(np.where(positive, y, 1.0)) for y in neighbours)
    return np.where(positive, _parabolic_offsets(*logs), _parabolic_offsets(*neighbours))


def _gcc_pass_rows(a, b, weighting, refinement, limit) -> np.ndarray:
    """Lags of :func:`_gcc_pass` for each row pair of two 2-D arrays [samples]."""
    prepared_a, prepared_b = _prepare_rows(a, weighting), _prepare_rows(b, weighting)
    n_fft = sp_fft.next_fast_len(2 * prepared_a.shape[1])
    weighted = _weighted_cross_rows(prepared_a, prepared_b, weighting, n_fft)
    correlation = sp_fft.irfft(weighted, n_fft, axis=1)
    lags = np.arange(-limit, limit + 1)
    values = correlation[:, lags % n_fft]
    best = np.argmax(values, axis=1)
    lag = lags[best].astype(float)
    inner = np.flatnonzero((best > 0) & (best < lags.size - 1))
    if inner.size:
        at = best[inner]
        neighbours = tuple(values[inner, at + k] for k in (-1, 0, 1))
        if refinement == "fourier":
            starts = lag[inner] + _parabolic_offsets(*neighbours)
            lag[inner] = [_fourier_refine(weighted[row], n_fft, start)
                          for row, start in zip(inner, starts)]
        else:
            lag[inner] += _peak_offsets(neighbours, refinement)
    return lag


def gcc_lags_of_rows(
    rows_a: np.ndarray,
    rows_b: np.ndarray,
    *,
    weighting: str = DEFAULT_WEIGHTING,
    refinement: str = DEFAULT_REFINEMENT,
    max_lag_samples: float | None = None,
) -> np.ndarray:
    """:func:`gcc_lag_samples` of many window pairs at once (the bootstrap's replicates).

    Parameters
    ----------
    rows_a, rows_b : numpy.ndarray
        2-D, one window pair per row, all rows equally long [any pressure unit].
    weighting, refinement, max_lag_samples
        As for :func:`gcc_lag_samples`.

    Returns
    -------
    numpy.ndarray
        Lag of each row of B behind the same row of A [samples]; NaN where a row is not
        finite (where :func:`gcc_lag_samples` would raise).

    Notes
    -----
    The same two passes as :func:`gcc_lag_samples` (Knapp & Carter 1976), with the
    transforms of all rows in one 2-D FFT; the second pass groups the rows by their
    whole-sample lag, since the aligned overlap depends on it. Agrees with a loop over
    :func:`gcc_lag_samples` to rounding.
    """
    a = np.asarray(rows_a, dtype=float)
    b = np.asarray(rows_b, dtype=float)
    if a.ndim != 2 or a.shape != b.shape:
        raise ValueError(f"rows must be 2-D and of equal shape; got {a.shape} and {b.shape}")
    if a.shape[1] < 16:
        raise ValueError(f"front windows have {a.shape[1]} samples; at least 16 are needed")
    lags = np.full(a.shape[0], np.nan)
    finite = np.flatnonzero(np.all(np.isfinite(a), axis=1) & np.all(np.isfinite(b), axis=1))
    if finite.size == 0:
        return lags
    a, b = a[finite], b[finite]
    size = a.shape[1]
    limit = size // 2 if max_lag_samples is None else int(min(max_lag_samples, size - 2))
    coarse = _gcc_pass_rows(a, b, weighting, refinement, limit)
    result = coarse.copy()
    whole = np.rint(coarse).astype(np.int64)
    for shift in np.unique(whole):
        if shift == 0 or size - abs(shift) < 16:
            continue
        members = np.flatnonzero(whole == shift)
        aligned_a = a[members, max(0, -shift): size - max(0, shift)]
        aligned_b = b[members, max(0, shift): size - max(0, -shift)]
        result[members] = shift + _gcc_pass_rows(aligned_a, aligned_b, weighting, refinement, 2)
    lags[finite] = result
    return lags

