"""Regular sample times stored as runs (start, step, count) instead of one int64 per sample.

A logger samples at a fixed rate: its timestamps are ``start + k * step`` for long stretches,
broken only by gaps, restarts or a clock step. Parquet's encoders spend as long on an int64
time column as on the values themselves (about 45 ms per three million samples with delta
encoding), so a part whose times form at most :data:`MAX_RUNS` runs of one step stores the
runs in its file metadata instead of a ``time_ns`` column; any other part (jittered SCADA
times, more runs) keeps the column. Both kinds are read back to the same int64 array.

The runs are a lossless description: :func:`times_from_runs` of :func:`time_runs` of an
array gives the array back exactly.
"""

from __future__ import annotations

import json

import numba
import numpy as np

__all__ = ["MAX_RUNS", "METADATA_KEY", "time_runs", "times_from_runs", "runs_to_metadata",
           "runs_from_metadata"]

#: Most runs a part may have and still be stored without a time column [-].
MAX_RUNS = 64

#: The Parquet key-value metadata entry that holds a part's time runs.
METADATA_KEY = b"surgesift.time_runs"


@numba.njit(cache=True, nogil=True)
def _runs(times_ns, max_runs):  # pragma: no cover - compiled
    """(starts, steps, counts, n) of the runs of one step, or n = -1 beyond ``max_runs``."""
    starts = np.empty(max_runs, np.int64)
    steps = np.empty(max_runs, np.int64)
    counts = np.empty(max_runs, np.int64)
    n = times_ns.size
    k = 0
    i = 0
    while i < n:
        if k == max_runs:
            return starts, steps, counts, -1
        step = np.int64(0)
        j = i
        if i + 1 < n:
            step = times_ns[i + 1] - times_ns[i]
            j = i + 1
            while j + 1 < n and times_ns[j + 1] - times_ns[j] == step:
                j += 1
        starts[k] = times_ns[i]
        steps[k] = step
        counts[k] = j - i + 1
        k += 1
        i = j + 1
    return starts, steps, counts, k


def time_runs(times_ns: np.ndarray, max_runs: int = MAX_RUNS):
    """The runs of one step that make up ``times_ns``, or None if there are more than
    ``max_runs`` or the times do not rise strictly.

    Parameters
    ----------
    times_ns : numpy.ndarray
        int64 times [ns].
    max_runs : int
        Most runs worth describing [-].

    Returns
    -------
    tuple of three int64 arrays (starts [ns], steps [ns], counts [-]), or None

    Examples
    --------
    >>> starts, steps, counts = time_runs(np.array([0, 10, 20, 30, 100, 110], np.int64))
    >>> starts.tolist(), steps.tolist(), counts.tolist()
    ([0, 100], [10, 10], [4, 2])
    """
    times = np.ascontiguousarray(times_ns, dtype=np.int64)
    starts, steps, counts, n = _runs(times, int(max_runs))
    if n < 0:
        return None
    starts, steps, counts = starts[:n].copy(), steps[:n].copy(), counts[:n].copy()
    lasts = starts + steps * (counts - 1)
    if np.any(steps[counts > 1] <= 0) or np.any(starts[1:] <= lasts[:-1]):
        return None  # a repeated instant or a step back: not strictly rising
    return starts, steps, counts


def times_from_runs(starts: np.ndarray, steps: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """The int64 times [ns] that :func:`time_runs` described."""
    total = int(np.sum(counts))
    out = np.empty(total, np.int64)
    at = 0
    for start, step, count in zip(starts.tolist(), steps.tolist(), counts.tolist()):
        out[at:at + count] = np.arange(count, dtype=np.int64) * step + start
        at += count
    return out


def runs_to_metadata(runs) -> bytes:
    """The runs as the JSON text stored in a part's metadata."""
    starts, steps, counts = runs
    return json.dumps({"start_ns": starts.tolist(), "step_ns": steps.tolist(),
                       "count": counts.tolist()}).encode()


def runs_from_metadata(text: bytes):
    """The runs from a part's metadata (see :func:`runs_to_metadata`)."""
    data = json.loads(text)
    return (np.asarray(data["start_ns"], np.int64), np.asarray(data["step_ns"], np.int64),
            np.asarray(data["count"], np.int64))
