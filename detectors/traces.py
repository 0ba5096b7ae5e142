"""A sensor's samples over a screening window: the data model the detectors read.

A :class:`SensorTrace` holds one channel in SI units with UTC nanosecond timestamps. It may
be regular (a 100 Hz capture) or irregular (a SCADA export), and may have gaps: a NaN value
or a jump in the timestamps. The detectors never interpolate across a gap.

Low-level functions count samples; this module converts between samples and time once.

>>> import numpy as np
>>> t = np.arange(5, dtype=np.int64) * 10_000_000          # 100 Hz
>>> trace = SensorTrace("PT1", "pressure", t, np.array([1.0, 2.0, np.nan, 4.0, 5.0]))
>>> trace.sample_interval_s
0.01
>>> trace.time_at_index_ns(1.5)      # between samples 1 and 2: 15 ms after the start
15000000
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numba
import numpy as np

from .small_stats import median

__all__ = ["SensorTrace", "TRACE_QUANTITIES", "contiguous_segments"]

TRACE_QUANTITIES = ("pressure", "flow", "pump_status", "valve_position")

#: A step in the timestamps longer than this many median intervals is a gap [-].
GAP_FACTOR = 2.5


@dataclass(frozen=True)
class SensorTrace:
    """One channel's samples in SI units.

    Parameters
    ----------
    sensor_id : str
    quantity : str
        One of :data:`TRACE_QUANTITIES`.
    times_ns : numpy.ndarray
        int64 UTC nanoseconds since the epoch, strictly increasing; may be irregular.
    values : numpy.ndarray
        float64: gauge pressure [Pa], flow [m^3/s], pump run status 0/1 [-] or valve
        opening 0..1 [-]. NaN marks a missing sample.
    clipped : numpy.ndarray or None
        bool, True where the logger marked over-range: the true value is at least
        ``values`` (which then holds the sensor's range).

    Raises
    ------
    ValueError
        Lengths that differ, timestamps not strictly increasing, an unknown quantity.
    """

    sensor_id: str
    quantity: str
    times_ns: np.ndarray
    values: np.ndarray
    clipped: np.ndarray | None = None

    def __post_init__(self) -> None:
        if self.quantity not in TRACE_QUANTITIES:
            raise ValueError(
                f"sensor {self.sensor_id!r}: quantity {self.quantity!r} is not one of "
                f"{TRACE_QUANTITIES}"
            )
        times = np.asarray(self.times_ns)
        if times.dtype != np.int64:
            times = times.astype(np.int64)
        values = np.asarray(self.values, dtype=np.float64)
        if times.ndim != 1 or values.ndim != 1 or times.shape != values.shape:
            raise ValueError(
                f"sensor {self.sensor_id!r}: times_ns ({times.shape}) and values "
                f"({values.shape}) must be 1-D arrays of one length"
            )
        if times.size > 1 and not _strictly_rising(times):
            bad = int(np.argmin(times[1:] > times[:-1]))
            raise ValueError(
                f"sensor {self.sensor_id!r}: times_ns must be strictly increasing; sample "
                f"{bad + 1} is not later than sample {bad}; sort and drop duplicates first"
            )
        clipped = self.clipped
        if clipped is not None:
            clipped = np.asarray(clipped, dtype=bool)
            if clipped.shape != values.shape:
                raise ValueError(
                    f"sensor {self.sensor_id!r}: clipped ({clipped.shape}) must match "
                    f"values ({values.shape})"
                )
        object.__setattr__(self, "times_ns", times)
        object.__setattr__(self, "values", values)
        object.__setattr__(self, "clipped", clipped)

    # -- sampling ------------------------------------------------------------------------
    def __len__(self) -> int:
        return int(self.values.size)

    @cached_property
    def sample_interval_s(self) -> float:
        """Median interval between samples [s]; NaN for fewer than two samples (computed
        once: a trace's arrays are not changed after it is made)."""
        n = self.times_ns.size
        if n < 2:
            return float("nan")
        if n > 20_001:  # a strided look is enough for the median of a long record
            picks = np.linspace(1, n - 1, 10_000).astype(np.int64)
            diffs = self.times_ns[picks] - self.times_ns[picks - 1]
        else:
            diffs = np.diff(self.times_ns)
        return median(diffs) * 1e-9

    def time_at_index_ns(self, index: float) -> int:
        """Time at a fractional sample index, linear between samples [ns]."""
        n = self.times_ns.size
        if n == 0:
            raise ValueError(f"sensor {self.sensor_id!r} has no samples")
        i0 = int(np.clip(np.floor(index), 0, max(n - 2, 0)))
        if n == 1:
            return int(self.times_ns[0])
        frac = float(index) - i0
        t0, t1 = int(self.times_ns[i0]), int(self.times_ns[i0 + 1])
        return int(round(t0 + frac * (t1 - t0)))

    def index_at_time(self, time_ns: int) -> int:
        """Index of the first sample at or after ``time_ns`` (``len`` if none)."""
        return int(np.searchsorted(self.times_ns, time_ns, side="left"))

    def has_clipping(self, start: int, stop: int) -> bool:
        """True where any sample in ``[start, stop)`` is marked clipped."""
        return self.clipped is not None and bool(np.any(self.clipped[start:stop]))


def contiguous_segments(times_ns: np.ndarray, sample_interval_s: float) -> list[tuple[int, int]]:
    """Split sample indices at jumps in the timestamps.

    Parameters
    ----------
    times_ns : numpy.ndarray
        int64 strictly increasing timestamps [ns].
    sample_interval_s : float
        Typical interval [s]; a step longer than ``GAP_FACTOR`` of it is a gap.

    Returns
    -------
    list of (start, stop)
        Half-open index ranges without a time gap inside.
    """
    n = times_ns.size
    if n == 0:
        return []
    limit_ns = GAP_FACTOR * sample_interval_s * 1e9
    breaks = _gap_breaks(np.ascontiguousarray(times_ns, dtype=np.int64), float(limit_ns))
    edges = np.concatenate(([0], breaks, [n]))
    return [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]


@numba.njit(cache=True, nogil=True)
def _strictly_rising(times_ns):  # pragma: no cover - compiled
    """Whether every ``times_ns[i] > times_ns[i-1]``: steps that are not positive counted in
    one branch-free pass over aligned slices (vectorised, no comparison array)."""
    later = times_ns[1:]
    earlier = times_ns[:-1]
    not_rising = 0
    for k in range(later.size):
        not_rising += np.int64(later[k] <= earlier[k])
    return not_rising == 0


@numba.njit(cache=True, nogil=True)
def _gap_breaks(times_ns, limit_ns):  # pragma: no cover - compiled
    """Indices i where ``times_ns[i] - times_ns[i-1]`` exceeds ``limit_ns``: counted in a
    branch-free pass over aligned slices (vectorised), then found where there are any."""
    later = times_ns[1:]
    earlier = times_ns[:-1]
    count = 0
    for k in range(later.size):
        count += np.int64(later[k] - earlier[k] > limit_ns)
    out = np.empty(count, np.int64)
    if count == 0:
        return out
    j = 0
    for k in range(later.size):
        if later[k] - earlier[k] > limit_ns:
            out[j] = k + 1
            j += 1
    return out
