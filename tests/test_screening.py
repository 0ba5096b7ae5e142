"""End-to-end screening passes on small files written by the tests.

A synthetic surge (a front of 300 kPa travelling at 1000 m/s, analytical, tagged *generated*)
reaches three loggers on one pipe at times set by their chainage; each logger uploads its own
files. The checks are about the service's contracts: one event with one observation per
sensor, exactly-once ingest, late files re-screening their window without duplicates, and
atomicity under injected crashes.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import func, select

from service.cli import main
from service.config import load_config
from service.screening import ScreeningPass
from service.store import Event, EventObservation, PendingSpan, ScreeningRun, SourceFile, open_store

T0 = pd.Timestamp("2026-03-02T01:00:00Z")
RATE_HZ = 100.0
WAVE_SPEED = 1000.0
SURGE_AT_S = 1200.0  # the front leaves the valve end 20 min after T0
SENSORS = {"LG-A": 200.0, "LG-B": 1200.0, "LG-C": 2200.0}  # chainage from the reservoir [m]
PIPE_LENGTH = 2500.0

SYSTEM_TOML = """
id = "testmain"
name = "Test main"
water_temperature_c = 10.0

[[nodes]]
id = "RES"
kind = "reservoir"
head_m = 60.0
elevation_m = 10.0

[[nodes]]
id = "VLV"
kind = "valve"
elevation_m = 5.0
[nodes.valve]
effective_area_m2 = 0.01
discharge = "atmosphere"

[[pipes]]
id = "M1"
from_node = "RES"
to_node = "VLV"
length_m = 2500.0
diameter_m = 0.3
wall_thickness_m = 0.008
material = "ductile_iron"
wave_speed_m_s = 1000.0
allowable_pressure_kpa = 1000.0
minimum_pressure_kpa = -20.0
"""


def _sensor_block(sensor_id: str, offset_m: float) -> str:
    return textwrap.dedent(f"""
    [[sensors]]
    id = "{sensor_id}"
    pipe = "M1"
    offset_m = {offset_m}
    elevation_m = 8.0
    unit = "kPa"
    """)


@pytest.fixture()
def project(tmp_path: Path) -> Path:
    (tmp_path / "config" / "systems").mkdir(parents=True)
    (tmp_path / "inbox").mkdir()
    (tmp_path / "config" / "service.toml").write_text(textwrap.dedent("""
        [inbox]
        path = "inbox"
        [findings]
        database_url = "sqlite:///findings.sqlite"
        [archive]
        path = "archive"
        [detection]
        min_amplitude_kpa = 20.0
        window_margin_s = 60.0
        [comparison]
        enabled = false   # the analytic test surge is no MOC event; comparison wiring is tested below
    """))
    system = SYSTEM_TOML + "".join(_sensor_block(s, o) for s, o in SENSORS.items())
    (tmp_path / "config" / "systems" / "testmain.toml").write_text(system)
    return tmp_path


def _pressure_kpa(sensor_id: str, t_s: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Baseline 450 kPa; a 300 kPa front (rise 0.1 s) arriving from the valve end."""
    arrival = SURGE_AT_S + (PIPE_LENGTH - SENSORS[sensor_id]) / WAVE_SPEED
    x = np.clip((t_s - arrival) / 0.1, 0.0, 1.0)
    after = np.maximum(t_s - arrival, 0.0)
    surge = 300.0 * x * np.exp(-after / 20.0) * np.cos(2 * np.pi * after / 10.0)
    return 450.0 + surge + rng.normal(0.0, 1.0, t_s.size)


def write_logger_file(folder: Path, sensor_id: str, start_s: float, end_s: float, seed: int = 1) -> Path:
    """A Parquet upload of one logger: columns time (UTC) and the sensor id."""
    rng = np.random.default_rng(seed)
    t_s = np.arange(start_s, end_s, 1.0 / RATE_HZ)
    frame = pd.DataFrame({"time": T0 + pd.to_timedelta(t_s, unit="s"), sensor_id: _pressure_kpa(sensor_id, t_s, rng)})
    path = folder / f"{sensor_id}_{int(start_s):05d}.parquet"
    frame.to_parquet(path, index=False)
    return path


def _count(factory, model) -> int:
    with factory() as session:
        return session.scalar(select(func.count()).select_from(model))


def _run(project: Path, **kwargs):
    config = load_config(project / "config")
    return ScreeningPass(config, **kwargs).run(), open_store(config.database_url)[1]


def test_one_event_seen_in_files_of_three_loggers(project):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    summary, factory = _run(project)
    assert summary.status == "completed"
    assert summary.count("screened") == 3
    with factory() as session:
        events = session.scalars(select(Event)).all()
        assert len(events) == 1
        observations = session.scalars(select(EventObservation)).all()
    assert sorted(o.sensor_id for o in observations) == sorted(SENSORS)
    # The front starts at the valve end: LG-C sees it first, 0.3 s after the surge time.
    assert events[0].origin_sensor == "LG-C"
    expected_start = T0 + pd.Timedelta(seconds=SURGE_AT_S + 0.3)
    assert abs(pd.Timestamp(events[0].start_time, tz="UTC") - expected_start) < pd.Timedelta(seconds=0.05)


def test_second_pass_adds_only_a_run_row(project):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    _, factory = _run(project)
    before = {m: _count(factory, m) for m in (SourceFile, Event, EventObservation, ScreeningRun)}
    summary, _ = _run(project)
    assert summary.count("seen_before") == 3 and summary.count("screened") == 0
    after = {m: _count(factory, m) for m in (SourceFile, Event, EventObservation, ScreeningRun)}
    assert after[ScreeningRun] == before[ScreeningRun] + 1
    assert {m: after[m] for m in (SourceFile, Event, EventObservation)} == {
        m: before[m] for m in (SourceFile, Event, EventObservation)}


def test_late_file_rescreens_window_without_duplicates(project):
    write_logger_file(project / "inbox", "LG-A", 900.0, 1500.0)
    write_logger_file(project / "inbox", "LG-B", 900.0, 1500.0)
    _, factory = _run(project)
    with factory() as session:
        (first,) = session.scalars(select(Event)).all()
        assert first.n_sensors == 2
    write_logger_file(project / "inbox", "LG-C", 900.0, 1500.0)  # arrives a night late
    summary, _ = _run(project)
    assert summary.events_replaced == 1 and summary.events_new == 0
    with factory() as session:
        (event,) = session.scalars(select(Event)).all()
        assert event.id == first.id  # identity kept by system and start time
        assert event.n_sensors == 3 and event.origin_sensor == "LG-C"
        assert _count(factory, EventObservation) == 3


def test_event_straddling_two_files_of_one_logger(project):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1201.0, seed=2)
        write_logger_file(project / "inbox", sensor, 1201.0, 1500.0, seed=3)
    summary, factory = _run(project)
    assert summary.count("screened") == 6
    assert _count(factory, Event) == 1
    assert _count(factory, EventObservation) == 3


def test_crash_after_archiving_a_file_leaves_nothing_and_next_pass_completes(project):
    write_logger_file(project / "inbox", "LG-A", 900.0, 1500.0)

    def crash(stage):
        if stage == "file-archived":
            raise RuntimeError("injected crash")

    with pytest.raises(RuntimeError, match="injected crash"):
        _run(project, fail_hook=crash)
    config = load_config(project / "config")
    _, factory = open_store(config.database_url)
    assert _count(factory, SourceFile) == 0
    assert list((project / "archive").rglob("*.parquet")) == []
    with factory() as session:
        (run,) = session.scalars(select(ScreeningRun)).all()
        assert run.status == "failed" and "injected crash" in run.message
    summary, _ = _run(project)
    assert summary.count("screened") == 1 and _count(factory, SourceFile) == 1


def test_crash_while_writing_a_window_keeps_it_pending(project):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)

    def crash(stage):
        if stage == "window-written":
            raise RuntimeError("injected crash")

    with pytest.raises(RuntimeError):
        _run(project, fail_hook=crash)
    config = load_config(project / "config")
    _, factory = open_store(config.database_url)
    assert _count(factory, Event) == 0 and _count(factory, EventObservation) == 0
    assert _count(factory, PendingSpan) == 3
    summary, _ = _run(project)
    assert summary.count("seen_before") == 3
    assert _count(factory, Event) == 1 and _count(factory, PendingSpan) == 0


def test_cli_quarantines_a_broken_file_and_exits_zero(project, capsys):
    write_logger_file(project / "inbox", "LG-A", 900.0, 1000.0)
    (project / "inbox" / "LG-B_broken.csv").write_text("time,LG-B\n2026-03-02T01:00:00Z,450.0\n2026-03-02T01:00:01Z,451.0,9\n")
    code = main(["screen", "--config", str(project / "config")])
    out = capsys.readouterr().out
    assert code == 0
    assert "1 quarantined" in out and "LG-B_broken.csv" in out
    config = load_config(project / "config")
    _, factory = open_store(config.database_url)
    with factory() as session:
        bad = session.scalars(select(SourceFile).where(SourceFile.status == "quarantined")).one()
    assert "line 3" in bad.error
    assert (project / "inbox" / "LG-B_broken.csv").exists()  # never moved or deleted


def test_cli_bad_config_exits_two(project, capsys):
    (project / "config" / "service.toml").write_text("[inbox]\npaht = 'x'\n")
    assert main(["screen", "--config", str(project / "config")]) == 2
    assert "inbox.paht: unknown key" in capsys.readouterr().err


def test_comparison_rows_and_flags_are_written_with_the_event(project, monkeypatch):
    """Wiring: what the model comparison returns lands in model_comparisons and flags."""
    from service import comparison
    from service.store import Flag, ModelComparison

    service_toml = project / "config" / "service.toml"
    service_toml.write_text(service_toml.read_text().replace("enabled = false", "enabled = true"))

    class Outcome:
        rows = [dict(sensor_id="LG-B", measured_max_kpa=750.0, model_max_kpa=700.0, measured_min_kpa=150.0,
                     model_min_kpa=160.0, rmse_kpa=12.0, wave_speed_m_s=1000.0, friction_factor=0.02,
                     fit_status="converged", notes="factor fit")]
        flags = [dict(asset_id="M1", kind="field_worse_than_model", severity="warning", message="check for air")]

    calls = []

    def fake_compare(system, layout, event, traces, settings, **kwargs):
        calls.append((system.id, event.kind, sorted(traces)))
        return Outcome()

    monkeypatch.setattr(comparison, "compare_event", fake_compare)
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    _, factory = _run(project)
    assert len(calls) == 1 and calls[0][0] == "testmain" and calls[0][2] == sorted(SENSORS)
    with factory() as session:
        (row,) = session.scalars(select(ModelComparison)).all()
        assert (row.sensor_id, row.model_max_kpa, row.fit_status) == ("LG-B", 700.0, "converged")
        kinds = session.scalars(select(Flag.kind)).all()
    assert "field_worse_than_model" in kinds


def test_missing_inbox_is_a_failed_run_with_a_reason(project, capsys):
    import shutil

    shutil.rmtree(project / "inbox")
    assert main(["screen", "--config", str(project / "config")]) == 2
    assert "inbox folder" in capsys.readouterr().err
    config = load_config(project / "config")
    _, factory = open_store(config.database_url)
    with factory() as session:
        (run,) = session.scalars(select(ScreeningRun)).all()
    assert run.status == "failed" and "does not exist" in run.message


def test_archive_of_another_database_is_refused_and_kept(project, capsys):
    write_logger_file(project / "inbox", "LG-A", 900.0, 1000.0)
    assert main(["screen", "--config", str(project / "config")]) == 0
    parts = sorted((project / "archive").rglob("*.parquet"))
    other = "sqlite:///" + str(project / "other.sqlite")
    assert main(["screen", "--config", str(project / "config"), "--db", other]) == 2
    assert "belongs to another findings database" in capsys.readouterr().err
    assert sorted((project / "archive").rglob("*.parquet")) == parts  # nothing removed


def test_report_has_the_event_its_plot_the_caution_and_csv_exports(project, capsys):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    _run(project)
    assert main(["report", "--config", str(project / "config"), "--out", str(project / "out")]) == 0
    (html_path,) = (project / "out").rglob("report.html")
    page = html_path.read_text()
    assert "Screening aid only" in page and "licensed engineer" in page
    assert page.count("data:image/png;base64,") >= 1  # the event's pressure plot
    events_csv = pd.read_csv(html_path.parent / "events.csv")
    assert len(events_csv) == 1 and events_csv["origin_sensor"].iloc[0] == "LG-C"
    for name in ("observations", "flags", "wave_speeds", "comparisons", "cycles"):
        assert (html_path.parent / f"{name}.csv").exists()
    cycles = pd.read_csv(html_path.parent / "cycles.csv")
    assert sorted(set(cycles["sensor_id"])) == sorted(SENSORS)
    assert "Pressure cycles (rainflow" in page and "kPa largest" in page


def test_the_same_file_twice_in_one_inbox_is_stored_once(project):
    import shutil

    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    first = project / "inbox" / "LG-A_00900.parquet"
    shutil.copy(first, project / "inbox" / "zz_copy_of_first_upload.parquet")
    summary, factory = _run(project)
    assert summary.count("screened") == 3 and summary.count("seen_before") == 1
    assert _count(factory, SourceFile) == 3
    assert _count(factory, Event) == 1 and _count(factory, PendingSpan) == 0


def test_a_failed_store_ends_the_pass_and_the_next_pass_reads_every_file_again(project):
    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    calls = []

    def crash_second(stage):
        if stage == "file-archived":
            calls.append(stage)
            if len(calls) == 2:
                raise RuntimeError("injected crash")

    with pytest.raises(RuntimeError, match="injected crash"):
        _run(project, fail_hook=crash_second)
    config = load_config(project / "config")
    _, factory = open_store(config.database_url)
    assert _count(factory, SourceFile) == 1 and _count(factory, Event) == 0
    assert len(list((project / "archive").rglob("*.parquet"))) == 1  # the first file's part only
    summary, _ = _run(project)
    assert summary.count("seen_before") == 1 and summary.count("screened") == 2
    assert _count(factory, Event) == 1 and _count(factory, PendingSpan) == 0


def test_pressure_cycles_of_each_sensor_are_stored_with_the_event(project):
    from service.store import PressureCycleBin

    for sensor in SENSORS:
        write_logger_file(project / "inbox", sensor, 900.0, 1500.0)
    _, factory = _run(project)
    with factory() as session:
        rows = session.scalars(select(PressureCycleBin)).all()
    assert sorted({r.sensor_id for r in rows}) == sorted(SENSORS)
    for sensor in SENSORS:
        mine = [r for r in rows if r.sensor_id == sensor]
        # the test surge 300 e^(-t/20) cos(2 pi t/10) kPa: its largest swing runs from the
        # first crest (~298 kPa above the baseline) to the first trough (300 e^-0.25 = 234 below)
        assert mine[0].largest_range_kpa == pytest.approx(298.5 + 233.6, rel=0.03)
        top = max(mine, key=lambda r: r.range_to_kpa)
        assert top.range_from_kpa <= mine[0].largest_range_kpa <= top.range_to_kpa
        # a swing decaying by e^(-1/2) a period falls below the gate (8 noise deviations,
        # 8 kPa) after about 20 ln(75) / 10 = 8.6 periods
        assert mine[0].gate_kpa == pytest.approx(8.0, rel=0.15)
        assert 6.0 <= sum(r.cycles for r in mine) <= 11.0, sum(r.cycles for r in mine)
    summary, _ = _run(project)  # a second pass adds nothing
    assert _count(factory, PressureCycleBin) == len(rows)
