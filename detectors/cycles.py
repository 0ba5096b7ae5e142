"""Pressure cycles of an event for fatigue screening: rainflow counting (ASTM E1049-85).

A surge loads a pipe with a train of pressure cycles. Fatigue of the pipe wall, joints and
fittings depends on the ranges of those cycles and how many there are, not on the peak
alone. :func:`rainflow_cycles` counts them by the rainflow method of ASTM E1049-85
(reapproved 2017), sec. 5.4.4; :func:`pressure_cycle_summary` bins them by range for
storage beside the event.

A hysteresis gate (``hysteresis_pa``) drops reversals smaller than the gate before
counting, so logger noise does not add thousands of tiny cycles (common practice in load
history editing; choose the gate a few noise deviations wide).

The worked example of the standard (sec. 5.4.4, Fig. 6), in load units:

>>> cycles = rainflow_cycles([-2, 1, -3, 5, -1, 3, -4, 4, -2])
>>> sorted((c.range_pa, c.count) for c in cycles)
[(3.0, 0.5), (4.0, 0.5), (4.0, 1.0), (6.0, 0.5), (8.0, 0.5), (8.0, 0.5), (9.0, 0.5)]

Whether a range is harmful is for the pipe's fatigue data, local codes and a licensed
engineer to judge: this is a screening aid.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

__all__ = ["Cycle", "PressureCycleSummary", "reversals", "rainflow_cycles", "pressure_cycle_summary"]


@dataclass(frozen=True)
class Cycle:
    """One counted cycle or half cycle.

    Attributes
    ----------
    range_pa : float
        Peak-to-valley range [Pa] (input units).
    mean_pa : float
        Mean of the peak and the valley [Pa].
    count : float
        1.0 for a full cycle, 0.5 for a half cycle [-].
    start_index, end_index : int
        Sample indices of the two reversals that bound the range [-].
    """

    range_pa: float
    mean_pa: float
    count: float
    start_index: int
    end_index: int


@dataclass(frozen=True)
class PressureCycleSummary:
    """Cycles of an event binned by range (what the service can store per observation).

    Attributes
    ----------
    bin_edges_pa : tuple of float
        Edges of the range bins [Pa]; bin ``i`` holds ranges in ``[edge_i, edge_i+1)``,
        the last bin also its upper edge.
    counts : tuple of float
        Cycles per bin (half cycles count 0.5) [-].
    total_cycles : float
        Sum of ``counts`` [-].
    max_range_pa : float
        Largest range counted [Pa] (0 without cycles).
    hysteresis_pa : float
        Gate applied before counting [Pa].
    n_reversals : int
        Reversals left after the gate [-].
    """

    bin_edges_pa: tuple[float, ...]
    counts: tuple[float, ...]
    total_cycles: float
    max_range_pa: float
    hysteresis_pa: float
    n_reversals: int


def reversals(values, hysteresis_pa: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Peaks and valleys of a history, end points included.

    Parameters
    ----------
    values : array_like
        The history [Pa]; NaN samples are dropped.
    hysteresis_pa : float
        Reversals whose swing to the next reversal is at most this are removed [Pa]
        (0: keep every reversal).

    Returns
    -------
    indices, levels : numpy.ndarray
        Sample indices (into ``values``) and values of the reversals.

    Raises
    ------
    ValueError
        A negative or non-finite ``hysteresis_pa``.

    Notes
    -----
    Plateaus (repeated values) count once; the first and last valid samples are always
    reversals (ASTM E1049-85 sec. 5.4.4 treats the start of the history as a point; the
    `rainflow` package 3.x does the same with the end points).
    """
    if not (math.isfinite(hysteresis_pa) and hysteresis_pa >= 0):
        raise ValueError(f"hysteresis_pa = {hysteresis_pa!r} must be finite and at least 0")
    x = np.asarray(values, dtype=np.float64)
    idx = np.flatnonzero(np.isfinite(x))
    x = x[idx]
    if x.size < 2:
        return idx, x
    keep = np.concatenate(([True], np.diff(x) != 0))
    idx, x = idx[keep], x[keep]
    if x.size < 3:
        return idx, x
    slope = np.sign(np.diff(x))
    turning = np.flatnonzero(slope[1:] != slope[:-1]) + 1
    sel = np.concatenate(([0], turning, [x.size - 1]))
    idx, x = idx[sel], x[sel]
    if hysteresis_pa > 0 and x.size > 2:
        idx, x = _gate(idx, x, hysteresis_pa)
    return idx, x


def _gate(idx: np.ndarray, x: np.ndarray, gate: float) -> tuple[np.ndarray, np.ndarray]:
    """Hysteresis filter: a new reversal needs a swing above ``gate`` from the last one."""
    out_i = np.empty(idx.size + 1, np.int64)
    out_x = np.empty(idx.size + 1)
    n = _gate_kernel(np.ascontiguousarray(idx, dtype=np.int64), np.ascontiguousarray(x, dtype=np.float64),
                     float(gate), out_i, out_x)
    return out_i[:n].copy(), out_x[:n].copy()


@numba.njit(cache=True, nogil=True)
def _gate_kernel(idx, x, gate, out_i, out_x):  # pragma: no cover - compiled
    """The filter in one pass; fills ``out_i``, ``out_x`` and returns how many it kept."""
    out_i[0] = idx[0]
    out_x[0] = x[0]
    n = 1
    direction = 0  # +1 rising, -1 falling, 0 not yet known
    for k in range(1, idx.size):
        v = x[k]
        last = out_x[n - 1]
        if direction == 0:
            if abs(v - last) > gate:
                direction = 1 if v > last else -1
                out_i[n] = idx[k]
                out_x[n] = v
                n += 1
            continue
        if (v - last) * direction >= 0:  # same direction: extend the current swing
            out_i[n - 1] = idx[k]
            out_x[n - 1] = v
        elif abs(v - last) > gate:  # a reversal beyond the gate
            direction = -direction
            out_i[n] = idx[k]
            out_x[n] = v
            n += 1
    if out_i[n - 1] != idx[idx.size - 1]:  # the end point always counts
        out_i[n] = idx[idx.size - 1]
        out_x[n] = x[x.size - 1]
        n += 1
    return n


def rainflow_cycles(values, hysteresis_pa: float = 0.0) -> tuple[Cycle, ...]:
    """Rainflow count of a pressure history (ASTM E1049-85, sec. 5.4.4).

    Parameters
    ----------
    values : array_like
        The history [Pa] (any units; ranges come out in the same).
    hysteresis_pa : float
        Gate applied to the reversals first (see :func:`reversals`) [Pa].

    Returns
    -------
    tuple of Cycle
        In the order the standard counts them.

    Notes
    -----
    With ``X`` the range under consideration (last two reversals) and ``Y`` the previous
    range adjacent to it: while ``X >= Y``, a ``Y`` holding the starting point ``S`` is one
    half cycle and its first point is discarded (``S`` moves on); any other ``Y`` is one
    cycle and both its points are discarded. At the end every range not yet counted is a
    half cycle (ASTM E1049-85, sec. 5.4.4, steps 1 to 6).

    References
    ----------
    ASTM E1049-85 (2017). Standard Practices for Cycle Counting in Fatigue Analysis.
    ASTM International, sec. 5.4.4.
    """
    idx, x = reversals(values, hysteresis_pa)
    stack: list[tuple[int, float]] = []
    cycles: list[Cycle] = []
    for point in zip(idx.tolist(), x.tolist()):
        stack.append(point)
        while len(stack) >= 3:
            (i0, x0), (i1, x1), (_, x2) = stack[-3], stack[-2], stack[-1]
            range_x = abs(x2 - x1)
            range_y = abs(x1 - x0)
            if range_x < range_y:
                break
            if len(stack) == 3:  # Y holds the starting point: half cycle, S moves on
                cycles.append(Cycle(range_y, 0.5 * (x0 + x1), 0.5, i0, i1))
                stack.pop(0)
            else:
                cycles.append(Cycle(range_y, 0.5 * (x0 + x1), 1.0, i0, i1))
                del stack[-3:-1]
    for (i0, x0), (i1, x1) in zip(stack[:-1], stack[1:]):
        cycles.append(Cycle(abs(x1 - x0), 0.5 * (x0 + x1), 0.5, i0, i1))
    return tuple(cycles)


def pressure_cycle_summary(
    values, bin_width_pa: float, hysteresis_pa: float = 0.0, max_bins: int = 200
) -> PressureCycleSummary:
    """Cycles of an event's pressure history binned by range.

    Parameters
    ----------
    values : array_like
        Gauge pressure over the event [Pa] (NaN gaps dropped).
    bin_width_pa : float
        Width of the range bins [Pa], e.g. 50 kPa.
    hysteresis_pa : float
        Gate on the reversals [Pa]; a few noise deviations.
    max_bins : int
        Upper limit on the number of bins [-].

    Returns
    -------
    PressureCycleSummary

    Raises
    ------
    ValueError
        A non-positive bin width, or so many bins that ``max_bins`` is exceeded (widen
        the bins).
    """
    if not (math.isfinite(bin_width_pa) and bin_width_pa > 0):
        raise ValueError(f"bin_width_pa = {bin_width_pa!r} must be above 0, e.g. 50e3 Pa")
    cycles = rainflow_cycles(values, hysteresis_pa)
    n_rev = int(reversals(values, hysteresis_pa)[0].size)
    ranges = np.array([c.range_pa for c in cycles])
    counts = np.array([c.count for c in cycles])
    top = float(ranges.max()) if ranges.size else 0.0
    n_bins = max(1, int(math.floor(top / bin_width_pa)) + 1)
    if n_bins > max_bins:
        raise ValueError(
            f"a largest range of {top:.4g} Pa needs {n_bins} bins of {bin_width_pa:.4g} Pa, "
            f"more than max_bins = {max_bins}; widen bin_width_pa"
        )
    edges = np.arange(n_bins + 1) * bin_width_pa
    which = np.minimum((ranges // bin_width_pa).astype(np.int64), n_bins - 1) if ranges.size else ranges
    binned = np.bincount(which, weights=counts, minlength=n_bins) if ranges.size else np.zeros(n_bins)
    return PressureCycleSummary(
        bin_edges_pa=tuple(float(e) for e in edges),
        counts=tuple(float(c) for c in binned),
        total_cycles=float(counts.sum()),
        max_range_pa=top,
        hysteresis_pa=float(hysteresis_pa),
        n_reversals=n_rev,
    )
