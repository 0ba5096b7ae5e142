"""Flags from the configured limits and from the kind of event, with the message each gives."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
from service.analysis import EventAnalyser
from service.flags import kind_flags, limit_flags, repeated_trip_flag

LAYOUT = SystemLayout(
    "s", (NodeSite("PS", "pump_station"), NodeSite("R", "reservoir")),
    (PipeSite("P1", "PS", "R", 2000.0, 0.4, 1100.0, allowable_pressure_pa=1000e3, minimum_pressure_pa=-20e3),),
    (SensorSite("S1", "P1", 50.0), SensorSite("S2", "P1", 1500.0)),
)


@dataclass(frozen=True)
class Obs:
    sensor_id: str
    max_pa: float
    min_pa: float
    clipped: bool = False


@dataclass(frozen=True)
class Ev:
    kind: str = "pump_trip"
    severity: str = "info"
    origin_sensor: str = "S1"
    reason: str = "down-surge first at S1"
    observations: tuple = field(default_factory=tuple)
    source_node: str | None = None
    source_description: str = ""


def test_above_allowable_names_pipe_sensor_and_checks():
    (flag,) = limit_flags(Ev(observations=(Obs("S1", 1200e3, 300e3),)), LAYOUT)
    assert (flag["asset_id"], flag["kind"], flag["severity"]) == ("P1", "above_allowable_pressure", "critical")
    assert "S1 (pipe P1, chainage 50 m) reached 1200 kPa" in flag["message"]
    assert "allowable surge pressure 1000 kPa" in flag["message"]


def test_clipped_peak_is_at_least_the_range():
    (flag,) = limit_flags(Ev(observations=(Obs("S1", 1300e3, 300e3, clipped=True),)), LAYOUT)
    assert "at least 1300 kPa (sensor at its range)" in flag["message"]
    (flag,) = limit_flags(Ev(observations=(Obs("S1", 900e3, 300e3, clipped=True),)), LAYOUT)
    assert flag["kind"] == "sensor_clipped" and "may be higher" in flag["message"]


def test_below_minimum_warns_of_column_separation_and_ingress():
    (flag,) = limit_flags(Ev(observations=(Obs("S2", 500e3, -60e3),)), LAYOUT)
    assert flag["kind"] == "below_minimum_pressure" and flag["severity"] == "critical"
    assert "column separation" in flag["message"] and "ingress" in flag["message"]


def test_within_limits_no_flag():
    assert limit_flags(Ev(observations=(Obs("S1", 999e3, -19e3),)), LAYOUT) == []


def test_repeated_trips_within_the_period():
    t0 = dt.datetime(2026, 11, 28, 1, 0)
    times = [t0, t0 + dt.timedelta(hours=5), t0 + dt.timedelta(hours=20)]
    flag = repeated_trip_flag("PS", times, count=3, period_h=24.0)
    assert flag["asset_id"] == "PS" and "3 pump trips at PS within 24 h" in flag["message"]
    assert repeated_trip_flag("PS", times, count=3, period_h=12.0) is None


def test_burst_and_fault_flags_and_their_minimum_severity():
    burst = Ev(kind="burst_suspected", origin_sensor="S2", source_description="source on P1 about 900 m from PS")
    (flag,) = kind_flags(burst)
    assert flag["kind"] == "possible_burst" and "walk the line" in flag["message"]
    assert EventAnalyser.apply_kind_severity(burst).severity == "warning"
    (flag,) = kind_flags(Ev(kind="sensor_fault", origin_sensor="S2", reason="flat line"))
    assert flag["asset_id"] == "S2" and "transducer" in flag["message"]
    assert EventAnalyser.apply_kind_severity(Ev()).severity == "info"  # a trip keeps its own rank


def test_repeated_trips_counted_within_one_pass(tmp_path):
    """Trips analysed in one window count before they reach the database."""
    import shutil
    from pathlib import Path

    from service.config import load_config
    from service.store import open_store

    shutil.copytree(Path(__file__).resolve().parents[1] / "config", tmp_path / "config")
    config = load_config(tmp_path / "config")
    analyser = EventAnalyser(config, "kestrel-hill", open_store(config.database_url)[1])
    base = 1_800_000_000 * 10**9
    flags = [analyser._repeated_trip(type("E", (), {"start_time_ns": base + k * 3600 * 10**9,
                                                      "source_node": "BROOKFOLD_PS"})()) for k in range(3)]
    assert flags[:2] == [None, None]
    assert flags[2]["kind"] == "repeated_pump_trips" and flags[2]["asset_id"] == "BROOKFOLD_PS"
