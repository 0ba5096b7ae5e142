"""Shared pieces of time parsing: its error, the plausible range of instants, zone names.

:class:`TimeParseError` and :func:`check_timezone` are published through
:mod:`service.timeparse`. Instants before 1980 or at/after 2100 are refused by
:func:`_check_range`: they come from a logger whose clock was reset, or from a wrong epoch unit.
"""

from __future__ import annotations

from typing import Callable
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd

_EARLIEST_NS = pd.Timestamp("1980-01-01").value
_LATEST_NS = pd.Timestamp("2100-01-01").value


class TimeParseError(ValueError):
    """A time column that cannot be turned into UTC instants.

    ``row`` is the 0-based data row of the first offending value (``None`` if not one row).
    """

    def __init__(self, message: str, row: int | None = None):
        super().__init__(message)
        self.row = row


def _row_label(row: int) -> str:
    return f"row {row + 1}"


def check_timezone(timezone: str) -> ZoneInfo:
    """The zone named ``timezone``; ``ValueError`` with the fix if it is not an IANA name."""
    try:
        return ZoneInfo(timezone)
    except (ZoneInfoNotFoundError, ValueError, TypeError):
        raise ValueError(
            f"unknown time zone {timezone!r}; expected an IANA name such as 'Europe/Lisbon' "
            "or 'UTC' (not an abbreviation like 'CET' or an offset like '+01:00')"
        ) from None


def format_utc(time_ns: int) -> str:
    """An instant as ISO 8601 UTC text, e.g. ``2024-10-27T01:00:00Z``."""
    text = pd.Timestamp(int(time_ns), unit="ns").isoformat()
    return text + "Z"


def _format_wall(wall_ns: int) -> str:
    return pd.Timestamp(int(wall_ns), unit="ns").isoformat(sep=" ", timespec="minutes")


def _format_offset(offset_ns: int) -> str:
    minutes = int(offset_ns // 60_000_000_000)
    sign = "+" if minutes >= 0 else "-"
    return f"UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def _check_range(time_ns: np.ndarray, describe_row: Callable[[int], str]) -> None:
    if time_ns.size == 0 or (time_ns.min() >= _EARLIEST_NS and time_ns.max() < _LATEST_NS):
        return  # two reductions; the mask only when some time is out of range
    bad = np.flatnonzero((time_ns < _EARLIEST_NS) | (time_ns >= _LATEST_NS))
    if bad.size:
        row = int(bad[0])
        raise TimeParseError(
            f"timestamp {format_utc(time_ns[row])} at {describe_row(row)} lies outside "
            "1980..2100: the logger's clock was probably reset, or the epoch unit is wrong; "
            "set the logger's clock and export again",
            row,
        )
