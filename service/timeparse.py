"""Timestamps of logger files to UTC nanoseconds.

Accepted forms of a time column

- ISO 8601 with an offset (``2024-10-27T01:30:00+01:00``, ``...Z``, ``...+0100``, ``...-05``):
  the instant is exact; offsets may change within a file (a logger that switches at the
  daylight-saving change).
- ISO 8601 without an offset (``2024-10-27T01:30:00``, ``2024-10-27 01:30:00.250``, basic
  ``20241027T013000``; a decimal comma before the fraction is accepted): wall-clock time in the
  logger's IANA zone, see :func:`localize_wall_times`.
- Epoch seconds (integer or fractional); milliseconds, microseconds and nanoseconds are
  recognised by their magnitude (or a unit given by the caller) and reported in a note.
- Arrow timestamp columns (Parquet): with a time zone they are exact, without one they are
  wall-clock time like naive ISO strings.

Wall-clock time across a daylight-saving change

- *Gap* (clocks go forward, e.g. Europe/London 2024-03-31 01:00 -> 02:00 local): wall times
  inside the gap do not exist. They are read with the offset in force before the change (a
  logger whose clock had not yet switched) and reported.
- *Repeat* (clocks go back, e.g. Europe/London 2024-10-27 02:00 -> 01:00 local): wall times in
  the repeated hour occur twice. In file order a logger writes the first pass (summer offset),
  steps back, then writes the second pass (winter offset); the backward step splits the two.
  A file with no backward step inside the repeated hour is resolved by its neighbours: rows
  before the hour and none after -> first pass; rows after and none before -> second pass.
  Anything else (a file lying wholly inside the repeated hour, or passing through it once with
  rows on both sides, or shuffled inside it) cannot be resolved and raises
  :class:`TimeParseError`: export such files with UTC offsets.

Timestamps before 1980 or after 2100 are refused: they come from a logger whose clock was
reset, or from a wrong epoch unit.

This module recognises the forms and reads them; wall-clock resolution is in
:mod:`service.timeparse_local`, the error, range check and zone check in
:mod:`service.timeparse_checks`; their public names are importable from here.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from service.timeparse_checks import (
    TimeParseError,
    _check_range,
    _row_label,
    check_timezone,
    format_utc,
)
from service.timeparse_local import localize_wall_times

__all__ = [
    "TimeParseError",
    "ParsedTimes",
    "check_timezone",
    "parse_times",
    "localize_wall_times",
    "epoch_to_ns",
    "format_utc",
]

_EPOCH_UNITS = {"s": 1e9, "ms": 1e6, "us": 1e3, "ns": 1.0}
_NUMERIC = r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$"
_HAS_OFFSET = r"\d(Z|z|[+-]\d{2}(:?\d{2})?)$"
_TIME_PART = r"[T ]\d{2}(:?\d{2})"
_ISO_START = r"^\d{4}-?\d{2}-?\d{2}([T ]|$)"


@dataclass(frozen=True)
class ParsedTimes:
    """UTC instants of a time column, in the rows' original order.

    Attributes
    ----------
    time_ns : numpy.ndarray
        int64 nanoseconds since 1970-01-01T00:00:00Z, one per input row.
    form : str
        ``iso_offset``, ``iso_local``, ``epoch_s`` (``_ms``, ``_us``, ``_ns``),
        ``timestamp_utc`` or ``timestamp_local``.
    notes : tuple of str
        What a person should know (daylight-saving gaps and repeats, epoch unit guessed).
    """

    time_ns: np.ndarray
    form: str
    notes: tuple[str, ...]


def _numpy(array) -> np.ndarray:
    """An Arrow array or chunked array as a NumPy array (copying where Arrow must)."""
    return np.asarray(array.to_numpy(zero_copy_only=False))


def epoch_to_ns(
    values: np.ndarray, unit: str | None = None, describe_row: Callable[[int], str] = _row_label
) -> tuple[np.ndarray, str, tuple[str, ...]]:
    """Epoch numbers to UTC nanoseconds.

    Parameters
    ----------
    values : numpy.ndarray
        Seconds (or ms, us, ns) since 1970-01-01T00:00:00Z; NaN is refused.
    unit : {'s', 'ms', 'us', 'ns'} or None
        None: seconds unless the magnitude says otherwise (a median above 1e11 cannot be
        seconds before the year 5000), reported in a note.

    Returns
    -------
    time_ns : numpy.ndarray of int64
    form : str
        ``epoch_s``, ``epoch_ms``, ``epoch_us`` or ``epoch_ns``.
    notes : tuple of str
    """
    numbers = np.asarray(values, dtype=np.float64) if values.dtype.kind != "i" else values
    missing = np.flatnonzero(~np.isfinite(numbers)) if numbers.dtype.kind == "f" else []
    if len(missing):
        row = int(missing[0])
        raise TimeParseError(f"empty or non-numeric epoch time at {describe_row(row)}", row)
    notes: tuple[str, ...] = ()
    if unit is None:
        magnitude = float(np.median(np.abs(numbers))) if numbers.size else 0.0
        unit = "s"
        for candidate, limit in (("ns", 1e17), ("us", 1e14), ("ms", 1e11)):
            if magnitude >= limit:
                unit = candidate
                notes = (f"epoch times read as {candidate} since 1970 (values near "
                         f"{magnitude:.3g} are too large for seconds)",)
                break
    if unit not in _EPOCH_UNITS:
        raise ValueError(f"unknown epoch unit {unit!r}; expected one of {tuple(_EPOCH_UNITS)}")
    if numbers.dtype.kind == "i":
        time_ns = numbers.astype(np.int64) * int(_EPOCH_UNITS[unit])
    else:
        # whole and fractional parts apart: float64 holds 1.7e18 ns only to ~256 ns
        scale = _EPOCH_UNITS[unit]
        whole = np.floor(numbers)
        time_ns = whole.astype(np.int64) * int(scale) + np.rint((numbers - whole) * scale).astype(
            np.int64)
    _check_range(time_ns, describe_row)
    return time_ns, f"epoch_{unit}", notes


def _sample(strings: pa.ChunkedArray, size: int = 50) -> pa.Array:
    n = len(strings)
    head = strings.slice(0, min(size, n))
    tail = strings.slice(max(n - size, 0), min(size, n))
    return pa.concat_arrays([*head.chunks, *tail.chunks]) if n else pa.array([], pa.string())


def _all_match(strings, pattern: str) -> bool:
    matches = pc.match_substring_regex(strings, pattern)
    return bool(pc.all(matches).as_py()) if len(strings) else False


def _parse_with_pandas(
    strings: pa.ChunkedArray, utc: bool, describe_row: Callable[[int], str]
) -> np.ndarray:
    text = strings.to_numpy(zero_copy_only=False)
    parsed = pd.to_datetime(pd.Series(text, dtype=object), format="ISO8601", utc=utc,
                            errors="coerce")
    bad = np.flatnonzero(parsed.isna().to_numpy())
    if bad.size:
        row = int(bad[0])
        raise TimeParseError(
            f"unparseable timestamp {text[row]!r} at {describe_row(row)}; expected ISO 8601 "
            "(2024-10-27T01:30:00, optionally with Z or +01:00) or epoch seconds",
            row,
        )
    if utc:
        parsed = parsed.dt.tz_localize(None)
    return parsed.to_numpy(dtype="datetime64[ns]").view(np.int64)


def _offset_mask(strings) -> np.ndarray:
    with_offset = pc.match_substring_regex(strings, _HAS_OFFSET)
    with_time = pc.match_substring_regex(strings, _TIME_PART)
    return np.asarray(pc.and_(with_offset, with_time).to_numpy(zero_copy_only=False), dtype=bool)


def _iso_strings_to_ns(
    strings: pa.ChunkedArray, describe_row: Callable[[int], str]
) -> tuple[np.ndarray, bool]:
    """ISO 8601 strings to int64 ns: UTC if they carry offsets, else wall-clock time.

    The form is guessed from the first and last rows and the whole column cast once by
    pyarrow (a failing cast of a long column is slow, so it is not used as a probe); if that
    fails, the column is checked for mixed forms and parsed by pandas, which also names the
    first unparseable row.
    """
    has_offset = bool(_offset_mask(_sample(strings)).any())
    target = pa.timestamp("ns", tz="UTC") if has_offset else pa.timestamp("ns")
    try:
        return _numpy(pc.cast(strings, target)).view(np.int64), has_offset
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    iso_like = _numpy(pc.match_substring_regex(strings, _ISO_START)).astype(bool)
    if not iso_like.all():
        row = int(np.flatnonzero(~iso_like)[0])
        raise TimeParseError(
            f"unparseable timestamp {strings[row].as_py()!r} at {describe_row(row)}; expected "
            "ISO 8601 (2024-10-27T01:30:00, optionally with Z or +01:00) or epoch seconds",
            row,
        )
    offset_mask = _offset_mask(strings)
    n_offset = int(offset_mask.sum())
    if 0 < n_offset < len(offset_mask):
        row = int(np.flatnonzero(offset_mask != offset_mask[0])[0])
        kind = "carries a UTC offset" if offset_mask[row] else "has no UTC offset"
        raise TimeParseError(
            f"timestamp {strings[row].as_py()!r} at {describe_row(row)} {kind} unlike the rows "
            "before it; a time column must either always or never carry an offset",
            row,
        )
    has_offset = n_offset > 0
    return _parse_with_pandas(strings, has_offset, describe_row), has_offset


def _clean_strings(values, describe_row: Callable[[int], str]) -> pa.ChunkedArray:
    if isinstance(values, pa.Array):
        values = pa.chunked_array([values])
    strings = pc.utf8_trim_whitespace(pc.cast(values, pa.string()))
    empty = pc.or_kleene(pc.is_null(strings), pc.equal(strings, ""))
    if pc.any(empty).as_py():
        row = int(np.flatnonzero(np.asarray(empty.to_numpy(zero_copy_only=False), dtype=bool))[0])
        raise TimeParseError(f"empty timestamp at {describe_row(row)}", row)
    if pc.any(pc.match_substring(strings, ",")).as_py():
        # ISO 8601 allows a decimal comma before the fraction of a second.
        strings = pc.replace_substring_regex(strings, r"(\d{2}:\d{2}:\d{2}),(\d)", r"\1.\2")
    return strings


def _epoch_strings_to_numbers(strings, describe_row) -> np.ndarray:
    try:
        return _numpy(pc.cast(strings, pa.float64())).astype(np.float64, copy=False)
    except pa.ArrowInvalid:
        numeric = _numpy(pc.match_substring_regex(strings, _NUMERIC)).astype(bool)
        row = int(np.flatnonzero(~numeric)[0])
        raise TimeParseError(
            f"unparseable timestamp {strings[row].as_py()!r} at {describe_row(row)}; the "
            "column holds epoch seconds, so every row must be a number", row) from None


def parse_times(
    values,
    timezone: str,
    *,
    epoch_unit: str | None = None,
    describe_row: Callable[[int], str] = _row_label,
) -> ParsedTimes:
    """Any accepted time column to UTC nanoseconds (see the module notes for the forms).

    Parameters
    ----------
    values : pyarrow.Array, pyarrow.ChunkedArray, numpy.ndarray or sequence
        The time column in file order.
    timezone : str
        IANA zone of wall-clock (offset-free) times, e.g. ``"Europe/Lisbon"`` or ``"UTC"``.
    epoch_unit : {'s', 'ms', 'us', 'ns'} or None
        Unit of epoch numbers if known (e.g. from a column name ``time_ms``).
    describe_row : callable
        Turns a 0-based row index into text for messages (e.g. ``"line 12"``).

    Returns
    -------
    ParsedTimes

    Raises
    ------
    TimeParseError
        Unparseable, empty or implausible timestamps, mixed forms, an unresolvable repeated
        hour; the message names the row and the expected forms.
    """
    check_timezone(timezone)
    array = values
    if not isinstance(array, (pa.Array, pa.ChunkedArray)):
        array = pa.array(np.asarray(values) if not isinstance(values, list) else values)
    if pa.types.is_timestamp(array.type):
        if array.null_count:
            row = int(np.flatnonzero(_numpy(pc.is_null(array)))[0])
            raise TimeParseError(f"empty timestamp at {describe_row(row)}", row)
        ns = _numpy(pc.cast(array, pa.timestamp("ns", tz=array.type.tz))).view(np.int64)
        if array.type.tz is not None:
            _check_range(ns, describe_row)
            return ParsedTimes(ns, "timestamp_utc", ())
        utc, notes = localize_wall_times(ns, timezone, describe_row=describe_row)
        return ParsedTimes(utc, "timestamp_local", notes)
    if pa.types.is_integer(array.type) or pa.types.is_floating(array.type):
        if array.null_count:
            row = int(np.flatnonzero(_numpy(pc.is_null(array)))[0])
            raise TimeParseError(f"empty epoch time at {describe_row(row)}", row)
        ns, form, notes = epoch_to_ns(_numpy(array), epoch_unit, describe_row)
        return ParsedTimes(ns, form, notes)
    if not (pa.types.is_string(array.type) or pa.types.is_large_string(array.type)):
        raise TimeParseError(f"time column of type {array.type} is neither text nor numbers")
    strings = _clean_strings(array, describe_row)
    if _all_match(_sample(strings), _NUMERIC):
        numbers = _epoch_strings_to_numbers(strings, describe_row)
        ns, form, notes = epoch_to_ns(numbers, epoch_unit, describe_row)
        return ParsedTimes(ns, form, notes)
    ns, has_offset = _iso_strings_to_ns(strings, describe_row)
    if has_offset:
        _check_range(ns, describe_row)
        return ParsedTimes(ns, "iso_offset", ())
    utc, notes = localize_wall_times(ns, timezone, describe_row=describe_row)
    return ParsedTimes(utc, "iso_local", notes)
