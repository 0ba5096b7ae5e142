"""Per sensor: cell and flag checks, clipping and SI conversion, time order, and their notes.

:func:`_samples` runs these over the blocks a file was read into and returns each sensor's
time, value and clipped arrays.
"""

from __future__ import annotations

import numpy as np

from service import units
from service.array_scan import ValueCensus, scale_to_float32_in_place, time_step_range, value_census
from service.ingest_types import (
    _BAD,
    _GOOD,
    _OVER,
    _SUSPECT,
    _UNDER,
    ChannelSpec,
    _Block,
    _Problem,
)
from service.timeparse import format_utc

_MAX_GAP_INTERVALS = 5.0  # a time step above this many median sampling intervals is a gap


def _first_row(block: _Block, mask: np.ndarray, source) -> str:
    return source.describe(block.rows[int(np.argmax(mask))])


def _check_cells(block: _Block, spec: ChannelSpec, source, notes, max_fraction: float) -> None:
    cells, flags = block.cells, block.flags
    if cells.unrecognised.any():
        bad, filled = int(cells.unrecognised.sum()), int((~cells.empty).sum())
        if bad > max_fraction * filled:
            raise _Problem(
                f"sensor {block.sensor_id}: {bad} of {filled} cells ({100 * bad / filled:.0f} %) "
                f"are not numbers (first at "
                f"{_first_row(block, cells.unrecognised, source)}); at most "
                f"{100 * max_fraction:.0f} % may be; expected numbers or the logger markers "
                "listed in the docs")
    checks = [  # masks built only where they can be non-empty (no flags: all good)
        (lambda: cells.unrecognised, "cells of unrecognised text read as gaps"),
        (None if cells.gap is cells.empty else lambda: cells.gap & ~cells.empty,
         "error markers read as gaps"),
        (lambda: cells.over, "over-range markers"),
        (lambda: cells.under, "under-range markers"),
    ]
    if np.any(flags):
        checks += [(lambda code=code: flags == code, what) for code, what in (
            (_BAD, "samples flagged bad read as gaps"),
            (_SUSPECT, "samples flagged suspect kept as recorded"),
            (_OVER, "samples flagged over-range"),
            (_UNDER, "samples flagged under-range"))]
    for build, what in checks:
        if build is None:
            continue
        mask = build()
        count = int(np.count_nonzero(mask))
        if count:
            notes.append(f"{block.sensor_id}: {count} {what} (first at "
                         f"{_first_row(block, mask, source)})")


def _range(spec: ChannelSpec) -> tuple[float, float]:
    """The transducer's range in file units, unbounded where not configured."""
    top = np.inf if spec.range_max is None else spec.range_max
    bottom = -np.inf if spec.range_min is None else spec.range_min
    return top, bottom


def census_limits(spec: ChannelSpec) -> tuple[float, float, float, float, float]:
    """The limits a sensor's values are counted against (:func:`value_census`): its
    transducer range in file units, the quantity's possible range [SI], file unit to SI."""
    low, high = units.valid_si_range(spec.quantity)
    return (*_range(spec), low, high, units.si_factor(spec.unit, spec.quantity))


def _census(block: _Block, spec: ChannelSpec) -> ValueCensus:
    """The block's census: taken as its column was read where it could be, else now."""
    if block.census is not None:
        return block.census
    return value_census(block.cells.values, *census_limits(spec))


def _plain_values(block: _Block, census: ValueCensus) -> bool:
    """Whether no value is at the range, marked beyond it or flagged: SI is then just the
    recorded values times the unit's factor (the common case, decided without a mask)."""
    cells = block.cells
    return not (census.n_at_top or census.n_at_bottom or cells.over.any() or cells.under.any()
                or np.any(block.flags))


def _clip_and_convert(block: _Block, spec: ChannelSpec, notes,
                      census: ValueCensus) -> tuple[np.ndarray, np.ndarray]:
    """Values in SI, kept to float32 precision (the archive's), and the clipped flag."""
    values = block.cells.values
    plain = _plain_values(block, census)
    if plain and values.flags.writeable and values.flags.c_contiguous and values.base is None:
        # the block's own copy, whose cells are not read again: scaled and rounded in place
        # (no file-long array)
        factor = units.si_factor(spec.unit, spec.quantity)
        return scale_to_float32_in_place(values, factor), np.zeros(values.size, dtype=bool)
    values, clipped = _clipped_si_values(block, spec, notes, census, plain)  # a new array
    return scale_to_float32_in_place(np.ascontiguousarray(values, dtype=np.float64), 1.0), clipped


def _clipped_si_values(block: _Block, spec: ChannelSpec, notes, census: ValueCensus,
                       plain: bool) -> tuple[np.ndarray, np.ndarray]:
    """Values in SI (a new array) and the clipped flag, per the rules in the module notes."""
    cells, flags = block.cells, block.flags
    values = cells.values
    top, bottom = _range(spec)
    if plain:
        factor = units.si_factor(spec.unit, spec.quantity)
        return values * factor, np.zeros(values.size, dtype=bool)
    flagged = bool(np.any(flags))  # without flags every comparison with a flag is False
    over = cells.over | (values >= top)
    under = cells.under | (values <= bottom)
    if flagged:
        over |= flags == _OVER
        under |= flags == _UNDER
    factor = units.si_factor(spec.unit, spec.quantity)
    if not (over.any() or under.any() or (flagged and (flags == _BAD).any())):
        return values * factor, np.zeros(values.size, dtype=bool)
    values = np.where(np.isfinite(values), values, np.nan)
    if spec.range_max is not None:
        values = np.where(over, np.fmax(values, top), values)
    if spec.range_min is not None:
        values = np.where(under, np.fmin(values, bottom), values)
    clipped = (over | under) & np.isfinite(values)
    lost = int(((over | under) & ~clipped).sum())
    if lost:
        notes.append(f"{block.sensor_id}: {lost} over- or under-range samples read as gaps "
                     "because the sensor's range is not configured (set range_max / range_min)")
    at_range = int((np.isfinite(cells.values) & ((cells.values >= top) | (cells.values <= bottom))
                    & (flags == _GOOD)).sum())
    if at_range:
        notes.append(f"{block.sensor_id}: {at_range} recorded values at or beyond the "
                     "transducer's range marked clipped")
    bad = flags == _BAD
    values[bad], clipped[bad] = np.nan, False
    return values * factor, clipped


def _plausibility_note(sensor_id: str, values_si: np.ndarray, spec: ChannelSpec, notes,
                       outside: int | None = None) -> None:
    """Note values outside the quantity's possible range; ``outside`` when already counted."""
    low, high = units.valid_si_range(spec.quantity)
    if outside is None:
        outside = int(np.count_nonzero((values_si < low) | (values_si > high)))
    if outside:
        notes.append(f"{sensor_id}: {outside} values outside the physically possible range "
                     f"{low:g}..{high:g} {units.si_unit(spec.quantity)} (kept; check the sensor)")


def _time_order(time_ns: np.ndarray, rows: np.ndarray, source, label: str, notes,
                lowest_step: int):
    """Sorting order and duplicate mask of one time column whose smallest step is
    ``lowest_step`` [ns] (None when already strictly sorted: the step is at least 1)."""
    if lowest_step >= 1:  # strictly increasing: no step array at all
        return None
    steps = np.diff(time_ns)
    back = np.flatnonzero(steps < 0)
    if back.size:
        notes.append(f"{label}rows were not in time order ({back.size} steps back in time, "
                     f"first at {source.describe(rows[back[0] + 1])}); sorted")
    order = np.argsort(time_ns, kind="stable")  # equal times keep file order
    ordered = time_ns[order]
    duplicate = np.r_[False, ordered[1:] == ordered[:-1]]
    if duplicate.any():
        notes.append(f"{label}{int(duplicate.sum())} duplicated timestamps dropped, keeping the "
                     f"first row (first at {source.describe(rows[order][np.argmax(duplicate)])})")
    return order, duplicate


def _apply_order(block, values, clipped, ordering, source, notes):
    order, duplicate = ordering
    time_ns, values, clipped = block.time_ns[order], values[order], clipped[order]
    if duplicate.any():
        first = np.maximum.accumulate(np.where(duplicate, 0, np.arange(duplicate.size)))
        same = (values == values[first]) | (np.isnan(values) & np.isnan(values[first]))
        differs = duplicate & (~same | (clipped != clipped[first]))
        if differs.any():
            notes.append(f"{block.sensor_id}: {int(differs.sum())} duplicated timestamps had a "
                         "value different from the first row's (first at "
                         f"{source.describe(block.rows[order][np.argmax(differs)])}); "
                         "the first row's value kept")
        keep = ~duplicate
        time_ns, values, clipped = time_ns[keep], values[keep], clipped[keep]
    return time_ns, values, clipped


def _time_gap_note(label: str, time_ns: np.ndarray, notes, highest_step: int) -> None:
    """Note steps longer than ``_MAX_GAP_INTERVALS`` typical intervals in sorted times whose
    largest step is ``highest_step`` [ns]."""
    if time_ns.size < 3:
        return
    n_steps = time_ns.size - 1
    stride = max(1, n_steps // 100_000)  # the typical interval from a regular subsample
    picked = np.arange(0, n_steps, stride)
    interval = float(np.median(time_ns[picked + 1] - time_ns[picked]))
    if interval <= 0:
        return
    limit = _MAX_GAP_INTERVALS * interval
    if highest_step <= int(np.floor(limit)):  # no step array in the usual case
        return
    steps = np.diff(time_ns)
    long_steps = np.flatnonzero(steps > limit)
    if long_steps.size:
        widest = long_steps[np.argmax(steps[long_steps])]
        notes.append(
            f"{label}{long_steps.size} gaps in time longer than {_MAX_GAP_INTERVALS:g} "
            f"sampling intervals ({interval / 1e9:g} s), the longest {steps[widest] / 1e9:g} s "
            f"after {format_utc(time_ns[widest])}; kept as gaps")


def _missing_note(sensor_id: str, values: np.ndarray, notes, missing: int | None = None) -> None:
    """Note the gaps (NaN values); ``missing`` when already counted."""
    if missing is None:
        missing = int(np.isnan(values).sum())
    if missing:
        notes.append(f"{sensor_id}: {missing} of {values.size} samples are gaps (no value)")


def _samples(blocks: list[_Block], channels, source, notes, max_fraction: float):
    """Each sensor's (id, time_ns, values, clipped), sorted and de-duplicated in time, and
    the smallest and largest time step [ns] of each sensor's times (one scan per time
    column: the sensors of a wide file share theirs)."""
    orderings: dict[int, object] = {}
    step_ranges: dict[int, tuple[int, int]] = {}
    gaps_noted: set[int] = set()
    shared = len({id(b.time_ns) for b in blocks}) < len(blocks)
    parts, sensor_steps = [], {}
    for block in sorted(blocks, key=lambda b: b.sensor_id):
        spec = channels[block.sensor_id]
        _check_cells(block, spec, source, notes, max_fraction)
        census = _census(block, spec)
        plain = _plain_values(block, census)  # then the census counts the SI values too
        values, clipped = _clip_and_convert(block, spec, notes, census)
        _plausibility_note(block.sensor_id, values, spec, notes,
                           census.n_implausible if plain else None)
        key = id(block.time_ns)
        label = "" if shared else f"{block.sensor_id}: "
        if key not in orderings:
            step_ranges[key] = time_step_range(block.time_ns)
            orderings[key] = _time_order(block.time_ns, block.rows, source, label, notes,
                                         step_ranges[key][0])
        time_ns = block.time_ns
        if orderings[key] is not None:
            time_ns, values, clipped = _apply_order(block, values, clipped, orderings[key],
                                                    source, notes)
        steps = step_ranges[key] if orderings[key] is None else time_step_range(time_ns)
        _missing_note(block.sensor_id, values, notes,
                      census.n_nan if plain and orderings[key] is None else None)
        if key not in gaps_noted:  # sensors of a wide file share one time column
            gaps_noted.add(key)
            _time_gap_note(label, time_ns, notes, steps[1])
        parts.append((block.sensor_id, time_ns, values, clipped))
        sensor_steps[block.sensor_id] = steps
    return parts, sensor_steps
