"""``surgesift wavespeed``: per pipe, theoretical, prior, calibrated and measured wave speeds.

``--recalibrate`` combines each pipe's accepted estimates over the configured window
(``[wavespeed] calibration_window_days``) into a new ``wave_speed_calibrations`` row: a robust
inverse-variance weighted mean of the single-pipe GCC estimates where there are
``min_estimates`` or more; otherwise, where paths through several pipes make the pipe
identifiable, the weighted least-squares solution of the travel times
(``detectors.calibration``). A pipe with too few estimates keeps its calibration (or prior).
"""

from __future__ import annotations

import datetime as dt
import math
from argparse import Namespace
from dataclasses import dataclass

from sqlalchemy import select

from detectors.calibration import calibrate_pipes, solve_pipe_wave_speeds, wave_speed_trend
from detectors.wavespeed import wave_speed_estimate
from models.layout import SystemLayout

from .analysis import latest_calibrations
from .config import Config, system_layout
from .config_schema import SystemConfig
from .findings import utc_to_ns
from .pipe_properties import pipe_theoretical
from .store import WaveSpeedCalibration, WaveSpeedEstimate, open_store, utc_now
from .tables import CAUTION, fmt_num, fmt_time, format_table

__all__ = ["show_wave_speeds", "recalibrate_system", "CalibrationOutcome"]


@dataclass(frozen=True)
class CalibrationOutcome:
    pipe_id: str
    wave_speed_m_s: float | None
    uncertainty_m_s: float | None
    n_estimates: int
    method: str
    written: bool
    note: str


def _accepted_rows(session, system: SystemConfig, since: dt.datetime | None = None):
    pipes = {p.id for p in system.pipes}
    query = select(WaveSpeedEstimate).where(WaveSpeedEstimate.accepted.is_(True))
    if since is not None:
        query = query.where(WaveSpeedEstimate.event_time >= since)
    rows = session.scalars(query.order_by(WaveSpeedEstimate.event_time)).all()
    return [r for r in rows if r.pipe_id and all(part in pipes for part in r.pipe_id.split("+"))]


def _as_estimate(row: WaveSpeedEstimate, layout: SystemLayout):
    legs = layout.path_between_sensors(row.sensor_a, row.sensor_b) or ()
    delay_sigma = row.delay_s * row.uncertainty_m_s / row.wave_speed_m_s if row.wave_speed_m_s else math.nan
    return wave_speed_estimate(pipe_id=row.pipe_id, sensor_a=row.sensor_a, sensor_b=row.sensor_b,
                               distance_m=row.distance_m, delay_s=row.delay_s,
                               delay_uncertainty_s=delay_sigma, method=row.method, legs=tuple(legs))


def recalibrate_system(config: Config, system_id: str, factory, now: dt.datetime | None = None) -> list[CalibrationOutcome]:
    """Write new calibration rows for the pipes of a system that have enough estimates."""
    system = config.system(system_id)
    settings = config.service.wavespeed
    now = now or utc_now()
    since = now - dt.timedelta(days=settings.calibration_window_days)
    layout = system_layout(system)
    outcomes = []
    with factory() as session, session.begin():
        rows = _accepted_rows(session, system, since)
        estimates = [e for e in (_as_estimate(r, layout) for r in rows) if math.isfinite(e.delay_uncertainty_s)]
        single = calibrate_pipes(estimates)
        multi = {p.pipe_id: p for p in solve_pipe_wave_speeds([e for e in estimates if e.method.startswith("gcc")])}
        for pipe in system.pipes:
            combined = single.get(pipe.id)
            if combined is not None and combined.n_estimates >= settings.min_estimates:
                speed, sigma, n, method = combined.wave_speed_m_s, combined.uncertainty_m_s, combined.n_estimates, "weighted_mean"
            elif pipe.id in multi and multi[pipe.id].identifiable and multi[pipe.id].n_paths >= settings.min_estimates:
                solved = multi[pipe.id]
                speed, sigma, n, method = solved.wave_speed_m_s, solved.uncertainty_m_s, solved.n_paths, "path_least_squares"
            else:
                have = combined.n_estimates if combined is not None else 0
                outcomes.append(CalibrationOutcome(pipe.id, None, None, have, "-", False,
                                                   f"{have} accepted estimate(s), {settings.min_estimates} needed"))
                continue
            session.add(WaveSpeedCalibration(system_id=system.id, pipe_id=pipe.id, wave_speed_m_s=speed,
                                             uncertainty_m_s=sigma, n_estimates=n, created_at=now,
                                             window_start=since, window_end=now, method=method))
            outcomes.append(CalibrationOutcome(pipe.id, speed, sigma, n, method, True, "written"))
    return outcomes


def _trend_text(rows) -> str:
    usable = [r for r in rows if r.method.startswith("gcc") and r.uncertainty_m_s and r.event_time]
    try:
        trend = wave_speed_trend([utc_to_ns(r.event_time) for r in usable], [r.wave_speed_m_s for r in usable],
                                 [r.uncertainty_m_s for r in usable])
    except ValueError:
        return "-"
    return f"{trend.slope_m_s_per_year:+.0f} +- {trend.slope_uncertainty_m_s_per_year:.0f} m/s/yr"


def show_wave_speeds(config: Config, args: Namespace) -> int:
    _, factory = open_store(args.database_url or config.database_url)
    systems = [config.system(args.system)] if args.system else list(config.systems.values())
    for system in systems:
        if args.recalibrate:
            outcomes = recalibrate_system(config, system.id, factory)
            print(f"recalibration of {system.id}:")
            for o in outcomes:
                value = f"{o.wave_speed_m_s:.0f} +- {o.uncertainty_m_s:.0f} m/s from {o.n_estimates} ({o.method})" if o.written else o.note
                print(f"  {o.pipe_id}: {value}")
        with factory() as session:
            calibrations = latest_calibrations(session, system.id)
            rows = _accepted_rows(session, system)
        table = []
        for pipe in system.pipes:
            theory = pipe_theoretical(pipe, system.water_temperature_c)
            mine = [r for r in rows if r.pipe_id == pipe.id]
            latest = mine[-1] if mine else None
            cal = calibrations.get(pipe.id)
            table.append([
                pipe.id, f"{theory.wave_speed_m_s:.0f} ({theory.low_m_s:.0f}-{theory.high_m_s:.0f})",
                fmt_num(pipe.wave_speed_m_s),
                f"{cal.wave_speed_m_s:.0f} +- {cal.uncertainty_m_s:.0f} (n={cal.n_estimates}, {fmt_time(cal.created_at, False)})" if cal else "-",
                f"{latest.wave_speed_m_s:.0f} +- {latest.uncertainty_m_s:.0f} ({latest.method}, {fmt_time(latest.event_time, False)})" if latest else "-",
                len(mine), _trend_text(mine),
            ])
        print(f"wave speeds of {system.id} [m/s]:")
        print(format_table(["pipe", "theoretical (range)", "prior", "calibrated", "latest accepted", "accepted", "trend"],
                           table, right=(5,)))
        print("The model uses the newest calibration, else the prior, else the theoretical value.")
    print(CAUTION)
    return 0
