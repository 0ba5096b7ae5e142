"""Wall-clock times in an IANA zone to UTC, resolving daylight-saving gaps and repeats.

The rules for gaps (clocks go forward) and repeated hours (clocks go back) are set out in the
notes of :mod:`service.timeparse`, which publishes :func:`localize_wall_times`.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pandas as pd

from service.timeparse_checks import (
    TimeParseError,
    _check_range,
    _format_offset,
    _format_wall,
    _row_label,
    check_timezone,
    format_utc,
)

_NS_PER_S = 1_000_000_000


def _localize(wall: pd.DatetimeIndex, zone: str, **options) -> pd.DatetimeIndex:
    return wall.tz_localize(zone, **options)


def _utc_ns(index: pd.DatetimeIndex) -> np.ndarray:
    return np.asarray(index.asi8, dtype=np.int64)


def _constant_offset(wall_ns: np.ndarray, zone: str) -> int | None:
    """The zone's single offset over the file's span, or None if it changes (or is unclear)."""
    low, high = int(wall_ns.min()), int(wall_ns.max())
    hour = 3600 * _NS_PER_S
    grid = np.unique(np.r_[np.arange(low, high, hour, dtype=np.int64), high])
    localized = _localize(pd.DatetimeIndex(grid.view("M8[ns]")), zone,
                          ambiguous="NaT", nonexistent="NaT")
    if localized.isna().any():
        return None
    offsets = grid - _utc_ns(localized)
    return int(offsets[0]) if np.all(offsets == offsets[0]) else None


def localize_wall_times(
    wall_ns: np.ndarray, timezone: str, *, describe_row: Callable[[int], str] = _row_label
) -> tuple[np.ndarray, tuple[str, ...]]:
    """Wall-clock times in an IANA zone to UTC, resolving daylight-saving gaps and repeats.

    Parameters
    ----------
    wall_ns : numpy.ndarray
        int64 wall-clock nanoseconds (as if UTC) in file order.
    timezone : str
        IANA zone name.
    describe_row : callable
        Turns a 0-based row index into text for messages.

    Returns
    -------
    time_ns : numpy.ndarray
        int64 UTC nanoseconds, in the same order.
    notes : tuple of str
        One note per daylight-saving change the file spans, gap or repeat it touched.

    Notes
    -----
    UTC = wall - offset, where the offset is the zone's UTC offset at that instant; see the
    notes of :mod:`service.timeparse` for the rules in gaps and repeats.

    References
    ----------
    IANA time zone database (tzdata), as shipped with Python's ``zoneinfo``.
    """
    check_timezone(timezone)
    wall_ns = np.asarray(wall_ns, dtype=np.int64)
    if wall_ns.size == 0:
        return wall_ns.copy(), ()
    offset = _constant_offset(wall_ns, timezone)
    if offset is not None:
        utc = wall_ns - offset
        _check_range(utc, describe_row)
        return utc, ()
    wall = pd.DatetimeIndex(wall_ns.view("M8[ns]"))
    utc = _utc_ns(_localize(wall, timezone, ambiguous="NaT", nonexistent="NaT"))
    unresolved = np.flatnonzero(utc == np.iinfo(np.int64).min)
    notes: list[str] = []
    in_gap_rows = np.zeros(wall_ns.size, dtype=bool)
    if unresolved.size:
        sub = wall[unresolved]
        early = _utc_ns(_localize(sub, timezone, ambiguous=np.ones(len(sub), bool),
                                  nonexistent="NaT"))
        late = _utc_ns(_localize(sub, timezone, ambiguous=np.zeros(len(sub), bool),
                                 nonexistent="NaT"))
        nat = np.iinfo(np.int64).min
        in_gap = (early == nat) | (late == nat)
        if in_gap.any():
            gap_rows = unresolved[in_gap]
            in_gap_rows[gap_rows] = True
            utc[gap_rows] = _resolve_gap(wall[gap_rows], timezone, notes)
        amb = ~in_gap
        if amb.any():
            first, second = np.minimum(early[amb], late[amb]), np.maximum(early[amb], late[amb])
            utc[unresolved[amb]] = _resolve_repeat(
                wall_ns, unresolved[amb], first, second, notes, describe_row
            )
    _check_range(utc, describe_row)
    regular = ~in_gap_rows
    notes[:0] = _transition_notes(wall_ns[regular], utc[regular], timezone)
    return utc, tuple(notes)


def _resolve_gap(wall: pd.DatetimeIndex, zone: str, notes: list[str]) -> np.ndarray:
    """Wall times inside a spring-forward gap, read with the offset before the change."""
    before = _localize(wall, zone, nonexistent="shift_backward")
    offset_before = _utc_ns(before.tz_localize(None)) - _utc_ns(before)
    utc = wall.asi8 - offset_before
    after = _localize(wall, zone, nonexistent="shift_forward")
    for start in np.unique(_utc_ns(after)):
        mask = _utc_ns(after) == start
        gap_from = int(_utc_ns(before.tz_localize(None))[mask][0]) + 1
        gap_to = int(_utc_ns(after.tz_localize(None))[mask][0])
        notes.append(
            f"{int(mask.sum())} timestamps fall in the daylight-saving gap "
            f"{_format_wall(gap_from)}..{_format_wall(gap_to)} ({zone}), which does not exist "
            f"in local time; read with the offset before the change "
            f"({_format_offset(int(offset_before[mask][0]))})"
        )
    return utc


def _resolve_repeat(
    wall_ns: np.ndarray,
    rows: np.ndarray,
    first: np.ndarray,
    second: np.ndarray,
    notes: list[str],
    describe_row: Callable[[int], str],
) -> np.ndarray:
    """Wall times in a repeated hour: first or second pass from the file's order."""
    day = wall_ns[rows] // (86_400 * _NS_PER_S)
    out = np.empty(rows.size, dtype=np.int64)
    for value in np.unique(day):
        group = np.flatnonzero(day == value)
        group_rows = rows[group]
        steps_back = np.flatnonzero(np.diff(wall_ns[group_rows]) < 0)
        if steps_back.size == 1:
            split = int(steps_back[0]) + 1
        elif steps_back.size == 0:
            split = _split_without_step(wall_ns, group_rows, describe_row)
        else:
            row = int(group_rows[int(steps_back[1]) + 1])
            raise TimeParseError(
                f"timestamps in the repeated hour of {_format_wall(wall_ns[row])[:10]} are out "
                f"of order (again at {describe_row(row)}), so they cannot be told apart; "
                "export the file with UTC offsets or in UTC",
                row,
            )
        choose_first = np.arange(group.size) < split
        out[group] = np.where(choose_first, first[group], second[group])
        offset_first = int(wall_ns[group_rows[0]] - first[group][0])
        offset_second = int(wall_ns[group_rows[0]] - second[group][0])
        where = f", second pass from {describe_row(int(group_rows[split]))}" if (
            0 < split < group.size) else ""
        notes.append(
            f"{group.size} timestamps fall in the repeated hour of "
            f"{_format_wall(wall_ns[group_rows[0]])[:10]} (clocks went back): {split} read as "
            f"the first pass ({_format_offset(offset_first)}), {group.size - split} as the "
            f"second ({_format_offset(offset_second)}){where}"
        )
    return out


def _split_without_step(
    wall_ns: np.ndarray, group_rows: np.ndarray, describe_row: Callable[[int], str]
) -> int:
    """Whole group in one pass: the first if the file only has rows before it, etc."""
    rows_before = group_rows[0] > 0
    rows_after = group_rows[-1] < wall_ns.size - 1
    if rows_before and not rows_after:
        return group_rows.size
    if rows_after and not rows_before:
        return 0
    row = int(group_rows[0])
    where = ("the file lies wholly inside it" if not (rows_before or rows_after)
             else "the file passes through it only once")
    raise TimeParseError(
        f"timestamp at {describe_row(row)} falls in the hour repeated when clocks went back "
        f"({_format_wall(wall_ns[row])}) and {where}, so it is unknown whether this is the "
        "first or the second pass; export the file with UTC offsets or in UTC",
        row,
    )


def _transition_notes(wall_ns: np.ndarray, utc_ns: np.ndarray, zone: str) -> list[str]:
    """One note per change of UTC offset within the file (in UTC order)."""
    order = np.argsort(utc_ns, kind="stable")
    offsets = (wall_ns - utc_ns)[order]
    changes = np.flatnonzero(np.diff(offsets) != 0) + 1
    notes = []
    for index in changes[:10]:
        notes.append(
            f"local times in {zone} change from {_format_offset(int(offsets[index - 1]))} to "
            f"{_format_offset(int(offsets[index]))} (first sample after the change "
            f"{format_utc(utc_ns[order][index])}); converted to UTC without a gap or overlap"
        )
    return notes
