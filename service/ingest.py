"""Logger files to normalised samples: long form, UTC nanoseconds, SI values.

:func:`read_logger_file` reads one file of the inbox (``.csv``, ``.csv.gz``, ``.txt``,
``.tsv``, ``.parquet``, ``.pq``) and returns its samples for the sensors the configuration
knows, or raises :class:`IngestError` with a message a person can act on; the caller
quarantines the file. Dialect and cell markers: :mod:`service.ingest_csv`; time forms and
daylight-saving rules: :mod:`service.timeparse`; unit spellings: :mod:`service.units`.

Layouts (column names are matched case-insensitively, blanks and punctuation ignored)

- time column: ``time``, ``timestamp``, ``datetime``, ``date_time``, ``utc``, ``epoch``,
  ``unix_time``, ``ts``, ``t``, optionally with a suffix ``_utc`` (offset-free times are then
  UTC whatever the sensor's zone), ``_local``, ``_iso`` or an epoch unit ``_s``, ``_ms``,
  ``_us``, ``_ns`` (``Time (UTC)``, ``timestamp [ms]``). Separate ``date`` and ``time``
  columns are joined. In Parquet a single timestamp-typed column also serves.
- long: a sensor column (``sensor``, ``sensor_id``, ``channel``, ``tag``, ``id``) and a value
  column (``value``, ``reading``, ``val``, ``measurement``, optionally with a unit as below),
  optionally a quality column (``quality``, ``quality_flag``, ``flag``, ``q``, ``qc``) and a
  unit column (``unit``, ``units``) that must agree with each sensor's configured unit.
- wide (otherwise): one column per sensor id. A unit may follow the id in the header as
  ``PT01 [kPa]``, ``PT01 (kPa)``, ``PT01 kPa`` or ``PT01_kPa``; it must agree with the
  configured unit. ``PT01_quality``, ``PT01 [flag]`` (suffixes ``quality``, ``flag``, ``q``,
  ``qc``) carry that sensor's quality flags. Columns of unknown sensors are skipped and noted.

Quality flags: good ``good``, ``g``, ``ok``, ``valid``, ``normal`` or empty; bad (-> gap)
``bad``, ``b``, ``invalid``, ``error``, ``err``, ``fault``, ``fail``, ``missing``;
over-range (-> clipped) ``over``, ``over-range``, ``overrange``, ``ovr``, ``clipped``,
``sat``, ``hi``, ``high``; under-range ``under``, ``under-range``, ``udr``, ``lo``, ``low``;
suspect (kept, noted) ``suspect``, ``uncertain``, ``questionable``, ``estimated``. Anything
else is refused.

Clipped samples: an over-range marker or flag gives ``value = max(recorded, range_max)`` and
``clipped = True`` (a surge peak is then "at least the sensor's range"); a recorded number at
or beyond the range is marked clipped too; without a configured range the marker becomes a
gap, with a note. Duplicated timestamps keep the first row of the file.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from service import units
from service.ingest_csv import (
    CellClasses,
    CsvFormatError,
    classify_cells,
    read_csv_columns,
    sniff_dialect,
)
from service.ingest_parquet import ParquetFormatError, parquet_schema, read_parquet_columns
from service.timeparse import TimeParseError, check_timezone, format_utc, parse_times

__all__ = ["ChannelSpec", "IngestError", "IngestResult", "read_logger_file", "SUFFIXES"]

SUFFIXES = (".csv", ".csv.gz", ".txt", ".txt.gz", ".tsv", ".tsv.gz", ".parquet", ".pq")

_TIME_KEY = re.compile(
    r"^(?:time|timestamp|time_stamp|datetime|date_time|utc|epoch|unix_time|unixtime|ts|t)"
    r"(?:_(?P<suffix>utc|z|local|iso|s|sec|ms|us|ns))?$"
)
_BRACKETED = re.compile(r"^(?P<base>.*?)\s*[\[(]\s*(?P<inner>[^\])]*?)\s*[\])]$")
_SUFFIXED = re.compile(r"^(?P<base>.+?)[\s_]+(?P<inner>[^\s_]+)$")
_QUALITY_WORDS = {"quality", "flag", "q", "qc", "qf", "quality_flag"}
_SENSOR_KEYS = {"sensor", "sensor_id", "sensorid", "channel", "channel_id", "tag", "tag_id",
                "tagname", "tag_name", "id", "point", "point_id"}
_VALUE_KEYS = {"value", "reading", "val", "measurement", "measured_value"}
_UNIT_KEYS = {"unit", "units", "uom"}
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
_MAX_GAP_INTERVALS = 5.0  # a time step above this many median sampling intervals is a gap


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
        ``value`` float64 in SI (gauge [Pa], [m^3/s], fraction [-]; NaN = gap), ``clipped``
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


class _Problem(ValueError):
    """A problem with the file's content (turned into IngestError with the file name)."""


def _numpy(array) -> np.ndarray:
    return np.asarray(array.to_numpy(zero_copy_only=False))


def _key(name: str) -> str:
    return re.sub(r"[^0-9a-z]+", "_", name.strip().lower()).strip("_")


# -- sources --------------------------------------------------------------------------------


class _CsvSource:
    def __init__(self, path: Path):
        self.path, self.dialect = path, sniff_dialect(path)
        self.names, self.types = self.dialect.header, {}
        self.decimal_comma = self.dialect.decimal_comma

    def read(self, text: list[int], values: list[int], time: int | None = None):
        return read_csv_columns(self.path, self.dialect, text, values, time)

    def describe(self, row: int) -> str:
        return f"line {self.dialect.first_data_line + int(row)}"


class _ParquetSource:
    def __init__(self, path: Path):
        schema = parquet_schema(path)
        self.path, self.names = path, tuple(schema.names)
        self.types = {i: field.type for i, field in enumerate(schema)}
        self.decimal_comma = False

    def read(self, text: list[int], values: list[int], time: int | None = None):
        wanted = sorted(set(text) | set(values) | ({time} if time is not None else set()))
        columns = read_parquet_columns(self.path, [self.names[i] for i in wanted])
        return {i: columns[self.names[i]] for i in wanted}

    def describe(self, row: int) -> str:
        return f"row {int(row) + 1}"


def _open_source(path: Path):
    name = path.name.lower()
    if not path.is_file():
        raise _Problem("the file does not exist or is not a regular file")
    if name.endswith((".parquet", ".pq")):
        return _ParquetSource(path)
    if name.endswith(SUFFIXES):
        return _CsvSource(path)
    raise _Problem(f"unsupported file type; expected one of {', '.join(SUFFIXES)}")


# -- which column is what -------------------------------------------------------------------


@dataclass(frozen=True)
class _Plan:
    layout: str
    time: int
    date: int | None
    naive_is_utc: bool
    epoch_unit: str | None
    values: tuple[tuple[int, str], ...] = ()  # wide: (column, sensor id)
    quality: tuple[tuple[str, int], ...] = ()  # wide: (sensor id, column)
    sensor: int | None = None  # long
    value: int | None = None
    flag: int | None = None
    unit: int | None = None
    value_unit: str | None = None


def _sensor_lookup(channels: Mapping[str, ChannelSpec]):
    folded: dict[str, list[str]] = {}
    for sensor_id in channels:
        folded.setdefault(sensor_id.casefold(), []).append(sensor_id)

    def lookup(name: str) -> str | None:
        name = name.strip()
        if name in channels:
            return name
        candidates = folded.get(name.casefold(), [])
        return candidates[0] if len(candidates) == 1 else None

    return lookup


def _check_unit(column: str, found: str, spec: ChannelSpec) -> str:
    try:
        canonical = units.recognise_unit(found, spec.quantity)
    except ValueError as exc:
        raise _Problem(f"column {column!r}: {exc}") from None
    if canonical is None:
        known = ", ".join(units.UNIT_FACTORS[spec.quantity])
        raise _Problem(f"column {column!r}: {found!r} is not a known {spec.quantity} unit; "
                       f"expected one of {known}")
    if canonical != units.canonical_unit(spec.unit, spec.quantity):
        raise _Problem(
            f"column {column!r} is in {found} but sensor {spec.sensor_id} is configured in "
            f"{spec.unit}; correct the sensor's unit in the configuration or the logger's export")
    return canonical


def _find_time(names, types) -> tuple[int, int | None, bool, str | None]:
    keys = [_key(n) for n in names]
    matches = [(i, _TIME_KEY.match(k)) for i, k in enumerate(keys)]
    found = [(i, m) for i, m in matches if m]
    if not found:
        stamps = [i for i, t in types.items() if pa.types.is_timestamp(t)]
        if len(stamps) == 1:
            return stamps[0], None, False, None
        raise _Problem(f"no time column among {list(names)[:12]}; expected a column named "
                       "time, timestamp, datetime or utc (any case)")
    if len(found) > 1:
        raise _Problem(f"several time columns ({', '.join(repr(names[i]) for i, _ in found)}); "
                       "expected exactly one")
    index, match = found[0]
    suffix = match["suffix"]
    date = keys.index("date") if "date" in keys else None
    epoch_unit = {"s": "s", "sec": "s", "ms": "ms", "us": "us", "ns": "ns"}.get(suffix or "")
    naive_is_utc = keys[index].startswith("utc") or suffix in ("utc", "z")
    return index, date, naive_is_utc, epoch_unit


def _plan_long(names, keys, base) -> _Plan | None:
    def first(wanted):
        hits = [i for i, k in enumerate(keys) if k in wanted]
        return hits[0] if hits else None

    sensor = first(_SENSOR_KEYS)
    value, value_unit = None, None
    for i, name in enumerate(names):
        match = _BRACKETED.match(name.strip()) or _SUFFIXED.match(name.strip())
        if keys[i] in _VALUE_KEYS:
            value = i
        elif match and _key(match["base"]) in _VALUE_KEYS and value is None:
            value, value_unit = i, match["inner"]
    if sensor is None or value is None:
        return None
    return _Plan("long", *base, sensor=sensor, value=value, flag=first(_QUALITY_WORDS),
                 unit=first(_UNIT_KEYS), value_unit=value_unit)


def _plan_columns(names, types, channels, notes: list[str]) -> _Plan:
    base = _find_time(names, types)
    keys = [_key(n) for n in names]
    long_plan = _plan_long(names, keys, base)
    if long_plan is not None:
        return long_plan
    lookup = _sensor_lookup(channels)
    values: dict[str, int] = {}
    quality: dict[str, int] = {}
    skipped = []
    for i, name in enumerate(names):
        if i in (base[0], base[1]) or (name.startswith("__index_level_")):
            continue
        sensor_id, unit, is_quality = lookup(name), None, False
        if sensor_id is None:
            for pattern in (_BRACKETED, _SUFFIXED):
                match = pattern.match(name.strip())
                if match and (sensor_id := lookup(match["base"])):
                    unit = match["inner"]
                    is_quality = _key(unit) in _QUALITY_WORDS
                    spec = channels[sensor_id]
                    if (pattern is _SUFFIXED and not is_quality
                            and units.recognise_unit(unit, spec.quantity) is None):
                        sensor_id = None  # e.g. "PT01_raw": not this sensor's values
                    break
        if sensor_id is None:
            skipped.append(name)
            continue
        target = quality if is_quality else values
        if sensor_id in target:
            raise _Problem(f"sensor {sensor_id} appears in two columns "
                           f"({names[target[sensor_id]]!r} and {name!r}); expected one")
        target[sensor_id] = i
        if unit is not None and not is_quality:
            _check_unit(name, unit, channels[sensor_id])
    if skipped:
        notes.append(f"{len(skipped)} columns of sensors the configuration does not know were "
                     f"skipped: {', '.join(repr(s) for s in skipped[:8])}"
                     + (" ..." if len(skipped) > 8 else ""))
    if not values:
        raise _Problem(f"no column of a configured sensor among {list(names)[:12]}; expected a "
                       "column named after a sensor id (e.g. 'PT01' or 'PT01 [kPa]')")
    orphan = sorted(set(quality) - set(values))
    if orphan:
        raise _Problem(f"quality column {names[quality[orphan[0]]]!r} has no value column "
                       f"{orphan[0]!r} beside it")
    columns = tuple(sorted(((i, s) for s, i in values.items()), key=lambda c: c[1]))
    return _Plan("wide", *base, values=columns,
                 quality=tuple(sorted(quality.items())))


# -- reading the planned columns ------------------------------------------------------------


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


def _cell_classes(column: pa.ChunkedArray, decimal_comma: bool) -> CellClasses:
    if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
        return classify_cells(column, decimal_comma)
    try:
        numbers = column.cast(pa.float64())
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        raise _Problem(f"a value column of type {column.type} is not numeric") from None
    values = _numpy(numbers).astype(np.float64, copy=False)  # nulls -> NaN
    gap = np.isnan(values)
    none = np.zeros(values.size, dtype=bool)
    return CellClasses(values, gap, gap, values == np.inf, values == -np.inf, none)


def _flag_classes(column, n: int, describe) -> np.ndarray:
    if column is None:
        return np.zeros(n, dtype=np.int8)
    text = pc.utf8_lower(pc.utf8_trim_whitespace(pc.fill_null(column.cast(pa.string()), "")))
    labels = pc.unique(text).to_pylist()
    unknown = [label for label in labels if label not in _FLAG_CLASSES]
    if unknown:
        first = int(np.flatnonzero(_numpy(pc.equal(text, unknown[0])))[0])
        raise _Problem(f"unknown quality flag {unknown[0]!r} at {describe(first)}; expected "
                       "good/ok, bad, over-range, under-range or suspect (see the docs)")
    codes = np.array([_FLAG_CLASSES[label] for label in labels], dtype=np.int8)
    return codes[np.asarray(pc.index_in(text, value_set=pa.array(labels, pa.string())))]


def _blank_rows(time: pa.ChunkedArray, others: list[CellClasses]) -> np.ndarray:
    if time.null_count == 0 and not (pa.types.is_string(time.type)
                                     or pa.types.is_large_string(time.type)):
        return np.zeros(len(time), dtype=bool)  # a typed column without nulls has no blanks
    if pa.types.is_string(time.type) or pa.types.is_large_string(time.type):
        empty = pc.fill_null(pc.equal(time, ""), True)
    else:
        empty = pc.is_null(time)
    blank = _numpy(empty).astype(bool)
    for cells in others:
        blank &= cells.empty
    return blank


def _take(cells: CellClasses, keep: np.ndarray) -> CellClasses:
    return CellClasses(*(getattr(cells, f)[keep] for f in CellClasses.__dataclass_fields__))


def _parse_time_column(source, plan: _Plan, columns, keep, zone: str, notes):
    time = columns[plan.time]
    if plan.date is not None:
        time = pc.binary_join_element_wise(columns[plan.date].cast(pa.string()),
                                           time.cast(pa.string()), " ")
    time = time.take(pa.array(keep)) if keep is not None else time
    rows = keep if keep is not None else _AllRows(len(time))
    parsed = parse_times(time, "UTC" if plan.naive_is_utc else zone,
                         epoch_unit=plan.epoch_unit,
                         describe_row=lambda i: source.describe(rows[i]))
    notes.extend(parsed.notes)
    return parsed


def _read_wide(source, plan: _Plan, channels, notes) -> tuple[list[_Block], str]:
    value_index = [i for i, _ in plan.values]
    quality = dict(plan.quality)
    text = ([plan.date] if plan.date is not None else []) + list(quality.values())
    time = None if plan.date is not None else plan.time
    columns = source.read(text + ([plan.time] if time is None else []), value_index, time)
    cells = [_cell_classes(columns[i], source.decimal_comma) for i in value_index]
    blank = _blank_rows(columns[plan.time], cells)
    keep = np.flatnonzero(~blank) if blank.any() else None
    if keep is not None:
        notes.append(f"{int(blank.sum())} blank lines skipped")
        cells = [_take(c, keep) for c in cells]
    zones = sorted({channels[s].timezone for _, s in plan.values})
    parsed = _parse_time_column(source, plan, columns, keep, zones[0], notes)
    if len(zones) > 1 and parsed.form.endswith("local") and not plan.naive_is_utc:
        raise _Problem(f"timestamps carry no UTC offset but the file's sensors are configured "
                       f"in different time zones ({', '.join(zones)}); export with offsets")
    rows = keep if keep is not None else _AllRows(parsed.time_ns.size)
    blocks = []
    for (_, sensor_id), sensor_cells in zip(plan.values, cells):
        column = columns[quality[sensor_id]] if sensor_id in quality else None
        if column is not None and keep is not None:
            column = column.take(pa.array(keep))
        flags = _flag_classes(column, rows.size, lambda i: source.describe(rows[i]))
        blocks.append(_Block(sensor_id, parsed.time_ns, sensor_cells, flags, rows))
    return blocks, parsed.form


def _read_long(source, plan: _Plan, channels, notes) -> tuple[list[_Block], str]:
    text = [plan.sensor] + [i for i in (plan.date, plan.flag, plan.unit) if i is not None]
    time = None if plan.date is not None else plan.time
    columns = source.read(text + ([plan.time] if time is None else []), [plan.value], time)
    ids = pc.utf8_trim_whitespace(pc.fill_null(columns[plan.sensor].cast(pa.string()), ""))
    unique = pc.unique(ids).to_pylist()
    lookup = _sensor_lookup(channels)
    mapped = [lookup(u) for u in unique]
    unknown = [u for u, m in zip(unique, mapped) if m is None and u != ""]
    sensors = sorted({m for m in mapped if m is not None})
    if not sensors:
        raise _Problem(f"no row of a configured sensor; sensor ids found: {unknown[:8]}")
    code_of_unique = np.array([sensors.index(m) if m else -1 for m in mapped], dtype=np.int64)
    codes = code_of_unique[np.asarray(pc.index_in(ids, value_set=pa.array(unique, pa.string())))]
    cells = _cell_classes(columns[plan.value], source.decimal_comma)
    blank = _blank_rows(columns[plan.time], [cells]) & (codes < 0)
    if blank.any():
        notes.append(f"{int(blank.sum())} blank lines skipped")
    if unknown:
        notes.append(f"{int(np.sum((codes < 0) & ~blank))} rows of {len(unknown)} sensors the "
                     f"configuration does not know were skipped: {unknown[:8]}")
    keep = np.flatnonzero(codes >= 0)
    cells, codes = _take(cells, keep), codes[keep]
    _check_long_units(source, plan, columns, keep, codes, sensors, channels)
    time_ns = np.empty(keep.size, dtype=np.int64)
    form = ""
    for zone in sorted({channels[s].timezone for s in sensors}):
        in_zone = [k for k, s in enumerate(sensors) if channels[s].timezone == zone]
        members = np.flatnonzero(np.isin(codes, in_zone))
        parsed = _parse_time_column(source, plan, columns, keep[members], zone, notes)
        time_ns[members], form = parsed.time_ns, parsed.form
    flag = columns[plan.flag].take(pa.array(keep)) if plan.flag is not None else None
    flags = _flag_classes(flag, keep.size, lambda i: source.describe(keep[i]))
    order = np.argsort(codes, kind="stable")
    bounds = np.searchsorted(codes[order], np.arange(len(sensors) + 1))
    blocks = []
    for code, sensor_id in enumerate(sensors):
        members = order[bounds[code]:bounds[code + 1]]
        blocks.append(_Block(sensor_id, time_ns[members], _take(cells, members),
                             flags[members], keep[members]))
    return blocks, form


def _check_long_units(source, plan, columns, keep, codes, sensors, channels) -> None:
    if plan.value_unit is not None:
        for sensor_id in sensors:
            _check_unit(source.names[plan.value], plan.value_unit, channels[sensor_id])
    if plan.unit is None:
        return
    unit_text = pc.utf8_trim_whitespace(columns[plan.unit].cast(pa.string()).take(pa.array(keep)))
    pairs = pd.DataFrame({"code": codes, "unit": _numpy(unit_text).astype(object)})
    for code, unit in pairs.drop_duplicates().itertuples(index=False):
        try:
            _check_unit(source.names[plan.unit], unit, channels[sensors[code]])
        except _Problem as exc:
            first = int(np.flatnonzero((pairs["code"] == code) & (pairs["unit"] == unit))[0])
            raise _Problem(f"{source.describe(keep[first])}, {exc}") from None


# -- per sensor: checks, clipping, SI, order ------------------------------------------------


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


def _clip_and_convert(block: _Block, spec: ChannelSpec, notes) -> tuple[np.ndarray, np.ndarray]:
    """Values in SI and the clipped flag, per the rules in the module notes."""
    cells, flags = block.cells, block.flags
    values = cells.values
    top = np.inf if spec.range_max is None else spec.range_max
    bottom = -np.inf if spec.range_min is None else spec.range_min
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


def _plausibility_note(sensor_id: str, values_si: np.ndarray, spec: ChannelSpec, notes) -> None:
    low, high = units.valid_si_range(spec.quantity)
    outside = int(np.count_nonzero((values_si < low) | (values_si > high)))
    if outside:
        notes.append(f"{sensor_id}: {outside} values outside the physically possible range "
                     f"{low:g}..{high:g} {units.si_unit(spec.quantity)} (kept; check the sensor)")


def _time_order(time_ns: np.ndarray, rows: np.ndarray, source, label: str, notes):
    """Sorting order and duplicate mask of one time column (None when already strictly sorted)."""
    if not _any_step_below(time_ns, 1):  # strictly increasing: no step array at all
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


def _any_step_below(time_ns: np.ndarray, limit_ns: int, chunk: int = 1 << 16) -> bool:
    """Whether any step ``t[i+1] - t[i]`` is below ``limit_ns``, in cache-sized chunks."""
    for start in range(0, time_ns.size - 1, chunk):
        piece = time_ns[start:start + chunk + 1]
        if np.any(np.subtract(piece[1:], piece[:-1]) < limit_ns):
            return True
    return False


def _any_step_above(time_ns: np.ndarray, limit_ns: int, chunk: int = 1 << 16) -> bool:
    """Whether any step ``t[i+1] - t[i]`` exceeds ``limit_ns``, in cache-sized chunks.

    Chunks keep the temporaries small and reused instead of a step array as long as the file.
    """
    for start in range(0, time_ns.size - 1, chunk):
        piece = time_ns[start:start + chunk + 1]
        if np.any(np.subtract(piece[1:], piece[:-1]) > limit_ns):
            return True
    return False


def _time_gap_note(label: str, time_ns: np.ndarray, notes) -> None:
    if time_ns.size < 3:
        return
    n_steps = time_ns.size - 1
    stride = max(1, n_steps // 100_000)  # the typical interval from a regular subsample
    picked = np.arange(0, n_steps, stride)
    interval = float(np.median(time_ns[picked + 1] - time_ns[picked]))
    if interval <= 0:
        return
    # compare without materialising the steps: t[i+1] > t[i] + limit (int64, no overflow
    # within the 1980..2100 range parse_times enforces)
    limit = _MAX_GAP_INTERVALS * interval
    if not _any_step_above(time_ns, int(np.floor(limit))):
        return
    steps = np.diff(time_ns)
    long_steps = np.flatnonzero(steps > limit)
    if long_steps.size:
        widest = long_steps[np.argmax(steps[long_steps])]
        notes.append(
            f"{label}{long_steps.size} gaps in time longer than {_MAX_GAP_INTERVALS:g} "
            f"sampling intervals ({interval / 1e9:g} s), the longest {steps[widest] / 1e9:g} s "
            f"after {format_utc(time_ns[widest])}; kept as gaps")


def _missing_note(sensor_id: str, values: np.ndarray, notes) -> None:
    missing = int(np.isnan(values).sum())
    if missing:
        notes.append(f"{sensor_id}: {missing} of {values.size} samples are gaps (no value)")


def _frame(parts: list[tuple[str, np.ndarray, np.ndarray, np.ndarray]]) -> pd.DataFrame:
    """The long frame of the sensors' parts; ``sensor_id`` is categorical (one code a part).

    A categorical column costs one byte a sample and no string building, where a plain string
    column would repeat the id in every row; comparisons, ``.unique()``, group-bys and Arrow
    conversion (a dictionary array) behave as with strings.
    """
    names = [p[0] for p in parts]
    sizes = [p[1].size for p in parts]
    code_type = np.int8 if len(names) < 128 else np.int32
    codes = np.repeat(np.arange(len(names), dtype=code_type), sizes)
    categories = pd.Index(names, dtype="str" if int(pd.__version__.split(".")[0]) >= 3
                          else object)
    def joined(k: int, dtype) -> np.ndarray:  # one sensor (the common case): no copy
        arrays = [p[k] for p in parts]
        whole = arrays[0] if len(arrays) == 1 else np.concatenate(arrays)
        return whole.astype(dtype, copy=False)

    return pd.DataFrame({
        "time_ns": joined(1, np.int64),
        "sensor_id": pd.Categorical.from_codes(codes, categories=categories),
        "value": joined(2, np.float64),
        "clipped": joined(3, bool),
    }, copy=False)


def _samples(blocks: list[_Block], channels, source, notes, max_fraction: float):
    orderings: dict[int, object] = {}
    gaps_noted: set[int] = set()
    shared = len({id(b.time_ns) for b in blocks}) < len(blocks)
    parts = []
    for block in sorted(blocks, key=lambda b: b.sensor_id):
        spec = channels[block.sensor_id]
        _check_cells(block, spec, source, notes, max_fraction)
        values, clipped = _clip_and_convert(block, spec, notes)
        _plausibility_note(block.sensor_id, values, spec, notes)
        key = id(block.time_ns)
        label = "" if shared else f"{block.sensor_id}: "
        if key not in orderings:
            orderings[key] = _time_order(block.time_ns, block.rows, source, label, notes)
        time_ns = block.time_ns
        if orderings[key] is not None:
            time_ns, values, clipped = _apply_order(block, values, clipped, orderings[key],
                                                    source, notes)
        _missing_note(block.sensor_id, values, notes)
        if key not in gaps_noted:  # sensors of a wide file share one time column
            gaps_noted.add(key)
            _time_gap_note(label, time_ns, notes)
        parts.append((block.sensor_id, time_ns, values, clipped))
    return parts


def _check_channels(channels: Mapping[str, ChannelSpec]) -> None:
    for key, spec in channels.items():
        if not isinstance(spec, ChannelSpec) or spec.sensor_id != key:
            raise ValueError(f"channels[{key!r}] must be a ChannelSpec with sensor_id {key!r}")
        if spec.quantity not in units.QUANTITIES:
            raise ValueError(f"sensor {key}: quantity {spec.quantity!r} is not one of "
                             f"{units.QUANTITIES}")
        units.canonical_unit(spec.unit, spec.quantity)
        check_timezone(spec.timezone)


def read_logger_file(
    path: Path, channels: Mapping[str, ChannelSpec], *, max_non_numeric_fraction: float = 0.2
) -> IngestResult:
    """Read one logger file into normalised samples of the configured sensors.

    Parameters
    ----------
    path : pathlib.Path
        A ``.csv``, ``.csv.gz`` (``.txt``, ``.tsv``) or ``.parquet`` file, wide or long (see
        the module notes).
    channels : mapping of str to ChannelSpec
        Every sensor the configuration knows, by id.
    max_non_numeric_fraction : float
        Largest share [-] of a sensor's non-empty cells that may be unrecognised text before
        the file is refused (default 0.2).

    Returns
    -------
    IngestResult
        Samples in SI, sorted by (sensor_id, time_ns), and notes: columns or sensors skipped,
        markers and flags (counts and first line), blank lines, daylight-saving changes,
        gaps and repeats, unsorted rows sorted, duplicates dropped (and conflicting ones),
        clipped samples, gaps in time and values outside the physical range.

    Raises
    ------
    IngestError
        The file must be quarantined: unreadable or empty file, no time column or several,
        unparseable or implausible timestamps, a row with the wrong number of fields, a
        header unit that contradicts the configuration, an unknown quality flag, a sensor
        column that is mostly text, or no configured sensor at all. The message starts with
        the file name and names the line or column.
    ValueError
        ``channels`` itself is invalid (a configuration problem, not the file's).
    """
    path = Path(path)
    _check_channels(channels)
    if not 0.0 <= max_non_numeric_fraction <= 1.0:
        raise ValueError(f"max_non_numeric_fraction={max_non_numeric_fraction} must be in 0..1")
    notes: list[str] = []
    try:
        source = _open_source(path)
        if not source.names:
            raise _Problem("the file has no columns")
        plan = _plan_columns(source.names, source.types, channels, notes)
        reader = _read_wide if plan.layout == "wide" else _read_long
        blocks, form = reader(source, plan, channels, notes)
        sizes = [b.rows.size for b in blocks]
        n_file_rows = max(sizes) if plan.layout == "wide" else sum(sizes)
        if n_file_rows == 0:
            raise _Problem("the file has a header but no data rows")
        parts = _samples(blocks, channels, source, notes, max_non_numeric_fraction)
    except (_Problem, CsvFormatError, ParquetFormatError, TimeParseError) as exc:
        raise IngestError(f"{path.name}: {exc}") from None
    samples = _frame(parts)
    present = tuple(name for name, time_ns, _, _ in parts if time_ns.size)
    times = samples["time_ns"].to_numpy()
    return IngestResult(
        samples=samples,
        notes=tuple(notes),
        n_rows=len(samples),
        first_time_ns=int(times.min()),
        last_time_ns=int(times.max()),
        sensors=present,
        layout=plan.layout,
        time_form=form,
        n_file_rows=int(n_file_rows),
    )
