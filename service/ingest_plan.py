"""Which column of a logger file is what: the time column, wide or long layout, units, flags.

:func:`_plan_columns` turns a header (and Parquet types) into a :class:`_Plan` of the columns
to read, following the layout rules of :mod:`service.ingest`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Mapping

import pyarrow as pa

from service import units
from service.ingest_types import ChannelSpec, _key, _Problem

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
