"""The data types of the ingest: the channel spec, the result, the errors, quality-flag classes.

:class:`ChannelSpec`, :class:`IngestResult` and :class:`IngestError` are public through
:mod:`service.ingest`; the rest (a file-content problem, the flag classes, one sensor's block
of samples and the small Arrow helpers) is shared by the ingest modules.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pandas as pd

from service.array_scan import ValueCensus
from service.ingest_csv import CellClasses

_FLAG_CLASSES = {  # quality flag -> 0 good, 1 bad, 2 over range, 3 under range, 4 suspect
    **dict.fromkeys(("", "good", "g", "ok", "valid", "normal"), 0),
    **dict.fromkeys(("bad", "b", "invalid", "error", "err", "fault", "fail", "missing"), 1),
    **dict.fromkeys(("over", "over-range", "overrange", "over range", "ovr", "clipped", "sat",
                     "hi", "high"), 2),
    **dict.fromkeys(("under", "under-range", "underrange", "under range", "udr", "lo", "low"),
                    3),
    **dict.fromkeys(("suspect", "uncertain", "questionable", "estimated"), 4),
}
_GOOD, _BAD, _OVER, _UNDER, _SUSPECT = range(5)


@dataclass(frozen=True)
class ChannelSpec:
    """What the configuration says about one logger channel.

    Parameters
    ----------
    sensor_id : str
        Unique across all systems.
    quantity : str
        ``"pressure"``, ``"flow"``, ``"pump_status"`` or ``"valve_position"``.
    unit : str
        Unit of the values in the files, any spelling of :mod:`service.units`.
    timezone : str
        IANA zone of offset-free timestamps, e.g. ``"Europe/Lisbon"`` or ``"UTC"``.
    range_max, range_min : float or None
        Transducer range in ``unit``, if known: over-range samples are clipped to it.
    """

    sensor_id: str
    quantity: str
    unit: str
    timezone: str
    range_max: float | None = None
    range_min: float | None = None


class IngestError(ValueError):
    """The file cannot be read; quarantine it. ``str(e)`` names the file, the line or column,
    what was found and what was expected."""


@dataclass(frozen=True)
class IngestResult:
    """Normalised samples of one file.

    Attributes
    ----------
    samples : pandas.DataFrame
        Sorted by (sensor_id, time_ns): ``time_ns`` int64 UTC nanoseconds, ``sensor_id``
        categorical of str (categories in sorted order, one per sensor of the file),
        ``value`` float64 in SI (gauge [Pa], [m^3/s], fraction [-]; NaN = gap), kept to
        float32 precision (the archive's: a relative 6e-8), ``clipped``
        bool (the true value is at least ``value`` when over range, at most when under).
    notes : tuple of str
        What a person should know about the file (see :func:`read_logger_file`).
    n_rows : int
        Number of samples (rows of ``samples``).
    first_time_ns, last_time_ns : int
        Earliest and latest sample [ns since 1970, UTC].
    sensors : tuple of str
        Sensor ids with samples, sorted.
    layout : str
        ``"wide"`` or ``"long"``.
    time_form : str
        How the times were written (:class:`service.timeparse.ParsedTimes` ``form``).
    n_file_rows : int
        Data rows read from the file (blank lines and unknown sensors' rows excluded).
    sensor_spans : mapping of str to (int, int)
        Earliest and latest sample [ns since 1970, UTC] of each sensor in ``sensors``.
    sensor_steps : mapping of str to (int, int)
        Smallest and largest step between consecutive samples [ns] of each sensor in
        ``sensors`` (``(0, 0)`` for a single sample); equal for a regular logger.
    """

    samples: pd.DataFrame
    notes: tuple[str, ...]
    n_rows: int
    first_time_ns: int
    last_time_ns: int
    sensors: tuple[str, ...]
    layout: str = "wide"
    time_form: str = ""
    n_file_rows: int = 0
    sensor_spans: Mapping[str, tuple[int, int]] = field(default_factory=dict)
    sensor_steps: Mapping[str, tuple[int, int]] = field(default_factory=dict)


class _Problem(ValueError):
    """A problem with the file's content (turned into IngestError with the file name)."""


def _numpy(array) -> np.ndarray:
    return np.asarray(array.to_numpy(zero_copy_only=False))


def _key(name: str) -> str:
    return re.sub(r"[^0-9a-z]+", "_", name.strip().lower()).strip("_")


class _AllRows:
    """Data rows ``0 .. size - 1`` of a file without an index array: ``rows[i]`` is ``i``."""

    def __init__(self, size: int):
        self.size = int(size)

    def __getitem__(self, index):
        if isinstance(index, (int, np.integer)):
            return index
        return np.asarray(index)


@dataclass
class _Block:
    """One sensor's samples before clipping, conversion and sorting, in file order."""

    sensor_id: str
    time_ns: np.ndarray  # may be shared between the blocks of a wide file
    cells: CellClasses
    flags: np.ndarray  # int8 flag class
    rows: np.ndarray | _AllRows  # 0-based data row of the file
    census: ValueCensus | None = None  # of cells.values against the sensor's limits, if taken
