"""Findings database: SQLAlchemy 2 schema and engine set-up.

Table and column names of the fixed contract (DESIGN.md) are kept exactly; extra columns are
added where a person needs them (``reason``, ``notes``). Pressures are gauge kPa, heads metres,
times UTC (stored naive, meaning UTC), speeds m/s; the unit is in each column's name.

SQLite is the default (WAL journal, foreign keys on, a busy timeout so that a reader never
breaks a writer); any SQLAlchemy URL works, e.g. ``postgresql+psycopg://user@host/db``.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import (
    Boolean,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
    create_engine,
    event,
    inspect,
)
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, sessionmaker

__all__ = [
    "Base",
    "ScreeningRun",
    "SourceFile",
    "Event",
    "EventObservation",
    "WaveSpeedEstimate",
    "ModelComparison",
    "WaveSpeedCalibration",
    "Flag",
    "PendingSpan",
    "StoreInfo",
    "database_identity",
    "StoreError",
    "open_store",
    "utc_now",
]


class StoreError(RuntimeError):
    """The findings database cannot be opened or written."""


def utc_now() -> dt.datetime:
    """Current UTC time as a naive datetime (the database convention: naive means UTC)."""
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)


class Base(DeclarativeBase):
    pass


class ScreeningRun(Base):
    __tablename__ = "screening_runs"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    started_at: Mapped[dt.datetime] = mapped_column(DateTime)
    finished_at: Mapped[dt.datetime | None] = mapped_column(DateTime)
    status: Mapped[str] = mapped_column(String(16))  # running | completed | failed
    files_new: Mapped[int] = mapped_column(Integer, default=0)
    files_quarantined: Mapped[int] = mapped_column(Integer, default=0)
    events_new: Mapped[int] = mapped_column(Integer, default=0)
    files_seen_before: Mapped[int] = mapped_column(Integer, default=0)
    windows_screened: Mapped[int] = mapped_column(Integer, default=0)
    trigger: Mapped[str] = mapped_column(String(16), default="manual")  # manual | schedule
    message: Mapped[str | None] = mapped_column(Text)


class SourceFile(Base):
    __tablename__ = "source_files"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    path: Mapped[str] = mapped_column(Text)
    sha256: Mapped[str] = mapped_column(String(64), unique=True)
    status: Mapped[str] = mapped_column(String(16))  # screened | quarantined
    error: Mapped[str | None] = mapped_column(Text)
    n_samples: Mapped[int] = mapped_column(Integer, default=0)
    first_time: Mapped[dt.datetime | None] = mapped_column(DateTime)
    last_time: Mapped[dt.datetime | None] = mapped_column(DateTime)
    run_id: Mapped[int] = mapped_column(ForeignKey("screening_runs.id"))
    size_bytes: Mapped[int] = mapped_column(Integer, default=0)
    systems: Mapped[str | None] = mapped_column(Text)  # comma-separated system ids
    sensors: Mapped[str | None] = mapped_column(Text)
    notes: Mapped[str | None] = mapped_column(Text)
    ingested_at: Mapped[dt.datetime] = mapped_column(DateTime, default=utc_now)


class Event(Base):
    __tablename__ = "events"
    __table_args__ = (Index("ix_events_system_start", "system_id", "start_time"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    system_id: Mapped[str] = mapped_column(String(64))
    kind: Mapped[str] = mapped_column(String(32))
    severity: Mapped[str] = mapped_column(String(16))
    start_time: Mapped[dt.datetime] = mapped_column(DateTime)
    end_time: Mapped[dt.datetime] = mapped_column(DateTime)
    origin_sensor: Mapped[str | None] = mapped_column(String(64))
    run_id: Mapped[int] = mapped_column(ForeignKey("screening_runs.id"))
    reason: Mapped[str | None] = mapped_column(Text)
    n_sensors: Mapped[int] = mapped_column(Integer, default=0)
    max_kpa: Mapped[float | None] = mapped_column(Float)
    min_kpa: Mapped[float | None] = mapped_column(Float)
    updated_at: Mapped[dt.datetime] = mapped_column(DateTime, default=utc_now)


class EventObservation(Base):
    __tablename__ = "event_observations"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int] = mapped_column(ForeignKey("events.id", ondelete="CASCADE"), index=True)
    sensor_id: Mapped[str] = mapped_column(String(64))
    onset_time: Mapped[dt.datetime | None] = mapped_column(DateTime)
    baseline_kpa: Mapped[float | None] = mapped_column(Float)
    max_kpa: Mapped[float | None] = mapped_column(Float)
    min_kpa: Mapped[float | None] = mapped_column(Float)
    max_rate_kpa_s: Mapped[float | None] = mapped_column(Float)
    onset_uncertainty_s: Mapped[float | None] = mapped_column(Float)
    first_front_kpa: Mapped[float | None] = mapped_column(Float)
    settle_duration_s: Mapped[float | None] = mapped_column(Float)
    dominant_period_s: Mapped[float | None] = mapped_column(Float)
    damping_ratio: Mapped[float | None] = mapped_column(Float)
    clipped: Mapped[bool] = mapped_column(Boolean, default=False)
    sample_interval_s: Mapped[float | None] = mapped_column(Float)
    notes: Mapped[str | None] = mapped_column(Text)


class PressureCycleBin(Base):
    """Rainflow cycles (ASTM E1049-85) one sensor saw in one event, per range bin."""

    __tablename__ = "pressure_cycles"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int] = mapped_column(ForeignKey("events.id", ondelete="CASCADE"), index=True)
    sensor_id: Mapped[str] = mapped_column(String(64))
    range_from_kpa: Mapped[float] = mapped_column(Float)
    range_to_kpa: Mapped[float] = mapped_column(Float)
    cycles: Mapped[float] = mapped_column(Float)  # half cycles count 0.5
    largest_range_kpa: Mapped[float] = mapped_column(Float)  # of the sensor in the event
    gate_kpa: Mapped[float] = mapped_column(Float)  # reversals smaller than this were not counted


class WaveSpeedEstimate(Base):
    __tablename__ = "wave_speed_estimates"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int] = mapped_column(ForeignKey("events.id", ondelete="CASCADE"), index=True)
    pipe_id: Mapped[str | None] = mapped_column(String(64))
    sensor_a: Mapped[str] = mapped_column(String(64))
    sensor_b: Mapped[str] = mapped_column(String(64))
    distance_m: Mapped[float] = mapped_column(Float)
    delay_s: Mapped[float | None] = mapped_column(Float)
    wave_speed_m_s: Mapped[float | None] = mapped_column(Float)
    uncertainty_m_s: Mapped[float | None] = mapped_column(Float)
    method: Mapped[str] = mapped_column(String(32))
    accepted: Mapped[bool] = mapped_column(Boolean, default=False)
    reason: Mapped[str | None] = mapped_column(Text)
    correlation_peak: Mapped[float | None] = mapped_column(Float)
    snr_db: Mapped[float | None] = mapped_column(Float)
    event_time: Mapped[dt.datetime | None] = mapped_column(DateTime)


class ModelComparison(Base):
    __tablename__ = "model_comparisons"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int] = mapped_column(ForeignKey("events.id", ondelete="CASCADE"), index=True)
    sensor_id: Mapped[str] = mapped_column(String(64))
    measured_max_kpa: Mapped[float | None] = mapped_column(Float)
    model_max_kpa: Mapped[float | None] = mapped_column(Float)
    measured_min_kpa: Mapped[float | None] = mapped_column(Float)
    model_min_kpa: Mapped[float | None] = mapped_column(Float)
    rmse_kpa: Mapped[float | None] = mapped_column(Float)
    wave_speed_m_s: Mapped[float | None] = mapped_column(Float)
    friction_factor: Mapped[float | None] = mapped_column(Float)
    fit_status: Mapped[str | None] = mapped_column(String(32))
    notes: Mapped[str | None] = mapped_column(Text)


class WaveSpeedCalibration(Base):
    __tablename__ = "wave_speed_calibrations"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    system_id: Mapped[str] = mapped_column(String(64))
    pipe_id: Mapped[str] = mapped_column(String(64))
    wave_speed_m_s: Mapped[float] = mapped_column(Float)
    uncertainty_m_s: Mapped[float] = mapped_column(Float)
    n_estimates: Mapped[int] = mapped_column(Integer)
    created_at: Mapped[dt.datetime] = mapped_column(DateTime, default=utc_now)
    window_start: Mapped[dt.datetime | None] = mapped_column(DateTime)
    window_end: Mapped[dt.datetime | None] = mapped_column(DateTime)
    method: Mapped[str | None] = mapped_column(String(64))


class Flag(Base):
    __tablename__ = "flags"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    event_id: Mapped[int | None] = mapped_column(ForeignKey("events.id", ondelete="CASCADE"), index=True)
    asset_id: Mapped[str | None] = mapped_column(String(64))
    kind: Mapped[str] = mapped_column(String(48))
    severity: Mapped[str] = mapped_column(String(16))
    message: Mapped[str] = mapped_column(Text)
    system_id: Mapped[str | None] = mapped_column(String(64))
    created_at: Mapped[dt.datetime] = mapped_column(DateTime, default=utc_now)


class StoreInfo(Base):
    """One row: the identity of this findings database (ties an archive folder to it)."""

    __tablename__ = "store_info"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    database_id: Mapped[str] = mapped_column(String(36))
    created_at: Mapped[dt.datetime] = mapped_column(DateTime, default=utc_now)


def database_identity(factory) -> str:
    """The database's identity, created on first use."""
    import uuid

    with factory() as session, session.begin():
        row = session.get(StoreInfo, 1)
        if row is None:
            row = StoreInfo(id=1, database_id=str(uuid.uuid4()))
            session.add(row)
        return row.database_id


class PendingSpan(Base):
    """A time span of a system that gained archive data and still needs screening."""

    __tablename__ = "pending_spans"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    system_id: Mapped[str] = mapped_column(String(64), index=True)
    start_time: Mapped[dt.datetime] = mapped_column(DateTime)
    end_time: Mapped[dt.datetime] = mapped_column(DateTime)
    source_file_id: Mapped[int | None] = mapped_column(ForeignKey("source_files.id"))


def _sqlite_pragmas(dbapi_connection, _record) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA foreign_keys=ON")
    cursor.execute("PRAGMA journal_mode=WAL")
    cursor.execute("PRAGMA busy_timeout=30000")
    cursor.close()


def open_store(database_url: str) -> tuple[Engine, sessionmaker]:
    """Create the engine, the tables that are missing, and a session factory.

    Raises
    ------
    StoreError
        When the database cannot be reached or created, with the URL (password hidden).
    """
    try:
        engine = create_engine(database_url, future=True)
    except ImportError as exc:
        raise StoreError(
            f"the database driver for {database_url.split(':', 1)[0]!r} is not installed ({exc.name}); "
            f"install it into this environment (for PostgreSQL: pip install 'psycopg[binary]')"
        ) from exc
    except (SQLAlchemyError, ValueError) as exc:
        raise StoreError(f"database URL {database_url!r} is not usable: {exc}") from exc
    if engine.dialect.name == "sqlite":
        event.listen(engine, "connect", _sqlite_pragmas)
    try:
        Base.metadata.create_all(engine)
        inspect(engine).get_table_names()
    except SQLAlchemyError as exc:
        shown = engine.url.render_as_string(hide_password=True)
        raise StoreError(f"cannot open the findings database {shown}: {exc.__class__.__name__}: {exc}") from exc
    return engine, sessionmaker(engine, expire_on_commit=False)
