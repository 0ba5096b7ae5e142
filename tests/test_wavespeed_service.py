"""`surgesift wavespeed --recalibrate`: accepted estimates in, a calibration row out, used next."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

import pytest
from sqlalchemy import select

from service.analysis import EventAnalyser
from service.config import load_config
from service.store import Event, ScreeningRun, WaveSpeedCalibration, WaveSpeedEstimate, open_store
from service.wavespeed_report import recalibrate_system

REPO = Path(__file__).resolve().parents[1]
NOW = dt.datetime(2026, 12, 1, 6, 0)


@pytest.fixture()
def config(tmp_path):
    shutil.copytree(REPO / "config", tmp_path / "config")
    return load_config(tmp_path / "config")


def _estimates(factory, speeds, sigma=10.0, method="gcc_plain", accepted=True):
    with factory() as session, session.begin():
        run = ScreeningRun(started_at=NOW, status="completed")
        session.add(run)
        session.flush()
        for i, speed in enumerate(speeds):
            when = NOW - dt.timedelta(days=i + 1)
            event = Event(system_id="kestrel-hill", kind="pump_trip", severity="info", start_time=when,
                          end_time=when, origin_sensor="BRK-PT1", run_id=run.id)
            session.add(event)
            session.flush()
            session.add(WaveSpeedEstimate(
                event_id=event.id, pipe_id="KH-1", sensor_a="BRK-PT1", sensor_b="KH1-PT2", distance_m=1630.0,
                delay_s=1630.0 / speed, wave_speed_m_s=speed, uncertainty_m_s=sigma, method=method,
                accepted=accepted, event_time=when))


def test_recalibration_writes_the_weighted_mean_and_the_model_uses_it(config):
    _, factory = open_store(config.database_url)
    _estimates(factory, [1100.0, 1110.0, 1120.0, 1130.0])
    _estimates(factory, [400.0], accepted=False)  # rejected estimates never count
    outcomes = {o.pipe_id: o for o in recalibrate_system(config, "kestrel-hill", factory, now=NOW)}
    # Equal uncertainties: the inverse-variance mean is the plain mean (analytical), 1115 m/s;
    # its standard uncertainty is at least 10/sqrt(4) = 5 m/s.
    assert outcomes["KH-1"].written and outcomes["KH-1"].wave_speed_m_s == pytest.approx(1115.0, abs=0.5)
    assert outcomes["KH-1"].uncertainty_m_s >= 5.0 - 1e-9
    assert not outcomes["KH-2"].written and "needed" in outcomes["KH-2"].note
    with factory() as session:
        (row,) = session.scalars(select(WaveSpeedCalibration)).all()
    assert (row.pipe_id, row.n_estimates) == ("KH-1", 4)
    analyser = EventAnalyser(config, "kestrel-hill", factory)
    assert analyser.layout.pipe("KH-1").wave_speed_m_s == pytest.approx(1115.0, abs=0.5)
    assert analyser.network.pipe("KH-1").wave_speed_m_s == pytest.approx(1115.0, abs=0.5)


def test_too_few_estimates_write_nothing(config):
    _, factory = open_store(config.database_url)
    _estimates(factory, [1100.0, 1110.0])
    outcomes = recalibrate_system(config, "kestrel-hill", factory, now=NOW)
    assert not any(o.written for o in outcomes)
    with factory() as session:
        assert session.scalars(select(WaveSpeedCalibration)).all() == []
