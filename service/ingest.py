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

from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from service import units
from service.array_scan import ValueCensus, float64_copy_census, value_census
from service.ingest_checks import _samples, census_limits
from service.ingest_csv import (
    CellClasses,
    CsvFormatError,
    classify_cells,
    read_csv_columns,
    sniff_dialect,
)
from service.ingest_parquet import ParquetFormatError, parquet_schema, read_parquet_columns
from service.ingest_plan import _check_unit, _Plan, _plan_columns, _sensor_lookup
from service.ingest_types import (
    _FLAG_CLASSES,
    ChannelSpec,
    IngestError,
    IngestResult,
    _AllRows,
    _Block,
    _numpy,
    _Problem,
)
from service.timeparse import TimeParseError, check_timezone, parse_times

__all__ = ["ChannelSpec", "IngestError", "IngestResult", "read_logger_file", "SUFFIXES"]

SUFFIXES = (".csv", ".csv.gz", ".txt", ".txt.gz", ".tsv", ".tsv.gz", ".parquet", ".pq")


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


# -- reading the planned columns ------------------------------------------------------------


def _cell_classes(column: pa.ChunkedArray, decimal_comma: bool,
                  spec: ChannelSpec | None = None) -> tuple[CellClasses, ValueCensus | None]:
    """The column's cells sorted into numbers and markers, and, for a typed column of one
    sensor (``spec``), the census of its values against that sensor's limits (None for
    text, whose census the checks take after reading the cells)."""
    if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
        return classify_cells(column, decimal_comma), None
    limits = census_limits(spec) if spec is not None else ()
    if pa.types.is_floating(column.type):
        # numpy's own copy (writable, owned): the ingest may turn it into SI in place;
        # copied and counted in one pass, chunk by chunk (nulls -> NaN)
        chunks = column.chunks if hasattr(column, "chunks") else [column]
        values, census = float64_copy_census([c.to_numpy(zero_copy_only=False) for c in chunks],
                                              *limits)
    else:
        try:
            numbers = column.cast(pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            raise _Problem(f"a value column of type {column.type} is not numeric") from None
        values = _numpy(numbers).astype(np.float64, copy=False)  # nulls -> NaN
        census = value_census(values, *(limits or (np.inf, -np.inf, -np.inf, np.inf, 1.0)))
    none = np.zeros(values.size, dtype=bool)  # one all-false mask for every empty class
    gap = np.isnan(values) if census.n_nan else none
    over = values == np.inf if census.n_pos_inf else none
    under = values == -np.inf if census.n_neg_inf else none
    return CellClasses(values, gap, gap, over, under, none), (census if spec is not None else None)


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
    classified = [_cell_classes(columns[i], source.decimal_comma, channels[sensor_id])
                  for i, sensor_id in plan.values]
    cells = [c for c, _ in classified]
    censuses = [census for _, census in classified]
    blank = _blank_rows(columns[plan.time], cells)
    keep = np.flatnonzero(~blank) if blank.any() else None
    if keep is not None:
        notes.append(f"{int(blank.sum())} blank lines skipped")
        cells = [_take(c, keep) for c in cells]
        censuses = [None] * len(cells)  # they counted the blank rows too
    zones = sorted({channels[s].timezone for _, s in plan.values})
    parsed = _parse_time_column(source, plan, columns, keep, zones[0], notes)
    if len(zones) > 1 and parsed.form.endswith("local") and not plan.naive_is_utc:
        raise _Problem(f"timestamps carry no UTC offset but the file's sensors are configured "
                       f"in different time zones ({', '.join(zones)}); export with offsets")
    rows = keep if keep is not None else _AllRows(parsed.time_ns.size)
    blocks = []
    for (_, sensor_id), sensor_cells, census in zip(plan.values, cells, censuses):
        column = columns[quality[sensor_id]] if sensor_id in quality else None
        if column is not None and keep is not None:
            column = column.take(pa.array(keep))
        flags = _flag_classes(column, rows.size, lambda i: source.describe(rows[i]))
        blocks.append(_Block(sensor_id, parsed.time_ns, sensor_cells, flags, rows, census))
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
    cells, _ = _cell_classes(columns[plan.value], source.decimal_comma)
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
        parts, sensor_steps = _samples(blocks, channels, source, notes, max_non_numeric_fraction)
    except (_Problem, CsvFormatError, ParquetFormatError, TimeParseError) as exc:
        raise IngestError(f"{path.name}: {exc}") from None
    samples = _frame(parts)
    # each part's times are strictly increasing (sorted and de-duplicated by the checks)
    spans = {name: (int(time_ns[0]), int(time_ns[-1])) for name, time_ns, _, _ in parts if time_ns.size}
    return IngestResult(
        samples=samples,
        notes=tuple(notes),
        n_rows=len(samples),
        first_time_ns=min(first for first, _ in spans.values()),
        last_time_ns=max(last for _, last in spans.values()),
        sensors=tuple(spans),
        sensor_spans=spans,
        sensor_steps={name: sensor_steps[name] for name in spans},
        layout=plan.layout,
        time_form=form,
        n_file_rows=int(n_file_rows),
    )
