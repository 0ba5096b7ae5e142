"""Per-event analysis after detection: wave speeds, model comparison and flags.

:class:`EventAnalyser` holds what a system's events need (its layout with the newest wave-speed
calibrations, the service thresholds) and turns one detected event plus the window's traces
into :class:`service.findings.EventFindings`.
"""

from __future__ import annotations

import datetime as dt
import logging
from typing import Any, Mapping

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import sessionmaker

from detectors.calibration import assess_drift, combine_wave_speeds
from detectors.traces import SensorTrace
from detectors.wavespeed import estimate_event_wave_speeds
from models.properties import speed_of_sound_m_s, water_density_kg_m3

from .config import Config, system_layout
from .findings import EventFindings, ns_to_utc
from .flags import burst_size_text, kind_flags, limit_flags, repeated_trip_flag
from .store import Event, WaveSpeedCalibration

__all__ = ["EventAnalyser", "latest_calibrations"]

log = logging.getLogger(__name__)
MIN_WARNING_KINDS = ("burst_suspected", "sensor_fault")


def latest_calibrations(session, system_id: str) -> dict[str, WaveSpeedCalibration]:
    """The newest ``wave_speed_calibrations`` row per pipe of a system."""
    newest = (
        select(WaveSpeedCalibration.pipe_id, func.max(WaveSpeedCalibration.id).label("id"))
        .where(WaveSpeedCalibration.system_id == system_id)
        .group_by(WaveSpeedCalibration.pipe_id)
        .subquery()
    )
    rows = session.scalars(select(WaveSpeedCalibration).join(newest, WaveSpeedCalibration.id == newest.c.id))
    return {row.pipe_id: row for row in rows}


class EventAnalyser:
    """Analyses the events of one system (see module docstring)."""

    def __init__(self, config: Config, system_id: str, factory: sessionmaker):
        self.config = config
        self.system = config.system(system_id)
        self.factory = factory
        with factory() as session:
            self.calibrations = latest_calibrations(session, system_id)
        self.layout = system_layout(self.system, {k: v.wave_speed_m_s for k, v in self.calibrations.items()})
        self._network = None
        self._design = None
        self._trips_this_pass: list[dt.datetime] = []  # trips analysed before they are written

    @property
    def travel_margin_s(self) -> float:
        """Three times the longest one-way travel time between two sensors [s]."""
        sensors = [s.id for s in self.layout.sensors]
        longest = 0.0
        for i, a in enumerate(sensors):
            for b in sensors[i + 1:]:
                legs = self.layout.path_between_sensors(a, b)
                if legs:
                    longest = max(longest, self.layout.travel_time_s(legs, 1000.0))
        total_length = sum(p.length_m for p in self.layout.pipes)
        slowest = min(p.wave_speed_m_s or 1000.0 for p in self.layout.pipes)
        return 3.0 * max(longest, total_length / slowest)

    def analyse(self, event: Any, traces: Mapping[str, SensorTrace],
                measured: tuple | None = None) -> EventFindings:
        """Wave speeds, comparison and flags for one detected event (events of a pass in
        time order: the repeated-trip flag counts the earlier ones). ``measured``: the
        event's :meth:`measure` if already computed."""
        event = self.apply_kind_severity(event)
        size = (burst_size_text(event, self.layout, water_density_kg_m3(self.system.water_temperature_c),
                                self._source_elevation_m(event))
                if event.kind == "burst_suspected" else "")
        flags = limit_flags(event, self.layout) + kind_flags(event, size)
        if event.kind == "pump_trip":
            flag = self._repeated_trip(event)
            if flag is not None:
                flags.append(flag)
        wave_speeds, outcome = measured if measured is not None else self.measure(event, traces)
        flags += self.drift_flags(wave_speeds)
        comparisons: list[dict] = []
        if outcome is not None:
            comparisons, flags = list(outcome.rows), flags + list(outcome.flags)
        return EventFindings(event=event, wave_speeds=wave_speeds, comparisons=comparisons, flags=flags)

    def measure(self, event: Any, traces: Mapping[str, SensorTrace]) -> tuple:
        """The costly part of :meth:`analyse`, independent of other events: the wave speeds
        and the model comparison (None when off or not run). Safe to run for several events
        side by side in threads once :meth:`prepare_for_threads` has run."""
        wave_speeds = self.wave_speeds(event, traces)
        outcome = None
        if self.config.service.comparison.enabled and event.kind != "sensor_fault":
            outcome = self.compare(event, traces)
        return wave_speeds, outcome

    def prepare_for_threads(self) -> None:
        """Build the shared, lazily made parts (network, design scenarios) once, up front."""
        if self.config.service.comparison.enabled:
            _ = self.network, self.design_scenarios

    def compare(self, event: Any, traces: Mapping[str, SensorTrace]):
        """Replay the event in the calibrated MOC model; ``None`` when it cannot run at all."""
        from .comparison import compare_event

        settings = self.config.service.comparison
        try:
            return compare_event(self.system, self.layout, event, traces, settings,
                                 network=self.network, scenario_networks=self.design_scenarios)
        except (ValueError, ArithmeticError) as exc:
            log.warning("model comparison of the event at %s failed: %s", ns_to_utc(event.start_time_ns), exc)
            return None

    @property
    def network(self):
        """The system's MOC network with the current wave speeds (built once per analyser)."""
        if self._network is None:
            import dataclasses

            from .model_builder import build_network

            base = build_network(self.system)
            pipes = [dataclasses.replace(p, wave_speed_m_s=self.layout.pipe(p.id).wave_speed_m_s) for p in base.pipes]
            self._network = base.replace(pipes=pipes)
        return self._network

    @property
    def design_scenarios(self) -> dict:
        """Design scenarios (network, duration) for the what-if envelope, built once."""
        if self._design is None:
            from .model_builder import scenario_network

            wanted = self.config.service.comparison.envelope
            self._design = {sc.name: (scenario_network(self.system, sc.name), sc.duration_s)
                            for sc in self.system.scenarios if sc.design and wanted}
        return self._design

    @staticmethod
    def apply_kind_severity(event: Any) -> Any:
        """Raise the severity of kinds that need a person whatever the pressures were.

        A suspected burst and a faulty sensor are at least ``warning`` (common practice: both
        need someone to look, and a faulty sensor can hide the next surge).
        """
        import dataclasses

        if event.kind in MIN_WARNING_KINDS and event.severity == "info":
            return dataclasses.replace(event, severity="warning")
        return event

    def wave_speeds(self, event: Any, traces: Mapping[str, SensorTrace]) -> tuple:
        """Pairwise wave-speed estimates of an event, judged against the configured limits."""
        pressure = [o for o in event.observations
                    if self.layout.sensor(o.sensor_id).quantity == "pressure" and o.onset_time_ns is not None]
        if len(pressure) < 2 or event.kind == "sensor_fault":
            return ()
        settings = self.config.service.wavespeed
        try:
            estimates = estimate_event_wave_speeds(
                pressure, traces, self.layout,
                max_wave_speed_m_s=speed_of_sound_m_s(self.system.water_temperature_c),
                min_wave_speed_m_s=settings.floor_m_s, agreement_k=settings.agreement_k_sigma,
                n_bootstrap=settings.bootstrap_replicates, min_snr_db=settings.min_snr_db,
                min_correlation=settings.min_correlation,
                reflection_min_fraction=settings.reflection_min_fraction,
                source_node=getattr(event, "source_node", None), source=self._located_source(event),
            )
        except ValueError as exc:
            log.warning("wave speeds of the event at %s not estimated: %s", ns_to_utc(event.start_time_ns), exc)
            return ()
        return tuple(self._apply_uncertainty_limit(e, settings.max_relative_uncertainty) for e in estimates)

    def _source_elevation_m(self, event: Any) -> float | None:
        """Elevation of the located source point (from the pipe's profile), if located."""
        located = self._located_source(event)
        if located is None:
            return None
        return float(self.network.pipe_elevations(located[0], np.array([located[1]]))[0])

    @staticmethod
    def _located_source(event: Any) -> tuple[str, float] | None:
        """The event's source as a (pipe id, offset) point, where the detector located one."""
        pipe_id = getattr(event, "source_pipe_id", None)
        offset = getattr(event, "source_offset_m", None)
        return (pipe_id, float(offset)) if pipe_id is not None and offset is not None else None

    @staticmethod
    def _apply_uncertainty_limit(estimate, limit: float):
        import dataclasses
        import math

        speed, sigma = estimate.wave_speed_m_s, estimate.uncertainty_m_s
        if estimate.accepted and math.isfinite(speed) and speed > 0 and sigma / speed > limit:
            reason = f"uncertainty {100 * sigma / speed:.1f} % is above the {100 * limit:.0f} % limit"
            return dataclasses.replace(estimate, accepted=False, reason=reason)
        return estimate

    def drift_flags(self, estimates) -> list[dict]:
        """A flag per pipe whose accepted estimates in this event depart from its calibration."""
        settings = self.config.service.wavespeed
        flags = []
        by_pipe: dict[str, list] = {}
        for e in estimates:
            if e.accepted and e.method != "onset" and "+" not in e.pipe_id:
                by_pipe.setdefault(e.pipe_id, []).append(e)
        for pipe_id, group in by_pipe.items():
            calibration = self.calibrations.get(pipe_id)
            if calibration is None:
                continue
            recent = combine_wave_speeds([e.wave_speed_m_s for e in group], [e.uncertainty_m_s for e in group])
            drift = assess_drift(calibration.wave_speed_m_s, calibration.uncertainty_m_s, recent,
                                 k_sigma=settings.drift_k_sigma, min_percent=settings.drift_percent)
            if drift.drifted:
                hint = ("a falling wave speed hints at entrained or trapped air, or loss of wall "
                        "stiffness; check air valves and recent works" if drift.difference_m_s < 0
                        else "a rising wave speed hints at a wrong pipe record or a clock problem")
                flags.append(dict(asset_id=pipe_id, kind="wave_speed_drift", severity="warning",
                                  message=f"pipe {pipe_id}: {drift.message}; {hint}."))
        return flags

    def _repeated_trip(self, event: Any) -> dict | None:
        settings = self.config.service.comparison
        stations = self.layout.nodes_of_kind("pump_station")
        if not stations:
            return None
        station = getattr(event, "source_node", None) or stations[0].id
        start = ns_to_utc(event.start_time_ns)
        since = start - dt.timedelta(hours=settings.repeated_trip_period_h)
        with self.factory() as session:
            earlier = session.scalars(
                select(Event.start_time).where(
                    Event.system_id == self.system.id, Event.kind == "pump_trip",
                    Event.start_time >= since, Event.start_time < start,
                )
            ).all()
        same_pass = [t for t in self._trips_this_pass if since <= t < start]
        self._trips_this_pass.append(start)
        times = sorted({*earlier, *same_pass, start})
        return repeated_trip_flag(station, times, settings.repeated_trip_count, settings.repeated_trip_period_h)
