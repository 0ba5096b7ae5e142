"""Write a window's findings: events replace earlier ones, never duplicate them.

An event keeps its identity by system and start time: when a window is screened again (a late
file), each new event whose start time lies within ``identity_tolerance_s`` of an earlier
event's takes over that row (same id, children rewritten); earlier events of the window's core
that no new event matches are deleted, and unmatched new events are inserted. The caller wraps
this in the window's single transaction.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import pandas as pd
from sqlalchemy import delete, insert, select
from sqlalchemy.orm import Session

from .store import (Event, EventObservation, Flag, ModelComparison, PressureCycleBin, WaveSpeedEstimate,
                    utc_now)

__all__ = ["EventFindings", "replace_window_events", "ns_to_utc", "utc_to_ns", "pa_to_kpa", "finite_or_none"]

KPA = 1000.0


def ns_to_utc(time_ns: int | None) -> dt.datetime | None:
    """UTC nanoseconds to a naive UTC datetime (microsecond resolution)."""
    if time_ns is None:
        return None
    return pd.Timestamp(int(time_ns), unit="ns").to_pydatetime(warn=False)


def utc_to_ns(value: dt.datetime) -> int:
    """Naive-UTC (or aware) datetime to UTC nanoseconds."""
    ts = pd.Timestamp(value)
    if ts.tzinfo is not None:
        ts = ts.tz_convert("UTC").tz_localize(None)
    return int(ts.value)


def finite_or_none(value: Any) -> float | None:
    """A float for the database, ``None`` for missing or non-finite values."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def pa_to_kpa(value_pa: float | None) -> float | None:
    value = finite_or_none(value_pa)
    return None if value is None else value / KPA


@dataclass
class EventFindings:
    """Everything found for one event, ready to be written."""

    event: Any  # detectors.events.DetectedEvent
    wave_speeds: Sequence[Any] = ()  # detectors.wavespeed estimates
    comparisons: Sequence[dict] = ()  # rows for model_comparisons (column -> value)
    flags: Sequence[dict] = ()  # rows for flags (asset_id, kind, severity, message)
    extra: dict = field(default_factory=dict)


def _event_row_values(system_id: str, event: Any, run_id: int) -> dict:
    maxima = [o.max_pa for o in event.observations if o.max_pa is not None]
    minima = [o.min_pa for o in event.observations if o.min_pa is not None]
    return dict(
        system_id=system_id,
        kind=event.kind,
        severity=event.severity,
        start_time=ns_to_utc(event.start_time_ns),
        end_time=ns_to_utc(event.end_time_ns),
        origin_sensor=event.origin_sensor,
        run_id=run_id,
        reason=event.reason,
        n_sensors=len(event.observations),
        max_kpa=pa_to_kpa(max(maxima)) if maxima else None,
        min_kpa=pa_to_kpa(min(minima)) if minima else None,
        updated_at=utc_now(),
    )


def _observation_rows(event_id: int, event: Any) -> list[dict]:
    rows = []
    for o in event.observations:
        notes = getattr(o, "notes", None)
        if isinstance(notes, (tuple, list)):
            notes = "; ".join(notes)
        rows.append(
            dict(
                event_id=event_id,
                sensor_id=o.sensor_id,
                onset_time=ns_to_utc(o.onset_time_ns),
                baseline_kpa=pa_to_kpa(o.baseline_pa),
                max_kpa=pa_to_kpa(o.max_pa),
                min_kpa=pa_to_kpa(o.min_pa),
                max_rate_kpa_s=pa_to_kpa(o.max_rate_pa_s),
                onset_uncertainty_s=finite_or_none(getattr(o, "onset_uncertainty_s", None)),
                first_front_kpa=pa_to_kpa(getattr(o, "first_front_pa", None)),
                settle_duration_s=finite_or_none(getattr(o, "settle_duration_s", None)),
                dominant_period_s=finite_or_none(getattr(o, "dominant_period_s", None)),
                damping_ratio=finite_or_none(getattr(o, "damping_ratio", None)),
                clipped=bool(getattr(o, "clipped", False)),
                sample_interval_s=finite_or_none(getattr(o, "sample_interval_s", None)),
                notes=notes or None,
            )
        )
    return rows


def _cycle_rows(event_id: int, event: Any) -> list[dict]:
    """The non-empty range bins of each observation's pressure cycles."""
    rows = []
    for o in event.observations:
        summary = getattr(o, "cycles", None)
        if summary is None:
            continue
        edges = summary.bin_edges_pa
        for k, count in enumerate(summary.counts):
            if count > 0:
                rows.append(dict(
                    event_id=event_id, sensor_id=o.sensor_id, range_from_kpa=edges[k] / 1e3,
                    range_to_kpa=edges[k + 1] / 1e3, cycles=float(count),
                    largest_range_kpa=summary.max_range_pa / 1e3, gate_kpa=summary.hysteresis_pa / 1e3))
    return rows


def _wave_speed_rows(event_id: int, event_time: dt.datetime, estimates: Sequence[Any]) -> list[dict]:
    rows = []
    for e in estimates:
        rows.append(
            dict(
                event_id=event_id,
                pipe_id=e.pipe_id,
                sensor_a=e.sensor_a,
                sensor_b=e.sensor_b,
                distance_m=finite_or_none(e.distance_m),
                delay_s=finite_or_none(e.delay_s),
                wave_speed_m_s=finite_or_none(e.wave_speed_m_s),
                uncertainty_m_s=finite_or_none(e.uncertainty_m_s),
                method=e.method,
                accepted=bool(e.accepted),
                reason=getattr(e, "reason", None) or None,
                correlation_peak=finite_or_none(getattr(e, "correlation_peak", None)),
                snr_db=finite_or_none(getattr(e, "snr_db", None)),
                event_time=event_time,
            )
        )
    return rows


def _delete_children(session: Session, event_ids: list[int]) -> None:
    if not event_ids:
        return
    for table in (EventObservation, PressureCycleBin, WaveSpeedEstimate, ModelComparison, Flag):
        session.execute(delete(table).where(table.event_id.in_(event_ids)))


def replace_window_events(
    session: Session,
    system_id: str,
    core_start_ns: int,
    core_end_ns: int,
    findings: Sequence[EventFindings],
    run_id: int,
    identity_tolerance_s: float = 5.0,
) -> tuple[int, int]:
    """Replace the events of one window's core; returns (new events, replaced events).

    Only events whose start time lies in ``[core_start_ns, core_end_ns)`` are considered, both
    among the earlier rows and among ``findings``.
    """
    core_start, core_end = ns_to_utc(core_start_ns), ns_to_utc(core_end_ns)
    old_events = list(
        session.scalars(
            select(Event).where(
                Event.system_id == system_id, Event.start_time >= core_start, Event.start_time < core_end
            )
        )
    )
    kept = [f for f in findings if core_start_ns <= f.event.start_time_ns < core_end_ns]
    tolerance = dt.timedelta(seconds=identity_tolerance_s)
    unmatched_old = {e.id: e for e in old_events}
    _delete_children(session, [e.id for e in old_events])
    n_new = n_replaced = 0
    children: dict[type, list[dict]] = {table: [] for table in
                                        (EventObservation, PressureCycleBin, WaveSpeedEstimate, ModelComparison, Flag)}
    for item in sorted(kept, key=lambda f: f.event.start_time_ns):
        values = _event_row_values(system_id, item.event, run_id)
        match = min(
            (e for e in unmatched_old.values() if abs(e.start_time - values["start_time"]) <= tolerance),
            key=lambda e: abs(e.start_time - values["start_time"]),
            default=None,
        )
        if match is not None:
            del unmatched_old[match.id]
            for key, value in values.items():
                setattr(match, key, value)
            row = match
            n_replaced += 1
        else:
            row = Event(**values)
            session.add(row)
            n_new += 1
        session.flush()
        children[EventObservation] += _observation_rows(row.id, item.event)
        children[PressureCycleBin] += _cycle_rows(row.id, item.event)
        children[WaveSpeedEstimate] += _wave_speed_rows(row.id, row.start_time, item.wave_speeds)
        children[ModelComparison] += [dict(event_id=row.id, **c) for c in item.comparisons]
        children[Flag] += [dict(event_id=row.id, system_id=system_id, **f) for f in item.flags]
    for stale in unmatched_old.values():
        session.delete(stale)
    session.flush()
    for table, rows in children.items():  # one bulk insert a table, not an object a row
        if rows:
            session.execute(insert(table), rows)
    return n_new, n_replaced
